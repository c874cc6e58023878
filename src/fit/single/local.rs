//! The bounded fit of one problem: candidate peak times, a coarse grid, Nelder-Mead from its
//! best points of distinct times, Newton polish and curvature uncertainties.

use super::problem::{median, Problem};
use super::{U0_MAX, U0_MIN};
use crate::error::Result;
use crate::fit::optimize::{covariance, minimize, Minimum};
use rayon::prelude::*;

/// Points of the coarse grid along `u0` (log spaced over its bounds).
const GRID_U0: usize = 14;
/// Points of the coarse grid along `tE` (log spaced over its bounds).
const GRID_TE: usize = 18;
/// Local fits started per problem: from the best grid point of each of this many candidate
/// times (the best first).
const STARTS: usize = 4;
/// Times spread across the brightest part of the data.
const SPREAD: usize = 5;
/// The simplex stops when the spread of its values falls below this fraction of chi^2 (at
/// least 1; see [`settle`]).
const TOLERANCE: f64 = 1e-10;
/// The same for the fit at fixed `u0`, which has no Newton steps after it and whose chi^2 is
/// compared along the valley.
const VALLEY_TOLERANCE: f64 = 1e-13;
/// Iteration limit of each simplex pass.
const ITERATIONS: u64 = 2000;
/// Half-width of the running median taken before the brightest point is looked for.
const SMOOTH: usize = 2;

/// A local minimum of one problem, in its frame (relative `t0`).
#[derive(Debug, Clone, Copy, PartialEq)]
pub(super) struct Local {
    /// Time of closest approach, relative to the epoch.
    pub t0: f64,
    /// Impact parameter.
    pub u0: f64,
    /// Einstein timescale (days).
    pub te: f64,
    /// Total chi^2.
    pub chi2: f64,
    /// Uncertainties of `t0, u0, tE` from the curvature (NaN where it is not positive definite
    /// or the fit ended on a bound).
    pub sigma: [f64; 3],
}

/// The best local fit of `problem` from the grid's starts and from `extra` starts `(t0, u0,
/// tE)` (relative `t0`).
pub(super) fn fit(problem: &Problem, extra: &[(f64, f64, f64)]) -> Result<Local> {
    let frame = problem.frame;
    let f = |x: &[f64]| {
        let (t0, u0, te) = frame.unpack(x);
        problem.chi2(t0, u0, te)
    };
    let mut starts = grid_starts(problem);
    starts.extend(extra.iter().map(|&(t0, u0, te)| frame.pack(t0, u0, te)));
    let minima: Vec<_> = starts
        .par_iter()
        .map(|x| {
            let (_, _, te) = frame.unpack(x);
            let step = [
                0.05 * te / slope(x[0], frame.t0.1 - frame.t0.0),
                0.3 / slope(x[1], (U0_MAX / U0_MIN).ln()),
                0.2 / slope(x[2], (frame.te.1 / frame.te.0).ln()),
            ];
            settle(&f, x, &step, TOLERANCE)
        })
        .collect::<Result<_>>()?;
    let best = minima
        .into_iter()
        .min_by(|a, b| a.value.total_cmp(&b.value))
        .expect("there is at least one start");
    let (t0, u0, te) = frame.unpack(&best.x);
    Ok(polish(problem, t0, u0, te))
}

/// Nelder-Mead from `x` with initial steps `step`: a first pass until the spread of the
/// simplex's values is below [`TOLERANCE`] of the start's value (at least 1), which may be far
/// above the minimum's, then a pass from its minimum with a tenth of the steps, until the
/// spread is below `fraction` of the value found (at least 1).
fn settle(
    f: &(dyn Fn(&[f64]) -> f64 + Sync),
    x: &[f64],
    step: &[f64],
    fraction: f64,
) -> Result<Minimum> {
    let first = minimize(f, x, step, TOLERANCE * f(x).max(1.0), ITERATIONS)?;
    let small: Vec<f64> = step.iter().map(|h| 0.1 * h).collect();
    let tolerance = fraction * first.value.max(1.0);
    let second = minimize(f, &first.x, &small, tolerance, ITERATIONS)?;
    Ok(if second.value <= first.value {
        second
    } else {
        first
    })
}

/// The derivative of the logistic map at `x` times the range it maps onto (at least a
/// millionth of the range, so that steps stay finite near the bounds).
fn slope(x: f64, range: f64) -> f64 {
    let s = 1.0 / (1.0 + (-x).exp());
    range * (s * (1.0 - s)).max(1e-6)
}

/// Newton steps on the curvature in `(t0, ln u0, ln tE)` from a simplex minimum, which also
/// give the uncertainties (`C = 2 H^-1`, mapped to `(t0, u0, tE)` to first order). The
/// differences step by a hundredth of the uncertainties found: a blended event's valley is
/// curved, and wider steps would measure its walls. A step that leaves the box or does not
/// lower chi^2 is refused; a minimum on a bound gets no uncertainties.
fn polish(problem: &Problem, t0: f64, u0: f64, te: f64) -> Local {
    let frame = problem.frame;
    let f = |y: &[f64]| {
        let (t0, u0, te) = (y[0], y[1].exp(), y[2].exp());
        if frame.contains(t0, u0, te) {
            problem.chi2(t0, u0, te)
        } else {
            f64::INFINITY
        }
    };
    let mut y = vec![t0, u0.ln(), te.ln()];
    let on_bound = !frame.bounds_hit(t0, u0, te).is_empty();
    let mut cov = None;
    let mut h = vec![1e-3 * te, 1e-3, 1e-3];
    if !on_bound {
        for _ in 0..3 {
            let Some(c) = covariance(&f, &y, &h) else {
                cov = None;
                break;
            };
            y = newton_step(&f, &y, &h, &c);
            h = (0..3).map(|i| 0.01 * c[i][i].sqrt()).collect();
            cov = Some(c);
        }
    }
    let (t0, u0, te) = (y[0], y[1].exp(), y[2].exp());
    let sigma = match cov {
        Some(c) => [c[0][0].sqrt(), u0 * c[1][1].sqrt(), te * c[2][2].sqrt()],
        None => [f64::NAN; 3],
    };
    Local {
        t0,
        u0,
        te,
        chi2: problem.chi2(t0, u0, te),
        sigma,
    }
}

/// One Newton step `x - H^-1 g` with `H^-1 = C / 2` and the gradient by central differences of
/// steps `h`; kept only if it lowers `f`.
fn newton_step(f: &dyn Fn(&[f64]) -> f64, x: &[f64], h: &[f64], c: &[Vec<f64>]) -> Vec<f64> {
    let n = x.len();
    let grad: Vec<f64> = (0..n)
        .map(|i| {
            let (mut a, mut b) = (x.to_vec(), x.to_vec());
            a[i] += h[i];
            b[i] -= h[i];
            (f(&a) - f(&b)) / (2.0 * h[i])
        })
        .collect();
    let next: Vec<f64> = (0..n)
        .map(|i| x[i] - 0.5 * (0..n).map(|j| c[i][j] * grad[j]).sum::<f64>())
        .collect();
    if f(&next) < f(x) {
        next
    } else {
        x.to_vec()
    }
}

/// The best `(t0, tE)` at a fixed `u0` (relative `t0`), by Nelder-Mead over the box's
/// coordinates from `(t0, te)`, and its chi^2.
pub(super) fn at_u0(problem: &Problem, u0: f64, t0: f64, te: f64) -> Result<(f64, f64, f64)> {
    let frame = problem.frame;
    let x0 = frame.pack(t0, u0, te);
    let f = |x: &[f64]| {
        let (t0, _, te) = frame.unpack(&[x[0], 0.0, x[1]]);
        problem.chi2(t0, u0, te)
    };
    let step = [
        0.01 * te / slope(x0[0], frame.t0.1 - frame.t0.0),
        0.05 / slope(x0[2], (frame.te.1 / frame.te.0).ln()),
    ];
    let x = [x0[0], x0[2]];
    let m = settle(&f, &x, &step, VALLEY_TOLERANCE)?;
    let (t0, _, te) = frame.unpack(&[m.x[0], 0.0, m.x[1]]);
    Ok((t0, te, m.value))
}

/// Starting points (unbounded coordinates): at each candidate time, the best point of the
/// coarse `(u0, tE)` grid; of those, the [`STARTS`] best.
fn grid_starts(problem: &Problem) -> Vec<[f64; 3]> {
    let frame = problem.frame;
    let log_grid = |(a, b): (f64, f64), n: usize| -> Vec<f64> {
        (0..n)
            .map(|k| (a.ln() + (b / a).ln() * k as f64 / (n - 1) as f64).exp())
            .collect()
    };
    let (u0s, tes) = (
        log_grid((U0_MIN, U0_MAX), GRID_U0),
        log_grid(frame.te, GRID_TE),
    );
    let mut best: Vec<(f64, [f64; 3])> = peak_times(problem)
        .par_iter()
        .map(|&t0| {
            let mut best = (f64::INFINITY, (t0, u0s[0], tes[0]));
            for &u0 in &u0s {
                for &te in &tes {
                    let v = problem.chi2(t0, u0, te);
                    if v < best.0 {
                        best = (v, (t0, u0, te));
                    }
                }
            }
            let (t0, u0, te) = best.1;
            (best.0, frame.pack(t0, u0, te))
        })
        .collect();
    best.sort_by(|a, b| a.0.total_cmp(&b.0));
    best.into_iter().take(STARTS).map(|(_, x)| x).collect()
}

/// Candidate peak times (relative), from each set after a running median of its fluxes over
/// `2 SMOOTH + 1` points (which ignores lone outliers): the time of its brightest point, and
/// the centroid of the times weighted by the excess over its median flux, over the points more
/// than three errors above it (a short anomaly moves the first but hardly the second). Then
/// [`SPREAD`] times spread evenly across the brightest part of all sets together: the times
/// where a set is more than half-way from its median to its brightest. Distinct values inside
/// the box of `t0`, in order.
fn peak_times(problem: &Problem) -> Vec<f64> {
    let mut times = Vec::new();
    let mut bright = (f64::INFINITY, f64::NEG_INFINITY);
    for s in &problem.sets {
        let n = s.t.len();
        let smooth: Vec<f64> = (0..n)
            .map(|i| median(&s.f[i.saturating_sub(SMOOTH)..=(i + SMOOTH).min(n - 1)]))
            .collect();
        let top = (0..n)
            .max_by(|&i, &j| smooth[i].total_cmp(&smooth[j]))
            .expect("a set has points");
        times.push(s.t[top]);
        let base = median(&s.f);
        let (mut sw, mut swt) = (0.0, 0.0);
        for ((&f, &t), &e) in smooth.iter().zip(&s.t).zip(&s.sigma) {
            let excess = f - base;
            if excess > 3.0 * e {
                sw += excess;
                swt += excess * t;
            }
            if excess > 0.5 * (smooth[top] - base) {
                bright = (bright.0.min(t), bright.1.max(t));
            }
        }
        if sw > 0.0 {
            times.push(swt / sw);
        }
    }
    if bright.0 < bright.1 {
        times.extend(
            (0..SPREAD).map(|k| bright.0 + (bright.1 - bright.0) * k as f64 / (SPREAD - 1) as f64),
        );
    }
    let (lo, hi) = problem.frame.t0;
    times.retain(|t| (lo..=hi).contains(t));
    times.sort_by(f64::total_cmp);
    times.dedup_by(|a, b| (*a - *b).abs() < 1e-9 * (hi - lo));
    times
}
