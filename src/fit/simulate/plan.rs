#![doc = concat!(
r#"Observing plans: where, when and how well each site observes, read from TOML, and the
multi-site synthetic photometry they give.

# The file

"#,
"```toml\n",
include_str!("example_plan.toml"),
"```\n",
r#"
Keys not listed are refused. Required per site: `name`, `season`, `night_hours`,
`night_middle`, `errors`, and `interval_minutes` or `followup` (or both).

# Times

Plan times (`season`, `followup`) and the model's t0 are days in one system, the plan's. Each
written time is the plan time plus `time_offset` (the site's own if it has one, else the
plan's), so a plan with `time_offset = 2450000` writes the same event with t0 moved by 2450000;
the noise does not depend on the offset.

Night `k` (any integer) is the window of `night_hours` centred on day `k + night_middle`, cut to
the season `[start, end)`; sites with different `night_middle` interleave, and every site has a
daily gap of `24 - night_hours` hours. Each night is lost with probability `lost_nights`. In the
others, exposures follow at `interval_minutes`, and at `followup_minutes` inside the follow-up
windows `[start, end)`, which are observed only during the site's nights; the first exposure of
a night falls a random fraction of a step after the window opens.

# Errors

The reported error in magnitudes at model magnitude `m` (of the flux `fs A + fb`):

`sigma_m = sqrt(floor^2 + (photon 10^(0.2 (m - reference_mag)))^2)`

a floor plus photon noise, whose variance grows as the flux falls (`photon` is its error at
`reference_mag`). Flux output reports the same error to first order,
`sigma_F = 0.4 ln(10) F sigma_m`, that is
`sigma_F^2 = (0.4 ln 10)^2 (floor^2 F^2 + photon^2 F_ref F)` with `F_ref` the flux of
`reference_mag`; the model flux must be positive. The written value is the model value plus
`error_scale sigma z` (`z` standard normal), so the true scatter is `error_scale` times the
reported error. A fraction `outliers` of the points is displaced further by `d sigma`, `d`
log-uniform in [5, 20] (see [`super::OUTLIER_SIGMAS`]), with a random sign.

# Determinism

Site `i` draws from two ChaCha8 streams of the seed, numbered `1 + 2i` (nights: weather and
first exposure) and `2 + 2i` (noise: one normal and two uniforms per point, in time order), so
a plan, model and seed give the same values whatever the thread count, and a site's data do not
change when sites are added after it.
"#)]

pub use super::observe::{truth_csv, Observed};
use crate::error::{shown, tidy, Error, Result};
use crate::fit::photometry::{flux_to_mag, Measured, DEFAULT_ZERO_POINT};
use crate::parallax::Ephemeris;
use serde::{Deserialize, Deserializer};
use std::collections::HashSet;
use std::path::Path;

/// The example plan of the module documentation (and of `causeway simulate --example-plan`).
pub const EXAMPLE_PLAN: &str = include_str!("example_plan.toml");

/// Most points a plan may give (all sites together).
pub const MAX_POINTS: usize = 5_000_000;

/// An observing plan: the sites and the offset added to written times.
///
/// ```
/// use causeway::fit::simulate::plan::{ObservingPlan, EXAMPLE_PLAN};
/// let plan = ObservingPlan::parse(EXAMPLE_PLAN, "plan.toml").unwrap();
/// assert_eq!(plan.sites.len(), 3);
/// assert_eq!(plan.sites[2].interval_minutes, None); // follow-up only
/// let bad = EXAMPLE_PLAN.replace("lost_nights = 0.25", "lost_nights = 1.5");
/// let e = ObservingPlan::parse(&bad, "plan.toml").unwrap_err().to_string();
/// assert_eq!(e, "plan.toml: site 'north': lost_nights must be in [0, 1), got 1.5");
/// ```
#[derive(Debug, Clone, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ObservingPlan {
    /// Days added to every written time of sites without their own offset.
    #[serde(default)]
    pub time_offset: f64,
    /// The sites, in file order.
    #[serde(rename = "site")]
    pub sites: Vec<Site>,
    /// Where the plan comes from (its file), starting every message about it; may be empty.
    #[serde(skip)]
    pub origin: String,
    /// The ephemeris of each site that names one, in site order (`None` on the Earth); empty
    /// until loaded.
    #[serde(skip)]
    pub ephemerides: Vec<Option<Ephemeris>>,
}

/// One site: its output, fluxes, nights, cadences, errors and outliers (see the module
/// documentation for the meaning of each field).
///
/// ```
/// use causeway::fit::simulate::plan::ObservingPlan;
/// let mut plan = ObservingPlan::survey_with_followup((0.0, 60.0), &[(29.0, 31.0)], 0.0);
/// plan.sites[0].night_middle = 1.2;
/// let e = plan.check().unwrap_err().to_string();
/// assert!(e.contains("site 'survey-a': night_middle must be in [0, 1)"), "{e}");
/// ```
#[derive(Debug, Clone, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Site {
    /// Name; the file is `<name>.csv`.
    pub name: String,
    /// Magnitudes or fluxes.
    #[serde(default = "magnitudes", deserialize_with = "measured")]
    pub output: Measured,
    /// Source flux (> 0).
    #[serde(default = "one")]
    pub fs: f64,
    /// Blend flux.
    #[serde(default)]
    pub fb: f64,
    /// Magnitude of unit flux.
    #[serde(default = "zero_point")]
    pub zero_point: f64,
    /// First and last day observed, `[start, end)` (plan time).
    pub season: (f64, f64),
    /// Length of the nightly window (hours, in (0, 24]).
    pub night_hours: f64,
    /// Middle of night `k` at day `k + night_middle` (in [0, 1)).
    pub night_middle: f64,
    /// Survey cadence (minutes); `None` to observe the follow-up windows only.
    #[serde(default)]
    pub interval_minutes: Option<f64>,
    /// Follow-up windows `[start, end)` (plan time).
    #[serde(default)]
    pub followup: Vec<(f64, f64)>,
    /// Follow-up cadence (minutes).
    #[serde(default = "followup_minutes")]
    pub followup_minutes: f64,
    /// Fraction of nights lost, in [0, 1).
    #[serde(default)]
    pub lost_nights: f64,
    /// Reported errors.
    pub errors: ErrorModel,
    /// True scatter over reported error (> 0).
    #[serde(default = "one")]
    pub error_scale: f64,
    /// Fraction of outliers, in [0, 0.5].
    #[serde(default)]
    pub outliers: f64,
    /// This site's own time offset (days), if any.
    #[serde(default)]
    pub time_offset: Option<f64>,
    /// The site is an observatory in space: its ephemeris file (CSV `t,x,y,z` or
    /// `t,north,east`, see [`crate::parallax::Ephemeris`]; times on the model's scale), relative
    /// to the plan's folder. Loaded by [`ObservingPlan::read`] or
    /// [`ObservingPlan::load_ephemerides`]; it matters only to a model with parallax.
    #[serde(default)]
    pub ephemeris: Option<String>,
}

/// Reported magnitude errors: a floor plus photon noise,
/// `sigma_m = sqrt(floor^2 + (photon 10^(0.2 (m - reference_mag)))^2)`.
///
/// ```
/// use causeway::fit::simulate::plan::ErrorModel;
/// let e = ErrorModel { floor: 0.003, photon: 0.004, reference_mag: 18.0 };
/// assert!((e.sigma_mag(18.0) - 0.005).abs() < 1e-15); // 3-4-5
/// ```
#[derive(Debug, Clone, Copy, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ErrorModel {
    /// Error floor (mag, >= 0).
    pub floor: f64,
    /// Photon-noise error at `reference_mag` (mag, >= 0).
    pub photon: f64,
    /// Magnitude at which the photon term is `photon`.
    pub reference_mag: f64,
}

impl ErrorModel {
    /// The reported error (mag) at magnitude `mag`.
    pub fn sigma_mag(&self, mag: f64) -> f64 {
        self.floor
            .hypot(self.photon * 10f64.powf(0.2 * (mag - self.reference_mag)))
    }

    /// The reported error of a flux `flux > 0`, `0.4 ln(10) F sigma_m`.
    ///
    /// ```
    /// use causeway::fit::simulate::plan::ErrorModel;
    /// let e = ErrorModel { floor: 0.01, photon: 0.0, reference_mag: 18.0 };
    /// assert!((e.sigma_flux(2.0, 22.0) - 0.8 * 10f64.ln() * 0.01).abs() < 1e-15);
    /// ```
    pub fn sigma_flux(&self, flux: f64, zero_point: f64) -> f64 {
        0.4 * std::f64::consts::LN_10 * flux * self.sigma_mag(flux_to_mag(flux, zero_point))
    }
}

impl ObservingPlan {
    /// Parses a plan; `origin` (the file name) starts every message, with the line for
    /// syntax errors and the site and key for bad values.
    pub fn parse(text: &str, origin: &str) -> Result<ObservingPlan> {
        let mut plan: ObservingPlan = toml::from_str(text).map_err(|e| {
            let at = e.span().map_or(0, |sp| sp.start.min(text.len()));
            let line = text[..at].matches('\n').count() + 1;
            let source = shown(text.lines().nth(line - 1).unwrap_or("").trim());
            let msg = tidy(e.message().lines().next().unwrap_or("invalid plan"));
            Error::input(format!("{origin}:{line}: {msg} (in `{source}`)"))
        })?;
        plan.origin = origin.to_string();
        plan.check()?;
        Ok(plan)
    }

    /// Reads a plan file (see [`ObservingPlan::parse`]) and the ephemerides its sites name.
    pub fn read(path: &Path) -> Result<ObservingPlan> {
        let text = std::fs::read_to_string(path).map_err(|e| Error::io(path, e))?;
        let mut plan = Self::parse(&text, &path.display().to_string())?;
        plan.load_ephemerides(path.parent().unwrap_or(Path::new("")))?;
        Ok(plan)
    }

    /// Reads the ephemeris of every site that names one, relative to `folder`.
    pub fn load_ephemerides(&mut self, folder: &Path) -> Result<()> {
        self.ephemerides = self
            .sites
            .iter()
            .map(|site| {
                site.ephemeris
                    .as_ref()
                    .map(|file| Ephemeris::read(&folder.join(file)))
                    .transpose()
            })
            .collect::<Result<_>>()?;
        Ok(())
    }

    /// Checks every value; the message names the plan's origin, the site and the key.
    pub fn check(&self) -> Result<()> {
        self.check_values().map_err(|e| self.named(e))
    }

    /// A message about this plan, starting with its origin.
    pub(super) fn named(&self, e: Error) -> Error {
        match e {
            Error::Input(m) if !self.origin.is_empty() => {
                Error::input(format!("{}: {m}", self.origin))
            }
            other => other,
        }
    }

    fn check_values(&self) -> Result<()> {
        if !self.time_offset.is_finite() {
            return Err(Error::input(format!(
                "time_offset must be finite, got {}",
                self.time_offset
            )));
        }
        if self.sites.is_empty() {
            return Err(Error::input("no [[site]]: a plan needs at least one site"));
        }
        let mut names = HashSet::new();
        let mut points = 0.0;
        for site in &self.sites {
            site.check()
                .map_err(|e| Error::input(format!("site '{}': {e}", site.name)))?;
            if !names.insert(site.name.as_str()) {
                return Err(Error::input(format!(
                    "site '{}': name used twice (each site writes its own file)",
                    site.name
                )));
            }
            points += site.most_points();
        }
        if points > MAX_POINTS as f64 {
            return Err(Error::input(format!(
                "the sites' seasons and cadences give up to {points:.0} points, more than \
                 {MAX_POINTS}"
            )));
        }
        Ok(())
    }

    /// A ready-made plan: three survey sites over `season` (plan time) that interleave, and a
    /// follow-up site observing only the `followup` windows (none without windows). Each site
    /// has its own source flux `fs` and the blend `fb = blend fs`.
    ///
    /// | site | cadence | night | middle | lost | floor, photon (mag) | scale | outliers | output |
    /// | --- | --- | --- | --- | --- | --- | --- | --- | --- |
    /// | `survey-a` | 20 min | 8 h | 0.10 | 25% | 0.005, 0.010 | 1.2 | 0.5% | mag, fs 5 |
    /// | `survey-b` | 40 min | 7 h | 0.45 | 15% | 0.008, 0.015 | 1.0 | 1% | mag, fs 3 |
    /// | `survey-c` | 60 min | 6 h | 0.75 | 30% | 0.010, 0.012 | 1.5 | 0.7% | mag, fs 8 |
    /// | `followup` | 5 min in windows | 9 h | 0.95 | 10% | 0.004, 0.006 | 1.1 | 0.5% | flux, fs 12 |
    ///
    /// Photon errors are at magnitude 19, zero points 22, time offset 0.
    ///
    /// ```
    /// use causeway::fit::simulate::plan::ObservingPlan;
    /// let plan = ObservingPlan::survey_with_followup((8940.0, 9060.0), &[(9004.0, 9006.0)], 1.0);
    /// plan.check().unwrap();
    /// assert_eq!(plan.sites.len(), 4);
    /// assert_eq!(plan.sites[1].fb, plan.sites[1].fs);
    /// ```
    pub fn survey_with_followup(
        season: (f64, f64),
        followup: &[(f64, f64)],
        blend: f64,
    ) -> ObservingPlan {
        // fs, night hours, night middle, floor, photon, cadence (min), lost, scale, outliers
        let site = |name: &str, v: [f64; 9]| Site {
            name: name.into(),
            output: Measured::Magnitude,
            fs: v[0],
            fb: blend * v[0],
            zero_point: DEFAULT_ZERO_POINT,
            season,
            night_hours: v[1],
            night_middle: v[2],
            interval_minutes: Some(v[5]),
            followup: Vec::new(),
            followup_minutes: followup_minutes(),
            lost_nights: v[6],
            errors: ErrorModel {
                floor: v[3],
                photon: v[4],
                reference_mag: 19.0,
            },
            error_scale: v[7],
            outliers: v[8],
            time_offset: None,
            ephemeris: None,
        };
        let mut sites = vec![
            site(
                "survey-a",
                [5.0, 8.0, 0.1, 0.005, 0.01, 20.0, 0.25, 1.2, 0.005],
            ),
            site(
                "survey-b",
                [3.0, 7.0, 0.45, 0.008, 0.015, 40.0, 0.15, 1.0, 0.01],
            ),
            site(
                "survey-c",
                [8.0, 6.0, 0.75, 0.01, 0.012, 60.0, 0.3, 1.5, 0.007],
            ),
        ];
        if !followup.is_empty() {
            let v = [12.0, 9.0, 0.95, 0.004, 0.006, 5.0, 0.1, 1.1, 0.005];
            sites.push(Site {
                output: Measured::Flux,
                interval_minutes: None,
                followup: followup.to_vec(),
                followup_minutes: v[5],
                ..site("followup", v)
            });
        }
        ObservingPlan {
            origin: "survey_with_followup".into(),
            time_offset: 0.0,
            sites,
            ephemerides: Vec::new(),
        }
    }
}

impl Site {
    /// Checks the values; the message names the key.
    fn check(&self) -> Result<()> {
        let bad = |key: &str, rule: &str, v: f64| {
            Err(Error::input(format!("{key} must be {rule}, got {v}")))
        };
        let ok_name = !self.name.is_empty()
            && !self.name.starts_with('.')
            && self
                .name
                .chars()
                .all(|c| c.is_ascii_alphanumeric() || "-_.".contains(c));
        if !ok_name {
            return Err(Error::input(
                "name must be non-empty letters, digits, '-', '_' or '.', not starting with '.'",
            ));
        }
        let finite = [
            ("fb", self.fb),
            ("zero_point", self.zero_point),
            ("errors.reference_mag", self.errors.reference_mag),
            ("time_offset", self.time_offset.unwrap_or(0.0)),
        ];
        if let Some(&(key, v)) = finite.iter().find(|(_, v)| !v.is_finite()) {
            return bad(key, "finite", v);
        }
        let ranges = [
            ("night_hours", self.night_hours, 0.0, 24.0, "in (0, 24]"),
            (
                "night_middle",
                self.night_middle,
                0.0,
                1.0 - f64::EPSILON,
                "in [0, 1)",
            ),
            (
                "lost_nights",
                self.lost_nights,
                0.0,
                1.0 - f64::EPSILON,
                "in [0, 1)",
            ),
            ("outliers", self.outliers, 0.0, 0.5, "in [0, 0.5]"),
            ("errors.floor", self.errors.floor, 0.0, f64::MAX, ">= 0"),
            ("errors.photon", self.errors.photon, 0.0, f64::MAX, ">= 0"),
        ];
        if let Some(&(key, v, _, _, rule)) = ranges
            .iter()
            .find(|(_, v, lo, hi, _)| !(lo..=hi).contains(&v))
        {
            return bad(key, rule, v);
        }
        let positive = [
            ("fs", self.fs),
            ("fs + fb", self.fs + self.fb),
            ("night_hours", self.night_hours),
            ("interval_minutes", self.interval_minutes.unwrap_or(1.0)),
            ("followup_minutes", self.followup_minutes),
            ("error_scale", self.error_scale),
            (
                "errors.floor + errors.photon",
                self.errors.floor + self.errors.photon,
            ),
        ];
        if let Some(&(key, v)) = positive.iter().find(|(_, v)| !(v.is_finite() && *v > 0.0)) {
            return bad(key, "finite and > 0", v);
        }
        let intervals = std::iter::once(("season", self.season))
            .chain(self.followup.iter().map(|&w| ("followup", w)));
        for (key, (a, b)) in intervals {
            if !(a.is_finite() && b.is_finite() && a < b) {
                return Err(Error::input(format!(
                    "{key} [{a}, {b}] must be finite with start < end"
                )));
            }
        }
        if self.interval_minutes.is_none() && self.followup.is_empty() {
            return Err(Error::input(
                "interval_minutes or followup: the site needs a survey cadence or follow-up \
                 windows",
            ));
        }
        Ok(())
    }

    /// An upper bound on the number of points (for the size check).
    fn most_points(&self) -> f64 {
        let step = self
            .interval_minutes
            .unwrap_or(f64::INFINITY)
            .min(self.followup_minutes);
        let days = self.season.1 - self.season.0;
        days * (self.night_hours / 24.0) * (1440.0 / step) + days + 2.0
    }
}

fn measured<'de, D: Deserializer<'de>>(d: D) -> std::result::Result<Measured, D::Error> {
    match String::deserialize(d)?.as_str() {
        "mag" => Ok(Measured::Magnitude),
        "flux" => Ok(Measured::Flux),
        other => Err(serde::de::Error::custom(format!(
            "output: unknown '{other}' (mag or flux)"
        ))),
    }
}

fn magnitudes() -> Measured {
    Measured::Magnitude
}

fn one() -> f64 {
    1.0
}

fn zero_point() -> f64 {
    DEFAULT_ZERO_POINT
}

fn followup_minutes() -> f64 {
    5.0
}
