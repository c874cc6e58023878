#!/usr/bin/env python3
"""Source and blend fluxes under the baseline's flux bounds, by scipy.optimize.nnls: the reference
of the bounded flux solve of causeway's single-lens fit.

For a data set with fluxes F_i, errors sigma_i and magnifications A_i, causeway minimises
chi^2 = sum ((F_i - fs A_i - fb) / sigma_i)^2 subject to fs >= 0 and fb >= -f fs. With
g = fb + f fs the bounds become fs >= 0, g >= 0 and the model F = fs (A - f) + g, a non-negative
least squares problem, which scipy.optimize.nnls solves (Lawson & Hanson 1974, active set).

Synthetic data sets (invented, seeded numpy.random.default_rng) follow Paczynski's curve
A(u) = (u^2 + 2) / (u sqrt(u^2 + 4)), u^2 = u0^2 + ((t - t0)/tE)^2 (Paczynski 1986), with flux
fs A + fb and Gaussian flux noise; the magnifications are those of the true (t0, u0, tE), which
the Rust test passes as the given baseline.

Writes two tables beside this file:
- bounded_fluxes_data.csv: case, t, flux, error -- one row per point;
- bounded_fluxes.csv: case, name, t0, u0, tE, fraction f, nnls's fs, fb, chi2, and the bound the
  solution lies on (0: none, 1: fb = -f fs, 2: fs = 0).

`python3 bounded_fluxes.py --check` regenerates both in memory and compares (1e-12 relative: nnls
solves the problem exactly, to round-off).
"""
from pathlib import Path

import numpy as np
from scipy.optimize import nnls

from refcheck import emit

HERE = Path(__file__).parent

# name: (t0, u0, tE, fs, fb, fraction, seed)
CASES = [
    # A blend more negative than the bound allows: the solution lies on fb = -0.2 fs.
    ("negative_blend", (8412.5, 0.3, 18.0, 1.0, -0.5, 0.2, 21)),
    # An ordinary blend: the bounds are not met.
    ("free", (-3.0, 0.15, 35.0, 2.0, 0.3, 0.2, 22)),
    # A dip (negative source flux): the solution lies on fs = 0.
    ("dip", (120.0, 0.5, 10.0, -0.3, 2.0, 0.2, 23)),
    # The same negative blend with a looser bound: not met.
    ("loose_bound", (8412.5, 0.3, 18.0, 1.0, -0.5, 1.0, 21)),
]
POINTS = 200
SIGMA = 0.02


def paczynski(u):
    return (u * u + 2.0) / (u * np.sqrt(u * u + 4.0))


def case_data(t0, u0, te, fs, fb, seed):
    rng = np.random.default_rng(seed)
    t = np.sort(rng.uniform(t0 - 2.0 * te, t0 + 2.0 * te, POINTS))
    a = paczynski(np.sqrt(u0 * u0 + ((t - t0) / te) ** 2))
    err = SIGMA * (0.8 + 0.4 * rng.uniform(size=POINTS))
    flux = fs * a + fb + err * rng.standard_normal(POINTS)
    return t, a, flux, err


def solve(a, flux, err, fraction):
    x = np.column_stack([(a - fraction) / err, 1.0 / err])
    (fs, g), _ = nnls(x, flux / err)
    fb = g - fraction * fs
    chi2 = float(np.sum(((flux - fs * a - fb) / err) ** 2))
    bound = 2 if fs == 0.0 else (1 if g == 0.0 else 0)
    return float(fs), float(fb), chi2, bound


def tables():
    data, fits = [], []
    for case, (name, (t0, u0, te, fs, fb, fraction, seed)) in enumerate(CASES):
        t, a, flux, err = case_data(t0, u0, te, fs, fb, seed)
        data += [(case, float(ti), float(fi), float(ei)) for ti, fi, ei in zip(t, flux, err)]
        fits.append((case, name, t0, u0, te, fraction, *solve(a, flux, err, fraction)))
    return data, fits


def main():
    data, fits = tables()
    emit(HERE / "bounded_fluxes_data.csv", ["case", "t", "flux", "error"], data)
    emit(
        HERE / "bounded_fluxes.csv",
        ["case", "name", "t0", "u0", "tE", "fraction", "fs", "fb", "chi2", "bound"],
        fits,
    )


if __name__ == "__main__":
    main()
