//! chi^2 at the best fluxes from three sums over a curve: the data's own sums are taken once per
//! data set, so that a trial curve costs one pass.

use crate::fit::photometry::DataSet;

/// A data set with its weights and the flux sums that do not depend on the model, so that the
/// chi^2 of a curve at its best fluxes takes three sums over the curve (see [`CurveSums`]).
pub(super) struct Weighted<'a> {
    pub(super) set: &'a DataSet,
    /// `w_i = 1 / sigma_i^2`.
    pub(super) w: Vec<f64>,
    /// `w_i (F_i - Fbar)`, `Fbar` the weighted mean flux.
    pub(super) wdf: Vec<f64>,
    /// `sum w_i`.
    pub(super) sw: f64,
    /// `sum w_i F_i`.
    pub(super) sf: f64,
    /// `sum w_i (F_i - Fbar)^2`.
    pub(super) cff: f64,
}

impl<'a> Weighted<'a> {
    /// The weights of `set`, each error bar widened by `floor` times the point's flux above the
    /// set's tenth percentile (the model error of a coarse grid grows with the magnification).
    pub(super) fn new(set: &'a DataSet, floor: f64) -> Self {
        let base = if floor > 0.0 {
            let mut f = set.flux.clone();
            f.sort_by(f64::total_cmp);
            f[f.len() / 10]
        } else {
            0.0
        };
        let w: Vec<f64> = (0..set.len())
            .map(|i| {
                let extra = floor * (set.flux[i] - base).max(0.0);
                1.0 / (set.sigma(i).powi(2) + extra * extra)
            })
            .collect();
        let sw: f64 = w.iter().sum();
        let sf: f64 = w.iter().zip(&set.flux).map(|(w, f)| w * f).sum();
        let mean = sf / sw;
        let wdf: Vec<f64> = w
            .iter()
            .zip(&set.flux)
            .map(|(w, f)| w * (f - mean))
            .collect();
        let cff = wdf.iter().zip(&set.flux).map(|(d, f)| d * (f - mean)).sum();
        Weighted {
            set,
            w,
            wdf,
            sw,
            sf,
            cff,
        }
    }

    /// chi^2 at the best fluxes of the curve whose sums are `c`: the minimum over `(fs, fb)` of
    /// `sum w_i (F_i - fs A_i - fb)^2`, which is `Cff - Caf^2 / Caa` with the weighted
    /// covariances `Caa = Saa - Sa^2 / Sw`, `Caf = sum w_i A_i (F_i - Fbar)` and `Cff` (the
    /// normal equations of [`super::fluxes::fit_fluxes`] eliminated). A curve without contrast
    /// takes its fallback, `fb = 0`.
    pub(super) fn chi2(&self, c: &CurveSums) -> f64 {
        let caa = c.saa - c.sa * c.sa / self.sw;
        // fit_fluxes's test `det > 1e-12 Sw Saa`, with det = Sw Caa.
        if caa > 1e-12 * c.saa {
            self.cff - c.caf * c.caf / caa
        } else {
            // fs = Saf / Saa, fb = 0: chi^2 = Sff - Saf^2 / Saa.
            let saf = c.caf + c.sa * self.sf / self.sw;
            let sff = self.cff + self.sf * self.sf / self.sw;
            sff - saf * saf / c.saa
        }
    }
}

/// The model-dependent sums of the flux fit over a curve `A_i`: `Sa = sum w_i A_i`,
/// `Saa = sum w_i A_i^2` and `Caf = sum w_i A_i (F_i - Fbar)`.
#[derive(Debug, Clone, Copy, Default)]
pub(super) struct CurveSums {
    pub(super) sa: f64,
    pub(super) saa: f64,
    pub(super) caf: f64,
}

impl CurveSums {
    #[inline]
    pub(super) fn add(&mut self, set: &Weighted, i: usize, a: f64) {
        let wa = set.w[i] * a;
        self.sa += wa;
        self.saa += wa * a;
        self.caf += set.wdf[i] * a;
    }

    pub(super) fn is_finite(&self) -> bool {
        self.sa.is_finite() && self.saa.is_finite() && self.caf.is_finite()
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::fit::fluxes::fit_fluxes;
    use crate::lens::paczynski;

    /// The chi^2 from the sums against the direct sum of squared residuals at the fluxes of
    /// `fit_fluxes` (the definition of chi^2; the normal equations are common practice), on a
    /// bright, high-contrast curve where the cancellation in `Cff - Caf^2 / Caa` is worst.
    #[test]
    fn chi2_from_sums_matches_the_residual_sum() {
        let n = 2000;
        let mut text = String::from("t,mag,mag_err\n");
        let mut curves: Vec<Vec<f64>> = vec![Vec::new(); 3];
        for i in 0..n {
            let t = -50.0 + 0.05 * i as f64;
            let u = (0.01f64 + (t / 25.0).powi(2)).sqrt();
            let a = paczynski(u);
            // Data: 0.001 mag errors on a 13th-magnitude source, with a wiggle the model lacks.
            let mag = 13.0 - 2.5 * (a + 0.3 + 0.02 * (t / 3.0).sin()).log10();
            text += &format!("{t},{mag},0.001\n");
            curves[0].push(a);
            curves[1].push(paczynski((0.0144f64 + (t / 24.0).powi(2)).sqrt()));
            // Almost without contrast: only the far wing of a wide-u0 curve.
            curves[2].push(1.0 + 1e-7 * (t / 50.0).powi(2));
        }
        let set = DataSet::parse(&text, "bright.csv", 22.0).unwrap();
        let weighted = Weighted::new(&set, 0.0);
        for curve in &curves {
            let mut sums = CurveSums::default();
            for (i, &a) in curve.iter().enumerate() {
                sums.add(&weighted, i, a);
            }
            let direct = fit_fluxes(&set, curve).chi2;
            let fast = weighted.chi2(&sums);
            // Relative to the scale that cancels, sum w F^2 (about 2e11 here): round-off only.
            let scale = weighted.cff + weighted.sf * weighted.sf / weighted.sw;
            assert!(
                (fast - direct).abs() <= 1e-12 * scale && (fast - direct).abs() <= 1e-9 * direct,
                "sums give {fast}, residuals {direct} (scale {scale:e})"
            );
        }
    }

    /// The floor widens error bars in quadrature by a fraction of the flux above the set's
    /// tenth percentile (the definition in the module documentation of the search).
    #[test]
    fn the_model_floor_widens_magnified_points_only() {
        let mut text = String::from("t,flux,flux_err\n");
        for i in 0..20 {
            let flux = if i < 18 { 1.0 } else { 11.0 };
            text += &format!("{i},{flux},0.01\n");
        }
        let set = DataSet::parse(&text, "floor.csv", 22.0).unwrap();
        let w = Weighted::new(&set, 0.03);
        assert!((w.w[0] - 1e4).abs() < 1e-9);
        // 0.03 x (11 - 1) = 0.3 added to 0.01 in quadrature.
        assert!((w.w[19] - 1.0 / (1e-4 + 0.09)).abs() < 1e-9, "{}", w.w[19]);
    }
}
