//! Claims in the store, from the outside: builders sharing a store (threads of one process,
//! processes, workers) build every map exactly once; stale claims (a killed builder's, a
//! silent host's) are taken over and live ones never; `library status`, `verify` and `prune`
//! know them. (Properties of the project's own promises in DESIGN.md and the store's docs.)
//!
//! How a test tells a map was built twice: every builder reports each map it built (the
//! library's `Outcome::Built`, the command's `built <file>` line in a batch log); the maps of a
//! grid were each built once exactly when those reports name every map and none twice.

use crate::common;

use causeway::store::claim::{Attempt, ClaimPolicy};
use causeway::store::library::{build_with, BuildOptions, LibrarySpec, Outcome};
use causeway::store::Store;
use std::collections::HashMap;
use std::path::Path;
use std::process::{Command, Stdio};
use std::time::{Duration, SystemTime};

use common::{GRID_SPEC as SPEC, SLOW_GRID_SPEC as SLOW_SPEC};

/// Short periods for the library-level tests: refreshed every 100 ms, stale after 1.5 s (room
/// for a refresher thread held up on a loaded machine).
const QUICK: ClaimPolicy = ClaimPolicy {
    refresh: Duration::from_millis(100),
    stale_after: Duration::from_millis(1500),
};

/// The map files named by the `built <file>` lines of batch logs, with how often each.
pub fn built_counts<'a>(logs: impl IntoIterator<Item = &'a str>) -> HashMap<String, usize> {
    let mut counts = HashMap::new();
    for log in logs {
        for line in log.lines() {
            if let Some(file) = line
                .strip_prefix("built ")
                .and_then(|r| r.split_whitespace().next())
            {
                *counts.entry(file.to_string()).or_insert(0) += 1;
            }
        }
    }
    counts
}

/// Every grid point's map is named once in `counts`, and nothing else.
pub fn assert_each_built_once(counts: &HashMap<String, usize>, spec: &LibrarySpec, context: &str) {
    let twice: Vec<_> = counts.iter().filter(|(_, &n)| n > 1).collect();
    assert!(
        twice.is_empty(),
        "{context}: built more than once: {twice:?}"
    );
    let mut expected: Vec<String> = spec
        .points()
        .unwrap()
        .iter()
        .map(|p| p.key.file_name())
        .collect();
    expected.sort();
    let mut built: Vec<String> = counts.keys().cloned().collect();
    built.sort();
    assert_eq!(built, expected, "{context}");
}

/// Every grid point is present, verifies and is indexed; no claim and no temporary is left.
pub fn assert_complete(store_dir: &Path, spec: &LibrarySpec, context: &str) {
    let store = Store::open(store_dir).unwrap();
    let report = store.verify().unwrap();
    assert_eq!(report.problems, vec![], "{context}");
    assert_eq!(report.unindexed, vec![], "{context}");
    assert_eq!(report.claims, vec![], "{context}: claims left");
    assert_eq!(store.entries().unwrap().len(), spec.points().unwrap().len());
    for p in spec.points().unwrap() {
        assert!(store.has_verified(&p.key), "{context}: missing {p:?}");
    }
    let left: Vec<String> = common::listing(store_dir)
        .into_iter()
        .filter(|n| n.ends_with(".tmp") || n.ends_with(".claim"))
        .collect();
    assert!(left.is_empty(), "{context}: {left:?}");
}

/// Writes a claim on `map` as another builder would have left it, last refreshed `age` ago.
fn plant_claim(store_dir: &Path, map: &str, host: &str, pid: u32, age: Duration) -> String {
    let name = map.replace(".fits", ".claim");
    let path = store_dir.join(&name);
    std::fs::write(
        &path,
        format!(
            "host = \"{host}\"\nboot = \"\"\npid = {pid}\nprocess_start = 0\n\
             since = \"2026-01-01T00:00:00\"\ntoken = \"planted-{host}-{pid}\"\n"
        ),
    )
    .unwrap();
    let file = std::fs::File::options().write(true).open(&path).unwrap();
    file.set_modified(SystemTime::now() - age).unwrap();
    name
}

#[test]
fn four_builder_threads_build_each_map_once() {
    let (dir, spec) = common::grid_folder("claims-threads", SPEC);
    let store = Store::create(&dir.join("maps")).unwrap();
    let points = spec.points().unwrap();
    let options = BuildOptions {
        wait: true,
        read_present: true,
        policy: QUICK,
    };
    let reports: Vec<Vec<String>> = std::thread::scope(|scope| {
        let handles: Vec<_> = (0..4)
            .map(|_| {
                scope.spawn(|| {
                    let mut built = Vec::new();
                    let summary = build_with(&store, &points, options, |p, outcome| {
                        if outcome == Outcome::Built {
                            built.push(format!("built {}", p.key.file_name()));
                        }
                    })
                    .unwrap();
                    // A waiting build ends with every map accounted for.
                    assert_eq!(
                        summary.built + summary.skipped + summary.elsewhere,
                        points.len()
                    );
                    built
                })
            })
            .collect();
        handles.into_iter().map(|h| h.join().unwrap()).collect()
    });
    let logs: Vec<String> = reports.iter().map(|r| r.join("\n")).collect();
    let counts = built_counts(logs.iter().map(String::as_str));
    assert_each_built_once(&counts, &spec, "four threads");
    assert_complete(&dir.join("maps"), &spec, "four threads");
}

#[test]
fn four_builder_processes_build_each_map_once() {
    // Four plain builds and four workers (two rounds on fresh stores): the reports of the
    // eight processes name every map once per round.
    for (round, worker) in [(0, false), (1, true)] {
        let (dir, spec) = common::grid_folder(&format!("claims-processes-{round}"), SPEC);
        let args: &[&str] = if worker {
            &["build", "grid.toml", "--threads", "1", "--worker"]
        } else {
            &["build", "grid.toml", "--threads", "1"]
        };
        let children: Vec<_> = (0..4)
            .map(|_| {
                common::library_command(&dir, args)
                    .stderr(Stdio::piped())
                    .spawn()
                    .unwrap()
            })
            .collect();
        let logs: Vec<String> = children
            .into_iter()
            .map(|c| {
                let out = c.wait_with_output().unwrap();
                let log = String::from_utf8_lossy(&out.stderr).into_owned();
                assert!(out.status.success(), "{log}");
                log
            })
            .collect();
        let context = format!("four processes, worker = {worker}");
        assert_each_built_once(
            &built_counts(logs.iter().map(String::as_str)),
            &spec,
            &context,
        );
        // The closing lines agree with the per-map lines.
        let total: usize = logs
            .iter()
            .map(|l| {
                let last = l.lines().last().unwrap();
                let (head, _) = last.split_once(" maps built").expect(last);
                head.rsplit(' ').next().unwrap().parse::<usize>().unwrap()
            })
            .sum();
        assert_eq!(total, spec.points().unwrap().len(), "{context}: {logs:?}");
        assert_complete(&dir.join("maps"), &spec, &context);
    }
}

#[test]
fn stale_claims_are_taken_over_and_live_ones_never() {
    let (dir, spec) = common::grid_folder("claims-stale", SPEC);
    let store = Store::create(&dir.join("maps")).unwrap();
    let names: Vec<String> = spec
        .points()
        .unwrap()
        .iter()
        .map(|p| p.key.file_name())
        .collect();
    // Another host's claim, refreshed a moment ago: live, left alone.
    plant_claim(
        store.root(),
        &names[0],
        "node-elsewhere",
        4242,
        Duration::ZERO,
    );
    assert!(matches!(store.claim(&names[0], QUICK).unwrap(), Attempt::Held(ref i) if !i.stale));
    // The same after more than the staleness age without a refresh: taken over.
    plant_claim(
        store.root(),
        &names[0],
        "node-elsewhere",
        4242,
        Duration::from_secs(2),
    );
    let Attempt::Taken(taken) = store.claim(&names[0], QUICK).unwrap() else {
        panic!("a claim silent for 2 s (stale after 0.4 s) was not taken over");
    };
    let holder = store
        .claim_on(&names[0], QUICK)
        .unwrap()
        .unwrap()
        .holder
        .unwrap();
    assert_eq!(holder.pid, std::process::id());
    // A claim of a process of this host that is gone: stale at once, whatever its age.
    let mut gone = Command::new("true").spawn().unwrap();
    let pid = gone.id();
    gone.wait().unwrap();
    let me = causeway::store::claim::host_name();
    plant_claim(store.root(), &names[1], &me, pid, Duration::ZERO);
    let boot = std::fs::read_to_string("/proc/sys/kernel/random/boot_id").unwrap();
    let path = store.root().join(names[1].replace(".fits", ".claim"));
    let text = std::fs::read_to_string(&path).unwrap();
    std::fs::write(
        &path,
        text.replace("boot = \"\"", &format!("boot = \"{}\"", boot.trim())),
    )
    .unwrap();
    assert!(store.claim_on(&names[1], QUICK).unwrap().unwrap().stale);
    assert!(matches!(
        store.claim(&names[1], QUICK).unwrap(),
        Attempt::Taken(_)
    ));
    // A live holder that keeps refreshing is never stale, however long it builds.
    std::thread::sleep(Duration::from_millis(2500));
    let info = store.claim_on(&names[0], QUICK).unwrap().unwrap();
    assert!(!info.stale && info.age < QUICK.stale_after, "{info:?}");
    assert!(!taken.lost());
    assert!(matches!(
        store.claim(&names[0], QUICK).unwrap(),
        Attempt::Held(_)
    ));
    taken.release().unwrap();
    assert!(store.claim_on(&names[0], QUICK).unwrap().is_none());
}

#[test]
fn status_verify_and_prune_know_claims() {
    let (dir, spec) = common::grid_folder("claims-status", SPEC);
    let maps = dir.join("maps");
    let out = common::library_command(&dir, &["build", "grid.toml", "--shard", "1/2"])
        .output()
        .unwrap();
    assert!(out.status.success());
    let store = Store::open(&maps).unwrap();
    let points = spec.points().unwrap();
    // A live claim (held by this test) on point 1, a stale one of a silent host on point 3.
    let Attempt::Taken(live) = store
        .claim(&points[1].key.file_name(), ClaimPolicy::default())
        .unwrap()
    else {
        panic!("point 1 was claimed");
    };
    let stale = plant_claim(
        &maps,
        &points[3].key.file_name(),
        "node-gone",
        7,
        Duration::from_secs(600),
    );
    let aside = format!(".{}.999.0.tmp", stale);
    std::fs::write(maps.join(&aside), b"a claim set aside").unwrap();
    let out = common::library_command(&dir, &["status", "grid.toml"])
        .output()
        .unwrap();
    assert!(out.status.success());
    let table = String::from_utf8_lossy(&out.stdout);
    let rows: Vec<Vec<&str>> = table
        .lines()
        .skip(1)
        .map(|l| l.split(',').collect())
        .collect();
    assert_eq!(rows.len(), points.len());
    for (p, row) in points.iter().zip(&rows) {
        let expected = match p.index {
            i if i % 2 == 0 => "built",
            1 | 3 => "claimed",
            _ => "missing",
        };
        assert_eq!(
            (row[3], row[4]),
            (p.key.file_name().as_str(), expected),
            "{table}"
        );
    }
    let me = causeway::store::claim::host_name();
    let pid = std::process::id().to_string();
    assert_eq!(
        (rows[1][5], rows[1][6], rows[1][9]),
        (me.as_str(), pid.as_str(), "false")
    );
    assert_eq!(
        (rows[3][5], rows[3][6], rows[3][9]),
        ("node-gone", "7", "true")
    );
    let summary = String::from_utf8_lossy(&out.stderr);
    assert!(
        summary.contains("4 built, 2 claimed (1 stale), 2 missing of 8"),
        "{summary}"
    );
    // verify names both claims and passes (claims are no damage).
    let out = common::library_command(&dir, &["verify"]).output().unwrap();
    let said = String::from_utf8_lossy(&out.stdout);
    assert!(out.status.success(), "{said}");
    assert!(
        said.contains("claimed by node-gone pid 7") && said.contains("stale"),
        "{said}"
    );
    assert!(
        said.contains(&format!("claimed by {me} pid {pid}")) && said.contains("live"),
        "{said}"
    );
    // prune removes the stale claim and the set-aside one, never the live claim.
    let out = common::library_command(&dir, &["prune", "--min-age", "0"])
        .output()
        .unwrap();
    assert!(out.status.success());
    let said = String::from_utf8_lossy(&out.stdout);
    assert_eq!(said.lines().count(), 2, "{said}");
    assert!(!maps.join(&stale).exists() && !maps.join(&aside).exists());
    assert!(live.path().exists());
    live.release().unwrap();
}

#[test]
fn killed_workers_resume_to_the_same_store_as_a_clean_build() {
    let seed = common::test_seed(0x00c1_a1e5);
    let (dir, spec) = common::grid_folder("claims-kill", SLOW_SPEC);
    let maps = dir.join("maps");
    let mut next = common::lcg(seed);
    let mut claims_left = 0;
    for round in 0..5 {
        let mut workers: Vec<_> = (0..3)
            .map(|_| {
                common::library_command(&dir, &["build", "grid.toml", "--threads", "1", "--worker"])
                    .stdout(Stdio::null())
                    .stderr(Stdio::null())
                    .spawn()
                    .unwrap()
            })
            .collect();
        for w in &mut workers {
            std::thread::sleep(Duration::from_millis(50 + next() % 250));
            w.kill().unwrap(); // SIGKILL on Unix
            w.wait().unwrap();
        }
        if !maps.join(causeway::store::MARKER).exists() {
            continue;
        }
        // Nothing partial: every map file and every indexed entry is complete.
        let store = Store::open(&maps).unwrap();
        let report = store.verify().unwrap();
        assert_eq!(report.problems, vec![], "seed {seed}, round {round}");
        claims_left += report.claims.len();
        // A killed worker's claim is stale at once (its process on this host is gone).
        assert!(
            report.claims.iter().all(|c| c.stale),
            "seed {seed}: {:?}",
            report.claims
        );
    }
    assert!(
        claims_left >= 2,
        "seed {seed}: the kills left only {claims_left} claims"
    );
    // Another host's builder went silent on one missing map: its claim is stale by age.
    let store = Store::open(&maps).unwrap();
    let missing = spec
        .points()
        .unwrap()
        .into_iter()
        .find(|p| !store.has_verified(&p.key));
    if let Some(p) = &missing {
        plant_claim(
            &maps,
            &p.key.file_name(),
            "node-silent",
            99,
            Duration::from_secs(120),
        );
    }
    let out = common::library_command(&dir, &["build", "grid.toml"])
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let out = common::library_command(&dir, &["prune", "--min-age", "0"])
        .output()
        .unwrap();
    assert!(out.status.success());
    assert_complete(&maps, &spec, &format!("seed {seed}, resumed"));
    // The same maps, bit for bit, as a clean build.
    let clean = Store::create(&dir.join("clean")).unwrap();
    causeway::store::library::build(&clean, &spec.points().unwrap(), |_, _| {}).unwrap();
    let mut files = common::listing(&maps);
    files.retain(|n| n.ends_with(".fits"));
    let mut clean_files = common::listing(clean.root());
    clean_files.retain(|n| n.ends_with(".fits"));
    assert_eq!(files, clean_files);
    for p in spec.points().unwrap() {
        let a = store.get(&p.key).unwrap().unwrap();
        let b = clean.get(&p.key).unwrap().unwrap();
        assert!(
            a.data == b.data,
            "seed {seed}: {} differs",
            p.key.file_name()
        );
    }
}
