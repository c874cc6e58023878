//! Time to a 1000^2 binary map (s = 1, q = 1e-3, window 4 theta_E) at a median pixel error of
//! 1e-3: polygon mapping at the density `--accuracy 1e-3` picks, against ray shooting at the
//! density its own rule gives for that error, on 2 cores, in one run. Before timing, the bench
//! measures both maps' median error on 2000 pixels away from caustics against the exact
//! point-source pixel means (8 x 8 Gauss-Legendre through the image solver) and prints them.
//!
//! Run: `cargo bench --bench engines`

use causeway::engine::accuracy::{choose, rays_for};
use causeway::engine::by_name;
use causeway::lens::LensSystem;
use causeway::map::{MagnificationMap, Window};
use causeway::solve::ImageSolver;
use causeway::source::gauss_legendre;
use criterion::{criterion_group, criterion_main, Criterion};
use num_complex::Complex64;
use rayon::prelude::*;

const TARGET: f64 = 1e-3;

fn median_error(map: &MagnificationMap, lens: &LensSystem) -> f64 {
    let w = map.window;
    let mut state = 777u64;
    let picks: Vec<(usize, usize)> = (0..2000)
        .map(|_| {
            state = state
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            let v = (state >> 20) as usize;
            (v % w.pixels, (v / w.pixels) % w.pixels)
        })
        .collect();
    let solver = ImageSolver::new(lens).unwrap();
    let mean = |solver: &mut ImageSolver, ix: usize, iy: usize, k: usize| {
        let (cx, cy) = w.pixel_center(ix, iy);
        let half = 0.5 * w.pixel_size();
        let rule = gauss_legendre(k);
        let mut sum = 0.0;
        for &(a, wa) in &rule {
            for &(b, wb) in &rule {
                sum += wa
                    * wb
                    * solver
                        .magnification(Complex64::new(cx + half * a, cy + half * b))
                        .unwrap();
            }
        }
        sum / 4.0
    };
    let mut errors: Vec<f64> = picks
        .par_iter()
        .map_with(solver, |s, &(ix, iy)| {
            let (fine, coarse) = (mean(s, ix, iy, 8), mean(s, ix, iy, 4));
            ((fine - coarse).abs() < 1e-7 * fine)
                .then(|| (map.data[[iy, ix]] as f64 / fine - 1.0).abs())
        })
        .flatten()
        .collect();
    errors.sort_by(f64::total_cmp);
    errors[errors.len() / 2]
}

fn bench(c: &mut Criterion) {
    let lens = LensSystem::binary(1.0, 1e-3).unwrap();
    let window = Window::new((0.0, 0.0), 4.0, 1000).unwrap();
    let (name, cells) = choose(&lens, &window, TARGET).unwrap();
    let polygon = by_name(name, cells).unwrap();
    let rays = by_name("rays", rays_for(TARGET)).unwrap();
    for engine in [&polygon, &rays] {
        let map = engine.build(&lens, &window).unwrap();
        eprintln!(
            "{} at density {:.4}: median pixel error {:.2e}",
            engine.name(),
            engine.density(),
            median_error(&map, &lens)
        );
    }
    let mut group = c.benchmark_group("binary_1000px_error_1e-3");
    group.sample_size(10);
    group.bench_function("polygon", |b| {
        b.iter(|| polygon.build(&lens, &window).unwrap())
    });
    group.bench_function("rays", |b| b.iter(|| rays.build(&lens, &window).unwrap()));
    group.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
