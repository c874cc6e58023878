//! The area one piece of an image contour adds (Green's theorem), with an error estimate.
//!
//! A piece runs from `p0` to `p1` in the direction the image boundary is traversed
//! counter-clockwise (image area counts positive), with tangent vectors `m0`, `m1` at its ends
//! (derivatives with respect to a parameter running over `[0, 1]` along the piece). Its
//! contribution to `(1/2) ∮ Im(conj(z) dz)` is the chord term `(1/2) Im(conj(p0 - o) (p1 - p0))`
//! about a common origin `o` (the trapezium of Gould & Gaucherel 1997) plus the area between the
//! chord and the cubic Hermite curve through the ends with those tangents,
//! `Im(conj(m0) d)/10 + Im(conj(d) m1)/10 - Im(conj(m0) m1)/60` with `d = p1 - p0`. To leading
//! order this is the parabolic correction of Bozza 2010, `h^3 Im(conj(z') z'')/12`.

use num_complex::Complex64;

/// Area and estimated error of a piece, or of a sum of pieces.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub(crate) struct Piece {
    pub area: f64,
    pub error: f64,
}

impl std::ops::AddAssign for Piece {
    fn add_assign(&mut self, other: Piece) {
        self.area += other.area;
        self.error += other.error;
    }
}

/// `Im(conj(a) b)`: twice the signed area of the triangle (0, a, b).
#[inline]
pub(crate) fn cross(a: Complex64, b: Complex64) -> f64 {
    a.re * b.im - a.im * b.re
}

/// Chord term and Hermite correction of the piece `p0 -> p1` with end tangents `m0`, `m1`.
#[inline]
fn hermite(o: Complex64, p0: Complex64, m0: Complex64, p1: Complex64, m1: Complex64) -> (f64, f64) {
    let d = p1 - p0;
    let chord = 0.5 * cross(p0 - o, d);
    let correction = 0.1 * (cross(m0, d) + cross(d, m1)) - cross(m0, m1) / 60.0;
    (chord, correction)
}

/// Scale of the track error estimate. The two measures below are about the size of the error
/// the piece would have with twice the sample spacing; the Hermite error falls as the fourth
/// power of the spacing, so half of them still overstates the error of a smooth track about
/// eightfold (see the circle test below), a margin kept for tracks next to critical curves.
const TRACK_ERROR_SCALE: f64 = 0.5;

/// A piece along one image track between two boundary samples.
///
/// The error estimate adds two measures of how far the piece is from the regime where the
/// Hermite correction is the exact next term: its difference from the correction built from the
/// tangent directions alone, `|d|^2 sin(turn)/12` (the two agree for a parabola with uniform
/// parameter speed), and the correction times the mismatch between chord length and tangent
/// lengths, `| |d|^2 / (|m0| |m1|) - 1 |` (zero when the image moves at a steady speed).
pub(crate) fn track(
    o: Complex64,
    p0: Complex64,
    m0: Complex64,
    p1: Complex64,
    m1: Complex64,
) -> Piece {
    let (chord, corr) = hermite(o, p0, m0, p1, m1);
    let d2 = (p1 - p0).norm_sqr();
    let n01 = (m0.norm_sqr() * m1.norm_sqr()).sqrt();
    if n01 == 0.0 || d2 == 0.0 {
        return Piece {
            area: chord + corr,
            error: corr.abs(),
        };
    }
    let turn = cross(m0, m1) / n01;
    let parabola = d2 * turn / 12.0;
    let speed = (d2 / n01 - 1.0).abs();
    Piece {
        area: chord + corr,
        error: TRACK_ERROR_SCALE * ((corr - parabola).abs() + corr.abs() * speed),
    }
}

/// The piece that closes an image contour across a critical curve, where a pair of images of
/// opposite parity appears or vanishes: from `p0` to `p1`, leaving `p0` along the direction `t0`
/// and arriving at `p1` along `t1` (directions only; the parameter speed there is meaningless,
/// since it diverges at the critical curve). Each tangent is scaled so that its projection on the
/// chord is the chord itself (as for a curve parametrised by the distance along the chord),
/// which makes the Hermite curve exact for a parabola whose axis is perpendicular to the chord
/// (the shape of the contour next to a fold). The error estimate is the correction times the
/// angle between the two tangents (the relative size of the next term for a smooth arc) plus
/// the difference from the estimate with tangents of the chord's length.
pub(crate) fn join(
    o: Complex64,
    p0: Complex64,
    t0: Complex64,
    p1: Complex64,
    t1: Complex64,
) -> Piece {
    let d = p1 - p0;
    let len2 = d.norm_sqr();
    let scaled = |t: Complex64| {
        let along = (t.conj() * d).re;
        let n = t.norm();
        if along > 0.5 * n * len2.sqrt() {
            t * (len2 / along)
        } else if n > 0.0 {
            t * (len2.sqrt() / n)
        } else {
            t
        }
    };
    let (m0, m1) = (scaled(t0), scaled(t1));
    if len2 == 0.0 || !(m0.is_finite() && m1.is_finite()) {
        return Piece {
            area: 0.5 * cross(p0 - o, d),
            error: 0.0,
        };
    }
    let (chord, corr) = hermite(o, p0, m0, p1, m1);
    let len = len2.sqrt();
    let (u0, u1) = (m0 * (len / m0.norm()), m1 * (len / m1.norm()));
    let (_, plain) = hermite(o, p0, u0, p1, u1);
    let angle = (m0.conj() * m1).arg().abs();
    Piece {
        area: chord + corr,
        error: (corr - plain).abs() + corr.abs() * angle,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::f64::consts::PI;

    /// A circle of radius r traversed counter-clockwise in n Hermite pieces: area pi r^2 with an
    /// error falling as n^-4 (the chord alone falls as n^-2).
    #[test]
    fn circle_area() {
        let r = 0.7;
        let o = Complex64::new(0.3, -0.2);
        let c = Complex64::new(0.1, 0.05);
        for n in [8usize, 16, 32] {
            let h = 2.0 * PI / n as f64;
            let mut total = Piece::default();
            for k in 0..n {
                let (a, b) = (k as f64 * h, (k + 1) as f64 * h);
                let z = |t: f64| c + Complex64::from_polar(r, t);
                let dz = |t: f64| Complex64::new(0.0, r) * Complex64::from_polar(1.0, t) * h;
                total += track(o, z(a), dz(a), z(b), dz(b));
            }
            let exact = PI * r * r;
            let err = (total.area - exact).abs();
            // Hermite interpolation of a circle: area error about (2 pi / n)^4 / 720 relative.
            println!("n={n}: error {err:.3e}, estimate {:.3e}", total.error);
            assert!(err < 0.01 * exact * h.powi(4), "n={n}: {err}");
            assert!(total.error >= err && total.error < 30.0 * err, "n={n}");
        }
    }

    /// A symmetric parabola closed by a join: exact.
    #[test]
    fn join_parabola() {
        let (a, c) = (0.2, 3.0);
        let o = Complex64::new(0.0, 0.0);
        let p0 = Complex64::new(-a, c * a * a);
        let p1 = Complex64::new(a, c * a * a);
        let t0 = Complex64::new(1.0, -2.0 * c * a);
        let t1 = Complex64::new(1.0, 2.0 * c * a);
        let piece = join(o, p0, t0, p1, t1);
        // The arc y = c x^2 then back along the chord: 4 c a^3 / 3 (counter-clockwise).
        let chord_back = 0.5 * cross(p1, p0 - p1);
        let arc = piece.area;
        assert!((arc + chord_back - 4.0 * c * a.powi(3) / 3.0).abs() < 1e-15);
    }
}
