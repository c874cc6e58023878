//! Time to a 1000^2 binary map (s = 1, q = 1e-3, window 4 theta_E) at a median pixel error of
//! 1e-3: polygon mapping at the density `--accuracy 1e-3` picks, against ray shooting at the
//! sparsest density (of a few tried) that matches the polygon map's measured error, on 2 cores,
//! in one run. Before timing, the bench
//! measures both maps' median error on 2000 pixels away from caustics against the exact
//! point-source pixel means (8 x 8 Gauss-Legendre through the image solver) and prints them.
//! The engines' own work is timed (`Engine::trace`); the accuracy certificate every build adds
//! (`map::certificate`) is timed apart on the polygon map.
//!
//! Run: `cargo bench --bench engines`

use causeway::engine::accuracy::{choose, rays_for};
use causeway::engine::by_name;
use causeway::lens::LensSystem;
use causeway::map::certificate::Certificate;
use causeway::map::reference::{sample_pixels, smooth_pixel_mean};
use causeway::map::{MagnificationMap, Window};
use causeway::solve::ImageSolver;
use criterion::{criterion_group, criterion_main, Criterion};
use rayon::prelude::*;

const TARGET: f64 = 1e-3;

/// Whether this is a measuring run (`cargo bench`), not the one-pass check of `cargo test`,
/// which runs every step once on a 200^2 map.
fn measuring() -> bool {
    std::env::args().any(|a| a == "--bench")
}

fn median_error(map: &MagnificationMap, lens: &LensSystem) -> f64 {
    let w = map.window;
    let solver = ImageSolver::new(lens).unwrap();
    let mut errors: Vec<f64> = sample_pixels(&w, 2000, 777)
        .par_iter()
        .map_with(solver, |s, &(ix, iy)| {
            let exact = smooth_pixel_mean(s, &w, ix, iy).unwrap()?;
            Some((map.data[[iy, ix]] as f64 / exact - 1.0).abs())
        })
        .flatten()
        .collect();
    errors.sort_by(f64::total_cmp);
    errors[errors.len() / 2]
}

fn bench(c: &mut Criterion) {
    let lens = LensSystem::binary(1.0, 1e-3).unwrap();
    let pixels = if measuring() { 1000 } else { 200 };
    let window = Window::new((0.0, 0.0), 4.0, pixels).unwrap();
    let (name, cells) = choose(&lens, &window, TARGET).unwrap();
    let polygon = by_name(name, cells).unwrap();
    let polygon_error = median_error(&polygon.build(&lens, &window).unwrap(), &lens);
    eprintln!("polygon at {cells:.4} cells per pixel: median pixel error {polygon_error:.2e}");
    // The sparsest ray density (of a few around its rule) whose error is no worse.
    let mut rays = None;
    for factor in [0.5, 0.6, 0.7, 0.85, 1.0, 1.3] {
        let candidate = by_name("rays", factor * rays_for(polygon_error)).unwrap();
        let error = median_error(&candidate.build(&lens, &window).unwrap(), &lens);
        eprintln!(
            "rays at {:.0} per pixel: median pixel error {error:.2e}",
            candidate.density()
        );
        rays = Some(candidate);
        if error <= polygon_error {
            break;
        }
    }
    let rays = rays.unwrap();
    let mut group = c.benchmark_group("binary_1000px_error_1e-3");
    group.sample_size(10);
    // The engines' own work (`trace`); the certificate every build adds is timed apart, on
    // the polygon map, as a fraction of that build.
    group.bench_function("polygon", |b| {
        b.iter(|| polygon.trace(&lens, &window, &()).unwrap())
    });
    group.bench_function("rays", |b| {
        b.iter(|| rays.trace(&lens, &window, &()).unwrap())
    });
    let data = polygon.trace(&lens, &window, &()).unwrap().data;
    group.bench_function("certificate", |b| {
        b.iter(|| Certificate::measure(&lens, &window, &data).unwrap())
    });
    group.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
