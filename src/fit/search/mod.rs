//! The grid search: for every (s, q) map of a library, a grid of trajectories around the
//! single-lens seed, finite-source curves from the pre-convolved map at each trial rho, chi^2
//! for each; the best few per map kept (by the search's chi^2, and one more by its plain
//! chi^2: see "The search's weights").
//!
//! # The grid rule
//!
//! Let `rho_min` be the smallest trial rho and `R = width / sqrt(2)` the half-diagonal of the
//! map's window. Trajectories are taken at
//! - `alpha` in `[0, 2 pi)` with step at most `2 rho_min / R`, and
//! - `u0 >= 0` in `[u0* - D, u0* + D]`, `D = max(u0_span u0*, u0_floor)`, widened to cover
//!   the seed's [`Seed::u0_range`] at [`GridRule::u0_misfit`] (the `u0` its single lens
//!   cannot rule out), step at most
//!   `2 rho_min`, keeping for each alpha only the u0 whose line passes within `R` of the
//!   window's centre,
//!
//! each timed as the single lens at the same impact parameter about the host: `(t0*, tE*)` of
//! [`Seed::timing`] at `u0_h`, the line's impact parameter about the heavier lens, with `t0`
//! moved by the host's offset from the origin along the line (see `host_timing`). The single
//! lens with free blending fixes its `u0` poorly but `(t0, tE)` well at each `u0` (for
//! `u0 << 1` the product `u0 tE`), so the grid in `u0` walks along that valley and the true
//! line is met with its true timing. Each line is taken for every `tE = tE* f` (the factors of
//! [`GridRule::te_factors`], default 1) and `t0 = t0* + k tE*` (the shifts of
//! [`GridRule::t0_shifts`], default 0). Two neighbouring
//! lines through the window are then nowhere in it more than `2 rho_min` apart (the alpha step
//! turns a line about the window's centre, moving its points in the window by at most
//! `R dalpha <= 2 rho_min`; the u0 step moves it by at most `2 rho_min`), so every point of the
//! window lies within `rho_min` of a grid line: a caustic crossed by any line through the window
//! is touched by the source of a grid trajectory, and no crossing is stepped over.
//!
//! Where the lines are spaced for a source larger than the smallest trial radius (a wide
//! window, or a budget of [`GridRule::max_trajectories`] spread over many timings), finer
//! levels follow ([`beam`]): the [`GridRule::beam`] best lines, spread over the window, are
//! surrounded by lines at half the spacing, and so on down to a few trial radii. They find
//! what the coarse grid ranks too low because it reads the map smoothed by its radius; they
//! cannot find a path whose neighbourhood ranks below the survivors at every level.
//!
//! With [`GridRule::timed`] (off by default: it multiplies the lines by up to about four), each
//! line is tried twice when the data show an anomaly ([`Seed::anomaly`], the time of
//! their largest departure from the single-lens fit): once with the seed's t0, and once with
//! the t0 that puts the line's strongest feature on the map (its largest excess over the
//! host's own magnification, sampled every `rho_min / 2`) at that time. A planetary anomaly
//! or blending biases the single-lens tE by several percent, which moves a caustic crossing
//! by many source radii; the timed copy does not depend on it.
//!
//! When the data show a caustic crossing ([`Seed::crossings`]: their sharpest rise and a later
//! sharpest drop), every line through a caustic is also tried with the timing that puts its
//! entry and exit at those times ([`anchor`]), with its tE within a factor
//! [`anchor::TE_REACH`] of the seed's (of the baseline's range of tE when its timing is not
//! trusted: [`Seed::anchored_te`]). The best [`ANCHORED_KEEP`] of them are polished besides
//! the map's best lines: before the polish, a line a little off the true path misfits the
//! crossings' many points and ranks below blind lines that explain little, and the polish of
//! those blind lines seldom finds the crossings. An anchored line is polished in Cassan's
//! crossing coordinates, `(alpha, u0, T1, T2)` with the timing following the crossing times
//! ([`anchor::Anchor`]): in `(alpha, u0, t0, tE)` every step of the simplex moved the
//! crossings off the data, and it stopped far from the minimum that the crossing coordinates
//! reach (on the truth's neighbours of a stellar binary, chi^2 16,500 against 47,000).
//!
//! On a window that holds the host, the lines of [`GridRule::outer_lines`] are tried as well:
//! lines that pass beside the window, out to a few of its half-diagonals, read wholly off the
//! map, with the same timings (less the anomaly anchoring, which needs a feature on the map).
//! A planet's central caustic perturbs the magnification well beyond itself, and a source that
//! passes it at a few caustic widths shows the planet without crossing it.
//!
//! Negative `u0` are not searched: a binary is symmetric about its axis, and `(u0, alpha)` and
//! `(-u0, -alpha)` give the same curve, so the twin minima are one (reported with `u0 >= 0`).
//! Lines that cross the window at no observed time are skipped: the map adds nothing to them.
//!
//! # Magnifications in the search
//!
//! Where the source lies on the map (within the pre-convolution's margin), the pre-convolved
//! map is read bilinearly. Elsewhere the sampler's continuation is taken at its zeroth order,
//! the exact point-source magnification (it does not depend on rho, so one evaluation serves
//! every trial rho), computed at a subset of the times and interpolated linearly in between
//! where the midpoint of every interval agrees with the interpolation to
//! [`GridRule::interpolation_tol`], no interval spans more than [`MAX_STRIDE`] points, and none
//! is longer than [`CLEARANCE_REACH`] times the source's clearance at its start: its distance
//! from the nearest lens or caustic point, less the spacing of that caustic's points kept. Off
//! the caustics the point-source magnification is smooth on the scale of that distance, so far
//! from them a few solves serve long stretches of the curve, and near them the intervals
//! shrink before the midpoint test could be fooled by a feature between its samples. What
//! is interpolated is the ratio of the binary's magnification to the host's alone (Paczynski's
//! formula for m1 at its position), which stays near 1 and flat wherever the companion matters
//! little; the host's peak is then not interpolated at all. The intervals are taken in time
//! order, so that consecutive solves start from the previous images. Only the points observed
//! while the line is in the window (a time span found once per line) are looked up on the
//! maps; the others are off every map without a look. The grid's timings of one line share
//! its off-map curve, sampled once along the line by the same tests (`profile.rs`); the polish
//! samples each trajectory's own.
//!
//! # The search's weights
//!
//! The search compares data with curves read from maps at a few fixed (s, q) and radii, so its
//! models are wrong by far more than the photometric errors near caustics: a fold that a map of
//! a slightly different s puts a few source radii early turns hundreds of precise follow-up
//! points into misfits of many sigma, and such points would outweigh the shape of the whole
//! curve (the timing of the peak, the wings) in the ranking. Each error bar is therefore
//! widened in quadrature by [`GridRule::model_floor`] (default 3%) times the point's flux above
//! its data set's tenth percentile (the magnified part, where the model error grows): baseline
//! points keep their own weight, a planet's few-percent deviation still counts, and a stellar
//! binary's crossings no longer decide alone. The refinement fits the data with their own error
//! bars.
//!
//! The widening is not enough where a few hundred follow-up points cover a crossing: a map one
//! grid step off in (s, q), or with pixels larger than the source, puts the crossing's sharp
//! rise a little early and misfits those points by hundreds of sigma, while a line that misses
//! the caustic misfits them by less, so the truth's neighbours ranked below lines that explain
//! nothing. So a point's share of the search's chi^2 beyond [`GridRule::point_cap`]
//! (default 25, five sigma) grows only as a logarithm, `cap (1 + ln(r^2 / cap))`: the fluxes
//! are fitted to every point, the points beyond the cap there set apart, the fluxes fitted
//! again to the others, and every point counted at those (one step of a trimmed least-squares
//! fit). A crossing a little early then costs its points a few times the cap, and the rest of
//! the curve decides. The refinement starts both from the line the search chose and from the
//! end of a pass on the same capped chi^2 (a start the cap forgave can have a crossing a
//! little off; [`super::refine`]). A hard cap lost the polish's pull altogether, and
//! polishing with the plain chi^2 while ranking capped lost the truth's neighbours again.
//! `f64::INFINITY` turns the cap off (the search as it was).
//!
//! The cap has a cost as well: it also forgives the lines that explain a low-q planet's
//! small anomaly less well than the truth's do, and ranked by it alone the zoom walked to
//! another map for one invented low-q event of the recovery benchmark that the plain chi^2
//! finds (docs/recovery.md). So each map also keeps its best [`PLAIN_KEEP`] line by the plain
//! chi^2 (the same evaluation's, at no extra cost; polished on it) in [`MapOutcome::plain`],
//! the zoom walks by both measures ([`super::zoom`]), and the fit refines from both ends
//! ([`super::event`]).
//!
//! The fluxes are not formed: for each data set the weights and the sums of the data alone are
//! computed once per map, and a curve's chi^2 at its best `(fs, fb)` follows from three sums
//! over it (`sum w A`, `sum w A^2`, `sum w A (F - Fbar)`; see `Weighted::chi2`). The sums over
//! the off-map points do not depend on rho and are taken once per trajectory. The search only
//! ranks; the refinement ([`super::refine`]) recomputes every point exactly.

pub mod anchor;
pub mod beam;
mod evaluate;
mod grid;
mod lines;
mod polish;
mod profile;
mod readers;
mod seed;
mod sums;

pub use evaluate::{CLEARANCE_REACH, MAX_STRIDE};
pub use grid::GridRule;
pub use seed::{Seed, ValleyPoint};

use crate::error::{Error, Result};
use crate::fit::model::{BinaryModel, Trajectory};
use crate::fit::photometry::DataSet;
use crate::lens::LensSystem;
use crate::map::{read_fits, MagnificationMap};
use crate::solve::ImageSolver;
use crate::store::library::LibrarySpec;
use crate::store::Store;
use anchor::Anchor;
use evaluate::Scratch;
use grid::{distinct, grid_steps, host_timing, Line};
use lines::timed_lines;
use num_complex::Complex64;
use polish::{best_lines, lowest, Kept, Measure, Polisher};
use rayon::prelude::*;
use readers::Readers;
use std::path::PathBuf;
use std::sync::atomic::{AtomicU64, Ordering};
use sums::Weighted;

/// Iteration limit of the polish of each kept candidate on its map.
pub const POLISH_ITERATIONS: u64 = 300;
/// Convergence of the polish: the spread (standard deviation) of chi^2 over the simplex, one
/// unit of chi^2. The search only ranks, with models whose own errors (a map's pixels, its
/// (s, q) a grid step off) cost far more; the refinement fits exactly. (0.01 took twice the
/// evaluations for the same ranking: docs/recovery.md.)
pub const POLISH_TOLERANCE: f64 = 1.0;
/// Lines kept per map by the plain search chi^2 beside the [`GridRule::keep`] by the capped
/// one (see the module documentation).
pub const PLAIN_KEEP: usize = 1;

/// Lines timed on the data's crossings polished on each map besides the best by the search's
/// chi^2 (when distinct from them).
pub const ANCHORED_KEEP: usize = 3;
/// Trial radii besides the grid's best at which each kept line is polished again.
pub const RHO_RETRIES: usize = 2;

/// One map of a library to search.
#[derive(Debug, Clone, PartialEq)]
pub struct LibraryMap {
    /// Separation.
    pub s: f64,
    /// Mass ratio.
    pub q: f64,
    /// The map's FITS file.
    pub path: PathBuf,
}

/// A trial model and its chi^2.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Candidate {
    /// The model.
    pub model: BinaryModel,
    /// chi^2 over all data sets (fluxes solved).
    pub chi2: f64,
}

/// What the search found on one map.
#[derive(Debug, Clone, PartialEq)]
pub struct MapOutcome {
    /// Separation.
    pub s: f64,
    /// Mass ratio.
    pub q: f64,
    /// The best distinct candidates by the search's chi^2, best first (empty if no trajectory
    /// could be evaluated): the best [`GridRule::keep`] lines and up to [`ANCHORED_KEEP`]
    /// lines timed on the data's crossings, each polished.
    pub candidates: Vec<Candidate>,
    /// With a point cap: the best [`PLAIN_KEEP`] candidates by the plain search chi^2 (no cap;
    /// their `chi2` is that), polished on it. Empty without a cap (then `candidates` ranks by
    /// the plain chi^2 already).
    pub plain: Vec<Candidate>,
    /// Trajectories evaluated (each at every trial rho).
    pub trajectories: u64,
    /// Light-curve points evaluated (trajectories x rho x data points).
    pub points: u64,
    /// Remarks for the user (trial radii the map cannot resolve, and the like).
    pub notes: Vec<String>,
}

impl MapOutcome {
    /// chi^2 of the best candidate (infinite if none).
    pub fn best_chi2(&self) -> f64 {
        self.candidates.first().map_or(f64::INFINITY, |c| c.chi2)
    }

    /// The best candidate by the plain search chi^2: the first of `plain`, or without a cap
    /// the first of `candidates`.
    pub fn best_plain(&self) -> Option<&Candidate> {
        self.plain.first().or(self.candidates.first())
    }

    /// The plain search chi^2 of [`MapOutcome::best_plain`] (infinite if none).
    pub fn best_plain_chi2(&self) -> f64 {
        self.best_plain().map_or(f64::INFINITY, |c| c.chi2)
    }
}

/// Where the maps of a search come from: files (read one at a time, as each is searched) or
/// maps already in memory.
#[derive(Debug, Clone, Copy)]
pub enum MapSource<'a> {
    /// FITS files of a library, as listed by [`maps_of_spec`] or [`maps_of_store`].
    Files(&'a [LibraryMap]),
    /// Maps in memory (binary lenses).
    Loaded(&'a [MagnificationMap]),
}

impl MapSource<'_> {
    /// Number of maps.
    pub fn len(&self) -> usize {
        match self {
            MapSource::Files(f) => f.len(),
            MapSource::Loaded(m) => m.len(),
        }
    }

    /// Whether there are no maps.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }
}

/// Searches every map of `library` (in parallel; the outcome does not depend on the thread
/// count), calling `progress` after each map.
pub fn search(
    data: &[DataSet],
    seed: &Seed,
    library: &[LibraryMap],
    rule: &GridRule,
    progress: &(dyn Fn() + Sync),
) -> Result<Vec<MapOutcome>> {
    search_maps(data, seed, MapSource::Files(library), rule, progress)
}

/// Searches every map of `maps` (see [`search`]).
pub fn search_maps(
    data: &[DataSet],
    seed: &Seed,
    maps: MapSource,
    rule: &GridRule,
    progress: &(dyn Fn() + Sync),
) -> Result<Vec<MapOutcome>> {
    rule.validate()?;
    (0..maps.len())
        .into_par_iter()
        .map(|i| {
            let outcome = match maps {
                MapSource::Files(files) => {
                    search_map(data, seed, &read_fits(&files[i].path)?, rule)
                }
                MapSource::Loaded(loaded) => search_map(data, seed, &loaded[i], rule),
            };
            progress();
            outcome
        })
        .collect()
}

/// The outcomes of maps of the same (s, q) (windows on different caustics of one binary) made
/// one: their candidates together, best first, at most `keep`; their counts and notes summed.
///
/// ```
/// use causeway::fit::search::{merge_grid_points, MapOutcome};
/// let empty = |s: f64| MapOutcome { s, q: 1e-3, candidates: vec![], plain: vec![], trajectories: 5,
///     points: 10, notes: vec![] };
/// let merged = merge_grid_points(vec![empty(1.0), empty(1.2), empty(1.0)], 3);
/// assert_eq!(merged.len(), 2);
/// assert_eq!(merged[0].trajectories, 10);
/// ```
pub fn merge_grid_points(outcomes: Vec<MapOutcome>, keep: usize) -> Vec<MapOutcome> {
    let mut merged: Vec<MapOutcome> = Vec::new();
    for o in outcomes {
        match merged.iter_mut().find(|m| m.s == o.s && m.q == o.q) {
            Some(m) => {
                m.candidates.extend(o.candidates);
                m.candidates.sort_by(|a, b| a.chi2.total_cmp(&b.chi2));
                m.candidates.truncate(keep.max(1));
                m.plain.extend(o.plain);
                m.plain.sort_by(|a, b| a.chi2.total_cmp(&b.chi2));
                m.plain.truncate(PLAIN_KEEP);
                m.trajectories += o.trajectories;
                m.points += o.points;
                m.notes.extend(o.notes);
            }
            None => merged.push(o),
        }
    }
    merged
}

/// Searches one map.
pub fn search_map(
    data: &[DataSet],
    seed: &Seed,
    map: &MagnificationMap,
    rule: &GridRule,
) -> Result<MapOutcome> {
    let lens: &LensSystem = &map.provenance.lens;
    let (s, q) = lens
        .binary_parameters()
        .ok_or_else(|| Error::input("search: library maps must be of binary lenses"))?;
    let mut notes = Vec::new();
    let (readers, grid_rho) = search_readers(data, seed, map, rule, &mut notes)?;
    let rhos = readers.rhos.clone();
    let mut all_times: Vec<f64> = data.iter().flat_map(|d| d.times.iter().copied()).collect();
    all_times.sort_by(f64::total_cmp);
    let caustics: Vec<Vec<Complex64>> = if seed.crossings.is_empty() {
        Vec::new()
    } else {
        anchor::caustic_polylines(lens)?
    };
    let (lines, anchors) = timed_lines(seed, map, rule, &readers, grid_rho, &caustics, &all_times)?;
    let sets: Vec<Weighted> = data
        .iter()
        .map(|d| Weighted::new(d, rule.model_floor))
        .collect();
    let solver = ImageSolver::new(lens)?;
    let points = AtomicU64::new(0);
    let evaluate = |lines: &[Line]| evaluate_lines(lines, &solver, &sets, &readers, rule, &points);
    let mut lines = lines;
    let mut evaluated = evaluate(&lines);
    // Finer levels where the lines were spaced for a source larger than the trial radii.
    let level = beam::Level {
        rule,
        window: &map.window,
        times: &all_times,
    };
    let valley = |alpha, u0| host_timing(seed, readers.host.position, alpha, u0);
    level.descend(&mut lines, &mut evaluated, grid_rho, valley, evaluate)?;
    let steps = grid_steps(&map.window, grid_rho);
    let model_at = |i: usize, r: usize| BinaryModel {
        s,
        q,
        rho: rhos[r],
        trajectory: lines[i].trajectory,
    };
    // Lines timed on the data's crossings are polished in their crossing coordinates, and the
    // best of them even when blind timings rank above them (see "The grid rule"): their
    // crossings sit on the data's, where a blind line's polish seldom gets.
    let anchor_of = |k: Kept| (k.candidate, k.radius, anchors.get(k.line).copied());
    let mut kept: Vec<_> = best_lines(&evaluated, Measure::Capped, rule.keep, steps, model_at)
        .into_iter()
        .map(anchor_of)
        .collect();
    let anchored = &evaluated[..anchors.len()];
    for k in best_lines(anchored, Measure::Capped, ANCHORED_KEEP, steps, model_at) {
        if kept.iter().all(|(c, _, _)| {
            distinct(
                &c.model.trajectory,
                &k.candidate.model.trajectory,
                steps.0,
                steps.1,
            )
        }) {
            kept.push(anchor_of(k));
        }
    }
    let kept_plain = if rule.point_cap.is_finite() {
        best_lines(&evaluated, Measure::Plain, PLAIN_KEEP, steps, model_at)
            .into_iter()
            .map(anchor_of)
            .collect()
    } else {
        Vec::new()
    };
    let polisher = |measure| Polisher {
        solver: &solver,
        sets: &sets,
        readers: &readers,
        rule,
        steps,
        window: &map.window,
        caustics: &caustics,
        measure,
    };
    let polish = |kept: &[(Candidate, usize, Option<Anchor>)], measure| -> Result<Vec<Candidate>> {
        let polisher = polisher(measure);
        let mut polished: Vec<Candidate> = kept
            .par_iter()
            .map(|(c, r, a)| polisher.run(c, *r, *a))
            .collect::<Result<_>>()?;
        polished.sort_by(|a, b| a.chi2.total_cmp(&b.chi2));
        Ok(polished)
    };
    let candidates = polish(&kept, Measure::Capped)?;
    let plain = polish(&kept_plain, Measure::Plain)?;
    Ok(MapOutcome {
        s,
        q,
        candidates,
        plain,
        trajectories: lines.len() as u64,
        points: points.into_inner(),
        notes,
    })
}

/// The map's readers as the search reads it, and the grid's radius: the lines are spaced for
/// that radius, and when it exceeds every trial radius the map is also read smoothed by it
/// (the last reader; the kept lines move to the trial radii in the polish). Each point is read
/// on the map only inside the widest reader's margin, so the readers change every radius's
/// values near the window's edge.
fn search_readers(
    data: &[DataSet],
    seed: &Seed,
    map: &MagnificationMap,
    rule: &GridRule,
    notes: &mut Vec<String>,
) -> Result<(Readers, f64)> {
    let grid_rho = rule.grid_rho(&map.window, seed);
    let mut rhos = rule.rhos.clone();
    let trial_max = rhos.iter().copied().fold(0.0, f64::max);
    if grid_rho > trial_max * (1.0 + 1e-9) {
        rhos.push(grid_rho);
    }
    Ok((Readers::new(map, data, &rhos, notes)?, grid_rho))
}

/// The search's best `(chi2, radius index)` of each line, capped and plain (`None` where it
/// could not be evaluated), in the lines' order; the points read are counted into `points`.
fn evaluate_lines(
    lines: &[Line],
    solver: &ImageSolver,
    sets: &[Weighted],
    readers: &Readers,
    rule: &GridRule,
    points: &AtomicU64,
) -> Vec<Option<[(f64, usize); 2]>> {
    let n_times: usize = sets.iter().map(|s| s.set.len()).sum();
    lines
        .par_iter()
        .map_init(
            || {
                let scratch = Scratch {
                    profiles: Some(Vec::new()),
                    ..Scratch::default()
                };
                (solver.clone(), scratch)
            },
            |(solver, scratch), line| {
                scratch
                    .trajectory_chi2(solver, sets, readers, line, rule, None)
                    .ok()?;
                points.fetch_add((scratch.chi2.len() * n_times) as u64, Ordering::Relaxed);
                Some([lowest(&scratch.chi2)?, lowest(&scratch.plain)?])
            },
        )
        .collect()
}

/// chi^2 of one trajectory on `map`, read as the search with `seed` reads it, at each trial
/// radius of `rule` (infinite where a radius cannot be read on this map): what the search
/// would rank that trajectory at. Returns `(rho, chi2)` pairs.
///
/// ```
/// use causeway::engine::{Engine, PolygonMapping};
/// use causeway::fit::model::{paczynski, Trajectory};
/// use causeway::fit::photometry::DataSet;
/// use causeway::fit::search::{trajectory_chi2_on_map, GridRule, Seed};
/// use causeway::lens::LensSystem;
/// use causeway::map::Window;
/// // A binary whose companion hardly matters far from it, and data of the host alone
/// // (Paczynski 1986) along a line that misses the map: chi^2 about 0 at every radius.
/// let lens = LensSystem::binary(1.5, 1e-4).unwrap();
/// let map = PolygonMapping::new(1.0).build(&lens, &Window::new((0.8, 0.0), 0.05, 64).unwrap()).unwrap();
/// let mut text = String::from("t,flux,flux_err\n");
/// for k in 0..50 {
///     let t = -25.0 + k as f64;
///     text += &format!("{t},{},0.01\n", paczynski((0.09f64 + (t / 20.0).powi(2)).sqrt()));
/// }
/// let data = [DataSet::parse(&text, "a.csv", 22.0).unwrap()];
/// let rule = GridRule { rhos: vec![2e-3, 4e-3], ..GridRule::default() };
/// let line = Trajectory::straight(0.0, 0.3, 20.0, std::f64::consts::FRAC_PI_2).unwrap();
/// let seed = Seed::at(0.0, 0.3, 20.0);
/// let chi2 = trajectory_chi2_on_map(&data, &seed, &map, &rule, &line).unwrap();
/// assert_eq!(chi2.len(), 2);
/// assert!(chi2.iter().all(|&(_, c)| c < 1.0), "{chi2:?}");
/// ```
pub fn trajectory_chi2_on_map(
    data: &[DataSet],
    seed: &Seed,
    map: &MagnificationMap,
    rule: &GridRule,
    trajectory: &Trajectory,
) -> Result<Vec<(f64, f64)>> {
    let (readers, _) = search_readers(data, seed, map, rule, &mut Vec::new())?;
    let sets: Vec<Weighted> = data
        .iter()
        .map(|d| Weighted::new(d, rule.model_floor))
        .collect();
    let mut solver = ImageSolver::new(&map.provenance.lens)?;
    let line = Line::on(*trajectory, &map.window);
    let mut scratch = Scratch::default();
    scratch.trajectory_chi2(&mut solver, &sets, &readers, &line, rule, None)?;
    let trials = rule.rhos.len();
    Ok(readers.rhos[..trials]
        .iter()
        .copied()
        .zip(scratch.chi2)
        .collect())
}

/// The distinct s and the distinct q values of the outcomes, each sorted: the axes of their
/// (s, q) grid.
pub fn grid_axes(outcomes: &[MapOutcome]) -> (Vec<f64>, Vec<f64>) {
    let axis = |f: fn(&MapOutcome) -> f64| {
        let mut v: Vec<f64> = outcomes.iter().map(f).collect();
        v.sort_by(f64::total_cmp);
        v.dedup();
        v
    };
    (axis(|o| o.s), axis(|o| o.q))
}

/// Indices of the outcomes whose best chi^2 is no worse than that of any neighbour in the
/// (s, q) grid (the grid of the distinct s and q values; neighbours are the up to eight maps
/// one step away in index): the distinct local minima of the search, best first.
///
/// ```
/// use causeway::fit::search::{local_minima, MapOutcome};
/// let at = |s: f64, q: f64, chi2: f64| MapOutcome { s, q, candidates: vec![causeway::fit::search::Candidate {
///     chi2, model: causeway::fit::model::BinaryModel { s, q, rho: 1e-3,
///         trajectory: causeway::fit::model::Trajectory::straight(0.0, 0.1, 10.0, 0.0).unwrap() } }],
///     plain: vec![], trajectories: 1, points: 1, notes: vec![] };
/// let grid = vec![at(0.8, 1e-3, 5.0), at(1.0, 1e-3, 9.0), at(1.25, 1e-3, 4.0)];
/// assert_eq!(local_minima(&grid), vec![2, 0]);
/// ```
pub fn local_minima(outcomes: &[MapOutcome]) -> Vec<usize> {
    let (ss, qs) = grid_axes(outcomes);
    let index = |o: &MapOutcome| {
        (
            ss.partition_point(|&v| v < o.s) as i64,
            qs.partition_point(|&v| v < o.q) as i64,
        )
    };
    let cells: Vec<(i64, i64)> = outcomes.iter().map(index).collect();
    let mut minima: Vec<usize> = (0..outcomes.len())
        .filter(|&i| {
            let c = outcomes[i].best_chi2();
            c.is_finite()
                && (0..outcomes.len()).all(|j| {
                    let (di, dj) = (cells[i].0 - cells[j].0, cells[i].1 - cells[j].1);
                    let near = j != i && di.abs() <= 1 && dj.abs() <= 1;
                    let other = outcomes[j].best_chi2();
                    !near || other > c || (other == c && j > i)
                })
        })
        .collect();
    minima.sort_by(|&a, &b| outcomes[a].best_chi2().total_cmp(&outcomes[b].best_chi2()));
    minima
}

/// The maps of a library spec in `store` (which must hold them: build them first), grid order.
pub fn maps_of_spec(store: &Store, spec: &LibrarySpec) -> Result<Vec<LibraryMap>> {
    spec.points()?
        .into_iter()
        .map(|p| {
            let path = store.path_of(&p.key);
            if !path.exists() {
                return Err(Error::input(format!(
                    "search: the store {} lacks the map of s = {}, q = {} (build the library first)",
                    store.root().display(),
                    p.s,
                    p.q
                )));
            }
            Ok(LibraryMap { s: p.s, q: p.q, path })
        })
        .collect()
}

/// Every binary map listed in the index of `store`, ordered by (q, s).
pub fn maps_of_store(store: &Store) -> Result<Vec<LibraryMap>> {
    let mut maps: Vec<LibraryMap> = store
        .entries()?
        .into_iter()
        .filter_map(|e| {
            Some(LibraryMap {
                s: e.s?,
                q: e.q?,
                path: store.root().join(&e.file),
            })
        })
        .collect();
    maps.sort_by(|a, b| a.q.total_cmp(&b.q).then(a.s.total_cmp(&b.s)));
    if maps.is_empty() {
        return Err(Error::input(format!(
            "search: the store {} lists no binary maps",
            store.root().display()
        )));
    }
    Ok(maps)
}
