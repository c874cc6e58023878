//! Framed axes shared by every picture: round tick values, outward ticks with their labels, the
//! axis labels, and the margins all of that needs so that nothing runs off the picture.
//!
//! ```
//! use causeway::plot::axes::{Frame, Scale};
//! let (x, y) = (Scale::linear(-1.0, 1.0), Scale::log(0.0, 3.0));
//! let frame = Frame::fitted(x, y, (400, 300), 30, 2);
//! let mut img = image::RgbImage::from_pixel(400, 300, image::Rgb([255, 255, 255]));
//! frame.draw(&mut img, ("x (Einstein radii)", "magnification"), 2, false);
//! assert!(frame.area.left > 0 && frame.area.left + frame.area.width < 400);
//! ```

use super::draw::{fill, outline, segment, Rect};
use super::text::{self, Anchor};
use image::{Rgb, RgbImage};

/// Colour of text, ticks and frames.
pub const INK: Rgb<u8> = Rgb([25, 25, 30]);
/// Colour of grid lines.
pub const GRID: Rgb<u8> = Rgb([226, 226, 230]);

/// Lengths in units of the text scale: blank border, small gap, tick length.
pub const PAD: i64 = 4;
const GAP: i64 = 3;
const TICK: i64 = 3;

/// The range an axis shows, in axis units (log10 of the value on a log axis).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Scale {
    /// Value at the low end (left or bottom).
    pub lo: f64,
    /// Value at the high end.
    pub hi: f64,
    /// Whether the axis units are log10 of the values shown.
    pub log: bool,
}

impl Scale {
    /// A linear range.
    pub fn linear(lo: f64, hi: f64) -> Self {
        Scale { lo, hi, log: false }
    }

    /// A log10 range, given as log10 of its ends.
    pub fn log(lo: f64, hi: f64) -> Self {
        Scale { lo, hi, log: true }
    }

    /// Positions (axis units) and labels of the ticks inside the range: 1-2-5 steps on linear
    /// axes, labelled to the step's decimals; decades (or 1-2-5 subdivisions of short ranges)
    /// on log axes, labelled with the value.
    pub fn ticks(&self) -> Vec<(f64, String)> {
        let (lo, hi) = (self.lo.min(self.hi), self.lo.max(self.hi));
        if !(lo.is_finite() && hi.is_finite()) || hi <= lo {
            return Vec::new();
        }
        if self.log && hi - lo >= 2.0 {
            let step = ((hi - lo) / 6.0).ceil().max(1.0);
            let first = (lo / step).ceil() as i64;
            return (first..)
                .map(|k| k as f64 * step)
                .take_while(|&t| t <= hi)
                .map(|t| (t, value_label(10f64.powf(t))))
                .collect();
        }
        if self.log {
            let within = |mantissas: &[f64]| {
                let mut out = Vec::new();
                for decade in (lo.floor() as i64)..=(hi.ceil() as i64) {
                    for m in mantissas {
                        let t = decade as f64 + m.log10();
                        if t >= lo && t <= hi {
                            out.push((t, value_label(10f64.powf(t))));
                        }
                    }
                }
                out
            };
            let coarse = within(&[1.0, 2.0, 5.0]);
            if coarse.len() >= 3 {
                return coarse;
            }
            let fine = within(&[1.0, 2.0, 3.0, 4.0, 5.0, 6.0, 7.0, 8.0, 9.0]);
            if fine.len() >= 3 {
                return fine;
            }
            // Less than a factor of two: round values on a linear scale, placed by their log.
            let values = Scale::linear(10f64.powf(lo), 10f64.powf(hi));
            return values
                .ticks()
                .into_iter()
                .map(|(v, l)| (v.log10(), l))
                .collect();
        }
        let raw = (hi - lo) / 6.0;
        let mag = 10f64.powf(raw.log10().floor());
        let step = [1.0, 2.0, 5.0, 10.0]
            .iter()
            .map(|m| m * mag)
            .find(|s| *s >= raw)
            .unwrap_or(10.0 * mag);
        let decimals = (-step.log10().floor()).max(0.0) as usize;
        let first = (lo / step - 1e-9).ceil() as i64;
        (first..)
            .map(|k| k as f64 * step)
            .take_while(|&t| t <= hi + 1e-9 * step)
            .map(|t| {
                let s = format!(
                    "{:.*}",
                    decimals,
                    if t.abs() < 0.5 * step { 0.0 } else { t }
                );
                (t, s)
            })
            .collect()
    }
}

/// A tick value of a log axis: plain from 0.001 to 99999, else in e-notation.
fn value_label(v: f64) -> String {
    if !(1e-3..1e5).contains(&(v.abs() * (1.0 + 1e-12))) {
        return format!("{v:.0e}");
    }
    let s = format!("{v:.4}");
    s.trim_end_matches('0').trim_end_matches('.').to_string()
}

/// A plot area in a picture and the ranges its axes show.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Frame {
    /// The plot area's pixels.
    pub area: Rect,
    /// Horizontal range.
    pub x: Scale,
    /// Vertical range.
    pub y: Scale,
}

impl Frame {
    /// The largest plot area in a picture of `size` that leaves room for the tick labels and
    /// axis labels at text scale `scale`, `top` pixels above it, and `right` extra pixels at
    /// the right (for a colour bar).
    pub fn fitted(x: Scale, y: Scale, size: (i64, i64), top: i64, scale: i64) -> Self {
        Self::fitted_with(x, y, size, top, 0, scale)
    }

    /// [`Frame::fitted`] with `right` pixels kept free at the right.
    pub fn fitted_with(
        x: Scale,
        y: Scale,
        size: (i64, i64),
        top: i64,
        right: i64,
        scale: i64,
    ) -> Self {
        let (left, bottom, right_labels) = margins(&x, &y, scale);
        let right = right.max(right_labels);
        Frame {
            area: Rect {
                left,
                top,
                width: (size.0 - left - right).max(1),
                height: (size.1 - top - bottom).max(1),
            },
            x,
            y,
        }
    }

    /// A plot area of exactly `size` pixels with room around it for the labels, `top` pixels
    /// above it and `right` kept free at its right; returns the frame and the picture size.
    pub fn placed(
        x: Scale,
        y: Scale,
        size: (i64, i64),
        (top, right): (i64, i64),
        scale: i64,
    ) -> (Self, (i64, i64)) {
        let (left, bottom, right_labels) = margins(&x, &y, scale);
        let area = Rect {
            left,
            top,
            width: size.0,
            height: size.1,
        };
        let picture = (
            left + size.0 + right.max(right_labels),
            top + size.1 + bottom,
        );
        (Frame { area, x, y }, picture)
    }

    /// Picture coordinates of a point given in axis units.
    pub fn to_px(&self, (x, y): (f64, f64)) -> (f64, f64) {
        let a = &self.area;
        (
            a.left as f64 + (x - self.x.lo) / (self.x.hi - self.x.lo) * a.width as f64,
            (a.top + a.height) as f64 - (y - self.y.lo) / (self.y.hi - self.y.lo) * a.height as f64,
        )
    }

    /// Draws the frame, the grid (if `grid`), outward ticks, tick labels and the axis labels
    /// `(x, y)`, text at `scale`.
    pub fn draw(
        &self,
        img: &mut RgbImage,
        (x_label, y_label): (&str, &str),
        scale: i64,
        grid: bool,
    ) {
        let a = self.area;
        let (bottom, right) = (a.top + a.height, a.left + a.width);
        let (tick, gap, th) = (TICK * scale, GAP * scale, text::height(scale));
        let line = (scale / 2).max(1);
        let mut free_from = i64::MIN;
        for (t, label) in self.x.ticks() {
            let px = self.to_px((t, self.y.lo)).0.floor().min((right - 1) as f64);
            if grid {
                segment(img, (px, a.top as f64), (px, bottom as f64), 1, GRID, a);
            }
            let mark = Rect {
                left: px as i64,
                top: bottom,
                width: line,
                height: tick,
            };
            fill(img, mark, INK);
            // A label that would touch the one before it is left out (its tick stays).
            let half = text::width(&label, scale) / 2;
            if px as i64 - half >= free_from {
                text::draw(
                    img,
                    (px as i64, bottom + tick + gap),
                    &label,
                    scale,
                    INK,
                    Anchor::Centre,
                );
                free_from = px as i64 + half + 2 * gap;
            }
        }
        let mut widest = 0;
        for (t, label) in self.y.ticks() {
            let py = self
                .to_px((self.x.lo, t))
                .1
                .floor()
                .min((bottom - 1) as f64);
            if grid {
                segment(img, (a.left as f64, py), (right as f64, py), 1, GRID, a);
            }
            let mark = Rect {
                left: a.left - tick,
                top: py as i64,
                width: tick,
                height: line,
            };
            fill(img, mark, INK);
            let at = (a.left - tick - gap, py as i64 - th / 2);
            text::draw(img, at, &label, scale, INK, Anchor::Right);
            widest = widest.max(text::width(&label, scale));
        }
        outline(
            img,
            Rect {
                left: a.left - 1,
                top: a.top - 1,
                width: a.width + 2,
                height: a.height + 2,
            },
            INK,
        );
        let centre = a.left + a.width / 2;
        text::draw(
            img,
            (centre, bottom + tick + 2 * gap + th),
            x_label,
            scale,
            INK,
            Anchor::Centre,
        );
        let x = a.left - tick - 2 * gap - widest - th;
        text::draw_up(
            img,
            (x, a.top + a.height / 2),
            y_label,
            scale,
            INK,
            Anchor::Centre,
        );
    }
}

/// Pixels needed (left of, below, right of) a plot area for its tick labels and axis labels.
fn margins(x: &Scale, y: &Scale, scale: i64) -> (i64, i64, i64) {
    let th = text::height(scale);
    let widest = y
        .ticks()
        .iter()
        .map(|(_, l)| text::width(l, scale))
        .max()
        .unwrap_or(0);
    let left = (PAD + 2 * GAP + TICK) * scale + th + widest;
    let bottom = (TICK + 2 * GAP + PAD) * scale + 2 * th + GAP * scale;
    let last = x
        .ticks()
        .last()
        .map_or(0, |(_, l)| text::width(l, scale) / 2);
    (left, bottom, last + PAD * scale)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn values(s: Scale) -> Vec<f64> {
        s.ticks().into_iter().map(|t| t.0).collect()
    }

    fn labels(s: Scale) -> Vec<String> {
        s.ticks().into_iter().map(|t| t.1).collect()
    }

    #[test]
    fn ticks_cover_the_range_in_round_steps() {
        assert_eq!(
            values(Scale::linear(0.0, 10.0)),
            vec![0.0, 2.0, 4.0, 6.0, 8.0, 10.0]
        );
        assert_eq!(
            values(Scale::log(-3.0, 1.0)),
            vec![-3.0, -2.0, -1.0, 0.0, 1.0]
        );
        assert_eq!(labels(Scale::log(0.0, 1.0)), vec!["1", "2", "5", "10"]);
        assert_eq!(labels(Scale::log(-4.0, -3.0))[0], "1e-4");
        assert_eq!(labels(Scale::log(-3.0, -2.5))[0], "0.001");
        assert_eq!(
            labels(Scale::linear(-0.25, 0.25)),
            vec!["-0.2", "-0.1", "0.0", "0.1", "0.2"]
        );
        // Large times keep every digit; steps below one get their decimals.
        assert!(labels(Scale::linear(2459990.0, 2460010.0)).contains(&"2460000".to_string()));
        assert_eq!(
            labels(Scale::linear(0.1, 0.35)),
            vec!["0.10", "0.15", "0.20", "0.25", "0.30", "0.35"]
        );
        // Short log ranges: every integer mantissa, then round linear values.
        assert_eq!(labels(Scale::log(0.0, 0.5)), vec!["1", "2", "3"]);
        assert_eq!(
            labels(Scale::log(0.0, 0.1)),
            vec!["1.00", "1.05", "1.10", "1.15", "1.20", "1.25"]
        );
        assert!(Scale::linear(1.0, 1.0).ticks().is_empty());
        assert!(Scale::linear(f64::NAN, 1.0).ticks().is_empty());
    }

    #[test]
    fn labels_land_in_the_margins_and_inside_the_picture() {
        let (x, y) = (Scale::linear(-12345.0, 12345.0), Scale::log(-4.0, 0.0));
        let frame = Frame::fitted(x, y, (500, 300), 20, 2);
        let white = Rgb([255, 255, 255]);
        let mut img = RgbImage::from_pixel(500, 300, white);
        frame.draw(&mut img, ("time", "flux"), 2, true);
        let a = frame.area;
        let ink_in = |x0: i64, x1: i64, y0: i64, y1: i64| {
            (x0..x1).any(|x| (y0..y1).any(|y| img.get_pixel(x as u32, y as u32) == &INK))
        };
        assert!(ink_in(0, a.left - 2, a.top, a.top + a.height), "y labels");
        assert!(
            ink_in(a.left, a.left + a.width, a.top + a.height + 2, 300),
            "x labels"
        );
        for x in 0..500 {
            assert_eq!(img.get_pixel(x, 0), &white);
            assert_eq!(img.get_pixel(x, 299), &white);
        }
        for y in 0..300 {
            assert_eq!(img.get_pixel(0, y), &white);
            assert_eq!(img.get_pixel(499, y), &white);
        }
    }
}
