//! Photometry input: one data set per observatory or band, read from CSV.
//!
//! A data set file has a header row with `t` (days, any epoch) and either `mag,mag_err` or
//! `flux,flux_err`. Magnitudes are turned into fluxes with the zero point of DESIGN.md,
//! `m = zp - 2.5 log10 F` ([`DEFAULT_ZERO_POINT`] unless given), and their errors to first order,
//! `sigma_F = 0.4 ln(10) F sigma_m` (common practice). Fits are made in flux, where the model
//! `F = fs A + fb` is linear in the source and blend fluxes.
//!
//! Rows must have distinct times and positive errors; the first offending row is named with its
//! file and line. Rows are kept in time order.

use crate::error::{Error, Result};
use crate::source::LimbDarkening;
use crate::table::{fmt_f64, Table};
use std::path::Path;

/// Zero point of the magnitude scale: a flux of 1 is magnitude 22.
pub const DEFAULT_ZERO_POINT: f64 = 22.0;

/// Magnitude of a flux, `zp - 2.5 log10 F`.
///
/// ```
/// use causeway::fit::photometry::{flux_to_mag, mag_to_flux};
/// assert_eq!(flux_to_mag(1.0, 22.0), 22.0);
/// assert!((mag_to_flux(flux_to_mag(3.5, 22.0), 22.0) - 3.5).abs() < 1e-12);
/// ```
pub fn flux_to_mag(flux: f64, zero_point: f64) -> f64 {
    zero_point - 2.5 * flux.log10()
}

/// Flux of a magnitude, `10^(-0.4 (m - zp))`.
pub fn mag_to_flux(mag: f64, zero_point: f64) -> f64 {
    10f64.powf(-0.4 * (mag - zero_point))
}

/// What the input file held.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Measured {
    /// `mag,mag_err` columns.
    Magnitude,
    /// `flux,flux_err` columns.
    Flux,
}

/// One data set: times, fluxes and their errors, in time order, with its own limb darkening and
/// error-bar scale.
///
/// ```
/// use causeway::fit::photometry::DataSet;
/// let text = "t,mag,mag_err\n2.0,19.5,0.01\n1.0,19.4,0.02\n3.0,19.6,0.01\n";
/// let d = DataSet::parse(text, "site.csv", 22.0).unwrap();
/// assert_eq!(d.times, vec![1.0, 2.0, 3.0]); // sorted by time
/// assert!((d.flux[0] - 10f64.powf(-0.4 * (19.4 - 22.0))).abs() < 1e-12);
/// assert!(DataSet::parse("t,flux,flux_err\n1,2,0\n2,2,1\n3,2,1\n", "b.csv", 22.0).unwrap_err()
///     .to_string().contains("b.csv:2"));
/// ```
#[derive(Debug, Clone, PartialEq)]
pub struct DataSet {
    /// Name used in reports (the file name).
    pub name: String,
    /// Observation times (days), increasing.
    pub times: Vec<f64>,
    /// Fluxes (on the scale of the zero point).
    pub flux: Vec<f64>,
    /// Flux errors, as given (before any rescaling).
    pub flux_err: Vec<f64>,
    /// The file line of each row (for messages).
    pub lines: Vec<usize>,
    /// What the file held.
    pub measured: Measured,
    /// Limb darkening of the source in this band.
    pub limb_darkening: LimbDarkening,
    /// Factor the error bars are multiplied by (1 unless rescaled).
    pub error_scale: f64,
}

/// The magnitudes a data row may hold (common practice: brighter than -10 or fainter than 40
/// is no photometry of a lensed star).
pub const MAG_RANGE: (f64, f64) = (-10.0, 40.0);

/// The largest magnitude error a data row may hold.
pub const MAX_MAG_ERR: f64 = 10.0;

impl DataSet {
    /// Parses CSV text; `origin` names the source in messages.
    pub fn parse(text: &str, origin: &str, zero_point: f64) -> Result<DataSet> {
        let table = Table::parse(
            text,
            origin,
            &["t"],
            &["mag", "mag_err", "flux", "flux_err"],
        )?;
        let has = |c: &str| table.column(c).is_some();
        let (measured, value, error) =
            match (has("mag") && has("mag_err"), has("flux") && has("flux_err")) {
                (true, false) => (Measured::Magnitude, "mag", "mag_err"),
                (false, true) => (Measured::Flux, "flux", "flux_err"),
                (true, true) => {
                    return Err(Error::input(format!(
                        "{origin}: has both mag,mag_err and flux,flux_err columns; keep one pair"
                    )))
                }
                (false, false) => {
                    return Err(Error::input(format!(
                        "{origin}: header needs t and either mag,mag_err or flux,flux_err"
                    )))
                }
            };
        let (iv, ie) = (table.column(value).unwrap(), table.column(error).unwrap());
        let mut rows: Vec<(f64, f64, f64, usize)> = Vec::with_capacity(table.rows.len());
        for (row, &line) in table.rows.iter().zip(&table.lines) {
            let (t, v, e) = (row[0], row[iv], row[ie]);
            if e <= 0.0 {
                return Err(Error::input(format!(
                    "{origin}:{line}: {error} must be > 0, got {}",
                    fmt_f64(e)
                )));
            }
            if measured == Measured::Magnitude {
                if !(MAG_RANGE.0..=MAG_RANGE.1).contains(&v) {
                    return Err(Error::input(format!(
                        "{origin}:{line}: mag {} is not a magnitude from {} to {}",
                        fmt_f64(v),
                        MAG_RANGE.0,
                        MAG_RANGE.1
                    )));
                }
                if e > MAX_MAG_ERR {
                    return Err(Error::input(format!(
                        "{origin}:{line}: mag_err {} is more than {MAX_MAG_ERR} magnitudes",
                        fmt_f64(e)
                    )));
                }
            }
            let (f, fe) = match measured {
                Measured::Magnitude => {
                    let f = mag_to_flux(v, zero_point);
                    (f, 0.4 * std::f64::consts::LN_10 * f * e)
                }
                Measured::Flux => (v, e),
            };
            // Squared in the fit: an error past ~1e150 overflows it, and the point weighs nothing.
            if !(f.is_finite() && (fe * fe).is_finite() && fe * fe > 0.0) {
                return Err(Error::input(format!(
                    "{origin}:{line}: {error} {} gives no usable weight (its square is not a \
                     finite number > 0)",
                    fmt_f64(e)
                )));
            }
            rows.push((t, f, fe, line));
        }
        if rows.len() < 3 {
            return Err(Error::input(format!(
                "{origin}: needs at least 3 data rows, found {}",
                rows.len()
            )));
        }
        rows.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.3.cmp(&b.3)));
        if let Some(w) = rows.windows(2).find(|w| w[0].0 == w[1].0) {
            return Err(Error::input(format!(
                "{origin}:{}: time {} repeats the time of line {}",
                w[1].3.max(w[0].3),
                fmt_f64(w[1].0),
                w[1].3.min(w[0].3)
            )));
        }
        let name = Path::new(origin)
            .file_name()
            .map(|n| n.to_string_lossy().into_owned())
            .unwrap_or_else(|| origin.to_string());
        Ok(DataSet {
            name,
            times: rows.iter().map(|r| r.0).collect(),
            flux: rows.iter().map(|r| r.1).collect(),
            flux_err: rows.iter().map(|r| r.2).collect(),
            lines: rows.iter().map(|r| r.3).collect(),
            measured,
            limb_darkening: LimbDarkening::Uniform,
            error_scale: 1.0,
        })
    }

    /// Reads a data set file (see [`DataSet::parse`]).
    pub fn read(path: &Path, zero_point: f64) -> Result<DataSet> {
        let text = std::fs::read_to_string(path).map_err(|e| Error::io(path, e))?;
        DataSet::parse(&text, &path.display().to_string(), zero_point)
    }

    /// Number of points.
    pub fn len(&self) -> usize {
        self.times.len()
    }

    /// Whether the set has no points (never true for a parsed set).
    pub fn is_empty(&self) -> bool {
        self.times.is_empty()
    }

    /// The set without its points in `[lo, hi]`.
    ///
    /// ```
    /// use causeway::fit::photometry::DataSet;
    /// let d = DataSet::parse("t,flux,flux_err\n1,1,1\n2,1,1\n3,1,1\n4,1,1\n", "d.csv", 22.0).unwrap();
    /// assert_eq!(d.without(1.5, 3.0).times, vec![1.0, 4.0]);
    /// ```
    pub fn without(&self, lo: f64, hi: f64) -> DataSet {
        let keep: Vec<usize> = (0..self.len())
            .filter(|&i| !(lo..=hi).contains(&self.times[i]))
            .collect();
        self.subset(&keep)
    }

    /// The set's points at the increasing indices `keep`, all else as it is.
    ///
    /// ```
    /// use causeway::fit::photometry::DataSet;
    /// let d = DataSet::parse("t,flux,flux_err\n1,1,1\n2,2,1\n3,3,1\n", "d.csv", 22.0).unwrap();
    /// assert_eq!(d.subset(&[0, 2]).flux, vec![1.0, 3.0]);
    /// ```
    pub fn subset(&self, keep: &[usize]) -> DataSet {
        let pick = |v: &[f64]| keep.iter().map(|&i| v[i]).collect();
        DataSet {
            times: pick(&self.times),
            flux: pick(&self.flux),
            flux_err: pick(&self.flux_err),
            lines: keep.iter().map(|&i| self.lines[i]).collect(),
            name: self.name.clone(),
            ..*self
        }
    }

    /// Error of point `i` after rescaling.
    pub fn sigma(&self, i: usize) -> f64 {
        self.flux_err[i] * self.error_scale
    }
}
