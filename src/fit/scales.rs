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
    /// both distances or neither); errors name the option.
    ///
    /// ```
    /// use causeway::fit::scales::PhysicalInput;
    /// let ok = PhysicalInput { dl_kpc: Some(4.0), ds_kpc: Some(8.0), ..Default::default() };
    /// assert!(ok.check().is_ok());
    /// let bad = PhysicalInput { dl_kpc: Some(9.0), ds_kpc: Some(8.0), ..Default::default() };
    /// assert!(bad.check().unwrap_err().to_string().contains("--dl"));
    /// ```
    pub fn check(&self) -> Result<()> {
        for (name, v) in [
            ("--theta-star", self.theta_star_uas),
            ("--dl", self.dl_kpc),
            ("--ds", self.ds_kpc),
            ("--pi-rel", self.pi_rel_mas),
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
                "--pi-rel: give either the distances (--dl, --ds) or the relative parallax",
            )),
            (Some(_), None, None) => Err(Error::input("--dl: needs --ds as well")),
            (None, Some(_), None) => Err(Error::input("--ds: needs --dl as well")),
            (Some(dl), Some(ds), None) if dl >= ds => Err(Error::input(format!(
                "--dl: the lens ({dl} kpc) must be nearer than the source (--ds {ds} kpc)"
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
