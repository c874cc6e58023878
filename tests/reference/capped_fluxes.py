#!/usr/bin/env python3
"""Source and blend fluxes minimising the search's capped chi^2, by scipy.optimize.least_squares
with a callable loss: the reference of causeway's fit_fluxes_capped.

For a data set with fluxes F_i, errors sigma_i and magnifications A_i, with r_i =
(F_i - fs A_i - fb) / sigma_i, the capped chi^2 is sum rho(r_i^2), rho(z) = z up to the cap C and
C (1 + ln(z / C)) beyond. scipy.optimize.least_squares minimises sum rho(f_i^2) for a callable
rho returning (rho, rho', rho'') (its robust-loss interface; f_scale 1), here from the plain
least-squares fluxes, to xtol = ftol = gtol = 1e-15.

Synthetic data sets (invented, seeded numpy.random.default_rng) follow Paczynski's curve
A(u) = (u^2 + 2) / (u sqrt(u^2 + 4)), u^2 = u0^2 + ((t - t0)/tE)^2 (Paczynski 1986), with flux
fs A + fb, Gaussian flux noise and a few points pushed far off (outliers, or a run near the peak
as a caustic crossing a little off would leave).

Writes two tables beside this file:
- capped_fluxes_data.csv: case, t, flux, error, magnification -- one row per point;
- capped_fluxes.csv: case, name, cap, least_squares's fs, fb and capped chi2, and the plain
  least-squares fs, fb (its start).

`python3 capped_fluxes.py --check` regenerates both in memory and compares (1e-9 relative: the
minimiser stops within its tolerances, not at round-off).
"""
from pathlib import Path

import numpy as np
from scipy.optimize import least_squares

from refcheck import emit

HERE = Path(__file__).parent

# name: (t0, u0, tE, fs, fb, cap, outliers: (count, offset in sigma), run near the peak, seed)
CASES = [
    # Five isolated outliers 30 to 300 sigma high.
    ("outliers", (9012.0, 0.2, 25.0, 1.0, 0.5, 25.0, (5, 30.0, 300.0), 0, 31)),
    # A run of 12 points near the peak 40 sigma low (a crossing the model puts early).
    ("run_low", (-4.0, 0.1, 18.0, 2.0, 0.2, 25.0, (0, 0.0, 0.0), 12, 32)),
    # Both, with a tighter cap (9: three sigma).
    ("both_cap9", (150.0, 0.3, 40.0, 0.7, 1.5, 9.0, (8, 10.0, 100.0), 6, 33)),
    # Clean data: no point beyond the cap, the plain fit.
    ("clean", (9012.0, 0.2, 25.0, 1.0, 0.5, 25.0, (0, 0.0, 0.0), 0, 34)),
]
POINTS = 300
SIGMA = 0.01


def paczynski(u):
    return (u * u + 2.0) / (u * np.sqrt(u * u + 4.0))


def case_data(t0, u0, te, fs, fb, outliers, run, seed):
    rng = np.random.default_rng(seed)
    t = np.sort(rng.uniform(t0 - 2.0 * te, t0 + 2.0 * te, POINTS))
    a = paczynski(np.sqrt(u0 * u0 + ((t - t0) / te) ** 2))
    err = SIGMA * (0.8 + 0.4 * rng.uniform(size=POINTS))
    flux = fs * a + fb + err * rng.standard_normal(POINTS)
    count, low, high = outliers
    if count:
        at = rng.choice(POINTS, size=count, replace=False)
        flux[at] += err[at] * rng.uniform(low, high, size=count)
    if run:
        peak = int(np.argmin(np.abs(t - t0)))
        flux[peak : peak + run] -= 40.0 * err[peak : peak + run]
    return t, a, flux, err


def capped_loss(cap):
    def rho(z):
        out = np.empty((3, z.size))
        beyond = z > cap
        out[0] = np.where(beyond, cap * (1.0 + np.log(np.maximum(z, cap) / cap)), z)
        out[1] = np.where(beyond, cap / np.maximum(z, cap), 1.0)
        out[2] = np.where(beyond, -cap / np.maximum(z, cap) ** 2, 0.0)
        return out

    return rho


def solve(a, flux, err, cap):
    x = np.column_stack([a / err, 1.0 / err])
    plain, *_ = np.linalg.lstsq(x, flux / err, rcond=None)
    fit = least_squares(
        lambda p: (flux - p[0] * a - p[1]) / err,
        plain,
        loss=capped_loss(cap),
        xtol=1e-15,
        ftol=1e-15,
        gtol=1e-15,
        max_nfev=10000,
    )
    fs, fb = fit.x
    capped = float(np.sum(capped_loss(cap)(((flux - fs * a - fb) / err) ** 2)[0]))
    return float(fs), float(fb), capped, float(plain[0]), float(plain[1])


def tables():
    data, fits = [], []
    for case, (name, (t0, u0, te, fs, fb, cap, outliers, run, seed)) in enumerate(CASES):
        t, a, flux, err = case_data(t0, u0, te, fs, fb, outliers, run, seed)
        data += [
            (case, float(ti), float(fi), float(ei), float(ai))
            for ti, fi, ei, ai in zip(t, flux, err, a)
        ]
        fits.append((case, name, cap, *solve(a, flux, err, cap)))
    return data, fits


def main():
    data, fits = tables()
    emit(HERE / "capped_fluxes_data.csv", ["case", "t", "flux", "error", "magnification"], data)
    emit(
        HERE / "capped_fluxes.csv",
        ["case", "name", "cap", "fs", "fb", "chi2", "plain_fs", "plain_fb"],
        fits,
        rel=1e-9,
        abs_=1e-12,
    )


if __name__ == "__main__":
    main()
