//! `causeway nature`: who the lens is. Mass, distance and class posteriors of the lens from a
//! Galactic model and the fit's measurements, with and without follow-up imaging.

use super::progress::Reporter;
use super::{parse_pair, ThreadArgs};
use crate::error::{Error, Result};
use crate::fsutil::{check_outputs, write_atomic, Output};
use crate::galaxy::figure::{marginals_png, mass_distance_png};
use crate::galaxy::input::{pi_e_angle, pi_e_size, theta_e, FitRow};
use crate::galaxy::report::{samples_csv, summary};
use crate::galaxy::{
    infer, infer_samples, Band, EventData, FitSamples, Imaging, LensLight, LensOptions, Measured,
    Sightline, SourceDistance,
};
use clap::Args;
use std::path::PathBuf;

/// Options of `causeway nature`.
#[derive(Debug, Args)]
#[command(
    allow_negative_numbers = true,
    after_help = "The measurements come from the fit's table of minima (--minima: tE, tE_err, \
        rho, rho_err, s, q, and pi_EN, pi_EE with errors when present) or from explicit \
        values; explicit values win; or from the fit's posterior samples (--posterior: an \
        MCMC's rows with tE and, when sampled, rho, pi_EN, pi_EE, s, q; each lens sample takes \
        one row, so their correlations are kept). The parallax's size and direction (the direction of the \
        geocentric relative proper motion) enter; --earth-velocity turns geocentric into \
        heliocentric. theta_E is theta_* / rho (--theta-star) or --theta-e.\n\n\
        Units: days (tE), microarcseconds (theta_*), mas (theta_E), kpc (distances), degrees \
        (coordinates), magnitudes (imaging, extinction to the source in the imaging's band).\n\n\
        The summary (medians, 68% intervals, class probabilities, without and with the \
        imaging) goes to stderr; --out writes the weighted samples, --png host mass against \
        lens distance with the imaging's limit, --marginals the marginal histograms. The \
        same --seed gives the same samples whatever the thread count.\n\nExamples:\n  \
        causeway nature --minima minima.csv --theta-star 0.6,0.05 --galactic 1.2,-2.8 \
            --band K --extinction 0.25 --fainter-than 21.5 --out lens.csv --png lens.png\n  \
        causeway nature --te 32,1.5 --theta-e 0.45,0.05 --pi-en 0.1,0.02 --pi-ee 0.07,0.02 \
            --earth-velocity 5.2,-21 --q 3e-3 --s 1.1 --equatorial 270.1,-29.5 --ds 8.2,0.5 --band I --extinction 1.4 --excess 20.3,0.2\n  \
        causeway nature --posterior chain.csv --theta-star 0.6,0.05 --galactic 1.2,-2.8 --out lens.csv"
)]
pub struct NatureArgs {
    /// The fit's table of minima (CSV written by `causeway search`).
    #[arg(long, value_name = "FILE.csv")]
    pub minima: Option<PathBuf>,
    /// The fit's posterior samples (CSV with a header: tE, and rho, pi_EN and pi_EE, s, q when
    /// sampled; other columns ignored), instead of --minima and value,error options.
    #[arg(long, value_name = "FILE.csv", conflicts_with_all = ["minima", "te", "rho", "pi_e", "pi_en", "pi_ee"])]
    pub posterior: Option<PathBuf>,
    /// Rank of the minimum read from --minima.
    #[arg(long, value_name = "N", default_value_t = 1, requires = "minima")]
    pub rank: usize,
    /// Einstein timescale and its error (days).
    #[arg(long, value_name = "TE,ERR", value_parser = parse_pair)]
    pub te: Option<(f64, f64)>,
    /// Angular radius of the source and its error (microarcseconds): theta_E = theta_* / rho.
    #[arg(long, value_name = "UAS,ERR", value_parser = parse_pair)]
    pub theta_star: Option<(f64, f64)>,
    /// Source radius and its error (Einstein radii), instead of the table's.
    #[arg(long, value_name = "RHO,ERR", value_parser = parse_pair)]
    pub rho: Option<(f64, f64)>,
    /// Einstein angle and its error (mas), instead of theta_* / rho.
    #[arg(long, value_name = "MAS,ERR", value_parser = parse_pair, conflicts_with = "theta_star")]
    pub theta_e: Option<(f64, f64)>,
    /// Size of the microlens parallax |pi_E| and its error (direction unknown).
    #[arg(long, value_name = "PIE,ERR", value_parser = parse_pair, conflicts_with_all = ["pi_en", "pi_ee"])]
    pub pi_e: Option<(f64, f64)>,
    /// North component of the parallax vector and its error (with --pi-ee): its size and its
    /// direction, the direction of the geocentric relative proper motion, both enter.
    #[arg(long, value_name = "PIEN,ERR", value_parser = parse_pair, requires = "pi_ee")]
    pub pi_en: Option<(f64, f64)>,
    /// East component of the parallax vector and its error (with --pi-en).
    #[arg(long, value_name = "PIEE,ERR", value_parser = parse_pair, requires = "pi_en")]
    pub pi_ee: Option<(f64, f64)>,
    /// The Earth's velocity projected on the sky at the parallax reference time, north and east
    /// (km/s): turns the measured (geocentric) tE and direction into heliocentric proper motion.
    #[arg(long, value_name = "VN,VE", value_parser = parse_pair)]
    pub earth_velocity: Option<(f64, f64)>,
    /// Companion separation (Einstein radii), for its projected separation.
    #[arg(long, value_name = "S")]
    pub s: Option<f64>,
    /// Companion mass ratio, for its mass.
    #[arg(long, value_name = "Q")]
    pub q: Option<f64>,
    /// Line of sight in Galactic longitude and latitude (degrees).
    #[arg(long, value_name = "L,B", value_parser = parse_pair, required_unless_present = "equatorial", conflicts_with = "equatorial")]
    pub galactic: Option<(f64, f64)>,
    /// Line of sight in right ascension and declination, J2000 (degrees).
    #[arg(long, value_name = "RA,DEC", value_parser = parse_pair)]
    pub equatorial: Option<(f64, f64)>,
    /// Source distance and its error (kpc); default: drawn from the model along the line of
    /// sight.
    #[arg(long, value_name = "KPC,ERR", value_parser = parse_pair)]
    pub ds: Option<(f64, f64)>,
    /// Band of the follow-up imaging: V, I or K.
    #[arg(long, value_name = "BAND", default_value = "K")]
    pub band: String,
    /// Extinction to the source in the imaging's band (mag).
    #[arg(long, value_name = "MAG", default_value_t = 0.0)]
    pub extinction: f64,
    /// Light in excess of the source's measured by the imaging: apparent magnitude and error.
    #[arg(long, value_name = "MAG,ERR", value_parser = parse_pair, conflicts_with = "fainter_than")]
    pub excess: Option<(f64, f64)>,
    /// The imaging sees no excess: any lens is fainter than this apparent magnitude.
    #[arg(long, value_name = "MAG")]
    pub fainter_than: Option<f64>,
    /// Samples drawn (at most 5,000,000).
    #[arg(long, value_name = "N", default_value_t = 200_000)]
    pub samples: usize,
    /// Seed of the random streams.
    #[arg(long, value_name = "N", default_value_t = 1)]
    pub seed: u64,
    /// Exponent beta of the source weighting n(D_S) D_S^(2 - 2 beta).
    #[arg(long, value_name = "BETA", default_value_t = 1.0)]
    pub source_beta: f64,
    /// Write the weighted samples (CSV).
    #[arg(long, value_name = "FILE.csv")]
    pub out: Option<PathBuf>,
    /// Draw host mass against lens distance, with the imaging's limit.
    #[arg(long, value_name = "FILE.png")]
    pub png: Option<PathBuf>,
    /// Draw the marginal histograms.
    #[arg(long, value_name = "FILE.png")]
    pub marginals: Option<PathBuf>,
    #[command(flatten)]
    pub threads: ThreadArgs,
}

fn measured(what: &str, v: Option<(f64, f64)>) -> Result<Option<Measured>> {
    v.map(|(x, e)| Measured::new(what, x, e)).transpose()
}

fn positive(what: &str, v: Option<f64>) -> Result<Option<f64>> {
    match v {
        Some(v) if !(v.is_finite() && v > 0.0) => Err(Error::input(format!(
            "{what}: must be finite and > 0, got {v}"
        ))),
        _ => Ok(v),
    }
}

impl NatureArgs {
    /// The event's measurements: the table's row, then the explicit values over it. With
    /// --posterior, the values the samples lack (--theta-e, --s, --q, --earth-velocity).
    pub fn event_data(&self) -> Result<EventData> {
        if self.posterior.is_some() {
            return Ok(EventData {
                theta_e: measured("--theta-e", self.theta_e)?,
                earth_velocity: self.earth_velocity.map(|(n, e)| [n, e]),
                s: positive("--s", self.s)?,
                q: positive("--q", self.q)?,
                ..EventData::default()
            });
        }
        let row = self
            .minima
            .as_deref()
            .map(|p| FitRow::read(p, self.rank))
            .transpose()?;
        let theta_star = measured("--theta-star", self.theta_star)?;
        let mut data = match &row {
            Some(r) if self.rho.is_none() && self.theta_e.is_none() => r.event_data(theta_star)?,
            Some(r) => r.event_data(None)?,
            None => EventData::default(),
        };
        if let Some(te) = measured("--te", self.te)? {
            data.te = Some(te);
        }
        if data.te.is_none() {
            return Err(Error::input(
                "--te: give tE and its error (or a table of minima with --minima)",
            ));
        }
        if let Some((rho, err)) = self.rho {
            let ts = theta_star.ok_or_else(|| Error::input("--rho: needs --theta-star"))?;
            data.theta_e = Some(theta_e(ts, rho, err, self.rank)?);
        } else if theta_star.is_some() && row.is_none() {
            return Err(Error::input(
                "--theta-star: needs rho (--rho or --minima), or give --theta-e",
            ));
        }
        if let Some(t) = measured("--theta-e", self.theta_e)? {
            data.theta_e = Some(t);
        }
        if let Some(p) = measured("--pi-e", self.pi_e)? {
            data.pi_e = Some(p);
            data.pi_e_angle = None;
        }
        if let (Some((n, n_err)), Some((e, e_err))) = (self.pi_en, self.pi_ee) {
            let v = [n, n_err, e, e_err];
            data.pi_e =
                Some(pi_e_size(v).map_err(|e| Error::input(format!("--pi-en/--pi-ee: {e}")))?);
            data.pi_e_angle = Some(pi_e_angle(v));
        }
        data.earth_velocity = self.earth_velocity.map(|(n, e)| [n, e]);
        data.s = positive("--s", self.s)?.or(data.s);
        data.q = positive("--q", self.q)?.or(data.q);
        Ok(data)
    }

    /// The options of the estimate.
    pub fn options(&self) -> Result<LensOptions> {
        let sightline = match (self.galactic, self.equatorial) {
            (Some((l, b)), None) => Sightline::new(l, b),
            (None, Some((ra, dec))) => Sightline::from_equatorial(ra, dec),
            _ => Err(Error::input(
                "give the line of sight: --galactic L,B or --equatorial RA,DEC",
            )),
        }
        .map_err(|e| Error::input(format!("--galactic/--equatorial: {e}")))?;
        let source = match self.ds {
            Some((kpc, err)) => {
                if !(kpc.is_finite() && kpc > 0.0 && kpc < 16.0 && err >= 0.0) {
                    return Err(Error::input(format!(
                        "--ds: need 0 < D_S < 16 kpc and an error >= 0, got {kpc},{err}"
                    )));
                }
                SourceDistance::Given { kpc, err }
            }
            None => SourceDistance::Model,
        };
        let band = Band::parse(&self.band).map_err(|e| Error::input(format!("--band: {e}")))?;
        let imaging = match (self.excess, self.fainter_than) {
            (Some((mag, err)), None) => Some(Imaging::Excess { mag, err }),
            (None, Some(mag)) => Some(Imaging::Fainter { mag }),
            _ => None,
        };
        let light = imaging
            .map(|i| LensLight::new(band, self.extinction, i))
            .transpose()
            .map_err(|e| Error::input(format!("--extinction/--excess/--fainter-than: {e}")))?;
        if !(1..=5_000_000).contains(&self.samples) {
            return Err(Error::input(format!(
                "--samples: must be 1 to 5000000 (about 200 bytes each), got {}",
                self.samples
            )));
        }
        if !(self.source_beta.is_finite() && (0.0..=2.0).contains(&self.source_beta)) {
            return Err(Error::input("--source-beta: must be in [0, 2]"));
        }
        Ok(LensOptions {
            source,
            source_beta: self.source_beta,
            samples: self.samples,
            seed: self.seed,
            light,
            ..LensOptions::new(sightline)
        })
    }
}

/// Runs `causeway nature`.
pub fn run(args: NatureArgs) -> Result<()> {
    let mut outputs = Vec::new();
    if let Some(p) = &args.out {
        outputs.push(Output {
            what: "--out",
            path: p,
            extension: Some("csv"),
        });
    }
    if let Some(p) = &args.png {
        outputs.push(Output::png("--png", p));
    }
    if let Some(p) = &args.marginals {
        outputs.push(Output::png("--marginals", p));
    }
    check_outputs(&outputs)?;
    let data = args.event_data()?;
    let options = args.options()?;
    let samples = args
        .posterior
        .as_deref()
        .map(FitSamples::read)
        .transpose()?;
    let theta_star = measured("--theta-star", args.theta_star)?;
    if let (Some(s), Some(_)) = (&samples, theta_star) {
        if s.rho.is_none() {
            return Err(Error::input(
                "--theta-star: the --posterior samples have no rho column (give --theta-e)",
            ));
        }
    }
    args.threads.install()?;
    let reporter = Reporter::new();
    let post = match &samples {
        Some(s) => infer_samples(s, theta_star, &data, &options, &reporter)?,
        None => infer(&data, &options, &reporter)?,
    };
    drop(reporter);
    eprint!("{}", summary(&post));
    if let Some(p) = &args.out {
        write_atomic(p, samples_csv(&post).as_bytes())?;
        eprintln!("wrote {}", p.display());
    }
    if let Some(p) = &args.png {
        mass_distance_png(&post, options.light.as_ref(), options.sightline.b_deg, p)?;
        eprintln!("wrote {}", p.display());
    }
    if let Some(p) = &args.marginals {
        marginals_png(&post, p)?;
        eprintln!("wrote {}", p.display());
    }
    Ok(())
}
