//! Cost of the single-lens point-source fit, one thread; and of the refinement's exact chi^2.
//!
//! Single lens. Data: 2000 points of an invented planetary event (s = 1.3, q = 3e-3, rho = 1e-3, u0 = 0.2,
//! tE = 30 d), simulated once with magnitude noise. Measured: `fit_single_lens` on it. Baseline
//! in the same run: one evaluation of the model the fit minimises (Paczynski's curve at every
//! point and the linear fluxes), so the ratio reads as "chi^2 evaluations per fit".
//!
//! Exact chi^2 (what every refinement step costs): the recovery events `wide-1`, `stellar-1`
//! and `single-1` of `fit::simulate::events` (about 3,300 points each, four sites), at the
//! truth, at the refinement's two tolerances (1e-3 for its search stages, 1e-4 for the last),
//! on the machine's threads. Baseline in the same run: the same chi^2 with rho = 0 (one image
//! solve per point), so the ratio reads as "point-source solves per point".
//!
//! Run: `cargo bench --bench fit`

use causeway::fit::fluxes::fit_fluxes;
use causeway::fit::model::{paczynski, BinaryModel, Trajectory};
use causeway::fit::refine::exact_chi2;
use causeway::fit::simulate::events::recovery_events;
use causeway::fit::simulate::Simulation;
use causeway::fit::single::fit_single_lens;
use causeway::source::LimbDarkening;
use criterion::{criterion_group, criterion_main, Criterion, Throughput};
use std::hint::black_box;

fn bench(c: &mut Criterion) {
    let model = BinaryModel {
        s: 1.3,
        q: 3e-3,
        rho: 1e-3,
        trajectory: Trajectory::straight(100.0, 0.2, 30.0, 0.3).unwrap(),
    };
    let times = causeway::curve::time_range(40.0, 160.0, 2000).unwrap();
    let data = rayon::ThreadPoolBuilder::new()
        .num_threads(1)
        .build()
        .unwrap()
        .install(|| Simulation::new(model, LimbDarkening::Uniform).run(&times))
        .unwrap();
    let mut group = c.benchmark_group("single-lens fit, 2000 points");
    group.throughput(Throughput::Elements(data.len() as u64));
    group.bench_function("baseline: one chi2 evaluation", |b| {
        b.iter(|| {
            let a: Vec<f64> = data
                .times
                .iter()
                .map(|&t| paczynski((0.04 + ((t - 100.0) / 30.0f64).powi(2)).sqrt()))
                .collect();
            black_box(fit_fluxes(&data, &a).chi2)
        })
    });
    group.bench_function("fit_single_lens", |b| {
        b.iter(|| black_box(fit_single_lens(std::slice::from_ref(&data)).unwrap().chi2))
    });
    group.finish();

    for event in recovery_events().unwrap() {
        if !["wide-1", "stellar-1", "single-1"].contains(&event.name) {
            continue;
        }
        let data = event.data().unwrap();
        let points: usize = data.iter().map(|d| d.len()).sum();
        let mut group = c.benchmark_group(format!("exact chi2, {}", event.name));
        group.sample_size(20);
        group.throughput(Throughput::Elements(points as u64));
        let point = BinaryModel {
            rho: 0.0,
            ..event.truth
        };
        group.bench_function("baseline: point source", |b| {
            b.iter(|| black_box(exact_chi2(&data, &point, 1e-3).unwrap().0))
        });
        for tol in [1e-3, 1e-4] {
            group.bench_function(format!("tol {tol:e}"), |b| {
                b.iter(|| black_box(exact_chi2(&data, &event.truth, tol).unwrap().0))
            });
        }
        group.finish();
    }
}

criterion_group!(benches, bench);
criterion_main!(benches);
