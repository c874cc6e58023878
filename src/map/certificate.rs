//! The accuracy certificate of a map: its measured pixel errors on a seeded sample of pixels.
//!
//! Every map an engine builds is checked against exact references on a sample of its pixels,
//! and the result travels with the map (FITS header cards and a table of the sample, see
//! [`super::fits`]). The error of a pixel is relative: `|map - reference| / reference`, with the
//! map's value as stored (float32).
//!
//! # The sample
//! - Away from caustics: up to [`AWAY_SAMPLE`] pixels drawn by the seeded generator of
//!   [`sample_pixels`] (seed [`SEED`]).
//! - Near caustics: up to [`NEAR_SAMPLE`] pixels (at most one per pixel row of the map) at
//!   seeded points along the caustics inside the window, each moved 0.75 to 2.5 pixels in a seeded
//!   direction, so that they lie beside a fold or cusp rather than on it.
//!
//! # The references
//! A pixel's reference is the mean of the exact point-source magnification over its square:
//! - where the 4 x 4 and 8 x 8 Gauss-Legendre rules over the whole pixel agree to 1e-7
//!   ([`smooth_pixel_mean`]), and so does the 4 x 4 rule on each quarter of the pixel, and the
//!   source has the same number of images at 5 x 5 points of the square, corners and edges
//!   included (rules alone can agree by chance with a cusp tip in a corner), the 8 x 8 value,
//!   and the pixel counts as *away* from caustics;
//! - otherwise the pixel counts as *near* a caustic, and the pixel is cut into 4 x 4 (then, if
//!   needed, 8 x 8) sub-squares, each integrated by the 3 x 3 and 6 x 6 rules; the 6 x 6 sum is
//!   taken when the two sums agree to [`NEAR_TOLERANCE`]. This sub-pixel quadrature stands in for the contour
//!   integral of the pixel's square: it converges wherever the magnification is smooth over
//!   every sub-square, which holds beside a caustic but not on it.
//! - A pixel a caustic crosses (neither sub-division converges) has no reference; it is counted
//!   as *skipped* and left out. The certificate therefore says how accurate the map is beside
//!   caustics, not on the caustic lines themselves, where a pixel mean has an inverse
//!   square-root singularity inside it.
//!
//! Cost: about 170 point-source solves a pixel away from caustics and up to 3,600 near them,
//! spread over the threads; deterministic for any thread count (results are collected in
//! sample order).

use super::reference::{pixel_mean, sample_pixels, smooth_pixel_mean};
use super::Window;
use crate::caustics::caustic_curves;
use crate::lens::LensSystem;
use crate::solve::ImageSolver;
use ndarray::Array2;
use num_complex::Complex64;
use rayon::prelude::*;
use std::collections::HashSet;

/// Seed of the sample (recorded in the certificate).
pub const SEED: u64 = 15;
/// Pixels drawn uniformly over the window.
pub const AWAY_SAMPLE: usize = 200;
/// Pixels drawn beside the caustics.
pub const NEAR_SAMPLE: usize = 40;
/// Relative agreement of the two sub-pixel rules that makes a near-caustic reference.
pub const NEAR_TOLERANCE: f64 = 1e-5;

/// One sampled pixel and its reference.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CertifiedPixel {
    /// Column (x index), from 0.
    pub ix: usize,
    /// Row (y index), from 0.
    pub iy: usize,
    /// Whether the reference needed the sub-pixel quadrature (the pixel is near a caustic).
    pub near: bool,
    /// The reference pixel mean of the point-source magnification.
    pub reference: f64,
}

/// Median and 99th percentile of the relative errors of a class of pixels.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ErrorSummary {
    /// Pixels in the class.
    pub count: usize,
    /// Median relative error (the mean of the middle two for an even count).
    pub median: f64,
    /// 99th percentile, linear interpolation between order statistics (numpy's default).
    pub p99: f64,
}

/// A map's measured accuracy.
#[derive(Debug, Clone, PartialEq)]
pub struct Certificate {
    /// Seed of the sample.
    pub seed: u64,
    /// The pixels away from caustics (`None` when there is none).
    pub away: Option<ErrorSummary>,
    /// The pixels near caustics (`None` when there is none).
    pub near: Option<ErrorSummary>,
    /// Sampled pixels without a converged reference (a caustic crosses them).
    pub skipped: usize,
    /// Wall-clock time of the certificate, seconds.
    pub seconds: f64,
    /// The sampled pixels with a reference, in sample order.
    pub pixels: Vec<CertifiedPixel>,
}

impl Certificate {
    /// Measures the certificate of pixel data `data` (`[[iy, ix]]`) built for `lens` over
    /// `window`; `None` when the exact solver does not take this lens.
    ///
    /// ```
    /// use causeway::engine::{Engine, PolygonMapping};
    /// use causeway::{lens::LensSystem, map::{certificate::Certificate, Window}};
    /// let lens = LensSystem::binary(1.0, 0.1).unwrap();
    /// let window = Window::new((0.0, 0.0), 1.0, 40).unwrap();
    /// let map = PolygonMapping::new(4.0).build(&lens, &window).unwrap();
    /// let c = Certificate::measure(&lens, &window, &map.data).unwrap();
    /// assert!(c.away.unwrap().median < 1e-2);
    /// ```
    pub fn measure(lens: &LensSystem, window: &Window, data: &Array2<f32>) -> Option<Self> {
        let started = std::time::Instant::now();
        ImageSolver::new(lens).ok()?;
        let candidates = candidates(lens, window);
        let references: Vec<Option<(bool, f64)>> = candidates
            .par_iter()
            .map_init(
                || ImageSolver::new(lens).expect("checked above"),
                |solver, &(ix, iy)| reference(solver, window, ix, iy),
            )
            .collect();
        let pixels: Vec<CertifiedPixel> = candidates
            .iter()
            .zip(&references)
            .filter_map(|(&(ix, iy), r)| {
                r.map(|(near, reference)| CertifiedPixel {
                    ix,
                    iy,
                    near,
                    reference,
                })
            })
            .collect();
        let (away, near) = summaries(&pixels, data)?;
        Some(Certificate {
            seed: SEED,
            away,
            near,
            skipped: candidates.len() - pixels.len(),
            seconds: started.elapsed().as_secs_f64(),
            pixels,
        })
    }

    /// Whether the stated summaries are those of the sampled pixels against `data` (a
    /// certificate read from a file: its cards, its table and its image must agree).
    pub fn reproduces(&self, data: &Array2<f32>) -> bool {
        summaries(&self.pixels, data) == Some((self.away, self.near))
    }
}

/// The summaries away from and near caustics of `pixels` against `data`; `None` when a pixel
/// lies outside the data.
fn summaries(
    pixels: &[CertifiedPixel],
    data: &Array2<f32>,
) -> Option<(Option<ErrorSummary>, Option<ErrorSummary>)> {
    let errors = |near: bool| -> Option<Vec<f64>> {
        pixels
            .iter()
            .filter(|p| p.near == near)
            .map(|p| Some(relative_error(*data.get([p.iy, p.ix])?, p.reference)))
            .collect()
    };
    Some((
        ErrorSummary::of(errors(false)?),
        ErrorSummary::of(errors(true)?),
    ))
}

/// `|value - reference| / reference`, the value as stored.
fn relative_error(value: f32, reference: f64) -> f64 {
    (value as f64 - reference).abs() / reference
}

impl ErrorSummary {
    /// The summary of `errors`; `None` when empty.
    ///
    /// ```
    /// use causeway::map::certificate::ErrorSummary;
    /// let s = ErrorSummary::of(vec![4.0, 1.0, 3.0, 2.0]).unwrap();
    /// // numpy: median([1, 2, 3, 4]) = 2.5, percentile(..., 99) = 3.97.
    /// assert_eq!(s.median, 2.5);
    /// assert!((s.p99 - 3.97).abs() < 1e-12);
    /// ```
    pub fn of(mut errors: Vec<f64>) -> Option<Self> {
        if errors.is_empty() {
            return None;
        }
        errors.sort_by(f64::total_cmp);
        Some(ErrorSummary {
            count: errors.len(),
            median: percentile(&errors, 50.0),
            p99: percentile(&errors, 99.0),
        })
    }
}

/// Percentile `p` of sorted values, linear between order statistics (numpy's default rule).
fn percentile(sorted: &[f64], p: f64) -> f64 {
    let pos = p / 100.0 * (sorted.len() - 1) as f64;
    let lo = pos.floor() as usize;
    let hi = (lo + 1).min(sorted.len() - 1);
    let frac = pos - lo as f64;
    sorted[lo] + frac * (sorted[hi] - sorted[lo])
}

/// The sampled pixels: uniform ones first, then those beside the caustics, each once.
fn candidates(lens: &LensSystem, window: &Window) -> Vec<(usize, usize)> {
    let mut seen = HashSet::new();
    sample_pixels(window, AWAY_SAMPLE, SEED)
        .into_iter()
        .chain(beside_caustics(lens, window))
        .filter(|p| seen.insert(*p))
        .collect()
}

/// Pixels 0.75 to 2.5 pixels from seeded points on the caustics within (or just outside) the window.
fn beside_caustics(lens: &LensSystem, window: &Window) -> Vec<(usize, usize)> {
    let Ok(lines) = caustic_curves(lens) else {
        return Vec::new();
    };
    let d = window.pixel_size();
    let (x0, y0) = window.origin();
    let grow = 4.0 * d;
    let inside = |(x, y): (f64, f64)| {
        x >= x0 - grow
            && x <= x0 + window.width + grow
            && y >= y0 - grow
            && y <= y0 + window.width + grow
    };
    // Segments with an end near the window, and their cumulative lengths.
    let mut segments = Vec::new();
    let mut total = 0.0;
    for line in &lines {
        for pair in line.windows(2) {
            let (a, b) = (pair[0], pair[1]);
            if inside(a) || inside(b) {
                total += (b.0 - a.0).hypot(b.1 - a.1);
                segments.push((a, b, total));
            }
        }
    }
    if total <= 0.0 {
        return Vec::new();
    }
    let mut state = SEED ^ 0x9E37_79B9_7F4A_7C15;
    let mut uniform = move || {
        state = state
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        (state >> 11) as f64 / (1u64 << 53) as f64
    };
    let count = NEAR_SAMPLE.min(window.pixels);
    (0..count)
        .filter_map(|_| {
            let at = uniform() * total;
            let k = segments
                .partition_point(|s| s.2 < at)
                .min(segments.len() - 1);
            let (a, b, end) = segments[k];
            let len = (b.0 - a.0).hypot(b.1 - a.1);
            let t = if len > 0.0 {
                1.0 - (end - at) / len
            } else {
                0.0
            };
            let angle = std::f64::consts::TAU * uniform();
            let r = d * (0.75 + 1.75 * uniform());
            let x = a.0 + t * (b.0 - a.0) + r * angle.cos();
            let y = a.1 + t * (b.1 - a.1) + r * angle.sin();
            window.pixel_of(x, y)
        })
        .collect()
}

/// Whether the source has the same number of images at the 5 x 5 points of the pixel's
/// square that include its corners and edges (a caustic inside changes it by two).
fn same_image_count(
    solver: &mut ImageSolver,
    window: &Window,
    ix: usize,
    iy: usize,
) -> Option<bool> {
    let (cx, cy) = window.pixel_center(ix, iy);
    let d = window.pixel_size();
    let mut first = None;
    for a in 0..5 {
        for b in 0..5 {
            let zeta = Complex64::new(
                cx + d * (a as f64 / 4.0 - 0.5),
                cy + d * (b as f64 / 4.0 - 0.5),
            );
            let count = solver.images(zeta).ok()?.len();
            if *first.get_or_insert(count) != count {
                return Some(false);
            }
        }
    }
    Some(true)
}

/// The reference of a pixel and whether it is near a caustic; `None` when no rule converges.
fn reference(
    solver: &mut ImageSolver,
    window: &Window,
    ix: usize,
    iy: usize,
) -> Option<(bool, f64)> {
    let (cx, cy) = window.pixel_center(ix, iy);
    let split = |solver: &mut ImageSolver, k: usize, rule: usize| -> Option<f64> {
        let sub = Window::new((cx, cy), window.pixel_size(), k).ok()?;
        let mut sum = 0.0;
        for sy in 0..k {
            for sx in 0..k {
                sum += pixel_mean(solver, &sub, sx, sy, rule).ok()?;
            }
        }
        Some(sum / (k * k) as f64)
    };
    let smooth = match same_image_count(solver, window, ix, iy)? {
        true => smooth_pixel_mean(solver, window, ix, iy).ok()?,
        false => None,
    };
    if let Some(v) = smooth {
        // Two rules over the whole pixel can agree by chance with a cusp inside: a third,
        // on other nodes, must agree as well.
        if (split(solver, 2, 4)? - v).abs() < 1e-7 * v {
            return Some((false, v));
        }
    }
    for k in [4, 8] {
        let (coarse, fine) = (split(solver, k, 3)?, split(solver, k, 6)?);
        let gap = (fine - coarse).abs() / fine;
        if gap <= NEAR_TOLERANCE {
            return Some((true, fine));
        }
        if gap > 1e-2 {
            // A caustic runs through a sub-square: finer squares would not converge either.
            return None;
        }
    }
    None
}
