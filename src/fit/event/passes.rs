//! The fit's passes after the search: the refinement's starts (zoomed where asked), the
//! closing Levenberg-Marquardt passes from the best minimum, and the time limit's cut of each
//! pass's budget.

use super::FitOptions;
use crate::error::Result;
use crate::fit::chords::chord_starts;
use crate::fit::hop::HOP_GAIN;
use crate::fit::minima::{best_start, grid_starts, refine_models, Minimum, RefineOptions};
use crate::fit::model::BinaryModel;
use crate::fit::noise::{clean, Clipped};
use crate::fit::photometry::DataSet;
use crate::fit::refine::{exact_chi2, refine_until, Refined, COARSE_TOL};
use crate::fit::search::{GridRule, MapOutcome, MapSource, Seed};
use crate::fit::zoom::{most_points, runner_up, same_point, MapRecipe, Zoomer};
use crate::map::read_fits;
use crate::progress::Progress;
use std::time::Instant;

/// Starts of refinements: each a model and the search chi^2 it came with.
pub(super) type Starts = Vec<(BinaryModel, f64)>;

/// The refinement's starts (model, search chi^2): the best candidate of each of the best
/// (s, q) local minima of the search, the first few replaced by the end of their zoom's walks
/// closest to the data ([`Zoomer::start`]), then the zoomed [`runner_up`]'s, and, for each
/// local minimum zoomed whose start is a walk's end, the other walk's end if it is another map
/// (with the zoomed outcomes, one per zoomed start, in the order of the starts).
pub(super) fn refine_starts(
    local: &[DataSet],
    seed: &Seed,
    rule: &GridRule,
    maps: &MapSource,
    outcomes: &[MapOutcome],
    options: &FitOptions,
    progress: &dyn Progress,
) -> Result<(Starts, Vec<MapOutcome>)> {
    let centres = grid_starts(outcomes, options.refine.candidates)?;
    let mut starts: Starts = centres.iter().map(|&i| best_start(&outcomes[i])).collect();
    let mut zoomed = Vec::new();
    let Some(zoom) = options.zoom.filter(|z| z.levels > 0 && z.centres > 0) else {
        return Ok((starts, zoomed));
    };
    let zoomer = Zoomer {
        data: local,
        seed,
        rule,
        recipe: match maps {
            MapSource::Files(files) => MapRecipe::of_map(&read_fits(&files[0].path)?),
            MapSource::Loaded(loaded) => MapRecipe::of_map(&loaded[0]),
        },
    };
    let runner_up = zoom
        .runner_up
        .then(|| runner_up(outcomes, &centres, zoom.centres))
        .flatten();
    let points = (centres.len().min(zoom.centres) + usize::from(runner_up.is_some()))
        * most_points(zoom.levels);
    progress.start("zoom", points as u64);
    let mut extra: Starts = Vec::new();
    for (k, &i) in centres.iter().take(zoom.centres).enumerate() {
        let found = zoomer.start(outcomes, i, zoom.levels, options.refine.tol, &|| {
            progress.advance(1)
        })?;
        starts[k] = found.start;
        extra.extend(found.other);
        zoomed.push(found.outcome);
    }
    // The runner-up's start follows the zoomed local minima's (so that `zoomed` stays in the
    // order of the starts); its other walk's end is not refined.
    if let Some(j) = runner_up {
        progress.note(&format!(
            "zoom: s = {:.4}, q = {:.3e} is no local minimum but ranks above the last zoomed",
            outcomes[j].s, outcomes[j].q
        ));
        let found = zoomer.start(outcomes, j, zoom.levels, options.refine.tol, &|| {
            progress.advance(1)
        })?;
        // Its walk can end on a map a local minimum's walk ended on (rebuilt from another
        // centre, its (s, q) can differ in the last bits): that map is refined once.
        let at = |m: &BinaryModel| (m.s, m.q);
        if !starts
            .iter()
            .any(|(m, _)| same_point(at(m), at(&found.start.0)))
        {
            starts.insert(zoomed.len(), found.start);
            zoomed.push(found.outcome);
        }
    }
    starts.extend(extra);
    progress.finish(&format!(
        "zoom: around {} grid points, {} levels",
        zoomed.len(),
        zoom.levels
    ));
    Ok((starts, zoomed))
}

/// Levenberg-Marquardt passes after the refinement, on the best minimum alone, at most ...
pub const EXTRA_PASSES: usize = 6;
/// ... while a pass still lowers its chi^2 by more than this.
pub const CONVERGED_GAIN: f64 = 1.0;

/// `options` with its budget cut to the time left before `deadline` (none left: zero).
pub(super) fn cut_to(options: &RefineOptions, deadline: Option<Instant>) -> RefineOptions {
    let Some(d) = deadline else {
        return *options;
    };
    let left = d.saturating_duration_since(Instant::now());
    RefineOptions {
        budget: Some(options.budget.map_or(left, |b| b.min(left))),
        ..*options
    }
}

/// Runs Levenberg-Marquardt again from the best minimum while it still gains (each pass is cut
/// at [`crate::fit::refine::LM_ITERATIONS`] Jacobians, which a stellar binary's many crossing
/// points can need more of: on one invented stellar binary three passes lowered chi^2 from
/// 3293 to 3028), at most [`EXTRA_PASSES`] times and within the refinement's budget.
pub(super) fn converge_best(
    data: &[DataSet],
    minima: &mut [Minimum],
    options: &RefineOptions,
    progress: &dyn Progress,
) -> Result<()> {
    let first = minima[0].refined.chi2;
    // One deadline for all passes: the budget holds for them together.
    let deadline = options.budget.map(|b| Instant::now() + b);
    progress.start("converge", EXTRA_PASSES as u64);
    for _ in 0..EXTRA_PASSES {
        if deadline.is_some_and(|d| Instant::now() >= d) {
            break;
        }
        let best = &minima[0].refined;
        let again = refine_until(
            data,
            &best.model,
            options.tol,
            options.max_iters,
            false,
            f64::INFINITY,
            deadline,
        )?;
        progress.advance(1);
        let gain = best.chi2 - again.chi2;
        if gain > 0.0 {
            minima[0].refined = again;
        }
        if gain <= CONVERGED_GAIN {
            break;
        }
    }
    progress.finish(&format!(
        "converge: best chi2 {first:.1} -> {:.1}",
        minima[0].refined.chi2
    ));
    Ok(())
}

/// Fewest refinement starts: when fewer are [`crate::fit::minima::promising`], the other
/// lines the best start's map kept are refined as well ([`other_lines`]).
pub const FEWEST_STARTS: usize = 3;

/// Adds to `starts` (promising, best first) the other kept lines of the map that holds the
/// best start (searched in `zoomed`, then `outcomes`), best first, whose search chi^2 is at
/// most `within` times the best start's, until there are [`FEWEST_STARTS`]; returns how many
/// were added. One map's kept lines are distinct paths: on an invented stellar binary the best
/// line and the next (search chi^2 17,061 and 17,187) of the right (s, q) led to different
/// basins, and the refinement of the best alone stopped 3,100 above the truth.
pub(super) fn other_lines(
    starts: &mut Starts,
    zoomed: &[MapOutcome],
    outcomes: &[MapOutcome],
    within: f64,
) -> usize {
    let Some(&(best, chi2)) = starts.first() else {
        return 0;
    };
    let Some(map) = zoomed
        .iter()
        .chain(outcomes)
        .find(|o| o.candidates.iter().chain(&o.plain).any(|c| c.model == best))
    else {
        return 0;
    };
    let before = starts.len();
    for c in map.candidates.iter().chain(&map.plain) {
        if starts.len() >= FEWEST_STARTS {
            break;
        }
        if c.chi2 <= within * chi2 && !starts.iter().any(|s| s.0 == c.model) {
            starts.push((c.model, c.chi2));
        }
    }
    starts.len() - before
}

/// Refines the other chords of the best minimum through the crossings it explains
/// ([`chord_starts`]; Levenberg-Marquardt alone) and puts the best end first, refined again
/// with the simplex stages, when it beats the best minimum by more than [`HOP_GAIN`]. Returns a
/// note for the user when it did.
pub(super) fn chord_best(
    data: &[DataSet],
    crossings: &[(f64, f64)],
    minima: &mut Vec<Minimum>,
    options: &RefineOptions,
    progress: &dyn Progress,
) -> Result<Option<String>> {
    if crossings.is_empty() || minima.is_empty() {
        return Ok(None);
    }
    let before = minima[0].refined.chi2;
    let starts = chord_starts(data, &minima[0].refined.model, crossings)?;
    if starts.is_empty() {
        return Ok(None);
    }
    progress.start("chords", starts.len() as u64);
    let lm = RefineOptions {
        simplex: false,
        within: f64::INFINITY,
        ..*options
    };
    let ends = refine_models(data, &starts, &lm, f64::INFINITY, &|| progress.advance(1))?;
    let best = ends.minima.into_iter().next();
    progress.finish(&format!(
        "chords: {} other paths through the crossings, best chi2 {:.1} (the minimum's {before:.1})",
        starts.len(),
        best.as_ref().map_or(f64::NAN, |m| m.refined.chi2)
    ));
    match best {
        Some(mut m) if m.refined.chi2 < before - HOP_GAIN => {
            // A new basin: the simplex stages as well, as the first refinements had.
            let deadline = options.budget.map(|b| Instant::now() + b);
            let again = refine_until(
                data,
                &m.refined.model,
                options.tol,
                options.max_iters,
                true,
                f64::INFINITY,
                deadline,
            )?;
            if again.chi2 < m.refined.chi2 {
                m.refined = again;
            }
            let gain = before - m.refined.chi2;
            minima.insert(0, m);
            Ok(Some(format!(
                "chords: another path through the data's crossings fits better (chi2 {gain:.1} \
                 lower)"
            )))
        }
        _ => Ok(None),
    }
}

/// What [`readmit`] returns: the data cleaned again, their clipped points, and the minimum
/// refined on them.
pub(super) type Readmitted = (Vec<DataSet>, Vec<Clipped>, Refined);

/// The clipped points that a refit from the best minimum explains, back in the data. A point
/// on a caustic crossing that a wrong first minimum missed is alone in a survey's cadence, so
/// it is clipped as an outlier, and the cleaned data then no longer hold the minimum to the
/// crossing (on one invented stellar binary the refinement walked rho to a point source, chi2
/// over the data as given 17,206 against the truth's 8,113). So `searched` (the data the
/// search saw, with `scales` applied) is refitted from `best`, its rho raised to at least
/// `rho_floor` (at a point source no step in ln rho moves the curve), and cleaned again at the
/// refit with `clip_sigma`; when fewer than `clipped` points are clipped there and the refit,
/// refined on those data, fits them better than `best` does, the data, their clipped points
/// and the refined refit are returned.
pub(super) fn readmit(
    searched: &[DataSet],
    scales: &[f64],
    best: &BinaryModel,
    clipped: usize,
    rho_floor: f64,
    clip_sigma: Option<f64>,
    options: &RefineOptions,
) -> Result<Option<Readmitted>> {
    let scaled: Vec<DataSet> = searched
        .iter()
        .zip(scales)
        .map(|(d, k)| DataSet {
            error_scale: d.error_scale * k,
            ..d.clone()
        })
        .collect();
    let deadline = options.budget.map(|b| Instant::now() + b);
    let iters = options.max_iters;
    let refit = |data: &[DataSet], start: &BinaryModel, tol: f64| {
        refine_until(data, start, tol, iters, false, f64::INFINITY, deadline)
    };
    let start = BinaryModel {
        rho: best.rho.max(rho_floor),
        ..*best
    };
    // The refit with every point only tells which points a minimum near `best` explains: at
    // the refinement's search tolerance (contour integration costs less), the refit kept at
    // the one asked for.
    let all = refit(&scaled, &start, options.tol.max(COARSE_TOL))?;
    let (cleaned, again, _) = clean(&scaled, &all.model, clip_sigma, false, options.tol)?;
    if again.len() >= clipped {
        return Ok(None);
    }
    let refined = refit(&cleaned, &all.model, options.tol)?;
    // Kept only where it fits those data better than the minimum it came from.
    if refined.chi2 >= exact_chi2(&cleaned, best, options.tol)?.0 {
        return Ok(None);
    }
    Ok(Some((cleaned, again, refined)))
}
