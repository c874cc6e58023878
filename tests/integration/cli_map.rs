//! `causeway map` from the outside: bad input gets one line naming the culprit, exit status 2,
//! and no file on disk (DESIGN.md, "Stable command-line interface").

use crate::common;

use std::path::Path;

/// Runs `causeway map` with the given arguments in `dir`; returns (status, stderr).
fn map_in(dir: &Path, args: &[&str]) -> (i32, String) {
    let (code, _, stderr) = common::run_cli(dir, "map", args);
    (code, stderr)
}

const GOOD: &[&str] = &[
    "--center", "0,0", "--width", "1", "--pixels", "20", "--out", "m.fits",
];

fn with(overrides: &[(&str, &str)], extra: &[&str]) -> Vec<String> {
    let mut args: Vec<String> = GOOD.iter().map(|s| s.to_string()).collect();
    for (opt, val) in overrides {
        let i = args.iter().position(|a| a == opt).unwrap();
        args[i + 1] = val.to_string();
    }
    args.extend(extra.iter().map(|s| s.to_string()));
    args
}

#[test]
fn bad_input_exits_2_naming_the_culprit_and_writes_nothing() {
    let dir = common::Scratch::new("cli-map-bad");
    std::fs::write(dir.join("neg.csv"), "x,y,mass\n0,0,1\n0.5,0.1,-0.2\n").unwrap();
    std::fs::write(dir.join("broken.csv"), "x,y,mass\n0,0,1\n0.5,zero,1\n").unwrap();
    std::fs::write(dir.join("twin.csv"), "x,y,mass\n0.1,0,1\n0.1,0,2\n").unwrap();
    std::fs::write(dir.join("empty.csv"), "x,y,mass\n").unwrap();
    let binary = ["--s", "1", "--q", "1e-3"];
    let cases: Vec<(Vec<String>, &str)> = vec![
        (with(&[], &["--s", "1", "--q", "0"]), "--q"),
        (with(&[], &["--s", "1", "--q", "-1e-3"]), "--q"),
        (with(&[], &["--s", "nan", "--q", "1e-3"]), "--s"),
        (with(&[], &["--s", "-1", "--q", "1e-3"]), "--s"),
        (with(&[("--width", "NaN")], &binary), "--width"),
        (with(&[("--width", "-1")], &binary), "--width"),
        (with(&[("--center", "nan,0")], &binary), "--center"),
        (with(&[("--pixels", "0")], &binary), "--pixels"),
        (
            with(&[], &["--s", "1", "--q", "1e-3", "--rays", "0"]),
            "--rays",
        ),
        (
            with(&[], &["--s", "1", "--q", "1e-3", "--bogus", "1"]),
            "--bogus",
        ),
        (with(&[], &["--lenses", "neg.csv"]), "neg.csv:3"),
        (with(&[], &["--lenses", "broken.csv"]), "broken.csv:3"),
        (with(&[], &["--lenses", "twin.csv"]), "twin.csv:3"),
        (with(&[], &["--lenses", "empty.csv"]), "empty.csv"),
        (with(&[], &["--lenses", "missing.csv"]), "missing.csv"),
        (
            with(&[], &["--s", "1", "--q", "1e-3", "--engine", "magic"]),
            "--engine",
        ),
        (with(&[("--pixels", "1000000")], &binary), "--pixels"),
        (
            with(
                &[("--pixels", "4000")],
                &["--s", "1", "--q", "1e-3", "--max-memory", "1M"],
            ),
            "--max-memory",
        ),
        (with(&[("--out", "m.txt")], &binary), "--out"),
    ];
    for (args, culprit) in cases {
        let (code, stderr) = map_in(&dir, &args.iter().map(String::as_str).collect::<Vec<_>>());
        assert_eq!(code, 2, "{args:?}: exit {code}, stderr {stderr}");
        assert!(
            stderr.contains(culprit),
            "{args:?}: message does not name {culprit}: {stderr}"
        );
        let lines = stderr.lines().filter(|l| !l.trim().is_empty()).count();
        // clap prints a usage hint after its one-line error; our own errors are one line.
        assert!(lines <= 4, "{args:?}: too long a message: {stderr}");
        let files = common::listing(&dir);
        assert_eq!(
            files,
            ["broken.csv", "empty.csv", "neg.csv", "twin.csv"],
            "{args:?} left files"
        );
    }
}

#[test]
fn negative_numbers_and_equals_forms_work_as_typed() {
    let dir = common::Scratch::new("cli-map-forms");
    let (code, stderr) = map_in(
        &dir,
        &[
            "--s=1.1",
            "--q",
            "1e-3",
            "--center",
            "-0.3,0.1",
            "--width=0.2",
            "--pixels",
            "8",
            "--out",
            "a.fits",
        ],
    );
    assert_eq!(code, 0, "{stderr}");
    // The closing line: what was traced and counted, and (a binary lies on the x axis) why
    // more can be counted than traced.
    assert!(
        stderr.contains(" traced ")
            && stderr.contains("counted in the window")
            && stderr.contains("mirror image"),
        "closing line missing: {stderr}"
    );
    assert!(dir.join("a.fits").exists());
}

const IMAGES: [&str; 6] = ["--s", "1", "--q", "1e-3", "--points", "points.csv"];

#[test]
fn thread_counts_above_four_per_logical_core_are_refused() {
    // The shared --threads option of every command: 1 to 4 x the logical cores.
    let dir = common::Scratch::new("cli-threads");
    let limit = 4 * std::thread::available_parallelism().unwrap().get();
    std::fs::write(dir.join("points.csv"), "x,y\n0.1,0\n").unwrap();
    std::fs::write(
        dir.join("grid.toml"),
        "s = [1.0]\nq = [1e-3]\npixels = 8\nrays = 5\n[window]\ncenter = [0.0, 0.0]\nwidth = 1.0\n",
    )
    .unwrap();
    let commands: [(&str, Vec<&str>); 4] = [
        ("map", [GOOD, &["--s", "1", "--q", "1e-3"]].concat()),
        ("images", IMAGES.to_vec()),
        (
            "contour",
            vec![
                "--s",
                "1",
                "--q",
                "1e-3",
                "--points",
                "points.csv",
                "--rho",
                "0.01",
            ],
        ),
        ("library", vec!["build", "grid.toml", "--store", "st"]),
    ];
    let too_many = (limit + 1).to_string();
    for (command, args) in &commands {
        for n in [too_many.as_str(), "100000", "0"] {
            let mut all = args.clone();
            all.extend(["--threads", n]);
            let (code, _, stderr) = common::run_cli(&dir, command, &all);
            assert_eq!(code, 2, "{command} --threads {n}: exit {code}, {stderr}");
            assert!(
                stderr.contains("--threads") && stderr.contains(&format!("1 to {limit}")),
                "{command} --threads {n}: {stderr}"
            );
            assert_eq!(stderr.trim().lines().count(), 1, "{stderr}");
        }
        assert_eq!(
            common::listing(&dir),
            ["grid.toml", "points.csv"],
            "{command}"
        );
    }
    // The limit itself is accepted.
    let limit = limit.to_string();
    let all = [&IMAGES[..], &["--threads", &limit]].concat();
    let (code, _, stderr) = common::run_cli(&dir, "images", &all);
    assert_eq!(code, 0, "{stderr}");
}
