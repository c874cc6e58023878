//! A vertical colour bar right of a plot area: the gradient, outward ticks with their labels,
//! and its label read upwards.
//!
//! ```
//! use causeway::plot::colourbar::ColourBar;
//! let grey = |t: f64| image::Rgb([(255.0 * t) as u8; 3]);
//! let bar = ColourBar { label: "log10 magnification", colour: &grey,
//!     ticks: vec![(0.0, "0".into()), (1.0, "1".into())] };
//! let mut img = image::RgbImage::from_pixel(200, 120, image::Rgb([255, 255, 255]));
//! bar.draw(&mut img, 10, (10, 100), 2);
//! assert!(10 + bar.width(2) <= 200);
//! ```

use super::axes::{Frame, INK, PAD};
use super::draw::{fill, outline, Rect};
use super::text::{self, Anchor};
use image::{Rgb, RgbImage};

/// The gap between a plot area and its bar, and the bar's width, in units of the text scale.
const GAP: i64 = 5;
const BAR: i64 = 8;
const TICK: i64 = 3;

/// What a colour bar shows.
pub struct ColourBar<'a> {
    /// Label beside the bar, read upwards.
    pub label: &'a str,
    /// Colour at a position from 0 (bottom) to 1 (top).
    pub colour: &'a dyn Fn(f64) -> Rgb<u8>,
    /// Ticks: position (0 to 1) and label.
    pub ticks: Vec<(f64, String)>,
}

impl ColourBar<'_> {
    /// Finishes a picture of values over a frame: `title` above the plot area (at row
    /// `title_y`), the frame with its axis `labels` (no grid), and this bar at its right, text
    /// at `scale`.
    pub fn finish(
        &self,
        img: &mut RgbImage,
        frame: &Frame,
        (title, title_y): (&str, i64),
        labels: (&str, &str),
        scale: i64,
    ) {
        let a = frame.area;
        text::draw(img, (a.left, title_y), title, scale, INK, Anchor::Left);
        frame.draw(img, labels, scale, false);
        self.draw(img, a.left + a.width, (a.top, a.top + a.height), scale);
    }

    /// Pixels the bar takes right of the plot area, its labels and border included.
    pub fn width(&self, scale: i64) -> i64 {
        let widest = self
            .ticks
            .iter()
            .map(|(_, l)| text::width(l, scale))
            .max()
            .unwrap_or(0);
        (GAP + BAR + TICK + 2 + 3 + PAD) * scale + widest + text::height(scale)
    }

    /// Draws the bar at `x` (the plot area's right edge), spanning rows `top..bottom`.
    pub fn draw(&self, img: &mut RgbImage, x: i64, (top, bottom): (i64, i64), scale: i64) {
        let left = x + GAP * scale;
        let (w, h) = (BAR * scale, (bottom - top).max(1));
        for row in top..bottom {
            let t = 1.0 - ((row - top) as f64 + 0.5) / h as f64;
            let strip = Rect {
                left,
                top: row,
                width: w,
                height: 1,
            };
            fill(img, strip, (self.colour)(t));
        }
        outline(
            img,
            Rect {
                left: left - 1,
                top: top - 1,
                width: w + 2,
                height: h + 2,
            },
            INK,
        );
        let th = text::height(scale);
        let tick_x = left + w + 1;
        let mut widest = 0;
        for (t, label) in &self.ticks {
            let row = (bottom as f64 - t.clamp(0.0, 1.0) * h as f64)
                .floor()
                .min((bottom - 1) as f64) as i64;
            fill(
                img,
                Rect {
                    left: tick_x,
                    top: row,
                    width: TICK * scale,
                    height: (scale / 2).max(1),
                },
                INK,
            );
            let at = (tick_x + (TICK + 2) * scale, row - th / 2);
            text::draw(img, at, label, scale, INK, Anchor::Left);
            widest = widest.max(text::width(label, scale));
        }
        let label_x = tick_x + (TICK + 2 + 3) * scale + widest;
        text::draw_up(
            img,
            (label_x, top + h / 2),
            self.label,
            scale,
            INK,
            Anchor::Centre,
        );
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_bar_runs_bottom_to_top_and_its_text_stays_in_its_width() {
        let red = |t: f64| Rgb([(255.0 * t).round() as u8, 0, 0]);
        let bar = ColourBar {
            label: "label",
            colour: &red,
            ticks: vec![
                (0.0, "-1.5".into()),
                (0.5, "0".into()),
                (1.0, "1000".into()),
            ],
        };
        let white = Rgb([255, 255, 255]);
        let (x, top, bottom) = (20, 30, 130);
        let mut img = RgbImage::from_pixel((x + bar.width(2)) as u32, 160, white);
        bar.draw(&mut img, x, (top, bottom), 2);
        let col = (x + (GAP + BAR / 2) * 2) as u32;
        assert!(img.get_pixel(col, top as u32).0[0] > 250);
        assert!(img.get_pixel(col, bottom as u32 - 1).0[0] < 5);
        // Tick labels and the label right of the bar; nothing on the last columns.
        let right = img.width() - 1;
        assert!((0..160).all(|y| img.get_pixel(right, y) == &white));
        let inked =
            |x0: u32, x1: u32| (x0..x1).any(|x| (0..160).any(|y| img.get_pixel(x, y) == &INK));
        assert!(inked(col + 12, right - 16), "tick labels");
        assert!(inked(right - 24, right), "bar label");
    }
}
