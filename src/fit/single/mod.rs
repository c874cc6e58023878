//! The single-lens point-source fit: the baseline a binary model must beat, and the
//! host-centred seed of the search.
//!
//! The model is Paczynski's curve `A(u)`, `u^2 = u0^2 + ((t - t0)/tE)^2` (Paczynski 1986), with
//! each data set's source and blend fluxes solved at every trial as a bounded linear least
//! squares problem, so the curvature is that of the profile chi^2 and its inverse the marginal
//! covariance of `(t0, u0, tE)`. Times are counted from the median time of the data inside,
//! so a fit at `t ~ 2.46e6` d is as well conditioned as at 0.
//!
//! # Bounds
//!
//! - `u0` in [[`U0_MIN`], [`U0_MAX`]] = [1e-4, 3]: a peak magnification of at most 1e4, and at
//!   least the 1.017 of `u0 = 3`, below which a single lens is no longer told from a constant;
//! - `tE` in [[`TE_MIN`], 10 times the data's time span] (0.1 d and [`TE_SPAN_FACTOR`]; at
//!   least [`TE_SPAN_MIN`]);
//! - `t0` within the data's time range widened by its span on each side;
//! - per data set `fs >= 0` and `fb >= -f fs`, `f` = [`BaselineOptions::max_negative_blend`]
//!   (default [`MAX_NEGATIVE_BLEND`] = 0.2: a blend may be a little negative from a sky or
//!   reference-image offset, not a large part of the source). When the unbounded fluxes fall
//!   outside, the best fluxes on the boundary are taken (`fb = -f fs`, or `fs = 0`). Flux data
//!   on a difference scale, whose zero is not zero flux, need a larger `f` (infinity frees
//!   the blend).
//!
//! The simplex moves in coordinates that map onto the box through logistic functions (of
//! `t0`, `ln u0`, `ln tE`), so it cannot leave it. A parameter within 0.1% of its (log) range
//! from a bound has ended on it; [`SingleLensFit::bounds`] lists those, and the flux bounds met.
//!
//! # One fit
//!
//! 1. Candidate peak times: per data set, its brightest point after a 5-point running median
//!    and the centroid of its excess over its median flux; and 5 times spread across the
//!    brightest part of all sets (where a set is more than half-way from its median to its
//!    brightest).
//! 2. A coarse grid over `u0` (14 log-spaced values over its bounds) and `tE` (18 over its
//!    bounds) at each candidate time; the best grid point of each time, and of those the best
//!    4, start Nelder-Mead.
//! 3. Newton steps on the curvature polish the best minimum and give the uncertainties
//!    (`C = 2 H^-1`, mapped to `(t0, u0, tE)` to first order); none on a bound.
//!
//! # The baseline ([`fit_baseline`])
//!
//! The fit to all data (less `--exclude`) is the delta-chi^2 reference of every binary model.
//! The baseline proper is the same fit without the anomaly, found by this rule:
//!
//! 1. Residuals of all sets are merged in time and scaled by their robust spread (median
//!    square over that of a normal, at least 1); each window of 5 consecutive points is scored
//!    by its sum of squares. A window above 35 is significant (chi^2 with 5 degrees of freedom
//!    exceeds it with probability 1.6e-6). A run grows from it over neighbouring windows above
//!    15 and 0.2% of its best (so a caustic crossing's run takes in the milder trough around
//!    it).
//! 2. Candidates: the 3 most significant runs, and the 2 most significant others of the
//!    residuals from the fit of the data set that spans the longest time, alone (dense
//!    follow-up of an anomaly can draw the fit to all data to the anomaly, never this one).
//!    Each, padded by half its width and 0.01 `tE` on each side, is masked in turn and the fit
//!    made again (grid and previous fit as starts). The mask kept removes the most unexplained
//!    chi^2 (`chi^2 - points`) among those whose fit explains the rest (chi^2 within 3 standard
//!    deviations of its expectation, with the scale above) and does not peak inside the mask,
//!    else among all; it must remove more than a significant window's worth. A data set left
//!    with fewer than 3 points sits the fit out.
//! 3. Repeat on what is left, at most 3 rounds.
//!
//! A run whose fit without it peaks outside it, with a `tE` shorter than half the run, is the event
//! itself (a stellar binary's trough over the peak, which a fit without it replaces by another
//! event beside it): it is not masked, the peak is marked covered and the rounds stop.
//! If the refit's `t0` falls inside its mask, the anomaly covers the peak
//! ([`Baseline::peak_covered`]), and the rounds stop. The mask is then kept only when the fit
//! to all data misses the points outside it (by more than the range's chi^2 rise below) while
//! those points alone fix `u0` and `tE`: a resonant caustic over the peak, seen with its wings.
//! Otherwise the points stay; when they pull the fit, the ranges also take in the valley of the
//! fit without them (a central caustic: the peak is distorted, the wings alone cannot fix u0).
//!
//! When the baseline ends on a bound or the data cannot fix `u0` or `tE` (curvature not
//! positive definite, or an uncertainty above half the value), a note says so and the ranges
//! become the valley: the best `(t0, tE)` at `u0` stepped by 10% either way (at most 30 steps)
//! while chi^2 stays within 9 times the reduced chi^2 (at least 1) of its least. Otherwise they
//! are three standard deviations either way.
//!
//! What it can do: find the host's peak under an anomaly off the peak (a planetary caustic, a
//! cusp approach, a trough) even when dense follow-up puts most of the weight on the anomaly;
//! fit a resonant caustic's wings; never return a collapsed `u0 -> 0, tE -> infinity` fit
//! without saying so. What it cannot: fix `u0` under a central-caustic anomaly (the baseline
//! is then the full fit, marked, with a range that can span more than a factor 10), fix `u0`
//! and blending from data that cover only the top of the peak (it returns the range the data
//! allow instead), or tell an anomaly from an outlier (a lone point 6 sigma off is masked like
//! one). Mild perturbations spread over many points (a few per cent over weeks) stay in the
//! fit and shift it by a few per cent.

mod anomaly;
mod local;
mod problem;
mod range;

use self::local::Local;
use self::problem::{is_hidden, Frame, Problem, MIN_POINTS};
use super::fluxes::FluxFit;
use super::photometry::DataSet;
use crate::error::{Error, Result};
use std::fmt;

/// Lower bound of `u0`.
pub const U0_MIN: f64 = 1e-4;
/// Upper bound of `u0`.
pub const U0_MAX: f64 = 3.0;
/// The bounds of `u0`, `(U0_MIN, U0_MAX)`.
pub const U0_RANGE: (f64, f64) = (U0_MIN, U0_MAX);
/// Lower bound of `tE` (days).
pub const TE_MIN: f64 = 0.1;
/// Upper bound of `tE` as a multiple of the data's time span ...
pub const TE_SPAN_FACTOR: f64 = 10.0;
/// ... but at least this (days).
pub const TE_SPAN_MIN: f64 = 1.0;
/// Default largest `-fb / fs` of any data set.
pub const MAX_NEGATIVE_BLEND: f64 = 0.2;

/// A bound a fit ended on.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Bound {
    /// `t0` at the early end of its range (the bound, days).
    T0Min(f64),
    /// `t0` at the late end of its range (the bound, days).
    T0Max(f64),
    /// `u0` at [`U0_MIN`].
    U0Min,
    /// `u0` at [`U0_MAX`].
    U0Max,
    /// `tE` at its lower bound (days).
    TeMin(f64),
    /// `tE` at its upper bound (days).
    TeMax(f64),
    /// A data set's blend flux at `-fraction fs` (set index in input order).
    Blend {
        /// Index of the data set.
        set: usize,
        /// The bound's fraction of the source flux.
        fraction: f64,
    },
    /// A data set's source flux at 0 (set index in input order).
    NoSource {
        /// Index of the data set.
        set: usize,
    },
}

impl Bound {
    /// Whether the bound is one of `t0`, `u0` or `tE` (not of a flux).
    pub fn is_shape(&self) -> bool {
        !matches!(self, Bound::Blend { .. } | Bound::NoSource { .. })
    }
}

impl fmt::Display for Bound {
    /// ```
    /// use causeway::fit::single::Bound;
    /// assert_eq!(Bound::U0Min.to_string(), "u0 ended on its lower bound 0.0001");
    /// assert_eq!(Bound::Blend { set: 1, fraction: 0.2 }.to_string(),
    ///     "the blend flux of data set 2 ended on its bound -0.2 fs");
    /// ```
    fn fmt(&self, f: &mut fmt::Formatter) -> fmt::Result {
        match *self {
            Bound::T0Min(v) => write!(f, "t0 ended on its early bound {}", sig(v)),
            Bound::T0Max(v) => write!(f, "t0 ended on its late bound {}", sig(v)),
            Bound::U0Min => write!(f, "u0 ended on its lower bound {U0_MIN}"),
            Bound::U0Max => write!(f, "u0 ended on its upper bound {U0_MAX}"),
            Bound::TeMin(v) => write!(f, "tE ended on its lower bound {} d", sig(v)),
            Bound::TeMax(v) => write!(
                f,
                "tE ended on its upper bound {} d ({TE_SPAN_FACTOR} times the data's span)",
                sig(v)
            ),
            Bound::Blend { set, fraction } => write!(
                f,
                "the blend flux of data set {} ended on its bound -{fraction} fs",
                set + 1
            ),
            Bound::NoSource { set } => {
                write!(f, "the source flux of data set {} ended on 0", set + 1)
            }
        }
    }
}

/// The best single-lens point-source model of the data sets, within the bounds.
#[derive(Debug, Clone, PartialEq)]
pub struct SingleLensFit {
    /// Time of closest approach (days).
    pub t0: f64,
    /// Impact parameter (Einstein radii), `>= 0`.
    pub u0: f64,
    /// Einstein timescale (days).
    pub te: f64,
    /// Uncertainties of `t0, u0, tE` from the curvature of chi^2 (NaN if it is not positive
    /// definite, on a bound, or for a given model).
    pub sigma: [f64; 3],
    /// Source and blend fluxes and chi^2 of each data set, in input order, over the points
    /// the fit used; a set that sat the fit out (fewer than 3 points left) has the fluxes of
    /// all its points, whose chi^2 is then not in [`SingleLensFit::chi2`].
    pub fluxes: Vec<FluxFit>,
    /// Total chi^2 over the points the fit used.
    pub chi2: f64,
    /// Number of points the fit used.
    pub points: usize,
    /// The bounds the fit ended on (empty for a fit inside its box).
    pub bounds: Vec<Bound>,
}

impl SingleLensFit {
    /// Degrees of freedom: points less the three shape parameters and two fluxes per set.
    pub fn dof(&self) -> usize {
        self.points.saturating_sub(3 + 2 * self.fluxes.len())
    }
}

/// How [`fit_baseline`] is steered.
#[derive(Debug, Clone, PartialEq)]
pub struct BaselineOptions {
    /// Time intervals `(start, end)` (days, ends included) hidden from every fit.
    pub exclude: Vec<(f64, f64)>,
    /// A given `(t0, u0, tE)`: no fit is made, only the fluxes are solved.
    pub given: Option<(f64, f64, f64)>,
    /// Largest `-fb / fs` of any data set (>= 0; infinity frees the blend).
    pub max_negative_blend: f64,
}

impl Default for BaselineOptions {
    fn default() -> Self {
        BaselineOptions {
            exclude: Vec::new(),
            given: None,
            max_negative_blend: MAX_NEGATIVE_BLEND,
        }
    }
}

impl BaselineOptions {
    /// Checks the options; the messages name `--exclude`, `--baseline` and
    /// `--max-negative-blend`.
    ///
    /// ```
    /// use causeway::fit::single::BaselineOptions;
    /// let bad = BaselineOptions { exclude: vec![(5.0, 3.0)], ..Default::default() };
    /// assert!(bad.check().unwrap_err().to_string().starts_with("exclude"));
    /// let bad = BaselineOptions { given: Some((0.0, -0.1, 20.0)), ..Default::default() };
    /// assert!(bad.check().unwrap_err().to_string().starts_with("baseline"));
    /// assert!(BaselineOptions::default().check().is_ok());
    /// ```
    pub fn check(&self) -> Result<()> {
        for &(lo, hi) in &self.exclude {
            if !(lo.is_finite() && hi.is_finite() && lo < hi) {
                return Err(Error::input(format!(
                    "exclude: expected START,END with finite START < END, got {lo},{hi}"
                )));
            }
        }
        if let Some((t0, u0, te)) = self.given {
            if !(t0.is_finite() && u0.is_finite() && te.is_finite() && u0 > 0.0 && te > 0.0) {
                return Err(Error::input(format!(
                    "baseline: expected T0,U0,TE with finite values and U0, TE > 0, got \
                     {t0},{u0},{te}"
                )));
            }
        }
        let f = self.max_negative_blend;
        if f.is_nan() || f < 0.0 {
            return Err(Error::input(format!(
                "max_negative_blend: must be >= 0, got {f}"
            )));
        }
        Ok(())
    }
}

/// The baseline of a data set: the full fit (the delta-chi^2 reference) and the host-centred
/// fit without the anomaly, with the ranges of `u0` and `tE` the data allow.
#[derive(Debug, Clone, PartialEq)]
pub struct Baseline {
    /// The bounded fit to all data less `exclude`: the reference of delta-chi^2.
    pub full: SingleLensFit,
    /// The fit without the anomaly: the host-centred `(t0, u0, tE)` that seeds the search.
    pub fit: SingleLensFit,
    /// The masked time span (days; the hull of [`Baseline::masked`]), if any.
    pub anomaly: Option<(f64, f64)>,
    /// The masked spans, one per round, padded as masked.
    pub masked: Vec<(f64, f64)>,
    /// The anomaly covers the peak: masking would have removed it, so its points were kept.
    pub peak_covered: bool,
    /// The `u0` the data allow about [`Baseline::fit`]: its value +- 3 sigma when the data fix
    /// it, else the valley's range (see the module documentation).
    pub u0_range: (f64, f64),
    /// The `tE` (days) the data allow, likewise.
    pub te_range: (f64, f64),
    /// One line for each thing the caller should know (masks, bounds, ranges).
    pub notes: Vec<String>,
}

/// Fits Paczynski's curve to all data sets at once, within the bounds (see the module
/// documentation; default blending bound, no masking).
///
/// Errors when there is no data set or a set has fewer than 3 points.
///
/// ```
/// use causeway::fit::{model::paczynski, photometry::DataSet, single::fit_single_lens};
/// // A noiseless event: t0 = 10, u0 = 0.2, tE = 15, fs = 2, fb = 0.5.
/// let mut text = String::from("t,flux,flux_err\n");
/// for k in 0..80 {
///     let t = -30.0 + k as f64;
///     let u = (0.04 + ((t - 10.0) / 15.0f64).powi(2)).sqrt();
///     text += &format!("{t},{},0.01\n", 2.0 * paczynski(u) + 0.5);
/// }
/// let data = DataSet::parse(&text, "event.csv", 22.0).unwrap();
/// let fit = fit_single_lens(&[data]).unwrap();
/// assert!((fit.t0 - 10.0).abs() < 1e-6 && (fit.u0 - 0.2).abs() < 1e-6);
/// assert!((fit.te - 15.0).abs() < 1e-5 && (fit.fluxes[0].fs - 2.0).abs() < 1e-5);
/// assert!(fit.chi2 < 1e-8 && fit.bounds.is_empty());
/// ```
pub fn fit_single_lens(data: &[DataSet]) -> Result<SingleLensFit> {
    let all = Problem::new(data, frame(data, &[])?, &[], MAX_NEGATIVE_BLEND);
    let fit = local::fit(&all, &[])?;
    Ok(finish(data, &all, &fit))
}

/// The single lens at a fixed `u0` (within [`U0_RANGE`]): the `(t0, tE)` that minimise chi^2
/// (fluxes solved, within the bounds), found by Nelder-Mead from `(t0, te)`, and that chi^2.
///
/// Stepping `u0` traces the valley of the single-lens chi^2 along which the source and blend
/// fluxes trade against `u0` and `tE` (for `u0 << 1`, `u0 tE` stays nearly fixed: common
/// practice).
///
/// ```
/// use causeway::fit::{model::paczynski, photometry::DataSet, single::fit_at_u0};
/// let mut text = String::from("t,flux,flux_err\n");
/// for k in 0..120 {
///     let t = -30.0 + 0.5 * k as f64;
///     let u = (0.01 + ((t - 2.0) / 20.0f64).powi(2)).sqrt();
///     text += &format!("{t},{},0.01\n", paczynski(u) + 0.3);
/// }
/// let data = [DataSet::parse(&text, "event.csv", 22.0).unwrap()];
/// let (t0, te, chi2) = fit_at_u0(&data, 0.1, 0.0, 25.0).unwrap();
/// assert!((t0 - 2.0).abs() < 1e-4 && (te - 20.0).abs() < 1e-3 && chi2 < 1e-4);
/// assert!(fit_at_u0(&data, 5.0, 0.0, 25.0).is_err()); // outside the bounds of u0
/// ```
pub fn fit_at_u0(data: &[DataSet], u0: f64, t0: f64, te: f64) -> Result<(f64, f64, f64)> {
    fit_at_u0_with(data, u0, t0, te, &BaselineOptions::default())
}

/// [`fit_at_u0`] with the data and bounds of `options` (its `exclude` and
/// `max_negative_blend`; `given` plays no part).
pub fn fit_at_u0_with(
    data: &[DataSet],
    u0: f64,
    t0: f64,
    te: f64,
    options: &BaselineOptions,
) -> Result<(f64, f64, f64)> {
    options.check()?;
    if !(U0_MIN..=U0_MAX).contains(&u0) {
        return Err(Error::input(format!(
            "u0 = {u0} is outside the single lens's bounds [{U0_MIN}, {U0_MAX}]"
        )));
    }
    let frame = frame(data, &options.exclude)?;
    let p = Problem::new(data, frame, &options.exclude, options.max_negative_blend);
    let (t0, te, chi2) = local::at_u0(&p, u0, t0 - frame.epoch, te)?;
    Ok((t0 + frame.epoch, te, chi2))
}

/// The baseline of `data`: the bounded fit to all data less `options.exclude`
/// ([`Baseline::full`]), and the fit without the anomaly ([`Baseline::fit`]), with the ranges
/// of `u0` and `tE` the data allow and notes (see the module documentation for the rule).
/// With `options.given`, both fits are that model with its fluxes solved.
///
/// ```
/// use causeway::fit::{model::paczynski, photometry::DataSet};
/// use causeway::fit::single::{fit_baseline, BaselineOptions};
/// // t0 = 20, u0 = 0.3, tE = 12, and a bump at t = 30 that is no part of a single lens.
/// let mut text = String::from("t,flux,flux_err\n");
/// for k in 0..400 {
///     let t = 0.1 * k as f64;
///     let u = (0.09 + ((t - 20.0) / 12.0f64).powi(2)).sqrt();
///     let bump = if (t - 30.0).abs() < 0.5 { 0.8 } else { 0.0 };
///     text += &format!("{t},{},0.01\n", paczynski(u) + bump);
/// }
/// let data = [DataSet::parse(&text, "event.csv", 22.0).unwrap()];
/// let b = fit_baseline(&data, &BaselineOptions::default()).unwrap();
/// let (lo, hi) = b.anomaly.unwrap();
/// assert!(lo < 29.6 && hi > 30.4 && !b.peak_covered);
/// assert!((b.fit.u0 - 0.3).abs() < 1e-6 && (b.fit.te - 12.0).abs() < 1e-5);
/// assert!(b.full.chi2 > b.fit.chi2);
/// ```
pub fn fit_baseline(data: &[DataSet], options: &BaselineOptions) -> Result<Baseline> {
    options.check()?;
    let frame = frame(data, &options.exclude)?;
    let blend = options.max_negative_blend;
    let all = Problem::new(data, frame, &options.exclude, blend);
    if all.sets.is_empty() {
        return Err(Error::input(format!(
            "exclude: leaves no data set with at least {MIN_POINTS} points"
        )));
    }
    let mut notes = Vec::new();
    let n_hidden = data
        .iter()
        .map(|d| {
            d.times
                .iter()
                .filter(|&&t| is_hidden(t, &options.exclude))
                .count()
        })
        .sum::<usize>();
    if n_hidden > 0 {
        notes.push(format!(
            "the excluded times hide {n_hidden} points from the baseline"
        ));
    }
    for &k in &all.dropped {
        notes.push(format!(
            "{}: fewer than {MIN_POINTS} points outside the excluded times; left out of the fits (its \
             fluxes are solved on all its points)",
            data[k].name
        ));
    }
    if let Some(model) = options.given {
        return Ok(given(data, &all, model, notes));
    }
    let full_local = local::fit(&all, &[])?;
    let full = finish(data, &all, &full_local);
    let anomaly::Masking {
        problem,
        fit: current,
        masked,
        peak_covered,
        wings,
        notes: found,
    } = anomaly::mask(data, &all, &full_local, &options.exclude)?;
    notes.extend(found);
    if !masked.is_empty() {
        notes.extend(
            full.bounds
                .iter()
                .filter(|b| b.is_shape())
                .map(|b| format!("the fit to all data (the delta-chi^2 reference): {b}")),
        );
    }
    let fit = finish(data, &problem, &current);
    let shape: Vec<Bound> = fit.bounds.iter().copied().filter(Bound::is_shape).collect();
    let bounds = if shape.is_empty() {
        &fit.bounds
    } else {
        &shape
    };
    let mut ranges = range::ranges(&problem, &current, bounds)?;
    notes.extend(ranges.note.take());
    if let Some((p, w)) = wings {
        let other = range::ranges(&p, &w, &p.frame.bounds_hit(w.t0, w.u0, w.te))?;
        let hull = |a: (f64, f64), b: (f64, f64)| (a.0.min(b.0), a.1.max(b.1));
        (ranges.u0, ranges.te) = (hull(ranges.u0, other.u0), hull(ranges.te, other.te));
        notes.push(format!(
            "ranges widened to the fit without the anomaly: u0 in {}..{}, tE in {}..{} d",
            sig(ranges.u0.0),
            sig(ranges.u0.1),
            sig(ranges.te.0),
            sig(ranges.te.1)
        ));
    }
    let anomaly = masked
        .iter()
        .copied()
        .reduce(|(a, b), (c, d)| (a.min(c), b.max(d)));
    Ok(Baseline {
        full,
        fit,
        anomaly,
        masked,
        peak_covered,
        u0_range: ranges.u0,
        te_range: ranges.te,
        notes,
    })
}

/// The baseline of a given `(t0, u0, tE)` on `all` (made from `data`): its fluxes solved, no
/// fit, no range; `notes` so far are kept.
fn given(
    data: &[DataSet],
    all: &Problem,
    model: (f64, f64, f64),
    mut notes: Vec<String>,
) -> Baseline {
    let (t0, u0, te) = model;
    let rel = t0 - all.frame.epoch;
    let local = Local {
        t0: rel,
        u0,
        te,
        chi2: f64::NAN,
        sigma: [f64::NAN; 3],
    };
    let mut fit = SingleLensFit {
        t0,
        ..finish(data, all, &local)
    };
    fit.bounds.retain(|b| !b.is_shape());
    notes.push(format!(
        "baseline given (t0 {}, u0 {}, tE {} d): not fitted",
        sig(t0),
        sig(u0),
        sig(te)
    ));
    if !all.frame.contains(rel, u0, te) {
        notes.push("the given baseline lies outside the bounds of the fit".into());
    }
    Baseline {
        full: fit.clone(),
        fit,
        anomaly: None,
        masked: Vec::new(),
        peak_covered: false,
        u0_range: (u0, u0),
        te_range: (te, te),
        notes,
    }
}

/// The frame of the points of `data` outside `hidden`, after checking that there are data
/// sets and that each has at least [`MIN_POINTS`] points.
fn frame(data: &[DataSet], hidden: &[(f64, f64)]) -> Result<Frame> {
    if data.is_empty() {
        return Err(Error::input(
            "the single-lens fit needs at least one data set",
        ));
    }
    if let Some(d) = data.iter().find(|d| d.len() < MIN_POINTS) {
        return Err(Error::input(format!(
            "{}: the single-lens fit needs at least {MIN_POINTS} points per data set, got {}",
            d.name,
            d.len()
        )));
    }
    Frame::of(data, hidden).ok_or_else(|| Error::input("exclude: hides every point"))
}

/// The fit `local` of `problem` (made from `data`) as a [`SingleLensFit`] in absolute time; the
/// sets that sat it out get the fluxes of all their points.
fn finish(data: &[DataSet], problem: &Problem, local: &Local) -> SingleLensFit {
    let rel = (local.t0, local.u0, local.te);
    let used = problem.fluxes(rel.0, rel.1, rel.2);
    let mut everything = None;
    let mut bounds = problem.frame.bounds_hit(rel.0, rel.1, rel.2);
    bounds.extend(used.iter().filter_map(|f| f.bound));
    let fluxes = (0..data.len())
        .map(|k| match problem.sets.iter().position(|s| s.index == k) {
            Some(i) => used[i].fit,
            None => {
                let all = everything.get_or_insert_with(|| {
                    Problem::new(data, problem.frame, &[], problem.blend)
                        .fluxes(rel.0, rel.1, rel.2)
                });
                all[k].fit
            }
        })
        .collect();
    SingleLensFit {
        t0: local.t0 + problem.frame.epoch,
        u0: local.u0,
        te: local.te,
        sigma: local.sigma,
        fluxes,
        chi2: used.iter().map(|f| f.fit.chi2).sum(),
        points: problem.points(),
        bounds,
    }
}

/// A number with 4 significant digits, in plain notation for moderate magnitudes.
fn sig(v: f64) -> String {
    let a = v.abs();
    if a == 0.0 || (1e-3..1e6).contains(&a) {
        let decimals = (3 - a.log10().floor() as i32).max(0) as usize;
        format!("{v:.decimals$}")
    } else {
        format!("{v:.3e}")
    }
}
