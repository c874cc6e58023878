//! Drawing primitives of every picture: clipped pixels, square dots, lines, rectangles.
//!
//! ```
//! use causeway::plot::draw::{segment, Rect};
//! let mut img = image::RgbImage::new(20, 20);
//! let all = Rect::of(&img);
//! segment(&mut img, (-100.0, 5.5), (100.0, 5.5), 1, image::Rgb([9, 9, 9]), all);
//! assert_eq!(img.pixels().filter(|p| p.0 == [9, 9, 9]).count(), 20);
//! ```

use image::{Rgb, RgbImage};

/// A rectangle of picture pixels: columns `left..left + width`, rows `top..top + height`.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Rect {
    /// First column.
    pub left: i64,
    /// First row.
    pub top: i64,
    /// Columns.
    pub width: i64,
    /// Rows.
    pub height: i64,
}

impl Rect {
    /// The whole of `img`.
    pub fn of(img: &RgbImage) -> Self {
        Rect {
            left: 0,
            top: 0,
            width: img.width() as i64,
            height: img.height() as i64,
        }
    }

    /// Whether pixel (x, y) lies inside.
    pub fn contains(&self, x: i64, y: i64) -> bool {
        x >= self.left && x < self.left + self.width && y >= self.top && y < self.top + self.height
    }

    /// The part inside `other` too.
    fn and(self, other: Rect) -> Rect {
        let (l, t) = (self.left.max(other.left), self.top.max(other.top));
        let r = (self.left + self.width).min(other.left + other.width);
        let b = (self.top + self.height).min(other.top + other.height);
        Rect {
            left: l,
            top: t,
            width: (r - l).max(0),
            height: (b - t).max(0),
        }
    }
}

/// Paints pixel (x, y) if it lies inside `clip` and the image.
pub fn put(img: &mut RgbImage, x: i64, y: i64, c: Rgb<u8>, clip: Rect) {
    if clip.contains(x, y) && Rect::of(img).contains(x, y) {
        img.put_pixel(x as u32, y as u32, c);
    }
}

/// Fills `rect` (clipped to the image).
pub fn fill(img: &mut RgbImage, rect: Rect, c: Rgb<u8>) {
    let r = rect.and(Rect::of(img));
    for y in r.top..r.top + r.height {
        for x in r.left..r.left + r.width {
            img.put_pixel(x as u32, y as u32, c);
        }
    }
}

/// A square of side `size` pixels around the pixel containing (x, y).
pub fn dot(img: &mut RgbImage, (x, y): (f64, f64), size: i64, c: Rgb<u8>, clip: Rect) {
    let (ix, iy) = (x.floor() as i64, y.floor() as i64);
    let lo = -(size - 1) / 2;
    fill(
        img,
        Rect {
            left: ix + lo,
            top: iy + lo,
            width: size,
            height: size,
        }
        .and(clip),
        c,
    );
}

/// The outline of `rect`, one pixel wide, on its outermost pixels.
pub fn outline(img: &mut RgbImage, rect: Rect, c: Rgb<u8>) {
    let (l, t) = (rect.left, rect.top);
    let (r, b) = (l + rect.width - 1, t + rect.height - 1);
    let all = Rect::of(img);
    for x in l..=r {
        put(img, x, t, c, all);
        put(img, x, b, c, all);
    }
    for y in t..=b {
        put(img, l, y, c, all);
        put(img, r, y, c, all);
    }
}

/// The line from `a` to `b` (continuous picture coordinates, pixel (x, y) covering
/// [x, x + 1) x [y, y + 1)) drawn with square dots of side `size`, within `clip`; lines with a
/// non-finite end are left out.
pub fn segment(
    img: &mut RgbImage,
    a: (f64, f64),
    b: (f64, f64),
    size: i64,
    c: Rgb<u8>,
    clip: Rect,
) {
    let margin = size as f64;
    let window = (
        (clip.left as f64 - margin, clip.top as f64 - margin),
        (
            (clip.left + clip.width) as f64 + margin,
            (clip.top + clip.height) as f64 + margin,
        ),
    );
    let Some((a, b)) = clip_segment(a, b, window) else {
        return;
    };
    let steps = (2.0 * (b.0 - a.0).abs().max((b.1 - a.1).abs())).ceil() as usize + 1;
    for k in 0..=steps {
        let t = k as f64 / steps as f64;
        dot(
            img,
            (a.0 + t * (b.0 - a.0), a.1 + t * (b.1 - a.1)),
            size,
            c,
            clip,
        );
    }
}

/// Clips the segment a-b to the box `(lo, hi)` (Liang-Barsky); `None` when it misses, or has
/// a non-finite end.
pub fn clip_segment(
    a: (f64, f64),
    b: (f64, f64),
    (lo, hi): ((f64, f64), (f64, f64)),
) -> Option<((f64, f64), (f64, f64))> {
    if !(a.0.is_finite() && a.1.is_finite() && b.0.is_finite() && b.1.is_finite()) {
        return None;
    }
    let (dx, dy) = (b.0 - a.0, b.1 - a.1);
    let (mut t0, mut t1) = (0.0f64, 1.0f64);
    for (p, q) in [
        (-dx, a.0 - lo.0),
        (dx, hi.0 - a.0),
        (-dy, a.1 - lo.1),
        (dy, hi.1 - a.1),
    ] {
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

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn clipping_keeps_the_inside_part() {
        let square = ((0.0, 0.0), (2.0, 2.0));
        let (a, b) = clip_segment((-1.0, 1.0), (3.0, 1.0), square).unwrap();
        assert_eq!((a, b), ((0.0, 1.0), (2.0, 1.0)));
        assert!(clip_segment((-1.0, -1.0), (-0.5, 3.0), square).is_none());
        assert!(clip_segment((0.5, f64::NAN), (1.0, 1.0), square).is_none());
    }

    #[test]
    fn lines_and_dots_stay_inside_their_clip() {
        let mut img = RgbImage::new(30, 30);
        let clip = Rect {
            left: 5,
            top: 5,
            width: 10,
            height: 10,
        };
        let c = Rgb([1, 2, 3]);
        segment(&mut img, (-50.0, -50.0), (80.0, 80.0), 3, c, clip);
        dot(&mut img, (14.0, 5.0), 5, c, clip);
        for (x, y, p) in img.enumerate_pixels() {
            if *p == c {
                assert!(clip.contains(x as i64, y as i64), "({x}, {y})");
            }
        }
        // The diagonal, three pixels wide, crosses the whole clip.
        assert_eq!(img.get_pixel(5, 5), &c);
        assert_eq!(img.get_pixel(14, 14), &c);
        assert_eq!(img.get_pixel(6, 5), &c);
    }
}
