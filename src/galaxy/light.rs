//! Light of a main-sequence lens: absolute magnitudes against mass, extinction to the lens, and
//! the likelihood of what follow-up imaging measured.
//!
//! - K band, 0.075 to 0.70 M_sun: the fifth-order relation of Mann et al. (2019, ApJ 871, 63),
//!   `log10(M / M_sun) = sum a_i (M_K - 7.5)^i`, valid for `4 < M_K < 11`, inverted here by
//!   bisection (coefficients from memory; `tests/integration/galaxy.rs` checks them against the
//!   independent relation of Delfosse et al. 2000, A&A 364, 217).
//! - V, I (all masses) and K above 0.70 M_sun: the dwarf sequence of Pecaut & Mamajek (2013,
//!   ApJS 208, 9; the table's `M_V`, `V - I_C`, `V - K_s` against mass, spectral types A0 to M8,
//!   0.08 to 2.3 M_sun; values from memory), interpolated linearly in `log10 M`; above 2.3 M_sun
//!   the last segment is extended (outside the table).
//! - Brown dwarfs and remnants are taken as dark: far fainter than any main-sequence host.
//! - Extinction to the lens: a dust layer of scale height `h_dust = 0.10 kpc` (common practice,
//!   from memory), `A_L = A_S (1 - exp(-D_L |sin b| / h)) / (1 - exp(-D_S |sin b| / h))` with `A_S`
//!   the extinction to the source that the user gives, in the same band.

use crate::error::{Error, Result};

/// Photometric bands of the mass-luminosity relation.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Band {
    /// Johnson V.
    V,
    /// Cousins I.
    I,
    /// 2MASS K_s.
    K,
}

impl Band {
    /// Parses `V`, `I` or `K` (any case).
    ///
    /// ```
    /// use causeway::galaxy::Band;
    /// assert_eq!(Band::parse("k").unwrap(), Band::K);
    /// assert!(Band::parse("H").is_err());
    /// ```
    pub fn parse(s: &str) -> Result<Band> {
        match s.trim().to_ascii_uppercase().as_str() {
            "V" => Ok(Band::V),
            "I" => Ok(Band::I),
            "K" | "KS" => Ok(Band::K),
            _ => Err(Error::input(format!(
                "band: expected V, I or K, got '{}'",
                crate::error::shown(s)
            ))),
        }
    }

    /// The band's name.
    pub fn name(self) -> &'static str {
        match self {
            Band::V => "V",
            Band::I => "I",
            Band::K => "K",
        }
    }
}

/// Mann et al. (2019) fifth-order coefficients `a_0..a_5` of `log10 M` in `M_K - 7.5`.
pub const MANN_2019_K: [f64; 6] = [-0.642, -0.208, -8.43e-4, 7.87e-3, 1.42e-4, -2.13e-4];
/// Validity of the Mann et al. (2019) relation in `M_K`.
pub const MANN_2019_RANGE: (f64, f64) = (4.0, 11.0);

/// Mass (M_sun) from the absolute K magnitude by Mann et al. (2019).
///
/// ```
/// // At the zero point M_K = 7.5 the mass is 10^a_0.
/// let m = causeway::galaxy::light::mann_mass(7.5);
/// assert!((m - 10f64.powf(-0.642)).abs() < 1e-12);
/// ```
pub fn mann_mass(mk: f64) -> f64 {
    let x = mk - 7.5;
    10f64.powf(MANN_2019_K.iter().rev().fold(0.0, |acc, a| acc * x + a))
}

/// Absolute K magnitude of a star of mass `m` by inverting Mann et al. (2019) (`None` outside
/// the relation's range).
pub fn mann_abs_k(m: f64) -> Option<f64> {
    let (lo, hi) = MANN_2019_RANGE;
    if !(m <= mann_mass(lo) && m >= mann_mass(hi)) {
        return None;
    }
    let (mut a, mut b) = (lo, hi); // mass falls from a to b
    for _ in 0..60 {
        let mid = 0.5 * (a + b);
        if mann_mass(mid) > m {
            a = mid;
        } else {
            b = mid;
        }
    }
    Some(0.5 * (a + b))
}

/// Dwarf sequence (Pecaut & Mamajek 2013; from memory): mass (M_sun), `M_V`, `V - I_C`,
/// `V - K_s`, spectral types A0, A5, F0, F5, G0, G2, K0, K2, K5, K7, M0, M1, M2, M3, M4, M5,
/// M6, M7, M8.
pub const DWARF_SEQUENCE: [[f64; 4]; 19] = [
    [2.30, 1.11, 0.00, 0.00],
    [1.86, 1.94, 0.16, 0.38],
    [1.59, 2.51, 0.35, 0.72],
    [1.33, 3.40, 0.50, 1.08],
    [1.08, 4.38, 0.66, 1.44],
    [1.00, 4.83, 0.70, 1.56],
    [0.87, 5.90, 0.85, 1.95],
    [0.80, 6.30, 0.99, 2.25],
    [0.70, 7.30, 1.25, 2.85],
    [0.63, 8.10, 1.53, 3.35],
    [0.57, 8.90, 1.84, 3.65],
    [0.50, 9.60, 2.06, 3.87],
    [0.44, 10.30, 2.24, 4.11],
    [0.37, 11.20, 2.54, 4.65],
    [0.23, 12.80, 2.95, 5.20],
    [0.16, 14.30, 3.50, 6.00],
    [0.10, 16.60, 4.00, 6.90],
    [0.09, 18.40, 4.40, 7.60],
    [0.08, 19.20, 4.70, 8.00],
];

/// Absolute magnitude from the dwarf sequence in `band`, interpolated in `log10 M`.
pub fn sequence_abs_mag(m: f64, band: Band) -> f64 {
    let mag = |r: &[f64; 4]| match band {
        Band::V => r[1],
        Band::I => r[1] - r[2],
        Band::K => r[1] - r[3],
    };
    let t = &DWARF_SEQUENCE;
    // rows run from high to low mass; pick the bracketing pair (extended at both ends)
    let i = t
        .windows(2)
        .position(|w| m >= w[1][0])
        .unwrap_or(t.len() - 2);
    let (a, b) = (&t[i], &t[i + 1]);
    let f = (m.log10() - a[0].log10()) / (b[0].log10() - a[0].log10());
    mag(a) + f * (mag(b) - mag(a))
}

/// Lowest main-sequence mass with a predicted magnitude (M_sun).
pub const LOWEST_MS_MASS: f64 = 0.08;

/// Absolute magnitude of a main-sequence star of mass `m` (M_sun) in `band` (module docs);
/// `None` below [`LOWEST_MS_MASS`] (dark).
///
/// ```
/// use causeway::galaxy::{light::absolute_magnitude, Band};
/// let k_sun = absolute_magnitude(1.0, Band::K).unwrap();
/// assert!((k_sun - 3.27).abs() < 0.1); // the Sun: M_V 4.83, V - K 1.56
/// assert!(absolute_magnitude(0.3, Band::K).unwrap() > k_sun);
/// ```
pub fn absolute_magnitude(m: f64, band: Band) -> Option<f64> {
    if m.is_nan() || m < LOWEST_MS_MASS {
        return None;
    }
    if band == Band::K && m <= 0.70 {
        return mann_abs_k(m);
    }
    Some(sequence_abs_mag(m, band))
}

/// Scale height of the dust layer (kpc).
pub const DUST_HEIGHT_KPC: f64 = 0.10;

/// Extinction to a lens at `dl` (kpc) given `a_source` to a source at `ds` (kpc), latitude
/// `b_deg`, for a dust layer of scale height `h` (kpc).
///
/// ```
/// use causeway::galaxy::light::{lens_extinction, DUST_HEIGHT_KPC};
/// // In the plane the dust is uniform along the line of sight: A grows with distance.
/// assert!((lens_extinction(1.0, 4.0, 8.0, 0.0, DUST_HEIGHT_KPC) - 0.5).abs() < 1e-12);
/// // Above the layer, a lens at half the distance is behind nearly all the dust.
/// assert!(lens_extinction(1.0, 4.0, 8.0, -5.0, DUST_HEIGHT_KPC) > 0.95);
/// ```
pub fn lens_extinction(a_source: f64, dl: f64, ds: f64, b_deg: f64, h: f64) -> f64 {
    let k = b_deg.to_radians().sin().abs() / h;
    if k * ds < 1e-9 {
        return a_source * dl / ds;
    }
    a_source * (-k * dl).exp_m1() / (-k * ds).exp_m1()
}

/// What follow-up imaging says of the light at the source's position beyond the source's own.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Imaging {
    /// A measured excess of apparent magnitude `mag` with error `err` (mag).
    Excess {
        /// Apparent magnitude of the excess flux.
        mag: f64,
        /// Its error (mag).
        err: f64,
    },
    /// No excess: any lens is fainter than apparent magnitude `mag`.
    Fainter {
        /// The limiting magnitude.
        mag: f64,
    },
}

/// The lens-light constraint: the band, the extinction to the source in it, the imaging.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LensLight {
    /// Band of the imaging.
    pub band: Band,
    /// Extinction to the source in that band (mag).
    pub extinction: f64,
    /// What the imaging measured.
    pub imaging: Imaging,
    /// Scale height of the dust (kpc).
    pub dust_height: f64,
}

impl LensLight {
    /// A constraint with the default dust layer; checks the values.
    ///
    /// ```
    /// use causeway::galaxy::{Band, Imaging, LensLight};
    /// let c = LensLight::new(Band::K, 0.2, Imaging::Fainter { mag: 20.0 }).unwrap();
    /// assert_eq!(c.likelihood(Some(19.0)), 0.0); // a lens that bright would have been seen
    /// assert_eq!(c.likelihood(None), 1.0); // a dark lens is allowed
    /// ```
    pub fn new(band: Band, extinction: f64, imaging: Imaging) -> Result<LensLight> {
        if !(extinction.is_finite() && extinction >= 0.0) {
            return Err(Error::input(format!(
                "extinction to the source: must be finite and >= 0, got {extinction}"
            )));
        }
        let ok = match imaging {
            Imaging::Excess { mag, err } => mag.is_finite() && err.is_finite() && err > 0.0,
            Imaging::Fainter { mag } => mag.is_finite(),
        };
        if !ok {
            return Err(Error::input(
                "imaging: need a finite magnitude and an error > 0",
            ));
        }
        Ok(LensLight {
            band,
            extinction,
            imaging,
            dust_height: DUST_HEIGHT_KPC,
        })
    }

    /// Apparent magnitude of a main-sequence host of mass `m` at `dl` (source at `ds`, both
    /// kpc, latitude `b_deg`); `None` when the host is dark.
    pub fn apparent(&self, m: f64, dl: f64, ds: f64, b_deg: f64) -> Option<f64> {
        absolute_magnitude(m, self.band).map(|abs| {
            abs + 5.0 * (100.0 * dl).log10()
                + lens_extinction(self.extinction, dl, ds, b_deg, self.dust_height)
        })
    }

    /// Likelihood of a lens of apparent magnitude `mag` (`None`: dark) given the imaging: a
    /// Gaussian in flux for an excess, a step for a limit.
    pub fn likelihood(&self, mag: Option<f64>) -> f64 {
        let flux = |m: f64| 10f64.powf(-0.4 * m);
        match self.imaging {
            Imaging::Excess { mag: obs, err } => {
                let f_obs = flux(obs);
                let sigma = 0.4 * std::f64::consts::LN_10 * f_obs * err;
                let f = mag.map_or(0.0, flux);
                (-0.5 * ((f - f_obs) / sigma).powi(2)).exp()
            }
            Imaging::Fainter { mag: limit } => f64::from(u8::from(mag.is_none_or(|m| m > limit))),
        }
    }

    /// The host mass (M_sun) whose predicted magnitude equals the imaging's (the limit, or the
    /// measured excess) at lens distance `dl`; `None` if no main-sequence mass reaches it.
    ///
    /// ```
    /// use causeway::galaxy::{Band, Imaging, LensLight};
    /// let c = LensLight::new(Band::K, 0.3, Imaging::Fainter { mag: 21.0 }).unwrap();
    /// let m = c.boundary_mass(6.0, 8.0, -3.0).unwrap();
    /// assert!((c.apparent(m, 6.0, 8.0, -3.0).unwrap() - 21.0).abs() < 1e-6);
    /// ```
    pub fn boundary_mass(&self, dl: f64, ds: f64, b_deg: f64) -> Option<f64> {
        let target = match self.imaging {
            Imaging::Excess { mag, .. } | Imaging::Fainter { mag } => mag,
        };
        let (mut lo, mut hi) = (LOWEST_MS_MASS, DWARF_SEQUENCE[0][0]);
        let f = |m: f64| self.apparent(m, dl, ds, b_deg).unwrap_or(f64::INFINITY) - target;
        if f(lo) < 0.0 || f(hi) > 0.0 {
            return None;
        }
        for _ in 0..60 {
            let mid = (lo * hi).sqrt();
            if f(mid) > 0.0 {
                lo = mid;
            } else {
                hi = mid;
            }
        }
        Some((lo * hi).sqrt())
    }
}
