//! The map store and library builds, from the outside: resuming, crashes, concurrent builders,
//! corruption, shards. (Properties of the project's own promises in DESIGN.md; the maps
//! themselves are checked against outside references in tests/engine.rs and tests/fits.rs.)

mod common;

use causeway::store::library::{LibrarySpec, Shard};
use causeway::store::Store;
use std::path::Path;
use std::process::{Command, Stdio};
use std::time::Duration;

const SPEC: &str = "s = { log = [0.6, 1.6, 4] }\nq = [1e-3, 1e-2]\npixels = 120\nrays = 60\n\
                    [window]\ncenter = [0.0, 0.0]\nwidth = 1.6\n";

/// Heavier maps (about 0.3 s each on one core), so that kills land mid-build.
const SLOW_SPEC: &str = "s = { log = [0.6, 1.6, 4] }\nq = [1e-3, 1e-2]\npixels = 300\nrays = 300\n\
                         [window]\ncenter = [0.0, 0.0]\nwidth = 1.6\n";

fn setup(name: &str) -> (std::path::PathBuf, LibrarySpec) {
    setup_with(name, SPEC)
}

fn setup_with(name: &str, text: &str) -> (std::path::PathBuf, LibrarySpec) {
    let dir = common::scratch(name);
    std::fs::write(dir.join("grid.toml"), text).unwrap();
    (dir, LibrarySpec::parse(text, "grid.toml").unwrap())
}

fn library(dir: &Path, args: &[&str]) -> Command {
    let mut cmd = common::causeway();
    cmd.current_dir(dir)
        .arg("library")
        .args(args)
        .env_remove("CAUSEWAY_STORE");
    cmd
}

fn run_ok(mut cmd: Command) -> String {
    let out = cmd.output().unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    String::from_utf8_lossy(&out.stderr).into_owned()
}

/// Every grid point is present and verifies, and nothing else is.
fn assert_complete(dir: &Path, spec: &LibrarySpec, context: &str) {
    let store = Store::open(&dir.join("maps")).unwrap();
    assert_eq!(store.verify().unwrap(), vec![], "{context}");
    let entries = store.entries().unwrap();
    assert_eq!(entries.len(), spec.points().unwrap().len(), "{context}");
    for p in spec.points().unwrap() {
        assert!(
            store.has_verified(&p.key),
            "{context}: missing s={} q={}",
            p.s,
            p.q
        );
    }
}

#[test]
fn second_build_builds_nothing() {
    let (dir, spec) = setup("store-twice");
    let first = run_ok(library(&dir, &["build", "grid.toml"]));
    assert!(first.contains("8 maps built, 0 already present"), "{first}");
    let second = run_ok(library(&dir, &["build", "grid.toml"]));
    assert!(
        second.contains("0 maps built, 8 already present"),
        "{second}"
    );
    assert_complete(&dir, &spec, "after two builds");
}

#[test]
fn killed_builds_resume_to_a_complete_verified_grid() {
    let seed: u64 = std::env::var("CAUSEWAY_TEST_SEED")
        .ok()
        .and_then(|s| s.parse().ok())
        .unwrap_or(0x5eed_2026);
    let (dir, spec) = setup_with("store-kill", SLOW_SPEC);
    let mut state = seed;
    let mut next = || {
        // 64-bit LCG (Knuth's MMIX constants, from memory): enough for kill times.
        state = state
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        state >> 33
    };
    let mut interrupted = 0;
    for round in 0..6 {
        let delay = Duration::from_millis(30 + next() % 500);
        let mut child = library(&dir, &["build", "grid.toml", "--threads", "1"])
            .stdout(Stdio::null())
            .stderr(Stdio::null())
            .spawn()
            .unwrap();
        std::thread::sleep(delay);
        if child.try_wait().unwrap().is_none() {
            interrupted += 1;
        }
        child.kill().unwrap(); // SIGKILL on Unix
        child.wait().unwrap();
        // Whatever is there must never look complete while being partial.
        let store = Store::open(&dir.join("maps")).unwrap();
        for e in store.entries().unwrap() {
            assert!(
                causeway::map::read_fits(&dir.join("maps").join(&e.file)).is_ok(),
                "seed {seed}, round {round}: indexed file {} is damaged",
                e.file
            );
        }
    }
    // The kills interrupted running builds (not only finished ones).
    assert!(
        interrupted >= 2,
        "seed {seed}: only {interrupted} kills interrupted a build"
    );
    run_ok(library(&dir, &["build", "grid.toml"]));
    assert_complete(&dir, &spec, &format!("seed {seed}"));
    // Leftover temporaries from the kills are removed by prune, and the grid stays whole.
    run_ok(library(&dir, &["prune", "--min-age", "0"]));
    let left: Vec<String> = common::listing(&dir.join("maps"))
        .into_iter()
        .filter(|n| n.ends_with(".tmp"))
        .collect();
    assert!(left.is_empty(), "seed {seed}: {left:?}");
    assert_complete(&dir, &spec, &format!("seed {seed}, after prune"));
}

#[test]
fn two_builders_on_one_store_keep_it_consistent() {
    let (dir, spec) = setup("store-two");
    let children: Vec<_> = (0..2)
        .map(|_| {
            library(&dir, &["build", "grid.toml", "--threads", "1"])
                .stderr(Stdio::null())
                .spawn()
                .unwrap()
        })
        .collect();
    for mut c in children {
        assert!(c.wait().unwrap().success());
    }
    assert_complete(&dir, &spec, "two builders");
}

#[test]
fn a_flipped_byte_is_named_by_verify_and_replaced_by_a_rebuild() {
    let (dir, spec) = setup("store-flip");
    run_ok(library(&dir, &["build", "grid.toml"]));
    let victim = spec.points().unwrap()[3].key.file_name();
    let path = dir.join("maps").join(&victim);
    let mut bytes = std::fs::read(&path).unwrap();
    let at = bytes.len() - 4000; // inside the data
    bytes[at] ^= 0x10;
    std::fs::write(&path, bytes).unwrap();
    let out = library(&dir, &["verify"]).output().unwrap();
    assert!(!out.status.success());
    let report = String::from_utf8_lossy(&out.stdout);
    assert!(report.contains(&victim), "{report}");
    assert_eq!(report.lines().count(), 1, "{report}");
    let rebuilt = run_ok(library(&dir, &["build", "grid.toml"]));
    assert!(
        rebuilt.contains("1 maps built, 7 already present"),
        "{rebuilt}"
    );
    assert_complete(&dir, &spec, "after rebuild");
}

#[test]
fn shards_partition_the_grid() {
    let (_, spec) = setup("store-shards");
    let all: Vec<usize> = spec.points().unwrap().iter().map(|p| p.index).collect();
    for n in 1..=5 {
        let mut seen: Vec<usize> = (1..=n)
            .flat_map(|k| spec.shard(Shard { k, n }).unwrap())
            .map(|p| p.index)
            .collect();
        let count = seen.len();
        seen.sort();
        seen.dedup();
        assert_eq!(seen.len(), count, "overlap with {n} shards");
        assert_eq!(seen, all, "{n} shards do not cover the grid");
    }
}

#[test]
fn sharded_builds_fill_one_store() {
    let (dir, spec) = setup("store-sharded");
    for k in 1..=3 {
        run_ok(library(
            &dir,
            &["build", "grid.toml", "--shard", &format!("{k}/3")],
        ));
    }
    assert_complete(&dir, &spec, "three shards");
    let list = run_ok(library(&dir, &["build", "grid.toml"]));
    assert!(list.contains("0 maps built"), "{list}");
}

#[test]
fn bad_specs_are_named_with_their_line() {
    let dir = common::scratch("store-badspec");
    std::fs::write(
        dir.join("a.toml"),
        "s = [1.0]\nq = [0.0]\npixels = 10\nrays = 5\n[window]\ncenter = [0.0, 0.0]\nwidth = 1.0\n",
    )
    .unwrap();
    std::fs::write(dir.join("b.toml"), "s = [1.0]\nq = [1e-3]\npixels = 10\nrays = 5\n[window]\ncentre = [0.0, 0.0]\nwidth = 1.0\n").unwrap();
    for (file, culprit) in [("a.toml", "q"), ("b.toml", "b.toml:6")] {
        let out = library(&dir, &["build", file]).output().unwrap();
        assert_eq!(out.status.code(), Some(2));
        let err = String::from_utf8_lossy(&out.stderr);
        assert!(err.contains(file) && err.contains(culprit), "{err}");
    }
    assert!(!dir.join("maps").join("index.csv").exists());
}

#[test]
fn caustic_window_rules_frame_their_caustics() {
    // Planetary caustic of a wide planet near s - 1/s from the host, the close planet's two
    // triangles near x = -(1/s - s) from it (Griest & Safizadeh 1998; Han 2006); the central
    // caustic at the host.
    let spec = |rule: &str, s: f64| {
        let text = format!(
            "s = [{s}]\nq = [1e-4]\npixels = 50\nrays = 1\nengine = \"polygon\"\n[window]\nrule = \"{rule}\"\nmargin = 1.5\n"
        );
        let spec = LibrarySpec::parse(&text, "rule.toml").unwrap();
        spec.points().unwrap()[0].key.window
    };
    let host = |s: f64| -s * 1e-4 / (1.0 + 1e-4);
    for s in [0.7, 1.6] {
        let planetary = spec("planetary", s);
        let expected = host(s) + s - 1.0 / s;
        assert!(
            (planetary.center.0 - expected).abs() < 0.1 * (s - 1.0 / s).abs(),
            "s = {s}: {planetary:?}"
        );
        assert_eq!(planetary.center.1, 0.0);
        let central = spec("central", s);
        assert!(
            (central.center.0 - host(s)).abs() < central.width,
            "s = {s}: {central:?}"
        );
        // Central caustic width about 4q/(s - 1/s)^2 (Chung et al. 2005): the window is 1.5x
        // the caustic's extent, so within a factor of 3 of that.
        let chung = 4e-4 / (s - 1.0 / s).powi(2);
        assert!(
            central.width > 0.5 * chung && central.width < 3.0 * chung,
            "s = {s}: {} vs {chung}",
            central.width
        );
    }
}
