//! `causeway compare`: the map curve against contour integration on a single-lens map.
//!
//! References: tests/reference/finite_source.csv (tests/reference/finite_source.py: Witt & Mao
//! 1994 closed form for the uniform disk, scipy.special); numpy.percentile (default linear
//! rule) for the summary's statistics; the straight-line convention of DESIGN.md.

use crate::common;

use causeway::engine::{Engine, RayShooting};
use causeway::lens::LensSystem;
use causeway::map::{write_fits, Window};
use std::path::Path;

/// Source radius of the reference rows used here.
const RHO: f64 = 0.02;

/// Writes a single-lens map to `dir/m.fits`: 200 px over [-0.1, 0.3] x [-0.2, 0.2] (pixel
/// 0.002 = rho / 10), 100 rays per pixel area.
fn write_single_lens_map(dir: &Path) {
    let window = Window::new((0.1, 0.0), 0.4, 200).unwrap();
    let map = RayShooting::new(100.0)
        .build(&LensSystem::single(), &window)
        .unwrap();
    write_fits(&map, &dir.join("m.fits")).unwrap();
}

/// Runs `causeway compare` with `args` in `dir`; returns (status, stdout, stderr).
fn compare_cli(dir: &Path, args: &[&str]) -> (i32, String, String) {
    common::run_cli(dir, "compare", args)
}

/// The CSV body as rows of fields (header checked against `header`).
fn rows<'a>(csv: &'a str, header: &str) -> Vec<Vec<&'a str>> {
    let mut lines = csv.lines();
    assert_eq!(lines.next(), Some(header));
    lines.map(|l| l.split(',').collect()).collect()
}

fn num(field: &str) -> f64 {
    field
        .parse()
        .unwrap_or_else(|_| panic!("not a number: {field}"))
}

#[test]
fn contour_column_matches_witt_mao_and_the_summary_matches_the_table() {
    let dir = common::Scratch::new("compare-path");
    write_single_lens_map(&dir);
    let reference = common::reference(
        "finite_source.csv",
        &["law", "ld_a", "ld_b", "u", "rho", "magnification"],
    );
    // Uniform disks of radius RHO at u = 0 ... 1 on the x axis; u = 0.5 and 1 lie off the map.
    let cases: Vec<(f64, f64)> = reference
        .rows
        .iter()
        .filter(|r| r[0] == 0.0 && r[4] == RHO)
        .map(|r| (r[3], r[5]))
        .collect();
    assert_eq!(cases.len(), 8);
    let mut path = String::from("t,x,y\n");
    for (k, (u, _)) in cases.iter().enumerate() {
        path.push_str(&format!("{},{u},0\n", 10 * k));
    }
    std::fs::write(dir.join("path.csv"), path).unwrap();
    let (code, out, err) = compare_cli(
        &dir,
        &[
            "--map", "m.fits", "--path", "path.csv", "--rho", "0.02", "--tol", "1e-6",
        ],
    );
    assert_eq!(code, 0, "{err}");
    let table = rows(
        &out,
        "t,x,y,map,error,contour,contour_error,relative_error,method",
    );
    assert_eq!(table.len(), cases.len());
    let mut errors = Vec::new();
    let recomputed = table.iter().filter(|r| r[8] == "contour").count();
    for (row, &(u, expect)) in table.iter().zip(&cases) {
        assert_eq!((num(row[1]), num(row[2])), (u, 0.0));
        let (map, error, contour, contour_error, relative) = (
            num(row[3]),
            num(row[4]),
            num(row[5]),
            num(row[6]),
            num(row[7]),
        );
        // Witt & Mao 1994 (scipy.special): contour integration asked for 1e-6 relative; its
        // error estimate is allowed a factor 10.
        assert!(
            (contour / expect - 1.0).abs() < 1e-5,
            "u = {u}: contour {contour} vs Witt & Mao {expect}"
        );
        assert!(contour_error >= 0.0 && contour_error <= 1e-5 * contour);
        // The column is |map/contour - 1| of the printed (round-trip) numbers, exactly.
        assert_eq!(relative, (map / contour - 1.0).abs(), "u = {u}");
        // The map read at the same point: loosely the same number (the map's own accuracy is
        // checked in tests/integration/curve.rs).
        assert!(relative < 0.01, "u = {u}: map {map} vs contour {contour}");
        // On the map: read, or recomputed by contour integration where the read's estimate
        // exceeds the default tolerance 1e-3 (at the lens).
        let methods: &[&str] = if u + RHO <= 0.3 {
            &["direct", "contour"]
        } else {
            &["expansion"]
        };
        assert!(methods.contains(&row[8]), "u = {u}: {}", row[8]);
        // The map value is within its stated error, and that within the default 1e-3.
        assert!((map - contour).abs() <= error + contour_error, "u = {u}");
        assert!(error <= 1e-3 * map, "u = {u}");
        errors.push(relative);
    }
    // The summary: numpy.percentile (linear rule) of the column, and the largest with its t.
    let args: Vec<String> = errors.iter().map(|e| format!("{e:e}")).collect();
    let args: Vec<&str> = args.iter().map(String::as_str).collect();
    let stats = common::run_python(
        "import sys, numpy as np\n\
         e = np.array([float(a) for a in sys.argv[1:]])\n\
         print(repr(float(np.percentile(e, 50))), repr(float(np.percentile(e, 99))), repr(float(e.max())), e.argmax())",
        &args,
    );
    let fields: Vec<&str> = stats.split_whitespace().collect();
    let [median, p99, max] = [0, 1, 2].map(|k| num(fields[k]));
    let at = &table[fields[3].parse::<usize>().unwrap()];
    let summary = err.trim();
    assert_eq!(summary.lines().count(), 1, "{err}");
    let expected = format!(
        "relative error map vs contour: median {median:.3e}, 99th percentile {p99:.3e}, largest \
         {max:.3e} at t = {} (x = {}, y = {}); {recomputed} of 8 recomputed by contour \
         integration, 0 outside their stated error",
        at[0], at[1], at[2]
    );
    assert_eq!(summary, expected);
}

#[test]
fn straight_trajectory_has_times_and_a_two_chart_picture() {
    let dir = common::Scratch::new("compare-line");
    write_single_lens_map(&dir);
    // t0 = 1, u0 = 0.05, tE = 20, alpha = 90 degrees: the source at (-u0, (t - t0)/tE)
    // (DESIGN.md: (tau cos a - u0 sin a, tau sin a + u0 cos a)).
    let (code, out, err) = compare_cli(
        &dir,
        &[
            "--map",
            "m.fits",
            "--t0",
            "1",
            "--u0",
            "0.05",
            "--te",
            "20",
            "--alpha",
            "90",
            "--time-range",
            "-1,3,5",
            "--rho",
            "0.01",
            "--ld",
            "0.6",
            "--png",
            "c.png",
            "--curve-tol",
            "0.05",
        ],
    );
    assert_eq!(code, 0, "{err}");
    let table = rows(
        &out,
        "t,x,y,map,error,contour,contour_error,relative_error,method",
    );
    assert_eq!(table.len(), 5);
    for (k, row) in table.iter().enumerate() {
        let t = -1.0 + k as f64;
        let tau = (t - 1.0) / 20.0;
        assert_eq!(num(row[0]), t);
        assert!((num(row[1]) + 0.05).abs() < 1e-15 && (num(row[2]) - tau).abs() < 1e-15);
        // Auto's read, by the cost of these five points: either is a map read.
        assert!(matches!(row[8], "direct" | "convolved"), "{}", row[8]);
    }
    assert!(
        err.contains("relative error map vs contour: median "),
        "{err}"
    );
    let png = image::open(dir.join("c.png")).unwrap();
    assert!(png.height() > png.width(), "two charts stacked");
}

#[test]
fn bad_input_is_one_line_exit_2_and_nothing_written() {
    let dir = common::Scratch::new("compare-bad");
    write_single_lens_map(&dir);
    std::fs::write(dir.join("path.csv"), "x,y\n0.1,0\n0.2,oops\n").unwrap();
    std::fs::write(dir.join("good.csv"), "x,y\n0.1,0\n").unwrap();
    std::fs::write(dir.join("junk.fits"), "not a FITS file").unwrap();
    let png = ["--png", "c.png"];
    let cases: [(&[&str], &str); 9] = [
        (
            &[
                "--map",
                "m.fits",
                "--path",
                "good.csv",
                "--curve-tol",
                "nan",
            ],
            "--curve-tol",
        ),
        (&["--map", "m.fits", "--path", "path.csv"], "path.csv:3"),
        (
            &["--map", "nothere.fits", "--path", "good.csv"],
            "nothere.fits",
        ),
        (&["--map", "junk.fits", "--path", "good.csv"], "junk.fits"),
        (
            &["--map", "m.fits", "--path", "good.csv", "--rho", "-1"],
            "--rho",
        ),
        (
            &[
                "--map", "m.fits", "--path", "good.csv", "--rho", "0.01", "--tol", "0.5",
            ],
            "--tol",
        ),
        (
            &["--map", "m.fits", "--path", "good.csv", "--ld", "1.5"],
            "--ld",
        ),
        (
            &[
                "--map", "m.fits", "--t0", "0", "--u0", "0.1", "--te", "10", "--alpha", "0",
            ],
            "--time-range",
        ),
        (
            &["--map", "m.fits", "--path", "good.csv", "--png", "c.jpg"],
            "--png",
        ),
    ];
    for (extra, culprit) in cases {
        let args: Vec<&str> = extra.iter().chain(png.iter()).copied().collect();
        // The last --png wins only when the case gives none; keep the case's own.
        let args = if extra.contains(&"--png") {
            extra.to_vec()
        } else {
            args
        };
        let (code, out, err) = compare_cli(&dir, &args);
        assert_eq!(code, 2, "{args:?}: {err}");
        assert!(out.is_empty(), "{args:?}: {out}");
        assert_eq!(err.trim().lines().count(), 1, "{err}");
        assert!(err.contains(culprit), "{args:?}: {err}");
    }
    assert_eq!(
        common::listing(&dir),
        vec!["good.csv", "junk.fits", "m.fits", "path.csv"]
    );
}
