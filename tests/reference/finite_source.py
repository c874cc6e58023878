"""Reference magnifications of a finite source lensed by a single point lens.

- Uniform disk: the closed form of Witt & Mao 1994 (ApJ 430, 505) with complete elliptic
  integrals (scipy.special ellipk, ellipe, and the third kind from Carlson's elliprj), written
  from memory and checked here against scipy.integrate.quad of the same disk integral
  (polar about the lens: the area integral of Paczynski's A inside radius r is
  2 pi F(r), F(r) = r sqrt(r^2 + 4) / 2) before any value is written.
  At u = 0 it must equal sqrt(1 + 4/rho^2) (Witt & Mao 1994).
- Limb-darkened disks (linear law, and the square-root law): the profile written as a sum of
  uniform disks, integrated over the disk radius with scipy.integrate.quad (the form of
  Lee et al. 2009, ApJ 695, 200: an integral over annuli of the uniform-disk magnification):
  A = pi rho^2 I(rho) A_u(rho) + int_0^rho pi r^2 (-dI/dr) A_u(r) dr, I normalised to unit flux.

Columns: law (0 uniform, 1 linear, 2 square root), ld_a, ld_b (u; or c, d), u, rho,
magnification.
"""
import math
from pathlib import Path

from scipy import integrate, special

from refcheck import emit

HERE = Path(__file__).parent


def F(r):
    return 0.5 * r * math.sqrt(r * r + 4.0)


def disk_quad(u, rho):
    """Uniform-disk magnification by quadrature (polar angle about the lens)."""
    if u < rho:
        f = lambda t: F(u * math.cos(t) + math.sqrt(rho * rho - (u * math.sin(t)) ** 2))
        v, _ = integrate.quad(f, 0.0, math.pi, epsabs=0, epsrel=1e-13, limit=200)
        return 2.0 * v / (math.pi * rho * rho)

    def f(t):
        c = u * math.cos(t)
        d = math.sqrt(max(rho * rho - (u * math.sin(t)) ** 2, 0.0))
        return F(c + d) - F(c - d)

    v, _ = integrate.quad(f, 0.0, math.asin(min(rho / u, 1.0)), epsabs=0, epsrel=1e-13, limit=200)
    return 2.0 * v / (math.pi * rho * rho)


def ellip_pi(n, m):
    """Complete elliptic integral of the third kind Pi(n | m) (Carlson form)."""
    return special.ellipk(m) + n / 3.0 * special.elliprj(0.0, 1.0 - m, 1.0, 1.0 - n)


def witt_mao(u, rho):
    """Uniform disk of radius rho at distance u from a point lens (Witt & Mao 1994)."""
    if u == 0.0:
        return math.sqrt(1.0 + 4.0 / rho**2)
    if abs(u - rho) < 1e-10 * rho:
        u = rho * (1.0 + 1e-10)  # the Pi term's factor (u - rho)^2 vanishes; avoid 0 * inf
    n = 4.0 * u * rho / (u + rho) ** 2
    s = math.sqrt(4.0 + (u - rho) ** 2)
    m = 4.0 * n / (4.0 + (u - rho) ** 2)
    return (
        (u + rho) * s / 2.0 * special.ellipe(m)
        - (u - rho) * (8.0 + u * u - rho * rho) / (2.0 * s) * special.ellipk(m)
        + 2.0 * (u - rho) ** 2 * (1.0 + rho * rho) / ((u + rho) * s) * ellip_pi(n, m)
    ) / (math.pi * rho * rho)


def limb_darkened(u, rho, law, a, b):
    """Limb-darkened disk as a sum of uniform disks; I(mu)/I0 = p + q mu + e sqrt(mu)."""
    p, q, e = {1: (1.0 - a, a, 0.0), 2: (1.0 - a - b, a, b)}[law]
    # unit flux: 2 pi rho^2 I0 int (I/I0) mu dmu = 1
    i0 = 1.0 / (2.0 * math.pi * rho * rho * (p / 2.0 + q / 3.0 + e / 2.5))
    # in s = sqrt(mu): r = rho sqrt(1 - s^4), dI = I0 (2 q s + e) ds
    g = lambda s: i0 * (2 * q * s + e) * math.pi * rho * rho * (1 - s**4) * witt_mao(
        u, rho * math.sqrt(1 - s**4))
    inner, _ = integrate.quad(g, 0.0, 1.0, epsabs=0, epsrel=1e-10, limit=400,
                              points=[s for s in [(1 - (u / rho) ** 2) ** 0.25] if 0 < u < rho])
    return math.pi * rho * rho * i0 * p * witt_mao(u, rho) + inner


def main():
    rho = 0.02
    us = [0.0, 0.01, 0.03, 0.05, 0.1, 0.2, 0.5, 1.0]
    for uu in us[1:]:
        a, b = witt_mao(uu, rho), disk_quad(uu, rho)
        assert math.isclose(a, b, rel_tol=1e-11), (uu, a, b)
    for r in [0.001, 0.02, 0.3, 2.0]:
        assert math.isclose(disk_quad(0.0, r), math.sqrt(1 + 4 / r**2), rel_tol=1e-12)
        assert math.isclose(witt_mao(1e-9 * r, r), math.sqrt(1 + 4 / r**2), rel_tol=1e-8)
    # Independent check of the disk decomposition at u = 0, where the annulus magnification is
    # Paczynski's A(r): A = int I(r) A(r) 2 pi r dr (here in mu, r = rho sqrt(1 - mu^2)).
    for law, a, b in [(1, 0.6, 0.0), (2, 0.3, 0.4)]:
        p, q, e = {1: (1.0 - a, a, 0.0), 2: (1.0 - a - b, a, b)}[law]
        norm = p / 2.0 + q / 3.0 + e / 2.5

        def ring(mu):
            r = rho * math.sqrt(1.0 - mu * mu)
            return (p + q * mu + e * math.sqrt(mu)) * mu * (r * r + 2.0) / (r * math.sqrt(r * r + 4.0))

        direct, _ = integrate.quad(ring, 0.0, 1.0, epsabs=0, epsrel=1e-12, limit=400)
        assert math.isclose(direct / norm, limb_darkened(0.0, rho, law, a, b), rel_tol=1e-9)
    rows = []
    for law, a, b in [(0, 0.0, 0.0), (1, 0.6, 0.0), (2, 0.3, 0.4)]:
        for uu in us:
            val = witt_mao(uu, rho) if law == 0 else limb_darkened(uu, rho, law, a, b)
            rows.append([law, a, b, uu, rho, val])
    emit(HERE / "finite_source.csv", ["law", "ld_a", "ld_b", "u", "rho", "magnification"], rows,
         rel=1e-10)


if __name__ == "__main__":
    main()
