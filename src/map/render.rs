//! PNG pictures of magnification maps: log-scaled colours, y up, lens marks, caustic lines and a
//! colour bar.
//!
//! One PNG pixel per map pixel, row 0 of the picture at the top (largest y). Colours follow
//! log10 of the mean magnification on the perceptually uniform "magma" gradient, between robust
//! limits: the 0.5th and 99.5th percentiles of the map, or its full range when those coincide.
//! Maps of at least [`COLOUR_BAR_MIN_PIXELS`] pixels get a colour bar at the right, labelled
//! with the magnifications at its ends and ticked at powers of ten.

use super::{MagnificationMap, Window};
use crate::error::Result;
use crate::fsutil::write_png;
use crate::lens::LensSystem;
use image::{Rgb, RgbImage};
use std::path::Path;

/// Colour of caustic lines: cyan, far from every colour of the gradient.
pub const CURVE_COLOUR: [u8; 3] = [0, 230, 255];
/// Colour of lens marks: green, far from every colour of the gradient.
pub const LENS_COLOUR: [u8; 3] = [60, 255, 60];
/// Maps narrower than this get no colour bar.
pub const COLOUR_BAR_MIN_PIXELS: usize = 32;

const MARGIN_COLOUR: Rgb<u8> = Rgb([255, 255, 255]);
const INK: Rgb<u8> = Rgb([0, 0, 0]);
const GRADIENT: colorous::Gradient = colorous::MAGMA;

/// What to draw over a map, in its own frames.
///
/// ```
/// use causeway::lens::LensSystem;
/// use causeway::map::Overlay;
/// let overlay = Overlay::from_lens(&LensSystem::binary(1.0, 1.0).unwrap());
/// assert_eq!(overlay.lenses, vec![(-0.5, 0.0), (0.5, 0.0)]);
/// assert!(overlay.curves.is_empty());
/// ```
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Overlay {
    /// Lens positions (lens-plane coordinates), marked with a cross when inside the window.
    pub lenses: Vec<(f64, f64)>,
    /// Polylines in source-plane coordinates (caustics), clipped to the window; a non-finite
    /// point breaks a line.
    pub curves: Vec<Vec<(f64, f64)>>,
}

impl Overlay {
    /// Marks for the lenses of `lens`, no curves.
    pub fn from_lens(lens: &LensSystem) -> Self {
        Overlay {
            lenses: lens
                .lenses()
                .iter()
                .map(|l| (l.position.re, l.position.im))
                .collect(),
            curves: Vec::new(),
        }
    }
}

/// Draws the map with its overlay and writes it as a PNG, atomically.
///
/// ```
/// use causeway::lens::LensSystem;
/// use causeway::map::{render_png, MagnificationMap, Overlay, Provenance, Window};
/// let window = Window::new((0.0, 0.0), 2.0, 8).unwrap();
/// let data = ndarray::Array2::from_shape_fn((8, 8), |(iy, ix)| 1.0 + (ix * iy) as f32);
/// let provenance = Provenance {
///     lens: LensSystem::single(),
///     engine: "formula".into(),
///     density: 0.0,
///     rays_shot: 0,
///     rays_landed: 0,
///     version: "0".into(),
///     build_time: "2026-01-01T00:00:00".into(),
///     build_seconds: 0.0,
/// };
/// let map = MagnificationMap { window, data, provenance };
/// let path = std::env::temp_dir().join(format!("causeway-doc-{}.png", std::process::id()));
/// render_png(&map, &Overlay::from_lens(&map.provenance.lens), &path).unwrap();
/// assert!(std::fs::metadata(&path).unwrap().len() > 0);
/// std::fs::remove_file(&path).unwrap();
/// ```
pub fn render_png(map: &MagnificationMap, overlay: &Overlay, path: &Path) -> Result<()> {
    write_png(path, &render(map, overlay))
}

/// The picture: the map's pixels, then the overlay, then the colour bar to the right.
fn render(map: &MagnificationMap, overlay: &Overlay) -> RgbImage {
    let n = map.window.pixels;
    let scale = LogScale::of(map.data.iter().copied());
    let bar = ColourBar::for_pixels(n);
    let width = n + bar.as_ref().map_or(0, ColourBar::width);
    let palette = Palette::new();
    let mut image = RgbImage::from_pixel(width as u32, n as u32, MARGIN_COLOUR);
    let stride = 3 * width;
    for (iy, values) in map.data.outer_iter().enumerate() {
        let start = (n - 1 - iy) * stride;
        let row = &mut image.as_mut()[start..start + 3 * n];
        for (px, &v) in row.chunks_exact_mut(3).zip(values.iter()) {
            px.copy_from_slice(&palette.at(scale.position(v)).0);
        }
    }
    let mut canvas = Canvas::new(&mut image, n, (n / 1024) as i64);
    for curve in &overlay.curves {
        for pair in curve.windows(2) {
            let (a, b) = (
                Canvas::to_pixels(&map.window, pair[0]),
                Canvas::to_pixels(&map.window, pair[1]),
            );
            canvas.segment(a, b, Rgb(CURVE_COLOUR));
        }
    }
    let arm = (n / 64).max(2) as f64;
    for &(x, y) in &overlay.lenses {
        if map.window.contains(x, y) {
            let (px, py) = Canvas::to_pixels(&map.window, (x, y));
            canvas.segment((px - arm, py), (px + arm, py), Rgb(LENS_COLOUR));
            canvas.segment((px, py - arm), (px, py + arm), Rgb(LENS_COLOUR));
        }
    }
    if let Some(bar) = bar {
        bar.draw(&mut image, n, &scale, &palette);
    }
    image
}

/// The gradient sampled at 4096 evenly spaced points, 0 and 1 included: a table look-up is
/// much cheaper per pixel than evaluating the gradient, and finer than 8-bit colour can show.
struct Palette(Vec<Rgb<u8>>);

impl Palette {
    const SIZE: usize = 4096;

    fn new() -> Self {
        let last = (Self::SIZE - 1) as f64;
        Palette(
            (0..Self::SIZE)
                .map(|k| {
                    let c = GRADIENT.eval_continuous(k as f64 / last);
                    Rgb([c.r, c.g, c.b])
                })
                .collect(),
        )
    }

    /// Colour at `t` in [0, 1].
    fn at(&self, t: f64) -> Rgb<u8> {
        // Nearest entry: `+ 0.5` then truncation rounds the non-negative index, and is much
        // cheaper than f64::round.
        self.0[(t.clamp(0.0, 1.0) * (Self::SIZE - 1) as f64 + 0.5) as usize]
    }
}

/// Maps magnifications to [0, 1] by log10 between two limits.
#[derive(Debug, Clone, Copy, PartialEq)]
struct LogScale {
    lo: f64,
    hi: f64,
}

impl LogScale {
    /// Robust limits from the positive finite values: 0.5th and 99.5th percentiles of log10,
    /// widened to the full range if they coincide (on at most ~4 million evenly strided samples,
    /// so that huge maps stay cheap; deterministic).
    fn of(values: impl ExactSizeIterator<Item = f32>) -> Self {
        let stride = values.len().div_ceil(1 << 22).max(1);
        let mut logs: Vec<f64> = values
            .step_by(stride)
            .filter(|v| v.is_finite() && *v > 0.0)
            .map(|v| (v as f64).log10())
            .collect();
        if logs.is_empty() {
            return LogScale { lo: 0.0, hi: 1.0 };
        }
        let mut at = |p: f64| {
            let k = ((logs.len() - 1) as f64 * p).round() as usize;
            *logs.select_nth_unstable_by(k, f64::total_cmp).1
        };
        let (mut lo, mut hi) = (at(0.005), at(0.995));
        if hi <= lo {
            (lo, hi) = (at(0.0), at(1.0));
        }
        if hi <= lo {
            hi = lo + 1.0;
        }
        LogScale { lo, hi }
    }

    /// Position in [0, 1]; non-positive and non-finite values go to 0.
    fn position(&self, v: f32) -> f64 {
        if !(v.is_finite() && v > 0.0) {
            return 0.0;
        }
        (((v as f64).log10() - self.lo) / (self.hi - self.lo)).clamp(0.0, 1.0)
    }
}

/// Line drawing on the map part of the picture, with a square brush.
struct Canvas<'a> {
    image: &'a mut RgbImage,
    n: usize,
    brush: i64,
}

impl<'a> Canvas<'a> {
    fn new(image: &'a mut RgbImage, n: usize, brush: i64) -> Self {
        Canvas { image, n, brush }
    }

    /// Continuous pixel coordinates (along x, along y, in pixels from the lower-left corner) of
    /// a source-plane point: pixel (ix, iy) covers [ix, ix + 1) x [iy, iy + 1), as in
    /// [`Window::pixel_of`].
    fn to_pixels(w: &Window, (x, y): (f64, f64)) -> (f64, f64) {
        let (x0, y0) = w.origin();
        let d = w.pixel_size();
        ((x - x0) / d, (y - y0) / d)
    }

    /// The segment a-b clipped to the map (Liang-Barsky), stepped in half pixels.
    fn segment(&mut self, a: (f64, f64), b: (f64, f64), c: Rgb<u8>) {
        let Some((a, b)) = clip(a, b, self.n as f64) else {
            return;
        };
        let steps = (2.0 * (b.0 - a.0).abs().max((b.1 - a.1).abs())).ceil() as usize + 1;
        for k in 0..=steps {
            let t = k as f64 / steps as f64;
            self.dot(a.0 + t * (b.0 - a.0), a.1 + t * (b.1 - a.1), c);
        }
    }

    /// Paints the brush around the pixel containing (fx, fy); picture rows run down.
    fn dot(&mut self, fx: f64, fy: f64, c: Rgb<u8>) {
        let last = self.n as i64 - 1;
        let (ix, iy) = (fx.floor() as i64, fy.floor() as i64);
        for dy in -self.brush..=self.brush {
            for dx in -self.brush..=self.brush {
                let (col, iy) = (ix + dx, iy + dy);
                if (0..=last).contains(&col) && (0..=last).contains(&iy) {
                    self.image.put_pixel(col as u32, (last - iy) as u32, c);
                }
            }
        }
    }
}

/// Clips a segment to the square [0, size]^2; `None` when it misses, or has a non-finite end.
fn clip(a: (f64, f64), b: (f64, f64), size: f64) -> Option<((f64, f64), (f64, f64))> {
    if !(a.0.is_finite() && a.1.is_finite() && b.0.is_finite() && b.1.is_finite()) {
        return None;
    }
    let (dx, dy) = (b.0 - a.0, b.1 - a.1);
    let (mut t0, mut t1) = (0.0f64, 1.0f64);
    for (p, q) in [(-dx, a.0), (dx, size - a.0), (-dy, a.1), (dy, size - a.1)] {
        if p == 0.0 {
            if q < 0.0 {
                return None;
            }
        } else {
            let r = q / p;
            if p < 0.0 {
                t0 = t0.max(r);
            } else {
                t1 = t1.min(r);
            }
        }
    }
    (t0 <= t1).then_some((
        (a.0 + t0 * dx, a.1 + t0 * dy),
        (a.0 + t1 * dx, a.1 + t1 * dy),
    ))
}

/// The colour bar right of the map: a gap, the bar with decade ticks, the end labels.
struct ColourBar {
    /// Size unit in picture pixels (font pixel, tick length).
    unit: usize,
}

impl ColourBar {
    /// Characters in the longest end label.
    const LABEL_CHARS: usize = 6;

    fn for_pixels(n: usize) -> Option<Self> {
        (n >= COLOUR_BAR_MIN_PIXELS).then(|| ColourBar {
            unit: (n / 256).max(1),
        })
    }

    fn width(&self) -> usize {
        // gap 2, ticks 2, bar 4, gap 2, label (4 per character).
        self.unit * (10 + 4 * Self::LABEL_CHARS)
    }

    fn draw(&self, image: &mut RgbImage, n: usize, scale: &LogScale, palette: &Palette) {
        let u = self.unit;
        let (tick_x, bar_x, label_x) = (n + 2 * u, n + 4 * u, n + 10 * u);
        for row in 0..n {
            let t = 1.0 - (row as f64 + 0.5) / n as f64;
            for x in bar_x..bar_x + 4 * u {
                image.put_pixel(x as u32, row as u32, palette.at(t));
            }
        }
        // Ticks at the powers of ten inside the range.
        let row_of =
            |log: f64| ((1.0 - (log - scale.lo) / (scale.hi - scale.lo)) * n as f64) as usize;
        for decade in (scale.lo.ceil() as i64)..=(scale.hi.floor() as i64) {
            let row = row_of(decade as f64).min(n - 1);
            for x in tick_x..tick_x + 2 * u {
                image.put_pixel(x as u32, row as u32, INK);
            }
        }
        let label = |log: f64| magnification_label(10f64.powf(log));
        text(image, label_x, 0, u, &label(scale.hi));
        text(image, label_x, n - 5 * u, u, &label(scale.lo));
    }
}

/// Two or three significant digits, at most [`ColourBar::LABEL_CHARS`] characters.
fn magnification_label(v: f64) -> String {
    let s = match v {
        v if v >= 999_999.5 => format!("{v:.0e}"),
        v if v >= 100.0 => format!("{v:.0}"),
        v if v >= 10.0 => format!("{v:.1}"),
        _ => format!("{v:.2}"),
    };
    s.chars().take(ColourBar::LABEL_CHARS).collect()
}

/// A 3 x 5 pixel font for digits, the point and the exponent 'e'.
fn glyph(c: char) -> [u8; 5] {
    match c {
        '0' => [0b111, 0b101, 0b101, 0b101, 0b111],
        '1' => [0b010, 0b110, 0b010, 0b010, 0b111],
        '2' => [0b111, 0b001, 0b111, 0b100, 0b111],
        '3' => [0b111, 0b001, 0b111, 0b001, 0b111],
        '4' => [0b101, 0b101, 0b111, 0b001, 0b001],
        '5' => [0b111, 0b100, 0b111, 0b001, 0b111],
        '6' => [0b111, 0b100, 0b111, 0b101, 0b111],
        '7' => [0b111, 0b001, 0b010, 0b010, 0b010],
        '8' => [0b111, 0b101, 0b111, 0b101, 0b111],
        '9' => [0b111, 0b101, 0b111, 0b001, 0b111],
        '.' => [0b000, 0b000, 0b000, 0b000, 0b010],
        'e' => [0b000, 0b111, 0b111, 0b100, 0b111],
        _ => [0; 5],
    }
}

/// Writes `s` with its top-left corner at (x, y), each font pixel `u` x `u`.
fn text(image: &mut RgbImage, x: usize, y: usize, u: usize, s: &str) {
    for (i, c) in s.chars().enumerate() {
        for (r, bits) in glyph(c).iter().enumerate() {
            for col in 0..3 {
                if bits >> (2 - col) & 1 == 1 {
                    let (px, py) = (x + (4 * i + col) * u, y + r * u);
                    for dy in 0..u {
                        for dx in 0..u {
                            image.put_pixel((px + dx) as u32, (py + dy) as u32, INK);
                        }
                    }
                }
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn log_scale_uses_percentiles_or_the_full_range() {
        // 1000 values 1..=1000: the 0.5th and 99.5th percentiles (nearest rank) are 6 and 995.
        let s = LogScale::of((1..1001).map(|v| v as f32));
        assert_eq!((s.lo, s.hi), (6f64.log10(), 995f64.log10()));
        assert_eq!(s.position(1.0), 0.0);
        assert_eq!(s.position(1e6), 1.0);
        assert_eq!(s.position(0.0), 0.0);
        assert_eq!(s.position(f32::NAN), 0.0);
        // A flat map with one spike: the percentiles coincide, so the full range is used.
        let s = LogScale::of((0..400).map(|i| if i == 7 { 1000.0 } else { 1.0 }));
        assert_eq!((s.lo, s.hi), (0.0, 3.0));
    }

    #[test]
    fn clipping_keeps_the_inside_part() {
        let (a, b) = clip((-1.0, 1.0), (3.0, 1.0), 2.0).unwrap();
        assert_eq!((a, b), ((0.0, 1.0), (2.0, 1.0)));
        assert!(clip((-1.0, -1.0), (-0.5, 3.0), 2.0).is_none());
        assert!(clip((0.5, f64::NAN), (1.0, 1.0), 2.0).is_none());
    }

    #[test]
    fn labels_fit_the_bar() {
        assert_eq!(magnification_label(1.0), "1.00");
        assert_eq!(magnification_label(12.34), "12.3");
        assert_eq!(magnification_label(1234.0), "1234");
        assert_eq!(magnification_label(2e7), "2e7");
        for c in "0123456789.e".chars() {
            assert_ne!(glyph(c), [0; 5], "{c}");
        }
    }
}
