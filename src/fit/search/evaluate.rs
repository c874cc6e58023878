//! chi^2 of one trajectory at every trial rho: map reads where the source is on the map, the
//! off-map point-source curve (exact solves at a subset, interpolated) elsewhere.

use super::grid::{GridRule, Line};
use super::readers::Readers;
use super::sums::{CurveSums, Weighted};
use crate::error::{Error, Result};
use crate::solve::ImageSolver;
use num_complex::Complex64;

/// Largest number of points between two exact point-source evaluations off the map.
pub const MAX_STRIDE: usize = 256;
/// Longest interpolation interval off the map, as a fraction of the source's clearance from the
/// lenses and caustics.
pub const CLEARANCE_REACH: f64 = 0.5;

/// Working memory of one thread, reused from trajectory to trajectory.
#[derive(Debug, Default)]
pub(super) struct Scratch {
    /// Source positions at the data set's times.
    pub(super) positions: Vec<(f64, f64)>,
    /// The reads of the map with the widest margin in the window's time span (NaN off it).
    pub(super) on_widest: Vec<f64>,
    /// Whether a point needs the point-source magnification.
    pub(super) needed: Vec<bool>,
    /// The point-source magnifications (NaN where not needed).
    pub(super) point: Vec<f64>,
    /// The host's own magnification at the needed points.
    pub(super) host: Vec<f64>,
    /// chi^2 at each trial rho.
    pub(super) chi2: Vec<f64>,
}

impl Scratch {
    /// chi^2 of a trajectory at each trial rho (or only at the reader `only`), into `self.chi2`
    /// (infinite where that rho could not be read or was not asked for).
    pub(super) fn trajectory_chi2(
        &mut self,
        solver: &mut ImageSolver,
        sets: &[Weighted],
        readers: &Readers,
        line: &Line,
        rule: &GridRule,
        only: Option<usize>,
    ) -> Result<()> {
        self.chi2.clear();
        self.chi2.resize(readers.rhos.len(), 0.0);
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
                let Some(conv) = conv.as_ref().filter(|_| only.is_none_or(|o| o == r)) else {
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
    pub(super) fn point_curve(
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

#[cfg(test)]
mod tests {
    use super::*;
    use crate::engine::{Engine, PolygonMapping};
    use crate::fit::model::Trajectory;
    use crate::fit::photometry::DataSet;
    use crate::lens::LensSystem;
    use crate::map::Window;

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
            &GridRule::default().rhos,
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
}
