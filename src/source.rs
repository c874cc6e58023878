//! Source profiles (uniform disk, linear and square-root limb darkening) and disk-overlap weights.
//!
//! A source of radius `rho` has surface brightness `I(r)` normalised so that its total flux
//! `∫ I(r) 2 pi r dr` over the disk is 1. With `mu = sqrt(1 - r^2/rho^2)`:
//!
//! - uniform: `I = I0`;
//! - linear: `I = I0 [1 - u (1 - mu)]`, flux `pi rho^2 I0 (1 - u/3)`;
//! - square root: `I = I0 [1 - c (1 - mu) - d (1 - sqrt(mu))]`, flux
//!   `pi rho^2 I0 (1 - c/3 - d/5)`.
//!
//! (The fluxes follow from `2 pi r dr = 2 pi rho^2 mu dmu` and `∫_0^1 mu^(1+p) dmu = 1/(2+p)`.)
//!
//! [`disk_rect_overlap`] is the exact area shared by a disk and an axis-aligned rectangle, in
//! closed form (circle-segment areas), the weight a map pixel gets under a uniform disk.

use crate::error::{Error, Result};

/// Limb-darkening law of a source.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum LimbDarkening {
    /// Uniform brightness.
    Uniform,
    /// Linear law `1 - u (1 - mu)`.
    Linear {
        /// Coefficient u in [0, 1].
        u: f64,
    },
    /// Square-root law `1 - c (1 - mu) - d (1 - sqrt(mu))`.
    SquareRoot {
        /// Linear coefficient c in [0, 1].
        c: f64,
        /// Square-root coefficient d in [0, 1].
        d: f64,
    },
}

impl LimbDarkening {
    /// The linear law of coefficient `u`, or [`LimbDarkening::Uniform`] when `u` is 0.
    ///
    /// ```
    /// use causeway::source::LimbDarkening;
    /// assert_eq!(LimbDarkening::linear(0.0), LimbDarkening::Uniform);
    /// assert_eq!(LimbDarkening::linear(0.6), LimbDarkening::Linear { u: 0.6 });
    /// ```
    pub fn linear(u: f64) -> Self {
        if u == 0.0 {
            LimbDarkening::Uniform
        } else {
            LimbDarkening::Linear { u }
        }
    }
}

/// A circular source: radius and limb darkening.
///
/// ```
/// use causeway::source::{LimbDarkening, SourceProfile};
/// let src = SourceProfile::new(0.1, LimbDarkening::Linear { u: 0.6 }).unwrap();
/// // Total flux is 1: a coarse midpoint rule over annuli gets close.
/// let n = 2000;
/// let dr = 0.1 / n as f64;
/// let flux: f64 = (0..n).map(|k| {
///     let r = (k as f64 + 0.5) * dr;
///     src.intensity(r) * 2.0 * std::f64::consts::PI * r * dr
/// }).sum();
/// assert!((flux - 1.0).abs() < 1e-4);
/// assert!(SourceProfile::new(0.1, LimbDarkening::Linear { u: 1.5 }).is_err());
/// ```
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SourceProfile {
    /// Radius in Einstein radii (0 for a point source).
    pub rho: f64,
    /// Limb-darkening law.
    pub law: LimbDarkening,
}

impl SourceProfile {
    /// Checks and builds a profile: `rho >= 0` and finite, coefficients in [0, 1] (as DESIGN.md
    /// has it; a square-root law with `c + d > 1` has a negative rim brightness, which the
    /// algebra carries through: the total flux `1 - c/3 - d/5` stays positive).
    pub fn new(rho: f64, law: LimbDarkening) -> Result<Self> {
        if !rho.is_finite() || rho < 0.0 {
            return Err(Error::input(format!(
                "rho: must be finite and >= 0, got {rho}"
            )));
        }
        let unit = |v: f64| v.is_finite() && (0.0..=1.0).contains(&v);
        match law {
            LimbDarkening::Uniform => {}
            LimbDarkening::Linear { u } => {
                if !unit(u) {
                    return Err(Error::input(format!("ld: u must be in [0, 1], got {u}")));
                }
            }
            LimbDarkening::SquareRoot { c, d } => {
                if !unit(c) || !unit(d) {
                    return Err(Error::input(format!(
                        "ld_sqrt: c and d must be in [0, 1], got {c},{d}"
                    )));
                }
            }
        }
        Ok(SourceProfile { rho, law })
    }

    /// A uniform disk of radius `rho`.
    pub fn uniform(rho: f64) -> Result<Self> {
        Self::new(rho, LimbDarkening::Uniform)
    }

    /// Coefficients `(a, b, e)` of `I(mu) / I0 = a + b mu + e sqrt(mu)`.
    fn polynomial(&self) -> (f64, f64, f64) {
        match self.law {
            LimbDarkening::Uniform => (1.0, 0.0, 0.0),
            LimbDarkening::Linear { u } => (1.0 - u, u, 0.0),
            LimbDarkening::SquareRoot { c, d } => (1.0 - c - d, c, d),
        }
    }

    /// `∫_0^1 (1 - mu^2)^k (I/I0) mu dmu` for k = 0, 1, 2 (closed form).
    fn mu_moment(&self, k: u32) -> f64 {
        let (a, b, e) = self.polynomial();
        let j = |p: f64| match k {
            0 => 1.0 / (2.0 + p),
            1 => 1.0 / (2.0 + p) - 1.0 / (4.0 + p),
            _ => 1.0 / (2.0 + p) - 2.0 / (4.0 + p) + 1.0 / (6.0 + p),
        };
        a * j(0.0) + b * j(1.0) + e * j(0.5)
    }

    /// Central brightness `I0` for unit total flux (0 radius: infinite).
    pub fn central_intensity(&self) -> f64 {
        // flux = 2 pi rho^2 I0 ∫ (I/I0) mu dmu
        1.0 / (2.0 * std::f64::consts::PI * self.rho * self.rho * self.mu_moment(0))
    }

    /// Surface brightness at distance `r` from the centre (0 outside the disk).
    pub fn intensity(&self, r: f64) -> f64 {
        if r > self.rho {
            return 0.0;
        }
        let mu = (1.0 - (r / self.rho).powi(2)).max(0.0).sqrt();
        let (a, b, e) = self.polynomial();
        self.central_intensity() * (a + b * mu + e * mu.sqrt())
    }

    /// Brightness-weighted moments `<r^2>/rho^2` and `<r^4>/rho^4` (closed form): 1/2 and 1/3
    /// for the uniform disk.
    ///
    /// ```
    /// use causeway::source::SourceProfile;
    /// let (m2, m4) = SourceProfile::uniform(0.01).unwrap().moments();
    /// assert!((m2 - 0.5).abs() < 1e-15 && (m4 - 1.0 / 3.0).abs() < 1e-15);
    /// ```
    pub fn moments(&self) -> (f64, f64) {
        let m0 = self.mu_moment(0);
        (self.mu_moment(1) / m0, self.mu_moment(2) / m0)
    }

    /// Whether the profile is a uniform disk (no limb darkening, or all coefficients zero).
    pub fn is_uniform(&self) -> bool {
        let (_, b, e) = self.polynomial();
        b == 0.0 && e == 0.0
    }

    /// The profile as a sum of uniform disks: `(radius, weight)` pairs with weights summing to
    /// 1, such that the profile's mean of any function is the weighted sum of the uniform-disk
    /// means. Exact for the uniform disk (one term).
    ///
    /// Writing `I(r) = I(rho) + ∫_r^rho (-dI/dr') dr'`, the profile is a uniform disk of radius
    /// `rho` with weight `pi rho^2 I(rho)` plus disks of radius `r'` with weights
    /// `pi r'^2 (-dI/dr') dr'`. In the variable `s = sqrt(mu)` (so `r = rho sqrt(1 - s^4)`),
    /// `dI = I0 (2 b s + e) ds`, with `b` the coefficient of `mu` and `e` of `sqrt(mu)`; the
    /// integrand is smooth, and `nodes` Gauss–Legendre points in `s` integrate it exactly when
    /// the disk mean is a polynomial of degree `k <= (2 nodes - 6) / 4` in `r^2` (the integrand
    /// then has degree `5 + 4 k` in `s`). Weights are
    /// renormalised so they sum to 1 exactly.
    ///
    /// ```
    /// use causeway::source::{LimbDarkening, SourceProfile};
    /// let src = SourceProfile::new(0.1, LimbDarkening::Linear { u: 0.5 }).unwrap();
    /// let disks = src.as_uniform_disks(8);
    /// assert_eq!(disks.len(), 9);
    /// // <r^2> of the profile from the disks (each disk contributes r^2/2):
    /// let m2: f64 = disks.iter().map(|(r, w)| w * r * r / 2.0).sum::<f64>() / 0.01;
    /// assert!((m2 - src.moments().0).abs() < 1e-12);
    /// ```
    pub fn as_uniform_disks(&self, nodes: usize) -> Vec<(f64, f64)> {
        if self.is_uniform() || self.rho == 0.0 {
            return vec![(self.rho, 1.0)];
        }
        let (a, b, e) = self.polynomial();
        let i0 = self.central_intensity();
        let pi_r2 = std::f64::consts::PI * self.rho * self.rho;
        let mut disks = vec![(self.rho, pi_r2 * i0 * a)];
        for (x, w) in gauss_legendre(nodes) {
            let s = 0.5 * (x + 1.0);
            let one_minus = 1.0 - s.powi(4);
            let weight = 0.5 * w * i0 * (2.0 * b * s + e) * pi_r2 * one_minus;
            disks.push((self.rho * one_minus.sqrt(), weight));
        }
        let total: f64 = disks.iter().map(|d| d.1).sum();
        for d in &mut disks {
            d.1 /= total;
        }
        disks
    }
}

/// Gauss–Legendre nodes and weights on [-1, 1] (Newton iteration on the Legendre recurrence).
///
/// ```
/// let gl = causeway::source::gauss_legendre(5);
/// // Exact for x^8 (degree <= 2n - 1): ∫ x^8 = 2/9.
/// let v: f64 = gl.iter().map(|(x, w)| w * x.powi(8)).sum();
/// assert!((v - 2.0 / 9.0).abs() < 1e-14);
/// ```
pub fn gauss_legendre(n: usize) -> Vec<(f64, f64)> {
    let mut out = Vec::with_capacity(n);
    for i in 0..n {
        let mut x = (std::f64::consts::PI * (i as f64 + 0.75) / (n as f64 + 0.5)).cos();
        let mut dp = 1.0;
        for _ in 0..100 {
            let (mut p0, mut p1) = (1.0, x);
            for k in 2..=n {
                let p2 = ((2 * k - 1) as f64 * x * p1 - (k - 1) as f64 * p0) / k as f64;
                p0 = p1;
                p1 = p2;
            }
            dp = n as f64 * (x * p1 - p0) / (x * x - 1.0);
            let dx = p1 / dp;
            x -= dx;
            if dx.abs() < 1e-16 {
                break;
            }
        }
        out.push((x, 2.0 / ((1.0 - x * x) * dp * dp)));
    }
    out
}

/// Area of `{(X, Y) : X^2 + Y^2 <= r^2, 0 <= X <= x, 0 <= Y <= y}` for `x, y >= 0`.
fn quadrant_area(x: f64, y: f64, r: f64) -> f64 {
    let x = x.min(r);
    let y = y.min(r);
    if x * x + y * y <= r * r {
        return x * y;
    }
    // ∫_0^x min(y, sqrt(r^2 - X^2)) dX: the height is y until X = xc, then the circle.
    let xc = (r * r - y * y).max(0.0).sqrt();
    let prim = |t: f64| 0.5 * (t * (r * r - t * t).max(0.0).sqrt() + r * r * (t / r).asin());
    y * xc + prim(x) - prim(xc)
}

/// The same, extended to any sign of x and y (odd in each).
fn signed_area(x: f64, y: f64, r: f64) -> f64 {
    let a = quadrant_area(x.abs(), y.abs(), r);
    if (x < 0.0) != (y < 0.0) {
        -a
    } else {
        a
    }
}

/// Signed area of the disk of radius `r` about the origin within `[0, x] x [y0, y1]` (negative
/// for `x < 0`): the overlap of a rectangle `[x0, x1] x [y0, y1]` with the disk is
/// `disk_strip_area(x1, ..) - disk_strip_area(x0, ..)`, so a row of pixels shares its corners.
///
/// ```
/// use causeway::source::{disk_rect_overlap, disk_strip_area};
/// let a = disk_strip_area(0.7, -0.2, 0.9, 1.0) - disk_strip_area(-0.4, -0.2, 0.9, 1.0);
/// assert!((a - disk_rect_overlap(0.0, 0.0, 1.0, -0.4, 0.7, -0.2, 0.9)).abs() < 1e-15);
/// ```
pub fn disk_strip_area(x: f64, y0: f64, y1: f64, r: f64) -> f64 {
    signed_area(x, y1, r) - signed_area(x, y0, r)
}

/// Exact area of the intersection of the disk of radius `r` about `(cx, cy)` with the
/// rectangle `[x0, x1] x [y0, y1]`.
///
/// Inclusion–exclusion over the four corners of the quadrant areas `A(x, y)` of the disk in
/// `[0, x] x [0, y]` (relative to the centre), each a rectangle plus a circle segment:
/// `A = y xc + S(x) - S(xc)`, `xc = sqrt(r^2 - y^2)`, `S(t) = (t sqrt(r^2 - t^2) + r^2 asin(t/r)) / 2`.
///
/// ```
/// use causeway::source::disk_rect_overlap;
/// use std::f64::consts::PI;
/// // The unit disk is inside [-2, 2]^2; a quarter of it lies in [0, 5] x [0, 5].
/// assert!((disk_rect_overlap(0.0, 0.0, 1.0, -2.0, 2.0, -2.0, 2.0) - PI).abs() < 1e-14);
/// assert!((disk_rect_overlap(0.0, 0.0, 1.0, 0.0, 5.0, 0.0, 5.0) - PI / 4.0).abs() < 1e-15);
/// ```
pub fn disk_rect_overlap(cx: f64, cy: f64, r: f64, x0: f64, x1: f64, y0: f64, y1: f64) -> f64 {
    let (a0, a1, b0, b1) = (x0 - cx, x1 - cx, y0 - cy, y1 - cy);
    signed_area(a1, b1, r) - signed_area(a0, b1, r) - signed_area(a1, b0, r)
        + signed_area(a0, b0, r)
}
