//! A refined map against a uniform map at the fine resolution, at equal accuracy near the
//! caustic, for the two caustics of s = 1.25, q = 2e-3: the central one (window 0.12 theta_E, a
//! 240^2 base with tiles 4 times finer against a uniform 960^2 map) and the planetary one
//! (window 0.24, 500^2 against 2000^2), both maps by the polygon engine at the density
//! `--accuracy 1e-3` picks for the base pixels, per pixel (as `map --refine` builds them), on 2
//! cores, in one run.
//!
//! Printed before timing: the pixels each holds (bytes, and the ratio), the engines' peak
//! working memory of the largest single build (base, tile or the uniform map), and the
//! accuracy of curves read from each near the caustic (uniform sources of 3 base pixels on
//! trajectories across the caustic, against contour integration at 1e-7): median and
//! largest relative error, and how many reads each took from its finest pixels. Timed: the
//! whole build of each (base and tiles, `RefinedMap::refine`; `Engine::build_certified`; no
//! certificates).
//!
//! Run: `cargo bench --bench tiles`

use causeway::contour::ContourSolver;
use causeway::curve::{Evaluation, Sampler};
use causeway::engine::accuracy::choose;
use causeway::engine::by_name;
use causeway::lens::LensSystem;
use causeway::map::tiles::{RefinedMap, Refinement};
use causeway::map::Window;
use causeway::source::SourceProfile;
use criterion::{criterion_group, criterion_main, Criterion};
use num_complex::Complex64;
use std::time::Instant;

const FACTOR: usize = 4;

/// Whether this is a measuring run (`cargo bench`), not the one-pass check of `cargo test`,
/// which runs every step once on bases a quarter as wide, at an accuracy of 1e-2, with a tenth
/// of the points.
fn measuring() -> bool {
    std::env::args().any(|a| a == "--bench")
}

/// Median and largest relative error of `points` read by `sampler` against contour
/// integration.
fn errors(
    sampler: Sampler,
    lens: &LensSystem,
    profile: &SourceProfile,
    points: &[(f64, f64)],
) -> (f64, f64) {
    let curve = sampler.sample(points).unwrap();
    let solver = ContourSolver::new(lens, 1e-7).unwrap();
    let mut e: Vec<f64> = curve
        .samples
        .iter()
        .map(|s| {
            let exact = solver
                .clone()
                .magnification(Complex64::new(s.x, s.y), profile)
                .unwrap()
                .magnification;
            (s.magnification / exact - 1.0).abs()
        })
        .collect();
    e.sort_by(f64::total_cmp);
    (e[e.len() / 2], e[e.len() - 1])
}

/// The smallest time of `runs` calls of `f`, in seconds.
fn seconds(runs: usize, mut f: impl FnMut()) -> f64 {
    (0..runs)
        .map(|_| {
            let t = Instant::now();
            f();
            t.elapsed().as_secs_f64()
        })
        .fold(f64::INFINITY, f64::min)
}

/// One case: a caustic's window and the trajectories across it.
struct Case {
    name: &'static str,
    center: (f64, f64),
    width: f64,
    base_pixels: usize,
    /// Source positions: `(from, to)` segments, 200 points each (20 in the test pass).
    segments: Vec<((f64, f64), (f64, f64))>,
}

fn cases() -> Vec<Case> {
    let scale = if measuring() { 1 } else { 4 };
    vec![
        Case {
            name: "central",
            center: (0.02, 0.0),
            width: 0.12,
            base_pixels: 240 / scale,
            segments: [-0.004, -0.002, 0.0005, 0.002, 0.004]
                .iter()
                .map(|&y| ((-0.01, y), (0.05, y)))
                .collect(),
        },
        Case {
            name: "planetary",
            center: (0.427, 0.0),
            width: 0.24,
            base_pixels: 500 / scale,
            segments: [0.36, 0.40, 0.447, 0.49]
                .iter()
                .map(|&x| ((x, -0.06), (x, 0.06)))
                .collect(),
        },
    ]
}

fn bench(c: &mut Criterion) {
    let lens = LensSystem::binary(1.25, 2e-3).unwrap();
    let mut group = c.benchmark_group("refined_against_uniform_fine");
    group.sample_size(10);
    for case in cases() {
        let window = Window::new(case.center, case.width, case.base_pixels).unwrap();
        let fine_window =
            Window::new(window.center, window.width, FACTOR * case.base_pixels).unwrap();
        // As `map --refine 4` builds them: base and tiles at the density --accuracy 1e-3 picks
        // for the base pixels (per pixel), and the uniform map at the same.
        let target = if measuring() { 1e-3 } else { 1e-2 };
        let (name, density) = choose(&lens, &window, target).unwrap();
        let engine = by_name(name, density).unwrap();
        let r = Refinement::new(FACTOR).unwrap();
        let build_refined =
            || RefinedMap::build(engine.as_ref(), &lens, &window, Some(r), &(), false).unwrap();
        let build_uniform = || {
            engine
                .build_certified(&lens, &fine_window, &(), false)
                .unwrap()
        };
        let refined = build_refined();
        let uniform = RefinedMap::plain(build_uniform());
        let label = format!("{} {}^2 base", case.name, case.base_pixels);
        eprintln!(
            "{label}: {name} at {density:.4} per pixel; {} tiles over {:.1}% of the window",
            refined.tiles.len(),
            100.0 * refined.covered_fraction()
        );
        let (held_refined, held_uniform) = (refined.pixel_bytes(), uniform.pixel_bytes());
        let tile = r.tile_window(&window, (0, 0)).unwrap();
        let peak_refined = engine
            .memory_bytes(&lens, &window)
            .max(engine.memory_bytes(&lens, &tile));
        let peak_uniform = engine.memory_bytes(&lens, &fine_window);
        eprintln!(
            "{label}: pixels held: refined {held_refined} bytes, uniform {held_uniform} bytes \
             (ratio {:.3}); peak build memory: refined {peak_refined}, uniform {peak_uniform} \
             (ratio {:.3})",
            held_refined as f64 / held_uniform as f64,
            peak_refined as f64 / peak_uniform as f64
        );

        let profile = SourceProfile::uniform(3.0 * window.pixel_size()).unwrap();
        let per_segment = if measuring() { 200 } else { 20 };
        let points: Vec<(f64, f64)> = case
            .segments
            .iter()
            .flat_map(|&((x0, y0), (x1, y1))| {
                (0..per_segment).map(move |k| {
                    let t = k as f64 / (per_segment - 1) as f64;
                    (x0 + t * (x1 - x0), y0 + t * (y1 - y0))
                })
            })
            .collect();
        let sampler = Sampler::new(profile).evaluation(Evaluation::Direct);
        let served = points
            .iter()
            .filter(|p| refined.tile_index_at(p.0, p.1).is_some())
            .count();
        let (rm, rx) = errors(sampler.refined(&refined), &lens, &profile, &points);
        let (um, ux) = errors(sampler.map(&uniform.base), &lens, &profile, &points);
        let (bm, bx) = errors(sampler.map(&refined.base), &lens, &profile, &points);
        eprintln!(
            "{label}: {} points across the caustic, rho = 3 base pixels, {served} centred in \
             refined blocks; relative error median / largest: refined {rm:.2e} / {rx:.2e}, \
             uniform fine {um:.2e} / {ux:.2e}, base alone {bm:.2e} / {bx:.2e}",
            points.len()
        );

        let runs = if measuring() { 5 } else { 1 };
        let (t_refined, t_uniform) = (
            seconds(runs, || drop(build_refined())),
            seconds(runs, || drop(build_uniform())),
        );
        eprintln!(
            "{label}: build (best of {runs}): refined {t_refined:.3} s, uniform {t_uniform:.3} s \
             (time ratio refined / uniform {:.3})",
            t_refined / t_uniform
        );
        group.bench_function(format!("{}_refined", case.name), |b| b.iter(build_refined));
        group.bench_function(format!("{}_uniform", case.name), |b| b.iter(build_uniform));
    }
    group.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
