//! Light curves: trajectories, and the sampler that reads a map under a finite source.
//!
//! A [`Sampler`] turns source positions into magnifications. Each point is served by the first
//! of these that applies, and says which one did ([`Method`]):
//!
//! 1. the map, when the whole source lies on it: [`DirectReader`] (exact disk/pixel overlap
//!    weights) or [`Preconvolved`] (the map convolved once with the profile, by FFT for all
//!    but the smallest sources, read bilinearly; only square crops around runs of the points,
//!    `regions.rs`), chosen by cost ([`Evaluation::Auto`]); a point source (`rho = 0`) is
//!    read by bilinear interpolation
//!    ([`point_read`]);
//! 2. off the map, the exact point-source magnification with the small-source correction
//!    ([`small_source`]), where that correction is accurate to the tolerance; elsewhere the
//!    sampler fails, naming the first such point;
//!    With a refined map ([`Sampler::refined`]), a source near a caustic is read from the
//!    tile of its block where it fits ([`crate::map::tiles`]);
//! 3. with [`Sampler::fallback`], contour integration ([`crate::contour`]) for every value the
//!    others cannot give to the tolerance ([`Method::Contour`]).
//!
//! Every value carries an absolute error estimate ([`Sample::error`]): map reads from the same
//! read of the map binned 2 x 2 ([`Coarse`], derived in `estimate.rs`), the expansion from its
//! last kept term, contour integration from its own.
//!
//! # Accuracy (derived in the module docs named, measured in tests/integration/curve.rs and
//! tests/integration/curve/errors.rs)
//! - Map reads under the source: lattice counting noise plus pixelisation, about
//!   `(d^2/12 rho) |dA/dn|` for a pixel of side `d` (the map holds box means; measured 7e-4 at
//!   rho = 10 px on a point lens, the Witt & Mao value being the reference).
//! - Limb darkening: the quadrature over uniform disks is within 1e-4 ([`ld_nodes`]).
//! - Pre-convolved reads: equal to direct reads at pixel centres (1e-12 here, FFT round-off),
//!   elsewhere within the bilinear estimate of [`Preconvolved::interpolation_bound`] for at least
//!   95% of points across a caustic (all within 3 times it).
//! - Off the map: the hexadecapole error estimate must be below the tolerance (default
//!   [`Sampler::DEFAULT_TOL`]), and the continuation agrees with the map across the seam.
//! - The estimates: every value within its stated error on crossings of folds, cusps and the
//!   lenses (3 to 50 pixels per rho, uniform and limb-darkened); the median estimate 5 to 10
//!   times the actual error.
//!
//! ```
//! use causeway::curve::{Method, Sampler, StraightLine};
//! use causeway::{engine::{Engine, RayShooting}, lens::LensSystem, map::Window};
//! use causeway::source::SourceProfile;
//! let lens = LensSystem::single();
//! let map = RayShooting::new(100.0)
//!     .build(&lens, &Window::new((0.0, 0.1), 0.5, 50).unwrap()).unwrap();
//! let line = StraightLine::new(0.0, 0.1, 10.0, 0.0).unwrap();
//! let times: Vec<f64> = (-20..=20).map(|k| k as f64).collect();
//! let path = line.path(&times);
//! let curve = Sampler::new(SourceProfile::uniform(0.03).unwrap())
//!     .map(&map)
//!     .lens(&lens)
//!     .sample(&path.points)
//!     .unwrap();
//! // On the map: read directly or from the map pre-convolved, whichever costs less.
//! assert!(matches!(curve.samples[20].method, Method::Direct | Method::Convolved));
//! assert_eq!(curve.samples[0].method, Method::Expansion); // (-2, 0.1): off the map
//! ```

mod continuation;
mod convolve;
mod estimate;
mod plan;
mod plot;
mod regions;
mod sample;
mod tiled;
mod trajectory;

pub use continuation::{small_source, Expansion, PointMagnification, SAFETY};
pub(crate) use convolve::Cell;
#[doc(hidden)]
pub use convolve::Route;
pub use convolve::{MapSpectrum, Preconvolved, DIRECT_MARGIN};
pub use estimate::Coarse;
pub use plan::{map_engine, plan_window, POINT_SOURCE_PIXELS};
pub use plot::plot_png;
pub use sample::{ld_nodes, point_read, DirectReader};
pub use trajectory::{parse_times, read_times, time_range, SourcePath, StraightLine, MAX_TIMES};

use crate::contour::ContourSolver;
use crate::error::{Error, Result};
use crate::lens::LensSystem;
use crate::map::tiles::RefinedMap;
use crate::map::MagnificationMap;
use crate::progress::{Progress, Silent};
use crate::source::SourceProfile;
use estimate::{noise_step, CoarseReaders, NoiseTerm};
use num_complex::Complex64;
use rayon::prelude::*;
use regions::Plan;
use std::sync::OnceLock;

/// Least source radius, in pixels, that a map resolves honestly.
pub const MIN_RHO_PIXELS: f64 = 3.0;

/// How finite-source reads of the map are made.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Evaluation {
    /// Chosen by the number of points (see [`choose_evaluation`]).
    Auto,
    /// Exact overlap weights at every point.
    Direct,
    /// The map convolved once with the profile, then read bilinearly.
    Convolved,
}

/// Which method made a light-curve point (the `method` column).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Method {
    /// Map read with exact overlap weights.
    Direct,
    /// Pre-convolved map, bilinear read.
    Convolved,
    /// Point source, bilinear read of the map.
    Bilinear,
    /// Off the map: point-source magnification with the small-source correction.
    Expansion,
    /// Off the map: exact point-source magnification (`rho = 0`).
    Point,
    /// Contour integration: the value the other methods could not give to the tolerance
    /// (only with [`Sampler::fallback`]).
    Contour,
}

impl Method {
    /// The name printed in the `method` column.
    ///
    /// ```
    /// assert_eq!(causeway::curve::Method::Convolved.name(), "convolved");
    /// ```
    pub fn name(&self) -> &'static str {
        match self {
            Method::Direct => "direct",
            Method::Convolved => "convolved",
            Method::Bilinear => "bilinear",
            Method::Expansion => "expansion",
            Method::Point => "point",
            Method::Contour => "contour",
        }
    }
}

/// One light-curve point.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Sample {
    /// Source position x.
    pub x: f64,
    /// Source position y.
    pub y: f64,
    /// Magnification.
    pub magnification: f64,
    /// Estimated absolute error of the magnification (see [`Sampler::sample`]); infinite when
    /// there is no estimate.
    pub error: f64,
    /// What computed it.
    pub method: Method,
}

/// A sampled light curve, with the warnings that go with it.
#[derive(Debug, Clone, PartialEq)]
pub struct Curve {
    /// One sample per input point, in order.
    pub samples: Vec<Sample>,
    /// The evaluation used for finite-source map reads (never `Auto`).
    pub evaluation: Evaluation,
    /// Warnings for the user (for example a source too small for the map).
    pub warnings: Vec<String>,
}

/// Estimated cost, in nanoseconds, of one direct read of a profile (uniform disks of the given
/// radii in pixels): interior pixels are summed (about 3.3 ns each), rim pixels get a
/// closed-form overlap (about 25 ns each, some 8 (r + 1) of them per disk). Fitted, with
/// [`convolve_cost`], to reads with their estimates (below) on one thread, best of 15 or 30:
/// 8, 20 and 57 us per point at 10, 20 and 40 pixels of radius (the crossing of
/// benches/curve.rs and a point lens); the model gives 9, 21 and 58.
fn direct_cost(disks: &[(f64, f64)]) -> f64 {
    disks
        .iter()
        .map(|&(r, _)| 3.3 * std::f64::consts::PI * r * r + 25.0 * 8.0 * (r + 1.0))
        .sum()
}

/// Estimated cost, in nanoseconds, of pre-convolving a map of `pixels` per side through the
/// transform: `1.5 L^2 log2 L`. Measured (one thread, best of 15 or 30), as a multiple of
/// `L^2 log2 L` with the four half-size transforms of the estimate: 1.5 at L = 100 and 200,
/// 1.3 at 400, 0.9 at 548, 1.0 at 1088 (fixed costs weigh on small maps), so the choice
/// leans towards direct reads on large ones.
fn convolve_cost(pixels: usize) -> f64 {
    let l = pixels as f64;
    1.5 * l * l * l.log2().max(1.0)
}

/// The evaluation [`Evaluation::Auto`] picks for `points` reads of `map` with `profile`:
/// pre-convolved when the FFT costs less than the direct reads it replaces. Each read comes
/// with its error estimate, the same read of the four maps binned 2 x 2 ([`Coarse`]), so both
/// sides count them: four reads with half the radius, four transforms of half the side.
///
/// ```
/// use causeway::curve::{choose_evaluation, Evaluation};
/// use causeway::{engine::{Engine, RayShooting}, lens::LensSystem, map::Window};
/// use causeway::source::SourceProfile;
/// let map = RayShooting::new(1.0)
///     .build(&LensSystem::single(), &Window::new((0.0, 0.0), 1.0, 100).unwrap()).unwrap();
/// let src = SourceProfile::uniform(0.1).unwrap();
/// assert_eq!(choose_evaluation(&map, &src, 10), Evaluation::Direct);
/// assert_eq!(choose_evaluation(&map, &src, 1_000_000), Evaluation::Convolved);
/// ```
pub fn choose_evaluation(
    map: &MagnificationMap,
    profile: &SourceProfile,
    points: usize,
) -> Evaluation {
    choose_for_crops(map, profile, points, &[map.window.pixels])
}

/// [`choose_evaluation`] when the pre-convolution covers square crops of these sides.
fn choose_for_crops(
    map: &MagnificationMap,
    profile: &SourceProfile,
    points: usize,
    sides: &[usize],
) -> Evaluation {
    let disks = sample::disks_in_pixels(profile, map.window.pixel_size());
    let halves: Vec<(f64, f64)> = disks.iter().map(|&(r, w)| (0.5 * r, w)).collect();
    let direct = direct_cost(&disks) + 4.0 * direct_cost(&halves);
    let convolve: f64 = sides
        .iter()
        .map(|&n| convolve_cost(n) + 4.0 * convolve_cost(n / 2))
        .sum();
    if points as f64 * direct > convolve {
        Evaluation::Convolved
    } else {
        Evaluation::Direct
    }
}

/// The rho-too-small warning, if `profile` covers fewer than [`MIN_RHO_PIXELS`] pixels of
/// radius on `map`; it names the resolution that would.
pub fn resolution_warning(map: &MagnificationMap, profile: &SourceProfile) -> Option<String> {
    let w = &map.window;
    let rho_px = profile.rho / w.pixel_size();
    (profile.rho > 0.0 && rho_px < MIN_RHO_PIXELS).then(|| {
        let needed = (MIN_RHO_PIXELS * w.width / profile.rho * (1.0 - 1e-12)).ceil() as usize;
        format!(
            "warning: --rho {} covers only {:.2} pixels of radius on this map (pixel {:e}); \
             below {MIN_RHO_PIXELS} pixels the pixel structure dominates: a map of at least \
             {needed} pixels across its width {} (pixel <= rho/{MIN_RHO_PIXELS}) would resolve it",
            profile.rho,
            rho_px,
            w.pixel_size(),
            w.width
        )
    })
}

/// Computes light curves: a map (optional), a lens for the off-map continuation (optional),
/// a source profile, one relative tolerance, and optionally contour integration for the values
/// the others cannot give to it.
#[derive(Clone, Copy)]
pub struct Sampler<'a> {
    profile: SourceProfile,
    map: Option<&'a MagnificationMap>,
    tiles: Option<&'a RefinedMap>,
    lens: Option<&'a dyn PointMagnification>,
    fallback: Option<&'a LensSystem>,
    tol: f64,
    evaluation: Evaluation,
    memory_limit: u64,
    progress: &'a dyn Progress,
}

/// Points per unit of progress (and per parallel work item).
const CHUNK: usize = 64;

/// The fine and coarse readers of one map, made once per curve.
struct Readers<'a> {
    map: Option<&'a MagnificationMap>,
    profile: SourceProfile,
    direct: Option<DirectReader<'a>>,
    convolved: Option<Convolved<'a>>,
    /// The map binned ([`Coarse`]) and read for the estimate of direct and point reads, made on
    /// first need (a pre-convolved curve needs them only where its crops cannot serve).
    binned: &'a OnceLock<Option<Coarse>>,
    coarse: OnceLock<Option<CoarseReaders<'a>>>,
    tiles: Option<tiled::TileReaders<'a>>,
}

/// The pre-convolved crops of a curve ([`regions`]) and the noise term of their estimates.
struct Convolved<'a> {
    plan: Plan,
    crops: Vec<regions::Convolved>,
    noise: NoiseTerm<'a>,
}

impl<'a> Readers<'a> {
    /// The readers of the binned map, if the map has them.
    fn coarse(&self) -> Option<&CoarseReaders<'a>> {
        self.coarse
            .get_or_init(|| {
                let map = self.map?;
                let binned = self.binned.get_or_init(|| Coarse::new(map)).as_ref()?;
                Some(CoarseReaders::new(map, binned, &self.profile))
            })
            .as_ref()
    }

    /// A pre-convolved read of point `k` at `(x, y)` and its error estimate, if its crop
    /// serves it.
    fn convolved(&self, k: usize, x: f64, y: f64) -> Option<(f64, f64)> {
        let c = self.convolved.as_ref()?;
        let crop = &c.crops[c.plan.of_point[k]?];
        let a = crop.fine.read(x, y)?;
        // Half the fine grid's own interpolation bound joins the estimate: where the coarse
        // grid's interpolation error happens to match the fine one it is what is left.
        let interpolation = crop.fine.interpolation_bound(x, y).unwrap_or(0.0);
        Some((
            a,
            c.noise.convolved(&crop.coarse, a, x, y) + 0.5 * interpolation,
        ))
    }
}

impl<'a> Sampler<'a> {
    /// Default relative tolerance of every value (map reads and the off-map continuation).
    pub const DEFAULT_TOL: f64 = 1e-3;

    /// A sampler for the source `profile`, with no map and no lens yet.
    pub fn new(profile: SourceProfile) -> Self {
        Sampler {
            profile,
            map: None,
            tiles: None,
            lens: None,
            fallback: None,
            tol: Self::DEFAULT_TOL,
            evaluation: Evaluation::Auto,
            memory_limit: u64::MAX,
            progress: &Silent,
        }
    }

    /// Reads this map where the source lies on it.
    pub fn map(mut self, map: &'a MagnificationMap) -> Self {
        self.map = Some(map);
        self
    }

    /// Reads this map, and its tiles where a source near a caustic fits in one (see
    /// [`crate::map::tiles`]).
    ///
    /// ```
    /// use causeway::curve::Sampler;
    /// use causeway::{engine::by_name, lens::LensSystem, map::{RefinedMap, Refinement, Window}};
    /// use causeway::source::SourceProfile;
    /// let lens = LensSystem::binary(1.0, 0.1).unwrap();
    /// let window = Window::new((0.0, 0.0), 1.0, 96).unwrap();
    /// let refine = Some(Refinement::new(4).unwrap());
    /// let map = RefinedMap::build(by_name("polygon", 1.0).unwrap().as_ref(), &lens, &window,
    ///                             refine, &(), false).unwrap();
    /// // A source of 2 base pixels over the central caustic: read from a tile, at 8 fine pixels.
    /// let profile = SourceProfile::uniform(2.0 * window.pixel_size()).unwrap();
    /// let at = (-0.1 / 1.1, 0.0); // the host
    /// assert!(map.tile_index_at(at.0, at.1).is_some());
    /// let refined = Sampler::new(profile).refined(&map).sample(&[at]).unwrap().samples[0];
    /// let base = Sampler::new(profile).map(&map.base).sample(&[at]).unwrap().samples[0];
    /// assert!(refined.error < base.error);
    /// ```
    pub fn refined(mut self, map: &'a RefinedMap) -> Self {
        self.map = Some(&map.base);
        self.tiles = Some(map);
        self
    }

    /// Continues off the map with this lens's point-source magnification.
    pub fn lens(mut self, lens: &'a dyn PointMagnification) -> Self {
        self.lens = Some(lens);
        self
    }

    /// Recomputes by contour integration of `lens` ([`crate::contour`]) every value whose
    /// error estimate exceeds the tolerance, and every point neither the map nor the
    /// continuation can serve (off by default: those points then keep their estimate, or fail).
    ///
    /// ```
    /// use causeway::curve::{Method, Sampler};
    /// use causeway::{engine::{Engine, RayShooting}, lens::LensSystem, map::Window};
    /// use causeway::source::SourceProfile;
    /// let lens = LensSystem::single();
    /// let map = RayShooting::new(100.0)
    ///     .build(&lens, &Window::new((0.0, 0.0), 0.2, 40).unwrap()).unwrap();
    /// // A source of 2 pixels over the lens: the map cannot give 1e-3, contour integration does.
    /// let curve = Sampler::new(SourceProfile::uniform(0.01).unwrap())
    ///     .map(&map)
    ///     .lens(&lens)
    ///     .fallback(&lens)
    ///     .sample(&[(0.0, 0.0), (0.05, 0.0)])
    ///     .unwrap();
    /// let s = curve.samples[0];
    /// assert_eq!(s.method, Method::Contour);
    /// assert!(s.error <= 1e-3 * s.magnification);
    /// // Witt & Mao 1994: sqrt(1 + 4/rho^2) at the lens.
    /// assert!((s.magnification / (1.0f64 + 4e4).sqrt() - 1.0).abs() < 1e-3);
    /// ```
    pub fn fallback(mut self, lens: &'a LensSystem) -> Self {
        self.fallback = Some(lens);
        self
    }

    /// Relative tolerance of every value: the off-map continuation must meet it, and with
    /// [`Sampler::fallback`] so must every value (default [`Sampler::DEFAULT_TOL`]).
    pub fn tol(mut self, tol: f64) -> Self {
        self.tol = tol;
        self
    }

    /// How map reads are made.
    pub fn evaluation(mut self, evaluation: Evaluation) -> Self {
        self.evaluation = evaluation;
        self
    }

    /// Largest working memory (bytes) the pre-convolution may take; beyond it reads are direct.
    pub fn memory_limit(mut self, bytes: u64) -> Self {
        self.memory_limit = bytes;
        self
    }

    /// Reports the points done to `progress` (stage `curve`).
    pub fn progress(mut self, progress: &'a dyn Progress) -> Self {
        self.progress = progress;
        self
    }

    /// Samples the curve at `points` (in parallel; the result does not depend on the thread
    /// count). Fails on the first point (in order) that neither the map nor the continuation
    /// (nor, with [`Sampler::fallback`], contour integration) can serve.
    ///
    /// Every value carries an absolute error estimate: map reads by the read of the map binned
    /// 2 x 2 ([`Coarse`]); the continuation by its last kept term (see [`small_source`]);
    /// contour integration by its own.
    pub fn sample(&self, points: &[(f64, f64)]) -> Result<Curve> {
        if !(self.tol.is_finite() && self.tol > 0.0 && self.tol <= 0.1) {
            return Err(Error::input(format!(
                "--tol: must be a relative tolerance in (0, 0.1], got {}",
                self.tol
            )));
        }
        let rho = self.profile.rho;
        let mut warnings = Vec::new();
        let mut evaluation = Evaluation::Direct;
        let mut convolved = None;
        if let Some(map) = self.map {
            warnings.extend(resolution_warning(map, &self.profile));
            // Only the crops of the map that the sources reach are pre-convolved.
            let plan = Plan::new(map, &self.profile, noise_step(map), points);
            let sides: Vec<usize> = plan.crops.iter().map(|c| c.side()).collect();
            evaluation = match self.evaluation {
                Evaluation::Auto => choose_for_crops(map, &self.profile, points.len(), &sides),
                e => e,
            };
            let memory: u64 = sides.iter().map(|&n| Preconvolved::memory_bytes(n)).sum();
            if rho > 0.0 && evaluation == Evaluation::Convolved && memory > self.memory_limit {
                warnings.push(format!(
                    "warning: pre-convolving the {0}x{0} map needs more memory than allowed; \
                     reading it directly",
                    map.window.pixels
                ));
                evaluation = Evaluation::Direct;
            }
            if rho > 0.0 && evaluation == Evaluation::Convolved {
                convolved = Some(Convolved {
                    crops: regions::convolve(map, &plan, &self.profile)?,
                    plan,
                    noise: NoiseTerm::new(map, rho),
                });
            }
        }
        let binned = OnceLock::new();
        let coarse_tiles = self.tiles.map(tiled::coarse_tiles).unwrap_or_default();
        let readers = Readers {
            map: self.map,
            profile: self.profile,
            direct: self.map.map(|m| DirectReader::new(m, &self.profile)),
            binned: &binned,
            coarse: OnceLock::new(),
            convolved,
            tiles: self
                .tiles
                .map(|t| tiled::TileReaders::new(t, &coarse_tiles, &self.profile))
                .transpose()?,
        };
        let contour = self.fallback.map(Fallback::new).transpose()?;
        self.progress.start("curve", points.len() as u64);
        let results: Vec<Result<Vec<Sample>>> = points
            .par_chunks(CHUNK)
            .enumerate()
            .map(|(c, chunk)| {
                let out = chunk
                    .iter()
                    .enumerate()
                    .map(|(k, &(x, y))| {
                        let contour = contour.as_ref().map(|f| f.solver(self.tol));
                        self.sample_one(c * CHUNK + k, x, y, &readers, contour)
                    })
                    .collect();
                self.progress.advance(chunk.len() as u64);
                out
            })
            .collect();
        self.progress.finish("");
        let mut samples = Vec::with_capacity(points.len());
        for r in results {
            samples.extend(r?);
        }
        Ok(Curve {
            samples,
            evaluation,
            warnings,
        })
    }

    /// The map's value at `(x, y)` and its error estimate, if the source lies on the map.
    fn map_read(&self, k: usize, x: f64, y: f64, readers: &Readers) -> Option<(f64, f64, Method)> {
        let or_inf = |e: Option<f64>| e.unwrap_or(f64::INFINITY);
        if let Some((a, e)) = readers.tiles.as_ref().and_then(|t| t.read(x, y)) {
            let method = if self.profile.rho == 0.0 {
                Method::Bilinear
            } else {
                Method::Direct
            };
            return Some((a, e, method));
        }
        if self.profile.rho == 0.0 {
            let a = point_read(self.map?, x, y)?;
            let e = or_inf(readers.coarse().map(|c| c.point(a, x, y)));
            return Some((a, e, Method::Bilinear));
        }
        if let Some((a, e)) = readers.convolved(k, x, y) {
            return Some((a, e, Method::Convolved));
        }
        let a = readers.direct.as_ref()?.read(x, y)?;
        let e = or_inf(readers.coarse().map(|c| c.direct(a, x, y)));
        Some((a, e, Method::Direct))
    }

    fn sample_one(
        &self,
        k: usize,
        x: f64,
        y: f64,
        readers: &Readers,
        contour: Option<impl Fn() -> Result<ContourSolver>>,
    ) -> Result<Sample> {
        if !(x.is_finite() && y.is_finite()) {
            return Err(Error::input(format!(
                "point {}: position ({x}, {y}) is not finite",
                k + 1
            )));
        }
        let done = |magnification, error, method| {
            Ok(Sample {
                x,
                y,
                magnification,
                error,
                method,
            })
        };
        let recompute = || -> Result<Sample> {
            // A fresh solver per point: measured faster than one carried from the previous
            // recomputed point (whose roots are a worse start than the solver's own).
            let solver = contour
                .as_ref()
                .expect("recomputed only with a contour solver");
            let est = solver()?.magnification(Complex64::new(x, y), &self.profile)?;
            done(est.magnification, est.error, Method::Contour)
        };
        let within = |a: f64, e: f64| e <= self.tol * a.abs();
        if let Some((a, e, method)) = self.map_read(k, x, y, readers) {
            if contour.is_some() && !within(a, e) {
                return recompute();
            }
            return done(a, e, method);
        }
        let Some(lens) = self.lens else {
            if contour.is_some() {
                return recompute();
            }
            return Err(Error::input(format!(
                "point {} at ({x}, {y}): the source is not on the map and no lens was given to \
                 continue the curve",
                k + 1
            )));
        };
        let e = small_source(lens, &self.profile, x, y)?;
        if !e.accurate(self.tol) {
            if contour.is_some() {
                return recompute();
            }
            let why = if e.images_agree {
                format!(
                    "the small-source correction's error estimate {:.2e} exceeds --tol {:e}",
                    e.error / e.magnification,
                    self.tol
                )
            } else {
                "the number of images changes across the source".to_string()
            };
            return Err(Error::input(format!(
                "point {} at ({x}, {y}): off the map near a caustic ({why}); use a map that \
                 covers it",
                k + 1
            )));
        }
        let method = if self.profile.rho == 0.0 {
            Method::Point
        } else {
            Method::Expansion
        };
        done(e.magnification, e.error, method)
    }
}

/// Contour integration for the values the map and the continuation cannot give: the lens
/// checked at once, the solver made on first need (it traces the caustics, about a millisecond,
/// which a curve the map serves whole does not spend).
struct Fallback<'a> {
    lens: &'a LensSystem,
    solver: OnceLock<std::result::Result<ContourSolver, String>>,
}

impl<'a> Fallback<'a> {
    fn new(lens: &'a LensSystem) -> Result<Self> {
        crate::solve::ImageSolver::new(lens)?;
        Ok(Fallback {
            lens,
            solver: OnceLock::new(),
        })
    }

    /// A fresh solver for one point, at [`contour_tol`] of `tol`.
    fn solver(&self, tol: f64) -> impl Fn() -> Result<ContourSolver> + '_ {
        move || {
            let made = self.solver.get_or_init(|| {
                ContourSolver::new(self.lens, contour_tol(tol))
                    // Full contours only: the values recomputed lie near caustics, where the
                    // integration's small-source shortcut has been seen 37 times beyond its
                    // estimate (a source whose limb has just left a fold,
                    // tests/integration/curve/errors.rs).
                    .map(|c| c.with_shortcut(false))
                    .map_err(|e| e.to_string())
            });
            made.clone().map_err(Error::Numerical)
        }
    }
}

/// The tolerance contour integration is asked for when it recomputes a value for a curve of
/// relative tolerance `tol`: a quarter of it, so that the result meets `tol` even where the
/// integration's own estimate is a few times short.
fn contour_tol(tol: f64) -> f64 {
    0.25 * tol
}
