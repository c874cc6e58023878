//! `MotionArgs`: the event's coordinates, parallax and lens orbital motion options shared by
//! `simulate` (the model's values) and `search` (the coordinates that turn the parallax stage
//! on).

use crate::error::{shown, Error, Result};
use crate::fit::model::{LensOrbit, Parallax, Trajectory};
use crate::fit::motion::MotionOptions;
use crate::parallax::{jd_origin, Ephemeris, Geometry, SkyPosition};
use clap::Args;
use std::path::PathBuf;

/// Where the event is on the sky.
#[derive(Debug, Clone, Args)]
pub struct CoordinateArgs {
    /// Right ascension (J2000): hh:mm:ss.s or decimal degrees.
    #[arg(long, value_name = "RA", requires = "dec", allow_hyphen_values = true)]
    pub ra: Option<String>,
    /// Declination (J2000): [+-]dd:mm:ss.s or decimal degrees.
    #[arg(long, value_name = "DEC", requires = "ra", allow_hyphen_values = true)]
    pub dec: Option<String>,
}

impl CoordinateArgs {
    /// The position, when both were given (checked).
    pub fn position(&self) -> Result<Option<SkyPosition>> {
        match (&self.ra, &self.dec) {
            (Some(ra), Some(dec)) => SkyPosition::parse(ra, dec).map(Some),
            _ => Ok(None),
        }
    }
}

/// The model's parallax and lens orbital motion.
#[derive(Debug, Clone, Args)]
pub struct MotionArgs {
    #[command(flatten)]
    pub coordinates: CoordinateArgs,
    /// North component of the microlens parallax pi_E (needs --ra, --dec).
    #[arg(long, value_name = "PI", requires = "ra")]
    pub pi_e_n: Option<f64>,
    /// East component of the microlens parallax pi_E (needs --ra, --dec).
    #[arg(long, value_name = "PI", requires = "ra")]
    pub pi_e_e: Option<f64>,
    /// Reference time of the parallax, t0,par (days; default: --t0 rounded to a day).
    #[arg(long, value_name = "T")]
    pub t0_par: Option<f64>,
    /// Rate of change of the separation s (Einstein radii per year).
    #[arg(long, value_name = "RATE")]
    pub ds_dt: Option<f64>,
    /// Rate of change of the trajectory's angle to the binary axis (radians per year).
    #[arg(long, value_name = "RATE")]
    pub dalpha_dt: Option<f64>,
    /// Reference time of the orbital motion, t0,kep (days; default: --t0).
    #[arg(long, value_name = "T")]
    pub t0_kep: Option<f64>,
    /// The data are seen from an observatory with this ephemeris instead of the Earth: CSV
    /// t,x,y,z (heliocentric equatorial J2000 positions, au) or t,north,east (offsets from the
    /// Earth's centre projected on the sky, au).
    #[arg(long, value_name = "FILE.csv", requires = "ra")]
    pub ephemeris: Option<PathBuf>,
}

impl MotionArgs {
    /// `trajectory` with the parallax and orbital motion these options ask for. Times below
    /// 2,400,000 are JD - 2,450,000, above full JD ([`crate::parallax::jd_origin`]).
    pub fn apply(&self, trajectory: Trajectory) -> Result<Trajectory> {
        let t0 = trajectory.line().t0;
        let parallax = match (self.pi_e_n, self.pi_e_e) {
            (None, None) => None,
            (n, e) => {
                let sky = self.coordinates.position()?.ok_or_else(|| {
                    Error::input("--pi-e-n/--pi-e-e: need the event's --ra and --dec")
                })?;
                let t0_par = self.t0_par.unwrap_or(t0.round());
                Some(Parallax {
                    pi_en: n.unwrap_or(0.0),
                    pi_ee: e.unwrap_or(0.0),
                    geometry: Geometry::new(sky, t0_par, jd_origin(t0_par))?,
                })
            }
        };
        if parallax.is_none() && self.t0_par.is_some() {
            return Err(Error::input("--t0-par: needs --pi-e-n or --pi-e-e"));
        }
        let orbit = match (self.ds_dt, self.dalpha_dt) {
            (None, None) if self.t0_kep.is_some() => {
                return Err(Error::input("--t0-kep: needs --ds-dt or --dalpha-dt"))
            }
            (None, None) => None,
            (ds, da) => Some(LensOrbit {
                ds_dt: ds.unwrap_or(0.0),
                dalpha_dt: da.unwrap_or(0.0),
                t0_kep: self.t0_kep.unwrap_or(t0),
            }),
        };
        trajectory.with_parallax(parallax)?.with_orbit(orbit)
    }

    /// The observatory's ephemeris, if one was given.
    pub fn ephemeris(&self) -> Result<Option<Ephemeris>> {
        self.ephemeris.as_deref().map(Ephemeris::read).transpose()
    }
}

/// The parallax stage of `search`: on when the coordinates are given.
#[derive(Debug, Clone, Args)]
pub struct FitMotionArgs {
    #[command(flatten)]
    pub coordinates: CoordinateArgs,
    /// Reference time of the parallax fit, t0,par (days; default: the single lens's t0 rounded).
    #[arg(long, value_name = "T", requires = "ra")]
    pub t0_par: Option<f64>,
    /// Fit parallax alone, without lens orbital motion.
    #[arg(long, requires = "ra")]
    pub no_orbit: bool,
    /// Static minima refined again with parallax (the best first).
    #[arg(long, value_name = "N", default_value_t = 2, requires = "ra")]
    pub parallax_minima: usize,
    /// Data set K (from 1, in input order) is seen from the observatory of FILE (CSV t,x,y,z:
    /// heliocentric equatorial J2000 positions in au, or t,north,east: offsets from the Earth's
    /// centre projected on the sky, au); repeat for several.
    #[arg(long, value_name = "K=FILE.csv", requires = "ra")]
    pub ephemeris: Vec<String>,
}

impl FitMotionArgs {
    /// The stage's options for `sets` data sets at magnification tolerance `tol`, or `None`
    /// without coordinates; ephemeris files are read here, before any fitting.
    pub fn options(&self, sets: usize, tol: f64) -> Result<Option<MotionOptions>> {
        let Some(sky) = self.coordinates.position()? else {
            return Ok(None);
        };
        if self.parallax_minima == 0 {
            return Err(Error::input("--parallax-minima: must be at least 1"));
        }
        let mut ephemerides = vec![None; sets];
        for given in &self.ephemeris {
            let (k, file) = given
                .split_once('=')
                .and_then(|(k, f)| Some((k.trim().parse::<usize>().ok()?, f)))
                .filter(|(k, _)| (1..=sets).contains(k))
                .ok_or_else(|| {
                    Error::input(format!(
                        "--ephemeris: '{}' is not K=FILE with K a data set from 1 to {sets}",
                        shown(given)
                    ))
                })?;
            ephemerides[k - 1] = Some(Ephemeris::read(file.as_ref())?);
        }
        Ok(Some(MotionOptions {
            t0_par: self.t0_par,
            orbit: !self.no_orbit,
            ephemerides,
            minima: self.parallax_minima,
            tol,
            ..MotionOptions::new(sky)
        }))
    }
}
