//! Lens systems of point masses: construction, the lens equation and its Jacobian.
//!
//! Frame (DESIGN.md): lengths in Einstein radii of the total mass, masses normalised to sum 1,
//! z in the image plane, zeta in the source plane,
//! zeta = z - sum_i m_i / (conj(z) - conj(z_i)).

use crate::error::{Error, Result};
use crate::table::{fmt_f64, Table};
use num_complex::Complex64;
use std::path::Path;

/// One point mass: position in the lens plane and mass (normalised within its [`LensSystem`]).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PointLens {
    /// Position z_i in Einstein radii of the total mass.
    pub position: Complex64,
    /// Mass m_i as a fraction of the total.
    pub mass: f64,
}

/// The separations a binary may have, in Einstein radii of the total mass.
pub const S_RANGE: (f64, f64) = (1e-2, 1e2);

/// The mass ratios a binary may have.
pub const Q_RANGE: (f64, f64) = (1e-10, 1e10);

/// A set of point lenses with masses summing to 1.
///
/// ```
/// use causeway::lens::LensSystem;
/// use num_complex::Complex64;
/// let lens = LensSystem::binary(1.0, 1e-3).unwrap();
/// assert_eq!(lens.len(), 2);
/// // Centre of mass at the origin.
/// let com: Complex64 = lens.lenses().iter().map(|l| l.position * l.mass).sum();
/// assert!(com.norm() < 1e-15);
/// ```
#[derive(Debug, Clone, PartialEq)]
pub struct LensSystem {
    lenses: Vec<PointLens>,
    binary: Option<(f64, f64)>,
}

/// Smallest separation between two lenses accepted as distinct, in Einstein radii.
pub const MIN_LENS_SEPARATION: f64 = 1e-12;

impl LensSystem {
    /// Builds a system from positions and relative masses; masses are normalised to sum 1.
    ///
    /// Rejects an empty list, non-finite values, masses <= 0 and coincident lenses.
    ///
    /// ```
    /// use causeway::lens::LensSystem;
    /// let lens = LensSystem::new(&[(0.0, 0.0, 3.0), (1.0, 0.0, 1.0)]).unwrap();
    /// assert_eq!(lens.lenses()[0].mass, 0.75);
    /// assert!(LensSystem::new(&[(0.0, 0.0, 1.0), (0.0, 0.0, 1.0)]).is_err());
    /// ```
    pub fn new(lenses: &[(f64, f64, f64)]) -> Result<Self> {
        Self::validated(lenses, |i| format!("lens {}", i + 1))
    }

    fn validated(lenses: &[(f64, f64, f64)], name: impl Fn(usize) -> String) -> Result<Self> {
        if lenses.is_empty() {
            return Err(Error::input("the lens list is empty"));
        }
        // Checked before the pairwise checks below, whose cost grows as the square of the count.
        if lenses.len() > crate::map::fits::MAX_LENSES {
            return Err(Error::input(format!(
                "{}: lens {} of {}; at most {} point lenses are taken",
                name(crate::map::fits::MAX_LENSES),
                crate::map::fits::MAX_LENSES + 1,
                lenses.len(),
                crate::map::fits::MAX_LENSES
            )));
        }
        for (i, &(x, y, m)) in lenses.iter().enumerate() {
            if !(x.is_finite() && y.is_finite() && m.is_finite()) {
                return Err(Error::input(format!(
                    "{}: non-finite value in ({x}, {y}, mass {m})",
                    name(i)
                )));
            }
            if x.abs().max(y.abs()) > crate::map::MAX_REACH {
                return Err(Error::input(format!(
                    "{}: position ({x:e}, {y:e}) is more than {:e} Einstein radii from the origin",
                    name(i),
                    crate::map::MAX_REACH
                )));
            }
            if m <= 0.0 {
                return Err(Error::input(format!(
                    "{}: mass must be > 0, got {}",
                    name(i),
                    fmt_f64(m)
                )));
            }
        }
        for i in 0..lenses.len() {
            for j in 0..i {
                let (dx, dy) = (lenses[i].0 - lenses[j].0, lenses[i].1 - lenses[j].1);
                if dx.hypot(dy) < MIN_LENS_SEPARATION {
                    return Err(Error::input(format!(
                        "{} coincides with {} at ({}, {})",
                        name(i),
                        name(j),
                        fmt_f64(lenses[i].0),
                        fmt_f64(lenses[i].1)
                    )));
                }
            }
        }
        // Scaled by the largest mass first, so that masses near f64::MAX do not overflow the sum.
        let largest = lenses.iter().map(|l| l.2).fold(0.0, f64::max);
        let total: f64 = lenses.iter().map(|l| l.2 / largest).sum();
        let lenses = lenses
            .iter()
            .map(|&(x, y, m)| PointLens {
                position: Complex64::new(x, y),
                mass: m / largest / total,
            })
            .collect();
        Ok(LensSystem {
            lenses,
            binary: None,
        })
    }

    /// A single point lens of unit mass at the origin.
    ///
    /// ```
    /// let lens = causeway::lens::LensSystem::single();
    /// assert_eq!(lens.len(), 1);
    /// ```
    pub fn single() -> Self {
        LensSystem {
            lenses: vec![PointLens {
                position: Complex64::new(0.0, 0.0),
                mass: 1.0,
            }],
            binary: None,
        }
    }

    /// A binary of separation `s` and mass ratio `q = m2/m1`, centre of mass at the origin:
    /// m1 = 1/(1+q) at (-s q/(1+q), 0), m2 = q/(1+q) at (s/(1+q), 0).
    ///
    /// ```
    /// let lens = causeway::lens::LensSystem::binary(2.0, 1.0).unwrap();
    /// assert_eq!(lens.lenses()[0].position.re, -1.0);
    /// assert_eq!(lens.binary_parameters(), Some((2.0, 1.0)));
    /// assert!(causeway::lens::LensSystem::binary(1.0, 0.0).is_err());
    /// ```
    pub fn binary(s: f64, q: f64) -> Result<Self> {
        if !s.is_finite() || s <= 0.0 {
            return Err(Error::input(format!(
                "s: separation must be finite and > 0, got {s}"
            )));
        }
        if !q.is_finite() || q <= 0.0 {
            return Err(Error::input(format!(
                "q: mass ratio must be finite and > 0, got {q}"
            )));
        }
        if !(S_RANGE.0..=S_RANGE.1).contains(&s) || !(Q_RANGE.0..=Q_RANGE.1).contains(&q) {
            let (name, value) = if (S_RANGE.0..=S_RANGE.1).contains(&s) {
                ("q", q)
            } else {
                ("s", s)
            };
            return Err(Error::input(format!(
                "{name} {value:e}: binaries are taken for s from {:e} to {:e} and q from {:e} to \
                 {:e} (past them the caustics are too small to trace and the lens is two point \
                 lenses)",
                S_RANGE.0, S_RANGE.1, Q_RANGE.0, Q_RANGE.1
            )));
        }
        let m1 = 1.0 / (1.0 + q);
        let m2 = q / (1.0 + q);
        let lenses = vec![
            PointLens {
                position: Complex64::new(-s * m2, 0.0),
                mass: m1,
            },
            PointLens {
                position: Complex64::new(s * m1, 0.0),
                mass: m2,
            },
        ];
        Ok(LensSystem {
            lenses,
            binary: Some((s, q)),
        })
    }

    /// Parses a lens CSV (header `x,y,mass`); `origin` names it in error messages.
    ///
    /// ```
    /// use causeway::lens::LensSystem;
    /// let lens = LensSystem::parse_csv("x,y,mass\n0,0,1\n0.5,0.2,0.01\n", "triple.csv").unwrap();
    /// assert_eq!(lens.len(), 2);
    /// let err = LensSystem::parse_csv("x,y,mass\n0,0,1\n1,0,-2\n", "bad.csv").unwrap_err();
    /// assert!(err.to_string().starts_with("bad.csv:3"));
    /// ```
    pub fn parse_csv(text: &str, origin: &str) -> Result<Self> {
        Self::parse_csv_with_total(text, origin).map(|(lens, _)| lens)
    }

    /// [`LensSystem::parse_csv`], also returning the sum of the masses as listed (before they
    /// were normalised), so that a caller can say when they did not sum to 1.
    ///
    /// ```
    /// use causeway::lens::LensSystem;
    /// let (lens, total) = LensSystem::parse_csv_with_total("x,y,mass\n0,0,3\n1,0,1\n", "t.csv").unwrap();
    /// assert_eq!((lens.lenses()[0].mass, total), (0.75, 4.0));
    /// ```
    pub fn parse_csv_with_total(text: &str, origin: &str) -> Result<(Self, f64)> {
        let table = Table::parse(text, origin, &["x", "y", "mass"], &[])?;
        let rows: Vec<(f64, f64, f64)> = table.rows.iter().map(|r| (r[0], r[1], r[2])).collect();
        if rows.is_empty() {
            return Err(Error::input(format!("{origin}: no lenses listed")));
        }
        let lens = Self::validated(&rows, |i| format!("{origin}:{}", table.lines[i]))?;
        Ok((lens, rows.iter().map(|r| r.2).sum()))
    }

    /// Reads a lens CSV file (see [`LensSystem::parse_csv`]).
    pub fn read_csv(path: &Path) -> Result<Self> {
        Self::read_csv_with_total(path).map(|(lens, _)| lens)
    }

    /// Reads a lens CSV file (see [`LensSystem::parse_csv_with_total`]).
    pub fn read_csv_with_total(path: &Path) -> Result<(Self, f64)> {
        let text = std::fs::read_to_string(path).map_err(|e| Error::io(path, e))?;
        Self::parse_csv_with_total(&text, &path.display().to_string())
    }

    /// The lenses, masses normalised.
    pub fn lenses(&self) -> &[PointLens] {
        &self.lenses
    }

    /// Number of point lenses.
    pub fn len(&self) -> usize {
        self.lenses.len()
    }

    /// Always false: a system has at least one lens.
    pub fn is_empty(&self) -> bool {
        self.lenses.is_empty()
    }

    /// `(s, q)` when the system was built as a binary from them.
    pub fn binary_parameters(&self) -> Option<(f64, f64)> {
        self.binary
    }

    /// True when every lens lies on the x axis, so the lens map commutes with reflection
    /// about it: zeta(conj z) = conj(zeta(z)).
    pub fn symmetric_about_x_axis(&self) -> bool {
        self.lenses.iter().all(|l| l.position.im == 0.0)
    }

    /// Largest distance of a lens from the origin.
    pub fn radius(&self) -> f64 {
        self.lenses
            .iter()
            .map(|l| l.position.norm())
            .fold(0.0, f64::max)
    }

    /// The lens equation: source position zeta of the image-plane point z.
    ///
    /// ```
    /// use causeway::lens::LensSystem;
    /// use num_complex::Complex64;
    /// // A point on the Einstein ring of a single lens maps to the origin.
    /// let zeta = LensSystem::single().source_position(Complex64::new(0.0, 1.0));
    /// assert!(zeta.norm() < 1e-15);
    /// ```
    pub fn source_position(&self, z: Complex64) -> Complex64 {
        z - self.deflection(z)
    }

    /// The deflection sum_i m_i / (conj(z) - conj(z_i)).
    pub fn deflection(&self, z: Complex64) -> Complex64 {
        self.lenses
            .iter()
            .map(|l| l.mass / (z - l.position).conj())
            .sum()
    }

    /// The complex shear kappa(z) = sum_i m_i / (conj(z) - conj(z_i))^2, the derivative
    /// d zeta / d conj(z) up to sign. The Jacobian determinant is 1 - |kappa|^2.
    pub fn shear(&self, z: Complex64) -> Complex64 {
        self.lenses
            .iter()
            .map(|l| {
                let w = (z - l.position).conj();
                l.mass / (w * w)
            })
            .sum()
    }

    /// Determinant of the Jacobian of the lens map at z: det J = 1 - |kappa(z)|^2.
    /// The point-source magnification of an image at z is 1/|det J|; its sign is the parity.
    ///
    /// ```
    /// use causeway::lens::LensSystem;
    /// use num_complex::Complex64;
    /// let lens = LensSystem::single();
    /// // On the Einstein ring the Jacobian vanishes.
    /// assert!(lens.jacobian_determinant(Complex64::new(1.0, 0.0)).abs() < 1e-15);
    /// ```
    pub fn jacobian_determinant(&self, z: Complex64) -> f64 {
        1.0 - self.shear(z).norm_sqr()
    }

    /// The 2x2 Jacobian d(zeta_x, zeta_y)/d(x, y) at z, row-major.
    pub fn jacobian(&self, z: Complex64) -> [[f64; 2]; 2] {
        // zeta = z - conj(g(z)) with g(z) = sum m_i/(z - z_i) analytic, so d zeta/dz = 1 and
        // d zeta/d conj(z) = kappa; then d/dx = d/dz + d/dconj(z), d/dy = i (d/dz - d/dconj(z)).
        let k = self.shear(z);
        [[1.0 + k.re, k.im], [k.im, 1.0 - k.re]]
    }
}

impl std::fmt::Display for LensSystem {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        if let Some((s, q)) = self.binary {
            return write!(f, "binary s={s} q={q}");
        }
        write!(f, "{} point lenses", self.lenses.len())
    }
}

/// Paczynski's point-source, point-lens magnification `(u^2 + 2) / (u sqrt(u^2 + 4))`
/// (Paczynski 1986).
///
/// ```
/// let a = causeway::lens::paczynski(1.0);
/// assert!((a - 3.0 / 5f64.sqrt()).abs() < 1e-15);
/// ```
pub fn paczynski(u: f64) -> f64 {
    let u2 = u * u;
    (u2 + 2.0) / (u * (u2 + 4.0).sqrt())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn jacobian_matches_finite_differences() {
        // Central differences of the lens equation itself (no outside reference needed for a
        // derivative identity).
        let lens = LensSystem::new(&[(0.0, 0.0, 1.0), (0.7, 0.3, 0.2), (-0.4, 0.5, 0.1)]).unwrap();
        let z = Complex64::new(0.31, -0.47);
        let h = 1e-6;
        let dx = (lens.source_position(z + h) - lens.source_position(z - h)) / (2.0 * h);
        let dy = (lens.source_position(z + Complex64::i() * h)
            - lens.source_position(z - Complex64::i() * h))
            / (2.0 * h);
        let j = lens.jacobian(z);
        assert!((j[0][0] - dx.re).abs() < 1e-7);
        assert!((j[1][0] - dx.im).abs() < 1e-7);
        assert!((j[0][1] - dy.re).abs() < 1e-7);
        assert!((j[1][1] - dy.im).abs() < 1e-7);
        let det = j[0][0] * j[1][1] - j[0][1] * j[1][0];
        assert!((det - lens.jacobian_determinant(z)).abs() < 1e-12);
    }
}
