//! Parallax geometry and parallax models against astropy (tests/reference/parallax.py: the
//! built-in ephemeris of astropy for the Earth, its SkyCoord for north and east, Gould 2004's
//! geocentric offsets written out independently in numpy).

use crate::common;

use causeway::parallax::{earth_position, Geometry, Observer, SkyPosition, SHORT_JD_ORIGIN};

const OFFSET_COLUMNS: [&str; 12] = [
    "ra_deg", "dec_deg", "t0_par", "t", "pi_EN", "pi_EE", "ds_N", "ds_E", "sun_N", "sun_E", "dtau",
    "dbeta",
];

fn geometry(r: &[f64]) -> Geometry {
    let sky = SkyPosition::new(r[0], r[1]).unwrap();
    let origin = causeway::parallax::jd_origin(r[2]);
    Geometry::new(sky, r[2], origin).unwrap()
}

#[test]
fn earth_orbit_matches_astropy_to_3e_4_au_over_2000_2040() {
    let t = common::reference("parallax_earth.csv", &["jd", "x", "y", "z"]);
    assert!(t.rows.len() > 150);
    let mut worst: f64 = 0.0;
    for r in &t.rows {
        let p = earth_position(r[0]);
        let d = (0..3)
            .map(|k| (p[k] - r[1 + k]).powi(2))
            .sum::<f64>()
            .sqrt();
        worst = worst.max(d);
    }
    // The bound for a Keplerian orbit of the Earth-Moon barycentre.
    assert!(
        worst < 3e-4,
        "largest distance from astropy's Earth: {worst} au"
    );
}

#[test]
fn projected_offsets_match_astropy_at_the_bulge_and_the_poles() {
    let t = common::reference("parallax_offsets.csv", &OFFSET_COLUMNS);
    assert!(t.rows.len() >= 60);
    let (mut worst_ds, mut worst_sun): (f64, f64) = (0.0, 0.0);
    for r in &t.rows {
        let g = geometry(r);
        let d = g.offsets(&[r[3]], &Observer::Earth).unwrap()[0];
        // The Earth's velocity at t0,par includes the Moon's pull in astropy's ephemeris and not
        // in the barycentre's orbit: up to 12.6 m/s = 7.3e-6 au/d (1.02 km/s / 81.3, from
        // memory), a term linear in time that (t0, u0, tE) absorb.
        let allowed = 3e-4 + 7.5e-6 * (r[3] - r[2]).abs();
        worst_ds = worst_ds.max(((d.0 - r[6]).abs()).max((d.1 - r[7]).abs()) / allowed);
        let s = g.sun(r[3]);
        worst_sun = worst_sun.max((s.0 - r[8]).abs()).max((s.1 - r[9]).abs());
    }
    assert!(
        worst_sun < 3e-4,
        "Sun's projected position off by {worst_sun} au"
    );
    assert!(worst_ds < 1.0, "offsets off by {worst_ds} of the allowed");
    // A short time and the same full Julian date give the same offsets.
    let sky = SkyPosition::new(268.5, -29.2).unwrap();
    let short = Geometry::new(sky, 8300.0, SHORT_JD_ORIGIN).unwrap();
    let full = Geometry::new(sky, 2_458_300.0, 0.0).unwrap();
    let a = short.offsets(&[8250.0], &Observer::Earth).unwrap();
    let b = full.offsets(&[2_458_250.0], &Observer::Earth).unwrap();
    assert!((a[0].0 - b[0].0).abs() < 1e-12 && (a[0].1 - b[0].1).abs() < 1e-12);
}
