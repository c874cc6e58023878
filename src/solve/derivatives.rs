//! Derivatives of the point-source magnification over the source plane, in closed form from
//! the images of one solve: its gradient (for Hermite interpolation along a line) and its
//! Laplacian (the quadrupole term of a finite source).
//!
//! With `f(z) = Σ m_i / (z - z_i)` the lens equation is `ζ = z - conj(f(z))` and the Jacobian's
//! determinant at an image is `D = 1 - |f'|²`. The local inverse of the lens map has
//! `∂z/∂ζ = 1/D` and `∂z/∂ζ̄ = conj(f')/D`, whence `∂ζ̄ D = -P/D` with
//! `P = f'' conj(f')² + f' conj(f'')`. An image's magnification `1/|D|` then has
//! `∂ζ̄ (1/D) = P / D³` and
//! `∂ζ ∂ζ̄ (1/D) = [2 Re(conj(f')² f''') + |f''|² (1 + 2|f'|²)] / D⁴ + 3 |P|² / D⁵`,
//! each times `sign(D)`. (The quadrupole term from one point-source solve is also in
//! Cassan 2017, MNRAS 468, 3993; derived afresh here.)
//!
//! ```
//! use causeway::lens::LensSystem;
//! use causeway::solve::{derivatives, ImageSolver};
//! use num_complex::Complex64;
//! // A point lens at u = 1 on the x axis: dA/du = -8 / (u² (u² + 4)^1.5) (Paczynski 1986,
//! // differentiated by hand), pointing along x.
//! let lens = LensSystem::single();
//! let mut solver = ImageSolver::new(&lens).unwrap();
//! let g = derivatives::gradient(&lens, solver.images(Complex64::new(1.0, 0.0)).unwrap());
//! assert!((g.re + 8.0 / 5f64.powf(1.5)).abs() < 1e-12 && g.im.abs() < 1e-12);
//! ```

use super::Image;
use crate::lens::LensSystem;
use num_complex::Complex64;

/// What one image contributes to the derivatives (see the module documentation).
struct ImageTerms {
    /// `f'`, `f''` and `f'''` of `f(z) = Σ m_i / (z - z_i)` at the image.
    f: [Complex64; 3],
    /// `D = 1 - |f'|²`.
    d: f64,
    /// `P = f'' conj(f')² + f' conj(f'')`.
    p: Complex64,
}

impl ImageTerms {
    fn at(lens: &LensSystem, z: Complex64) -> ImageTerms {
        let mut f = [Complex64::ZERO; 3];
        for l in lens.lenses() {
            let w = (z - l.position).inv();
            let w2 = w * w;
            f[0] -= l.mass * w2;
            f[1] += 2.0 * l.mass * w2 * w;
            f[2] -= 6.0 * l.mass * w2 * w2;
        }
        let g1 = f[0].conj();
        ImageTerms {
            d: 1.0 - f[0].norm_sqr(),
            p: f[1] * g1 * g1 + f[0] * f[1].conj(),
            f,
        }
    }
}

/// The gradient `(∂A/∂x, ∂A/∂y)`, as `∂A/∂x + i ∂A/∂y`, of the point-source magnification of a
/// source whose images are `images` (see the module documentation): `2 Σ sign(D) P / D³`.
pub fn gradient(lens: &LensSystem, images: &[Image]) -> Complex64 {
    images
        .iter()
        .map(|im| {
            let ImageTerms { d, p, .. } = ImageTerms::at(lens, im.position);
            p * (2.0 * d.signum() / (d * d * d))
        })
        .sum()
}

/// The Laplacian `ΔA = 4 ∂ζ ∂ζ̄ A` of the point-source magnification of a source whose images
/// are `images` (see the module documentation).
pub fn laplacian(lens: &LensSystem, images: &[Image]) -> f64 {
    images
        .iter()
        .map(|im| {
            let ImageTerms {
                f: [f1, f2, f3],
                d,
                p,
            } = ImageTerms::at(lens, im.position);
            let g1 = f1.conj();
            let d4 = (d * d) * (d * d);
            let inner = 2.0 * (g1 * g1 * f3).re + f2.norm_sqr() * (1.0 + 2.0 * f1.norm_sqr());
            4.0 * d.signum() * (inner / d4 + 3.0 * p.norm_sqr() / (d4 * d))
        })
        .sum()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::solve::ImageSolver;

    fn at(lens: &LensSystem, zeta: Complex64) -> (Complex64, f64) {
        let mut solver = ImageSolver::new(lens).unwrap();
        let images = solver.images(zeta).unwrap();
        (gradient(lens, images), laplacian(lens, images))
    }

    /// A point lens: Paczynski's `A(u) = (u²+2)/(u sqrt(u²+4))` (Paczynski 1986) differentiated
    /// by hand: `A' = -8/(u² (u²+4)^1.5)` along the radius and
    /// `ΔA = A'' + A'/u = 8/(u³ (u²+4)^1.5) + 24/(u (u²+4)^2.5)`.
    #[test]
    fn single_lens_derivatives_are_paczynski_s() {
        let lens = LensSystem::single();
        for (u, angle) in [(0.3, 0.0), (1.0, 1.0), (2.5, -2.0)] {
            let z = Complex64::from_polar(u, angle);
            let u2: f64 = u * u + 4.0;
            let slope = -8.0 / (u * u * u2.powf(1.5));
            let expected = 8.0 / (u * u * u * u2.powf(1.5)) + 24.0 / (u * u2.powf(2.5));
            let (g, lap) = at(&lens, z);
            let radial = Complex64::from_polar(slope, angle);
            assert!(
                (g - radial).norm() <= 1e-12 * slope.abs(),
                "u {u}: {g} vs {radial}"
            );
            assert!(
                (lap - expected).abs() <= 1e-12 * expected,
                "u {u}: {lap} vs {expected}"
            );
        }
    }

    /// Binaries, away from their caustics: the closed forms against central differences of
    /// point-source magnifications (step 1e-4).
    #[test]
    fn binary_derivatives_agree_with_differences() {
        for (s, q, zeta) in [
            (1.0, 1.0, Complex64::new(0.3, 0.4)),
            (1.35, 3e-3, Complex64::new(0.5, -0.2)),
            (0.75, 5e-3, Complex64::new(-0.1, 0.25)),
        ] {
            let lens = LensSystem::binary(s, q).unwrap();
            let mut solver = ImageSolver::new(&lens).unwrap();
            let mut a = |z: Complex64| solver.magnification(z).unwrap();
            let h = 1e-4;
            let (px, mx) = (a(zeta + h), a(zeta - h));
            let i = Complex64::i();
            let (py, my) = (a(zeta + i * h), a(zeta - i * h));
            let centre = a(zeta);
            let differences = Complex64::new(px - mx, py - my) / (2.0 * h);
            let lap_differences = (px + mx + py + my - 4.0 * centre) / (h * h);
            let (g, lap) = at(&lens, zeta);
            assert!(
                (g - differences).norm() <= 1e-5 * g.norm().max(1.0),
                "s {s} q {q} at {zeta}: {g} vs {differences}"
            );
            assert!(
                (lap - lap_differences).abs() <= 1e-4 * lap.abs().max(1.0),
                "s {s} q {q} at {zeta}: {lap} vs {lap_differences}"
            );
        }
    }
}
