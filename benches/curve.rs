//! Finite-source light-curve throughput at rho = 10 pixels, one thread, in points per second.
//!
//! - `direct_uniform`: exact overlap weights (interior pixels summed, rim pixels in closed form),
//!   against `baseline_every_pixel_overlap`, the same read computing the closed-form overlap for
//!   every pixel of the disk's bounding square;
//! - `direct_linear_ld`: the same for a linear limb-darkened source (a sum of uniform disks);
//! - `convolved_read`: bilinear reads of the pre-convolved map (the one-time FFT convolution is
//!   timed separately as `convolve_map`).
//!
//! - `preconvolve_three_rhos_1000px`: the search's readers for one map, the pre-convolutions at
//!   the three default trial rho (1e-3, 2e-3, 4e-3 on a window of 0.18: 5.6, 11 and 22 pixels),
//!   against `baseline_full_complex`, the former route of three full complex 2-D FFTs per
//!   profile; `new_each` is [`Preconvolved::new`] per profile (a fresh half spectrum each),
//!   `shared_spectrum` one [`MapSpectrum`] for all three;
//! - `preconvolve_route_1000px`: one convolution from an already computed spectrum, summed
//!   directly or through the FFT, at kernel half-widths 1 to 5 pixels: where they cross sets
//!   [`causeway::curve::DIRECT_MARGIN`].
//!
//! Map: binary s = 1, q = 0.1, 1000 x 1000 pixels over 2 theta_E (values do not change speed).
//!
//! - `crossing_2000_tol_1e-3`: a 2000-point crossing of the planetary caustic of s = 1.25,
//!   q = 2e-3 (uniform rho = 0.004, from (0.40, -0.02) to (0.50, 0.02)) at tolerance 1e-3:
//!   `map_with_fallback` reads a prebuilt polygon-mapped map (20 pixels per rho, the density
//!   of `map --accuracy 1e-4`) with error estimates and recomputes by contour integration
//!   every value beyond the tolerance; `contour_alone` is the baseline, contour integration of
//!   every point at 1e-3; `map_reads_alone` is the map's part, every point read with its
//!   estimate and none recomputed; `map_build` builds the map. The setup checks every value of
//!   the map curve against contour integration at 1e-5 and prints the map's build time and
//!   memory, how many values were recomputed (and how many of those the map had truly beyond
//!   the tolerance, or beyond a quarter of it), the worst error over the tolerance and the map
//!   reads' median estimate over actual error.
//!
//! Run: `cargo bench --bench curve`

use causeway::contour;
use causeway::curve::{
    DirectReader, Evaluation, MapSpectrum, Method, Preconvolved, Route, Sampler,
};
use causeway::engine::accuracy::engine_for;
use causeway::engine::{Engine, RayShooting};
use causeway::lens::LensSystem;
use causeway::map::{MagnificationMap, Window};
use causeway::source::{disk_rect_overlap, LimbDarkening, SourceProfile};
use criterion::{criterion_group, criterion_main, Criterion, Throughput};
use num_complex::Complex64;
use std::hint::black_box;
use std::time::Instant;

const POINTS: usize = 20_000;

/// Uniform-disk read computing the overlap of every pixel of the bounding square.
fn baseline(map: &MagnificationMap, rho: f64, x: f64, y: f64) -> f64 {
    let w = &map.window;
    let d = w.pixel_size();
    let (x0, y0) = w.origin();
    let (u, v, r) = ((x - x0) / d, (y - y0) / d, rho / d);
    let mut sum = 0.0;
    for iy in (v - r).floor() as usize..=(v + r).floor() as usize {
        for ix in (u - r).floor() as usize..=(u + r).floor() as usize {
            let (a, b) = (ix as f64, iy as f64);
            sum += disk_rect_overlap(u, v, r, a, a + 1.0, b, b + 1.0) * map.data[[iy, ix]] as f64;
        }
    }
    sum / (std::f64::consts::PI * r * r)
}

fn points() -> Vec<(f64, f64)> {
    let mut state = 12345u64;
    let mut next = || {
        state = state
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        -0.9 + 1.8 * ((state >> 11) as f64 / (1u64 << 53) as f64)
    };
    (0..POINTS).map(|_| (next(), next())).collect()
}

fn bench(c: &mut Criterion) {
    let lens = LensSystem::binary(1.0, 0.1).unwrap();
    let window = Window::new((0.0, 0.0), 2.0, 1000).unwrap();
    let map = RayShooting::new(1.0).build(&lens, &window).unwrap();
    let rho = 10.0 * window.pixel_size();
    let uniform = SourceProfile::uniform(rho).unwrap();
    let linear = SourceProfile::new(rho, LimbDarkening::Linear { u: 0.6 }).unwrap();
    let pts = points();
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(1)
        .build()
        .unwrap();

    let mut group = c.benchmark_group("curve_rho_10px");
    group.sample_size(10);
    group.throughput(Throughput::Elements(POINTS as u64));
    group.bench_function("baseline_every_pixel_overlap", |b| {
        b.iter(|| {
            pts.iter()
                .map(|&(x, y)| baseline(&map, rho, x, y))
                .sum::<f64>()
        })
    });
    let direct = DirectReader::new(&map, &uniform);
    group.bench_function("direct_uniform", |b| {
        b.iter(|| {
            pts.iter()
                .map(|&(x, y)| direct.read(x, y).unwrap())
                .sum::<f64>()
        })
    });
    let direct_ld = DirectReader::new(&map, &linear);
    group.bench_function("direct_linear_ld", |b| {
        b.iter(|| {
            pts.iter()
                .map(|&(x, y)| direct_ld.read(x, y).unwrap())
                .sum::<f64>()
        })
    });
    let conv = Preconvolved::new(&map, &uniform).unwrap();
    group.bench_function("convolved_read", |b| {
        b.iter(|| {
            pts.iter()
                .map(|&(x, y)| conv.read(x, y).unwrap())
                .sum::<f64>()
        })
    });
    group.bench_function("sampler_auto_1_thread", |b| {
        b.iter(|| {
            pool.install(|| {
                Sampler::new(uniform)
                    .map(&map)
                    .evaluation(Evaluation::Auto)
                    .sample(&pts)
                    .unwrap()
            })
        })
    });
    group.finish();

    let mut once = c.benchmark_group("convolve_map_1000px");
    once.sample_size(10);
    for (name, profile) in [("uniform", uniform), ("linear_ld", linear)] {
        once.bench_function(name, |b| {
            b.iter(|| pool.install(|| black_box(Preconvolved::new(&map, &profile).unwrap())))
        });
    }
    once.finish();

    // The search's windows are narrower: the same pixel values on a window of 0.18 put the
    // default trial rho at 5.6 to 22 pixels (pixel values do not change speed).
    let narrow = MagnificationMap {
        window: Window::new((0.0, 0.0), 0.18, 1000).unwrap(),
        ..map.clone()
    };
    let profiles: Vec<SourceProfile> = [1e-3, 2e-3, 4e-3]
        .iter()
        .map(|&rho| SourceProfile::uniform(rho).unwrap())
        .collect();
    let mut readers = c.benchmark_group("preconvolve_three_rhos_1000px");
    readers.sample_size(10);
    let each = |f: &(dyn Fn(&SourceProfile) -> Preconvolved + Sync)| {
        pool.install(|| black_box(profiles.iter().map(f).collect::<Vec<_>>()))
    };
    readers.bench_function("baseline_full_complex", |b| {
        b.iter(|| each(&|p| Preconvolved::full_complex_baseline(&narrow, p).unwrap()))
    });
    readers.bench_function("new_each", |b| {
        b.iter(|| each(&|p| Preconvolved::new(&narrow, p).unwrap()))
    });
    readers.bench_function("shared_spectrum", |b| {
        b.iter(|| {
            let spectrum = MapSpectrum::new(&narrow);
            each(&|p| Preconvolved::from_spectrum(&spectrum, p).unwrap())
        })
    });
    readers.finish();

    let spectrum = MapSpectrum::new(&map);
    let d = window.pixel_size();
    // Warm the shared transform, so only the per-profile work is timed.
    Preconvolved::with_route(&spectrum, &uniform, Route::Fourier).unwrap();
    let mut route = c.benchmark_group("preconvolve_route_1000px");
    route.sample_size(10);
    for margin in 1..=5 {
        // Radius margin - 0.6 pixels gives half-width ceil(r + 1/2) = margin.
        let profile = SourceProfile::uniform((margin as f64 - 0.6) * d).unwrap();
        for (name, how) in [("direct", Route::Direct), ("fourier", Route::Fourier)] {
            route.bench_function(format!("{name}_margin_{margin}"), |b| {
                b.iter(|| {
                    pool.install(|| {
                        let conv = Preconvolved::with_route(&spectrum, &profile, how).unwrap();
                        assert_eq!(conv.margin(), margin);
                        black_box(conv)
                    })
                })
            });
        }
    }
    route.finish();
}

/// The caustic crossing at tolerance 1e-3: map with fallback against contour integration alone.
fn crossing(c: &mut Criterion) {
    let lens = LensSystem::binary(1.25, 2e-3).unwrap();
    let profile = SourceProfile::uniform(0.004).unwrap();
    let tol = 1e-3;
    let points: Vec<(f64, f64)> = (0..2000)
        .map(|k| {
            let t = k as f64 / 1999.0;
            (0.40 + 0.1 * t, -0.02 + 0.04 * t)
        })
        .collect();
    let d = profile.rho / 20.0;
    let pixels = ((0.1 + 2.0 * (profile.rho + 4.0 * d)) / d).ceil() as usize;
    let window = Window::new((0.45, 0.0), pixels as f64 * d, pixels).unwrap();
    // The map a user would prebuild: polygon mapping at the density `map --accuracy 1e-4`
    // picks (at the default 1e-3 the cells exceed the pixels, and the 2 x 2 binning of the
    // estimate cannot see errors on the cells' scale: scratch runs found hundreds of reads
    // beyond their stated error).
    let (engine, _) = engine_for(None, None, &lens, &window, 1e-4, true).unwrap();
    let started = Instant::now();
    let map = engine.build(&lens, &window).unwrap();
    let build = started.elapsed().as_secs_f64();
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(1)
        .build()
        .unwrap();
    let sample = || {
        Sampler::new(profile)
            .map(&map)
            .lens(&lens)
            .fallback(&lens)
            .tol(tol)
            .sample(&points)
            .unwrap()
    };
    let reads = || Sampler::new(profile).map(&map).sample(&points).unwrap();
    let centers: Vec<Complex64> = points.iter().map(|&(x, y)| Complex64::new(x, y)).collect();
    // Every value within the tolerance of contour integration at 1e-5.
    let curve = sample();
    let reference = contour::magnifications(&lens, &centers, &profile, 1e-5).unwrap();
    let mut worst: f64 = 0.0;
    for (s, r) in curve.samples.iter().zip(&reference) {
        let off = (s.magnification / r.magnification - 1.0).abs();
        assert!(off <= tol, "({}, {}): {off:e} off", s.x, s.y);
        worst = worst.max(off);
    }
    let recomputed = curve
        .samples
        .iter()
        .filter(|s| s.method == Method::Contour)
        .count();
    // The map reads' estimates against their actual errors (without the fallback).
    let raw = reads();
    let beyond = |part: f64| {
        raw.samples
            .iter()
            .zip(&curve.samples)
            .zip(&reference)
            .filter(|((s, c), r)| {
                c.method == Method::Contour
                    && (s.magnification - r.magnification).abs() > part * tol * r.magnification
            })
            .count()
    };
    let mut ratios: Vec<f64> = raw
        .samples
        .iter()
        .zip(&reference)
        .map(|(s, r)| s.error / (s.magnification - r.magnification).abs().max(r.error))
        .collect();
    ratios.sort_by(f64::total_cmp);
    eprintln!(
        "crossing: {pixels} x {pixels} {} map (density {:.3}, {:.1} MiB) built in {build:.2} s; \
         {recomputed} of {} values recomputed by contour integration ({} of them beyond the \
         tolerance as read from the map, {} beyond a quarter of it); worst error / tol {:.2} \
         against contour integration at 1e-5; map reads' median estimate / actual {:.1}",
        engine.name(),
        engine.density(),
        (4 * map.data.len()) as f64 / (1u64 << 20) as f64,
        points.len(),
        beyond(1.0),
        beyond(0.25),
        worst / tol,
        ratios[ratios.len() / 2]
    );
    let mut group = c.benchmark_group("crossing_2000_tol_1e-3");
    group.sample_size(10);
    group.throughput(Throughput::Elements(points.len() as u64));
    group.bench_function("map_with_fallback", |b| {
        b.iter(|| pool.install(|| black_box(sample())))
    });
    group.bench_function("map_reads_alone", |b| {
        b.iter(|| pool.install(|| black_box(reads())))
    });
    group.bench_function("contour_alone", |b| {
        b.iter(|| {
            pool.install(|| black_box(contour::magnifications(&lens, &centers, &profile, tol)))
        })
    });
    group.bench_function("map_build", |b| {
        b.iter(|| pool.install(|| black_box(engine.build(&lens, &window).unwrap())))
    });
    group.finish();
}

criterion_group!(benches, bench, crossing);
criterion_main!(benches);
