//! Source and blend fluxes by linear least squares, and the chi^2 of a model curve.
//!
//! For a data set with fluxes `F_i`, errors `sigma_i` and model magnifications `A_i`, the fluxes
//! `(fs, fb)` minimising `chi^2 = sum ((F_i - fs A_i - fb) / sigma_i)^2` solve the 2 x 2 normal
//! equations (common practice: they never enter the non-linear search).

use super::photometry::DataSet;

/// The best source and blend fluxes of one data set for one model curve, and its chi^2.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FluxFit {
    /// Source flux.
    pub fs: f64,
    /// Blend flux.
    pub fb: f64,
    /// chi^2 of the data set at these fluxes.
    pub chi2: f64,
}

impl FluxFit {
    /// The normalised residuals `(F_i - fs A_i - fb) / sigma_i` of `data` at these fluxes and
    /// the magnifications `a`.
    pub fn residuals<'a>(
        &'a self,
        data: &'a DataSet,
        a: &'a [f64],
    ) -> impl Iterator<Item = f64> + 'a {
        (0..data.len()).map(move |i| (data.flux[i] - self.fs * a[i] - self.fb) / data.sigma(i))
    }
}

/// Solves for `(fs, fb)` given the model magnification at each point of `data`.
///
/// A curve without contrast (all `A_i` equal) cannot separate source from blend; the blend is
/// then set to 0.
///
/// ```
/// use causeway::fit::{fluxes::fit_fluxes, photometry::DataSet};
/// let d = DataSet::parse("t,flux,flux_err\n0,3.0,0.1\n1,5.0,0.1\n2,7.0,0.1\n", "d.csv", 22.0).unwrap();
/// let f = fit_fluxes(&d, &[1.0, 2.0, 3.0]);
/// assert!((f.fs - 2.0).abs() < 1e-12 && (f.fb - 1.0).abs() < 1e-12 && f.chi2 < 1e-20);
/// ```
pub fn fit_fluxes(data: &DataSet, magnification: &[f64]) -> FluxFit {
    fit_weighted(data, magnification, |_| 1.0)
}

/// One point's share of a capped chi^2: its squared normalised residual `r2` up to `cap`,
/// `cap (1 + ln(r2 / cap))` beyond (equal, with the same slope, at the cap; growing as a
/// logarithm beyond it). A point misfit by hundreds of sigma then weighs a few times the cap.
///
/// ```
/// use causeway::fit::fluxes::capped_share;
/// assert_eq!(capped_share(9.0, 25.0), 9.0);
/// assert!((capped_share(25.0 * std::f64::consts::E, 25.0) - 50.0).abs() < 1e-12);
/// assert_eq!(capped_share(1e6, f64::INFINITY), 1e6);
/// ```
pub fn capped_share(r2: f64, cap: f64) -> f64 {
    if r2 > cap {
        cap * (1.0 + (r2 / cap).ln())
    } else {
        r2
    }
}

/// The fluxes minimising the capped chi^2 ([`capped_share`] of every point) by iteratively
/// reweighted least squares (common practice): from the plain fit, [`CAPPED_PASSES`] fits with
/// each point's weight scaled by the slope of its share, `min(1, cap / r^2)`. The weights
/// change smoothly with the model, so a minimiser's differences stay smooth too. The `chi2`
/// returned is the capped one.
///
/// ```
/// use causeway::fit::{fluxes::{fit_fluxes, fit_fluxes_capped}, photometry::DataSet};
/// // A line 2 A + 1 with one point 40 sigma off: the capped fit keeps near the line.
/// let d = DataSet::parse("t,flux,flux_err\n0,3,0.1\n1,5,0.1\n2,7,0.1\n3,9,0.1\n4,15,0.1\n",
///     "d.csv", 22.0).unwrap();
/// let a = [1.0, 2.0, 3.0, 4.0, 5.0];
/// let (plain, capped) = (fit_fluxes(&d, &a), fit_fluxes_capped(&d, &a, 25.0));
/// assert!((capped.fs - 2.0).abs() < 0.5 * (plain.fs - 2.0).abs());
/// assert!(capped.chi2 < plain.chi2);
/// ```
pub fn fit_fluxes_capped(data: &DataSet, magnification: &[f64], cap: f64) -> FluxFit {
    let mut fit = fit_fluxes(data, magnification);
    if !cap.is_finite() {
        return fit;
    }
    for _ in 0..CAPPED_PASSES {
        let r2: Vec<f64> = fit.residuals(data, magnification).map(|r| r * r).collect();
        fit = fit_weighted(data, magnification, |i| (cap / r2[i]).min(1.0));
    }
    fit.chi2 = fit
        .residuals(data, magnification)
        .map(|r| capped_share(r * r, cap))
        .sum();
    fit
}

/// Reweighting passes of [`fit_fluxes_capped`].
pub const CAPPED_PASSES: usize = 3;

/// The weighted least-squares fluxes with each point's weight `1 / sigma_i^2` scaled by
/// `scale(i)`; `chi2` is the plain one at those fluxes.
fn fit_weighted(data: &DataSet, magnification: &[f64], scale: impl Fn(usize) -> f64) -> FluxFit {
    assert_eq!(
        data.len(),
        magnification.len(),
        "one magnification per point"
    );
    let (mut sw, mut sa, mut saa, mut sf, mut saf) = (0.0, 0.0, 0.0, 0.0, 0.0);
    for (i, &a) in magnification.iter().enumerate() {
        let w = scale(i) / (data.sigma(i) * data.sigma(i));
        let f = data.flux[i];
        sw += w;
        sa += w * a;
        saa += w * a * a;
        sf += w * f;
        saf += w * a * f;
    }
    let det = sw * saa - sa * sa;
    let (fs, fb) = if det > 1e-12 * sw * saa {
        ((sw * saf - sa * sf) / det, (saa * sf - sa * saf) / det)
    } else {
        (saf / saa, 0.0)
    };
    let chi2 = magnification
        .iter()
        .enumerate()
        .map(|(i, &a)| ((data.flux[i] - fs * a - fb) / data.sigma(i)).powi(2))
        .sum();
    FluxFit { fs, fb, chi2 }
}
