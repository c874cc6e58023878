#!/usr/bin/env python3
"""Parallax geometry with astropy: the Earth's heliocentric position and the geocentric offsets.

Two tables:

- parallax_earth.csv: the Earth's heliocentric position (au, ICRS equatorial) from astropy's
  built-in ephemeris, get_body_barycentric('earth', t, ephemeris='builtin') minus the same for
  'sun' (no download), every 73 days from 2000 to 2040 (times as full Julian dates, TT).
  Columns: jd, x, y, z.
- parallax_offsets.csv: the Sun's position seen from the Earth projected on the sky, less its
  position and velocity at t0,par (Gould 2004, ApJ 606, 319), for events toward the Galactic
  bulge, both ecliptic poles, a celestial pole and elsewhere, and the shifts of the source's
  (tau, beta) for a given pi_E: dtau = pi_EN ds_N + pi_EE ds_E, dbeta = pi_EN ds_E - pi_EE ds_N.
  North and east come from astropy: north as the difference of the ICRS unit vectors one arcsecond
  either side in Dec (at a pole: along the meridian of the RA given), east as north x toward.
  The velocity at t0,par is a central difference of astropy's positions over 0.01 d. Times are
  written as the data write them: JD - 2450000 below 2,400,000 and full JD above.
  Columns: ra_deg, dec_deg, t0_par, t, pi_EN, pi_EE, ds_N, ds_E, sun_N, sun_E, dtau, dbeta.
- parallax_lens.csv: the lens from theta_E and pi_E with astropy.constants and astropy.units
  (Gould 2000, ApJ 542, 785; kappa = 4 G / (c^2 au)): M = theta_E / (kappa pi_E), the host and
  the companion (M_jup), pi_rel = theta_E pi_E, D_L = au / (pi_rel + au / D_S), the projected
  separation s theta_E D_L, the heliocentric proper motion mu_geo + v_E pi_rel / au (v_E: the
  Earth's velocity at t0,par from the built-in ephemeris, projected on north and east as above;
  mu_geo = theta_E / tE along pi_E), tE,hel = theta_E / |mu_hel|, and the projected kinetic to
  potential energy ratio v^2 r / (2 G M) with r = s theta_E D_L and v = r gamma,
  gamma^2 = (ds/dt / s)^2 + (dalpha/dt)^2 (Dong et al. 2009, ApJ 695, 970).
  Columns: ra_deg, dec_deg, t0_par, theta_E_mas, tE_days, pi_EN, pi_EE, s, q, ds_kpc, ds_dt,
  dalpha_dt, then the values in the order of causeway's LENS_NAMES.

`python3 parallax.py --check` compares with the committed tables.
"""
from pathlib import Path
import warnings

import numpy as np
import astropy.constants as const
import astropy.units as u
from astropy.coordinates import SkyCoord, get_body_barycentric, get_body_barycentric_posvel
from astropy.time import Time

from refcheck import emit

HERE = Path(__file__).parent
warnings.filterwarnings("ignore", module="erfa")

# Invented event positions (RA, Dec in degrees): the Galactic bulge, the north and south ecliptic
# poles (RA 18 h / 6 h, Dec +-(90 - 23.4393)), the north celestial pole, and two elsewhere.
SKY = [
    (268.5, -29.2),
    (270.0, 66.560708),
    (90.0, -66.560708),
    (0.0, 90.0),
    (45.0, 10.0),
    (150.0, -60.0),
]
# (t0,par, pi_EN, pi_EE, times) with times as the data give them.
EPOCHS = [
    (8300.0, 0.2, -0.1, [8200.0, 8260.0, 8300.0, 8333.3, 8400.0, 8480.0]),
    (2459100.0, -0.45, 0.25, [2459000.0, 2459080.5, 2459100.0, 2459150.0, 2459250.0]),
]


def jd(t):
    return t if t >= 2_400_000 else t + 2_450_000


def earth(jds):
    t = Time(np.atleast_1d(jds), format="jd", scale="tt")
    e = get_body_barycentric("earth", t, ephemeris="builtin")
    s = get_body_barycentric("sun", t, ephemeris="builtin")
    return (e - s).xyz.to(u.au).value.T


def unit(ra, dec):
    c = SkyCoord(ra=ra * u.deg, dec=dec * u.deg, frame="icrs").cartesian
    return np.array([c.x.value, c.y.value, c.z.value])


def basis(ra, dec):
    toward = unit(ra, dec)
    h = 1.0 / 3600.0
    if abs(dec) + h > 90.0:
        # At a pole: the limit along the meridian of the RA given.
        lo = unit(ra, np.sign(dec) * (90.0 - 2 * h))
        north = toward - lo if dec > 0 else lo - toward
        north = north - toward * np.dot(north, toward)
    else:
        north = unit(ra, dec + h) - unit(ra, dec - h)
    north /= np.linalg.norm(north)
    east = np.cross(north, toward)
    return toward, north, east


def main():
    days = np.arange(0.0, 40 * 365.25 + 1, 73.0)
    jds = 2451545.0 + days
    rows = [(float(j), *map(float, p)) for j, p in zip(jds, earth(jds))]
    emit(HERE / "parallax_earth.csv", ["jd", "x", "y", "z"], rows)

    out = []
    for ra, dec in SKY:
        _, north, east = basis(ra, dec)
        for t0p, pn, pe, times in EPOCHS:
            j0 = jd(t0p)
            sun0 = -earth(j0)[0]
            vel = -(earth(j0 + 0.01)[0] - earth(j0 - 0.01)[0]) / 0.02
            for t in times:
                sun = -earth(jd(t))[0]
                d = sun - sun0 - (t - t0p) * vel
                dn, de = float(d @ north), float(d @ east)
                out.append((
                    ra, dec, t0p, t, pn, pe, dn, de, float(sun @ north), float(sun @ east),
                    pn * dn + pe * de, pn * de - pe * dn,
                ))
    header = ["ra_deg", "dec_deg", "t0_par", "t", "pi_EN", "pi_EE", "ds_N", "ds_E", "sun_N",
              "sun_E", "dtau", "dbeta"]
    emit(HERE / "parallax_offsets.csv", header, out, rel=1e-9, abs_=1e-12)
    lens_table()


# (RA, Dec, t0,par, theta_E mas, tE d, pi_EN, pi_EE, s, q, D_S kpc, ds/dt /yr, dalpha/dt rad/yr):
# invented events.
LENSES = [
    (268.5, -29.2, 8300.0, 0.5, 40.0, 0.3, -0.4, 1.1, 1e-3, 8.0, 0.2, 0.5),
    (270.0, 66.560708, 2459100.0, 1.2, 80.0, -0.12, 0.05, 0.85, 4e-3, 7.5, -0.1, 1.5),
    (45.0, 10.0, 8700.0, 0.25, 25.0, 0.05, 0.6, 1.6, 2e-4, 8.5, 0.4, -0.3),
]
ANGLES = u.dimensionless_angles()


def earth_velocity(jd_value):
    t = Time(jd_value, format="jd", scale="tt")
    _, ve = get_body_barycentric_posvel("earth", t, ephemeris="builtin")
    _, vs = get_body_barycentric_posvel("sun", t, ephemeris="builtin")
    return (ve - vs).xyz.to(u.au / u.yr).value


def lens_table():
    kappa = (4 * const.G / (const.c**2 * const.au)).to(u.mas / u.M_sun, ANGLES)
    rows = []
    for ra, dec, t0p, th, te, pn, pe, s, q, ds, dsdt, dadt in LENSES:
        _, north, east = basis(ra, dec)
        v = earth_velocity(jd(t0p))
        vn, ve = float(v @ north), float(v @ east)
        theta = th * u.mas
        pi = np.hypot(pn, pe)
        mass = (theta / (kappa * pi)).to(u.M_sun)
        companion = (q * mass / (1 + q)).to(u.M_jup)
        pi_rel = theta * pi
        dl = (const.au / (pi_rel + (const.au / (ds * u.kpc)).to(u.mas, ANGLES))).to(u.kpc, ANGLES)
        sep = (s * theta * dl).to(u.au, ANGLES)
        mu_geo = (theta / (te * u.day)).to(u.mas / u.yr)
        mu_n = mu_geo * pn / pi + (vn * u.au / u.yr * pi_rel / const.au).to(u.mas / u.yr)
        mu_e = mu_geo * pe / pi + (ve * u.au / u.yr * pi_rel / const.au).to(u.mas / u.yr)
        te_hel = (theta / np.hypot(mu_n, mu_e)).to(u.day)
        gamma = np.hypot(dsdt / s, dadt) / u.yr
        r = sep.to(u.m)
        speed = (r * gamma).to(u.m / u.s)
        energy = (speed**2 * r / (2 * const.G * mass)).to(u.dimensionless_unscaled)
        rows.append((
            ra, dec, t0p, th, te, pn, pe, s, q, ds, dsdt, dadt,
            float(mass.value), float((mass / (1 + q)).value), float(companion.value),
            float(pi_rel.to(u.mas).value), float(dl.value), float(sep.value),
            float(mu_n.value), float(mu_e.value), float(te_hel.value), float(mu_geo.value),
            float(energy.value),
        ))
    header = ["ra_deg", "dec_deg", "t0_par", "theta_E_mas", "tE_days", "pi_EN", "pi_EE", "s", "q",
              "ds_kpc", "ds_dt", "dalpha_dt", "lens_mass_msun", "lens_host_msun",
              "lens_companion_mjup", "lens_pi_rel_mas", "lens_dl_kpc", "lens_separation_au",
              "mu_hel_n_mas_per_yr", "mu_hel_e_mas_per_yr", "tE_hel_days", "mu_geo_mas_per_yr",
              "energy_ratio"]
    emit(HERE / "parallax_lens.csv", header, rows, rel=1e-9, abs_=1e-12)


if __name__ == "__main__":
    main()
