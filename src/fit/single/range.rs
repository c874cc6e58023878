//! How well the data fix `u0` and `tE`: an interval of three standard deviations when the
//! curvature does, the single lens's valley in `u0` when it does not.

use super::local::{at_u0, Local};
use super::problem::Problem;
use super::{sig, Bound, U0_MAX, U0_MIN};
use crate::error::Result;

/// Largest relative uncertainty of `u0` or `tE` for the parameter to count as fixed.
const LOOSE: f64 = 0.5;
/// Half-width of the interval of a fixed parameter, in standard deviations.
const SIGMAS: f64 = 3.0;
/// The valley keeps the `u0` whose chi^2 rises by at most this many times the fit's reduced
/// chi^2 (at least 1): three standard deviations of one parameter (profile likelihood, common
/// practice), with error bars scaled to the fit.
const RISE: f64 = 9.0;
/// Factor between neighbouring `u0` of the valley ...
const STEP: f64 = 1.1;
/// ... and most steps either way (a factor 1.1^30 = 17).
const STEPS: i32 = 30;

/// The ranges of `u0` and `tE`, and the note that says why they are wide (none when the fit
/// fixes both).
#[derive(Debug, Clone, PartialEq)]
pub(super) struct Ranges {
    /// Range of `u0`.
    pub u0: (f64, f64),
    /// Range of `tE` (days).
    pub te: (f64, f64),
    /// Why the fit's point does not stand alone, if it does not.
    pub note: Option<String>,
}

/// Why `fit` does not fix `(u0, tE)`, if it does not: the first bound it ended on, a curvature
/// that is not positive definite, or an uncertainty above [`LOOSE`] of the value.
pub(super) fn loose(fit: &Local, bounds: &[Bound]) -> Option<String> {
    if let Some(b) = bounds.first() {
        return Some(b.to_string());
    }
    let [_, su, st] = fit.sigma;
    if !(su.is_finite() && st.is_finite()) {
        return Some("the chi^2 curvature is not positive definite".into());
    }
    for (name, s, v) in [("u0", su, fit.u0), ("tE", st, fit.te)] {
        if s > LOOSE * v {
            return Some(format!(
                "{name} is poorly fixed (sigma {} of {})",
                sig(s),
                sig(v)
            ));
        }
    }
    None
}

/// The rise of chi^2 that still counts as compatible with `fit` of `problem`: [`RISE`] times its
/// reduced chi^2 (at least 1).
pub(super) fn rise(problem: &Problem, fit: &Local) -> f64 {
    RISE * (fit.chi2 / problem.dof().max(1) as f64).max(1.0)
}

/// The ranges of `fit` on `problem`, whose bounds hit are `bounds`. When the fit fixes both
/// parameters, value +- [`SIGMAS`] sigma (within the bounds). Otherwise the valley: the best
/// `(t0, tE)` at `u0` stepped by [`STEP`] from the fit's either way, while chi^2 stays within
/// [`RISE`] times the reduced chi^2 of the lowest point found, up to [`STEPS`] steps or the
/// bounds of `u0`; the ranges span the `u0` and `tE` of the points kept.
pub(super) fn ranges(problem: &Problem, fit: &Local, bounds: &[Bound]) -> Result<Ranges> {
    let Some(why) = loose(fit, bounds) else {
        let within = |v: f64, s: f64, (lo, hi): (f64, f64)| {
            ((v - SIGMAS * s).max(lo), (v + SIGMAS * s).min(hi))
        };
        return Ok(Ranges {
            u0: within(fit.u0, fit.sigma[1], (U0_MIN, U0_MAX)),
            te: within(fit.te, fit.sigma[2], problem.frame.te),
            note: None,
        });
    };
    let rise = rise(problem, fit);
    let mut nodes = vec![(fit.u0, fit.te, fit.chi2)];
    for dir in [-1, 1] {
        let (mut t, mut e) = (fit.t0, fit.te);
        for k in 1..=STEPS {
            let u = (fit.u0 * STEP.powi(dir * k)).clamp(U0_MIN, U0_MAX);
            let (t1, e1, chi2) = at_u0(problem, u, t, e / STEP.powi(dir))?;
            if chi2 - fit.chi2 > rise {
                break;
            }
            (t, e) = (t1, e1);
            nodes.push((u, e, chi2));
            if u == U0_MIN || u == U0_MAX {
                break;
            }
        }
    }
    let least = nodes.iter().map(|n| n.2).fold(f64::INFINITY, f64::min);
    let kept: Vec<_> = nodes.iter().filter(|n| n.2 - least <= rise).collect();
    let span = |get: fn(&&(f64, f64, f64)) -> f64| {
        kept.iter()
            .map(get)
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), v| {
                (lo.min(v), hi.max(v))
            })
    };
    let (u0, te) = (span(|n| n.0), span(|n| n.1));
    let note = format!(
        "{why}: the data do not fix the single lens; u0 in {}..{}, tE in {}..{} d \
         (chi^2 within {} of its least along the valley in u0)",
        sig(u0.0),
        sig(u0.1),
        sig(te.0),
        sig(te.1),
        sig(rise)
    );
    Ok(Ranges {
        u0,
        te,
        note: Some(note),
    })
}
