#!/usr/bin/env python3
"""Single-lens point-source fits by scipy.optimize.curve_fit, the reference of the Rust fit.

Synthetic events (invented, seeded numpy.random.default_rng) follow Paczynski's curve
A(u) = (u^2 + 2) / (u sqrt(u^2 + 4)), u^2 = u0^2 + ((t - t0)/tE)^2 (Paczynski 1986), with
flux F = fs A + fb per data set and Gaussian noise in magnitudes (m = 22 - 2.5 log10 F) or in
flux. Each case is fitted with scipy.optimize.curve_fit (Levenberg-Marquardt, absolute_sigma,
started at the true model) over (t0, u0, tE) and fs, fb of every set; the fit is made in flux,
magnitudes converted as causeway does it (F = 10^(-0.4 (m - 22)), sigma_F = 0.4 ln(10) F sigma_m,
common practice).

Writes two tables beside this file:
- single_lens_fit_data.csv: case (index), set, flux_data (0: mag,mag_err; 1: flux,flux_err), t, value,
  error -- the photometry, one row per point;
- single_lens_fit.csv: case, name, set, scipy's t0, u0 (made >= 0), tE and their sigmas (square roots of
  the diagonal of pcov), fs, fb, sigma_fs, sigma_fb of the set, chi2 and points of the case, and
  the true t0, u0, tE.

`python3 single_lens_fit.py --check` regenerates both in memory and compares. The data are exact
(round-off); the fit is compared to 1e-9 relative, the convergence tolerance of the optimiser
rather than round-off.
"""
import math
from pathlib import Path

import numpy as np
from scipy.optimize import curve_fit

from refcheck import emit

HERE = Path(__file__).parent
ZP = 22.0

# name: (t0, u0, tE, seed, [(flux_data, fs, fb, n, t_start, t_end, sigma)])
# sigma is in magnitudes for flux_data = 0 and in flux for flux_data = 1.
CASES = [
    ("single", (7512.3, 0.12, 23.0, 11, [(0, 1.5, 0.4, 300, 7440.0, 7580.0, 0.01)])),
    (
        "two_sets",
        (8001.7, 0.35, 41.0, 12, [
            (0, 2.0, 0.5, 400, 7900.0, 8100.0, 0.008),
            (1, 30.0, -2.0, 150, 7960.0, 8040.0, 0.3),
        ]),
    ),
    ("high", (512.25, 0.004, 12.0, 13, [(1, 0.8, 2.0, 500, 490.0, 535.0, 0.02)])),
    ("blended", (3300.0, 0.9, 70.0, 14, [(0, 0.3, 3.0, 600, 3100.0, 3500.0, 0.004)])),
]


def paczynski(u):
    return (u * u + 2.0) / (u * np.sqrt(u * u + 4.0))


def magnification(t, t0, u0, te):
    tau = (t - t0) / te
    return paczynski(np.sqrt(u0 * u0 + tau * tau))


def simulate(t0, u0, te, seed, sets):
    """The photometry of one case: a list of (flux_data, t, value, error) per set."""
    rng = np.random.default_rng(seed)
    out = []
    for flux_data, fs, fb, n, a, b, sigma in sets:
        t = np.sort(rng.uniform(a, b, n))
        f = fs * magnification(t, t0, u0, te) + fb
        err = sigma * (0.8 + 0.4 * rng.uniform(size=n))
        if flux_data:
            value = f + err * rng.standard_normal(n)
        else:
            value = ZP - 2.5 * np.log10(f) + err * rng.standard_normal(n)
        out.append((flux_data, t, value, err))
    return out


def fit(t0, u0, te, sets_true, photometry):
    """curve_fit over (t0, u0, tE, fs_1, fb_1, ...): returns popt, sigmas, chi2."""
    flux, ferr, which, times = [], [], [], []
    for k, (flux_data, t, value, err) in enumerate(photometry):
        if flux_data:
            f, e = value, err
        else:
            f = 10.0 ** (-0.4 * (value - ZP))
            e = 0.4 * math.log(10.0) * f * err
        flux.append(f)
        ferr.append(e)
        which.append(np.full(len(t), k))
        times.append(t)
    flux, ferr = np.concatenate(flux), np.concatenate(ferr)
    which, times = np.concatenate(which), np.concatenate(times)
    nsets = len(photometry)

    def model(i, *p):
        i = i.astype(int)
        a = magnification(times[i], p[0], p[1], p[2])
        fs = np.array(p[3::2])[which[i]]
        fb = np.array(p[4::2])[which[i]]
        return fs * a + fb

    p0 = [t0, u0, te]
    for _, fs, fb, *_rest in sets_true:
        p0 += [fs, fb]
    x = np.arange(len(flux), dtype=float)
    popt, pcov = curve_fit(
        model, x, flux, p0=p0, sigma=ferr, absolute_sigma=True, method="lm",
        xtol=1e-15, ftol=1e-15, gtol=1e-15, maxfev=200000,
    )
    chi2 = float(np.sum(((flux - model(x, *popt)) / ferr) ** 2))
    sig = np.sqrt(np.diag(pcov))
    assert len(popt) == 3 + 2 * nsets
    return popt, sig, chi2, len(flux)


def tables():
    data, fits = [], []
    for case, (name, (t0, u0, te, seed, sets)) in enumerate(CASES):
        photometry = simulate(t0, u0, te, seed, sets)
        for k, (flux_data, t, value, err) in enumerate(photometry):
            for ti, vi, ei in zip(t, value, err):
                data.append((case, k, flux_data, float(ti), float(vi), float(ei)))
        popt, sig, chi2, points = fit(t0, u0, te, sets, photometry)
        # The true model must be recovered within a few sigma (a sanity check of the data).
        for est, s, true in zip(popt[:3], sig[:3], (t0, u0, te)):
            assert abs(abs(est) - true) < 5 * s, (case, est, true, s)
        for k in range(len(sets)):
            fits.append((
                case, name, k, float(popt[0]), float(abs(popt[1])), float(popt[2]),
                float(sig[0]), float(sig[1]), float(sig[2]),
                float(popt[3 + 2 * k]), float(popt[4 + 2 * k]),
                float(sig[3 + 2 * k]), float(sig[4 + 2 * k]),
                chi2, points, t0, u0, te,
            ))
    return data, fits


def main():
    data, fits = tables()
    emit(HERE / "single_lens_fit_data.csv", ["case", "set", "flux_data", "t", "value", "error"], data)
    emit(
        HERE / "single_lens_fit.csv",
        ["case", "name", "set", "t0", "u0", "tE", "sigma_t0", "sigma_u0", "sigma_tE", "fs", "fb",
         "sigma_fs", "sigma_fb", "chi2", "points", "true_t0", "true_u0", "true_tE"],
        fits,
        rel=1e-9,
        abs_=1e-12,
    )


if __name__ == "__main__":
    main()
