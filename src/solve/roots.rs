//! Simultaneous polynomial root finding: the Aberth-Ehrlich iteration.
//!
//! All roots are refined together; each correction is Newton's step damped by the repulsion of
//! the other approximations (Aberth 1973; Ehrlich 1967; Bini 1996 for the stopping rule used
//! here). Updates are applied at once (Gauss-Seidel style), which converges faster than the
//! Jacobi form. Convergence is cubic for simple roots; a root stops moving once the polynomial's
//! value there is below the rounding-error bound of its evaluation or its correction is below
//! machine precision. No allocation: the caller owns the root array, which also makes warm
//! starts (the roots of a nearby polynomial as initial guesses) free.

use num_complex::Complex64;

/// Most iterations before giving up.
pub const MAX_ITERATIONS: usize = 200;

/// Value, derivative and a bound on the rounding error of Horner's evaluation at z; `abs` holds
/// the moduli of the coefficients.
#[inline]
fn eval_with_bound(c: &[Complex64], abs: &[f64], z: Complex64) -> (Complex64, Complex64, f64) {
    let n = c.len() - 1;
    let az = z.norm_sqr().sqrt();
    let mut p = c[n];
    let mut dp = Complex64::new(0.0, 0.0);
    let mut bound = abs[n];
    for k in (0..n).rev() {
        dp = dp * z + p;
        p = p * z + c[k];
        bound = bound * az + abs[k];
    }
    (p, dp, bound)
}

/// Refines `roots` (one initial guess per root, `c.len() - 1` of them, pairwise distinct) to the
/// roots of sum_k c[k] z^k; the leading coefficient must be non-zero. Returns the number of
/// sweeps used, or `None` when [`MAX_ITERATIONS`] sweeps did not converge (the array then holds
/// the latest approximations).
///
/// ```
/// use causeway::solve::roots::{aberth, circle_guesses};
/// use num_complex::Complex64;
/// // z^3 - 1
/// let c = [Complex64::new(-1.0, 0.0), 0.0.into(), 0.0.into(), 1.0.into()];
/// let mut r = [Complex64::new(0.0, 0.0); 3];
/// circle_guesses(&c, &mut r);
/// aberth(&c, &mut r).unwrap();
/// for z in r {
///     assert!((z * z * z - 1.0).norm() < 1e-14);
/// }
/// ```
pub fn aberth(c: &[Complex64], roots: &mut [Complex64]) -> Option<usize> {
    aberth_to(c, roots, f64::EPSILON)
}

/// As [`aberth`], but a root also stops once its last correction was below `rel` times its
/// modulus. Convergence being cubic, a correction of 1e-9 leaves an error near 1e-27 in the
/// asymptotic regime, so a caller that polishes afterwards (as the image solver does, on the
/// lens equation) can stop there and save a sweep.
pub fn aberth_to(c: &[Complex64], roots: &mut [Complex64], rel: f64) -> Option<usize> {
    let n = c.len() - 1;
    debug_assert_eq!(roots.len(), n);
    debug_assert!(c[n] != Complex64::new(0.0, 0.0));
    if n == 0 {
        return Some(0);
    }
    if n == 1 {
        roots[0] = -c[0] / c[1];
        return Some(0);
    }
    let mut done = [false; 32];
    let mut abs = [0.0; 32];
    for (a, ck) in abs.iter_mut().zip(c) {
        *a = ck.norm_sqr().sqrt();
    }
    let abs = &abs[..=n];
    let eps = f64::EPSILON;
    let one = Complex64::new(1.0, 0.0);
    for iter in 1..=MAX_ITERATIONS {
        let mut all_done = true;
        for i in 0..n {
            if done[i] {
                continue;
            }
            let z = roots[i];
            let (p, dp, bound) = eval_with_bound(c, abs, z);
            let limit = 4.0 * eps * bound;
            if p.norm_sqr() <= limit * limit {
                done[i] = true;
                continue;
            }
            all_done = false;
            let mut s = Complex64::new(0.0, 0.0);
            for (j, &r) in roots.iter().enumerate() {
                if j != i {
                    s += inv(z - r);
                }
            }
            let ratio = p * inv(dp);
            let mut w = ratio * inv(one - ratio * s);
            if !(w.re.is_finite() && w.im.is_finite()) {
                // A zero derivative, or a guess on top of another: nudge it.
                w = Complex64::new(1e-3 * (1.0 + z.norm()), 1e-3 * (i as f64 + 1.0));
            }
            roots[i] = z - w;
            if w.norm_sqr() <= rel * rel * roots[i].norm_sqr() {
                done[i] = true;
            }
        }
        if all_done {
            return Some(iter);
        }
    }
    None
}

/// 1/z without the overflow guards of a general complex division.
#[inline]
fn inv(z: Complex64) -> Complex64 {
    let d = 1.0 / z.norm_sqr();
    Complex64::new(z.re * d, -z.im * d)
}

/// Initial guesses on a circle around the centroid of the roots, with radius the geometric mean
/// distance |p(centroid)/c_n|^(1/n), rotated off the axes so that no guess sits on a symmetry
/// line of a real-symmetric problem.
pub fn circle_guesses(c: &[Complex64], roots: &mut [Complex64]) {
    let n = c.len() - 1;
    if n == 0 {
        return;
    }
    let centroid = -c[n - 1] / (c[n] * n as f64);
    // Coefficients of p(z + centroid): only the constant term is needed for the radius.
    let p0 = c
        .iter()
        .rev()
        .fold(Complex64::new(0.0, 0.0), |acc, &ck| acc * centroid + ck);
    let mut radius = (p0 / c[n]).norm().powf(1.0 / n as f64);
    if !(radius.is_finite() && radius > 0.0) {
        radius = 1.0;
    }
    for (k, r) in roots.iter_mut().enumerate() {
        let angle = std::f64::consts::TAU * k as f64 / n as f64 + 0.4;
        *r = centroid + Complex64::from_polar(radius, angle);
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn wilkinson_like_clustered_roots() {
        // Roots 1, 1 + 1e-4, -2, 3i, -1e-6: built from the factors, then found again.
        let want = [
            Complex64::new(1.0, 0.0),
            Complex64::new(1.0 + 1e-4, 0.0),
            Complex64::new(-2.0, 0.0),
            Complex64::new(0.0, 3.0),
            Complex64::new(-1e-6, 0.0),
        ];
        let mut c = vec![Complex64::new(1.0, 0.0)];
        for &r in &want {
            let mut next = vec![Complex64::new(0.0, 0.0); c.len() + 1];
            for (k, &ck) in c.iter().enumerate() {
                next[k + 1] += ck;
                next[k] -= ck * r;
            }
            c = next;
        }
        let mut roots = [Complex64::new(0.0, 0.0); 5];
        circle_guesses(&c, &mut roots);
        aberth(&c, &mut roots).unwrap();
        for w in want {
            let best = roots
                .iter()
                .map(|r| (r - w).norm())
                .fold(f64::MAX, f64::min);
            assert!(best < 1e-8 * (1.0 + w.norm()), "{w}: {best}");
        }
    }
}
