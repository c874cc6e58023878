//! Tables along one line of sight: the number density of lenses (by population), the
//! cumulative event-rate weight `D^2 n(D)` from which lens distances are drawn, and the
//! distribution of source distances.
//!
//! Sources are weighted by `n(D_S) D_S^(2 - 2 beta)` (Kiraga & Paczyński 1994, ApJ 430, L101:
//! the stars in the cone, `n D_S^2`, times the fraction bright enough to be monitored,
//! `D_S^(-2 beta)` for a luminosity function `N(>L) ~ L^-beta`); `beta = 1` by default
//! (common practice, from memory).

use super::mass::MassFunction;
use super::model::{GalacticModel, Population, Sightline};

/// Largest distance of the tables (kpc).
pub const MAX_DISTANCE_KPC: f64 = 16.0;
/// Cells of the tables.
const CELLS: usize = 4000;

/// Number densities and cumulative weights along one line of sight.
#[derive(Debug, Clone)]
pub struct LineOfSight {
    /// The model.
    pub model: GalacticModel,
    /// The line of sight.
    pub sightline: Sightline,
    /// Mean present-day mass of the disk and the bulge (M_sun).
    pub mean_mass: [f64; 2],
    step: f64,
    /// Cumulative `integral D^2 n(D) dD` at the cell edges.
    lens_cdf: Vec<f64>,
    /// Cumulative source weight at the cell edges.
    source_cdf: Vec<f64>,
    source_beta: f64,
}

/// Trapezoid cumulative integral of `f` on the edges `i * step`.
fn cumulative(step: f64, f: impl Fn(f64) -> f64) -> Vec<f64> {
    let mut out = Vec::with_capacity(CELLS + 1);
    let mut acc = 0.0;
    let mut prev = f(0.0);
    out.push(0.0);
    for i in 1..=CELLS {
        let v = f(step * i as f64);
        acc += 0.5 * step * (prev + v);
        out.push(acc);
        prev = v;
    }
    out
}

impl LineOfSight {
    /// Tables of `model` along `sightline` out to [`MAX_DISTANCE_KPC`], sources weighted with
    /// `source_beta`.
    ///
    /// ```
    /// use causeway::galaxy::{GalacticModel, LineOfSight, Sightline};
    /// let los = LineOfSight::new(GalacticModel::default(), Sightline::new(1.0, -3.0).unwrap(), 1.0);
    /// let n = los.number_density(8.0);
    /// assert!(n[1] > n[0]); // bulge stars outnumber disk stars at the centre
    /// assert!(los.lens_cumulative(8.0) > los.lens_cumulative(4.0));
    /// ```
    pub fn new(model: GalacticModel, sightline: Sightline, source_beta: f64) -> LineOfSight {
        let mean_mass = Population::ALL.map(|p| MassFunction::new(p).mean_mass());
        let step = MAX_DISTANCE_KPC / CELLS as f64;
        let mut los = LineOfSight {
            model,
            sightline,
            mean_mass,
            step,
            lens_cdf: Vec::new(),
            source_cdf: Vec::new(),
            source_beta,
        };
        los.lens_cdf = cumulative(step, |d| los.lens_weight(d));
        los.source_cdf = cumulative(step, |d| los.source_weight(d));
        los
    }

    /// Number density (stars kpc^-3) of the disk and the bulge at distance `d` (kpc).
    pub fn number_density(&self, d: f64) -> [f64; 2] {
        let mut out = [0.0; 2];
        for (k, pop) in Population::ALL.into_iter().enumerate() {
            out[k] = self.model.density(pop, &self.sightline, d) / self.mean_mass[k];
        }
        out
    }

    /// The lens-distance weight `D^2 n(D)` (all populations).
    pub fn lens_weight(&self, d: f64) -> f64 {
        d * d * self.number_density(d).iter().sum::<f64>()
    }

    /// The source-distance weight `n(D) D^(2 - 2 beta)`.
    pub fn source_weight(&self, d: f64) -> f64 {
        if d <= 0.0 {
            return 0.0;
        }
        self.number_density(d).iter().sum::<f64>() * d.powf(2.0 - 2.0 * self.source_beta)
    }

    fn cell_value(cdf: &[f64], step: f64, d: f64) -> f64 {
        let x = (d / step).clamp(0.0, CELLS as f64);
        let i = (x.floor() as usize).min(CELLS - 1);
        cdf[i] + (x - i as f64) * (cdf[i + 1] - cdf[i])
    }

    /// `integral_0^d D^2 n(D) dD` as tabulated (piecewise linear between cell edges).
    pub fn lens_cumulative(&self, d: f64) -> f64 {
        Self::cell_value(&self.lens_cdf, self.step, d)
    }

    fn invert(cdf: &[f64], step: f64, target: f64) -> (f64, f64) {
        let i = cdf.partition_point(|&c| c <= target).clamp(1, CELLS) - 1;
        let width = cdf[i + 1] - cdf[i];
        let f = if width > 0.0 {
            (target - cdf[i]) / width
        } else {
            0.5
        };
        (step * (i as f64 + f), width / step)
    }

    /// Draws a lens distance below `ds` from the tabulated `D^2 n(D)` given a uniform deviate;
    /// returns the distance and the importance weight `D^2 n(D) / proposal density`.
    ///
    /// ```
    /// use causeway::galaxy::{GalacticModel, LineOfSight, Sightline};
    /// let los = LineOfSight::new(GalacticModel::default(), Sightline::new(1.0, -3.0).unwrap(), 1.0);
    /// let (d, w) = los.draw_lens(0.5, 8.0);
    /// // The median of D^2 n(D) below 8 kpc; the weight is the table's total up to 8 kpc,
    /// // to the table's piecewise-linear accuracy.
    /// assert!((los.lens_cumulative(d) - 0.5 * los.lens_cumulative(8.0)).abs() < 1e-9 * w);
    /// assert!((w / los.lens_cumulative(8.0) - 1.0).abs() < 1e-3);
    /// ```
    pub fn draw_lens(&self, u: f64, ds: f64) -> (f64, f64) {
        let total = self.lens_cumulative(ds);
        let (d, density) = Self::invert(&self.lens_cdf, self.step, u * total);
        let d = d.min(ds);
        (d, self.lens_weight(d) * total / density)
    }

    /// Draws a source distance from the source weighting given a uniform deviate; returns the
    /// distance and the importance weight (target over proposal density).
    pub fn draw_source(&self, u: f64) -> (f64, f64) {
        let total = *self.source_cdf.last().unwrap_or(&1.0);
        let (d, density) = Self::invert(&self.source_cdf, self.step, u * total);
        (d, self.source_weight(d) / density)
    }

    /// Picks a population at `d` in proportion to its number density, given a uniform deviate;
    /// returns it and the total number density.
    pub fn population(&self, u: f64, d: f64) -> (Population, f64) {
        let n = self.number_density(d);
        let total = n[0] + n[1];
        let pop = if u * total < n[0] {
            Population::Disk
        } else {
            Population::Bulge
        };
        (pop, total)
    }
}
