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

    /// chi^2 with each point's share softened beyond `cap`: a point whose weighted squared
    /// residual `r^2` exceeds the cap counts `cap (1 + ln(r^2 / cap))` (equal to `r^2`, with
    /// the same slope, at the cap; growing as a logarithm beyond it). The fluxes are fitted to
    /// every point (as in [`Weighted::chi2`]), the points beyond the cap there set apart, the
    /// fluxes fitted again to the others, and every point counted at those fluxes: one step of
    /// a trimmed least-squares fit (common practice), whose trimmed points keep a share that
    /// still falls as they are fitted better. A caustic crossing a coarse map puts a little
    /// early costs its points a few times the cap, not their squared misfits of hundreds of
    /// sigma. `curve` is the curve at every point, `c` its sums over every point; `apart` is
    /// working memory.
    pub(super) fn capped_chi2(
        &self,
        c: &CurveSums,
        cap: f64,
        apart: &mut Vec<usize>,
        curve: &[f64],
    ) -> f64 {
        let plain = self.chi2(c);
        if !cap.is_finite() || plain <= cap {
            return plain;
        }
        let mean = self.sf / self.sw;
        let caa = c.saa - c.sa * c.sa / self.sw;
        let (fs, fb) = if caa > 1e-12 * c.saa {
            let fs = c.caf / caa;
            (fs, mean - fs * c.sa / self.sw)
        } else {
            ((c.caf + c.sa * mean) / c.saa, 0.0)
        };
        apart.clear();
        let mut sums = SetApart::default();
        for (i, ((&w, &f), &a)) in self.w.iter().zip(&self.set.flux).zip(curve).enumerate() {
            let r = f - fs * a - fb;
            if w * r * r > cap {
                let df = f - mean;
                apart.push(i);
                sums.sw += w;
                sums.sf += w * df;
                sums.sff += w * df * df;
                sums.curve.sa += w * a;
                sums.curve.saa += w * a * a;
                sums.curve.caf += w * a * df;
            }
        }
        if apart.is_empty() {
            return plain;
        }
        // The kept points' sums, centred on the whole set's mean: Sw, Sf', Sff', Sa, Saa, Saf'.
        let sw = self.sw - sums.sw;
        if apart.len() + 2 >= self.w.len() || sw <= 0.0 {
            return self.shares((fs, fb), 0..self.w.len(), curve, cap);
        }
        let sf = -sums.sf;
        let sff = self.cff - sums.sff;
        let sa = c.sa - sums.curve.sa;
        let saa = c.saa - sums.curve.saa;
        let saf = c.caf - sums.curve.caf;
        let caa = saa - sa * sa / sw;
        let (kept, fluxes) = if caa > 1e-12 * saa {
            let (cff, caf) = (sff - sf * sf / sw, saf - sa * sf / sw);
            let fs = caf / caa;
            (cff - caf * caf / caa, (fs, mean + (sf - fs * sa) / sw))
        } else {
            // fs = Saf / Saa, fb = 0, in the uncentred fluxes F = F' + Fbar.
            let saf = saf + sa * mean;
            let sff = sff + 2.0 * sf * mean + sw * mean * mean;
            (sff - saf * saf / saa, (saf / saa, 0.0))
        };
        kept.max(0.0) + self.shares(fluxes, apart.iter().copied(), curve, cap)
    }

    /// The sum of [`crate::fit::fluxes::capped_share`] over the points `points` at the fluxes
    /// `(fs, fb)`: the shares beyond the cap as `cap (n + ln prod r^2 - n ln cap)`, one
    /// logarithm for them all ([`LogSum`]; two products, taken in turn, so that neither waits
    /// on the other's last multiplication).
    fn shares(
        &self,
        (fs, fb): (f64, f64),
        points: impl Iterator<Item = usize>,
        curve: &[f64],
        cap: f64,
    ) -> f64 {
        let (mut below, mut beyond) = (0.0, 0usize);
        let mut logs = [LogSum::default(); 2];
        for i in points {
            let r = self.set.flux[i] - fs * curve[i] - fb;
            let r2 = self.w[i] * r * r;
            if r2 > cap {
                logs[beyond & 1].add(r2);
                beyond += 1;
            } else {
                below += r2;
            }
        }
        let n = beyond as f64;
        below + cap * (n + (logs[0].ln() + logs[1].ln()) - n * cap.ln())
    }
}

/// The sum of the natural logarithms of positive numbers as the logarithm of their product,
/// its binary exponent kept apart so that it cannot overflow: one `ln` for the whole sum (numbers
/// below 1 or beyond 1e150 are rare here and take their own).
#[derive(Debug, Clone, Copy)]
struct LogSum {
    /// The product's mantissa, below `1e150` between additions.
    mantissa: f64,
    /// The product's binary exponent so far.
    exponent: i64,
    /// Logarithms of the numbers not multiplied in, summed directly.
    direct: f64,
}

impl Default for LogSum {
    fn default() -> Self {
        LogSum {
            mantissa: 1.0,
            exponent: 0,
            direct: 0.0,
        }
    }
}

impl LogSum {
    /// Adds `ln(x)`, `x > 0`.
    #[inline]
    fn add(&mut self, x: f64) {
        if !(1.0..1e150).contains(&x) {
            self.direct += x.ln();
            return;
        }
        self.mantissa *= x;
        if self.mantissa >= 1e150 {
            let bits = self.mantissa.to_bits();
            self.exponent += ((bits >> 52) & 0x7ff) as i64 - 1023;
            self.mantissa = f64::from_bits((bits & 0x000f_ffff_ffff_ffff) | (1023 << 52));
        }
    }

    /// The sum of the logarithms added.
    fn ln(&self) -> f64 {
        self.exponent as f64 * std::f64::consts::LN_2 + self.mantissa.ln() + self.direct
    }
}

/// The data-side sums of the points a capped chi^2 sets apart (see [`Weighted::capped_chi2`]),
/// with fluxes `F - Fbar` centred on the set's weighted mean.
#[derive(Debug, Clone, Copy, Default)]
struct SetApart {
    sw: f64,
    sf: f64,
    sff: f64,
    curve: CurveSums,
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
    use crate::fit::fluxes::{fit_fluxes, FluxFit};
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

    /// The capped chi^2 against its definition worked by hand: fluxes by `fit_fluxes` on every
    /// point, the points beyond the cap there set apart, `fit_fluxes` again on the rest (the
    /// normal equations of weighted least squares; common practice), and every point's share
    /// at those fluxes. The data: a single-lens curve with a crossing-like spike the model puts
    /// a day late, so that a few dozen points are misfit by tens of sigma.
    #[test]
    fn the_capped_chi2_is_a_trimmed_fit() {
        let mut text = String::from("t,flux,flux_err\n");
        let mut model = Vec::new();
        for i in 0..1500 {
            let t = -30.0 + 0.04 * i as f64;
            let u = (0.04f64 + (t / 20.0).powi(2)).sqrt();
            let spike = |t0: f64| if (t - t0).abs() < 0.5 { 3.0 } else { 0.0 };
            let a = paczynski(u);
            let flux = 2.0 * (a + spike(5.0)) + 0.5 + 0.003 * (t * 7.0).sin();
            // Error bars as the search widens them (the model floor of 3% of the flux above
            // the baseline's).
            let sigma = (1e-4f64 + (0.03 * (flux - 2.5)).powi(2)).sqrt();
            text += &format!("{t},{flux},{sigma}\n");
            model.push(a + spike(6.0));
        }
        let set = DataSet::parse(&text, "spike.csv", 22.0).unwrap();
        let weighted = Weighted::new(&set, 0.0);
        let mut sums = CurveSums::default();
        for (i, &a) in model.iter().enumerate() {
            sums.add(&weighted, i, a);
        }
        let cap = 25.0;
        let mut apart = Vec::new();
        let capped = weighted.capped_chi2(&sums, cap, &mut apart, &model);
        let all = fit_fluxes(&set, &model);
        let r2 = |fit: &FluxFit, i: usize| {
            ((set.flux[i] - fit.fs * model[i] - fit.fb) / set.sigma(i)).powi(2)
        };
        let (kept, removed): (Vec<usize>, Vec<usize>) =
            (0..set.len()).partition(|&i| r2(&all, i) <= cap);
        assert!(
            removed.len() > 20 && removed.len() < 200,
            "{} set apart",
            removed.len()
        );
        assert_eq!(apart, removed);
        let mut rest = String::from("t,flux,flux_err\n");
        for &i in &kept {
            rest += &format!("{},{},{}\n", set.times[i], set.flux[i], set.sigma(i));
        }
        let rest = DataSet::parse(&rest, "rest.csv", 22.0).unwrap();
        let rest_model: Vec<f64> = kept.iter().map(|&i| model[i]).collect();
        let refit = fit_fluxes(&rest, &rest_model);
        let share = |x: f64| {
            if x > cap {
                cap * (1.0 + (x / cap).ln())
            } else {
                x
            }
        };
        let expected = refit.chi2 + removed.iter().map(|&i| share(r2(&refit, i))).sum::<f64>();
        assert!(
            (capped - expected).abs() <= 1e-6 * expected,
            "capped {capped}, by hand {expected}"
        );
        // Far below the plain chi^2, and equal to it without a cap.
        assert!(capped < 0.2 * all.chi2, "{capped} against {}", all.chi2);
        let plain = weighted.capped_chi2(&sums, f64::INFINITY, &mut apart, &model);
        assert!((plain - all.chi2).abs() <= 1e-9 * all.chi2);
    }

    /// The logarithm of the running product against the sum of `f64::ln` of each number (the
    /// identity ln(ab) = ln a + ln b), over products far beyond the range of f64 and with
    /// numbers too large to multiply in.
    #[test]
    fn one_logarithm_of_the_product_is_the_sum_of_logarithms() {
        let numbers: Vec<f64> = (0..5000)
            .map(|i| 1.0 + (i as f64 * 0.37).sin().abs() * 10f64.powi(i % 13))
            .chain([1.0, 2.0, 0.5, 1e-300, 1e149, 1e150, 1e300, 1.7e308])
            .collect();
        let mut logs = LogSum::default();
        for &x in &numbers {
            logs.add(x);
        }
        let direct: f64 = numbers.iter().map(|x| x.ln()).sum();
        assert!(
            (logs.ln() - direct).abs() <= 1e-12 * direct.abs(),
            "{} against {direct}",
            logs.ln()
        );
        assert_eq!(LogSum::default().ln(), 0.0);
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
