//! Library builds: wall time of a 5 x 5 grid of 500^2 maps, and, as a stand-in for cluster
//! scaling, two shards built at once with one thread each against the whole grid with one
//! thread, measured in the same run.
//!
//! Run: `cargo bench --bench library`

use causeway::store::library::{build, LibrarySpec, Shard};
use causeway::store::Store;
use criterion::{criterion_group, criterion_main, Criterion};
use std::time::{Duration, Instant};

const SPEC: &str = "s = { log = [0.5, 2.0, 5] }\nq = { log = [1e-4, 1e-1, 5] }\npixels = 500\n\
                    rays = 100\n[window]\ncenter = [0.0, 0.0]\nwidth = 2.0\n";

/// Whether this is a measuring run (`cargo bench`), not the one-pass check of `cargo test`,
/// which builds the same grid at 100^2 pixels.
fn measuring() -> bool {
    std::env::args().any(|a| a == "--bench")
}

fn fresh_store(tag: &str) -> Store {
    let dir = std::env::temp_dir().join(format!(
        "causeway-bench-library-{}-{tag}",
        std::process::id()
    ));
    let _ = std::fs::remove_dir_all(&dir);
    Store::create(&dir).unwrap()
}

fn pool(threads: usize) -> rayon::ThreadPool {
    rayon::ThreadPoolBuilder::new()
        .num_threads(threads)
        .build()
        .unwrap()
}

/// Times `run` on a fresh store, `iters` times.
fn timed(iters: u64, tag: &str, run: impl Fn(&Store)) -> Duration {
    (0..iters)
        .map(|_| {
            let store = fresh_store(tag);
            let started = Instant::now();
            run(&store);
            started.elapsed()
        })
        .sum()
}

fn bench(c: &mut Criterion) {
    let text = if measuring() {
        SPEC.to_string()
    } else {
        SPEC.replace("pixels = 500", "pixels = 100")
    };
    let spec = LibrarySpec::parse(&text, "bench").unwrap();
    let whole = |threads: usize| {
        let points = spec.points().unwrap();
        move |store: &Store| {
            pool(threads).install(|| build(store, &points, |_, _| {}).unwrap());
        }
    };
    let mut group = c.benchmark_group("library_5x5_500px");
    group
        .sample_size(10)
        .measurement_time(Duration::from_secs(60));
    group.bench_function("whole_grid_1_thread", |b| {
        b.iter_custom(|n| timed(n, "whole1", whole(1)))
    });
    group.bench_function("two_shards_1_thread_each", |b| {
        b.iter_custom(|n| {
            timed(n, "shards", |store| {
                std::thread::scope(|scope| {
                    for k in 1..=2 {
                        let spec = &spec;
                        scope.spawn(move || {
                            let points = spec.shard(Shard { k, n: 2 }).unwrap();
                            pool(1).install(|| build(store, &points, |_, _| {}).unwrap());
                        });
                    }
                });
            })
        })
    });
    group.bench_function("whole_grid_2_threads", |b| {
        b.iter_custom(|n| timed(n, "whole2", whole(2)))
    });
    group.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
