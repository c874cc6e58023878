//! The trajectory grid of one map: the rule that lays out the lines (alpha, u0), the timing of
//! each line, and the line geometry against the map's window.

use super::seed::Seed;
use crate::curve::Preconvolved;
use crate::error::{Error, Result};
use crate::fit::model::Trajectory;
use crate::lens::paczynski;
use crate::lens::PointLens;
use crate::map::Window;
use num_complex::Complex64;
use std::f64::consts::TAU;

/// How the trajectory grid is laid out (see the module documentation).
#[derive(Debug, Clone, PartialEq)]
pub struct GridRule {
    /// Trial source radii.
    pub rhos: Vec<f64>,
    /// Half-range of u0, relative to the seed's u0.
    pub u0_span: f64,
    /// Least half-range of u0 (absolute).
    pub u0_floor: f64,
    /// The fraction of the seed's misfit its valley may rise by within the u0 searched (see
    /// [`Seed::u0_range`]).
    pub u0_misfit: f64,
    /// Factors on the seed's tE.
    pub te_factors: Vec<f64>,
    /// Shifts of t0 in units of the seed's tE.
    pub t0_shifts: Vec<f64>,
    /// Distinct trajectories kept per map.
    pub keep: usize,
    /// Relative tolerance of the off-map interpolation.
    pub interpolation_tol: f64,
    /// Also try each line timed so that its strongest map feature falls at the data's anomaly.
    pub timed: bool,
    /// The lines on a map are spaced for a source of at least `width / coarse_divisions` (see
    /// [`GridRule::grid_rho`]).
    pub coarse_divisions: f64,
    /// Most trajectories (lines times timings) tried on one map before the polish.
    pub max_trajectories: usize,
    /// Lines kept at each finer level of a grid laid out for a source larger than the trial
    /// radii (see [`super::beam`]); 0: no finer levels.
    pub beam: usize,
    /// The search's model error: each error bar is widened by this fraction of the point's
    /// flux above its data set's tenth percentile, so that a crossing a coarse map puts a
    /// little early does not outweigh the shape of the whole curve.
    pub model_floor: f64,
    /// Where one point's share of the search's chi^2 turns from its squared residual to a
    /// logarithm of it (`f64::INFINITY`: never; see the module documentation of the search).
    pub point_cap: f64,
}

impl Default for GridRule {
    fn default() -> Self {
        GridRule {
            rhos: vec![1e-3, 1.5e-3, 2.2e-3, 3.3e-3, 5e-3, 7.5e-3],
            u0_span: 0.2,
            u0_floor: 0.005,
            u0_misfit: 0.1,
            te_factors: vec![1.0],
            t0_shifts: vec![0.0],
            keep: 3,
            interpolation_tol: 1e-3,
            timed: false,
            coarse_divisions: 100.0,
            max_trajectories: 10_000,
            beam: 24,
            model_floor: 0.03,
            point_cap: 25.0,
        }
    }
}

/// The largest trial source radius of the search, in Einstein radii.
pub const MAX_TRIAL_RHO: f64 = 1.0;

impl GridRule {
    /// Checks the rule's values.
    pub fn validate(&self) -> Result<()> {
        let bad = |m: String| Err(Error::input(m));
        if self.rhos.is_empty() || self.rhos.iter().any(|&r| !(r > 0.0 && r <= MAX_TRIAL_RHO)) {
            return bad(format!(
                "rho: trial radii must be > 0 and at most {MAX_TRIAL_RHO} Einstein radius (a \
                 source that large is not read from a map of a planetary caustic), got {:?}",
                self.rhos
            ));
        }
        if !(self.u0_span >= 0.0 && self.u0_span <= 10.0) {
            return bad(format!(
                "u0_span: must be from 0 to 10, got {}",
                self.u0_span
            ));
        }
        if !(self.u0_misfit.is_finite() && self.u0_misfit >= 0.0) {
            return bad(format!("u0_misfit: must be >= 0, got {}", self.u0_misfit));
        }
        if !(self.u0_floor.is_finite() && self.u0_floor >= 0.0) {
            return bad(format!("u0_floor: must be >= 0, got {}", self.u0_floor));
        }
        if self.te_factors.is_empty()
            || self.te_factors.iter().any(|&f| !(f.is_finite() && f > 0.0))
        {
            return bad(format!(
                "te_factors: must be finite and > 0, got {:?}",
                self.te_factors
            ));
        }
        if self.t0_shifts.is_empty() || self.t0_shifts.iter().any(|f| !f.is_finite()) {
            return bad(format!(
                "t0_shifts: must be finite, got {:?}",
                self.t0_shifts
            ));
        }
        if self.keep == 0 {
            return bad("keep: must be at least 1".into());
        }
        if !(self.coarse_divisions.is_finite() && self.coarse_divisions >= 1.0) {
            return bad(format!(
                "coarse divisions: must be >= 1, got {}",
                self.coarse_divisions
            ));
        }
        if !(self.model_floor.is_finite() && (0.0..1.0).contains(&self.model_floor)) {
            return bad(format!(
                "model_floor: must be in [0, 1), got {}",
                self.model_floor
            ));
        }
        if self.point_cap.is_nan() || self.point_cap <= 0.0 {
            return bad(format!("point_cap: must be > 0, got {}", self.point_cap));
        }
        if self.max_trajectories == 0 {
            return bad("max_trajectories: must be at least 1".into());
        }
        Ok(())
    }

    /// The smallest trial radius.
    ///
    /// ```
    /// use causeway::fit::search::GridRule;
    /// let rule = GridRule { rhos: vec![2e-3, 1e-3, 4e-3], ..GridRule::default() };
    /// assert_eq!(rule.rho_min(), 1e-3);
    /// ```
    pub fn rho_min(&self) -> f64 {
        self.rhos.iter().copied().fold(f64::INFINITY, f64::min)
    }

    /// Timings tried on each line: every tE factor with every t0 shift, and every tE factor
    /// once more anchored on the anomaly when [`GridRule::timed`].
    pub fn timings_per_line(&self) -> usize {
        self.te_factors.len() * (self.t0_shifts.len() + usize::from(self.timed))
    }

    /// The source radius the lines on `window` are spaced for: the smallest trial rho, or
    /// `width / coarse_divisions` when that is larger (a wide window is searched first with its
    /// map smoothed by that source, then each kept line is polished at the trial radii), or
    /// larger still so that lines times timings stay within [`GridRule::max_trajectories`].
    ///
    /// ```
    /// use causeway::fit::search::{GridRule, Seed};
    /// use causeway::map::Window;
    /// let rule = GridRule::default();
    /// let seed = Seed::at(0.0, 0.1, 20.0);
    /// // A small window keeps the smallest trial radius; a wide one is coarser.
    /// assert_eq!(rule.grid_rho(&Window::new((0.5, 0.0), 0.05, 100).unwrap(), &seed), 1e-3);
    /// assert!(rule.grid_rho(&Window::new((0.0, 0.0), 2.0, 100).unwrap(), &seed) >= 0.02);
    /// ```
    pub fn grid_rho(&self, window: &Window, seed: &Seed) -> f64 {
        let mut rho = self.rho_min().max(window.width / self.coarse_divisions);
        for _ in 0..8 {
            let n = self.lines_at(window, seed, rho).len() * self.timings_per_line();
            if n <= self.max_trajectories {
                break;
            }
            rho *= 1.05 * (n as f64 / self.max_trajectories as f64).sqrt();
        }
        rho
    }

    /// The (alpha, u0) lines of the grid for a window, spaced for [`GridRule::grid_rho`] (see
    /// the module documentation).
    ///
    /// ```
    /// use causeway::fit::search::{GridRule, Seed};
    /// use causeway::map::Window;
    /// let rule = GridRule { rhos: vec![0.005], ..GridRule::default() };
    /// let seed = Seed::at(0.0, 0.1, 20.0);
    /// let w = Window::new((0.3, 0.0), 0.1, 100).unwrap();
    /// let lines = rule.lines(&w, &seed);
    /// // Every line passes within the half-diagonal of the window's centre...
    /// let r = 0.05 * 2f64.sqrt();
    /// assert!(lines.iter().all(|&(a, u0)| (-0.3 * a.sin() - u0).abs() <= r + 1e-12));
    /// // ...and u0 stays within 20% of the seed's.
    /// assert!(lines.iter().all(|&(_, u0)| (0.08 - 1e-12..=0.12 + 1e-12).contains(&u0)));
    /// ```
    pub fn lines(&self, window: &Window, seed: &Seed) -> Vec<(f64, f64)> {
        self.lines_at(window, seed, self.grid_rho(window, seed))
    }

    /// The lines for a source of radius `rho`: alpha and u0 steps of at most `2 rho`.
    pub(super) fn lines_at(&self, window: &Window, seed: &Seed, rho: f64) -> Vec<(f64, f64)> {
        let step = 2.0 * rho;
        let reach = window.width / std::f64::consts::SQRT_2;
        let n_alpha = ((TAU * reach / step).ceil() as usize).max(8);
        let (lo, hi) = self.u0_limits(seed);
        let n_u = ((hi - lo) / step).ceil().max(1.0);
        let du = (hi - lo) / n_u;
        let (cx, cy) = window.center;
        let mut out = Vec::new();
        for k in 0..n_alpha {
            let alpha = k as f64 * TAU / n_alpha as f64;
            // The line's u0 is its offset from the origin along n = (-sin, cos).
            let pc = -cx * alpha.sin() + cy * alpha.cos();
            let first = ((pc - reach - lo) / du).ceil().max(0.0) as usize;
            let last = ((pc + reach - lo) / du).floor().min(n_u) as i64;
            for j in first as i64..=last {
                out.push((alpha, lo + j as f64 * du));
            }
        }
        out
    }
}

impl GridRule {
    /// The u0 range searched: the seed's u0 +- `max(u0_span u0, u0_floor)`, widened to the
    /// range its valley allows ([`Seed::u0_range`]), never below 0.
    fn u0_limits(&self, seed: &Seed) -> (f64, f64) {
        let half = (self.u0_span * seed.u0).max(self.u0_floor);
        let range = seed.u0_range(self.u0_misfit);
        (
            (seed.u0 - half).min(range.0).max(0.0),
            (seed.u0 + half).max(range.1),
        )
    }

    /// The lines that pass beside a window holding the host (`host`): a planet's caustic
    /// near the host perturbs the magnification well beyond the caustic, and a source that
    /// passes it at a few caustic widths shows that perturbation without any crossing. Their
    /// offsets from the window's centre run from just beyond its half-diagonal `R` to
    /// [`OUTER_REACH`] `R` in steps of [`OUTER_RATIO`] (the pattern is smooth on the scale of
    /// the distance), on [`OUTER_ALPHAS`] directions, within the u0 range searched. They are
    /// read off the map (exact point-source magnifications: a source that far from the caustic
    /// is a point). None for other windows.
    ///
    /// ```
    /// use causeway::fit::search::{GridRule, Seed};
    /// use causeway::map::Window;
    /// use num_complex::Complex64;
    /// let rule = GridRule::default();
    /// let seed = Seed::at(0.0, 0.1, 20.0);
    /// let central = Window::new((0.0, 0.0), 0.05, 100).unwrap();
    /// let outer = rule.outer_lines(&central, &seed, Complex64::new(0.0, 0.0));
    /// let r = 0.05 / 2f64.sqrt();
    /// assert!(!outer.is_empty());
    /// assert!(outer.iter().all(|&(_, u0)| u0 > r && u0 <= 4.0 * r + 1e-12));
    /// // A window away from the host has none.
    /// let planetary = Window::new((1.0, 0.0), 0.05, 100).unwrap();
    /// assert!(rule.outer_lines(&planetary, &seed, Complex64::new(0.0, 0.0)).is_empty());
    /// ```
    pub fn outer_lines(&self, window: &Window, seed: &Seed, host: Complex64) -> Vec<(f64, f64)> {
        let reach = window.width / std::f64::consts::SQRT_2;
        let (cx, cy) = window.center;
        if (host.re - cx).hypot(host.im - cy) > reach {
            return Vec::new();
        }
        let (lo, hi) = self.u0_limits(seed);
        let mut out = Vec::new();
        for k in 0..OUTER_ALPHAS {
            let alpha = k as f64 * TAU / OUTER_ALPHAS as f64;
            let pc = -cx * alpha.sin() + cy * alpha.cos();
            let mut offset = reach * OUTER_RATIO;
            while offset <= OUTER_REACH * reach * (1.0 + 1e-12) {
                for u0 in [pc - offset, pc + offset] {
                    if (lo..=hi).contains(&u0) {
                        out.push((alpha, u0));
                    }
                }
                offset *= OUTER_RATIO;
            }
        }
        out
    }
}

/// How far beyond a central window [`GridRule::outer_lines`] reach, in half-diagonals.
pub const OUTER_REACH: f64 = 4.0;
/// The ratio of successive offsets of [`GridRule::outer_lines`].
pub const OUTER_RATIO: f64 = 1.2;
/// Directions of [`GridRule::outer_lines`].
pub const OUTER_ALPHAS: usize = 64;

/// Times during which the straight line of `tr` lies in `window`, if any.
pub(super) fn crossing(tr: &Trajectory, window: &Window) -> Option<(f64, f64)> {
    let l = tr.line();
    let (sn, cs) = l.alpha.sin_cos();
    let (x0, y0) = window.origin();
    let (mut lo, mut hi) = (f64::NEG_INFINITY, f64::INFINITY);
    // x(tau) = tau cos - u0 sin, y(tau) = tau sin + u0 cos.
    for (slope, offset, a, b) in [
        (cs, -l.u0 * sn, x0, x0 + window.width),
        (sn, l.u0 * cs, y0, y0 + window.width),
    ] {
        if slope.abs() < 1e-15 {
            if offset < a || offset > b {
                return None;
            }
        } else {
            let (t1, t2) = ((a - offset) / slope, (b - offset) / slope);
            lo = lo.max(t1.min(t2));
            hi = hi.min(t1.max(t2));
        }
    }
    (lo <= hi).then_some((l.t0 + lo * l.te, l.t0 + hi * l.te))
}

/// The steps in alpha and u0 of lines spaced for a source of radius `rho` on `window`: `2 rho`
/// at the window's half-diagonal, and `2 rho`.
pub(super) fn grid_steps(window: &Window, rho: f64) -> (f64, f64) {
    (
        2.0 * rho * std::f64::consts::SQRT_2 / window.width,
        2.0 * rho,
    )
}

/// A grid line and the times during which it crosses the map's window (both infinite when it
/// does not).
pub(super) struct Line {
    pub(super) trajectory: Trajectory,
    /// First and last time in the window.
    pub(super) span: (f64, f64),
}

impl Line {
    /// The line of `trajectory` on `window`: its time span there, or none (every point read
    /// off the map) when it does not cross it.
    pub(super) fn on(trajectory: Trajectory, window: &Window) -> Line {
        Line {
            trajectory,
            span: crossing(&trajectory, window).unwrap_or((f64::INFINITY, f64::INFINITY)),
        }
    }

    /// The line of `trajectory` if it crosses `window` at one of the sorted `times`.
    pub(super) fn observed(trajectory: Trajectory, window: &Window, times: &[f64]) -> Option<Line> {
        let span = crossing(&trajectory, window)?;
        let k = times.partition_point(|&t| t < span.0);
        (k < times.len() && times[k] <= span.1).then_some(Line { trajectory, span })
    }
}

/// The `(t0, tE)` of the line `(alpha, u0)` about the origin whose motion relative to the host
/// at `host` is the single lens's at the same impact parameter ([`Seed::timing`]): relative to
/// the host the line has `u0_h = u0 - n.host` and `tau_h = tau - d.host`, with
/// `d = (cos alpha, sin alpha)` and `n = (-sin alpha, cos alpha)`, so `t0 = t0_h - (d.host) tE`.
pub(super) fn host_timing(seed: &Seed, host: Complex64, alpha: f64, u0: f64) -> (f64, f64) {
    let (sn, cs) = alpha.sin_cos();
    let along = cs * host.re + sn * host.im;
    let across = -sn * host.re + cs * host.im;
    let (t0_h, te) = seed.timing((u0 - across).abs());
    (t0_h - along * te, te)
}

/// Where along the line of `tr` (as `tau`, the line's own time in units of tE from its closest
/// approach) its magnification on the map departs most from the host's alone (a bump or a dip:
/// the largest `|ln(A / A_host)|`), sampled every `rho / 2` across the window; `None` if it never
/// departs by 5%.
pub(super) fn strongest_feature(
    tr: &Trajectory,
    window: &Window,
    conv: &Preconvolved,
    host: &PointLens,
    rho: f64,
) -> Option<f64> {
    let l = tr.line();
    let (a, b) = crossing(tr, window)?;
    let (tau0, tau1) = ((a - l.t0) / l.te, (b - l.t0) / l.te);
    let n = ((tau1 - tau0) / (0.5 * rho)).ceil().min(1e5) as usize;
    let (sn, cs) = l.alpha.sin_cos();
    let mut best = (1.05f64.ln(), None);
    for k in 0..=n {
        let tau = tau0 + (tau1 - tau0) * k as f64 / n.max(1) as f64;
        let (x, y) = (tau * cs - l.u0 * sn, tau * sn + l.u0 * cs);
        if let Some(a) = conv.read(x, y) {
            let u = (Complex64::new(x, y) - host.position).norm() / host.mass.sqrt();
            let departure = (a / paczynski(u.max(1e-12))).ln().abs();
            if departure > best.0 {
                best = (departure, Some(tau));
            }
        }
    }
    best.1
}

/// Whether two grid trajectories are distinct: more than five grid steps apart in alpha or u0,
/// or timed differently (t0 by more than 2% of tE, or tE by more than 5%).
pub(super) fn distinct(a: &Trajectory, b: &Trajectory, d_alpha: f64, d_u0: f64) -> bool {
    let (a, b) = (a.line(), b.line());
    alpha_gap(a.alpha, b.alpha) > 5.0 * d_alpha
        || (a.u0 - b.u0).abs() > 5.0 * d_u0
        || (a.t0 - b.t0).abs() > 0.02 * a.te.min(b.te)
        || (a.te / b.te).ln().abs() > 0.05
}

/// The angle between two directions of motion (radians, in [0, pi]).
pub(super) fn alpha_gap(a: f64, b: f64) -> f64 {
    let d = (a - b).rem_euclid(TAU);
    d.min(TAU - d)
}

/// The evaluated lines (each its best capped and plain `(chi2, radius index)`, `None` where
/// nothing could be read) as `(chi2, line index, radius index)` by `measure` (0 capped, 1
/// plain), best first, ties by line index.
pub(super) fn ranked(
    evaluated: &[Option<[(f64, usize); 2]>],
    measure: usize,
) -> Vec<(f64, usize, usize)> {
    let mut ranked: Vec<(f64, usize, usize)> = evaluated
        .iter()
        .enumerate()
        .filter_map(|(i, e)| e.map(|e| (e[measure].0, i, e[measure].1)))
        .collect();
    ranked.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)));
    ranked
}
