//! Parallax geometry: where the event is on the sky, where the observer is, and how far the
//! source is pushed off its straight line (the geocentric formalism of Gould 2004, ApJ 606,
//! 319).
//!
//! # Times
//!
//! Times are days on the data's scale and are taken as given: whether they are UTC, TT,
//! geocentric or heliocentric Julian dates makes at most 8.3 minutes of difference, which moves
//! the Earth by 1e-4 au, far below what parallax resolves. A time `t >= 2,400,000` is a full
//! Julian date; a smaller one is `JD - 2,450,000` (as in `8200.5`); see [`jd_origin`]. A
//! model's times may be shifted (the fit works about the data's median): [`Geometry`] carries
//! the Julian date of its time zero.
//!
//! # The drawing in words
//!
//! Stand on the Earth and look at the event: north is up, east is to the **left** (the sky
//! seen from inside). [`SkyPosition::basis`] gives the unit vectors `n` (north, increasing Dec)
//! and `e` (east, increasing RA) in the equatorial frame. Every offset here is a pair
//! `(north, east)` in that basis.
//!
//! Let `S(t)` be the position of the Sun seen from the observer (au, equatorial; `-r` for an
//! observer at heliocentric position `r`), projected on the sky: `s(t) = (S.n, S.e)`.
//! The geocentric frame moves with the Earth as it was at `t0,par`: the offset that matters is
//! what is left of the Sun's motion after its position and velocity at `t0,par` (seen from the
//! Earth's centre) are taken out,
//!
//! ```text
//! Delta s(t) = s(t) - s_E(t0,par) - (t - t0,par) ds_E/dt(t0,par)      (au; N, E)
//! ```
//!
//! which is zero with zero slope at `t0,par` for the Earth, and for a satellite holds its
//! separation from the Earth as well. `pi_E = (pi_E,N, pi_E,E)` points along the lens's proper
//! motion relative to the source; the source, seen from the lens, moves along `-pi_E`. The
//! source's coordinates along and across its motion are then (Gould 2004, eq. 6 and 7)
//!
//! ```text
//! tau(t)  = (t - t0) / tE + pi_E . Delta s  = (t - t0) / tE + pi_E,N Ds_N + pi_E,E Ds_E
//! beta(t) = u0            + pi_E x Delta s  = u0 + pi_E,N Ds_E - pi_E,E Ds_N
//! ```
//!
//! and in the lens frame (the binary's axis along x, as for the straight line of
//! [`crate::curve::StraightLine`]) the source is at
//! `(tau cos alpha - beta sin alpha, tau sin alpha + beta cos alpha)`. The lens frame has the
//! handedness of (north, east): x turned towards y is north turned towards east.
//! Mirroring the lens frame (`u0, alpha -> -u0, -alpha`) with `pi_E,N -> -pi_E,N` leaves the
//! curve unchanged when `Delta s` lies along east alone (an event on the ecliptic seen from the
//! Earth): the ecliptic degeneracy (Skowron et al. 2011, ApJ 738, 87).
//!
//! A satellite's position comes from an [`Ephemeris`] (heliocentric, equatorial, au); the
//! Earth's from [`earth_position`] (see [`orbit`] for its accuracy).

pub mod orbit;
pub mod sky;

pub use orbit::{earth_position, earth_velocity};
pub use sky::{SkyBasis, SkyPosition};

use crate::error::{Error, Result};
use crate::table::Table;
use std::path::Path;

/// Times at or above this are full Julian dates; below, `JD - 2,450,000`.
pub const FULL_JD_FROM: f64 = 2_400_000.0;
/// What is added to a short time to make a Julian date.
pub const SHORT_JD_ORIGIN: f64 = 2_450_000.0;

/// The Julian date of time zero for a time written like `t` (see the module documentation):
/// 0 for full Julian dates, 2,450,000 for short ones.
///
/// ```
/// use causeway::parallax::jd_origin;
/// assert_eq!(8200.0 + jd_origin(8200.0), 2_458_200.0);
/// assert_eq!(2_458_200.0 + jd_origin(2_458_200.0), 2_458_200.0);
/// ```
pub fn jd_origin(t: f64) -> f64 {
    if t >= FULL_JD_FROM {
        0.0
    } else {
        SHORT_JD_ORIGIN
    }
}

/// Where an observatory was, against time: heliocentric equatorial positions (au), or its offset
/// from the Earth's centre projected on the sky (au; north, east).
///
/// ```
/// use causeway::parallax::Ephemeris;
/// let e = Ephemeris::parse("t,x,y,z\n8000,1,0,0\n8002,0,1,0\n", "sat.csv").unwrap();
/// assert_eq!(e.position(2_458_001.0).unwrap(), [0.5, 0.5, 0.0]);
/// assert!(e.position(2_458_003.0).is_err()); // outside the table
/// let p = Ephemeris::parse("t,north,east\n8000,0.1,0\n8002,0.3,0\n", "sat.csv").unwrap();
/// assert!(p.projected && p.position(2_458_001.0).unwrap() == [0.2, 0.0, 0.0]);
/// ```
#[derive(Debug, Clone, PartialEq)]
pub struct Ephemeris {
    /// Name used in messages (the file name).
    pub name: String,
    /// Julian dates, increasing.
    pub jd: Vec<f64>,
    /// Heliocentric equatorial positions (au); with [`Ephemeris::projected`], the offsets from
    /// the Earth's centre projected on the sky `(north, east, 0)` (au).
    pub position: Vec<[f64; 3]>,
    /// The rows are projected offsets from the Earth (header `t,north,east`), not positions.
    pub projected: bool,
}

impl Ephemeris {
    /// Parses CSV with header `t,x,y,z` (time on the data's scale, see the module
    /// documentation; positions in au, heliocentric, equatorial J2000) or `t,north,east` (the
    /// observatory's offset from the Earth's centre projected on the sky towards the event, au,
    /// in the (north, east) basis of [`SkyPosition::basis`]); rows in increasing time.
    pub fn parse(text: &str, origin: &str) -> Result<Ephemeris> {
        let header = text
            .trim_start_matches('\u{feff}')
            .lines()
            .next()
            .unwrap_or("");
        let projected = header.split(',').any(|c| c.trim() == "north");
        let columns: &[&str] = if projected {
            &["t", "north", "east"]
        } else {
            &["t", "x", "y", "z"]
        };
        let table = Table::parse(text, origin, columns, &[])?;
        if table.rows.len() < 2 {
            return Err(Error::input(format!("{origin}: needs at least two rows")));
        }
        let mut jd = Vec::with_capacity(table.rows.len());
        for (r, line) in table.rows.iter().zip(&table.lines) {
            let t = r[0] + jd_origin(r[0]);
            if jd.last().is_some_and(|&p| t <= p) {
                return Err(Error::input(format!(
                    "{origin}:{line}: times must increase"
                )));
            }
            jd.push(t);
        }
        Ok(Ephemeris {
            name: origin.to_string(),
            jd,
            position: table
                .rows
                .iter()
                .map(|r| [r[1], r[2], if projected { 0.0 } else { r[3] }])
                .collect(),
            projected,
        })
    }

    /// Reads an ephemeris file (see [`Ephemeris::parse`]).
    pub fn read(path: &Path) -> Result<Ephemeris> {
        let text = std::fs::read_to_string(path).map_err(|e| Error::io(path, e))?;
        Self::parse(&text, &path.display().to_string())
    }

    /// The position at Julian date `jd`, interpolated linearly (rows a day apart are good to
    /// 4e-5 au for a heliocentric orbit); an error outside the table.
    pub fn position(&self, jd: f64) -> Result<[f64; 3]> {
        let n = self.jd.len();
        if !(jd >= self.jd[0] && jd <= self.jd[n - 1]) {
            return Err(Error::input(format!(
                "{}: no position at JD {jd} (the table covers {} to {})",
                self.name,
                self.jd[0],
                self.jd[n - 1]
            )));
        }
        let k = self.jd.partition_point(|&t| t <= jd).clamp(1, n - 1);
        let w = (jd - self.jd[k - 1]) / (self.jd[k] - self.jd[k - 1]);
        let (a, b) = (self.position[k - 1], self.position[k]);
        Ok([0, 1, 2].map(|i| a[i] + w * (b[i] - a[i])))
    }
}

/// Who observes: the Earth's centre, or an observatory with its own ephemeris.
#[derive(Debug, Clone, Copy)]
pub enum Observer<'a> {
    /// The Earth (ground-based data).
    Earth,
    /// An observatory at the positions of this table.
    At(&'a Ephemeris),
}

impl Observer<'_> {
    /// The Sun's position seen from the observer at Julian date `jd`, projected on the sky of
    /// `basis` (au; north, east).
    pub fn sun(&self, jd: f64, basis: &SkyBasis) -> Result<(f64, f64)> {
        let from_earth = || basis.project(earth_position(jd).map(|v| -v));
        match self {
            Observer::Earth => Ok(from_earth()),
            Observer::At(e) if e.projected => {
                let (n, east) = from_earth();
                let d = e.position(jd)?;
                Ok((n - d[0], east - d[1]))
            }
            Observer::At(e) => Ok(basis.project(e.position(jd)?.map(|v| -v))),
        }
    }
}

/// What the parallax offsets need besides `pi_E`: the event's position, the reference time
/// `t0,par` and the Julian date of the model's time zero.
///
/// ```
/// use causeway::parallax::{Geometry, Observer, SkyPosition};
/// let sky = SkyPosition::parse("18:00:00", "-30:00:00").unwrap();
/// let g = Geometry::new(sky, 8300.0, 2_450_000.0).unwrap();
/// let d = g.offsets(&[8300.0, 8330.0], &Observer::Earth).unwrap();
/// assert!(d[0].0.abs() < 1e-15 && d[0].1.abs() < 1e-15); // zero at t0,par
/// assert!(d[1].0.hypot(d[1].1) > 1e-3); // a month later the Earth's orbit has curved away
/// ```
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Geometry {
    /// The event's position.
    pub sky: SkyPosition,
    /// The reference time `t0,par` (days, on the model's time scale).
    pub t0_par: f64,
    /// Julian date of the model's time zero (see [`jd_origin`]).
    pub jd_origin: f64,
}

impl Geometry {
    /// Checks and builds the geometry.
    pub fn new(sky: SkyPosition, t0_par: f64, jd_origin: f64) -> Result<Geometry> {
        if !t0_par.is_finite() {
            return Err(Error::input(format!(
                "t0_par: must be finite, got {t0_par}"
            )));
        }
        let jd = t0_par + jd_origin;
        // Standish's table 1 holds for 1800-2050.
        if !(2_378_497.0..=2_469_808.0).contains(&jd) {
            return Err(Error::input(format!(
                "t0_par: JD {jd} is outside 1800-2050, where the Earth's orbit is known here"
            )));
        }
        Ok(Geometry {
            sky,
            t0_par,
            jd_origin,
        })
    }

    /// The same geometry on a time scale shifted by `dt` (times `t` become `t + dt`).
    pub fn shifted(&self, dt: f64) -> Geometry {
        Geometry {
            t0_par: self.t0_par + dt,
            jd_origin: self.jd_origin - dt,
            ..*self
        }
    }

    /// The Sun's position seen from the Earth at `t`, projected on the sky (au; north, east).
    pub fn sun(&self, t: f64) -> (f64, f64) {
        let r = earth_position(t + self.jd_origin);
        self.sky.basis().project(r.map(|v| -v))
    }

    /// The Earth's heliocentric velocity at `t0,par` projected on the sky (au per Julian year;
    /// north, east).
    pub fn earth_velocity(&self) -> (f64, f64) {
        let v = earth_velocity(self.t0_par + self.jd_origin).map(|v| v * 365.25);
        self.sky.basis().project(v)
    }

    /// `Delta s` of the module documentation at each time, for `observer` (au; north, east).
    pub fn offsets(&self, times: &[f64], observer: &Observer) -> Result<Vec<(f64, f64)>> {
        let basis = self.sky.basis();
        let jd0 = self.t0_par + self.jd_origin;
        let (s0n, s0e) = basis.project(earth_position(jd0).map(|v| -v));
        let (vn, ve) = basis.project(earth_velocity(jd0).map(|v| -v));
        times
            .iter()
            .map(|&t| {
                let (sn, se) = observer.sun(t + self.jd_origin, &basis)?;
                let dt = t - self.t0_par;
                Ok((sn - s0n - dt * vn, se - s0e - dt * ve))
            })
            .collect()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn shifting_the_time_scale_keeps_the_offsets() {
        let sky = SkyPosition::new(270.0, -28.0).unwrap();
        let g = Geometry::new(sky, 8250.0, SHORT_JD_ORIGIN).unwrap();
        let h = g.shifted(-8250.0);
        let a = g.offsets(&[8200.0, 8290.0], &Observer::Earth).unwrap();
        let b = h.offsets(&[-50.0, 40.0], &Observer::Earth).unwrap();
        for (x, y) in a.iter().zip(&b) {
            assert!((x.0 - y.0).abs() < 1e-12 && (x.1 - y.1).abs() < 1e-12);
        }
    }

    #[test]
    fn bad_ephemeris_rows_are_named() {
        let e = Ephemeris::parse("t,x,y,z\n2,0,0,0\n1,0,0,0\n", "sat.csv").unwrap_err();
        assert!(e.to_string().starts_with("sat.csv:3"), "{e}");
        assert!(Geometry::new(SkyPosition::new(0.0, 0.0).unwrap(), 1e6, 0.0).is_err());
    }
}
