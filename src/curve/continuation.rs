//! Off-map continuation: the exact point-source magnification plus the small-source correction.
//!
//! Where the source leaves the map, the curve goes on with the hexadecapole approximation of
//! Gould 2008 (ApJ 681, 1593), in the form of Pejcha & Heyrovsky 2009 (ApJ 690, 1772) for any
//! circular profile. For a source of brightness moments `<r^2>`, `<r^4>` the mean of a smooth
//! `A` over the source is `A0 + (<r^2>/4) Laplacian(A) + (<r^4>/64) Laplacian^2(A) + ...`
//! (Taylor series averaged over angle). The two derivative terms come from 13 point-source
//! magnifications: with `A_{r,+}` the mean of `A` at the four points `w + r (±1, 0), (0, ±1)`
//! minus `A0`, and `A_{r,x}` the same at the four diagonal points,
//!
//! ```text
//! A2 rho^2 = (16 A_{rho/2,+} - A_{rho,+}) / 3          = (rho^2/4) Laplacian(A) + O(rho^6)
//! A4 rho^4 = (A_{rho,+} + A_{rho,x}) / 2 - A2 rho^2    = (rho^4/64) Laplacian^2(A) + O(rho^6)
//! A = A0 + A2 rho^2 (<r^2>/rho^2) + A4 rho^4 (<r^4>/rho^4)
//! ```
//!
//! which for the uniform disk (`<r^2> = rho^2/2`, `<r^4> = rho^4/3`) is Gould's
//! `A0 + A2 rho^2 / 2 + A4 rho^4 / 3`.
//!
//! # When it is trusted
//! The expansion diverges near a caustic (its radius of convergence is the distance to the
//! nearest caustic, Pejcha & Heyrovsky 2009). A point is accepted when (a) all 13 sample points
//! have the same number of images (no caustic between them), (b) the series converges (the
//! hexadecapole term at most a tenth of the quadrupole term) and (c) the reported error,
//! [`SAFETY`] times the last kept term `|A4 rho^4 <r^4>/rho^4|`, is at most `tol` times the
//! result. The factor is the contour shortcut's (`crate::contour`), for the same reason: a
//! caustic smaller than the stencil spacing can hide inside the source, and
//! tests/integration/curve.rs measures the error against contour integration.

use crate::error::Result;
use crate::lens::LensSystem;
use crate::solve::ImageSolver;
use crate::source::SourceProfile;
use num_complex::Complex64;

/// The error reported for the expansion is this many times its last kept term.
pub const SAFETY: f64 = 10.0;

/// Exact magnification of a point source, and its number of images.
///
/// Implemented for [`LensSystem`]: in closed form for a single lens (Paczynski 1986,
/// ApJ 304, 1); for more lenses through the point-source solver ([`ImageSolver`], which is
/// also an implementation, faster when kept: it is built once).
///
/// ```
/// use causeway::curve::PointMagnification;
/// let (a, images) = causeway::lens::LensSystem::single().point_magnification(1.0, 0.0).unwrap();
/// assert!((a - 3.0 / 5f64.sqrt()).abs() < 1e-15);
/// assert_eq!(images, 2);
/// ```
pub trait PointMagnification: Sync {
    /// Magnification and number of images of a point source at `(x, y)`.
    fn point_magnification(&self, x: f64, y: f64) -> Result<(f64, usize)>;
}

impl PointMagnification for LensSystem {
    fn point_magnification(&self, x: f64, y: f64) -> Result<(f64, usize)> {
        match self.lenses() {
            [one] => {
                let u = (x - one.position.re).hypot(y - one.position.im);
                Ok((crate::lens::paczynski(u), 2))
            }
            _ => ImageSolver::new(self)?.point_magnification(x, y),
        }
    }
}

/// Through the point-source solver; each call starts from a fresh copy of the solver (no warm
/// start), so results do not depend on the order or thread of the calls.
impl PointMagnification for ImageSolver {
    fn point_magnification(&self, x: f64, y: f64) -> Result<(f64, usize)> {
        let mut solver = self.clone();
        let images = solver.images(Complex64::new(x, y))?;
        Ok((images.iter().map(|i| i.magnification).sum(), images.len()))
    }
}

/// A magnification from the small-source expansion.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Expansion {
    /// The finite-source magnification (hexadecapole order).
    pub magnification: f64,
    /// The point-source magnification at the centre.
    pub point: f64,
    /// Error estimate: [`SAFETY`] times the size of the last kept term.
    pub error: f64,
    /// Whether all sample points had the same number of images.
    pub images_agree: bool,
    /// Whether the series converges: the hexadecapole term at most a tenth of the quadrupole.
    pub converging: bool,
}

impl Expansion {
    /// Whether the expansion is trusted to relative tolerance `tol`.
    pub fn accurate(&self, tol: f64) -> bool {
        self.images_agree
            && self.converging
            && self.magnification.is_finite()
            && self.error <= tol * self.magnification
    }
}

/// The hexadecapole small-source magnification at `(x, y)` (exact point source for `rho = 0`).
///
/// ```
/// use causeway::curve::small_source;
/// use causeway::{lens::LensSystem, source::SourceProfile};
/// // Far from a point lens the correction is tiny and trusted.
/// let e = small_source(&LensSystem::single(), &SourceProfile::uniform(0.01).unwrap(), 0.5, 0.0)
///     .unwrap();
/// assert!(e.accurate(1e-6));
/// assert!(e.magnification > e.point); // Laplacian of A > 0 away from the lens
/// ```
pub fn small_source(
    lens: &dyn PointMagnification,
    profile: &SourceProfile,
    x: f64,
    y: f64,
) -> Result<Expansion> {
    let (a0, n0) = lens.point_magnification(x, y)?;
    let rho = profile.rho;
    if rho == 0.0 {
        return Ok(Expansion {
            magnification: a0,
            point: a0,
            error: 0.0,
            images_agree: true,
            converging: true,
        });
    }
    let mut agree = true;
    let mut ring = |r: f64, diagonal: bool| -> Result<f64> {
        let mut sum = 0.0;
        for k in 0..4 {
            let phi = std::f64::consts::FRAC_PI_2 * (k as f64 + if diagonal { 0.5 } else { 0.0 });
            let (s, c) = phi.sin_cos();
            let (a, n) = lens.point_magnification(x + r * c, y + r * s)?;
            agree &= n == n0;
            sum += a;
        }
        Ok(sum / 4.0 - a0)
    };
    let half_plus = ring(0.5 * rho, false)?;
    let plus = ring(rho, false)?;
    let cross = ring(rho, true)?;
    let a2 = (16.0 * half_plus - plus) / 3.0;
    let a4 = 0.5 * (plus + cross) - a2;
    let (m2, m4) = profile.moments();
    let (t2, t4) = (a2 * m2, a4 * m4);
    Ok(Expansion {
        magnification: a0 + t2 + t4,
        point: a0,
        error: SAFETY * t4.abs(),
        images_agree: agree,
        converging: t4.abs() <= 0.1 * t2.abs(),
    })
}
