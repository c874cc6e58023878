//! From a plan and a model to each site's data: the schedules, the magnifications of all sites
//! in one parallel call, and each site's values, errors and outliers.

use super::plan::{ObservingPlan, Site};
use super::schedule::{schedule, Schedule};
use super::{perturb, Synthetic};
use crate::error::{Error, Result};
use crate::fit::model::BinaryModel;
use crate::fit::photometry::{flux_to_mag, DataSet, Measured};
use crate::parallax::Observer;
use crate::source::LimbDarkening;
use crate::table::fmt_f64;
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use std::fmt::Write as _;

/// One site's simulated data, with what made it.
///
/// ```
/// use causeway::fit::model::{BinaryModel, Trajectory};
/// use causeway::fit::simulate::plan::ObservingPlan;
/// use causeway::source::LimbDarkening;
/// let model = BinaryModel { s: 1.2, q: 1e-3, rho: 1e-3,
///     trajectory: Trajectory::straight(30.0, 0.2, 20.0, 0.4).unwrap() };
/// let plan = ObservingPlan::survey_with_followup((0.0, 60.0), &[(29.0, 31.0)], 0.0);
/// let sites = plan.observe(&model, LimbDarkening::Uniform, 5, 1e-4).unwrap();
/// let a = &sites[0];
/// assert_eq!(a.file_name(), "survey-a.csv");
/// assert_eq!(a.data_set().unwrap().len(), a.data.times.len());
/// assert!(a.nights_lost < a.nights);
/// assert!(a.summary().starts_with("survey-a.csv: "));
/// ```
#[derive(Debug, Clone, PartialEq)]
pub struct Observed {
    /// The site's name.
    pub site: String,
    /// Its zero point.
    pub zero_point: f64,
    /// The source's limb darkening.
    pub law: LimbDarkening,
    /// The points (times as written).
    pub data: Synthetic,
    /// Nights whose window meets the season.
    pub nights: usize,
    /// Nights lost to weather.
    pub nights_lost: usize,
}

impl Observed {
    /// The file the site writes, `<name>.csv`.
    pub fn file_name(&self) -> String {
        format!("{}.csv", self.site)
    }

    /// The data set of the file (what reading it gives), with the source's limb darkening.
    pub fn data_set(&self) -> Result<DataSet> {
        self.data
            .data_set(&self.file_name(), self.zero_point, self.law)
    }

    /// One line: points, follow-up points, outliers, nights and time span.
    pub fn summary(&self) -> String {
        let d = &self.data;
        format!(
            "{}: {} points ({} follow-up, {} outliers), {} of {} nights observed, t from {} to {}",
            self.file_name(),
            d.times.len(),
            d.followup_count(),
            d.outlier_count(),
            self.nights - self.nights_lost,
            self.nights,
            d.times[0],
            d.times[d.times.len() - 1]
        )
    }
}

impl ObservingPlan {
    /// Observes `model` (source limb darkening `law`, magnifications to relative tolerance
    /// `tol`) with every site, noise from `seed`; one [`Observed`] per site, in plan order.
    ///
    /// ```
    /// use causeway::fit::model::{BinaryModel, Trajectory};
    /// use causeway::fit::simulate::plan::{ObservingPlan, EXAMPLE_PLAN};
    /// use causeway::source::LimbDarkening;
    /// let plan = ObservingPlan::parse(EXAMPLE_PLAN, "plan.toml").unwrap();
    /// let model = BinaryModel { s: 1.3, q: 3e-3, rho: 2e-3,
    ///     trajectory: Trajectory::straight(9000.0, 0.15, 25.0, 0.6).unwrap() };
    /// let sites = plan.observe(&model, LimbDarkening::Uniform, 1, 1e-4).unwrap();
    /// assert_eq!(sites[0].file_name(), "north.csv");
    /// assert!(sites[0].data.times[0] > 2450000.0 + 8880.0);
    /// assert_eq!(sites[2].data.followup_count(), sites[2].data.times.len());
    /// let data = sites[1].data_set().unwrap();
    /// assert_eq!(data.len(), sites[1].data.times.len());
    /// ```
    pub fn observe(
        &self,
        model: &BinaryModel,
        law: LimbDarkening,
        seed: u64,
        tol: f64,
    ) -> Result<Vec<Observed>> {
        self.check()?;
        let schedules: Vec<Schedule> = (0..self.sites.len())
            .map(|i| schedule(&self.sites[i], &mut stream(seed, 1 + 2 * i as u64)))
            .collect();
        for (site, s) in self.sites.iter().zip(&schedules) {
            if s.times.len() < 3 {
                return Err(self.named(Error::input(format!(
                    "site '{}': the plan gives {} points, a data set needs at least 3",
                    site.name,
                    s.times.len()
                ))));
            }
        }
        // The sites on the Earth in one call (its parallelism spans them); each in space alone,
        // seen from its own positions.
        let in_space = |i: usize| self.ephemerides.get(i).and_then(Option::as_ref);
        for (i, site) in self.sites.iter().enumerate() {
            if site.ephemeris.is_some() && in_space(i).is_none() {
                return Err(self.named(Error::input(format!(
                    "site '{}': its ephemeris is not loaded (read the plan from its file)",
                    site.name
                ))));
            }
        }
        let on_earth: Vec<f64> = (0..self.sites.len())
            .filter(|&i| in_space(i).is_none())
            .flat_map(|i| schedules[i].times.clone())
            .collect();
        let mut earth = model.magnifications(&on_earth, law, tol)?.into_iter();
        let mut out = Vec::with_capacity(self.sites.len());
        for (i, (site, s)) in self.sites.iter().zip(schedules).enumerate() {
            let a: Vec<f64> = match in_space(i) {
                Some(e) => model.magnifications_seen(&s.times, &Observer::At(e), law, tol)?,
                None => earth.by_ref().take(s.times.len()).collect(),
            };
            let mut rng = stream(seed, 2 + 2 * i as u64);
            let offset = site.time_offset.unwrap_or(self.time_offset);
            out.push(Observed {
                site: site.name.clone(),
                zero_point: site.zero_point,
                law,
                data: site
                    .measure(&s, a, offset, &mut rng)
                    .map_err(|e| self.named(e))?,
                nights: s.nights,
                nights_lost: s.lost,
            });
        }
        Ok(out)
    }

    /// Every site's data sets (see [`ObservingPlan::observe`] and [`Observed::data_set`]).
    ///
    /// ```
    /// use causeway::fit::model::{BinaryModel, Trajectory};
    /// use causeway::fit::simulate::plan::ObservingPlan;
    /// use causeway::source::LimbDarkening;
    /// let model = BinaryModel { s: 0.9, q: 0.3, rho: 1e-3,
    ///     trajectory: Trajectory::straight(50.0, 0.2, 15.0, 1.0).unwrap() };
    /// let plan = ObservingPlan::survey_with_followup((20.0, 80.0), &[(49.0, 51.0)], 0.5);
    /// let sets = plan.data_sets(&model, LimbDarkening::Linear { u: 0.5 }, 3, 1e-4).unwrap();
    /// assert_eq!(sets[3].name, "followup.csv");
    /// ```
    pub fn data_sets(
        &self,
        model: &BinaryModel,
        law: LimbDarkening,
        seed: u64,
        tol: f64,
    ) -> Result<Vec<DataSet>> {
        self.observe(model, law, seed, tol)?
            .iter()
            .map(Observed::data_set)
            .collect()
    }
}

impl Site {
    /// The site's points from its schedule and the magnifications there.
    fn measure(
        &self,
        s: &Schedule,
        magnifications: Vec<f64>,
        offset: f64,
        rng: &mut ChaCha8Rng,
    ) -> Result<Synthetic> {
        let mut model = Vec::with_capacity(s.times.len());
        let mut errors = Vec::with_capacity(s.times.len());
        for (&t, &a) in s.times.iter().zip(&magnifications) {
            let flux = self.fs * a + self.fb;
            if !(flux > 0.0 && flux.is_finite()) {
                return Err(Error::input(format!(
                    "site '{}': the model flux fs A + fb = {flux} at t = {t} is not positive \
                     (the error model needs a positive flux)",
                    self.name
                )));
            }
            let (value, error) = match self.output {
                Measured::Magnitude => {
                    let m = flux_to_mag(flux, self.zero_point);
                    (m, self.errors.sigma_mag(m))
                }
                Measured::Flux => (flux, self.errors.sigma_flux(flux, self.zero_point)),
            };
            model.push(value);
            errors.push(error);
        }
        let (values, outliers) =
            perturb(&model, &errors, self.error_scale, Some(self.outliers), rng);
        Ok(Synthetic {
            times: s.times.iter().map(|t| t + offset).collect(),
            magnifications,
            model,
            values,
            errors,
            measured: self.output,
            followup: s.followup.clone(),
            outliers,
        })
    }
}

/// Every site's points in one table, `site,t,magnification,model,value,error,followup,outlier`
/// (times as written, `followup` and `outlier` 0 or 1), for checking a fit against the truth.
///
/// ```
/// use causeway::fit::model::{BinaryModel, Trajectory};
/// use causeway::fit::simulate::plan::{truth_csv, ObservingPlan};
/// use causeway::source::LimbDarkening;
/// let model = BinaryModel { s: 1.0, q: 1e-3, rho: 0.0,
///     trajectory: Trajectory::straight(10.0, 0.3, 10.0, 0.0).unwrap() };
/// let plan = ObservingPlan::survey_with_followup((0.0, 20.0), &[(9.5, 10.5)], 0.0);
/// let sites = plan.observe(&model, LimbDarkening::Uniform, 1, 1e-4).unwrap();
/// let table = truth_csv(&sites);
/// let rows: usize = sites.iter().map(|s| s.data.times.len()).sum();
/// assert_eq!(table.lines().count(), rows + 1);
/// ```
pub fn truth_csv(sites: &[Observed]) -> String {
    let mut out = String::from("site,t,magnification,model,value,error,followup,outlier\n");
    for site in sites {
        let d = &site.data;
        for i in 0..d.times.len() {
            let _ = writeln!(
                out,
                "{},{},{},{},{},{},{},{}",
                site.site,
                fmt_f64(d.times[i]),
                fmt_f64(d.magnifications[i]),
                fmt_f64(d.model[i]),
                fmt_f64(d.values[i]),
                fmt_f64(d.errors[i]),
                u8::from(d.followup[i]),
                u8::from(d.outliers[i])
            );
        }
    }
    out
}

/// The ChaCha8 stream `stream` of `seed`.
fn stream(seed: u64, stream: u64) -> ChaCha8Rng {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    rng.set_stream(stream);
    rng
}
