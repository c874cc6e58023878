//! Contour-integration cost per source point at tolerance 1e-4, rho = 0.01, one thread.
//!
//! Lens: equal-mass binary s = 1 (one resonant caustic). "caustic": 64 source centres spread
//! over +-2 rho across a fold of the caustic (the fold found by bisection on the image count
//! along x = 0.1); "far": 64 centres between 1.5 and 2 Einstein radii from the centre of mass,
//! with the small-source shortcut allowed and with contours forced. Baseline in the same run:
//! the point-source magnification at the same centres (the exact solver alone), so the ratios
//! read as "point-source solves per finite-source point".
//!
//! Besides criterion's figures (the mean over the 64 points), the setup prints the median over
//! the points of the time per point, each point timed `REPEATS` times and its fastest time kept
//! (so that a busy machine's pauses do not count), and the same for a point-source solve of the
//! same point from fresh initial guesses, with their ratio.
//!
//! Run: `cargo bench --bench contour` (pin to one core with `taskset -c 0` for the figures of
//! README and DEVELOPERS.md)

use causeway::contour::ContourSolver;
use causeway::lens::LensSystem;
use causeway::solve::ImageSolver;
use causeway::source::SourceProfile;
use criterion::{criterion_group, criterion_main, Criterion, Throughput};
use num_complex::Complex64;
use std::hint::black_box;
use std::time::Instant;

const RHO: f64 = 0.01;
const TOL: f64 = 1e-4;

/// y of the fold crossed by the line x = 0.1 going up from y = 0 (5 images below, 3 above).
fn fold_crossing(lens: &LensSystem) -> f64 {
    let mut solver = ImageSolver::new(lens).unwrap();
    let mut count = |y: f64| solver.images(Complex64::new(0.1, y)).unwrap().len();
    let (mut lo, mut hi) = (0.0, 1.0);
    assert!(count(lo) == 5 && count(hi) == 3);
    for _ in 0..60 {
        let mid = 0.5 * (lo + hi);
        if count(mid) == 5 {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    lo
}

/// Times of one evaluation per repeat.
const REPEATS: usize = 15;

/// Median over `centres` of the fastest of [`REPEATS`] timings of `eval` at each centre, in
/// microseconds.
fn median_time(centres: &[Complex64], mut eval: impl FnMut(Complex64)) -> f64 {
    let mut t: Vec<f64> = centres
        .iter()
        .map(|&c| {
            (0..REPEATS)
                .map(|_| {
                    let start = Instant::now();
                    eval(c);
                    start.elapsed().as_secs_f64() * 1e6
                })
                .fold(f64::INFINITY, f64::min)
        })
        .collect();
    t.sort_by(f64::total_cmp);
    t[t.len() / 2]
}

fn bench(c: &mut Criterion) {
    let lens = LensSystem::binary(1.0, 1.0).unwrap();
    let source = SourceProfile::uniform(RHO).unwrap();
    let y_fold = fold_crossing(&lens);
    let near: Vec<Complex64> = (0..64)
        .map(|k| Complex64::new(0.1, y_fold - 2.0 * RHO + 4.0 * RHO * k as f64 / 63.0))
        .collect();
    let far: Vec<Complex64> = (0..64)
        .map(|k| Complex64::from_polar(1.5 + 0.5 * (k as f64 / 63.0), 0.37 + 0.1 * k as f64))
        .collect();
    let mut contour = ContourSolver::new(&lens, TOL).unwrap();
    let mut forced = ContourSolver::new(&lens, TOL).unwrap().with_shortcut(false);
    let mut point = ImageSolver::new(&lens).unwrap();
    for (name, forced_contours, centres) in [
        ("caustic", false, &near),
        ("far, shortcut allowed", false, &far),
        ("far, contours only", true, &far),
    ] {
        let solver = if forced_contours {
            &mut forced
        } else {
            &mut contour
        };
        let finite = median_time(centres, |c| {
            black_box(solver.magnification(c, &source).unwrap());
        });
        let single = median_time(centres, |c| {
            point.reset();
            black_box(point.magnification(c).unwrap());
        });
        eprintln!(
            "{name}: median time per point {finite:.1} us; point-source solve {single:.2} us \
             (fresh start); ratio {:.0}",
            finite / single
        );
    }

    let mut group = c.benchmark_group("contour rho=0.01 tol=1e-4");
    group.throughput(Throughput::Elements(64));
    group.bench_function("point source (baseline), caustic", |b| {
        b.iter(|| {
            near.iter()
                .map(|&z| point.magnification(z).unwrap())
                .sum::<f64>()
        })
    });
    group.bench_function("caustic", |b| {
        b.iter(|| {
            near.iter()
                .map(|&z| contour.magnification(z, &source).unwrap().magnification)
                .sum::<f64>()
        })
    });
    group.bench_function("point source (baseline), far", |b| {
        b.iter(|| {
            far.iter()
                .map(|&z| point.magnification(z).unwrap())
                .sum::<f64>()
        })
    });
    group.bench_function("far, shortcut allowed", |b| {
        b.iter(|| {
            far.iter()
                .map(|&z| contour.magnification(z, &source).unwrap().magnification)
                .sum::<f64>()
        })
    });
    group.bench_function("far, contours only", |b| {
        b.iter(|| {
            far.iter()
                .map(|&z| forced.magnification(z, &source).unwrap().magnification)
                .sum::<f64>()
        })
    });
    group.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
