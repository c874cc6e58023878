//! Values at the edges that used to pass silently or wrongly (issue 13): each is now refused
//! with the culprit named, or computed right.

use crate::common::{causeway, Scratch};
use causeway::lens::LensSystem;
use causeway::map::{read_fits, write_fits};

/// Runs `causeway ARGS` in `dir`: exit code, stdout, stderr.
fn run(dir: &std::path::Path, args: &[&str]) -> (Option<i32>, String, String) {
    let out = causeway().args(args).current_dir(dir).output().unwrap();
    let text = |b: &[u8]| String::from_utf8_lossy(b).into_owned();
    (out.status.code(), text(&out.stdout), text(&out.stderr))
}

#[test]
fn masses_near_the_largest_float_are_normalised_without_overflow() {
    // Two equal masses are one half each, whatever their scale (the frame of DESIGN.md).
    let lens = LensSystem::new(&[(-0.5, 0.0, 1e308), (0.5, 0.0, 1e308)]).unwrap();
    for l in lens.lenses() {
        assert_eq!(l.mass, 0.5);
    }
    let small = LensSystem::new(&[(-0.5, 0.0, 1.0), (0.5, 0.0, 1.0)]).unwrap();
    let z = num_complex::Complex64::new(0.3, 0.2);
    assert_eq!(lens.jacobian_determinant(z), small.jacobian_determinant(z));
}

#[test]
fn a_byte_order_mark_is_not_part_of_the_header() {
    let dir = Scratch::new("edge-bom");
    std::fs::write(dir.join("plain.csv"), "x,y,mass\n0,0,1\n1,0,0.001\n").unwrap();
    std::fs::write(dir.join("bom.csv"), "\u{feff}x,y,mass\n0,0,1\n1,0,0.001\n").unwrap();
    let plain = LensSystem::read_csv(&dir.join("plain.csv")).unwrap();
    let bom = LensSystem::read_csv(&dir.join("bom.csv")).unwrap();
    assert_eq!(format!("{plain:?}"), format!("{bom:?}"));
}

#[test]
fn time_ranges_print_the_typed_precision() {
    let dir = Scratch::new("edge-times");
    let (code, out, err) = run(
        &dir,
        &[
            "curve",
            "--s",
            "1",
            "--q",
            "1e-3",
            "--t0",
            "0",
            "--u0",
            "0.1",
            "--te",
            "20",
            "--alpha",
            "30",
            "--time-range",
            "2.72,10.72,801",
        ],
    );
    assert_eq!(code, Some(0), "{err}");
    let times: Vec<&str> = out
        .lines()
        .skip(1)
        .map(|l| l.split(',').next().unwrap())
        .collect();
    assert_eq!(times.len(), 801);
    // 2.72 + k * 0.01, printed as typed: at most two decimals.
    for (k, t) in times.iter().enumerate() {
        let expected = (272 + k) as f64 / 100.0;
        assert_eq!(t.parse::<f64>().unwrap(), expected, "{t}");
        assert!(t.split('.').nth(1).is_none_or(|d| d.len() <= 2), "{t}");
    }
}

#[test]
fn library_verify_fails_a_map_with_a_non_finite_pixel_and_a_valid_checksum() {
    let dir = Scratch::new("edge-verify");
    let spec = "s = [1.0]\nq = [1e-3]\npixels = 16\nrays = 4\n[window]\ncenter = [0.0, 0.0]\n\
                width = 1.0\n";
    std::fs::write(dir.join("lib.toml"), spec).unwrap();
    let (code, _, err) = run(&dir, &["library", "build", "lib.toml", "--store", "st"]);
    assert_eq!(code, Some(0), "{err}");
    let file = std::fs::read_dir(dir.join("st"))
        .unwrap()
        .map(|e| e.unwrap().path())
        .find(|p| p.extension().is_some_and(|e| e == "fits"))
        .unwrap();
    let mut map = read_fits(&file).unwrap();
    map.data[[2, 7]] = f32::NAN;
    write_fits(&map, &file).unwrap(); // a fresh checksum over the damaged pixels
    let err = read_fits(&file).unwrap_err().to_string();
    assert!(err.contains("pixel (8, 3)"), "{err}");
    let (code, out, err) = run(&dir, &["library", "verify", "--store", "st"]);
    assert_ne!(code, Some(0), "{out}{err}");
    assert!(out.contains("pixel (8, 3)"), "{out}");
}

#[test]
fn library_build_check_validates_and_builds_nothing() {
    let dir = Scratch::new("edge-check");
    let spec = "s = { log = [0.5, 2.0, 5] }\nq = [1e-3, 1e-2]\npixels = 200\nrays = 4\n\
                [window]\ncenter = [0.0, 0.0]\nwidth = 1.0\n";
    std::fs::write(dir.join("lib.toml"), spec).unwrap();
    let (code, _, err) = run(&dir, &["library", "build", "lib.toml", "--check"]);
    assert_eq!(code, Some(0), "{err}");
    assert!(
        err.contains("10 maps") && err.contains("nothing built"),
        "{err}"
    );
    let left: Vec<_> = std::fs::read_dir(&*dir).unwrap().collect();
    assert_eq!(left.len(), 1, "only the spec: {left:?}");
}

#[test]
fn binaries_outside_the_traced_range_are_refused_with_the_range() {
    for (s, q, culprit) in [(1000.0, 1e-3, "s "), (1e-3, 1e-3, "s "), (1.0, 1e-12, "q ")] {
        let err = LensSystem::binary(s, q).unwrap_err().to_string();
        assert!(err.starts_with(culprit) && err.contains("1e2"), "{err}");
    }
    assert!(LensSystem::binary(100.0, 1e-10).is_ok());
}
