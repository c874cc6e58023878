"""Reference values for maps of a single point lens (Paczynski 1986, ApJ 304, 1).

A(u) = (u^2 + 2) / (u sqrt(u^2 + 4)); the radial integral of A(u) u du is F(u) = u sqrt(u^2+4)/2.

Rows:
- kind=window: the mean of A over a square window (cx, cy, width). Computed with scipy.integrate.quad
  over the polar angle: the square is split into the triangles (lens, edge), each integral being
  the integral over theta of F(r_edge(theta)), signed by orientation (so lenses outside work too).
- kind=pixel: the mean of A over pixel (ix, iy) of a window with `pixels` per side, by
  scipy.integrate.dblquad (the pixels chosen hold no lens, so the integrand is smooth).
Each row also carries `perimeter`: the total length of the image-plane pre-image of the square's
boundary (both images of every boundary point), used by the tests to bound lattice errors.
"""
import math
from pathlib import Path

import numpy as np
from scipy import integrate

from refcheck import emit

HERE = Path(__file__).parent


def paczynski(u):
    return (u * u + 2.0) / (u * math.sqrt(u * u + 4.0))


def F(r):
    return 0.5 * r * math.sqrt(r * r + 4.0)


def edge_integral(p1, p2):
    """Signed integral of A over the triangle (origin, p1, p2)."""
    (x1, y1), (x2, y2) = p1, p2
    t1, t2 = math.atan2(y1, x1), math.atan2(y2, x2)
    dt = (t2 - t1 + math.pi) % (2 * math.pi) - math.pi
    # distance from the origin to the line, and the direction of its normal
    ex, ey = x2 - x1, y2 - y1
    length = math.hypot(ex, ey)
    cross = x1 * ey - y1 * ex
    p = abs(cross) / length
    if p < 1e-300:
        return 0.0
    nx, ny = ey / length, -ex / length
    if nx * x1 + ny * y1 < 0:
        nx, ny = -nx, -ny
    tn = math.atan2(ny, nx)
    val, _ = integrate.quad(lambda t: F(p / math.cos(t - tn)), t1, t1 + dt, epsabs=0, epsrel=1e-13, limit=200)
    return val


def square_mean(cx, cy, w):
    h = 0.5 * w
    corners = [(cx - h, cy - h), (cx + h, cy - h), (cx + h, cy + h), (cx - h, cy + h)]
    total = sum(edge_integral(corners[k], corners[(k + 1) % 4]) for k in range(4))
    return total / (w * w)


def preimage_perimeter(cx, cy, w, samples=4000):
    """Length of both images of the square's boundary: z = zeta (1 +- sqrt(1 + 4/u^2)) / 2."""
    h = 0.5 * w
    t = np.linspace(0.0, 1.0, samples, endpoint=False)
    sides = [
        (cx - h + w * t) + 1j * (cy - h),
        (cx + h) + 1j * (cy - h + w * t),
        (cx + h - w * t) + 1j * (cy + h),
        (cx - h) + 1j * (cy + h - w * t),
    ]
    zeta = np.concatenate(sides + [sides[0][:1]])
    u = np.abs(zeta)
    total = 0.0
    for sign in (1.0, -1.0):
        z = zeta * (1.0 + sign * np.sqrt(1.0 + 4.0 / u**2)) / 2.0
        total += float(np.sum(np.abs(np.diff(z))))
    return total


def pixel_mean(cx, cy, w, n, ix, iy):
    d = w / n
    x0 = cx - 0.5 * w + ix * d
    y0 = cy - 0.5 * w + iy * d
    val, _ = integrate.dblquad(
        lambda y, x: paczynski(math.hypot(x, y)), x0, x0 + d, y0, y0 + d, epsabs=0, epsrel=1e-12
    )
    return val / (d * d)


def main():
    rows = []
    for cx, cy, w in [(0.0, 0.0, 1.0), (0.0, 0.0, 4.0), (0.3, -0.2, 1.0), (1.5, 0.5, 0.5), (3.0, 0.0, 0.5)]:
        rows.append(["window", cx, cy, w, 0, 0, 0, square_mean(cx, cy, w), preimage_perimeter(cx, cy, w)])
    cx, cy, w, n = 0.6, 0.4, 0.4, 8
    for iy in range(n):
        for ix in range(n):
            d = w / n
            pc = (cx - 0.5 * w + (ix + 0.5) * d, cy - 0.5 * w + (iy + 0.5) * d)
            rows.append(["pixel", cx, cy, w, n, ix, iy, pixel_mean(cx, cy, w, n, ix, iy),
                         preimage_perimeter(pc[0], pc[1], d, 400)])
    emit(HERE / "single_lens_maps.csv", ["kind", "cx", "cy", "width", "pixels", "ix", "iy", "mean", "perimeter"],
         rows, rel=1e-9)


if __name__ == "__main__":
    main()
