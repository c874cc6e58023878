//! PNG pictures of maps: size, orientation (y up), colours at the ends of the scale, overlay.
//!
//! The PNGs are decoded with the `image` crate's PNG decoder; the colours at the ends of the
//! scale are those of the magma gradient at 0 and 1 (colorous, after matplotlib's magma).

use crate::common::Scratch;
use causeway::lens::LensSystem;
use causeway::map::render::{COLOUR_BAR_MIN_PIXELS, CURVE_COLOUR, LENS_COLOUR};
use causeway::map::{render_png, MagnificationMap, Overlay, Provenance, Window};
use std::path::Path;

/// A flat map (magnification 1) over [-1, 1]^2 with `n` pixels per side.
fn flat_map(n: usize) -> MagnificationMap {
    MagnificationMap {
        window: Window::new((0.0, 0.0), 2.0, n).unwrap(),
        data: ndarray::Array2::from_elem((n, n), 1.0),
        provenance: Provenance {
            lens: LensSystem::binary(0.8, 1.0).unwrap(),
            engine: "hand-made".into(),
            density: 0.0,
            rays_shot: 0,
            rays_landed: 0,
            version: "0.1.0".into(),
            build_time: "2026-12-01T19:30:05".into(),
            build_seconds: 0.0,
        },
    }
}

fn read_png(path: &Path) -> image::RgbImage {
    image::open(path).unwrap().to_rgb8()
}

fn magma(t: f64) -> [u8; 3] {
    let c = colorous::MAGMA.eval_continuous(t);
    [c.r, c.g, c.b]
}

#[test]
fn small_and_large_maps_have_the_expected_size() {
    let dir = Scratch::new("size");
    let path = dir.join("map.png");
    // Below the colour-bar threshold: exactly one PNG pixel per map pixel.
    render_png(&flat_map(20), &Overlay::default(), &path).unwrap();
    let img = read_png(&path);
    assert_eq!(img.dimensions(), (20, 20));
    // Wider maps: the same height, the bar to the right.
    const { assert!(COLOUR_BAR_MIN_PIXELS <= 300) };
    render_png(&flat_map(300), &Overlay::default(), &path).unwrap();
    let img = read_png(&path);
    assert_eq!(img.height(), 300);
    assert!(img.width() > 300 && img.width() < 400, "{}", img.width());
    assert_eq!(std::fs::read_dir(&dir).unwrap().count(), 1);
}

#[test]
fn top_left_of_the_source_plane_is_top_left_of_the_picture() {
    let dir = Scratch::new("orientation");
    let path = dir.join("map.png");
    let n = 40;
    let mut map = flat_map(n);
    // The pixel of smallest x and largest y, i.e. data[[iy = n-1, ix = 0]].
    let (ix, iy) = map.window.pixel_of(-0.99, 0.99).unwrap();
    assert_eq!((ix, iy), (0, n - 1));
    map.data[[iy, ix]] = 1000.0;
    render_png(&map, &Overlay::default(), &path).unwrap();
    let img = read_png(&path);
    // Flat map plus one spike: the scale spans log10 1 .. log10 1000, the spike at its top.
    for row in 0..n as u32 {
        for col in 0..n as u32 {
            let want = if (row, col) == (0, 0) {
                magma(1.0)
            } else {
                magma(0.0)
            };
            assert_eq!(img.get_pixel(col, row).0, want, "PNG pixel ({col}, {row})");
        }
    }
}

#[test]
fn caustic_lines_and_lens_marks_are_drawn_in_their_colours() {
    let dir = Scratch::new("overlay");
    let path = dir.join("map.png");
    let n = 64;
    let map = flat_map(n);
    // A horizontal line at y = 0.5 running beyond both edges, and a lens at (-0.5, -0.5); a
    // second lens outside the window is not drawn.
    let overlay = Overlay {
        lenses: vec![(-0.5, -0.5), (5.0, 5.0)],
        curves: vec![vec![(-3.0, 0.5 + 1e-9), (3.0, 0.5 + 1e-9)]],
    };
    render_png(&map, &overlay, &path).unwrap();
    let img = read_png(&path);
    // y = 0.5 lies in map row iy = 48, PNG row n - 1 - 48 = 15: all of it, clipped at the edges.
    for col in 0..n as u32 {
        assert_eq!(img.get_pixel(col, 15).0, CURVE_COLOUR, "column {col}");
    }
    // The lens at (-0.5, -0.5): map pixel (16, 16), PNG row 47; its cross has arms of 2 pixels.
    let (lx, ly) = map.window.pixel_of(-0.5, -0.5).unwrap();
    let row = (n - 1 - ly) as u32;
    for (dc, dr) in [(0, 0), (-2, 0), (2, 0), (0, -2), (0, 2)] {
        let p = img.get_pixel((lx as i64 + dc) as u32, (row as i64 + dr) as u32);
        assert_eq!(p.0, LENS_COLOUR, "offset ({dc}, {dr})");
    }
    // Elsewhere the map colour: nothing drawn for the lens outside.
    assert_eq!(img.get_pixel(n as u32 - 1, 0).0, magma(0.0));
    let marked = img
        .enumerate_pixels()
        .filter(|(c, _, p)| (*c as usize) < n && p.0 == LENS_COLOUR)
        .count();
    assert_eq!(marked, 9, "one cross of 2 x 4 + 1 pixels");
}

#[test]
fn colour_bar_runs_from_the_bottom_to_the_top_of_the_scale() {
    let dir = Scratch::new("bar");
    let path = dir.join("map.png");
    let n = 64;
    let mut map = flat_map(n);
    map.data = ndarray::Array2::from_shape_fn((n, n), |(iy, _)| 10f32.powf(iy as f32 / 21.0));
    render_png(&map, &Overlay::default(), &path).unwrap();
    let img = read_png(&path);
    // Along the bar's middle column, the colour goes from the top of the gradient (row 0) to
    // the bottom (last row), as the map itself does from its top row to its bottom row.
    let paper = [[255, 255, 255], [0, 0, 0]];
    let bar_col = (n as u32..img.width())
        .find(|&c| !paper.contains(&img.get_pixel(c, n as u32 / 2).0))
        .unwrap();
    let top = img.get_pixel(bar_col, 0).0;
    let bottom = img.get_pixel(bar_col, n as u32 - 1).0;
    let near = |a: [u8; 3], b: [u8; 3]| a.iter().zip(b).all(|(x, y)| x.abs_diff(y) <= 8);
    assert!(near(top, magma(1.0)), "{top:?}");
    assert!(near(bottom, magma(0.0)), "{bottom:?}");
    assert!(near(img.get_pixel(0, 0).0, magma(1.0)));
    assert!(near(img.get_pixel(0, n as u32 - 1).0, magma(0.0)));
}
