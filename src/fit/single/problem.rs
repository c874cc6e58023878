//! The prepared problem: the visible points in times relative to an epoch, the box of
//! parameters, the transforms that keep the optimiser inside it, and chi^2 with the bounded
//! flux solve.

use super::{Bound, TE_MIN, TE_SPAN_FACTOR, TE_SPAN_MIN, U0_MAX, U0_MIN};
use crate::fit::fluxes::FluxFit;
use crate::fit::photometry::DataSet;
use crate::lens::paczynski;

/// Fewest points a data set needs to take part in a fit (two fluxes and one more).
pub(super) const MIN_POINTS: usize = 3;
/// A parameter within this fraction of its (log) range from a bound has ended on it.
const ON_BOUND: f64 = 1e-3;

/// The frame of a fit: the epoch times are counted from, and the box of `(t0, u0, tE)`.
///
/// Fits at `t ~ 2.46e6` d are as well conditioned as at 0 because every time is taken
/// relative to the epoch (the median time of the visible points).
#[derive(Debug, Clone, Copy, PartialEq)]
pub(super) struct Frame {
    /// Epoch (days, absolute).
    pub epoch: f64,
    /// Bounds of `t0` relative to the epoch: the data's time range widened by its span.
    pub t0: (f64, f64),
    /// Bounds of `tE` (days).
    pub te: (f64, f64),
}

impl Frame {
    /// The frame of the points of `data` outside the intervals `hidden`; `None` if there is
    /// none.
    pub fn of(data: &[DataSet], hidden: &[(f64, f64)]) -> Option<Frame> {
        let mut times: Vec<f64> = data
            .iter()
            .flat_map(|d| d.times.iter().copied())
            .filter(|&t| !is_hidden(t, hidden))
            .collect();
        if times.is_empty() {
            return None;
        }
        times.sort_by(f64::total_cmp);
        let epoch = median_sorted(&times);
        let (first, last) = (times[0] - epoch, times[times.len() - 1] - epoch);
        let span = last - first;
        Some(Frame {
            epoch,
            t0: (first - span, last + span),
            te: (TE_MIN, (TE_SPAN_FACTOR * span).max(TE_SPAN_MIN)),
        })
    }

    /// `(t0, u0, tE)` from the unbounded coordinates `x`: logistic in `t0`, and in `ln u0` and
    /// `ln tE` between their bounds, so no `x` leaves the box.
    pub fn unpack(&self, x: &[f64]) -> (f64, f64, f64) {
        (
            squash(x[0], self.t0),
            squash(x[1], (U0_MIN.ln(), U0_MAX.ln()))
                .exp()
                .clamp(U0_MIN, U0_MAX),
            squash(x[2], (self.te.0.ln(), self.te.1.ln()))
                .exp()
                .clamp(self.te.0, self.te.1),
        )
    }

    /// The unbounded coordinates of `(t0, u0, tE)` (clamped just inside the box).
    pub fn pack(&self, t0: f64, u0: f64, te: f64) -> [f64; 3] {
        [
            unsquash(t0, self.t0),
            unsquash(u0.ln(), (U0_MIN.ln(), U0_MAX.ln())),
            unsquash(te.ln(), (self.te.0.ln(), self.te.1.ln())),
        ]
    }

    /// Whether `(t0, u0, tE)` lies in the box.
    pub fn contains(&self, t0: f64, u0: f64, te: f64) -> bool {
        (self.t0.0..=self.t0.1).contains(&t0)
            && (U0_MIN..=U0_MAX).contains(&u0)
            && (self.te.0..=self.te.1).contains(&te)
    }

    /// The bounds of `(t0, u0, tE)` that a point has ended on (absolute times in the values).
    pub fn bounds_hit(&self, t0: f64, u0: f64, te: f64) -> Vec<Bound> {
        let near = |v: f64, (lo, hi): (f64, f64)| {
            let tol = ON_BOUND * (hi - lo);
            (v - lo <= tol, hi - v <= tol)
        };
        let mut hit = Vec::new();
        let (a, b) = near(t0, self.t0);
        if a {
            hit.push(Bound::T0Min(self.t0.0 + self.epoch));
        }
        if b {
            hit.push(Bound::T0Max(self.t0.1 + self.epoch));
        }
        let (a, b) = near(u0.ln(), (U0_MIN.ln(), U0_MAX.ln()));
        if a {
            hit.push(Bound::U0Min);
        }
        if b {
            hit.push(Bound::U0Max);
        }
        let (a, b) = near(te.ln(), (self.te.0.ln(), self.te.1.ln()));
        if a {
            hit.push(Bound::TeMin(self.te.0));
        }
        if b {
            hit.push(Bound::TeMax(self.te.1));
        }
        hit
    }
}

/// Whether `t` lies in one of the intervals `hidden` (ends included).
pub(super) fn is_hidden(t: f64, hidden: &[(f64, f64)]) -> bool {
    hidden.iter().any(|&(lo, hi)| (lo..=hi).contains(&t))
}

/// `lo + (hi - lo) / (1 + e^-x)`, within `[lo, hi]` despite round-off.
fn squash(x: f64, (lo, hi): (f64, f64)) -> f64 {
    (lo + (hi - lo) / (1.0 + (-x).exp())).clamp(lo, hi)
}

/// The inverse of [`squash`], for values clamped a millionth of the range inside it.
fn unsquash(v: f64, (lo, hi): (f64, f64)) -> f64 {
    let f = ((v - lo) / (hi - lo)).clamp(1e-6, 1.0 - 1e-6);
    (f / (1.0 - f)).ln()
}

/// One data set's visible points, in times relative to the epoch.
#[derive(Debug, Clone)]
pub(super) struct Set {
    /// Index of the set in the input.
    pub index: usize,
    /// Times relative to the epoch.
    pub t: Vec<f64>,
    /// Fluxes.
    pub f: Vec<f64>,
    /// Errors (rescaled).
    pub sigma: Vec<f64>,
}

/// What a fit sees: the frame, the visible points of the sets that have enough of them, and
/// the blending bound.
#[derive(Debug, Clone)]
pub(super) struct Problem {
    /// The frame (shared by every fit of one baseline).
    pub frame: Frame,
    /// Sets with at least [`MIN_POINTS`] visible points.
    pub sets: Vec<Set>,
    /// Input sets left out for having fewer visible points.
    pub dropped: Vec<usize>,
    /// Largest allowed `-fb / fs`.
    pub blend: f64,
}

/// The best fluxes of one set under the flux bounds, its chi^2, and the flux bound it ended on.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(super) struct SetFluxes {
    /// Fluxes and chi^2.
    pub fit: FluxFit,
    /// [`Bound::Blend`] or [`Bound::NoSource`] when the unbounded solution was outside.
    pub bound: Option<Bound>,
}

impl Problem {
    /// The points of `data` outside every interval of `hidden` (absolute times, ends included).
    pub fn new(data: &[DataSet], frame: Frame, hidden: &[(f64, f64)], blend: f64) -> Problem {
        let mut sets = Vec::new();
        let mut dropped = Vec::new();
        for (index, d) in data.iter().enumerate() {
            let keep: Vec<usize> = (0..d.len())
                .filter(|&i| !is_hidden(d.times[i], hidden))
                .collect();
            if keep.len() < MIN_POINTS {
                dropped.push(index);
                continue;
            }
            sets.push(Set {
                index,
                t: keep.iter().map(|&i| d.times[i] - frame.epoch).collect(),
                f: keep.iter().map(|&i| d.flux[i]).collect(),
                sigma: keep.iter().map(|&i| d.sigma(i)).collect(),
            });
        }
        Problem {
            frame,
            sets,
            dropped,
            blend,
        }
    }

    /// Number of visible points.
    pub fn points(&self) -> usize {
        self.sets.iter().map(|s| s.t.len()).sum()
    }

    /// Degrees of freedom: points less three shape parameters and two fluxes per set.
    pub fn dof(&self) -> usize {
        self.points().saturating_sub(3 + 2 * self.sets.len())
    }

    /// The bounded fluxes and chi^2 of every set for `(t0, u0, tE)` (relative `t0`).
    pub fn fluxes(&self, t0: f64, u0: f64, te: f64) -> Vec<SetFluxes> {
        let mut a = Vec::new();
        self.sets
            .iter()
            .map(|s| {
                magnifications(&s.t, t0, u0, te, &mut a);
                bounded_fluxes(s, &a, self.blend)
            })
            .collect()
    }

    /// Total chi^2 of `(t0, u0, tE)`.
    pub fn chi2(&self, t0: f64, u0: f64, te: f64) -> f64 {
        if !(t0.is_finite() && u0 > 0.0 && te > 0.0 && u0.is_finite() && te.is_finite()) {
            return f64::INFINITY;
        }
        self.fluxes(t0, u0, te).iter().map(|f| f.fit.chi2).sum()
    }

    /// Normalised residuals `(F - fs A - fb) / sigma` of every visible point at `(t0, u0,
    /// tE)`, with their relative times, merged over the sets in time order.
    pub fn residuals(&self, t0: f64, u0: f64, te: f64) -> Vec<(f64, f64)> {
        let mut a = Vec::new();
        let mut out = Vec::with_capacity(self.points());
        for s in &self.sets {
            magnifications(&s.t, t0, u0, te, &mut a);
            let f = bounded_fluxes(s, &a, self.blend).fit;
            out.extend(
                (0..s.t.len()).map(|i| (s.t[i], (s.f[i] - f.fs * a[i] - f.fb) / s.sigma[i])),
            );
        }
        out.sort_by(|x, y| x.0.total_cmp(&y.0));
        out
    }
}

/// Paczynski magnifications (Paczynski 1986) at relative times `t`, into `out`.
fn magnifications(t: &[f64], t0: f64, u0: f64, te: f64, out: &mut Vec<f64>) {
    out.clear();
    out.extend(t.iter().map(|&t| {
        let tau = (t - t0) / te;
        paczynski((u0 * u0 + tau * tau).sqrt())
    }));
}

/// The fluxes `(fs, fb)` minimising chi^2 subject to `fs >= 0` and `fb >= -blend fs`.
///
/// chi^2 is a convex quadratic in `(fs, fb)` and the allowed region a cone, so when the
/// unbounded solution of the normal equations lies outside it, the minimum lies on one of the
/// cone's two edges: `fb = -blend fs` (then `F = fs (A - blend)`, one linear unknown) or
/// `fs = 0` (`fb` the weighted mean flux, at least 0). The better edge is kept.
fn bounded_fluxes(set: &Set, a: &[f64], blend: f64) -> SetFluxes {
    let (mut sw, mut sa, mut saa, mut sf, mut saf) = (0.0, 0.0, 0.0, 0.0, 0.0);
    for ((&ai, &f), &s) in a.iter().zip(&set.f).zip(&set.sigma) {
        let w = 1.0 / (s * s);
        sw += w;
        sa += w * ai;
        saa += w * ai * ai;
        sf += w * f;
        saf += w * ai * f;
    }
    // chi^2 less sum w F^2, to compare candidates.
    let q = |fs: f64, fb: f64| {
        fs * fs * saa + 2.0 * fs * fb * sa + fb * fb * sw - 2.0 * fs * saf - 2.0 * fb * sf
    };
    let det = sw * saa - sa * sa;
    let free = if det > 1e-12 * sw * saa {
        ((sw * saf - sa * sf) / det, (saa * sf - sa * saf) / det)
    } else {
        (saf / saa, 0.0)
    };
    let allowed = |(fs, fb): (f64, f64)| fs >= 0.0 && fb >= -blend * fs;
    let (fs, fb, bound) = if allowed(free) {
        (free.0, free.1, None)
    } else {
        let no_source = (0.0, (sf / sw).max(0.0));
        let mut best = (
            no_source.0,
            no_source.1,
            Some(Bound::NoSource { set: set.index }),
        );
        if blend.is_finite() {
            let (sgf, sgg) = (
                saf - blend * sf,
                saa - 2.0 * blend * sa + blend * blend * sw,
            );
            if sgg > 0.0 {
                let fs = (sgf / sgg).max(0.0);
                if fs > 0.0 && q(fs, -blend * fs) < q(no_source.0, no_source.1) {
                    best = (
                        fs,
                        -blend * fs,
                        Some(Bound::Blend {
                            set: set.index,
                            fraction: blend,
                        }),
                    );
                }
            }
        }
        best
    };
    let chi2 = a
        .iter()
        .zip(&set.f)
        .zip(&set.sigma)
        .map(|((&ai, &f), &s)| ((f - fs * ai - fb) / s).powi(2))
        .sum();
    SetFluxes {
        fit: FluxFit { fs, fb, chi2 },
        bound,
    }
}

/// Median of a sorted, non-empty slice.
pub(super) fn median_sorted(s: &[f64]) -> f64 {
    let m = s.len() / 2;
    if s.len() % 2 == 1 {
        s[m]
    } else {
        0.5 * (s[m - 1] + s[m])
    }
}

/// Median of a non-empty slice.
pub(super) fn median(v: &[f64]) -> f64 {
    let mut s = v.to_vec();
    s.sort_by(f64::total_cmp);
    median_sorted(&s)
}
