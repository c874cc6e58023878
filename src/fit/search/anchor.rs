//! Timings anchored on the data's caustic crossings: the idea of the caustic-crossing
//! parameterisation (Cassan 2008, A&A 491, 587), used to time the grid's lines.
//!
//! A source entering a caustic brightens within a few source-crossing times, and leaving it
//! fades as fast: these two times are what the data fix best of a crossing event, far better
//! than a single lens fitted to the rest of the curve fixes `(t0, tE)` (a stellar binary's
//! crossings take the whole peak, and a single lens fitted around them can be wrong by a
//! factor two in tE). So the data's sharpest rises and drops are found first
//! ([`crossing_pairs`]: the candidate entry and exit times `(T1, T2)`), and every grid line
//! that runs through a caustic, entering at `tau_a` and leaving at `tau_b` along itself
//! ([`inside_intervals`]), is also tried with the one timing that puts those points at those
//! times: `tE = (T2 - T1) / (tau_b - tau_a)`, `t0 = T1 - tau_a tE` ([`anchored_timings`]).
//! A map a little off in (s, q) moves its crossings along the line; the anchored timing
//! follows them, where a timing from the single lens would put them days away from the data.
//!
//! What it cannot find: a crossing seen on one side only (the other in a gap), or crossings
//! too gentle to stand out (a source much larger than the caustic). Those events keep the
//! single-lens timings.

use crate::caustics::caustic_curves;
use crate::error::Result;
use crate::fit::photometry::DataSet;
use crate::lens::LensSystem;
use num_complex::Complex64;

/// Neighbouring points further apart than this (days) are not compared.
pub const PAIR_GAP: f64 = 0.25;
/// Least significance of the strongest change between neighbouring points (in units of their
/// combined error bars) of a run that can mark a crossing.
pub const PAIR_SIGNIFICANCE: f64 = 8.0;
/// Least significance of every change of such a run.
pub const RUN_SIGNIFICANCE: f64 = 4.0;
/// Least rate of change of `ln flux` (per day) that can mark a crossing.
pub const MIN_RATE: f64 = 1.0;
/// Features closer in time than this (days) are one.
pub const FEATURE_MERGE: f64 = 0.5;
/// The sharpest rises and the sharpest drops kept, each.
pub const FEATURES_KEPT: usize = 2;
/// Anchored tE are kept within this factor of the seed's either way.
pub const TE_REACH: f64 = 5.0;

/// Candidate (entry, exit) time pairs of a caustic crossing in the data: the
/// [`FEATURES_KEPT`] sharpest rises (entries) and drops (exits). A rise or drop is a run of at
/// least two changes of one sign between neighbouring points of one set (at most [`PAIR_GAP`]
/// apart, each change at least [`RUN_SIGNIFICANCE`] combined error bars, the strongest at
/// least [`PAIR_SIGNIFICANCE`]; an outlier jumps out and back, a crossing keeps going), placed
/// and measured at its steepest change of `ln flux` (at least [`MIN_RATE`] per day); features within
/// [`FEATURE_MERGE`] of a steeper one dropped; every entry paired with every later exit.
/// Each feature's time is the middle of its pair. Empty when the data show no rise or no drop.
///
/// ```
/// use causeway::fit::photometry::DataSet;
/// use causeway::fit::search::anchor::crossing_pairs;
/// // Flux 10 outside a caustic and 40 inside, from t = 3.0 to 7.0, each edge a ramp of 0.2 d
/// // (a source's own crossing time), sampled every 0.05 d.
/// let mut text = String::from("t,flux,flux_err\n");
/// for k in 0..200 {
///     let t = k as f64 * 0.05 + 0.025;
///     let f = 10.0 + 30.0 * ((t - 3.0) / 0.2).clamp(0.0, 1.0) * (1.0 - ((t - 7.0) / 0.2).clamp(0.0, 1.0));
///     text += &format!("{t},{f},0.1\n");
/// }
/// let data = [DataSet::parse(&text, "a.csv", 22.0).unwrap()];
/// let pairs = crossing_pairs(&data);
/// assert_eq!(pairs.len(), 1);
/// assert!((pairs[0].0 - 3.1).abs() < 0.1 && (pairs[0].1 - 7.1).abs() < 0.1);
/// // A lone outlier is no crossing.
/// let mut text = String::from("t,flux,flux_err\n");
/// for k in 0..200 {
///     text += &format!("{},{},0.1\n", k as f64 * 0.05, if k == 50 { 40.0 } else { 10.0 });
/// }
/// assert!(crossing_pairs(&[DataSet::parse(&text, "b.csv", 22.0).unwrap()]).is_empty());
/// ```
pub fn crossing_pairs(data: &[DataSet]) -> Vec<(f64, f64)> {
    // (time, rate of ln flux per day), signed.
    let mut changes: Vec<(f64, f64)> = Vec::new();
    for set in data {
        let (t, f) = (&set.times, &set.flux);
        // Each neighbouring pair's (time, rate, significance), where it is a pair.
        let pair = |i: usize| -> Option<(f64, f64, f64)> {
            let dt = t[i] - t[i - 1];
            (dt > 0.0 && dt <= PAIR_GAP && f[i] > 0.0 && f[i - 1] > 0.0).then(|| {
                let z = (f[i] - f[i - 1]) / set.sigma(i).hypot(set.sigma(i - 1));
                (0.5 * (t[i] + t[i - 1]), (f[i] / f[i - 1]).ln() / dt, z)
            })
        };
        // Runs of changes of one sign, each at least RUN_SIGNIFICANCE: an outlier jumps out
        // and back, a crossing keeps going.
        let mut run: Vec<(f64, f64, f64)> = Vec::new();
        let mut close = |run: &mut Vec<(f64, f64, f64)>| {
            if run.len() >= 2 {
                let steepest = run.iter().max_by(|a, b| a.1.abs().total_cmp(&b.1.abs()));
                let strongest = run.iter().map(|c| c.2.abs()).fold(0.0, f64::max);
                if let Some(&(time, rate, _)) = steepest {
                    if strongest >= PAIR_SIGNIFICANCE && rate.abs() >= MIN_RATE {
                        changes.push((time, rate));
                    }
                }
            }
            run.clear();
        };
        for i in 1..set.len() {
            match pair(i).filter(|c| c.2.abs() >= RUN_SIGNIFICANCE) {
                Some(c) if run.last().is_none_or(|l| l.2 * c.2 > 0.0) => run.push(c),
                Some(c) => {
                    close(&mut run);
                    run.push(c);
                }
                None => close(&mut run),
            }
        }
        close(&mut run);
    }
    let sharpest = |sign: f64| -> Vec<f64> {
        let mut c: Vec<(f64, f64)> = changes
            .iter()
            .filter(|c| c.1 * sign > 0.0)
            .map(|&(t, r)| (t, r.abs()))
            .collect();
        c.sort_by(|a, b| b.1.total_cmp(&a.1).then(a.0.total_cmp(&b.0)));
        let mut kept: Vec<f64> = Vec::new();
        for (t, _) in c {
            if kept.iter().all(|k| (k - t).abs() > FEATURE_MERGE) {
                kept.push(t);
                if kept.len() == FEATURES_KEPT {
                    break;
                }
            }
        }
        kept
    };
    let (rises, drops) = (sharpest(1.0), sharpest(-1.0));
    let mut pairs: Vec<(f64, f64)> = rises
        .iter()
        .flat_map(|&a| drops.iter().filter(move |&&b| b > a).map(move |&b| (a, b)))
        .collect();
    pairs.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.total_cmp(&b.1)));
    pairs
}

/// The caustics of `lens` as closed polylines of complex points, as [`inside_intervals`] takes
/// them.
pub fn caustic_polylines(lens: &LensSystem) -> Result<Vec<Vec<Complex64>>> {
    Ok(caustic_curves(lens)?
        .iter()
        .map(|c| c.iter().map(|&(x, y)| Complex64::new(x, y)).collect())
        .collect())
}

/// The stretches `(tau_a, tau_b)` of the line `(alpha, u0)` inside each closed caustic of
/// `caustics`: its crossings of each caustic in order along it, paired (in, out). The line's
/// points are `tau (cos alpha, sin alpha) + u0 (-sin alpha, cos alpha)`. A caustic the line
/// only grazes (an odd count, at a tangent) gives none.
///
/// ```
/// use causeway::fit::search::anchor::inside_intervals;
/// use num_complex::Complex64;
/// // A square caustic of side 2 about the origin; the line alpha = 0 at u0 = 0.5 runs through it
/// // from x = -1 to x = 1.
/// let square: Vec<Complex64> = [(-1.0, -1.0), (1.0, -1.0), (1.0, 1.0), (-1.0, 1.0), (-1.0, -1.0)]
///     .iter()
///     .map(|&(x, y)| Complex64::new(x, y))
///     .collect();
/// let inside = inside_intervals(&[square], 0.0, 0.5);
/// assert_eq!(inside.len(), 1);
/// assert!((inside[0].0 + 1.0).abs() < 1e-12 && (inside[0].1 - 1.0).abs() < 1e-12);
/// ```
pub fn inside_intervals(caustics: &[Vec<Complex64>], alpha: f64, u0: f64) -> Vec<(f64, f64)> {
    let (sn, cs) = alpha.sin_cos();
    let mut out = Vec::new();
    for curve in caustics {
        let mut taus: Vec<f64> = Vec::new();
        let offset = |z: &Complex64| -sn * z.re + cs * z.im - u0;
        for w in curve.windows(2) {
            let (h0, h1) = (offset(&w[0]), offset(&w[1]));
            if (h0 < 0.0) != (h1 < 0.0) {
                let z = w[0] + (w[1] - w[0]) * (h0 / (h0 - h1));
                taus.push(cs * z.re + sn * z.im);
            }
        }
        if taus.len() % 2 == 1 {
            continue;
        }
        taus.sort_by(f64::total_cmp);
        out.extend(taus.chunks(2).map(|p| (p[0], p[1])));
    }
    out
}

/// A line's timing on the data's crossings: an entry and an exit seen in the data at `times`
/// `(T1, T2)`, and the stretch `taus` `(tau_a, tau_b)` of the line inside a caustic that they
/// time. Cassan's (2008) coordinates of a crossing event: with `(alpha, u0)` they fix the line,
/// and they are what the data fix best, so the polish of an anchored line moves in them.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Anchor {
    /// Entry and exit times in the data (days).
    pub times: (f64, f64),
    /// Where along the line (in tE from its closest approach to the origin) it enters and leaves.
    pub taus: (f64, f64),
}

impl Anchor {
    /// The `(t0, tE)` that put the entry and exit at their times.
    ///
    /// ```
    /// use causeway::fit::search::anchor::Anchor;
    /// // Inside from tau = -0.1 to 0.3, seen at 100 and 108 d: tE 20 d, t0 102 d.
    /// let a = Anchor { times: (100.0, 108.0), taus: (-0.1, 0.3) };
    /// let (t0, te) = a.timing();
    /// assert!((t0 - 102.0).abs() < 1e-9 && (te - 20.0).abs() < 1e-9);
    /// ```
    pub fn timing(&self) -> (f64, f64) {
        let te = (self.times.1 - self.times.0) / (self.taus.1 - self.taus.0);
        (self.times.0 - self.taus.0 * te, te)
    }

    /// The anchor of the line `(alpha, u0)` on the crossings at `times`: its stretch inside
    /// `caustics` nearest this anchor's in tau (the same stretch, for a line moved a little).
    /// `None` where the line misses every caustic or the times are not in order.
    ///
    /// ```
    /// use causeway::fit::search::anchor::Anchor;
    /// use num_complex::Complex64;
    /// let square: Vec<Complex64> = [(-1.0, -1.0), (1.0, -1.0), (1.0, 1.0), (-1.0, 1.0), (-1.0, -1.0)]
    ///     .iter()
    ///     .map(|&(x, y)| Complex64::new(x, y))
    ///     .collect();
    /// let a = Anchor { times: (100.0, 108.0), taus: (-1.0, 1.0) };
    /// // Turned by 45 degrees through the centre, the line runs sqrt 2 either way inside.
    /// let b = a.moved(&[square.clone()], std::f64::consts::FRAC_PI_4, 0.0, (100.0, 110.0)).unwrap();
    /// assert!((b.taus.0 + 2f64.sqrt()).abs() < 1e-12 && (b.taus.1 - 2f64.sqrt()).abs() < 1e-12);
    /// assert!(a.moved(&[square], 0.0, 1.5, (100.0, 108.0)).is_none());
    /// ```
    pub fn moved(
        &self,
        caustics: &[Vec<Complex64>],
        alpha: f64,
        u0: f64,
        times: (f64, f64),
    ) -> Option<Anchor> {
        if times.1 <= times.0 {
            return None;
        }
        let off = |t: &(f64, f64)| (t.0 - self.taus.0).abs() + (t.1 - self.taus.1).abs();
        let taus = inside_intervals(caustics, alpha, u0)
            .into_iter()
            .min_by(|a, b| off(a).total_cmp(&off(b)))?;
        Some(Anchor { times, taus })
    }
}

/// The anchors of each stretch with each pair's times whose tE lies in `te_range` (days; see
/// [`super::Seed::anchored_te`]).
///
/// ```
/// use causeway::fit::search::anchor::anchored_timings;
/// // A line inside a caustic from tau = -0.1 to 0.3, crossings seen at 100 and 108 d: tE 20 d,
/// // t0 102 d. A tE of 400 d is out of reach of a seed of 20 d (4 to 100 d).
/// let anchors =
///     anchored_timings(&[(-0.1, 0.3), (0.5, 0.52)], &[(100.0, 108.0)], (4.0, 100.0));
/// assert_eq!(anchors.len(), 1);
/// let (t0, te) = anchors[0].timing();
/// assert!((t0 - 102.0).abs() < 1e-9 && (te - 20.0).abs() < 1e-9);
/// ```
pub fn anchored_timings(
    inside: &[(f64, f64)],
    pairs: &[(f64, f64)],
    te_range: (f64, f64),
) -> Vec<Anchor> {
    let mut out = Vec::new();
    for &taus in inside {
        for &times in pairs {
            let anchor = Anchor { times, taus };
            let anchored = anchor.timing().1;
            if anchored >= te_range.0 && anchored <= te_range.1 {
                out.push(anchor);
            }
        }
    }
    out
}
