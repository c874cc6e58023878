//! The Monte Carlo estimate of who the lens is: weighted samples of lens mass, distance and
//! velocity from the Galactic model, weighted by the event rate and by the likelihood of what
//! the light curve measured (the formalism of Dominik 2006, MNRAS 367, 669).
//!
//! Each sample draws a source distance (given, or from [`LineOfSight::draw_source`]), a lens
//! population and distance (from `D_L^2 n(D_L)` below `D_S`), lens and source velocities from
//! their populations (heliocentric proper motions, the Sun's motion subtracted) and a lens mass.
//! The event rate `Gamma ~ D_L^2 n(D_L) theta_E mu_rel` (Han & Gould 1995, 2003) and the
//! Gaussian likelihoods of `tE`, `theta_E` and `|pi_E|` give its weight. The relative proper
//! motion comes from `tE` drawn from its measurement (`mu_rel = theta_E / tE`, a uniform
//! direction) weighted by its prior density, a Gaussian (lens less source); without `tE`, from
//! the two populations' velocity distributions. How the mass is drawn depends on what was
//! measured, so that precise measurements keep many samples:
//!
//! - nothing beyond `tE`: mass and class from the population's mass function;
//! - `theta_E`: `theta_E` from its measurement, `M = theta_E^2 / (kappa pi_rel)`, weighted by
//!   the mass function at `M` and the Jacobian `dM/dtheta_E = 2 M / theta_E`;
//! - `theta_E` and `pi_E`: both from their measurements, `M = theta_E / (kappa pi_E)` and
//!   `pi_rel = theta_E pi_E` (Gould 2000, ApJ 542, 785), `D_L` from `pi_rel`, weighted by the
//!   prior at `(D_L, M)` and the Jacobian `D_L^2 2 M`.
//!
//! The mass function applies to the host, `M / (1 + q)`. Model `tE` is heliocentric
//! (`theta_E / mu_rel` with heliocentric proper motions) and is compared with the measured one
//! as given; only the size of `pi_E` enters, not its direction.
//!
//! Samples come in blocks of [`BLOCK`], block `k` from ChaCha8 stream `k` of the seed: the
//! result is the same whatever the thread count.

use super::light::LensLight;
use super::mass::{LensClass, MassFunction};
use super::model::{GalacticModel, Population, Sightline};
use super::samples::{FitSamples, SizeLikelihood};
use super::sightline::LineOfSight;
use crate::error::{Error, Result};
use crate::fit::scales::{kappa, DAYS_PER_YEAR, GM_JUPITER, GM_SUN};
use crate::progress::Progress;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, StandardNormal};
use rayon::prelude::*;

/// Samples per random stream.
pub const BLOCK: usize = 4096;

/// A measured value and its 1-sigma error.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Measured {
    /// The value.
    pub value: f64,
    /// Its error (> 0).
    pub err: f64,
}

impl Measured {
    /// A positive value with a positive error; `what` names it in the error message.
    ///
    /// ```
    /// use causeway::galaxy::Measured;
    /// assert!(Measured::new("--te", 25.0, 1.0).is_ok());
    /// assert!(Measured::new("--te", 25.0, 0.0).unwrap_err().to_string().starts_with("--te"));
    /// ```
    pub fn new(what: &str, value: f64, err: f64) -> Result<Measured> {
        if !(value.is_finite() && value > 0.0 && err.is_finite() && err > 0.0) {
            return Err(Error::input(format!(
                "{what}: need a finite value > 0 and an error > 0, got {value} +- {err}"
            )));
        }
        Ok(Measured { value, err })
    }

    fn likelihood(&self, x: f64) -> f64 {
        (-0.5 * ((x - self.value) / self.err).powi(2)).exp()
    }

    fn draw(&self, rng: &mut impl Rng) -> f64 {
        loop {
            let z: f64 = StandardNormal.sample(rng);
            let x = self.value + self.err * z;
            if x > 0.0 {
                return x;
            }
        }
    }
}

/// What the light curve says of the event.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct EventData {
    /// Einstein timescale (days); `None` gives the event-rate-weighted prior.
    pub te: Option<Measured>,
    /// Einstein angle (mas).
    pub theta_e: Option<Measured>,
    /// Size of the microlens parallax vector.
    pub pi_e: Option<Measured>,
    /// Direction of the parallax vector, the direction of the geocentric relative proper
    /// motion: position angle (radians, north through east) and its error.
    pub pi_e_angle: Option<(f64, f64)>,
    /// The Earth's velocity projected on the sky at the parallax reference time, (north, east)
    /// in km/s: `mu_hel = mu_geo + v_earth pi_rel / au` (Gould 2004, ApJ 606, 319). Without
    /// it the measured tE and the direction are taken as heliocentric.
    pub earth_velocity: Option<[f64; 2]>,
    /// Separation of the companion (Einstein radii), for its projected separation.
    pub s: Option<f64>,
    /// Mass ratio of the companion, for its mass.
    pub q: Option<f64>,
}

/// Where the source is.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum SourceDistance {
    /// Drawn from the model along the line of sight ([`LineOfSight::draw_source`]).
    Model,
    /// Given (kpc), with a Gaussian error (0 for exact).
    Given {
        /// Distance (kpc).
        kpc: f64,
        /// Its error (kpc).
        err: f64,
    },
}

/// Everything the estimate needs besides the event's data.
#[derive(Debug, Clone, Copy)]
pub struct LensOptions {
    /// The Galactic model.
    pub model: GalacticModel,
    /// The line of sight.
    pub sightline: Sightline,
    /// The source distance.
    pub source: SourceDistance,
    /// Exponent `beta` of the source weighting ([`super::sightline`]).
    pub source_beta: f64,
    /// Number of samples drawn.
    pub samples: usize,
    /// Seed of the random streams.
    pub seed: u64,
    /// The lens-light constraint, if imaging was done.
    pub light: Option<LensLight>,
}

impl LensOptions {
    /// Default options on a line of sight: published model, sources from the model, 100,000
    /// samples, seed 1, no imaging.
    pub fn new(sightline: Sightline) -> LensOptions {
        LensOptions {
            model: GalacticModel::default(),
            sightline,
            source: SourceDistance::Model,
            source_beta: 1.0,
            samples: 100_000,
            seed: 1,
            light: None,
        }
    }
}

/// One weighted sample.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LensSample {
    /// Weight without the lens-light constraint.
    pub weight: f64,
    /// Weight with it (equal to `weight` without imaging).
    pub weight_light: f64,
    /// Lens population.
    pub population: Population,
    /// Lens distance (kpc).
    pub dl: f64,
    /// Source distance (kpc).
    pub ds: f64,
    /// Total lens mass (M_sun).
    pub mass: f64,
    /// Host mass `M / (1 + q)` (M_sun).
    pub host_mass: f64,
    /// Companion mass `q M / (1 + q)` (Jupiter masses; NaN without q).
    pub planet_mjup: f64,
    /// Projected separation `s theta_E D_L` (au; NaN without s).
    pub separation_au: f64,
    /// Einstein angle (mas).
    pub theta_e: f64,
    /// Heliocentric relative proper motion (mas/yr).
    pub mu_rel: f64,
    /// Relative parallax (mas).
    pub pi_rel: f64,
    /// Einstein timescale (days).
    pub te: f64,
    /// Probability of each class of [`LensClass::ALL`] before the imaging.
    pub class: [f64; 5],
    /// Apparent magnitude of a main-sequence host in the imaging band (NaN if dark or none).
    pub host_mag: f64,
    /// Imaging likelihood of a main-sequence host, and of a dark one.
    pub light_like: [f64; 2],
}

/// The weighted samples and what they say.
#[derive(Debug, Clone)]
pub struct LensPosterior {
    /// Every sample drawn, in stream order (weights may be zero).
    pub samples: Vec<LensSample>,
    /// Whether a lens-light constraint was applied.
    pub has_light: bool,
}

/// Draws a mass and its class: (host mass, class probabilities, weight factor).
fn draw_mass(
    rng: &mut impl Rng,
    mf: &MassFunction,
    forced: Option<f64>,
) -> Option<(f64, [f64; 5], f64)> {
    match forced {
        None => {
            let (m, class) = mf.draw(rng);
            let mut p = [0.0; 5];
            p[LensClass::ALL.iter().position(|&c| c == class)?] = 1.0;
            Some((m, p, 1.0))
        }
        Some(m) => {
            let d = mf.density(m);
            let total: f64 = d.iter().sum();
            (total > 0.0).then(|| (m, d.map(|x| x / total), total))
        }
    }
}

/// Where one measured value of a sample comes from.
#[derive(Clone, Copy)]
enum Value {
    /// Drawn from a Gaussian measurement.
    Gauss(Measured),
    /// A posterior sample's value, as it is.
    Sampled(f64),
    /// `theta_E = theta_* / rho` from a sampled rho and the measured `theta_*` (microarcseconds).
    Rho { rho: f64, theta_star: Measured },
    /// `|pi_E|` of a sampled parallax vector.
    Vector([f64; 2]),
}

impl Value {
    /// The value and the Jacobian factor of its sample ([`super::samples`]).
    fn get(self, rng: &mut impl Rng) -> (f64, f64) {
        match self {
            Value::Gauss(m) => (m.draw(rng), 1.0),
            Value::Sampled(x) => (x, 1.0),
            Value::Rho { rho, theta_star } => {
                let theta = theta_star.draw(rng) / 1000.0 / rho;
                (theta, theta / rho)
            }
            Value::Vector([n, e]) => {
                let size = n.hypot(e);
                (size, 1.0 / size)
            }
        }
    }
}

/// The fit's posterior samples as the sampler draws them.
struct Rows<'a> {
    samples: &'a FitSamples,
    theta_star: Option<Measured>,
    size: Option<SizeLikelihood>,
}

struct Sampler<'a> {
    data: &'a EventData,
    rows: Option<Rows<'a>>,
    options: &'a LensOptions,
    los: LineOfSight,
    mass_functions: [MassFunction; 2],
    kappa: f64,
    /// Position angle of the Galactic north at the line of sight (radians).
    north_angle: f64,
}

impl Sampler<'_> {
    fn source(&self, rng: &mut impl Rng) -> (f64, f64) {
        match self.options.source {
            SourceDistance::Model => self.los.draw_source(rng.random()),
            SourceDistance::Given { kpc, err } => {
                let m = Measured { value: kpc, err };
                let d = if err > 0.0 { m.draw(rng) } else { kpc };
                (d.min(super::sightline::MAX_DISTANCE_KPC), 1.0)
            }
        }
    }

    fn sample(&self, rng: &mut impl Rng) -> Option<LensSample> {
        let model = &self.options.model;
        let los = &self.options.sightline;
        let row = self
            .rows
            .as_ref()
            .map(|r| r.samples.row(rng.random_range(0..r.samples.len())));
        let data = self.data;
        let te_value = match row {
            Some(r) => Some(Value::Sampled(r.te)),
            None => data.te.map(Value::Gauss),
        };
        let theta_value = match (row.and_then(|r| r.rho), self.rows.as_ref()) {
            (
                Some(rho),
                Some(Rows {
                    theta_star: Some(theta_star),
                    ..
                }),
            ) => Some(Value::Rho {
                rho,
                theta_star: *theta_star,
            }),
            _ => data.theta_e.map(Value::Gauss),
        };
        let pi_value = match row.and_then(|r| r.pi_e) {
            Some(v) => Some(Value::Vector(v)),
            None => data.pi_e.map(Value::Gauss),
        };
        let q = row.and_then(|r| r.q).or(data.q);
        let one_plus_q = 1.0 + q.unwrap_or(0.0);
        let (ds, w_source) = self.source(rng);
        let (src_pop, _) = self.los.population(rng.random(), ds);
        let (dl, mass, class, mut weight, pop);
        match (theta_value, pi_value) {
            (Some(te), Some(pe)) => {
                let ((theta, j_theta), (pie, j_pie)) = (te.get(rng), pe.get(rng));
                let pi_rel = theta * pie;
                dl = 1.0 / (pi_rel + 1.0 / ds);
                mass = theta / (self.kappa * pie);
                let (p, n_tot) = self.los.population(rng.random(), dl);
                let mf = &self.mass_functions[p as usize];
                let (_, c, f) = draw_mass(rng, mf, Some(mass / one_plus_q))?;
                pop = p;
                class = c;
                weight = w_source * dl.powi(4) * n_tot * f * 2.0 * mass * j_theta * j_pie;
            }
            (theta_e, pi_e) => {
                let (d, w) = self.los.draw_lens(rng.random(), ds);
                let (p, _) = self.los.population(rng.random(), d);
                let mf = &self.mass_functions[p as usize];
                let pi_rel = 1.0 / d - 1.0 / ds;
                dl = d;
                pop = p;
                if let Some(te) = theta_e {
                    let (theta, j_theta) = te.get(rng);
                    mass = theta * theta / (self.kappa * pi_rel);
                    let (_, c, f) = draw_mass(rng, mf, Some(mass / one_plus_q))?;
                    class = c;
                    weight = w_source * w * f * 2.0 * mass / theta * j_theta;
                } else {
                    let (m, c, _) = draw_mass(rng, mf, None)?;
                    mass = m * one_plus_q;
                    class = c;
                    weight = w_source * w;
                }
                let size = (pi_rel / (self.kappa * mass)).sqrt();
                match (pi_e, self.rows.as_ref().and_then(|r| r.size.as_ref())) {
                    (Some(Value::Gauss(pe)), _) => weight *= pe.likelihood(size),
                    (Some(_), Some(sampled)) => weight *= sampled.at(size),
                    _ => {}
                }
            }
        }
        let pi_rel = 1.0 / dl - 1.0 / ds;
        if !(pi_rel > 0.0 && dl > 0.0) {
            return None;
        }
        let theta_e = (self.kappa * mass * pi_rel).sqrt();
        let lens_motion = model.motion_moments(pop, los, dl);
        let source_motion = model.motion_moments(src_pop, los, ds);
        let (mu_rel, te) = match te_value {
            None => {
                let z = |rng: &mut _| -> [f64; 2] {
                    [StandardNormal.sample(rng), StandardNormal.sample(rng)]
                };
                let mu_l = lens_motion.draw(z(rng));
                let mu_s = source_motion.draw(z(rng));
                let mu_rel = (mu_l[0] - mu_s[0]).hypot(mu_l[1] - mu_s[1]);
                weight *= theta_e * mu_rel;
                (mu_rel, theta_e / mu_rel * DAYS_PER_YEAR)
            }
            Some(m) => {
                // tE from its measurement and a direction (uniform, or pi_E's) give the
                // geocentric relative proper motion; its heliocentric counterpart's prior
                // density (lens less source, a Gaussian) enters the weight. Proposal density
                // of the vector: N(tE) (theta_E / mu^2) p(phi) / mu; target: prior x N(tE) x
                // L(phi) x theta_E mu (the rate), with L(phi) = p(phi) for pi_E's direction
                // and p constant otherwise: the weight is prior x mu^4 either way.
                let (te, _) = m.get(rng);
                let mu = theta_e / te * DAYS_PER_YEAR;
                let phi = match (row.and_then(|r| r.pi_e), data.pi_e_angle) {
                    (Some([n, e]), _) => e.atan2(n),
                    (None, Some((angle, err))) => {
                        let z: f64 = StandardNormal.sample(rng);
                        angle + err * z
                    }
                    (None, None) => std::f64::consts::TAU * rng.random::<f64>(),
                };
                let v = self.data.earth_velocity.unwrap_or([0.0; 2]);
                let shift = pi_rel / super::model::KMS_PER_MASYR_KPC;
                let north = mu * phi.cos() + v[0] * shift;
                let east = mu * phi.sin() + v[1] * shift;
                let (s, c) = self.north_angle.sin_cos();
                let hel = [east * c - north * s, north * c + east * s];
                let rel = lens_motion.less(&source_motion);
                weight *= rel.density(hel) * mu.powi(4);
                (hel[0].hypot(hel[1]), te)
            }
        };
        let host_mass = mass / one_plus_q;
        let (host_mag, light_like) = match &self.options.light {
            Some(light) => {
                let mag = light.apparent(host_mass, dl, ds, los.b_deg);
                (
                    mag.unwrap_or(f64::NAN),
                    [light.likelihood(mag), light.likelihood(None)],
                )
            }
            None => (f64::NAN, [1.0, 1.0]),
        };
        let weight_light = weight * (class[0] * light_like[0] + (1.0 - class[0]) * light_like[1]);
        let q = q.unwrap_or(f64::NAN);
        let s = row.and_then(|r| r.s).or(data.s).unwrap_or(f64::NAN);
        Some(LensSample {
            weight,
            weight_light,
            population: pop,
            dl,
            ds,
            mass,
            host_mass,
            planet_mjup: q * host_mass * GM_SUN / GM_JUPITER,
            separation_au: s * theta_e * dl,
            theta_e,
            mu_rel,
            pi_rel,
            te,
            class,
            host_mag,
            light_like,
        })
    }
}

/// Draws the weighted samples (module docs); reports one unit of progress per block.
///
/// ```
/// use causeway::galaxy::{infer, EventData, LensOptions, Measured, Sightline};
/// use causeway::progress::Silent;
/// let data = EventData { te: Some(Measured::new("tE", 20.0, 1.0).unwrap()), ..Default::default() };
/// let options = LensOptions { samples: 8192, ..LensOptions::new(Sightline::new(1.0, -3.0).unwrap()) };
/// let post = infer(&data, &options, &Silent).unwrap();
/// let m = post.quantiles(|s| s.host_mass, false, &[0.5])[0];
/// assert!(m > 0.05 && m < 1.5);
/// ```
pub fn infer(
    data: &EventData,
    options: &LensOptions,
    progress: &dyn Progress,
) -> Result<LensPosterior> {
    run(data, None, options, progress)
}

/// Draws the weighted samples from the fit's posterior samples instead of value +- error
/// ([`super::samples`]): each lens sample takes one row (`tE`, and `rho`, `pi_E`, `s`, `q`
/// when sampled). `theta_star` (microarcseconds, with its error) turns a sampled `rho` into
/// `theta_E`; what the samples lack comes from `data` (`theta_e` when there is no `rho`
/// column or no `theta_star`, `pi_e` and `pi_e_angle`, `s`, `q`, `earth_velocity`); `data.te`
/// is not used.
///
/// ```
/// use causeway::galaxy::{infer_samples, EventData, FitSamples, LensOptions, Measured, Sightline};
/// use causeway::progress::Silent;
/// let te: Vec<f64> = (0..500).map(|k| 28.0 + 0.01 * k as f64).collect();
/// let rho: Vec<f64> = (0..500).map(|k| 1.2e-3 - 1e-7 * k as f64).collect();
/// let samples = FitSamples::new(te, Some(rho), None, None, None).unwrap();
/// let theta_star = Measured::new("theta_*", 0.6, 0.03).ok();
/// let options = LensOptions { samples: 8192, ..LensOptions::new(Sightline::new(1.0, -3.0).unwrap()) };
/// let post = infer_samples(&samples, theta_star, &EventData::default(), &options, &Silent).unwrap();
/// let theta = post.quantiles(|s| s.theta_e, false, &[0.5])[0];
/// assert!((theta - 0.6 / 1.175).abs() < 0.05);
/// ```
pub fn infer_samples(
    samples: &FitSamples,
    theta_star: Option<Measured>,
    data: &EventData,
    options: &LensOptions,
    progress: &dyn Progress,
) -> Result<LensPosterior> {
    if samples.len() < 2 {
        return Err(Error::input("tE: need at least 2 posterior samples"));
    }
    if theta_star.is_some() && samples.rho.is_none() {
        return Err(Error::input(
            "theta_*: the posterior samples have no rho column to divide it by",
        ));
    }
    let rows = Rows {
        samples,
        theta_star,
        size: samples.pi_e_size_likelihood(),
    };
    run(data, Some(rows), options, progress)
}

fn run(
    data: &EventData,
    rows: Option<Rows>,
    options: &LensOptions,
    progress: &dyn Progress,
) -> Result<LensPosterior> {
    if options.samples == 0 {
        return Err(Error::input("samples: need at least one"));
    }
    if let SourceDistance::Given { kpc, err } = options.source {
        if !(kpc.is_finite() && kpc > 0.0 && err.is_finite() && err >= 0.0) {
            return Err(Error::input(format!(
                "source distance: need a finite value > 0 and an error >= 0, got {kpc} +- {err}"
            )));
        }
    }
    for (what, v) in [("s", data.s), ("q", data.q)] {
        if v.is_some_and(|v| !(v.is_finite() && v > 0.0)) {
            return Err(Error::input(format!("{what}: must be finite and > 0")));
        }
    }
    if !(options.source_beta.is_finite()) {
        return Err(Error::input("source beta: must be finite"));
    }
    let sampler = Sampler {
        data,
        rows,
        options,
        los: LineOfSight::new(options.model, options.sightline, options.source_beta),
        mass_functions: Population::ALL.map(MassFunction::new),
        kappa: kappa(),
        north_angle: options.sightline.galactic_north_angle(),
    };
    let blocks = options.samples.div_ceil(BLOCK);
    progress.start("lens posterior", blocks as u64);
    let parts: Vec<Vec<LensSample>> = (0..blocks)
        .into_par_iter()
        .map(|k| {
            let mut rng = ChaCha8Rng::seed_from_u64(options.seed);
            rng.set_stream(k as u64);
            let n = BLOCK.min(options.samples - k * BLOCK);
            let out = (0..n).filter_map(|_| sampler.sample(&mut rng)).collect();
            progress.advance(1);
            out
        })
        .collect();
    let samples: Vec<LensSample> = parts.into_iter().flatten().collect();
    let post = LensPosterior {
        samples,
        has_light: options.light.is_some(),
    };
    progress.finish(&format!(
        "lens posterior: {} samples, {:.0} effective",
        post.samples.len(),
        post.effective_samples(false),
    ));
    if post.effective_samples(false) < 1.0 {
        return Err(Error::Numerical(
            "lens posterior: every sample has zero weight (the measurements and the model \
             disagree; check tE, theta_E, pi_E and the source distance)"
                .into(),
        ));
    }
    Ok(post)
}

impl LensPosterior {
    fn weight(s: &LensSample, light: bool) -> f64 {
        if light {
            s.weight_light
        } else {
            s.weight
        }
    }

    /// Kish's effective number of samples, `(sum w)^2 / sum w^2`.
    pub fn effective_samples(&self, light: bool) -> f64 {
        let (s1, s2) = self.samples.iter().fold((0.0, 0.0), |(a, b), s| {
            let w = Self::weight(s, light);
            (a + w, b + w * w)
        });
        if s2 > 0.0 {
            s1 * s1 / s2
        } else {
            0.0
        }
    }

    /// Weighted quantiles `qs` (in [0, 1]) of `value`, with or without the imaging; NaN values
    /// are left out.
    pub fn quantiles(
        &self,
        value: impl Fn(&LensSample) -> f64,
        light: bool,
        qs: &[f64],
    ) -> Vec<f64> {
        let mut pairs: Vec<(f64, f64)> = self
            .samples
            .iter()
            .map(|s| (value(s), Self::weight(s, light)))
            .filter(|(v, w)| v.is_finite() && *w > 0.0)
            .collect();
        pairs.sort_by(|a, b| a.0.total_cmp(&b.0));
        let total: f64 = pairs.iter().map(|p| p.1).sum();
        let mut out = Vec::with_capacity(qs.len());
        for &q in qs {
            let target = q * total;
            let mut acc = 0.0;
            let mut v = f64::NAN;
            for &(x, w) in &pairs {
                acc += w;
                v = x;
                if acc >= target {
                    break;
                }
            }
            out.push(v);
        }
        out
    }

    /// Probability of each class of [`LensClass::ALL`], with or without the imaging.
    pub fn class_probabilities(&self, light: bool) -> [f64; 5] {
        let mut p = [0.0; 5];
        for s in &self.samples {
            for (k, pk) in p.iter_mut().enumerate() {
                let like = if light {
                    s.light_like[usize::from(k != 0)]
                } else {
                    1.0
                };
                *pk += s.weight * s.class[k] * like;
            }
        }
        let total: f64 = p.iter().sum();
        if total > 0.0 {
            p.iter_mut().for_each(|x| *x /= total);
        }
        p
    }
}
