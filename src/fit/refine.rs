//! Refinement of search candidates: a local minimisation of chi^2 over
//! (s, q, alpha, u0, t0, tE, rho) with exact magnifications, and uncertainties from its
//! curvature.
//!
//! Each start first takes the best of a ladder of source radii ([`RHO_LADDER`] times its own,
//! by exact chi^2 at the start's other parameters): a map search cannot try a radius below
//! its pixel, and the refinement's steps in `ln rho` rarely cross the factors between a
//! pixel-sized source and a caustic crossing's own. Then it goes through Levenberg-Marquardt
//! on the normalised residuals (which follows the curved valleys of a caustic crossing); with
//! the search's point cap, also from the end of a Levenberg-Marquardt pass on the capped
//! chi^2 (the search's measure: see [`super::fluxes::capped_share`]), which brings a crossing
//! the start put a little off to the data before any point's full misfit counts but can
//! settle on a partial fit, so the lower plain chi^2 of the two goes on. Then the
//! Nelder-Mead simplex from there (which can step out of a shallow false minimum),
//! Levenberg-Marquardt again to converge, and last Levenberg-Marquardt with Jacobian steps
//! twenty times smaller at a tenth of the tolerance, which follows a valley narrower than the
//! others' steps ([`close_in`]). The
//! uncertainties come from the Hessian of chi^2 at the minimum (see
//! [`super::optimize::covariance`]), by differences with magnifications ten times finer.
//!
//! Every chi^2 here comes from [`BinaryModel::magnifications`]: the point-source magnification
//! with its small-source correction far from caustics and contour integration near them, to the
//! relative tolerance given (the search stages at [`COARSE_TOL`] when that is coarser, which
//! makes contour integration cheaper), so the result does not depend on map pixels. The minimiser works
//! on `(ln s, ln q, alpha, u0, t0, ln tE, ln rho)` (positive quantities stay positive); the
//! uncertainties are mapped back to the natural parameters to first order.

use super::fluxes::{capped_share, fit_fluxes, fit_fluxes_capped, FluxFit};
use super::model::{BinaryModel, Trajectory};
use super::optimize::{covariance, curvature_steps, least_squares, minimize, INFEASIBLE};
use super::photometry::DataSet;
use crate::error::Result;
use std::f64::consts::{PI, TAU};
use std::sync::atomic::{AtomicU64, Ordering};
use std::time::Instant;

/// Jacobians the Levenberg-Marquardt stage of [`refine`] may take.
pub const LM_ITERATIONS: u64 = 40;
/// The magnification tolerance of the refinement's search stages when the one asked for is
/// finer (the last stage and the reported chi^2 use the one asked for).
pub const COARSE_TOL: f64 = 1e-3;

/// The Jacobian steps of the refinement's closing pass ([`close_in`]), in simplex steps (the
/// other Levenberg-Marquardt passes take a fiftieth).
pub const CLOSING_STEP: f64 = 1e-3;

/// How far the closing pass may move each coordinate, in simplex steps ([`within_reach`]):
/// on invented events it closed in over up to 4.4 steps (a wide planet's tE).
pub const CLOSING_REACH: f64 = 5.0;

/// The factors on a start's `rho` tried before the refinement (see the module documentation).
pub const RHO_LADDER: [f64; 4] = [1.0, 0.5, 0.25, 0.125];

/// Names of the model parameters, in the order of [`Refined::sigma`].
pub const PARAMETERS: [&str; 7] = ["s", "q", "alpha", "u0", "t0", "tE", "rho"];

/// A refined minimum.
#[derive(Debug, Clone, PartialEq)]
pub struct Refined {
    /// The model at the minimum (with `u0 >= 0`, alpha in `[0, 2 pi)`).
    pub model: BinaryModel,
    /// Uncertainties of [`PARAMETERS`] (NaN where the curvature is not positive definite).
    pub sigma: [f64; 7],
    /// chi^2 at the minimum.
    pub chi2: f64,
    /// Source and blend fluxes of each data set.
    pub fluxes: Vec<FluxFit>,
    /// chi^2 evaluations spent.
    pub evaluations: u64,
}

/// chi^2 of `model` over all data sets with exact magnifications, and the fluxes of each set.
pub fn exact_chi2(data: &[DataSet], model: &BinaryModel, tol: f64) -> Result<(f64, Vec<FluxFit>)> {
    let mut fluxes = Vec::with_capacity(data.len());
    for set in data {
        let a = model.magnifications(&set.times, set.limb_darkening, tol)?;
        fluxes.push(fit_fluxes(set, &a));
    }
    Ok((fluxes.iter().map(|f| f.chi2).sum(), fluxes))
}

/// Residuals `(F_i - fs A_i - fb) / sigma_i` of `model` over all data sets, each set at its
/// best fluxes, with exact magnifications; with a finite `cap`, the residuals whose squares
/// sum to the capped chi^2 instead (fluxes by [`fit_fluxes_capped`], each residual `r` turned
/// into `sign(r) sqrt(capped_share(r^2))`).
fn residuals_of(data: &[DataSet], model: &BinaryModel, tol: f64, cap: f64) -> Result<Vec<f64>> {
    let mut out = Vec::with_capacity(data.iter().map(DataSet::len).sum());
    for set in data {
        let a = model.magnifications(&set.times, set.limb_darkening, tol)?;
        if cap.is_finite() {
            let f = fit_fluxes_capped(set, &a, cap);
            out.extend(
                f.residuals(set, &a)
                    .map(|r| capped_share(r * r, cap).sqrt().copysign(r)),
            );
        } else {
            let f = fit_fluxes(set, &a);
            out.extend(f.residuals(set, &a));
        }
    }
    Ok(out)
}

/// The normalised residuals ([`residuals_of`], plain) as a function of the minimiser's
/// coordinates, each call counted in `evaluations`; `None` outside the model and once
/// `deadline` has passed (so that every minimiser stage ends at once with the best it had).
pub(super) fn counted_residuals<'a>(
    data: &'a [DataSet],
    tol: f64,
    evaluations: &'a AtomicU64,
    deadline: Option<Instant>,
) -> impl Fn(&[f64]) -> Option<Vec<f64>> + Sync + 'a {
    capped_residuals(data, tol, f64::INFINITY, evaluations, deadline)
}

/// [`counted_residuals`] of the capped chi^2 (`cap`; plain when infinite).
fn capped_residuals<'a>(
    data: &'a [DataSet],
    tol: f64,
    cap: f64,
    evaluations: &'a AtomicU64,
    deadline: Option<Instant>,
) -> impl Fn(&[f64]) -> Option<Vec<f64>> + Sync + 'a {
    move |p: &[f64]| {
        if deadline.is_some_and(|d| Instant::now() >= d) {
            return None;
        }
        evaluations.fetch_add(1, Ordering::Relaxed);
        residuals_of(data, &from_vector(p).ok()?, tol, cap).ok()
    }
}

pub(super) fn to_vector(m: &BinaryModel) -> Vec<f64> {
    let l = m.trajectory.line();
    vec![
        m.s.ln(),
        m.q.ln(),
        l.alpha,
        l.u0,
        l.t0,
        l.te.ln(),
        m.rho.ln(),
    ]
}

pub(super) fn from_vector(p: &[f64]) -> Result<BinaryModel> {
    Ok(BinaryModel {
        s: p[0].exp(),
        q: p[1].exp(),
        rho: p[6].exp(),
        trajectory: Trajectory::straight(p[4], p[3], p[5].exp(), p[2])?,
    })
}

/// The same curve with `q <= 1`, `u0 >= 0` and alpha in `[0, 2 pi)`.
///
/// A minimiser free in `ln q` can walk past `q = 1`: the binary of mass ratio `1/q` is the same
/// lens with its masses named the other way, which is the lens turned by pi about the centre of
/// mass, so `(q, alpha) -> (1/q, alpha + pi)` (s, tE and rho are in units of the total mass's
/// Einstein radius and do not change). With `u0 < 0`, the mirror twin `(-u0, -alpha)` (the
/// static model's [`Trajectory::mirrored`]).
///
/// ```
/// use causeway::fit::model::{BinaryModel, Trajectory};
/// use causeway::fit::refine::canonical;
/// use causeway::source::LimbDarkening;
/// let m = BinaryModel { s: 0.9, q: 2.5, rho: 2e-3,
///     trajectory: Trajectory::straight(0.0, -0.1, 20.0, 1.0).unwrap() };
/// let c = canonical(&m);
/// assert!((c.q - 0.4).abs() < 1e-15 && c.trajectory.line().u0 == 0.1);
/// // The same light curve: the lens equation is symmetric under the masses' exchange with the
/// // frame turned by pi (common practice; from memory).
/// let times: Vec<f64> = (-40..=40).map(|k| k as f64 * 0.5).collect();
/// let a = m.magnifications(&times, LimbDarkening::Uniform, 1e-4).unwrap();
/// let b = c.magnifications(&times, LimbDarkening::Uniform, 1e-4).unwrap();
/// for (x, y) in a.iter().zip(&b) {
///     assert!((x / y - 1.0).abs() < 1e-3);
/// }
/// ```
pub fn canonical(model: &BinaryModel) -> BinaryModel {
    let (q, turn) = if model.q > 1.0 {
        (1.0 / model.q, PI)
    } else {
        (model.q, 0.0)
    };
    let l = *model.trajectory.line();
    let (u0, alpha) = if l.u0 < 0.0 {
        (-l.u0, -(l.alpha + turn))
    } else {
        (l.u0, l.alpha + turn)
    };
    BinaryModel {
        q,
        trajectory: Trajectory::straight(l.t0, u0, l.te, alpha.rem_euclid(TAU))
            .expect("a valid trajectory stays valid"),
        ..*model
    }
}

/// Refines `start` by minimising the exact chi^2 (relative magnification tolerance `tol`),
/// then measures the curvature at the minimum.
pub fn refine(data: &[DataSet], start: &BinaryModel, tol: f64, max_iters: u64) -> Result<Refined> {
    let mut r = refine_until(data, start, tol, max_iters, true, f64::INFINITY, None)?;
    r.sigma = uncertainties(data, &r.model, tol, None);
    Ok(r)
}

/// The minimiser's steps at `model`: simplex steps; Levenberg-Marquardt's Jacobian steps are
/// at most a fiftieth of them (shortened to the data: [`super::optimize::STEP_CHANGE`]), the
/// curvature's a twentieth.
pub(super) fn steps(model: &BinaryModel) -> [f64; 7] {
    let l = model.trajectory.line();
    [
        0.02,
        0.1,
        0.01,
        0.02 * l.u0.abs().max(0.01),
        0.005 * l.te,
        0.02,
        0.1,
    ]
}

/// [`refine`] without the curvature (the uncertainties are NaN: see [`uncertainties`]), with
/// the simplex stages and the closing pass ([`close_in`]) only when `simplex` (without them,
/// Levenberg-Marquardt alone: enough from a start already at a minimum), also from the end of
/// a Levenberg-Marquardt pass on the capped chi^2 when `cap` is finite (the search's
/// [`super::search::GridRule::point_cap`]: see the module documentation), stopped at `deadline`: from then on every trial counts as
/// infeasible, so each stage ends at once with the best model it had.
///
/// The same as [`first_pass`] followed by [`FirstPass::finish`].
pub fn refine_until(
    data: &[DataSet],
    start: &BinaryModel,
    tol: f64,
    max_iters: u64,
    simplex: bool,
    cap: f64,
    deadline: Option<Instant>,
) -> Result<Refined> {
    first_pass(data, start, tol, max_iters, simplex, cap, deadline)?.finish(data, deadline)
}

/// A refinement after its first Levenberg-Marquardt passes (see [`first_pass`]).
#[derive(Debug, Clone)]
pub struct FirstPass {
    /// The start with the radius of the ladder ([`ladder_start`]).
    start: BinaryModel,
    /// The end of the passes, in the minimiser's coordinates, and its chi^2.
    end: super::optimize::Minimum,
    tol: f64,
    max_iters: u64,
    simplex: bool,
    evaluations: u64,
}

impl FirstPass {
    /// The chi^2 reached (at the search stages' tolerance: [`COARSE_TOL`] when coarser than the
    /// one asked for and the simplex stages follow).
    pub fn chi2(&self) -> f64 {
        self.end.value
    }

    /// The rest of [`refine_until`] from here: the simplex stages, Levenberg-Marquardt again
    /// and the closing pass when the first pass was made with `simplex`, then the exact chi^2
    /// at the end.
    pub fn finish(self, data: &[DataSet], deadline: Option<Instant>) -> Result<Refined> {
        let FirstPass {
            start,
            end,
            tol,
            max_iters,
            simplex,
            evaluations,
        } = self;
        let evaluations = AtomicU64::new(evaluations);
        let late = || deadline.is_some_and(|d| Instant::now() >= d);
        let coarse = if simplex { tol.max(COARSE_TOL) } else { tol };
        let step = steps(&start);
        let h: Vec<f64> = step.iter().map(|s| 0.02 * s).collect();
        let lm_iters = LM_ITERATIONS.min(max_iters.max(1));
        // The simplex from there: stop when its chi^2 values agree to 0.01; start afresh from
        // the minimum (up to four rounds) while that still gains more than 0.1.
        let objective = |p: &[f64]| {
            if late() {
                return INFEASIBLE;
            }
            evaluations.fetch_add(1, Ordering::Relaxed);
            match from_vector(p) {
                Ok(m) => exact_chi2(data, &m, coarse).map_or(INFEASIBLE, |c| c.0),
                Err(_) => INFEASIBLE,
            }
        };
        let mut found = end;
        if simplex {
            let polished = minimize(&objective, &found.x, &step, 0.01, max_iters)?;
            if polished.value < found.value {
                found = polished;
            }
        }
        for _ in 0..3 {
            if late() || !simplex {
                break;
            }
            let again = minimize(&objective, &found.x, &step, 0.01, max_iters)?;
            let gain = found.value - again.value;
            if gain > 0.0 {
                found = again;
            }
            if gain <= 0.1 {
                break;
            }
        }
        // A last Levenberg-Marquardt pass converges on the minimum the simplex stopped near.
        if simplex {
            let exact = counted_residuals(data, tol, &evaluations, deadline);
            found.value = exact(&found.x).map_or(INFEASIBLE, |r| r.iter().map(|v| v * v).sum());
            if let Ok(last) = least_squares(&exact, &found.x, &h, 1e-3, lm_iters) {
                if last.value < found.value {
                    found = last;
                }
            }
        }
        let x = if simplex {
            close_in(data, &found.x, tol, lm_iters, &evaluations, deadline)
        } else {
            found.x
        };
        let model = canonical(&from_vector(&x)?);
        let (chi2_min, fluxes) = exact_chi2(data, &model, tol)?;
        Ok(Refined {
            model,
            sigma: [f64::NAN; 7],
            chi2: chi2_min,
            fluxes,
            evaluations: evaluations.load(Ordering::Relaxed) + 1,
        })
    }
}

/// The first stages of [`refine_until`] (same arguments): the radius of the ladder, then
/// Levenberg-Marquardt on the plain chi^2 and, with a finite `cap`, also from the end of a pass
/// on the capped chi^2, the lower plain chi^2 kept. Its chi^2 ([`FirstPass::chi2`]) tells a
/// start worth the simplex stages from one that is not (see
/// [`super::minima::refine_models`]).
pub fn first_pass(
    data: &[DataSet],
    start: &BinaryModel,
    tol: f64,
    max_iters: u64,
    simplex: bool,
    cap: f64,
    deadline: Option<Instant>,
) -> Result<FirstPass> {
    let evaluations = AtomicU64::new(0);
    let late = || deadline.is_some_and(|d| Instant::now() >= d);
    let start = ladder_start(data, start, tol.max(COARSE_TOL)).map_or(*start, |(m, _)| m);
    let step = steps(&start);
    let h: Vec<f64> = step.iter().map(|s| 0.02 * s).collect();
    let lm_iters = LM_ITERATIONS.min(max_iters.max(1));
    // Levenberg-Marquardt on the normalised residuals first: it follows the curved valleys of
    // a caustic crossing (s, tE and u0 trading against one another) that a simplex crawls
    // along. Its Jacobian steps are at most a fiftieth of the simplex's. The search stages
    // work at a coarser tolerance (contour integration costs less), the last
    // Levenberg-Marquardt pass (in [`FirstPass::finish`]) at the one asked for.
    let coarse = if simplex { tol.max(COARSE_TOL) } else { tol };
    let residuals = counted_residuals(data, coarse, &evaluations, deadline);
    let plain_from = |x0: &[f64]| -> Result<super::optimize::Minimum> {
        Ok(match least_squares(&residuals, x0, &h, 1e-4, lm_iters) {
            Ok(m) => m,
            // Out of time (or the start outside the model): the start itself.
            Err(_) => super::optimize::Minimum {
                value: exact_chi2(data, &from_vector(x0)?, tol)?.0,
                x: x0.to_vec(),
                evaluations: 1,
            },
        })
    };
    let x0 = to_vector(&start);
    let mut lm = plain_from(&x0)?;
    // With a cap, also from the end of a Levenberg-Marquardt pass on the capped chi^2: a
    // start the search's capped ranking chose can put a crossing a little off, its few points
    // misfit by hundreds of sigma, and they pull the plain minimiser into whatever aligns them
    // soonest. The capped pass can also settle on a partial fit that gives up points the
    // start fitted, so the lower plain chi^2 of the two is kept.
    if cap.is_finite() && !late() {
        let capped = capped_residuals(data, tol.max(COARSE_TOL), cap, &evaluations, deadline);
        if let Ok(m) = least_squares(&capped, &x0, &h, 1e-2, lm_iters) {
            let other = plain_from(&m.x)?;
            if other.value < lm.value {
                lm = other;
            }
        }
    }
    Ok(FirstPass {
        start,
        end: lm,
        tol,
        max_iters,
        simplex,
        evaluations: evaluations.load(Ordering::Relaxed),
    })
}

/// Levenberg-Marquardt from `x` (the minimiser's coordinates) with Jacobian steps of
/// [`CLOSING_STEP`] simplex steps on magnifications at a tenth of `tol`, at most `iterations`
/// Jacobians: the end, `x` itself when the pass could not start or `deadline` passed first.
///
/// The valley of a caustic crossing whose times the data fix can be narrower than the other
/// passes' Jacobian steps: their forward differences then point up its walls, and
/// Levenberg-Marquardt stops as at a minimum where chi^2 still falls along the valley (on an
/// invented wide planet, steadily over 1% in s and 3% in q, 60 in chi^2 down to the truth).
/// Steps twenty times smaller follow it; the finer tolerance keeps their differences above the
/// magnifications' own error. An end beyond [`CLOSING_REACH`] is not kept.
pub(super) fn close_in(
    data: &[DataSet],
    x: &[f64],
    tol: f64,
    iterations: u64,
    evaluations: &AtomicU64,
    deadline: Option<Instant>,
) -> Vec<f64> {
    let Ok(model) = from_vector(x) else {
        return x.to_vec();
    };
    let step = steps(&model);
    let h: Vec<f64> = step.iter().map(|s| CLOSING_STEP * s).collect();
    let residuals = counted_residuals(data, 0.1 * tol, evaluations, deadline);
    match least_squares(&residuals, x, &h, 1e-3, iterations) {
        Ok(m) if within_reach(x, &m.x, &step) => m.x,
        _ => x.to_vec(),
    }
}

/// Whether `to` is within [`CLOSING_REACH`] simplex steps `step` of `from` in every coordinate:
/// the closing pass closes in on a minimum nearby, and one that walks further is left to the
/// stages that search (it is not kept).
///
/// ```
/// use causeway::fit::refine::within_reach;
/// assert!(within_reach(&[0.0, 1.0], &[0.05, 1.2], &[0.02, 0.1]));
/// assert!(!within_reach(&[0.0, 1.0], &[0.3, 1.0], &[0.02, 0.1]));
/// ```
pub fn within_reach(from: &[f64], to: &[f64], step: &[f64]) -> bool {
    from.iter()
        .zip(to)
        .zip(step)
        .all(|((a, b), s)| (a - b).abs() <= CLOSING_REACH * s)
}

/// `start` with the radius of [`RHO_LADDER`] times its own that gives the least exact chi^2
/// (magnification tolerance `tol`), and that chi^2; `None` when none can be evaluated.
pub fn ladder_start(data: &[DataSet], start: &BinaryModel, tol: f64) -> Option<(BinaryModel, f64)> {
    RHO_LADDER
        .iter()
        .map(|f| BinaryModel {
            rho: start.rho * f,
            ..*start
        })
        .filter_map(|m| exact_chi2(data, &m, tol).ok().map(|(chi2, _)| (m, chi2)))
        .min_by(|a, b| a.1.total_cmp(&b.1))
}

/// Uncertainties of [`PARAMETERS`] at `model` (a minimum of the exact chi^2 at tolerance
/// `tol`) from the curvature of chi^2, NaN where it is not positive definite or `deadline`
/// passed. Differences of chi^2 of order 1 need chi^2 ten times finer than `tol`.
pub fn uncertainties(
    data: &[DataSet],
    model: &BinaryModel,
    tol: f64,
    deadline: Option<Instant>,
) -> [f64; 7] {
    let fine = |p: &[f64]| {
        if deadline.is_some_and(|d| Instant::now() >= d) {
            return INFEASIBLE;
        }
        match from_vector(p) {
            Ok(m) => exact_chi2(data, &m, 0.1 * tol).map_or(INFEASIBLE, |c| c.0),
            Err(_) => INFEASIBLE,
        }
    };
    let x = to_vector(model);
    let h: Vec<f64> = steps(model).iter().map(|s| 0.05 * s).collect();
    let steps = curvature_steps(&fine, &x, &h);
    // Where the data do not resolve the source (no point during a caustic crossing), chi^2 is
    // flat in rho and the full curvature is singular: the others are then measured at fixed
    // rho, and rho's uncertainty is left unknown.
    let cov = covariance(&fine, &x, &steps).or_else(|| {
        let fixed_rho = |p: &[f64]| fine(&[p, &x[6..]].concat());
        covariance(&fixed_rho, &x[..6], &steps[..6]).map(|mut c| {
            for row in &mut c {
                row.push(f64::NAN);
            }
            c.push(vec![f64::NAN; 7]);
            c
        })
    });
    // Natural parameters from the minimiser's: d s = s d(ln s), and so on.
    let scale = [
        model.s,
        model.q,
        1.0,
        1.0,
        1.0,
        model.trajectory.line().te,
        model.rho,
    ];
    let mut sigma = [f64::NAN; 7];
    if let Some(c) = cov {
        for i in 0..7 {
            sigma[i] = scale[i] * c[i][i].sqrt();
        }
    }
    sigma
}

/// Below this source radius a refined model counts as a point source: two radii below it are
/// one ([`same_minimum`]), and the report says the data did not fix it. Where nothing in the
/// data fixes rho, the minimiser's steps in `ln rho` run without bound (to underflow).
pub const POINT_SOURCE_RHO: f64 = 1e-6;

/// Whether two refined models are the same minimum: every parameter within three times the
/// larger of their uncertainties (at least a tenth of the fixed limits below), or, where those
/// are unknown, within fixed limits: 1% in s, 5% in q, 0.01 rad in alpha, 1% of max(u0, 0.01)
/// in u0, 1% of tE in t0 and tE, 10% of the larger rho in rho (at least
/// [`POINT_SOURCE_RHO`]).
///
/// ```
/// use causeway::fit::model::{BinaryModel, Trajectory};
/// use causeway::fit::refine::{same_minimum, Refined};
/// let at = |rho: f64| Refined {
///     model: BinaryModel { s: 1.27, q: 2.4e-3, rho,
///         trajectory: Trajectory::straight(9.6, 0.12, 25.0, 0.55).unwrap() },
///     sigma: [f64::NAN; 7], chi2: 100.0, fluxes: vec![], evaluations: 1 };
/// // Two point sources (ln rho run to underflow, and not quite) are one minimum...
/// assert!(same_minimum(&at(0.0), &at(4e-174)));
/// // ...two radii a tenth apart are too, and a radius twice another is not.
/// assert!(same_minimum(&at(2e-3), &at(2.1e-3)));
/// assert!(!same_minimum(&at(2e-3), &at(4e-3)));
/// ```
pub fn same_minimum(a: &Refined, b: &Refined) -> bool {
    let (ma, mb) = (&a.model, &b.model);
    let (la, lb) = (ma.trajectory.line(), mb.trajectory.line());
    let dalpha = {
        let d = (la.alpha - lb.alpha).rem_euclid(TAU);
        d.min(TAU - d)
    };
    let diffs = [
        (ma.s - mb.s).abs(),
        (ma.q - mb.q).abs(),
        dalpha,
        (la.u0 - lb.u0).abs(),
        (la.t0 - lb.t0).abs(),
        (la.te - lb.te).abs(),
        (ma.rho - mb.rho).abs(),
    ];
    let fallback = [
        0.01 * ma.s,
        0.05 * ma.q,
        0.01,
        0.01 * la.u0.abs().max(0.01),
        0.01 * la.te,
        0.01 * la.te,
        (0.1 * ma.rho.max(mb.rho)).max(POINT_SOURCE_RHO),
    ];
    diffs.iter().enumerate().all(|(i, &d)| {
        let sig = a.sigma[i].max(b.sigma[i]);
        let limit = if sig.is_finite() {
            (3.0 * sig).max(fallback[i] * 0.1)
        } else {
            fallback[i]
        };
        d <= limit
    }) && dalpha < PI
}

/// Whether two minima form a close/wide pair: separations on either side of 1 with
/// `|ln s1 + ln s2| < 0.25` (s2 about 1/s1) and mass ratios within a factor of 3.
///
/// ```
/// use causeway::fit::refine::close_wide;
/// assert!(close_wide((0.8, 1e-3), (1.25, 1.2e-3)));
/// assert!(!close_wide((0.8, 1e-3), (0.9, 1e-3)));
/// ```
pub fn close_wide(a: (f64, f64), b: (f64, f64)) -> bool {
    (a.0 < 1.0) != (b.0 < 1.0)
        && (a.0.ln() + b.0.ln()).abs() < 0.25
        && (a.1 / b.1).ln().abs() < 3f64.ln()
}
