//! Error estimates of map reads, by comparison with the same read of the map at half the
//! resolution (Richardson's idea, with every offset of the coarse grid).
//!
//! # What is estimated
//! A map pixel holds the mean magnification over its square, so a finite-source read of the
//! map errs only where the source's rim (or, for a point source, the interpolation) splits a
//! pixel whose magnification varies across it: pixelisation, the bilinear interpolation of
//! pre-convolved and point reads, and the limb-darkening quadrature over disks whose rims meet
//! the pixel edges. All of them shrink with the pixel size `d`: as `d^2` where the
//! magnification is smooth across a pixel, as `d^1.5` to `d` where a caustic runs through the
//! rim's pixels.
//!
//! # How
//! The map is binned 2 x 2 in each of the four ways the bins can be laid (offsets of 0 or 1
//! pixel along x and y: [`Coarse`]), and the same read is made on each binned map. If the
//! error of a read goes as `d^p` with `p >= 1`, the fine read errs by at most
//! `|fine - coarse| / (2^p - 1) <= |fine - coarse|`; the estimate is the largest difference
//! over the four layouts, so that a layout whose coarse error happens to match the fine one
//! (the difference vanishing by chance) does not hide it. Where the magnification is smooth the
//! estimate is about three times the true error (`p = 2`), near caustics about twice.
//!
//! Ray-counting noise that the fine and coarse reads share (the interior of the source, where
//! the binned pixels hold exactly the same rays) does not show in the difference; it is a
//! boundary effect of the pixels and tests/integration/curve.rs measures that the estimate holds
//! with the maps `curve` builds.
//!
//! # Polygon-mapped maps
//! The polygon engine's error is not counting noise but the area its quadrilateral cells
//! misplace: shared by every pixel a cell's image covers, so correlated over the cell, and
//! invisible to the 2 x 2 binning when a cell is as large as a pixel or larger (a binned pixel
//! keeps its cell's error). The noise term therefore measures the residual at the cell's
//! scale for these maps: `step = ceil(1.5 h / d)` pixels for cells of side `h` on
//! pixels of side `d` (`h / d = 1 / sqrt(cells per pixel)`, from the map's provenance), and
//! counts the rim in blocks of `step` pixels. Measured on a planetary-caustic crossing (s =
//! 1.25, q = 2e-3, rho = 0.004, 600 points) at the densities `map --accuracy 1e-3` and
//! `curve` choose (0.06 to 10 cells per pixel, 3 to 40 pixels per rho): with the 1-pixel
//! residual up to 44% of the values were beyond their estimate (up to 12x); with this rule none
//! (the largest error 0.96 of the estimate), the median estimate 6 to 13 times the error.

use super::convolve::Preconvolved;
use super::sample::{point_read, DirectReader};
use crate::map::{MagnificationMap, Window};
use crate::source::SourceProfile;
use ndarray::Array2;

/// The four 2 x 2 binnings of a map (offsets `(0, 0)`, `(1, 0)`, `(0, 1)`, `(1, 1)` pixels).
///
/// ```
/// use causeway::curve::Coarse;
/// use causeway::{engine::{Engine, RayShooting}, lens::LensSystem, map::Window};
/// let map = RayShooting::new(100.0)
///     .build(&LensSystem::single(), &Window::new((0.3, 0.0), 0.4, 40).unwrap()).unwrap();
/// let coarse = Coarse::new(&map).unwrap();
/// assert_eq!(coarse.maps().len(), 4);
/// assert_eq!(coarse.maps()[0].window.pixels, 19);
/// // A binned pixel is the mean of the four it covers.
/// let mean = (map.data[[0, 0]] + map.data[[0, 1]] + map.data[[1, 0]] + map.data[[1, 1]]) / 4.0;
/// assert!((coarse.maps()[0].data[[0, 0]] - mean).abs() < 1e-6 * mean);
/// ```
#[derive(Debug, Clone)]
pub struct Coarse {
    maps: Vec<MagnificationMap>,
}

impl Coarse {
    /// Bins `map` in the four ways; `None` for a map under 4 pixels across.
    pub fn new(map: &MagnificationMap) -> Option<Self> {
        let n = map.window.pixels;
        if n < 4 {
            return None;
        }
        let m = (n - 1) / 2;
        let d = map.window.pixel_size();
        let (x0, y0) = map.window.origin();
        let maps = [(0, 0), (1, 0), (0, 1), (1, 1)]
            .into_iter()
            .map(|(ox, oy)| {
                let data = Array2::from_shape_fn((m, m), |(b, a)| {
                    let (i, j) = (2 * a + ox, 2 * b + oy);
                    let sum = map.data[[j, i]] as f64
                        + map.data[[j, i + 1]] as f64
                        + map.data[[j + 1, i]] as f64
                        + map.data[[j + 1, i + 1]] as f64;
                    (0.25 * sum) as f32
                });
                let center = (
                    x0 + (ox as f64 + m as f64) * d,
                    y0 + (oy as f64 + m as f64) * d,
                );
                let window = Window::new(center, 2.0 * d * m as f64, m)
                    .expect("a binned window lies inside its map's");
                MagnificationMap {
                    window,
                    data,
                    provenance: map.provenance.clone(),
                }
            })
            .collect();
        Some(Coarse { maps })
    }

    /// The four binned maps.
    pub fn maps(&self) -> &[MagnificationMap] {
        &self.maps
    }
}

/// The estimate's multiple of the largest fine/coarse difference.
const SPREAD_FACTOR: f64 = 1.5;

/// The point-source read's estimate is this many times the finite-source rule's: its
/// interpolation, smoothing and noise come from four pixels, not a rim of many, and measured
/// fold crossings need it (tests/integration/curve/errors.rs).
const POINT_FACTOR: f64 = 2.0;

/// The noise term's multiple of `sigma / r^1.5` (see [`noise`]).
const NOISE_FACTOR: f64 = 0.9;

/// The polygon engine's noise step in cell sides (see [`noise_step`]): 1.5, fitted on
/// planetary-caustic crossings at 1/16 to 4 cells per pixel (tests/integration/curve/errors.rs);
/// 1 left values beyond their estimate at 1/16 and 1/4, 2 made the estimate 15 times the error.
const CELL_STEPS: f64 = 1.5;

/// The largest `|value - other|` over the coarse reads that exist; infinite when none does.
fn spread(value: f64, coarse: impl Iterator<Item = Option<f64>>) -> f64 {
    coarse
        .flatten()
        .map(|c| (value - c).abs())
        .reduce(f64::max)
        .unwrap_or(f64::INFINITY)
}

/// Estimated ray-counting noise of a read of `map` by a source of radius `r` pixels centred at
/// `(u, v)` (pixel coordinates), with the map's errors correlated over `step` pixels (1 for
/// ray shooting; the polygon engine's cells, below). The pixel noise `sigma` is measured as the
/// root mean square of `A_p - mean(its four neighbours)` (`step` pixels away; times `sqrt(4/5)`, its ratio to the noise of independent
/// pixels) at eight pixels on the rim. A read splits the `2 pi r` pixels of the rim, whose
/// noises then count with weights below one (the lattice's counting errors of whole pixels
/// cancel between neighbours), so the noise of the read is `sigma sqrt(2 pi r / 3) / (pi r^2)`
/// `= 0.46 sigma / r^1.5`; [`NOISE_FACTOR`] = 0.9 (fitted on ray-shot caustic crossings,
/// tests/integration/curve.rs) covers the rim pixels' correlation. Where the magnification
/// curves within a pixel the residual counts the curvature too, so the term only grows there.
/// With errors shared by blocks of `step` pixels, the rim holds `2 pi r / step` independent
/// blocks and the disk `pi r^2 / step^2`: the same rule in units of blocks, `r / step`.
fn noise(map: &MagnificationMap, u: f64, v: f64, r: f64, step: isize) -> f64 {
    let n = map.window.pixels as isize;
    let at = |i: isize, j: isize| map.data[[j as usize, i as usize]] as f64;
    let (mut sum, mut count) = (0.0, 0);
    // The eight directions k pi / 4.
    const H: f64 = std::f64::consts::FRAC_1_SQRT_2;
    const DIRECTIONS: [(f64, f64); 8] = [
        (1.0, 0.0),
        (H, H),
        (0.0, 1.0),
        (-H, H),
        (-1.0, 0.0),
        (-H, -H),
        (0.0, -1.0),
        (H, -H),
    ];
    for (cos, sin) in DIRECTIONS {
        let i = (u + r * cos).floor() as isize;
        let j = (v + r * sin).floor() as isize;
        if i < step || j < step || i > n - 1 - step || j > n - 1 - step {
            continue;
        }
        let residual = at(i, j)
            - 0.25 * (at(i - step, j) + at(i + step, j) + at(i, j - step) + at(i, j + step));
        sum += residual * residual;
        count += 1;
    }
    if count == 0 {
        return 0.0;
    }
    NOISE_FACTOR * (0.8 * sum / count as f64).sqrt() / (r / step as f64).max(1.0).powf(1.5)
}

/// The noise term's step, in pixels: 1 for ray-shot maps; for polygon-mapped maps
/// [`CELL_STEPS`] cell sides rounded up (1 from 2.25 cells per pixel on: the ray rule; see the module docs).
pub(crate) fn noise_step(map: &MagnificationMap) -> usize {
    if map.provenance.engine != "polygon" {
        return 1;
    }
    (CELL_STEPS / map.provenance.density.sqrt()).ceil().max(1.0) as usize
}

/// The noise term of reads of one map by one source (see [`noise`]).
#[derive(Clone, Copy)]
pub(crate) struct NoiseTerm<'a> {
    fine: &'a MagnificationMap,
    rho: f64,
    step: isize,
}

impl<'a> NoiseTerm<'a> {
    /// The term for reads of `fine` by a source of radius `rho`.
    pub(crate) fn new(fine: &'a MagnificationMap, rho: f64) -> Self {
        NoiseTerm {
            fine,
            rho,
            step: noise_step(fine) as isize,
        }
    }

    /// The noise term at `(x, y)`.
    fn at(&self, x: f64, y: f64) -> f64 {
        let w = &self.fine.window;
        let (x0, y0) = w.origin();
        let d = w.pixel_size();
        noise(
            self.fine,
            (x - x0) / d,
            (y - y0) / d,
            self.rho / d,
            self.step,
        )
    }

    /// Error estimate of a pre-convolved read `value` at `(x, y)`, given the binned maps
    /// pre-convolved the same way (`coarse`).
    pub(crate) fn convolved(&self, coarse: &[Preconvolved], value: f64, x: f64, y: f64) -> f64 {
        SPREAD_FACTOR * spread(value, coarse.iter().map(|c| c.read(x, y))) + self.at(x, y)
    }
}

/// Direct and point reads of the binned maps, one reader per layout.
pub(crate) struct CoarseReaders<'a> {
    coarse: &'a Coarse,
    noise: NoiseTerm<'a>,
    direct: Vec<DirectReader<'a>>,
}

impl<'a> CoarseReaders<'a> {
    /// Readers of `coarse` (the binned `fine`) for `profile`.
    pub(crate) fn new(
        fine: &'a MagnificationMap,
        coarse: &'a Coarse,
        profile: &SourceProfile,
    ) -> Self {
        let direct = if profile.rho > 0.0 {
            coarse
                .maps
                .iter()
                .map(|m| DirectReader::new(m, profile))
                .collect()
        } else {
            Vec::new()
        };
        CoarseReaders {
            coarse,
            noise: NoiseTerm::new(fine, profile.rho),
            direct,
        }
    }

    /// The noise term at `(x, y)`.
    fn noise(&self, x: f64, y: f64) -> f64 {
        self.noise.at(x, y)
    }

    /// Error estimate of a point-source read `value` at `(x, y)`.
    pub(crate) fn point(&self, value: f64, x: f64, y: f64) -> f64 {
        POINT_FACTOR
            * (SPREAD_FACTOR * spread(value, self.coarse.maps.iter().map(|m| point_read(m, x, y)))
                + self.noise(x, y))
    }

    /// Error estimate of a direct read `value` at `(x, y)`.
    pub(crate) fn direct(&self, value: f64, x: f64, y: f64) -> f64 {
        SPREAD_FACTOR * spread(value, self.direct.iter().map(|r| r.read(x, y))) + self.noise(x, y)
    }
}
