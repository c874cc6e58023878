#!/usr/bin/env python3
"""The lens estimate from the fit's posterior samples (src/galaxy/samples.rs), against a direct
numpy Monte Carlo.

An invented fit's posterior: log tE ~ N(log 30, 0.1) and rho = t_* / tE with
log t_* ~ N(log 0.036 d, 0.08) (rho and tE strongly anti-correlated, as a caustic crossing
measures t_* = rho tE), theta_* = 0.6 +- 0.03 microarcseconds. numpy draws 4000 rows of it
(galaxy_samples.csv: what an MCMC over the fit would write; Rust reads them).

The reference (galaxy_samples_mc.csv) never sees the rows: it draws events directly from the
prior of galaxy.py (monte_carlo: lens distances weighted by D^2 n, masses from the IMF with
remnants, 3-D velocities, the event rate theta_E mu_rel) toward (l, b) = (1, -3) with sources at
8 kpc, and weights each by the likelihood of its (tE, theta_E): the known density of the fit's
posterior at (tE, rho = theta_* / theta_E) (flat priors in tE and rho, so the posterior density
is the likelihood), averaged over theta_* by 24-point Gauss-Hermite quadrature.

`python3 galaxy_samples.py --check` compares with the committed files.
"""
from pathlib import Path

import numpy as np

from galaxy import KAPPA, monte_carlo, wquantile
from refcheck import emit

HERE = Path(__file__).parent
LOG_TE, SD_TE = np.log(30.0), 0.1
LOG_TSTAR, SD_TSTAR = np.log(0.036), 0.08
THETA_STAR, THETA_STAR_ERR = 0.6, 0.03  # microarcseconds


def fit_density(te, rho):
    """Density of the invented posterior in (tE, rho)."""
    x = np.log(te)
    y = np.log(rho * te)
    g = lambda v, m, s: np.exp(-0.5 * ((v - m) / s) ** 2) / (s * np.sqrt(2 * np.pi))
    # (x, y) are Gaussian and independent; (tE, rho) -> (x, y) has Jacobian 1 / (tE rho).
    return g(x, LOG_TE, SD_TE) * g(y, LOG_TSTAR, SD_TSTAR) / (te * rho)


def main():
    rng = np.random.default_rng(20261203)
    n = 4000
    te = np.exp(LOG_TE + SD_TE * rng.standard_normal(n))
    rho = np.exp(LOG_TSTAR + SD_TSTAR * rng.standard_normal(n)) / te
    u0 = 0.01 + 0.001 * rng.standard_normal(n)  # a column the estimate ignores
    emit(HERE / "galaxy_samples.csv", ["u0", "tE", "rho"],
         [(float(a), float(b), float(c)) for a, b, c in zip(u0, te, rho)])

    w, te_model, mass, dl, cls = monte_carlo(1.0, -3.0, 8.0, 1_500_000, 20261204)
    theta = np.sqrt(KAPPA * mass * (1 / dl - 1 / 8.0))
    nodes, weights = np.polynomial.hermite_e.hermegauss(24)
    like = np.zeros_like(theta)
    for z, h in zip(nodes, weights):
        ts = (THETA_STAR + THETA_STAR_ERR * z) / 1000.0  # mas
        like += h * fit_density(te_model, ts / theta)
    wt = w * like
    qs = [0.16, 0.5, 0.84]
    rows = []
    for name, x in (("mass", mass), ("dl", dl), ("theta_e", theta), ("te", te_model)):
        rows += [(f"{name}_q{int(100 * q)}", v) for q, v in zip(qs, wquantile(x, wt, qs))]
    rows += [("p_" + c, wt[cls == k].sum() / wt.sum())
             for k, c in enumerate(["ms", "bd", "wd", "ns", "bh"])]
    rows.append(("effective", wt.sum() ** 2 / (wt ** 2).sum()))
    emit(HERE / "galaxy_samples_mc.csv", ["quantity", "value"],
         [(k, float(v)) for k, v in rows], rel=1e-9)


if __name__ == "__main__":
    main()
