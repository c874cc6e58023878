//! Point-source magnification throughput of binary lenses.
//!
//! Random sources (fixed seed) uniformly within 2 theta_E of the centre of mass; binaries
//! s = 1, q = 1 and s = 1.2, q = 1e-3, plus s = 0.8, q = 1e-7 (the small-q end). Variants, all
//! counted in magnifications per second:
//!
//! - `batch_2_threads`: `solve::magnifications` in a two-thread pool (the headline figure; the
//!   goal is at least 1e6/s on two cores);
//! - `solver_1_thread`: one reused `ImageSolver` on one thread (warm starts along the list);
//! - `fresh_1_thread`: `solve::magnification` per source (a new solver each call);
//! - `baseline_lens_map_1_thread`: the baseline, five evaluations of the lens equation and its
//!   Jacobian per source on one thread (the work of merely checking five candidate images,
//!   which any polynomial-based solver must do at least once).
//!
//! Before criterion runs, a quick table prints each variant's rate and its ratio to the
//! baseline measured in the same run.
//!
//! Run: `cargo bench --bench solve`

use causeway::lens::LensSystem;
use causeway::solve::{self, ImageSolver};
use criterion::{criterion_group, criterion_main, BatchSize, Criterion, Throughput};
use num_complex::Complex64;
use std::hint::black_box;
use std::time::Instant;

const SOURCES: usize = 100_000;

fn sources() -> Vec<Complex64> {
    let mut state = 0x9e37_79b9_7f4a_7c15_u64;
    let mut uniform = move || {
        state ^= state << 13;
        state ^= state >> 7;
        state ^= state << 17;
        (state >> 11) as f64 / (1u64 << 53) as f64
    };
    (0..SOURCES)
        .map(|_| {
            let r = 2.0 * uniform().sqrt();
            Complex64::from_polar(r, std::f64::consts::TAU * uniform())
        })
        .collect()
}

fn baseline(lens: &LensSystem, src: &[Complex64]) -> f64 {
    let mut acc = 0.0;
    for &z in src {
        for k in 0..5 {
            let w = z + Complex64::new(0.1 * k as f64, 0.05);
            acc += lens.source_position(w).re + lens.jacobian_determinant(w);
        }
    }
    acc
}

fn solver_loop(lens: &LensSystem, src: &[Complex64]) -> f64 {
    let mut s = ImageSolver::new(lens).unwrap();
    src.iter().map(|&z| s.magnification(z).unwrap()).sum()
}

fn fresh_loop(lens: &LensSystem, src: &[Complex64]) -> f64 {
    src.iter()
        .map(|&z| solve::magnification(lens, z).unwrap())
        .sum()
}

fn rate(f: impl Fn() -> f64, n: usize) -> f64 {
    // Best of five: the machine may be shared.
    (0..5)
        .map(|_| {
            let t = Instant::now();
            black_box(f());
            n as f64 / t.elapsed().as_secs_f64()
        })
        .fold(0.0, f64::max)
}

fn bench(c: &mut Criterion) {
    let src = sources();
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(2)
        .build()
        .unwrap();
    let lenses = [(1.0, 1.0), (1.2, 1e-3), (0.8, 1e-7)];
    eprintln!("magnifications per second (best of 5), ratio to the lens-map baseline:");
    for &(s, q) in &lenses {
        let lens = LensSystem::binary(s, q).unwrap();
        let base = rate(|| baseline(&lens, &src), src.len());
        let batch = rate(
            || pool.install(|| solve::magnifications(&lens, &src).unwrap().iter().sum()),
            src.len(),
        );
        let one = rate(|| solver_loop(&lens, &src), src.len());
        let fresh = rate(|| fresh_loop(&lens, &src[..SOURCES / 10]), SOURCES / 10);
        eprintln!(
            "  s={s} q={q:e}: batch 2 threads {batch:.3e}/s ({:.3}x), solver 1 thread {one:.3e}/s \
             ({:.3}x), fresh 1 thread {fresh:.3e}/s ({:.3}x), baseline {base:.3e}/s",
            batch / base,
            one / base,
            fresh / base
        );
    }
    for &(s, q) in &lenses {
        let lens = LensSystem::binary(s, q).unwrap();
        let mut g = c.benchmark_group(format!("binary s={s} q={q:e}"));
        g.throughput(Throughput::Elements(src.len() as u64));
        g.sample_size(10);
        g.bench_function("batch_2_threads", |b| {
            b.iter(|| pool.install(|| solve::magnifications(&lens, &src).unwrap()))
        });
        g.bench_function("solver_1_thread", |b| b.iter(|| solver_loop(&lens, &src)));
        g.bench_function("baseline_lens_map_1_thread", |b| {
            b.iter(|| baseline(&lens, &src))
        });
        g.finish();
        let mut g = c.benchmark_group(format!("binary s={s} q={q:e} fresh"));
        let few = &src[..SOURCES / 10];
        g.throughput(Throughput::Elements(few.len() as u64));
        g.sample_size(10);
        g.bench_function("fresh_1_thread", |b| {
            b.iter_batched(|| few, |f| fresh_loop(&lens, f), BatchSize::SmallInput)
        });
        g.finish();
    }
}

criterion_group!(benches, bench);
criterion_main!(benches);
