//! Simple PNG charts: framed axes (linear or log10) with ticks and labels, a title, lines and
//! markers in several colours, and a legend above the plot where no data can hide it. Used for
//! light curves, caustics and study plots; the submodules hold what every picture shares.
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

pub mod axes;
#[cfg(test)]
pub(crate) mod check;
pub mod colourbar;
pub mod draw;
pub mod text;

use crate::error::{Error, Result};
use crate::fsutil::write_png;
use axes::{Frame, Scale, INK, PAD};
use draw::{dot, segment, Rect};
use image::{Rgb, RgbImage};
use std::path::Path;
use text::Anchor;

/// Picture size of a chart.
pub const WIDTH: u32 = 1000;
/// Picture height of a chart.
pub const HEIGHT: u32 = 640;
/// Text scale of charts (font pixels drawn 2 x 2).
pub const TEXT: i64 = 2;
/// Line width in pixels.
const LINE: i64 = 2;
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

    /// The plotted ranges (in axis units: log10 for log axes), padded by 4 %.
    fn ranges(&self) -> Result<(Scale, Scale)> {
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
        let scale = |a: &Axis, (lo, hi): (f64, f64)| Scale { lo, hi, log: a.log };
        match (
            span(&self.x, |p| p.0, &self.y, |p| p.1),
            span(&self.y, |p| p.1, &self.x, |p| p.0),
        ) {
            (Some(x), Some(y)) => Ok((scale(&self.x, x), scale(&self.y, y))),
            _ => Err(Error::input("nothing to plot: no finite points")),
        }
    }

    /// The plot area, its ranges widened to equal scales when asked (twice: the tick labels
    /// of the widened ranges may change the margins).
    fn frame(&self, top: i64) -> Result<Frame> {
        let (x, y) = self.ranges()?;
        let size = (WIDTH as i64, HEIGHT as i64);
        let mut frame = Frame::fitted(x, y, size, top, TEXT);
        if self.equal_aspect {
            for _ in 0..2 {
                let (w, h) = (frame.area.width as f64, frame.area.height as f64);
                let per_px = ((x.hi - x.lo) / w).max((y.hi - y.lo) / h);
                let around = |s: Scale, n: f64| {
                    let c = 0.5 * (s.lo + s.hi);
                    Scale {
                        lo: c - 0.5 * per_px * n,
                        hi: c + 0.5 * per_px * n,
                        ..s
                    }
                };
                frame = Frame::fitted(around(x, w), around(y, h), size, top, TEXT);
            }
        }
        Ok(frame)
    }

    /// Draws the chart: the title, the legend below it, then the framed plot.
    pub fn render(&self) -> Result<RgbImage> {
        let mut img = RgbImage::from_pixel(WIDTH, HEIGHT, Rgb([255, 255, 255]));
        let entries: Vec<Entry> = self
            .series
            .iter()
            .enumerate()
            .map(|(k, s)| Entry {
                name: &s.name,
                colour: Rgb(s.colour.unwrap_or(PALETTE[k % PALETTE.len()])),
                style: s.style,
                marker: 2 * s.marker + 1,
            })
            .collect();
        let th = text::height(TEXT);
        let title_y = PAD * TEXT;
        let legend_y = title_y + th + 3 * TEXT;
        // The left margin depends on the tick labels only: the legend starts where the frame does.
        let left = self.frame(0)?.area.left;
        let legend_h = legend(
            &mut img,
            &entries,
            (left, legend_y),
            WIDTH as i64 - PAD * TEXT,
            TEXT,
        );
        let frame = self.frame(legend_y + legend_h + 3 * TEXT)?;
        let title = text::fitted(
            &self.title,
            TEXT,
            WIDTH as i64 - frame.area.left - PAD * TEXT,
        );
        text::draw(
            &mut img,
            (frame.area.left, title_y),
            &title,
            TEXT,
            INK,
            Anchor::Left,
        );
        frame.draw(&mut img, (&self.x.label, &self.y.label), TEXT, true);
        let area = frame.area;
        for (s, e) in self.series.iter().zip(&entries) {
            let pts: Vec<Option<(f64, f64)>> = s
                .points
                .iter()
                .map(|&(x, y)| {
                    let ok = x.is_finite()
                        && y.is_finite()
                        && (!self.x.log || x > 0.0)
                        && (!self.y.log || y > 0.0);
                    ok.then(|| frame.to_px((self.x.value(x), self.y.value(y))))
                })
                .collect();
            if s.style != Style::Markers {
                for pair in pts.windows(2) {
                    if let (Some(a), Some(b)) = (pair[0], pair[1]) {
                        segment(&mut img, a, b, LINE, e.colour, area);
                    }
                }
            }
            if s.style != Style::Line {
                for p in pts.iter().flatten() {
                    dot(&mut img, *p, e.marker, e.colour, area);
                }
            }
        }
        Ok(img)
    }

    /// Draws the chart into a PNG file, atomically.
    pub fn write_png(&self, path: &Path) -> Result<()> {
        write_png(path, &self.render()?)
    }
}

/// One legend entry: the text and how its swatch is drawn.
pub struct Entry<'a> {
    /// Text.
    pub name: &'a str,
    /// Colour of the swatch.
    pub colour: Rgb<u8>,
    /// A line, markers or both.
    pub style: Style,
    /// Side of the marker in pixels.
    pub marker: i64,
}

/// Draws legend entries in rows from `(x, y)`, wrapping before `right`; returns the height used.
pub fn legend(
    img: &mut RgbImage,
    entries: &[Entry],
    (x, y): (i64, i64),
    right: i64,
    scale: i64,
) -> i64 {
    if entries.is_empty() {
        return 0;
    }
    let (th, swatch, gap) = (text::height(scale), 12 * scale, 3 * scale);
    let all = Rect::of(img);
    let (mut cx, mut cy) = (x, y);
    for e in entries {
        let name = text::fitted(e.name, scale, right - x - swatch - gap);
        let w = swatch + gap + text::width(&name, scale);
        if cx > x && cx + w > right {
            (cx, cy) = (x, cy + th + gap);
        }
        let mid = (cy + th / 2) as f64;
        if e.style != Style::Markers {
            segment(
                img,
                (cx as f64, mid),
                ((cx + swatch) as f64, mid),
                LINE,
                e.colour,
                all,
            );
        }
        if e.style != Style::Line {
            let size = e.marker.clamp(7, th);
            dot(img, ((cx + swatch / 2) as f64, mid), size, e.colour, all);
        }
        text::draw(
            img,
            (cx + swatch + gap, cy),
            &name,
            scale,
            INK,
            Anchor::Left,
        );
        cx += w + 5 * gap;
    }
    cy + th - y
}

/// Draws charts one above the other into one PNG at `path`, written atomically.
///
/// ```
/// use causeway::plot::{write_stacked_png, Axis, Chart, Series};
/// let mut a = Chart::new("top", Axis::linear("x"), Axis::linear("y"));
/// a.add(Series::line("a", vec![(0.0, 0.0), (1.0, 1.0)]));
/// let path = std::env::temp_dir().join(format!("causeway-doc-stack-{}.png", std::process::id()));
/// write_stacked_png(&[a.clone(), a], &path).unwrap();
/// assert_eq!(image::open(&path).unwrap().height(), 2 * causeway::plot::HEIGHT);
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

#[cfg(test)]
mod tests {
    use super::*;

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

    #[test]
    fn long_titles_legends_and_labels_stay_on_the_picture() {
        let long = "a title far too long to fit on one chart of this width, cut at the edge";
        let mut chart = Chart::new(long, Axis::linear("x"), Axis::log("y (magnification)"));
        for k in 0..8 {
            let points = (0..50)
                .map(|i| (1e4 * i as f64, 1.0 + (k * i) as f64))
                .collect();
            chart.add(Series::line(&format!("series number {k} of many"), points));
        }
        let img = chart.render().unwrap();
        assert_eq!(img.dimensions(), (WIDTH, HEIGHT));
        let frame = chart.frame(0).unwrap();
        check::framed(&img, frame.area.left, Rgb([255, 255, 255]));
    }
}
