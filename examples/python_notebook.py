#!/usr/bin/env python3
"""causeway from Python, as a notebook would use it (cells marked `# %%`).

An invented scenario: a planet of mass ratio q = 3e-3 at s = 1.3 Einstein radii from its host.
The script builds a map around the planetary caustic and draws it with the caustics over it,
draws a limb-darkened source's curve across the caustic (map reads against contour
integration), simulates an event, fits it over a small library, and samples the posterior with
emcee, the model being causeway's exact finite-source magnification.

    python examples/python_notebook.py --out notebook-output          # full size
    python examples/python_notebook.py --quick --out /tmp/nb          # CI size (under 2 minutes)

Needs the package (`pip install ./python`), matplotlib and emcee. Writes map.png, curve.png,
fit.png and posterior.png into the output folder.
"""
import argparse
import tempfile
import time
from pathlib import Path

import emcee
import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402

import causeway  # noqa: E402

parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
parser.add_argument("--quick", action="store_true", help="CI size: 16 walkers, 100 steps, 300 points")
parser.add_argument("--out", type=Path, default=Path("notebook-output"), help="folder for the PNGs")
args = parser.parse_args()
args.out.mkdir(parents=True, exist_ok=True)
started = time.time()
S, Q = 1.3, 3e-3
TRUTH = dict(s=S, q=Q, t0=0.0, u0=0.15, te=25.0, alpha=343.56, rho=0.003)

# %% A map of the planetary caustic, with the caustics over it.
lens = causeway.Lens.binary(S, Q)
host = lens.x[0]
centre = (host + S - 1 / S, 0.0)  # the planetary caustic, s - 1/s from the host
m = causeway.build_map(lens, centre, 0.12, 300 if args.quick else 800, rays=100)
fig, ax = plt.subplots(figsize=(6, 5))
im = ax.imshow(np.log10(m.data), origin="lower", extent=m.extent, cmap="magma")
for c in causeway.caustics(lens):
    ax.plot(c[:, 0], c[:, 1], lw=0.6, color="cyan")
ax.set(xlim=m.extent[:2], ylim=m.extent[2:], xlabel="x (Einstein radii)", ylabel="y")
ax.set_title(f"s = {S}, q = {Q}: {causeway.topology(lens)} topology")
fig.colorbar(im, label="log10 magnification")
fig.savefig(args.out / "map.png", dpi=120)
plt.close(fig)
print(f"map: {m}, mean magnification {m.mean():.4f}, built in {m.provenance['build_seconds']:.2f} s")

# %% A caustic-crossing curve: map reads against contour integration.
t = np.linspace(10.5, 15.0, 300 if args.quick else 2000)
x, y = causeway.trajectory(TRUTH["t0"], TRUTH["u0"], TRUTH["te"], TRUTH["alpha"], t)
a_map, a_error, method = causeway.map_magnification(m, x, y, TRUTH["rho"], ld=0.5)
a_exact, err, _ = causeway.contour_magnification(lens, x, y, TRUTH["rho"], ld=0.5, tol=1e-4)
fig, (top, bottom) = plt.subplots(2, 1, sharex=True, figsize=(7, 5), height_ratios=[3, 1])
top.plot(t, a_exact, lw=1.5, label="contour integration")
top.plot(t, a_map, lw=0.8, ls="--", label="map, " + "/".join(sorted({causeway.MAP_METHODS[k] for k in method})))
top.set(ylabel="magnification")
top.legend()
bottom.plot(t, a_map / a_exact - 1)
bottom.set(xlabel="t (days)", ylabel="map / exact - 1")
fig.savefig(args.out / "curve.png", dpi=120)
plt.close(fig)
print(f"curve: map against contour, largest relative difference {np.max(np.abs(a_map / a_exact - 1)):.2e}")

# %% A simulated event and the whole fit over a small library.
n_base, n_anomaly = (200, 100) if args.quick else (600, 300)
times = np.r_[np.linspace(-50, 50, n_base), np.linspace(11.0, 14.5, n_anomaly)]
sim = causeway.simulate(**TRUTH, times=times, fs=1.0, fb=0.2, sigma_mag=0.01, seed=3)
data = sim["data"]
store_dir = Path(tempfile.mkdtemp(prefix="causeway-notebook-"))
spec = f"""
s = {{ linear = [1.25, 1.35, 3] }}
q = {{ log = [2e-3, 4.5e-3, 3] }}
pixels = {300 if args.quick else 600}
rays = 50
[window]
rule = "planetary"
"""
store = causeway.Store.create(store_dir / "maps")
causeway.build_library(spec, store, progress=lambda k, n, s, q, built: None)
fit = causeway.fit_event([data], store, rhos=[0.002, 0.003, 0.005], zoom_levels=0, refine=2,
                         clip=0, rescale_errors=False, budget=60)
best = fit["minima"][0]
print("fit: best " + ", ".join(f"{k} = {best[k]:.5g}" for k in ("s", "q", "u0", "alpha", "t0", "te", "rho")))
print(f"fit: chi2 {best['chi2']:.1f} for {len(data)} points (single lens: {fit['single']['chi2']:.1f})")


def magnification(p, times):
    """causeway's exact magnification of a parameter vector (s, q, u0, alpha, t0, te, rho)."""
    s, q, u0, alpha, t0, te, rho = p
    return causeway.model_magnification(s, q, t0, u0, te, alpha, rho, times, tol=1e-3)


def model_flux(p):
    """The model fluxes at the data, with the (fs, fb) that fit them best (linear least squares)."""
    a = magnification(p, data.t)
    w = 1 / data.flux_err**2
    design = np.c_[a, np.ones_like(a)]
    fs, fb = np.linalg.solve(design.T @ (design * w[:, None]), design.T @ (data.flux * w))
    return fs * a + fb


fine = np.linspace(times.min(), times.max(), 3000)
p_best = np.array([best[k] for k in ("s", "q", "u0", "alpha", "t0", "te", "rho")])
fig, ax = plt.subplots(figsize=(7, 4))
ax.errorbar(data.t, data.flux, data.flux_err, fmt=".", ms=2, lw=0.5, color="grey", label="simulated data")
fs, fb = best["fluxes"][0]["fs"], best["fluxes"][0]["fb"]
ax.plot(fine, fs * magnification(p_best, fine) + fb, lw=1, label="best model")
ax.set(xlabel="t (days)", ylabel="flux")
ax.legend()
fig.savefig(args.out / "fit.png", dpi=120)
plt.close(fig)

# %% The posterior by emcee, with causeway's exact magnification as the model.
LOW = np.array([1.0, 1e-4, 0.0, 0.0, -10.0, 1.0, 1e-4])
HIGH = np.array([2.0, 3e-2, 1.0, 360.0, 10.0, 100.0, 2e-2])


def log_prob(p):
    if np.any(p < LOW) or np.any(p > HIGH):
        return -np.inf
    try:
        f = model_flux(p)
    except (ValueError, RuntimeError):
        return -np.inf
    return -0.5 * np.sum(((data.flux - f) / data.flux_err) ** 2)


walkers, steps = (16, 100) if args.quick else (32, 1500)
rng = np.random.default_rng(11)
sigma = np.array([best["sigma"][k] for k in ("s", "q", "u0", "alpha", "t0", "te", "rho")])
sigma = np.where(np.isfinite(sigma) & (sigma > 0), sigma, 1e-4 * np.abs(p_best) + 1e-8)
start = p_best + 0.5 * sigma * rng.standard_normal((walkers, len(p_best)))
np.random.seed(11)
sampler = emcee.EnsembleSampler(walkers, len(p_best), log_prob)
sampler.run_mcmc(start, steps, progress=False)
chain = sampler.get_chain(discard=steps // 2, flat=True)
names = ["s", "q", "u0", "alpha", "t0", "te", "rho"]
fig, axes = plt.subplots(1, 3, figsize=(10, 3))
for ax, k in zip(axes, (0, 1, 6)):
    ax.hist(chain[:, k], bins=30, color="steelblue")
    ax.axvline(TRUTH[names[k]], color="k", lw=1, label="truth")
    ax.set(xlabel=names[k])
axes[0].legend()
fig.suptitle(f"emcee: {walkers} walkers, {steps} steps (second half kept)")
fig.tight_layout()
fig.savefig(args.out / "posterior.png", dpi=120)
plt.close(fig)
for k, name in enumerate(names):
    lo, mid, hi = np.percentile(chain[:, k], [16, 50, 84])
    print(f"posterior: {name} = {mid:.5g} (+{hi - mid:.2g} -{mid - lo:.2g}), truth {TRUTH[name]}")
tau = np.max(sampler.get_autocorr_time(tol=0))
if steps < 50 * tau:
    print(f"posterior: {steps} steps are fewer than 50 autocorrelation times ({tau:.0f} each): "
          "the chain shows the sampler at work, not a converged posterior (run without --quick)")
print(f"acceptance {np.mean(sampler.acceptance_fraction):.2f}; wrote {args.out}/*.png in {time.time() - started:.0f} s")
