//! Bad input from the outside, by class: sizes that would exhaust memory (refused before any
//! work), long or raw values echoed in messages (cut to 40 characters, control characters
//! escaped), and output paths that cannot be written (refused before any work, so that no
//! other output is left behind). Every case must exit with status 2 within a few seconds,
//! print one line naming the culprit, and leave the folder as it was.

use crate::common::{causeway, Scratch};
use std::path::{Path, PathBuf};
use std::process::Stdio;
use std::time::{Duration, Instant};

/// The longest a case may run before it counts as a hang.
const TIMEOUT: Duration = Duration::from_secs(10);

/// A valid library spec with the given keys replaced (`window` replaces the window table).
fn spec(lines: &[(&str, &str)]) -> String {
    let mut keys = [
        ("s", "{ log = [0.5, 2.0, 3] }".to_string()),
        ("q", "[1e-3]".to_string()),
        ("pixels", "40".to_string()),
        ("rays", "10".to_string()),
        ("engine", "\"rays\"".to_string()),
    ];
    let mut window = "[window]\ncenter = [0.0, 0.0]\nwidth = 2.0\n".to_string();
    for &(key, value) in lines {
        if key == "window" {
            window = format!("[window]\n{value}\n");
        } else if let Some(k) = keys.iter_mut().find(|k| k.0 == key) {
            k.1 = value.to_string();
        }
    }
    let mut text: String = keys.iter().map(|(k, v)| format!("{k} = {v}\n")).collect();
    text.push_str(&window);
    text
}

/// The files every case may refer to; `folder.png`, `folder.csv`, `folder.fits` and `folder`
/// are folders, `missing/` does not exist.
fn fixtures(dir: &Path) {
    let long = "9".repeat(1 << 20);
    let files: Vec<(&str, Vec<u8>)> = vec![
        ("event.csv", crate::common::point_lens_csv().into_bytes()),
        ("lib.toml", spec(&[]).into_bytes()),
        ("pixels.toml", spec(&[("pixels", "100000")]).into_bytes()),
        (
            "pixels-central.toml",
            spec(&[("pixels", "100000"), ("window", "rule = \"central\"")]).into_bytes(),
        ),
        (
            "pixels-polygon.toml",
            spec(&[("pixels", "100000"), ("engine", "\"polygon\"")]).into_bytes(),
        ),
        (
            "s-linear.toml",
            spec(&[("s", "{ linear = [0.5, 2.0, 1000000000000] }")]).into_bytes(),
        ),
        (
            "q-log.toml",
            spec(&[("q", "{ log = [1e-4, 1e-2, 1000000000000] }")]).into_bytes(),
        ),
        (
            "grid.toml",
            spec(&[
                ("s", "{ linear = [0.5, 2.0, 400] }"),
                ("q", "{ log = [1e-4, 1e-2, 400] }"),
            ])
            .into_bytes(),
        ),
        (
            "long-engine.toml",
            spec(&[("engine", &format!("\"{long}\""))]).into_bytes(),
        ),
        (
            "raw-rule.toml",
            spec(&[("window", "rule = \"cen\\u000ctral\\u0000\"")]).into_bytes(),
        ),
        (
            "long-syntax.toml",
            format!("s = [0.5, {long}x]\n").into_bytes(),
        ),
        (
            "long-plan.toml",
            format!("[[site]]\nname = \"{long}\n").into_bytes(),
        ),
        (
            "long-mass.csv",
            format!("x,y,mass\n0,0,1\n0.5,0.1,{long}x\n").into_bytes(),
        ),
        (
            "nul-mass.csv",
            b"x,y,mass\n0,0,1\n0.5,0.1,1\x002\n".to_vec(),
        ),
        ("feed-x.csv", b"x,y,mass\n0,0,1\n0.\x0c5,0.1,1\n".to_vec()),
        (
            "huge-mass.csv",
            b"x,y,mass\n0,0,1\n0.5,0.1,-1e300\n".to_vec(),
        ),
        (
            "long-mag.csv",
            format!("t,mag,mag_err\n1,19,0.01\n2,{long}z,0.01\n3,19,0.01\n").into_bytes(),
        ),
        (
            "nul-t.csv",
            b"t,mag,mag_err\n1,19,0.01\n2\x00,19,0.01\n3,19,0.01\n".to_vec(),
        ),
        (
            "huge-err.csv",
            b"t,mag,mag_err\n1,19,0.01\n2,19,-1e300\n3,19,0.01\n".to_vec(),
        ),
        ("long-times.csv", format!("t\n1\n{long}q\n").into_bytes()),
        ("feed-times.csv", b"t\n1\n2\x0c3\n".to_vec()),
        (
            "long-path.csv",
            format!("x,y\n0,0\n0.1,{long}.\n").into_bytes(),
        ),
    ];
    for (name, bytes) in files {
        std::fs::write(dir.join(name), bytes).unwrap();
    }
    for folder in ["folder.png", "folder.csv", "folder.fits", "folder"] {
        std::fs::create_dir(dir.join(folder)).unwrap();
    }
}

/// Every path under `dir`, relative, sorted.
fn tree(dir: &Path) -> Vec<PathBuf> {
    let mut out = Vec::new();
    let mut stack = vec![dir.to_path_buf()];
    while let Some(d) = stack.pop() {
        for e in std::fs::read_dir(&d).unwrap() {
            let p = e.unwrap().path();
            if p.is_dir() {
                stack.push(p.clone());
            }
            out.push(p.strip_prefix(dir).unwrap().to_path_buf());
        }
    }
    out.sort();
    out
}

/// Runs `causeway ARGS` in a fresh folder holding the fixtures and asserts the bad-input
/// contract: exit status 2 within [`TIMEOUT`], one short line on stderr holding every string
/// of `culprits`, no control character in it, and the folder unchanged.
fn refused(args: &[&str], culprits: &[&str]) {
    let dir = Scratch::new("bad-input");
    fixtures(&dir);
    let before = tree(&dir);
    let logs = Scratch::new("bad-input-log");
    let stderr_path = logs.join("stderr");
    let mut child = causeway()
        .args(args)
        .current_dir(&*dir)
        .stdin(Stdio::null())
        .stdout(Stdio::null())
        .stderr(std::fs::File::create(&stderr_path).unwrap())
        .spawn()
        .unwrap();
    let started = Instant::now();
    let status = loop {
        if let Some(status) = child.try_wait().unwrap() {
            break status;
        }
        if started.elapsed() > TIMEOUT {
            let _ = child.kill();
            let _ = child.wait();
            panic!("{args:?}: still running after {TIMEOUT:?}");
        }
        std::thread::sleep(Duration::from_millis(20));
    };
    let bytes = std::fs::read(&stderr_path).unwrap();
    let stderr = String::from_utf8_lossy(&bytes);
    let shown: String = stderr.chars().take(300).collect();
    assert_eq!(status.code(), Some(2), "{args:?}: {shown}");
    let lines: Vec<&str> = stderr.lines().filter(|l| !l.trim().is_empty()).collect();
    assert_eq!(lines.len(), 1, "{args:?}: not one line: {shown}");
    let line = lines[0];
    assert!(line.len() < 400, "{args:?}: {} bytes: {shown}", line.len());
    assert!(
        !line.chars().any(char::is_control),
        "{args:?}: raw control character in {line:?}"
    );
    for culprit in culprits {
        assert!(line.contains(culprit), "{args:?}: no {culprit:?} in {line}");
    }
    assert_eq!(tree(&dir), before, "{args:?}: the folder changed ({line})");
}

/// A straight trajectory for `curve`, `compare` and `simulate`.
const LINE: [&str; 10] = [
    "--t0", "0", "--u0", "0.1", "--te", "20", "--alpha", "30", "--rho", "0.01",
];

fn with<'a>(head: &[&'a str], tail: &[&'a str]) -> Vec<&'a str> {
    head.iter().chain(tail).copied().collect()
}

fn curve(range: &str) -> Vec<&str> {
    with(
        &["curve", "--s", "1", "--q", "1e-3"],
        &with(&LINE, &["--time-range", range]),
    )
}

fn compare(range: &str) -> Vec<&str> {
    with(
        &["compare", "--map", "m.fits"],
        &with(&LINE, &["--time-range", range]),
    )
}

fn simulate<'a>(tail: &[&'a str]) -> Vec<&'a str> {
    with(&with(&["simulate", "--s", "1", "--q", "1e-3"], &LINE), tail)
}

fn search<'a>(library: &'a str, tail: &[&'a str]) -> Vec<&'a str> {
    with(
        &[
            "search",
            "event.csv",
            "--rho",
            "0.01",
            "--library",
            library,
            "--store",
            "maps",
        ],
        tail,
    )
}

fn map<'a>(tail: &[&'a str]) -> Vec<&'a str> {
    with(
        &[
            "map", "--s", "1", "--q", "1e-3", "--center", "0,0", "--width", "1",
        ],
        tail,
    )
}

fn map_lenses(file: &str) -> Vec<&str> {
    vec![
        "map", "--lenses", file, "--center", "0,0", "--width", "1", "--pixels", "20", "--out",
        "m.fits",
    ]
}

// 1. Sizes that would exhaust memory, refused before any work.

#[test]
fn library_specs_too_large_are_refused_before_building() {
    let st = ["--store", "st"];
    let limit = "100000";
    refused(
        &with(&["library", "build", "pixels.toml"], &st),
        &["pixels.toml", "pixels = 100000", "GiB"],
    );
    refused(
        &with(&["library", "build", "pixels-central.toml"], &st),
        &["pixels-central.toml", "pixels = 100000"],
    );
    refused(
        &with(&["library", "build", "pixels-polygon.toml"], &st),
        &["pixels-polygon.toml", "pixels = 100000"],
    );
    refused(
        &with(&["library", "build", "s-linear.toml"], &st),
        &["s-linear.toml", "s:", "1000000000000", limit],
    );
    refused(
        &with(&["library", "build", "q-log.toml"], &st),
        &["q-log.toml", "q:", limit],
    );
    refused(
        &with(&["library", "build", "grid.toml"], &st),
        &["grid.toml", "400 x 400", limit],
    );
    refused(
        &with(
            &["library", "build", "s-linear.toml", "--shard", "1/4"],
            &st,
        ),
        &["s-linear.toml", limit],
    );
    refused(
        &["library", "script", "pixels.toml", "--shards", "4"],
        &["pixels.toml", "pixels = 100000"],
    );
}

#[test]
fn search_refuses_too_large_specs_before_the_search() {
    refused(
        &search("pixels.toml", &[]),
        &["pixels.toml", "pixels = 100000"],
    );
    refused(
        &search("s-linear.toml", &[]),
        &["s-linear.toml", "s:", "100000"],
    );
    refused(&search("q-log.toml", &[]), &["q-log.toml", "q:"]);
    refused(&search("grid.toml", &[]), &["grid.toml", "400 x 400"]);
    refused(
        &search("pixels-central.toml", &[]),
        &["pixels-central.toml", "pixels"],
    );
}

#[test]
fn time_ranges_and_maps_too_large_are_refused_at_once() {
    let limit = "10000000";
    refused(
        &curve("0,1,100000000000"),
        &["--time-range", "100000000000", limit],
    );
    refused(&curve("0,1,10000001"), &["--time-range", limit]);
    refused(
        &compare("0,1,100000000000"),
        &["--time-range", "100000000000", limit],
    );
    refused(
        &simulate(&["--time-range", "0,1,1000000000", "--out", "e.csv"]),
        &["--time-range", "1000000000", limit],
    );
    refused(
        &simulate(&["--time-range", "0,1,100000000000", "--out", "e.csv"]),
        &["--time-range", limit],
    );
    refused(
        &map(&["--pixels", "100000000", "--out", "m.fits"]),
        &["--pixels 100000000", "--max-memory"],
    );
    refused(
        &map(&["--pixels", "10000000000000", "--out", "m.fits"]),
        // Refused as finer than the coordinates resolve, before the memory is counted.
        &["--pixels 10000000000000"],
    );
    refused(
        &map(&[
            "--pixels",
            "100000000",
            "--engine",
            "polygon",
            "--out",
            "m.fits",
        ]),
        &["--pixels 100000000", "--max-memory"],
    );
}

// 2. Long or raw values: echoed cut to 40 characters, control characters escaped.

#[test]
fn long_and_raw_fields_of_files_are_cut_and_escaped() {
    let cut = format!("'{}...'", "9".repeat(40));
    refused(
        &map_lenses("long-mass.csv"),
        &["long-mass.csv:3", "mass", &cut],
    );
    refused(
        &map_lenses("nul-mass.csv"),
        &["nul-mass.csv:3", "'1\\u{0}2'"],
    );
    refused(&map_lenses("feed-x.csv"), &["feed-x.csv:3", "'0.\\u{c}5'"]);
    refused(&map_lenses("huge-mass.csv"), &["huge-mass.csv:3", "-1e300"]);
    refused(
        &[
            "images",
            "--lenses",
            "long-mass.csv",
            "--points",
            "event.csv",
        ],
        &["long-mass.csv:3", &cut],
    );
    refused(
        &search("lib.toml", &[])
            .iter()
            .map(|a| if *a == "event.csv" { "long-mag.csv" } else { a })
            .collect::<Vec<_>>(),
        &["long-mag.csv:3", &cut],
    );
    refused(
        &search("lib.toml", &[])
            .iter()
            .map(|a| if *a == "event.csv" { "nul-t.csv" } else { a })
            .collect::<Vec<_>>(),
        &["nul-t.csv:3", "'2\\u{0}'"],
    );
    refused(
        &search("lib.toml", &[])
            .iter()
            .map(|a| if *a == "event.csv" { "huge-err.csv" } else { a })
            .collect::<Vec<_>>(),
        &["huge-err.csv:3", "mag_err", "-1e300"],
    );
    let times = |file| {
        with(
            &["curve", "--s", "1", "--q", "1e-3"],
            &with(&LINE, &["--times", file]),
        )
    };
    refused(&times("long-times.csv"), &["long-times.csv:3", &cut]);
    refused(
        &times("feed-times.csv"),
        &["feed-times.csv:3", "'2\\u{c}3'"],
    );
    refused(
        &simulate(&["--times", "feed-times.csv", "--out", "e.csv"]),
        &["feed-times.csv:3", "\\u{c}"],
    );
    refused(
        &[
            "curve",
            "--s",
            "1",
            "--q",
            "1e-3",
            "--path",
            "long-path.csv",
            "--rho",
            "0.01",
        ],
        &["long-path.csv:3", &cut],
    );
}

#[test]
fn long_and_raw_values_of_specs_and_plans_are_cut_and_escaped() {
    let st = ["--store", "st"];
    refused(
        &with(&["library", "build", "long-engine.toml"], &st),
        &[
            "long-engine.toml",
            "engine",
            &format!("'{}...'", "9".repeat(40)),
        ],
    );
    refused(
        &with(&["library", "build", "raw-rule.toml"], &st),
        &["raw-rule.toml", "window.rule", "cen\\u{c}tral\\u{0}"],
    );
    refused(
        &with(&["library", "build", "long-syntax.toml"], &st),
        &["long-syntax.toml:1"],
    );
    refused(
        &search("long-engine.toml", &[]),
        &["long-engine.toml", "..."],
    );
    refused(
        &simulate(&["--plan", "long-plan.toml", "--out-dir", "folder"]),
        &["long-plan.toml:2", "..."],
    );
}

#[test]
fn long_and_raw_option_values_are_cut_and_escaped() {
    let long = format!("1\x0c{}", "7".repeat(100_000));
    let cut = format!("1\\u{{c}}{}...", "7".repeat(38));
    refused(
        &map(&["--pixels", &long, "--out", "m.fits"]),
        &["--pixels", &cut],
    );
    refused(
        &[
            "map", "--s", &long, "--q", "1e-3", "--center", "0,0", "--width", "1", "--pixels", "9",
            "--out", "m.fits",
        ],
        &["--s", &cut],
    );
    refused(
        &[
            "map", "--s", "1", "--q", "1e-3", "--center", &long, "--width", "1", "--pixels", "9",
            "--out", "m.fits",
        ],
        &["--center", &cut],
    );
    refused(&curve(&long), &["--time-range", &cut]);
    refused(
        &map(&["--pixels", "9", "--out", "m.fits", "--engine", &long]),
        &["--engine", &cut],
    );
    refused(
        &map(&["--pixels", "9", "--out", "m.fits", "--max-memory", &long]),
        &["--max-memory", &cut],
    );
    refused(
        &map(&["--pixels", "9", "--out", "m.fits", "--threads", &long]),
        &["--threads", &cut],
    );
    refused(
        &[
            "library", "build", "lib.toml", "--store", "st", "--shard", &long,
        ],
        &["--shard", &cut],
    );
}

// 3. Output paths checked before any work: nothing written when one cannot be.

#[test]
fn map_and_caustics_check_every_output_first() {
    let lens = ["--s", "1", "--q", "1e-3"];
    refused(
        &map(&["--pixels", "20", "--out", "x.fits", "--png", "folder.png"]),
        &["--png", "folder.png", "folder"],
    );
    refused(
        &map(&["--pixels", "20", "--out", "x.fits", "--png", "folder"]),
        &["--png", "folder"],
    );
    refused(
        &map(&["--pixels", "20", "--out", "folder.fits"]),
        &["--out", "folder.fits"],
    );
    refused(
        &map(&[
            "--pixels",
            "20",
            "--out",
            "missing/x.fits",
            "--png",
            "x.png",
        ]),
        &["--out", "missing"],
    );
    refused(
        &map(&[
            "--pixels",
            "20",
            "--out",
            "x.fits",
            "--png",
            "missing/x.png",
        ]),
        &["--png", "missing"],
    );
    refused(
        &with(
            &with(&["caustics"], &lens),
            &["--out", "c.csv", "--png", "folder.png"],
        ),
        &["--png", "folder.png"],
    );
    refused(
        &with(
            &with(&["caustics"], &lens),
            &["--out", "c.csv", "--png", "missing/c.png"],
        ),
        &["--png", "missing"],
    );
    refused(
        &with(
            &with(&["caustics"], &lens),
            &["--out", "folder.csv", "--png", "c.png"],
        ),
        &["--out", "folder.csv"],
    );
    refused(
        &with(
            &with(&["caustics"], &lens),
            &["--out", "c.csv", "--png", "c.jpg"],
        ),
        &["--png", "c.jpg"],
    );
}

#[test]
fn curve_compare_and_simulate_check_outputs_first() {
    refused(
        &with(&curve("0,10,20"), &["--png", "folder.png"]),
        &["--png", "folder.png"],
    );
    refused(
        &with(&compare("0,10,20"), &["--png", "missing/c.png"]),
        &["--png", "missing"],
    );
    refused(
        &simulate(&["--time-range", "0,10,20", "--out", "folder.csv"]),
        &["--out", "folder.csv"],
    );
    refused(
        &simulate(&["--time-range", "0,10,20", "--out", "missing/e.csv"]),
        &["--out", "missing"],
    );
}

#[test]
fn search_checks_every_output_before_the_search() {
    refused(
        &search(
            "lib.toml",
            &["--chi2-map", "c.png", "--plot", "missing/p.png"],
        ),
        &["--plot", "missing"],
    );
    refused(
        &search("lib.toml", &["--out", "missing/o.csv"]),
        &["--out", "missing"],
    );
    refused(
        &search("lib.toml", &["--out", "folder.csv"]),
        &["--out", "folder.csv"],
    );
    refused(
        &search("lib.toml", &["--chi2-map", "c.png", "--plot", "c.png"]),
        &["--plot", "c.png", "--chi2-map"],
    );
    refused(
        &search("lib.toml", &["--out", "o.csv", "--chi2-map", "folder.png"]),
        &["--chi2-map", "folder.png"],
    );
}
