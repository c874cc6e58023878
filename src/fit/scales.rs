//! Physical scales of a fitted event, when the user gives the source's angular radius and the
//! distances (or the relative parallax).
//!
//! - Einstein angle `theta_E = theta_* / rho`, relative proper motion `mu_rel = theta_E / tE`;
//! - with the relative parallax `pi_rel = au (1/D_L - 1/D_S)` (mas when distances are in kpc),
//!   the total lens mass `M = theta_E^2 / (kappa pi_rel)` (Gould 2000, ApJ 542, 785), the host
//!   `M / (1 + q)` and the companion `q M / (1 + q)`;
//! - with `D_L`, the projected separation `s theta_E D_L` (au: 1 mas at 1 kpc is 1 au).
//!
//! `kappa = 4 G M_sun / (c^2 au)` is computed from the IAU 2015 nominal solar mass parameter
//! (Resolution B3), the exact speed of light (SI) and the exact astronomical unit (IAU 2012
//! Resolution B2): about 8.144 mas per solar mass. Jupiter and Earth masses are the IAU 2015
//! nominal `GM` values divided by the solar one. A year is 365.25 days (Julian).

use crate::error::{Error, Result};
use crate::table::fmt_f64;

/// Nominal solar mass parameter `G M_sun` (m^3 s^-2), IAU 2015 Resolution B3.
pub const GM_SUN: f64 = 1.327_124_4e20;
/// Nominal Jovian mass parameter `G M_Jup` (m^3 s^-2), IAU 2015 Resolution B3.
pub const GM_JUPITER: f64 = 1.266_865_3e17;
/// Nominal terrestrial mass parameter `G M_Earth` (m^3 s^-2), IAU 2015 Resolution B3.
pub const GM_EARTH: f64 = 3.986_004e14;
/// Speed of light (m/s), exact in SI.
pub const SPEED_OF_LIGHT: f64 = 299_792_458.0;
/// Astronomical unit (m), exact (IAU 2012 Resolution B2).
pub const AU: f64 = 149_597_870_700.0;
/// Days per Julian year.
pub const DAYS_PER_YEAR: f64 = 365.25;

/// Milliarcseconds per radian.
const MAS_PER_RADIAN: f64 = 180.0 / std::f64::consts::PI * 3600.0 * 1000.0;

/// `kappa = 4 G M_sun / (c^2 au)` in mas per solar mass.
///
/// ```
/// let k = causeway::fit::scales::kappa();
/// assert!((k - 8.144).abs() < 1e-3); // Gould 2000
/// ```
pub fn kappa() -> f64 {
    4.0 * GM_SUN / (SPEED_OF_LIGHT * SPEED_OF_LIGHT * AU) * MAS_PER_RADIAN
}

/// What the user knows about the source and the distances (all optional).
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct PhysicalInput {
    /// Angular source radius (microarcseconds).
    pub theta_star_uas: Option<f64>,
    /// Lens distance (kpc).
    pub dl_kpc: Option<f64>,
    /// Source distance (kpc).
    pub ds_kpc: Option<f64>,
    /// Relative parallax (mas); instead of the distances.
    pub pi_rel_mas: Option<f64>,
}

impl PhysicalInput {
    /// Checks the values (positive and finite, `D_L < D_S`, distances and parallax not both,
    /// `D_L` only with `D_S`; `D_S` alone serves the parallax models' `D_L`); errors name the
    /// parameter.
    ///
    /// ```
    /// use causeway::fit::scales::PhysicalInput;
    /// let ok = PhysicalInput { dl_kpc: Some(4.0), ds_kpc: Some(8.0), ..Default::default() };
    /// assert!(ok.check().is_ok());
    /// let bad = PhysicalInput { dl_kpc: Some(9.0), ds_kpc: Some(8.0), ..Default::default() };
    /// assert!(bad.check().unwrap_err().to_string().starts_with("dl:"));
    /// ```
    pub fn check(&self) -> Result<()> {
        for (name, v) in [
            ("theta_star", self.theta_star_uas),
            ("dl", self.dl_kpc),
            ("ds", self.ds_kpc),
            ("pi_rel", self.pi_rel_mas),
        ] {
            if let Some(v) = v {
                if !(v.is_finite() && v > 0.0) {
                    return Err(Error::input(format!(
                        "{name}: must be finite and > 0, got {v}"
                    )));
                }
            }
        }
        match (self.dl_kpc, self.ds_kpc, self.pi_rel_mas) {
            (Some(_), _, Some(_)) | (_, Some(_), Some(_)) => Err(Error::input(
                "pi_rel: give either the distances (dl, ds) or the relative parallax",
            )),
            (Some(_), None, None) => Err(Error::input("dl: needs ds as well")),
            (Some(dl), Some(ds), None) if dl >= ds => Err(Error::input(format!(
                "dl: the lens ({dl} kpc) must be nearer than the source (ds = {ds} kpc)"
            ))),
            _ => Ok(()),
        }
    }

    /// The relative parallax in mas: given, or `1/D_L - 1/D_S` from the distances in kpc.
    pub fn pi_rel(&self) -> Option<f64> {
        match (self.pi_rel_mas, self.dl_kpc, self.ds_kpc) {
            (Some(p), _, _) => Some(p),
            (None, Some(dl), Some(ds)) => Some(1.0 / dl - 1.0 / ds),
            _ => None,
        }
    }
}

/// Physical scales of one model; `None` where the input does not determine them.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct Scales {
    /// Einstein angle (mas).
    pub theta_e_mas: Option<f64>,
    /// Relative lens-source proper motion (mas/yr).
    pub mu_rel_mas_yr: Option<f64>,
    /// Relative parallax (mas).
    pub pi_rel_mas: Option<f64>,
    /// Total lens mass (solar masses).
    pub total_mass_msun: Option<f64>,
    /// Host (m1) mass (solar masses).
    pub host_mass_msun: Option<f64>,
    /// Companion (m2) mass (solar masses).
    pub companion_mass_msun: Option<f64>,
    /// Companion mass (Jupiter masses).
    pub companion_mass_mjup: Option<f64>,
    /// Companion mass (Earth masses).
    pub companion_mass_mearth: Option<f64>,
    /// Projected separation `s theta_E D_L` (au).
    pub separation_au: Option<f64>,
}

impl Scales {
    /// Names of the fields, in the order of [`Scales::values`].
    pub const NAMES: [&'static str; 9] = [
        "theta_E_mas",
        "mu_rel_mas_per_yr",
        "pi_rel_mas",
        "mass_total_msun",
        "mass_host_msun",
        "mass_companion_msun",
        "mass_companion_mjup",
        "mass_companion_mearth",
        "separation_au",
    ];

    /// The values, in the order of [`Scales::NAMES`].
    pub fn values(&self) -> [Option<f64>; 9] {
        [
            self.theta_e_mas,
            self.mu_rel_mas_yr,
            self.pi_rel_mas,
            self.total_mass_msun,
            self.host_mass_msun,
            self.companion_mass_msun,
            self.companion_mass_mjup,
            self.companion_mass_mearth,
            self.separation_au,
        ]
    }

    /// CSV with header `name,value`, one row per scale that is known.
    ///
    /// ```
    /// use causeway::fit::scales::{scales, PhysicalInput};
    /// let input = PhysicalInput { theta_star_uas: Some(0.6), ..Default::default() };
    /// let csv = scales(&input, 1e-3, 20.0, 1.1, 1e-3).unwrap().to_csv();
    /// assert!(csv.starts_with("name,value\ntheta_E_mas,0.6"));
    /// assert_eq!(csv.lines().count(), 3); // theta_E and mu_rel only
    /// ```
    pub fn to_csv(&self) -> String {
        let mut out = String::from("name,value\n");
        for (name, v) in Self::NAMES.iter().zip(self.values()) {
            if let Some(v) = v {
                out += &format!("{name},{}\n", fmt_f64(v));
            }
        }
        out
    }
}

/// Physical scales of a model with source radius `rho`, timescale `te` (days), separation `s`
/// and mass ratio `q`, from the checked `input`.
///
/// `theta_E` needs `theta_*` and `rho > 0` (a point-source model leaves every scale unknown);
/// masses need `pi_rel` as well, the separation `D_L`.
///
/// ```
/// use causeway::fit::scales::{kappa, scales, PhysicalInput};
/// let input = PhysicalInput { theta_star_uas: Some(0.6), dl_kpc: Some(4.0), ds_kpc: Some(8.0),
///     ..Default::default() };
/// let sc = scales(&input, 1e-3, 25.0, 1.2, 2e-3).unwrap();
/// let theta_e = 0.6; // mas
/// let mass = theta_e * theta_e / (kappa() * (0.25 - 0.125));
/// assert!((sc.total_mass_msun.unwrap() - mass).abs() < 1e-12 * mass);
/// assert!((sc.separation_au.unwrap() - 1.2 * theta_e * 4.0).abs() < 1e-12);
/// ```
pub fn scales(input: &PhysicalInput, rho: f64, te: f64, s: f64, q: f64) -> Result<Scales> {
    input.check()?;
    for (name, v) in [("rho", rho), ("tE", te), ("s", s), ("q", q)] {
        if !v.is_finite() || v < 0.0 || (v == 0.0 && name != "rho") {
            return Err(Error::input(format!(
                "physical scales: {name} = {v} is not a valid model parameter"
            )));
        }
    }
    let pi_rel = input.pi_rel();
    let theta_e = input
        .theta_star_uas
        .filter(|_| rho > 0.0)
        .map(|t| t * 1e-3 / rho);
    let mass = theta_e.zip(pi_rel).map(|(th, p)| th * th / (kappa() * p));
    let companion = mass.map(|m| q * m / (1.0 + q));
    Ok(Scales {
        theta_e_mas: theta_e,
        mu_rel_mas_yr: theta_e.map(|th| th / te * DAYS_PER_YEAR),
        pi_rel_mas: pi_rel,
        total_mass_msun: mass,
        host_mass_msun: mass.map(|m| m / (1.0 + q)),
        companion_mass_msun: companion,
        companion_mass_mjup: companion.map(|m| m * GM_SUN / GM_JUPITER),
        companion_mass_mearth: companion.map(|m| m * GM_SUN / GM_EARTH),
        separation_au: theta_e.zip(input.dl_kpc).map(|(th, dl)| s * th * dl),
    })
}

/// What parallax and the finite source measure together: the lens without a Galactic model
/// (Gould 2000, ApJ 542, 785; Gould 2004, ApJ 606, 319).
///
/// With `theta_E` and `pi_E = |pi_E|`: the total mass `M = theta_E / (kappa pi_E)`, the relative
/// parallax `pi_rel = theta_E pi_E`, with the source distance `D_L = au / (pi_rel + pi_S)` and
/// the projected separation `s theta_E D_L`; the geocentric proper motion
/// `mu_geo = theta_E / tE` along `pi_E`, the heliocentric one
/// `mu_hel = mu_geo + v_E pi_rel / au` (`v_E`: the Earth's velocity at `t0,par` projected on the
/// sky) and `tE,hel = theta_E / |mu_hel|`; with orbital motion and `D_L`, the ratio of
/// projected kinetic to potential energy `r^3 gamma^2 / (2 G M)` (`G M_sun` the IAU nominal
/// value, about `4 pi^2 au^3/yr^2`), `r = s theta_E D_L`, `gamma^2 = (ds/dt / s)^2 +
/// (dalpha/dt)^2` (Dong et al. 2009, ApJ 695, 970); a bound orbit needs it below 1.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ParallaxMeasure {
    /// Einstein angle (mas).
    pub theta_e_mas: f64,
    /// Geocentric Einstein timescale (days).
    pub te_days: f64,
    /// `(pi_E,N, pi_E,E)`.
    pub pi_e: (f64, f64),
    /// Separation (Einstein radii).
    pub s: f64,
    /// Mass ratio.
    pub q: f64,
    /// Source distance (kpc), if known.
    pub ds_kpc: Option<f64>,
    /// The Earth's velocity at `t0,par` projected on the sky, (north, east), au per year.
    pub earth_velocity: (f64, f64),
    /// `(ds/dt per year, dalpha/dt radians per year)`, with orbital motion.
    pub rates: Option<(f64, f64)>,
}

/// What [`ParallaxMeasure::lens`] gives, in the order of [`LENS_NAMES`] (NaN where unknown).
pub type LensValues = [f64; 11];

/// Names of [`LensValues`].
pub const LENS_NAMES: [&str; 11] = [
    "lens_mass_msun",
    "lens_host_msun",
    "lens_companion_mjup",
    "lens_pi_rel_mas",
    "lens_dl_kpc",
    "lens_separation_au",
    "mu_hel_n_mas_per_yr",
    "mu_hel_e_mas_per_yr",
    "tE_hel_days",
    "mu_geo_mas_per_yr",
    "energy_ratio",
];

impl ParallaxMeasure {
    /// The lens: the values of [`LENS_NAMES`].
    ///
    /// ```
    /// use causeway::fit::scales::{kappa, ParallaxMeasure};
    /// let m = ParallaxMeasure { theta_e_mas: 0.5, te_days: 40.0, pi_e: (0.3, 0.4), s: 1.1,
    ///     q: 1e-3, ds_kpc: Some(8.0), earth_velocity: (0.0, 0.0), rates: None };
    /// let v = m.lens();
    /// assert!((v[0] - 0.5 / (kappa() * 0.5)).abs() < 1e-12); // M = theta_E / (kappa pi_E)
    /// assert!((v[4] - 1.0 / (0.25 + 0.125)).abs() < 1e-12); // D_L = au / (pi_rel + pi_S)
    /// ```
    pub fn lens(&self) -> LensValues {
        let pi = self.pi_e.0.hypot(self.pi_e.1);
        let th = self.theta_e_mas;
        let mass = th / (kappa() * pi);
        let pi_rel = th * pi;
        let dl = self.ds_kpc.map_or(f64::NAN, |ds| 1.0 / (pi_rel + 1.0 / ds));
        let separation = self.s * th * dl;
        let mu_geo = th / self.te_days * DAYS_PER_YEAR;
        let (un, ue) = (self.pi_e.0 / pi, self.pi_e.1 / pi);
        let mu_n = mu_geo * un + self.earth_velocity.0 * pi_rel;
        let mu_e = mu_geo * ue + self.earth_velocity.1 * pi_rel;
        let te_hel = th / mu_n.hypot(mu_e) * DAYS_PER_YEAR;
        let energy = self.rates.map_or(f64::NAN, |(ds, da)| {
            let gamma2 = (ds / self.s).powi(2) + da * da;
            // G M_sun in au^3 per Julian year^2 (about 4 pi^2).
            let gm = GM_SUN * (DAYS_PER_YEAR * 86_400.0).powi(2) / AU.powi(3);
            separation.powi(3) * gamma2 / (2.0 * gm * mass)
        });
        let companion = self.q * mass / (1.0 + self.q);
        [
            mass,
            mass / (1.0 + self.q),
            companion * GM_SUN / GM_JUPITER,
            pi_rel,
            dl,
            separation,
            mu_n,
            mu_e,
            te_hel,
            mu_geo,
            energy,
        ]
    }

    /// [`ParallaxMeasure::lens`] with first-order uncertainties from the covariance `cov` of
    /// `(theta_E, tE, pi_E,N, pi_E,E, s, q[, ds/dt, dalpha/dt])` (central differences of
    /// steps a thousandth of each standard deviation).
    pub fn lens_with_errors(&self, cov: &[Vec<f64>]) -> (LensValues, LensValues) {
        let x = self.vector();
        let n = cov.len().min(x.len());
        let value = self.lens();
        let mut grads = vec![[0.0; 11]; n];
        for (i, g) in grads.iter_mut().enumerate() {
            let h = 1e-3 * cov[i][i].sqrt();
            if !(h.is_finite() && h > 0.0) {
                // Exactly known: no contribution; unknown: every value unknown.
                *g = [if h == 0.0 { 0.0 } else { f64::NAN }; 11];
                continue;
            }
            let at = |d: f64| {
                let mut p = x.clone();
                p[i] += d;
                self.with_vector(&p).lens()
            };
            let (up, down) = (at(h), at(-h));
            for k in 0..11 {
                g[k] = (up[k] - down[k]) / (2.0 * h);
            }
        }
        let mut sigma = [0.0; 11];
        for (k, sk) in sigma.iter_mut().enumerate() {
            let mut v = 0.0;
            for i in 0..n {
                for j in 0..n {
                    let (gi, gj) = (grads[i][k], grads[j][k]);
                    // A parameter that does not move this value adds nothing, known or not.
                    if gi != 0.0 && gj != 0.0 {
                        v += gi * cov[i][j] * gj;
                    }
                }
            }
            *sk = if value[k].is_finite() {
                v.sqrt()
            } else {
                f64::NAN
            };
        }
        (value, sigma)
    }

    fn vector(&self) -> Vec<f64> {
        let mut v = vec![
            self.theta_e_mas,
            self.te_days,
            self.pi_e.0,
            self.pi_e.1,
            self.s,
            self.q,
        ];
        if let Some((a, b)) = self.rates {
            v.extend([a, b]);
        }
        v
    }

    fn with_vector(&self, p: &[f64]) -> ParallaxMeasure {
        ParallaxMeasure {
            theta_e_mas: p[0],
            te_days: p[1],
            pi_e: (p[2], p[3]),
            s: p[4],
            q: p[5],
            rates: self.rates.map(|_| (p[6], p[7])),
            ..*self
        }
    }
}
