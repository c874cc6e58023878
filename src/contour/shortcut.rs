//! The small-source shortcut: point source plus the quadrupole and hexadecapole terms, from
//! point-source magnifications on a 13-point stencil (Gould 2008; Pejcha & Heyrovsky 2009).
//!
//! Averaged over a circle of radius r, a smooth magnification field is
//! `A0 + (r^2/4) ΔA + (r^4/64) Δ²A + ...`. With the means of A over four points at distance
//! `rho` on the axes (`A_rho+`), four on the diagonals (`A_rhox`) and four at `rho/2` on the axes
//! (`A_half+`), the fourth harmonic cancels between the two at `rho` and
//! `A2 = (16 A_half+ - A_rho+)/3 - 5 A0` (the `rho^2 ΔA / 4` term) and
//! `A4 = (A_rho+ + A_rhox)/2 - A0 - A2` (the `rho^4 Δ²A / 64` term). A source profile with
//! brightness-weighted moments `<r^2> = m2 rho^2`, `<r^4> = m4 rho^4` then has
//! `A = A0 + m2 A2 + m4 A4` (`m2 = 1/2`, `m4 = 1/3` for the uniform disk).
//!
//! **Rule.** The shortcut is taken when all 13 stencil points have as many images as the centre
//! (no fold of a caustic crosses the stencil), the hexadecapole term is at most a tenth of the
//! quadrupole one or below the tolerance (the series is converging), and ten times its size,
//! `10 m4 |A4|`, reported as the error, is at most `tol` times the magnification. For a single lens the disk
//! must also stay three radii clear of the lens (its point caustic). A caustic smaller than the
//! stencil spacing lying wholly inside the disk can escape the image-count test; the size test
//! then has to catch it.
//!
//! The quadrupole rule's term ([`quadrupole`]) comes in closed form from the centre's images
//! ([`laplacian`]); when it serves is stated in [the quadrupole rule](super#the-quadrupole-rule).

use crate::error::Result;
use crate::lens::LensSystem;
use crate::solve::{Image, ImageSolver};
use num_complex::Complex64;

/// The shortcut is considered only for a disk whose centre is at least this many radii from the
/// traced caustics: a seeded sweep of 5,000 disks near the caustics of seven binaries
/// (`examples/contour_bounds.rs`) found the 13-point image count blind to caustics and cusp tips
/// that slip between the stencil points (errors up to 1e5 times the estimate), and the
/// hexadecapole estimate short of the truth while the series still feels the caustic.
pub(crate) const CLEARANCE: f64 = 2.0;

/// The error reported for the shortcut, and tested against the tolerance, is this many times the
/// size of the hexadecapole term: scans of binaries next to planetary caustics (rho = 0.05)
/// found the true error up to about five times that size.
const SAFETY: f64 = 10.0;

/// Estimate `(magnification, error)` by the shortcut, or None when the rule says no.
pub(crate) fn small_source(
    solver: &mut ImageSolver,
    lens: &LensSystem,
    center: Complex64,
    rho: f64,
    moments: (f64, f64),
    tol: f64,
) -> Result<Option<(f64, f64)>> {
    if lens.len() == 1 && (center - lens.lenses()[0].position).norm() < 3.0 * rho {
        return Ok(None);
    }
    // One solve of the centre gives its image count and magnification.
    let images = solver.images(center)?;
    let count = images.len();
    let a0 = images.iter().map(|i| i.magnification).sum::<f64>();
    let mut ring = |radius: f64, phase: f64| ring_mean(solver, center, radius, phase, count);
    let Some(half) = ring(0.5 * rho, 0.0)? else {
        return Ok(None);
    };
    let Some(plus) = ring(rho, 0.0)? else {
        return Ok(None);
    };
    let Some(cross) = ring(rho, std::f64::consts::FRAC_PI_4)? else {
        return Ok(None);
    };
    let a2 = (16.0 * half - plus) / 3.0 - 5.0 * a0;
    let a4 = 0.5 * (plus + cross) - a0 - a2;
    let (m2, m4) = moments;
    let a = a0 + m2 * a2 + m4 * a4;
    let error = SAFETY * m4 * a4.abs();
    let converging = a4.abs() <= 0.1 * a2.abs() || error <= tol * a;
    if converging && error <= tol * a {
        Ok(Some((a, error)))
    } else {
        Ok(None)
    }
}

/// The quadrupole term `A2 = rho^2 ΔA / 4` of a source whose centre has `images`, in closed
/// form from those images alone ([`laplacian`]): no further solve.
pub(crate) fn quadrupole(lens: &LensSystem, images: &[Image], rho: f64) -> f64 {
    0.25 * rho * rho * laplacian(lens, images)
}

/// The Laplacian over the source plane, `ΔA = 4 ∂ζ ∂ζ̄ A`, of the point-source magnification
/// `A = Σ 1/|D|` of a source whose images are `images` (the quadrupole term from one
/// point-source solve, as in Cassan 2017, MNRAS 468, 3993; derived afresh here).
///
/// With `f(z) = Σ m_i / (z - z_i)` the lens equation is `ζ = z - conj(f(z))` and
/// `D = 1 - |f'|²`. Its local inverse has `∂z/∂ζ = 1/D` and `∂z/∂ζ̄ = conj(f')/D`, whence
/// `∂ζ̄ D = -P/D` with `P = f'' conj(f')² + f' conj(f'')`, and `∂ζ ∂ζ̄ (1/D)` is
/// `[2 Re(conj(f')² f''') + |f''|² (1 + 2|f'|²)] / D⁴ + 3 |P|² / D⁵`; each image adds that
/// times `4 sign(D)`.
pub(crate) fn laplacian(lens: &LensSystem, images: &[Image]) -> f64 {
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
            let (g1, g2) = (f1.conj(), f2.conj());
            let d = 1.0 - f1.norm_sqr();
            let p = f2 * g1 * g1 + f1 * g2;
            let d4 = (d * d) * (d * d);
            let inner = 2.0 * (g1 * g1 * f3).re + f2.norm_sqr() * (1.0 + 2.0 * f1.norm_sqr());
            4.0 * d.signum() * (inner / d4 + 3.0 * p.norm_sqr() / (d4 * d))
        })
        .sum()
}

/// The mean point-source magnification of four points at `radius` from `center`, the first at
/// angle `phase`, a quarter turn apart; None when one of them has other than `count` images.
fn ring_mean(
    solver: &mut ImageSolver,
    center: Complex64,
    radius: f64,
    phase: f64,
    count: usize,
) -> Result<Option<f64>> {
    let mut sum = 0.0;
    for k in 0..4 {
        let z =
            center + Complex64::from_polar(radius, phase + k as f64 * std::f64::consts::FRAC_PI_2);
        let images = solver.images(z)?;
        if images.len() != count {
            return Ok(None);
        }
        sum += images.iter().map(|i| i.magnification).sum::<f64>();
    }
    Ok(Some(0.25 * sum))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn laplacian_at(lens: &LensSystem, zeta: Complex64) -> f64 {
        let mut solver = ImageSolver::new(lens).unwrap();
        laplacian(lens, solver.images(zeta).unwrap())
    }

    /// A point lens: `ΔA = A'' + A'/u` of Paczynski's `A(u) = (u²+2)/(u sqrt(u²+4))`
    /// (Paczynski 1986), differentiated by hand: `8/(u³ (u²+4)^1.5) + 24/(u (u²+4)^2.5)`.
    #[test]
    fn single_lens_laplacian_is_paczynski_s() {
        let lens = LensSystem::single();
        for (u, angle) in [(0.3, 0.0), (1.0, 1.0), (2.5, -2.0)] {
            let z = Complex64::from_polar(u, angle);
            let u2: f64 = u * u + 4.0;
            let expected = 8.0 / (u * u * u * u2.powf(1.5)) + 24.0 / (u * u2.powf(2.5));
            let got = laplacian_at(&lens, z);
            assert!(
                (got - expected).abs() <= 1e-12 * expected,
                "u {u}: {got} vs {expected}"
            );
        }
    }

    /// A binary, away from its caustics: the closed form against the five-point difference
    /// of point-source magnifications (step 1e-3 of the distance to the lenses' scale).
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
            let h = 1e-3;
            let ring: f64 = (0..4)
                .map(|k| a(zeta + Complex64::from_polar(h, k as f64 * std::f64::consts::FRAC_PI_2)))
                .sum();
            let differences = (ring - 4.0 * a(zeta)) / (h * h);
            let closed = laplacian_at(&lens, zeta);
            assert!(
                (closed - differences).abs() <= 1e-4 * closed.abs().max(1.0),
                "s {s} q {q} at {zeta}: {closed} vs {differences}"
            );
        }
    }
}
