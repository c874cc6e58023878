//! chi^2 of one trajectory at every trial rho: map reads where the source is on the map, the
//! off-map point-source curve (exact solves at a subset, interpolated) elsewhere.

use super::grid::{GridRule, Line};
use super::profile::{LineContext, LineProfile};
use super::readers::{Readers, Stacked};
use super::sums::{CurveSums, Weighted};
use crate::curve::Cell;
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
    /// The cell of each point in the window's time span on the map with the widest margin
    /// (`None` off it or at its edge), where every reader reads it.
    pub(super) cells: Vec<Option<Cell>>,
    /// The reads of the map with the widest margin in the window's time span (NaN off it).
    pub(super) on_widest: Vec<f64>,
    /// Whether a point needs the point-source magnification.
    pub(super) needed: Vec<bool>,
    /// The point-source magnifications (NaN where not needed).
    pub(super) point: Vec<f64>,
    /// The host's own magnification at the needed points.
    pub(super) host: Vec<f64>,
    /// chi^2 at each trial rho (capped per point at [`GridRule::point_cap`]).
    pub(super) chi2: Vec<f64>,
    /// The plain chi^2 at each trial rho (no cap; equal to `chi2` without one).
    pub(super) plain: Vec<f64>,
    /// The flux sums of each interleaved reader, and one point's values at each.
    pub(super) sums: Vec<CurveSums>,
    pub(super) values: Vec<f64>,
    /// The curve at each point in the window's time span and each radius read (point by point,
    /// radii together), kept for the capped chi^2 ([`GridRule::point_cap`]; empty without a
    /// cap, which never reads it).
    pub(super) curves: Vec<f64>,
    /// One radius's curve at every point of a data set, for the capped chi^2.
    pub(super) curve: Vec<f64>,
    /// The points the capped chi^2 sets apart.
    pub(super) apart: Vec<usize>,
    /// The off-map curve of the current line for each limb-darkening law, shared by its
    /// timings (see [`super::profile`]); `None`: each trajectory samples its own.
    pub(super) profiles: Option<Vec<LineProfile>>,
}

impl Scratch {
    /// chi^2 of a trajectory at each trial rho (or only at the reader `only`), into `self.chi2`
    /// and, without the cap, into `self.plain` (infinite where that rho could not be read or
    /// was not asked for).
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
        self.plain.clear();
        self.plain.resize(readers.rhos.len(), 0.0);
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
            // Each point's cell is found once, on the reader with the widest margin, and
            // read on every reader (they share the window); points at the valid square's edge
            // take the full read.
            let wide = widest.and_then(|r| row[r].as_ref());
            self.cells.clear();
            self.on_widest.clear();
            for &(x, y) in &self.positions[ka..kb] {
                let cell = wide.and_then(|w| w.cell(x, y));
                self.cells.push(cell);
                self.on_widest.push(match (wide, cell) {
                    (Some(w), Some(c)) => w.read_cell(&c),
                    (Some(w), None) => w.read(x, y).unwrap_or(f64::NAN),
                    (None, _) => f64::NAN,
                });
            }
            self.needed.clear();
            self.needed.resize(times.len(), true);
            for (need, v) in self.needed[ka..kb].iter_mut().zip(&self.on_widest) {
                *need = v.is_nan();
            }
            if self.profiles.is_some() {
                self.point_from_profile(solver, readers, law, times, l, rule.interpolation_tol)?;
            } else {
                self.point_curve(solver, readers, times, l.te, rule.interpolation_tol)?;
            }
            let mut off = CurveSums::default();
            for i in (0..ka).chain(kb..times.len()) {
                off.add(weighted, i, self.point[i]);
            }
            if only.is_none() {
                self.every_radius(weighted, readers, law, (ka, kb), off, rule.point_cap)?;
                continue;
            }
            for (r, conv) in row.iter().enumerate() {
                let Some(conv) = conv.as_ref().filter(|_| only.is_none_or(|o| o == r)) else {
                    self.chi2[r] = f64::INFINITY;
                    self.plain[r] = f64::INFINITY;
                    continue;
                };
                let mut sums = off;
                self.curves.clear();
                for (i, cell) in (ka..kb).zip(&self.cells) {
                    let on = if widest == Some(r) {
                        self.on_widest[i - ka]
                    } else {
                        match cell {
                            Some(c) => conv.read_cell(c),
                            None => {
                                let (x, y) = self.positions[i];
                                conv.read(x, y).unwrap_or(f64::NAN)
                            }
                        }
                    };
                    let a = if on.is_nan() { self.point[i] } else { on };
                    if rule.point_cap.is_finite() {
                        self.curves.push(a);
                    }
                    sums.add(weighted, i, a);
                }
                if !sums.is_finite() {
                    return Err(Error::Numerical(
                        "search: point-source value missing".into(),
                    ));
                }
                self.chi2[r] += self.set_chi2(weighted, &sums, (ka, kb), (0, 1), rule.point_cap);
                self.plain[r] += weighted.chi2(&sums);
            }
        }
        Ok(())
    }

    /// Adds one data set's chi^2 at every radius to `self.chi2` (infinite where the radius
    /// cannot be read): the sums over the points in the window's time span `ka..kb` (index
    /// range of the set) added to `off`, those of the points outside it. A point's values at
    /// every radius are read together from the interleaved readers ([`Stacked`]); the sums of
    /// each radius run over the points in order, as one reader's alone would.
    fn every_radius(
        &mut self,
        weighted: &Weighted,
        readers: &Readers,
        law: usize,
        (ka, kb): (usize, usize),
        off: CurveSums,
        cap: f64,
    ) -> Result<()> {
        let row = &readers.convolved[law];
        let widest = readers.widest[law];
        let stacked: &Stacked = &readers.stacked[law];
        let k = stacked.readers.len();
        self.sums.clear();
        self.sums.resize(k, off);
        self.values.resize(k, 0.0);
        self.curves.clear();
        for (i, cell) in (ka..kb).zip(&self.cells) {
            let point = self.point[i];
            match cell {
                Some(c) => stacked.read(c, &mut self.values),
                None => {
                    let (x, y) = self.positions[i];
                    for (v, &r) in self.values.iter_mut().zip(&stacked.readers) {
                        *v = if widest == Some(r) {
                            self.on_widest[i - ka]
                        } else {
                            row[r]
                                .as_ref()
                                .and_then(|c| c.read(x, y))
                                .unwrap_or(f64::NAN)
                        };
                    }
                }
            }
            for (sums, &on) in self.sums.iter_mut().zip(&self.values) {
                let a = if on.is_nan() { point } else { on };
                if cap.is_finite() {
                    self.curves.push(a);
                }
                sums.add(weighted, i, a);
            }
        }
        for (r, conv) in row.iter().enumerate() {
            if conv.is_none() {
                self.chi2[r] = f64::INFINITY;
                self.plain[r] = f64::INFINITY;
            }
        }
        let all = std::mem::take(&mut self.sums);
        for (j, (sums, &r)) in all.iter().zip(&stacked.readers).enumerate() {
            if !sums.is_finite() {
                return Err(Error::Numerical(
                    "search: point-source value missing".into(),
                ));
            }
            self.chi2[r] += self.set_chi2(weighted, sums, (ka, kb), (j, k), cap);
            self.plain[r] += weighted.chi2(sums);
        }
        self.sums = all;
        Ok(())
    }

    /// One data set's chi^2 for the curve whose sums are `sums`, capped per point at `cap`:
    /// the curve is `self.curves[(i - ka) * k + j]` in the window's time span `ka..kb` and
    /// the point-source values `self.point` outside it.
    fn set_chi2(
        &mut self,
        weighted: &Weighted,
        sums: &CurveSums,
        (ka, kb): (usize, usize),
        (j, k): (usize, usize),
        cap: f64,
    ) -> f64 {
        let mut apart = std::mem::take(&mut self.apart);
        let mut curve = std::mem::take(&mut self.curve);
        curve.clear();
        curve.extend_from_slice(&self.point[..ka]);
        curve.extend(self.curves.iter().skip(j).step_by(k).take(kb - ka));
        curve.extend_from_slice(&self.point[kb..]);
        let chi2 = weighted.capped_chi2(sums, cap, &mut apart, &curve);
        self.curve = curve;
        self.apart = apart;
        chi2
    }

    /// Point-source magnifications at the points marked in `self.needed` (NaN elsewhere), into
    /// `self.point`, read from the line's shared profile for the reader of `law` (solved
    /// directly where the profile skips the map).
    fn point_from_profile(
        &mut self,
        solver: &mut ImageSolver,
        readers: &Readers,
        law: usize,
        times: &[f64],
        l: &crate::curve::StraightLine,
        tol: f64,
    ) -> Result<()> {
        let profiles = self.profiles.get_or_insert_with(Vec::new);
        profiles.resize_with(readers.convolved.len(), LineProfile::default);
        let profile = &mut profiles[law];
        profile.select(l.alpha, l.u0);
        let (sn, cs) = l.alpha.sin_cos();
        let mut context = LineContext {
            solver,
            readers,
            reader: readers.widest[law].and_then(|r| readers.convolved[law][r].as_ref()),
            tol,
            geometry: (l.u0, sn, cs),
        };
        self.point.clear();
        self.point.resize(times.len(), f64::NAN);
        for (i, &t) in times.iter().enumerate() {
            if !self.needed[i] {
                continue;
            }
            let (x, y) = self.positions[i];
            let z = Complex64::new(x, y);
            let ratio = profile.ratio_at((t - l.t0) / l.te, &mut context)?;
            self.point[i] = match ratio {
                Some(r) => r * readers.host_alone(z),
                None => context.solver.magnification(z)?,
            };
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
        let n = times.len();
        let (positions, needed) = (&self.positions, &self.needed);
        self.host.clear();
        self.host
            .extend(positions.iter().zip(needed).map(|(&(x, y), &need)| {
                if need {
                    readers.host_alone(Complex64::new(x, y))
                } else {
                    f64::NAN
                }
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

    /// The off-map curve (exact solves at a subset, the ratio to the host interpolated; per
    /// trajectory and from the line's shared profile) against
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
        // Each line per trajectory, and through the line's profile shared by two timings.
        let mut shared = Scratch {
            profiles: Some(Vec::new()),
            ..Scratch::default()
        };
        let mut worst_shared = 0.0f64;
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
            for (t0, te) in [(0.0, 25.0), (3.0, 40.0)] {
                let timed = Trajectory::straight(t0, u0, te, alpha).unwrap();
                shared.positions = timed.positions(&times);
                shared.needed = vec![true; times.len()];
                shared
                    .point_from_profile(&mut solver, &readers, 0, &times, timed.line(), tol)
                    .unwrap();
                for (i, &(x, y)) in shared.positions.iter().enumerate().step_by(5) {
                    let exact = solver.magnification(Complex64::new(x, y)).unwrap();
                    worst_shared = worst_shared.max((shared.point[i] / exact - 1.0).abs());
                }
            }
        }
        assert!(worst < 3.0 * tol, "worst relative error {worst:e}");
        assert!(
            worst_shared < 3.0 * tol,
            "worst relative error {worst_shared:e}"
        );
    }
}
