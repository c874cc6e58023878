//! Finer maps around the search's best (s, q): the library's grid is coarse (a step of 12% in
//! s moves a wide planet's caustic by several of its own widths), so the best trajectory on the
//! nearest map can be far from the truth in chi^2 and the exact refinement, a local method,
//! then stops in a wrong minimum. The zoom builds maps at the eight neighbours of a grid point
//! at half the library's local step, searches them with the same seed and rule, moves to the
//! best, and repeats at a quarter of the step ([`ZoomOptions::levels`]); the refinement then
//! starts from the last best candidate. The walk is made twice, by the search's chi^2 and by
//! its plain chi^2 (without the point cap; see [`super::search`]): the cap forgives a crossing
//! a map puts a little early, and also a low-q planet's lines that explain its anomaly less
//! well; the fit refines from both ends.
//!
//! A grid point that is no local minimum of the search is zoomed as well when it ranks above the
//! last local minimum zoomed ([`ZoomOptions::runner_up`], [`runner_up`]): a resonant caustic's
//! truth can sit on the slope of a neighbouring map's basin, and its half-step zoom then walks
//! to the truth while the local minimum's grid point stays in a wrong one.
//!
//! The maps are made as the library's are ([`MapRecipe`]: engine, density and pixels of one of
//! its maps, a window on every caustic), in memory, and not kept.

use super::minima::best_start;
use super::model::BinaryModel;
use super::photometry::DataSet;
use super::refine::ladder_start;
use super::search::{
    grid_axes, merge_grid_points, search_maps, GridRule, MapOutcome, MapSource, Seed,
};
use crate::engine;
use crate::error::Result;
use crate::lens::LensSystem;
use crate::map::MagnificationMap;
use crate::store::library::WindowRule;
use std::sync::atomic::{AtomicUsize, Ordering};

/// How far the fit zooms.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ZoomOptions {
    /// The best (s, q) local minima of the search that are zoomed (the others are refined from
    /// their grid point).
    pub centres: usize,
    /// Halvings of the step: 1 zooms to half the library's step, 2 to a quarter.
    pub levels: usize,
    /// Whether the best grid point that is no local minimum is zoomed too when it ranks above
    /// the last local minimum zoomed ([`runner_up`]).
    pub runner_up: bool,
}

impl Default for ZoomOptions {
    fn default() -> Self {
        ZoomOptions {
            centres: 2,
            levels: 2,
            runner_up: true,
        }
    }
}

/// How the zoom's maps are made: like a library map.
#[derive(Debug, Clone, PartialEq)]
pub struct MapRecipe {
    /// Engine name.
    pub engine: String,
    /// Engine density.
    pub density: f64,
    /// Pixels per side.
    pub pixels: usize,
}

impl MapRecipe {
    /// The recipe of `map`.
    pub fn of_map(map: &MagnificationMap) -> MapRecipe {
        MapRecipe {
            engine: map.provenance.engine.clone(),
            density: map.provenance.density,
            pixels: map.window.pixels,
        }
    }

    /// The maps of the binary (s, q): one per caustic window ([`WindowRule::Caustics`], margin
    /// 1.5), kept in memory for the search, so without accuracy certificates.
    pub fn build(&self, s: f64, q: f64) -> Result<Vec<MagnificationMap>> {
        let lens = LensSystem::binary(s, q)?;
        let engine = engine::by_name(&self.engine, self.density)?;
        WindowRule::Caustics {
            margin: 1.5,
            pixels: self.pixels,
        }
        .windows(&lens)?
        .iter()
        .map(|w| engine.build_certified(&lens, w, &(), false))
        .collect()
    }
}

/// The natural-log distance from `v` to its nearest other value on `axis` (0 if none).
fn local_step(axis: &[f64], v: f64) -> f64 {
    let step = axis
        .iter()
        .filter(|&&a| a != v)
        .map(|a| (a / v).ln().abs())
        .fold(f64::INFINITY, f64::min);
    if step.is_finite() {
        step
    } else {
        0.0
    }
}

/// What a zoom needs besides its starting point: the data, the search's seed and rule, and how
/// maps are made.
#[derive(Debug, Clone)]
pub struct Zoomer<'a> {
    /// The data (on the search's time scale).
    pub data: &'a [DataSet],
    /// The search's seed.
    pub seed: &'a Seed,
    /// The search's rule.
    pub rule: &'a GridRule,
    /// How the finer maps are made.
    pub recipe: MapRecipe,
}

/// The ends of a zoom's two walks: the best outcome by the search's chi^2 and the best by its
/// plain chi^2 (the same walk without a point cap).
#[derive(Debug, Clone, PartialEq)]
pub struct Zoomed {
    /// The walk by [`MapOutcome::best_chi2`].
    pub capped: MapOutcome,
    /// The walk by [`MapOutcome::best_plain_chi2`].
    pub plain: MapOutcome,
}

impl Zoomer<'_> {
    /// Zooms on `outcomes[start]` (one of the merged outcomes of a library search, whose grid
    /// sets the step) over `levels` halvings, as the module documentation says, walking twice:
    /// by the search's chi^2 and by its plain chi^2 (they part where the point cap forgives a
    /// misfit the plain chi^2 does not; a level searches the neighbours of both walks'
    /// points). Each walk's end is `outcomes[start]` itself if no finer map beats it.
    /// `progress` is called after each (s, q) point is built and searched (at most
    /// [`most_points`] in all).
    pub fn zoom(
        &self,
        outcomes: &[MapOutcome],
        start: usize,
        levels: usize,
        progress: &(dyn Fn() + Sync),
    ) -> Result<Zoomed> {
        let (ss, qs) = grid_axes(outcomes);
        let mut capped = outcomes[start].clone();
        let mut plain = capped.clone();
        let steps = (local_step(&ss, capped.s), local_step(&qs, capped.q));
        for level in 1..=levels {
            let scale = 0.5f64.powi(level as i32);
            let h = (steps.0 * scale, steps.1 * scale);
            let mut points = neighbours((capped.s, capped.q), h);
            for p in neighbours((plain.s, plain.q), h) {
                let centre = (capped.s, capped.q);
                if !points.iter().any(|&a| same_point(a, p)) && !same_point(centre, p) {
                    points.push(p);
                }
            }
            // The maps of every point are searched together, so that the threads share them
            // (one map's polish of its few candidates would leave threads idle).
            let mut maps = Vec::new();
            let mut ends = Vec::new();
            for (s, q) in points {
                let built = self.recipe.build(s, q)?;
                if built.is_empty() {
                    progress();
                } else {
                    maps.extend(built);
                    ends.push(maps.len());
                }
            }
            // search_maps reports maps as they finish, in any order: a point is counted done
            // when as many maps have finished as there are up to its last.
            let finished = AtomicUsize::new(0);
            let found = search_maps(
                self.data,
                self.seed,
                MapSource::Loaded(&maps),
                self.rule,
                &|| {
                    let n = finished.fetch_add(1, Ordering::Relaxed) + 1;
                    if ends.binary_search(&n).is_ok() {
                        progress();
                    }
                },
            )?;
            for o in merge_grid_points(found, self.rule.keep) {
                if o.best_plain_chi2() < plain.best_plain_chi2() {
                    plain = o.clone();
                }
                if o.best_chi2() < capped.best_chi2() {
                    capped = o;
                }
            }
        }
        Ok(Zoomed { capped, plain })
    }

    /// Zooms on `outcomes[start]` ([`Zoomer::zoom`]) and chooses the refinement's start: of
    /// the grid point's best candidates and the two walks' ends (each by the capped and by the
    /// plain search chi^2), the one closest to the data ([`closest_start`], tolerance `tol`).
    pub fn start(
        &self,
        outcomes: &[MapOutcome],
        start: usize,
        levels: usize,
        tol: f64,
        progress: &(dyn Fn() + Sync),
    ) -> Result<ZoomedStart> {
        let found = self.zoom(outcomes, start, levels, progress)?;
        let choices = [
            best_start(&outcomes[start]),
            plain_start(&outcomes[start]),
            best_start(&found.capped),
            plain_start(&found.plain),
        ];
        let closest = closest_start(self.data, &choices, tol);
        // The exact chi^2 at a start is a poor guide between two walks' ends whose lines were
        // timed on maps (a low-q planet's plain end can start 3,000 above the capped end and
        // refine 200 below it): the end not chosen is offered as well, if it is another map.
        let other = if closest == 3 { choices[2] } else { choices[3] };
        let same_map = |a: &BinaryModel, b: &BinaryModel| a.s == b.s && a.q == b.q;
        Ok(ZoomedStart {
            start: choices[closest],
            other: (closest >= 2 && !same_map(&other.0, &choices[closest].0)).then_some(other),
            outcome: if closest == 3 {
                found.plain
            } else {
                found.capped
            },
        })
    }
}

/// A zoomed grid point's refinement starts ([`Zoomer::start`]): each a model and its search
/// chi^2.
#[derive(Debug, Clone)]
pub struct ZoomedStart {
    /// The start closest to the data.
    pub start: (BinaryModel, f64),
    /// When that is a walk's end, the other walk's end if it is another map.
    pub other: Option<(BinaryModel, f64)>,
    /// The end of the walk chosen (the capped walk's when the grid point's own start is).
    pub outcome: MapOutcome,
}

/// Whether two (s, q) points are the same map's: equal to 1e-9 relative (a point reached by
/// another walk's steps can differ in the last bits).
pub(super) fn same_point(a: (f64, f64), b: (f64, f64)) -> bool {
    (a.0 / b.0 - 1.0).abs() < 1e-9 && (a.1 / b.1 - 1.0).abs() < 1e-9
}

/// The grid point to zoom besides the local minima `centres` (indices into `outcomes`), of
/// which the first `zoomed` are zoomed: the best of the others by the search's chi^2, if it
/// ranks above the last one zoomed.
///
/// ```
/// use causeway::fit::model::{BinaryModel, Trajectory};
/// use causeway::fit::search::{local_minima, Candidate, MapOutcome};
/// use causeway::fit::zoom::runner_up;
/// let at = |s: f64, chi2: f64| MapOutcome { s, q: 1e-3, candidates: vec![Candidate { chi2,
///     model: BinaryModel { s, q: 1e-3, rho: 1e-3,
///         trajectory: Trajectory::straight(0.0, 0.1, 10.0, 0.0).unwrap() } }],
///     plain: vec![], trajectories: 1, points: 1, notes: vec![] };
/// // s = 1.0 (chi^2 4) lies on the slope from 0.8 (3) but ranks above the minimum at 1.6 (5).
/// let grid = vec![at(0.8, 3.0), at(1.0, 4.0), at(1.25, 9.0), at(1.6, 5.0)];
/// let minima = local_minima(&grid);
/// assert_eq!(minima, vec![0, 3]);
/// assert_eq!(runner_up(&grid, &minima, 2), Some(1));
/// // With one zoomed, the last zoomed (chi^2 3) is better than any other grid point.
/// assert_eq!(runner_up(&grid, &minima, 1), None);
/// ```
pub fn runner_up(outcomes: &[MapOutcome], centres: &[usize], zoomed: usize) -> Option<usize> {
    let last = outcomes[*centres[..zoomed.min(centres.len())].last()?].best_chi2();
    (0..outcomes.len())
        .filter(|j| !centres.contains(j))
        .min_by(|&a, &b| outcomes[a].best_chi2().total_cmp(&outcomes[b].best_chi2()))
        .filter(|&j| outcomes[j].best_chi2() < last)
}

/// The best candidate of an outcome by the plain search chi^2 as a refinement's start, with
/// the outcome's best search chi^2 (the capped one, by which the starts are compared).
pub(super) fn plain_start(outcome: &MapOutcome) -> (BinaryModel, f64) {
    let model = outcome
        .best_plain()
        .map_or(outcome.candidates[0].model, |c| c.model);
    (model, outcome.best_chi2())
}

/// Which of `starts` (a grid point's best candidates and its zoom's, by the capped and the
/// plain search chi^2) has the lowest exact chi^2 at its best source radius ([`ladder_start`],
/// magnification tolerance `tol`); the last when none can be evaluated. Search chi^2 values of
/// maps of different pixels do not compare (a finer zoomed map reads smaller sources, and its
/// best can be a caustic crossing at a wrong radius that the grid's coarser map would not rank
/// first), nor do the capped and the plain; the exact chi^2 decides. A start repeated is
/// evaluated once.
pub(super) fn closest_start(data: &[DataSet], starts: &[(BinaryModel, f64)], tol: f64) -> usize {
    let mut exact: Vec<f64> = Vec::with_capacity(starts.len());
    for (k, (m, _)) in starts.iter().enumerate() {
        let c = match starts[..k].iter().position(|(o, _)| o == m) {
            Some(j) => exact[j],
            None => ladder_start(data, m, tol).map_or(f64::INFINITY, |(_, c)| c),
        };
        exact.push(c);
    }
    (0..starts.len())
        .rev()
        .min_by(|&a, &b| exact[a].total_cmp(&exact[b]))
        .unwrap_or(0)
}

/// Most (s, q) points a zoom over `levels` halvings searches: the eight neighbours of the
/// start, then up to eight of each walk's point a level.
pub fn most_points(levels: usize) -> usize {
    if levels == 0 {
        0
    } else {
        POINTS_PER_LEVEL * (2 * levels - 1)
    }
}

/// Most (s, q) points of one zoom level: the eight neighbours.
pub const POINTS_PER_LEVEL: usize = 8;

/// The (up to eight) distinct neighbours of `centre` at log steps `h` in s and q, with q <= 1.
fn neighbours(centre: (f64, f64), h: (f64, f64)) -> Vec<(f64, f64)> {
    let mut points: Vec<(f64, f64)> = Vec::new();
    for i in -1..=1 {
        for j in -1..=1 {
            let p = (
                centre.0 * (f64::from(i) * h.0).exp(),
                centre.1 * (f64::from(j) * h.1).exp(),
            );
            if p != centre && p.1 <= 1.0 && !points.contains(&p) {
                points.push(p);
            }
        }
    }
    points
}

#[cfg(test)]
mod tests {
    use super::{local_step, neighbours};

    #[test]
    fn neighbours_skip_the_centre_and_repeats() {
        assert_eq!(neighbours((1.0, 1e-3), (0.1, 0.2)).len(), 8);
        // No step in q: the two neighbours in s.
        assert_eq!(neighbours((1.0, 1e-3), (0.1, 0.0)).len(), 2);
        // q never above 1.
        assert_eq!(neighbours((1.0, 1.0), (0.1, 0.2)).len(), 5);
    }

    #[test]
    fn local_step_is_the_nearest_log_distance() {
        let axis = [0.5, 1.0, 2.0, 2.5];
        assert!((local_step(&axis, 2.0) - (1.25f64).ln()).abs() < 1e-12);
        assert!((local_step(&axis, 0.5) - 2f64.ln()).abs() < 1e-12);
        assert_eq!(local_step(&[1.0], 1.0), 0.0);
    }
}
