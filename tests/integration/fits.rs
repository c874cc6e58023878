//! FITS map files: round trip through our writer and the fitsrs-based reader, and an independent
//! check of the same files with astropy (FITS Standard 4.0 verification, the checksum convention
//! of Seaman et al. 2002, and astropy.wcs for the pixel-to-world transform).
//!
//! Python: `CAUSEWAY_PYTHON`, else `<crate root>/.venv/bin/python`, with astropy installed.

use crate::common::Scratch;
use causeway::engine::{Engine, PolygonMapping};
use causeway::lens::LensSystem;
use causeway::map::{read_fits, write_fits, MagnificationMap, Provenance, Window};
use std::collections::HashMap;
use std::path::{Path, PathBuf};
use std::process::Command;

/// A map made by hand: the point-lens magnification A(u) = (u^2+2)/(u sqrt(u^2+4))
/// (Paczynski 1986) at each pixel centre, an odd window that is not centred on the origin, and
/// a pixel count whose data do not fill whole 2880-byte blocks.
fn test_map(lens: LensSystem, pixels: usize) -> MagnificationMap {
    let window = Window::new((-0.123456789012345, 0.0472), 0.777, pixels).unwrap();
    let data = ndarray::Array2::from_shape_fn((pixels, pixels), |(iy, ix)| {
        let (x, y) = window.pixel_center(ix, iy);
        let u2 = x * x + y * y;
        ((u2 + 2.0) / (u2.sqrt() * (u2 + 4.0).sqrt())) as f32
    });
    let provenance = Provenance {
        lens,
        engine: "hand-made".into(),
        density: 123.456_789_012_345_67,
        rays_shot: 9_000_000_000_123,
        rays_landed: 1_234_567_890_123,
        version: "0.1.0".into(),
        build_time: "2026-12-01T19:30:05".into(),
        build_seconds: 0.1 + 0.2,
        certificate: None,
    };
    MagnificationMap {
        window,
        data,
        provenance,
    }
}

fn binary_map() -> MagnificationMap {
    test_map(LensSystem::binary(1.1, 0.3).unwrap(), 37)
}

fn triple_map() -> MagnificationMap {
    let lens = LensSystem::new(&[(-0.3, 0.0, 1.0), (0.9, 0.1, 0.01), (1.3, -0.4, 0.003)]).unwrap();
    test_map(lens, 16)
}

#[test]
fn binary_map_round_trips_exactly() {
    let dir = Scratch::new("binary");
    let path = dir.join("binary.fits");
    let map = binary_map();
    write_fits(&map, &path).unwrap();
    let back = read_fits(&path).unwrap();
    assert_eq!(back.window, map.window);
    assert_eq!(back.data.dim(), map.data.dim());
    for ((i, a), b) in map.data.indexed_iter().zip(back.data.iter()) {
        assert_eq!(a.to_bits(), b.to_bits(), "pixel {i:?}");
    }
    // Everything, including the lens built again from (s, q), is identical.
    assert_eq!(back.provenance, map.provenance);
    assert_eq!(back.provenance.lens.binary_parameters(), Some((1.1, 0.3)));
    // The whole file has whole blocks: 2880-byte header blocks plus ceil(37*37*4/2880) = 2.
    let len = std::fs::metadata(&path).unwrap().len() as usize;
    assert_eq!(len % 2880, 0);
}

#[test]
fn general_lens_round_trips() {
    let dir = Scratch::new("triple");
    let path = dir.join("triple.fits");
    let map = triple_map();
    write_fits(&map, &path).unwrap();
    let back = read_fits(&path).unwrap();
    assert_eq!(back.window, map.window);
    assert_eq!(back.data, map.data);
    let (p, q) = (&map.provenance, &back.provenance);
    assert_eq!(q.lens.binary_parameters(), None);
    assert_eq!(q.lens.len(), 3);
    for (a, b) in p.lens.lenses().iter().zip(q.lens.lenses()) {
        assert_eq!(a.position, b.position);
        // LensSystem::new normalises the masses again: equal up to that division's round-off.
        assert!(
            (a.mass - b.mass).abs() <= 2.0 * f64::EPSILON * a.mass,
            "{a:?} {b:?}"
        );
    }
    assert_eq!(
        (q.engine.as_str(), q.density, q.rays_shot, q.rays_landed),
        (p.engine.as_str(), p.density, p.rays_shot, p.rays_landed)
    );
    assert_eq!(
        (q.version.as_str(), q.build_time.as_str(), q.build_seconds),
        (p.version.as_str(), p.build_time.as_str(), p.build_seconds)
    );
}

/// Header cards of a file, by keyword, up to END.
fn cards(bytes: &[u8]) -> Vec<String> {
    let mut out = Vec::new();
    for card in bytes.chunks(80) {
        let text = String::from_utf8(card.to_vec()).unwrap();
        if text.starts_with("END ") {
            return out;
        }
        out.push(text);
    }
    panic!("no END card");
}

#[test]
fn writing_is_deterministic_apart_from_build_time() {
    let dir = Scratch::new("determinism");
    let (a, b, c) = (dir.join("a.fits"), dir.join("b.fits"), dir.join("c.fits"));
    let map = binary_map();
    write_fits(&map, &a).unwrap();
    write_fits(&map, &b).unwrap();
    assert_eq!(std::fs::read(&a).unwrap(), std::fs::read(&b).unwrap());
    let mut later = map.clone();
    later.provenance.build_time = "2027-01-01T00:00:00".into();
    later.provenance.build_seconds = 12.5;
    write_fits(&later, &c).unwrap();
    let (ca, cc) = (
        cards(&std::fs::read(&a).unwrap()),
        cards(&std::fs::read(&c).unwrap()),
    );
    assert_eq!(ca.len(), cc.len());
    let differing: Vec<&str> = ca
        .iter()
        .zip(&cc)
        .filter(|(x, y)| x != y)
        .map(|(x, _)| x[..8].trim_end())
        .collect();
    assert_eq!(differing, ["DATE", "BUILDSEC", "CHECKSUM"]);
}

#[test]
fn bad_files_give_one_line_errors_naming_file_and_keyword() {
    let dir = Scratch::new("errors");
    let path = dir.join("edited.fits");
    write_fits(&binary_map(), &path).unwrap();
    let mut bytes = std::fs::read(&path).unwrap();
    // Blank the ENGINE card, and the checksum cards so that only the missing keyword is wrong.
    let header_cards = cards(&bytes).len();
    for k in 0..header_cards {
        let key = String::from_utf8(bytes[80 * k..80 * k + 8].to_vec()).unwrap();
        if ["ENGINE  ", "CHECKSUM", "DATASUM "].contains(&key.as_str()) {
            bytes[80 * k..80 * (k + 1)].fill(b' ');
        }
    }
    std::fs::write(&path, &bytes).unwrap();
    let err = read_fits(&path).unwrap_err();
    let msg = err.to_string();
    assert!(
        msg.contains("edited.fits") && msg.contains("ENGINE"),
        "{msg}"
    );
    assert!(!msg.contains('\n'));
    assert_eq!(err.exit_code(), 2);

    let junk = dir.join("junk.fits");
    std::fs::write(&junk, b"this is not a FITS file").unwrap();
    let msg = read_fits(&junk).unwrap_err().to_string();
    assert!(msg.starts_with(&junk.display().to_string()), "{msg}");

    let truncated = dir.join("truncated.fits");
    write_fits(&binary_map(), &truncated).unwrap();
    let bytes = std::fs::read(&truncated).unwrap();
    std::fs::write(&truncated, &bytes[..bytes.len() - 2880]).unwrap();
    let msg = read_fits(&truncated).unwrap_err().to_string();
    assert!(msg.contains("truncated"), "{msg}");

    let missing = dir.join("missing.fits");
    assert_eq!(read_fits(&missing).unwrap_err().exit_code(), 2);
}

#[test]
fn a_map_that_cannot_be_written_leaves_no_file() {
    let dir = Scratch::new("unwritable");
    let path = dir.join("bad.fits");
    let mut map = binary_map();
    map.provenance.density = f64::NAN;
    let msg = write_fits(&map, &path).unwrap_err().to_string();
    assert!(msg.contains("DENSITY"), "{msg}");
    let mut map = binary_map();
    map.data = ndarray::Array2::zeros((3, 4));
    assert!(write_fits(&map, &path).is_err());
    assert_eq!(std::fs::read_dir(&dir).unwrap().count(), 0);
}

// ---- astropy -------------------------------------------------------------------------------

/// The Python interpreter for the astropy checks: `CAUSEWAY_PYTHON`, else the crate's `.venv`.
fn python() -> PathBuf {
    let candidate = std::env::var_os("CAUSEWAY_PYTHON")
        .map(PathBuf::from)
        .unwrap_or_else(|| Path::new(env!("CARGO_MANIFEST_DIR")).join(".venv/bin/python"));
    let works = Command::new(&candidate)
        .args(["-c", "import astropy.io.fits, astropy.wcs"])
        .output()
        .is_ok_and(|o| o.status.success());
    assert!(
        works,
        "no Python with astropy at {}: set CAUSEWAY_PYTHON to an interpreter with astropy",
        candidate.display()
    );
    candidate
}

/// Runs tests/python/fits_verify.py with `args`; returns its records split on commas.
fn astropy_records(args: &[&Path]) -> Vec<Vec<String>> {
    python_records("fits_verify.py", args)
}

/// Runs the script `name` of tests/python with `args`; returns its records split on commas.
pub(crate) fn python_records(name: &str, args: &[&Path]) -> Vec<Vec<String>> {
    let script = Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("tests/python")
        .join(name);
    let out = Command::new(python())
        .arg(script)
        .args(args)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "astropy rejected {args:?}: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    String::from_utf8(out.stdout)
        .unwrap()
        .lines()
        .map(|l| l.split(',').map(str::to_string).collect())
        .collect()
}

/// (verify_checksum(), verify_datasum()) per file, in order.
fn astropy_sums(files: &[&Path]) -> Vec<(String, String)> {
    let mut args = vec![Path::new("--sums-only")];
    args.extend_from_slice(files);
    let sums: Vec<_> = astropy_records(&args)
        .into_iter()
        .map(|r| {
            assert_eq!(r[0], "checksum");
            (r[1].clone(), r[2].clone())
        })
        .collect();
    assert_eq!(sums.len(), files.len());
    sums
}

fn close(a: f64, b: f64, rel: f64) -> bool {
    (a - b).abs() <= rel * a.abs().max(b.abs()).max(f64::MIN_POSITIVE)
}

#[test]
fn astropy_verifies_the_file_its_checksums_and_its_wcs() {
    let dir = Scratch::new("astropy");
    let path = dir.join("binary.fits");
    let map = binary_map();
    write_fits(&map, &path).unwrap();
    let records = astropy_records(&[&path]);

    // astropy: verify('exception') passed (else the script failed); both sums verify (1).
    assert_eq!(records[0], ["checksum", "1", "1"]);

    let header: HashMap<&str, &str> = records
        .iter()
        .filter(|r| r[0] == "header")
        .map(|r| (r[1].as_str(), r[2].as_str()))
        .collect();
    let float = |k: &str| header[k].parse::<f64>().unwrap();
    let p = &map.provenance;
    // Floats parsed by astropy are the very doubles we wrote.
    assert_eq!(float("WIN_XC"), map.window.center.0);
    assert_eq!(float("WIN_YC"), map.window.center.1);
    assert_eq!(float("WIN_SIDE"), map.window.width);
    assert_eq!(float("DENSITY"), p.density);
    assert_eq!(float("BUILDSEC"), p.build_seconds);
    assert_eq!(float("BIN_S"), 1.1);
    assert_eq!(float("BIN_Q"), 0.3);
    for (k, l) in p.lens.lenses().iter().enumerate() {
        assert_eq!(float(&format!("LENS{}X", k + 1)), l.position.re);
        assert_eq!(float(&format!("LENS{}Y", k + 1)), l.position.im);
        assert_eq!(float(&format!("LENS{}M", k + 1)), l.mass);
    }
    assert_eq!(header["WIN_PIX"], "37");
    assert_eq!(header["LENS_N"], "2");
    assert_eq!(header["RAYSHOT"], p.rays_shot.to_string());
    assert_eq!(header["RAYSLAND"], p.rays_landed.to_string());
    assert_eq!(header["ENGINE"], "'hand-made'");
    assert_eq!(header["CW_VERS"], "'0.1.0'");
    assert_eq!(header["DATE"], "'2026-12-01T19:30:05'");

    // astropy.wcs pixel -> world (0-based pixels) against Window::pixel_center, and astropy's
    // data[iy, ix] against our pixels: same orientation, same values.
    let (mut worlds, mut values) = (0, 0);
    for r in &records {
        let (ix, iy) = match r.first().map(String::as_str) {
            Some("world") | Some("value") => (r[1].parse().unwrap(), r[2].parse().unwrap()),
            _ => continue,
        };
        if r[0] == "world" {
            let (x, y) = map.window.pixel_center(ix, iy);
            let (ax, ay): (f64, f64) = (r[3].parse().unwrap(), r[4].parse().unwrap());
            assert!(
                close(ax, x, 1e-12) && close(ay, y, 1e-12),
                "pixel ({ix}, {iy}): astropy ({ax}, {ay}), ours ({x}, {y})"
            );
            worlds += 1;
        } else {
            let v: f64 = r[3].parse().unwrap();
            assert_eq!(v, map.data[[iy, ix]] as f64, "pixel ({ix}, {iy})");
            values += 1;
        }
    }
    assert_eq!((worlds, values), (37 * 37, 37 * 37));
}

#[test]
fn a_flipped_byte_fails_the_checksums_in_astropy_and_in_our_reader() {
    let dir = Scratch::new("flipped");
    let good = dir.join("good.fits");
    write_fits(&triple_map(), &good).unwrap();
    let bytes = std::fs::read(&good).unwrap();
    // Header: the cards and END, in whole 2880-byte blocks; data: 16 x 16 x 4 bytes, one block.
    let header_len = ((cards(&bytes).len() + 1) * 80).div_ceil(2880) * 2880;
    assert_eq!(bytes.len(), header_len + 2880);

    // A data byte: both DATASUM and CHECKSUM fail.
    let data_flip = dir.join("data-flip.fits");
    let mut b = bytes.clone();
    b[header_len + 101] ^= 0x10;
    std::fs::write(&data_flip, &b).unwrap();
    assert_eq!(astropy_sums(&[&data_flip]), [("0".into(), "0".into())]);
    let err = read_fits(&data_flip).unwrap_err();
    assert!(err.to_string().contains("corrupted"), "{err}");
    assert_eq!(err.exit_code(), 2);

    // A header byte (inside the COMMENT text): CHECKSUM fails, DATASUM still holds.
    let header_flip = dir.join("header-flip.fits");
    let mut b = bytes.clone();
    let comment = cards(&bytes)
        .iter()
        .position(|c| c.starts_with("COMMENT"))
        .unwrap();
    b[80 * comment + 20] ^= 0x01;
    std::fs::write(&header_flip, &b).unwrap();
    assert_eq!(
        astropy_sums(&[&good, &header_flip]),
        [("1".into(), "1".into()), ("0".into(), "1".into())]
    );
    assert!(read_fits(&header_flip)
        .unwrap_err()
        .to_string()
        .contains("CHECKSUM"));
}

#[test]
fn astropy_agrees_with_the_checksum_encoding_of_many_files() {
    // astropy compares the CHECKSUM string with its own encoding of the convention, so many
    // different sums exercise every branch of ours (the punctuation nudges among them).
    let dir = Scratch::new("many");
    let mut map = test_map(LensSystem::single(), 4);
    let files: Vec<PathBuf> = (0..48)
        .map(|k| {
            map.data[[k % 4, k / 12]] += 0.37 * k as f32;
            map.provenance.rays_shot = 1000 + 7 * k as u64;
            let path = dir.join(format!("map{k}.fits"));
            write_fits(&map, &path).unwrap();
            assert_eq!(read_fits(&path).unwrap(), map);
            path
        })
        .collect();
    let refs: Vec<&Path> = files.iter().map(PathBuf::as_path).collect();
    for (k, sums) in astropy_sums(&refs).into_iter().enumerate() {
        assert_eq!(sums, ("1".into(), "1".into()), "map{k}.fits");
    }
}

// ---- the accuracy certificate ---------------------------------------------------------------

#[test]
fn the_certificate_matches_an_independent_numpy_recomputation() {
    // A polygon map zoomed on the central caustic of s = 0.9, q = 1e-3, written and read back;
    // tests/python/certificate_check.py recomputes every sampled pixel's reference with numpy
    // (companion-matrix roots of the binary-lens quintic, Witt & Mao 1995; other quadrature
    // rules) and the median and 99th percentile with numpy's own median and percentile.
    let dir = Scratch::new("certificate");
    let path = dir.join("zoom.fits");
    let lens = LensSystem::binary(0.9, 1e-3).unwrap();
    let window = Window::new((-0.01, 0.0), 0.06, 120).unwrap();
    let map = PolygonMapping::new(1.0).build(&lens, &window).unwrap();
    write_fits(&map, &path).unwrap();
    let back = read_fits(&path).unwrap();
    assert_eq!(back.provenance.certificate, map.provenance.certificate);
    let c = map.provenance.certificate.as_ref().unwrap();
    assert!(c.near.is_some_and(|s| s.count >= 5), "{:?}", c.near);

    let records = python_records("certificate_check.py", &[&path]);
    let find = |kind: &str, class: &str| {
        records
            .iter()
            .find(|r| r[0] == kind && r[1] == class)
            .unwrap_or_else(|| panic!("no {kind},{class} in {records:?}"))
            .clone()
    };
    // astropy: both HDUs verify, with their checksums.
    for hdu in ["0", "1"] {
        assert_eq!(find("checksum", hdu)[2..], ["1", "1"]);
    }
    for (class, largest_ref_gap) in [("away", 1e-6), ("near", 5e-5)] {
        let gap: f64 = find("reference", class)[2].parse().unwrap();
        assert!(
            gap < largest_ref_gap,
            "{class}: references differ by {gap:e}"
        );
        let stated = find("stated", class);
        let numpy = find("numpy", class);
        assert_eq!(stated[2], numpy[2], "{class}: counts");
        for k in [3, 4] {
            let (a, b): (f64, f64) = (stated[k].parse().unwrap(), numpy[k].parse().unwrap());
            // The errors move by at most the references' gap.
            assert!(
                (a - b).abs() <= 2.0 * largest_ref_gap,
                "{class}: {a:e} vs numpy {b:e}"
            );
        }
    }
}

#[test]
fn a_certificate_that_its_sample_does_not_reproduce_is_refused() {
    // Internal consistency (no outside reference needed): the stated median must be the
    // median of the sampled pixels' errors against the image; numpy's rule is checked above.
    let dir = Scratch::new("certificate-forged");
    let path = dir.join("forged.fits");
    let lens = LensSystem::binary(1.0, 0.1).unwrap();
    let window = Window::new((0.0, 0.0), 1.0, 40).unwrap();
    let mut map = PolygonMapping::new(1.0).build(&lens, &window).unwrap();
    let c = map.provenance.certificate.as_mut().unwrap();
    c.away.as_mut().unwrap().median *= 0.5;
    write_fits(&map, &path).unwrap();
    let msg = read_fits(&path).unwrap_err().to_string();
    assert!(msg.contains("ERRMED_*/ERR99_* disagree"), "{msg}");
}
