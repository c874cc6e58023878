//! The grid search: for every (s, q) map of a library, a grid of trajectories around the
//! single-lens seed, finite-source curves from the pre-convolved map at each trial rho, chi^2
//! for each; the best few per map kept.
//!
//! # The grid rule
//!
//! Let `rho_min` be the smallest trial rho and `R = width / sqrt(2)` the half-diagonal of the
//! map's window. Trajectories are taken at
//! - `alpha` in `[0, 2 pi)` with step at most `2 rho_min / R`, and
//! - `u0 >= 0` in `[u0* - D, u0* + D]`, `D = max(u0_span u0*, u0_floor)`, widened to cover
//!   the seed's [`Seed::u0_range`] at [`GridRule::u0_misfit`] (the `u0` its single lens
//!   cannot rule out), step at most
//!   `2 rho_min`, keeping for each alpha only the u0 whose line passes within `R` of the
//!   window's centre,
//!
//! each timed as the single lens at the same impact parameter about the host: `(t0*, tE*)` of
//! [`Seed::timing`] at `u0_h`, the line's impact parameter about the heavier lens, with `t0`
//! moved by the host's offset from the origin along the line (see `host_timing`). The single
//! lens with free blending fixes its `u0` poorly but `(t0, tE)` well at each `u0` (for
//! `u0 << 1` the product `u0 tE`), so the grid in `u0` walks along that valley and the true
//! line is met with its true timing. Each line is taken for every `tE = tE* f` (the factors of
//! [`GridRule::te_factors`], default 1) and `t0 = t0* + k tE*` (the shifts of
//! [`GridRule::t0_shifts`], default 0). Two neighbouring
//! lines through the window are then nowhere in it more than `2 rho_min` apart (the alpha step
//! turns a line about the window's centre, moving its points in the window by at most
//! `R dalpha <= 2 rho_min`; the u0 step moves it by at most `2 rho_min`), so every point of the
//! window lies within `rho_min` of a grid line: a caustic crossed by any line through the window
//! is touched by the source of a grid trajectory, and no crossing is stepped over.
//!
//! With [`GridRule::timed`] (off by default: it multiplies the lines by up to about four), each
//! line is tried twice when the data show an anomaly ([`Seed::anomaly`], the time of
//! their largest departure from the single-lens fit): once with the seed's t0, and once with
//! the t0 that puts the line's strongest feature on the map (its largest excess over the
//! host's own magnification, sampled every `rho_min / 2`) at that time. A planetary anomaly
//! or blending biases the single-lens tE by several percent, which moves a caustic crossing
//! by many source radii; the timed copy does not depend on it.
//!
//! Negative `u0` are not searched: a binary is symmetric about its axis, and `(u0, alpha)` and
//! `(-u0, -alpha)` give the same curve, so the twin minima are one (reported with `u0 >= 0`).
//! Lines that cross the window at no observed time are skipped: the map adds nothing to them.
//!
//! # Magnifications in the search
//!
//! Where the source lies on the map (within the pre-convolution's margin), the pre-convolved
//! map is read bilinearly. Elsewhere the sampler's continuation is taken at its zeroth order,
//! the exact point-source magnification (it does not depend on rho, so one evaluation serves
//! every trial rho), computed at a subset of the times and interpolated linearly in between
//! where the midpoint of every interval agrees with the interpolation to
//! [`GridRule::interpolation_tol`], no interval spans more than [`MAX_STRIDE`] points, and none
//! is longer than [`CLEARANCE_REACH`] times the source's clearance at its start: its distance
//! from the nearest lens or caustic point, less the spacing of the caustic points kept. Off
//! the caustics the point-source magnification is smooth on the scale of that distance, so far
//! from them a few solves serve long stretches of the curve, and near them the intervals
//! shrink before the midpoint test could be fooled by a feature between its samples. What
//! is interpolated is the ratio of the binary's magnification to the host's alone (Paczynski's
//! formula for m1 at its position), which stays near 1 and flat wherever the companion matters
//! little; the host's peak is then not interpolated at all. The intervals are taken in time
//! order, so that consecutive solves start from the previous images. Only the points observed while the
//! line is in the window (a time span found once per line) are looked up on the maps; the
//! others are off every map without a look.
//!
//! The fluxes are not formed: for each data set the weights and the sums of the data alone are
//! computed once per map, and a curve's chi^2 at its best `(fs, fb)` follows from three sums
//! over it (`sum w A`, `sum w A^2`, `sum w A (F - Fbar)`; see `Weighted::chi2`). The sums over
//! the off-map points do not depend on rho and are taken once per trajectory. The search only
//! ranks; the refinement ([`super::refine`]) recomputes every point exactly.

use super::model::{paczynski, BinaryModel, Trajectory};
use super::optimize::minimize;
use super::photometry::DataSet;
use super::single::{fit_at_u0, fit_single_lens, SingleLensFit};
use crate::curve::{MapSpectrum, Preconvolved};
use crate::error::{Error, Result};
use crate::lens::{LensSystem, PointLens};
use crate::map::{read_fits, MagnificationMap, Window};
use crate::solve::ImageSolver;
use crate::source::{LimbDarkening, SourceProfile};
use crate::store::library::LibrarySpec;
use crate::store::Store;
use num_complex::Complex64;
use rayon::prelude::*;
use std::f64::consts::TAU;
use std::path::PathBuf;
use std::sync::atomic::{AtomicU64, Ordering};

/// Largest number of points between two exact point-source evaluations off the map.
pub const MAX_STRIDE: usize = 256;
/// Longest interpolation interval off the map, as a fraction of the source's clearance from the
/// lenses and caustics.
pub const CLEARANCE_REACH: f64 = 0.5;
/// Caustic points kept per curve for the clearance.
const CLEARANCE_POINTS: usize = 256;
/// Iteration limit of the polish of each kept candidate on its map.
pub const POLISH_ITERATIONS: u64 = 300;

/// The seed of the search: the single-lens fit's trajectory, and its valley in u0.
#[derive(Debug, Clone, PartialEq)]
pub struct Seed {
    /// Time of closest approach (days).
    pub t0: f64,
    /// Impact parameter (>= 0).
    pub u0: f64,
    /// Einstein timescale (days).
    pub te: f64,
    /// Time of the strongest departure of the data from the single-lens fit, if known.
    pub anomaly: Option<f64>,
    /// The single lens's valley: its best fit at fixed `u0`, in increasing `u0` (see
    /// [`Seed::timing`]); empty for the seed's `t0` and `tE` at every `u0`.
    pub valley: Vec<ValleyPoint>,
    /// What the single lens leaves unexplained of the data it was fitted to,
    /// `max(chi2 - dof, 0)` (see [`Seed::u0_range`]).
    pub misfit: f64,
}

/// The best single lens at one fixed `u0`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ValleyPoint {
    /// The fixed impact parameter.
    pub u0: f64,
    /// Its best time of closest approach (days).
    pub t0: f64,
    /// Its best Einstein timescale (days).
    pub te: f64,
    /// Its chi^2 (fluxes solved).
    pub chi2: f64,
}

/// The valley's extent either side of the seed's u0 (as a factor), and its step (as a factor).
const VALLEY: (f64, f64) = (3.0, 1.05);

impl Seed {
    /// The seed of a single-lens fit: its trajectory, the time where the data depart from it
    /// most (the largest run of 5 normalised residuals, summed in quadrature), its valley in
    /// `u0` (the best `(t0, tE)` at `u0` stepped by 5% out to 3 times either way), and its
    /// misfit `max(chi2 - dof, 0)`.
    ///
    /// ```
    /// use causeway::fit::{photometry::DataSet, search::Seed, single::fit_single_lens};
    /// let mut text = String::from("t,flux,flux_err\n");
    /// for k in 0..200 {
    ///     let t = -50.0 + 0.5 * k as f64;
    ///     let u = (0.01 + (t / 20.0f64).powi(2)).sqrt();
    ///     let a = (u * u + 2.0) / (u * (u * u + 4.0).sqrt());
    ///     let bump = if (t - 15.0).abs() < 1.0 { 0.5 } else { 0.0 };
    ///     text += &format!("{t},{},0.01\n", a + bump);
    /// }
    /// let data = vec![DataSet::parse(&text, "d.csv", 22.0).unwrap()];
    /// let seed = Seed::of_fit(&fit_single_lens(&data).unwrap(), &data);
    /// assert!((seed.anomaly.unwrap() - 15.0).abs() <= 1.0);
    /// ```
    pub fn of_fit(fit: &SingleLensFit, data: &[DataSet]) -> Seed {
        let (anomaly, _) = Self::departure(fit, data);
        Self::along_valley(fit, data, anomaly)
    }

    /// The seed of `fit` to `data`, with its valley and misfit (see [`Seed::of_fit`]).
    fn along_valley(fit: &SingleLensFit, data: &[DataSet], anomaly: Option<f64>) -> Seed {
        Seed {
            t0: fit.t0,
            u0: fit.u0,
            te: fit.te,
            anomaly,
            valley: valley(data, fit.t0, fit.u0, fit.te),
            misfit: (fit.chi2 - fit.dof() as f64).max(0.0),
        }
    }

    /// The `u0` whose valley chi^2 stays within `fraction` of the misfit of the valley's best:
    /// a single lens that leaves a misfit unexplained cannot rule out a `u0` that costs it
    /// less than that, since the binary's own departures from it are of that size. (A
    /// heuristic; [`GridRule::u0_misfit`] sets the fraction.) The seed's `u0` alone for an
    /// empty valley or a perfect fit.
    ///
    /// ```
    /// use causeway::fit::search::{Seed, ValleyPoint};
    /// let node = |u0, chi2| ValleyPoint { u0, t0: 0.0, te: 2.0 / u0, chi2 };
    /// let seed = Seed {
    ///     t0: 0.0, u0: 0.1, te: 20.0, anomaly: None, misfit: 1000.0,
    ///     valley: vec![node(0.05, 900.0), node(0.08, 150.0), node(0.1, 100.0), node(0.2, 180.0)],
    /// };
    /// assert_eq!(seed.u0_range(0.1), (0.08, 0.2));
    /// assert_eq!(seed.u0_range(0.0), (0.1, 0.1));
    /// ```
    pub fn u0_range(&self, fraction: f64) -> (f64, f64) {
        let best = self
            .valley
            .iter()
            .map(|p| p.chi2)
            .fold(f64::INFINITY, f64::min);
        self.valley
            .iter()
            .filter(|p| p.chi2 - best <= fraction * self.misfit)
            .fold((self.u0, self.u0), |(lo, hi), p| {
                (lo.min(p.u0), hi.max(p.u0))
            })
    }

    /// The `(t0, tE)` of the single lens at impact parameter `u0` (about the host): linear in
    /// `ln u0` between the valley's nodes; beyond them, the end node's `t0` and its `u0 tE`
    /// (the product a blended single lens fixes when `u0 << 1`; common practice). The seed's
    /// own `(t0, tE)` when the valley is empty.
    ///
    /// ```
    /// use causeway::fit::search::{Seed, ValleyPoint};
    /// let node = |u0, t0, te| ValleyPoint { u0, t0, te, chi2: 0.0 };
    /// let seed = Seed {
    ///     t0: 0.0, u0: 0.1, te: 20.0, anomaly: None,
    ///     valley: vec![node(0.1, 0.0, 20.0), node(0.2, 0.5, 10.0)],
    ///     misfit: 0.0,
    /// };
    /// let (t0, te) = seed.timing(0.2f64.sqrt() * 0.1f64.sqrt());
    /// assert!((t0 - 0.25).abs() < 1e-12 && (te - 200f64.sqrt()).abs() < 1e-9);
    /// assert_eq!(seed.timing(0.05), (0.0, 40.0));
    /// ```
    pub fn timing(&self, u0: f64) -> (f64, f64) {
        let v = &self.valley;
        let (Some(first), Some(last)) = (v.first(), v.last()) else {
            return (self.t0, self.te);
        };
        if u0 <= first.u0 {
            return (first.t0, first.te * first.u0 / u0.max(1e-12));
        }
        if u0 >= last.u0 {
            return (last.t0, last.te * last.u0 / u0);
        }
        let k = v.partition_point(|n| n.u0 <= u0);
        let (a, b) = (v[k - 1], v[k]);
        let f = (u0 / a.u0).ln() / (b.u0 / a.u0).ln();
        (
            a.t0 + f * (b.t0 - a.t0),
            (a.te.ln() + f * (b.te / a.te).ln()).exp(),
        )
    }

    /// The time of the largest departure of the data from `fit` and the span around it where
    /// the 5-point residual score stays above 15 (three times its expectation) and above 2% of
    /// its peak.
    fn departure(fit: &SingleLensFit, data: &[DataSet]) -> (Option<f64>, (f64, f64)) {
        let scores: Vec<Vec<f64>> = data
            .iter()
            .zip(&fit.fluxes)
            .map(|(set, f)| {
                let r: Vec<f64> = (0..set.len())
                    .map(|i| {
                        let tau = (set.times[i] - fit.t0) / fit.te;
                        let a = paczynski(tau.hypot(fit.u0).max(1e-12));
                        ((set.flux[i] - f.fs * a - f.fb) / set.sigma(i)).powi(2)
                    })
                    .collect();
                let mut score = vec![0.0; set.len()];
                for (i, w) in r.windows(5).enumerate() {
                    score[i + 2] = w.iter().sum();
                }
                score
            })
            .collect();
        let mut best = (0.0, None);
        for (k, score) in scores.iter().enumerate() {
            for (i, &v) in score.iter().enumerate() {
                if v > best.0 {
                    best = (v, Some((k, i)));
                }
            }
        }
        let Some((k, i)) = best.1 else {
            return (None, (0.0, 0.0));
        };
        let (score, times) = (&scores[k], &data[k].times);
        let threshold = (0.02 * best.0).max(15.0);
        let (mut lo, mut hi) = (i, i);
        while lo > 0 && score[lo - 1] > threshold {
            lo -= 1;
        }
        while hi + 1 < score.len() && score[hi + 1] > threshold {
            hi += 1;
        }
        (Some(times[i]), (times[lo], times[hi]))
    }

    /// The seed of a single-lens fit made without the anomaly: the points around the data's
    /// largest departure from `fit` (see [`Seed::of_fit`]), over the span where the 5-point
    /// residual score stays high (see `departure`) and half as wide again on each side, are
    /// left out and the single lens is fitted again, so that the anomaly does not pull its
    /// timing (common practice). The full fit's seed is kept when the span would take the
    /// peak (t0 +- 0.05 tE), when the fit fails, or when it ends at the edge of its u0 range.
    pub fn of_data(fit: &SingleLensFit, data: &[DataSet]) -> Seed {
        let (anomaly, (lo, hi)) = Self::departure(fit, data);
        let full = || Self::along_valley(fit, data, anomaly);
        if anomaly.is_none() {
            return full();
        }
        let pad = 0.5 * (hi - lo) + 0.01 * fit.te;
        let peak = (fit.t0 - 0.05 * fit.te, fit.t0 + 0.05 * fit.te);
        if lo - pad < peak.1 && hi + pad > peak.0 {
            return full();
        }
        let masked: Vec<DataSet> = data.iter().map(|d| d.without(lo - pad, hi + pad)).collect();
        if masked.iter().any(|d| d.len() < 10) {
            return full();
        }
        match fit_single_lens(&masked) {
            Ok(clean) if clean.u0 > 2.0 * super::single::U0_RANGE.0 => {
                Self::along_valley(&clean, &masked, anomaly)
            }
            _ => full(),
        }
    }
}

/// The single-lens valley of `data` around the fit `(t0, u0, tE)`: the best `(t0, tE)` at
/// fixed `u0` stepped by [`VALLEY`] factors out to its extent either way (within
/// [`super::single::U0_RANGE`]), each fit started from its neighbour's.
fn valley(data: &[DataSet], t0: f64, u0: f64, te: f64) -> Vec<ValleyPoint> {
    let (extent, step) = VALLEY;
    let (lo, hi) = super::single::U0_RANGE;
    let n = (extent.ln() / step.ln()).ceil() as i32;
    let mut nodes = Vec::new();
    if let Ok((t0, te, chi2)) = fit_at_u0(data, u0, t0, te) {
        nodes.push(ValleyPoint { u0, t0, te, chi2 });
    }
    for dir in [-1, 1] {
        let (mut t, mut e) = (t0, te);
        for k in 1..=n {
            let u = u0 * step.powi(dir * k);
            if !(lo..=hi).contains(&u) {
                break;
            }
            let Ok((a, b, chi2)) = fit_at_u0(data, u, t, e * step.powi(-dir)) else {
                break;
            };
            (t, e) = (a, b);
            nodes.push(ValleyPoint {
                u0: u,
                t0: t,
                te: e,
                chi2,
            });
        }
    }
    nodes.sort_by(|a, b| a.u0.total_cmp(&b.u0));
    nodes
}

/// How the trajectory grid is laid out (see the module documentation).
#[derive(Debug, Clone, PartialEq)]
pub struct GridRule {
    /// Trial source radii.
    pub rhos: Vec<f64>,
    /// Half-range of u0, relative to the seed's u0.
    pub u0_span: f64,
    /// Least half-range of u0 (absolute).
    pub u0_floor: f64,
    /// The fraction of the seed's misfit its valley may rise by within the u0 searched (see
    /// [`Seed::u0_range`]).
    pub u0_misfit: f64,
    /// Factors on the seed's tE.
    pub te_factors: Vec<f64>,
    /// Shifts of t0 in units of the seed's tE.
    pub t0_shifts: Vec<f64>,
    /// Distinct trajectories kept per map.
    pub keep: usize,
    /// Relative tolerance of the off-map interpolation.
    pub interpolation_tol: f64,
    /// Also try each line timed so that its strongest map feature falls at the data's anomaly.
    pub timed: bool,
}

impl Default for GridRule {
    fn default() -> Self {
        GridRule {
            rhos: vec![1e-3, 2e-3, 4e-3],
            u0_span: 0.2,
            u0_floor: 0.005,
            u0_misfit: 0.1,
            te_factors: vec![1.0],
            t0_shifts: vec![0.0],
            keep: 3,
            interpolation_tol: 1e-3,
            timed: false,
        }
    }
}

impl GridRule {
    /// Checks the rule's values.
    pub fn validate(&self) -> Result<()> {
        let bad = |m: String| Err(Error::input(m));
        if self.rhos.is_empty() || self.rhos.iter().any(|&r| !(r.is_finite() && r > 0.0)) {
            return bad(format!(
                "--rho: trial radii must be finite and > 0, got {:?}",
                self.rhos
            ));
        }
        if !(self.u0_span.is_finite() && self.u0_span >= 0.0) {
            return bad(format!("--u0-span: must be >= 0, got {}", self.u0_span));
        }
        if !(self.u0_misfit.is_finite() && self.u0_misfit >= 0.0) {
            return bad(format!("--u0-misfit: must be >= 0, got {}", self.u0_misfit));
        }
        if !(self.u0_floor.is_finite() && self.u0_floor >= 0.0) {
            return bad(format!("--u0-floor: must be >= 0, got {}", self.u0_floor));
        }
        if self.te_factors.is_empty()
            || self.te_factors.iter().any(|&f| !(f.is_finite() && f > 0.0))
        {
            return bad(format!(
                "--te-factors: must be finite and > 0, got {:?}",
                self.te_factors
            ));
        }
        if self.t0_shifts.is_empty() || self.t0_shifts.iter().any(|f| !f.is_finite()) {
            return bad(format!(
                "--t0-shifts: must be finite, got {:?}",
                self.t0_shifts
            ));
        }
        if self.keep == 0 {
            return bad("--keep: must be at least 1".into());
        }
        Ok(())
    }

    fn rho_min(&self) -> f64 {
        self.rhos.iter().copied().fold(f64::INFINITY, f64::min)
    }

    /// The (alpha, u0) lines of the grid for a window (see the module documentation).
    ///
    /// ```
    /// use causeway::fit::search::{GridRule, Seed};
    /// use causeway::map::Window;
    /// let rule = GridRule { rhos: vec![0.005], ..GridRule::default() };
    /// let seed = Seed {
    ///     t0: 0.0, u0: 0.1, te: 20.0, anomaly: None, valley: vec![], misfit: 0.0,
    /// };
    /// let w = Window::new((0.3, 0.0), 0.1, 100).unwrap();
    /// let lines = rule.lines(&w, &seed);
    /// // Every line passes within the half-diagonal of the window's centre...
    /// let r = 0.05 * 2f64.sqrt();
    /// assert!(lines.iter().all(|&(a, u0)| (-0.3 * a.sin() - u0).abs() <= r + 1e-12));
    /// // ...and u0 stays within 20% of the seed's.
    /// assert!(lines.iter().all(|&(_, u0)| (0.08 - 1e-12..=0.12 + 1e-12).contains(&u0)));
    /// ```
    pub fn lines(&self, window: &Window, seed: &Seed) -> Vec<(f64, f64)> {
        let step = 2.0 * self.rho_min();
        let reach = window.width / std::f64::consts::SQRT_2;
        let n_alpha = ((TAU * reach / step).ceil() as usize).max(8);
        let half = (self.u0_span * seed.u0).max(self.u0_floor);
        let range = seed.u0_range(self.u0_misfit);
        let lo = (seed.u0 - half).min(range.0).max(0.0);
        let hi = (seed.u0 + half).max(range.1);
        let n_u = ((hi - lo) / step).ceil().max(1.0);
        let du = (hi - lo) / n_u;
        let (cx, cy) = window.center;
        let mut out = Vec::new();
        for k in 0..n_alpha {
            let alpha = k as f64 * TAU / n_alpha as f64;
            // The line's u0 is its offset from the origin along n = (-sin, cos).
            let pc = -cx * alpha.sin() + cy * alpha.cos();
            let first = ((pc - reach - lo) / du).ceil().max(0.0) as usize;
            let last = ((pc + reach - lo) / du).floor().min(n_u) as i64;
            for j in first as i64..=last {
                out.push((alpha, lo + j as f64 * du));
            }
        }
        out
    }
}

/// One map of a library to search.
#[derive(Debug, Clone, PartialEq)]
pub struct LibraryMap {
    /// Separation.
    pub s: f64,
    /// Mass ratio.
    pub q: f64,
    /// The map's FITS file.
    pub path: PathBuf,
}

/// A trial model and its chi^2.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Candidate {
    /// The model.
    pub model: BinaryModel,
    /// chi^2 over all data sets (fluxes solved).
    pub chi2: f64,
}

/// What the search found on one map.
#[derive(Debug, Clone, PartialEq)]
pub struct MapOutcome {
    /// Separation.
    pub s: f64,
    /// Mass ratio.
    pub q: f64,
    /// The best distinct candidates, best first (empty if no trajectory could be evaluated).
    pub candidates: Vec<Candidate>,
    /// Trajectories evaluated (each at every trial rho).
    pub trajectories: u64,
    /// Light-curve points evaluated (trajectories x rho x data points).
    pub points: u64,
    /// Remarks for the user (trial radii the map cannot resolve, and the like).
    pub notes: Vec<String>,
}

impl MapOutcome {
    /// chi^2 of the best candidate (infinite if none).
    pub fn best_chi2(&self) -> f64 {
        self.candidates.first().map_or(f64::INFINITY, |c| c.chi2)
    }
}

/// Searches every map of `library` (in parallel; the outcome does not depend on the thread
/// count), calling `progress` after each map.
pub fn search(
    data: &[DataSet],
    seed: &Seed,
    library: &[LibraryMap],
    rule: &GridRule,
    progress: &(dyn Fn() + Sync),
) -> Result<Vec<MapOutcome>> {
    rule.validate()?;
    library
        .par_iter()
        .map(|entry| {
            let map = read_fits(&entry.path)?;
            let outcome = search_map(data, seed, &map, rule);
            progress();
            outcome
        })
        .collect()
}

/// Pre-convolved maps for each distinct limb-darkening law of the data and each trial rho.
struct Readers {
    /// The heavier lens (m1), whose own magnification the off-map curve is scaled by.
    host: PointLens,
    /// Lens positions and caustic points, and the longest gap between kept caustic points.
    landmarks: (Vec<Complex64>, f64),
    /// `convolved[law][rho]`: `None` where the map cannot hold that source.
    convolved: Vec<Vec<Option<Preconvolved>>>,
    /// The law index of each data set.
    set_law: Vec<usize>,
    /// For each law, the rho whose map has the widest margin (the fewest valid centres).
    widest: Vec<Option<usize>>,
}

impl Readers {
    fn new(
        map: &MagnificationMap,
        data: &[DataSet],
        rule: &GridRule,
        notes: &mut Vec<String>,
    ) -> Result<Readers> {
        let mut laws: Vec<LimbDarkening> = Vec::new();
        let set_law = data
            .iter()
            .map(|d| match laws.iter().position(|l| *l == d.limb_darkening) {
                Some(i) => i,
                None => {
                    laws.push(d.limb_darkening);
                    laws.len() - 1
                }
            })
            .collect();
        let pixel = map.window.pixel_size();
        // One transform of the map serves every (law, rho).
        let spectrum = MapSpectrum::new(map);
        let mut convolved = Vec::new();
        for &law in &laws {
            let mut row = Vec::new();
            for &rho in &rule.rhos {
                let fits = rho >= pixel && 4.0 * rho < map.window.width;
                if !fits {
                    notes.push(format!(
                        "rho {rho} skipped on the map of s = {}, q = {}: it needs 1 pixel \
                         ({pixel:e}) <= rho < width/4",
                        map_s(map),
                        map_q(map)
                    ));
                }
                row.push(if fits {
                    Some(Preconvolved::from_spectrum(
                        &spectrum,
                        &SourceProfile::new(rho, law)?,
                    )?)
                } else {
                    None
                });
            }
            convolved.push(row);
        }
        let widest = convolved
            .iter()
            .map(|row: &Vec<Option<Preconvolved>>| {
                (0..row.len())
                    .filter(|&r| row[r].is_some())
                    .max_by_key(|&r| row[r].as_ref().map(Preconvolved::margin))
            })
            .collect();
        Ok(Readers {
            host: map.provenance.lens.lenses()[0],
            landmarks: landmarks(&map.provenance.lens)?,
            convolved,
            set_law,
            widest,
        })
    }
}

/// The lens positions and up to [`CLEARANCE_POINTS`] points of each caustic of `lens`, with
/// the longest gap between consecutive kept caustic points.
fn landmarks(lens: &LensSystem) -> Result<(Vec<Complex64>, f64)> {
    let mut points: Vec<Complex64> = lens.lenses().iter().map(|l| l.position).collect();
    let mut gap = 0.0f64;
    for curve in crate::caustics::caustic_curves(lens)? {
        let every = curve.len().div_ceil(CLEARANCE_POINTS).max(1);
        let kept: Vec<Complex64> = curve
            .iter()
            .step_by(every)
            .chain(curve.last())
            .map(|&(x, y)| Complex64::new(x, y))
            .collect();
        for w in kept.windows(2) {
            gap = gap.max((w[1] - w[0]).norm());
        }
        points.extend(kept);
    }
    Ok((points, gap))
}

impl Readers {
    /// The source's clearance at `z`: its distance from the nearest landmark less their gap
    /// (a lower bound on the distance from the lenses and caustics).
    fn clearance(&self, z: Complex64) -> f64 {
        let (points, gap) = &self.landmarks;
        let d2 = points
            .iter()
            .map(|p| (z - p).norm_sqr())
            .fold(f64::INFINITY, f64::min);
        (d2.sqrt() - gap).max(0.0)
    }
}

fn map_s(map: &MagnificationMap) -> f64 {
    map.provenance
        .lens
        .binary_parameters()
        .map_or(f64::NAN, |b| b.0)
}

fn map_q(map: &MagnificationMap) -> f64 {
    map.provenance
        .lens
        .binary_parameters()
        .map_or(f64::NAN, |b| b.1)
}

/// Times during which the straight line of `tr` lies in `window`, if any.
fn crossing(tr: &Trajectory, window: &Window) -> Option<(f64, f64)> {
    let l = tr.line();
    let (sn, cs) = l.alpha.sin_cos();
    let (x0, y0) = window.origin();
    let (mut lo, mut hi) = (f64::NEG_INFINITY, f64::INFINITY);
    // x(tau) = tau cos - u0 sin, y(tau) = tau sin + u0 cos.
    for (slope, offset, a, b) in [
        (cs, -l.u0 * sn, x0, x0 + window.width),
        (sn, l.u0 * cs, y0, y0 + window.width),
    ] {
        if slope.abs() < 1e-15 {
            if offset < a || offset > b {
                return None;
            }
        } else {
            let (t1, t2) = ((a - offset) / slope, (b - offset) / slope);
            lo = lo.max(t1.min(t2));
            hi = hi.min(t1.max(t2));
        }
    }
    (lo <= hi).then_some((l.t0 + lo * l.te, l.t0 + hi * l.te))
}

/// A grid line that crosses the map's window, and the times during which it does.
struct Line {
    trajectory: Trajectory,
    /// First and last time in the window.
    span: (f64, f64),
}

impl Line {
    /// The line of `trajectory` if it crosses `window` at one of the sorted `times`.
    fn observed(trajectory: Trajectory, window: &Window, times: &[f64]) -> Option<Line> {
        let span = crossing(&trajectory, window)?;
        let k = times.partition_point(|&t| t < span.0);
        (k < times.len() && times[k] <= span.1).then_some(Line { trajectory, span })
    }
}

/// Searches one map.
pub fn search_map(
    data: &[DataSet],
    seed: &Seed,
    map: &MagnificationMap,
    rule: &GridRule,
) -> Result<MapOutcome> {
    let lens: &LensSystem = &map.provenance.lens;
    let (s, q) = lens
        .binary_parameters()
        .ok_or_else(|| Error::input("search: library maps must be of binary lenses"))?;
    let mut notes = Vec::new();
    let readers = Readers::new(map, data, rule, &mut notes)?;
    let mut all_times: Vec<f64> = data.iter().flat_map(|d| d.times.iter().copied()).collect();
    all_times.sort_by(f64::total_cmp);
    let grid = rule.lines(&map.window, seed);
    let sharpest = readers.convolved[0].iter().flatten().next();
    let mut lines = Vec::new();
    for &f in &rule.te_factors {
        for &shift in &rule.t0_shifts {
            for &(alpha, u0) in &grid {
                let (t0, te) = host_timing(seed, readers.host.position, alpha, u0);
                let te = te * f;
                let tr = Trajectory::straight(t0 + shift * seed.te, u0, te, alpha)?;
                lines.extend(Line::observed(tr, &map.window, &all_times));
                // The same line timed so that its strongest feature on the map falls at the
                // anomaly seen in the data.
                if let (true, Some(ta), Some(conv), 0.0) =
                    (rule.timed, seed.anomaly, sharpest, shift)
                {
                    if let Some(tau) =
                        strongest_feature(&tr, &map.window, conv, &readers.host, rule.rho_min())
                    {
                        let timed = Trajectory::straight(ta - tau * te, u0, te, alpha)?;
                        lines.extend(Line::observed(timed, &map.window, &all_times));
                    }
                }
            }
        }
    }
    let sets: Vec<Weighted> = data.iter().map(Weighted::new).collect();
    let solver = ImageSolver::new(lens)?;
    let points = AtomicU64::new(0);
    let evaluated: Vec<Option<(f64, usize)>> = lines
        .par_iter()
        .map_init(
            || (solver.clone(), Scratch::default()),
            |(solver, scratch), line| {
                scratch
                    .trajectory_chi2(solver, &sets, &readers, line, rule)
                    .ok()?;
                let chi2 = &scratch.chi2;
                points.fetch_add((chi2.len() * all_times.len()) as u64, Ordering::Relaxed);
                chi2.iter()
                    .enumerate()
                    .filter(|(_, c)| c.is_finite())
                    .min_by(|a, b| a.1.total_cmp(b.1))
                    .map(|(i, &c)| (c, i))
            },
        )
        .collect();
    let mut ranked: Vec<(f64, usize, usize)> = evaluated
        .iter()
        .enumerate()
        .filter_map(|(i, e)| e.map(|(c, r)| (c, i, r)))
        .collect();
    ranked.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)));
    let (d_alpha, d_u0) = (
        2.0 * rule.rho_min() * std::f64::consts::SQRT_2 / map.window.width,
        2.0 * rule.rho_min(),
    );
    let mut candidates: Vec<Candidate> = Vec::new();
    for (chi2, i, r) in ranked {
        let trajectory = lines[i].trajectory;
        let model = BinaryModel {
            s,
            q,
            rho: rule.rhos[r],
            trajectory,
        };
        let distinct = candidates
            .iter()
            .all(|c| distinct(&c.model.trajectory, &trajectory, d_alpha, d_u0));
        if distinct {
            candidates.push(Candidate { model, chi2 });
            if candidates.len() == rule.keep {
                break;
            }
        }
    }
    // Each kept candidate is polished on the map: a local minimisation of the same map-based
    // chi^2 over (alpha, u0, t0, ln tE) at its rho, from the grid point.
    let polished: Vec<Candidate> = candidates
        .par_iter()
        .map(|c| {
            polish(
                &solver,
                &sets,
                &readers,
                rule,
                c,
                (d_alpha, d_u0),
                &map.window,
            )
        })
        .collect::<Result<_>>()?;
    let mut candidates = polished;
    candidates.sort_by(|a, b| a.chi2.total_cmp(&b.chi2));
    Ok(MapOutcome {
        s,
        q,
        candidates,
        trajectories: lines.len() as u64,
        points: points.into_inner(),
        notes,
    })
}

/// The `(t0, tE)` of the line `(alpha, u0)` about the origin whose motion relative to the host
/// at `host` is the single lens's at the same impact parameter ([`Seed::timing`]): relative to
/// the host the line has `u0_h = u0 - n.host` and `tau_h = tau - d.host`, with
/// `d = (cos alpha, sin alpha)` and `n = (-sin alpha, cos alpha)`, so `t0 = t0_h - (d.host) tE`.
fn host_timing(seed: &Seed, host: Complex64, alpha: f64, u0: f64) -> (f64, f64) {
    let (sn, cs) = alpha.sin_cos();
    let along = cs * host.re + sn * host.im;
    let across = -sn * host.re + cs * host.im;
    let (t0_h, te) = seed.timing((u0 - across).abs());
    (t0_h - along * te, te)
}

/// Where along the line of `tr` (as `tau`, the line's own time in units of tE from its closest
/// approach) its magnification on the map most exceeds the host's alone, sampled every
/// `rho / 2` across the window; `None` if it never exceeds it by 5%.
fn strongest_feature(
    tr: &Trajectory,
    window: &Window,
    conv: &Preconvolved,
    host: &PointLens,
    rho: f64,
) -> Option<f64> {
    let l = tr.line();
    let (a, b) = crossing(tr, window)?;
    let (tau0, tau1) = ((a - l.t0) / l.te, (b - l.t0) / l.te);
    let n = ((tau1 - tau0) / (0.5 * rho)).ceil().min(1e5) as usize;
    let (sn, cs) = l.alpha.sin_cos();
    let mut best = (1.05, None);
    for k in 0..=n {
        let tau = tau0 + (tau1 - tau0) * k as f64 / n.max(1) as f64;
        let (x, y) = (tau * cs - l.u0 * sn, tau * sn + l.u0 * cs);
        if let Some(a) = conv.read(x, y) {
            let u = (Complex64::new(x, y) - host.position).norm() / host.mass.sqrt();
            let excess = a / paczynski(u.max(1e-12));
            if excess > best.0 {
                best = (excess, Some(tau));
            }
        }
    }
    best.1
}

/// Polishes a grid candidate on the map (see [`search_map`]); keeps the grid point if the
/// minimisation finds nothing better.
fn polish(
    solver: &ImageSolver,
    sets: &[Weighted],
    readers: &Readers,
    rule: &GridRule,
    start: &Candidate,
    (d_alpha, d_u0): (f64, f64),
    window: &Window,
) -> Result<Candidate> {
    let r = rule
        .rhos
        .iter()
        .position(|&x| x == start.model.rho)
        .unwrap_or(0);
    let work = std::sync::Mutex::new((solver.clone(), Scratch::default()));
    let chi2 = |p: &[f64]| -> f64 {
        let Ok(trajectory) = Trajectory::straight(p[2], p[1], p[3].exp(), p[0]) else {
            return f64::INFINITY;
        };
        let Some(span) = crossing(&trajectory, window) else {
            return f64::INFINITY;
        };
        let mut guard = work.lock().unwrap_or_else(|e| e.into_inner());
        let (solver, scratch) = &mut *guard;
        let line = Line { trajectory, span };
        match scratch.trajectory_chi2(solver, sets, readers, &line, rule) {
            Ok(()) => scratch.chi2[r],
            Err(_) => f64::INFINITY,
        }
    };
    let l = start.model.trajectory.line();
    let x0 = [l.alpha, l.u0, l.t0, l.te.ln()];
    let step = [d_alpha, d_u0, 0.01 * l.te, 0.03];
    let found = minimize(&chi2, &x0, &step, 0.01, POLISH_ITERATIONS)?;
    if found.value >= start.chi2 {
        return Ok(*start);
    }
    let p = &found.x;
    Ok(Candidate {
        model: BinaryModel {
            trajectory: Trajectory::straight(p[2], p[1], p[3].exp(), p[0])?,
            ..start.model
        },
        chi2: found.value,
    })
}

/// Whether two grid trajectories are more than five grid steps apart in alpha or u0, or differ
/// in t0 or tE.
fn distinct(a: &Trajectory, b: &Trajectory, d_alpha: f64, d_u0: f64) -> bool {
    let (a, b) = (a.line(), b.line());
    let da = (a.alpha - b.alpha).rem_euclid(TAU);
    da.min(TAU - da) > 5.0 * d_alpha
        || (a.u0 - b.u0).abs() > 5.0 * d_u0
        || a.t0 != b.t0
        || a.te != b.te
}

/// A data set with its weights and the flux sums that do not depend on the model, so that the
/// chi^2 of a curve at its best fluxes takes three sums over the curve (see [`CurveSums`]).
struct Weighted<'a> {
    set: &'a DataSet,
    /// `w_i = 1 / sigma_i^2`.
    w: Vec<f64>,
    /// `w_i (F_i - Fbar)`, `Fbar` the weighted mean flux.
    wdf: Vec<f64>,
    /// `sum w_i`.
    sw: f64,
    /// `sum w_i F_i`.
    sf: f64,
    /// `sum w_i (F_i - Fbar)^2`.
    cff: f64,
}

impl<'a> Weighted<'a> {
    fn new(set: &'a DataSet) -> Self {
        let w: Vec<f64> = (0..set.len()).map(|i| set.sigma(i).powi(-2)).collect();
        let sw: f64 = w.iter().sum();
        let sf: f64 = w.iter().zip(&set.flux).map(|(w, f)| w * f).sum();
        let mean = sf / sw;
        let wdf: Vec<f64> = w
            .iter()
            .zip(&set.flux)
            .map(|(w, f)| w * (f - mean))
            .collect();
        let cff = wdf.iter().zip(&set.flux).map(|(d, f)| d * (f - mean)).sum();
        Weighted {
            set,
            w,
            wdf,
            sw,
            sf,
            cff,
        }
    }

    /// chi^2 at the best fluxes of the curve whose sums are `c`: the minimum over `(fs, fb)` of
    /// `sum w_i (F_i - fs A_i - fb)^2`, which is `Cff - Caf^2 / Caa` with the weighted
    /// covariances `Caa = Saa - Sa^2 / Sw`, `Caf = sum w_i A_i (F_i - Fbar)` and `Cff` (the
    /// normal equations of [`super::fluxes::fit_fluxes`] eliminated). A curve without contrast
    /// takes its fallback, `fb = 0`.
    fn chi2(&self, c: &CurveSums) -> f64 {
        let caa = c.saa - c.sa * c.sa / self.sw;
        // fit_fluxes's test `det > 1e-12 Sw Saa`, with det = Sw Caa.
        if caa > 1e-12 * c.saa {
            self.cff - c.caf * c.caf / caa
        } else {
            // fs = Saf / Saa, fb = 0: chi^2 = Sff - Saf^2 / Saa.
            let saf = c.caf + c.sa * self.sf / self.sw;
            let sff = self.cff + self.sf * self.sf / self.sw;
            sff - saf * saf / c.saa
        }
    }
}

/// The model-dependent sums of the flux fit over a curve `A_i`: `Sa = sum w_i A_i`,
/// `Saa = sum w_i A_i^2` and `Caf = sum w_i A_i (F_i - Fbar)`.
#[derive(Debug, Clone, Copy, Default)]
struct CurveSums {
    sa: f64,
    saa: f64,
    caf: f64,
}

impl CurveSums {
    #[inline]
    fn add(&mut self, set: &Weighted, i: usize, a: f64) {
        let wa = set.w[i] * a;
        self.sa += wa;
        self.saa += wa * a;
        self.caf += set.wdf[i] * a;
    }

    fn is_finite(&self) -> bool {
        self.sa.is_finite() && self.saa.is_finite() && self.caf.is_finite()
    }
}

/// Working memory of one thread, reused from trajectory to trajectory.
#[derive(Debug, Default)]
struct Scratch {
    /// Source positions at the data set's times.
    positions: Vec<(f64, f64)>,
    /// The reads of the map with the widest margin in the window's time span (NaN off it).
    on_widest: Vec<f64>,
    /// Whether a point needs the point-source magnification.
    needed: Vec<bool>,
    /// The point-source magnifications (NaN where not needed).
    point: Vec<f64>,
    /// The host's own magnification at the needed points.
    host: Vec<f64>,
    /// chi^2 at each trial rho.
    chi2: Vec<f64>,
}

impl Scratch {
    /// chi^2 of a trajectory at each trial rho, into `self.chi2` (infinite where that rho could
    /// not be read).
    fn trajectory_chi2(
        &mut self,
        solver: &mut ImageSolver,
        sets: &[Weighted],
        readers: &Readers,
        line: &Line,
        rule: &GridRule,
    ) -> Result<()> {
        self.chi2.clear();
        self.chi2.resize(rule.rhos.len(), 0.0);
        let l = line.trajectory.line();
        let (sn, cs) = l.alpha.sin_cos();
        for (weighted, &law) in sets.iter().zip(&readers.set_law) {
            let times = &weighted.set.times;
            // StraightLine::position, with the direction computed once.
            self.positions.clear();
            self.positions.extend(times.iter().map(|&t| {
                let tau = (t - l.t0) / l.te;
                (tau * cs - l.u0 * sn, tau * sn + l.u0 * cs)
            }));
            // Only the points in the window's time span can be on a map.
            let ka = times.partition_point(|&t| t < line.span.0);
            let kb = times.partition_point(|&t| t <= line.span.1);
            let row = &readers.convolved[law];
            // Off the map with the widest margin is off every map (they share the window).
            let widest = readers.widest[law];
            self.on_widest.clear();
            self.on_widest
                .extend(self.positions[ka..kb].iter().map(|&(x, y)| {
                    widest
                        .and_then(|r| row[r].as_ref()?.read(x, y))
                        .unwrap_or(f64::NAN)
                }));
            self.needed.clear();
            self.needed.resize(times.len(), true);
            for (need, v) in self.needed[ka..kb].iter_mut().zip(&self.on_widest) {
                *need = v.is_nan();
            }
            self.point_curve(solver, readers, times, l.te, rule.interpolation_tol)?;
            let mut off = CurveSums::default();
            for i in (0..ka).chain(kb..times.len()) {
                off.add(weighted, i, self.point[i]);
            }
            for (r, conv) in row.iter().enumerate() {
                let Some(conv) = conv else {
                    self.chi2[r] = f64::INFINITY;
                    continue;
                };
                let mut sums = off;
                for i in ka..kb {
                    let on = if widest == Some(r) {
                        self.on_widest[i - ka]
                    } else {
                        let (x, y) = self.positions[i];
                        conv.read(x, y).unwrap_or(f64::NAN)
                    };
                    sums.add(weighted, i, if on.is_nan() { self.point[i] } else { on });
                }
                if !sums.is_finite() {
                    return Err(Error::Numerical(
                        "search: point-source value missing".into(),
                    ));
                }
                self.chi2[r] += weighted.chi2(&sums);
            }
        }
        Ok(())
    }

    /// Point-source magnifications at the points marked in `self.needed` (NaN elsewhere), into
    /// `self.point`: exact at a subset and interpolated linearly in time between (see the
    /// module documentation).
    fn point_curve(
        &mut self,
        solver: &mut ImageSolver,
        readers: &Readers,
        times: &[f64],
        te: f64,
        tol: f64,
    ) -> Result<()> {
        let host = &readers.host;
        let n = times.len();
        let (positions, needed) = (&self.positions, &self.needed);
        // The host's own magnification, Paczynski's formula in u^2 (no square root of u).
        self.host.clear();
        self.host
            .extend(positions.iter().zip(needed).map(|(&(x, y), &need)| {
                if !need {
                    return f64::NAN;
                }
                let u2 = ((Complex64::new(x, y) - host.position).norm_sqr() / host.mass).max(1e-24);
                (u2 + 2.0) / (u2 * (u2 + 4.0)).sqrt()
            }));
        // The ratio to the host's own magnification is interpolated: it is flat where the
        // companion matters little, which is most of an off-map curve.
        let a = &mut self.point;
        a.clear();
        a.resize(n, f64::NAN);
        let alone = &self.host;
        let mut eval = |i: usize, a: &mut [f64]| -> Result<f64> {
            if a[i].is_nan() {
                let (x, y) = positions[i];
                a[i] = solver.magnification(Complex64::new(x, y))? / alone[i];
            }
            Ok(a[i])
        };
        let lin = |a: &[f64], k: usize, p: usize, r: usize| {
            a[p] + (a[r] - a[p]) * (times[k] - times[p]) / (times[r] - times[p])
        };
        // Each run of needed points is walked in time order, so that consecutive solves are
        // near one another and warm-start (see ImageSolver): from the last exact point `c`, an
        // interval of `h` points is accepted when its midpoint agrees with the interpolation,
        // and halved otherwise; after an accepted interval `h` doubles again, up to MAX_STRIDE
        // and to the last point within reach of `c`'s clearance.
        let reach = |c: usize| {
            let (x, y) = positions[c];
            let span = CLEARANCE_REACH * readers.clearance(Complex64::new(x, y)) * te;
            (times.partition_point(|&t| t <= times[c] + span) - 1).max(c + 1)
        };
        let mut i = 0;
        while i < n {
            if !needed[i] {
                i += 1;
                continue;
            }
            let lo = i;
            while i + 1 < n && needed[i + 1] {
                i += 1;
            }
            let hi = i;
            eval(lo, a)?;
            let (mut c, mut h) = (lo, MAX_STRIDE);
            let mut limit = reach(c);
            while c < hi {
                let e = (c + h).min(hi).min(limit);
                if e - c <= 1 {
                    eval(e, a)?;
                    (c, h) = (e, (2 * h).min(MAX_STRIDE));
                    limit = reach(c);
                    continue;
                }
                let m = (c + e) / 2;
                let am = eval(m, a)?;
                eval(e, a)?;
                if (am - lin(a, m, c, e)).abs() > tol * am {
                    h = (e - c) / 2;
                    continue;
                }
                for k in c + 1..m {
                    a[k] = lin(a, k, c, m);
                }
                for k in m + 1..e {
                    a[k] = lin(a, k, m, e);
                }
                (c, h) = (e, (2 * h).min(MAX_STRIDE));
                limit = reach(c);
            }
            i += 1;
        }
        for (v, h) in a.iter_mut().zip(alone) {
            *v *= h; // NaN stays NaN where not needed
        }
        Ok(())
    }
}

/// The distinct s and the distinct q values of the outcomes, each sorted: the axes of their
/// (s, q) grid.
pub fn grid_axes(outcomes: &[MapOutcome]) -> (Vec<f64>, Vec<f64>) {
    let axis = |f: fn(&MapOutcome) -> f64| {
        let mut v: Vec<f64> = outcomes.iter().map(f).collect();
        v.sort_by(f64::total_cmp);
        v.dedup();
        v
    };
    (axis(|o| o.s), axis(|o| o.q))
}

/// Indices of the outcomes whose best chi^2 is no worse than that of any neighbour in the
/// (s, q) grid (the grid of the distinct s and q values; neighbours are the up to eight maps
/// one step away in index): the distinct local minima of the search, best first.
///
/// ```
/// use causeway::fit::search::{local_minima, MapOutcome};
/// let at = |s: f64, q: f64, chi2: f64| MapOutcome { s, q, candidates: vec![causeway::fit::search::Candidate {
///     chi2, model: causeway::fit::model::BinaryModel { s, q, rho: 1e-3,
///         trajectory: causeway::fit::model::Trajectory::straight(0.0, 0.1, 10.0, 0.0).unwrap() } }],
///     trajectories: 1, points: 1, notes: vec![] };
/// let grid = vec![at(0.8, 1e-3, 5.0), at(1.0, 1e-3, 9.0), at(1.25, 1e-3, 4.0)];
/// assert_eq!(local_minima(&grid), vec![2, 0]);
/// ```
pub fn local_minima(outcomes: &[MapOutcome]) -> Vec<usize> {
    let (ss, qs) = grid_axes(outcomes);
    let index = |o: &MapOutcome| {
        (
            ss.partition_point(|&v| v < o.s) as i64,
            qs.partition_point(|&v| v < o.q) as i64,
        )
    };
    let cells: Vec<(i64, i64)> = outcomes.iter().map(index).collect();
    let mut minima: Vec<usize> = (0..outcomes.len())
        .filter(|&i| {
            let c = outcomes[i].best_chi2();
            c.is_finite()
                && (0..outcomes.len()).all(|j| {
                    let (di, dj) = (cells[i].0 - cells[j].0, cells[i].1 - cells[j].1);
                    let near = j != i && di.abs() <= 1 && dj.abs() <= 1;
                    let other = outcomes[j].best_chi2();
                    !near || other > c || (other == c && j > i)
                })
        })
        .collect();
    minima.sort_by(|&a, &b| outcomes[a].best_chi2().total_cmp(&outcomes[b].best_chi2()));
    minima
}

/// The maps of a library spec in `store` (which must hold them: build them first), grid order.
pub fn maps_of_spec(store: &Store, spec: &LibrarySpec) -> Result<Vec<LibraryMap>> {
    spec.points()?
        .into_iter()
        .map(|p| {
            let path = store.path_of(&p.key);
            if !path.exists() {
                return Err(Error::input(format!(
                    "search: the store {} lacks the map of s = {}, q = {} (build the library first)",
                    store.root().display(),
                    p.s,
                    p.q
                )));
            }
            Ok(LibraryMap { s: p.s, q: p.q, path })
        })
        .collect()
}

/// Every binary map listed in the index of `store`, ordered by (q, s).
pub fn maps_of_store(store: &Store) -> Result<Vec<LibraryMap>> {
    let mut maps: Vec<LibraryMap> = store
        .entries()?
        .into_iter()
        .filter_map(|e| {
            Some(LibraryMap {
                s: e.s?,
                q: e.q?,
                path: store.root().join(&e.file),
            })
        })
        .collect();
    maps.sort_by(|a, b| a.q.total_cmp(&b.q).then(a.s.total_cmp(&b.s)));
    if maps.is_empty() {
        return Err(Error::input(format!(
            "search: the store {} lists no binary maps",
            store.root().display()
        )));
    }
    Ok(maps)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::engine::{Engine, PolygonMapping};
    use crate::fit::fluxes::fit_fluxes;
    use crate::fit::model::paczynski;

    /// The off-map curve (exact solves at a subset, the ratio to the host interpolated) against
    /// exact solves at every point (ImageSolver, checked against numpy.roots and mpmath in
    /// tests/images.rs), on lines through the central caustic, past the planetary caustic
    /// (off this map's small window) and far from both.
    #[test]
    fn the_off_map_curve_follows_the_exact_one() {
        let (s, q) = (1.35, 2e-3);
        let lens = LensSystem::binary(s, q).unwrap();
        let window = Window::new((2.0, 2.0), 0.05, 20).unwrap();
        let map = PolygonMapping::new(1.0).build(&lens, &window).unwrap();
        let times: Vec<f64> = (0..2000).map(|k| -50.0 + 0.05 * k as f64).collect();
        let text: String = times.iter().map(|t| format!("{t},1,0.01\n")).collect();
        let set = DataSet::parse(&format!("t,flux,flux_err\n{text}"), "flat.csv", 22.0).unwrap();
        let readers = Readers::new(
            &map,
            std::slice::from_ref(&set),
            &GridRule::default(),
            &mut Vec::new(),
        )
        .unwrap();
        let mut solver = ImageSolver::new(&lens).unwrap();
        let tol = 1e-3;
        let mut worst = 0.0f64;
        // (t0, u0, tE, alpha): central caustic; across the planetary caustic at s - 1/s; far.
        let mut lines = vec![(0.12, -0.2), (0.6, 2.0)];
        lines.extend((0..40).map(|k| (0.0005 * k as f64, 0.37 * k as f64)));
        for (u0, alpha) in lines {
            let line = Trajectory::straight(0.0, u0, 25.0, alpha).unwrap();
            let mut scratch = Scratch {
                positions: line.positions(&times),
                needed: vec![true; times.len()],
                ..Scratch::default()
            };
            scratch
                .point_curve(&mut solver, &readers, &times, 25.0, tol)
                .unwrap();
            for (i, &(x, y)) in scratch.positions.iter().enumerate() {
                let exact = solver.magnification(Complex64::new(x, y)).unwrap();
                worst = worst.max((scratch.point[i] / exact - 1.0).abs());
            }
        }
        assert!(worst < 3.0 * tol, "worst relative error {worst:e}");
    }

    /// The chi^2 from the sums against the direct sum of squared residuals at the fluxes of
    /// `fit_fluxes` (the definition of chi^2; the normal equations are common practice), on a
    /// bright, high-contrast curve where the cancellation in `Cff - Caf^2 / Caa` is worst.
    #[test]
    fn chi2_from_sums_matches_the_residual_sum() {
        let n = 2000;
        let mut text = String::from("t,mag,mag_err\n");
        let mut curves: Vec<Vec<f64>> = vec![Vec::new(); 3];
        for i in 0..n {
            let t = -50.0 + 0.05 * i as f64;
            let u = (0.01f64 + (t / 25.0).powi(2)).sqrt();
            let a = paczynski(u);
            // Data: 0.001 mag errors on a 13th-magnitude source, with a wiggle the model lacks.
            let mag = 13.0 - 2.5 * (a + 0.3 + 0.02 * (t / 3.0).sin()).log10();
            text += &format!("{t},{mag},0.001\n");
            curves[0].push(a);
            curves[1].push(paczynski((0.0144f64 + (t / 24.0).powi(2)).sqrt()));
            // Almost without contrast: only the far wing of a wide-u0 curve.
            curves[2].push(1.0 + 1e-7 * (t / 50.0).powi(2));
        }
        let set = DataSet::parse(&text, "bright.csv", 22.0).unwrap();
        let weighted = Weighted::new(&set);
        for curve in &curves {
            let mut sums = CurveSums::default();
            for (i, &a) in curve.iter().enumerate() {
                sums.add(&weighted, i, a);
            }
            let direct = fit_fluxes(&set, curve).chi2;
            let fast = weighted.chi2(&sums);
            // Relative to the scale that cancels, sum w F^2 (about 2e11 here): round-off only.
            let scale = weighted.cff + weighted.sf * weighted.sf / weighted.sw;
            assert!(
                (fast - direct).abs() <= 1e-12 * scale && (fast - direct).abs() <= 1e-9 * direct,
                "sums give {fast}, residuals {direct} (scale {scale:e})"
            );
        }
    }
}
