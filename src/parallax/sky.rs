//! Event coordinates (RA, Dec; J2000/ICRS) and the (north, east) basis of the sky there.

use crate::error::{shown, Error, Result};

/// A direction on the sky (J2000/ICRS), in degrees.
///
/// ```
/// use causeway::parallax::SkyPosition;
/// let p = SkyPosition::parse("17:51:40.2", "-29:53:26").unwrap();
/// assert!((p.ra_deg - 267.9175).abs() < 1e-9);
/// assert!((p.dec_deg + 29.890_555_555_555_557).abs() < 1e-9);
/// let q = SkyPosition::parse("267.9175", "-29.89").unwrap(); // degrees
/// assert_eq!(q.ra_deg, 267.9175);
/// assert!(SkyPosition::parse("25:00:00", "0").is_err());
/// ```
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SkyPosition {
    /// Right ascension (degrees, in [0, 360)).
    pub ra_deg: f64,
    /// Declination (degrees, in [-90, 90]).
    pub dec_deg: f64,
}

/// Unit vectors of the equatorial frame: towards the event, north and east on the sky there.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SkyBasis {
    /// Towards the event.
    pub toward: [f64; 3],
    /// North: the direction of increasing Dec.
    pub north: [f64; 3],
    /// East: the direction of increasing RA (`east = north x toward`).
    pub east: [f64; 3],
}

impl SkyPosition {
    /// A position from degrees (checked: finite, |Dec| <= 90; RA wrapped to [0, 360)).
    pub fn new(ra_deg: f64, dec_deg: f64) -> Result<Self> {
        if !ra_deg.is_finite() {
            return Err(Error::input(format!("ra: must be finite, got {ra_deg}")));
        }
        if !(dec_deg.is_finite() && dec_deg.abs() <= 90.0) {
            return Err(Error::input(format!(
                "dec: must be within [-90, 90] degrees, got {dec_deg}"
            )));
        }
        Ok(SkyPosition {
            ra_deg: ra_deg.rem_euclid(360.0),
            dec_deg,
        })
    }

    /// Parses RA and Dec: each either sexagesimal (`hh:mm:ss.s` for RA, `[+-]dd:mm:ss.s` for
    /// Dec; spaces may stand for the colons) or decimal degrees.
    pub fn parse(ra: &str, dec: &str) -> Result<Self> {
        let ra_deg = match sexagesimal(ra, "ra")? {
            Some(h) if (0.0..24.0).contains(&h) => 15.0 * h,
            Some(h) => {
                return Err(Error::input(format!(
                    "ra: hours must be in [0, 24), got {h} from '{}'",
                    shown(ra)
                )))
            }
            None => decimal(ra, "ra")?,
        };
        let dec_deg = match sexagesimal(dec, "dec")? {
            Some(d) => d,
            None => decimal(dec, "dec")?,
        };
        Self::new(ra_deg, dec_deg)
    }

    /// The unit vector towards the position and the (north, east) basis there.
    ///
    /// At a celestial pole north and east are the limits along the meridian of the RA given:
    /// `north = -cos(ra) x - sin(ra) y` at Dec = +90 (towards RA + 180 degrees), and east is
    /// `(-sin ra, cos ra, 0)` everywhere, so the basis is defined at the poles too.
    ///
    /// ```
    /// use causeway::parallax::SkyPosition;
    /// let b = SkyPosition::new(0.0, 0.0).unwrap().basis();
    /// assert_eq!((b.toward, b.north, b.east), ([1.0, 0.0, 0.0], [-0.0, -0.0, 1.0], [-0.0, 1.0, 0.0]));
    /// let pole = SkyPosition::new(90.0, 90.0).unwrap().basis();
    /// assert!((pole.north[1] + 1.0).abs() < 1e-12 && (pole.east[0] + 1.0).abs() < 1e-12);
    /// ```
    pub fn basis(&self) -> SkyBasis {
        let (sa, ca) = self.ra_deg.to_radians().sin_cos();
        let (sd, cd) = self.dec_deg.to_radians().sin_cos();
        SkyBasis {
            toward: [cd * ca, cd * sa, sd],
            north: [-sd * ca, -sd * sa, cd],
            east: [-sa, ca, 0.0],
        }
    }
}

impl SkyBasis {
    /// The (north, east) components of an equatorial vector: its projection on the sky.
    pub fn project(&self, v: [f64; 3]) -> (f64, f64) {
        (dot(self.north, v), dot(self.east, v))
    }
}

fn dot(a: [f64; 3], b: [f64; 3]) -> f64 {
    a[0] * b[0] + a[1] * b[1] + a[2] * b[2]
}

/// A sexagesimal value `[+-]a:b:c` (or `a b c`) as a decimal number of its first unit; `None`
/// when the text has no separator (a plain decimal).
fn sexagesimal(text: &str, option: &str) -> Result<Option<f64>> {
    let t = text.trim();
    if !t.contains(':') && !t.trim().contains(' ') {
        return Ok(None);
    }
    let bad = || {
        Error::input(format!(
            "{option}: cannot read '{}' (sexagesimal a:b:c or decimal degrees)",
            shown(text)
        ))
    };
    let (sign, body) = match t.strip_prefix('-') {
        Some(rest) => (-1.0, rest),
        None => (1.0, t.strip_prefix('+').unwrap_or(t)),
    };
    let parts: Vec<&str> = body
        .split(|c: char| c == ':' || c.is_whitespace())
        .filter(|p| !p.is_empty())
        .collect();
    if parts.is_empty() || parts.len() > 3 {
        return Err(bad());
    }
    let mut value = 0.0;
    for (k, p) in parts.iter().enumerate() {
        let v: f64 = p.parse().map_err(|_| bad())?;
        if !v.is_finite() || v < 0.0 || (k > 0 && v >= 60.0) || p.starts_with(['+', '-']) {
            return Err(bad());
        }
        value += v / 60f64.powi(k as i32);
    }
    Ok(Some(sign * value))
}

fn decimal(text: &str, option: &str) -> Result<f64> {
    text.trim().parse::<f64>().map_err(|_| {
        Error::input(format!(
            "{option}: cannot read '{}' (sexagesimal a:b:c or decimal degrees)",
            shown(text)
        ))
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn basis_is_orthonormal_and_right_handed_everywhere() {
        for (ra, dec) in [(0.0, 90.0), (123.0, -90.0), (266.4, -29.0), (10.0, 45.0)] {
            let b = SkyPosition::new(ra, dec).unwrap().basis();
            for (u, v, want) in [
                (b.toward, b.toward, 1.0),
                (b.north, b.north, 1.0),
                (b.east, b.east, 1.0),
                (b.toward, b.north, 0.0),
                (b.toward, b.east, 0.0),
                (b.north, b.east, 0.0),
            ] {
                assert!((dot(u, v) - want).abs() < 1e-15, "{ra} {dec}");
            }
            // east = north x toward: increasing RA is to the east.
            let c = [
                b.north[1] * b.toward[2] - b.north[2] * b.toward[1],
                b.north[2] * b.toward[0] - b.north[0] * b.toward[2],
                b.north[0] * b.toward[1] - b.north[1] * b.toward[0],
            ];
            assert!((dot(c, b.east) - 1.0).abs() < 1e-15);
        }
    }

    #[test]
    fn bad_coordinates_name_the_option() {
        assert!(SkyPosition::parse("12:61:00", "0")
            .unwrap_err()
            .to_string()
            .starts_with("ra"));
        assert!(SkyPosition::parse("10", "91")
            .unwrap_err()
            .to_string()
            .starts_with("dec"));
        assert!(SkyPosition::parse("10", "abc")
            .unwrap_err()
            .to_string()
            .starts_with("dec"));
        let south = SkyPosition::parse("0", "-00:30:00").unwrap();
        assert_eq!(south.dec_deg, -0.5);
    }
}
