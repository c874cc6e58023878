//! The polygon-mapping engine against outside references: Paczynski 1986 window and pixel
//! means (tests/reference/single_lens_maps.py, scipy.integrate), and against the ray engine.
//!
//! Its error is deterministic (the straight edges and uniform density of each mapped cell), of
//! second order in the cell size h: the tests check the level at a stated density and the
//! convergence rate, not a noise model.

use crate::common;

use causeway::engine::{Engine, PolygonMapping, RayShooting};
use causeway::lens::LensSystem;
use causeway::map::{MagnificationMap, Window};

fn build(
    engine: &dyn Engine,
    lens: &LensSystem,
    c: (f64, f64),
    w: f64,
    n: usize,
) -> MagnificationMap {
    engine.build(lens, &Window::new(c, w, n).unwrap()).unwrap()
}

fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    v[v.len() / 2]
}

#[test]
fn window_means_conserve_flux() {
    // Flux conservation: the window mean against Paczynski's A integrated over the square.
    let refs = common::reference(
        "single_lens_maps.csv",
        &["pixels", "cx", "cy", "width", "mean"],
    );
    for row in refs.rows.iter().filter(|r| r[0] == 0.0) {
        let (cx, cy, w, mean) = (row[1], row[2], row[3], row[4]);
        let map = build(
            &PolygonMapping::new(4.0),
            &LensSystem::single(),
            (cx, cy),
            w,
            100,
        );
        let err = (map.mean() / mean - 1.0).abs();
        // Measured at most 2.2e-5 for these windows at 4 cells per pixel (0.005 to 0.04 theta_E
        // pixels); the bound leaves a factor of about 5.
        assert!(
            err < 1e-4,
            "window ({cx},{cy}) w={w}: {} vs {mean}: {err:e}",
            map.mean()
        );
    }
}

#[test]
fn pixel_means_converge_at_second_order() {
    // Pixels of 0.05 theta_E near a point lens against scipy dblquad pixel means.
    let refs = common::reference(
        "single_lens_maps.csv",
        &["pixels", "cx", "cy", "width", "ix", "iy", "mean"],
    );
    let rows: Vec<&Vec<f64>> = refs.rows.iter().filter(|r| r[0] > 0.0).collect();
    let (cx, cy, w, n) = (rows[0][1], rows[0][2], rows[0][3], rows[0][0] as usize);
    let errors = |cells: f64| {
        let map = build(
            &PolygonMapping::new(cells),
            &LensSystem::single(),
            (cx, cy),
            w,
            n,
        );
        median(
            rows.iter()
                .map(|r| (map.data[[r[5] as usize, r[4] as usize]] as f64 / r[6] - 1.0).abs())
                .collect(),
        )
    };
    let (e1, e4, e16) = (errors(1.0), errors(4.0), errors(16.0));
    // Second order in h: each 4x in cells (2x in h) divides the error by about 4 or more.
    assert!(
        e4 < e1 / 3.0 && e16 < e4 / 3.0,
        "median errors {e1:e}, {e4:e}, {e16:e}"
    );
    assert!(e16 < 3e-4, "median error at 16 cells per pixel {e16:e}");
}

#[test]
fn polygon_and_dense_rays_agree_within_the_rays_noise() {
    // A binary (s = 1, q = 0.1) off its caustics: rays at 4e4 per pixel have a typical lattice
    // error near 1e-4 (tests/integration/engine.rs model); the polygon map at 4 cells per pixel agrees to a
    // median of a few 1e-4, at 1/10000 of the image-plane samples.
    let lens = LensSystem::binary(1.0, 0.1).unwrap();
    let rays = build(&RayShooting::new(4e4), &lens, (0.5, 0.6), 0.3, 60);
    let cells = build(&PolygonMapping::new(4.0), &lens, (0.5, 0.6), 0.3, 60);
    let rays_self = {
        let coarse = build(&RayShooting::new(1e4), &lens, (0.5, 0.6), 0.3, 60);
        median(
            coarse
                .data
                .iter()
                .zip(rays.data.iter())
                .map(|(a, b)| (*a as f64 / *b as f64 - 1.0).abs())
                .collect(),
        )
    };
    let diff = median(
        cells
            .data
            .iter()
            .zip(rays.data.iter())
            .map(|(a, b)| (*a as f64 / *b as f64 - 1.0).abs())
            .collect(),
    );
    assert!(
        diff < 3.0 * rays_self.max(1e-4),
        "median polygon-rays {diff:e}, rays noise {rays_self:e}"
    );
}

#[test]
fn distant_close_binary_looks_like_a_single_lens_of_the_total_mass() {
    // As in tests/integration/engine.rs: A - 1 of a close binary (s = 0.05, q = 1) at u = 3 against the
    // single-lens window mean, to the multipole order m1 m2 s^2 (u^2 + 1/u^2) (coefficient
    // taken <= 3; from memory, measured near 1.2).
    let refs = common::reference(
        "single_lens_maps.csv",
        &["pixels", "cx", "cy", "width", "mean"],
    );
    let row = refs
        .rows
        .iter()
        .find(|r| r[0] == 0.0 && r[1] == 3.0)
        .unwrap();
    let (u, w, mean) = (row[1], row[3], row[4]);
    let (s, q) = (0.05, 1.0);
    let map = build(
        &PolygonMapping::new(16.0),
        &LensSystem::binary(s, q).unwrap(),
        (u, 0.0),
        w,
        50,
    );
    let allowed = 3.0 * 0.25 * s * s * (u * u + 1.0 / (u * u)) * (mean - 1.0) + 1e-6;
    assert!(
        ((map.mean() - 1.0) - (mean - 1.0)).abs() <= allowed,
        "{} vs {mean}",
        map.mean()
    );
}

#[test]
fn pixel_data_do_not_depend_on_thread_count() {
    let lens = LensSystem::new(&[(0.0, 0.0, 1.0), (0.9, 0.2, 1e-3), (-0.3, -0.5, 0.1)]).unwrap();
    let window = Window::new((0.05, -0.02), 0.6, 120).unwrap();
    common::assert_thread_independent(&PolygonMapping::new(2.0), &lens, &window);
}

#[test]
fn caustic_crossing_curves_agree_with_contour_integration() {
    // The study's claim (docs/engine-study.csv, curve columns): finite-source curves read from a
    // polygon map at one cell per pixel across a caustic agree with contour integration (Green's
    // theorem, an independent calculation; itself checked against Witt & Mao 1994 and numpy
    // lattice counts in tests/integration/contour.rs) to a median of about 5e-5, and to about 3e-2 at the
    // 99th percentile, where the 5-pixel source straddles a caustic fold.
    let (s, q) = (1.3, 1e-3);
    let lens = LensSystem::binary(s, q).unwrap();
    let centre = (s - 1.0 / s - s * q / (1.0 + q), 0.0);
    let map = build(&PolygonMapping::new(1.0), &lens, centre, 0.2, 500);
    let rho = 5.0 * map.window.pixel_size();
    let profile =
        causeway::source::SourceProfile::new(rho, causeway::source::LimbDarkening::Uniform)
            .unwrap();
    let angle = 30f64.to_radians();
    let points: Vec<(f64, f64)> = (0..120)
        .map(|k| {
            let d = -0.08 + 0.16 * k as f64 / 119.0;
            (
                centre.0 + d * angle.cos(),
                centre.1 + 0.01 + d * angle.sin(),
            )
        })
        .collect();
    let curve = causeway::curve::Sampler::new(profile)
        .map(&map)
        .sample(&points)
        .unwrap();
    let centres: Vec<num_complex::Complex64> = points
        .iter()
        .map(|&(x, y)| num_complex::Complex64::new(x, y))
        .collect();
    let exact = causeway::contour::magnifications(&lens, &centres, &profile, 1e-6).unwrap();
    let mut errors: Vec<f64> = curve
        .samples
        .iter()
        .zip(&exact)
        .map(|(a, e)| (a.magnification / e.magnification - 1.0).abs())
        .collect();
    errors.sort_by(f64::total_cmp);
    let (median, p99) = (errors[errors.len() / 2], errors[errors.len() * 99 / 100]);
    // The path crosses the caustic: the magnification jumps along it.
    let (lo, hi) = exact.iter().fold((f64::MAX, 0.0f64), |(lo, hi), e| {
        (lo.min(e.magnification), hi.max(e.magnification))
    });
    assert!(hi > 1.5 * lo, "no caustic crossing: {lo} to {hi}");
    assert!(median < 3e-4, "median {median:e}");
    assert!(p99 < 5e-2, "99th percentile {p99:e}");
}
