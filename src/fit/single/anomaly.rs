//! Finding the anomaly: the runs of the residuals that a single lens cannot explain, masked one
//! round at a time (see the module documentation of [`super`] for the rule).

use super::local::{self, Local};
use super::problem::{median, Problem, Set, MIN_POINTS};
use super::range;
use crate::error::Result;
use crate::fit::photometry::DataSet;

/// Points per window of the residual score.
const WINDOW: usize = 5;
/// A window whose score (sum of squared normalised residuals) exceeds this is significant: for
/// Gaussian noise, chi^2 with 5 degrees of freedom exceeds 35 with probability 1.6e-6.
const SIGNIFICANT: f64 = 35.0;
/// A run grows over neighbouring windows whose score exceeds this (three times its
/// expectation) ...
const EXTEND: f64 = 15.0;
/// ... and this fraction of the run's best score (so that a caustic crossing's run takes in the
/// milder trough around it, whose score is orders of magnitude lower).
const EXTEND_FRACTION: f64 = 0.002;
/// Candidate runs tried per round ...
const CANDIDATES: usize = 3;
/// ... and more from the residuals of the widest data set's own fit.
const OTHER_CANDIDATES: usize = 2;
/// Most masking rounds.
pub(super) const ROUNDS: usize = 3;
/// Median of chi^2 with one degree of freedom, to scale residuals robustly.
const CHI2_1_MEDIAN: f64 = 0.454_936;

/// A masking round's outcome.
#[derive(Debug, Clone)]
pub(super) struct Round {
    /// The masked span (absolute times, padded).
    pub span: (f64, f64),
    /// The problem without it (and without earlier rounds' spans).
    pub problem: Problem,
    /// Its fit.
    pub fit: Local,
    /// Whether masking would remove the peak: the fit's peak lies inside the span, or the
    /// fit found another event beside it ([`Round::moves_event`]).
    pub covers_peak: bool,
    /// Whether the fit without the span peaks outside it although the span is longer than
    /// twice the fit's `tE` (its whole magnified stretch, |tau| < 1): an "anomaly" longer than
    /// the event it is said to perturb is the event, and the fit without it a different one.
    pub moves_event: bool,
    /// The unexplained chi^2 (`chi2 - points`) the mask removed.
    pub gain: f64,
}

/// The variance scale of the residuals: their median square over that of a standard normal
/// (at least 1), so that error bars that are too small do not make every run significant. The
/// median is robust to an anomaly on fewer than half of the points.
fn scale(residuals: &[(f64, f64)]) -> f64 {
    let squares: Vec<f64> = residuals.iter().map(|r| r.1 * r.1).collect();
    (median(&squares) / CHI2_1_MEDIAN).max(1.0)
}

/// The significant runs of `fit`'s residuals on `problem`, most significant first (at most
/// [`CANDIDATES`]), as spans of relative time (first and last point of the run) and the
/// residual scale. Residuals of all sets are merged in time; each window of [`WINDOW`]
/// consecutive points is scored by the sum of its squared normalised residuals (over the
/// scale). A run starts at the best window above [`SIGNIFICANT`] not yet in a run, and grows
/// while the neighbouring windows stay above [`EXTEND`] and [`EXTEND_FRACTION`] of its best.
pub(super) fn runs(problem: &Problem, fit: &Local) -> (Vec<(f64, f64)>, f64) {
    let r = problem.residuals(fit.t0, fit.u0, fit.te);
    if r.len() < WINDOW {
        return (Vec::new(), 1.0);
    }
    let s = scale(&r);
    let score: Vec<f64> = r
        .windows(WINDOW)
        .map(|w| w.iter().map(|p| p.1 * p.1).sum::<f64>() / s)
        .collect();
    let mut used = vec![false; score.len()];
    let mut out = Vec::new();
    while out.len() < CANDIDATES {
        let Some(top) = (0..score.len())
            .filter(|&j| !used[j] && score[j] > SIGNIFICANT)
            .max_by(|&a, &b| score[a].total_cmp(&score[b]))
        else {
            break;
        };
        let floor = EXTEND.max(EXTEND_FRACTION * score[top]);
        let (mut lo, mut hi) = (top, top);
        while lo > 0 && !used[lo - 1] && score[lo - 1] > floor {
            lo -= 1;
        }
        while hi + 1 < score.len() && !used[hi + 1] && score[hi + 1] > floor {
            hi += 1;
        }
        // Windows that share a point with the run cannot start another.
        let (a, b) = (
            lo.saturating_sub(WINDOW - 1),
            (hi + WINDOW).min(score.len()),
        );
        used[a..b].iter_mut().for_each(|u| *u = true);
        out.push((r[lo].0, r[hi + WINDOW - 1].0));
    }
    (out, s)
}

/// One masking round from `current` (the fit of `problem`, which hides `hidden`). The
/// candidate runs are those of `current`'s residuals and the best [`OTHER_CANDIDATES`] others
/// of `other`'s (a fit that may have taken the other side: see [`mask`]).
/// Each, padded by half its width and a hundredth of `tE` on each side, is masked and the
/// problem refitted (from the grid and from `current`). The round kept is the one that removes
/// the most unexplained chi^2 among those whose fit explains the rest and does not peak inside
/// the mask, else among all; it must remove more than a significant window's worth. `None`
/// when no run is significant.
pub(super) fn round(
    data: &[DataSet],
    problem: &Problem,
    hidden: &[(f64, f64)],
    current: &Local,
    other: Option<&Local>,
) -> Result<Option<Round>> {
    let (mut spans, s) = runs(problem, current);
    if let Some(other) = other {
        let (more, _) = runs(problem, other);
        let fresh: Vec<_> = more
            .into_iter()
            .filter(|m| !spans.contains(m))
            .take(OTHER_CANDIDATES)
            .collect();
        spans.extend(fresh);
    }
    let epoch = problem.frame.epoch;
    let unexplained = |chi2: f64, p: &Problem| chi2 - p.points() as f64;
    let before = unexplained(current.chi2, problem);
    let mut rounds = Vec::new();
    for (lo, hi) in spans {
        let pad = 0.5 * (hi - lo) + 0.01 * current.te;
        let span = (lo - pad + epoch, hi + pad + epoch);
        let mut masks = hidden.to_vec();
        masks.push(span);
        let masked = Problem::new(data, problem.frame, &masks, problem.blend);
        if masked.sets.is_empty() || masked.dof() == 0 {
            continue;
        }
        let start = (current.t0, current.u0, current.te);
        let fit = local::fit(&masked, &[start])?;
        let inside = (span.0..=span.1).contains(&(fit.t0 + epoch));
        let moves_event = !inside && span.1 - span.0 > 2.0 * fit.te;
        rounds.push(Round {
            span,
            covers_peak: inside || moves_event,
            moves_event,
            gain: before - unexplained(fit.chi2, &masked),
            problem: masked,
            fit,
        });
    }
    // The rest is explained when its chi^2 is within 3 standard deviations of chi^2 with as
    // many degrees of freedom as points (error bars scaled by the residuals' spread).
    let explains = |r: &Round| {
        let n = r.problem.points() as f64;
        r.fit.chi2 <= s * (n + 3.0 * (2.0 * n).sqrt())
    };
    let best = |rounds: Vec<Round>| rounds.into_iter().max_by(|a, b| a.gain.total_cmp(&b.gain));
    let (clean, rest): (Vec<Round>, Vec<Round>) = rounds
        .into_iter()
        .partition(|r| explains(r) && !r.covers_peak);
    let chosen = if clean.is_empty() {
        best(rest)
    } else {
        best(clean)
    };
    Ok(chosen.filter(|b| b.gain > SIGNIFICANT * s))
}

/// What the masking rounds leave: the problem and fit of the baseline, the spans masked, and
/// what the caller should know.
#[derive(Debug, Clone)]
pub(super) struct Masking {
    /// The problem without the masked spans.
    pub problem: Problem,
    /// Its fit: the baseline.
    pub fit: Local,
    /// The spans masked (absolute times), one per round.
    pub masked: Vec<(f64, f64)>,
    /// Whether a significant anomaly covers the peak.
    pub peak_covered: bool,
    /// When the anomaly covers the peak and its points are kept although they pull the fit:
    /// the problem without them and its fit, whose range the baseline's takes in.
    pub wings: Option<(Problem, Local)>,
    /// One line per mask, per set left out, and for a covered peak.
    pub notes: Vec<String>,
}

/// Up to [`ROUNDS`] masking rounds (see [`round`]) from `full`, the fit of `all` (the data of
/// `data` outside `exclude`).
///
/// A round whose fit peaks inside its mask would remove the peak. Its mask is kept only when
/// the current fit is pulled by the anomaly (worse on the points outside the mask than their own
/// fit by more than [`range::rise`]) and the fit without it fixes `u0` and `tE` (see
/// [`range::loose`]). Otherwise the points stay; pulled, the fit without them is kept as
/// [`Masking::wings`]. Either way the rounds end there and the peak is marked covered.
pub(super) fn mask(
    data: &[DataSet],
    all: &Problem,
    full: &Local,
    exclude: &[(f64, f64)],
) -> Result<Masking> {
    let mut hidden = exclude.to_vec();
    let other = widest_alone(all)?;
    let mut out = Masking {
        problem: all.clone(),
        fit: *full,
        masked: Vec::new(),
        peak_covered: false,
        wings: None,
        notes: Vec::new(),
    };
    for _ in 0..ROUNDS {
        let Some(next) = round(data, &out.problem, &hidden, &out.fit, other.as_ref())? else {
            break;
        };
        let (lo, hi) = next.span;
        let removed = out.problem.points() - next.problem.points();
        if next.moves_event {
            out.peak_covered = true;
            out.notes.push(format!(
                "the run at t = {lo:.2}..{hi:.2} is longer than the event the fit without it \
                 finds beside it (2 tE = {:.1} d): it is the event, not an anomaly on it; the \
                 baseline keeps its points",
                2.0 * next.fit.te
            ));
            break;
        }
        if next.covers_peak {
            out.peak_covered = true;
            let f = &next.fit;
            let pull = next.problem.chi2(out.fit.t0, out.fit.u0, out.fit.te) - f.chi2;
            let bounds = next.problem.frame.bounds_hit(f.t0, f.u0, f.te);
            let pulled = pull > range::rise(&next.problem, f);
            if !pulled {
                out.notes.push(format!(
                    "the anomaly at t = {lo:.2}..{hi:.2} covers the peak (the fit without it \
                     peaks inside it), and the fit to all data agrees with the points outside \
                     it: the baseline keeps its points"
                ));
                break;
            }
            if range::loose(f, &bounds).is_some() {
                out.notes.push(format!(
                    "the anomaly at t = {lo:.2}..{hi:.2} covers the peak; the fit to all data \
                     misses the {} points outside it by delta chi^2 = {pull:.0}, but they do \
                     not fix the single lens alone: the baseline keeps its points, and its \
                     ranges take in the fit without them",
                    next.problem.points(),
                ));
                out.wings = Some((next.problem, next.fit));
                break;
            }
            out.notes.push(format!(
                "the anomaly at t = {lo:.2}..{hi:.2} covers the peak, but the fit to all data \
                 misses the {} points outside it by delta chi^2 = {pull:.0} while they fix \
                 the single lens alone: the baseline is fitted without its {removed} points",
                next.problem.points(),
            ));
        } else {
            out.notes.push(format!(
                "anomaly masked: t = {lo:.2}..{hi:.2} ({removed} points); the baseline is \
                 fitted without it"
            ));
        }
        for k in next
            .problem
            .dropped
            .iter()
            .filter(|k| !out.problem.dropped.contains(k))
        {
            out.notes.push(format!(
                "{}: fewer than {MIN_POINTS} points outside the anomaly; left out of the \
                 baseline (its fluxes are solved on all its points)",
                data[*k].name
            ));
        }
        hidden.push(next.span);
        out.masked.push(next.span);
        (out.problem, out.fit) = (next.problem, next.fit);
        if next.covers_peak {
            break;
        }
    }
    Ok(out)
}

/// The fit of the data set that spans the longest time, alone, when there are several: the
/// event as the widest view sees it, which dense follow-up of an anomaly cannot pull.
fn widest_alone(all: &Problem) -> Result<Option<Local>> {
    if all.sets.len() < 2 {
        return Ok(None);
    }
    let span = |s: &&Set| s.t[s.t.len() - 1] - s.t[0];
    let widest = all
        .sets
        .iter()
        .max_by(|a, b| span(a).total_cmp(&span(b)))
        .expect("there are sets");
    let alone = Problem {
        sets: vec![widest.clone()],
        ..all.clone()
    };
    Ok(Some(local::fit(&alone, &[])?))
}
