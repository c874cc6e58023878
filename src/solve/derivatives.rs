//! The Laplacian of the point-source magnification over the source plane, in closed form from
//! the images of one solve (the quadrupole term of a finite source).
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
//! // A point lens at u = 1: ΔA = 8/(u³ (u²+4)^1.5) + 24/(u (u²+4)^2.5) (Paczynski 1986,
//! // differentiated by hand).
//! let lens = LensSystem::single();
//! let mut solver = ImageSolver::new(&lens).unwrap();
//! let lap = derivatives::laplacian(&lens, solver.images(Complex64::new(1.0, 0.0)).unwrap());
//! let expected = 8.0 / 5f64.powf(1.5) + 24.0 / 5f64.powf(2.5);
//! assert!((lap - expected).abs() < 1e-12 * expected);
//! ```

use super::Image;
use crate::lens::LensSystem;
use num_complex::Complex64;

/// The Laplacian `ΔA = 4 ∂ζ ∂ζ̄ A` of the point-source magnification of a source whose images
/// are `images` (see the module documentation).
pub fn laplacian(lens: &LensSystem, images: &[Image]) -> f64 {
    images
        .iter()
        .map(|im| {
            let (mut f1, mut f2, mut f3) = (Complex64::ZERO, Complex64::ZERO, Complex64::ZERO);
            for l in lens.lenses() {
                let w = (im.position - l.position).inv();
                let w2 = w * w;
                f1 -= l.mass * w2;
                f2 += 2.0 * l.mass * w2 * w;
                f3 -= 6.0 * l.mass * w2 * w2;
            }
            let g1 = f1.conj();
            let d = 1.0 - f1.norm_sqr();
            let p = f2 * g1 * g1 + f1 * f2.conj();
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

    fn at(lens: &LensSystem, zeta: Complex64) -> f64 {
        let mut solver = ImageSolver::new(lens).unwrap();
        laplacian(lens, solver.images(zeta).unwrap())
    }

    /// A point lens: Paczynski's `A(u) = (u²+2)/(u sqrt(u²+4))` (Paczynski 1986) differentiated
    /// by hand: `ΔA = A'' + A'/u = 8/(u³ (u²+4)^1.5) + 24/(u (u²+4)^2.5)`.
    #[test]
    fn single_lens_laplacian_is_paczynski_s() {
        let lens = LensSystem::single();
        for (u, angle) in [(0.3, 0.0), (1.0, 1.0), (2.5, -2.0)] {
            let z = Complex64::from_polar(u, angle);
            let u2: f64 = u * u + 4.0;
            let expected = 8.0 / (u * u * u * u2.powf(1.5)) + 24.0 / (u * u2.powf(2.5));
            let lap = at(&lens, z);
            assert!(
                (lap - expected).abs() <= 1e-12 * expected,
                "u {u}: {lap} vs {expected}"
            );
        }
    }

    /// Binaries, away from their caustics: the closed form against the five-point difference
    /// of point-source magnifications (step 1e-4).
    #[test]
    fn binary_laplacian_agrees_with_differences() {
        for (s, q, zeta) in [
            (1.0, 1.0, Complex64::new(0.3, 0.4)),
            (1.35, 3e-3, Complex64::new(0.5, -0.2)),
            (0.75, 5e-3, Complex64::new(-0.1, 0.25)),
        ] {
            let lens = LensSystem::binary(s, q).unwrap();
            let mut solver = ImageSolver::new(&lens).unwrap();
            let mut a = |z: Complex64| solver.magnification(z).unwrap();
            let h = 1e-4;
            let i = Complex64::i();
            let ring = a(zeta + h) + a(zeta - h) + a(zeta + i * h) + a(zeta - i * h);
            let lap_differences = (ring - 4.0 * a(zeta)) / (h * h);
            let lap = at(&lens, zeta);
            assert!(
                (lap - lap_differences).abs() <= 1e-4 * lap.abs().max(1.0),
                "s {s} q {q} at {zeta}: {lap} vs {lap_differences}"
            );
        }
    }
}
