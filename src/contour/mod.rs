//! Finite-source magnification by contour integration of image boundaries: the independent,
//! exact-to-tolerance check of the maps.
//!
//! For a uniform disk, the boundary of the source is sampled, the images of each sample are
//! solved ([`crate::solve::ImageSolver`]), linked into closed image contours (pairs of images
//! that appear or vanish at critical curves are joined across them), and the enclosed area is
//! integrated by Green's theorem with a Hermite correction of each piece; the error of each
//! piece is estimated and the sampling refined where it is largest until the total meets the
//! tolerance (Gould & Gaucherel 1997; Dominik 1998, 2007; Bozza 2010). Limb-darkened sources are
//! sums of uniform disks over concentric annuli, refined to the same tolerance. Far from
//! caustics a 13-point small-source test (Gould 2008; Pejcha & Heyrovsky 2009) can stand in for
//! the full calculation; its rule is stated in [`shortcut`](self#the-small-source-shortcut).
//! Farther out the point source with its quadrupole term alone serves
//! ([the quadrupole rule](self#the-quadrupole-rule)), and farther still the point source alone
//! ([far from the caustics](self#far-from-the-caustics)).
//!
//! - `segment`: area and error of one piece of a contour;
//! - `boundary`: boundary samples, their images, and linking;
//! - `crossings`: the caustics traced once per lens, and where a boundary crosses them;
//! - `refine`: the adaptive sampling of one uniform disk;
//! - `annuli`: limb darkening;
//! - `shortcut`: the small-source shortcut and the quadrupole rule's closed-form term.
//!
//! # Tolerance
//!
//! `tol` is a relative error target on the magnification: the estimate stops when the summed
//! error estimates are at most `tol` times the result. [`DEFAULT_TOLERANCE`] is 1e-4.
//!
//! # The small-source shortcut
//!
//! The point-source magnification with its quadrupole and hexadecapole corrections is taken
//! instead of contours when all 13 stencil points (the centre, four on the axes at `rho/2` and at
//! `rho`, four on the diagonals at `rho`) have as many images as the centre, the hexadecapole
//! term is at most a tenth of the quadrupole term (or below the tolerance), and ten times its
//! size — the reported error — is at most `tol` times the magnification; for a single lens the disk must also
//! stay three radii clear of the lens, and for any lens the disk's centre must be at least
//! two radii from the traced caustics (a caustic, or the tip of a
//! cusp, can slip between the stencil points).
//!
//! # Far from the caustics
//!
//! A source whose centre is at distance `d` from the nearest caustic (of the traced polyline;
//! from the lens for a single lens) takes the point-source magnification alone when
//! `FAR_SAFETY (rho / d)^2 <= tol`, and reports the error `FAR_SAFETY (rho / d)^2 A`. To
//! leading order the finite-source correction is `(rho^2 / 8) ∇²A` for a uniform disk: near a
//! fold (`A ~ d^-1/2`) that is `(3/32) (rho/d)^2 A`, near a cusp or a point caustic (`A ~ 1/d`)
//! `(1/8) (rho/d)^2 A`; a scan of planetary, resonant and stellar binaries (rho 1e-3 to 0.05,
//! tolerances 1e-2 to 1e-4, checked against contours at 1e-8) found it up to twice
//! `(rho/d)^2 A` beside a planetary caustic, hence [`FAR_SAFETY`] = 10. One image solve instead
//! of the shortcut's thirteen: most points of a long light curve are there. Checked in
//! `tests/integration/contour.rs`.
//!
//! # The quadrupole rule
//!
//! Nearer, a source whose centre is at distance `d >= QUADRUPOLE_CLEARANCE rho` (5 radii) from
//! the caustics (the nearer of the traced caustic and the fold its images see, as in the far
//! rule) with `QUADRUPOLE_SAFETY (rho / d)^4 <= tol` takes the point source plus its quadrupole
//! term alone, `A0 + m2 A2` (`m2 = <r^2>/rho^2` of the profile, 1/2 for the uniform disk, and
//! `A2 = rho^2 ΔA / 4`), from the one solve of the centre: `ΔA` comes in closed form from the
//! centre's images and the lens equation's derivatives there (the derivation is in
//! [`crate::solve::derivatives`]). What is left out, the hexadecapole term, is `rho^4` times fourth
//! derivatives of `A`: `(rho/d)^4 A` times a number of order one beside a fold (`A ~ d^-1/2`)
//! or a cusp (`A ~ 1/d`), and [`QUADRUPOLE_SAFETY`] = 10 times that is the reported error. A
//! seeded sweep of 27,000 disks around the caustics of nine binaries (rho 1e-3 to 0.05, 4 to 40
//! radii from a caustic point, tolerances 0.1 to 1e-3; `quadrupole_bound_on_a_seeded_sweep` in
//! `tests/integration/contour.rs` at 3,000 disks per lens) found the actual error at most
//! 4.8 `(rho/d)^4 A` over the 5,758 values the rule gave, against contours at 1e-9 (2.3 with
//! the term from the mean of four solves at `rho/2`, which carried three eighths of a uniform
//! disk's hexadecapole term by chance). With the traced distance alone it
//! was 61 `(rho/d)^4 A` on the ridge that runs out along a cusp's axis (a wide planetary
//! binary, 14 radii from the traced caustic): across the ridge the magnification varies on the
//! scale of the radius, which the fold its images see tells and the trace does not. One solve
//! instead of the shortcut's thirteen for most of the points the far rule leaves (1,171 of
//! 1,879 of the recovery event wide-1 at tolerance 1e-3, 2,088 of 3,109 at 1e-4).
//!
//! ```
//! use causeway::contour::{ContourSolver, Method};
//! use causeway::lens::LensSystem;
//! use causeway::source::SourceProfile;
//! use num_complex::Complex64;
//! let mut solver = ContourSolver::new(&LensSystem::single(), 1e-6).unwrap();
//! // A uniform disk centred on a point lens: sqrt(1 + 4/rho^2) (Witt & Mao 1994).
//! let disk = SourceProfile::uniform(0.1).unwrap();
//! let est = solver.magnification(Complex64::new(0.0, 0.0), &disk).unwrap();
//! assert!((est.magnification - (1.0f64 + 400.0).sqrt()).abs() < 1e-5 * est.magnification);
//! assert_eq!(est.method, Method::Contour);
//! // Ten radii out, at tolerance 1e-2: the point source and its quadrupole term (one solve).
//! let mut solver = ContourSolver::new(&LensSystem::single(), 1e-2).unwrap();
//! let est = solver.magnification(Complex64::new(1.0, 0.0), &disk).unwrap();
//! assert_eq!(est.method, Method::Quadrupole);
//! assert!(est.error <= 1e-2 * est.magnification);
//! ```

mod annuli;
mod boundary;
mod crossings;
mod refine;
mod segment;
mod shortcut;

pub use refine::MAX_SAMPLES;

use crate::error::{Error, Result};
use crate::lens::LensSystem;
use crate::solve::ImageSolver;
use crate::source::SourceProfile;
use crossings::CausticTrace;
use num_complex::Complex64;
use rayon::prelude::*;
use std::sync::Arc;

/// The default relative tolerance.
pub const DEFAULT_TOLERANCE: f64 = 1e-4;

/// The far-from-caustics rule's error is this many times `(rho / d)^2 A` (see
/// [far from the caustics](self#far-from-the-caustics)).
pub const FAR_SAFETY: f64 = 10.0;

/// The quadrupole rule's error is this many times `(rho / d)^4 A` (see
/// [the quadrupole rule](self#the-quadrupole-rule)).
pub const QUADRUPOLE_SAFETY: f64 = 10.0;

/// The quadrupole rule is taken only for a source centre at least this many radii from the
/// caustics (see [the quadrupole rule](self#the-quadrupole-rule)).
pub const QUADRUPOLE_CLEARANCE: f64 = 5.0;

/// Sources per parallel work item in [`magnifications`] (fixed, so results do not depend on the
/// number of threads; each source is computed from a fresh start anyway).
const BATCH_CHUNK: usize = 16;

/// How an estimate was obtained.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Method {
    /// rho = 0: the point-source magnification.
    PointSource,
    /// The point-source magnification of a source far from every caustic (see
    /// [far from the caustics](self#far-from-the-caustics)).
    FarPoint,
    /// The small-source shortcut (point source plus quadrupole and hexadecapole).
    SmallSource,
    /// The point source plus its quadrupole term, from the one solve of the centre (see
    /// [the quadrupole rule](self#the-quadrupole-rule)).
    Quadrupole,
    /// Contour integration.
    Contour,
}

/// A finite-source magnification and its estimated (absolute) error.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Estimate {
    /// Magnification.
    pub magnification: f64,
    /// Estimated absolute error of the magnification.
    pub error: f64,
    /// The method used.
    pub method: Method,
}

/// Finite-source magnifications of one lens system, to a relative tolerance. Keeps an image
/// solver and reuses it.
///
/// ```
/// use causeway::contour::ContourSolver;
/// use causeway::lens::LensSystem;
/// use causeway::source::{LimbDarkening, SourceProfile};
/// use num_complex::Complex64;
/// let lens = LensSystem::binary(1.0, 1.0).unwrap();
/// let mut solver = ContourSolver::new(&lens, 1e-4).unwrap();
/// let source = SourceProfile::new(0.05, LimbDarkening::Linear { u: 0.5 }).unwrap();
/// let est = solver.magnification(Complex64::new(0.0, 0.0), &source).unwrap();
/// assert!(est.magnification > 1.0 && est.error <= 1e-4 * est.magnification);
/// ```
#[derive(Debug, Clone)]
pub struct ContourSolver {
    lens: LensSystem,
    solver: ImageSolver,
    trace: Arc<CausticTrace>,
    tol: f64,
    shortcut: bool,
    /// Buffers reused from point to point.
    work: refine::Workspace,
}

impl ContourSolver {
    /// A solver for `lens` with relative tolerance `tol` (finite, in (0, 0.1]). Traces the
    /// lens's caustics once (a few milliseconds), shared by clones.
    pub fn new(lens: &LensSystem, tol: f64) -> Result<Self> {
        if !(tol.is_finite() && tol > 0.0 && tol <= 0.1) {
            return Err(Error::input(format!(
                "tol: must be a relative tolerance in (0, 0.1], got {tol}"
            )));
        }
        Ok(ContourSolver {
            lens: lens.clone(),
            solver: ImageSolver::new(lens)?,
            trace: Arc::new(CausticTrace::new(lens)),
            tol,
            shortcut: true,
            work: refine::Workspace::default(),
        })
    }

    /// Allows or forbids the small-source shortcut (allowed by default).
    pub fn with_shortcut(mut self, allowed: bool) -> Self {
        self.shortcut = allowed;
        self
    }

    /// The relative tolerance.
    pub fn tolerance(&self) -> f64 {
        self.tol
    }

    /// Magnification of `source` centred at `center`.
    pub fn magnification(&mut self, center: Complex64, source: &SourceProfile) -> Result<Estimate> {
        let rho = source.rho;
        if rho == 0.0 {
            self.solver.reset();
            return Ok(Estimate {
                magnification: self.solver.magnification(center)?,
                error: 0.0,
                method: Method::PointSource,
            });
        }
        let d = self.trace.distance(center);
        if self.shortcut {
            self.solver.reset();
            let far = |d: f64| d > rho && FAR_SAFETY * (rho / d).powi(2) <= self.tol;
            let quadrupole = |d: f64| {
                d >= QUADRUPOLE_CLEARANCE * rho && QUADRUPOLE_SAFETY * (rho / d).powi(4) <= self.tol
            };
            if far(d) || quadrupole(d) {
                let images = self.solver.images(center)?;
                let a0 = images.iter().map(|i| i.magnification).sum::<f64>();
                // The nearer of the traced caustic and the fold the images see.
                let near = d.min(fold_distance(&self.lens, images));
                if far(near) {
                    return Ok(Estimate {
                        magnification: a0,
                        error: FAR_SAFETY * (rho / near).powi(2) * a0,
                        method: Method::FarPoint,
                    });
                }
                if quadrupole(near) {
                    let a2 = shortcut::quadrupole(&self.lens, images, rho);
                    let magnification = a0 + source.moments().0 * a2;
                    return Ok(Estimate {
                        magnification,
                        error: QUADRUPOLE_SAFETY * (rho / near).powi(4) * magnification,
                        method: Method::Quadrupole,
                    });
                }
            }
            let found = if d < shortcut::CLEARANCE * rho {
                None
            } else {
                shortcut::small_source(
                    &mut self.solver,
                    &self.lens,
                    center,
                    rho,
                    source.moments(),
                    self.tol,
                )?
            };
            if let Some((magnification, error)) = found {
                return Ok(Estimate {
                    magnification,
                    error,
                    method: Method::SmallSource,
                });
            }
        }
        let mut disk = refine::Sampling {
            solver: &mut self.solver,
            lens: &self.lens,
            trace: &self.trace,
            work: &mut self.work,
        };
        let (magnification, error) = if source.is_uniform() {
            refine::uniform_disk(&mut disk, center, rho, self.tol)?
        } else {
            annuli::limb_darkened(source, self.tol, d, |r, tol| {
                refine::uniform_disk(&mut disk, center, r, tol)
            })?
        };
        Ok(Estimate {
            magnification,
            error,
            method: Method::Contour,
        })
    }
}

/// The distance from the source to a fold of the caustics as seen from its images: an image at
/// distance `dz` from a critical curve has `det J ~ 2 |kappa'| dz` (`kappa' = -2 sum m_i /
/// conj(z - z_i)^3`, and `|kappa| = 1` there), and its source lies `|kappa'| dz^2` from the fold,
/// so about `det J^2 / (4 |kappa'|)`; the least over the images. It catches what the traced
/// caustic cannot show: an image near a critical curve whose caustic is far, where the
/// magnification varies on the scale of that image (a seeded sweep, `examples/contour_bounds.rs`,
/// found the far rule four times short between the facing cusps of a wide planetary binary).
fn fold_distance(lens: &LensSystem, images: &[crate::solve::Image]) -> f64 {
    if lens.len() < 2 {
        // A single lens has no fold: its caustic is the lens, which the trace holds exactly.
        return f64::INFINITY;
    }
    images
        .iter()
        .map(|im| {
            let k3: Complex64 = lens
                .lenses()
                .iter()
                .map(|l| {
                    let w = (im.position - l.position).conj();
                    l.mass / (w * w * w)
                })
                .sum();
            im.jacobian * im.jacobian / (8.0 * k3.norm())
        })
        .fold(f64::INFINITY, f64::min)
}

/// Magnification of `source` centred at `center`, to relative tolerance `tol`.
///
/// ```
/// use causeway::{contour, lens::LensSystem, source::SourceProfile};
/// use num_complex::Complex64;
/// // rho = 0 is the point source: Paczynski 1986, A(1) = 3/sqrt(5).
/// let point = SourceProfile::uniform(0.0).unwrap();
/// let est = contour::magnification(&LensSystem::single(), Complex64::new(1.0, 0.0), &point, 1e-4).unwrap();
/// assert!((est.magnification - 3.0 / 5f64.sqrt()).abs() < 1e-14);
/// ```
pub fn magnification(
    lens: &LensSystem,
    center: Complex64,
    source: &SourceProfile,
    tol: f64,
) -> Result<Estimate> {
    ContourSolver::new(lens, tol)?.magnification(center, source)
}

/// Magnifications of one source profile at many centres, in parallel, in input order;
/// bit-identical whatever the number of threads.
pub fn magnifications(
    lens: &LensSystem,
    centers: &[Complex64],
    source: &SourceProfile,
    tol: f64,
) -> Result<Vec<Estimate>> {
    magnifications_with(&ContourSolver::new(lens, tol)?, centers, source)
}

/// [`magnifications`] by a solver made beforehand (its lens and tolerance): calls for one lens
/// then trace its caustics once. The same values as [`magnifications`].
///
/// ```
/// use causeway::contour::{magnifications, magnifications_with, ContourSolver};
/// use causeway::{lens::LensSystem, source::SourceProfile};
/// use num_complex::Complex64;
/// let lens = LensSystem::binary(1.0, 0.1).unwrap();
/// let solver = ContourSolver::new(&lens, 1e-4).unwrap();
/// let centers = [Complex64::new(0.1, 0.05), Complex64::new(0.6, 0.0)];
/// let disk = SourceProfile::uniform(0.01).unwrap();
/// assert_eq!(
///     magnifications_with(&solver, &centers, &disk).unwrap(),
///     magnifications(&lens, &centers, &disk, 1e-4).unwrap()
/// );
/// ```
pub fn magnifications_with(
    solver: &ContourSolver,
    centers: &[Complex64],
    source: &SourceProfile,
) -> Result<Vec<Estimate>> {
    centers
        .par_chunks(BATCH_CHUNK)
        .map(|chunk| {
            let mut s = solver.clone();
            chunk
                .iter()
                .map(|&c| s.magnification(c, source))
                .collect::<Result<Vec<_>>>()
        })
        .collect::<Result<Vec<_>>>()
        .map(|v| v.into_iter().flatten().collect())
}
