//! The timings of the grid's lines on one map: from the seed's single-lens valley about the
//! host, shifted and stretched by the rule's factors, timed on the strongest feature, and
//! anchored on the data's crossings (see "The grid rule" in the module above).

use super::anchor::{anchored_timings, inside_intervals, Anchor};
use super::grid::{host_timing, strongest_feature, GridRule, Line};
use super::readers::Readers;
use super::seed::Seed;
use crate::error::Result;
use crate::fit::model::Trajectory;
use crate::map::{MagnificationMap, Window};
use num_complex::Complex64;

/// The grid's lines on `map` with their timings: each (alpha, u0) of [`GridRule::lines`]
/// timed from the seed's valley about the host ([`host_timing`]) with every tE factor and t0
/// shift (in units of the line's tE), and, with [`GridRule::timed`] and a known anomaly, timed
/// once more per tE factor so that its strongest feature on the smoothest reader falls at the
/// anomaly; the lines timed on the data's crossings of `caustics` ([`anchored_lines`]) come
/// first, and their anchors are returned with the lines. Only lines that cross the window at
/// an observed time are kept.
pub(super) fn timed_lines(
    seed: &Seed,
    map: &MagnificationMap,
    rule: &GridRule,
    readers: &Readers,
    grid_rho: f64,
    caustics: &[Vec<Complex64>],
    times: &[f64],
) -> Result<(Vec<Line>, Vec<Anchor>)> {
    let smoothest = readers.convolved[0].iter().rev().flatten().next();
    let grid = rule.lines_at(&map.window, seed, grid_rho);
    let (mut lines, anchors) = anchored_lines(seed, &map.window, &grid, caustics, times)?;
    for &(alpha, u0) in &grid {
        let (t0, te) = host_timing(seed, readers.host.position, alpha, u0);
        let base = Trajectory::straight(t0, u0, te, alpha)?;
        let feature = match (rule.timed, seed.anomaly, smoothest) {
            (true, Some(ta), Some(conv)) => {
                strongest_feature(&base, &map.window, conv, &readers.host, grid_rho)
                    .map(|tau| (ta, tau))
            }
            _ => None,
        };
        for &f in &rule.te_factors {
            let te = te * f;
            for &shift in &rule.t0_shifts {
                let tr = Trajectory::straight(t0 + shift * te, u0, te, alpha)?;
                lines.extend(Line::observed(tr, &map.window, times));
            }
            if let Some((ta, tau)) = feature {
                let tr = Trajectory::straight(ta - tau * te, u0, te, alpha)?;
                lines.extend(Line::observed(tr, &map.window, times));
            }
        }
    }
    for (alpha, u0) in rule.outer_lines(&map.window, seed, readers.host.position) {
        let (t0, te) = host_timing(seed, readers.host.position, alpha, u0);
        for &f in &rule.te_factors {
            for &shift in &rule.t0_shifts {
                let tr = Trajectory::straight(t0 + shift * te * f, u0, te * f, alpha)?;
                lines.push(Line::on(tr, &map.window));
            }
        }
    }
    Ok((lines, anchors))
}

/// The lines of `grid` through a caustic, each timed on the data's crossings
/// ([`anchored_timings`]) with tE within [`super::anchor::TE_REACH`] of the seed's, or of its
/// range when its timing is not trusted ([`Seed::anchored_te`]; not of the valley's at the
/// line's impact parameter about the host, which runs to its bound where that nears 0, as a
/// stellar binary's line through the caustic can pass close to the host), with their anchors.
fn anchored_lines(
    seed: &Seed,
    window: &Window,
    grid: &[(f64, f64)],
    caustics: &[Vec<Complex64>],
    times: &[f64],
) -> Result<(Vec<Line>, Vec<Anchor>)> {
    let (mut lines, mut anchors) = (Vec::new(), Vec::new());
    for &(alpha, u0) in grid {
        let inside = inside_intervals(caustics, alpha, u0);
        for anchor in anchored_timings(&inside, &seed.crossings, seed.anchored_te()) {
            let (t0, te) = anchor.timing();
            let tr = Trajectory::straight(t0, u0, te, alpha)?;
            if let Some(line) = Line::observed(tr, window, times) {
                lines.push(line);
                anchors.push(anchor);
            }
        }
    }
    Ok((lines, anchors))
}
