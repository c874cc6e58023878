//! The finer levels of the grid on a map whose lines were laid out for a source larger than
//! the smallest trial radius (a wide window, or a budget of trajectories spread over many
//! timings): the best lines of each level, and lines between them at half its spacing.
//!
//! The grid's lines are spaced for its radius `g` ([`GridRule::grid_rho`]) so that no caustic
//! crossing is stepped over by a source of radius `g`; a source of the trial radii sees the
//! same caustics sharper, and the line nearest the truth can rank below lines that explain
//! less at `g`, as the grid reads the map smoothed by it. So the [`GridRule::beam`] best
//! distinct lines by the capped search chi^2 (and a quarter as many by the plain one) are each
//! surrounded by lines a half spacing away in alpha, u0, t0 and tE (the other 80 combinations of
//! -1, 0, +1 half steps), read at every trial radius; the best of all lines so far seed the
//! next level, at half the spacing again, until it is within [`FINE_SPACING`] times the
//! smallest trial radius. On a map at a drawn resonant binary's own (s, q), whose window is
//! wide and whose seed's timing was not trusted (20 timings a line, so the budget of 10,000
//! trajectories spaces the lines for a source many times the trial radii), the grid's best had
//! search chi^2 12,407 and the truth's path about 11,000 to 11,700; a budget of 40,000 found
//! 4,073, and the finer levels 4,606 with 17,036 trajectories against the grid's 8,219
//! (docs/recovery.md).
//! The survivors are spread in alpha and u0 (taken by their timing too, they were timings of a
//! few lines, and the levels found nothing), and a neighbour is timed on its own valley (kept
//! at its survivor's timing, a line one u0 step nearer the host had a tE many steps off, and
//! the levels found nothing).

use super::grid::{alpha_gap, grid_steps, ranked, GridRule, Line};
use crate::error::Result;
use crate::fit::model::Trajectory;
use crate::map::Window;

/// Survivors of a level differ in alpha or u0 by more than this many of its steps.
pub const SURVIVOR_GAP: f64 = 2.0;

/// The levels stop once their spacing is within this factor of the smallest trial radius.
pub const FINE_SPACING: f64 = 2.5;

/// The source radii the finer levels after a grid laid out for `grid_rho` are spaced for:
/// halving until within [`FINE_SPACING`] of `rho_min` (none when the grid is that fine
/// already).
///
/// ```
/// use causeway::fit::search::beam::levels;
/// assert_eq!(levels(0.02, 1e-3), vec![0.01, 0.005, 0.0025]);
/// assert!(levels(2e-3, 1e-3).is_empty());
/// ```
pub fn levels(grid_rho: f64, rho_min: f64) -> Vec<f64> {
    let mut out = Vec::new();
    let mut rho = grid_rho;
    while rho > FINE_SPACING * rho_min * (1.0 + 1e-9) && out.len() < 8 {
        rho /= 2.0;
        out.push(rho);
    }
    out
}

/// What the finer levels of one map need.
pub(super) struct Level<'a> {
    pub(super) rule: &'a GridRule,
    pub(super) window: &'a Window,
    /// Every data point's time, sorted.
    pub(super) times: &'a [f64],
}

impl Level<'_> {
    /// The finer levels after a grid laid out for `grid_rho`: at each of [`levels`], the
    /// survivors by the capped and the plain search chi^2 among all `lines` so far (spread at
    /// the previous level's steps), and their [`neighbours`] appended to `lines` with their
    /// values from `evaluate` appended to `evaluated`.
    pub(super) fn descend(
        &self,
        lines: &mut Vec<Line>,
        evaluated: &mut Vec<Option<[(f64, usize); 2]>>,
        grid_rho: f64,
        valley: impl Fn(f64, f64) -> (f64, f64) + Copy,
        evaluate: impl Fn(&[Line]) -> Vec<Option<[(f64, usize); 2]>>,
    ) -> Result<()> {
        let mut spacing = grid_rho;
        for rho in levels(grid_rho, self.rule.rho_min()) {
            let steps = grid_steps(self.window, spacing);
            let mut seeds = survivors(evaluated, lines, 0, self.rule.beam, steps);
            let plain = plain_survivors(self.rule);
            seeds.extend(survivors(evaluated, lines, 1, plain, steps));
            if seeds.is_empty() {
                break;
            }
            let finer = neighbours(&seeds, rho, self.window, self.times, valley)?;
            evaluated.extend(evaluate(&finer));
            lines.extend(finer);
            spacing = rho;
        }
        Ok(())
    }
}

/// The lines around each of `survivors` for a level spaced for `rho` on `window`: alpha by
/// `2 rho / R` (`R` the window's half-diagonal), u0 by `2 rho`, t0 by `2 rho tE` and tE by a
/// factor `exp(2 rho / R)`, each -1, 0 or +1 step (the survivor itself left out, no negative
/// u0), kept where they cross the window at one of the sorted `times`. A step moves the
/// source in the window by at most about `2 rho`. The timing moves with the geometry as the
/// grid's does: `valley(alpha, u0)` gives a line's `(t0, tE)` before the grid's factors and
/// shifts, and each neighbour keeps its survivor's factor `tE / tE_v` and shift
/// `(t0 - t0_v) / tE` on its own `(t0_v, tE_v)` (a high-magnification line one u0 step off
/// has a tE many steps off).
pub(super) fn neighbours(
    survivors: &[Trajectory],
    rho: f64,
    window: &Window,
    times: &[f64],
    valley: impl Fn(f64, f64) -> (f64, f64),
) -> Result<Vec<Line>> {
    let reach = window.width / std::f64::consts::SQRT_2;
    let (d_alpha, d_u0, d_ln_te) = (2.0 * rho / reach, 2.0 * rho, 2.0 * rho / reach);
    let steps = [-1.0, 0.0, 1.0];
    let mut out = Vec::new();
    for tr in survivors {
        let l = tr.line();
        let (t0_v, te_v) = valley(l.alpha, l.u0);
        let (factor, shift) = (l.te / te_v, (l.t0 - t0_v) / l.te);
        for i in steps {
            for j in steps {
                let (alpha, u0) = (l.alpha + i * d_alpha, l.u0 + j * d_u0);
                if u0 < 0.0 {
                    continue;
                }
                let (t0_v, te_v) = valley(alpha, u0);
                // Geometry outside, timing inside: the timings of one line share its off-map
                // curve (`profile.rs`).
                for k in steps {
                    for m in steps {
                        if i == 0.0 && j == 0.0 && k == 0.0 && m == 0.0 {
                            continue;
                        }
                        let te = te_v * factor * (m * d_ln_te).exp();
                        let t0 = t0_v + (shift + k * d_u0) * te;
                        let moved = Trajectory::straight(t0, u0, te, alpha)?;
                        out.extend(Line::observed(moved, window, times));
                    }
                }
            }
        }
    }
    Ok(out)
}

/// The `count` best lines of `evaluated` by `measure` (index 0 capped, 1 plain) whose
/// geometry differs from every better one's by more than [`SURVIVOR_GAP`] steps `steps` in
/// alpha or u0 (whatever their timing): the seeds of a level, spread over the window rather
/// than timings of one line.
pub(super) fn survivors(
    evaluated: &[Option<[(f64, usize); 2]>],
    lines: &[Line],
    measure: usize,
    count: usize,
    steps: (f64, f64),
) -> Vec<Trajectory> {
    let mut kept: Vec<Trajectory> = Vec::new();
    for (_, i, _) in ranked(evaluated, measure) {
        if kept.len() == count {
            break;
        }
        let l = lines[i].trajectory.line();
        let apart = |k: &Trajectory| {
            let m = k.line();
            alpha_gap(m.alpha, l.alpha) > SURVIVOR_GAP * steps.0
                || (m.u0 - l.u0).abs() > SURVIVOR_GAP * steps.1
        };
        if kept.iter().all(apart) {
            kept.push(lines[i].trajectory);
        }
    }
    kept
}

/// How many survivors by the plain search chi^2 each level keeps beside the `beam` by the
/// capped one: a quarter as many, at least one (none without a cap).
pub(super) fn plain_survivors(rule: &GridRule) -> usize {
    if rule.point_cap.is_finite() {
        (rule.beam / 4).max(1)
    } else {
        0
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn neighbours_surround_the_line_by_half_a_spacing() {
        let window = Window::new((0.0, 0.0), 0.2, 100).unwrap();
        let tr = Trajectory::straight(10.0, 0.05, 20.0, 1.0).unwrap();
        let times: Vec<f64> = (0..200).map(|k| k as f64 * 0.1).collect();
        let lines = neighbours(&[tr], 0.005, &window, &times, |_, _| (10.0, 20.0)).unwrap();
        assert_eq!(lines.len(), 80);
        let reach = 0.2 / 2f64.sqrt();
        for line in &lines {
            let l = line.trajectory.line();
            // Each parameter is the survivor's or one step off it (common practice: a 3^4
            // stencil).
            let off = |d: f64, step: f64| (d / step).round() * step - d;
            assert!(off(l.alpha - 1.0, 0.01 / reach).abs() < 1e-12);
            assert!(off(l.u0 - 0.05, 0.01).abs() < 1e-12);
            assert!(off((l.t0 - 10.0) / l.te, 0.01).abs() < 1e-12);
            assert!(off((l.te / 20.0).ln(), 0.01 / reach).abs() < 1e-12);
            assert!((l.alpha - 1.0).abs() < 0.011 / reach && (l.u0 - 0.05).abs() < 0.011);
        }
    }
}
