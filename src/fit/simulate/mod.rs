//! Synthetic photometry of a binary-lens model: exact magnifications, `F = fs A + fb`, and seeded
//! noise.
//!
//! Magnifications come from [`BinaryModel::magnifications`] (point source far from caustics,
//! contour integration near them). Noise is drawn in time order from ChaCha8 streams fixed by
//! the seed, so the output depends on the inputs only, never on the thread count.
//!
//! Two ways to observe:
//!
//! - [`Simulation`]: one data set at given times with one constant error, Gaussian in magnitude,
//!   `m = zp - 2.5 log10(fs A + fb) + sigma_m z` (written as `mag,mag_err`), or in flux,
//!   `F = fs A + fb + sigma_F z` (written as `flux,flux_err`), with `z` standard normal;
//! - [`plan::ObservingPlan`]: several sites with nightly windows, lost nights, follow-up runs,
//!   brightness-dependent errors, a true error scale, outliers and a time offset (see [`plan`]).

pub mod drawn;
pub mod events;
mod observe;
pub mod plan;
mod schedule;

use super::model::BinaryModel;
use super::photometry::{flux_to_mag, DataSet, Measured, DEFAULT_ZERO_POINT};
use crate::error::{Error, Result};
use crate::parallax::Observer;
use crate::source::LimbDarkening;
use crate::table::fmt_f64;
use rand::{Rng, SeedableRng};
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
    ///
    /// ```
    /// use causeway::fit::{photometry::Measured, simulate::Noise};
    /// assert_eq!(Noise::Flux { sigma: 0.1 }.measured(), Measured::Flux);
    /// ```
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

/// The points of a simulation: times as written, true magnifications, the noise-free and the
/// noisy values with their reported errors (magnitudes or fluxes, as [`Synthetic::measured`]
/// says), and which points are follow-up points or outliers.
#[derive(Debug, Clone, PartialEq)]
pub struct Synthetic {
    /// Times as written (days), increasing.
    pub times: Vec<f64>,
    /// Model magnifications at the times.
    pub magnifications: Vec<f64>,
    /// Noise-free values: magnitudes or fluxes of `fs A + fb`.
    pub model: Vec<f64>,
    /// Observed values: magnitudes or fluxes.
    pub values: Vec<f64>,
    /// Their reported errors.
    pub errors: Vec<f64>,
    /// Magnitudes or fluxes.
    pub measured: Measured,
    /// Whether each point was taken at the follow-up cadence.
    pub followup: Vec<bool>,
    /// Whether each point is an outlier.
    pub outliers: Vec<bool>,
}

impl Synthetic {
    /// The data-set file: header `t,mag,mag_err` or `t,flux,flux_err`, numbers in shortest
    /// round-trip form.
    ///
    /// ```
    /// use causeway::fit::{photometry::Measured, simulate::Synthetic};
    /// let s = Synthetic { times: vec![1.0], magnifications: vec![1.0], model: vec![2.0],
    ///     values: vec![2.5], errors: vec![0.1], measured: Measured::Flux,
    ///     followup: vec![false], outliers: vec![false] };
    /// assert_eq!(s.to_csv(), "t,flux,flux_err\n1,2.5,0.1\n");
    /// ```
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

    /// The data set of [`Synthetic::to_csv`] read back (exactly what reading the file gives),
    /// named `name`, with limb darkening `law`.
    pub fn data_set(&self, name: &str, zero_point: f64, law: LimbDarkening) -> Result<DataSet> {
        let mut data = DataSet::parse(&self.to_csv(), name, zero_point)?;
        data.limb_darkening = law;
        Ok(data)
    }

    /// Number of follow-up points.
    pub fn followup_count(&self) -> usize {
        self.followup.iter().filter(|&&f| f).count()
    }

    /// Number of outliers.
    pub fn outlier_count(&self) -> usize {
        self.outliers.iter().filter(|&&o| o).count()
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
            ("fs", self.fs),
            ("fb", self.fb),
            ("zero_point", self.zero_point),
        ] {
            if !v.is_finite() {
                return Err(Error::input(format!("{name}: must be finite, got {v}")));
            }
        }
        let (name, sigma) = match self.noise {
            Noise::Magnitude { sigma } => ("sigma (mag)", sigma),
            Noise::Flux { sigma } => ("sigma (flux)", sigma),
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
        self.synthesize_seen(times, &Observer::Earth)
    }

    /// [`Simulation::synthesize`] for an `observer` of its own (a satellite's ephemeris): with
    /// parallax, its curve is seen from its own position.
    pub fn synthesize_seen(&self, times: &[f64], observer: &Observer) -> Result<Synthetic> {
        self.check()?;
        let times = sorted_times(times)?;
        let magnifications = self
            .model
            .magnifications_seen(&times, observer, self.law, self.tol)?;
        let (measured, sigma) = match self.noise {
            Noise::Magnitude { sigma } => (Measured::Magnitude, sigma),
            Noise::Flux { sigma } => (Measured::Flux, sigma),
        };
        let model = self.model_values(&times, &magnifications, measured)?;
        let errors = vec![sigma; times.len()];
        let mut rng = ChaCha8Rng::seed_from_u64(self.seed);
        let (values, outliers) = perturb(&model, &errors, 1.0, None, &mut rng);
        Ok(Synthetic {
            followup: vec![false; times.len()],
            times,
            magnifications,
            model,
            values,
            errors,
            measured,
            outliers,
        })
    }

    /// The noise-free values `fs A + fb` (as fluxes or magnitudes) at the magnifications
    /// (`times` for messages only). A magnitude needs a positive flux.
    fn model_values(&self, times: &[f64], a: &[f64], measured: Measured) -> Result<Vec<f64>> {
        times
            .iter()
            .zip(a)
            .map(|(&t, &a)| {
                let flux = self.fs * a + self.fb;
                match measured {
                    Measured::Flux => Ok(flux),
                    Measured::Magnitude if flux > 0.0 && flux.is_finite() => {
                        Ok(flux_to_mag(flux, self.zero_point))
                    }
                    Measured::Magnitude => Err(Error::input(format!(
                        "fs/fb: the model flux {flux} at t = {t} is not positive, so it has no \
                         magnitude (write fluxes instead)"
                    ))),
                }
            })
            .collect()
    }

    /// The simulated data set at `times`: exactly what reading the file of
    /// [`Synthetic::to_csv`] gives, with this simulation's limb darkening.
    pub fn run(&self, times: &[f64]) -> Result<DataSet> {
        self.synthesize(times)?
            .data_set("simulated", self.zero_point, self.law)
    }
}

/// Lowest and highest outlier displacement, in reported errors.
pub const OUTLIER_SIGMAS: (f64, f64) = (5.0, 20.0);

/// Noisy values `model + scale error z` (`z` standard normal), in order, from `rng`.
///
/// Without an outlier fraction each point takes one normal draw. With one, each point takes
/// exactly three draws (z, then two uniforms u and w), so the fraction never shifts the noise of
/// later points: the point is an outlier when `u < fraction`, displaced by `d error` with
/// `d = 5 * 4^x` (log-uniform in [5, 20]), `x = 2w` and sign `-` when `w < 0.5`, `x = 2w - 1`
/// and sign `+` otherwise.
fn perturb(
    model: &[f64],
    errors: &[f64],
    scale: f64,
    outlier_fraction: Option<f64>,
    rng: &mut ChaCha8Rng,
) -> (Vec<f64>, Vec<bool>) {
    let (lo, hi) = OUTLIER_SIGMAS;
    model
        .iter()
        .zip(errors)
        .map(|(&m, &e)| {
            let z: f64 = StandardNormal.sample(rng);
            let value = m + scale * e * z;
            let Some(fraction) = outlier_fraction else {
                return (value, false);
            };
            let (u, w): (f64, f64) = (rng.random(), rng.random());
            if u >= fraction {
                return (value, false);
            }
            let (sign, x) = if w < 0.5 {
                (-1.0, 2.0 * w)
            } else {
                (1.0, 2.0 * w - 1.0)
            };
            (value + sign * lo * (hi / lo).powf(x) * e, true)
        })
        .unzip()
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
