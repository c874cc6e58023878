//! The `curve` command: its table, the store it reuses, map and path files, bad input.

use super::paczynski;
use crate::common;

/// Runs `causeway curve` with `args` in `dir`; returns (status, stdout, stderr).
fn curve_cli(dir: &std::path::Path, args: &[&str]) -> (i32, String, String) {
    common::run_cli(dir, "curve", args)
}

#[test]
fn cli_prints_the_curve_with_methods_and_reuses_the_stored_map() {
    let dir = common::Scratch::new("curve-cli");
    std::fs::write(dir.join("single.csv"), "x,y,mass\n0,0,1\n").unwrap();
    let args = [
        "--lenses",
        "single.csv",
        "--t0",
        "10",
        "--u0",
        "-0.01",
        "--te",
        "20",
        "--alpha",
        "90",
        "--time-range",
        "0,20,41",
        "--rho",
        "0.02",
        "--fs",
        "2",
        "--fb",
        "0.5",
        "--store",
        "st",
        "--rays",
        "100",
        "--png",
        "c.png",
    ];
    let (code, out, err) = curve_cli(&dir, &args);
    assert_eq!(code, 0, "{err}");
    assert!(err.contains("building a map"), "{err}");
    let lines: Vec<&str> = out.lines().collect();
    assert_eq!(lines[0], "t,x,y,magnification,error,method,flux,magnitude");
    assert_eq!(lines.len(), 42);
    let t = causeway::table::Table::parse(
        &out,
        "stdout",
        &["t", "x", "y", "magnification", "flux", "magnitude"],
        &[],
    )
    .unwrap();
    for (row, line) in t.rows.iter().zip(&lines[1..]) {
        let (tt, x, y, a, flux, mag) = (row[0], row[1], row[2], row[3], row[4], row[5]);
        // alpha = 90 deg, u0 = -0.01: the source moves along +y at x = +0.01 (DESIGN.md).
        assert!((x - 0.01).abs() < 1e-15 && (y - (tt - 10.0) / 20.0).abs() < 1e-15);
        assert!((flux - (2.0 * a + 0.5)).abs() < 1e-12 * flux);
        // Default zero point 22 (src/cli/curve.rs).
        assert!((mag - (22.0 - 2.5 * flux.log10())).abs() < 1e-12);
        let method = line.rsplit(',').nth(2).unwrap();
        let u = x.hypot(y);
        // Near the lens the map serves the curve (or, where its estimate exceeds the default
        // tolerance 1e-3, contour integration), far away the expansion does.
        if u < 0.03 {
            assert!(
                ["direct", "convolved", "contour"].contains(&method),
                "{line}"
            );
        }
        let error: f64 = line.split(',').nth(4).unwrap().parse().unwrap();
        assert!(error <= 1e-3 * a, "{line}");
        if u > 0.3 {
            assert_eq!(method, "expansion", "{line}");
        }
    }
    // Far from the lens the finite-source effect is small: at u = 0.5 Witt & Mao differs from
    // Paczynski by 2e-4 (finite_source.csv), so the curve must be within 1e-3 of Paczynski.
    let row = t.rows.iter().find(|r| (r[2] - 0.5).abs() < 1e-9).unwrap();
    let point = paczynski(row[1].hypot(row[2]));
    assert!((row[3] / point - 1.0).abs() < 1e-3, "{} vs {point}", row[3]);
    assert!(dir.join("c.png").exists());
    // The same command again reuses the stored map, and prints the same curve.
    let (code, again, err) = curve_cli(&dir, &args);
    assert_eq!(code, 0, "{err}");
    assert!(err.contains("using stored map"), "{err}");
    assert_eq!(again, out);
}

#[test]
fn cli_reads_a_map_file_and_a_path_file() {
    let dir = common::Scratch::new("curve-map");
    let status = common::causeway()
        .args([
            "map",
            "--lenses",
            "single.csv",
            "--center",
            "0.3,0",
            "--width",
            "0.2",
            "--pixels",
            "50",
            "--rays",
            "100",
            "--out",
            "m.fits",
        ])
        .current_dir({
            std::fs::write(dir.join("single.csv"), "x,y,mass\n0,0,1\n").unwrap();
            &dir
        })
        .status()
        .unwrap();
    assert!(status.success());
    std::fs::write(dir.join("path.csv"), "x,y\n0.3,0\n0.31,0.01\n").unwrap();
    let (code, out, err) = curve_cli(
        &dir,
        &[
            "--map", "m.fits", "--path", "path.csv", "--rho", "0.02", "--tol", "0.01",
        ],
    );
    assert_eq!(code, 0, "{err}");
    let lines: Vec<&str> = out.lines().collect();
    assert_eq!(lines[0], "x,y,magnification,error,method");
    assert!(
        lines[1].starts_with("0.3,0,") && lines[1].ends_with(",direct"),
        "{}",
        lines[1]
    );
    // Witt & Mao at u = 0.3, rho = 0.02: within a percent of Paczynski's 3.4 here.
    let a: f64 = lines[1].split(',').nth(2).unwrap().parse().unwrap();
    assert!((a / paczynski(0.3) - 1.0).abs() < 0.01, "{a}");
}

#[test]
fn cli_bad_input_is_one_line_exit_2_and_no_output() {
    let dir = common::Scratch::new("curve-bad");
    std::fs::write(dir.join("single.csv"), "x,y,mass\n0,0,1\n").unwrap();
    std::fs::write(dir.join("path.csv"), "x,y\n0.3,0\n0.4,oops\n").unwrap();
    let base = ["--lenses", "single.csv", "--store", "st"];
    let cases: [(&[&str], &str); 6] = [
        (&["--path", "path.csv", "--rho", "0.01"], "path.csv:3"),
        (&["--path", "p.csv", "--rho", "-1"], "--rho"),
        (
            &[
                "--t0",
                "0",
                "--u0",
                "0.1",
                "--te",
                "10",
                "--alpha",
                "0",
                "--time-range",
                "0,1,5",
                "--ld",
                "1.5",
            ],
            "--ld",
        ),
        (
            &[
                "--t0",
                "0",
                "--u0",
                "0.1",
                "--te",
                "10",
                "--alpha",
                "0",
                "--time-range",
                "0,1,5",
                "--ld-sqrt",
                "0.5,-0.1",
            ],
            "--ld-sqrt",
        ),
        (
            &[
                "--t0",
                "0",
                "--u0",
                "0.1",
                "--te",
                "0",
                "--alpha",
                "0",
                "--time-range",
                "0,1,5",
            ],
            "--te",
        ),
        (
            &["--t0", "0", "--u0", "0.1", "--te", "10", "--alpha", "0"],
            "--time-range",
        ),
    ];
    for (extra, culprit) in cases {
        let args: Vec<&str> = base.iter().chain(extra.iter()).copied().collect();
        let (code, out, err) = curve_cli(&dir, &args);
        assert_eq!(code, 2, "{args:?}: {err}");
        assert!(out.is_empty(), "{args:?}: {out}");
        assert_eq!(err.trim().lines().count(), 1, "{err}");
        assert!(err.contains(culprit), "{args:?}: {err}");
    }
    assert_eq!(common::listing(&dir), vec!["path.csv", "single.csv"]);
}
