//! The fit's posterior samples as the lens estimate's input, instead of value +- error: rows of
//! `tE` and, when sampled, `rho`, `(pi_EN, pi_EE)`, `s` and `q`, as an MCMC over the fit gives
//! them (a CSV with those columns; others, such as `t0` or `u0`, are ignored).
//!
//! The samples are taken as drawn under flat priors in these parameters, so that their density
//! is the fit's likelihood. [`super::infer_samples`] draws one whole row per lens sample (the
//! correlations between `tE`, `rho` and `pi_E` are kept) and divides out the Jacobian from the
//! fit's variables to its own, `theta_E = theta_* / rho` and the polar form of `pi_E`:
//!
//! - `|d rho / d theta_E| = theta_* / theta_E^2`, so a row's weight gains `theta_E^2 / theta_* =
//!   theta_E / rho`;
//! - `|d(pi_EN, pi_EE) / d(|pi_E|, phi)| = |pi_E|`, so it gains `1 / |pi_E|` when the mass comes
//!   from `theta_E` and `|pi_E|` together.
//!
//! When `pi_E` is sampled but `theta_E` is not measured, the prior predicts `|pi_E|` and its
//! likelihood is a Gaussian kernel density of the sampled sizes (Silverman's rule of thumb for
//! the bandwidth; Silverman 1986, Density Estimation, eq. 3.31) divided by the size; the
//! direction comes from the same row as `tE` (size and direction taken as independent there).

use crate::error::{Error, Result};
use crate::table::Table;

/// Posterior samples of the fit's parameters (module docs). Every present column has one
/// value per row.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct FitSamples {
    /// Einstein timescale (days).
    pub te: Vec<f64>,
    /// Source radius (Einstein radii).
    pub rho: Option<Vec<f64>>,
    /// Parallax vector `(pi_EN, pi_EE)`.
    pub pi_e: Option<Vec<[f64; 2]>>,
    /// Separation of the companion (Einstein radii).
    pub s: Option<Vec<f64>>,
    /// Mass ratio of the companion.
    pub q: Option<Vec<f64>>,
}

/// One row of [`FitSamples`].
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SampleRow {
    /// Einstein timescale (days).
    pub te: f64,
    /// Source radius.
    pub rho: Option<f64>,
    /// Parallax vector `(pi_EN, pi_EE)`.
    pub pi_e: Option<[f64; 2]>,
    /// Separation.
    pub s: Option<f64>,
    /// Mass ratio.
    pub q: Option<f64>,
}

/// What is wrong with a row, if anything: (the column, why).
fn fault(r: &SampleRow) -> Option<(&'static str, String)> {
    let positive = [("tE", Some(r.te)), ("rho", r.rho), ("s", r.s), ("q", r.q)];
    for (what, v) in positive {
        if let Some(v) = v.filter(|v| !(v.is_finite() && *v > 0.0)) {
            return Some((what, format!("must be finite and > 0, got {v}")));
        }
    }
    let [n, e] = r.pi_e?;
    if !(n.is_finite() && e.is_finite()) {
        return Some(("pi_EN/pi_EE", format!("must be finite, got {n},{e}")));
    }
    (n == 0.0 && e == 0.0).then(|| ("pi_EN/pi_EE", "the parallax vector is zero".into()))
}

impl FitSamples {
    /// Samples from columns; `tE` must have at least two rows and every other column as many.
    ///
    /// ```
    /// use causeway::galaxy::FitSamples;
    /// let s = FitSamples::new(vec![30.0, 31.0], Some(vec![1e-3, 1.1e-3]), None, None, None);
    /// assert_eq!(s.unwrap().len(), 2);
    /// let bad = FitSamples::new(vec![30.0, -1.0], None, None, None, None).unwrap_err();
    /// assert!(bad.to_string().starts_with("tE[1]"));
    /// ```
    pub fn new(
        te: Vec<f64>,
        rho: Option<Vec<f64>>,
        pi_e: Option<Vec<[f64; 2]>>,
        s: Option<Vec<f64>>,
        q: Option<Vec<f64>>,
    ) -> Result<FitSamples> {
        let n = te.len();
        if n < 2 {
            return Err(Error::input(format!(
                "tE: need at least 2 posterior samples, got {n}"
            )));
        }
        let lengths = [
            ("rho", rho.as_ref().map(Vec::len)),
            ("pi_EN/pi_EE", pi_e.as_ref().map(Vec::len)),
            ("s", s.as_ref().map(Vec::len)),
            ("q", q.as_ref().map(Vec::len)),
        ];
        for (what, len) in lengths {
            if let Some(len) = len.filter(|&len| len != n) {
                return Err(Error::input(format!("{what}: {len} samples, tE has {n}")));
            }
        }
        let samples = FitSamples {
            te,
            rho,
            pi_e,
            s,
            q,
        };
        for k in 0..n {
            if let Some((what, why)) = fault(&samples.row(k)) {
                return Err(Error::input(format!("{what}[{k}]: {why}")));
            }
        }
        Ok(samples)
    }

    /// Samples from CSV text with a header (`tE` required; `rho`, `pi_EN` with `pi_EE`, `s`,
    /// `q` read when present); `origin` names the text in errors, with the line.
    ///
    /// ```
    /// use causeway::galaxy::FitSamples;
    /// let text = "step,tE,rho,pi_EN,pi_EE\n1,30,0.001,0.1,0.2\n2,31,0.0011,0.12,0.19\n";
    /// let s = FitSamples::parse(text, "chain.csv").unwrap();
    /// assert_eq!(s.pi_e.unwrap()[1], [0.12, 0.19]);
    /// let bad = FitSamples::parse("tE,rho\n30,0.001\n31,-1\n", "chain.csv").unwrap_err();
    /// assert!(bad.to_string().starts_with("chain.csv:3"));
    /// ```
    pub fn parse(text: &str, origin: &str) -> Result<FitSamples> {
        let t = Table::parse(text, origin, &["tE"], &["rho", "pi_EN", "pi_EE", "s", "q"])?;
        let col = |name: &str| {
            t.column(name)
                .map(|k| t.rows.iter().map(|r| r[k]).collect::<Vec<f64>>())
        };
        let pi_e = match (col("pi_EN"), col("pi_EE")) {
            (Some(n), Some(e)) => Some(n.into_iter().zip(e).map(|(n, e)| [n, e]).collect()),
            (None, None) => None,
            _ => {
                return Err(Error::input(format!(
                    "{origin}: give both pi_EN and pi_EE columns, or neither"
                )))
            }
        };
        let samples = FitSamples {
            te: col("tE").unwrap_or_default(),
            rho: col("rho"),
            pi_e,
            s: col("s"),
            q: col("q"),
        };
        for (k, line) in t.lines.iter().enumerate() {
            if let Some((what, why)) = fault(&samples.row(k)) {
                return Err(Error::input(format!("{origin}:{line}: {what} {why}")));
            }
        }
        let FitSamples {
            te,
            rho,
            pi_e,
            s,
            q,
        } = samples;
        FitSamples::new(te, rho, pi_e, s, q).map_err(|e| Error::input(format!("{origin}: {e}")))
    }

    /// Reads samples from a CSV file (see [`FitSamples::parse`]).
    pub fn read(path: &std::path::Path) -> Result<FitSamples> {
        let text = std::fs::read_to_string(path).map_err(|e| Error::io(path, e))?;
        FitSamples::parse(&text, &path.display().to_string())
    }

    /// Number of samples.
    pub fn len(&self) -> usize {
        self.te.len()
    }

    /// Whether there are none (never, for samples made by [`FitSamples::new`]).
    pub fn is_empty(&self) -> bool {
        self.te.is_empty()
    }

    /// Row `k`.
    pub fn row(&self, k: usize) -> SampleRow {
        SampleRow {
            te: self.te[k],
            rho: self.rho.as_ref().map(|v| v[k]),
            pi_e: self.pi_e.as_ref().map(|v| v[k]),
            s: self.s.as_ref().map(|v| v[k]),
            q: self.q.as_ref().map(|v| v[k]),
        }
    }

    /// The likelihood of the parallax's size (module docs), when `pi_E` was sampled.
    pub fn pi_e_size_likelihood(&self) -> Option<SizeLikelihood> {
        let sizes = self
            .pi_e
            .as_ref()?
            .iter()
            .map(|v| v[0].hypot(v[1]))
            .collect();
        Some(SizeLikelihood::new(sizes))
    }
}

/// A Gaussian kernel density of the sampled `|pi_E|`, divided by the size.
#[derive(Debug, Clone)]
pub struct SizeLikelihood {
    sorted: Vec<f64>,
    bandwidth: f64,
}

impl SizeLikelihood {
    fn new(mut sizes: Vec<f64>) -> SizeLikelihood {
        sizes.sort_by(f64::total_cmp);
        let n = sizes.len() as f64;
        let mean = sizes.iter().sum::<f64>() / n;
        let sd = (sizes.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / (n - 1.0)).sqrt();
        let iqr = sizes[(3 * sizes.len()) / 4] - sizes[sizes.len() / 4];
        let spread = if iqr > 0.0 { sd.min(iqr / 1.34) } else { sd };
        // Equal sizes: a kernel of a thousandth of the size.
        let spread = if spread > 0.0 { spread } else { 1e-3 * mean };
        SizeLikelihood {
            bandwidth: 0.9 * spread * n.powf(-0.2),
            sorted: sizes,
        }
    }

    /// The likelihood at size `p` (unnormalised; 0 beyond five bandwidths of every sample).
    ///
    /// ```
    /// use causeway::galaxy::FitSamples;
    /// let pi: Vec<[f64; 2]> = (0..400).map(|k| [0.3 + 0.001 * (k % 20) as f64, 0.0]).collect();
    /// let s = FitSamples::new(vec![30.0; 400], None, Some(pi), None, None).unwrap();
    /// let l = s.pi_e_size_likelihood().unwrap();
    /// assert!(l.at(0.31) > 10.0 * l.at(0.35) && l.at(0.6) == 0.0);
    /// ```
    pub fn at(&self, p: f64) -> f64 {
        let h = self.bandwidth;
        let lo = self.sorted.partition_point(|&x| x < p - 5.0 * h);
        let hi = self.sorted.partition_point(|&x| x <= p + 5.0 * h);
        let sum: f64 = self.sorted[lo..hi]
            .iter()
            .map(|x| (-0.5 * ((p - x) / h).powi(2)).exp())
            .sum();
        sum / (self.sorted.len() as f64 * h * p)
    }
}
