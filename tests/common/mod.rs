//! Helpers shared by the integration tests.
#![allow(dead_code)]

use causeway::table::Table;
use std::path::{Path, PathBuf};
use std::process::Command;
use std::sync::atomic::{AtomicUsize, Ordering};

/// The crate root.
pub fn root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

/// A committed reference table under tests/reference/.
pub fn reference(name: &str, columns: &[&str]) -> Table {
    Table::read(&root().join("tests/reference").join(name), columns, &[])
        .unwrap_or_else(|e| panic!("reading reference {name}: {e}"))
}

/// The Python interpreter with the reference libraries: $CAUSEWAY_PYTHON, else ./.venv/bin/python.
/// Panics (the test fails) when neither exists: these checks must not be skipped silently.
pub fn python() -> PathBuf {
    if let Ok(p) = std::env::var("CAUSEWAY_PYTHON") {
        return PathBuf::from(p);
    }
    let venv = root().join(".venv/bin/python");
    assert!(
        venv.exists(),
        "no Python with numpy/scipy/astropy: set CAUSEWAY_PYTHON or run the README's test command, \
         which creates .venv"
    );
    venv
}

/// Runs a Python snippet with arguments; returns stdout, panicking with stderr on failure.
pub fn run_python(code: &str, args: &[&str]) -> String {
    let out = Command::new(python())
        .arg("-c")
        .arg(code)
        .args(args)
        .output()
        .expect("starting python");
    assert!(
        out.status.success(),
        "python failed: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    String::from_utf8(out.stdout).unwrap()
}

/// The causeway binary built for these tests.
pub fn causeway() -> Command {
    Command::new(env!("CARGO_BIN_EXE_causeway"))
}

/// A fresh empty directory for one test, removed with everything in it when dropped (also
/// when the test fails). Every test module runs in the one test process, so the folder's name
/// holds the process id and a counter besides `name`: no two tests share a folder.
pub struct Scratch(PathBuf);

impl Scratch {
    /// A fresh empty folder under the system's temporary directory.
    pub fn new(name: &str) -> Scratch {
        static NEXT: AtomicUsize = AtomicUsize::new(0);
        let n = NEXT.fetch_add(1, Ordering::Relaxed);
        let dir =
            std::env::temp_dir().join(format!("causeway-test-{}-{n}-{name}", std::process::id()));
        let _ = std::fs::remove_dir_all(&dir);
        std::fs::create_dir_all(&dir).unwrap();
        Scratch(dir)
    }
}

impl std::ops::Deref for Scratch {
    type Target = Path;
    fn deref(&self) -> &Path {
        &self.0
    }
}

impl AsRef<Path> for Scratch {
    fn as_ref(&self) -> &Path {
        &self.0
    }
}

impl Drop for Scratch {
    fn drop(&mut self) {
        let _ = std::fs::remove_dir_all(&self.0);
    }
}

/// Files in a directory (names), sorted.
pub fn listing(dir: &Path) -> Vec<String> {
    let mut names: Vec<String> = std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    names.sort();
    names
}

/// Runs `f` on a fresh rayon pool of `threads` threads.
pub fn with_threads<T: Send>(threads: usize, f: impl FnOnce() -> T + Send) -> T {
    rayon::ThreadPoolBuilder::new()
        .num_threads(threads)
        .build()
        .unwrap()
        .install(f)
}

/// Builds the same map with 1, 2 and 4 threads and asserts bit-identical pixel data
/// (DESIGN.md: deterministic whatever the thread count).
pub fn assert_thread_independent(
    engine: &dyn causeway::engine::Engine,
    lens: &causeway::lens::LensSystem,
    window: &causeway::map::Window,
) {
    let maps: Vec<_> = [1, 2, 4]
        .iter()
        .map(|&t| with_threads(t, || engine.build(lens, window).unwrap()))
        .collect();
    for m in &maps[1..] {
        let same = m
            .data
            .iter()
            .zip(maps[0].data.iter())
            .all(|(a, b)| a.to_bits() == b.to_bits());
        assert!(
            same,
            "{}: pixel data differ between thread counts",
            engine.name()
        );
        assert_eq!(m.provenance.rays_landed, maps[0].provenance.rays_landed);
    }
}

/// Runs `causeway COMMAND ARGS...` in `dir`; returns (exit status, stdout, stderr).
pub fn run_cli(dir: &Path, command: &str, args: &[&str]) -> (i32, String, String) {
    let out = causeway()
        .arg(command)
        .args(args)
        .current_dir(dir)
        .output()
        .unwrap();
    (
        out.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&out.stdout).into_owned(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

/// A four-lens system (the solver's largest N) used by several tests: a host and three
/// companions of half its mass around it.
pub fn quadruple() -> causeway::lens::LensSystem {
    causeway::lens::LensSystem::new(&[
        (0.0, 0.0, 1.0),
        (0.7, 0.0, 0.5),
        (0.0, 0.7, 0.5),
        (-0.7, -0.1, 0.5),
    ])
    .unwrap()
}

/// A small library spec (8 maps of 120^2 pixels) for the store's tests.
pub const GRID_SPEC: &str =
    "s = { log = [0.6, 1.6, 4] }\nq = [1e-3, 1e-2]\npixels = 120\nrays = 60\n\
                    [window]\ncenter = [0.0, 0.0]\nwidth = 1.6\n";

/// The same grid with heavier maps (about 0.3 s each on one core), so that kills land
/// mid-build.
pub const SLOW_GRID_SPEC: &str =
    "s = { log = [0.6, 1.6, 4] }\nq = [1e-3, 1e-2]\npixels = 300\nrays = 300\n\
                         [window]\ncenter = [0.0, 0.0]\nwidth = 1.6\n";

/// A scratch folder (removed when dropped) holding `grid.toml` with `text`, and the spec.
pub fn grid_folder(name: &str, text: &str) -> (Scratch, causeway::store::library::LibrarySpec) {
    let dir = Scratch::new(name);
    std::fs::write(dir.join("grid.toml"), text).unwrap();
    let spec = causeway::store::library::LibrarySpec::parse(text, "grid.toml").unwrap();
    (dir, spec)
}

/// `causeway library ARGS` run in `dir`, with no store taken from the environment.
pub fn library_command(dir: &Path, args: &[&str]) -> Command {
    let mut cmd = causeway();
    cmd.current_dir(dir)
        .arg("library")
        .args(args)
        .env_remove("CAUSEWAY_STORE");
    cmd
}

/// A light curve of 40 points: a point lens (u0 0.1, tE 20 d) in noise-free magnitudes
/// (Paczynski 1986), 0.01 mag error bars.
pub fn point_lens_csv() -> String {
    let mut text = String::from("t,mag,mag_err\n");
    for k in 0..40 {
        let t = -40.0 + 2.0 * k as f64;
        let u = (0.1f64.powi(2) + (t / 20.0).powi(2)).sqrt();
        let a = (u * u + 2.0) / (u * (u * u + 4.0).sqrt());
        text += &format!("{t},{},0.01\n", 19.0 - 2.5 * a.log10());
    }
    text
}

/// The seed of a test's random timings: `$CAUSEWAY_TEST_SEED` when set, else `default`.
pub fn test_seed(default: u64) -> u64 {
    std::env::var("CAUSEWAY_TEST_SEED")
        .ok()
        .and_then(|s| s.parse().ok())
        .unwrap_or(default)
}

/// A 64-bit linear congruential generator from `seed` (Knuth's MMIX constants, from memory),
/// its upper 31 bits per call: enough for kill times.
pub fn lcg(seed: u64) -> impl FnMut() -> u64 {
    let mut state = seed;
    move || {
        state = state
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        state >> 33
    }
}
