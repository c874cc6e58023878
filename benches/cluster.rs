//! Libraries through a scheduler: wall time of a 10 x 10 library built by a job array of 1, 2
//! and 4 worker tasks (one thread each) on a private one-node Slurm cluster on this machine
//! (`scripts/slurm-local.sh`), against one local `library build` with one thread, measured in
//! the same run; and the scheduler's overhead per map, (array of 1 task - local) / maps.
//!
//! The job-array script is the one `library script` prints; each sample submits it into a
//! fresh store and waits until every task has left the queue. Where no cluster can run (Slurm
//! not installed, not root) the scheduler cases are skipped with a message and only the local
//! build is measured. `cargo test --all-targets` runs one small local build and no scheduler.
//!
//! Run (as root, with slurmctld, slurmd and munge installed): `cargo bench --bench cluster`

#[allow(dead_code)] // the test's helpers this bench does not use
#[path = "../tests/common/slurm.rs"]
mod cluster;

use criterion::{criterion_group, criterion_main, Criterion, SamplingMode};
use std::path::{Path, PathBuf};
use std::process::Command;
use std::sync::Mutex;
use std::time::{Duration, Instant};

/// 10 x 10 maps of 200^2 pixels (about 0.1 s each on one core).
const SPEC: &str = "s = { log = [0.5, 2.0, 10] }\nq = { log = [1e-4, 1e-1, 10] }\npixels = 200\n\
                    rays = 100\n[window]\ncenter = [0.0, 0.0]\nwidth = 2.0\n";

/// Whether this is a measuring run (`cargo bench`), not the one-pass check of `cargo test`.
fn measuring() -> bool {
    std::env::args().any(|a| a == "--bench")
}

/// The bench's folder, with the spec and a log folder.
fn workspace(spec: &str) -> PathBuf {
    let dir = std::env::temp_dir().join(format!("causeway-bench-cluster-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(dir.join("logs")).unwrap();
    std::fs::write(dir.join("grid.toml"), spec).unwrap();
    dir
}

fn causeway(dir: &Path) -> Command {
    let mut cmd = Command::new(env!("CARGO_BIN_EXE_causeway"));
    cmd.current_dir(dir).env_remove("CAUSEWAY_STORE");
    cmd
}

fn run_ok(mut cmd: Command) -> Vec<u8> {
    let out = cmd.output().unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    out.stdout
}

/// Times `run` (given a fresh store name), `iters` times; returns the sum.
fn timed(iters: u64, dir: &Path, run: impl Fn(&str)) -> Duration {
    (0..iters)
        .map(|_| {
            let _ = std::fs::remove_dir_all(dir.join("maps"));
            let started = Instant::now();
            run("maps");
            started.elapsed()
        })
        .sum()
}

fn bench(c: &mut Criterion) {
    let spec = if measuring() {
        SPEC.to_string()
    } else {
        SPEC.replace("10] }", "2] }")
    };
    let maps = if measuring() { 100.0 } else { 4.0 };
    let dir = workspace(&spec);
    let local = |store: &str| {
        let mut cmd = causeway(&dir);
        cmd.args([
            "library",
            "build",
            "grid.toml",
            "--threads",
            "1",
            "--store",
            store,
        ]);
        run_ok(cmd);
    };
    if !measuring() {
        local("maps");
        let _ = std::fs::remove_dir_all(&dir);
        return;
    }
    let means = Mutex::new(Vec::new());
    let mut group = c.benchmark_group("library_10x10_scheduler");
    group
        .sample_size(10)
        .sampling_mode(SamplingMode::Flat)
        .warm_up_time(Duration::from_millis(1))
        .measurement_time(Duration::from_secs(30));
    group.bench_function("local_build_1_thread", |b| {
        b.iter_custom(|n| {
            let t = timed(n, &dir, local);
            let mean = t.as_secs_f64() / n as f64;
            means.lock().unwrap().push(("local".to_string(), mean));
            t
        })
    });
    let slurm = match cluster::unavailable() {
        Some(reason) => {
            eprintln!("scheduler cases SKIPPED: {reason}");
            None
        }
        None => Some(cluster::LocalSlurm::start(&dir.join("cluster"))),
    };
    if let Some(slurm) = &slurm {
        for tasks in [1, 2, 4] {
            let name = format!("slurm_{tasks}_tasks");
            let script = dir.join(format!("fill-{tasks}.sh"));
            let mut cmd = causeway(&dir);
            cmd.args([
                "library",
                "script",
                "grid.toml",
                "--logs",
                "logs",
                "--store",
                "maps",
            ])
            .args(["--tasks", &tasks.to_string()]);
            std::fs::write(&script, run_ok(cmd)).unwrap();
            group.bench_function(name.as_str(), |b| {
                b.iter_custom(|n| {
                    let t = timed(n, &dir, |_| {
                        let job = slurm.submit(&script, &dir);
                        slurm.wait(job, Duration::from_secs(600));
                    });
                    let mean = t.as_secs_f64() / n as f64;
                    means.lock().unwrap().push((name.clone(), mean));
                    t
                })
            });
        }
    }
    group.finish();
    drop(slurm); // stops the cluster's daemons
    report(&means.into_inner().unwrap(), maps);
    let _ = std::fs::remove_dir_all(&dir);
}

/// Ratios against the local build and the overhead per map, from the mean of the samples of
/// each case (criterion's first call is its warm-up, which pays the cluster's first
/// scheduling: left out).
fn report(means: &[(String, f64)], maps: f64) {
    let last = |name: &str| {
        let all: Vec<f64> = means
            .iter()
            .filter(|(n, _)| n == name)
            .map(|m| m.1)
            .collect();
        (all.len() > 1).then(|| all[1..].iter().sum::<f64>() / (all.len() - 1) as f64)
    };
    let Some(local) = last("local") else { return };
    eprintln!(
        "local build, 1 thread: {local:.2} s ({:.1} ms per map)",
        1e3 * local / maps
    );
    for tasks in [1, 2, 4] {
        if let Some(t) = last(&format!("slurm_{tasks}_tasks")) {
            eprintln!(
                "job array of {tasks} task(s): {t:.2} s, {:.2}x the local build",
                t / local
            );
        }
    }
    if let Some(one) = last("slurm_1_tasks") {
        eprintln!(
            "scheduler overhead: {:.2} s per job, {:.1} ms per map of {maps}",
            one - local,
            1e3 * (one - local) / maps
        );
    }
}

criterion_group!(benches, bench);
criterion_main!(benches);
