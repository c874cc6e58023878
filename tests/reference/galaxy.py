#!/usr/bin/env python3
"""Galactic-model references for the lens posterior (src/galaxy), written independently with numpy
and scipy from the published formulas.

- Densities: Han & Gould 2003 (ApJ 592, 172) disk, rho0 exp(-(R-R0)/hR) [(1-beta) sech^2(z/h1)
  + beta exp(-|z|/h2)], and the Dwek et al. 1995 G2 bar as Han & Gould 1995 (ApJ 447, 53) use
  it, rho0 exp(-rs^2/2), rs^4 = ((x'/x0)^2 + (y'/y0)^2)^2 + (z/z0)^4, bar at 20 deg, R0 = 8 kpc
  (values from memory, as in the module docs).
- Velocity moments: 3-D Gaussians (disk: 220 km/s rotation, 30/30/20 km/s; bulge: 0 and
  110/82.5/66.3 km/s) less the Sun's motion (Schoenrich et al. 2010 peculiar velocity), projected
  with a matrix product onto the (l, b) directions and divided by 4.74047 D.
- Mean masses: scipy.integrate.quad over the Kroupa 2001 IMF with remnants (Kalirai et al. 2008
  white dwarfs, neutron stars 1.35 from 8-40 M_sun, black holes 5 M_sun above).
- Event-rate weight: scipy.integrate.quad of D^2 n(D) along the line of sight.
- A direct numpy Monte Carlo of the event rate Gamma ~ D_L^2 n theta_E mu_rel (lens distances
  uniform and weighted, masses drawn from the IMF with remnants, 3-D velocities): the tE
  distribution of the prior, and the posterior given tE alone (the prior reweighted by the tE
  likelihood).

- Coordinates: astropy's ICRS to Galactic transformation for the equatorial input, and the
  position angle of Galactic north (for the direction of pi_E).

Writes galaxy_density.csv, galaxy_motion.csv, galaxy_rate.csv, galaxy_coords.csv and
galaxy_mc.csv;
`python3 galaxy.py --check` compares with the committed files.
"""
from pathlib import Path

import numpy as np
from scipy import integrate

from refcheck import emit

HERE = Path(__file__).parent
R0 = 8.0
KMS = 4.740470463533348  # km/s per (mas/yr kpc)
KAPPA = 8.14399  # mas per M_sun, replaced below by the astropy-free value 4GM/(c^2 au)
GM_SUN, C, AU = 1.3271244e20, 299792458.0, 149597870700.0
KAPPA = 4 * GM_SUN / (C * C * AU) * (180 / np.pi * 3600e3)
SUN = np.array([11.1, 220.0 + 12.24, 7.25])
FIELDS = [(1.0, -3.0), (-5.0, -2.5), (10.0, 1.0), (0.5, -6.0)]


def direction(l, b):
    l, b = np.radians(l), np.radians(b)
    n = np.array([np.cos(b) * np.cos(l), np.cos(b) * np.sin(l), np.sin(b)])
    el = np.array([-np.sin(l), np.cos(l), 0.0])
    eb = np.array([-np.sin(b) * np.cos(l), -np.sin(b) * np.sin(l), np.cos(b)])
    return n, el, eb


def disk(p):
    x, y, z = p
    r = np.hypot(R0 - x, y)
    return 0.0493e9 * np.exp(-(r - R0) / 2.75) * (
        (1 - 0.381) / np.cosh(z / 0.156) ** 2 + 0.381 * np.exp(-np.abs(z) / 0.439))


def bulge(p):
    x, y, z = p
    t = np.radians(20.0)
    rot = np.array([[-np.cos(t), np.sin(t)], [np.sin(t), np.cos(t)]])
    xb, yb = rot @ np.array([x - R0, y])
    rs = (((xb / 1.58) ** 2 + (yb / 0.62) ** 2) ** 2 + (z / 0.43) ** 4) ** 0.25
    return 1.23e9 * np.exp(-rs ** 2 / 2)


def imf_pieces():
    edges = [0.01, 0.08, 0.5, 120.0]
    slopes = [0.3, 1.3, 2.3]
    c = [1.0, 0.08, 0.08 * 0.5]  # continuity at 0.08 and 0.5
    norm = sum(integrate.quad(lambda m, k=k: c[k] * m ** -slopes[k], edges[k], edges[k + 1])[0]
               for k in range(3))
    return edges, slopes, [x / norm for x in c]


EDGES, SLOPES, COEF = imf_pieces()


def imf(m):
    for k in range(3):
        if EDGES[k] <= m <= EDGES[k + 1]:
            return COEF[k] * m ** -SLOPES[k]
    return 0.0


def alive(m, pop):
    t = 10.0 * m ** -2.5
    return float(t > 10.0) if pop == "bulge" else min(1.0, t / 10.0)


def final_mass(m):
    return 0.109 * m + 0.394 if m < 8 else (1.35 if m < 40 else 5.0)


def mean_mass(pop):
    f = lambda m: imf(m) * (alive(m, pop) * m + (1 - alive(m, pop)) * final_mass(m))
    pts = [0.08, 0.5, 0.85, 1.0, 8.0, 40.0]
    return integrate.quad(f, 0.01, 120.0, points=pts, limit=400, epsabs=0, epsrel=1e-11)[0]


MEAN = {"disk": mean_mass("disk"), "bulge": mean_mass("bulge")}


def number(l, b, d):
    n, _, _ = direction(l, b)
    p = d * n
    return disk(p) / MEAN["disk"], bulge(p) / MEAN["bulge"]


def moments(pop, l, b, d):
    n, el, eb = direction(l, b)
    p = d * n
    if pop == "disk":
        g = np.array([p[0] - R0, p[1], 0.0])
        rhat = g / np.linalg.norm(g)
        phat = np.array([rhat[1], -rhat[0], 0.0])
        axes = np.array([rhat, phat, [0, 0, 1.0]])
        mean = 220.0 * phat
        cov3 = axes.T @ np.diag([30.0 ** 2, 30.0 ** 2, 20.0 ** 2]) @ axes
    else:
        mean = np.zeros(3)
        cov3 = np.diag([110.0 ** 2, 82.5 ** 2, 66.3 ** 2])
    proj = np.array([el, eb]) / (KMS * d)
    return proj @ (mean - SUN), proj @ cov3 @ proj.T


def wquantile(x, w, qs):
    o = np.argsort(x)
    x, c = x[o], np.cumsum(w[o])
    return [x[np.searchsorted(c, q * c[-1])] for q in qs]


def draw_masses(rng, pop, n):
    """Present-day masses (M_sun) and classes (0 MS, 1 BD, 2 WD, 3 NS, 4 BH)."""
    seg_p = np.array([integrate.quad(lambda m, k=k: COEF[k] * m ** -SLOPES[k], EDGES[k],
                                     EDGES[k + 1])[0] for k in range(3)])
    k = rng.choice(3, size=n, p=seg_p / seg_p.sum())
    u = rng.random(n)
    e = 1 - np.array(SLOPES)[k]
    lo, hi = np.array(EDGES)[k], np.array(EDGES)[k + 1]
    m = (lo ** e + u * (hi ** e - lo ** e)) ** (1 / e)
    t = 10.0 * m ** -2.5
    p_alive = (t > 10.0).astype(float) if pop == "bulge" else np.minimum(1.0, t / 10.0)
    live = rng.random(n) < p_alive
    cls = np.where(live, np.where(m < 0.08, 1, 0), np.where(m < 8, 2, np.where(m < 40, 3, 4)))
    z = rng.standard_normal(n)
    mass = np.select([live, m < 8, m < 40], [m, 0.109 * m + 0.394, 1.35 + 0.04 * z],
                     np.maximum(0.5, 5.0 + z))
    return mass, cls


def velocities(rng, pop, pos):
    """3-D Galactic velocities (km/s) of stars at heliocentric positions pos (n x 3)."""
    n = len(pos)
    if pop == "bulge":
        return rng.standard_normal((n, 3)) * np.array([110.0, 82.5, 66.3])
    g = np.stack([pos[:, 0] - R0, pos[:, 1]], axis=1)
    rhat = g / np.linalg.norm(g, axis=1)[:, None]
    phat = np.stack([rhat[:, 1], -rhat[:, 0]], axis=1)
    z = rng.standard_normal((n, 3))
    v = np.zeros((n, 3))
    v[:, :2] = (220.0 + 30.0 * z[:, 1])[:, None] * phat + (30.0 * z[:, 0])[:, None] * rhat
    v[:, 2] = 20.0 * z[:, 2]
    return v


def monte_carlo(l, b, ds, n, seed):
    """Direct Monte Carlo of the event rate: weights, tE, host masses, lens distances, classes."""
    rng = np.random.default_rng(seed)
    nvec, el, eb = direction(l, b)
    dl = rng.random(n) * ds
    pos = dl[:, None] * nvec[None, :]
    nd, nb = disk(pos.T) / MEAN["disk"], bulge(pos.T) / MEAN["bulge"]
    bulge_l = rng.random(n) * (nd + nb) < nb
    w = dl ** 2 * (nd + nb)
    mass = np.empty(n)
    cls = np.empty(n, dtype=int)
    vl = np.empty((n, 3))
    for pop, sel in (("disk", ~bulge_l), ("bulge", bulge_l)):
        mass[sel], cls[sel] = draw_masses(rng, pop, sel.sum())
        vl[sel] = velocities(rng, pop, pos[sel])
    sd, sb = number(l, b, ds)
    bulge_s = rng.random(n) * (sd + sb) < sb
    vs = np.empty((n, 3))
    spos = np.repeat((ds * nvec)[None, :], n, axis=0)
    for pop, sel in (("disk", ~bulge_s), ("bulge", bulge_s)):
        vs[sel] = velocities(rng, pop, spos[sel])
    mul = ((vl - SUN) @ np.array([el, eb]).T) / (KMS * dl[:, None])
    mus = ((vs - SUN) @ np.array([el, eb]).T) / (KMS * ds)
    mu = np.linalg.norm(mul - mus, axis=1)
    theta = np.sqrt(KAPPA * mass * (1 / dl - 1 / ds))
    te = theta / mu * 365.25
    return w * theta * mu, te, mass, dl, cls


def main():
    dens = []
    for l, b in FIELDS:
        n, _, _ = direction(l, b)
        for d in (0.5, 2.0, 4.0, 6.5, 8.0, 9.3, 12.0):
            dens.append((l, b, d, disk(d * n), bulge(d * n)))
    emit(HERE / "galaxy_density.csv", ["l", "b", "d", "rho_disk", "rho_bulge"], dens)

    mot = []
    for pop_id, pop in enumerate(("disk", "bulge")):
        for l, b in FIELDS:
            for d in (1.0, 4.0, 8.0):
                mean, cov = moments(pop, l, b, d)
                mot.append((float(pop_id), l, b, d, mean[0], mean[1], cov[0, 0], cov[0, 1], cov[1, 1]))
    emit(HERE / "galaxy_motion.csv",
         ["population", "l", "b", "d", "mu_l", "mu_b", "cov_ll", "cov_lb", "cov_bb"], mot, rel=1e-10)

    rate = [(0.0, 0.0, 0.0, MEAN["disk"], MEAN["bulge"])]
    for l, b in FIELDS:
        for d in (2.0, 6.0, 8.0, 11.0):
            f = lambda x: x * x * sum(number(l, b, x))
            rate.append((l, b, d, integrate.quad(f, 0, d, limit=400, epsrel=1e-10)[0], 0.0))
    emit(HERE / "galaxy_rate.csv", ["l", "b", "d", "cumulative", "mean_mass_bulge"], rate, rel=1e-8)

    from astropy.coordinates import SkyCoord
    import astropy.units as u
    eq = [(266.41683, -29.00781), (270.1, -29.5), (268.0, -30.0), (10.0, 40.0), (192.0, 27.0),
          (83.6, -5.4)]
    gal = [SkyCoord(ra=ra * u.deg, dec=dec * u.deg, frame="icrs").galactic for ra, dec in eq]
    # position angle (east of north) of the direction of increasing b
    up = [SkyCoord(l=g.l, b=g.b + 1e-4 * u.deg, frame="galactic") for g in gal]
    pa = [float(g.icrs.position_angle(p.icrs).rad) for g, p in zip(gal, up)]
    emit(HERE / "galaxy_coords.csv", ["ra", "dec", "l", "b", "north_pa"],
         [(ra, dec, float(g.l.deg), float(g.b.deg), a)
          for (ra, dec), g, a in zip(eq, gal, pa)], rel=1e-10)

    l, b, ds = 1.0, -3.0, 8.0
    w, te, mass, dl, cls = monte_carlo(l, b, ds, 1_500_000, 20261202)
    qs = [0.16, 0.5, 0.84]
    rows = [("prior_tE_q" + str(int(100 * q)), v) for q, v in zip(qs, wquantile(te, w, qs))]
    wt = w * np.exp(-0.5 * ((te - 25.0) / 2.0) ** 2)  # tE = 25 +- 2 d
    rows += [("post_mass_q" + str(int(100 * q)), v) for q, v in zip(qs, wquantile(mass, wt, qs))]
    rows += [("post_dl_q" + str(int(100 * q)), v) for q, v in zip(qs, wquantile(dl, wt, qs))]
    rows += [("post_p_" + name, wt[cls == k].sum() / wt.sum())
             for k, name in enumerate(["ms", "bd", "wd", "ns", "bh"])]
    rows += [("prior_p_" + name, w[cls == k].sum() / w.sum())
             for k, name in enumerate(["ms", "bd", "wd", "ns", "bh"])]
    emit(HERE / "galaxy_mc.csv", ["quantity", "value"], [(k, float(v)) for k, v in rows], rel=1e-9)


if __name__ == "__main__":
    main()
