//! Multi-resolution maps (src/map/tiles.rs): tiles against a uniform map at the fine
//! resolution, the FITS file (round trip, astropy), the store key and library spec, and light
//! curves read from the tiles.

use crate::common::Scratch;
use causeway::engine::by_name;
use causeway::lens::LensSystem;
use causeway::map::tiles::{RefinedMap, Refinement};
use causeway::map::{read_fits, read_refined, write_fits, write_refined, Window};

/// The planetary caustic of s = 1.25, q = 2e-3 (near s - 1/s = 0.45 from the host).
fn planetary() -> (LensSystem, Window) {
    let lens = LensSystem::binary(1.25, 2e-3).unwrap();
    (lens, Window::new((0.447, 0.0), 0.05, 60).unwrap())
}

/// Relative differences of every tile pixel inside the window from the pixel of `fine` (the
/// base window at the fine resolution) it stands for.
fn tile_differences(map: &RefinedMap, fine: &causeway::map::MagnificationMap) -> Vec<f64> {
    let r = map.refinement.unwrap();
    let n = fine.window.pixels as i64;
    let mut out = Vec::new();
    for t in &map.tiles {
        let side = t.map.window.pixels;
        let offset = |b: usize| (b * r.block) as i64 * r.factor as i64 - (r.halo * r.factor) as i64;
        for j in 0..side {
            for i in 0..side {
                let (fx, fy) = (offset(t.block.0) + i as i64, offset(t.block.1) + j as i64);
                if fx < 0 || fy < 0 || fx >= n || fy >= n {
                    continue;
                }
                let a = f64::from(t.map.data[[j, i]]);
                let b = f64::from(fine.data[[fy as usize, fx as usize]]);
                out.push((a - b).abs() / b);
            }
        }
    }
    out
}

#[test]
fn tiles_agree_with_a_uniform_map_at_the_fine_resolution() {
    // The same engine at the same density per pixel over the same pixels: the lattices of both
    // engines are laid independently of the window, so a tile pixel is the uniform map's pixel
    // up to float32 rounding of sums made in another order (measured: equal for rays, within
    // 1.2e-7 for polygon).
    let (lens, window) = planetary();
    for (name, density) in [("polygon", 1.0), ("rays", 100.0)] {
        let engine = by_name(name, density).unwrap();
        let r = Refinement::new(4).unwrap();
        let map = RefinedMap::build(engine.as_ref(), &lens, &window, Some(r), &(), false).unwrap();
        let fine_window = Window::new(window.center, window.width, 4 * window.pixels).unwrap();
        let fine = engine
            .build_certified(&lens, &fine_window, &(), false)
            .unwrap();
        let d = tile_differences(&map, &fine);
        assert!(d.len() > 10_000, "{name}: {} pixels compared", d.len());
        let worst = d.iter().copied().fold(0.0, f64::max);
        assert!(
            worst < 1e-6,
            "{name}: tile and uniform pixels differ by {worst:e}"
        );
    }
}

/// Relative errors of a curve of uniform sources of radius `rho` read from `map` (its tiles
/// too when `refined`) against contour integration (tolerance 1e-7), and the error estimates
/// (relative) of the reads.
fn read_errors(
    map: &RefinedMap,
    rho: f64,
    points: &[(f64, f64)],
    refined: bool,
) -> Vec<(f64, f64)> {
    use causeway::contour::ContourSolver;
    use causeway::curve::{Evaluation, Method, Sampler};
    use causeway::source::SourceProfile;
    let profile = SourceProfile::uniform(rho).unwrap();
    let sampler = Sampler::new(profile).evaluation(Evaluation::Direct);
    let sampler = if refined {
        sampler.refined(map)
    } else {
        sampler.map(&map.base)
    };
    let curve = sampler.sample(points).unwrap();
    let lens = &map.base.provenance.lens;
    let solver = ContourSolver::new(lens, 1e-7).unwrap();
    curve
        .samples
        .iter()
        .map(|s| {
            assert_eq!(s.method, Method::Direct);
            let exact = solver
                .clone()
                .magnification(num_complex::Complex64::new(s.x, s.y), &profile)
                .unwrap()
                .magnification;
            (
                (s.magnification / exact - 1.0).abs(),
                s.error / s.magnification,
            )
        })
        .collect()
}

#[test]
fn a_crossing_read_from_the_tiles_is_within_tolerance_where_the_base_is_not() {
    // The central caustic of s = 1.25, q = 2e-3 crossed along its axis by a uniform source of
    // 3 base pixels (12 fine pixels at factor 4), against contour integration.
    let lens = LensSystem::binary(1.25, 2e-3).unwrap();
    let window = Window::new((0.02, 0.0), 0.24, 240).unwrap();
    let engine = by_name("polygon", 4.0).unwrap();
    let r = Refinement::new(4).unwrap();
    let map = RefinedMap::build(engine.as_ref(), &lens, &window, Some(r), &(), false).unwrap();
    let covered = map.covered_fraction();
    assert!(covered > 0.0 && covered < 0.2, "tiles cover {covered}");
    let rho = 3.0 * window.pixel_size();
    let points: Vec<(f64, f64)> = (0..300)
        .map(|k| (-0.01 + 0.06 * k as f64 / 299.0, 0.002))
        .collect();
    let stats = |refined: bool| {
        let e = read_errors(&map, rho, &points, refined);
        // Every value within its stated error.
        assert!(e.iter().all(|x| x.0 <= x.1), "refined {refined}: {e:?}");
        let mut sorted: Vec<f64> = e.iter().map(|x| x.0).collect();
        sorted.sort_by(f64::total_cmp);
        (sorted[sorted.len() / 2], sorted[sorted.len() - 1])
    };
    let (base_median, base_max) = stats(false);
    let (tiles_median, tiles_max) = stats(true);
    let tol = 2e-2;
    eprintln!(
        "base: median {base_median:e}, max {base_max:e}; tiles: {tiles_median:e}, {tiles_max:e}"
    );
    assert!(base_max > tol && tiles_max < tol);
    assert!(tiles_median < 1e-3 && tiles_median < 0.1 * base_median);
}

#[test]
fn a_refined_map_round_trips_and_astropy_verifies_every_extension() {
    let dir = Scratch::new("tiles-fits");
    let path = dir.join("refined.fits");
    let (lens, window) = planetary();
    let engine = by_name("polygon", 1.0).unwrap();
    let r = Refinement::new(4).unwrap();
    // Certified: the certificate's table comes between the primary and the tiles.
    let map = RefinedMap::build(engine.as_ref(), &lens, &window, Some(r), &(), true).unwrap();
    assert!(map.base.provenance.certificate.is_some() && !map.tiles.is_empty());
    write_refined(&map, &path).unwrap();
    assert_eq!(read_refined(&path).unwrap(), map);
    assert_eq!(read_fits(&path).unwrap(), map.base);

    // astropy (FITS Standard 4.0 verification, Seaman et al. 2002 checksums, astropy.wcs):
    // every HDU verifies; each tile's own WCS puts its pixels where the tiling rule and the
    // primary's WCS do; each block's mean agrees between the tile and the base (both are
    // means over the same area, from lattices of the same density).
    let records = crate::fits::python_records("tiles_check.py", &[&path]);
    let sums: Vec<_> = records.iter().filter(|r| r[0] == "checksum").collect();
    assert_eq!(sums.len(), 2 + map.tiles.len());
    assert!(sums.iter().all(|r| r[2..] == ["1", "1"]), "{sums:?}");
    let tiles: Vec<_> = records.iter().filter(|r| r[0] == "tile").collect();
    assert_eq!(tiles.len(), map.tiles.len());
    for (rec, t) in tiles.iter().zip(&map.tiles) {
        let v = |k: usize| rec[k].parse::<f64>().unwrap();
        assert_eq!((v(2) as usize, v(3) as usize), t.block);
        assert!(v(4) < 1e-9, "placement off by {} base pixels", v(4));
        assert!((v(5) / v(6) - 1.0).abs() < 2e-3, "{rec:?}");
    }

    // A plain map's file reads as a plain map.
    let plain = dir.join("plain.fits");
    write_fits(&map.base, &plain).unwrap();
    assert_eq!(
        read_refined(&plain).unwrap(),
        RefinedMap::plain(map.base.clone())
    );

    // A flipped byte in the last tile's data is caught and named.
    let mut bytes = std::fs::read(&path).unwrap();
    let at = bytes.len() - 2880 - 7;
    bytes[at] ^= 0x10;
    std::fs::write(&path, &bytes).unwrap();
    let err = read_refined(&path).unwrap_err().to_string();
    let n = map.tiles.len();
    assert!(err.contains(&format!("tile {n} of {n}")), "{err}");
}

#[test]
fn an_unrefined_key_keeps_its_hash_and_a_refined_key_says_format_2() {
    use causeway::store::MapKey;
    let key = MapKey::new(
        LensSystem::binary(1.1, 1e-3).unwrap(),
        Window::new((0.0, 0.0), 1.0, 40).unwrap(),
        "rays",
        2.0,
    );
    // The file name that `causeway library build` of this map (s = [1.1], q = [1e-3],
    // pixels = 40, rays = 2, window centre [0, 0], width 1) wrote before maps had tiles.
    assert_eq!(key.hash(), "95aacb3ae148dd74073b399f73eabe13");
    let refined = key.clone().refined(Some(Refinement::new(4).unwrap()));
    let text = refined.canonical();
    assert!(text.starts_with("causeway map key v2\n"), "{text}");
    assert_eq!(
        text.replacen("v2", "v1", 1),
        key.canonical() + "refine factor=4 block=48 halo=4\n"
    );
    // The hash: Python's hashlib.sha256 of the same text, first 16 bytes in hex.
    let python_hash = crate::common::run_python(
        "import hashlib, sys; print(hashlib.sha256(sys.argv[1].encode()).hexdigest()[:32])",
        &[&text],
    );
    assert_eq!(refined.hash(), python_hash.trim());
}

#[test]
fn a_library_with_refine_builds_refined_maps_that_verify() {
    use causeway::store::library::{build, LibrarySpec};
    use causeway::store::{MapKey, Store};
    let dir = Scratch::new("tiles-library");
    let spec = LibrarySpec::parse(
        "s = [1.25]\nq = [2e-3]\npixels = 60\nrays = 1\nengine = \"polygon\"\nrefine = 4\n\
         [window]\nrule = \"central\"\n",
        "lib.toml",
    )
    .unwrap();
    let points = spec.points().unwrap();
    assert_eq!(points[0].key.refine, Some(Refinement::new(4).unwrap()));
    let store = Store::create(&dir.join("maps")).unwrap();
    build(&store, &points, |_, _| {}).unwrap();
    let map = store.get_refined(&points[0].key).unwrap().unwrap();
    assert!(!map.tiles.is_empty());
    assert_eq!(MapKey::of_refined(&map), points[0].key);
    let report = store.verify().unwrap();
    assert_eq!((report.indexed, report.problems.len()), (1, 0));
    // A refine factor out of range is named with the spec.
    let bad = LibrarySpec::parse(
        "s = [1.25]\nq = [2e-3]\npixels = 60\nrays = 1\nrefine = 1\n[window]\nrule = \"central\"\n",
        "lib.toml",
    )
    .unwrap_err()
    .to_string();
    assert!(
        bad.starts_with("lib.toml: refine: the factor must be 2 ..= 64"),
        "{bad}"
    );
}

#[test]
fn map_refine_writes_the_tiles_and_says_what_they_cover() {
    let dir = Scratch::new("tiles-cli");
    let args = [
        "--s",
        "1.25",
        "--q",
        "2e-3",
        "--center",
        "0.02,0",
        "--width",
        "0.12",
        "--pixels",
        "120",
        "--refine",
        "4",
        "--out",
        "refined.fits",
    ];
    let (code, _, stderr) = crate::common::run_cli(&dir, "map", &args);
    assert_eq!(code, 0, "{stderr}");
    let map = read_refined(&dir.join("refined.fits")).unwrap();
    let line = format!(
        "tiles: {} of 224 x 224 pixels at 4 times the resolution",
        map.tiles.len()
    );
    assert!(!map.tiles.is_empty() && stderr.contains(&line), "{stderr}");
    // A factor out of range: exit 2, one line naming the option, nothing written.
    let mut bad = args;
    bad[11] = "1";
    bad[13] = "bad.fits";
    let (code, _, stderr) = crate::common::run_cli(&dir, "map", &bad);
    assert_eq!(code, 2);
    assert_eq!(
        stderr.trim(),
        "causeway: error: --refine: the factor must be 2 ..= 64, got 1"
    );
    assert!(!dir.join("bad.fits").exists());
}
