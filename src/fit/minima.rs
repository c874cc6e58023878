//! From search outcomes to distinct refined minima: the (s, q) local minima of the search are
//! refined, minima that converge to the same model are merged, and close/wide pairs are marked.
//! (Error-bar scales are set by [`super::event`], from the robust spread of the residuals.)

use super::model::BinaryModel;
use super::photometry::DataSet;
use super::refine::{close_wide, first_pass, same_minimum, uncertainties, FirstPass, Refined};
use super::search::{local_minima, MapOutcome};
use crate::error::{Error, Result};
use rayon::prelude::*;
use std::time::{Duration, Instant};

/// One distinct minimum, ranked.
#[derive(Debug, Clone, PartialEq)]
pub struct Minimum {
    /// The refined model.
    pub refined: Refined,
    /// chi^2 of the map-based search candidate it started from.
    pub search_chi2: f64,
    /// Rank (1-based) of its close/wide partner, if one was found.
    pub partner: Option<usize>,
    /// chi^2 of the model over the data as given (every point, errors unscaled); equal to
    /// `refined.chi2` unless the fit clipped points or rescaled errors.
    pub chi2_as_given: f64,
}

/// How many search candidates are refined, and how.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct RefineOptions {
    /// Local minima of the search grid to refine (best first).
    pub candidates: usize,
    /// Relative tolerance of the exact magnifications.
    pub tol: f64,
    /// Iteration limit of each minimisation.
    pub max_iters: u64,
    /// Whether each refinement runs the simplex stages after Levenberg-Marquardt (see
    /// [`super::refine::refine_until`]).
    pub simplex: bool,
    /// Wall time allowed to one pass of refinements (all candidates together); when it runs
    /// out each refinement returns what it has.
    pub budget: Option<Duration>,
    /// Only starts whose search chi^2 is at most this many times the best start's are refined
    /// ([`promising`]), and only those whose exact chi^2 after the first pass is at most this
    /// many times the best's go on to the simplex stages ([`refine_models`]); infinity refines
    /// them all.
    pub within: f64,
    /// Perturbed restarts per round around the best minimum after it converged (see
    /// [`super::hop`]); 0 for none.
    pub hops: usize,
}

impl Default for RefineOptions {
    fn default() -> Self {
        RefineOptions {
            candidates: 4,
            tol: 1e-4,
            max_iters: 600,
            simplex: true,
            budget: Some(Duration::from_secs(600)),
            within: DEFAULT_WITHIN,
            hops: super::hop::HOPS,
        }
    }
}

impl RefineOptions {
    /// Checks the candidate count (at least 1) and [`RefineOptions::within`] (at least 1).
    pub fn validate(&self) -> Result<()> {
        if self.candidates == 0 {
            return Err(Error::input("refine: must be at least 1"));
        }
        if self.within.is_nan() || self.within < 1.0 {
            return Err(Error::input(format!(
                "refine_within: must be >= 1, got {}",
                self.within
            )));
        }
        Ok(())
    }
}

/// The default of [`RefineOptions::within`]: a start whose map-based chi^2 is more than twice
/// the best's has not, in the recovery benchmark, become the best minimum, and a wrong basin
/// can cost minutes of refinement (on one wide planet, a close start at s 0.79 with three
/// times the best's search chi^2 took four).
pub const DEFAULT_WITHIN: f64 = 2.0;

/// Keeps the starts whose search chi^2 is at most `within` times the best's (in their order);
/// returns how many were left out.
///
/// ```
/// use causeway::fit::minima::promising;
/// use causeway::fit::model::{BinaryModel, Trajectory};
/// let m = BinaryModel { s: 1.0, q: 1e-3, rho: 1e-3,
///     trajectory: Trajectory::straight(0.0, 0.1, 20.0, 0.5).unwrap() };
/// let mut starts = vec![(m, 3000.0), (m, 9000.0), (m, 5000.0)];
/// assert_eq!(promising(&mut starts, 2.0), 1);
/// assert_eq!(starts.iter().map(|s| s.1).collect::<Vec<_>>(), [3000.0, 5000.0]);
/// ```
pub fn promising(starts: &mut Vec<(BinaryModel, f64)>, within: f64) -> usize {
    let best = starts.iter().map(|s| s.1).fold(f64::INFINITY, f64::min);
    let before = starts.len();
    starts.retain(|s| s.1 <= within * best);
    before - starts.len()
}

/// Refines the best (s, q)-grid local minima of `outcomes` that are [`promising`] (in
/// parallel), merges those that
/// reach the same model, ranks them by chi^2, marks close/wide pairs and measures their
/// uncertainties ([`with_uncertainties`]). `cap` is the search's point cap
/// ([`super::search::GridRule::point_cap`]: see [`refine_models`]). `progress` is called
/// after each refinement.
pub fn refine_minima(
    data: &[DataSet],
    outcomes: &[MapOutcome],
    options: &RefineOptions,
    cap: f64,
    progress: &(dyn Fn() + Sync),
) -> Result<Vec<Minimum>> {
    let mut starts: Vec<(BinaryModel, f64)> = grid_starts(outcomes, options.candidates)?
        .into_iter()
        .map(|i| best_start(&outcomes[i]))
        .collect();
    promising(&mut starts, options.within);
    let minima = refine_models(data, &starts, options, cap, progress)?.minima;
    Ok(with_uncertainties(data, minima, options.tol, &|| {}))
}

/// The best `count` (s, q)-grid local minima of `outcomes` (indices, best first); an error when
/// no trajectory of any map could be evaluated.
pub fn grid_starts(outcomes: &[MapOutcome], count: usize) -> Result<Vec<usize>> {
    let starts: Vec<usize> = local_minima(outcomes).into_iter().take(count).collect();
    if starts.is_empty() {
        return Err(Error::Numerical(
            "search: no trajectory of any map could be evaluated".into(),
        ));
    }
    Ok(starts)
}

/// The best candidate of an outcome as a refinement's start: its model and search chi^2.
pub fn best_start(outcome: &MapOutcome) -> (BinaryModel, f64) {
    let c = outcome.candidates[0];
    (c.model, c.chi2)
}

/// The minima of one pass of refinements ([`refine_models`]) and the starts it gave up.
#[derive(Debug, Clone, PartialEq)]
pub struct Refinements {
    /// The distinct minima, best first.
    pub minima: Vec<Minimum>,
    /// The chi^2 after the first pass ([`super::refine::FirstPass::chi2`]) of each start
    /// given up there, in the order of the starts.
    pub given_up: Vec<f64>,
    /// The least chi^2 after the first pass.
    pub best_first: f64,
}

impl Refinements {
    /// One line saying which starts were given up after the first pass and why (`within`: the
    /// factor [`refine_models`] was given); `None` when none was.
    ///
    /// ```
    /// use causeway::fit::minima::Refinements;
    /// let pass = Refinements { minima: Vec::new(), given_up: vec![14249.5], best_first: 5209.8 };
    /// assert_eq!(
    ///     pass.given_up_note(2.0).unwrap(),
    ///     "refine: 1 start(s) given up after the first pass (chi2 14249.5 above 2 times the \
    ///      best's 5209.8)"
    /// );
    /// ```
    pub fn given_up_note(&self, within: f64) -> Option<String> {
        if self.given_up.is_empty() {
            return None;
        }
        let chi2: Vec<String> = self.given_up.iter().map(|c| format!("{c:.1}")).collect();
        Some(format!(
            "refine: {} start(s) given up after the first pass (chi2 {} above {} times the \
             best's {:.1})",
            self.given_up.len(),
            chi2.join(", "),
            within,
            self.best_first
        ))
    }
}

/// Refines each `(model, search chi^2)` of `starts` (in parallel, within the options' time
/// budget), merges those that reach the same model, ranks them by chi^2 and marks close/wide
/// pairs. Their uncertainties are left NaN (the curvature costs as much as a refinement's
/// last stage: [`with_uncertainties`] measures it once, on the final data). With the simplex
/// stages and a finite `cap` (the search's point cap, by which it ranked the starts), each
/// refinement also starts from the end of a pass on the capped chi^2 (see
/// [`super::refine::refine_until`]). `progress` is called after each refinement.
///
/// Every start first goes through [`super::refine::first_pass`]; a start whose chi^2 then
/// exceeds [`RefineOptions::within`] times the best start's is given up: the simplex stages
/// cost the most on such a model (on an invented close planet, two starts at the grid's edges
/// left the first pass at 2.7 times the best's chi^2 and took 460 s of a 500-second pass, their
/// exact chi^2 ten times as costly as the best's).
pub fn refine_models(
    data: &[DataSet],
    starts: &[(BinaryModel, f64)],
    options: &RefineOptions,
    cap: f64,
    progress: &(dyn Fn() + Sync),
) -> Result<Refinements> {
    let deadline = options.budget.map(|b| Instant::now() + b);
    let cap = if options.simplex { cap } else { f64::INFINITY };
    let firsts: Vec<FirstPass> = starts
        .par_iter()
        .map(|(model, _)| {
            first_pass(
                data,
                model,
                options.tol,
                options.max_iters,
                options.simplex,
                cap,
                deadline,
            )
        })
        .collect::<Result<_>>()?;
    let best_first = firsts
        .iter()
        .map(FirstPass::chi2)
        .fold(f64::INFINITY, f64::min);
    let (kept, given_up): (Vec<_>, Vec<_>) = firsts
        .into_iter()
        .zip(starts)
        .partition(|(f, _)| f.chi2() <= options.within * best_first);
    let given_up: Vec<f64> = given_up.iter().map(|(f, _)| f.chi2()).collect();
    for _ in &given_up {
        progress();
    }
    let refined: Vec<Minimum> = kept
        .into_par_iter()
        .map(|(first, (_, chi2))| {
            let r = first.finish(data, deadline);
            progress();
            r.map(|r| Minimum {
                chi2_as_given: r.chi2,
                refined: r,
                search_chi2: *chi2,
                partner: None,
            })
        })
        .collect::<Result<_>>()?;
    Ok(Refinements {
        minima: distinct(refined),
        given_up,
        best_first,
    })
}

/// `minima` with the uncertainties of each measured from the curvature of chi^2 over `data`
/// (magnification tolerance `tol`; in parallel), merged again where they now overlap, ranked,
/// with close/wide pairs marked. `progress` is called after each minimum.
pub fn with_uncertainties(
    data: &[DataSet],
    minima: Vec<Minimum>,
    tol: f64,
    progress: &(dyn Fn() + Sync),
) -> Vec<Minimum> {
    let measured = minima
        .into_par_iter()
        .map(|mut m| {
            m.refined.sigma = uncertainties(data, &m.refined.model, tol, None);
            progress();
            m
        })
        .collect();
    distinct(measured)
}

/// The distinct minima of `all`, best first: a minimum the same as a better one
/// ([`same_minimum`]) is dropped; close/wide partners are marked.
fn distinct(all: Vec<Minimum>) -> Vec<Minimum> {
    let mut order: Vec<usize> = (0..all.len()).collect();
    order.sort_by(|&a, &b| {
        all[a]
            .refined
            .chi2
            .total_cmp(&all[b].refined.chi2)
            .then(a.cmp(&b))
    });
    let mut minima: Vec<Minimum> = Vec::new();
    for i in order {
        if minima
            .iter()
            .all(|m| !same_minimum(&m.refined, &all[i].refined))
        {
            minima.push(Minimum {
                partner: None,
                ..all[i].clone()
            });
        }
    }
    for i in 0..minima.len() {
        let a = &minima[i].refined.model;
        minima[i].partner = (0..minima.len())
            .filter(|&j| j != i)
            .find(|&j| {
                let b = &minima[j].refined.model;
                close_wide((a.s, a.q), (b.s, b.q))
            })
            .map(|j| j + 1);
    }
    minima
}
