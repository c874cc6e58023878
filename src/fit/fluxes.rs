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
    assert_eq!(
        data.len(),
        magnification.len(),
        "one magnification per point"
    );
    let (mut sw, mut sa, mut saa, mut sf, mut saf) = (0.0, 0.0, 0.0, 0.0, 0.0);
    for (i, &a) in magnification.iter().enumerate() {
        let w = 1.0 / (data.sigma(i) * data.sigma(i));
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
