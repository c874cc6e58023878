//! What the figure tests of every picture assert: a blank border (nothing runs off the
//! picture), and text ink where labels belong.

use super::axes::INK;
use super::draw::Rect;
use image::{Rgb, RgbImage};

/// Whether the rectangle (clipped to the image) holds pixels of the text colour.
pub fn inked(img: &RgbImage, r: Rect) -> bool {
    let (w, h) = (img.width() as i64, img.height() as i64);
    (r.left.max(0)..(r.left + r.width).min(w)).any(|x| {
        (r.top.max(0)..(r.top + r.height).min(h)).any(|y| img.get_pixel(x as u32, y as u32) == &INK)
    })
}

/// Whether the outermost two pixels all hold `paper`.
pub fn blank_border(img: &RgbImage, paper: Rgb<u8>) -> bool {
    let (w, h) = (img.width(), img.height());
    img.enumerate_pixels()
        .filter(|(x, y, _)| *x < 2 || *y < 2 || *x + 2 >= w || *y + 2 >= h)
        .all(|(_, _, p)| p == &paper)
}

/// Asserts a chart's layout: a blank border; ink left of the plot area (which starts at column
/// `left`), in the bottom strip (x labels) and in the top strip (title, legend).
pub fn framed(img: &RgbImage, left: i64, paper: Rgb<u8>) {
    let (w, h) = (img.width() as i64, img.height() as i64);
    assert!(blank_border(img, paper), "something runs off the picture");
    let strips = [
        (
            Rect {
                left: 0,
                top: h / 4,
                width: left - 4,
                height: h / 2,
            },
            "y axis",
        ),
        (
            Rect {
                left,
                top: h - 40,
                width: w - left,
                height: 40,
            },
            "x axis",
        ),
        (
            Rect {
                left,
                top: 0,
                width: w - left,
                height: 40,
            },
            "title",
        ),
    ];
    for (r, what) in strips {
        assert!(inked(img, r), "{what}: no text");
    }
}
