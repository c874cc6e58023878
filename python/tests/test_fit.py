"""Photometry from arrays, the single-lens fit, simulate, and the whole fit."""
import numpy as np
import pytest

import causeway
from conftest import read_csv, reference, write_csv


def case_data(ref, case):
    """The data sets of one case of tests/reference/single_lens_fit_data.csv."""
    sets = []
    sel = ref["case"] == case
    for k in np.unique(ref["set"][sel]):
        s = sel & (ref["set"] == k)
        t, v, e = ref["t"][s], ref["value"][s], ref["error"][s]
        if ref["flux_data"][s][0]:
            sets.append(causeway.DataSet(t, flux=v, flux_err=e, name=f"set{int(k)}"))
        else:
            sets.append(causeway.DataSet(t, mag=v, mag_err=e, name=f"set{int(k)}"))
    return sets


def test_single_lens_fit_agrees_with_scipy():
    # tests/reference/single_lens_fit.py: scipy.optimize.curve_fit of Paczynski's curve
    # (Paczynski 1986) with linear fluxes; chi2 to 1e-9, parameters to 1e-3 sigma, sigmas to 2%
    # (the tolerances of tests/integration/fit_single.rs).
    fits = reference("single_lens_fit.csv")
    data = reference("single_lens_fit_data.csv")
    for case in np.unique(fits["case"]):
        r = np.flatnonzero(fits["case"] == case)[0]
        f = causeway.fit_single_lens(case_data(data, case))
        assert f["points"] == fits["points"][r]
        assert abs(f["chi2"] - fits["chi2"][r]) < 1e-9 * fits["chi2"][r]
        for k, name in enumerate(["t0", "u0", "tE"]):
            ours = f[name.replace("tE", "te")]
            assert abs(ours - fits[name][r]) < 1e-3 * fits[f"sigma_{name}"][r]
            assert abs(f["sigma"][k] / fits[f"sigma_{name}"][r] - 1) < 0.02


def test_data_set_from_arrays():
    t = np.array([3.0, 1.0, 2.0])
    d = causeway.DataSet(t, mag=[19.6, 19.4, 19.5], mag_err=[0.01, 0.02, 0.01], ld=0.5)
    np.testing.assert_array_equal(d.t, [1.0, 2.0, 3.0])  # sorted by time
    # flux = 10^(-0.4 (m - zp)), zp = 22; error 0.4 ln(10) F sigma_m (from the definition).
    np.testing.assert_allclose(d.flux[0], 10 ** (-0.4 * (19.4 - 22)), rtol=1e-14)
    np.testing.assert_allclose(d.flux_err[0], 0.4 * np.log(10) * d.flux[0] * 0.02, rtol=1e-14)
    assert d.measured == "mag" and len(d) == 3


def test_simulate_noise_and_the_command_line(cli, tmp_path):
    # The chi2 of 2000 points about the true model lies in the central 99.9% range of the
    # chi-square distribution (scipy.stats, tests/reference/simulate_noise.py).
    ref = reference("simulate_noise.csv")
    n = int(ref["points"][0])
    times = np.linspace(-300, 300, n)
    sim = causeway.simulate(1.2, 1e-3, 0.0, 0.8, 30.0, 40.0, 1e-3, times, sigma_mag=0.02, seed=9)
    chi2 = np.sum(((sim["value"] - sim["model"]) / sim["error"]) ** 2)
    assert ref["chi2_low"][0] < chi2 < ref["chi2_high"][0]
    assert sim["t"].shape == (n,) and sim["measured"] == "mag"
    np.testing.assert_allclose(sim["data"].flux, 10 ** (-0.4 * (sim["value"] - 22)), rtol=1e-13)

    times = np.linspace(-10, 10, 200)
    write_csv(tmp_path / "t.csv", "t", times)
    cli("simulate", "--s", 1.3, "--q", 3e-3, "--t0", 0, "--u0", 0.15, "--te", 25, "--alpha", 210,
        "--rho", 0.003, "--ld", 0.4, "--fs", 1.5, "--fb", 0.2, "--seed", 4, "--times",
        tmp_path / "t.csv", "--out", tmp_path / "sim.csv")
    out = read_csv((tmp_path / "sim.csv").read_text())
    sim = causeway.simulate(1.3, 3e-3, 0.0, 0.15, 25.0, 210.0, 0.003, times, ld=0.4, fs=1.5,
                            fb=0.2, seed=4)
    np.testing.assert_array_equal(np.array(out["mag"]), sim["value"])
    np.testing.assert_array_equal(np.array(out["mag_err"]), sim["error"])


def test_fit_event_recovers_a_simulated_planet_as_the_command_line_does(cli, tmp_path):
    # An invented event: a planet (s = 1.3, q = 3e-3) whose source crosses the planetary
    # caustic; a 2 x 2 library around it. The fit must find the planet near the truth with a
    # chi2/dof near 1 (Gaussian noise of the stated errors), and `causeway search` on the same
    # file and store must find the same minimum bit for bit (no time budget: deterministic).
    times = np.r_[np.linspace(-40, 40, 120), np.linspace(11, 14.5, 40)]
    sim = causeway.simulate(1.3, 3e-3, 0.0, 0.15, 25.0, 343.56, 0.003, times, seed=2)
    write_csv(tmp_path / "event.csv", "t,mag,mag_err", sim["t"], sim["value"], sim["error"])
    spec = """
s = [1.25, 1.35]
q = [2e-3, 4e-3]
pixels = 300
rays = 50
[window]
rule = "planetary"
"""
    store = causeway.Store.create(tmp_path / "maps")
    causeway.build_library(spec, store)
    stages = []
    data = causeway.DataSet.read(tmp_path / "event.csv")
    # The search reads 160 points merged into 120 (search_points; the refinement every point).
    fit = causeway.fit_event([data], store, rhos=[0.002, 0.003, 0.005], refine=2, zoom_levels=0,
                             clip=0, rescale_errors=False, budget=0, search_points=120,
                             time_limit=0, progress=lambda e, s: stages.append(e))
    assert any("160 points merged into 120" in n for n in fit["notes"])
    best = fit["minima"][0]
    assert abs(best["s"] / 1.3 - 1) < 0.01 and abs(best["q"] / 3e-3 - 1) < 0.1
    # chi2/dof of a right model with Gaussian errors: 1 within a few sqrt(2/dof) (common practice).
    dof = len(times) - 7 - 2
    assert abs(best["chi2"] / dof - 1) < 4 * (2 / dof) ** 0.5
    assert "start" in stages and fit["single"]["chi2"] > best["chi2"]
    out = read_csv(cli("search", tmp_path / "event.csv", "--library", tmp_path / "maps", "--rho",
                       "0.002,0.003,0.005", "--refine", 2, "--zoom", 0, "--clip", 0,
                       "--fixed-errors", "--budget", 0, "--time-limit", 0, "--search-points", 120))
    for ours, theirs in [("s", "s"), ("q", "q"), ("u0", "u0"), ("te", "tE"), ("rho", "rho"), ("chi2", "chi2")]:
        assert best[ours] == out[theirs][0], ours


def test_simulate_plan_equals_the_command_line(cli, tmp_path):
    (tmp_path / "plan.toml").write_text(causeway.EXAMPLE_PLAN)
    (tmp_path / "out").mkdir()
    cli("simulate", "--s", 1.3, "--q", 3e-3, "--t0", 9009.6, "--u0", 0.12, "--te", 25, "--alpha", 30,
        "--rho", 0.002, "--seed", 5, "--plan", tmp_path / "plan.toml", "--out-dir", tmp_path / "out",
        "--truth", tmp_path / "truth.csv")
    sites = causeway.simulate_plan(str(tmp_path / "plan.toml"), 1.3, 3e-3, 9009.6, 0.12, 25.0, 30.0, 0.002, seed=5)
    truth = read_csv((tmp_path / "truth.csv").read_text())
    assert len(sites) >= 2
    for name, site in sites.items():
        out = read_csv((tmp_path / "out" / f"{name}.csv").read_text())
        column = "mag" if site["measured"] == "mag" else "flux"
        np.testing.assert_array_equal(np.array(out["t"]), site["t"])
        np.testing.assert_array_equal(np.array(out[column]), site["value"])
        rows = [k for k, s in enumerate(truth["site"]) if s == name]
        np.testing.assert_array_equal(np.array(truth["outlier"])[rows] == 1.0, site["outlier"])
        np.testing.assert_array_equal(np.array(truth["followup"])[rows] == 1.0, site["followup"])
        assert site["data"].name == f"{name}.csv" and 0 <= site["nights_lost"] <= site["nights"]
