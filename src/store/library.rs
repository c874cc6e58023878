//! Libraries: grids of binary maps over (s, q), described by a TOML spec, built into a store,
//! whole or as shards.
//!
//! A spec:
//!
//! ```toml
//! # s and q: a list, or {linear = [first, last, count]}, or {log = [first, last, count]}
//! s = { log = [0.5, 2.0, 5] }
//! q = [1e-3, 3e-3]
//! pixels = 500
//! rays = 100          # rays per unlensed pixel area
//! engine = "rays"     # optional, the default
//!
//! [window]            # the same window for every map
//! center = [0.0, 0.0]
//! width = 4.0
//! ```
//!
//! Grid points are numbered q-major (`index = iq * len(s) + is`); shard `K/N` takes the points
//! whose index is `K - 1` modulo `N`, so the shards of one spec are disjoint and together
//! make the whole grid.

use super::{MapKey, Store};
use crate::engine::{self, Engine};
use crate::error::{Error, Result};
use crate::lens::LensSystem;
use crate::map::Window;
use serde::Deserialize;
use std::path::Path;

/// The values of one grid axis.
#[derive(Debug, Clone, PartialEq, Deserialize)]
#[serde(untagged)]
enum Axis {
    List(Vec<f64>),
    Linear { linear: (f64, f64, usize) },
    Log { log: (f64, f64, usize) },
}

impl Axis {
    fn values(&self, name: &str) -> Result<Vec<f64>> {
        let bad = |m: String| Error::input(format!("spec: {name}: {m}"));
        let v = match *self {
            Axis::List(ref v) => v.clone(),
            Axis::Linear { linear: (a, b, n) } => spaced(a, b, n, |x| x, |x| x),
            Axis::Log { log: (a, b, n) } => {
                if !(a > 0.0 && b > 0.0) {
                    return Err(bad(format!(
                        "log spacing needs positive ends, got {a} and {b}"
                    )));
                }
                spaced(a, b, n, f64::ln, f64::exp)
            }
        };
        if v.is_empty() {
            return Err(bad("no values".into()));
        }
        if let Some(x) = v.iter().find(|x| !(x.is_finite() && **x > 0.0)) {
            return Err(bad(format!("values must be finite and > 0, got {x}")));
        }
        Ok(v)
    }
}

fn spaced(a: f64, b: f64, n: usize, to: fn(f64) -> f64, from: fn(f64) -> f64) -> Vec<f64> {
    match n {
        0 => Vec::new(),
        1 => vec![a],
        _ => (0..n)
            .map(|i| {
                if i == n - 1 {
                    b // exact end points
                } else if i == 0 {
                    a
                } else {
                    from(to(a) + (to(b) - to(a)) * i as f64 / (n - 1) as f64)
                }
            })
            .collect(),
    }
}

#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
struct WindowSpec {
    center: (f64, f64),
    width: f64,
}

#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
struct SpecFile {
    s: Axis,
    q: Axis,
    pixels: usize,
    rays: f64,
    #[serde(default = "default_engine")]
    engine: String,
    window: WindowSpec,
}

fn default_engine() -> String {
    "rays".into()
}

/// A parsed library spec: the grid and how each map is made.
#[derive(Debug, Clone)]
pub struct LibrarySpec {
    /// Separations.
    pub s: Vec<f64>,
    /// Mass ratios.
    pub q: Vec<f64>,
    /// Window of every map.
    pub window: Window,
    /// Engine name.
    pub engine: String,
    /// Engine density.
    pub density: f64,
}

/// One map of a library: its grid index and key.
#[derive(Debug, Clone, PartialEq)]
pub struct GridPoint {
    /// Index in the grid (q-major).
    pub index: usize,
    /// Separation.
    pub s: f64,
    /// Mass ratio.
    pub q: f64,
    /// The map's key.
    pub key: MapKey,
}

/// A slice of a grid: shard `k` (1-based) of `n`.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Shard {
    /// Which shard, 1..=n.
    pub k: usize,
    /// How many shards.
    pub n: usize,
}

impl std::str::FromStr for Shard {
    type Err = String;
    /// Parses `K/N`.
    ///
    /// ```
    /// use causeway::store::library::Shard;
    /// assert_eq!("2/5".parse::<Shard>().unwrap(), Shard { k: 2, n: 5 });
    /// assert!("0/5".parse::<Shard>().is_err());
    /// ```
    fn from_str(s: &str) -> std::result::Result<Self, String> {
        let (k, n) = s
            .split_once('/')
            .ok_or_else(|| format!("expected K/N, got '{s}'"))?;
        let (k, n): (usize, usize) = (
            k.trim()
                .parse()
                .map_err(|_| format!("'{k}' is not a shard number"))?,
            n.trim()
                .parse()
                .map_err(|_| format!("'{n}' is not a shard count"))?,
        );
        if n == 0 || k == 0 || k > n {
            return Err(format!("shard {k}/{n}: need 1 <= K <= N"));
        }
        Ok(Shard { k, n })
    }
}

impl LibrarySpec {
    /// Parses spec text; `origin` names it in errors (with the line of a TOML error).
    ///
    /// ```
    /// use causeway::store::library::LibrarySpec;
    /// let spec = LibrarySpec::parse(
    ///     "s = {log = [0.5, 2.0, 3]}\nq = [1e-3]\npixels = 50\nrays = 10\n\
    ///      [window]\ncenter = [0.0, 0.0]\nwidth = 2.0\n", "lib.toml").unwrap();
    /// assert_eq!(spec.s, vec![0.5, 1.0, 2.0]);
    /// assert_eq!(spec.points().unwrap().len(), 3);
    /// ```
    pub fn parse(text: &str, origin: &str) -> Result<LibrarySpec> {
        let file: SpecFile = toml::from_str(text).map_err(|e| {
            let line = e
                .span()
                .map(|sp| text[..sp.start.min(text.len())].matches('\n').count() + 1)
                .unwrap_or(1);
            let msg = e
                .message()
                .lines()
                .next()
                .unwrap_or("invalid spec")
                .to_string();
            Error::input(format!("{origin}:{line}: {msg}"))
        })?;
        let named = |e: Error| Error::input(format!("{origin}: {e}"));
        let window =
            Window::new(file.window.center, file.window.width, file.pixels).map_err(named)?;
        engine::by_name(&file.engine, file.rays).map_err(named)?;
        Ok(LibrarySpec {
            s: file.s.values("s").map_err(named)?,
            q: file.q.values("q").map_err(named)?,
            window,
            engine: file.engine,
            density: file.rays,
        })
    }

    /// Reads a spec file.
    pub fn read(path: &Path) -> Result<LibrarySpec> {
        let text = std::fs::read_to_string(path).map_err(|e| Error::io(path, e))?;
        Self::parse(&text, &path.display().to_string())
    }

    /// Every grid point, q-major.
    pub fn points(&self) -> Result<Vec<GridPoint>> {
        let mut out = Vec::with_capacity(self.s.len() * self.q.len());
        for &q in &self.q {
            for &s in &self.s {
                let lens = LensSystem::binary(s, q)?;
                out.push(GridPoint {
                    index: out.len(),
                    s,
                    q,
                    key: MapKey::new(lens, self.window, &self.engine, self.density),
                });
            }
        }
        Ok(out)
    }

    /// The grid points of one shard.
    pub fn shard(&self, shard: Shard) -> Result<Vec<GridPoint>> {
        Ok(self
            .points()?
            .into_iter()
            .filter(|p| p.index % shard.n == shard.k - 1)
            .collect())
    }
}

/// What a library build did.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct BuildSummary {
    /// Maps built now.
    pub built: usize,
    /// Maps already present and verified.
    pub skipped: usize,
}

/// Builds the missing maps of `points` into the store, reporting each finished point to
/// `progress`. Maps present and verified are skipped (and re-entered into the index, in case a
/// build was killed between writing a map and recording it).
pub fn build(
    store: &Store,
    points: &[GridPoint],
    mut progress: impl FnMut(&GridPoint, bool),
) -> Result<BuildSummary> {
    let mut summary = BuildSummary::default();
    for p in points {
        if let Some(map) = store.get(&p.key).ok().flatten() {
            if !store.entries()?.iter().any(|e| e.file == p.key.file_name()) {
                store.record(super::Entry::of_map(&map, &p.key.file_name()))?;
            }
            summary.skipped += 1;
            progress(p, false);
            continue;
        }
        let engine: Box<dyn Engine> = engine::by_name(&p.key.engine, p.key.density)?;
        let map = engine.build(&p.key.lens, &p.key.window)?;
        store.put(&map)?;
        summary.built += 1;
        progress(p, true);
    }
    Ok(summary)
}

/// A job-array script for a Slurm-style scheduler that fills `store` from `spec` in `shards`
/// tasks.
///
/// ```
/// let script = causeway::store::library::job_array_script("lib.toml", "/shared/maps", 8, 2);
/// assert!(script.contains("--array=1-8"));
/// assert!(script.contains("--shard \"${SLURM_ARRAY_TASK_ID}/8\""));
/// ```
pub fn job_array_script(spec: &str, store: &str, shards: usize, threads: usize) -> String {
    format!(
        "#!/bin/bash\n\
         # Fills the map store {store} from {spec} in {shards} array tasks.\n\
         # Tasks share the store safely; rerun the array (or any task) to resume.\n\
         #SBATCH --job-name=causeway-library\n\
         #SBATCH --array=1-{shards}\n\
         #SBATCH --cpus-per-task={threads}\n\
         #SBATCH --output=causeway-library-%A_%a.log\n\
         set -euo pipefail\n\
         causeway library build '{spec}' --store '{store}' --threads {threads} \\\n    \
         --shard \"${{SLURM_ARRAY_TASK_ID}}/{shards}\"\n"
    )
}
