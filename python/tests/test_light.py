"""Finite sources: trajectories, map reads, contour integration, model magnifications."""
import numpy as np
import pytest
from scipy import integrate

import causeway
from conftest import read_csv, reference, write_csv


def paczynski(u):
    """Paczynski 1986, ApJ 304, 1."""
    return (u * u + 2) / (u * np.sqrt(u * u + 4))


def law_args(row_law, a, b):
    return {0: {}, 1: {"ld": a}, 2: {"ld_sqrt": (a, b)}}[int(row_law)]


def test_trajectory_convention():
    # DESIGN.md: tau = (t - t0)/tE, (tau cos a - u0 sin a, tau sin a + u0 cos a), a in degrees.
    t = np.linspace(-10, 10, 7).reshape(7, 1)
    x, y = causeway.trajectory(1.0, -0.2, 25.0, 30.0, t)
    assert x.shape == (7, 1)
    tau, a = (t - 1.0) / 25.0, np.radians(30.0)
    np.testing.assert_allclose(x, tau * np.cos(a) + 0.2 * np.sin(a), rtol=1e-14, atol=1e-15)
    np.testing.assert_allclose(y, tau * np.sin(a) - 0.2 * np.cos(a), rtol=1e-14, atol=1e-15)


def test_contour_single_lens_against_witt_mao():
    # tests/reference/contour_single.py: Witt & Mao 1994 (scipy.special) cross-checked with
    # scipy.integrate.quad; linear limb darkening by 2-D quad. To 1e-4 at tol 1e-5, and within
    # ten of its own error estimates (as tests/integration/contour.rs).
    ref = reference("contour_single.csv")
    lens = causeway.Lens.single()
    for ld in np.unique(ref["ld"]):
        for rho in np.unique(ref["rho"]):
            sel = (ref["ld"] == ld) & (ref["rho"] == rho)
            u, want = ref["u"][sel], ref["magnification"][sel]
            a, err, method = causeway.contour_magnification(
                lens, u, np.zeros_like(u), rho, ld=ld if ld > 0 else None, tol=1e-5
            )
            assert a.dtype == np.float64 and method.dtype == np.uint8
            assert np.all(np.abs(a / want - 1) < 1e-4)
            assert np.all(np.abs(a - want) <= 10 * err + 1e-12 * want)


def test_contour_quadrupole_rule_against_witt_mao():
    # tests/reference/contour_single.csv (Witt & Mao 1994): at u = 1, rho = 0.1 and tol 1e-2 the
    # point source and its quadrupole term serve (code 4), within their stated error of it.
    ref = reference("contour_single.csv")
    sel = (ref["u"] == 1.0) & (ref["rho"] == 0.1) & (ref["ld"] == 0.0)
    want = ref["magnification"][sel][0]
    a, err, method = causeway.contour_magnification(causeway.Lens.single(), 1.0, 0.0, 0.1, tol=1e-2)
    assert causeway.CONTOUR_METHODS[int(method)] == "quadrupole"
    assert abs(a - want) <= err <= 1e-2 * a


def test_contour_all_laws_against_the_annulus_integral():
    # tests/reference/finite_source.py: uniform disk (Witt & Mao 1994), linear and square-root
    # laws as integrals over annuli (Lee et al. 2009 form) with scipy.integrate.
    ref = reference("finite_source.csv")
    lens = causeway.Lens.single()
    for i in range(len(ref["u"])):
        kw = law_args(ref["law"][i], ref["ld_a"][i], ref["ld_b"][i])
        a, err, _ = causeway.contour_magnification(lens, ref["u"][i], 0.0, ref["rho"][i], tol=1e-5, **kw)
        assert abs(a / ref["magnification"][i] - 1) < 1e-4
        if ref["u"][i] == 0 and ref["law"][i] == 0:
            # Witt & Mao 1994: A = sqrt(1 + 4/rho^2) at u = 0.
            assert abs(a - (1 + 4 / ref["rho"][i] ** 2) ** 0.5) < 1e-4 * a


def test_contour_against_scipy_dblquad():
    # The mean of Paczynski's A over a uniform disk, by scipy.integrate.dblquad here.
    u0, rho = 0.3, 0.1

    def f(r, phi):
        x, y = u0 + r * np.cos(phi), r * np.sin(phi)
        return paczynski(np.hypot(x, y)) * r

    want = integrate.dblquad(f, 0, 2 * np.pi, 0, rho, epsabs=0, epsrel=1e-10)[0] / (np.pi * rho**2)
    a, err, method = causeway.contour_magnification(causeway.Lens.single(), u0, 0.0, rho, tol=1e-6)
    assert abs(a / want - 1) < 1e-5
    assert causeway.CONTOUR_METHODS[int(method)] == "contour"


def test_map_reads_against_witt_mao_and_the_annulus_integral():
    # A ray map (400 rays per pixel, pixel = rho/10) read under the source against
    # finite_source.csv: 3e-3 relative over the lens (the pixels the lens falls in are the
    # noisiest), 1e-3 beyond, about twice the largest error seen (tests/integration/curve.rs
    # derives the lattice bound itself).
    ref = reference("finite_source.csv")
    m = causeway.build_map(causeway.Lens.single(), (0.05, 0.0), 0.4, 200, rays=400)
    on = (ref["u"] > 0) & (ref["u"] < 0.2)
    checked = 0
    for i in np.flatnonzero(on):
        kw = law_args(ref["law"][i], ref["ld_a"][i], ref["ld_b"][i])
        a, _, method = causeway.map_magnification(m, [ref["u"][i]], [0.0], ref["rho"][i], evaluation="direct", fallback=False, **kw)
        assert causeway.MAP_METHODS[method[0]] == "direct"
        assert abs(a[0] / ref["magnification"][i] - 1) < (3e-3 if ref["u"][i] < ref["rho"][i] else 1e-3)
        checked += 1
    assert checked >= 10
    # Off the map: the point source with the small-source correction (Gould 2008).
    a, _, method = causeway.map_magnification(m, [1.0], [0.5], 0.02, tol=1e-5)
    assert causeway.MAP_METHODS[method[0]] == "expansion"
    assert abs(a[0] / paczynski(np.hypot(1.0, 0.5)) - 1) < 1e-3


def test_model_magnification_of_a_negligible_companion_is_paczynski():
    t = np.linspace(-20, 20, 41)
    a = causeway.model_magnification(1.0, 1e-9, 0.0, 0.5, 10.0, 20.0, 1e-3, t)
    u = np.hypot((t - 0.0) / 10.0, 0.5)
    np.testing.assert_allclose(a, paczynski(u), rtol=1e-4)


def test_curve_and_contour_equal_the_command_line(cli, tmp_path):
    lens = causeway.Lens.binary(1.25, 2e-3)
    m = causeway.build_map(lens, (0.45, 0.0), 0.1, 200, rays=50)
    m.save(tmp_path / "m.fits")
    times = np.linspace(2.72, 10.72, 301)
    write_csv(tmp_path / "t.csv", "t", times)
    out = read_csv(cli("curve", "--map", tmp_path / "m.fits", "--t0", 0, "--u0=-0.388", "--te", 30,
                       "--alpha", 60, "--times", tmp_path / "t.csv", "--rho", 0.003, "--ld", 0.5))
    x, y = causeway.trajectory(0.0, -0.388, 30.0, 60.0, times)
    a, error, method = causeway.map_magnification(m, x, y, 0.003, ld=0.5)
    np.testing.assert_array_equal(np.array(out["x"]), x)
    np.testing.assert_array_equal(np.array(out["magnification"]), a)
    np.testing.assert_array_equal(np.array(out["error"]), error)
    assert out["method"] == [causeway.MAP_METHODS[k] for k in method]
    # The promise of tol (1e-3): every value within it of its own error bar, recomputed by
    # contour integration where the map could not say so.
    assert np.all(error <= 1e-3 * a)

    pts = np.c_[np.linspace(0.42, 0.48, 40), np.linspace(-0.01, 0.01, 40)]
    write_csv(tmp_path / "p.csv", "x,y", pts[:, 0], pts[:, 1])
    out = read_csv(cli("contour", "--s", 1.25, "--q", 2e-3, "--points", tmp_path / "p.csv",
                       "--rho", 0.003, "--ld-sqrt", "0.3,0.4", "--tol", 1e-4))
    a, err, method = causeway.contour_magnification(lens, pts[:, 0], pts[:, 1], 0.003, ld_sqrt=(0.3, 0.4))
    np.testing.assert_array_equal(np.array(out["magnification"]), a)
    np.testing.assert_array_equal(np.array(out["error"]), err)
    assert out["method"] == [causeway.CONTOUR_METHODS[k] for k in method]
