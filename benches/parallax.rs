//! Cost of the exact magnifications with parallax and lens orbital motion.
//!
//! Model: an invented planetary event toward the bulge (s = 1.2, q = 4e-3, rho = 2e-3,
//! u0 = 0.1, tE = 60 d), 400 times over 200 days, tolerance 1e-4, the machine's threads.
//! Measured: the same curve with parallax (`pi_E = (0.3, -0.1)`), with parallax and a turning
//! binary (`dalpha/dt = 0.5` rad/yr: one lens), and with a separation that changes
//! (`ds/dt = 0.1`/yr: a lens and its caustics per time). Baseline in the same run: the static
//! curve, so the ratios read as "static curves per curve".
//!
//! Run: `cargo bench --bench parallax`

use causeway::fit::model::{BinaryModel, LensOrbit, Parallax, Trajectory};
use causeway::parallax::{Geometry, SkyPosition, SHORT_JD_ORIGIN};
use causeway::source::LimbDarkening;
use criterion::{criterion_group, criterion_main, Criterion, Throughput};
use std::hint::black_box;

fn bench(c: &mut Criterion) {
    let line = Trajectory::straight(8300.0, 0.1, 60.0, 0.5).unwrap();
    let sky = SkyPosition::parse("17:55:00", "-29:30:00").unwrap();
    let parallax = Parallax {
        pi_en: 0.3,
        pi_ee: -0.1,
        geometry: Geometry::new(sky, 8300.0, SHORT_JD_ORIGIN).unwrap(),
    };
    let orbit = |ds_dt: f64| LensOrbit {
        ds_dt,
        dalpha_dt: 0.5,
        t0_kep: 8300.0,
    };
    let with = |tr: Trajectory| BinaryModel {
        s: 1.2,
        q: 4e-3,
        rho: 2e-3,
        trajectory: tr,
    };
    let models = [
        ("baseline: static", with(line)),
        (
            "parallax",
            with(line.with_parallax(Some(parallax)).unwrap()),
        ),
        (
            "parallax, turning binary",
            with(
                line.with_parallax(Some(parallax))
                    .unwrap()
                    .with_orbit(Some(orbit(0.0)))
                    .unwrap(),
            ),
        ),
        (
            "parallax, changing separation",
            with(
                line.with_parallax(Some(parallax))
                    .unwrap()
                    .with_orbit(Some(orbit(0.1)))
                    .unwrap(),
            ),
        ),
    ];
    let times = causeway::curve::time_range(8200.0, 8400.0, 400).unwrap();
    let mut group = c.benchmark_group("exact curve, 400 points");
    group.throughput(Throughput::Elements(times.len() as u64));
    group.sample_size(10);
    for (name, model) in models {
        group.bench_function(name, |b| {
            b.iter(|| {
                black_box(
                    model
                        .magnifications(&times, LimbDarkening::Uniform, 1e-4)
                        .unwrap(),
                )
            })
        });
    }
    group.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
