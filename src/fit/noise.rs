//! The data's noise at a fitted model: isolated outliers clipped and each data set's error
//! bars scaled.
//!
//! A set's scale is the robust spread of its normalised residuals at the model (1.4826 times
//! their median absolute value: for Gaussian noise the factor that brings chi^2 per degree of
//! freedom to 1, but hardly moved by a run of points on an anomaly the model misses), capped
//! by [`SCATTER_MARGIN`] times its point-to-point scatter ([`scatter_scale`]), which needs no
//! model: when the model is wrong over much of a set (a follow-up run over an anomaly the
//! first minimum misses) the residuals measure the miss, not the noise, and a scale taken from
//! them would hide the anomaly from every later refinement.

use super::fluxes::fit_fluxes;
use super::model::BinaryModel;
use super::photometry::DataSet;
use crate::error::Result;

/// Most points clipped from one set, as a fraction of it.
pub const MAX_CLIPPED_FRACTION: f64 = 0.02;
/// The largest error scale taken from the residuals, in units of the point-to-point scatter.
pub const SCATTER_MARGIN: f64 = 1.25;
/// Neighbouring points further apart than this (days) are not compared by [`scatter_scale`].
pub const SCATTER_MAX_GAP: f64 = 0.25;
/// Fewest triples of neighbouring points [`scatter_scale`] uses.
pub const SCATTER_MIN_PAIRS: usize = 10;

/// A point the fit left out as an outlier.
#[derive(Debug, Clone, PartialEq)]
pub struct Clipped {
    /// Index of its data set (input order).
    pub set: usize,
    /// Its time (days, on the data's scale).
    pub time: f64,
    /// Its line in the data file.
    pub line: usize,
    /// Its residual in robust standard deviations of its set, signed (data above the model > 0).
    pub residual: f64,
}

/// The data cleaned at `model`: isolated outliers clipped (beyond `clip_sigma`, when given) and,
/// when `rescale`, each set's error scale set as the module documentation says (magnifications
/// to relative tolerance `tol`). Returns the cleaned sets, the clipped points and the scales
/// applied (1 when not rescaled).
pub fn clean(
    data: &[DataSet],
    model: &BinaryModel,
    clip_sigma: Option<f64>,
    rescale: bool,
    tol: f64,
) -> Result<(Vec<DataSet>, Vec<Clipped>, Vec<f64>)> {
    let mut cleaned = Vec::with_capacity(data.len());
    let mut clipped = Vec::new();
    let mut scales = Vec::with_capacity(data.len());
    for (k, set) in data.iter().enumerate() {
        let a = model.magnifications(&set.times, set.limb_darkening, tol)?;
        let f = fit_fluxes(set, &a);
        let r: Vec<f64> = f.residuals(set, &a).collect();
        let out = match clip_sigma {
            Some(c) => clip_outliers(&r, c),
            None => Vec::new(),
        };
        let scale = robust_scale(&r);
        clipped.extend(out.iter().map(|&i| Clipped {
            set: k,
            time: set.times[i],
            line: set.lines[i],
            residual: r[i] / scale,
        }));
        let keep: Vec<usize> = (0..set.len()).filter(|i| !out.contains(i)).collect();
        let mut kept = set.subset(&keep);
        let scale = if rescale {
            let residual = robust_scale(&keep.iter().map(|&i| r[i]).collect::<Vec<f64>>());
            match scatter_scale(&kept) {
                Some(scatter) => residual.min(SCATTER_MARGIN * scatter),
                None => residual,
            }
        } else {
            1.0
        };
        kept.error_scale *= scale;
        scales.push(scale);
        cleaned.push(kept);
    }
    Ok((cleaned, clipped, scales))
}

/// The isolated outliers of one data set at magnifications `a` (the set's fluxes fitted to
/// them): the points [`clip_outliers`] finds among the normalised residuals that also have a
/// neighbour within [`SCATTER_MAX_GAP`] days, a witness that the light curve did not move with
/// them. Each with its residual in robust standard deviations. Before any binary is fitted,
/// these are the points a minuscule caustic read with a point source could pass through
/// alone; a feature shorter than the cadence, seen in one point, is one of them too.
///
/// ```
/// use causeway::fit::noise::spikes;
/// use causeway::fit::photometry::DataSet;
/// // A rising light curve sampled every 0.01 d with one point 40 sigma high, and a last point
/// // 40 sigma low three days after the others (no witness in time): only the first is a spike.
/// let a: Vec<f64> = (0..60).map(|i| 1.0 + 0.001 * i as f64).collect();
/// let mut text = String::from("t,flux,flux_err\n");
/// for i in 0..60 {
///     let t = if i < 59 { i as f64 * 0.01 } else { 3.6 };
///     let noise = if i % 2 == 0 { 1.0 } else { -1.0 };
///     let jump = [0.0, 40.0, -40.0][(i == 10) as usize + 2 * (i == 59) as usize];
///     text += &format!("{t},{},1\n", 100.0 * a[i] + noise + jump);
/// }
/// let set = DataSet::parse(&text, "a.csv", 22.0).unwrap();
/// let found = spikes(&set, &a, 5.0);
/// assert_eq!(found.iter().map(|f| f.0).collect::<Vec<_>>(), vec![10]);
/// assert!(found[0].1 > 5.0); // beyond the threshold, in robust standard deviations
/// ```
pub fn spikes(set: &DataSet, a: &[f64], sigma: f64) -> Vec<(usize, f64)> {
    let f = fit_fluxes(set, a);
    let r: Vec<f64> = f.residuals(set, a).collect();
    let scale = robust_scale(&r);
    let t = &set.times;
    let witnessed = |i: usize| {
        (i > 0 && t[i] - t[i - 1] <= SCATTER_MAX_GAP)
            || (i + 1 < t.len() && t[i + 1] - t[i] <= SCATTER_MAX_GAP)
    };
    clip_outliers(&r, sigma)
        .into_iter()
        .filter(|&i| witnessed(i))
        .map(|i| (i, r[i] / scale))
        .collect()
}

/// 1.4826 times the median absolute normalised residual: the standard deviation of Gaussian
/// residuals, unmoved by a few outliers (common practice).
///
/// ```
/// use causeway::fit::noise::robust_scale;
/// // The median of |r| is 2; one wild value does not move it.
/// let r = [1.0, -2.0, 3.0, -2.0, 1e6];
/// assert!((robust_scale(&r) - 1.4826 * 2.0).abs() < 1e-12);
/// ```
pub fn robust_scale(r: &[f64]) -> f64 {
    if r.is_empty() {
        return 1.0;
    }
    let mut a: Vec<f64> = r.iter().map(|v| v.abs()).collect();
    a.sort_by(f64::total_cmp);
    (1.4826 * a[a.len() / 2]).max(1e-12)
}

/// The error scale that the set's point-to-point scatter implies, without a model: the robust
/// spread ([`robust_scale`]) of each point's departure from the straight line through its two
/// neighbours (both at most [`SCATTER_MAX_GAP`] away), divided by that departure's expected
/// standard deviation `sqrt(sigma_i^2 + w_-^2 sigma_-^2 + w_+^2 sigma_+^2)` (`w` the
/// interpolation weights). The straight line takes out the light curve's slope; its
/// curvature between neighbours still adds, so this is an upper bound where the cadence is
/// dense, and is used only as a cap. None with fewer than [`SCATTER_MIN_PAIRS`] triples.
///
/// ```
/// use causeway::fit::noise::scatter_scale;
/// use causeway::fit::photometry::DataSet;
/// // A straight rise whose noise is twice its stated errors (+-2 about the line, errors 1):
/// // every departure is 4 against sqrt(1.5) expected.
/// let mut text = String::from("t,flux,flux_err\n");
/// for i in 0..40 {
///     let noise = if i % 2 == 0 { 2.0 } else { -2.0 };
///     text += &format!("{},{},1\n", i as f64 * 0.01, 100.0 + i as f64 + noise);
/// }
/// let set = DataSet::parse(&text, "a.csv", 22.0).unwrap();
/// let k = scatter_scale(&set).unwrap();
/// assert!((k - 1.4826 * 4.0 / 1.5f64.sqrt()).abs() < 1e-9);
/// ```
pub fn scatter_scale(set: &DataSet) -> Option<f64> {
    let t = &set.times;
    let d: Vec<f64> = (1..set.len().saturating_sub(1))
        .filter(|&i| t[i] - t[i - 1] <= SCATTER_MAX_GAP && t[i + 1] - t[i] <= SCATTER_MAX_GAP)
        .filter(|&i| t[i + 1] > t[i - 1])
        .map(|i| {
            let w = (t[i] - t[i - 1]) / (t[i + 1] - t[i - 1]);
            let line = (1.0 - w) * set.flux[i - 1] + w * set.flux[i + 1];
            let (a, b, c) = (set.sigma(i - 1), set.sigma(i), set.sigma(i + 1));
            let spread = (b * b + (1.0 - w).powi(2) * a * a + w * w * c * c).sqrt();
            (set.flux[i] - line) / spread
        })
        .collect();
    (d.len() >= SCATTER_MIN_PAIRS).then(|| robust_scale(&d))
}

/// The indices of the outliers among the normalised residuals `r` (in time order) of one data
/// set: points beyond `sigma` robust standard deviations ([`robust_scale`]) whose neighbours
/// in time are not beyond `sigma / 2` on the same side (a run of deviant points is a feature
/// the model misses, not noise), the largest first, at most [`MAX_CLIPPED_FRACTION`] of the
/// set. Returned in increasing order.
///
/// ```
/// use causeway::fit::noise::clip_outliers;
/// let mut r = vec![0.5, -1.0, 0.3, 40.0, -0.2, 1.1, -0.7, 0.9, 0.1, -0.4];
/// r.extend([0.2; 90]);
/// assert_eq!(clip_outliers(&r, 5.0), vec![3]);
/// // A run of two deviant points stays.
/// r[4] = 30.0;
/// assert!(clip_outliers(&r, 5.0).is_empty());
/// ```
pub fn clip_outliers(r: &[f64], sigma: f64) -> Vec<usize> {
    let scale = robust_scale(r);
    let z: Vec<f64> = r.iter().map(|v| v / scale).collect();
    let companion = |i: usize, j: usize| z[j].signum() == z[i].signum() && z[j].abs() > 0.5 * sigma;
    let mut out: Vec<usize> = (0..z.len())
        .filter(|&i| {
            z[i].abs() > sigma
                && !(i > 0 && companion(i, i - 1))
                && !(i + 1 < z.len() && companion(i, i + 1))
        })
        .collect();
    out.sort_by(|&a, &b| z[b].abs().total_cmp(&z[a].abs()));
    out.truncate((MAX_CLIPPED_FRACTION * z.len() as f64).floor() as usize);
    out.sort_unstable();
    out
}
