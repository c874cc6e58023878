//! The map store and library builds, from the outside: resuming, crashes, concurrent builders,
//! corruption, shards. (Properties of the project's own promises in DESIGN.md; the maps
//! themselves are checked against outside references in tests/integration/engine.rs and tests/integration/fits.rs.)

use crate::common;

use causeway::store::library::{LibrarySpec, Shard};
use causeway::store::Store;
use std::path::Path;
use std::process::{Command, Stdio};
use std::time::Duration;

use common::{GRID_SPEC as SPEC, SLOW_GRID_SPEC as SLOW_SPEC};

fn setup(name: &str) -> (common::Scratch, LibrarySpec) {
    common::grid_folder(name, SPEC)
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

/// Runs `library build grid.toml` in `dir` and asserts its summary says `built` (for example
/// "8 maps built, 0 already present").
fn build_says(dir: &Path, built: &str) {
    let summary = run_ok(common::library_command(dir, &["build", "grid.toml"]));
    assert!(summary.contains(built), "{summary}");
}

/// Every grid point is present and verifies, and nothing else is.
fn assert_complete(dir: &Path, spec: &LibrarySpec, context: &str) {
    let store = Store::open(&dir.join("maps")).unwrap();
    let report = store.verify().unwrap();
    assert_eq!(report.problems, vec![], "{context}");
    assert_eq!(report.unindexed, vec![], "{context}");
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
    build_says(&dir, "8 maps built, 0 already present");
    build_says(&dir, "0 maps built, 8 already present");
    assert_complete(&dir, &spec, "after two builds");
}

#[test]
fn killed_builds_resume_to_a_complete_verified_grid() {
    let seed = common::test_seed(0x5eed_2026);
    let (dir, spec) = common::grid_folder("store-kill", SLOW_SPEC);
    let mut next = common::lcg(seed);
    let mut interrupted = 0;
    for round in 0..6 {
        let delay = Duration::from_millis(30 + next() % 500);
        let mut child = common::library_command(&dir, &["build", "grid.toml", "--threads", "1"])
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
        if !dir.join("maps").join(causeway::store::MARKER).exists() {
            continue; // killed before the store was made
        }
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
    run_ok(common::library_command(&dir, &["build", "grid.toml"]));
    assert_complete(&dir, &spec, &format!("seed {seed}"));
    // Leftover temporaries from the kills are removed by prune, and the grid stays whole.
    run_ok(common::library_command(&dir, &["prune", "--min-age", "0"]));
    let left: Vec<String> = common::listing(&dir.join("maps"))
        .into_iter()
        .filter(|n| n.ends_with(".tmp"))
        .collect();
    assert!(left.is_empty(), "seed {seed}: {left:?}");
    assert_complete(&dir, &spec, &format!("seed {seed}, after prune"));
}

/// Starts `count` one-thread builds of `grid.toml` in `dir`.
fn spawn_builders(dir: &Path, count: usize) -> Vec<std::process::Child> {
    (0..count)
        .map(|_| {
            common::library_command(dir, &["build", "grid.toml", "--threads", "1"])
                .stderr(Stdio::null())
                .spawn()
                .unwrap()
        })
        .collect()
}

#[test]
fn two_builders_on_one_store_keep_it_consistent() {
    let (dir, spec) = setup("store-two");
    let children = spawn_builders(&dir, 2);
    for mut c in children {
        assert!(c.wait().unwrap().success());
    }
    assert_complete(&dir, &spec, "two builders");
}

#[test]
fn a_flipped_byte_is_named_by_verify_and_replaced_by_a_rebuild() {
    let (dir, spec) = setup("store-flip");
    run_ok(common::library_command(&dir, &["build", "grid.toml"]));
    let victim = spec.points().unwrap()[3].key.file_name();
    let path = dir.join("maps").join(&victim);
    let mut bytes = std::fs::read(&path).unwrap();
    let at = bytes.len() - 4000; // inside the data or the certificate's table
    bytes[at] ^= 0x10;
    std::fs::write(&path, bytes).unwrap();
    let out = common::library_command(&dir, &["verify"]).output().unwrap();
    assert!(!out.status.success());
    let report = String::from_utf8_lossy(&out.stdout);
    let (certified, problems): (Vec<&str>, Vec<&str>) =
        report.lines().partition(|l| l.contains(": certificate: "));
    assert_eq!(problems.len(), 1, "{report}");
    assert!(problems[0].contains(&victim), "{report}");
    // The seven intact maps report their accuracy certificates (src/map/certificate.rs).
    assert_eq!(certified.len(), 7, "{report}");
    assert!(
        certified
            .iter()
            .all(|l| l.contains("relative pixel error median")),
        "{report}"
    );
    build_says(&dir, "1 maps built, 7 already present");
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
        run_ok(common::library_command(
            &dir,
            &["build", "grid.toml", "--shard", &format!("{k}/3")],
        ));
    }
    assert_complete(&dir, &spec, "three shards");
    build_says(&dir, "0 maps built");
}

#[test]
fn bad_specs_are_named_with_their_line() {
    let dir = common::Scratch::new("store-badspec");
    std::fs::write(
        dir.join("a.toml"),
        "s = [1.0]\nq = [0.0]\npixels = 10\nrays = 5\n[window]\ncenter = [0.0, 0.0]\nwidth = 1.0\n",
    )
    .unwrap();
    std::fs::write(dir.join("b.toml"), "s = [1.0]\nq = [1e-3]\npixels = 10\nrays = 5\n[window]\ncentre = [0.0, 0.0]\nwidth = 1.0\n").unwrap();
    for (file, culprit) in [("a.toml", "q"), ("b.toml", "b.toml:6")] {
        let out = common::library_command(&dir, &["build", file])
            .output()
            .unwrap();
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

/// Runs `causeway library ARGS` in `dir`; returns (exit status, stdout, stderr).
fn library_in(dir: &Path, args: &[&str]) -> (i32, String, String) {
    let out = common::library_command(dir, args).output().unwrap();
    (
        out.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&out.stdout).into_owned(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

/// Asserts exit status 2 with one line on stderr that contains `culprit`.
fn assert_refused((code, _, stderr): (i32, String, String), culprit: &str, context: &str) {
    assert_eq!(code, 2, "{context}: exit {code}, {stderr}");
    assert_eq!(stderr.trim().lines().count(), 1, "{context}: {stderr}");
    assert!(stderr.contains(culprit), "{context}: {stderr}");
}

const READING: [&[&str]; 5] = [
    &["list"],
    &["list", "--s", "1", "--q", "1e-3"],
    &["verify"],
    &["prune", "--min-age", "0"],
    &["prune", "--dry-run"],
];

#[test]
fn reading_commands_refuse_a_missing_or_unmarked_folder_and_change_nothing() {
    let dir = common::Scratch::new("store-unmarked");
    let mine = dir.join("mine");
    std::fs::create_dir(&mine).unwrap();
    std::fs::write(mine.join("zoom.fits"), b"a user's own map").unwrap();
    for args in READING {
        for store in ["missing", "mine"] {
            let all = [args, &["--store", store]].concat();
            assert_refused(library_in(&dir, &all), store, &format!("{all:?}"));
        }
        // The default store, ./maps, likewise.
        assert_refused(library_in(&dir, args), "maps", &format!("{args:?}"));
        assert_eq!(common::listing(&dir), ["mine"], "{args:?}");
        assert_eq!(common::listing(&mine), ["zoom.fits"], "{args:?}");
    }
    // The library calls: opening creates nothing; only a build's opening makes a store.
    assert!(Store::open(&dir.join("missing")).is_err());
    assert!(Store::open(&mine).is_err());
    assert!(!dir.join("missing").exists());
    assert!(
        Store::create(&mine).is_err(),
        "a foreign folder became a store"
    );
    assert_eq!(common::listing(&mine), ["zoom.fits"]);
    Store::create(&dir.join("new")).unwrap();
    assert_eq!(common::listing(&dir.join("new")), [causeway::store::MARKER]);
    Store::open(&dir.join("new")).unwrap();
}

#[test]
fn builds_mark_their_store_and_adopt_an_unmarked_folder_with_our_index() {
    let (dir, spec) = setup("store-marker");
    let maps = dir.join("maps");
    run_ok(common::library_command(&dir, &["build", "grid.toml"]));
    let marker = maps.join(causeway::store::MARKER);
    assert!(marker.exists());
    // A store from before the marker: refused by readers, adopted by the next build.
    std::fs::remove_file(&marker).unwrap();
    assert_refused(library_in(&dir, &["verify"]), "maps", "unmarked verify");
    build_says(&dir, "0 maps built, 8 already present");
    assert!(marker.exists());
    assert_complete(&dir, &spec, "adopted");
    // A folder of other files without an index is not taken over by a build.
    let other = dir.join("other");
    std::fs::create_dir(&other).unwrap();
    std::fs::write(other.join("notes.txt"), b"mine").unwrap();
    assert_refused(
        library_in(&dir, &["build", "grid.toml", "--store", "other"]),
        "other",
        "build into a foreign folder",
    );
    assert_eq!(common::listing(&other), ["notes.txt"]);
    // Nor one whose index.csv is not ours.
    std::fs::write(other.join("index.csv"), b"name,value\na,1\n").unwrap();
    assert_refused(
        library_in(&dir, &["build", "grid.toml", "--store", "other"]),
        "index.csv",
        "build into a folder with a foreign index",
    );
    assert_eq!(common::listing(&other), ["index.csv", "notes.txt"]);
}

#[test]
fn prune_touches_only_the_stores_own_files_inside_it() {
    let (dir, _) = setup("store-prune-foreign");
    let maps = dir.join("maps");
    run_ok(common::library_command(&dir, &["build", "grid.toml"]));
    let foreign = ["zoom.fits", "notes.txt", ".notes.txt.1.2.tmp", "ABC.fits"];
    for name in foreign {
        std::fs::write(maps.join(name), b"not the store's").unwrap();
    }
    std::fs::write(dir.join("victim.txt"), b"keep me").unwrap();
    let index = maps.join("index.csv");
    let good = std::fs::read_to_string(&index).unwrap();
    // An index row that points out of the store is refused, and nothing is deleted.
    let row = good.lines().nth(1).unwrap();
    let file = row.split(',').next().unwrap();
    for outside in ["../victim.txt", "../../victim.txt", "/tmp/victim.txt"] {
        let bad = good.replace(row, &row.replacen(file, outside, 1));
        std::fs::write(&index, bad).unwrap();
        for args in [&["prune", "--min-age", "0"][..], &["verify"], &["list"]] {
            assert_refused(library_in(&dir, args), "index.csv:2", outside);
        }
        assert_eq!(std::fs::read(dir.join("victim.txt")).unwrap(), b"keep me");
    }
    // A row with a value that is not a finite number is refused as well.
    let fields: Vec<&str> = row.split(',').collect();
    let nan_row = [&fields[..1], &["NaN"], &fields[2..]].concat().join(",");
    std::fs::write(&index, good.replace(row, &nan_row)).unwrap();
    assert_refused(library_in(&dir, &["list"]), "index.csv:2", "NaN row");
    std::fs::write(&index, &good).unwrap();
    let before = common::listing(&maps);
    let (code, out, err) = library_in(&dir, &["prune", "--min-age", "0"]);
    assert_eq!(code, 0, "{err}");
    assert!(!out.contains("removed"), "{out}");
    assert_eq!(common::listing(&maps), before);
    for name in foreign {
        assert_eq!(std::fs::read(maps.join(name)).unwrap(), b"not the store's");
    }
}

#[test]
fn prune_adopts_unindexed_maps_honours_min_age_and_dry_run() {
    let (dir, spec) = setup("store-prune-adopt");
    let maps = dir.join("maps");
    let shown = Path::new("maps"); // as the commands, run in `dir`, name the store
    run_ok(common::library_command(&dir, &["build", "grid.toml"]));
    let points = spec.points().unwrap();
    // A kill between a map's rename and its index entry leaves a complete, unlisted map.
    let unlisted = points[2].key.file_name();
    let index = maps.join("index.csv");
    let text = std::fs::read_to_string(&index).unwrap();
    let kept: Vec<&str> = text.lines().filter(|l| !l.starts_with(&unlisted)).collect();
    std::fs::write(&index, kept.join("\n") + "\n").unwrap();
    let (code, out, err) = library_in(&dir, &["verify"]);
    assert_eq!(code, 0, "{out}{err}");
    assert!(
        out.contains(&format!(
            "{unlisted}: complete, not yet indexed (the next build adopts it)"
        )),
        "{out}"
    );
    // A damaged map and a temporary a killed build left.
    let damaged = points[5].key.file_name();
    let mut bytes = std::fs::read(maps.join(&damaged)).unwrap();
    let at = bytes.len() - 2000;
    bytes[at] ^= 0x20;
    std::fs::write(maps.join(&damaged), bytes).unwrap();
    let temporary = format!(".{}.12345.0.tmp", points[6].key.file_name());
    std::fs::write(maps.join(&temporary), b"half a map").unwrap();
    let before = common::listing(&maps);
    let index_before = std::fs::read(&index).unwrap();

    let (code, out, err) = library_in(&dir, &["prune", "--dry-run", "--min-age", "0"]);
    assert_eq!(code, 0, "{err}");
    for expected in [
        format!("would remove {}", shown.join(&damaged).display()),
        format!("would remove {}", shown.join(&temporary).display()),
        format!("would adopt {}", shown.join(&unlisted).display()),
    ] {
        assert!(out.contains(&expected), "{expected} not in {out}");
    }
    assert_eq!(out.lines().count(), 3, "{out}");
    assert_eq!(common::listing(&maps), before, "a dry run changed files");
    assert_eq!(std::fs::read(&index).unwrap(), index_before);

    // Everything is younger than the default minimum age: nothing removed, the map adopted.
    let (code, out, err) = library_in(&dir, &["prune"]);
    assert_eq!(code, 0, "{err}");
    assert!(!out.contains("removed"), "{out}");
    assert!(
        out.contains(&format!("adopted {}", shown.join(&unlisted).display())),
        "{out}"
    );
    assert_eq!(common::listing(&maps), before);
    let store = Store::open(&maps).unwrap();
    assert_eq!(store.entries().unwrap().len(), points.len());

    let (code, out, err) = library_in(&dir, &["prune", "--min-age", "0"]);
    assert_eq!(code, 0, "{err}");
    assert_eq!(out.lines().count(), 2, "{out}");
    assert!(!maps.join(&damaged).exists() && !maps.join(&temporary).exists());
    assert!(maps.join(&unlisted).exists());
    build_says(&dir, "1 maps built, 7 already present");
    assert_complete(&dir, &spec, "after prune and rebuild");
}

#[test]
fn exact_lookups_match_to_a_relative_tolerance_and_say_when_nothing_matched() {
    let text = "s = [1.0]\nq = { log = [1e-4, 1e-2, 3] }\npixels = 8\nrays = 5\n\
                [window]\ncenter = [0.0, 0.0]\nwidth = 1.0\n";
    let (dir, spec) = common::grid_folder("store-lookup", text);
    assert_ne!(
        spec.q[1], 1e-3,
        "the grid value must differ from the typed one"
    );
    run_ok(common::library_command(&dir, &["build", "grid.toml"]));
    let (code, out, err) = library_in(&dir, &["list", "--s", "1.0", "--q", "1e-3"]);
    assert_eq!(code, 0, "{err}");
    assert_eq!(out.lines().count(), 2, "{out}");
    assert!(err.is_empty(), "{err}");
    let (code, out, err) = library_in(&dir, &["list", "--s", "1.0", "--q", "1.1e-3"]);
    assert_eq!(code, 0, "{err}");
    assert_eq!(out.lines().count(), 1, "{out}");
    assert_eq!(err.lines().count(), 1, "{err}");
    assert!(err.contains("no map at s = 1, q = 0.0011"), "{err}");
    for (option, args) in [
        ("--s", ["--s", "nan", "--q", "1e-3"]),
        ("--q", ["--s", "1", "--q", "NaN"]),
        ("--q", ["--s", "1", "--q", "0"]),
    ] {
        let all = [&["list"][..], &args].concat();
        assert_refused(library_in(&dir, &all), option, &format!("{all:?}"));
    }
}

#[test]
fn prune_beside_running_builders_removes_nothing_of_theirs() {
    let (dir, spec) = common::grid_folder("store-prune-beside", SLOW_SPEC);
    let marker = dir.join("maps").join(causeway::store::MARKER);
    let mut builders = spawn_builders(&dir, 2);
    let mut prunes = 0;
    while builders.iter_mut().any(|b| b.try_wait().unwrap().is_none()) {
        if marker.exists() {
            let (code, out, err) = library_in(&dir, &["prune"]);
            assert_eq!(code, 0, "{err}");
            assert!(!out.contains("removed"), "{out}");
            prunes += 1;
        }
        std::thread::sleep(Duration::from_millis(20));
    }
    for mut b in builders {
        assert!(b.wait().unwrap().success());
    }
    assert!(prunes >= 2, "only {prunes} prunes ran beside the builders");
    assert_complete(&dir, &spec, "prune beside builders");
}
