//! Source trajectories: the straight line of DESIGN.md and paths of points read from CSV.

use crate::error::{Error, Result};
use crate::table::Table;
use std::path::Path;

/// A straight source trajectory (t0, u0, tE, alpha).
///
/// `tau = (t - t0) / tE`; the source is at
/// `(tau cos(alpha) - u0 sin(alpha), tau sin(alpha) + u0 cos(alpha))`: it moves along the
/// direction `alpha` (radians, from the x axis towards y), and at `t = t0` it is at signed
/// distance `u0` from the origin, to the left of the direction of motion for `u0 > 0`.
///
/// ```
/// use causeway::curve::StraightLine;
/// let line = StraightLine::new(10.0, 0.1, 20.0, 0.0).unwrap();
/// assert_eq!(line.position(30.0), (1.0, 0.1));
/// assert!(StraightLine::new(0.0, 0.1, 0.0, 0.0).is_err()); // tE must be > 0
/// ```
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct StraightLine {
    /// Time of closest approach to the origin (days).
    pub t0: f64,
    /// Signed impact parameter (Einstein radii).
    pub u0: f64,
    /// Einstein timescale (days).
    pub te: f64,
    /// Direction of motion, radians from the x axis.
    pub alpha: f64,
}

impl StraightLine {
    /// Checks and builds a trajectory (`alpha` in radians).
    pub fn new(t0: f64, u0: f64, te: f64, alpha: f64) -> Result<Self> {
        for (name, v) in [("--t0", t0), ("--u0", u0), ("--alpha", alpha)] {
            if !v.is_finite() {
                return Err(Error::input(format!("{name}: must be finite, got {v}")));
            }
        }
        if !te.is_finite() || te <= 0.0 {
            return Err(Error::input(format!(
                "--te: must be finite and > 0, got {te}"
            )));
        }
        Ok(StraightLine { t0, u0, te, alpha })
    }

    /// Source position at time `t`.
    pub fn position(&self, t: f64) -> (f64, f64) {
        let tau = (t - self.t0) / self.te;
        let (s, c) = self.alpha.sin_cos();
        (tau * c - self.u0 * s, tau * s + self.u0 * c)
    }

    /// The path sampled at the given times.
    pub fn path(&self, times: &[f64]) -> SourcePath {
        SourcePath {
            times: Some(times.to_vec()),
            points: times.iter().map(|&t| self.position(t)).collect(),
        }
    }
}

/// Source positions in order, with their times when known.
///
/// ```
/// use causeway::curve::SourcePath;
/// let p = SourcePath::parse("t,x,y\n1,0.5,0\n2,0.6,0\n", "path.csv").unwrap();
/// assert_eq!(p.times, Some(vec![1.0, 2.0]));
/// assert_eq!(p.points[1], (0.6, 0.0));
/// ```
#[derive(Debug, Clone, PartialEq)]
pub struct SourcePath {
    /// Times (days), one per point, when the path has them.
    pub times: Option<Vec<f64>>,
    /// Source positions (x, y) in Einstein radii.
    pub points: Vec<(f64, f64)>,
}

impl SourcePath {
    /// Parses CSV with header `x,y` or `t,x,y` (column order free; extra columns ignored).
    pub fn parse(text: &str, origin: &str) -> Result<Self> {
        let table = Table::parse(text, origin, &["x", "y"], &["t"])?;
        if table.rows.is_empty() {
            return Err(Error::input(format!("{origin}: no source positions")));
        }
        let points = table.rows.iter().map(|r| (r[0], r[1])).collect();
        let times = table
            .column("t")
            .map(|k| table.rows.iter().map(|r| r[k]).collect());
        Ok(SourcePath { times, points })
    }

    /// Reads a path file (see [`SourcePath::parse`]).
    pub fn read(path: &Path) -> Result<Self> {
        let text = std::fs::read_to_string(path).map_err(|e| Error::io(path, e))?;
        Self::parse(&text, &path.display().to_string())
    }
}

/// Parses a CSV of times (header `t`).
///
/// ```
/// let t = causeway::curve::parse_times("t\n-1.5\n0\n2\n", "times.csv").unwrap();
/// assert_eq!(t, vec![-1.5, 0.0, 2.0]);
/// ```
pub fn parse_times(text: &str, origin: &str) -> Result<Vec<f64>> {
    let table = Table::parse(text, origin, &["t"], &[])?;
    if table.rows.is_empty() {
        return Err(Error::input(format!("{origin}: no times")));
    }
    Ok(table.rows.iter().map(|r| r[0]).collect())
}

/// Reads a times file (see [`parse_times`]).
pub fn read_times(path: &Path) -> Result<Vec<f64>> {
    let text = std::fs::read_to_string(path).map_err(|e| Error::io(path, e))?;
    parse_times(&text, &path.display().to_string())
}

/// The most times a range may give: ten million, far past any observed light curve, and
/// refused before a time is made.
pub const MAX_TIMES: usize = 10_000_000;

/// `count` evenly spaced times from `start` to `end` inclusive (at most [`MAX_TIMES`]).
///
/// ```
/// let t = causeway::curve::time_range(0.0, 1.0, 5).unwrap();
/// assert_eq!(t, vec![0.0, 0.25, 0.5, 0.75, 1.0]);
/// ```
pub fn time_range(start: f64, end: f64, count: usize) -> Result<Vec<f64>> {
    if count > MAX_TIMES {
        return Err(Error::input(format!(
            "--time-range: COUNT {count} is more than the limit of {MAX_TIMES} times"
        )));
    }
    if !start.is_finite() || !end.is_finite() || count == 0 || (count == 1 && start != end) {
        return Err(Error::input(format!(
            "--time-range: expected START,END,COUNT with finite ends and COUNT >= 2 \
             (or 1 with START = END), got {start},{end},{count}"
        )));
    }
    if count == 1 {
        return Ok(vec![start]);
    }
    let step = (end - start) / (count - 1) as f64;
    Ok((0..count)
        .map(|k| {
            if k + 1 == count {
                end
            } else {
                start + k as f64 * step
            }
        })
        .collect())
}
