//! PNG light-curve plots: magnification against time (or against distance along the path).
//!
//! A white 800 x 500 picture with a black frame, ten ticks per axis and the curve drawn as
//! line segments: dark blue where the map made the point, orange where the off-map
//! continuation did. The axis ranges are the data's (the magnification axis from its smallest
//! to its largest value, padded by 5%); no text is drawn, so callers report the ranges.

use super::{Method, Sample};
use crate::error::{Error, Result};
use crate::fsutil::write_atomic;
use image::{ImageEncoder, Rgb, RgbImage};
use std::path::Path;

const WIDTH: u32 = 800;
const HEIGHT: u32 = 500;
const MARGIN: i64 = 40;
const MAP_INK: Rgb<u8> = Rgb([20, 40, 140]);
const OFF_MAP_INK: Rgb<u8> = Rgb([230, 120, 0]);

/// The abscissa and magnification ranges of a plot: `((x_min, x_max), (a_min, a_max))`.
pub type PlotRanges = ((f64, f64), (f64, f64));

/// Draws the curve `samples` against `abscissa` (one value per sample) into a PNG at `path`
/// (written atomically); returns the plotted ranges.
///
/// ```
/// use causeway::curve::{plot_png, Method, Sample};
/// let samples: Vec<Sample> = (0..50).map(|k| Sample {
///     x: k as f64 * 0.01, y: 0.0, magnification: 1.0 + 1.0 / (1.0 + k as f64), method: Method::Direct,
/// }).collect();
/// let t: Vec<f64> = (0..50).map(|k| k as f64).collect();
/// let path = std::env::temp_dir().join(format!("causeway-doc-plot-{}.png", std::process::id()));
/// let ((t0, t1), (a0, a1)) = plot_png(&samples, &t, &path).unwrap();
/// assert_eq!((t0, t1), (0.0, 49.0));
/// assert!(a0 < 1.02 && a1 > 2.0);
/// std::fs::remove_file(&path).unwrap();
/// ```
pub fn plot_png(samples: &[Sample], abscissa: &[f64], path: &Path) -> Result<PlotRanges> {
    if samples.is_empty() || samples.len() != abscissa.len() {
        return Err(Error::input("--png: nothing to plot"));
    }
    let range = |v: &mut dyn Iterator<Item = f64>| {
        v.fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), x| {
            (lo.min(x), hi.max(x))
        })
    };
    let (x0, x1) = range(&mut abscissa.iter().copied());
    let (a_lo, a_hi) = range(&mut samples.iter().map(|s| s.magnification));
    let pad = 0.05 * (a_hi - a_lo).max(1e-12 * a_hi.abs().max(1.0));
    let (a0, a1) = (a_lo - pad, a_hi + pad);
    let mut img = RgbImage::from_pixel(WIDTH, HEIGHT, Rgb([255, 255, 255]));
    let (w, h) = (WIDTH as i64 - 2 * MARGIN, HEIGHT as i64 - 2 * MARGIN);
    let to_px = |t: f64, a: f64| {
        let fx = if x1 > x0 { (t - x0) / (x1 - x0) } else { 0.5 };
        let fy = (a - a0) / (a1 - a0);
        (
            MARGIN as f64 + fx * w as f64,
            (HEIGHT as i64 - MARGIN) as f64 - fy * h as f64,
        )
    };
    frame(&mut img, w, h);
    for k in 1..samples.len() {
        let ink = match samples[k].method {
            Method::Expansion | Method::Point => OFF_MAP_INK,
            _ => MAP_INK,
        };
        let a = to_px(abscissa[k - 1], samples[k - 1].magnification);
        let b = to_px(abscissa[k], samples[k].magnification);
        segment(&mut img, a, b, ink);
    }
    if samples.len() == 1 {
        let (px, py) = to_px(abscissa[0], samples[0].magnification);
        segment(&mut img, (px - 2.0, py), (px + 2.0, py), MAP_INK);
    }
    let mut bytes = Vec::new();
    image::codecs::png::PngEncoder::new(&mut bytes)
        .write_image(img.as_raw(), WIDTH, HEIGHT, image::ExtendedColorType::Rgb8)
        .map_err(|e| Error::Numerical(format!("{}: PNG encoding failed: {e}", path.display())))?;
    write_atomic(path, &bytes)?;
    Ok(((x0, x1), (a0, a1)))
}

/// The black frame with ten ticks along each axis.
fn frame(img: &mut RgbImage, w: i64, h: i64) {
    let ink = Rgb([0, 0, 0]);
    let (l, r, t, b) = (MARGIN, MARGIN + w, MARGIN, MARGIN + h);
    for x in l..=r {
        put(img, x, t, ink);
        put(img, x, b, ink);
    }
    for y in t..=b {
        put(img, l, y, ink);
        put(img, r, y, ink);
    }
    for k in 0..=10 {
        let x = l + w * k / 10;
        let y = b - h * k / 10;
        for d in 1..=6 {
            put(img, x, b + d, ink);
            put(img, l - d, y, ink);
        }
    }
}

fn put(img: &mut RgbImage, x: i64, y: i64, c: Rgb<u8>) {
    if x >= 0 && y >= 0 && x < WIDTH as i64 && y < HEIGHT as i64 {
        img.put_pixel(x as u32, y as u32, c);
    }
}

/// A two-pixel-wide line from `a` to `b` (pixel coordinates).
fn segment(img: &mut RgbImage, a: (f64, f64), b: (f64, f64), c: Rgb<u8>) {
    let steps = ((b.0 - a.0).abs().max((b.1 - a.1).abs()).ceil() as usize).max(1);
    for s in 0..=steps {
        let f = s as f64 / steps as f64;
        let (x, y) = (a.0 + f * (b.0 - a.0), a.1 + f * (b.1 - a.1));
        let (xi, yi) = (x.round() as i64, y.round() as i64);
        put(img, xi, yi, c);
        put(img, xi, yi + 1, c);
    }
}
