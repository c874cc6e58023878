#!/usr/bin/env python3
"""Reference magnifications of finite sources lensed by a single point lens.

Uniform disks: the closed form of Witt & Mao 1994 (ApJ 430, 505) with complete elliptic
integrals of the first, second and third kind (scipy.special.ellipk, ellipe, and the third kind
from Carlson's forms, Pi(n|m) = R_F(0, 1-m, 1) + n/3 R_J(0, 1-m, 1, 1-n)); every value is
cross-checked here against a direct one-dimensional integral (scipy.integrate.quad in polar
coordinates about the lens, using int r A(r) dr = r sqrt(r^2 + 4) / 2 with the point-source
magnification of Paczynski 1986), and the script stops if they differ by more than 1e-10. At
u = rho the closed form is singular in its parameters; the direct integral stands alone there.

Linear limb darkening I(mu) = 1 - u_ld (1 - mu), mu = sqrt(1 - r^2/rho^2): a two-dimensional
scipy.integrate.quad integral of I times the point-source magnification over the disk, in polar
coordinates about the lens (where r A(r) is bounded), divided by the flux pi rho^2 (1 - u_ld/3).

Writes contour_single.csv (columns u,rho,ld,magnification); `--check` regenerates and compares.
"""
import math
import os
import sys

import numpy as np
from scipy import integrate, special

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from refcheck import emit  # noqa: E402


def ellpi(n, m):
    return special.elliprf(0.0, 1.0 - m, 1.0) + n / 3.0 * special.elliprj(0.0, 1.0 - m, 1.0, 1.0 - n)


def witt_mao(u, rho):
    n = 4 * u * rho / (u + rho) ** 2
    m = 4 * n / (4 + (u - rho) ** 2)
    s = math.sqrt(4 + (u - rho) ** 2)
    k, e, p = special.ellipk(m), special.ellipe(m), ellpi(n, m)
    return (
        (u + rho) * s * e
        - (u - rho) * (8 + (u * u - rho * rho)) / s * k
        + 4 * (u - rho) ** 2 * (1 + rho * rho) / (s * (u + rho)) * p
    ) / (2 * math.pi * rho * rho)


def radial_limits(u, rho, t):
    """Distances from the lens along angle t (from the lens-source line) to the disk's edge."""
    c = u * math.cos(t)
    d = math.sqrt(max(0.0, rho * rho - (u * math.sin(t)) ** 2))
    return (0.0 if u < rho else c - d), c + d


def theta_max(u, rho):
    return math.pi if u < rho else math.asin(min(1.0, rho / u))


def direct_uniform(u, rho):
    big_f = lambda r: 0.5 * r * math.sqrt(r * r + 4)

    def f(t):
        r1, r2 = radial_limits(u, rho, t)
        return big_f(r2) - big_f(r1)

    v = integrate.quad(f, 0, theta_max(u, rho), epsabs=0, epsrel=1e-13, limit=400)[0]
    return 2 * v / (math.pi * rho * rho)


def direct_linear(u, rho, ld):
    def inner(t):
        r1, r2 = radial_limits(u, rho, t)

        def g(r):
            d2 = r * r + u * u - 2 * r * u * math.cos(t)
            mu = math.sqrt(max(0.0, 1 - d2 / (rho * rho)))
            return (r * r + 2) / math.sqrt(r * r + 4) * (1 - ld * (1 - mu))

        return integrate.quad(g, r1, r2, epsabs=0, epsrel=1e-12, limit=200)[0]

    v = integrate.quad(inner, 0, theta_max(u, rho), epsabs=0, epsrel=1e-11, limit=200)[0]
    return 2 * v / (math.pi * rho * rho * (1 - ld / 3))


def rows():
    out = []
    for rho in [1e-4, 1e-3, 1e-2, 0.1, 0.5]:
        for f in [0.0, 0.5, 0.99, 1.0, 1.01, 2.0, 10.0]:
            u = f * rho
            direct = direct_uniform(u, rho) if u > 0 else math.sqrt(1 + 4 / rho**2)
            if u == 0:
                value = math.sqrt(1 + 4 / rho**2)  # Witt & Mao 1994, u = 0
            elif f == 1.0:
                value = direct
            else:
                value = witt_mao(u, rho)
            if abs(value / direct - 1) > 1e-10:
                sys.exit(f"Witt-Mao and direct integral disagree at u={u}, rho={rho}: {value} {direct}")
            out.append((u, rho, 0.0, value))
    for rho in [1e-2, 0.1, 0.5]:
        for f in [0.0, 0.5, 1.5, 5.0]:
            for ld in [0.6, 1.0]:
                out.append((f * rho, rho, ld, direct_linear(f * rho, rho, ld)))
    # Far from the lens (40 to 300 radii), where the point source stands in.
    for rho in [1e-3, 1e-2]:
        for f in [40.0, 100.0, 300.0]:
            u = f * rho
            value = witt_mao(u, rho)
            direct = direct_uniform(u, rho)
            if abs(value / direct - 1) > 1e-10:
                sys.exit(f"Witt-Mao and direct integral disagree at u={u}, rho={rho}: {value} {direct}")
            out.append((u, rho, 0.0, value))
    return out


if __name__ == "__main__":
    emit(
        os.path.join(os.path.dirname(os.path.abspath(__file__)), "contour_single.csv"),
        ["u", "rho", "ld", "magnification"],
        rows(),
        rel=1e-10,
        abs_=0.0,
    )
