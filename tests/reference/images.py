#!/usr/bin/env python3
"""Independent reference for point-source images of binary and triple point lenses.

For each lens and source the lens-equation polynomial of degree N^2+1 (Witt 1990, A&A 236, 311)
is built here with numpy's polynomial arithmetic, its roots found with numpy.roots (companion
matrix eigenvalues) in several frames (origin at the centre of mass and at each lens in
turn, the union of the images kept: roots clustered round a small mass are accurate in double
precision only in a frame centred near it), and every root polished by Newton's method on the lens equation itself in
40-digit arithmetic (mpmath). A root is an image when the lens equation then holds to 1e-25; two
polished roots closer than 1e-20 are one image. The image count must obey the counting rule and
the parity rule (positive minus negative parity = 1 - N; Rhie 1997, Petters et al. 2001), else
the script stops. The magnification sum_i 1/|det J_i| is computed in 40 digits.

Sources: random ones within 2 Einstein radii of the centre of mass, sources next to each lens,
and near-caustic ones: a caustic point found with numpy.roots of the critical-curve polynomial
sum_i m_i prod_{k!=i} (z-z_k)^2 = e^{i phi} prod_k (z-z_k)^2, mapped through the lens equation,
moved by 1e-3 to 1e-1 of the caustic's size in a random direction.

Columns: s, q (binary parameters; 0 for the lens lists), n, then x, y, m of up to four lenses
(masses normalised; zero padding), the source (zeta_x, zeta_y), the image count, the
magnification, kind (0: random source within 2 theta_E, 1: near a caustic, 2: next to a lens) and
sensitivity: the relative change of the magnification for a source moved by eps (1 + |zeta|),
the floor that double-precision rounding of the lens equation sets on any solver.

Writes images.csv beside this file. `python3 images.py --check` regenerates the values and
compares them with the committed file instead (refcheck.py). Needs numpy and mpmath.
"""

import math
import os

import mpmath
import numpy as np
from numpy.polynomial import polynomial as P

from refcheck import emit

mpmath.mp.dps = 40

HERE = os.path.dirname(os.path.abspath(__file__))
OUT = os.path.join(HERE, "images.csv")

# Binaries (s, q): q from 1e-7 to 1 and one inverse ratio, s from 0.05 to 20.
BINARIES = [
    (1.0, 1.0),
    (0.05, 1.0),
    (20.0, 1.0),
    (0.7, 0.1),
    (1.3, 50.0),
    (1.2, 1e-3),
    (0.8, 1e-4),
    (2.5, 1e-5),
    (1.05, 1e-7),
    (0.6, 1e-7),
    (20.0, 1e-7),
    (0.05, 1e-3),
]
# Triples and a quadruple as (x, y, relative mass) lists, used as given (not recentred).
MULTIPLES = [
    [(0.0, 0.0, 1.0), (1.1, 0.0, 1e-3), (0.3, 0.8, 3e-4)],
    [(-0.4, -0.2, 1.0), (0.5, 0.1, 0.6), (0.1, 0.7, 0.3)],
    [(0.0, 0.0, 1.0), (0.9, 0.3, 0.1), (-0.6, 0.5, 0.05), (0.2, -1.1, 0.02)],
]

RANDOM_PER_LENS = 24
CAUSTIC_PER_LENS = 12
NEAR_LENS_DISTANCE = 1e-5
# Sources come no closer to a caustic than this (Einstein radii): nearer, the magnification of a
# point source is not determined to 1e-8 by double-precision inputs (see `sensitivity`).
NEAR_CAUSTIC_FLOOR = 1e-7
EPS = 2.0 ** -52


def binary_lenses(s, q):
    m1 = 1.0 / (1.0 + q)
    m2 = q / (1.0 + q)
    return [(-s * m2, 0.0, m1), (s * m1, 0.0, m2)]


def normalised(lenses):
    total = sum(m for _, _, m in lenses)
    return [(x, y, m / total) for x, y, m in lenses]


def image_polynomial(pos, mass, w):
    """Coefficients (lowest power first) of the degree N^2+1 polynomial for source w; the
    positions pos and w are in the same (shifted) frame."""
    n = len(pos)
    q = np.array([1.0 + 0j])
    for p in pos:
        q = P.polymul(q, [-p, 1.0])
    g = np.array([0j])
    for i in range(n):
        t = np.array([mass[i] + 0j])
        for k in range(n):
            if k != i:
                t = P.polymul(t, [-pos[k], 1.0])
        g = P.polyadd(g, t)
    d = [P.polyadd(np.conj(w - pos[j]) * q, g) for j in range(n)]
    prod = np.array([1.0 + 0j])
    for dj in d:
        prod = P.polymul(prod, dj)
    lhs = P.polymul([-w, 1.0], prod)
    acc = np.array([0j])
    for j in range(n):
        t = np.array([mass[j] + 0j])
        for k in range(n):
            if k != j:
                t = P.polymul(t, d[k])
        acc = P.polyadd(acc, t)
    rhs = P.polymul(q, acc)
    return P.polysub(lhs, rhs)


def mp_map(pos, mass, z):
    """Source position and shear at z, in mpmath."""
    src = z
    shear = mpmath.mpc(0)
    for p, m in zip(pos, mass):
        d = 1 / mpmath.conj(z - p)
        src -= m * d
        shear += m * d * d
    return src, shear


def polish(pos, mass, z, zeta):
    z = mpmath.mpc(z)
    for _ in range(60):
        src, k = mp_map(pos, mass, z)
        r = zeta - src
        det = 1 - abs(k) ** 2
        if det == 0:
            break
        dz = (r - k * mpmath.conj(r)) / det
        z += dz
        if abs(dz) < mpmath.mpf(10) ** -36 * (1 + abs(z)):
            break
        if abs(z) > 1e8:
            break
    src, k = mp_map(pos, mass, z)
    return z, abs(zeta - src), 1 - abs(k) ** 2


def solve(lenses, zeta):
    """Images of the source zeta: list of (z, det J) in mpmath numbers."""
    n = len(lenses)
    pos_d = [complex(x, y) for x, y, _ in lenses]
    mass_d = [m for _, _, m in lenses]
    com = sum(p * m for p, m in zip(pos_d, mass_d))
    pos = [mpmath.mpc(x, y) for x, y, _ in lenses]
    mass = [mpmath.mpf(m) for m in mass_d]
    zeta_mp = mpmath.mpc(zeta.real, zeta.imag)
    images = []
    # The roots are found in several frames (origin at the centre of mass, then at each lens):
    # double-precision roots clustered round a small mass are accurate only in a frame centred
    # near it. The images are the union of what every frame gives.
    for origin in [com] + pos_d:
        shifted = [p - origin for p in pos_d]
        coeffs = image_polynomial(shifted, mass_d, zeta - origin)
        roots = np.roots(coeffs[::-1]) + origin
        for r in roots:
            z, res, det = polish(pos, mass, complex(r), zeta_mp)
            if res < mpmath.mpf(10) ** -25 and all(abs(z - o) > 1e-20 for o, _ in images):
                images.append((z, det))
    count = len(images)
    parity = sum(1 if det > 0 else -1 for _, det in images)
    valid = (count == 2) if n == 1 else (n + 1 <= count <= 5 * (n - 1) and (count - n - 1) % 2 == 0)
    if not valid or parity != 1 - n:
        raise RuntimeError(f"inconsistent images for {lenses} at {zeta}: {count}, parity {parity}")
    return images


def caustic_points(lenses, rng, count):
    """Random caustic points (and the caustic's rough size) from the critical-curve polynomial."""
    pos = [complex(x, y) for x, y, _ in lenses]
    mass = [m for _, _, m in lenses]
    a = np.array([1.0 + 0j])
    for p in pos:
        a = P.polymul(a, P.polymul([-p, 1.0], [-p, 1.0]))
    b = np.array([0j])
    for i, m in enumerate(mass):
        t = np.array([m + 0j])
        for k, p in enumerate(pos):
            if k != i:
                t = P.polymul(t, P.polymul([-p, 1.0], [-p, 1.0]))
        b = P.polyadd(b, t)

    def lens_map(z):
        return z - sum(m / np.conj(z - p) for p, m in zip(pos, mass))

    def critical(phi):
        poly = P.polysub(b, np.exp(1j * phi) * a)
        return np.roots(poly[::-1])

    # All caustic points on a coarse grid of phi, to know each caustic's size.
    grid = [lens_map(z) for phi in np.linspace(0, 2 * np.pi, 64, endpoint=False) for z in critical(phi)]
    out = []
    for _ in range(count):
        phi = rng.uniform(0, 2 * np.pi)
        roots = critical(phi)
        z = roots[rng.integers(len(roots))]
        c = lens_map(z)
        # Size: spread of the grid caustic points within 0.5 of this one.
        near = [g for g in grid if abs(g - c) < 0.5]
        size = max(abs(g - c) for g in near) if near else 1e-3
        size = max(size, 1e-9)
        out.append((c, size))
    return out


def magnification(images):
    return sum(1 / abs(det) for _, det in images)


def sensitivity(lenses, zeta, a):
    """Largest relative change of the magnification when the source moves by
    eps (1 + |zeta|) along x or y: the floor that rounding in double precision sets (the lens
    equation is evaluated with about that absolute error)."""
    h = EPS * (1 + abs(zeta))
    worst = 0.0
    for step in (h, -h, 1j * h, -1j * h):
        try:
            b = magnification(solve(lenses, zeta + step))
        except RuntimeError:
            return float("inf")
        worst = max(worst, abs(float(b) - a) / a)
    return worst


def rows():
    rng = np.random.default_rng(20261201)
    cases = [((s, q), normalised(binary_lenses(s, q))) for s, q in BINARIES]
    cases += [((0.0, 0.0), normalised(lenses)) for lenses in MULTIPLES]
    out = []
    for (s, q), lenses in cases:
        sources = []
        for _ in range(RANDOM_PER_LENS):
            r = 2.0 * math.sqrt(rng.uniform())
            t = rng.uniform(0, 2 * math.pi)
            sources.append((complex(r * math.cos(t), r * math.sin(t)), 0))
        for c, size in caustic_points(lenses, rng, CAUSTIC_PER_LENS):
            d = max(size * 10 ** rng.uniform(-3, -1), NEAR_CAUSTIC_FLOOR)
            t = rng.uniform(0, 2 * math.pi)
            sources.append((c + d * complex(math.cos(t), math.sin(t)), 1))
        for x, y, _ in lenses:
            t = rng.uniform(0, 2 * math.pi)
            sources.append((complex(x, y) + NEAR_LENS_DISTANCE * complex(math.cos(t), math.sin(t)), 2))
        for zeta, kind in sources:
            images = solve(lenses, zeta)
            a = float(magnification(images))
            padded = list(lenses) + [(0.0, 0.0, 0.0)] * (4 - len(lenses))
            row = [s, q, len(lenses)]
            for x, y, m in padded:
                row += [float(x), float(y), float(m)]
            row += [float(zeta.real), float(zeta.imag), len(images), a, kind,
                    sensitivity(lenses, zeta, a)]
            out.append(row)
    return out


HEADER = ["s", "q", "n"] + [f"{c}{i}" for i in range(1, 5) for c in ("x", "y", "m")] + [
    "zeta_x", "zeta_y", "images", "magnification", "kind", "sensitivity"]


def main():
    emit(OUT, HEADER, rows())


if __name__ == "__main__":
    main()
