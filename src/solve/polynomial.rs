//! Complex polynomials of small fixed maximum degree, and the lens-equation polynomial.
//!
//! For N point lenses the images of a point source at zeta are among the roots of a complex
//! polynomial of degree N^2 + 1 (Witt 1990, A&A 236, 311). Write g(z) = sum_i m_i / (z - z_i) =
//! P(z)/Q(z) with Q = prod_i (z - z_i) and P = sum_i m_i prod_{k != i} (z - z_k). The conjugate of
//! the lens equation gives conj(z) = conj(zeta) + g(z); put that back into the lens equation:
//!
//! z - zeta = sum_j m_j / (conj(zeta) - conj(z_j) + P/Q) = sum_j m_j Q / D_j,
//! D_j = (conj(zeta) - conj(z_j)) Q + P,
//!
//! and clear the denominators:
//!
//! (z - zeta) prod_j D_j - Q sum_j m_j prod_{k != j} D_k = 0.
//!
//! Every coefficient is built by multiplying small polynomials whose coefficients are the lens
//! positions and masses themselves (no expansion of large symbolic expressions), in a frame
//! whose origin the caller chooses (the centre of mass by default).

use num_complex::Complex64;

/// Largest degree held: N^2 + 1 = 17 for N = 4 point lenses.
pub const MAX_DEGREE: usize = 17;

const ZERO: Complex64 = Complex64::new(0.0, 0.0);
const ONE: Complex64 = Complex64::new(1.0, 0.0);

/// A complex polynomial sum_k c[k] z^k of degree at most [`MAX_DEGREE`], stored inline (no
/// allocation).
///
/// ```
/// use causeway::solve::polynomial::Poly;
/// use num_complex::Complex64;
/// // (z - 1)(z + 1) = z^2 - 1
/// let a = Poly::linear_root(Complex64::new(1.0, 0.0));
/// let b = Poly::linear_root(Complex64::new(-1.0, 0.0));
/// let p = a.mul(&b);
/// assert_eq!(p.degree(), 2);
/// assert_eq!(p.eval(Complex64::new(3.0, 0.0)), Complex64::new(8.0, 0.0));
/// ```
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Poly {
    c: [Complex64; MAX_DEGREE + 1],
    degree: usize,
}

impl Poly {
    /// The constant polynomial `a`.
    pub fn constant(a: Complex64) -> Self {
        let mut c = [ZERO; MAX_DEGREE + 1];
        c[0] = a;
        Poly { c, degree: 0 }
    }

    /// z - r.
    pub fn linear_root(r: Complex64) -> Self {
        let mut p = Poly::constant(-r);
        p.c[1] = ONE;
        p.degree = 1;
        p
    }

    /// From coefficients, lowest power first. Panics above [`MAX_DEGREE`].
    pub fn from_coeffs(coeffs: &[Complex64]) -> Self {
        assert!(!coeffs.is_empty() && coeffs.len() <= MAX_DEGREE + 1);
        let mut c = [ZERO; MAX_DEGREE + 1];
        c[..coeffs.len()].copy_from_slice(coeffs);
        Poly {
            c,
            degree: coeffs.len() - 1,
        }
    }

    /// The formal degree (the leading coefficient may be zero after cancellation).
    pub fn degree(&self) -> usize {
        self.degree
    }

    /// Coefficients, lowest power first, `degree + 1` of them.
    pub fn coeffs(&self) -> &[Complex64] {
        &self.c[..=self.degree]
    }

    /// Product. Panics if the degree would exceed [`MAX_DEGREE`].
    pub fn mul(&self, o: &Poly) -> Poly {
        let degree = self.degree + o.degree;
        assert!(degree <= MAX_DEGREE, "polynomial degree {degree} too large");
        let mut c = [ZERO; MAX_DEGREE + 1];
        for (i, &a) in self.coeffs().iter().enumerate() {
            for (j, &b) in o.coeffs().iter().enumerate() {
                c[i + j] += a * b;
            }
        }
        Poly { c, degree }
    }

    /// Sum of `a * self` and `b * o`.
    pub fn combine(&self, a: Complex64, o: &Poly, b: Complex64) -> Poly {
        let degree = self.degree.max(o.degree);
        let mut c = [ZERO; MAX_DEGREE + 1];
        for (k, ck) in c.iter_mut().enumerate().take(degree + 1) {
            *ck = a * self.c[k] + b * o.c[k];
        }
        Poly { c, degree }
    }

    /// Value at z (Horner).
    pub fn eval(&self, z: Complex64) -> Complex64 {
        self.coeffs().iter().rev().fold(ZERO, |acc, &c| acc * z + c)
    }

    /// Drops leading coefficients that are exactly zero (keeps at least the constant).
    pub fn trim(&mut self) {
        while self.degree > 0 && self.c[self.degree] == ZERO {
            self.degree -= 1;
        }
    }
}

/// The lens-dependent parts of the lens-equation polynomial, in a frame shifted by `origin`:
/// Q(w) = prod (w - p_i), P(w) = sum m_i prod_{k != i} (w - p_k), with p_i = z_i - origin.
#[derive(Debug, Clone, Copy)]
pub struct LensPolynomials {
    /// Number of lenses (1 to 4).
    pub n: usize,
    /// Lens positions in the shifted frame.
    pub positions: [Complex64; 4],
    /// Masses (sum 1).
    pub masses: [f64; 4],
    /// Q(w) = prod_i (w - p_i).
    pub q: Poly,
    /// P(w) = sum_i m_i prod_{k != i} (w - p_k).
    pub p: Poly,
}

impl LensPolynomials {
    /// Builds Q and P for at most four lenses given in the shifted frame.
    pub fn new(positions: &[Complex64], masses: &[f64]) -> Self {
        let n = positions.len();
        assert!((1..=4).contains(&n) && masses.len() == n);
        let mut pos = [ZERO; 4];
        let mut mass = [0.0; 4];
        pos[..n].copy_from_slice(positions);
        mass[..n].copy_from_slice(masses);
        let mut q = Poly::constant(ONE);
        for &p in positions {
            q = q.mul(&Poly::linear_root(p));
        }
        let mut p = Poly::constant(ZERO);
        for i in 0..n {
            let mut t = Poly::constant(Complex64::new(masses[i], 0.0));
            for (k, &pk) in positions.iter().enumerate() {
                if k != i {
                    t = t.mul(&Poly::linear_root(pk));
                }
            }
            p = p.combine(ONE, &t, ONE);
        }
        LensPolynomials {
            n,
            positions: pos,
            masses: mass,
            q,
            p,
        }
    }

    /// The degree-(N^2+1) polynomial whose roots include every image of a point source at `w`
    /// (in the shifted frame), by the general product formula of the module docs.
    pub fn image_polynomial(&self, w: Complex64) -> Poly {
        let n = self.n;
        let mut d = [Poly::constant(ZERO); 4];
        for (j, dj) in d.iter_mut().enumerate().take(n) {
            let wj = (w - self.positions[j]).conj();
            *dj = self.q.combine(wj, &self.p, ONE);
        }
        // prod_j D_j and sum_j m_j prod_{k != j} D_k from prefix and suffix products.
        let mut prefix = [Poly::constant(ONE); 5];
        for j in 0..n {
            prefix[j + 1] = prefix[j].mul(&d[j]);
        }
        let mut suffix = [Poly::constant(ONE); 5];
        for j in (0..n).rev() {
            suffix[j] = suffix[j + 1].mul(&d[j]);
        }
        let mut sum = Poly::constant(ZERO);
        for j in 0..n {
            let t = prefix[j].mul(&suffix[j + 1]);
            sum = sum.combine(ONE, &t, Complex64::new(self.masses[j], 0.0));
        }
        let lhs = Poly::linear_root(w).mul(&prefix[n]);
        let rhs = self.q.mul(&sum);
        lhs.combine(ONE, &rhs, -ONE)
    }

    /// The same polynomial for a binary, written out coefficient by coefficient (the specialised
    /// degree-5 path used in the hot loop). Requires `n == 2`.
    pub fn binary_polynomial(&self, w: Complex64) -> Poly {
        debug_assert_eq!(self.n, 2);
        let (p1, p2) = (self.positions[0], self.positions[1]);
        let (m1, m2) = (self.masses[0], self.masses[1]);
        let (q0, q1) = (self.q.c[0], self.q.c[1]);
        let p0 = self.p.c[0];
        let p1c = self.p.c[1];
        let w1 = (w - p1).conj();
        let w2 = (w - p2).conj();
        // D_j = w_j Q + P = w_j z^2 + (w_j q1 + p1c) z + (w_j q0 + p0)
        let (a0, a1, a2) = (w1 * q0 + p0, w1 * q1 + p1c, w1);
        let (b0, b1, b2) = (w2 * q0 + p0, w2 * q1 + p1c, w2);
        let e0 = a0 * b0;
        let e1 = a0 * b1 + a1 * b0;
        let e2 = a0 * b2 + a1 * b1 + a2 * b0;
        let e3 = a1 * b2 + a2 * b1;
        let e4 = a2 * b2;
        let s0 = a0 * m2 + b0 * m1;
        let s1 = a1 * m2 + b1 * m1;
        let s2 = a2 * m2 + b2 * m1;
        let g0 = q0 * s0;
        let g1 = q0 * s1 + q1 * s0;
        let g2 = q0 * s2 + q1 * s1 + s0;
        let g3 = q1 * s2 + s1;
        let g4 = s2;
        let mut c = [ZERO; MAX_DEGREE + 1];
        c[0] = -w * e0 - g0;
        c[1] = e0 - w * e1 - g1;
        c[2] = e1 - w * e2 - g2;
        c[3] = e2 - w * e3 - g3;
        c[4] = e3 - w * e4 - g4;
        c[5] = e4;
        Poly { c, degree: 5 }
    }
}

/// The two lens-dependent parts of the critical-curve polynomial (Witt 1990): the Jacobian
/// vanishes where sum_i m_i/(z - z_i)^2 = exp(i phi), that is where
/// B(z) - exp(i phi) A(z) = 0 with A = prod_i (z - z_i)^2 (degree 2N) and
/// B = sum_i m_i prod_{k != i} (z - z_k)^2 (degree 2N - 2). Positions in the caller's frame;
/// at most 8 lenses.
pub fn critical_parts(positions: &[Complex64], masses: &[f64]) -> (Poly, Poly) {
    let n = positions.len();
    assert!((1..=8).contains(&n) && masses.len() == n);
    let sq = |p: Complex64| Poly::linear_root(p).mul(&Poly::linear_root(p));
    let mut a = Poly::constant(ONE);
    for &p in positions {
        a = a.mul(&sq(p));
    }
    let mut b = Poly::constant(ZERO);
    for i in 0..n {
        let mut t = Poly::constant(Complex64::new(masses[i], 0.0));
        for (k, &pk) in positions.iter().enumerate() {
            if k != i {
                t = t.mul(&sq(pk));
            }
        }
        b = b.combine(ONE, &t, ONE);
    }
    (a, b)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn c(re: f64, im: f64) -> Complex64 {
        Complex64::new(re, im)
    }

    /// The lens equation itself: zeta(z) = z - sum m_i / conj(z - z_i).
    fn source(pos: &[Complex64], m: &[f64], z: Complex64) -> Complex64 {
        z - pos
            .iter()
            .zip(m)
            .map(|(&p, &mi)| mi / (z - p).conj())
            .sum::<Complex64>()
    }

    #[test]
    fn binary_path_equals_general_path() {
        let lp = LensPolynomials::new(&[c(-0.3, 0.0), c(0.9, 0.1)], &[0.75, 0.25]);
        for w in [c(0.1, 0.2), c(-1.5, 0.7), c(0.0, 0.0)] {
            let a = lp.image_polynomial(w);
            let b = lp.binary_polynomial(w);
            assert_eq!(a.degree(), 5);
            for (x, y) in a.coeffs().iter().zip(b.coeffs()) {
                assert!((x - y).norm() < 1e-14, "{x} vs {y}");
            }
        }
    }

    #[test]
    fn images_are_roots() {
        // Any image-plane point z is an image of zeta(z); the polynomial must vanish there.
        let pos = [c(-0.5, 0.1), c(0.4, -0.2), c(0.1, 0.6)];
        let m = [0.5, 0.3, 0.2];
        let lp = LensPolynomials::new(&pos, &m);
        for z in [c(0.3, 0.3), c(-1.2, 0.5), c(2.0, -1.0)] {
            let w = source(&pos, &m, z);
            let p = lp.image_polynomial(w);
            assert_eq!(p.degree(), 10);
            let scale: f64 = p
                .coeffs()
                .iter()
                .enumerate()
                .map(|(k, ck)| ck.norm() * z.norm().powi(k as i32))
                .sum();
            assert!(p.eval(z).norm() < 1e-13 * scale);
        }
    }

    #[test]
    fn critical_polynomial_vanishes_on_critical_points() {
        let pos = [c(-0.5, 0.0), c(0.5, 0.0)];
        let m = [0.5, 0.5];
        let (a, b) = critical_parts(&pos, &m);
        // z = i/sqrt(2)*... : pick z, set exp(i phi) = sum m/(z-z_i)^2 (need not be unit here:
        // the identity B - h A = 0 holds for h = that sum).
        let z = c(0.2, 0.7);
        let h: Complex64 = pos
            .iter()
            .zip(&m)
            .map(|(&p, &mi)| mi / ((z - p) * (z - p)))
            .sum();
        let poly = b.combine(ONE, &a, -h);
        assert!(poly.eval(z).norm() < 1e-14);
    }
}
