//! The one text renderer of every picture: the 8 x 8 font of `font8x8` (ASCII, Latin-1 and
//! Greek), each font pixel drawn as a `scale` x `scale` square. Text is clipped to the image.
//!
//! ```
//! use causeway::plot::text::{draw, width, Anchor};
//! let mut img = image::RgbImage::new(100, 40);
//! draw(&mut img, (50, 10), "Δχ²", 2, image::Rgb([255, 255, 255]), Anchor::Centre);
//! assert_eq!(width("Δχ²", 2), 48);
//! assert!(img.pixels().any(|p| p.0 == [255, 255, 255]));
//! ```

use font8x8::UnicodeFonts;
use image::{Rgb, RgbImage};

/// Side of a glyph cell in font pixels.
pub const CELL: i64 = 8;

/// Which point of the text the given position is.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Anchor {
    /// The top-left corner.
    Left,
    /// The middle of the top edge.
    Centre,
    /// The top-right corner.
    Right,
}

/// Width in picture pixels of `s` at `scale`.
pub fn width(s: &str, scale: i64) -> i64 {
    s.chars().count() as i64 * CELL * scale
}

/// Height in picture pixels of a line of text at `scale`.
pub fn height(scale: i64) -> i64 {
    CELL * scale
}

/// `s` cut to at most `max_width` pixels at `scale`, with ".." in place of what was cut.
///
/// ```
/// assert_eq!(causeway::plot::text::fitted("a long title", 1, 48), "a lo..");
/// assert_eq!(causeway::plot::text::fitted("short", 1, 48), "short");
/// ```
pub fn fitted(s: &str, scale: i64, max_width: i64) -> String {
    let room = (max_width / (CELL * scale)).max(0) as usize;
    if s.chars().count() <= room {
        return s.to_string();
    }
    let kept: String = s.chars().take(room.saturating_sub(2)).collect();
    kept + &"..".chars().take(room).collect::<String>()
}

/// Writes `s` horizontally, its top edge at `y` and placed along x by `anchor`.
pub fn draw(
    img: &mut RgbImage,
    (x, y): (i64, i64),
    s: &str,
    scale: i64,
    c: Rgb<u8>,
    anchor: Anchor,
) {
    let x = x - shift(s, scale, anchor);
    glyphs(img, s, scale, c, false, |i, col, row| {
        (x + (CELL * i + col) * scale, y + row * scale)
    });
}

/// Writes `s` turned a quarter turn to read upwards, its left edge (the glyphs' tops) at `x`
/// and placed along y by `anchor` (`Left` puts the start of the text at `y`).
pub fn draw_up(
    img: &mut RgbImage,
    (x, y): (i64, i64),
    s: &str,
    scale: i64,
    c: Rgb<u8>,
    anchor: Anchor,
) {
    let y = y + shift(s, scale, anchor);
    glyphs(img, s, scale, c, true, |i, col, row| {
        (x + row * scale, y - 1 - (CELL * i + col) * scale)
    });
}

fn shift(s: &str, scale: i64, anchor: Anchor) -> i64 {
    match anchor {
        Anchor::Left => 0,
        Anchor::Centre => width(s, scale) / 2,
        Anchor::Right => width(s, scale),
    }
}

/// The bitmap of `ch` (rows top first, bit k the k-th column from the left); blank if the
/// font has no glyph for it.
fn glyph(ch: char) -> [u8; 8] {
    font8x8::BASIC_FONTS
        .get(ch)
        .or_else(|| font8x8::LATIN_FONTS.get(ch))
        .or_else(|| font8x8::GREEK_FONTS.get(ch))
        .unwrap_or([0; 8])
}

/// Paints every set font pixel of `s`; `place(i, col, row)` gives the picture position of the
/// top-left corner of pixel (col, row) of the i-th glyph (its bottom-left corner if `upward`).
fn glyphs(
    img: &mut RgbImage,
    s: &str,
    scale: i64,
    c: Rgb<u8>,
    upward: bool,
    place: impl Fn(i64, i64, i64) -> (i64, i64),
) {
    let (w, h) = (img.width() as i64, img.height() as i64);
    for (i, ch) in s.chars().enumerate() {
        for (row, bits) in glyph(ch).iter().enumerate() {
            for col in 0..CELL {
                if bits >> col & 1 == 0 {
                    continue;
                }
                let (px, py) = place(i as i64, col, row as i64);
                let py = if upward { py - scale + 1 } else { py };
                for dy in 0..scale {
                    for dx in 0..scale {
                        let (x, y) = (px + dx, py + dy);
                        if (0..w).contains(&x) && (0..h).contains(&y) {
                            img.put_pixel(x as u32, y as u32, c);
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

    const INK: Rgb<u8> = Rgb([0, 0, 0]);

    /// The bounding box (x0, y0, x1, y1) of the inked pixels.
    fn ink_box(img: &RgbImage) -> (u32, u32, u32, u32) {
        img.enumerate_pixels()
            .filter(|(_, _, p)| **p == INK)
            .fold((u32::MAX, u32::MAX, 0, 0), |b, (x, y, _)| {
                (b.0.min(x), b.1.min(y), b.2.max(x), b.3.max(y))
            })
    }

    #[test]
    fn text_stays_in_its_box_at_every_anchor() {
        for (anchor, left) in [(Anchor::Left, 10), (Anchor::Centre, 2), (Anchor::Right, -6)] {
            let mut img = RgbImage::from_pixel(60, 30, Rgb([255, 255, 255]));
            draw(&mut img, (10, 5), "H", 2, INK, anchor);
            let (x0, y0, x1, y1) = ink_box(&img);
            assert!(
                x0 as i64 >= left && (x1 as i64) < left + 16,
                "{anchor:?}: {x0}..{x1}"
            );
            assert!(y0 >= 5 && y1 < 5 + 16, "{y0}..{y1}");
        }
    }

    #[test]
    fn turned_text_reads_upwards_above_its_start() {
        let mut img = RgbImage::from_pixel(30, 80, Rgb([255, 255, 255]));
        draw_up(&mut img, (4, 70), "LL", 2, INK, Anchor::Left);
        let (x0, y0, x1, y1) = ink_box(&img);
        assert!(x0 >= 4 && x1 < 4 + 16, "{x0}..{x1}");
        assert!(y1 < 70 && y0 >= 70 - 32, "{y0}..{y1}");
        // The stem of the first 'L' (the font's second column) lies along the bottom.
        let stem = (0..30)
            .filter(|&x| img.get_pixel(x, y1 - 2) == &INK)
            .count();
        assert!(stem >= 8, "{stem}");
    }

    #[test]
    fn text_off_the_image_is_clipped_not_a_panic() {
        let mut img = RgbImage::new(10, 10);
        draw(&mut img, (-20, -3), "clipped text", 3, INK, Anchor::Left);
        draw_up(&mut img, (8, 2), "x", 3, INK, Anchor::Right);
        assert_eq!(width("ab", 3), 48);
        assert_ne!(glyph('χ'), [0; 8]);
        assert_ne!(glyph('²'), [0; 8]);
        assert_eq!(glyph('\u{2603}'), [0; 8]);
    }
}
