//! The present-day mass function of a population: stars born with the Kroupa (2001, MNRAS 322,
//! 231) initial mass function, `dN/dm ~ m^-0.3` (0.01 to 0.08 M_sun, brown dwarfs),
//! `m^-1.3` (0.08 to 0.5), `m^-2.3` (0.5 to 120), continuous at the breaks; those whose
//! main-sequence lifetime `t_MS = 10 Gyr (m / M_sun)^-2.5` (common practice) has ended are
//! remnants:
//!
//! - white dwarfs from initial masses up to 8 M_sun, of final mass `0.109 m + 0.394`
//!   (Kalirai et al. 2008, ApJ 676, 594);
//! - neutron stars from 8 to 40 M_sun, and black holes above, as in Gould (2000, ApJ 535, 928);
//!   neutron-star masses Gaussian `1.35 +- 0.04` M_sun (Thorsett & Chakrabarty 1999, ApJ 512,
//!   288), black-hole masses Gaussian `5 +- 1` M_sun (Gould 2000; from memory).
//!
//! The bulge formed in one burst 10 Gyr ago (turn-off 1 M_sun); the disk formed stars at a
//! constant rate for 10 Gyr, so a fraction `min(1, t_MS / 10 Gyr)` of each mass is still on the
//! main sequence. Every mass function is number-weighted and normalised to one star.

use super::model::Population;
use rand::Rng;
use rand_distr::{Distribution, StandardNormal};

/// The kind of object a lens is.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum LensClass {
    /// A main-sequence star.
    MainSequence,
    /// A brown dwarf (below the hydrogen-burning limit, 0.08 M_sun).
    BrownDwarf,
    /// A white dwarf.
    WhiteDwarf,
    /// A neutron star.
    NeutronStar,
    /// A black hole.
    BlackHole,
}

impl LensClass {
    /// Every class, in the order of probability arrays.
    pub const ALL: [LensClass; 5] = [
        LensClass::MainSequence,
        LensClass::BrownDwarf,
        LensClass::WhiteDwarf,
        LensClass::NeutronStar,
        LensClass::BlackHole,
    ];

    /// Short name (CSV columns, summaries).
    pub fn name(self) -> &'static str {
        match self {
            LensClass::MainSequence => "ms",
            LensClass::BrownDwarf => "bd",
            LensClass::WhiteDwarf => "wd",
            LensClass::NeutronStar => "ns",
            LensClass::BlackHole => "bh",
        }
    }

    /// Whether the class shines by the main-sequence mass-luminosity relation (only main
    /// sequence stars do; the others are taken as dark).
    pub fn luminous(self) -> bool {
        self == LensClass::MainSequence
    }
}

/// Breaks of the initial mass function (M_sun): lower end, brown-dwarf limit, 0.5, upper end.
pub const IMF_BREAKS: [f64; 4] = [0.01, 0.08, 0.5, 120.0];
/// Kroupa (2001) slopes `alpha` (`dN/dm ~ m^-alpha`) between the breaks.
pub const IMF_SLOPES: [f64; 3] = [0.3, 1.3, 2.3];
/// Initial mass above which stars leave neutron stars (M_sun).
pub const NS_PROGENITOR: f64 = 8.0;
/// Initial mass above which stars leave black holes (M_sun).
pub const BH_PROGENITOR: f64 = 40.0;
/// Neutron-star mass mean and spread (M_sun).
pub const NS_MASS: (f64, f64) = (1.35, 0.04);
/// Black-hole mass mean and spread (M_sun).
pub const BH_MASS: (f64, f64) = (5.0, 1.0);
/// Age of both populations (Gyr).
pub const AGE_GYR: f64 = 10.0;

/// White-dwarf mass from the initial mass (Kalirai et al. 2008).
///
/// ```
/// // a 2 M_sun star leaves a 0.61 M_sun white dwarf
/// assert!((causeway::galaxy::mass::white_dwarf_mass(2.0) - 0.612).abs() < 1e-12);
/// ```
pub fn white_dwarf_mass(initial: f64) -> f64 {
    0.109 * initial + 0.394
}

/// Main-sequence lifetime (Gyr) of a star of mass `m` (M_sun).
pub fn lifetime_gyr(m: f64) -> f64 {
    10.0 * m.powf(-2.5)
}

fn gauss(x: f64, (mu, sigma): (f64, f64)) -> f64 {
    (-0.5 * ((x - mu) / sigma).powi(2)).exp() / (sigma * (2.0 * std::f64::consts::PI).sqrt())
}

/// The present-day mass function of one population.
#[derive(Debug, Clone)]
pub struct MassFunction {
    population: Population,
    /// Segment constants `c_k` with `dN/dm = c_k m^-alpha_k`, normalised to one star.
    coef: [f64; 3],
    /// Cumulative number at the start of each segment, and 1 at the end.
    cumulative: [f64; 4],
    /// Fractions of neutron stars and black holes among all stars.
    ns_fraction: f64,
    bh_fraction: f64,
    mean_mass: f64,
}

fn segment_integral(c: f64, alpha: f64, a: f64, b: f64, power: f64) -> f64 {
    // integral of c m^(power - alpha) from a to b
    let e = power - alpha + 1.0;
    if e.abs() < 1e-12 {
        c * (b / a).ln()
    } else {
        c * (b.powf(e) - a.powf(e)) / e
    }
}

impl MassFunction {
    /// The mass function of `population` (module docs).
    ///
    /// ```
    /// use causeway::galaxy::{MassFunction, Population};
    /// let bulge = MassFunction::new(Population::Bulge);
    /// // No main-sequence star above the 1 M_sun turn-off; remnants instead.
    /// assert_eq!(bulge.density(1.2)[0], 0.0);
    /// assert!(bulge.density(1.2)[3] > 0.0);
    /// assert!(bulge.mean_mass() > 0.1 && bulge.mean_mass() < 0.6);
    /// ```
    pub fn new(population: Population) -> MassFunction {
        let mut raw = [1.0; 3];
        for k in 1..3 {
            raw[k] = raw[k - 1] * IMF_BREAKS[k].powf(IMF_SLOPES[k] - IMF_SLOPES[k - 1]);
        }
        let total: f64 = (0..3)
            .map(|k| segment_integral(raw[k], IMF_SLOPES[k], IMF_BREAKS[k], IMF_BREAKS[k + 1], 0.0))
            .sum();
        let coef = raw.map(|c| c / total);
        let mut cumulative = [0.0; 4];
        for k in 0..3 {
            cumulative[k + 1] = cumulative[k]
                + segment_integral(
                    coef[k],
                    IMF_SLOPES[k],
                    IMF_BREAKS[k],
                    IMF_BREAKS[k + 1],
                    0.0,
                );
        }
        let mut mf = MassFunction {
            population,
            coef,
            cumulative,
            ns_fraction: 0.0,
            bh_fraction: 0.0,
            mean_mass: 0.0,
        };
        // Remnant fractions and the mean mass by Simpson's rule over log initial mass, in
        // pieces between the breaks, the turn-off and the remnant boundaries.
        let turn_off = (10.0 / AGE_GYR).powf(0.4);
        let edges = [
            IMF_BREAKS[0],
            IMF_BREAKS[1],
            IMF_BREAKS[2],
            turn_off,
            NS_PROGENITOR,
            BH_PROGENITOR,
            IMF_BREAKS[3],
        ];
        let n = 2_000;
        let (mut ns, mut bh, mut mean) = (0.0, 0.0, 0.0);
        // End points are taken just inside each piece: the survival steps at the turn-off.
        for (m, w) in edges.windows(2).flat_map(|e| {
            let (lo, hi) = (e[0].ln() + 1e-12, e[1].ln() - 1e-12);
            let h = (hi - lo) / n as f64;
            (0..=n).map(move |i| {
                let simpson = if i == 0 || i == n {
                    1.0
                } else {
                    (2 + 2 * (i % 2)) as f64
                };
                ((lo + h * i as f64).exp(), simpson * h / 3.0)
            })
        }) {
            let w = w * m * mf.imf(m);
            let alive = mf.surviving(m);
            let dead = 1.0 - alive;
            let final_mass = if m < NS_PROGENITOR {
                white_dwarf_mass(m)
            } else if m < BH_PROGENITOR {
                ns += w * dead;
                NS_MASS.0
            } else {
                bh += w * dead;
                BH_MASS.0
            };
            mean += w * (alive * m + dead * final_mass);
        }
        mf.ns_fraction = ns;
        mf.bh_fraction = bh;
        mf.mean_mass = mean;
        mf
    }

    /// The population.
    pub fn population(&self) -> Population {
        self.population
    }

    /// Initial mass function `dN/dm` (per star), 0 outside 0.01 to 120 M_sun.
    pub fn imf(&self, m: f64) -> f64 {
        (0..3)
            .find(|&k| m >= IMF_BREAKS[k] && m <= IMF_BREAKS[k + 1])
            .map_or(0.0, |k| self.coef[k] * m.powf(-IMF_SLOPES[k]))
    }

    /// Fraction of the stars born with mass `m` that are still on the main sequence (or are
    /// brown dwarfs) today.
    pub fn surviving(&self, m: f64) -> f64 {
        let t = lifetime_gyr(m);
        match self.population {
            Population::Bulge => f64::from(u8::from(t > AGE_GYR)),
            Population::Disk => (t / AGE_GYR).min(1.0),
        }
    }

    /// Mean present-day mass (M_sun): the mass density over the number density.
    pub fn mean_mass(&self) -> f64 {
        self.mean_mass
    }

    /// Present-day number density per unit mass at mass `m` (M_sun), split by class in the
    /// order of [`LensClass::ALL`]; the sum over classes integrates to one.
    pub fn density(&self, m: f64) -> [f64; 5] {
        let mut out = [0.0; 5];
        if m < IMF_BREAKS[1] {
            out[1] = self.imf(m);
        } else {
            out[0] = self.imf(m) * self.surviving(m);
        }
        let initial = (m - white_dwarf_mass(0.0)) / 0.109;
        if initial > 0.0 && initial < NS_PROGENITOR {
            out[2] = self.imf(initial) * (1.0 - self.surviving(initial)) / 0.109;
        }
        out[3] = self.ns_fraction * gauss(m, NS_MASS);
        out[4] = self.bh_fraction * gauss(m, BH_MASS);
        out
    }

    /// Draws an initial mass from the initial mass function given a uniform deviate in [0, 1).
    pub fn initial_mass(&self, u: f64) -> f64 {
        let k = (0..3).rfind(|&k| u >= self.cumulative[k]).unwrap_or(0);
        let (c, a, m0) = (self.coef[k], IMF_SLOPES[k], IMF_BREAKS[k]);
        let rest = u - self.cumulative[k];
        let e = 1.0 - a;
        (m0.powf(e) + rest * e / c).powf(1.0 / e)
    }

    /// Draws a present-day object: its mass (M_sun) and class.
    ///
    /// ```
    /// use causeway::galaxy::{LensClass, MassFunction, Population};
    /// use rand::SeedableRng;
    /// let bulge = MassFunction::new(Population::Bulge);
    /// let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(1);
    /// for _ in 0..1000 {
    ///     let (m, class) = bulge.draw(&mut rng);
    ///     // a 10 Gyr burst: no main-sequence star above the 1 M_sun turn-off
    ///     assert!(class != LensClass::MainSequence || m <= 1.0);
    /// }
    /// ```
    pub fn draw(&self, rng: &mut impl Rng) -> (f64, LensClass) {
        let m = self.initial_mass(rng.random());
        if rng.random::<f64>() < self.surviving(m) {
            let class = if m < IMF_BREAKS[1] {
                LensClass::BrownDwarf
            } else {
                LensClass::MainSequence
            };
            return (m, class);
        }
        let z: f64 = StandardNormal.sample(rng);
        if m < NS_PROGENITOR {
            (white_dwarf_mass(m), LensClass::WhiteDwarf)
        } else if m < BH_PROGENITOR {
            (NS_MASS.0 + NS_MASS.1 * z, LensClass::NeutronStar)
        } else {
            ((BH_MASS.0 + BH_MASS.1 * z).max(0.5), LensClass::BlackHole)
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn density_integrates_to_one_and_matches_the_draws() {
        for pop in Population::ALL {
            let mf = MassFunction::new(pop);
            // integral over a log grid of the summed density (Gaussian tails are wide enough)
            let n = 200_000;
            let (lo, hi) = (1e-3f64.ln(), 150f64.ln());
            let h = (hi - lo) / n as f64;
            let total: f64 = (0..n)
                .map(|i| {
                    let m = (lo + h * (i as f64 + 0.5)).exp();
                    m * h * mf.density(m).iter().sum::<f64>()
                })
                .sum();
            assert!((total - 1.0).abs() < 2e-3, "{pop:?}: {total}");
            // initial masses drawn by inversion reproduce the cumulative number below 0.5
            let below: f64 = (0..10_000)
                .map(|i| f64::from(u8::from(mf.initial_mass((i as f64 + 0.5) / 1e4) < 0.5)))
                .sum::<f64>()
                / 1e4;
            assert!((below - mf.cumulative[2]).abs() < 2e-4);
        }
    }
}
