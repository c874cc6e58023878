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
//! refine = 4          # optional: tiles 4 times finer where the caustics run
//!
//! [window]            # the same window for every map
//! center = [0.0, 0.0]
//! width = 4.0
//! ```
//!
//! or a window placed on a caustic of each binary and sized to it:
//!
//! ```toml
//! [window]
//! rule = "planetary"  # or "central"
//! margin = 1.5        # window side = margin x the caustic's larger extent (default 1.5)
//! ```
//!
//! The central caustic is the one nearest the host (m1); the planetary caustics are the others
//! (one for a wide binary, the two off-axis triangles of a close one, framed together). A
//! resonant binary has one caustic, which both rules frame. `rule = "caustics"` makes both
//! maps of each binary (one map where the binary has a single caustic): the library to use
//! when the answer is not known, since any caustic an event may have crossed is on a map.
//!
//! With `refine = F` (2 to 64), each map holds refined tiles near its caustics at F times its
//! resolution ([`crate::map::tiles`]), in the same file; the keys of such maps carry the
//! refinement (key format 2), and those of plain maps are unchanged.
//!
//! Grid points are numbered q-major (`index = iq * len(s) + is`); shard `K/N` takes the points
//! whose index is `K - 1` modulo `N`, so the shards of one spec are disjoint and together
//! make the whole grid. Builders sharing a store claim each map before they build it (see
//! [`build_with`]), so shards and workers (`wait = false`) may run side by side.
//!
//! A spec gives at most [`MAX_GRID_POINTS`] (100,000) grid points, and one map of it must fit in
//! half the machine's memory; larger specs are refused when read, before anything is built.

pub use super::builder::{
    build, build_with, status, BuildOptions, BuildSummary, Outcome, PointState,
};
use super::MapKey;
use crate::caustics::caustic_curves;
use crate::engine;
use crate::error::{shown, tidy, Error, Result};
use crate::lens::LensSystem;
use crate::map::tiles::Refinement;
use crate::map::Window;
use serde::Deserialize;
use std::path::Path;

/// The values of one grid axis.
#[derive(Debug, Clone, PartialEq, Deserialize)]
#[serde(try_from = "AxisSpec")]
enum Axis {
    List(Vec<f64>),
    Linear { linear: (f64, f64, usize) },
    Log { log: (f64, f64, usize) },
}

/// An axis as typed: a list, or a table holding exactly one of `linear` and `log`.
#[derive(Deserialize)]
#[serde(untagged)]
enum AxisSpec {
    List(Vec<f64>),
    Table(AxisTable),
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct AxisTable {
    linear: Option<(f64, f64, usize)>,
    log: Option<(f64, f64, usize)>,
}

impl TryFrom<AxisSpec> for Axis {
    type Error = String;

    fn try_from(spec: AxisSpec) -> std::result::Result<Axis, String> {
        match spec {
            AxisSpec::List(v) => Ok(Axis::List(v)),
            AxisSpec::Table(AxisTable {
                linear: Some(linear),
                log: None,
            }) => Ok(Axis::Linear { linear }),
            AxisSpec::Table(AxisTable {
                linear: None,
                log: Some(log),
            }) => Ok(Axis::Log { log }),
            AxisSpec::Table(_) => {
                Err("give one of { linear = [first, last, count] } or { log = [...] }".into())
            }
        }
    }
}

impl Axis {
    fn values(&self, name: &str) -> Result<Vec<f64>> {
        let bad = |m: String| Error::input(format!("spec: {name}: {m}"));
        if let Axis::Linear { linear: (_, _, n) } | Axis::Log { log: (_, _, n) } = *self {
            if n > MAX_GRID_POINTS {
                return Err(bad(format!(
                    "count {n} is more than the limit of {MAX_GRID_POINTS} grid points"
                )));
            }
        }
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
    rule: Option<String>,
    center: Option<Vec<f64>>,
    width: Option<f64>,
    margin: Option<f64>,
}

/// The most grid points a spec may give (values of s times values of q): a larger grid is a
/// typing slip, not a library, and is refused before any value is made.
pub const MAX_GRID_POINTS: usize = 100_000;

/// The least window side of [`WindowRule::Caustics`] (Einstein radii): four times the largest
/// trial source radius of the search, so that the map of a tiny caustic still serves every
/// source the fit tries.
pub const MIN_CAUSTICS_WIDTH: f64 = 0.03;

/// How each map's window is chosen.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum WindowRule {
    /// The same window for every map.
    Fixed(Window),
    /// Framing the central caustic, `margin` times its extent, with this many pixels.
    Central { margin: f64, pixels: usize },
    /// Framing the planetary caustic(s), likewise.
    Planetary { margin: f64, pixels: usize },
    /// Both: a map framing the central caustic and one framing the planetary caustic(s), or
    /// one map when the binary has a single caustic; no side below [`MIN_CAUSTICS_WIDTH`].
    Caustics { margin: f64, pixels: usize },
}

impl WindowSpec {
    fn rule(&self, pixels: usize) -> Result<WindowRule> {
        let margin = self.margin.unwrap_or(1.5);
        if !(margin.is_finite() && margin > 0.0) {
            return Err(Error::input(format!(
                "window.margin must be > 0, got {margin}"
            )));
        }
        let center = match self.center.as_deref() {
            None => None,
            Some(&[x, y]) => Some((x, y)),
            Some(other) => {
                return Err(Error::input(format!(
                    "window.center: expected [x, y], got {} values",
                    other.len()
                )))
            }
        };
        match (self.rule.as_deref(), center, self.width) {
            (None | Some("fixed"), Some(center), Some(width)) => {
                Ok(WindowRule::Fixed(Window::new(center, width, pixels)?))
            }
            (None | Some("fixed"), _, _) => Err(Error::input(
                "window: a fixed window needs center = [x, y] and width",
            )),
            (Some("central"), None, None) => Ok(WindowRule::Central { margin, pixels }),
            (Some("planetary"), None, None) => Ok(WindowRule::Planetary { margin, pixels }),
            (Some("caustics"), None, None) => Ok(WindowRule::Caustics { margin, pixels }),
            (Some("central" | "planetary" | "caustics"), _, _) => Err(Error::input(
                "window: center and width go with rule = \"fixed\" only",
            )),
            (Some(other), _, _) => Err(Error::input(format!(
                "window.rule: unknown rule '{}' (fixed, central, planetary or caustics)",
                shown(other)
            ))),
        }
    }
}

impl WindowRule {
    /// The window of the binary (s, q).
    ///
    /// ```
    /// use causeway::{lens::LensSystem, store::library::WindowRule};
    /// let lens = LensSystem::binary(1.5, 1e-3).unwrap();
    /// let w = WindowRule::Planetary { margin: 1.5, pixels: 100 }.window(&lens).unwrap();
    /// // The planetary caustic of a wide planet lies near s - 1/s from the host.
    /// let host = -1.5 * 1e-3 / 1.001;
    /// assert!((w.center.0 - (host + 1.5 - 1.0 / 1.5)).abs() < 0.02);
    /// ```
    pub fn window(&self, lens: &LensSystem) -> Result<Window> {
        let (margin, pixels, central) = match *self {
            WindowRule::Fixed(w) => return Ok(w),
            WindowRule::Central { margin, pixels } | WindowRule::Caustics { margin, pixels } => {
                (margin, pixels, true)
            }
            WindowRule::Planetary { margin, pixels } => (margin, pixels, false),
        };
        framing(lens, margin, pixels, central)
    }

    /// Every window of the binary: one, or two for [`WindowRule::Caustics`] when the binary
    /// has more than one caustic.
    ///
    /// ```
    /// use causeway::{lens::LensSystem, store::library::WindowRule};
    /// let rule = WindowRule::Caustics { margin: 1.5, pixels: 100 };
    /// assert_eq!(rule.windows(&LensSystem::binary(1.5, 1e-3).unwrap()).unwrap().len(), 2);
    /// assert_eq!(rule.windows(&LensSystem::binary(1.0, 1e-2).unwrap()).unwrap().len(), 1);
    /// ```
    pub fn windows(&self, lens: &LensSystem) -> Result<Vec<Window>> {
        let WindowRule::Caustics { margin, pixels } = *self else {
            return Ok(vec![self.window(lens)?]);
        };
        // A caustic far smaller than any source a fit tries is framed with room for one.
        let at_least = |w: Window| Window::new(w.center, w.width.max(MIN_CAUSTICS_WIDTH), pixels);
        if caustic_curves(lens)?.len() > 1 {
            Ok(vec![
                at_least(framing(lens, margin, pixels, true)?)?,
                at_least(framing(lens, margin, pixels, false)?)?,
            ])
        } else {
            Ok(vec![at_least(framing(lens, margin, pixels, true)?)?])
        }
    }
}

/// The window framing the central caustic of `lens` (or the others), `margin` times their
/// extent, with `pixels` per side.
fn framing(lens: &LensSystem, margin: f64, pixels: usize, central: bool) -> Result<Window> {
    let host = lens.lenses()[0].position;
    let mut curves = caustic_curves(lens)?;
    let distance = |c: &Vec<(f64, f64)>| {
        let n = c.len().max(1) as f64;
        let (x, y) = c.iter().fold((0.0, 0.0), |a, p| (a.0 + p.0, a.1 + p.1));
        (x / n - host.re).hypot(y / n - host.im)
    };
    curves.sort_by(|a, b| distance(a).total_cmp(&distance(b)));
    let chosen: Vec<&Vec<(f64, f64)>> = if central || curves.len() == 1 {
        curves.iter().take(1).collect()
    } else {
        curves.iter().skip(1).collect()
    };
    let points = chosen.iter().flat_map(|c| c.iter());
    let (mut x0, mut x1, mut y0, mut y1) = (f64::MAX, f64::MIN, f64::MAX, f64::MIN);
    for &(x, y) in points {
        x0 = x0.min(x);
        x1 = x1.max(x);
        y0 = y0.min(y);
        y1 = y1.max(y);
    }
    if x0 > x1 {
        return Err(Error::Numerical(format!(
            "{lens}: no caustic found to frame"
        )));
    }
    let extent = (x1 - x0).max(y1 - y0).max(1e-9);
    let mut centre = (0.5 * (x0 + x1), 0.5 * (y0 + y1));
    if lens.symmetric_about_x_axis() && centre.1.abs() < 1e-3 * extent {
        centre.1 = 0.0; // the framed caustics are symmetric: drop sampling round-off
    }
    Window::new(centre, margin * extent, pixels)
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
    refine: Option<usize>,
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
    /// How each map's window is chosen.
    pub window: WindowRule,
    /// Engine name.
    pub engine: String,
    /// Engine density.
    pub density: f64,
    /// Refined tiles near the caustics of every map, if any.
    pub refine: Option<Refinement>,
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
            .ok_or_else(|| format!("expected K/N, got '{}'", shown(s)))?;
        let (k, n): (usize, usize) = (
            k.trim()
                .parse()
                .map_err(|_| format!("'{}' is not a shard number", shown(k)))?,
            n.trim()
                .parse()
                .map_err(|_| format!("'{}' is not a shard count", shown(n)))?,
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
            let msg = tidy(e.message().lines().next().unwrap_or("invalid spec"));
            Error::input(format!("{origin}:{line}: {msg}"))
        })?;
        let named = |e: Error| Error::input(format!("{origin}: {e}"));
        if file.pixels == 0 {
            return Err(Error::input(format!("{origin}: pixels must be at least 1")));
        }
        let window = file.window.rule(file.pixels).map_err(named)?;
        let refine = file
            .refine
            .map(Refinement::new)
            .transpose()
            .map_err(named)?;
        let builder = engine::by_name(&file.engine, file.rays).map_err(named)?;
        let s = file.s.values("s").map_err(named)?;
        let q = file.q.values("q").map_err(named)?;
        if s.len().saturating_mul(q.len()) > MAX_GRID_POINTS {
            return Err(Error::input(format!(
                "{origin}: s and q: {} x {} grid points, more than the limit of \
                 {MAX_GRID_POINTS}",
                s.len(),
                q.len()
            )));
        }
        // The memory of one map, at the first grid point (a fixed window, or a unit window
        // of the spec's pixels where each map frames its caustic).
        let sample = match window {
            WindowRule::Fixed(w) => w,
            _ => Window::new((0.0, 0.0), 1.0, file.pixels)?,
        };
        let lens = LensSystem::binary(s[0], q[0]).map_err(named)?;
        let limit = engine::default_memory_limit();
        let tile = refine.map(|r| r.tile_window(&sample, (0, 0))).transpose()?;
        let largest = match tile {
            Some(t) if t.pixels > sample.pixels => t,
            _ => sample,
        };
        engine::check_memory(builder.as_ref(), &lens, &largest, limit).map_err(|need| {
            Error::input(format!(
                "{origin}: pixels = {}: each map needs about {}, more than the allowed {} \
                 (half the memory)",
                file.pixels,
                engine::gib(need),
                engine::gib(limit)
            ))
        })?;
        Ok(LibrarySpec {
            s,
            q,
            window,
            engine: file.engine,
            density: file.rays,
            refine,
        })
    }

    /// Reads a spec file.
    pub fn read(path: &Path) -> Result<LibrarySpec> {
        let text = std::fs::read_to_string(path).map_err(|e| Error::io(path, e))?;
        Self::parse(&text, &path.display().to_string())
    }

    /// Every grid point, q-major (two at one (s, q) where the rule makes two maps).
    pub fn points(&self) -> Result<Vec<GridPoint>> {
        let mut out = Vec::with_capacity(self.s.len() * self.q.len());
        for &q in &self.q {
            for &s in &self.s {
                let lens = LensSystem::binary(s, q)?;
                for window in self.window.windows(&lens)? {
                    out.push(GridPoint {
                        index: out.len(),
                        s,
                        q,
                        key: MapKey::new(lens.clone(), window, &self.engine, self.density)
                            .refined(self.refine),
                    });
                }
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
