//! A library built by a real scheduler: a private one-node Slurm cluster on localhost
//! (`scripts/slurm-local.sh`) runs the job-array script `library script` prints, as printed,
//! with four worker tasks; the store must then hold every map once, verified, with no claim
//! left, and the tasks' logs must name every map built exactly once.
//!
//! Where Slurm is not installed (or this is not root) the test says so and passes, unless
//! `CAUSEWAY_REQUIRE_SLURM=1` (CI) makes that a failure.

#[path = "../common/slurm.rs"]
mod cluster;

use super::claims::{assert_complete, assert_each_built_once, built_counts};
use crate::common;
use causeway::store::library::LibrarySpec;
use cluster::LocalSlurm;
use std::time::Duration;

/// 6 x 4 = 24 small maps (about 0.1 s each on one core).
const SPEC: &str = "s = { log = [0.6, 1.6, 6] }\nq = [1e-3, 3e-3, 1e-2, 3e-2]\npixels = 150\n\
                    rays = 100\n[window]\ncenter = [0.0, 0.0]\nwidth = 1.6\n";

/// True when the test may go on; false (with a message) when it is skipped.
fn scheduler_here() -> bool {
    let Some(reason) = cluster::unavailable() else {
        return true;
    };
    if std::env::var(cluster::REQUIRE).is_ok_and(|v| v == "1") {
        panic!(
            "{}=1, and no local Slurm cluster can run: {reason}",
            cluster::REQUIRE
        );
    }
    eprintln!(
        "SKIPPED slurm::job_array_of_workers_builds_each_map_once: {reason} \
         (set {}=1 to make this a failure)",
        cluster::REQUIRE
    );
    false
}

#[test]
fn job_array_of_workers_builds_each_map_once() {
    if !scheduler_here() {
        return;
    }
    let dir = common::Scratch::new("slurm-array");
    std::fs::write(dir.join("grid.toml"), SPEC).unwrap();
    let spec = LibrarySpec::parse(SPEC, "grid.toml").unwrap();
    assert!(spec.points().unwrap().len() >= 24);
    std::fs::create_dir(dir.join("logs")).unwrap();
    let mut slurm = LocalSlurm::start(&dir.join("cluster"));
    // The script exactly as printed.
    let out = common::causeway()
        .current_dir(&*dir)
        .args([
            "library",
            "script",
            "grid.toml",
            "--tasks",
            "4",
            "--logs",
            "logs",
        ])
        .args(["--store", "maps", "--time", "10"])
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    std::fs::write(dir.join("fill.sh"), &out.stdout).unwrap();
    let job = slurm.submit(&dir.join("fill.sh"), &dir);
    slurm.wait(job, Duration::from_secs(180));

    // Four tasks, each completed with exit code 0 (the cluster's job-completion records).
    let records = slurm.completions(job);
    assert_eq!(records.len(), 4, "{records:?}");
    for r in &records {
        assert!(
            r.contains("JobState=COMPLETED") && r.contains(" ExitCode=0:0"),
            "{r}"
        );
    }
    // A log per task, each closed by the worker's summary.
    let logs: Vec<String> = (1..=4)
        .map(|task| {
            let path = dir
                .join("logs")
                .join(format!("causeway-library-{job}_{task}.log"));
            std::fs::read_to_string(&path).unwrap_or_else(|e| panic!("{}: {e}", path.display()))
        })
        .collect();
    for log in &logs {
        let last = log.lines().last().unwrap_or_default();
        assert!(
            last.starts_with("worker: ") && last.contains("maps built"),
            "{log}"
        );
    }
    assert_each_built_once(
        &built_counts(logs.iter().map(String::as_str)),
        &spec,
        "job array",
    );
    assert_complete(&dir.join("maps"), &spec, "job array");

    // The daemons are gone once the cluster is stopped.
    let pids = slurm.daemon_pids();
    assert_eq!(pids.len(), 3, "daemon pid files");
    slurm.stop();
    for pid in pids {
        assert!(
            !std::path::Path::new(&format!("/proc/{pid}")).exists(),
            "daemon {pid} still runs"
        );
    }
}
