//! `causeway images` and `causeway caustics` from the outside: output columns and order, bad
//! input (one line naming the culprit, exit status 2, no file written).

use crate::common;

use causeway::lens::LensSystem;
use causeway::table::Table;
use num_complex::Complex64;
use std::path::Path;

fn run_in(dir: &Path, args: &[&str]) -> (i32, String, String) {
    let out = common::causeway()
        .current_dir(dir)
        .args(args)
        .output()
        .unwrap();
    (
        out.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&out.stdout).into_owned(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

#[test]
fn images_prints_one_row_per_source_in_order() {
    let dir = common::Scratch::new("cli-images");
    std::fs::write(
        dir.join("p.csv"),
        "x,y,note\n0.1,-0.05,7\n# a comment\n-0.8,0.3,1\n1.5,0,2\n",
    )
    .unwrap();
    let (code, out, err) = run_in(
        &dir,
        &["images", "--s", "1", "--q=1e-2", "--points", "p.csv"],
    );
    assert_eq!(code, 0, "{err}");
    let t = Table::parse(&out, "stdout", &["x", "y", "magnification", "images"], &[]).unwrap();
    assert!(out.starts_with("x,y,magnification,images\n"));
    assert_eq!(t.rows.len(), 3);
    let lens = LensSystem::binary(1.0, 1e-2).unwrap();
    for (row, (x, y)) in t.rows.iter().zip([(0.1, -0.05), (-0.8, 0.3), (1.5, 0.0)]) {
        assert_eq!((row[0], row[1]), (x, y));
        let images = causeway::solve::images(&lens, Complex64::new(x, y)).unwrap();
        let a: f64 = images.iter().map(|i| i.magnification).sum();
        assert_eq!(row[2], a);
        assert_eq!(row[3] as usize, images.len());
    }
    // --all: one row per image, the per-image magnifications summing to the total.
    let (code, out, err) = run_in(
        &dir,
        &[
            "images", "--s", "1", "--q", "1e-2", "--points", "p.csv", "--all",
        ],
    );
    assert_eq!(code, 0, "{err}");
    let cols = [
        "point",
        "x",
        "y",
        "image_x",
        "image_y",
        "parity",
        "magnification",
    ];
    let all = Table::parse(&out, "stdout", &cols, &[]).unwrap();
    for (k, row) in t.rows.iter().enumerate() {
        let mine: Vec<&Vec<f64>> = all.rows.iter().filter(|r| r[0] == (k + 1) as f64).collect();
        assert_eq!(mine.len(), row[3] as usize);
        let sum: f64 = mine.iter().map(|r| r[6]).sum();
        assert!((sum - row[2]).abs() < 1e-12 * row[2]);
        let parity: f64 = mine.iter().map(|r| r[5]).sum();
        assert_eq!(parity, -1.0);
    }
}

#[test]
fn images_bad_input_exits_2() {
    let dir = common::Scratch::new("cli-images-bad");
    std::fs::write(dir.join("p.csv"), "x,y\n0.1,0\n0.2,oops\n").unwrap();
    std::fs::write(dir.join("good.csv"), "x,y\n0.1,0\n").unwrap();
    let five: String = (0..5)
        .map(|i| format!("{},0,1\n", i as f64 * 0.4))
        .collect();
    std::fs::write(dir.join("five.csv"), format!("x,y,mass\n{five}")).unwrap();
    for (args, culprit) in [
        (
            vec!["--s", "1", "--q", "1e-3", "--points", "p.csv"],
            "p.csv:3",
        ),
        (
            vec!["--s", "1", "--q", "1e-3", "--points", "none.csv"],
            "none.csv",
        ),
        (vec!["--s", "1", "--q", "-1", "--points", "good.csv"], "--q"),
        (
            vec!["--lenses", "five.csv", "--points", "good.csv"],
            "at most 4",
        ),
    ] {
        let mut a = vec!["images"];
        a.extend(args);
        let (code, out, err) = run_in(&dir, &a);
        assert_eq!(code, 2, "{a:?}: {err}");
        assert!(out.is_empty());
        assert!(err.contains(culprit), "{a:?}: {err}");
        assert_eq!(err.trim().lines().count(), 1, "{err}");
    }
}

#[test]
fn caustics_writes_csv_and_png() {
    let dir = common::Scratch::new("cli-caustics");
    let (code, _, err) = run_in(
        &dir,
        &[
            "caustics", "--s", "0.6", "--q", "1", "--out", "c.csv", "--png", "c.png",
        ],
    );
    assert_eq!(code, 0, "{err}");
    assert!(err.contains("topology: close"), "{err}");
    let text = std::fs::read_to_string(dir.join("c.csv")).unwrap();
    assert!(text.starts_with("curve,x,y,kind\n"));
    let t = Table::parse(&text, "c.csv", &["curve", "x", "y"], &[]).unwrap();
    let curves: std::collections::BTreeSet<i64> = t.rows.iter().map(|r| r[0] as i64).collect();
    assert_eq!(curves.into_iter().collect::<Vec<_>>(), vec![1, 2, 3]);
    let kinds: std::collections::BTreeSet<&str> = text
        .lines()
        .skip(1)
        .map(|l| l.rsplit(',').next().unwrap())
        .collect();
    assert_eq!(
        kinds.into_iter().collect::<Vec<_>>(),
        vec!["caustic", "critical"]
    );
    let png = image::open(dir.join("c.png")).unwrap();
    assert!(png.width() >= 400 && png.height() >= 300);
    assert_eq!(common::listing(&dir), vec!["c.csv", "c.png"]);
}

#[test]
fn caustics_bad_input_exits_2_and_writes_nothing() {
    let dir = common::Scratch::new("cli-caustics-bad");
    for (args, culprit) in [
        (vec!["--s", "1", "--q", "0", "--out", "c.csv"], "--q"),
        (
            vec!["--s", "1", "--q", "1", "--out", "no/such/c.csv"],
            "no/such",
        ),
        (
            vec!["--s", "1", "--q", "1", "--out", "c.csv", "--max-chord", "0"],
            "--max-chord",
        ),
        (vec!["--s", "1", "--q", "1"], "--out"),
    ] {
        let mut a = vec!["caustics"];
        a.extend(args);
        let (code, _, err) = run_in(&dir, &a);
        assert_eq!(code, 2, "{a:?}: {err}");
        assert!(err.contains(culprit), "{a:?}: {err}");
    }
    assert!(common::listing(&dir).is_empty());
}
