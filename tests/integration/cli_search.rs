//! The `simulate` and `search` commands from the command line: a small library, the table of
//! minima, the pictures, and bad input.

use crate::common;

use common::{run_cli, Scratch};
use std::path::Path;

const LIBRARY: &str = "s = [1.25, 1.35]\nq = [2e-3, 4e-3]\npixels = 200\nrays = 1\n\
    engine = \"polygon\"\n[window]\nrule = \"planetary\"\n";

/// Simulates the test event into `dir/event.csv`.
fn simulate(dir: &Path) {
    let (code, _, stderr) = run_cli(
        dir,
        "simulate",
        &[
            "--s",
            "1.3",
            "--q",
            "3e-3",
            "--rho",
            "0.01",
            "--t0",
            "0",
            "--u0",
            "0.15",
            "--te",
            "25",
            "--alpha",
            "343.56",
            "--time-range",
            "-50,50,200",
            "--out",
            "event.csv",
        ],
    );
    assert_eq!(code, 0, "{stderr}");
}

/// A quick search of the test event in `dir` over [`LIBRARY`], with `extra` options.
fn quick_search(dir: &Path, extra: &[&str]) -> (i32, String, String) {
    simulate(dir);
    std::fs::write(dir.join("lib.toml"), LIBRARY).unwrap();
    let mut args = vec![
        "event.csv",
        "--rho",
        "0.01",
        "--refine",
        "1",
        "--max-iters",
        "40",
        "--library",
        "lib.toml",
        "--store",
        "maps",
    ];
    args.extend(extra);
    run_cli(dir, "search", &args)
}

#[test]
fn search_writes_a_ranked_table_and_pictures() {
    let dir = Scratch::new("cli-search");
    let (code, csv, stderr) = quick_search(
        &dir,
        &[
            "--zoom",
            "1",
            "--chi2-map",
            "chi2.png",
            "--plot",
            "best.png",
            "--theta-star",
            "0.6",
            "--dl",
            "4",
            "--ds",
            "8",
        ],
    );
    assert_eq!(code, 0, "{stderr}");
    let mut lines = csv.lines();
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    for col in [
        "rank",
        "s",
        "s_err",
        "q",
        "chi2",
        "delta_chi2",
        "fs_1",
        "fb_1",
        "theta_E_mas",
    ] {
        assert!(header.contains(&col), "no column {col} in {header:?}");
    }
    let row: Vec<&str> = lines.next().unwrap().split(',').collect();
    let col = |name: &str| -> f64 {
        row[header.iter().position(|h| *h == name).unwrap()]
            .parse()
            .unwrap()
    };
    assert_eq!(col("rank"), 1.0);
    // theta_E = theta_star / rho (Gould 2000; the scales module is checked against astropy).
    assert!((col("theta_E_mas") - 6e-4 / col("rho")).abs() < 1e-9 * col("theta_E_mas"));
    // The single-lens chi^2 printed on stderr, less this chi^2, is delta_chi2.
    let single: f64 = stderr
        .lines()
        .find_map(|l| l.split("chi2 = ").nth(1))
        .and_then(|r| r.split(' ').next())
        .unwrap()
        .parse()
        .unwrap();
    assert!(
        (single - col("chi2") - col("delta_chi2")).abs() < 0.06,
        "{stderr}"
    );
    for png in ["chi2.png", "best.png"] {
        assert!(image::open(dir.join(png)).is_ok(), "{png}");
    }
    // stderr is not a terminal here: each stage says when it starts and what it did, in
    // plain lines a batch log keeps.
    for stage in ["library: started", "search: started", "refine: started"] {
        assert!(stderr.contains(stage), "no '{stage}' in {stderr}");
    }
    assert!(stderr.contains("search: 4 maps"), "{stderr}");
}

#[test]
fn bad_input_is_named_and_writes_nothing() {
    let dir = Scratch::new("cli-search-bad");
    simulate(&dir);
    std::fs::write(dir.join("lib.toml"), LIBRARY).unwrap();
    std::fs::write(
        dir.join("dup.csv"),
        "t,mag,mag_err\n1,19,0.01\n2,19,0.01\n1,19.1,0.01\n",
    )
    .unwrap();
    // The last two are caught by the option parser (clap), whose usage text is cut to the
    // one line that names the culprit.
    let cases: [(&[&str], &str); 10] = [
        (&["event.csv", "--exclude", "5,3"], "--exclude"),
        (&["event.csv", "--baseline", "0,0.1"], "--baseline"),
        (&["event.csv", "--clip", "1"], "--clip"),
        (&["dup.csv"], "dup.csv:4"),
        (&["event.csv", "--ld", "0.5,0.6"], "--ld"),
        (&["event.csv", "--rho", "-1"], "--rho"),
        (&["event.csv", "--refine", "0"], "--refine"),
        (&["event.csv", "--refine-within", "0.5"], "--refine-within"),
        (&["event.csv", "--keep", "three"], "--keep"),
        (&["event.csv", "--no-such-option"], "--no-such-option"),
    ];
    let common = [
        "--library",
        "lib.toml",
        "--store",
        "maps",
        "--out",
        "minima.csv",
    ];
    for (args, culprit) in cases {
        let all: Vec<&str> = args.iter().chain(&common).copied().collect();
        let (code, _, stderr) = run_cli(&dir, "search", &all);
        assert_eq!(code, 2, "{args:?}: {stderr}");
        assert!(stderr.contains(culprit), "{args:?}: {stderr}");
        assert_eq!(stderr.trim().lines().count(), 1, "{args:?}: {stderr}");
        assert!(!dir.join("minima.csv").exists());
    }
}

#[test]
fn the_baseline_can_be_given_and_times_excluded() {
    let dir = Scratch::new("cli-search-steer");
    let (code, csv, stderr) = quick_search(
        &dir,
        &[
            "--zoom",
            "0",
            "--exclude",
            "30,35",
            "--exclude=-45,-40",
            "--baseline",
            "0.5,0.16,24",
        ],
    );
    assert_eq!(code, 0, "{stderr}");
    // The given baseline is the search's seed, as given (its own numbers, not a fit's).
    assert!(
        stderr.contains("baseline: t0 = 0.5000, u0 = 0.16000, tE = 24.000 d"),
        "{stderr}"
    );
    assert!(csv.lines().count() >= 2, "{csv}");
}
