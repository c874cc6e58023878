//! Light curves from maps against outside references.
//!
//! References: tests/reference/finite_source.py (Witt & Mao 1994 closed form for the uniform
//! disk, scipy.special; limb-darkened disks by scipy.integrate in the form of Lee et al. 2009).
//!
//! # Tolerance of a map-based finite-source read (derived here)
//! A read is `sum_p w_p hits_p / (R pi rho_px^2)` over the pixels the disk touches (`w_p` the
//! exact overlap areas in pixel units, `R` rays per pixel area, `h = d / sqrt(R)` the ray
//! spacing, `d` the pixel size). Two errors:
//! - lattice counting (the engine's model, tests/integration/engine.rs): a region whose image-plane
//!   pre-image has boundary length `P` is miscounted by about `sqrt(cells / 12)` rays,
//!   `cells = 4 (P / h + 2)`. The pixels wholly inside the disk form one region (its staircase
//!   boundary is taken 4/pi times the circle's); each rim pixel (at most `4 (2 rho_px + 1)`)
//!   adds its own. Allowed: 6 standard deviations.
//! - pixelisation: pixels hold box means, so the read is the disk mean of `A` smoothed by a box
//!   of side `d`, whose bias is `(d^2/24) mean_disk(Laplacian A) = (d^2/24)(2/rho) mean_circle(dA/dn)`
//!   (divergence theorem); the rim pixels, weighted by area but valued at their whole-pixel
//!   mean, err by at most their value's spread over the pixel, `|grad A| d sqrt(2)/2`, times
//!   their area; over a rim band of area `2 pi rho d` that is
//!   `sqrt(2) |grad A| d^2 / rho`. Allowed: the sum, with `|grad A|` the largest on the band.

mod cli;
mod errors;
mod routes;

use crate::common;

use causeway::curve::{small_source, DirectReader, Evaluation, Method, Sampler, StraightLine};
use causeway::engine::{Engine, RayShooting};
use causeway::lens::LensSystem;
use causeway::map::{MagnificationMap, Window};
use causeway::source::{LimbDarkening, SourceProfile};
use num_complex::Complex64;
use std::f64::consts::PI;

/// Paczynski 1986 (ApJ 304, 1): point-lens magnification and the size of its gradient.
fn paczynski(u: f64) -> f64 {
    (u * u + 2.0) / (u * (u * u + 4.0).sqrt())
}
fn paczynski_slope(u: f64) -> f64 {
    8.0 / (u * u * (u * u + 4.0).powf(1.5))
}

/// Length of both images (single lens at the origin) of the closed curve `pts`.
fn image_perimeter(pts: &[Complex64]) -> f64 {
    let image = |zeta: Complex64, sign: f64| {
        let u2 = zeta.norm_sqr();
        zeta * (1.0 + sign * (1.0 + 4.0 / u2).sqrt()) / 2.0
    };
    let mut total = 0.0;
    for sign in [1.0, -1.0] {
        for k in 0..pts.len() {
            let (a, b) = (pts[k], pts[(k + 1) % pts.len()]);
            total += (image(b, sign) - image(a, sign)).norm();
        }
    }
    total
}

/// The tolerance of the module documentation for a uniform disk read of a single-lens map.
fn single_lens_tolerance(map: &MagnificationMap, rays: f64, cx: f64, rho: f64) -> f64 {
    let d = map.window.pixel_size();
    let h = d / rays.sqrt();
    let rho_px = rho / d;
    let circle: Vec<Complex64> = (0..2000)
        .map(|k| Complex64::new(cx, 0.0) + Complex64::from_polar(rho, 2.0 * PI * k as f64 / 2000.0))
        .collect();
    let cells_inner = 4.0 * (4.0 / PI * image_perimeter(&circle) / h + 2.0);
    // Rim pixel nearest the lens (the most magnified one), as a d x d square.
    let near = (cx.abs() - rho).abs().max(d);
    let px: Vec<Complex64> = (0..400)
        .map(|k| {
            let t = k as f64 / 100.0;
            let (side, f) = (t.floor(), t.fract());
            let (x, y) = match side as i32 {
                0 => (f, 0.0),
                1 => (1.0, f),
                2 => (1.0 - f, 1.0),
                _ => (0.0, 1.0 - f),
            };
            Complex64::new(near + x * d, (y - 0.5) * d)
        })
        .collect();
    let cells_pixel = 4.0 * (image_perimeter(&px) / h + 2.0);
    let rim = 4.0 * (2.0 * rho_px + 1.0);
    let sigma = ((cells_inner + rim * cells_pixel) / 12.0).sqrt() / (rays * PI * rho_px * rho_px);
    // Largest gradient on the rim band (distances from the lens within d of the circle).
    let (r_lo, r_hi) = ((cx.abs() - rho).abs() - d, cx.abs() + rho + d);
    let slope = if cx.abs() - rho < d && rho - cx.abs() < d {
        f64::INFINITY
    } else {
        paczynski_slope(r_lo.max(1e-12)).max(paczynski_slope(r_hi))
    };
    let pixelisation = (d * d / 24.0) * (2.0 / rho) * slope + 2f64.sqrt() * slope * d * d / rho;
    // Both the read and the true disk mean lie between 1 and sqrt(1 + 4/rho^2), the mean over a
    // disk centred on the lens (Witt & Mao 1994), which caps the error of tiny disks (rho
    // below a pixel, as the innermost disks of a limb-darkened profile can be).
    (6.0 * sigma + pixelisation).min((1.0 + 4.0 / (rho * rho)).sqrt())
}

fn reference_rows(law: f64) -> Vec<Vec<f64>> {
    let t = common::reference(
        "finite_source.csv",
        &["law", "ld_a", "ld_b", "u", "rho", "magnification"],
    );
    t.rows.into_iter().filter(|r| r[0] == law).collect()
}

fn profile_of(row: &[f64]) -> SourceProfile {
    let law = match row[0] as i32 {
        0 => LimbDarkening::Uniform,
        1 => LimbDarkening::Linear { u: row[1] },
        _ => LimbDarkening::SquareRoot {
            c: row[1],
            d: row[2],
        },
    };
    SourceProfile::new(row[4], law).unwrap()
}

/// Single lens map: 200 px over [-0.15, 0.25] x [-0.2, 0.2] (pixel 0.002 = rho / 10).
const RAYS: f64 = 400.0;
fn single_lens_map() -> MagnificationMap {
    let window = Window::new((0.05, 0.0), 0.4, 200).unwrap();
    RayShooting::new(RAYS)
        .build(&LensSystem::single(), &window)
        .unwrap()
}

#[test]
fn uniform_disk_reads_match_witt_mao() {
    // Witt & Mao 1994 (scipy.special, tests/reference/finite_source.py); the u = 0 value is
    // also checked against sqrt(1 + 4/rho^2) (Witt & Mao 1994) directly.
    let map = single_lens_map();
    let mut checked = 0;
    for row in reference_rows(0.0) {
        let (u, rho, expect) = (row[3], row[4], row[5]);
        if u == 0.0 {
            assert!((expect - (1.0 + 4.0 / (rho * rho)).sqrt()).abs() < 1e-12 * expect);
        }
        let reader = DirectReader::new(&map, &profile_of(&row));
        let Some(got) = reader.read(u, 0.0) else {
            continue;
        };
        let tol = single_lens_tolerance(&map, RAYS, u, rho);
        let err = (got - expect).abs();
        eprintln!(
            "u {u}: {got} vs {expect}: err {:.2e} rel, tol {:.2e}",
            err / expect,
            tol / expect
        );
        assert!(err <= tol, "u = {u}: {got} vs {expect} (allowed {tol:e})");
        checked += 1;
    }
    assert_eq!(checked, 6);
}

#[test]
fn limb_darkened_reads_match_the_annulus_integral() {
    // Linear (u = 0.6) and square-root (c = 0.3, d = 0.4) laws against scipy.integrate over
    // annuli of the Witt & Mao uniform-disk magnification (Lee et al. 2009 form). A profile is
    // a weighted sum of uniform disks of radius <= rho, each within the uniform-disk tolerance
    // of its own radius (the weighted sum of those is allowed), plus the quadrature tolerance
    // 1e-4 (src/curve/sample.rs).
    let map = single_lens_map();
    let mut checked = 0;
    for law in [1.0, 2.0] {
        for row in reference_rows(law) {
            let (u, rho, expect) = (row[3], row[4], row[5]);
            let Some(got) = DirectReader::new(&map, &profile_of(&row)).read(u, 0.0) else {
                continue;
            };
            let profile = profile_of(&row);
            let nodes = causeway::curve::ld_nodes(rho / map.window.pixel_size());
            let tol = profile
                .as_uniform_disks(nodes)
                .iter()
                .map(|&(r, w)| w * single_lens_tolerance(&map, RAYS, u, r))
                .sum::<f64>()
                + 1e-4 * expect;
            let err = (got - expect).abs();
            eprintln!(
                "law {law} u {u}: err {:.2e} rel, tol {:.2e}",
                err / expect,
                tol / expect
            );
            assert!(
                err <= tol,
                "law {law}, u = {u}: {got} vs {expect} (allowed {tol:e})"
            );
            // Limb darkening matters here: the uniform disk differs by more than the allowance.
            if u == 0.0 {
                let uniform = reference_rows(0.0).into_iter().find(|r| r[3] == u).unwrap()[5];
                assert!((uniform - expect).abs() > tol);
            }
            checked += 1;
        }
    }
    assert_eq!(checked, 12);
}

/// A binary whose central caustic the test map crosses (s = 1, q = 0.1: one resonant caustic
/// about the origin), 150 px over 0.6, rho = 10 px.
fn binary_map(rays: f64) -> (LensSystem, MagnificationMap) {
    let lens = LensSystem::binary(1.0, 0.1).unwrap();
    let window = Window::new((0.0, 0.0), 0.6, 150).unwrap();
    let map = RayShooting::new(rays).build(&lens, &window).unwrap();
    (lens, map)
}

/// Deterministic points in [lo, hi)^2 (a fixed linear congruential sequence).
fn scatter(count: usize, lo: f64, hi: f64) -> Vec<(f64, f64)> {
    let mut state = 0x2545_f491_4f6c_dd1du64;
    let mut next = || {
        state = state
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        lo + (hi - lo) * ((state >> 11) as f64 / (1u64 << 53) as f64)
    };
    (0..count).map(|_| (next(), next())).collect()
}

#[test]
fn limb_darkening_quadrature_meets_its_tolerance() {
    // Stated in src/curve/sample.rs: relative error below 1e-4 against four times the nodes,
    // here on points scattered over a caustic crossing (the roughest case).
    let (_, map) = binary_map(25.0);
    for rho in [0.012, 0.04] {
        for law in [
            LimbDarkening::Linear { u: 1.0 },
            LimbDarkening::SquareRoot { c: 0.2, d: 0.8 },
        ] {
            let profile = SourceProfile::new(rho, law).unwrap();
            let nodes = causeway::curve::ld_nodes(rho / map.window.pixel_size());
            let coarse = DirectReader::new(&map, &profile);
            let fine = DirectReader::with_nodes(&map, &profile, 4 * nodes);
            let mut worst = 0.0f64;
            for (x, y) in scatter(400, -0.2, 0.2) {
                let (a, b) = (coarse.read(x, y).unwrap(), fine.read(x, y).unwrap());
                worst = worst.max((a - b).abs() / b);
            }
            eprintln!("rho {rho} {law:?}: worst quadrature error {worst:.2e}");
            assert!(worst < 1e-4, "rho {rho} {law:?}: {worst:e}");
        }
    }
}

#[test]
fn off_map_continuation_matches_witt_mao_and_the_map_across_the_seam() {
    // Off the map the curve is the point-source magnification plus the hexadecapole correction
    // (Gould 2008); far from the lens it must match Witt & Mao 1994 and the annulus integral
    // (finite_source.csv) to the requested tolerance.
    let lens = LensSystem::single();
    let tol = 1e-5;
    for law in [0.0, 1.0, 2.0] {
        for row in reference_rows(law).iter().filter(|r| r[3] >= 0.2) {
            let (u, expect) = (row[3], row[5]);
            let e = small_source(&lens, &profile_of(row), u, 0.0).unwrap();
            // The reported error is ten times the last kept term: within 1e-4 here, and a
            // bound on the true error.
            assert!(e.accurate(1e-4), "u = {u}: error estimate {:e}", e.error);
            assert!(
                (e.magnification - expect).abs() <= e.error + 1e-12 * expect,
                "law {law} u = {u}: error {:e} beyond its estimate {:e}",
                e.magnification - expect,
                e.error
            );
            let err = (e.magnification - expect).abs() / expect;
            assert!(
                err <= tol,
                "law {law} u = {u}: {} vs {expect} ({err:e})",
                e.magnification
            );
            // The correction matters: the point source alone is off by more than tol at u=0.2.
            if u == 0.2 {
                assert!((e.point - expect).abs() / expect > 10.0 * tol);
            }
        }
    }
    // Seam: a path along y = 0.05 leaving the map at x = 0.25. Where the map ends and the
    // expansion starts, both agree with each other within the map tolerance plus tol.
    let map = single_lens_map();
    let profile = SourceProfile::uniform(0.02).unwrap();
    let points: Vec<(f64, f64)> = (0..=60).map(|k| (0.15 + 0.005 * k as f64, 0.05)).collect();
    let curve = Sampler::new(profile)
        .map(&map)
        .lens(&lens)
        .tol(1e-4)
        .evaluation(Evaluation::Direct)
        .sample(&points)
        .unwrap();
    let last_map = curve
        .samples
        .iter()
        .rposition(|s| s.method == Method::Direct)
        .unwrap();
    assert!(curve.samples[..=last_map]
        .iter()
        .all(|s| s.method == Method::Direct));
    assert!(curve.samples[last_map + 1..]
        .iter()
        .all(|s| s.method == Method::Expansion));
    // The source (radius 0.02) leaves the map (x < 0.25) between x = 0.225 and 0.23.
    assert!(
        (points[last_map].0 - 0.225).abs() < 1e-9,
        "{}",
        points[last_map].0
    );
    let (x, y) = points[last_map];
    let from_map = curve.samples[last_map].magnification;
    let expanded = small_source(&lens, &profile, x, y).unwrap().magnification;
    let allowed = single_lens_tolerance(&map, RAYS, x.hypot(y), 0.02) + tol * expanded;
    assert!(
        (from_map - expanded).abs() <= allowed,
        "{from_map} vs {expanded}"
    );
}

#[test]
fn continuation_refuses_points_near_a_caustic_naming_the_first() {
    // A path through the lens (the point caustic of a single lens) on a map that misses it.
    let lens = LensSystem::single();
    let window = Window::new((0.5, 0.5), 0.2, 40).unwrap();
    let map = RayShooting::new(25.0).build(&lens, &window).unwrap();
    let points: Vec<(f64, f64)> = (0..=20).map(|k| (-0.5 + 0.05 * k as f64, 0.001)).collect();
    let err = Sampler::new(SourceProfile::uniform(0.01).unwrap())
        .map(&map)
        .lens(&lens)
        .sample(&points)
        .unwrap_err()
        .to_string();
    // For A ~ 1/u the hexadecapole term is (<r^4>/64) Laplacian^2(1/u) = (rho^4/192)(9/u^5),
    // relative 0.047 (rho/u)^4, reported ten times: 7.5e-4 at u = 5 rho (point 10, x = -0.05,
    // accepted at the default tolerance 1e-3), so the first refused point is point 11, next
    // to the lens.
    assert!(err.starts_with("point 11 at ("), "{err}");
    assert!(err.contains("caustic"), "{err}");
}

#[test]
fn straight_line_conventions() {
    // DESIGN.md: source at (tau cos a - u0 sin a, tau sin a + u0 cos a), tau = (t - t0)/tE.
    // No outside source: the directions of motion and the side of u0, at tau = 1.
    let cases = [
        (0.0, (1.0, 0.3)),
        (90.0, (-0.3, 1.0)),
        (180.0, (-1.0, -0.3)),
        (270.0, (0.3, -1.0)),
    ];
    for (deg, (x, y)) in cases {
        for sign in [1.0, -1.0] {
            let line = StraightLine::new(5.0, 0.3 * sign, 20.0, f64::to_radians(deg)).unwrap();
            let (px, py) = line.position(25.0);
            // Flipping u0 mirrors the offset (perpendicular to the motion) only.
            let (ex, ey) = match deg as i32 {
                0 | 180 => (x, y * sign),
                _ => (x * sign, y),
            };
            assert!(
                (px - ex).abs() < 1e-12 && (py - ey).abs() < 1e-12,
                "{deg} {sign}: {px},{py}"
            );
            // At t0 the source is at distance |u0| from the origin.
            let (qx, qy) = line.position(5.0);
            assert!((qx.hypot(qy) - 0.3).abs() < 1e-12);
        }
    }
}

#[test]
fn small_sources_are_flagged_with_the_resolution_that_would_do() {
    let window = Window::new((0.5, 0.0), 0.2, 20).unwrap();
    let map = RayShooting::new(4.0)
        .build(&LensSystem::single(), &window)
        .unwrap();
    let curve = Sampler::new(SourceProfile::uniform(0.02).unwrap()) // 2 pixels of radius
        .map(&map)
        .sample(&[(0.5, 0.0)])
        .unwrap();
    assert_eq!(curve.warnings.len(), 1);
    assert!(
        curve.warnings[0].contains("at least 30 pixels"),
        "{}",
        curve.warnings[0]
    );
    let fine = Sampler::new(SourceProfile::uniform(0.03).unwrap())
        .map(&map)
        .sample(&[(0.5, 0.0)])
        .unwrap();
    assert!(fine.warnings.is_empty());
}

#[test]
fn curves_do_not_depend_on_thread_count() {
    // Determinism promise (DESIGN.md), for both evaluations and the continuation.
    let (_, map) = binary_map(4.0);
    let lens = LensSystem::single();
    let mut points = scatter(500, -0.25, 0.25);
    points.push((0.5, 0.5)); // off the map: the single-lens continuation
    let profile = SourceProfile::new(0.02, LimbDarkening::Linear { u: 0.5 }).unwrap();
    for evaluation in [Evaluation::Direct, Evaluation::Convolved] {
        let curves: Vec<_> = [1, 2, 3]
            .iter()
            .map(|&n| {
                let pool = rayon::ThreadPoolBuilder::new()
                    .num_threads(n)
                    .build()
                    .unwrap();
                pool.install(|| {
                    Sampler::new(profile)
                        .map(&map)
                        .lens(&lens)
                        .evaluation(evaluation)
                        .sample(&points)
                        .unwrap()
                })
            })
            .collect();
        for c in &curves[1..] {
            assert!(c.samples.iter().zip(&curves[0].samples).all(|(a, b)| a
                .magnification
                .to_bits()
                == b.magnification.to_bits()
                && a.method == b.method));
        }
    }
}

#[test]
fn binary_curve_agrees_across_the_seam() {
    // A binary curve leaving the map: ray-shooting map reads on one side, the solver's point
    // source plus the hexadecapole correction (Gould 2008) on the other; two independent
    // calculations, which must agree where both apply (the last points on the map) to the map
    // tolerance plus the expansion's. Map tolerance for a binary, as for the single lens (module
    // documentation), with the pre-image perimeter of the source circle bounded by
    // 2 pi rho sum_i 1/|1 - |shear(z_i)|| over the images z_i (largest stretch of the lens map
    // at each image) and |grad A| taken from the solver by central differences.
    let rays: f64 = 400.0;
    let (lens, map) = binary_map(rays);
    let rho = 0.02;
    let tol = 1e-4;
    let profile = SourceProfile::uniform(rho).unwrap();
    let points: Vec<(f64, f64)> = (0..=80)
        .map(|k| (0.1 + 0.006 * k as f64, 0.12 + 0.004 * k as f64))
        .collect();
    let solver = causeway::solve::ImageSolver::new(&lens).unwrap();
    let curve = Sampler::new(profile)
        .map(&map)
        .lens(&solver)
        .tol(tol)
        .evaluation(Evaluation::Direct)
        .sample(&points)
        .unwrap();
    let last_map = curve
        .samples
        .iter()
        .rposition(|s| s.method == Method::Direct)
        .unwrap();
    assert!(curve.samples[last_map + 1..]
        .iter()
        .all(|s| s.method == Method::Expansion));
    assert!(
        last_map > 10 && last_map + 10 < points.len(),
        "seam at {last_map}"
    );
    let d = map.window.pixel_size();
    let h = d / rays.sqrt();
    let rho_px = rho / d;
    let a = |x: f64, y: f64| causeway::solve::magnification(&lens, Complex64::new(x, y)).unwrap();
    for (k, &(x, y)) in points
        .iter()
        .enumerate()
        .take(last_map + 1)
        .skip(last_map - 4)
    {
        let from_map = curve.samples[k].magnification;
        let e = small_source(&solver, &profile, x, y).unwrap();
        assert!(e.accurate(tol));
        let images = causeway::solve::images(&lens, Complex64::new(x, y)).unwrap();
        let perimeter: f64 = images
            .iter()
            .map(|i| 2.0 * PI * rho / (1.0 - lens.shear(i.position).norm()).abs())
            .sum();
        let stretch = perimeter / (2.0 * PI * rho);
        let cells_inner = 4.0 * (4.0 / PI * perimeter / h + 2.0);
        let cells_pixel = 4.0 * (4.0 * d * stretch / h + 2.0);
        let rim = 4.0 * (2.0 * rho_px + 1.0);
        let sigma =
            ((cells_inner + rim * cells_pixel) / 12.0).sqrt() / (rays * PI * rho_px * rho_px);
        let eps = 1e-4;
        let grad =
            ((a(x + eps, y) - a(x - eps, y)).hypot(a(x, y + eps) - a(x, y - eps))) / (2.0 * eps);
        let pixelisation = (d * d / 24.0) * (2.0 / rho) * grad + 2f64.sqrt() * grad * d * d / rho;
        let allowed = 6.0 * sigma + pixelisation + tol * e.magnification;
        let diff = (from_map - e.magnification).abs();
        eprintln!(
            "seam point {k}: map {from_map} expansion {} diff {:.2e} allowed {:.2e}",
            e.magnification,
            diff / from_map,
            allowed / from_map
        );
        assert!(
            diff <= allowed,
            "point {k}: map {from_map} vs expansion {}",
            e.magnification
        );
    }
}

#[test]
fn point_source_reads_are_the_map_smoothed_by_about_a_pixel() {
    // rho = 0: bilinear interpolation between pixel centres (src/curve/sample.rs). For a smooth
    // A the read is A + (d^2/24) Laplacian(A) (the pixel box) plus at most
    // (d^2/8)(|A_xx| + |A_yy|) (the interpolation), plus lattice noise (6 sigma, the engine's
    // model with the pixel pre-image perimeter taken as 4 d times the largest stretch of the
    // map at the two images, 1/(1 - 1/|z|^2)). Paczynski 1986 is the reference; off the map
    // the exact point-source value is used (Method::Point).
    let map = single_lens_map();
    let d = map.window.pixel_size();
    let h = d / RAYS.sqrt();
    let lens = LensSystem::single();
    let pts: Vec<(f64, f64)> = scatter(300, -0.12, 0.22)
        .into_iter()
        .filter(|p| p.0.hypot(p.1) > 0.05)
        .chain([(0.5, 0.3)])
        .collect();
    let curve = Sampler::new(SourceProfile::uniform(0.0).unwrap())
        .map(&map)
        .lens(&lens)
        .sample(&pts)
        .unwrap();
    let mut worst = 0.0f64;
    for (s, &(x, y)) in curve.samples.iter().zip(&pts) {
        let u = x.hypot(y);
        if s.method == Method::Point {
            assert_eq!(s.magnification, paczynski(u));
            continue;
        }
        assert_eq!(s.method, Method::Bilinear);
        let e = 1e-4;
        let f = |a: f64, b: f64| paczynski(a.hypot(b));
        let axx = (f(x + e, y) - 2.0 * f(x, y) + f(x - e, y)) / (e * e);
        let ayy = (f(x, y + e) - 2.0 * f(x, y) + f(x, y - e)) / (e * e);
        // Second derivatives grow towards the lens: take them at the near side of the cell.
        let grow = (u / (u - 1.5 * d)).powi(5);
        let smooth = d * d * ((axx + ayy).abs() / 24.0 + (axx.abs() + ayy.abs()) / 8.0) * grow;
        let zp = (1.0 + (1.0 + 4.0 / (u * u)).sqrt()) / 2.0 * u;
        // Stretch of the lens map at the major image z+ and at the minor one, |z-| = 1/|z+|.
        let stretch = 1.0 / (1.0 - 1.0 / (zp * zp)).abs() + 1.0 / (1.0 - zp * zp).abs();
        let cells = 4.0 * (4.0 * d * stretch / h + 2.0);
        let sigma = (cells / 12.0).sqrt() / RAYS;
        let err = (s.magnification - paczynski(u)).abs();
        assert!(
            err <= smooth + 6.0 * sigma,
            "({x}, {y}): {} vs {}",
            s.magnification,
            paczynski(u)
        );
        worst = worst.max(err / (smooth + 6.0 * sigma));
    }
    eprintln!("point reads: worst error / allowance {worst:.2}");
    assert!(
        curve
            .samples
            .iter()
            .filter(|s| s.method == Method::Bilinear)
            .count()
            > 200
    );
}
