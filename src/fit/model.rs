//! The model of an event: a binary lens (s, q), a source of radius rho, and its trajectory.
//!
//! [`Trajectory`] is the one type the search and the refinement see for the source's motion.
//! It is the straight line of DESIGN.md today; parallax or orbital motion would add parameters
//! here (and to [`Trajectory::PARAMETERS`]) without changes to the search.

use crate::contour;
use crate::curve::StraightLine;
use crate::error::Result;
use crate::lens::LensSystem;
use crate::source::{LimbDarkening, SourceProfile};
use num_complex::Complex64;

/// The source's motion relative to the lens.
///
/// ```
/// use causeway::fit::model::Trajectory;
/// let tr = Trajectory::straight(100.0, 0.1, 20.0, 0.0).unwrap();
/// assert_eq!(tr.position(120.0), (1.0, 0.1));
/// assert_eq!(Trajectory::from_parameters(&tr.parameters()).unwrap(), tr);
/// ```
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Trajectory {
    line: StraightLine,
}

impl Trajectory {
    /// Names of the trajectory parameters, in the order of [`Trajectory::parameters`]: alpha in
    /// radians, u0, t0 (days), tE (days).
    pub const PARAMETERS: [&'static str; 4] = ["alpha", "u0", "t0", "tE"];

    /// A straight trajectory (alpha in radians).
    pub fn straight(t0: f64, u0: f64, te: f64, alpha: f64) -> Result<Self> {
        Ok(Trajectory {
            line: StraightLine::new(t0, u0, te, alpha)?,
        })
    }

    /// The straight line the source follows.
    pub fn line(&self) -> &StraightLine {
        &self.line
    }

    /// Source position at time `t`.
    pub fn position(&self, t: f64) -> (f64, f64) {
        self.line.position(t)
    }

    /// Source positions at the given times.
    pub fn positions(&self, times: &[f64]) -> Vec<(f64, f64)> {
        times.iter().map(|&t| self.position(t)).collect()
    }

    /// The parameter values, in the order of [`Trajectory::PARAMETERS`].
    pub fn parameters(&self) -> Vec<f64> {
        let l = &self.line;
        vec![l.alpha, l.u0, l.t0, l.te]
    }

    /// The trajectory with these parameter values (checked).
    pub fn from_parameters(p: &[f64]) -> Result<Self> {
        Self::straight(p[2], p[1], p[3], p[0])
    }

    /// The mirror image about the lens axis: `(u0, alpha) -> (-u0, -alpha)`, which gives the
    /// same light curve for a lens symmetric about that axis.
    pub fn mirrored(&self) -> Self {
        let l = &self.line;
        Trajectory {
            line: StraightLine {
                u0: -l.u0,
                alpha: -l.alpha,
                ..*l
            },
        }
    }
}

/// A binary-lens, finite-source model.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct BinaryModel {
    /// Separation (Einstein radii of the total mass).
    pub s: f64,
    /// Mass ratio m2/m1.
    pub q: f64,
    /// Source radius (Einstein radii).
    pub rho: f64,
    /// The source's motion.
    pub trajectory: Trajectory,
}

impl BinaryModel {
    /// The kind of model, as the table of minima names it: `static` (a binary lens without
    /// orbital motion, the source on a straight line, no parallax).
    pub fn kind(&self) -> &'static str {
        "static"
    }

    /// The lens system of this model.
    pub fn lens(&self) -> Result<LensSystem> {
        LensSystem::binary(self.s, self.q)
    }

    /// Exact magnifications at `times` for a source with limb darkening `law`: the point-source
    /// magnification with its small-source correction far from caustics, contour integration
    /// near them (see [`crate::contour`]), to relative tolerance `tol`.
    ///
    /// ```
    /// use causeway::fit::model::{BinaryModel, Trajectory};
    /// use causeway::source::LimbDarkening;
    /// let m = BinaryModel { s: 1.0, q: 1e-9, rho: 1e-3,
    ///     trajectory: Trajectory::straight(0.0, 0.5, 10.0, 0.3).unwrap() };
    /// let a = m.magnifications(&[0.0], LimbDarkening::Uniform, 1e-5).unwrap();
    /// // A negligible companion: Paczynski's A(u = 0.5) = 2.18218 (Paczynski 1986).
    /// assert!((a[0] - 2.25 / (0.5 * 4.25f64.sqrt())).abs() < 1e-4);
    /// ```
    pub fn magnifications(&self, times: &[f64], law: LimbDarkening, tol: f64) -> Result<Vec<f64>> {
        let lens = self.lens()?;
        let profile = SourceProfile::new(self.rho, law)?;
        let centres: Vec<Complex64> = self
            .trajectory
            .positions(times)
            .into_iter()
            .map(|(x, y)| Complex64::new(x, y))
            .collect();
        Ok(contour::magnifications(&lens, &centres, &profile, tol)?
            .into_iter()
            .map(|e| e.magnification)
            .collect())
    }
}

pub use crate::lens::paczynski;
