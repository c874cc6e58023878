//! Critical curves and caustics of point-mass lenses, and the topology of a binary.
//!
//! The Jacobian of the lens map vanishes where |h(z)| = 1, h(z) = sum_i m_i / (z - z_i)^2, so the
//! critical curves are the roots, for phi in [0, 2 pi), of the degree-2N polynomial
//! B(z) - exp(i phi) A(z), A = prod_i (z - z_i)^2, B = sum_i m_i prod_{k != i} (z - z_k)^2
//! (Witt 1990, A&A 236, 311). The caustics are their images under the lens map.
//!
//! The 2N roots are followed as phi runs from 0 to 2 pi in adaptive steps: a step is taken only
//! when each root's new position is unambiguous (much nearer its predicted position than any
//! other root), and, on a second pass that knows each curve's size, when every critical-curve
//! and caustic chord is short compared with its curve and the caustic turns by less than a few
//! degrees between chords (except at chords already tiny: the caustic turns by 180 degrees at a
//! cusp however finely it is sampled). Cusps are thus resolved down to a fixed fraction of the
//! caustic's size. At phi = 2 pi the roots have been permuted; each cycle of the permutation is
//! one closed critical curve, and its image one caustic.
//!
//! ```
//! use causeway::caustics::{self, Topology};
//! use causeway::lens::LensSystem;
//! let lens = LensSystem::binary(1.0, 1.0).unwrap();
//! assert_eq!(caustics::topology(&lens).unwrap(), Topology::Intermediate);
//! let curves = caustics::curves(&lens).unwrap();
//! assert_eq!(curves.len(), 1);
//! // Every critical point has a vanishing Jacobian.
//! for z in &curves[0].critical {
//!     assert!(lens.jacobian_determinant(*z).abs() < 1e-9);
//! }
//! ```

use crate::error::{Error, Result};
use crate::lens::LensSystem;
use crate::solve::polynomial::{critical_parts, Poly};
use crate::solve::roots::{aberth, circle_guesses};
use num_complex::Complex64;
use std::f64::consts::TAU;

/// Most point lenses for which curves are traced (the polynomial has degree 2N).
pub const MAX_LENSES: usize = 8;

const MAX_ROOTS: usize = 2 * MAX_LENSES;

/// How finely curves are sampled.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CausticOptions {
    /// Longest chord allowed, as a fraction of its curve's size (bounding-box diagonal), on both
    /// the critical curve and the caustic.
    pub max_chord: f64,
    /// Largest turn between consecutive chords, in degrees, on both curves.
    pub max_turn_degrees: f64,
    /// Caustic chords shorter than this fraction of the caustic's size are not refined for
    /// turning (cusps).
    pub min_chord: f64,
    /// Most phi steps over both passes before giving up.
    pub max_steps: usize,
}

impl Default for CausticOptions {
    fn default() -> Self {
        CausticOptions {
            max_chord: 0.01,
            max_turn_degrees: 5.0,
            min_chord: 1e-4,
            max_steps: 400_000,
        }
    }
}

/// One closed critical curve and its caustic, point by point in order; the last point repeats
/// the first. `caustic[k]` is the image of `critical[k]`.
#[derive(Debug, Clone, PartialEq)]
pub struct Curve {
    /// Points of the critical curve (lens plane).
    pub critical: Vec<Complex64>,
    /// Their images: the caustic (source plane).
    pub caustic: Vec<Complex64>,
}

impl Curve {
    /// Bounding box of the caustic: (xmin, xmax, ymin, ymax).
    pub fn caustic_bounds(&self) -> (f64, f64, f64, f64) {
        bounds(&self.caustic)
    }

    /// Bounding box of the critical curve: (xmin, xmax, ymin, ymax).
    pub fn critical_bounds(&self) -> (f64, f64, f64, f64) {
        bounds(&self.critical)
    }
}

fn bounds(points: &[Complex64]) -> (f64, f64, f64, f64) {
    points.iter().fold(
        (
            f64::INFINITY,
            f64::NEG_INFINITY,
            f64::INFINITY,
            f64::NEG_INFINITY,
        ),
        |(a, b, c, d), z| (a.min(z.re), b.max(z.re), c.min(z.im), d.max(z.im)),
    )
}

fn diagonal(points: &[Complex64]) -> f64 {
    let (a, b, c, d) = bounds(points);
    (b - a).hypot(d - c)
}

/// Caustic topology of a binary lens (Erdl & Schneider 1993; Dominik 1999, A&A 349, 108).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Topology {
    /// Three caustics: a central one and two small triangular ones off the axis.
    Close,
    /// One (resonant) caustic.
    Intermediate,
    /// Two caustics: one by each lens.
    Wide,
}

impl std::fmt::Display for Topology {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(match self {
            Topology::Close => "close",
            Topology::Intermediate => "intermediate",
            Topology::Wide => "wide",
        })
    }
}

/// Critical curves and caustics with the default sampling.
pub fn curves(lens: &LensSystem) -> Result<Vec<Curve>> {
    critical_curves(lens, &CausticOptions::default())
}

/// The caustics as polylines of (x, y) points, for drawing (each closed: last point = first).
///
/// ```
/// let lens = causeway::lens::LensSystem::binary(1.5, 0.1).unwrap();
/// let lines = causeway::caustics::caustic_curves(&lens).unwrap();
/// assert_eq!(lines.len(), 2); // wide enough for two caustics
/// assert_eq!(lines[0].first(), lines[0].last());
/// ```
pub fn caustic_curves(lens: &LensSystem) -> Result<Vec<Vec<(f64, f64)>>> {
    Ok(curves(lens)?
        .into_iter()
        .map(|c| c.caustic.iter().map(|z| (z.re, z.im)).collect())
        .collect())
}

/// The topology of a two-lens system, from the number of separate critical curves (1:
/// intermediate, 2: wide, 3: close). Other lens counts are an input error.
pub fn topology(lens: &LensSystem) -> Result<Topology> {
    if lens.len() != 2 {
        return Err(Error::input(format!(
            "caustic topology is defined for two lenses; this lens has {}",
            lens.len()
        )));
    }
    let curves = curves(lens)?;
    topology_of(&curves)
}

/// The topology from traced binary curves.
pub fn topology_of(curves: &[Curve]) -> Result<Topology> {
    match curves.len() {
        1 => Ok(Topology::Intermediate),
        2 => Ok(Topology::Wide),
        3 => Ok(Topology::Close),
        k => Err(Error::Numerical(format!(
            "traced {k} critical curves for a binary lens; expected 1, 2 or 3"
        ))),
    }
}

/// The critical-curve polynomial and the lens, in the centre-of-mass frame.
struct Tracer<'a> {
    lens: &'a LensSystem,
    n: usize,
    origin: Complex64,
    pos: Vec<Complex64>,
    mass: Vec<f64>,
    a: Poly,
    b: Poly,
    steps: usize,
    max_steps: usize,
}

/// One traced pass: roots at each accepted phi, in branch order.
struct Pass {
    /// samples[s][j]: root j (frame coordinates) at the s-th accepted phi.
    samples: Vec<[Complex64; MAX_ROOTS]>,
    caustic: Vec<[Complex64; MAX_ROOTS]>,
}

impl<'a> Tracer<'a> {
    fn new(lens: &'a LensSystem, max_steps: usize) -> Result<Self> {
        let n = lens.len();
        if n > MAX_LENSES {
            return Err(Error::input(format!(
                "critical curves are traced for at most {MAX_LENSES} point lenses; this lens has {n}"
            )));
        }
        let origin: Complex64 = lens.lenses().iter().map(|l| l.position * l.mass).sum();
        let pos: Vec<Complex64> = lens.lenses().iter().map(|l| l.position - origin).collect();
        let mass: Vec<f64> = lens.lenses().iter().map(|l| l.mass).collect();
        let (a, b) = critical_parts(&pos, &mass);
        Ok(Tracer {
            lens,
            n,
            origin,
            pos,
            mass,
            a,
            b,
            steps: 0,
            max_steps,
        })
    }

    fn degree(&self) -> usize {
        2 * self.n
    }

    /// Roots at phi from the given guesses, each polished by Newton on h(z) = exp(i phi).
    fn roots_at(&self, phi: f64, roots: &mut [Complex64]) -> Result<()> {
        let e = Complex64::from_polar(1.0, phi);
        let poly = self.b.combine(Complex64::new(1.0, 0.0), &self.a, -e);
        let coeffs = &poly.coeffs()[..=self.degree()];
        if aberth(coeffs, roots).is_none() {
            circle_guesses(coeffs, roots);
            aberth(coeffs, roots).ok_or_else(|| {
                Error::Numerical(format!(
                    "critical-curve polynomial: roots did not converge at phi = {phi}"
                ))
            })?;
        }
        for z in roots.iter_mut() {
            for _ in 0..4 {
                let mut h = Complex64::new(0.0, 0.0);
                let mut dh = Complex64::new(0.0, 0.0);
                for (p, m) in self.pos.iter().zip(&self.mass) {
                    let d = (*z - p).inv();
                    let d2 = d * d;
                    h += d2 * m;
                    dh -= d2 * d * (2.0 * m);
                }
                let step = (h - e) / dh;
                if !step.is_finite() {
                    break;
                }
                *z -= step;
                if step.norm() <= 4.0 * f64::EPSILON * z.norm() {
                    break;
                }
            }
        }
        Ok(())
    }

    fn caustic_point(&self, z: Complex64) -> Complex64 {
        self.lens.source_position(z + self.origin)
    }

    /// Follows the roots from phi = 0 to 2 pi. With `sizes` (per-branch critical and caustic
    /// sizes), the chord and turn criteria apply; without, only the critical-curve turn and the
    /// ambiguity test.
    fn trace(
        &mut self,
        start: &[Complex64; MAX_ROOTS],
        sizes: Option<&[(f64, f64); MAX_ROOTS]>,
        opts: &CausticOptions,
    ) -> Result<Pass> {
        let deg = self.degree();
        let max_turn = opts.max_turn_degrees.to_radians();
        let dphi_max = TAU / if sizes.is_some() { 128.0 } else { 256.0 };
        let dphi_min = 1e-13;
        let mut cur = *start;
        let mut cur_c = [Complex64::new(0.0, 0.0); MAX_ROOTS];
        for j in 0..deg {
            cur_c[j] = self.caustic_point(cur[j]);
        }
        let mut pass = Pass {
            samples: vec![cur],
            caustic: vec![cur_c],
        };
        let mut prev: Option<([Complex64; MAX_ROOTS], [Complex64; MAX_ROOTS], f64)> = None;
        let mut phi = 0.0;
        let mut dphi = dphi_max;
        while phi < TAU {
            self.steps += 1;
            if self.steps > self.max_steps {
                return Err(Error::Numerical(format!(
                    "critical curves: more than {} steps in phi without closing the curves",
                    self.max_steps
                )));
            }
            // No sliver of a last step: split what is left in two when it is under two steps.
            let left = TAU - phi;
            let step = if left <= dphi {
                left
            } else if left < 2.0 * dphi {
                0.5 * left
            } else {
                dphi
            };
            let last = step == left;
            let next_phi = if last { TAU } else { phi + step };
            // Predicted positions: linear extrapolation along each branch.
            let mut pred = cur;
            if let Some((p, _, dp)) = &prev {
                for j in 0..deg {
                    pred[j] = cur[j] + (cur[j] - p[j]) * (step / dp);
                }
            }
            let mut new = pred;
            self.roots_at(next_phi, &mut new[..deg])?;
            let ok = match assign(&pred[..deg], &new[..deg]) {
                Some(order) => {
                    let mut next = [Complex64::new(0.0, 0.0); MAX_ROOTS];
                    let mut next_c = [Complex64::new(0.0, 0.0); MAX_ROOTS];
                    for j in 0..deg {
                        next[j] = new[order[j]];
                        next_c[j] = self.caustic_point(next[j]);
                    }
                    let good = (0..deg).all(|j| {
                        let chord = next[j] - cur[j];
                        let chord_c = next_c[j] - cur_c[j];
                        // Chords at the rounding level have no direction to speak of.
                        let turn = |a: Complex64, b: Complex64| {
                            let floor = 1e-11 * (1.0 + cur[j].norm());
                            if a.norm() <= floor || b.norm() <= floor {
                                0.0
                            } else {
                                (b * a.conj()).arg().abs()
                            }
                        };
                        let (turn_k, turn_c) = match &prev {
                            Some((p, pc, _)) => {
                                (turn(cur[j] - p[j], chord), turn(cur_c[j] - pc[j], chord_c))
                            }
                            None => (0.0, 0.0),
                        };
                        if turn_k > max_turn {
                            return false;
                        }
                        let Some(sizes) = sizes else {
                            return true;
                        };
                        let (size_k, size_c) = sizes[j];
                        if chord.norm() > opts.max_chord * size_k {
                            return false;
                        }
                        if size_c > 1e-12 * size_k {
                            let len = chord_c.norm();
                            if len > opts.max_chord * size_c
                                || (turn_c > max_turn && len > opts.min_chord * size_c)
                            {
                                return false;
                            }
                        }
                        true
                    });
                    good.then_some((next, next_c))
                }
                None => None,
            };
            match ok {
                Some((next, next_c)) => {
                    prev = Some((cur, cur_c, step));
                    cur = next;
                    cur_c = next_c;
                    pass.samples.push(cur);
                    pass.caustic.push(cur_c);
                    phi = next_phi;
                    dphi = (step * 1.5).min(dphi_max);
                }
                None => {
                    dphi = step * 0.5;
                    if dphi < dphi_min {
                        return Err(Error::Numerical(format!(
                            "critical curves: cannot follow the roots past phi = {phi} \
                             (curves touching: a topology boundary?)"
                        )));
                    }
                }
            }
        }
        Ok(pass)
    }

    /// Cycles of the end-to-start permutation of the branches.
    fn cycles(&self, pass: &Pass) -> Result<Vec<Vec<usize>>> {
        let deg = self.degree();
        let start = &pass.samples[0];
        let end = pass.samples.last().expect("at least one sample");
        let order = assign(&end[..deg], &start[..deg]).ok_or_else(|| {
            Error::Numerical("critical curves: the branches do not close up at 2 pi".into())
        })?;
        let mut seen = [false; MAX_ROOTS];
        let mut cycles = Vec::new();
        for j0 in 0..deg {
            if seen[j0] {
                continue;
            }
            let mut cycle = Vec::new();
            let mut j = j0;
            while !seen[j] {
                seen[j] = true;
                cycle.push(j);
                j = order[j];
            }
            cycles.push(cycle);
        }
        Ok(cycles)
    }

    fn assemble(&self, pass: &Pass, cycles: &[Vec<usize>]) -> Vec<Curve> {
        cycles
            .iter()
            .map(|cycle| {
                let mut critical = Vec::new();
                let mut caustic = Vec::new();
                for &j in cycle {
                    // Each branch without its last sample (the next branch's first).
                    for s in 0..pass.samples.len() - 1 {
                        critical.push(pass.samples[s][j] + self.origin);
                        caustic.push(pass.caustic[s][j]);
                    }
                }
                critical.push(critical[0]);
                caustic.push(caustic[0]);
                Curve { critical, caustic }
            })
            .collect()
    }
}

/// Matches each predicted point to a distinct new point, nearest pairs first; `None` when some
/// match is not clearly the nearest (its distance above a quarter of the next-nearest).
fn assign(pred: &[Complex64], new: &[Complex64]) -> Option<[usize; MAX_ROOTS]> {
    let n = pred.len();
    let mut pairs: Vec<(f64, usize, usize)> = Vec::with_capacity(n * n);
    for (j, p) in pred.iter().enumerate() {
        for (k, q) in new.iter().enumerate() {
            pairs.push(((p - q).norm_sqr(), j, k));
        }
    }
    pairs.sort_unstable_by(|a, b| a.0.total_cmp(&b.0));
    let mut order = [usize::MAX; MAX_ROOTS];
    let mut used = [false; MAX_ROOTS];
    let mut left = n;
    for &(_, j, k) in &pairs {
        if order[j] == usize::MAX && !used[k] {
            order[j] = k;
            used[k] = true;
            left -= 1;
            if left == 0 {
                break;
            }
        }
    }
    for j in 0..n {
        let d1 = (pred[j] - new[order[j]]).norm();
        let d2 = (0..n)
            .filter(|&k| k != order[j])
            .map(|k| (pred[j] - new[k]).norm())
            .fold(f64::INFINITY, f64::min);
        if d1 > 0.25 * d2 {
            return None;
        }
    }
    Some(order)
}

/// Critical curves and caustics of `lens` (at most [`MAX_LENSES`] lenses), one [`Curve`] per
/// closed critical curve, sampled as `opts` asks.
pub fn critical_curves(lens: &LensSystem, opts: &CausticOptions) -> Result<Vec<Curve>> {
    if !(opts.max_chord > 0.0 && opts.max_turn_degrees > 0.0 && opts.min_chord >= 0.0) {
        return Err(Error::input(
            "caustic sampling: chord and turn limits must be positive",
        ));
    }
    let mut tracer = Tracer::new(lens, opts.max_steps)?;
    let deg = tracer.degree();
    let mut start = [Complex64::new(0.0, 0.0); MAX_ROOTS];
    {
        let poly = tracer.b.combine(
            Complex64::new(1.0, 0.0),
            &tracer.a,
            Complex64::new(-1.0, 0.0),
        );
        circle_guesses(poly.coeffs(), &mut start[..deg]);
    }
    tracer.roots_at(0.0, &mut start[..deg])?;
    // Pass 1: follow the branches to learn each curve's size.
    let coarse = tracer.trace(&start, None, opts)?;
    let cycles = tracer.cycles(&coarse)?;
    let rough = tracer.assemble(&coarse, &cycles);
    let mut sizes = [(0.0, 0.0); MAX_ROOTS];
    for (cycle, curve) in cycles.iter().zip(&rough) {
        let size = (diagonal(&curve.critical), diagonal(&curve.caustic));
        for &j in cycle {
            sizes[j] = size;
        }
    }
    // Pass 2: the sampling proper.
    let fine = tracer.trace(&start, Some(&sizes), opts)?;
    let cycles = tracer.cycles(&fine)?;
    Ok(tracer.assemble(&fine, &cycles))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn single_lens_ring_and_point_caustic() {
        let lens = LensSystem::new(&[(0.5, 0.5, 1.0)]).unwrap();
        let c = curves(&lens).unwrap();
        assert_eq!(c.len(), 1);
        for (z, w) in c[0].critical.iter().zip(&c[0].caustic) {
            assert!(((z - Complex64::new(0.5, 0.5)).norm() - 1.0).abs() < 1e-12);
            assert!((w - Complex64::new(0.5, 0.5)).norm() < 1e-12);
        }
    }

    #[test]
    fn equal_binary_topologies() {
        // Boundaries at q = 1: 1/sqrt(2) and 2 (Erdl & Schneider 1993).
        for (s, t) in [
            (0.6, Topology::Close),
            (1.0, Topology::Intermediate),
            (2.2, Topology::Wide),
        ] {
            assert_eq!(topology(&LensSystem::binary(s, 1.0).unwrap()).unwrap(), t);
        }
    }
}
