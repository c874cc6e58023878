//! PNG figures of magnification maps: the map in log-scaled colours with y up, framed by axes
//! in Einstein radii, lens marks and caustic lines over it, and a colour bar of log10
//! magnification at the right.
//!
//! Maps of fewer than [`MIN_SIDE`] pixels are enlarged by a whole factor (each map pixel a
//! square of picture pixels); larger maps keep one picture pixel per map pixel. Colours follow
//! log10 of the mean magnification on the perceptually uniform "magma" gradient, between
//! robust limits: the 0.5th and 99.5th percentiles of the map, or its full range when those
//! coincide. Text grows with the picture.

use super::{MagnificationMap, Window};
use crate::error::Result;
use crate::fsutil::write_png;
use crate::lens::LensSystem;
use crate::plot::axes::{Frame, Scale, INK, PAD};
use crate::plot::colourbar::ColourBar;
use crate::plot::draw::segment;
use crate::plot::text;
use image::{Rgb, RgbImage};
use std::path::Path;

/// Colour of caustic lines: a sea green absent from the gradient.
pub const CURVE_COLOUR: [u8; 3] = [30, 215, 170];
/// Colour of lens marks (crosses edged in black): a light lime.
pub const LENS_COLOUR: [u8; 3] = [190, 255, 90];
/// Maps with fewer pixels per side are enlarged to at least this side.
pub const MIN_SIDE: usize = 480;

const PAPER: Rgb<u8> = Rgb([255, 255, 255]);
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
///     certificate: None,
/// };
/// let map = MagnificationMap { window, data, provenance };
/// let path = std::env::temp_dir().join(format!("causeway-doc-{}.png", std::process::id()));
/// render_png(&map, &Overlay::from_lens(&map.provenance.lens), &path).unwrap();
/// assert!(std::fs::metadata(&path).unwrap().len() > 0);
/// std::fs::remove_file(&path).unwrap();
/// ```
pub fn render_png(map: &MagnificationMap, overlay: &Overlay, path: &Path) -> Result<()> {
    write_png(path, &figure(map, overlay).0)
}

/// Whole-number enlargement of an `n`-pixel map, the side it is drawn at, and the text scale.
fn sizes(n: usize) -> (usize, i64, i64) {
    let k = MIN_SIDE.div_ceil(n.max(1)).max(1);
    let side = (n * k) as i64;
    (k, side, ((side + 200) / 400).max(2))
}

/// The figure (title, framed map with its overlay, colour bar) and the frame of the map in it.
fn figure(map: &MagnificationMap, overlay: &Overlay) -> (RgbImage, Frame) {
    let n = map.window.pixels;
    let (k, side, ts) = sizes(n);
    let scale = LogScale::of(map.data.iter().copied());
    let palette = Palette::new();
    let colour = |t: f64| palette.at(t);
    let ticks = Scale::linear(scale.lo, scale.hi)
        .ticks()
        .into_iter()
        .map(|(v, label)| ((v - scale.lo) / (scale.hi - scale.lo), label))
        .collect();
    let bar = ColourBar {
        label: "log10 magnification",
        colour: &colour,
        ticks,
    };
    let (x0, y0) = map.window.origin();
    let w = map.window.width;
    let title_h = text::height(ts);
    let top = PAD * ts + title_h + 4 * ts;
    let (frame, (width, height)) = Frame::placed(
        Scale::linear(x0, x0 + w),
        Scale::linear(y0, y0 + w),
        (side, side),
        (top, bar.width(ts)),
        ts,
    );
    let mut image = RgbImage::from_pixel(width as u32, height as u32, PAPER);
    let area = frame.area;
    // Map rows, the top picture row first (largest y): each map row k picture rows.
    let stride = 3 * width as usize;
    for (iy, values) in map.data.outer_iter().enumerate() {
        let first = area.top as usize + (n - 1 - iy) * k;
        let start = first * stride + 3 * area.left as usize;
        let row = &mut image.as_mut()[start..start + 3 * side as usize];
        for (px, &v) in row.chunks_exact_mut(3 * k).zip(values.iter()) {
            let c = palette.at(scale.position(v)).0;
            for p in px.chunks_exact_mut(3) {
                p.copy_from_slice(&c);
            }
        }
        for copy in 1..k {
            image
                .as_mut()
                .copy_within(start..start + 3 * side as usize, start + copy * stride);
        }
    }
    draw_overlay(&mut image, &frame, &map.window, overlay);
    let title = format!("magnification map, {}", map.provenance.lens);
    let title = text::fitted(&title, ts, width - area.left - PAD * ts);
    bar.finish(
        &mut image,
        &frame,
        (&title, PAD * ts),
        ("x (Einstein radii)", "y (Einstein radii)"),
        ts,
    );
    (image, frame)
}

/// Caustic lines, then lens crosses edged in black, clipped to the map's area.
fn draw_overlay(image: &mut RgbImage, frame: &Frame, window: &Window, overlay: &Overlay) {
    let area = frame.area;
    let line = (area.width / 400).max(2);
    let px = |(x, y): (f64, f64)| frame.to_px((x, y));
    for curve in &overlay.curves {
        for pair in curve.windows(2) {
            segment(
                image,
                px(pair[0]),
                px(pair[1]),
                line,
                Rgb(CURVE_COLOUR),
                area,
            );
        }
    }
    let arm = (area.width / 45).max(6) as f64;
    for &(x, y) in overlay
        .lenses
        .iter()
        .filter(|&&(x, y)| window.contains(x, y))
    {
        let (cx, cy) = px((x, y));
        for (size, c) in [(line + 4, INK), (line + 2, Rgb(LENS_COLOUR))] {
            segment(image, (cx - arm, cy), (cx + arm, cy), size, c, area);
            segment(image, (cx, cy - arm), (cx, cy + arm), size, c, area);
        }
    }
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

#[cfg(test)]
mod tests {
    use super::*;
    use crate::plot::check::{blank_border, inked};
    use crate::plot::draw::Rect;

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

    fn map_of(n: usize, data: impl Fn(usize, usize) -> f32) -> MagnificationMap {
        MagnificationMap {
            window: Window::new((0.0, 0.0), 2.0, n).unwrap(),
            data: ndarray::Array2::from_shape_fn((n, n), |(iy, ix)| data(iy, ix)),
            provenance: crate::map::Provenance {
                lens: LensSystem::binary(0.8, 1.0).unwrap(),
                engine: "hand-made".into(),
                density: 0.0,
                rays_shot: 0,
                rays_landed: 0,
                version: "0".into(),
                build_time: "2026-01-01T00:00:00".into(),
                build_seconds: 0.0,
                certificate: None,
            },
        }
    }

    fn magma(t: f64) -> [u8; 3] {
        let c = GRADIENT.eval_continuous(t);
        [c.r, c.g, c.b]
    }

    /// Checks what every map figure must show: the border blank, tick labels left of and below
    /// the map, the colour bar's labels right of it.
    fn check_layout(img: &RgbImage, a: Rect) {
        let (w, h) = (img.width(), img.height());
        assert!(blank_border(img, PAPER), "something runs off the picture");
        let below = Rect {
            top: a.top + a.height + 2,
            height: h as i64 - a.top - a.height - 2,
            ..a
        };
        let left = Rect {
            left: 0,
            width: a.left - 2,
            ..a
        };
        let right = Rect {
            left: a.left + a.width + 2,
            width: w as i64 - a.left - a.width - 2,
            ..a
        };
        let title = Rect {
            top: 0,
            height: a.top - 2,
            ..a
        };
        for (r, what) in [
            (below, "x axis"),
            (left, "y axis"),
            (right, "colour bar"),
            (title, "title"),
        ] {
            assert!(inked(img, r), "{what}: no text");
        }
    }

    #[test]
    fn small_maps_are_enlarged_and_framed_with_nothing_cut() {
        for n in [8, 64, 500] {
            let map = map_of(n, |iy, ix| 1.0 + (ix * iy) as f32);
            let (img, frame) = figure(&map, &Overlay::default());
            let a = frame.area;
            let side = if n < MIN_SIDE {
                n * MIN_SIDE.div_ceil(n)
            } else {
                n
            };
            assert_eq!((a.width, a.height), (side as i64, side as i64));
            assert!(
                img.width() as i64 > a.left + a.width + 60,
                "room for the bar"
            );
            check_layout(&img, a);
        }
    }

    #[test]
    fn the_top_left_of_the_source_plane_is_the_top_left_of_the_map() {
        let n = 40;
        // A flat map with one spike at the pixel of smallest x and largest y.
        let map = map_of(
            n,
            |iy, ix| if (iy, ix) == (n - 1, 0) { 1000.0 } else { 1.0 },
        );
        let (img, frame) = figure(&map, &Overlay::default());
        let a = frame.area;
        let k = a.width / n as i64;
        let at = |col: i64, row: i64| img.get_pixel((a.left + col) as u32, (a.top + row) as u32).0;
        assert_eq!(at(0, 0), magma(1.0));
        assert_eq!(at(k - 1, k - 1), magma(1.0));
        assert_eq!(at(k, 0), magma(0.0));
        assert_eq!(at(a.width - 1, a.height - 1), magma(0.0));
        // The colour bar: the top of the gradient at its top, the bottom at its bottom.
        let bar = (a.left + a.width..img.width() as i64)
            .find(|&x| {
                img.get_pixel(x as u32, (a.top + a.height / 2) as u32).0 != PAPER.0
                    && img.get_pixel(x as u32, (a.top + a.height / 2) as u32) != &INK
            })
            .unwrap();
        let near = |p: [u8; 3], q: [u8; 3]| p.iter().zip(q).all(|(x, y)| x.abs_diff(y) <= 8);
        assert!(near(
            img.get_pixel(bar as u32 + 2, a.top as u32).0,
            magma(1.0)
        ));
        assert!(near(
            img.get_pixel(bar as u32 + 2, (a.top + a.height - 1) as u32)
                .0,
            magma(0.0)
        ));
    }

    #[test]
    fn caustic_lines_and_lens_marks_are_drawn_in_their_colours() {
        let map = map_of(64, |_, _| 1.0);
        // A line at y = 0.5 running beyond both edges, a lens at (-0.5, -0.5), and one outside.
        let overlay = Overlay {
            lenses: vec![(-0.5, -0.5), (5.0, 5.0)],
            curves: vec![vec![(-3.0, 0.5), (3.0, 0.5)]],
        };
        let (img, frame) = figure(&map, &overlay);
        let a = frame.area;
        let (_, row) = frame.to_px((0.0, 0.5));
        for x in a.left..a.left + a.width {
            assert_eq!(
                img.get_pixel(x as u32, row as u32).0,
                CURVE_COLOUR,
                "column {x}"
            );
        }
        assert_ne!(
            img.get_pixel((a.left - 3) as u32, row as u32).0,
            CURVE_COLOUR
        );
        let (cx, cy) = frame.to_px((-0.5, -0.5));
        assert_eq!(img.get_pixel(cx as u32, cy as u32).0, LENS_COLOUR);
        assert_eq!(img.get_pixel(cx as u32 + 6, cy as u32).0, LENS_COLOUR);
        assert_eq!(img.get_pixel(cx as u32, cy as u32 - 6).0, LENS_COLOUR);
        // One cross only: no lime in the top-right quarter, where the outside lens points.
        let lime = img
            .enumerate_pixels()
            .filter(|(x, y, p)| {
                p.0 == LENS_COLOUR && (*x as f64) > cx + 20.0 && (*y as f64) < cy - 20.0
            })
            .count();
        assert_eq!(lime, 0);
        check_layout(&img, a);
    }
}
