//! The event's measurements from the fit's table of minima (`src/fit/report.rs`: columns `rank,
//! tE, tE_err, rho, rho_err, s, q`, and `pi_EN, pi_EN_err, pi_EE, pi_EE_err` when the fit had
//! parallax), and the Einstein angle from the source's angular radius, `theta_E = theta_* / rho`.

use super::posterior::{EventData, Measured};
use crate::error::{Error, Result};
use crate::table::Table;

/// One row of the table of minima, as the lens estimate reads it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FitRow {
    /// Rank of the minimum.
    pub rank: usize,
    /// Einstein timescale and its error (days).
    pub te: (f64, f64),
    /// Source radius and its error (Einstein radii); `None` when the table's values are not
    /// finite (an unresolved source).
    pub rho: Option<(f64, f64)>,
    /// Separation and mass ratio.
    pub s: f64,
    /// Mass ratio.
    pub q: f64,
    /// Parallax `(pi_EN, pi_EN_err, pi_EE, pi_EE_err)`, when the table has it.
    pub pi_e: Option<[f64; 4]>,
}

impl FitRow {
    /// The row of rank `rank` in the CSV text of a table of minima; `origin` names it in
    /// errors.
    ///
    /// ```
    /// use causeway::galaxy::input::FitRow;
    /// let text = "rank,s,q,tE,tE_err,rho,rho_err,chi2\n1,1.2,2e-3,25,0.5,0.001,1e-4,500\n";
    /// let row = FitRow::parse(text, "minima.csv", 1).unwrap();
    /// assert_eq!((row.te, row.rho, row.q), ((25.0, 0.5), Some((0.001, 1e-4)), 2e-3));
    /// assert!(FitRow::parse(text, "minima.csv", 2).unwrap_err().to_string().contains("rank 2"));
    /// ```
    pub fn parse(text: &str, origin: &str, rank: usize) -> Result<FitRow> {
        let core = Table::parse(
            text,
            origin,
            &["rank", "tE", "tE_err", "s", "q"],
            &["pi_EN", "pi_EN_err", "pi_EE", "pi_EE_err"],
        )?;
        let i = core
            .rows
            .iter()
            .position(|r| r[0] == rank as f64)
            .ok_or_else(|| Error::input(format!("{origin}: no minimum of rank {rank}")))?;
        let r = &core.rows[i];
        let pi_e = (core.columns.len() == 9).then(|| [r[5], r[6], r[7], r[8]]);
        // rho and its error may be NaN in some rows (an unresolved source): read the row's own
        // fields, on the line the table found it.
        let rho = rho_fields(text, core.lines[i]);
        Ok(FitRow {
            rank,
            te: (r[1], r[2]),
            rho,
            s: r[3],
            q: r[4],
            pi_e,
        })
    }

    /// Reads the row of rank `rank` from a table file.
    pub fn read(path: &std::path::Path, rank: usize) -> Result<FitRow> {
        let text = std::fs::read_to_string(path).map_err(|e| Error::io(path, e))?;
        FitRow::parse(&text, &path.display().to_string(), rank)
    }

    /// The measurements: tE, theta_E from `theta_star` (microarcseconds, with its error) and
    /// rho when both are known, |pi_E| when the table has it, s and q.
    ///
    /// ```
    /// use causeway::galaxy::{input::FitRow, Measured};
    /// let row = FitRow { rank: 1, te: (25.0, 0.5), rho: Some((1e-3, 1e-4)), s: 1.2, q: 2e-3,
    ///     pi_e: None };
    /// let data = row.event_data(Some(Measured::new("--theta-star", 0.6, 0.06).unwrap())).unwrap();
    /// let theta = data.theta_e.unwrap();
    /// assert!((theta.value - 0.6).abs() < 1e-12); // 0.6 uas / 1e-3 = 0.6 mas
    /// assert!((theta.err / theta.value - 2f64.sqrt() * 0.1).abs() < 1e-12);
    /// ```
    pub fn event_data(&self, theta_star: Option<Measured>) -> Result<EventData> {
        let te = Measured::new(&format!("tE of rank {}", self.rank), self.te.0, self.te.1)?;
        let theta_e = match (theta_star, self.rho) {
            (Some(ts), Some((rho, rho_err))) => Some(theta_e(ts, rho, rho_err, self.rank)?),
            (Some(_), None) => {
                return Err(Error::input(format!(
                    "rho of rank {}: not measured (not finite in the table); give theta_E instead",
                    self.rank
                )))
            }
            (None, _) => None,
        };
        let pi_e = self.pi_e.map(pi_e_size).transpose()?;
        Ok(EventData {
            te: Some(te),
            theta_e,
            pi_e,
            pi_e_angle: self.pi_e.map(pi_e_angle),
            earth_velocity: None,
            s: Some(self.s),
            q: Some(self.q),
        })
    }
}

/// `rho` and `rho_err` on line `line` (1-based) of the table's text, when both are finite.
fn rho_fields(text: &str, line: usize) -> Option<(f64, f64)> {
    let mut lines = text
        .lines()
        .map(str::trim)
        .filter(|l| !l.is_empty() && !l.starts_with('#'));
    let header: Vec<&str> = lines.next()?.split(',').map(str::trim).collect();
    let col = |name: &str| header.iter().position(|h| h.eq_ignore_ascii_case(name));
    let (a, b) = (col("rho")?, col("rho_err")?);
    let fields: Vec<&str> = text
        .lines()
        .nth(line - 1)?
        .split(',')
        .map(str::trim)
        .collect();
    let value = |k: usize| fields.get(k)?.parse::<f64>().ok().filter(|v| v.is_finite());
    Some((value(a)?, value(b)?))
}

/// `theta_E = theta_* / rho` (mas, with `theta_*` in microarcseconds), relative errors added
/// in quadrature.
///
/// ```
/// use causeway::galaxy::{input::theta_e, Measured};
/// let t = theta_e(Measured::new("theta_*", 6.0, 0.3).unwrap(), 0.02, 0.001, 1).unwrap();
/// assert!((t.value - 0.3).abs() < 1e-12 && (t.err - 0.3 * 0.05 * 2f64.sqrt()).abs() < 1e-12);
/// ```
pub fn theta_e(theta_star: Measured, rho: f64, rho_err: f64, rank: usize) -> Result<Measured> {
    let rho = Measured::new(&format!("rho of rank {rank}"), rho, rho_err)?;
    let value = theta_star.value / 1000.0 / rho.value;
    let rel = (theta_star.err / theta_star.value).hypot(rho.err / rho.value);
    Measured::new("theta_E", value, rel * value)
}

/// The position angle (radians, north through east) of the parallax vector `(pi_EN, err,
/// pi_EE, err)` and its error (linear propagation).
///
/// ```
/// let (a, e) = causeway::galaxy::input::pi_e_angle([0.0, 0.01, 0.2, 0.01]);
/// assert!((a - std::f64::consts::FRAC_PI_2).abs() < 1e-12 && (e - 0.05).abs() < 1e-12);
/// ```
pub fn pi_e_angle([n, n_err, e, e_err]: [f64; 4]) -> (f64, f64) {
    let size2 = n * n + e * e;
    (e.atan2(n), (e * n_err).hypot(n * e_err) / size2)
}

/// The size of the parallax vector `(pi_EN, err, pi_EE, err)` and its error (linear
/// propagation).
///
/// ```
/// let m = causeway::galaxy::input::pi_e_size([0.3, 0.05, 0.4, 0.05]).unwrap();
/// assert!((m.value - 0.5).abs() < 1e-12 && (m.err - 0.05).abs() < 1e-12);
/// ```
pub fn pi_e_size([n, n_err, e, e_err]: [f64; 4]) -> Result<Measured> {
    let size = n.hypot(e);
    let err = (n * n_err).hypot(e * e_err) / size;
    Measured::new("pi_E", size, err)
}
