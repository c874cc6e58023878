//! The search's seed: the single-lens trajectory, the time of the data's largest departure from
//! it, and its valley in `u0` (the best `(t0, tE)` at each fixed `u0`), which times every grid
//! line.

use crate::fit::photometry::DataSet;
use crate::fit::single::{fit_at_u0, Baseline, SingleLensFit};
use crate::lens::paczynski;

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
    /// A range of `u0` the data could not narrow (the baseline's, when its `u0` is poorly
    /// fixed), searched whole; `None` when the valley decides.
    pub u0_bounds: Option<(f64, f64)>,
    /// A range of tE the data could not narrow (the baseline's, when its timing is not
    /// trusted); `None` when `te` decides. Lines timed on the data's crossings keep a tE within
    /// [`super::anchor::TE_REACH`] of it ([`Seed::anchored_te`]).
    pub te_bounds: Option<(f64, f64)>,
    /// Candidate (entry, exit) times of a caustic crossing in the data
    /// ([`super::anchor::crossing_pairs`]); the grid's lines through a caustic are also timed
    /// on them. Empty: no such timings.
    pub crossings: Vec<(f64, f64)>,
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
    /// A seed at one trajectory, without valley, anomaly or misfit.
    ///
    /// ```
    /// let seed = causeway::fit::search::Seed::at(10.0, 0.1, 20.0);
    /// assert_eq!(seed.timing(0.1), (10.0, 20.0));
    /// ```
    pub fn at(t0: f64, u0: f64, te: f64) -> Seed {
        Seed {
            t0,
            u0,
            te,
            anomaly: None,
            valley: Vec::new(),
            misfit: 0.0,
            u0_bounds: None,
            te_bounds: None,
            crossings: Vec::new(),
        }
    }

    /// The tE a line timed on the data's crossings may take: within
    /// [`super::anchor::TE_REACH`] of [`Seed::te_bounds`] (or of `te` without them) either way.
    ///
    /// ```
    /// let mut seed = causeway::fit::search::Seed::at(10.0, 0.1, 20.0);
    /// assert_eq!(seed.anchored_te(), (4.0, 100.0));
    /// seed.te_bounds = Some((1.0, 50.0));
    /// assert_eq!(seed.anchored_te(), (0.2, 250.0));
    /// ```
    pub fn anchored_te(&self) -> (f64, f64) {
        let (lo, hi) = self.te_bounds.unwrap_or((self.te, self.te));
        let reach = super::anchor::TE_REACH;
        (lo.min(self.te) / reach, hi.max(self.te) * reach)
    }

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
        let anomaly = Self::departure(fit, data);
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
            u0_bounds: None,
            te_bounds: None,
            crossings: Vec::new(),
        }
    }

    /// The `u0` whose valley chi^2 stays within `fraction` of the misfit of the valley's best:
    /// a single lens that leaves a misfit unexplained cannot rule out a `u0` that costs it
    /// less than that, since the binary's own departures from it are of that size. (A
    /// heuristic; [`GridRule::u0_misfit`] sets the fraction.) The seed's `u0` alone for an
    /// empty valley or a perfect fit; the range always holds [`Seed::u0_bounds`].
    ///
    /// ```
    /// use causeway::fit::search::{Seed, ValleyPoint};
    /// let node = |u0, chi2| ValleyPoint { u0, t0: 0.0, te: 2.0 / u0, chi2 };
    /// let seed = Seed {
    ///     misfit: 1000.0,
    ///     valley: vec![node(0.05, 900.0), node(0.08, 150.0), node(0.1, 100.0), node(0.2, 180.0)],
    ///     ..Seed::at(0.0, 0.1, 20.0)
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
        let start = self.u0_bounds.unwrap_or((self.u0, self.u0));
        self.valley
            .iter()
            .filter(|p| p.chi2 - best <= fraction * self.misfit)
            .fold(start, |(lo, hi), p| (lo.min(p.u0), hi.max(p.u0)))
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
    ///     valley: vec![node(0.1, 0.0, 20.0), node(0.2, 0.5, 10.0)],
    ///     ..Seed::at(0.0, 0.1, 20.0)
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

    /// The time of the largest departure of the data from `fit`: the centre of the run of 5
    /// consecutive points (in one set) whose normalised residuals have the largest sum of
    /// squares.
    fn departure(fit: &SingleLensFit, data: &[DataSet]) -> Option<f64> {
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
        best.1.map(|(k, i)| data[k].times[i])
    }

    /// The seed of a baseline ([`fit_baseline`]): its fit without the anomaly (host-centred),
    /// the time of the data's largest departure from that fit, the fit's valley in `u0`
    /// traced on the data without the masked spans, and its misfit. `data` are the sets the
    /// baseline was fitted to (less any excluded times).
    ///
    /// ```
    /// use causeway::fit::{photometry::DataSet, search::Seed, single::*};
    /// let mut text = String::from("t,flux,flux_err\n");
    /// for k in 0..400 {
    ///     let t = -50.0 + 0.25 * k as f64;
    ///     let u = (0.04 + (t / 20.0f64).powi(2)).sqrt();
    ///     let a = (u * u + 2.0) / (u * (u * u + 4.0).sqrt());
    ///     let bump = if (t - 15.0).abs() < 1.0 { 0.5 } else { 0.0 };
    ///     text += &format!("{t},{},0.01\n", a + bump);
    /// }
    /// let data = vec![DataSet::parse(&text, "d.csv", 22.0).unwrap()];
    /// let baseline = fit_baseline(&data, &BaselineOptions::default()).unwrap();
    /// let seed = Seed::of_baseline(&baseline, &data);
    /// assert!((seed.anomaly.unwrap() - 15.0).abs() <= 1.0);
    /// assert!((seed.u0 - 0.2).abs() < 0.01 && (seed.te - 20.0).abs() < 0.5);
    /// ```
    pub fn of_baseline(baseline: &Baseline, data: &[DataSet]) -> Seed {
        let fit = &baseline.fit;
        let anomaly = Self::departure(fit, data);
        Self::along_valley(fit, &outside_masks(baseline, data), anomaly)
    }

    /// Replaces the valley by one over `u0` from 0.001 to `u0_max` in steps of 10%, for a
    /// baseline whose timing is not trusted: each node is the best of the fits at that `u0`
    /// started from its neighbour's timing, the old valley's, the baseline's and the fit to all
    /// data's, so that every `u0` the search tries gets the single lens's best timing there
    /// rather than one extrapolated from a valley about a wrong `u0`. (The search still tries
    /// several timings about it.)
    ///
    /// ```
    /// use causeway::fit::{photometry::DataSet, search::Seed, single::*};
    /// let mut text = String::from("t,flux,flux_err\n");
    /// for k in 0..400 {
    ///     let t = -50.0 + 0.25 * k as f64;
    ///     let u = (0.04 + (t / 20.0f64).powi(2)).sqrt();
    ///     let a = (u * u + 2.0) / (u * (u * u + 4.0).sqrt());
    ///     text += &format!("{t},{a},0.01\n");
    /// }
    /// let data = vec![DataSet::parse(&text, "d.csv", 22.0).unwrap()];
    /// let baseline = fit_baseline(&data, &BaselineOptions::default()).unwrap();
    /// let mut seed = Seed::of_baseline(&baseline, &data);
    /// seed.widen(&baseline, &data, 1.0);
    /// assert!(seed.valley.first().unwrap().u0 <= 1e-3 && seed.valley.last().unwrap().u0 >= 0.9);
    /// let (t0, te) = seed.timing(0.2);
    /// assert!(t0.abs() < 0.01 && (te - 20.0).abs() < 0.1);
    /// ```
    pub fn widen(&mut self, baseline: &Baseline, data: &[DataSet], u0_max: f64) {
        let data = outside_masks(baseline, data);
        let (start, step) = WIDE_VALLEY;
        let starts = [
            (baseline.fit.t0, baseline.fit.te),
            (baseline.full.t0, baseline.full.te),
        ];
        let mut previous = starts[0];
        let mut wide = Vec::new();
        let mut u = start;
        while u <= u0_max * step {
            let u0 = u.min(u0_max);
            let best = [previous, self.timing(u0)]
                .into_iter()
                .chain(starts)
                .filter_map(|(t, e)| fit_at_u0(&data, u0, t, e).ok())
                .min_by(|a, b| a.2.total_cmp(&b.2));
            if let Some((t0, te, chi2)) = best {
                previous = (t0, te);
                wide.push(ValleyPoint { u0, t0, te, chi2 });
            }
            u *= step;
        }
        if !wide.is_empty() {
            self.valley = wide;
        }
    }
}

/// The first `u0` of a widened valley and its step (as a factor; see [`Seed::widen`]).
const WIDE_VALLEY: (f64, f64) = (1e-3, 1.1);

/// `data` without a baseline's masked spans. A set with (almost) nothing outside the anomaly
/// (a follow-up run over it) says nothing of the single lens: it is left out of the valley, as
/// the baseline leaves it out, rather than letting the anomaly back in.
fn outside_masks(baseline: &Baseline, data: &[DataSet]) -> Vec<DataSet> {
    let masked: Vec<DataSet> = data
        .iter()
        .map(|d| {
            baseline
                .masked
                .iter()
                .fold(d.clone(), |d, &(a, b)| d.without(a, b))
        })
        .filter(|d| d.len() >= 3)
        .collect();
    if masked.is_empty() {
        data.to_vec()
    } else {
        masked
    }
}

/// The single-lens valley of `data` around the fit `(t0, u0, tE)`: the best `(t0, tE)` at
/// fixed `u0` stepped by [`VALLEY`] factors out to its extent either way (within
/// [`crate::fit::single::U0_RANGE`]), each fit started from its neighbour's.
fn valley(data: &[DataSet], t0: f64, u0: f64, te: f64) -> Vec<ValleyPoint> {
    let (extent, step) = VALLEY;
    let (lo, hi) = crate::fit::single::U0_RANGE;
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
