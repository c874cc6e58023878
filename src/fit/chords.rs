//! Other chords through the same caustic crossings: the starts that put the data's entry and
//! exit on other points of the best minimum's caustic.
//!
//! A source crossing a large caustic (a stellar binary's) enters and leaves it at times the
//! data fix to minutes, and every straight path through two caustic points, timed so that it
//! passes them at those times, explains the two crossings. What lies between them (the
//! U-shaped trough, the cusps passed on the way) depends on which two points they are, and the
//! paths' family is cut by the cusps into separate basins of chi^2: on an invented stellar
//! binary, refinements from the right (s, q) stopped at u0 0.13 and 0.15 against the truth's
//! 0.10 (chi^2 1,170 and 3,100 above it, every crossing in place). A local minimiser cannot
//! cross from one basin to the next, so the paths are tried whole instead.
//!
//! The rule ([`chord_starts`]): at the best minimum's lens, [`CHORD_POINTS`] points are taken
//! along each closed caustic at equal steps of arc length; every ordered pair of them on one
//! caustic that a straight path enters and leaves in turn (no other crossing between, checked
//! with [`inside_intervals`]) gives the path and the timing that put the pair at the times the
//! minimum's own path enters and leaves the caustic (its stretch inside whose ends are nearest
//! a pair of [`Seed::crossings`]: the data's pair is placed at the steepest change between two
//! points, which a dense follow-up of small error bars tells apart from the fitted crossing by
//! more than the crossing's width); paths whose tE is more than [`CHORD_TE_REACH`] times from the minimum's
//! are dropped. Each path keeps the minimum's (s, q, rho) and is ranked by its exact chi^2 at
//! [`COARSE_TOL`] (fluxes solved); the best [`CHORDS_KEPT`] distinct ones are the starts.
//!
//! What it cannot find: a chord through a caustic other than the lens's at the minimum's
//! (s, q) would put it, or crossings the data do not show as a sharp rise and a sharp drop.
//!
//! [`Seed::crossings`]: super::search::Seed::crossings

use super::model::{BinaryModel, Trajectory};
use super::photometry::DataSet;
use super::refine::{canonical, exact_chi2, COARSE_TOL};
use super::search::anchor::{caustic_polylines, inside_intervals, Anchor};
use crate::error::Result;
use num_complex::Complex64;
use rayon::prelude::*;

/// Points taken along each caustic (each ordered pair a path).
pub const CHORD_POINTS: usize = 60;
/// Paths kept as starts.
pub const CHORDS_KEPT: usize = 3;
/// The tE of a path stays within this factor of the minimum's either way.
pub const CHORD_TE_REACH: f64 = 2.0;
/// Two kept paths differ by at least this in alpha (rad) or in u0 (Einstein radii).
pub const CHORD_DISTINCT: (f64, f64) = (0.02, 0.005);

/// `n` points along the closed polyline `curve` at equal steps of arc length.
fn along(curve: &[Complex64], n: usize) -> Vec<Complex64> {
    let lengths: Vec<f64> = curve.windows(2).map(|w| (w[1] - w[0]).norm()).collect();
    let total: f64 = lengths.iter().sum();
    if total.is_nan() || total <= 0.0 {
        return Vec::new();
    }
    let mut out = Vec::with_capacity(n);
    let (mut k, mut walked) = (0, 0.0);
    for i in 0..n {
        let at = total * i as f64 / n as f64;
        while k + 1 < lengths.len() && walked + lengths[k] < at {
            walked += lengths[k];
            k += 1;
        }
        let f = if lengths[k] > 0.0 {
            ((at - walked) / lengths[k]).clamp(0.0, 1.0)
        } else {
            0.0
        };
        out.push(curve[k] + (curve[k + 1] - curve[k]) * f);
    }
    out
}

/// The times at which `model`'s path enters and leaves the caustic stretch that explains a
/// crossing pair of the data (of `crossings`: the stretch whose ends are nearest a pair's
/// times). `None` when the path crosses no caustic or there is no pair.
fn explained(
    model: &BinaryModel,
    caustics: &[Vec<Complex64>],
    crossings: &[(f64, f64)],
) -> Option<(f64, f64)> {
    let l = model.trajectory.line();
    inside_intervals(caustics, l.alpha, l.u0)
        .into_iter()
        .flat_map(|(a, b)| {
            let times = (l.t0 + a * l.te, l.t0 + b * l.te);
            crossings
                .iter()
                .map(move |&(t1, t2)| ((t1 - times.0).abs() + (t2 - times.1).abs(), times))
        })
        .min_by(|a, b| a.0.total_cmp(&b.0))
        .map(|(_, times)| times)
}

/// The straight path that enters `caustics` at `a` and leaves at `b` with no crossing between,
/// timed to pass them at `times`; `None` when the path through them crosses a caustic between.
///
/// ```
/// use causeway::fit::chords::chord;
/// use num_complex::Complex64;
/// let square: Vec<Complex64> = [(-1.0, -1.0), (1.0, -1.0), (1.0, 1.0), (-1.0, 1.0), (-1.0, -1.0)]
///     .iter()
///     .map(|&(x, y)| Complex64::new(x, y))
///     .collect();
/// // In at (0, -1), out at (0, 1) 20 days later: alpha 90 degrees, u0 0, tE 10 d, t0 midway
/// // (worked by hand from the line's form above).
/// let (a, b) = (Complex64::new(0.0, -1.0), Complex64::new(0.0, 1.0));
/// let path = chord(&[square], a, b, (100.0, 120.0)).unwrap();
/// let l = path.line();
/// assert!((l.alpha - std::f64::consts::FRAC_PI_2).abs() < 1e-12 && l.u0.abs() < 1e-12);
/// assert!((l.te - 10.0).abs() < 1e-9 && (l.t0 - 110.0).abs() < 1e-9);
/// ```
pub fn chord(
    caustics: &[Vec<Complex64>],
    a: Complex64,
    b: Complex64,
    times: (f64, f64),
) -> Option<Trajectory> {
    let d = b - a;
    let alpha = d.im.atan2(d.re);
    let (sn, cs) = alpha.sin_cos();
    let u0 = -sn * a.re + cs * a.im;
    let taus = (cs * a.re + sn * a.im, cs * b.re + sn * b.im);
    let slack = 1e-6 + 1e-3 * (taus.1 - taus.0);
    let whole = inside_intervals(caustics, alpha, u0)
        .iter()
        .any(|t| (t.0 - taus.0).abs() < slack && (t.1 - taus.1).abs() < slack);
    let (t0, te) = Anchor { times, taus }.timing();
    whole
        .then(|| Trajectory::straight(t0, u0, te, alpha).ok())
        .flatten()
}

/// The other chords of `model` through the crossings it explains, ranked by exact chi^2 over
/// `data`, best first (at most [`CHORDS_KEPT`]; see the module documentation). Each comes
/// with its chi^2 at [`COARSE_TOL`].
///
/// ```
/// use causeway::fit::chords::{chord, chord_starts};
/// use causeway::fit::model::{BinaryModel, Trajectory};
/// use causeway::fit::photometry::DataSet;
/// use causeway::fit::search::anchor::{caustic_polylines, inside_intervals};
/// use causeway::source::LimbDarkening;
/// use num_complex::Complex64;
/// // A stellar binary's path through its caustic, observed every 0.1 d.
/// let truth = BinaryModel { s: 0.9, q: 0.5, rho: 2e-3,
///     trajectory: Trajectory::straight(0.0, 0.1, 30.0, 4.4).unwrap() };
/// let times: Vec<f64> = (0..600).map(|k| -30.0 + 0.1 * k as f64).collect();
/// let a = truth.magnifications(&times, LimbDarkening::Uniform, 1e-4).unwrap();
/// let mut text = String::from("t,flux,flux_err\n");
/// for (t, a) in times.iter().zip(&a) {
///     text += &format!("{t},{a},0.01\n");
/// }
/// let data = [DataSet::parse(&text, "a.csv", 22.0).unwrap()];
/// let caustics = caustic_polylines(&truth.lens().unwrap()).unwrap();
/// let (ta, tb) = inside_intervals(&caustics, 4.4, 0.1)[0];
/// let pair = (30.0 * ta, 30.0 * tb);
/// // Another chord through the same crossing times: in and out where the path at u0 = 0.15
/// // runs, a false minimum.
/// let (sn, cs) = 4.4f64.sin_cos();
/// let at = |tau: f64| Complex64::new(tau * cs - 0.15 * sn, tau * sn + 0.15 * cs);
/// let (ua, ub) = inside_intervals(&caustics, 4.4, 0.15)[0];
/// let off = BinaryModel { trajectory: chord(&caustics, at(ua), at(ub), pair).unwrap(), ..truth };
/// // The best chord through those times is near the truth (the path the data were made from).
/// let chords = chord_starts(&data, &off, &[pair]).unwrap();
/// let best = chords[0].0.trajectory.line();
/// assert!((best.u0 - 0.1).abs() < 0.02 && (best.alpha - 4.4).abs() < 0.05, "{best:?}");
/// ```
pub fn chord_starts(
    data: &[DataSet],
    model: &BinaryModel,
    crossings: &[(f64, f64)],
) -> Result<Vec<(BinaryModel, f64)>> {
    let caustics = caustic_polylines(&model.lens()?)?;
    let Some(times) = explained(model, &caustics, crossings) else {
        return Ok(Vec::new());
    };
    let te = model.trajectory.line().te;
    let mut paths: Vec<BinaryModel> = Vec::new();
    for curve in &caustics {
        let points = along(curve, CHORD_POINTS);
        for (i, &a) in points.iter().enumerate() {
            for (j, &b) in points.iter().enumerate() {
                let Some(path) = (i != j).then(|| chord(&caustics, a, b, times)).flatten() else {
                    continue;
                };
                let chord_te = path.line().te;
                if chord_te >= te / CHORD_TE_REACH && chord_te <= te * CHORD_TE_REACH {
                    // The mirror image of a path about the binary's axis is the same curve.
                    paths.push(canonical(&BinaryModel {
                        trajectory: path,
                        ..*model
                    }));
                }
            }
        }
    }
    let mut ranked: Vec<(BinaryModel, f64)> = paths
        .par_iter()
        .filter_map(|m| Some((*m, exact_chi2(data, m, COARSE_TOL).ok()?.0)))
        .filter(|(_, c)| c.is_finite())
        .collect();
    ranked.sort_by(|a, b| a.1.total_cmp(&b.1));
    let mut kept: Vec<(BinaryModel, f64)> = Vec::new();
    for (m, c) in ranked {
        let l = m.trajectory.line();
        let apart = |k: &(BinaryModel, f64)| {
            let o = k.0.trajectory.line();
            let turn = (l.alpha - o.alpha).rem_euclid(std::f64::consts::TAU);
            turn.min(std::f64::consts::TAU - turn) > CHORD_DISTINCT.0
                || (l.u0 - o.u0).abs() > CHORD_DISTINCT.1
        };
        if kept.iter().all(apart) {
            kept.push((m, c));
            if kept.len() == CHORDS_KEPT {
                break;
            }
        }
    }
    Ok(kept)
}
