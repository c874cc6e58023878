//! Local minimisation of chi^2 (Nelder-Mead simplex, from the argmin crate; Levenberg-Marquardt
//! on the residuals, written here) and parameter uncertainties from its curvature.
//!
//! The simplex is restarted once from its own minimum (common practice: a collapsed simplex can
//! stop short of the minimum). Uncertainties are the square roots of the diagonal of
//! `C = 2 H^-1`, `H` the Hessian of chi^2 by central differences (for chi^2, the inverse of half
//! the Hessian is the covariance: Press et al., Numerical Recipes, section 15.6).

use crate::error::{Error, Result};
use argmin::core::{CostFunction, Executor, State};
use argmin::solver::neldermead::NelderMead;
use std::sync::atomic::{AtomicU64, Ordering};

/// Value returned for parameters outside the model's domain, so the simplex turns back.
pub const INFEASIBLE: f64 = 1e300;

/// The function the simplex minimises, and the evaluations it has spent (argmin's own count
/// stays empty for a bare cost function).
struct Objective<'a>(&'a (dyn Fn(&[f64]) -> f64 + Sync), &'a AtomicU64);

impl CostFunction for Objective<'_> {
    type Param = Vec<f64>;
    type Output = f64;
    fn cost(&self, p: &Self::Param) -> std::result::Result<f64, argmin::core::Error> {
        self.1.fetch_add(1, Ordering::Relaxed);
        let v = (self.0)(p);
        Ok(if v.is_finite() { v } else { INFEASIBLE })
    }
}

/// A local minimum: parameters, value, and evaluations spent.
#[derive(Debug, Clone, PartialEq)]
pub struct Minimum {
    /// Parameters at the minimum.
    pub x: Vec<f64>,
    /// Function value there.
    pub value: f64,
    /// Function evaluations spent.
    pub evaluations: u64,
}

/// Minimises `f` from `x0` with an initial simplex of steps `step` along each axis, until the
/// spread of the simplex values is below `tolerance` (or `max_iters` iterations).
///
/// ```
/// use causeway::fit::optimize::minimize;
/// let rosen = |p: &[f64]| (1.0 - p[0]).powi(2) + 100.0 * (p[1] - p[0] * p[0]).powi(2);
/// let m = minimize(&rosen, &[-1.2, 1.0], &[0.1, 0.1], 1e-12, 5000).unwrap();
/// assert!((m.x[0] - 1.0).abs() < 1e-4 && (m.x[1] - 1.0).abs() < 1e-4);
/// // Every evaluation counted: from (-1.2, 1) the simplex needs some hundreds (common
/// // practice; Nelder and Mead 1965 report that order for it, from memory); 0 was uncounted.
/// assert!(m.evaluations > 100 && m.evaluations < 20_000);
/// ```
pub fn minimize(
    f: &(dyn Fn(&[f64]) -> f64 + Sync),
    x0: &[f64],
    step: &[f64],
    tolerance: f64,
    max_iters: u64,
) -> Result<Minimum> {
    let mut x = x0.to_vec();
    let evaluations = AtomicU64::new(0);
    let mut value = f64::INFINITY;
    for _ in 0..2 {
        let mut simplex = vec![x.clone()];
        for (i, &h) in step.iter().enumerate() {
            let mut v = x.clone();
            v[i] += h;
            simplex.push(v);
        }
        let solver = NelderMead::new(simplex)
            .with_sd_tolerance(tolerance)
            .map_err(|e| Error::Numerical(format!("minimiser setup: {e}")))?;
        let result = Executor::new(Objective(f, &evaluations), solver)
            .configure(|state| state.max_iters(max_iters))
            .run()
            .map_err(|e| Error::Numerical(format!("minimiser: {e}")))?;
        let state = result.state();
        if let Some(best) = state.get_best_param() {
            if state.get_best_cost() <= value {
                x = best.clone();
                value = state.get_best_cost();
            }
        }
    }
    Ok(Minimum {
        x,
        value,
        evaluations: evaluations.into_inner(),
    })
}

/// Minimises the sum of squares of `residuals` from `x0` by Levenberg-Marquardt (Marquardt
/// 1963; Press et al., Numerical Recipes, section 15.5): the Jacobian by forward differences
/// (its columns evaluated in parallel) of steps at most `h`, each shortened where the residuals
/// change by more than three times [`STEP_CHANGE`] over it (see there), steps from
/// `(J^T J + lambda diag(J^T J)) dx = -J^T r`, `lambda` divided by 3 after a step that lowers
/// the sum and multiplied by 4 until one does. Stops when an accepted step gains less than
/// `tolerance`, when `lambda` exceeds `1e10`, or after `max_iters` Jacobians. `residuals`
/// returns `None` outside the model's domain.
///
/// ```
/// use causeway::fit::optimize::least_squares;
/// // y = 2 exp(-0.5 t), sampled exactly: a and b are found from (1, 1).
/// let t: Vec<f64> = (0..20).map(|k| 0.25 * k as f64).collect();
/// let r = |p: &[f64]| Some(t.iter().map(|&t| p[0] * (-p[1] * t).exp() - 2.0 * (-0.5 * t).exp()).collect());
/// let m = least_squares(&r, &[1.0, 1.0], &[1e-7, 1e-7], 1e-20, 100).unwrap();
/// assert!((m.x[0] - 2.0).abs() < 1e-6 && (m.x[1] - 0.5).abs() < 1e-6);
/// ```
pub fn least_squares(
    residuals: &(dyn Fn(&[f64]) -> Option<Vec<f64>> + Sync),
    x0: &[f64],
    h: &[f64],
    tolerance: f64,
    max_iters: u64,
) -> Result<Minimum> {
    let n = x0.len();
    let sum_sq = |r: &[f64]| r.iter().map(|v| v * v).sum::<f64>();
    let mut x = x0.to_vec();
    let mut r = residuals(&x)
        .filter(|r| r.iter().all(|v| v.is_finite()))
        .ok_or_else(|| Error::Numerical("least squares: the start is outside the model".into()))?;
    let mut value = sum_sq(&r);
    let mut evaluations = 1;
    let mut lambda = 1e-3;
    let mut steps = h.to_vec();
    'outer: for _ in 0..max_iters {
        let Some((jac, spent)) = jacobian(residuals, &x, &r, h, &mut steps) else {
            break;
        };
        evaluations += spent;
        let jtj = normal_matrix(&jac);
        let jtr: Vec<f64> = (0..n).map(|a| dot(&jac[a], &r)).collect();
        loop {
            let mut m = jtj.clone();
            for (i, row) in m.iter_mut().enumerate() {
                row[i] += lambda * jtj[i][i].max(1e-300);
            }
            let Some(inv) = invert_positive_definite(&m) else {
                lambda *= 4.0;
                if lambda > 1e10 {
                    break 'outer;
                }
                continue;
            };
            let next: Vec<f64> = (0..n)
                .map(|i| x[i] - (0..n).map(|k| inv[i][k] * jtr[k]).sum::<f64>())
                .collect();
            evaluations += 1;
            let trial = residuals(&next).filter(|r| r.iter().all(|v| v.is_finite()));
            if let Some(rn) = trial {
                let v = sum_sq(&rn);
                if v < value {
                    let gain = value - v;
                    (x, r, value) = (next, rn, v);
                    lambda = (lambda / 3.0).max(1e-12);
                    if gain < tolerance {
                        break 'outer;
                    }
                    break;
                }
            }
            lambda *= 4.0;
            if lambda > 1e10 {
                break 'outer;
            }
        }
    }
    Ok(Minimum {
        x,
        value,
        evaluations,
    })
}

/// The change of the residuals (Euclidean norm, in the residuals' units: for normalised
/// residuals, standard deviations) that a Jacobian column's difference step aims at.
///
/// [`least_squares`] steps column `j` by its last step there, doubled but at most the `h`
/// given, and shortens it (at most three times) while the residuals change by more than three
/// times this, to the step that a linear change would bring to it. A fixed step fails where
/// the data fix a parameter far more tightly than it expects: over a densely sampled caustic
/// crossing t0 is fixed to seconds, and a step of minutes differences across the curvature of
/// the valley rather than along it, so the minimiser crawls (on an invented stellar binary,
/// forty Jacobians from starts a third of a step off ended 15 to 1000 above the minimum that
/// adapted steps reached in ten to twenty).
pub const STEP_CHANGE: f64 = 3.0;

/// The Jacobian of `residuals` at `x` by forward differences from the residuals `r0` at `x`,
/// column by column (in parallel), with steps adapted from `steps` (at most `largest`; see
/// [`STEP_CHANGE`]), which keeps the steps taken; and the evaluations spent. `None` where a
/// step leaves the model's domain.
fn jacobian(
    residuals: &(dyn Fn(&[f64]) -> Option<Vec<f64>> + Sync),
    x: &[f64],
    r0: &[f64],
    largest: &[f64],
    steps: &mut [f64],
) -> Option<(Vec<Vec<f64>>, u64)> {
    use rayon::prelude::*;
    let columns: Vec<(Vec<f64>, f64, u64)> = (0..x.len())
        .into_par_iter()
        .map(|j| {
            let mut h = (2.0 * steps[j]).min(largest[j]);
            let mut p = x.to_vec();
            let mut spent = 0;
            loop {
                p[j] = x[j] + h;
                let r = residuals(&p)?;
                spent += 1;
                let change = r
                    .iter()
                    .zip(r0)
                    .map(|(a, b)| (a - b) * (a - b))
                    .sum::<f64>()
                    .sqrt();
                if change <= 3.0 * STEP_CHANGE || spent > 3 {
                    let column: Vec<f64> = r.iter().zip(r0).map(|(a, b)| (a - b) / h).collect();
                    return column
                        .iter()
                        .all(|v| v.is_finite())
                        .then_some((column, h, spent));
                }
                h *= (STEP_CHANGE / change).max(0.01);
            }
        })
        .collect::<Option<_>>()?;
    let spent = columns.iter().map(|c| c.2).sum();
    let jac = columns
        .into_iter()
        .zip(steps.iter_mut())
        .map(|((column, h, _), step)| {
            *step = h;
            column
        })
        .collect();
    Some((jac, spent))
}

/// `J^T J` of a Jacobian stored by columns.
fn normal_matrix(jac: &[Vec<f64>]) -> Vec<Vec<f64>> {
    (0..jac.len())
        .map(|a| (0..jac.len()).map(|b| dot(&jac[a], &jac[b])).collect())
        .collect()
}

fn dot(a: &[f64], b: &[f64]) -> f64 {
    a.iter().zip(b).map(|(x, y)| x * y).sum()
}

/// Steps for [`covariance`] along each axis of a chi^2 `f` at `x`: starting at `h`, adapted (up
/// to four times per axis) until the second difference raises chi^2 by between 0.3 and 3,
/// about one standard deviation: far enough above the round-off of chi^2, near enough to stay
/// quadratic.
///
/// ```
/// use causeway::fit::optimize::curvature_steps;
/// let chi2 = |p: &[f64]| (p[0] / 2.0).powi(2);
/// let h = curvature_steps(&chi2, &[0.0], &[1e-4]);
/// assert!(h[0] > 0.5 && h[0] < 4.0);
/// ```
pub fn curvature_steps(f: &(dyn Fn(&[f64]) -> f64 + Sync), x: &[f64], h: &[f64]) -> Vec<f64> {
    let f0 = f(x);
    let mut h = h.to_vec();
    for i in 0..x.len() {
        for _ in 0..4 {
            let mut p = x.to_vec();
            p[i] = x[i] + h[i];
            let up = f(&p);
            p[i] = x[i] - h[i];
            let rise = up + f(&p) - 2.0 * f0;
            if !rise.is_finite() || rise > 3.0 {
                h[i] *= if rise.is_finite() {
                    (1.0 / rise).sqrt()
                } else {
                    0.1
                };
            } else if rise < 0.3 {
                h[i] *= if rise > 0.0 {
                    (1.0 / rise).sqrt().min(10.0)
                } else {
                    10.0
                };
            } else {
                break;
            }
        }
    }
    h
}

/// Covariance `2 H^-1` of the parameters at a minimum of a chi^2 `f`, with the Hessian `H` from
/// central differences of steps `h` (see [`curvature_steps`] to choose them). `None` where `H`
/// is not positive definite (a flat or saddle direction).
///
/// ```
/// use causeway::fit::optimize::covariance;
/// // chi^2 = (x/2)^2 + (y/3)^2 has sigma_x = 2, sigma_y = 3.
/// let chi2 = |p: &[f64]| (p[0] / 2.0).powi(2) + (p[1] / 3.0).powi(2);
/// let c = covariance(&chi2, &[0.0, 0.0], &[0.1, 0.1]).unwrap();
/// assert!((c[0][0].sqrt() - 2.0).abs() < 1e-9 && (c[1][1].sqrt() - 3.0).abs() < 1e-9);
/// ```
pub fn covariance(
    f: &(dyn Fn(&[f64]) -> f64 + Sync),
    x: &[f64],
    h: &[f64],
) -> Option<Vec<Vec<f64>>> {
    let n = x.len();
    let f0 = f(x);
    let at = |moves: &[(usize, f64)]| {
        let mut p = x.to_vec();
        for &(i, d) in moves {
            p[i] += d * h[i];
        }
        f(&p)
    };
    let mut hess = vec![vec![0.0; n]; n];
    for i in 0..n {
        hess[i][i] = (at(&[(i, 1.0)]) - 2.0 * f0 + at(&[(i, -1.0)])) / (h[i] * h[i]);
        for j in 0..i {
            let v = (at(&[(i, 1.0), (j, 1.0)])
                - at(&[(i, 1.0), (j, -1.0)])
                - at(&[(i, -1.0), (j, 1.0)])
                + at(&[(i, -1.0), (j, -1.0)]))
                / (4.0 * h[i] * h[j]);
            hess[i][j] = v;
            hess[j][i] = v;
        }
    }
    let inverse = invert_positive_definite(&hess)?;
    Some(
        inverse
            .into_iter()
            .map(|row| row.into_iter().map(|v| 2.0 * v).collect())
            .collect(),
    )
}

/// Covariance `(J^T J)^-1` of the parameters at a least-squares minimum of `residuals`
/// (normalised residuals, so that chi^2 is their sum of squares), with the Jacobian from
/// forward differences of steps at most `h` (adapted as in [`least_squares`]): the
/// Gauss-Newton approximation, `x.len()` evaluations (more where a step is shortened) instead
/// of the Hessian's `2 n^2`. `None` where `J^T J` is singular.
///
/// ```
/// use causeway::fit::optimize::gauss_newton_covariance;
/// // Residuals (y_i - a - b t_i) / 0.5 of a line through t = -1, 1: J^T J = diag(8, 8), so
/// // each variance is 1/8.
/// let r = |p: &[f64]| Some(vec![(1.0 - p[0] + p[1]) / 0.5, (3.0 - p[0] - p[1]) / 0.5]);
/// let c = gauss_newton_covariance(&r, &[2.0, 1.0], &[1e-6, 1e-6]).unwrap();
/// assert!((c[0][0] - 0.125).abs() < 1e-6 && (c[1][1] - 0.125).abs() < 1e-6);
/// ```
pub fn gauss_newton_covariance(
    residuals: &(dyn Fn(&[f64]) -> Option<Vec<f64>> + Sync),
    x: &[f64],
    h: &[f64],
) -> Option<Vec<Vec<f64>>> {
    let r0 = residuals(x)?;
    let (jac, _) = jacobian(residuals, x, &r0, h, &mut h.to_vec())?;
    invert_positive_definite(&normal_matrix(&jac))
}

/// Inverse of a symmetric positive-definite matrix by Cholesky factorisation; `None` if it is
/// not positive definite or not finite.
fn invert_positive_definite(a: &[Vec<f64>]) -> Option<Vec<Vec<f64>>> {
    let n = a.len();
    let mut l = vec![vec![0.0; n]; n];
    for i in 0..n {
        for j in 0..=i {
            let sum: f64 = a[i][j] - (0..j).map(|k| l[i][k] * l[j][k]).sum::<f64>();
            if i == j {
                if !(sum.is_finite() && sum > 0.0) {
                    return None;
                }
                l[i][i] = sum.sqrt();
            } else {
                l[i][j] = sum / l[j][j];
            }
        }
    }
    // L^-1 row by row (forward substitution), then A^-1 = L^-T L^-1.
    let mut linv = vec![vec![0.0; n]; n];
    for i in 0..n {
        let row: Vec<f64> = (0..n)
            .map(|c| {
                if c > i {
                    return 0.0;
                }
                let rhs = if i == c { 1.0 } else { 0.0 };
                let sum: f64 = (c..i).map(|k| l[i][k] * linv[k][c]).sum();
                (rhs - sum) / l[i][i]
            })
            .collect();
        linv[i] = row;
    }
    let mut inv = vec![vec![0.0; n]; n];
    for i in 0..n {
        for j in 0..n {
            inv[i][j] = (i.max(j)..n).map(|k| linv[k][i] * linv[k][j]).sum();
        }
    }
    Some(inv)
}
