//! The `simulate` and `search` commands from the command line: a small library, the table of
//! minima, the pictures, and bad input.

mod common;

use common::{causeway, scratch};
use std::path::Path;

const LIBRARY: &str = "s = [1.25, 1.35]\nq = [2e-3, 4e-3]\npixels = 200\nrays = 1\n\
    engine = \"polygon\"\n[window]\nrule = \"planetary\"\n";

fn simulate(dir: &Path) -> std::path::PathBuf {
    let event = dir.join("event.csv");
    let out = causeway()
        .args([
            "simulate",
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
        ])
        .arg(&event)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    event
}

#[test]
fn search_writes_a_ranked_table_and_pictures() {
    let dir = scratch("cli-search");
    let event = simulate(&dir);
    std::fs::write(dir.join("lib.toml"), LIBRARY).unwrap();
    let out = causeway()
        .arg("search")
        .arg(&event)
        .args([
            "--rho",
            "0.01",
            "--refine",
            "1",
            "--max-iters",
            "40",
            "--library",
        ])
        .arg(dir.join("lib.toml"))
        .arg("--store")
        .arg(dir.join("maps"))
        .arg("--chi2-map")
        .arg(dir.join("chi2.png"))
        .arg("--plot")
        .arg(dir.join("best.png"))
        .args(["--theta-star", "0.6", "--dl", "4", "--ds", "8"])
        .output()
        .unwrap();
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(out.status.success(), "{stderr}");
    let csv = String::from_utf8(out.stdout).unwrap();
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
}

#[test]
fn bad_input_is_named_and_writes_nothing() {
    let dir = scratch("cli-search-bad");
    let event = simulate(&dir);
    std::fs::write(dir.join("lib.toml"), LIBRARY).unwrap();
    let dup = dir.join("dup.csv");
    std::fs::write(&dup, "t,mag,mag_err\n1,19,0.01\n2,19,0.01\n1,19.1,0.01\n").unwrap();
    let cases: Vec<(Vec<String>, &str)> = vec![
        (vec![dup.display().to_string()], "dup.csv:4"),
        (
            vec![event.display().to_string(), "--ld".into(), "0.5,0.6".into()],
            "--ld",
        ),
        (
            vec![event.display().to_string(), "--rho".into(), "-1".into()],
            "--rho",
        ),
        (
            vec![event.display().to_string(), "--refine".into(), "0".into()],
            "--refine",
        ),
    ];
    for (args, culprit) in cases {
        let out = causeway()
            .arg("search")
            .args(&args)
            .arg("--library")
            .arg(dir.join("lib.toml"))
            .arg("--store")
            .arg(dir.join("maps"))
            .arg("--out")
            .arg(dir.join("minima.csv"))
            .output()
            .unwrap();
        let stderr = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(2), "{args:?}: {stderr}");
        assert!(stderr.contains(culprit), "{args:?}: {stderr}");
        assert!(!dir.join("minima.csv").exists());
    }
}
