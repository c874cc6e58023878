//! Synthetic photometry of a binary-lens model: exact magnifications, `F = fs A + fb`, and seeded
//! Gaussian noise.
//!
//! Magnifications come from [`BinaryModel::magnifications`] (point source far from caustics,
//! contour integration near them). The noise is drawn in time order from a ChaCha8 stream seeded
//! with [`Simulation::seed`], so the output depends on the inputs only, never on the thread
//! count. Two noise models ([`Noise`]):
//!
//! - in magnitudes: `m = zp - 2.5 log10(fs A + fb) + sigma_m z`, every point with the error
//!   `sigma_m` (written as `mag,mag_err`);
//! - in flux: `F = fs A + fb + sigma_F z`, every point with the error `sigma_F` (written as
//!   `flux,flux_err`),
//!
//! with `z` standard normal.

use super::model::BinaryModel;
use super::photometry::{flux_to_mag, DataSet, Measured, DEFAULT_ZERO_POINT};
use crate::error::{Error, Result};
use crate::source::LimbDarkening;
use crate::table::fmt_f64;
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, StandardNormal};
use std::fmt::Write as _;

/// The noise added to the model fluxes.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Noise {
    /// Gaussian in magnitude, the same error `sigma` (mag) at every point.
    Magnitude {
        /// Error in magnitudes, > 0.
        sigma: f64,
    },
    /// Gaussian in flux, the same error `sigma` (flux units of the zero point) at every point.
    Flux {
        /// Error in flux, > 0.
        sigma: f64,
    },
}

impl Noise {
    /// What the output file holds.
    pub fn measured(&self) -> Measured {
        match self {
            Noise::Magnitude { .. } => Measured::Magnitude,
            Noise::Flux { .. } => Measured::Flux,
        }
    }
}

/// A synthetic observation: the model, its fluxes, the noise and the seed.
///
/// ```
/// use causeway::fit::{model::{BinaryModel, Trajectory}, simulate::{Noise, Simulation}};
/// use causeway::source::LimbDarkening;
/// let model = BinaryModel { s: 1.2, q: 1e-3, rho: 1e-3,
///     trajectory: Trajectory::straight(0.0, 0.1, 20.0, 0.5).unwrap() };
/// let sim = Simulation::new(model, LimbDarkening::Uniform);
/// let times: Vec<f64> = (0..50).map(|k| -25.0 + k as f64).collect();
/// let data = sim.run(&times).unwrap();
/// assert_eq!(data.len(), 50);
/// assert_eq!(sim.run(&times).unwrap(), data); // seeded: the same every time
/// let other = Simulation { seed: 7, noise: Noise::Flux { sigma: 0.01 }, ..sim };
/// assert_ne!(other.run(&times).unwrap().flux, data.flux);
/// ```
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Simulation {
    /// The event model.
    pub model: BinaryModel,
    /// Limb darkening of the source.
    pub law: LimbDarkening,
    /// Source flux.
    pub fs: f64,
    /// Blend flux.
    pub fb: f64,
    /// Noise model.
    pub noise: Noise,
    /// Seed of the noise stream.
    pub seed: u64,
    /// Magnitude of unit flux.
    pub zero_point: f64,
    /// Relative tolerance of the magnifications.
    pub tol: f64,
}

/// The points of a simulation: times, true magnifications, and the noisy values with their
/// errors (magnitudes or fluxes, as [`Synthetic::measured`] says).
#[derive(Debug, Clone, PartialEq)]
pub struct Synthetic {
    /// Times (days), increasing.
    pub times: Vec<f64>,
    /// Model magnifications at the times.
    pub magnifications: Vec<f64>,
    /// Observed values: magnitudes or fluxes.
    pub values: Vec<f64>,
    /// Their errors.
    pub errors: Vec<f64>,
    /// Magnitudes or fluxes.
    pub measured: Measured,
}

impl Synthetic {
    /// The data-set file: header `t,mag,mag_err` or `t,flux,flux_err`, numbers in shortest
    /// round-trip form.
    pub fn to_csv(&self) -> String {
        let mut out = String::from(match self.measured {
            Measured::Magnitude => "t,mag,mag_err\n",
            Measured::Flux => "t,flux,flux_err\n",
        });
        for ((t, v), e) in self.times.iter().zip(&self.values).zip(&self.errors) {
            let _ = writeln!(out, "{},{},{}", fmt_f64(*t), fmt_f64(*v), fmt_f64(*e));
        }
        out
    }
}

impl Simulation {
    /// Seed used when none is given.
    pub const DEFAULT_SEED: u64 = 1;
    /// Magnitude error used when none is given.
    pub const DEFAULT_SIGMA_MAG: f64 = 0.01;
    /// Relative tolerance of the magnifications used when none is given.
    pub const DEFAULT_TOL: f64 = 1e-5;

    /// A simulation with `fs = 1`, `fb = 0`, [`Self::DEFAULT_SIGMA_MAG`] magnitude noise,
    /// [`Self::DEFAULT_SEED`], the default zero point and [`Self::DEFAULT_TOL`].
    pub fn new(model: BinaryModel, law: LimbDarkening) -> Self {
        Simulation {
            model,
            law,
            fs: 1.0,
            fb: 0.0,
            noise: Noise::Magnitude {
                sigma: Self::DEFAULT_SIGMA_MAG,
            },
            seed: Self::DEFAULT_SEED,
            zero_point: DEFAULT_ZERO_POINT,
            tol: Self::DEFAULT_TOL,
        }
    }

    /// Checks the fluxes, noise and zero point (the model is checked when it is evaluated).
    fn check(&self) -> Result<()> {
        for (name, v) in [
            ("--fs", self.fs),
            ("--fb", self.fb),
            ("--zero-point", self.zero_point),
        ] {
            if !v.is_finite() {
                return Err(Error::input(format!("{name}: must be finite, got {v}")));
            }
        }
        let (name, sigma) = match self.noise {
            Noise::Magnitude { sigma } => ("--sigma-mag", sigma),
            Noise::Flux { sigma } => ("--sigma-flux", sigma),
        };
        if !(sigma.is_finite() && sigma > 0.0) {
            return Err(Error::input(format!(
                "{name}: must be finite and > 0, got {sigma}"
            )));
        }
        Ok(())
    }

    /// The simulated points at `times` (any order; at least 3, finite and distinct), sorted by
    /// time.
    pub fn synthesize(&self, times: &[f64]) -> Result<Synthetic> {
        self.check()?;
        let times = sorted_times(times)?;
        let magnifications = self.model.magnifications(&times, self.law, self.tol)?;
        let mut rng = ChaCha8Rng::seed_from_u64(self.seed);
        let mut values = Vec::with_capacity(times.len());
        for (&t, &a) in times.iter().zip(&magnifications) {
            let flux = self.fs * a + self.fb;
            let z: f64 = StandardNormal.sample(&mut rng);
            values.push(match self.noise {
                Noise::Magnitude { sigma } => {
                    if flux <= 0.0 || !flux.is_finite() {
                        return Err(Error::input(format!(
                            "--fs/--fb: the model flux {flux} at t = {t} is not positive, so it \
                             has no magnitude (use --flux)"
                        )));
                    }
                    flux_to_mag(flux, self.zero_point) + sigma * z
                }
                Noise::Flux { sigma } => flux + sigma * z,
            });
        }
        let sigma = match self.noise {
            Noise::Magnitude { sigma } | Noise::Flux { sigma } => sigma,
        };
        Ok(Synthetic {
            errors: vec![sigma; times.len()],
            times,
            magnifications,
            values,
            measured: self.noise.measured(),
        })
    }

    /// The simulated data set at `times`: exactly what reading the file of
    /// [`Synthetic::to_csv`] gives, with this simulation's limb darkening.
    pub fn run(&self, times: &[f64]) -> Result<DataSet> {
        let csv = self.synthesize(times)?.to_csv();
        let mut data = DataSet::parse(&csv, "simulated", self.zero_point)?;
        data.limb_darkening = self.law;
        Ok(data)
    }
}

/// The times sorted, checked finite, distinct and at least 3.
fn sorted_times(times: &[f64]) -> Result<Vec<f64>> {
    if let Some(t) = times.iter().find(|t| !t.is_finite()) {
        return Err(Error::input(format!("times: {t} is not a finite number")));
    }
    if times.len() < 3 {
        return Err(Error::input(format!(
            "times: a data set needs at least 3 points, got {}",
            times.len()
        )));
    }
    let mut sorted = times.to_vec();
    sorted.sort_by(f64::total_cmp);
    if let Some(w) = sorted.windows(2).find(|w| w[0] == w[1]) {
        return Err(Error::input(format!("times: {} appears twice", w[0])));
    }
    Ok(sorted)
}
