//! Ray-shooting throughput: the engine against a plain single-threaded scalar loop, in one run.
//!
//! Binary s = 1, q = 1e-3, window 4 theta_E centred on the origin, 1000^2 pixels. Throughput is
//! counted in lattice rays of the whole shooting region per second for every variant, so the
//! ratios are map-for-map speed-ups (the engine traces fewer rays thanks to block skipping and
//! the mirror symmetry, and traces each faster).
//!
//! Run: `cargo bench --bench rays`

use causeway::engine::{ray_budget, shooting_radius, Engine, RayShooting};
use causeway::lens::LensSystem;
use causeway::map::Window;
use criterion::{criterion_group, criterion_main, Criterion, Throughput};
use num_complex::Complex64;

const RAYS_PER_PIXEL: f64 = 10.0;

/// The baseline: every lattice point of the shooting square, complex arithmetic, one thread.
fn plain_loop(lens: &LensSystem, window: &Window, rays: f64) -> Vec<u32> {
    let n = window.pixels;
    let h = window.pixel_size() / rays.sqrt();
    let r = shooting_radius(lens, window);
    let k = (r / h).ceil() as i64;
    let (x0, y0) = window.origin();
    let mut hist = vec![0u32; n * n];
    for j in -k..k {
        for i in -k..k {
            let z = Complex64::new((i as f64 + 0.5) * h, (j as f64 + 0.5) * h);
            let zeta = lens.source_position(z);
            let fx = (zeta.re - x0) / window.pixel_size();
            let fy = (zeta.im - y0) / window.pixel_size();
            if fx >= 0.0 && fx < n as f64 && fy >= 0.0 && fy < n as f64 {
                hist[fy as usize * n + fx as usize] += 1;
            }
        }
    }
    hist
}

fn bench(c: &mut Criterion) {
    let lens = LensSystem::binary(1.0, 1e-3).unwrap();
    let window = Window::new((0.0, 0.0), 4.0, 1000).unwrap();
    let engine = RayShooting::new(RAYS_PER_PIXEL);
    let h = window.pixel_size() / RAYS_PER_PIXEL.sqrt();
    let k = (shooting_radius(&lens, &window) / h).ceil();
    let region = (2.0 * k) * (2.0 * k);

    let (traced, _) = ray_budget(&engine, &lens, &window);
    eprintln!("whole field: traces {traced} of {region} lattice rays");
    // The central caustic sits at the host, x = -s q / (1 + q).
    let zoom = Window::new((-1e-3 / 1.001, 0.0), 0.05, 1000).unwrap();
    let (zt, zr) = ray_budget(&engine, &lens, &zoom);
    eprintln!(
        "0.05 zoom on the central caustic, 1000^2 px: traces {zt} of {zr} region rays ({:.3}%)",
        100.0 * zt as f64 / zr as f64
    );
    let planet = LensSystem::binary(1.25, 1e-3).unwrap();
    let pzoom = Window::new((1.25 - 0.8 - 1.25e-3 / 1.001, 0.0), 0.05, 1000).unwrap();
    let (pt, pr) = ray_budget(&engine, &planet, &pzoom);
    eprintln!(
        "0.05 zoom on the planetary caustic of s = 1.25: traces {pt} of {pr} region rays ({:.3}%)",
        100.0 * pt as f64 / pr as f64
    );

    let mut group = c.benchmark_group("binary_1000px");
    group.sample_size(10);
    group.throughput(Throughput::Elements(region as u64));
    group.bench_function("plain_scalar_loop_1_thread", |b| {
        b.iter(|| plain_loop(&lens, &window, RAYS_PER_PIXEL))
    });
    for threads in [1, 2] {
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .unwrap();
        group.bench_function(format!("engine_{threads}_thread"), |b| {
            b.iter(|| pool.install(|| engine.build(&lens, &window).unwrap()))
        });
    }
    group.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
