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
//!    tried over a ladder of tE factors (0.5 to 2) and t0 shifts (-0.15 to 0.15 tE) about the
//!    best single lens at its own `u0` (the valley widened from 0.001 to the largest `u0`
//!    searched: [`Seed::widen`]), over the whole u0 range the window allows. When the data
//!    show a caustic crossing (a sharp rise and a later sharp drop), lines through a caustic
//!    are also timed on those two times ([`super::search::anchor`]). The per-map
//!    trajectory budget ([`GridRule::max_trajectories`]) then coarsens the lines rather than
//!    the timings.
//!    With [`FitOptions::clip_sigma`], the isolated outliers at the baseline's single lens
//!    ([`super::noise::spikes`]: beyond that many robust standard deviations, a neighbour
//!    within a quarter day that does not follow them) are left out of every later stage but
//!    the chi^2 on the data as given: a minuscule caustic read with a point source could pass
//!    through one alone and claim its chi^2 (on an invented single lens, +169 for a binary of
//!    q 2e-7). An anomaly seen in one point only is left out with them.
//! 4. **Search** of every map ([`super::search`]); maps of the same (s, q) are merged. Data
//!    of more than [`FitOptions::search_points`] points (default [`SEARCH_POINTS`]) are
//!    merged down to that many for the search and the zoom, flat stretches first
//!    ([`super::bins`]); the refinement fits every point.
//! 5. **Zoom** ([`FitOptions::zoom`]): around the best few (s, q) local minima, finer maps at
//!    half and a quarter of the library's step are built and searched ([`super::zoom`]); also
//!    around the best grid point that is no local minimum when it ranks above the last of
//!    them (it adds a refinement's start).
//! 6. **Refinement** of the best (s, q) local minima with exact magnifications, each from its
//!    zoom's best where it was zoomed (of the walks by the capped and by the plain search
//!    chi^2, the end closer to the data, and the other end as well when it is another map),
//!    within the time budget ([`RefineOptions::budget`]);
//!    starts whose search chi^2 is above [`RefineOptions::within`] times the best's are left
//!    out (with a note); when fewer than [`FEWEST_STARTS`] are left, the best start's map's
//!    other kept lines within that factor are refined too.
//! 7. **Noise.** At the best model, isolated outliers are clipped ([`FitOptions::clip_sigma`],
//!    rule in [`super::noise::clip_outliers`]) and each data set's error bars are scaled by the
//!    robust spread of its normalised residuals, capped by its point-to-point scatter
//!    ([`super::noise`]; [`FitOptions::rescale_errors`]); when either changed the data
//!    by more than 5%, every minimum is refined again on the cleaned, rescaled data (by
//!    Levenberg-Marquardt alone: it starts at a minimum), and the best once more with the
//!    simplex stages (the first pass can stop in a basin the cleaned data no longer hold).
//!    Then the clipped points are offered back (`passes::readmit`): the best minimum is
//!    refitted to all points (its rho at least the smallest trial rho) and the data cleaned
//!    again there; when fewer points are clipped and the refit fits those data better, they
//!    replace the cleaned data (a caustic crossing's lone survey points, missed by a wrong
//!    first minimum, are otherwise clipped for good).
//! 8. **Chords** (the other straight paths through the caustic crossings the best minimum
//!    explains, refined by Levenberg-Marquardt: [`super::chords`]; the best end comes first
//!    when it is lower), **converge** (Levenberg-Marquardt again from the best while it
//!    gains), **hop** (Levenberg-Marquardt from seeded perturbations of the best, kept when
//!    one ends lower: [`super::hop`], [`RefineOptions::hops`]) and **uncertainties**: the
//!    curvature of chi^2 at each minimum, measured once, on the data of the last refinement.
//! 9. **Parallax and orbital motion** ([`FitOptions::motion`], when the event's coordinates are
//!    known): the best static minima refined again with microlens parallax, both members of the
//!    ecliptic pair, then with lens orbital motion ([`super::motion`]); rows in
//!    [`FitResult::motion`].
//!
//! Steps 6 to 8 share one deadline, [`FitOptions::time_limit`] after the fit began (default
//! [`DEFAULT_TIME_LIMIT`]): each pass's budget is cut to what is left, a pass still running
//! then returns what it has, and the passes after it end at once (with a note). A well-sampled
//! stellar binary's crossings make the exact chi^2 costly, and its refinement, pass after pass,
//! could otherwise run on long after a search and zoom of several minutes. The uncertainties
//! are always measured.
//!
//! The result keeps the chi^2 the fit minimised (`refined.chi2`, on the cleaned, rescaled
//! data) and the chi^2 on the data as given ([`Minimum::chi2_as_given`]).

use super::bins::{merge_for_search, SEARCH_POINTS};
use super::hop::hop_best;
use super::minima::{
    best_start, promising, refine_models, with_uncertainties, Minimum, RefineOptions,
};
use super::model::{BinaryModel, Trajectory};
use super::motion::{fit_motion, MotionMinimum, MotionOptions};
use super::noise::{clean, spikes, Clipped};
use super::photometry::DataSet;
use super::refine::{exact_chi2, refine_until};
use super::search::anchor::crossing_pairs;
use super::search::{
    merge_grid_points, search_maps, GridRule, MapOutcome, MapSource, Seed, ValleyPoint,
};
use super::single::{fit_baseline, BaselineOptions, SingleLensFit};
use super::zoom::ZoomOptions;
use crate::error::{Error, Result};
use crate::lens::paczynski;
use crate::progress::Progress;
use std::time::{Duration, Instant};

mod passes;
use passes::{chord_best, converge_best, cut_to, other_lines, readmit, refine_starts};
pub use passes::{CONVERGED_GAIN, EXTRA_PASSES, FEWEST_STARTS};

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
    /// Finer maps around the best grid points before the refinement (`None`: refine from the
    /// library's grid points).
    pub zoom: Option<ZoomOptions>,
    /// The refinement.
    pub refine: RefineOptions,
    /// Clip isolated points beyond this many robust standard deviations at the single lens
    /// (before the search) and at the best model (after the refinement); `None` keeps every
    /// point.
    pub clip_sigma: Option<f64>,
    /// Scale each data set's error bars to chi^2/dof = 1 at the best model and refine again.
    pub rescale_errors: bool,
    /// Refine the best minima again with parallax and lens orbital motion (the stage of
    /// [`super::motion`]; `None`: static models only).
    pub motion: Option<MotionOptions>,
    /// Wall time from the fit's start after which the refinement's passes stop (see the
    /// module documentation); `None`: each pass has its own [`RefineOptions::budget`] alone.
    pub time_limit: Option<Duration>,
    /// The most points the search and the zoom read; longer data are merged for them
    /// ([`super::bins`]; the refinement fits every point). `None`: every point.
    pub search_points: Option<usize>,
}

impl Default for FitOptions {
    fn default() -> Self {
        FitOptions {
            exclude: Vec::new(),
            baseline: None,
            rule: GridRule::default(),
            adaptive_timing: true,
            zoom: Some(ZoomOptions::default()),
            refine: RefineOptions::default(),
            clip_sigma: Some(DEFAULT_CLIP_SIGMA),
            rescale_errors: true,
            motion: None,
            time_limit: Some(DEFAULT_TIME_LIMIT),
            search_points: Some(SEARCH_POINTS),
        }
    }
}

/// The default [`FitOptions::time_limit`]: 13 minutes, so that a fit of the broad library on
/// two cores (search and zoom up to about eight minutes for a stellar binary) ends within a
/// quarter of an hour with its uncertainties measured.
pub const DEFAULT_TIME_LIMIT: Duration = Duration::from_secs(780);

/// The default outlier threshold, in robust standard deviations.
pub const DEFAULT_CLIP_SIGMA: f64 = 5.0;
/// The tE factors tried on every line when the baseline cannot be trusted.
pub const WIDE_TE_FACTORS: [f64; 5] = [0.5, 0.71, 1.0, 1.41, 2.0];
/// The t0 shifts (in units of the line's tE) tried when the baseline cannot be trusted.
pub const WIDE_T0_SHIFTS: [f64; 3] = [-0.15, 0.0, 0.15];

/// What [`fit_event`] found.
#[derive(Debug, Clone, PartialEq)]
pub struct FitResult {
    /// The single-lens fit of all data (the `delta_chi2` reference), times on the data's scale.
    pub single: SingleLensFit,
    /// The search's seed, times on the data's scale.
    pub seed: Seed,
    /// The rule the search ran with (after the adaptive timing).
    pub rule: GridRule,
    /// What the search found on each (s, q) of the library.
    pub outcomes: Vec<MapOutcome>,
    /// The best finer (s, q) of each zoomed grid point, in the order of the refinement's starts.
    pub zoomed: Vec<MapOutcome>,
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
    /// The minima with parallax (and orbital motion) of [`FitOptions::motion`], in the order of
    /// [`super::motion::fit_motion`]; empty without it.
    pub motion: Vec<MotionMinimum>,
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
    let deadline = options.time_limit.map(|l| Instant::now() + l);
    let within_limit = || cut_to(&options.refine, deadline);
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

    // Isolated outliers at the single lens stay out of every binary fit: a minuscule caustic
    // read with a point source could otherwise pass through one and claim its chi^2.
    let (searched, spiked) = match options.clip_sigma {
        Some(c) => without_spikes(&local, &seed, c),
        None => (local.clone(), Vec::new()),
    };
    if !spiked.is_empty() {
        note(format!(
            "noise: {} isolated outliers at the single lens left out of the binary fits (t = {})",
            spiked.len(),
            spiked
                .iter()
                .take(8)
                .map(|c| format!("{:.3}", c.time + epoch))
                .collect::<Vec<_>>()
                .join(", ")
        ));
    }

    if options.adaptive_timing {
        seed.crossings = crossing_pairs(&searched);
        if !seed.crossings.is_empty() {
            note(format!(
                "timing: lines through a caustic also timed on the data's crossings (entry, \
                 exit) at {}",
                seed.crossings
                    .iter()
                    .map(|(a, b)| format!("({:.2}, {:.2})", a + epoch, b + epoch))
                    .collect::<Vec<_>>()
                    .join(", ")
            ));
        }
    }

    let merged = merge_for_search(&searched, options.search_points.unwrap_or(usize::MAX));
    if merged.points.1 < merged.points.0 {
        note(format!(
            "search: {} points merged into {} for the search and zoom (flat stretches first; \
             the refinement fits every point)",
            merged.points.0, merged.points.1
        ));
    }
    progress.start("search", maps.len() as u64);
    let started = Instant::now();
    let outcomes = search_maps(&merged.sets, &seed, maps, &rule, &|| progress.advance(1))?;
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
    let (mut starts, zoomed) = refine_starts(
        &merged.sets,
        &seed,
        &rule,
        &maps,
        &outcomes,
        options,
        progress,
    )?;
    let zoom_seconds = started.elapsed().as_secs_f64();
    for (z, start) in zoomed.iter().zip(&starts) {
        let walk = if start.0 == best_start(z).0 {
            " (search chi2 {:.1})"
        } else if Some(start.0) == z.best_plain().map(|c| c.model) {
            " (search chi2 {:.1}; the walk by the plain chi2, closer to the data)"
        } else {
            "; the grid point's own best is closer to the data (exact chi2) and starts the \
             refinement instead"
        };
        note(format!(
            "zoom: best s = {:.4}, q = {:.3e}{}",
            z.s,
            z.q,
            walk.replace("{:.1}", &format!("{:.1}", z.best_chi2()))
        ));
    }

    let left_out = promising(&mut starts, options.refine.within);
    if left_out > 0 {
        note(format!(
            "refine: {left_out} of {} starts left out (search chi2 above {} times the best's)",
            starts.len() + left_out,
            options.refine.within
        ));
    }
    let added = other_lines(&mut starts, &zoomed, &outcomes, options.refine.within);
    if added > 0 {
        note(format!(
            "refine: {added} more line(s) of the best start's map refined as well"
        ));
    }
    let started = Instant::now();
    progress.start("refine", starts.len() as u64);
    // The first refinements also start from a pass on the chi^2 the search ranked by.
    let first = refine_models(&searched, &starts, &within_limit(), rule.point_cap, &|| {
        progress.advance(1)
    })?;
    if let Some(m) = first.given_up_note(options.refine.within) {
        note(m);
    }
    let mut minima = first.minima;
    progress.finish(&format!("refine: best chi2 {:.1}", minima[0].refined.chi2));
    let (mut fitted, mut clipped, scales) = clean(
        &searched,
        &minima[0].refined.model,
        options.clip_sigma,
        options.rescale_errors,
        options.refine.tol,
    )?;
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
            ..within_limit()
        };
        let again = refine_models(&fitted, &starts, &again, f64::INFINITY, &|| {
            progress.advance(1)
        })?;
        if let Some(m) = again.given_up_note(options.refine.within) {
            note(m);
        }
        minima = again.minima;
        // The best once more with the simplex: the first pass walked a landscape that the
        // outliers and error bars shaped, and can have stopped in a basin the cleaned data
        // no longer hold it in.
        let best = refine_until(
            &fitted,
            &minima[0].refined.model,
            options.refine.tol,
            options.refine.max_iters,
            true,
            f64::INFINITY,
            within_limit().budget.map(|b| Instant::now() + b),
        )?;
        if best.chi2 < minima[0].refined.chi2 {
            minima[0].refined = best;
        }
        progress.finish(&format!(
            "refine again: best chi2 {:.1} for {} points",
            minima[0].refined.chi2,
            fitted.iter().map(DataSet::len).sum::<usize>()
        ));
    }
    if !clipped.is_empty() {
        let rho_floor = rule.rho_min();
        let best = &minima[0].refined.model;
        let (sigma, refine) = (options.clip_sigma, within_limit());
        let n = clipped.len();
        if let Some((data, again, best)) =
            readmit(&searched, &scales, best, n, rho_floor, sigma, &refine)?
        {
            note(format!(
                "noise: {} of the {n} clipped points rejoin the data (a refit from the best \
                 minimum explains them); best chi2 {:.1} for {} points",
                n - again.len(),
                best.chi2,
                data.iter().map(DataSet::len).sum::<usize>()
            ));
            (fitted, clipped) = (data, again);
            minima[0].refined = best;
            for m in minima.iter_mut().skip(1) {
                (m.refined.chi2, m.refined.fluxes) =
                    exact_chi2(&fitted, &m.refined.model, options.refine.tol)?;
            }
            minima.sort_by(|a, b| a.refined.chi2.total_cmp(&b.refined.chi2));
        }
    }
    // On the data the minima were refined on: their chi^2 values compare only there.
    let refined_on = if changed { &fitted } else { &searched };
    if let Some(n) = chord_best(
        refined_on,
        &seed.crossings,
        &mut minima,
        &within_limit(),
        progress,
    )? {
        note(n);
    }
    converge_best(refined_on, &mut minima, &within_limit(), progress)?;
    if let Some(n) = hop_best(refined_on, &mut minima, &within_limit(), progress)? {
        note(n);
    }
    if let (Some(limit), Some(d)) = (options.time_limit, deadline) {
        if Instant::now() >= d {
            note(format!(
                "time limit: the fit reached its {:.0} s during the refinement; its passes were \
                 cut short, so the minima are where they stood",
                limit.as_secs_f64()
            ));
        }
    }
    progress.start("uncertainties", minima.len() as u64);
    let mut minima = with_uncertainties(refined_on, minima, options.refine.tol, &|| {
        progress.advance(1)
    });
    progress.finish(&format!(
        "uncertainties: from the curvature of chi2 at {} minima",
        minima.len()
    ));
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
    let mut zoomed = zoomed;
    for o in outcomes.iter_mut().chain(zoomed.iter_mut()) {
        for c in o.candidates.iter_mut().chain(o.plain.iter_mut()) {
            c.model = unshift(&c.model)?;
        }
    }
    seed.t0 += epoch;
    for v in &mut seed.valley {
        v.t0 += epoch;
    }
    seed.anomaly = seed.anomaly.map(|t| t + epoch);
    for c in &mut seed.crossings {
        *c = (c.0 + epoch, c.1 + epoch);
    }
    let mut single = single;
    single.t0 += epoch;
    let mut result = FitResult {
        single,
        seed,
        rule,
        outcomes,
        zoomed,
        minima,
        error_scales: scales,
        clipped: spiked
            .into_iter()
            .chain(clipped)
            .map(|c| Clipped {
                time: c.time + epoch,
                ..c
            })
            .collect(),
        data: fitted.iter().map(|d| shifted(d, epoch)).collect(),
        notes,
        seconds: (search_seconds + zoom_seconds, refine_seconds),
        motion: Vec::new(),
    };
    if let Some(motion) = &options.motion {
        result.motion = fit_motion(data, &result, motion, progress)?;
    }
    Ok(result)
}

/// `local` without the isolated outliers at the seed's single lens (each set's fluxes fitted to
/// Paczynski's curve of the seed's trajectory; [`spikes`]), and those points.
fn without_spikes(local: &[DataSet], seed: &Seed, sigma: f64) -> (Vec<DataSet>, Vec<Clipped>) {
    let mut kept = Vec::with_capacity(local.len());
    let mut out = Vec::new();
    for (k, set) in local.iter().enumerate() {
        let a: Vec<f64> = set
            .times
            .iter()
            .map(|t| paczynski(seed.u0.hypot((t - seed.t0) / seed.te)))
            .collect();
        let found = spikes(set, &a, sigma);
        out.extend(found.iter().map(|&(i, residual)| Clipped {
            set: k,
            time: set.times[i],
            line: set.lines[i],
            residual,
        }));
        let keep: Vec<usize> = (0..set.len())
            .filter(|i| !found.iter().any(|f| f.0 == *i))
            .collect();
        kept.push(set.subset(&keep));
    }
    (kept, out)
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
            return Err(Error::input(format!("clip: must be >= 2 sigma, got {c}")));
        }
    }
    options.refine.validate()?;
    if let Some(motion) = &options.motion {
        motion.validate(data.len())?;
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
        seed.widen(&baseline, &visible, untrusted_u0_max(&seed));
        seed.u0_bounds = Some(baseline.u0_range);
        seed.te_bounds = Some(baseline.te_range);
        note(format!(
            "baseline: its timing is not trusted (the anomaly at t = {:.3} covers the peak, or \
             a bound was hit)",
            seed.anomaly.unwrap_or(f64::NAN) + epoch
        ));
    }
    Ok((baseline.full, seed, trusted))
}

/// The largest `u0` searched when the baseline's timing is not trusted: the larger of 0.3, three
/// times the seed's and its valley's end.
fn untrusted_u0_max(seed: &Seed) -> f64 {
    seed.valley
        .iter()
        .map(|v: &ValleyPoint| v.u0)
        .fold(3.0 * seed.u0, f64::max)
        .max(0.3)
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
        let hi = untrusted_u0_max(seed);
        seed.u0_bounds = Some((0.0, hi));
        note(format!(
            "search: every line tried at {} timings, u0 from 0 to {hi:.3}",
            rule.timings_per_line(),
        ));
    }
}
