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
//! ([`crate::solve::derivatives::laplacian`]); when it serves is stated in [the quadrupole rule](super#the-quadrupole-rule).

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
/// form from those images alone ([`crate::solve::derivatives::laplacian`]): no further solve.
pub(crate) fn quadrupole(lens: &LensSystem, images: &[Image], rho: f64) -> f64 {
    0.25 * rho * rho * crate::solve::derivatives::laplacian(lens, images)
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
