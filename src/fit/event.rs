//! The whole fit of an event as one call: data sets and maps in, ranked minima out.
//!
//! [`fit_event`] runs the stages in order, reporting each through [`Progress`]:
//!
//! 1. **Epoch.** Times are taken relative to the data's median time rounded to a whole day,
//!    so that data at JD 2459000 are fitted as well as data at 0; every time reported is
//!    back on the data's own scale.
//! 2. **Baseline.** The bounded single lens (see [`super::single::fit_baseline`]) on all data
//!    (the `delta_chi2` reference) and the search's seed: the single lens without the
//!    anomaly, its valley in `u0`, the `u0` range the data allow, and whether its timing can be
//!    trusted ([`Seed::of_baseline`]).
//! 3. **Timing.** With [`FitOptions::adaptive_timing`] (the default) the grid's timings follow
//!    the baseline: lines are also anchored on a localised anomaly ([`GridRule::timed`]); when
//!    the anomaly covers the peak, or the baseline could not fix `u0` or `tE`, each line is
//!    tried over a ladder of tE factors (0.5 to 2) and t0 shifts (-0.15 to 0.15 tE) and the whole
//!    u0 range the window allows. The per-map trajectory budget
//!    ([`GridRule::max_trajectories`]) then coarsens the lines rather than the timings.
//! 4. **Search** of every map ([`super::search`]); maps of the same (s, q) are merged.
//! 5. **Refinement** of the best (s, q) local minima with exact magnifications, within the
//!    time budget ([`RefineOptions::budget`]).
//! 6. **Noise.** At the best model, isolated outliers are clipped ([`FitOptions::clip_sigma`],
//!    rule in [`clip_outliers`]) and each data set's error bars are scaled by the robust spread
//!    of its normalised residuals (1.4826 times their median absolute value: for Gaussian
//!    noise the factor that brings chi^2 per degree of freedom to 1, but not inflated by an
//!    anomaly the model misses; [`FitOptions::rescale_errors`]); when either changed the data
//!    by more than 5%, every minimum is refined again on the cleaned, rescaled data (by
//!    Levenberg-Marquardt alone: it starts at a minimum).
//!
//! The result keeps the chi^2 the fit minimised (`refined.chi2`, on the cleaned, rescaled
//! data) and the chi^2 on the data as given ([`Minimum::chi2_as_given`]).

use super::fluxes::fit_fluxes;
use super::minima::{refine_minima, refine_models, Minimum, RefineOptions};
use super::model::{BinaryModel, Trajectory};
use super::photometry::DataSet;
use super::refine::exact_chi2;
use super::search::{
    merge_grid_points, search_maps, GridRule, MapOutcome, MapSource, Seed, ValleyPoint,
};
use super::single::{fit_baseline, BaselineOptions, SingleLensFit};
use crate::error::{Error, Result};
use crate::progress::Progress;
use std::time::Instant;

/// How [`fit_event`] runs.
#[derive(Debug, Clone, PartialEq)]
pub struct FitOptions {
    /// Time intervals `[start, end]` (days, on the data's scale) hidden from the single-lens
    /// baseline.
    pub exclude: Vec<(f64, f64)>,
    /// A baseline `(t0, u0, tE)` given instead of fitted.
    pub baseline: Option<(f64, f64, f64)>,
    /// The trajectory grid.
    pub rule: GridRule,
    /// Widen the grid's timings and u0 range from what the baseline could fix (step 3 of the
    /// module documentation).
    pub adaptive_timing: bool,
    /// The refinement.
    pub refine: RefineOptions,
    /// Clip isolated points beyond this many robust standard deviations at the best model;
    /// `None` keeps every point.
    pub clip_sigma: Option<f64>,
    /// Scale each data set's error bars to chi^2/dof = 1 at the best model and refine again.
    pub rescale_errors: bool,
}

impl Default for FitOptions {
    fn default() -> Self {
        FitOptions {
            exclude: Vec::new(),
            baseline: None,
            rule: GridRule::default(),
            adaptive_timing: true,
            refine: RefineOptions::default(),
            clip_sigma: Some(DEFAULT_CLIP_SIGMA),
            rescale_errors: true,
        }
    }
}

/// The default outlier threshold, in robust standard deviations.
pub const DEFAULT_CLIP_SIGMA: f64 = 5.0;
/// Largest fraction of a data set that clipping may remove.
pub const MAX_CLIPPED_FRACTION: f64 = 0.02;
/// The tE factors tried on every line when the baseline cannot be trusted.
pub const WIDE_TE_FACTORS: [f64; 5] = [0.5, 0.71, 1.0, 1.41, 2.0];
/// The t0 shifts (in units of the line's tE) tried when the baseline cannot be trusted.
pub const WIDE_T0_SHIFTS: [f64; 3] = [-0.15, 0.0, 0.15];

/// A point the fit left out as an outlier.
#[derive(Debug, Clone, PartialEq)]
pub struct Clipped {
    /// Index of its data set (input order).
    pub set: usize,
    /// Its time (days, on the data's scale).
    pub time: f64,
    /// Its line in the data file.
    pub line: usize,
    /// Its residual in robust standard deviations of its set, signed (data above the model > 0).
    pub residual: f64,
}

/// What [`fit_event`] found.
#[derive(Debug, Clone, PartialEq)]
pub struct FitResult {
    /// The single-lens fit of all data (the `delta_chi2` reference), times on the data's scale.
    pub single: SingleLensFit,
    /// The search's seed, times on the data's scale.
    pub seed: Seed,
    /// The rule the search ran with (after the adaptive timing).
    pub rule: GridRule,
    /// What the search found on each (s, q).
    pub outcomes: Vec<MapOutcome>,
    /// The distinct refined minima, best first.
    pub minima: Vec<Minimum>,
    /// The error-bar scale of each data set applied in the last refinement (1 when not
    /// rescaled).
    pub error_scales: Vec<f64>,
    /// The points left out as outliers.
    pub clipped: Vec<Clipped>,
    /// The data the last refinement fitted: as given, less the clipped points, with the error
    /// scales set.
    pub data: Vec<DataSet>,
    /// Remarks for the user, in the order they arose.
    pub notes: Vec<String>,
    /// Wall time of the search and of the refinements, seconds.
    pub seconds: (f64, f64),
}

/// Fits `data` with the binary-lens maps of `maps`: the whole job of the module documentation.
///
/// ```no_run
/// use causeway::fit::event::{fit_event, FitOptions};
/// use causeway::fit::photometry::DataSet;
/// use causeway::fit::search::{maps_of_store, MapSource};
/// use causeway::progress::Silent;
/// use causeway::store::Store;
/// let data = vec![DataSet::read("site-a.csv".as_ref(), 22.0).unwrap()];
/// let maps = maps_of_store(&Store::open("maps".as_ref()).unwrap()).unwrap();
/// let fit = fit_event(&data, MapSource::Files(&maps), &FitOptions::default(), &Silent).unwrap();
/// println!("best chi2 {}", fit.minima[0].refined.chi2);
/// ```
pub fn fit_event(
    data: &[DataSet],
    maps: MapSource,
    options: &FitOptions,
    progress: &dyn Progress,
) -> Result<FitResult> {
    validate(data, &maps, options)?;
    let mut notes = Vec::new();
    let mut note = |m: String| {
        progress.note(&m);
        notes.push(m);
    };
    let epoch = epoch_of(data);
    let local: Vec<DataSet> = data.iter().map(|d| shifted(d, -epoch)).collect();

    progress.start("baseline", 0);
    let (single, mut seed, trusted) = baseline(data, &local, options, epoch, &mut note)?;
    progress.finish(&format!(
        "baseline: t0 = {:.4}, u0 = {:.5}, tE = {:.3} d (all data: chi2 {:.1} for {} points)",
        seed.t0 + epoch,
        seed.u0,
        seed.te,
        single.chi2,
        single.points
    ));
    let mut rule = options.rule.clone();
    if options.adaptive_timing {
        adapt_timing(&mut rule, &mut seed, trusted, &mut note);
    }

    progress.start("search", maps.len() as u64);
    let started = Instant::now();
    let outcomes = search_maps(&local, &seed, maps, &rule, &|| progress.advance(1))?;
    let outcomes = merge_grid_points(outcomes, rule.keep);
    let search_seconds = started.elapsed().as_secs_f64();
    let trajectories: u64 = outcomes.iter().map(|o| o.trajectories).sum();
    progress.finish(&format!(
        "search: {} maps, {trajectories} trajectories in {search_seconds:.1} s",
        maps.len()
    ));
    let mut seen: Vec<&String> = Vec::new();
    for n in outcomes.iter().flat_map(|o| &o.notes) {
        if !seen.contains(&n) && seen.len() < 5 {
            seen.push(n);
        }
    }
    for n in seen {
        note(n.clone());
    }

    let started = Instant::now();
    progress.start("refine", options.refine.candidates as u64);
    let mut minima = refine_minima(&local, &outcomes, &options.refine, &|| progress.advance(1))?;
    progress.finish(&format!("refine: best chi2 {:.1}", minima[0].refined.chi2));
    let (fitted, clipped, scales) = clean(&local, &minima[0].refined.model, options)?;
    let changed = !clipped.is_empty() || scales.iter().any(|k| (k - 1.0).abs() > 0.05);
    if changed {
        note(format!(
            "noise: {} outliers clipped; error scales {}; refining again",
            clipped.len(),
            scales
                .iter()
                .map(|k| format!("{k:.3}"))
                .collect::<Vec<_>>()
                .join(", ")
        ));
        let starts: Vec<(BinaryModel, f64)> = minima
            .iter()
            .map(|m| (m.refined.model, m.search_chi2))
            .collect();
        progress.start("refine again", starts.len() as u64);
        // From minima already found, Levenberg-Marquardt alone converges.
        let again = RefineOptions {
            simplex: false,
            ..options.refine
        };
        minima = refine_models(&fitted, &starts, &again, &|| progress.advance(1))?;
        progress.finish(&format!(
            "refine again: best chi2 {:.1} for {} points",
            minima[0].refined.chi2,
            fitted.iter().map(DataSet::len).sum::<usize>()
        ));
    }
    for m in &mut minima {
        m.chi2_as_given = exact_chi2(&local, &m.refined.model, options.refine.tol)?.0;
    }
    let refine_seconds = started.elapsed().as_secs_f64();

    // Back to the data's time scale.
    let unshift = |m: &BinaryModel| -> Result<BinaryModel> {
        let l = m.trajectory.line();
        Ok(BinaryModel {
            trajectory: Trajectory::straight(l.t0 + epoch, l.u0, l.te, l.alpha)?,
            ..*m
        })
    };
    for m in &mut minima {
        m.refined.model = unshift(&m.refined.model)?;
    }
    let mut outcomes = outcomes;
    for o in &mut outcomes {
        for c in &mut o.candidates {
            c.model = unshift(&c.model)?;
        }
    }
    seed.t0 += epoch;
    for v in &mut seed.valley {
        v.t0 += epoch;
    }
    seed.anomaly = seed.anomaly.map(|t| t + epoch);
    let mut single = single;
    single.t0 += epoch;
    Ok(FitResult {
        single,
        seed,
        rule,
        outcomes,
        minima,
        error_scales: if options.rescale_errors {
            scales
        } else {
            vec![1.0; data.len()]
        },
        clipped: clipped
            .into_iter()
            .map(|c| Clipped {
                time: c.time + epoch,
                ..c
            })
            .collect(),
        data: fitted.iter().map(|d| shifted(d, epoch)).collect(),
        notes,
        seconds: (search_seconds, refine_seconds),
    })
}

fn validate(data: &[DataSet], maps: &MapSource, options: &FitOptions) -> Result<()> {
    if data.is_empty() {
        return Err(Error::input("fit: no data set given"));
    }
    if maps.is_empty() {
        return Err(Error::input("fit: the library has no maps"));
    }
    options.rule.validate()?;
    if let Some(c) = options.clip_sigma {
        if !(c.is_finite() && c >= 2.0) {
            return Err(Error::input(format!("--clip: must be >= 2 sigma, got {c}")));
        }
    }
    if options.refine.candidates == 0 {
        return Err(Error::input("--refine: must be at least 1"));
    }
    Ok(())
}

/// The data's median time rounded to a whole day.
fn epoch_of(data: &[DataSet]) -> f64 {
    let mut t: Vec<f64> = data.iter().flat_map(|d| d.times.iter().copied()).collect();
    t.sort_by(f64::total_cmp);
    t[t.len() / 2].round()
}

/// `set` with `dt` added to every time.
fn shifted(set: &DataSet, dt: f64) -> DataSet {
    DataSet {
        times: set.times.iter().map(|t| t + dt).collect(),
        ..set.clone()
    }
}

/// The single lens of all data (less the excluded times), the search's seed, and whether the
/// seed's timing can be trusted (the anomaly does not cover the peak, no bound of t0, u0 or
/// tE was hit).
fn baseline(
    given: &[DataSet],
    local: &[DataSet],
    options: &FitOptions,
    epoch: f64,
    note: &mut dyn FnMut(String),
) -> Result<(SingleLensFit, Seed, bool)> {
    // Fitted on the data's own times (it keeps its own epoch), so that its notes name them.
    let steer = BaselineOptions {
        exclude: options.exclude.clone(),
        given: options.baseline,
        ..BaselineOptions::default()
    };
    let mut baseline = fit_baseline(given, &steer)?;
    for n in &baseline.notes {
        note(format!("baseline: {n}"));
    }
    baseline.full.t0 -= epoch;
    baseline.fit.t0 -= epoch;
    let back = |(a, b): (f64, f64)| (a - epoch, b - epoch);
    baseline.anomaly = baseline.anomaly.map(back);
    baseline.masked = baseline.masked.iter().copied().map(back).collect();
    let visible: Vec<DataSet> = local
        .iter()
        .map(|d| {
            steer
                .exclude
                .iter()
                .map(|&s| back(s))
                .fold(d.clone(), |d, (a, b)| d.without(a, b))
        })
        .collect();
    let mut seed = Seed::of_baseline(&baseline, &visible);
    let trusted = options.baseline.is_some()
        || !(baseline.peak_covered || baseline.fit.bounds.iter().any(|b| b.is_shape()));
    if !trusted {
        seed.u0_bounds = Some(baseline.u0_range);
        note(format!(
            "baseline: its timing is not trusted (the anomaly at t = {:.3} covers the peak, or \
             a bound was hit)",
            seed.anomaly.unwrap_or(f64::NAN) + epoch
        ));
    }
    Ok((baseline.full, seed, trusted))
}

/// Step 3 of the module documentation.
fn adapt_timing(rule: &mut GridRule, seed: &mut Seed, trusted: bool, note: &mut dyn FnMut(String)) {
    if seed.anomaly.is_some() {
        rule.timed = true;
    }
    if !trusted {
        if rule.te_factors == [1.0] {
            rule.te_factors = WIDE_TE_FACTORS.to_vec();
        }
        if rule.t0_shifts == [0.0] {
            rule.t0_shifts = WIDE_T0_SHIFTS.to_vec();
        }
        let hi = seed
            .valley
            .iter()
            .map(|v: &ValleyPoint| v.u0)
            .fold(3.0 * seed.u0, f64::max);
        seed.u0_bounds = Some((0.0, hi.max(0.3)));
        note(format!(
            "search: every line tried at {} timings, u0 from 0 to {:.3}",
            rule.timings_per_line(),
            hi.max(0.3)
        ));
    }
}

/// The data cleaned at `model`: isolated outliers clipped (when asked) and each set's error
/// scale set (when asked). Returns the cleaned sets, the clipped points and the scales.
fn clean(
    data: &[DataSet],
    model: &BinaryModel,
    options: &FitOptions,
) -> Result<(Vec<DataSet>, Vec<Clipped>, Vec<f64>)> {
    let mut cleaned = Vec::with_capacity(data.len());
    let mut clipped = Vec::new();
    let mut kept_residuals = Vec::with_capacity(data.len());
    for (k, set) in data.iter().enumerate() {
        let a = model.magnifications(&set.times, set.limb_darkening, options.refine.tol)?;
        let f = fit_fluxes(set, &a);
        let r: Vec<f64> = (0..set.len())
            .map(|i| (set.flux[i] - f.fs * a[i] - f.fb) / set.sigma(i))
            .collect();
        let out = match options.clip_sigma {
            Some(c) => clip_outliers(&r, c),
            None => Vec::new(),
        };
        let scale = robust_scale(&r);
        clipped.extend(out.iter().map(|&i| Clipped {
            set: k,
            time: set.times[i],
            line: set.lines[i],
            residual: r[i] / scale,
        }));
        let keep: Vec<usize> = (0..set.len()).filter(|i| !out.contains(i)).collect();
        kept_residuals.push(keep.iter().map(|&i| r[i]).collect::<Vec<f64>>());
        cleaned.push(set.subset(&keep));
    }
    // Each set's scale is the robust spread of its kept residuals: a model that misses an
    // anomaly leaves large residuals on a run of points, which would inflate chi2/dof and
    // hide the miss, but hardly moves the median.
    let scales = if options.rescale_errors {
        kept_residuals.iter().map(|r| robust_scale(r)).collect()
    } else {
        vec![1.0; data.len()]
    };
    for (d, &k) in cleaned.iter_mut().zip(&scales) {
        d.error_scale *= k;
    }
    Ok((cleaned, clipped, scales))
}

/// 1.4826 times the median absolute normalised residual: the standard deviation of Gaussian
/// residuals, unmoved by a few outliers (common practice).
fn robust_scale(r: &[f64]) -> f64 {
    let mut a: Vec<f64> = r.iter().map(|v| v.abs()).collect();
    a.sort_by(f64::total_cmp);
    (1.4826 * a[a.len() / 2]).max(1e-12)
}

/// The indices of the outliers among the normalised residuals `r` (in time order) of one data
/// set: points beyond `sigma` robust standard deviations ([`robust_scale`]) whose neighbours
/// in time are not beyond `sigma / 2` on the same side (a run of deviant points is a feature
/// the model misses, not noise), the largest first, at most [`MAX_CLIPPED_FRACTION`] of the
/// set. Returned in increasing order.
///
/// ```
/// use causeway::fit::event::clip_outliers;
/// let mut r = vec![0.5, -1.0, 0.3, 40.0, -0.2, 1.1, -0.7, 0.9, 0.1, -0.4];
/// r.extend([0.2; 90]);
/// assert_eq!(clip_outliers(&r, 5.0), vec![3]);
/// // A run of two deviant points stays.
/// r[4] = 30.0;
/// assert!(clip_outliers(&r, 5.0).is_empty());
/// ```
pub fn clip_outliers(r: &[f64], sigma: f64) -> Vec<usize> {
    let scale = robust_scale(r);
    let z: Vec<f64> = r.iter().map(|v| v / scale).collect();
    let companion = |i: usize, j: usize| z[j].signum() == z[i].signum() && z[j].abs() > 0.5 * sigma;
    let mut out: Vec<usize> = (0..z.len())
        .filter(|&i| {
            z[i].abs() > sigma
                && !(i > 0 && companion(i, i - 1))
                && !(i + 1 < z.len() && companion(i, i + 1))
        })
        .collect();
    out.sort_by(|&a, &b| z[b].abs().total_cmp(&z[a].abs()));
    out.truncate((MAX_CLIPPED_FRACTION * z.len() as f64).floor() as usize);
    out.sort_unstable();
    out
}
