//! The kept lines of a map: the best distinct lines of the grid by the capped and by the
//! plain search chi^2, and the polish of each on its map.

use super::anchor::Anchor;
use super::evaluate::Scratch;
use super::grid::{distinct, ranked, GridRule, Line};
use super::readers::Readers;
use super::sums::Weighted;
use super::{Candidate, POLISH_ITERATIONS, POLISH_TOLERANCE, RHO_RETRIES};
use crate::error::Result;
use crate::fit::model::{BinaryModel, Trajectory};
use crate::fit::optimize::minimize;
use crate::map::Window;
use crate::solve::ImageSolver;
use num_complex::Complex64;

/// The lowest finite value of `chi2` and its index.
pub(super) fn lowest(chi2: &[f64]) -> Option<(f64, usize)> {
    chi2.iter()
        .enumerate()
        .filter(|(_, c)| c.is_finite())
        .min_by(|a, b| a.1.total_cmp(b.1))
        .map(|(i, &c)| (c, i))
}

/// Which search chi^2 ranks and polishes: capped per point ([`GridRule::point_cap`]) or plain.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(super) enum Measure {
    Capped,
    Plain,
}

/// A line of the grid kept for the polish.
#[derive(Debug, Clone, Copy)]
pub(super) struct Kept {
    pub(super) candidate: Candidate,
    /// Index of its best trial radius.
    pub(super) radius: usize,
    /// Index of the line in the grid.
    pub(super) line: usize,
}

/// The `keep` best distinct lines by `measure` of the grid's evaluated lines (each its best
/// capped and plain `(chi2, radius index)`); lines closer than the grid's `steps` in
/// (alpha, u0) to a better one are skipped.
pub(super) fn best_lines(
    evaluated: &[Option<[(f64, usize); 2]>],
    measure: Measure,
    keep: usize,
    steps: (f64, f64),
    model_at: impl Fn(usize, usize) -> BinaryModel,
) -> Vec<Kept> {
    let mut kept: Vec<Kept> = Vec::new();
    for (chi2, line, radius) in ranked(evaluated, measure as usize) {
        let model = model_at(line, radius);
        if kept.iter().all(|k| {
            distinct(
                &k.candidate.model.trajectory,
                &model.trajectory,
                steps.0,
                steps.1,
            )
        }) {
            kept.push(Kept {
                candidate: Candidate { model, chi2 },
                radius,
                line,
            });
            if kept.len() == keep {
                break;
            }
        }
    }
    kept
}

/// What the polish of a kept line on its map needs.
pub(super) struct Polisher<'a> {
    pub(super) solver: &'a ImageSolver,
    pub(super) sets: &'a [Weighted<'a>],
    pub(super) readers: &'a Readers,
    pub(super) rule: &'a GridRule,
    /// The grid's steps in alpha and u0, the simplex's first steps.
    pub(super) steps: (f64, f64),
    pub(super) window: &'a Window,
    /// The map's caustics, where lines are anchored on the data's crossings.
    pub(super) caustics: &'a [Vec<Complex64>],
    /// The chi^2 it minimises.
    pub(super) measure: Measure,
}

impl Polisher<'_> {
    /// Polishes a grid candidate read at `readers.rhos[r]`: a local minimisation of the map's
    /// chi^2 over (alpha, u0, t0, ln tE) at that radius. The polished line is then read at
    /// every trial radius and polished again at the [`RHO_RETRIES`] best others (a caustic
    /// crossing seen at a few points makes chi^2 rugged in rho, and the grid's best radius is
    /// often not the one nearest the truth); the best of these is kept. A line timed on the
    /// data's crossings (`anchor`) is polished in the crossing coordinates instead:
    /// `(alpha, u0, T1, T2)`, its timing following the crossing times (see [`Anchor`]).
    pub(super) fn run(
        &self,
        start: &Candidate,
        r: usize,
        anchor: Option<Anchor>,
    ) -> Result<Candidate> {
        let trials = self.rule.rhos.len();
        let (mut best, anchor) = self.polish_at(start, r, anchor)?;
        let chi2 = self.chi2_all(&Line::on(best.model.trajectory, self.window));
        let mut others: Vec<usize> = (0..trials)
            .filter(|&i| i != r && chi2[i].is_finite())
            .collect();
        others.sort_by(|&a, &b| chi2[a].total_cmp(&chi2[b]));
        // A candidate at the grid's smoothing radius (beyond the trial radii) must move to one.
        let retries = if r < trials {
            RHO_RETRIES
        } else {
            RHO_RETRIES + 1
        };
        let from = best;
        for &i in others.iter().take(retries) {
            let at_trial = Candidate {
                model: BinaryModel {
                    rho: self.rule.rhos[i],
                    ..from.model
                },
                chi2: chi2[i],
            };
            let (polished, _) = self.polish_at(&at_trial, i, anchor)?;
            if polished.chi2 < best.chi2 || best.model.rho == from.model.rho && r >= trials {
                best = polished;
            }
        }
        Ok(best)
    }

    /// chi^2 of `line` at every reader's radius (infinite where it cannot be read).
    fn chi2_all(&self, line: &Line) -> Vec<f64> {
        let mut solver = self.solver.clone();
        let mut scratch = Scratch::default();
        match scratch.trajectory_chi2(&mut solver, self.sets, self.readers, line, self.rule, None) {
            Ok(()) => self.measured(&scratch).to_vec(),
            Err(_) => vec![f64::INFINITY; self.readers.rhos.len()],
        }
    }

    /// The chi^2 of the polisher's measure at every radius of `scratch`'s last evaluation.
    fn measured<'s>(&self, scratch: &'s Scratch) -> &'s [f64] {
        match self.measure {
            Measure::Capped => &scratch.chi2,
            Measure::Plain => &scratch.plain,
        }
    }

    /// The polish at one radius, in the crossing coordinates of `anchor` where there is one;
    /// keeps the start if the minimisation finds nothing better. Returns the polished line's
    /// anchor with it.
    fn polish_at(
        &self,
        start: &Candidate,
        r: usize,
        anchor: Option<Anchor>,
    ) -> Result<(Candidate, Option<Anchor>)> {
        let l = start.model.trajectory.line();
        // The coordinates: (alpha, u0, t0, ln tE), or (alpha, u0, T1, T2) for an anchored line.
        let trajectory = |p: &[f64]| -> Option<(Trajectory, Option<Anchor>)> {
            let (t0, te, moved) = match anchor {
                None => (p[2], p[3].exp(), None),
                Some(a) => {
                    let moved = a.moved(self.caustics, p[0], p[1], (p[2], p[3]))?;
                    let (t0, te) = moved.timing();
                    (t0, te, Some(moved))
                }
            };
            Some((Trajectory::straight(t0, p[1], te, p[0]).ok()?, moved))
        };
        let (x0, step) = match anchor {
            None => (
                [l.alpha, l.u0, l.t0, l.te.ln()],
                [self.steps.0, self.steps.1, 0.01 * l.te, 0.03],
            ),
            // The crossing times move by a source radius's crossing time at first.
            Some(a) => {
                let h = self.readers.rhos[r] * l.te;
                (
                    [l.alpha, l.u0, a.times.0, a.times.1],
                    [self.steps.0, self.steps.1, h, h],
                )
            }
        };
        let work = std::sync::Mutex::new((self.solver.clone(), Scratch::default()));
        let chi2 = |p: &[f64]| -> f64 {
            let Some((trajectory, _)) = trajectory(p) else {
                return f64::INFINITY;
            };
            let line = Line::on(trajectory, self.window);
            let mut guard = work.lock().unwrap_or_else(|e| e.into_inner());
            let (solver, scratch) = &mut *guard;
            match scratch.trajectory_chi2(
                solver,
                self.sets,
                self.readers,
                &line,
                self.rule,
                Some(r),
            ) {
                Ok(()) => self.measured(scratch)[r],
                Err(_) => f64::INFINITY,
            }
        };
        // The start as the polish reads it (the grid's value shares its line's off-map curve).
        let start = Candidate {
            chi2: chi2(&x0),
            ..*start
        };
        let found = minimize(&chi2, &x0, &step, POLISH_TOLERANCE, POLISH_ITERATIONS)?;
        let polished = trajectory(&found.x).filter(|_| found.value < start.chi2);
        let Some((trajectory, moved)) = polished else {
            return Ok((start, anchor));
        };
        let model = BinaryModel {
            trajectory,
            ..start.model
        };
        Ok((
            Candidate {
                model,
                chi2: found.value,
            },
            moved,
        ))
    }
}
