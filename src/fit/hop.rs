//! Hops out of a nearby false minimum: Levenberg-Marquardt from seeded random perturbations of
//! the best minimum, kept when one ends lower.
//!
//! A caustic crossing makes chi^2 ragged: the times at which the source's limb enters and
//! leaves a caustic trade against s, q, alpha and t0, and a local minimiser can stop in a
//! minimum a fraction of a step from a deeper one (on invented stellar binaries, 35 and 170
//! above the truth, with every parameter within one simplex step of it). Each round draws
//! [`HOPS`] starts around the best model, Gaussian in the minimiser's coordinates with
//! standard deviations of [`HOP_SCALES`] times the refinement's simplex steps, runs a short
//! Levenberg-Marquardt ([`HOP_ITERATIONS`]) from each at the coarse tolerance (in parallel),
//! and converges the lowest, at the coarse tolerance and then at the one asked for; the round is kept when that lowers chi^2 by more than
//! [`HOP_GAIN`], and rounds go on (at most [`HOP_ROUNDS`]) while they gain. The draws are
//! seeded, so the result does not depend on the thread count.
//!
//! Two minima found near one another, on either side of a ridge, can hide a deeper one between
//! them (on an invented wide planet, minima at s 1.57 and 1.62 either side of the truth at
//! 1.60, 255 and 120 above it): each round also starts from [`BRIDGE_FRACTIONS`] of the way
//! from the best to every [`nearby`] minimum.

use super::minima::{Minimum, RefineOptions};
use super::model::BinaryModel;
use super::optimize::least_squares;
use super::photometry::DataSet;
use super::refine::{
    canonical, close_in, counted_residuals, exact_chi2, from_vector, steps, to_vector, Refined,
    COARSE_TOL, LM_ITERATIONS,
};
use crate::error::Result;
use crate::progress::Progress;
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, StandardNormal};
use rayon::prelude::*;
use std::sync::atomic::{AtomicU64, Ordering};
use std::time::Instant;

/// Starts drawn in each round.
pub const HOPS: usize = 8;
/// Rounds at most.
pub const HOP_ROUNDS: usize = 3;
/// Spreads of the draws, in simplex steps, taken in turn (near hops and far ones).
pub const HOP_SCALES: [f64; 2] = [0.5, 1.5];
/// Jacobians each hop may take: enough to fall into a basin; the lowest end is then converged
/// with the refinement's [`LM_ITERATIONS`].
pub const HOP_ITERATIONS: u64 = 15;
/// Where on the way from the best minimum to a nearby one the bridge starts lie.
pub const BRIDGE_FRACTIONS: [f64; 3] = [0.25, 0.5, 0.75];
/// The least gain in chi^2 for which a round is kept.
pub const HOP_GAIN: f64 = 1.0;

/// How [`hop`] draws its starts and when it stops.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct HopPlan {
    /// Random starts per round.
    pub hops: usize,
    /// Seed of the draws (round k uses `seed + k`).
    pub seed: u64,
    /// No round starts, and the running one ends at once, after this.
    pub deadline: Option<Instant>,
}

/// What [`hop`] did.
#[derive(Debug, Clone, PartialEq)]
pub struct Hopped {
    /// The best model found (`start` itself when no round gained).
    pub refined: Refined,
    /// Rounds kept.
    pub kept: usize,
    /// Rounds run.
    pub rounds: usize,
}

/// Hops from `start` (a refined minimum of the exact chi^2 at tolerance `tol` over `data`) with
/// `plan.hops` starts per round (see the module documentation), and from points on the way to each
/// of `neighbours` (other minima) that is [`nearby`], until a round does not gain or
/// `plan.deadline` passes, calling `round_done` after each round. The uncertainties of the result
/// are NaN (measure them at the end).
///
/// ```no_run
/// # use causeway::fit::{hop::*, photometry::DataSet, refine::refine_until, model::*};
/// # let data: Vec<DataSet> = vec![];
/// # let start = BinaryModel { s: 1.0, q: 1e-3, rho: 1e-3,
/// #     trajectory: Trajectory::straight(0.0, 0.1, 20.0, 0.5).unwrap() };
/// let first = refine_until(&data, &start, 1e-4, 600, true, f64::INFINITY, None).unwrap();
/// let plan = HopPlan { hops: 8, seed: 1, deadline: None };
/// let hopped = hop(&data, &first, &[], 1e-4, &plan, &|| {}).unwrap();
/// assert!(hopped.refined.chi2 <= first.chi2);
/// ```
pub fn hop(
    data: &[DataSet],
    start: &Refined,
    neighbours: &[BinaryModel],
    tol: f64,
    plan: &HopPlan,
    round_done: &dyn Fn(),
) -> Result<Hopped> {
    let HopPlan {
        hops,
        seed,
        deadline,
    } = *plan;
    let evaluations = AtomicU64::new(0);
    let late = || deadline.is_some_and(|d| Instant::now() >= d);
    let residuals_to = |tol: f64| counted_residuals(data, tol, &evaluations, deadline);
    let coarse = tol.max(COARSE_TOL);
    let mut best = start.clone();
    let (mut kept, mut rounds) = (0, 0);
    while rounds < HOP_ROUNDS && hops > 0 && !late() {
        let x0 = to_vector(&best.model);
        let step = steps(&best.model);
        let h: Vec<f64> = step.iter().map(|s| 0.02 * s).collect();
        let mut rng = ChaCha8Rng::seed_from_u64(seed.wrapping_add(rounds as u64));
        let mut draws: Vec<Vec<f64>> = neighbours
            .iter()
            .filter(|m| nearby(&best.model, m))
            .flat_map(|m| {
                let x1 = to_vector(m);
                BRIDGE_FRACTIONS.map(|f| x0.iter().zip(&x1).map(|(a, b)| a + f * (b - a)).collect())
            })
            .collect();
        draws.extend((0..hops).map(|k| {
            let spread = HOP_SCALES[k % HOP_SCALES.len()];
            x0.iter()
                .zip(&step)
                .map(|(x, s)| {
                    let z: f64 = StandardNormal.sample(&mut rng);
                    x + spread * s * z
                })
                .collect()
        }));
        rounds += 1;
        let residuals = residuals_to(coarse);
        let _report = Finally(round_done);
        let ends: Vec<(f64, Vec<f64>)> = draws
            .par_iter()
            .filter_map(|x| {
                let m = least_squares(&residuals, x, &h, 1e-2, HOP_ITERATIONS).ok()?;
                Some((m.value, m.x))
            })
            .collect();
        let Some((_, x)) = ends.into_iter().min_by(|a, b| a.0.total_cmp(&b.0)) else {
            break;
        };
        let Ok(end) = least_squares(&residuals, &x, &h, 1e-3, LM_ITERATIONS) else {
            break;
        };
        if end.value >= exact_chi2(data, &best.model, coarse)?.0 - HOP_GAIN {
            break;
        }
        let x = end.x;
        let exact = residuals_to(tol);
        let x = least_squares(&exact, &x, &h, 1e-3, LM_ITERATIONS).map_or(x, |m| m.x);
        let x = close_in(data, &x, tol, LM_ITERATIONS, &evaluations, deadline);
        let model = canonical(&from_vector(&x)?);
        let (chi2, fluxes) = exact_chi2(data, &model, tol)?;
        if chi2 >= best.chi2 - HOP_GAIN {
            break;
        }
        best = Refined {
            model,
            sigma: [f64::NAN; 7],
            chi2,
            fluxes,
            evaluations: best.evaluations,
        };
        kept += 1;
    }
    best.evaluations += evaluations.load(Ordering::Relaxed);
    Ok(Hopped {
        refined: best,
        kept,
        rounds,
    })
}

/// Whether `b` is near enough to `a` for a bridge: separations within 10%, mass ratios within a
/// factor of 4, directions within 0.2 rad and impact parameters of one sign (the same branch of
/// the valley of one trajectory).
///
/// ```
/// use causeway::fit::hop::nearby;
/// use causeway::fit::model::{BinaryModel, Trajectory};
/// let m = |s: f64, q: f64, alpha: f64| BinaryModel { s, q, rho: 2e-3,
///     trajectory: Trajectory::straight(0.0, 0.25, 35.0, alpha).unwrap() };
/// assert!(nearby(&m(1.62, 1.1e-3, 3.40), &m(1.57, 8.4e-4, 3.41)));
/// assert!(!nearby(&m(1.62, 1.1e-3, 3.40), &m(0.62, 1.1e-3, 3.40)));
/// assert!(!nearby(&m(1.62, 1.1e-3, 3.40), &m(1.62, 1.1e-3, 0.40)));
/// ```
pub fn nearby(a: &BinaryModel, b: &BinaryModel) -> bool {
    let (la, lb) = (a.trajectory.line(), b.trajectory.line());
    let turn = (la.alpha - lb.alpha).rem_euclid(std::f64::consts::TAU);
    (a.s / b.s).ln().abs() < 0.1
        && (a.q / b.q).ln().abs() < 4f64.ln()
        && turn.min(std::f64::consts::TAU - turn) < 0.2
        && (la.u0 >= 0.0) == (lb.u0 >= 0.0)
        && a != b
}

/// Calls its function when dropped: a round reports its end however it ends.
struct Finally<'a>(&'a dyn Fn());

impl Drop for Finally<'_> {
    fn drop(&mut self) {
        (self.0)()
    }
}

/// The seed of the hops' draws (any fixed value: results must not depend on the run).
pub const HOP_SEED: u64 = 0x686f_7073;

/// [`hop`] from the best of `minima` (ranked best first) with [`RefineOptions::hops`] starts per
/// round within [`RefineOptions::budget`], reporting the rounds through `progress`; the best
/// minimum is replaced when a round gained. Returns a note for the user when one did.
pub fn hop_best(
    data: &[DataSet],
    minima: &mut [Minimum],
    options: &RefineOptions,
    progress: &dyn Progress,
) -> Result<Option<String>> {
    if options.hops == 0 || minima.is_empty() {
        return Ok(None);
    }
    let deadline = options.budget.map(|b| Instant::now() + b);
    progress.start("hop", HOP_ROUNDS as u64);
    let before = minima[0].refined.chi2;
    let others: Vec<BinaryModel> = minima[1..].iter().map(|m| m.refined.model).collect();
    let hopped = hop(
        data,
        &minima[0].refined,
        &others,
        options.tol,
        &HopPlan {
            hops: options.hops,
            seed: HOP_SEED,
            deadline,
        },
        &|| progress.advance(1),
    )?;
    progress.finish(&format!(
        "hop: {} rounds of {} restarts, best chi2 {before:.1} -> {:.1}",
        hopped.rounds, options.hops, hopped.refined.chi2
    ));
    if hopped.kept == 0 {
        return Ok(None);
    }
    minima[0].refined = hopped.refined;
    Ok(Some(format!(
        "hop: restarts around the best minimum found a deeper one nearby (chi2 {:.1} lower)",
        before - minima[0].refined.chi2
    )))
}
