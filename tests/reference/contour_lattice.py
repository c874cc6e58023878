#!/usr/bin/env python3
"""Brute-force finite-source magnifications of binary lenses by counting image-plane lattice points.

A uniform source disk of radius rho about c has magnification (image area) / (pi rho^2). Here the
image area is counted on a regular image-plane lattice of spacing rho / PER_RHO (points at
((i + 1/2) h, (j + 1/2) h)): every lattice point is mapped through the lens equation
zeta = z - sum_i m_i / conj(z - z_i) and counted when it lands in the disk; A = count h^2 / (pi rho^2).

Every image lies within |z| <= R_L + ((Z - R_L) + sqrt((Z - R_L)^2 + 4)) / 2 (R_L the largest
lens distance from the origin, Z = |c| + rho; from |z - zeta| <= 1 / (|z| - R_L)). That square is
split as a quadtree: a block of half-side b about z_b maps into the disk of radius
b sqrt2 + sum_i m_i d / ((|w_i| - d) |w_i|) (d = b sqrt2, w_i = z_b - z_i) about zeta(z_b), and is
dropped when that disk misses the source; blocks holding a lens are always kept. Leaves of
LEAF x LEAF lattice points are counted with numpy.

`lattice_spread` is half the standard deviation of the four interleaved sub-lattices of spacing 2h,
a rough size of the counting error.

Cases: binaries with sources straddling folds and cusps (caustic points from numpy.roots of the
critical-curve polynomial sum_i m_i prod_{k!=i} (z - z_k)^2 = e^{i phi} prod_k (z - z_k)^2, and
on-axis cusps from the real roots of sum_i m_i / (x - x_i)^2 = 1 found with numpy.roots), rho from
1e-4 to 0.5, a source centred on a lens, sources centred on cusps.

Writes contour_lattice.csv. The values are expensive (minutes): by default rows already in the
committed file with the same case and parameters are kept and only new cases computed (`--all`
recomputes every row); `--check` regenerates only the rows listed in SPOT_CHECK and compares
them with the committed file.
"""
import math
import os
import sys

import numpy as np
from numpy.polynomial import polynomial as P

HERE = os.path.dirname(os.path.abspath(__file__))
OUT = os.path.join(HERE, "contour_lattice.csv")
PER_RHO = 1000
LEAF = 64
SPOT_CHECK = [0, 3]


def binary(s, q):
    m1, m2 = 1 / (1 + q), q / (1 + q)
    return np.array([-s * q / (1 + q), s / (1 + q)], dtype=complex), np.array([m1, m2])


def source_of(z, zl, m):
    return z - np.sum(m[None, :] / np.conj(z[:, None] - zl[None, :]), axis=1)


def axis_cusps(zl, m):
    """Source positions of the on-axis cusps: real x with sum m_i/(x - x_i)^2 = +-1."""
    x = zl.real
    out = []
    for sign in (1.0, -1.0):
        # sum_i m_i prod_{k != i} (x - x_k)^2 - sign prod_k (x - x_k)^2 = 0
        poly = np.zeros(1)
        full = np.array([1.0])
        for xk in x:
            full = P.polymul(full, P.polymul([-xk, 1.0], [-xk, 1.0]))
        for i in range(len(x)):
            term = np.array([m[i]])
            for k in range(len(x)):
                if k != i:
                    term = P.polymul(term, P.polymul([-x[k], 1.0], [-x[k], 1.0]))
            poly = P.polyadd(poly, term)
        poly = P.polysub(poly, sign * full)
        for r in np.roots(poly[::-1]):
            if abs(r.imag) < 1e-9:
                out.append(source_of(np.array([complex(r.real, 0.0)]), zl, m)[0].real)
    return sorted(out)


def caustic_point(zl, m, phi):
    """Caustic points for one phase phi of the critical-curve polynomial."""
    full = np.array([1.0 + 0j])
    for zk in zl:
        full = P.polymul(full, P.polymul([-zk, 1.0], [-zk, 1.0]))
    poly = np.zeros(1, dtype=complex)
    for i in range(len(zl)):
        term = np.array([m[i] + 0j])
        for k in range(len(zl)):
            if k != i:
                term = P.polymul(term, P.polymul([-zl[k], 1.0], [-zl[k], 1.0]))
        poly = P.polyadd(poly, term)
    poly = P.polysub(poly, np.exp(1j * phi) * full)
    roots = np.roots(poly[::-1])
    return source_of(roots, zl, m)


def lattice_magnification(zl, m, c, rho, per_rho=PER_RHO):
    h = rho / per_rho
    r_l = np.max(np.abs(zl))
    zmax = abs(c) + rho
    a = zmax - r_l
    radius = r_l + 0.5 * (a + math.sqrt(a * a + 4))
    leaves = 2 ** int(math.ceil(math.log2(2 * radius / h / LEAF)))
    half_n = leaves * LEAF // 2
    # Blocks: lower-left lattice index (i0, j0) and side in points; start with one square.
    side = 2 * half_n
    i0 = np.array([-half_n])
    j0 = np.array([-half_n])
    while True:
        b = 0.5 * side * h
        zc = (i0 + 0.5 * side) * h + 1j * (j0 + 0.5 * side) * h
        d = b * math.sqrt(2)
        w = zc[:, None] - zl[None, :]
        r = np.abs(w)
        holds_lens = np.any(r <= d * (1 + 1e-9), axis=1)
        rr = np.where(r > d, r, 2 * d)
        spread = np.sum(m[None, :] * d / ((rr - d) * rr), axis=1)
        zeta = zc - np.sum(m[None, :] / np.conj(np.where(r > 0, w, 1.0)), axis=1)
        reach = (d + spread) * (1 + 1e-9) + 1e-12
        keep = holds_lens | (np.abs(zeta - c) <= rho + reach)
        i0, j0 = i0[keep], j0[keep]
        if side <= LEAF:
            break
        side //= 2
        i0 = np.concatenate([i0, i0 + side, i0, i0 + side])
        j0 = np.concatenate([j0, j0, j0 + side, j0 + side])
    counts = np.zeros(4, dtype=np.int64)
    li = np.arange(LEAF)
    gi, gj = np.meshgrid(li, li, indexing="ij")
    sub = ((gi % 2) * 2 + (gj % 2)).ravel()
    batch = 128
    for k in range(0, len(i0), batch):
        bi = i0[k:k + batch, None] + gi.ravel()[None, :]
        bj = j0[k:k + batch, None] + gj.ravel()[None, :]
        z = (bi + 0.5) * h + 1j * (bj + 0.5) * h
        zeta = z.copy()
        for zk, mk in zip(zl, m):
            zeta -= mk / np.conj(z - zk)
        inside = np.abs(zeta - c) <= rho
        for s in range(4):
            counts[s] += np.count_nonzero(inside[:, sub == s])
    total = counts.sum()
    area = math.pi * rho * rho
    mag = total * h * h / area
    subs = counts * (4 * h * h) / area
    return mag, 0.5 * float(np.std(subs))


def cases():
    out = []
    # Resonant equal-mass binary: on-axis cusps, and a fold point.
    zl, m = binary(1.0, 1.0)
    cusps = axis_cusps(zl, m)
    x_cusp = max(cusps)
    out.append(("equal_cusp_centre_1e-2", 1.0, 1.0, x_cusp, 0.0, 1e-2))
    out.append(("equal_cusp_straddle_1e-3", 1.0, 1.0, x_cusp - 5e-4, 3e-4, 1e-3))
    fold = caustic_point(zl, m, 0.7)
    f = fold[np.argmax(np.abs(fold.imag))]
    out.append(("equal_fold_1e-2", 1.0, 1.0, f.real + 3e-3, f.imag, 1e-2))
    out.append(("equal_fold_1e-4", 1.0, 1.0, f.real, f.imag + 2e-5, 1e-4))
    out.append(("equal_centre_0.1", 1.0, 1.0, 0.02, 0.03, 0.1))
    out.append(("equal_large_0.5", 1.0, 1.0, 0.1, 0.2, 0.5))
    out.append(("equal_on_lens_0.05", 1.0, 1.0, zl[1].real, 0.0, 0.05))
    # Planetary binary: the planetary caustic beyond the planet (s > 1).
    zl, m = binary(1.2, 1e-3)
    cusps = axis_cusps(zl, m)
    planet_side = [x for x in cusps if x > 0.2]
    out.append(("planet_cusp_centre_1e-3", 1.2, 1e-3, planet_side[0], 0.0, 1e-3))
    out.append(("planet_straddle_1e-2", 1.2, 1e-3, 0.5 * (planet_side[0] + planet_side[-1]), 0.004, 1e-2))
    out.append(("planet_central_cusp_1e-3", 1.2, 1e-3, min(cusps, key=abs) + 2e-4, 1e-4, 1e-3))
    # Close binary with a modest ratio: a large source over the central caustic.
    zl, m = binary(0.8, 0.1)
    fold = caustic_point(zl, m, 2.0)
    f = fold[np.argmax(np.abs(fold))]
    out.append(("close_fold_0.1", 0.8, 0.1, f.real, f.imag + 0.02, 0.1))
    out.append(("close_fold_3e-2", 0.8, 0.1, f.real + 0.01, f.imag, 3e-2))
    # Boundaries that clip a cusp between evenly spaced boundary samples (found by scanning).
    out.append(("close_clipped_cusp_0.05", 0.8, 0.1, -0.22907931034482762, 0.3105482758620689, 0.05))
    out.append(("equal_clipped_cusp_0.05", 1.0, 1.0, 0.18471379310344818, 0.5864103448275862, 0.05))
    return out


def row(case, per_rho=PER_RHO):
    name, s, q, x, y, rho = case
    zl, m = binary(s, q)
    mag, spread = lattice_magnification(zl, m, complex(x, y), rho, per_rho)
    return [name, s, q, x, y, rho, per_rho, mag, spread]


HEADER = ["case", "s", "q", "x", "y", "rho", "per_rho", "magnification", "lattice_spread"]


def fmt(v):
    return repr(float(v)) if isinstance(v, (float, np.floating)) else str(v)


if __name__ == "__main__":
    all_cases = cases()
    if "--check" in sys.argv:
        committed = [l.split(",") for l in open(OUT).read().splitlines()]
        if committed[0] != HEADER or len(committed) != len(all_cases) + 1:
            sys.exit(f"{OUT}: committed file has a different shape")
        for k in SPOT_CHECK:
            new = [fmt(v) for v in row(all_cases[k])]
            old = committed[k + 1]
            for a, b in zip(old, new):
                if a != b and not math.isclose(float(a), float(b), rel_tol=1e-12):
                    sys.exit(f"{OUT}:{k + 2}: committed {a} but regenerated {b}")
        print(f"checked {OUT} (spot check of rows {SPOT_CHECK})")
        sys.exit(0)
    lines = [",".join(HEADER)]
    kept = {}
    if "--all" not in sys.argv and os.path.exists(OUT):
        for l in open(OUT).read().splitlines()[1:]:
            kept[tuple(l.split(",")[:7])] = l
    for c in all_cases:
        key = tuple(fmt(v) for v in list(c) + [PER_RHO])
        if key in kept:
            lines.append(kept[key])
            continue
        r = row(c)
        print(",".join(fmt(v) for v in r), flush=True)
        lines.append(",".join(fmt(v) for v in r))
    open(OUT, "w").write("\n".join(lines) + "\n")
    print(f"wrote {OUT} ({len(all_cases)} rows)")
