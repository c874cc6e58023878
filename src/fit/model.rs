//! The model of an event: a binary lens (s, q), a source of radius rho, and its trajectory.
//!
//! [`Trajectory`] is the one type the search and the refinement see for the source's motion:
//! the straight line of DESIGN.md, optionally with microlens parallax ([`Parallax`]: the
//! observer's motion, see [`crate::parallax`] for the geometry and signs) and linear lens
//! orbital motion ([`LensOrbit`]). The search reads maps along the straight line alone
//! ([`Trajectory::position`]); the exact model ([`BinaryModel::magnifications_seen`]) computes
//! each time's source position and, with orbital motion, each time's lens.
//!
//! Orbital motion is linear about `t0,kep`: at time `t` the separation is
//! `s + ds/dt (t - t0,kep)` and the trajectory's angle to the binary axis is
//! `alpha + dalpha/dt (t - t0,kep)` (rates per Julian year of 365.25 d; the binary's axis turns
//! by `-dalpha/dt` against the sky). The lens frame's origin is the centre of mass.

use crate::contour::{self, ContourSolver};
use crate::curve::StraightLine;
use crate::error::Error;
use crate::error::Result;
use crate::lens::LensSystem;
use crate::parallax::{Geometry, Observer};
use crate::source::{LimbDarkening, SourceProfile};
use num_complex::Complex64;
use rayon::prelude::*;
use std::sync::Mutex;

/// Days per Julian year: the unit of the orbital-motion rates.
pub const DAYS_PER_YEAR: f64 = 365.25;

/// Microlens parallax: `pi_E = (pi_E,N, pi_E,E)` and where and when it is measured from.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Parallax {
    /// North component of `pi_E`.
    pub pi_en: f64,
    /// East component of `pi_E`.
    pub pi_ee: f64,
    /// The event's position, `t0,par` and the Julian date of time zero.
    pub geometry: Geometry,
}

/// Linear lens orbital motion about `t0,kep` (see the module documentation).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LensOrbit {
    /// Rate of change of the separation (Einstein radii per year).
    pub ds_dt: f64,
    /// Rate of change of the trajectory's angle to the binary axis (radians per year).
    pub dalpha_dt: f64,
    /// Reference time (days, on the model's scale).
    pub t0_kep: f64,
}

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
    parallax: Option<Parallax>,
    orbit: Option<LensOrbit>,
}

impl Trajectory {
    /// Names of the trajectory parameters, in the order of [`Trajectory::parameters`]: alpha in
    /// radians, u0, t0 (days), tE (days).
    pub const PARAMETERS: [&'static str; 4] = ["alpha", "u0", "t0", "tE"];

    /// A straight trajectory (alpha in radians).
    pub fn straight(t0: f64, u0: f64, te: f64, alpha: f64) -> Result<Self> {
        Ok(Trajectory {
            line: StraightLine::new(t0, u0, te, alpha)?,
            parallax: None,
            orbit: None,
        })
    }

    /// The same trajectory with parallax (or without, for `None`); `pi_E` must be finite.
    pub fn with_parallax(self, parallax: Option<Parallax>) -> Result<Self> {
        if let Some(p) = parallax {
            for (name, v) in [("pi_en", p.pi_en), ("pi_ee", p.pi_ee)] {
                if !v.is_finite() {
                    return Err(Error::input(format!("{name}: must be finite, got {v}")));
                }
            }
        }
        Ok(Trajectory { parallax, ..self })
    }

    /// The same trajectory with lens orbital motion (or without, for `None`); rates finite.
    pub fn with_orbit(self, orbit: Option<LensOrbit>) -> Result<Self> {
        if let Some(o) = orbit {
            for (name, v) in [
                ("ds_dt", o.ds_dt),
                ("dalpha_dt", o.dalpha_dt),
                ("t0_kep", o.t0_kep),
            ] {
                if !v.is_finite() {
                    return Err(Error::input(format!("{name}: must be finite, got {v}")));
                }
            }
        }
        Ok(Trajectory { orbit, ..self })
    }

    /// The parallax, if any.
    pub fn parallax(&self) -> Option<&Parallax> {
        self.parallax.as_ref()
    }

    /// The lens orbital motion, if any.
    pub fn orbit(&self) -> Option<&LensOrbit> {
        self.orbit.as_ref()
    }

    /// Whether the source moves on the straight line alone (no parallax, no orbital motion).
    pub fn is_straight(&self) -> bool {
        self.parallax.is_none() && self.orbit.is_none()
    }

    /// The same trajectory on a time scale shifted by `dt` (times `t` become `t + dt`).
    pub fn shifted(&self, dt: f64) -> Self {
        Trajectory {
            line: StraightLine {
                t0: self.line.t0 + dt,
                ..self.line
            },
            parallax: self.parallax.map(|p| Parallax {
                geometry: p.geometry.shifted(dt),
                ..p
            }),
            orbit: self.orbit.map(|o| LensOrbit {
                t0_kep: o.t0_kep + dt,
                ..o
            }),
        }
    }

    /// Source positions in the lens frame at `times` seen by `observer`, with parallax and the
    /// orbital rotation (the module documentation and [`crate::parallax`]).
    ///
    /// ```
    /// use causeway::fit::model::{Parallax, Trajectory};
    /// use causeway::parallax::{Geometry, Observer, SkyPosition};
    /// let g = Geometry::new(SkyPosition::new(268.0, -29.0).unwrap(), 8300.0, 2_450_000.0).unwrap();
    /// let tr = Trajectory::straight(8300.0, 0.1, 40.0, 0.3).unwrap()
    ///     .with_parallax(Some(Parallax { pi_en: 0.3, pi_ee: 0.1, geometry: g })).unwrap();
    /// let p = tr.positions_seen(&[8300.0, 8400.0], &Observer::Earth).unwrap();
    /// let (x, y) = tr.position(8300.0); // at t0,par the offset vanishes
    /// assert!((p[0].0 - x).abs() < 1e-12 && (p[0].1 - y).abs() < 1e-12);
    /// let (x, y) = tr.position(8400.0); // 100 days later it does not
    /// assert!((p[1].0 - x).hypot(p[1].1 - y) > 0.01);
    /// ```
    pub fn positions_seen(&self, times: &[f64], observer: &Observer) -> Result<Vec<(f64, f64)>> {
        let offsets = match &self.parallax {
            Some(p) => Some(p.geometry.offsets(times, observer)?),
            None => None,
        };
        let l = &self.line;
        Ok(times
            .iter()
            .enumerate()
            .map(|(i, &t)| {
                let (mut tau, mut beta) = ((t - l.t0) / l.te, l.u0);
                if let (Some(p), Some(d)) = (&self.parallax, &offsets) {
                    let (dn, de) = d[i];
                    tau += p.pi_en * dn + p.pi_ee * de;
                    beta += p.pi_en * de - p.pi_ee * dn;
                }
                let alpha = l.alpha
                    + self
                        .orbit
                        .map_or(0.0, |o| o.dalpha_dt * (t - o.t0_kep) / DAYS_PER_YEAR);
                let (s, c) = alpha.sin_cos();
                (tau * c - beta * s, tau * s + beta * c)
            })
            .collect())
    }

    /// The binary's separation at time `t` for separation `s` at `t0,kep`.
    pub fn separation(&self, s: f64, t: f64) -> f64 {
        self.orbit
            .map_or(s, |o| s + o.ds_dt * (t - o.t0_kep) / DAYS_PER_YEAR)
    }

    /// The straight line the source follows.
    pub fn line(&self) -> &StraightLine {
        &self.line
    }

    /// Source position at time `t` on the straight line (without parallax or orbital motion:
    /// what the search reads maps along; see [`Trajectory::positions_seen`]).
    pub fn position(&self, t: f64) -> (f64, f64) {
        self.line.position(t)
    }

    /// Source positions on the straight line at the given times.
    pub fn positions(&self, times: &[f64]) -> Vec<(f64, f64)> {
        times.iter().map(|&t| self.position(t)).collect()
    }

    /// The straight line's parameter values, in the order of [`Trajectory::PARAMETERS`].
    pub fn parameters(&self) -> Vec<f64> {
        let l = &self.line;
        vec![l.alpha, l.u0, l.t0, l.te]
    }

    /// The straight trajectory with these parameter values (checked).
    pub fn from_parameters(p: &[f64]) -> Result<Self> {
        Self::straight(p[2], p[1], p[3], p[0])
    }

    /// The mirror image about the lens axis: `(u0, alpha) -> (-u0, -alpha)`, which gives the
    /// same light curve for a lens symmetric about that axis; with parallax and orbital motion
    /// also `pi_E,N -> -pi_E,N` and `dalpha/dt -> -dalpha/dt`: the partner of the ecliptic
    /// degeneracy (the same curve when the Sun's offset lies along east alone).
    pub fn mirrored(&self) -> Self {
        let l = &self.line;
        Trajectory {
            line: StraightLine {
                u0: -l.u0,
                alpha: -l.alpha,
                ..*l
            },
            parallax: self.parallax.map(|p| Parallax {
                pi_en: -p.pi_en,
                ..p
            }),
            orbit: self.orbit.map(|o| LensOrbit {
                dalpha_dt: -o.dalpha_dt,
                ..o
            }),
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
    /// orbital motion, the source on a straight line, no parallax), `parallax`, `orbit`
    /// (orbital motion without parallax) or `parallax+orbit`.
    pub fn kind(&self) -> &'static str {
        match (
            self.trajectory.parallax.is_some(),
            self.trajectory.orbit.is_some(),
        ) {
            (false, false) => "static",
            (true, false) => "parallax",
            (false, true) => "orbit",
            (true, true) => "parallax+orbit",
        }
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
        self.magnifications_seen(times, &Observer::Earth, law, tol)
    }

    /// [`BinaryModel::magnifications`] seen by `observer` (the Earth, or an observatory with
    /// its ephemeris): with parallax, each time's source position from the observer's place;
    /// with orbital motion, each time's lens (a separation that changes needs a lens, and its
    /// caustics, per time: `cargo bench --bench parallax` measured such a curve at 93 times the
    /// cost of the static one, parallax alone at 1.03 times).
    pub fn magnifications_seen(
        &self,
        times: &[f64],
        observer: &Observer,
        law: LimbDarkening,
        tol: f64,
    ) -> Result<Vec<f64>> {
        if self.trajectory.is_straight() {
            return self.straight_magnifications(times, law, tol);
        }
        let profile = SourceProfile::new(self.rho, law)?;
        let centres: Vec<Complex64> = self
            .trajectory
            .positions_seen(times, observer)?
            .into_iter()
            .map(|(x, y)| Complex64::new(x, y))
            .collect();
        let moving = self.trajectory.orbit.is_some_and(|o| o.ds_dt != 0.0);
        if !moving {
            return Ok(
                contour::magnifications(&self.lens()?, &centres, &profile, tol)?
                    .into_iter()
                    .map(|e| e.magnification)
                    .collect(),
            );
        }
        times
            .par_iter()
            .zip(&centres)
            .map(|(&t, &c)| {
                let s = self.trajectory.separation(self.s, t);
                if s.is_nan() || s <= 0.0 {
                    return Err(Error::input(format!(
                        "ds_dt: the separation reaches {s} at t = {t}; it must stay > 0"
                    )));
                }
                let lens = LensSystem::binary(s, self.q)?;
                Ok(contour::magnification(&lens, c, &profile, tol)?.magnification)
            })
            .collect()
    }

    /// The magnifications of a source on the straight line.
    fn straight_magnifications(
        &self,
        times: &[f64],
        law: LimbDarkening,
        tol: f64,
    ) -> Result<Vec<f64>> {
        let solver = contour_solver(self.s, self.q, tol)?;
        let profile = SourceProfile::new(self.rho, law)?;
        let centres: Vec<Complex64> = self
            .trajectory
            .positions(times)
            .into_iter()
            .map(|(x, y)| Complex64::new(x, y))
            .collect();
        Ok(contour::magnifications_with(&solver, &centres, &profile)?
            .into_iter()
            .map(|e| e.magnification)
            .collect())
    }
}

/// Contour solvers of the binaries evaluated last, newest first: a fit evaluates one lens
/// many times over (the columns of a Jacobian that move the trajectory or the source, the
/// curvature's steps), and a solver traces its lens's caustics when made.
static SOLVERS: Mutex<Vec<(SolverKey, ContourSolver)>> = Mutex::new(Vec::new());

/// Solvers kept in [`SOLVERS`].
const KEPT_SOLVERS: usize = 8;

/// The bits of (s, q, tolerance).
type SolverKey = (u64, u64, u64);

/// A contour solver of the binary (s, q) at tolerance `tol`, from [`SOLVERS`] when it is
/// there (a clone shares the traced caustics); the same solver as made afresh.
fn contour_solver(s: f64, q: f64, tol: f64) -> Result<ContourSolver> {
    let key = (s.to_bits(), q.to_bits(), tol.to_bits());
    let lock = || SOLVERS.lock().unwrap_or_else(|e| e.into_inner());
    {
        let mut kept = lock();
        if let Some(i) = kept.iter().position(|(k, _)| *k == key) {
            let entry = kept.remove(i);
            let solver = entry.1.clone();
            kept.insert(0, entry);
            return Ok(solver);
        }
    }
    let solver = ContourSolver::new(&LensSystem::binary(s, q)?, tol)?;
    let mut kept = lock();
    if !kept.iter().any(|(k, _)| *k == key) {
        kept.insert(0, (key, solver.clone()));
        kept.truncate(KEPT_SOLVERS);
    }
    Ok(solver)
}

pub use crate::lens::paczynski;
