//! The parallax and orbital-motion stage, after the static fit: each of the best static minima
//! is refined again with microlens parallax, from both members of the ecliptic-degenerate pair,
//! and then with linear lens orbital motion as well.
//!
//! The static model cannot tell `(u0, alpha)` from `(-u0, -alpha)`; with parallax they become
//! `(u0, alpha, pi_E,N, dalpha/dt)` and `(-u0, -alpha, -pi_E,N, -dalpha/dt)`, which the data
//! nearly cannot tell apart either when the Sun's projected motion is nearly one-dimensional
//! (the ecliptic degeneracy, Skowron et al. 2011, ApJ 738, 87). So each static minimum is
//! refined from `pi_E = 0` at its own `u0`, and the other member from that result's partner
//! `(-u0, -alpha, -pi_E,N)` and from the static mirror image at `pi_E = 0` (the better kept),
//! by Levenberg-Marquardt on the exact
//! magnifications of [`BinaryModel::magnifications_seen`] (every data set seen from its own
//! observatory: the Earth, or an [`Ephemeris`]); with [`MotionOptions::orbit`] each result is
//! refined again with `(ds/dt, dalpha/dt)` from zero. The search and the static refinement are
//! not touched: this stage only reads their result.
//!
//! `t0,par` is the static fit's single-lens `t0` rounded to a day unless given, and `t0,kep`
//! is `t0,par`. Uncertainties are the Gauss-Newton ones, `(J^T J)^-1` of the normalised
//! residuals ([`gauss_newton_covariance`]), mapped to the natural parameters to first order;
//! `delta_chi2` is the static minimum's chi^2 less this one's, both on the data the static fit
//! ended with (clipped, errors scaled).

use super::event::FitResult;
use super::fluxes::{fit_fluxes, FluxFit};
use super::model::{BinaryModel, LensOrbit, Parallax, Trajectory};
use super::optimize::{gauss_newton_covariance, least_squares};
use super::photometry::DataSet;
use super::refine::{self, COARSE_TOL};
use super::scales::ParallaxMeasure;
use crate::error::{Error, Result};
use crate::parallax::{jd_origin, Ephemeris, Geometry, Observer, SkyPosition};
use crate::progress::Progress;

/// Names of the parameters of [`MotionMinimum::sigma`], in order (the last two with orbital
/// motion only): alpha in radians, `ds/dt` per year, `dalpha/dt` radians per year.
pub const PARAMETERS: [&str; 11] = [
    "s",
    "q",
    "alpha",
    "u0",
    "t0",
    "tE",
    "rho",
    "pi_EN",
    "pi_EE",
    "ds_dt",
    "dalpha_dt",
];

/// How the stage runs.
#[derive(Debug, Clone, PartialEq)]
pub struct MotionOptions {
    /// The event's position.
    pub sky: SkyPosition,
    /// `t0,par` on the data's time scale (`None`: the single-lens `t0` rounded).
    pub t0_par: Option<f64>,
    /// Also fit lens orbital motion.
    pub orbit: bool,
    /// The observatory of each data set, in input order (`None`: the Earth; an empty list: all
    /// on the Earth).
    pub ephemerides: Vec<Option<Ephemeris>>,
    /// How many of the best static minima are refined again.
    pub minima: usize,
    /// Relative tolerance of the magnifications.
    pub tol: f64,
    /// Jacobians each Levenberg-Marquardt pass may take.
    pub max_iters: u64,
}

impl MotionOptions {
    /// Defaults for an event at `sky`: two minima, orbital motion, 1e-4, 40 Jacobians a pass.
    pub fn new(sky: SkyPosition) -> Self {
        MotionOptions {
            sky,
            t0_par: None,
            orbit: true,
            ephemerides: Vec::new(),
            minima: 2,
            tol: 1e-4,
            max_iters: 40,
        }
    }
}

impl MotionOptions {
    /// Checks the options for a fit of `sets` data sets.
    ///
    /// ```
    /// use causeway::fit::motion::MotionOptions;
    /// use causeway::parallax::SkyPosition;
    /// let options = MotionOptions::new(SkyPosition::new(268.0, -29.0).unwrap());
    /// assert!(options.validate(2).is_ok());
    /// assert!(MotionOptions { minima: 0, ..options }.validate(2).is_err());
    /// ```
    pub fn validate(&self, sets: usize) -> Result<()> {
        if !self.ephemerides.is_empty() && self.ephemerides.len() != sets {
            return Err(Error::input(format!(
                "ephemerides: {} for {sets} data sets",
                self.ephemerides.len()
            )));
        }
        if self.minima == 0 {
            return Err(Error::input("parallax_minima: must be at least 1"));
        }
        if !(self.tol > 0.0 && self.tol <= 0.1) {
            return Err(Error::input(format!(
                "tol: must be a relative tolerance in (0, 0.1], got {}",
                self.tol
            )));
        }
        if let Some(t) = self.t0_par.filter(|t| !t.is_finite()) {
            return Err(Error::input(format!("t0_par: must be finite, got {t}")));
        }
        Ok(())
    }
}

/// A minimum of a model with parallax (and orbital motion).
#[derive(Debug, Clone, PartialEq)]
pub struct MotionMinimum {
    /// Index (from 0) of the static minimum it started from.
    pub from: usize,
    /// The model (times on the data's scale).
    pub model: BinaryModel,
    /// Uncertainties of [`PARAMETERS`] (9 or 11 values; NaN where unknown).
    pub sigma: Vec<f64>,
    /// Covariance of the minimiser's parameters `(ln s, ln q, alpha, u0, t0, ln tE, ln rho,
    /// pi_E,N, pi_E,E[, ds/dt, dalpha/dt])` (NaN rows and columns where unknown), if measured.
    pub covariance: Option<Vec<Vec<f64>>>,
    /// chi^2 on the data the static fit ended with.
    pub chi2: f64,
    /// chi^2 on the data as given.
    pub chi2_as_given: f64,
    /// Source and blend fluxes of each data set.
    pub fluxes: Vec<FluxFit>,
    /// The static minimum's chi^2 less this one's (on the same data).
    pub delta_chi2: f64,
}

impl MotionMinimum {
    /// What the parallax and the source size say of the lens (see [`ParallaxMeasure`]), with
    /// `theta_*` in microarcseconds, and the covariance of `(theta_E, tE, pi_E,N, pi_E,E, s, q[,
    /// ds/dt, dalpha/dt])` mapped from the minimiser's to first order (theta_*'s own
    /// uncertainty left out). `None` without parallax or for a point source.
    pub fn lens_measure(
        &self,
        theta_star_uas: f64,
        ds_kpc: Option<f64>,
    ) -> Option<(ParallaxMeasure, Option<Vec<Vec<f64>>>)> {
        let m = &self.model;
        let p = m.trajectory.parallax()?;
        if m.rho.is_nan() || m.rho <= 0.0 {
            return None;
        }
        let te = m.trajectory.line().te;
        let theta_e = theta_star_uas * 1e-3 / m.rho;
        let orbit = m.trajectory.orbit();
        let measure = ParallaxMeasure {
            theta_e_mas: theta_e,
            te_days: te,
            pi_e: (p.pi_en, p.pi_ee),
            s: m.s,
            q: m.q,
            ds_kpc,
            earth_velocity: p.geometry.earth_velocity(),
            rates: orbit.map(|o| (o.ds_dt, o.dalpha_dt)),
        };
        // Each natural parameter: its index in the minimiser's vector and d(natural)/d(that).
        let mut map = vec![
            (6, -theta_e),
            (5, te),
            (7, 1.0),
            (8, 1.0),
            (0, m.s),
            (1, m.q),
        ];
        if orbit.is_some() {
            map.extend([(9, 1.0), (10, 1.0)]);
        }
        let cov = self.covariance.as_ref().map(|c| {
            map.iter()
                .map(|&(i, a)| map.iter().map(|&(j, b)| a * c[i][j] * b).collect())
                .collect()
        });
        Some((measure, cov))
    }
}

/// Runs the stage on the result of [`super::event::fit_event`] (`given`: the data as given to
/// it, for [`MotionMinimum::chi2_as_given`]); rows in order: for each static minimum, parallax
/// from `u0 > 0` and `u0 < 0`, then with orbital motion from each.
///
/// ```no_run
/// use causeway::fit::motion::{fit_motion, MotionOptions};
/// use causeway::parallax::SkyPosition;
/// # fn run(data: &[causeway::fit::photometry::DataSet], fit: &causeway::fit::event::FitResult) {
/// let sky = SkyPosition::parse("17:55:00", "-29:30:00").unwrap();
/// let rows = fit_motion(data, fit, &MotionOptions::new(sky), &causeway::progress::Silent).unwrap();
/// println!("pi_E,N = {}", rows[0].model.trajectory.parallax().unwrap().pi_en);
/// # }
/// ```
pub fn fit_motion(
    given: &[DataSet],
    fit: &FitResult,
    options: &MotionOptions,
    progress: &dyn Progress,
) -> Result<Vec<MotionMinimum>> {
    let statics: Vec<BinaryModel> = fit.minima.iter().map(|m| m.refined.model).collect();
    let t0_par = options.t0_par.unwrap_or(fit.single.t0.round());
    refine_with_motion(given, &fit.data, &statics, t0_par, options, progress)
}

/// The stage of [`fit_motion`] from static minima `statics` (best first) fitted to `data`
/// (`given`: the same sets as given), with `t0_par` on the data's scale (used when the options
/// have none).
///
/// ```
/// use causeway::fit::model::{BinaryModel, Trajectory};
/// use causeway::fit::motion::{refine_with_motion, MotionOptions};
/// use causeway::fit::simulate::Simulation;
/// use causeway::parallax::SkyPosition;
/// use causeway::source::LimbDarkening;
/// let still = BinaryModel { s: 1.3, q: 1e-3, rho: 1e-3,
///     trajectory: Trajectory::straight(8300.0, 0.3, 30.0, 0.5).unwrap() };
/// let times: Vec<f64> = (0..60).map(|k| 8240.0 + 2.0 * k as f64).collect();
/// let data = vec![Simulation::new(still, LimbDarkening::Uniform).run(&times).unwrap()];
/// let options = MotionOptions { orbit: false, ..MotionOptions::new(SkyPosition::new(268.0, -29.0).unwrap()) };
/// let rows = refine_with_motion(&data, &data, &[still], 8300.0, &options, &causeway::progress::Silent).unwrap();
/// assert_eq!(rows.len(), 2); // u0 > 0 and u0 < 0
/// assert!(rows[0].model.trajectory.line().u0 > 0.0 && rows[1].model.trajectory.line().u0 < 0.0);
/// assert!(rows[0].delta_chi2 > -1e-6); // parallax never fits worse than pi_E = 0
/// ```
pub fn refine_with_motion(
    given: &[DataSet],
    data: &[DataSet],
    statics: &[BinaryModel],
    t0_par: f64,
    options: &MotionOptions,
    progress: &dyn Progress,
) -> Result<Vec<MotionMinimum>> {
    options.validate(data.len())?;
    let observers: Vec<Observer> = (0..data.len())
        .map(|k| match options.ephemerides.get(k) {
            Some(Some(e)) => Observer::At(e),
            _ => Observer::Earth,
        })
        .collect();
    let t0_par = options.t0_par.unwrap_or(t0_par);
    let geometry = Geometry::new(options.sky, t0_par, jd_origin(t0_par))?;
    let fitter = Fitter {
        data,
        observers: &observers,
        options,
    };
    let count = statics.len().min(options.minima);
    progress.start(
        "parallax",
        (count * if options.orbit { 4 } else { 2 }) as u64,
    );
    let mut out = Vec::new();
    for (from, &fixed) in statics.iter().take(count).enumerate() {
        let static_chi2 = fitter.chi2(&fixed)?.0;
        let with = |tr: Trajectory| -> Result<BinaryModel> {
            Ok(BinaryModel {
                trajectory: tr.with_parallax(Some(Parallax {
                    pi_en: 0.0,
                    pi_ee: 0.0,
                    geometry,
                }))?,
                ..fixed
            })
        };
        // The first member from the static minimum at pi_E = 0; the second from the first's
        // ecliptic partner (-u0, -alpha, -pi_E,N) and from the static mirror image at
        // pi_E = 0, the better of the two.
        let first = fitter.refine(&with(fixed.trajectory)?)?;
        progress.advance(1);
        let partner = BinaryModel {
            trajectory: first.0.trajectory.mirrored(),
            ..first.0
        };
        let second = [partner, with(fixed.trajectory.mirrored())?]
            .iter()
            .map(|start| {
                let found = fitter.refine(start)?;
                Ok((fitter.chi2(&found.0)?.0, found))
            })
            .collect::<Result<Vec<_>>>()?
            .into_iter()
            .min_by(|a, b| a.0.total_cmp(&b.0))
            .map(|(_, r)| r)
            .expect("two starts");
        let mut found = vec![first, second];
        progress.advance(1);
        if options.orbit {
            for k in 0..2 {
                let start = BinaryModel {
                    trajectory: found[k].0.trajectory.with_orbit(Some(LensOrbit {
                        ds_dt: 0.0,
                        dalpha_dt: 0.0,
                        t0_kep: t0_par,
                    }))?,
                    ..found[k].0
                };
                found.push(fitter.refine(&start)?);
                progress.advance(1);
            }
        }
        for (model, sigma, covariance) in found {
            let (chi2, fluxes) = fitter.chi2(&model)?;
            let as_given = Fitter {
                data: given,
                ..fitter
            }
            .chi2(&model)?
            .0;
            out.push(MotionMinimum {
                from,
                model,
                sigma,
                covariance,
                chi2,
                chi2_as_given: as_given,
                fluxes,
                delta_chi2: static_chi2 - chi2,
            });
        }
    }
    progress.finish(&format!(
        "parallax: {} models from {count} static minima{}",
        out.len(),
        out.iter()
            .map(|m| m.delta_chi2)
            .reduce(f64::max)
            .map_or(String::new(), |d| format!(", chi2 lower by up to {d:.1}"))
    ));
    Ok(out)
}

/// The chi^2 a return of rho to the start's value may cost (see [`Fitter::refine`]).
const RHO_SLACK: f64 = 0.1;

/// A refined model, its uncertainties and the minimiser's covariance.
type Fitted = (BinaryModel, Vec<f64>, Option<Vec<Vec<f64>>>);

/// The data, their observers and the options: chi^2 and refinements.
#[derive(Clone, Copy)]
struct Fitter<'a> {
    data: &'a [DataSet],
    observers: &'a [Observer<'a>],
    options: &'a MotionOptions,
}

impl Fitter<'_> {
    fn magnifications(&self, model: &BinaryModel, k: usize, tol: f64) -> Result<Vec<f64>> {
        let set = &self.data[k];
        let observer = self.observers.get(k).copied().unwrap_or(Observer::Earth);
        model.magnifications_seen(&set.times, &observer, set.limb_darkening, tol)
    }

    /// chi^2 over all sets at the best fluxes, and the fluxes.
    fn chi2(&self, model: &BinaryModel) -> Result<(f64, Vec<FluxFit>)> {
        let mut fluxes = Vec::with_capacity(self.data.len());
        for (k, set) in self.data.iter().enumerate() {
            fluxes.push(fit_fluxes(
                set,
                &self.magnifications(model, k, self.options.tol)?,
            ));
        }
        Ok((fluxes.iter().map(|f| f.chi2).sum(), fluxes))
    }

    fn residuals(&self, model: &BinaryModel, tol: f64) -> Result<Vec<f64>> {
        let mut out = Vec::new();
        for (k, set) in self.data.iter().enumerate() {
            let a = self.magnifications(model, k, tol)?;
            let f = fit_fluxes(set, &a);
            out.extend(f.residuals(set, &a));
        }
        Ok(out)
    }

    /// Levenberg-Marquardt from `start` (at the coarse tolerance, then at the one asked for,
    /// each pass repeated while it gains more than 0.1), and the uncertainties.
    fn refine(&self, start: &BinaryModel) -> Result<Fitted> {
        let residuals_at = |tol: f64| {
            move |p: &[f64]| {
                let m = from_vector(start, p).ok()?;
                self.residuals(&m, tol).ok()
            }
        };
        let h: Vec<f64> = steps(start).iter().map(|s| 0.02 * s).collect();
        let mut x = to_vector(start);
        let mut best = f64::INFINITY;
        for tol in [self.options.tol.max(COARSE_TOL), self.options.tol] {
            let residuals = residuals_at(tol);
            for _ in 0..3 {
                let Ok(m) = least_squares(&residuals, &x, &h, 1e-4, self.options.max_iters) else {
                    break;
                };
                let gain = best - m.value;
                if m.value < best {
                    (x, best) = (m.x, m.value);
                }
                if gain.is_nan() || gain <= 0.1 || tol == self.options.tol {
                    break;
                }
            }
        }
        // alpha in [0, 2 pi), as the static table has it.
        x[2] = x[2].rem_euclid(std::f64::consts::TAU);
        let mut model = from_vector(start, &x)?;
        // A rho the data do not constrain drifts without changing chi^2 (to 1e-232 once): it
        // keeps the start's value when that fits within RHO_SLACK.
        let kept = BinaryModel {
            rho: start.rho,
            ..model
        };
        if start.rho > 0.0 && self.chi2(&kept)?.0 <= self.chi2(&model)?.0 + RHO_SLACK {
            x[6] = start.rho.ln();
            model = kept;
        }
        // Where no point resolves the source, rho is unconstrained and J^T J singular: the
        // others are then measured at fixed rho, whose uncertainty is left unknown.
        let exact = residuals_at(self.options.tol);
        let cov = gauss_newton_covariance(&exact, &x, &h).or_else(|| {
            let fixed_rho = |p: &[f64]| exact(&[&p[..6], &x[6..7], &p[6..]].concat());
            let rest = |v: &[f64]| [&v[..6], &v[7..]].concat();
            gauss_newton_covariance(&fixed_rho, &rest(&x), &rest(&h)).map(|c| {
                let widen = |row: &[f64]| [&row[..6], &[f64::NAN], &row[6..]].concat();
                let mut full: Vec<Vec<f64>> = c.iter().map(|r| widen(r)).collect();
                full.insert(6, vec![f64::NAN; x.len()]);
                full
            })
        });
        let l = model.trajectory.line();
        let mut scale = vec![model.s, model.q, 1.0, 1.0, 1.0, l.te, model.rho, 1.0, 1.0];
        scale.extend(vec![1.0; x.len() - scale.len()]);
        let sigma = match &cov {
            Some(c) => (0..x.len()).map(|i| scale[i] * c[i][i].sqrt()).collect(),
            None => vec![f64::NAN; x.len()],
        };
        Ok((model, sigma, cov))
    }
}

/// `(ln s, ln q, alpha, u0, t0, ln tE, ln rho, pi_E,N, pi_E,E[, ds/dt, dalpha/dt])`.
fn to_vector(m: &BinaryModel) -> Vec<f64> {
    let mut v = refine::to_vector(m);
    if let Some(p) = m.trajectory.parallax() {
        v.extend([p.pi_en, p.pi_ee]);
    }
    if let Some(o) = m.trajectory.orbit() {
        v.extend([o.ds_dt, o.dalpha_dt]);
    }
    v
}

/// The model of vector `p`, with the geometry and `t0,kep` of `like`.
fn from_vector(like: &BinaryModel, p: &[f64]) -> Result<BinaryModel> {
    let tr = &like.trajectory;
    let parallax = tr.parallax().map(|g| Parallax {
        pi_en: p[7],
        pi_ee: p[8],
        ..*g
    });
    let orbit = tr.orbit().map(|o| LensOrbit {
        ds_dt: p[9],
        dalpha_dt: p[10],
        ..*o
    });
    let fixed = refine::from_vector(&p[..7])?;
    Ok(BinaryModel {
        trajectory: fixed
            .trajectory
            .with_parallax(parallax)?
            .with_orbit(orbit)?,
        ..fixed
    })
}

/// Typical steps of the vector's parameters (the Jacobian's are a fiftieth).
fn steps(m: &BinaryModel) -> Vec<f64> {
    let mut h = refine::steps(m).to_vec();
    h.extend([0.05, 0.05]);
    if m.trajectory.orbit().is_some() {
        h.extend([0.05, 0.1]);
    }
    h
}
