//! Simple PNG charts: framed axes (linear or log10) with ticks and labels, titled, with lines
//! and markers in several colours and a legend. Used for light curves, caustics and study plots.
//!
//! ```
//! use causeway::plot::{Axis, Chart, Series};
//! let mut chart = Chart::new("demo", Axis::linear("t (days)"), Axis::log("magnification"));
//! chart.add(Series::line("model", (0..100).map(|i| (i as f64, 1.0 + i as f64)).collect()));
//! let path = std::env::temp_dir().join(format!("causeway-doc-chart-{}.png", std::process::id()));
//! chart.write_png(&path).unwrap();
//! assert!(path.exists());
//! std::fs::remove_file(&path).unwrap();
//! ```

use crate::error::{Error, Result};
use crate::fsutil::write_png;
use font8x8::UnicodeFonts;
use image::{Rgb, RgbImage};
use std::path::Path;

/// Picture size.
const WIDTH: u32 = 900;
const HEIGHT: u32 = 560;
/// Plot-area margins: left, right, top, bottom.
const MARGINS: (i64, i64, i64, i64) = (90, 30, 40, 60);
const INK: Rgb<u8> = Rgb([20, 20, 20]);
const GRID: Rgb<u8> = Rgb([225, 225, 225]);
/// Series colours, in order (a colour-blind-safe qualitative set).
pub const PALETTE: [[u8; 3]; 6] = [
    [0, 114, 178],
    [213, 94, 0],
    [0, 158, 115],
    [204, 121, 167],
    [230, 159, 0],
    [86, 180, 233],
];

/// One axis: label, scale, and optionally a fixed range.
#[derive(Debug, Clone, PartialEq)]
pub struct Axis {
    /// Label drawn beside the axis.
    pub label: String,
    /// Logarithmic (base 10) scale.
    pub log: bool,
    /// Fixed range; from the data when `None`.
    pub range: Option<(f64, f64)>,
}

impl Axis {
    /// A linear axis.
    pub fn linear(label: &str) -> Self {
        Axis {
            label: label.into(),
            log: false,
            range: None,
        }
    }

    /// A log10 axis (non-positive values are left out).
    pub fn log(label: &str) -> Self {
        Axis {
            log: true,
            ..Axis::linear(label)
        }
    }

    fn value(&self, v: f64) -> f64 {
        if self.log {
            v.log10()
        } else {
            v
        }
    }
}

/// How a series is drawn.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Style {
    /// Joined by straight segments.
    Line,
    /// A small square at each point.
    Markers,
    /// Both.
    LineMarkers,
}

/// A named set of points.
#[derive(Debug, Clone, PartialEq)]
pub struct Series {
    /// Legend text.
    pub name: String,
    /// Points (x, y) in data units.
    pub points: Vec<(f64, f64)>,
    /// How to draw it.
    pub style: Style,
    /// Colour; from [`PALETTE`] in order when `None`.
    pub colour: Option<[u8; 3]>,
    /// Half-width of the square markers, in pixels.
    pub marker: i64,
}

impl Series {
    /// A line series.
    pub fn line(name: &str, points: Vec<(f64, f64)>) -> Self {
        Series {
            name: name.into(),
            points,
            style: Style::Line,
            colour: None,
            marker: 2,
        }
    }

    /// A series with markers of another half-width (pixels).
    pub fn marker_size(mut self, half_width: i64) -> Self {
        self.marker = half_width.max(0);
        self
    }

    /// A series with another style.
    pub fn styled(mut self, style: Style) -> Self {
        self.style = style;
        self
    }

    /// A series with a fixed colour.
    pub fn coloured(mut self, colour: [u8; 3]) -> Self {
        self.colour = Some(colour);
        self
    }
}

/// A chart: title, two axes, series.
#[derive(Debug, Clone, PartialEq)]
pub struct Chart {
    /// Title above the plot.
    pub title: String,
    /// Horizontal axis.
    pub x: Axis,
    /// Vertical axis.
    pub y: Axis,
    /// What is drawn.
    pub series: Vec<Series>,
    /// Equal scales on both axes (for pictures of the lens plane).
    pub equal_aspect: bool,
}

impl Chart {
    /// An empty chart.
    pub fn new(title: &str, x: Axis, y: Axis) -> Self {
        Chart {
            title: title.into(),
            x,
            y,
            series: Vec::new(),
            equal_aspect: false,
        }
    }

    /// Adds a series.
    pub fn add(&mut self, series: Series) -> &mut Self {
        self.series.push(series);
        self
    }

    /// The plotted ranges (in axis units: log10 for log axes).
    fn ranges(&self) -> Result<((f64, f64), (f64, f64))> {
        let finite = |a: &Axis, v: f64| v.is_finite() && (!a.log || v > 0.0);
        let span = |a: &Axis,
                    pick: fn(&(f64, f64)) -> f64,
                    other: &Axis,
                    opick: fn(&(f64, f64)) -> f64| {
            if let Some((lo, hi)) = a.range {
                return Some((a.value(lo), a.value(hi)));
            }
            let mut it = self
                .series
                .iter()
                .flat_map(|s| s.points.iter())
                .filter(|p| finite(a, pick(p)) && finite(other, opick(p)))
                .map(|p| a.value(pick(p)));
            let first = it.next()?;
            let (lo, hi) = it.fold((first, first), |(lo, hi), v| (lo.min(v), hi.max(v)));
            let pad = if hi > lo {
                0.04 * (hi - lo)
            } else {
                0.5 * lo.abs().max(1e-12)
            };
            Some((lo - pad, hi + pad))
        };
        let xr = span(&self.x, |p| p.0, &self.y, |p| p.1);
        let yr = span(&self.y, |p| p.1, &self.x, |p| p.0);
        match (xr, yr) {
            (Some(mut x), Some(mut y)) => {
                if self.equal_aspect {
                    let (w, h) = plot_size();
                    let per_px = ((x.1 - x.0) / w as f64).max((y.1 - y.0) / h as f64);
                    let (cx, cy) = (0.5 * (x.0 + x.1), 0.5 * (y.0 + y.1));
                    x = (cx - 0.5 * per_px * w as f64, cx + 0.5 * per_px * w as f64);
                    y = (cy - 0.5 * per_px * h as f64, cy + 0.5 * per_px * h as f64);
                }
                Ok((x, y))
            }
            _ => Err(Error::input("nothing to plot: no finite points")),
        }
    }

    /// Draws the chart.
    pub fn render(&self) -> Result<RgbImage> {
        let ((x0, x1), (y0, y1)) = self.ranges()?;
        let mut img = RgbImage::from_pixel(WIDTH, HEIGHT, Rgb([255, 255, 255]));
        let (left, _, top, _) = MARGINS;
        let (w, h) = plot_size();
        let to_px = |x: f64, y: f64| {
            (
                left as f64 + (x - x0) / (x1 - x0) * w as f64,
                (top + h) as f64 - (y - y0) / (y1 - y0) * h as f64,
            )
        };
        // Grid, ticks and tick labels.
        for t in ticks(x0, x1, self.x.log) {
            let (px, _) = to_px(t, y0);
            segment(
                &mut img,
                (px, top as f64),
                (px, (top + h) as f64),
                GRID,
                (left, top, w, h),
            );
            let label = tick_label(t, self.x.log);
            let lx = px as i64 - 4 * label.len() as i64;
            text(&mut img, lx, top + h + 8, &label, INK);
        }
        for t in ticks(y0, y1, self.y.log) {
            let (_, py) = to_px(x0, t);
            segment(
                &mut img,
                (left as f64, py),
                ((left + w) as f64, py),
                GRID,
                (left, top, w, h),
            );
            let label = tick_label(t, self.y.log);
            text(
                &mut img,
                left - 8 - 8 * label.len() as i64,
                py as i64 - 4,
                &label,
                INK,
            );
        }
        frame(&mut img, left, top, w, h);
        // Series.
        let clip = (left, top, w, h);
        for (k, s) in self.series.iter().enumerate() {
            let c = Rgb(s.colour.unwrap_or(PALETTE[k % PALETTE.len()]));
            let pts: Vec<Option<(f64, f64)>> = s
                .points
                .iter()
                .map(|&(x, y)| {
                    let ok = x.is_finite()
                        && y.is_finite()
                        && (!self.x.log || x > 0.0)
                        && (!self.y.log || y > 0.0);
                    ok.then(|| to_px(self.x.value(x), self.y.value(y)))
                })
                .collect();
            if s.style != Style::Markers {
                for pair in pts.windows(2) {
                    if let (Some(a), Some(b)) = (pair[0], pair[1]) {
                        segment(&mut img, a, b, c, clip);
                    }
                }
            }
            if s.style != Style::Line {
                let m = s.marker;
                for p in pts.iter().flatten() {
                    for dy in -m..=m {
                        for dx in -m..=m {
                            put(&mut img, p.0 as i64 + dx, p.1 as i64 + dy, c, clip);
                        }
                    }
                }
            }
            // Legend entry, top right inside the frame.
            let ly = top + 10 + 14 * k as i64;
            let lx = left + w - 10 - 8 * s.name.len() as i64 - 26;
            segment(
                &mut img,
                (lx as f64, ly as f64 + 4.0),
                (lx as f64 + 18.0, ly as f64 + 4.0),
                c,
                clip,
            );
            segment(
                &mut img,
                (lx as f64, ly as f64 + 5.0),
                (lx as f64 + 18.0, ly as f64 + 5.0),
                c,
                clip,
            );
            text(&mut img, lx + 24, ly, &s.name, INK);
        }
        // Title and axis labels.
        text(&mut img, left, 14, &self.title, INK);
        let xl = &self.x.label;
        text(
            &mut img,
            left + w / 2 - 4 * xl.len() as i64,
            top + h + 32,
            xl,
            INK,
        );
        text_vertical(
            &mut img,
            12,
            top + h / 2 + 4 * self.y.label.len() as i64,
            &self.y.label,
            INK,
        );
        Ok(img)
    }

    /// Draws the chart into a PNG file, atomically.
    pub fn write_png(&self, path: &Path) -> Result<()> {
        write_png(path, &self.render()?)
    }
}

/// Draws charts one above the other into one PNG at `path`, written atomically.
///
/// ```
/// use causeway::plot::{write_stacked_png, Axis, Chart, Series};
/// let mut a = Chart::new("top", Axis::linear("x"), Axis::linear("y"));
/// a.add(Series::line("a", vec![(0.0, 0.0), (1.0, 1.0)]));
/// let path = std::env::temp_dir().join(format!("causeway-doc-stack-{}.png", std::process::id()));
/// write_stacked_png(&[a.clone(), a], &path).unwrap();
/// assert_eq!(image::open(&path).unwrap().height(), 2 * 560);
/// std::fs::remove_file(&path).unwrap();
/// ```
pub fn write_stacked_png(charts: &[Chart], path: &Path) -> Result<()> {
    let parts = charts
        .iter()
        .map(Chart::render)
        .collect::<Result<Vec<_>>>()?;
    let height = parts.iter().map(|p| p.height()).sum();
    let mut image = RgbImage::new(WIDTH, height);
    let mut y = 0;
    for part in &parts {
        image::GenericImage::copy_from(&mut image, part, 0, y)
            .map_err(|e| Error::Numerical(format!("{}: {e}", path.display())))?;
        y += part.height();
    }
    write_png(path, &image)
}

/// Pixels of the plot area inside a chart's frame: (width, height).
pub fn plot_size() -> (i64, i64) {
    let (l, r, t, b) = MARGINS;
    (WIDTH as i64 - l - r, HEIGHT as i64 - t - b)
}

/// Tick positions (axis units): 1-2-5 steps for linear axes, decades (or their 1-2-5
/// subdivisions when the range is short) for log axes.
fn ticks(lo: f64, hi: f64, log: bool) -> Vec<f64> {
    if log && hi - lo >= 2.0 {
        let step = ((hi - lo) / 8.0).ceil().max(1.0);
        let first = (lo / step).ceil() as i64;
        return (first..)
            .map(|k| k as f64 * step)
            .take_while(|&t| t <= hi)
            .collect();
    }
    if log {
        let mut out = Vec::new();
        for decade in (lo.floor() as i64)..=(hi.ceil() as i64) {
            for m in [1.0f64, 2.0, 5.0] {
                let t = decade as f64 + m.log10();
                if t >= lo && t <= hi {
                    out.push(t);
                }
            }
        }
        return out;
    }
    let raw = (hi - lo) / 6.0;
    let mag = 10f64.powf(raw.log10().floor());
    let step = [1.0, 2.0, 5.0, 10.0]
        .iter()
        .map(|m| m * mag)
        .find(|s| *s >= raw)
        .unwrap_or(10.0 * mag);
    let first = (lo / step).ceil() as i64;
    (first..)
        .map(|k| k as f64 * step)
        .take_while(|&t| t <= hi + 1e-9 * step)
        .collect()
}

fn tick_label(t: f64, log: bool) -> String {
    let v = if log { 10f64.powf(t) } else { t };
    let a = v.abs();
    if v == 0.0 || (t.abs() < 1e-12 && !log) {
        "0".into()
    } else if !(1e-3..1e5).contains(&a) {
        format!("{v:.0e}")
    } else {
        let s = format!("{v:.4}");
        let s = s.trim_end_matches('0').trim_end_matches('.');
        s.to_string()
    }
}

fn put(img: &mut RgbImage, x: i64, y: i64, c: Rgb<u8>, clip: (i64, i64, i64, i64)) {
    let (l, t, w, h) = clip;
    if x >= l && x <= l + w && y >= t && y <= t + h {
        img.put_pixel(x as u32, y as u32, c);
    }
}

fn segment(
    img: &mut RgbImage,
    a: (f64, f64),
    b: (f64, f64),
    c: Rgb<u8>,
    clip: (i64, i64, i64, i64),
) {
    let steps = (b.0 - a.0)
        .abs()
        .max((b.1 - a.1).abs())
        .ceil()
        .clamp(1.0, 1e5) as i64;
    for k in 0..=steps {
        let f = k as f64 / steps as f64;
        put(
            img,
            (a.0 + f * (b.0 - a.0)).round() as i64,
            (a.1 + f * (b.1 - a.1)).round() as i64,
            c,
            clip,
        );
    }
}

fn frame(img: &mut RgbImage, l: i64, t: i64, w: i64, h: i64) {
    let all = (0, 0, WIDTH as i64 - 1, HEIGHT as i64 - 1);
    for (a, b) in [
        ((l, t), (l + w, t)),
        ((l, t + h), (l + w, t + h)),
        ((l, t), (l, t + h)),
        ((l + w, t), (l + w, t + h)),
    ] {
        segment(
            img,
            (a.0 as f64, a.1 as f64),
            (b.0 as f64, b.1 as f64),
            INK,
            all,
        );
    }
}

/// Writes `s` in the 8 x 8 font with its top-left corner at (x, y).
fn text(img: &mut RgbImage, x: i64, y: i64, s: &str, c: Rgb<u8>) {
    glyphs(img, s, c, |i, col, row| (x + 8 * i as i64 + col, y + row));
}

/// Writes `s` rotated a quarter turn (reading upwards), its start at (x, y).
fn text_vertical(img: &mut RgbImage, x: i64, y: i64, s: &str, c: Rgb<u8>) {
    glyphs(img, s, c, |i, col, row| (x + row, y - 8 * i as i64 - col));
}

fn glyphs(img: &mut RgbImage, s: &str, c: Rgb<u8>, place: impl Fn(usize, i64, i64) -> (i64, i64)) {
    let all = (0, 0, WIDTH as i64 - 1, HEIGHT as i64 - 1);
    for (i, ch) in s.chars().enumerate() {
        let Some(rows) = font8x8::BASIC_FONTS.get(ch) else {
            continue;
        };
        for (row, bits) in rows.iter().enumerate() {
            for col in 0..8 {
                if bits >> col & 1 == 1 {
                    let (px, py) = place(i, col, row as i64);
                    put(img, px, py, c, all);
                }
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ticks_cover_the_range_in_round_steps() {
        assert_eq!(ticks(0.0, 10.0, false), vec![0.0, 2.0, 4.0, 6.0, 8.0, 10.0]);
        assert_eq!(ticks(-3.0, 1.0, true), vec![-3.0, -2.0, -1.0, 0.0, 1.0]);
        let short = ticks(0.0, 1.0, true);
        assert_eq!(short.len(), 4); // 1, 2, 5, 10
        assert_eq!(tick_label(-3.0, true), "0.001");
        assert_eq!(tick_label(-4.0, true), "1e-4");
        assert_eq!(tick_label(2.5, false), "2.5");
    }

    #[test]
    fn series_land_inside_the_frame_in_their_colour() {
        let mut chart = Chart::new("t", Axis::linear("x"), Axis::linear("y"));
        chart.add(Series::line("a", vec![(0.0, 0.0), (1.0, 1.0)]).coloured([255, 0, 0]));
        let img = chart.render().unwrap();
        let red = img.pixels().filter(|p| p.0 == [255, 0, 0]).count();
        assert!(red > 300, "{red}");
        assert!(Chart::new("e", Axis::log("x"), Axis::log("y"))
            .render()
            .is_err());
    }
}
