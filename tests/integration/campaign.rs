//! The bad-input campaign: malformed values and files for every command that reads a number,
//! a CSV, a TOML spec or a FITS map, generated from the tables below, and a seeded byte
//! mutation of valid files. Every refused case must exit with status 2 within [`TIMEOUT`],
//! print one short line naming the culprit (the option, or the file and line) with no raw
//! control character, and leave the folder as it was; a mutation may also be accepted (exit 0)
//! when it is still valid. Library specs are fuzzed through `library build --check`, which
//! builds nothing, so that a valid but expensive mutation cannot stall the run.
//!
//! Failures are collected and reported together, so that one run shows every broken class.

mod fuzz;

use crate::common::{causeway, Scratch};
use causeway::map::{read_fits, write_fits};
use std::path::{Path, PathBuf};
use std::process::Stdio;
use std::time::{Duration, Instant};

/// The longest a case may run before it counts as a hang (generous: the machine is shared).
const TIMEOUT: Duration = Duration::from_secs(30);

/// Every path under `dir` with its size, sorted.
fn tree(dir: &Path) -> Vec<(PathBuf, u64)> {
    let mut out = Vec::new();
    let mut stack = vec![dir.to_path_buf()];
    while let Some(d) = stack.pop() {
        for e in std::fs::read_dir(&d).unwrap() {
            let p = e.unwrap().path();
            let len = if p.is_dir() {
                stack.push(p.clone());
                0
            } else {
                std::fs::metadata(&p).map_or(0, |m| m.len())
            };
            out.push((p.strip_prefix(dir).unwrap().to_path_buf(), len));
        }
    }
    out.sort();
    out
}

/// Runs `causeway ARGS` in `dir`; the exit code (None when killed after [`TIMEOUT`]) and stderr.
fn run(dir: &Path, logs: &Path, args: &[String]) -> (Option<i32>, String) {
    let stderr_path = logs.join("stderr");
    let mut child = causeway()
        .args(args)
        .current_dir(dir)
        .env_remove("CAUSEWAY_STORE")
        .stdin(Stdio::null())
        .stdout(Stdio::null())
        .stderr(std::fs::File::create(&stderr_path).unwrap())
        .spawn()
        .unwrap();
    let started = Instant::now();
    let code = loop {
        if let Some(status) = child.try_wait().unwrap() {
            break status.code();
        }
        if started.elapsed() > TIMEOUT {
            let _ = child.kill();
            let _ = child.wait();
            break None;
        }
        std::thread::sleep(Duration::from_millis(5));
    };
    let bytes = std::fs::read(&stderr_path).unwrap();
    (code, String::from_utf8_lossy(&bytes).into_owned())
}

/// A folder of fixtures and the failures seen so far.
struct Campaign {
    dir: Scratch,
    logs: Scratch,
    before: Vec<(PathBuf, u64)>,
    cases: usize,
    accepted: usize,
    failures: Vec<String>,
}

impl Campaign {
    fn new(name: &str, files: &[(String, Vec<u8>)]) -> Campaign {
        let dir = Scratch::new(name);
        for (file, bytes) in valid_files().iter().chain(files) {
            std::fs::write(dir.join(file), bytes).unwrap();
        }
        let setup: [&[&str]; 2] = [
            &[
                "map", "--s", "1", "--q", "1e-3", "--center", "0,0", "--width", "1", "--pixels",
                "16", "--rays", "4", "--out", "m.fits",
            ],
            &["library", "build", "lib.toml", "--store", "st"],
        ];
        for args in setup {
            let out = causeway().args(args).current_dir(&*dir).output().unwrap();
            assert!(out.status.success(), "{args:?}: {out:?}");
        }
        let before = tree(&dir);
        Campaign {
            dir,
            logs: Scratch::new(&format!("{name}-log")),
            before,
            cases: 0,
            accepted: 0,
            failures: Vec::new(),
        }
    }

    /// Runs one case: refused (exit 2, one line holding every culprit, folder unchanged), or,
    /// when `may_pass`, accepted with exit 0 (its outputs are then removed).
    fn case(&mut self, args: &[String], culprits: &[String], may_pass: bool) {
        self.cases += 1;
        let (code, stderr) = run(&self.dir, &self.logs, args);
        let shown: String = stderr.chars().take(200).collect();
        let fail = |why: String| format!("{args:?}: {why}: {shown:?}");
        if code.is_none() {
            self.failures
                .push(fail(format!("still running after {TIMEOUT:?}")));
            return;
        }
        if code == Some(0) && may_pass {
            self.accepted += 1;
            self.restore();
            return;
        }
        if code != Some(2) {
            self.failures.push(fail(format!("exit {code:?}")));
            self.restore();
            return;
        }
        let lines: Vec<&str> = stderr.lines().filter(|l| !l.trim().is_empty()).collect();
        let why = match lines.as_slice() {
            [line] if line.len() >= 400 => Some(format!("{} bytes", line.len())),
            [line] if line.chars().any(char::is_control) => Some("raw control character".into()),
            [line] => culprits
                .iter()
                .find(|c| !line.contains(c.as_str()))
                .map(|c| format!("no {c:?}")),
            _ => Some(format!("{} lines", lines.len())),
        };
        if let Some(why) = why {
            self.failures.push(fail(why));
        }
        if tree(&self.dir) != self.before {
            self.failures.push(fail("the folder changed".into()));
            self.restore();
        }
    }

    /// Writes (or replaces) one input file of the folder.
    fn put(&mut self, name: &str, bytes: &[u8]) {
        std::fs::write(self.dir.join(name), bytes).unwrap();
        self.before = tree(&self.dir);
    }

    /// Removes what a run added (outputs of an accepted case), so the next case starts alike.
    fn restore(&self) {
        let keep: Vec<&PathBuf> = self.before.iter().map(|(p, _)| p).collect();
        for (p, _) in tree(&self.dir).iter().rev() {
            if !keep.contains(&p) {
                let path = self.dir.join(p);
                let _ = std::fs::remove_file(&path).or_else(|_| std::fs::remove_dir_all(&path));
            }
        }
    }

    fn finish(self) {
        eprintln!(
            "{} cases, {} accepted, {} failures",
            self.cases,
            self.accepted,
            self.failures.len()
        );
        assert!(
            self.failures.is_empty(),
            "{} of {} cases failed:\n{}",
            self.failures.len(),
            self.cases,
            self.failures.join("\n")
        );
    }
}

/// A small valid library spec.
const SPEC: &str = "s = { log = [0.8, 1.25, 2] }\nq = [1e-3]\npixels = 24\nrays = 4\n\
                    engine = \"rays\"\n[window]\ncenter = [0.0, 0.0]\nwidth = 1.0\n";

/// The valid inputs every case may use.
fn valid_files() -> Vec<(String, Vec<u8>)> {
    [
        ("lens.csv", "x,y,mass\n-0.5,0,1\n0.5,0,0.001\n".to_string()),
        ("points.csv", "x,y\n0.1,0.1\n0.2,0\n-0.3,0.05\n".to_string()),
        ("times.csv", "t\n0\n0.5\n1\n".to_string()),
        (
            "path.csv",
            "t,x,y\n0,0.1,0.1\n1,0.2,0.1\n2,0.3,0.1\n".to_string(),
        ),
        ("event.csv", crate::common::point_lens_csv()),
        ("lib.toml", SPEC.to_string()),
    ]
    .into_iter()
    .map(|(n, t)| (n.to_string(), t.into_bytes()))
    .collect()
}

/// Command lines that are valid as they stand and cheap (or refused early) when one value
/// goes bad.
const TRAJECTORY: &[&str] = &[
    "--t0",
    "0",
    "--u0",
    "0.1",
    "--te",
    "20",
    "--alpha",
    "30",
    "--time-range",
    "0,1,5",
];

fn base(command: &str) -> Vec<String> {
    let binary: &[&str] = &["--s", "1", "--q", "1e-3"];
    let parts: Vec<&[&str]> = match command {
        "map" => vec![
            &["map"],
            binary,
            &[
                "--center", "0,0", "--width", "1", "--pixels", "16", "--rays", "4",
            ],
            &["--out", "o.fits"],
        ],
        "caustics" => vec![&["caustics"], binary, &["--out", "c.csv"]],
        "images" => vec![&["images"], binary, &["--points", "points.csv"]],
        "contour" => vec![
            &["contour"],
            binary,
            &["--points", "points.csv", "--rho", "0.01"],
        ],
        "curve" => vec![&["curve"], binary, TRAJECTORY, &["--rho", "0.01"]],
        "compare" => vec![&["compare", "--map", "m.fits"], TRAJECTORY],
        "simulate" => vec![&["simulate"], binary, TRAJECTORY, &["--out", "o.csv"]],
        "list" => vec![&["library", "list", "--store", "st"], binary],
        "prune" => vec![&["library", "prune", "--dry-run", "--store", "st"]],
        "build" => vec![&["library", "build", "lib.toml", "--check"]],
        "script" => vec![&[
            "library", "script", "lib.toml", "--tasks", "2", "--store", "st",
        ]],
        "search" => vec![&[
            "search",
            "event.csv",
            "--library",
            "lib.toml",
            "--store",
            "st",
            "--out",
            "o.csv",
        ]],
        other => panic!("no base for {other}"),
    };
    parts.concat().iter().map(|s| s.to_string()).collect()
}

/// `args` with `option`'s value replaced by `value` (or the pair added).
fn with_value(mut args: Vec<String>, option: &str, value: &str) -> Vec<String> {
    match args.iter().position(|a| a == option) {
        Some(i) if i + 1 < args.len() && !args[i + 1].starts_with("--") => {
            args[i + 1] = value.to_string()
        }
        Some(i) => args.insert(i + 1, value.to_string()),
        None => args.extend([option.to_string(), value.to_string()]),
    }
    args
}

/// Values no number option takes.
const NOT_NUMBERS: &[&str] = &["abc", "", "0x10", "1,,2", "1e", "1\u{c}2"];

/// Bad values of number options, by what the option holds.
fn bad_values(kind: &str) -> Vec<&'static str> {
    let extra: &[&str] = match kind {
        // finite, any sign
        "real" => &["nan", "inf", "-inf", "1e400"],
        // finite, either sign, of moderate size
        "signed" => &["nan", "inf", "-inf", "1e400", "1e300", "-1e300"],
        // finite and > 0, of moderate size
        "positive" => &["nan", "inf", "-1", "0", "1e400", "1e300", "-1e-300"],
        // a relative half-range: from 0 to 10
        "span" => &["nan", "inf", "-1", "1e400", "1e300", "-1e-300"],
        // trial source radii: > 0
        "radii" => &["nan", "inf", "-1", "0", "-1e-300"],
        // a source radius: >= 0 and at most 1e3 Einstein radii
        "rho" => &["nan", "inf", "-1", "-1e-300", "1e400", "1e300"],
        // a timescale: > 0 and not so small that the source leaves for infinity
        "time" => &["nan", "inf", "-1", "0", "1e-300", "-1e-300"],
        // > 0 but not absurdly small either
        "scale" => &["nan", "-1", "0", "1e-300", "1e300"],
        // a count
        "count" => &["-1", "1.5", "nan", "1e400", "99999999999999999999999"],
        // a count that may be 0
        "count0" => &["-1", "1.5", "nan", "99999999999999999999999"],
        // a pair
        "pair" => &["nan,0", "1", "1,2,3", "inf,0", "1e300,0", ",", "0;0"],
        // a time range
        "range" => &[
            "0,1", "0,1,0", "nan,1,5", "0,inf,5", "0,1,-5", "0,1,1e12", "1,0,1",
        ],
        // a shard
        "shard" => &["-1/3", "0/3", "4/3", "1/0", "1", "a/b"],
        other => panic!("no kind {other}"),
    };
    NOT_NUMBERS.iter().chain(extra).copied().collect()
}

/// (command, option, kind): every value option of the commands that read numbers.
const OPTIONS: &[(&str, &str, &str)] = &[
    ("map", "--s", "positive"),
    ("map", "--q", "positive"),
    ("map", "--center", "pair"),
    ("map", "--width", "scale"),
    ("map", "--pixels", "count"),
    ("map", "--rays", "positive"),
    ("map", "--threads", "count"),
    ("map", "--accuracy", "scale"),
    ("caustics", "--s", "positive"),
    ("caustics", "--q", "positive"),
    ("images", "--s", "positive"),
    ("contour", "--q", "positive"),
    ("contour", "--rho", "rho"),
    ("curve", "--t0", "real"),
    ("curve", "--u0", "signed"),
    ("curve", "--te", "time"),
    ("curve", "--alpha", "real"),
    ("curve", "--rho", "rho"),
    ("curve", "--time-range", "range"),
    ("curve", "--rays", "positive"),
    ("curve", "--pixels-per-rho", "positive"),
    ("compare", "--u0", "signed"),
    ("compare", "--te", "time"),
    ("simulate", "--u0", "signed"),
    ("simulate", "--te", "time"),
    ("simulate", "--rho", "rho"),
    ("simulate", "--time-range", "range"),
    ("list", "--s", "positive"),
    ("list", "--q", "positive"),
    ("list", "--nearest", "count0"),
    ("prune", "--min-age", "count0"),
    ("build", "--shard", "shard"),
    ("script", "--tasks", "count"),
    ("search", "--rho", "radii"),
    ("search", "--u0-span", "span"),
    ("search", "--keep", "count"),
];

#[test]
fn every_bad_option_value_is_refused_naming_the_option() {
    let mut campaign = Campaign::new("campaign-options", &[]);
    for &(command, option, kind) in OPTIONS {
        for value in bad_values(kind) {
            let args = with_value(base(command), option, value);
            campaign.case(&args, &[option.to_string()], false);
        }
    }
    campaign.finish();
}

/// Bad contents of a CSV file with header `header` (two numeric columns after the first, or
/// one): each with the line to blame (0: the file as a whole).
fn bad_csv(header: &str) -> Vec<(String, usize)> {
    let width = header.split(',').count();
    let row = |cells: &[&str]| -> String {
        let mut c: Vec<&str> = cells.to_vec();
        c.resize(width, "0.5");
        c.join(",")
    };
    let good = row(&["0.25", "0.1", "1"]);
    let long = "7".repeat(100_000);
    let mut out = vec![
        (String::new(), 0),
        (format!("{header}\n"), 0),
        ("a;b;c\n1;2;3\n".to_string(), 1),
        (format!("nothing,here\n{good}\n"), 1),
        (format!("{header}\n{good}\n1e300,1e300,1e300\n"), 3),
    ];
    if width > 1 {
        out.push((format!("{}\n{good}\n", header.replace(',', ";")), 1));
        out.push((format!("{header}\n{good}\n0.75\n"), 3));
    }
    for bad in [
        "abc",
        "nan",
        "inf",
        "-inf",
        "1e400",
        "1\u{0}2",
        "1\u{c}2",
        "\"1\"",
        long.as_str(),
    ] {
        for column in 0..width {
            let mut cells = vec!["0.75"; width];
            cells[column] = bad;
            out.push((format!("{header}\n{good}\n{}\n", row(&cells)), 3));
        }
    }
    out
}

/// Bad lens files beyond the general CSV ones.
fn bad_lenses() -> Vec<(String, usize)> {
    let h = "x,y,mass\n0,0,1\n";
    let mut out: Vec<(String, usize)> = ["0.5,0,0", "0.5,0,-1", "0,0,1", "1e300,0,1", "0.5,1e7,1"]
        .iter()
        .map(|row| (format!("{h}{row}\n"), 3))
        .collect();
    let many: String = (0..1_000_000)
        .map(|k| format!("{},0,1\n", k as f64 * 1e-6))
        .collect();
    out.push((format!("x,y,mass\n{many}"), 1001));
    out
}

/// Bad light curves beyond the general CSV ones (row 5 of a valid 40-row curve replaced).
fn bad_events() -> Vec<(String, usize)> {
    let valid = crate::common::point_lens_csv();
    let lines: Vec<&str> = valid.lines().collect();
    let mut out: Vec<(String, usize)> = [
        "-32,1000,0.01",
        "-32,-50,0.01",
        "-32,19,1e300",
        "-32,19,0",
        "-32,19,-0.01",
        "-32,19,100",
        "-34,19,0.01",
    ]
    .iter()
    .map(|row| {
        let mut l = lines.clone();
        l[5] = row;
        (l.join("\n") + "\n", 6)
    })
    .collect();
    out.push(("t,mag,mag_err\n1,19,0.01\n2,19,0.01\n".to_string(), 0));
    out.push((
        "t,mag,mag_err,flux,flux_err\n1,19,0.01,1,1\n".to_string(),
        0,
    ));
    out
}

/// Bad library specs: (text, whether the message must give a line).
fn bad_specs() -> Vec<String> {
    let keys = |replace: &[(&str, &str)]| -> String {
        let mut text = SPEC.to_string();
        for (from, to) in replace {
            assert!(text.contains(from), "{from}");
            text = text.replacen(from, to, 1);
        }
        text
    };
    let s = "s = { log = [0.8, 1.25, 2] }";
    let mut out: Vec<String> = [
        "s = []",
        "s = [-1.0]",
        "s = [nan]",
        "s = [1000.0]",
        "s = { log = [0.0, 1.0, 3] }",
        "s = { linear = [0.5, 2.0, 0] }",
        "s = { linear = [0.5, 2.0, 1000000000000] }",
        "s = { linear = [0.5, 2.0, 2.5] }",
        "s = { log = [0.5, 2.0, 3], linear = [0.5, 2.0, 3] }",
        "s = { lin = [0.5, 2.0, 3] }",
        "s = \"1\"",
        "s = [1.0",
        "s = 1.0\ns = 2.0",
    ]
    .iter()
    .map(|to| keys(&[(s, to)]))
    .collect();
    for (from, to) in [
        ("q = [1e-3]", "q = [1e-12]"),
        ("q = [1e-3]", "q = [0.0]"),
        ("q = [1e-3]", ""),
        ("pixels = 24", "pixels = 0"),
        ("pixels = 24", "pixels = 100000"),
        ("pixels = 24", "pixels = -3"),
        ("rays = 4", "rays = 0"),
        ("rays = 4", "rays = -1.0"),
        ("engine = \"rays\"", "engine = \"x\\u0000y\""),
        ("engine = \"rays\"", "colour = 3"),
        ("center = [0.0, 0.0]", "center = [0.0, 0.0, 1.0]"),
        ("center = [0.0, 0.0]", "center = [1e300, 0.0]"),
        ("width = 1.0", "width = 0.0"),
        ("width = 1.0", "width = 1e-300"),
        ("width = 1.0", "rule = \"central\"\nwidth = 1.0"),
        ("center = [0.0, 0.0]\nwidth = 1.0", "rule = \"nearby\""),
        (
            "center = [0.0, 0.0]\nwidth = 1.0",
            "rule = \"caustics\"\nmargin = -1.0",
        ),
    ] {
        out.push(keys(&[(from, to)]));
    }
    out.push(String::from_utf8_lossy(&[0xff, 0xfe, b's']).into_owned());
    out
}

/// Damaged maps: (name, bytes), from the valid `m.fits` of `dir`.
fn bad_maps(dir: &Path) -> Vec<(String, Vec<u8>)> {
    let valid = std::fs::read(dir.join("m.fits")).unwrap();
    let mut out = vec![
        ("empty.fits".to_string(), Vec::new()),
        ("text.fits".to_string(), b"x,y,mass\n0,0,1\n".to_vec()),
        ("half.fits".to_string(), valid[..valid.len() / 2].to_vec()),
    ];
    let mut flipped = valid.clone();
    let k = valid.len() - 100;
    flipped[k] ^= 0x10;
    out.push(("flipped.fits".to_string(), flipped));
    let mut header = valid.clone();
    header[5 * 80 + 12] = b'#'; // inside the fifth card's value
    out.push(("card.fits".to_string(), header));
    for (name, value) in [("nan", f32::NAN), ("inf", f32::INFINITY), ("neg", -1.0)] {
        let mut map = read_fits(&dir.join("m.fits")).unwrap();
        map.data[[3, 5]] = value;
        let path = dir.join(format!("{name}-pixel.fits"));
        write_fits(&map, &path).unwrap();
        out.push((format!("{name}-pixel.fits"), std::fs::read(&path).unwrap()));
        std::fs::remove_file(path).unwrap();
    }
    out
}

/// (commands reading the file, as an argument list with FILE in it; the file's contents).
fn file_cases(dir: &Path) -> Vec<(Vec<String>, String, Vec<u8>, usize)> {
    let mut cases = Vec::new();
    let mut add = |commands: &[Vec<String>], stem: &str, ext: &str, bad: Vec<(String, usize)>| {
        for (k, (text, line)) in bad.into_iter().enumerate() {
            let name = format!("{stem}-{k}.{ext}");
            for args in commands {
                let args = args.iter().map(|a| a.replace("FILE", &name)).collect();
                cases.push((args, name.clone(), text.clone().into_bytes(), line));
            }
        }
    };
    let lens_commands: Vec<Vec<String>> = [
        "map --lenses FILE --center 0,0 --width 1 --pixels 16 --rays 4 --out o.fits",
        "caustics --lenses FILE --out c.csv",
        "images --lenses FILE --points points.csv",
    ]
    .iter()
    .map(|l| l.split(' ').map(String::from).collect())
    .collect();
    let mut lenses = bad_csv("x,y,mass");
    lenses.extend(bad_lenses());
    add(&lens_commands, "lens", "csv", lenses);
    let points: Vec<Vec<String>> = [
        "images --s 1 --q 1e-3 --points FILE",
        "contour --s 1 --q 1e-3 --rho 0.01 --points FILE",
    ]
    .iter()
    .map(|l| l.split(' ').map(String::from).collect())
    .collect();
    add(&points, "points", "csv", bad_csv("x,y"));
    let times: Vec<Vec<String>> = [
        "simulate --s 1 --q 1e-3 --t0 0 --u0 0.1 --te 20 --alpha 30 --times FILE --out o.csv",
        "curve --map m.fits --t0 0 --u0 0.1 --te 20 --alpha 30 --times FILE",
    ]
    .iter()
    .map(|l| l.split(' ').map(String::from).collect())
    .collect();
    add(&times, "times", "csv", bad_csv("t"));
    let path = vec!["curve --map m.fits --path FILE"
        .split(' ')
        .map(String::from)
        .collect()];
    add(&path, "path", "csv", bad_csv("t,x,y"));
    let search = vec![base("search")
        .into_iter()
        .map(|a| if a == "event.csv" { "FILE".into() } else { a })
        .collect::<Vec<String>>()];
    let mut events = bad_csv("t,mag,mag_err");
    events.extend(bad_events());
    add(&search, "event", "csv", events);
    let specs: Vec<Vec<String>> = [
        "library build FILE --check",
        "library status FILE --store st",
    ]
    .iter()
    .map(|l| l.split(' ').map(String::from).collect())
    .collect();
    add(
        &specs,
        "spec",
        "toml",
        bad_specs().into_iter().map(|t| (t, 0)).collect(),
    );
    for (name, bytes) in bad_maps(dir) {
        for command in [
            "curve --map FILE --t0 0 --u0 0.1 --te 20 --alpha 30 --time-range 0,1,5",
            "compare --map FILE --t0 0 --u0 0.1 --te 20 --alpha 30 --time-range 0,1,5",
        ] {
            let args = command.replace("FILE", &name);
            let args = args.split(' ').map(String::from).collect();
            cases.push((args, name.clone(), bytes.clone(), 0));
        }
    }
    cases
}

#[test]
fn every_bad_file_is_refused_naming_the_file_and_line() {
    let probe = Campaign::new("campaign-files-probe", &[]);
    let cases = file_cases(&probe.dir);
    drop(probe);
    let mut files: Vec<(String, Vec<u8>)> =
        cases.iter().map(|c| (c.1.clone(), c.2.clone())).collect();
    files.dedup_by(|a, b| a.0 == b.0);
    let mut campaign = Campaign::new("campaign-files", &files);
    for (args, name, _, line) in &cases {
        let mut culprits = vec![name.clone()];
        if *line > 0 {
            culprits.push(format!("{name}:{line}"));
        }
        campaign.case(args, &culprits, false);
    }
    campaign.finish();
}
