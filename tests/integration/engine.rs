//! Ray-shooting maps against outside references.
//!
//! References (tests/reference/single_lens_maps.py, scipy.integrate on Paczynski 1986, ApJ 304, 1):
//! window means and pixel means of the point-lens magnification, and the length of the image-plane
//! pre-image of each square's boundary.
//!
//! Error bounds used here (lattice-point counting, derived in the tests):
//! - rigorous: a region whose boundary has length P touches at most 4 (P/h + 1) lattice cells of
//!   side h, and only touched cells can be miscounted, each by at most one ray; so
//!   |hits - area/h^2| <= 4 (P/h + 1) per boundary component.
//! - typical: if each touched cell's error is independent and uniform in [-1/2, 1/2], the count's
//!   standard deviation is sqrt(cells / 12).

use crate::common;

use causeway::engine::{ray_budget, Engine, RayShooting};
use causeway::lens::LensSystem;
use causeway::map::{MagnificationMap, Window};

fn build(
    lens: &LensSystem,
    cx: f64,
    cy: f64,
    width: f64,
    pixels: usize,
    rays: f64,
) -> MagnificationMap {
    let window = Window::new((cx, cy), width, pixels).unwrap();
    RayShooting::new(rays).build(lens, &window).unwrap()
}

/// Rigorous relative bound on a region's mean magnification from lattice counting.
fn lattice_bound(perimeter: f64, components: f64, h: f64, mean: f64, area: f64) -> f64 {
    4.0 * (perimeter / h + components) * h * h / (mean * area)
}

#[test]
fn single_lens_window_means_conserve_flux() {
    // Flux conservation: the window mean equals Paczynski's A integrated over the square
    // (reference by scipy.integrate.quad of the closed-form radial integral u sqrt(u^2+4)/2).
    // A shooting region that missed images would lose flux and fail this.
    let refs = common::reference(
        "single_lens_maps.csv",
        &["pixels", "cx", "cy", "width", "mean", "perimeter"],
    );
    let lens = LensSystem::single();
    let mut checked = 0;
    for row in refs.rows.iter().filter(|r| r[0] == 0.0) {
        let (cx, cy, w, mean, perimeter) = (row[1], row[2], row[3], row[4], row[5]);
        let (pixels, rays) = (50, 1e4);
        let map = build(&lens, cx, cy, w, pixels, rays);
        let h = w / pixels as f64 / rays.sqrt();
        let tol = lattice_bound(perimeter, 2.0, h, mean, w * w);
        let err = (map.mean() - mean).abs() / mean;
        assert!(
            err <= tol,
            "window ({cx},{cy}) w={w}: mean {} vs {mean}, rel err {err:e} > {tol:e}",
            map.mean()
        );
        // The regular lattice does much better than the worst case (typical error far below it).
        assert!(
            err <= tol / 10.0,
            "window ({cx},{cy}) w={w}: rel err {err:e} not well inside {tol:e}"
        );
        checked += 1;
    }
    assert_eq!(checked, 5);
}

#[test]
fn single_lens_pixels_match_pixel_means() {
    // Pixels away from the lens against the pixel mean of Paczynski's A (scipy dblquad).
    let refs = common::reference(
        "single_lens_maps.csv",
        &[
            "pixels",
            "cx",
            "cy",
            "width",
            "ix",
            "iy",
            "mean",
            "perimeter",
        ],
    );
    let rows: Vec<&Vec<f64>> = refs.rows.iter().filter(|r| r[0] > 0.0).collect();
    let (cx, cy, w, n) = (rows[0][1], rows[0][2], rows[0][3], rows[0][0] as usize);
    let rays = 1600.0;
    let map = build(&LensSystem::single(), cx, cy, w, n, rays);
    let h = w / n as f64 / rays.sqrt();
    let mut sum_z2 = 0.0;
    for r in &rows {
        let (ix, iy, mean, perimeter) = (r[4] as usize, r[5] as usize, r[6], r[7]);
        let got = map.data[[iy, ix]] as f64;
        let expected_hits = mean * rays;
        let cells = 4.0 * (perimeter / h + 2.0);
        let sigma = (cells / 12.0).sqrt() / expected_hits;
        let rigorous = cells / expected_hits;
        let rel = (got - mean) / mean;
        assert!(rel.abs() <= rigorous, "pixel ({ix},{iy}): {got} vs {mean}");
        assert!(
            rel.abs() <= 6.0 * sigma,
            "pixel ({ix},{iy}): {got} vs {mean}, {:.1} sigma",
            rel / sigma
        );
        sum_z2 += (rel / sigma).powi(2);
    }
    let rms = (sum_z2 / rows.len() as f64).sqrt();
    assert!(
        rms <= 1.5,
        "pixel errors {rms:.2} sigma rms: the lattice model does not hold"
    );
}

#[test]
fn distant_close_binary_looks_like_a_single_lens_of_the_total_mass() {
    // Seen from far away, A - 1 of a binary tends to the single-lens value of the total mass
    // (Paczynski 1986; here the exact window mean from the reference). "Far" needs s << u for the
    // major image and s << 1/u for the minor one, which sits about 1/u from the lenses: the
    // corrections are of relative order m1 m2 s^2 (u^2 + 1/u^2) (multipole expansion of the
    // deflection, coefficient taken <= 3; from memory, and measured near 1.2 here). For
    // u >> 1/s the minor image splits into one per lens and A - 1 tends to (1 + sum m_i^2)/u^4
    // instead, so the binary here is close (s = 0.05) and u = 3.
    let refs = common::reference(
        "single_lens_maps.csv",
        &["pixels", "cx", "cy", "width", "mean", "perimeter"],
    );
    let row = refs
        .rows
        .iter()
        .find(|r| r[0] == 0.0 && r[1] == 3.0)
        .expect("window at u = 3");
    let (cx, w, mean, perimeter) = (row[1], row[3], row[4], row[5]);
    let (s, q) = (0.05, 1.0);
    let lens = LensSystem::binary(s, q).unwrap();
    let (pixels, h) = (10, 3e-5);
    let rays = (w / pixels as f64 / h).powi(2);
    let map = build(&lens, cx, 0.0, w, pixels, rays);
    let (m1, m2) = (1.0 / (1.0 + q), q / (1.0 + q));
    let u = cx;
    let multipole = 3.0 * m1 * m2 * s * s * (u * u + 1.0 / (u * u)) * (mean - 1.0);
    // Ten times the typical lattice error (binary pre-image boundary taken as the single
    // lens's plus 20%).
    let cells = 4.0 * (1.2 * perimeter / h + 2.0);
    let lattice = 10.0 * (cells / 12.0).sqrt() * h * h / (w * w);
    let excess = map.mean() - 1.0;
    let deviation = (excess - (mean - 1.0)).abs();
    assert!(
        deviation <= multipole + lattice,
        "A - 1 = {excess:e} vs single lens {:e} (allowed {:e})",
        mean - 1.0,
        multipole + lattice
    );
    // The check is sharp: the allowance is a few percent of A - 1, and a binary twice as wide
    // deviates by more than this one's allowance (the correction grows as s^2).
    assert!(multipole + lattice < 0.03 * (mean - 1.0));
    let wider = build(
        &LensSystem::binary(2.0 * s, q).unwrap(),
        cx,
        0.0,
        w,
        pixels,
        rays,
    );
    assert!((wider.mean() - mean).abs() > multipole + lattice);
}

#[test]
fn pixel_data_do_not_depend_on_thread_count() {
    // Determinism promise (DESIGN.md): bit-identical data for 1, 2 and 4 threads, with and
    // without the mirror symmetry.
    let binary = LensSystem::binary(1.1, 3e-3).unwrap();
    let triple = LensSystem::new(&[(0.0, 0.0, 1.0), (0.9, 0.2, 1e-3), (-0.3, -0.5, 0.1)]).unwrap();
    let window = Window::new((0.05, -0.02), 0.6, 120).unwrap();
    for lens in [binary, triple] {
        common::assert_thread_independent(&RayShooting::new(50.0), &lens, &window);
    }
}

#[test]
fn mirror_symmetry_matches_tracing_both_halves() {
    // Tilting the x axis by a tiny angle breaks the symmetry shortcut without changing the physics
    // beyond the tilt: both maps must agree to the lattice noise.
    let (s, q) = (1.0, 0.1);
    let lens = LensSystem::binary(s, q).unwrap();
    let eps: f64 = 1e-9;
    let tilted: Vec<(f64, f64, f64)> = lens
        .lenses()
        .iter()
        .map(|l| (l.position.re, l.position.re * eps, l.mass))
        .collect();
    let tilted = LensSystem::new(&tilted).unwrap();
    assert!(!tilted.symmetric_about_x_axis());
    let a = build(&lens, 0.0, 0.0, 1.0, 40, 400.0);
    let b = build(&tilted, 0.0, 0.0, 1.0, 40, 400.0);
    // Window means agree to the rigorous lattice bound (perimeter taken generously as 30).
    let h = 1.0 / 40.0 / 20.0;
    let tol = lattice_bound(30.0, 3.0, h, a.mean(), 1.0);
    assert!(
        (a.mean() - b.mean()).abs() / a.mean() < tol,
        "{} vs {}",
        a.mean(),
        b.mean()
    );
}

#[test]
fn small_windows_cost_their_pre_image_not_the_field() {
    // Adaptive skipping: a 0.05-wide window on the planetary caustic of s = 1.25, q = 2e-3 (near
    // x = s - 1/s from the host, Griest & Safizadeh 1998) traces a tiny fraction of the region.
    let (s, q) = (1.25, 2e-3);
    let lens = LensSystem::binary(s, q).unwrap();
    let host = -s * q / (1.0 + q);
    let window = Window::new((host + s - 1.0 / s, 0.0), 0.05, 200).unwrap();
    let (traced, region) = ray_budget(&RayShooting::new(100.0), &lens, &window);
    assert!(traced * 200 < region, "traced {traced} of {region}");
}

/// A listener that asks the build to stop once some work was reported.
struct StopAfterFirst(std::sync::atomic::AtomicBool);

impl causeway::engine::Progress for StopAfterFirst {
    fn advance(&self, _done: u64) {
        self.0.store(true, std::sync::atomic::Ordering::Relaxed);
    }
    fn cancelled(&self) -> bool {
        self.0.load(std::sync::atomic::Ordering::Relaxed)
    }
}

#[test]
fn a_build_stops_when_its_listener_asks() {
    // Both engines return Error::Interrupted (exit status 130, the shell's for SIGINT: common
    // practice) instead of a map when the listener cancels part-way.
    let lens = LensSystem::binary(1.0, 1e-3).unwrap();
    let window = Window::new((0.0, 0.0), 1.0, 64).unwrap();
    let engines: [Box<dyn Engine>; 2] = [
        Box::new(RayShooting::new(100.0)),
        Box::new(causeway::engine::PolygonMapping::new(1.0)),
    ];
    for engine in engines {
        let stop = StopAfterFirst(std::sync::atomic::AtomicBool::new(false));
        let err = engine
            .build_with_progress(&lens, &window, &stop)
            .unwrap_err();
        assert!(matches!(err, causeway::Error::Interrupted), "{err}");
        assert_eq!(err.exit_code(), 130);
        // Not cancelled: the same build completes.
        assert!(engine.build_with_progress(&lens, &window, &()).is_ok());
    }
}
