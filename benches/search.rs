//! The grid search of issue 8: wall time to search a 20 x 20 library of 1000^2 maps with one
//! 2000-point data set on 2 threads, at the default [`GridRule`].
//!
//! Library: s log-spaced over [1.1, 1.6] (20 values), q log-spaced over [1e-4, 1e-2]
//! (20 values), 1000^2 pixels, polygon engine, windows framing the planetary caustic(s)
//! (margin 1.5). It is built once into `target/bench-store` and reused on later runs (the first
//! run builds 400 maps: a few minutes).
//!
//! Data: 2000 points over [-50, 50] d of an invented wide-planet event (s = 1.35, q = 2e-3,
//! rho = 2e-3, u0 = 0.12, tE = 25 d, the source crossing the planetary caustic), simulated
//! once with 0.01 mag noise; the search is seeded by the single-lens fit of these data.
//!
//! Measured:
//! - the whole 400-map search, once, timed with `Instant` (a multi-minute run is too long for
//!   criterion's ten samples): wall time, trajectories and light-curve points per second;
//! - a criterion group on a 2 x 2 sub-library around the true (s, q), with a baseline in the
//!   same run: the same search with every off-map point-source magnification solved exactly
//!   (`interpolation_tol = 0`, so no point is interpolated), and the search with each
//!   point's share of chi^2 capped (`point_cap = 25`: the cap's cost).
//!
//! Set `CAUSEWAY_BENCH_SUB_ONLY=1` to skip the whole-library run.
//!
//! Run: `cargo bench --bench search`

use causeway::fit::model::{BinaryModel, Trajectory};
use causeway::fit::photometry::DataSet;
use causeway::fit::search::{search, GridRule, LibraryMap, MapOutcome, Seed};
use causeway::fit::simulate::Simulation;
use causeway::fit::single::{fit_baseline, BaselineOptions};
use causeway::source::LimbDarkening;
use causeway::store::library::{build, GridPoint, LibrarySpec};
use causeway::store::Store;
use criterion::{criterion_group, criterion_main, Criterion, Throughput};
use std::hint::black_box;
use std::path::Path;
use std::time::{Duration, Instant};

const SPEC: &str = "s = { log = [1.1, 1.6, 20] }\nq = { log = [1e-4, 1e-2, 20] }\npixels = 1000\n\
                    rays = 1\nengine = \"polygon\"\n[window]\nrule = \"planetary\"\n";

const THREADS: usize = 2;

fn pool() -> rayon::ThreadPool {
    rayon::ThreadPoolBuilder::new()
        .num_threads(THREADS)
        .build()
        .unwrap()
}

/// Whether this is a measuring run (`cargo bench`), not the one-pass check of `cargo test`.
fn measuring() -> bool {
    std::env::args().any(|a| a == "--bench")
}

/// Builds the missing maps of `points` into the bench store; returns them in order.
fn built(store: &Store, points: &[GridPoint]) -> Vec<LibraryMap> {
    let started = Instant::now();
    let mut count = 0;
    let summary = pool()
        .install(|| {
            build(store, points, |_, new| {
                if new {
                    count += 1;
                    if count % 20 == 0 {
                        eprintln!("built {count} maps in {:.0?}", started.elapsed());
                    }
                }
            })
        })
        .unwrap();
    if summary.built > 0 {
        eprintln!(
            "library: built {} maps, reused {}, in {:.1?}",
            summary.built,
            summary.skipped,
            started.elapsed()
        );
    }
    points
        .iter()
        .map(|p| LibraryMap {
            s: p.s,
            q: p.q,
            path: store.path_of(&p.key),
        })
        .collect()
}

/// The bench store, the whole library's grid points, and the 2 x 2 of them around the truth
/// (s index 10-11, about 1.35; q index 10-11, about 1.6e-3).
fn library() -> (Store, Vec<GridPoint>, Vec<GridPoint>) {
    let spec = LibrarySpec::parse(SPEC, "bench").unwrap();
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("target/bench-store");
    let store = Store::create(&root).unwrap();
    let points = spec.points().unwrap();
    let ns = spec.s.len();
    let sub = [(10, 10), (11, 10), (10, 11), (11, 11)]
        .iter()
        .map(|&(is, iq)| points[iq * ns + is].clone())
        .collect();
    (store, points, sub)
}

/// The invented event's data set and the single-lens seed fitted to it.
fn event() -> (DataSet, Seed) {
    let model = BinaryModel {
        s: 1.35,
        q: 2e-3,
        rho: 2e-3,
        trajectory: Trajectory::straight(0.0, 0.12, 25.0, std::f64::consts::TAU - 0.2).unwrap(),
    };
    let times = causeway::curve::time_range(-50.0, 50.0, 2000).unwrap();
    let data = pool()
        .install(|| Simulation::new(model, LimbDarkening::Uniform).run(&times))
        .unwrap();
    let sets = std::slice::from_ref(&data);
    let seed = Seed::of_baseline(
        &fit_baseline(sets, &BaselineOptions::default()).unwrap(),
        sets,
    );
    (data, seed)
}

fn run(data: &DataSet, seed: &Seed, maps: &[LibraryMap], rule: &GridRule) -> Vec<MapOutcome> {
    pool()
        .install(|| search(std::slice::from_ref(data), seed, maps, rule, &|| {}))
        .unwrap()
}

fn totals(outcomes: &[MapOutcome]) -> (u64, u64) {
    outcomes
        .iter()
        .fold((0, 0), |(t, p), o| (t + o.trajectories, p + o.points))
}

fn bench(c: &mut Criterion) {
    let (store, points, sub_points) = library();
    let (data, seed) = event();
    let rule = GridRule::default();
    eprintln!(
        "seed t0 {:.4}, u0 {:.5} (range {:.5} to {:.5}), tE {:.3}; rule {rule:?}; {THREADS} threads",
        seed.t0,
        seed.u0,
        seed.u0_range(rule.u0_misfit).0,
        seed.u0_range(rule.u0_misfit).1,
        seed.te
    );
    // The whole library only when measuring: building it takes minutes the first time.
    if measuring() && std::env::var_os("CAUSEWAY_BENCH_SUB_ONLY").is_none() {
        let maps = built(&store, &points);
        let started = Instant::now();
        let outcomes = run(&data, &seed, &maps, &rule);
        let wall = started.elapsed().as_secs_f64();
        let (traj, points) = totals(&outcomes);
        let best = outcomes
            .iter()
            .min_by(|a, b| a.best_chi2().total_cmp(&b.best_chi2()))
            .unwrap();
        eprintln!(
            "whole library ({} maps of {}^2): {wall:.1} s wall; {traj} trajectories \
             ({:.0}/s), {points} light-curve points ({:.3e}/s); best s = {}, q = {}, chi2 = {}",
            maps.len(),
            1000,
            traj as f64 / wall,
            points as f64 / wall,
            best.s,
            best.q,
            best.best_chi2()
        );
    }
    let sub = built(&store, &sub_points);
    // The throughput count costs a search: only when measuring (cargo test runs each once).
    let traj = if measuring() {
        let (traj, points) = totals(&run(&data, &seed, &sub, &rule));
        eprintln!("2 x 2 sub-library: {traj} trajectories, {points} light-curve points per search");
        traj
    } else {
        1
    };
    let mut group = c.benchmark_group("search 2x2 of 1000^2, 2000 points, 2 threads");
    group
        .sample_size(10)
        .measurement_time(Duration::from_secs(30))
        .throughput(Throughput::Elements(traj));
    let exact = GridRule {
        interpolation_tol: 0.0,
        ..rule.clone()
    };
    group.bench_function("baseline: exact point source at every off-map point", |b| {
        b.iter(|| black_box(run(&data, &seed, &sub, &exact)))
    });
    group.bench_function("search (default rule)", |b| {
        b.iter(|| black_box(run(&data, &seed, &sub, &rule)))
    });
    let capped = GridRule {
        point_cap: 25.0,
        ..rule.clone()
    };
    group.bench_function("search with the point cap at 25", |b| {
        b.iter(|| black_box(run(&data, &seed, &sub, &capped)))
    });
    group.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
