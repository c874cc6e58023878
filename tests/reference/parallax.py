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

`python3 parallax.py --check` compares with the committed tables.
"""
from pathlib import Path
import warnings

import numpy as np
import astropy.units as u
from astropy.coordinates import SkyCoord, get_body_barycentric
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


if __name__ == "__main__":
    main()
