//! The Earth's heliocentric position: a Keplerian orbit of the Earth-Moon barycentre from
//! published mean elements.
//!
//! The elements are those of E. M. Standish's "Keplerian Elements for Approximate Positions of
//! the Major Planets" (JPL Solar System Dynamics), table 1 (valid 1800-2050), for the
//! Earth-Moon barycentre, referred to the mean ecliptic and equinox of J2000 (values from
//! memory, checked against astropy's built-in ephemeris in tests/reference/parallax.py):
//! semi-major axis `a`, eccentricity `e`, inclination `I`, mean longitude `L`, longitude of
//! perihelion `varpi` and of the ascending node `Omega`, each a value at J2000 plus a rate per
//! Julian century. Kepler's equation is solved by Newton's method; the ecliptic position is
//! turned to equatorial by the J2000 obliquity 84381.448" (IAU 1976). The barycentre differs
//! from the Earth's centre by at most 4700 km (3e-5 au); over 2000-2040 the whole stays within
//! 3e-4 au of astropy's Earth, which is far below what microlensing parallax resolves.
//! Times are Julian dates; the time scale (TT, UTC, heliocentric or not) is not told apart:
//! a minute moves the Earth by 1800 km (1.2e-5 au).

/// Julian date of the epoch J2000.0.
pub const J2000: f64 = 2_451_545.0;
/// Days per Julian century.
const CENTURY: f64 = 36_525.0;
/// Obliquity of the ecliptic at J2000 (degrees), IAU 1976: 84381.448".
pub const OBLIQUITY_DEG: f64 = 84_381.448 / 3600.0;

/// Mean elements (value at J2000, rate per century): a (au), e, I, L, varpi, Omega (degrees).
const ELEMENTS: [(f64, f64); 6] = [
    (1.000_002_61, 0.000_005_62),
    (0.016_711_23, -0.000_043_92),
    (-0.000_015_31, -0.012_946_68),
    (100.464_571_66, 35_999.372_449_81),
    (102.937_681_93, 0.323_273_64),
    (0.0, 0.0),
];

/// The Earth's heliocentric position (au, equatorial J2000) at Julian date `jd`.
///
/// ```
/// use causeway::parallax::earth_position;
/// // Near the March equinox the Sun is at RA 0, so the Earth is towards RA 180 degrees.
/// let r = earth_position(2_458_563.4);
/// assert!(r[0] < -0.99 && r[1].abs() < 0.02 && r[2].abs() < 0.01);
/// ```
pub fn earth_position(jd: f64) -> [f64; 3] {
    let t = (jd - J2000) / CENTURY;
    let el: Vec<f64> = ELEMENTS.iter().map(|(v, r)| v + r * t).collect();
    let (a, e) = (el[0], el[1]);
    let (inc, mean_lon, varpi, node) = (
        el[2].to_radians(),
        el[3].to_radians(),
        el[4].to_radians(),
        el[5].to_radians(),
    );
    let perihelion = varpi - node;
    let m = (mean_lon - varpi).rem_euclid(std::f64::consts::TAU);
    let ecc = eccentric_anomaly(m, e);
    // In the orbital plane, x towards perihelion.
    let xp = a * (ecc.cos() - e);
    let yp = a * (1.0 - e * e).sqrt() * ecc.sin();
    let (sw, cw) = perihelion.sin_cos();
    let (so, co) = node.sin_cos();
    let (si, ci) = inc.sin_cos();
    let x = (cw * co - sw * so * ci) * xp + (-sw * co - cw * so * ci) * yp;
    let y = (cw * so + sw * co * ci) * xp + (-sw * so + cw * co * ci) * yp;
    let z = (sw * si) * xp + (cw * si) * yp;
    let (se, ce) = OBLIQUITY_DEG.to_radians().sin_cos();
    [x, ce * y - se * z, se * y + ce * z]
}

/// The Earth's heliocentric velocity (au per day, equatorial J2000) at Julian date `jd`, by a
/// central difference over 0.01 d (truncation below 1e-9 of the speed).
pub fn earth_velocity(jd: f64) -> [f64; 3] {
    const H: f64 = 0.01;
    let (a, b) = (earth_position(jd + H), earth_position(jd - H));
    [0, 1, 2].map(|k| (a[k] - b[k]) / (2.0 * H))
}

/// Solves Kepler's equation `E - e sin E = M` by Newton's method (to round-off).
fn eccentric_anomaly(m: f64, e: f64) -> f64 {
    let mut ecc = m + e * m.sin();
    for _ in 0..20 {
        let d = (ecc - e * ecc.sin() - m) / (1.0 - e * ecc.cos());
        ecc -= d;
        if d.abs() < 1e-15 {
            break;
        }
    }
    ecc
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn kepler_equation_is_solved() {
        for m in [0.0, 0.3, 1.0, 3.0, 6.0] {
            let e = eccentric_anomaly(m, 0.0167);
            assert!((e - 0.0167 * e.sin() - m).abs() < 1e-14);
        }
    }

    #[test]
    fn the_orbit_is_about_one_au_and_one_year() {
        let r = earth_position(J2000);
        let d = r.iter().map(|v| v * v).sum::<f64>().sqrt();
        // Early January: near perihelion, 0.983 au (common practice).
        assert!((d - 0.9833).abs() < 1e-3, "{d}");
        let later = earth_position(J2000 + 365.25636); // one sidereal year (common practice)
        let gap = (0..3)
            .map(|k| (later[k] - r[k]).powi(2))
            .sum::<f64>()
            .sqrt();
        assert!(gap < 1e-4, "{gap}");
        let v = earth_velocity(J2000);
        let speed = v.iter().map(|v| v * v).sum::<f64>().sqrt();
        // About 30.3 km/s at perihelion: 0.01750 au/d (common practice).
        assert!((speed - 0.0175).abs() < 2e-4, "{speed}");
    }
}
