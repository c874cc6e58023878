//! Where a source boundary crosses the caustics: a polyline of the caustics, traced once per
//! lens, and the angles at which a circle cuts it.
//!
//! A boundary that dips across a caustic between two boundary samples (over a cusp, say) gives
//! both samples the same number of images, and the little image loop in between would be missed
//! by linking alone. So the samples of every disk start with the angles where the boundary meets
//! the traced caustic and the midpoints between successive crossings: each stretch of the
//! boundary inside or outside a caustic then holds a sample.
//!
//! The caustics come from [`crate::caustics`] (adaptively sampled, cusps resolved).

use crate::lens::LensSystem;
use num_complex::Complex64;

/// Segments per bounding box.
const CHUNK: usize = 32;

/// The caustics of a lens as line segments, in chunks with bounding boxes.
#[derive(Debug, Clone, Default)]
pub(crate) struct CausticTrace {
    /// False when the caustics could not be traced (the trace is then empty, and no distance
    /// from it can be trusted).
    traced: bool,
    segments: Vec<(Complex64, Complex64)>,
    /// Per chunk: (min corner, max corner).
    boxes: Vec<(Complex64, Complex64)>,
}

impl CausticTrace {
    /// Traces the caustics of `lens` with [`crate::caustics::curves`]; a single lens's caustic
    /// is its position, one segment of zero length (no boundary crosses it). A lens whose
    /// caustics cannot be traced gets an empty trace: the boundary sampling then relies on its
    /// even start and refinement alone.
    pub fn new(lens: &LensSystem) -> CausticTrace {
        if lens.len() < 2 {
            let p = lens.lenses()[0].position;
            return CausticTrace {
                traced: true,
                segments: vec![(p, p)],
                boxes: vec![(p, p)],
            };
        }
        let Ok(curves) = crate::caustics::curves(lens) else {
            return CausticTrace::default();
        };
        let mut segments = Vec::new();
        for c in &curves {
            segments.extend(c.caustic.windows(2).map(|w| (w[0], w[1])));
        }
        segments.retain(|(p, q)| p.is_finite() && q.is_finite());
        let boxes = segments
            .chunks(CHUNK)
            .map(|c| {
                c.iter().fold(
                    (
                        Complex64::new(f64::INFINITY, f64::INFINITY),
                        Complex64::new(f64::NEG_INFINITY, f64::NEG_INFINITY),
                    ),
                    |(lo, hi), (p, q)| {
                        (
                            Complex64::new(lo.re.min(p.re).min(q.re), lo.im.min(p.im).min(q.im)),
                            Complex64::new(hi.re.max(p.re).max(q.re), hi.im.max(p.im).max(q.im)),
                        )
                    },
                )
            })
            .collect();
        CausticTrace {
            traced: true,
            segments,
            boxes,
        }
    }

    /// Distance from `c` to the nearest traced caustic segment; 0 when nothing was traced (so
    /// that no test built on it passes by default). The chunk whose box is nearest is measured
    /// first, so that every chunk whose box lies farther than that is skipped.
    pub fn distance(&self, c: Complex64) -> f64 {
        if !self.traced {
            return 0.0;
        }
        let to_box = |(lo, hi): &(Complex64, Complex64)| {
            let dx = (lo.re - c.re).max(c.re - hi.re).max(0.0);
            let dy = (lo.im - c.im).max(c.im - hi.im).max(0.0);
            dx * dx + dy * dy
        };
        let (nearest, _) =
            self.boxes
                .iter()
                .enumerate()
                .fold((0, f64::INFINITY), |(kb, db), (k, b)| {
                    let d = to_box(b);
                    if d < db {
                        (k, d)
                    } else {
                        (kb, db)
                    }
                });
        let mut best = self.chunk_distance(nearest, c, f64::INFINITY);
        for (k, b) in self.boxes.iter().enumerate() {
            if k != nearest && to_box(b) < best {
                best = self.chunk_distance(k, c, best);
            }
        }
        best.sqrt()
    }

    /// The least of `best` and the squared distances from `c` to the segments of chunk `k`.
    fn chunk_distance(&self, k: usize, c: Complex64, mut best: f64) -> f64 {
        let end = ((k + 1) * CHUNK).min(self.segments.len());
        for &(p, q) in &self.segments[k * CHUNK..end] {
            let d = q - p;
            let aa = d.norm_sqr();
            let t = if aa > 0.0 {
                ((c - p).conj() * d).re / aa
            } else {
                0.0
            };
            best = best.min((p + d * t.clamp(0.0, 1.0) - c).norm_sqr());
        }
        best
    }

    /// Angles in [0, 2 pi) at which the circle `|zeta - c| = rho` meets the traced caustics,
    /// sorted.
    pub fn crossings(&self, c: Complex64, rho: f64, out: &mut Vec<f64>) {
        out.clear();
        for (k, (lo, hi)) in self.boxes.iter().enumerate() {
            if c.re + rho < lo.re || c.re - rho > hi.re || c.im + rho < lo.im || c.im - rho > hi.im
            {
                continue;
            }
            let end = ((k + 1) * CHUNK).min(self.segments.len());
            for &(p, q) in &self.segments[k * CHUNK..end] {
                // |p - c + t d|^2 = rho^2 for t in [0, 1].
                let (w, d) = (p - c, q - p);
                let aa = d.norm_sqr();
                if aa == 0.0 {
                    continue;
                }
                let bb = (w.conj() * d).re;
                let cc = w.norm_sqr() - rho * rho;
                let disc = bb * bb - aa * cc;
                if disc < 0.0 {
                    continue;
                }
                let root = disc.sqrt();
                for t in [(-bb - root) / aa, (-bb + root) / aa] {
                    if (0.0..=1.0).contains(&t) {
                        let angle = (w + d * t).arg();
                        out.push(if angle < 0.0 {
                            angle + std::f64::consts::TAU
                        } else {
                            angle
                        });
                    }
                }
            }
        }
        out.sort_by(f64::total_cmp);
        out.dedup();
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The equal-mass binary at s = 1 has an on-axis cusp at x = 0.34062501931660
    /// (tests/reference/contour_lattice.py, numpy.roots of the critical-curve polynomial): a
    /// small circle about it crosses the two folds that meet there, once each, at angles mirror
    /// images of each other about the axis and on the side of the caustic (towards the origin).
    #[test]
    fn crossings_round_a_cusp() {
        let trace = CausticTrace::new(&LensSystem::binary(1.0, 1.0).unwrap());
        let mut out = Vec::new();
        trace.crossings(Complex64::new(0.34062501931660, 0.0), 0.01, &mut out);
        assert_eq!(out.len(), 2, "{out:?}");
        let tau = std::f64::consts::TAU;
        assert!((out[0] + out[1] - tau).abs() < 1e-3, "{out:?}");
        assert!(out[0] > std::f64::consts::FRAC_PI_2 && out[0] < std::f64::consts::PI);
        trace.crossings(Complex64::new(3.0, 0.0), 0.1, &mut out);
        assert!(out.is_empty());
    }

    /// The distance measured nearest chunk first equals the plain minimum over every segment,
    /// bit for bit, near and far from the caustics of a planetary and a resonant binary.
    #[test]
    fn distance_is_the_least_over_all_segments() {
        for (s, q) in [(1.3, 3e-3), (1.0, 0.3)] {
            let trace = CausticTrace::new(&LensSystem::binary(s, q).unwrap());
            for k in 0..3000 {
                let (a, b) = (
                    (k as f64 * 0.754_877_666).fract(),
                    (k as f64 * 0.569_840_29).fract(),
                );
                let c = Complex64::new(-2.0 + 4.0 * a, -1.0 + 2.0 * b);
                let plain = (0..trace.boxes.len())
                    .map(|k| trace.chunk_distance(k, c, f64::INFINITY))
                    .fold(f64::INFINITY, f64::min)
                    .sqrt();
                assert_eq!(trace.distance(c).to_bits(), plain.to_bits(), "at {c}");
            }
        }
    }

    /// The distance to the same cusp from points on the axis beyond it is their offset (the
    /// cusp is the caustic's rightmost point on the axis, by the symmetry of the equal-mass
    /// binary); a trace of nothing is at distance 0.
    #[test]
    fn distance_to_a_cusp() {
        let trace = CausticTrace::new(&LensSystem::binary(1.0, 1.0).unwrap());
        for dx in [0.01, 0.1, 1.0] {
            let d = trace.distance(Complex64::new(0.34062501931660 + dx, 0.0));
            assert!((d / dx - 1.0).abs() < 1e-3, "{d} vs {dx}");
        }
        assert_eq!(
            CausticTrace::default().distance(Complex64::new(5.0, 5.0)),
            0.0
        );
    }
}
