//! The single-lens point-source fit over all data sets: the baseline a binary model must beat,
//! and the seed of the search's times and scales.
//!
//! The model is Paczynski's curve `A(u)`, `u^2 = u0^2 + ((t - t0)/tE)^2` (Paczynski 1986), with
//! each data set's source and blend fluxes solved linearly at every trial (see
//! [`super::fluxes`]). The fit runs in three steps:
//!
//! 1. candidate peak times: per data set, the time of its brightest point and the centroid of
//!    its excess over the baseline (median flux);
//! 2. a coarse grid over `u0` (log spaced, [`U0_RANGE`]) and `tE` ([`TE_RANGE`]) at each
//!    candidate time;
//! 3. from the best few grid points, Nelder-Mead over `(t0, ln u0, ln tE)` (so `u0, tE > 0`),
//!    finished by Newton steps on the curvature, which also gives the uncertainties
//!    (`C = 2 H^-1`, mapped to `(t0, u0, tE)` to first order).
//!
//! The fluxes are minimised out at every trial, so the curvature is that of the profile chi^2
//! and its inverse is the marginal covariance of `(t0, u0, tE)`.

use super::fluxes::{fit_fluxes, FluxFit};
use super::optimize::{covariance, minimize};
use super::photometry::DataSet;
use crate::error::{Error, Result};
use crate::lens::paczynski;

/// Range of the coarse grid over `u0` (log spaced).
pub const U0_RANGE: (f64, f64) = (1e-3, 1.5);
/// Range of the coarse grid over `tE` in days (log spaced).
pub const TE_RANGE: (f64, f64) = (1.0, 300.0);
/// Grid points along each of `u0` and `tE`.
const GRID: usize = 24;
/// Grid minima the local optimiser starts from.
const STARTS: usize = 3;

/// The best single-lens point-source model of all data sets.
#[derive(Debug, Clone, PartialEq)]
pub struct SingleLensFit {
    /// Time of closest approach (days).
    pub t0: f64,
    /// Impact parameter (Einstein radii), `>= 0`.
    pub u0: f64,
    /// Einstein timescale (days).
    pub te: f64,
    /// Uncertainties of `t0, u0, tE` from the curvature of chi^2 (NaN if it is not positive
    /// definite).
    pub sigma: [f64; 3],
    /// Source and blend fluxes and chi^2 of each data set, in input order.
    pub fluxes: Vec<FluxFit>,
    /// Total chi^2.
    pub chi2: f64,
    /// Total number of points.
    pub points: usize,
}

impl SingleLensFit {
    /// Degrees of freedom: points less the three shape parameters and two fluxes per set.
    pub fn dof(&self) -> usize {
        self.points.saturating_sub(3 + 2 * self.fluxes.len())
    }
}

/// Paczynski magnifications at `times`.
fn curve(times: &[f64], t0: f64, u0: f64, te: f64) -> Vec<f64> {
    times
        .iter()
        .map(|&t| {
            let tau = (t - t0) / te;
            paczynski((u0 * u0 + tau * tau).sqrt())
        })
        .collect()
}

/// Per-set flux fits of the model `(t0, u0, tE)`.
fn flux_fits(data: &[DataSet], t0: f64, u0: f64, te: f64) -> Vec<FluxFit> {
    data.iter()
        .map(|d| fit_fluxes(d, &curve(&d.times, t0, u0, te)))
        .collect()
}

/// Total chi^2 at `p = (t0, ln u0, ln tE)`.
fn chi2(data: &[DataSet], p: &[f64]) -> f64 {
    let (u0, te) = (p[1].exp(), p[2].exp());
    if !(p[0].is_finite() && u0 > 0.0 && te > 0.0 && u0.is_finite() && te.is_finite()) {
        return f64::INFINITY;
    }
    flux_fits(data, p[0], u0, te).iter().map(|f| f.chi2).sum()
}

/// Fits Paczynski's curve to all data sets at once.
///
/// Errors when there is no data set; every set must have at least 3 points (which
/// [`DataSet::parse`] ensures).
///
/// ```
/// use causeway::fit::{model::paczynski, photometry::DataSet, single::fit_single_lens};
/// // A noiseless event: t0 = 10, u0 = 0.2, tE = 15, fs = 2, fb = 0.5.
/// let mut text = String::from("t,flux,flux_err\n");
/// for k in 0..80 {
///     let t = -30.0 + k as f64;
///     let u = (0.04 + ((t - 10.0) / 15.0f64).powi(2)).sqrt();
///     text += &format!("{t},{},0.01\n", 2.0 * paczynski(u) + 0.5);
/// }
/// let data = DataSet::parse(&text, "event.csv", 22.0).unwrap();
/// let fit = fit_single_lens(&[data]).unwrap();
/// assert!((fit.t0 - 10.0).abs() < 1e-6 && (fit.u0 - 0.2).abs() < 1e-6);
/// assert!((fit.te - 15.0).abs() < 1e-5 && (fit.fluxes[0].fs - 2.0).abs() < 1e-5);
/// assert!(fit.chi2 < 1e-8);
/// ```
pub fn fit_single_lens(data: &[DataSet]) -> Result<SingleLensFit> {
    if data.is_empty() {
        return Err(Error::input(
            "the single-lens fit needs at least one data set",
        ));
    }
    let f = |p: &[f64]| chi2(data, p);
    let mut best: Option<(Vec<f64>, f64)> = None;
    for start in grid_starts(data) {
        let m = minimize(&f, &start, &[0.02 * start[2].exp(), 0.3, 0.2], 1e-10, 4000)?;
        if best.as_ref().is_none_or(|(_, v)| m.value < *v) {
            best = Some((m.x, m.value));
        }
    }
    let (mut x, _) = best.expect("the grid gives at least one start");
    let mut cov = None;
    // Newton steps on the curvature polish the simplex's minimum. The differences step by a
    // hundredth of the uncertainties found: a blended event's chi^2 valley is curved, and
    // wider steps would measure the curvature of its walls rather than at the minimum.
    let mut h = vec![1e-3 * x[2].exp(), 1e-3, 1e-3];
    for _ in 0..3 {
        let Some(c) = covariance(&f, &x, &h) else {
            cov = None;
            break;
        };
        x = newton_step(&f, &x, &h, &c);
        h = (0..3).map(|i| 0.01 * c[i][i].sqrt()).collect();
        cov = Some(c);
    }
    let (t0, u0, te) = (x[0], x[1].exp(), x[2].exp());
    let sigma = match cov {
        Some(c) => [c[0][0].sqrt(), u0 * c[1][1].sqrt(), te * c[2][2].sqrt()],
        None => [f64::NAN; 3],
    };
    let fluxes = flux_fits(data, t0, u0, te);
    Ok(SingleLensFit {
        t0,
        u0,
        te,
        sigma,
        chi2: fluxes.iter().map(|f| f.chi2).sum(),
        fluxes,
        points: data.iter().map(DataSet::len).sum(),
    })
}

/// The single lens at a fixed `u0`: the `(t0, tE)` that minimise chi^2 (fluxes solved), found
/// by Nelder-Mead over `(t0, ln tE)` from `(t0, te)`, and that chi^2.
///
/// Stepping `u0` traces the valley of the single-lens chi^2 along which the source and blend
/// fluxes trade against `u0` and `tE` (for `u0 << 1`, `u0 tE` stays nearly fixed: common
/// practice).
///
/// ```
/// use causeway::fit::{model::paczynski, photometry::DataSet, single::fit_at_u0};
/// let mut text = String::from("t,flux,flux_err\n");
/// for k in 0..120 {
///     let t = -30.0 + 0.5 * k as f64;
///     let u = (0.01 + ((t - 2.0) / 20.0f64).powi(2)).sqrt();
///     text += &format!("{t},{},0.01\n", paczynski(u) + 0.3);
/// }
/// let data = [DataSet::parse(&text, "event.csv", 22.0).unwrap()];
/// let (t0, te, chi2) = fit_at_u0(&data, 0.1, 0.0, 25.0).unwrap();
/// assert!((t0 - 2.0).abs() < 1e-4 && (te - 20.0).abs() < 1e-3 && chi2 < 1e-4);
/// ```
pub fn fit_at_u0(data: &[DataSet], u0: f64, t0: f64, te: f64) -> Result<(f64, f64, f64)> {
    let lu = u0.ln();
    let f = |p: &[f64]| chi2(data, &[p[0], lu, p[1]]);
    let m = minimize(&f, &[t0, te.ln()], &[0.01 * te, 0.05], 1e-8, 2000)?;
    Ok((m.x[0], m.x[1].exp(), m.value))
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

/// Starting points `(t0, ln u0, ln tE)`: the best few of the coarse grid at the candidate peak
/// times.
fn grid_starts(data: &[DataSet]) -> Vec<Vec<f64>> {
    let log_grid = |(a, b): (f64, f64)| -> Vec<f64> {
        (0..GRID)
            .map(|k| a.ln() + (b / a).ln() * k as f64 / (GRID - 1) as f64)
            .collect()
    };
    let (u0s, tes) = (log_grid(U0_RANGE), log_grid(TE_RANGE));
    let mut trials: Vec<(f64, Vec<f64>)> = Vec::new();
    for t0 in peak_times(data) {
        for &lu in &u0s {
            for &lt in &tes {
                let p = vec![t0, lu, lt];
                trials.push((chi2(data, &p), p));
            }
        }
    }
    trials.sort_by(|a, b| a.0.total_cmp(&b.0));
    trials.into_iter().take(STARTS).map(|(_, p)| p).collect()
}

/// Candidate peak times, two per data set after a three-point running median of its fluxes
/// (which ignores lone outliers): the time of the brightest point, and the centroid of the
/// times weighted by the excess over the median flux, over the points more than three errors
/// above it (a short anomaly moves the first but hardly the second). Distinct values, in order.
fn peak_times(data: &[DataSet]) -> Vec<f64> {
    let mut times = Vec::new();
    for d in data {
        let n = d.len();
        let smooth: Vec<f64> = (0..n)
            .map(|i| median(&d.flux[i.saturating_sub(1)..=(i + 1).min(n - 1)]))
            .collect();
        let brightest = (0..n)
            .max_by(|&i, &j| smooth[i].total_cmp(&smooth[j]))
            .expect("a data set has points");
        times.push(d.times[brightest]);
        let base = median(&d.flux);
        let (mut sw, mut swt) = (0.0, 0.0);
        for (i, (&f, &t)) in smooth.iter().zip(&d.times).enumerate() {
            let excess = f - base;
            if excess > 3.0 * d.sigma(i) {
                sw += excess;
                swt += excess * t;
            }
        }
        if sw > 0.0 {
            times.push(swt / sw);
        }
    }
    times.sort_by(f64::total_cmp);
    times.dedup();
    times
}

/// Median of a non-empty slice.
fn median(v: &[f64]) -> f64 {
    let mut s = v.to_vec();
    s.sort_by(f64::total_cmp);
    let m = s.len() / 2;
    if s.len() % 2 == 1 {
        s[m]
    } else {
        0.5 * (s[m - 1] + s[m])
    }
}
