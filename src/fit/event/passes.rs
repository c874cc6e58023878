//! The fit's passes after the search: the refinement's starts (zoomed where asked), the
//! closing Levenberg-Marquardt passes from the best minimum, and the time limit's cut of each
//! pass's budget.

use super::FitOptions;
use crate::error::Result;
use crate::fit::minima::{best_start, grid_starts, Minimum, RefineOptions};
use crate::fit::model::BinaryModel;
use crate::fit::photometry::DataSet;
use crate::fit::refine::refine_until;
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
