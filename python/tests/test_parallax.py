"""Parallax and lens orbital motion from Python: the Earth's orbit and the projected offsets
against astropy (tests/reference/parallax.py), the parallax trajectory against those offsets,
the lens from (theta_E, pi_E) against astropy.constants, `simulate` with parallax against
`causeway simulate` bit for bit, and the motion stage on a simulated event."""
import astropy.constants as const
import astropy.units as u
import numpy as np
import pytest
from astropy.coordinates import Angle, SkyCoord

import causeway
from conftest import read_csv, reference, write_csv

# A long event toward the bulge with parallax and orbital motion (as in
# tests/integration/parallax.rs).
MOVING = dict(ra="17:55:00", dec="-29:30:00", pi_e_n=0.3, pi_e_e=-0.1, dalpha_dt=0.5,
              ds_dt=0.1)


def test_earth_position_matches_astropy_to_3e_4_au():
    # astropy's built-in ephemeris, Earth minus Sun, every 73 days over 2000-2040; the issue's
    # bound for a Keplerian orbit of the Earth-Moon barycentre.
    ref = reference("parallax_earth.csv")
    p = causeway.earth_position(ref["jd"])
    assert p.shape == (len(ref["jd"]), 3) and p.dtype == np.float64
    want = np.stack([ref["x"], ref["y"], ref["z"]], axis=1)
    assert np.max(np.linalg.norm(p - want, axis=1)) < 3e-4
    # JD - 2450000 is the same day.
    np.testing.assert_array_equal(causeway.earth_position(ref["jd"][:3] - 2_450_000.0), p[:3])


def test_offsets_and_trajectory_match_astropy_at_the_bulge_and_the_poles():
    # Delta s (Gould 2004) from astropy's ephemeris, north and east from astropy's ICRS vectors,
    # for the bulge, both ecliptic poles, the celestial pole and elsewhere. The allowed error
    # is the Rust test's: 3e-4 au plus the Moon's pull on the Earth's velocity, 7.5e-6 au/d.
    ref = reference("parallax_offsets.csv")
    for k in range(len(ref["t"])):
        ra, dec, t0_par, t = (ref[c][k] for c in ("ra_deg", "dec_deg", "t0_par", "t"))
        allowed = 3e-4 + 7.5e-6 * abs(t - t0_par)
        d = causeway.parallax_offsets(ra, dec, [t], t0_par)
        assert d.shape == (1, 2)
        assert abs(d[0, 0] - ref["ds_N"][k]) < allowed and abs(d[0, 1] - ref["ds_E"][k]) < allowed
        # The trajectory: tau and beta shifted by astropy's (dtau, dbeta) for this pi_E,
        # turned into the lens frame (alpha = 40 degrees).
        pn, pe = ref["pi_EN"][k], ref["pi_EE"][k]
        t0, u0, te, alpha = t0_par + 3.0, 0.05, 50.0, np.radians(40.0)
        x, y = causeway.trajectory(t0, u0, te, 40.0, [t], ra=ra, dec=dec, pi_e_n=pn, pi_e_e=pe,
                                   t0_par=t0_par)
        tau = (t - t0) / te + ref["dtau"][k]
        beta = u0 + ref["dbeta"][k]
        want = (tau * np.cos(alpha) - beta * np.sin(alpha), tau * np.sin(alpha) + beta * np.cos(alpha))
        tol = 2 * allowed * np.hypot(pn, pe) + 1e-12
        assert abs(x[0] - want[0]) < tol and abs(y[0] - want[1]) < tol, (ra, dec, t)


def test_sky_positions_and_basis_against_astropy():
    for ra, dec in (("17:55:30.25", "-29:33:10.5"), ("0:0:0", "+90:00:00"), ("266.4", "-29.0")):
        want = SkyCoord(Angle(ra, unit=u.hourangle if ":" in ra else u.deg), Angle(dec, unit=u.deg))
        got = causeway.sky_position(ra, dec)
        assert got == pytest.approx((want.ra.deg, want.dec.deg), abs=1e-10)
        b = causeway.sky_basis(ra, dec)
        c = want.cartesian
        np.testing.assert_allclose(b["toward"], [c.x.value, c.y.value, c.z.value], atol=1e-12)
        m = np.stack([b["toward"], b["north"], b["east"]])
        np.testing.assert_allclose(m @ m.T, np.eye(3), atol=1e-12)  # orthonormal, poles too
        # east = north x toward (parallax.py's convention)
        np.testing.assert_allclose(np.cross(b["north"], b["toward"]), b["east"], atol=1e-12)
    assert causeway.sky_position(270.0, -30.0) == (270.0, -30.0)


def test_lens_from_parallax_matches_astropy_constants():
    # Gould 2000: M = theta_E / (kappa pi_E), kappa = 4 G / (c^2 au); parallax_lens.csv computes
    # every value with astropy.constants and units. The heliocentric motion uses our Earth's
    # velocity (the barycentre's orbit): 2e-3 of the geocentric motion, as in the Rust test.
    kappa = (4 * const.G * const.M_sun / (const.c ** 2 * const.au)).to(
        u.mas, equivalencies=u.dimensionless_angles()).value
    r = causeway.lens_from_parallax(0.5, 40.0, 0.3, 0.4)
    assert r["lens_mass_msun"] == pytest.approx(0.5 / (kappa * 0.5), rel=1e-6)
    ref = reference("parallax_lens.csv")
    for k in range(len(ref["s"])):
        v = causeway.earth_velocity(ref["ra_deg"][k], ref["dec_deg"][k], ref["t0_par"][k])
        got = causeway.lens_from_parallax(
            ref["theta_E_mas"][k], ref["tE_days"][k], ref["pi_EN"][k], ref["pi_EE"][k],
            s=ref["s"][k], q=ref["q"][k], ds=ref["ds_kpc"][k], earth_velocity=v,
            ds_dt=ref["ds_dt"][k], dalpha_dt=ref["dalpha_dt"][k])
        assert list(got) == causeway.LENS_NAMES
        for name in causeway.LENS_NAMES:
            want = ref[name][k]
            if name.startswith("mu_hel") or name == "tE_hel_days":
                tol = 2e-3 * max(ref["mu_geo_mas_per_yr"][k], abs(want))
            else:
                tol = 1e-12 * abs(want)
            assert abs(got[name] - want) <= tol, (name, got[name], want)
    # Errors from a covariance: theta_E alone to 2% gives M and pi_rel to 2%.
    cov = np.zeros((6, 6))
    cov[0, 0] = (0.02 * 0.5) ** 2
    e = causeway.lens_from_parallax(0.5, 40.0, 0.3, 0.4, ds=8.0, covariance=cov)
    assert e["lens_mass_msun_err"] / e["lens_mass_msun"] == pytest.approx(0.02, rel=1e-5)
    assert e["lens_pi_rel_mas_err"] / e["lens_pi_rel_mas"] == pytest.approx(0.02, rel=1e-5)


def test_simulate_with_parallax_and_orbital_motion_equals_the_command_line(cli, tmp_path):
    times = np.linspace(8200, 8400, 80)
    write_csv(tmp_path / "t.csv", "t", times)
    cli("simulate", "--s", 1.2, "--q", 4e-3, "--t0", 8300, "--u0", 0.1, "--te", 60, "--alpha",
        30, "--rho", 0.002, "--ra", "17:55:00", "--dec", "-29:30:00", "--pi-e-n", 0.3,
        "--pi-e-e", -0.1, "--dalpha-dt", 0.5, "--ds-dt", 0.1, "--sigma-mag", 0.001, "--seed", 3,
        "--times", tmp_path / "t.csv", "--out", tmp_path / "sim.csv")
    out = read_csv((tmp_path / "sim.csv").read_text())
    sim = causeway.simulate(1.2, 4e-3, 8300.0, 0.1, 60.0, 30.0, 0.002, times, sigma_mag=0.001,
                            seed=3, **MOVING)
    np.testing.assert_array_equal(np.array(out["mag"]), sim["value"])
    # model_magnification is the same curve; the static one differs.
    a = causeway.model_magnification(1.2, 4e-3, 8300.0, 0.1, 60.0, 30.0, 0.002, times, tol=1e-5,
                                     **MOVING)
    np.testing.assert_array_equal(a, sim["magnification"])
    still = causeway.model_magnification(1.2, 4e-3, 8300.0, 0.1, 60.0, 30.0, 0.002, times,
                                         tol=1e-5)
    assert np.max(np.abs(a / still - 1)) > 0.01


def test_a_satellite_sees_its_own_curve():
    # An observatory 1 au from the Earth, perpendicular to the line of sight: its curve is the
    # model's at the source positions its ephemeris gives.
    times = np.linspace(8250, 8350, 40)
    jd = np.linspace(2458200.0, 2458400.0, 201)
    earth = causeway.earth_position(jd)
    b = causeway.sky_basis(270.0, -30.0)
    eph = np.column_stack([jd, earth + b["east"]])
    kw = dict(ra=270.0, dec=-30.0, pi_e_n=0.2, pi_e_e=0.1)
    ground = causeway.model_magnification(1.0, 1e-6, 8300.0, 0.6, 40.0, 0.0, 0.0, times, **kw)
    space = causeway.model_magnification(1.0, 1e-6, 8300.0, 0.6, 40.0, 0.0, 0.0, times,
                                         ephemeris=eph, **kw)
    # A point lens (q = 1e-6, a negligible companion) seen from each: Paczynski's A(u) at the
    # positions trajectory() gives for each observer (Paczynski 1986).
    for a, e in ((ground, None), (space, eph)):
        x, y = causeway.trajectory(8300.0, 0.6, 40.0, 0.0, times, ephemeris=e, **kw)
        uu = np.hypot(x, y)
        np.testing.assert_allclose(a, (uu ** 2 + 2) / (uu * np.sqrt(uu ** 2 + 4)), rtol=2e-4)
    assert np.max(np.abs(space / ground - 1)) > 0.05
    # The same observatory as offsets from the Earth projected on the sky, (north, east) =
    # (0, 1 au): the same curve up to the interpolation of the heliocentric table (4e-5 au).
    offsets = np.column_stack([jd, np.zeros_like(jd), np.ones_like(jd)])
    projected = causeway.model_magnification(1.0, 1e-6, 8300.0, 0.6, 40.0, 0.0, 0.0, times,
                                             ephemeris=offsets, **kw)
    np.testing.assert_allclose(projected, space, rtol=1e-4)


def test_motion_stage_recovers_the_parallax_of_a_simulated_event():
    # An invented event with pi_E = (0.3, -0.1) toward the bulge: the stage, started from the
    # static truth, finds both members of the ecliptic pair, and the better one within 3 sigma
    # of the truth with a large chi2 gain over the static model.
    times = np.linspace(8180, 8420, 160)
    truth = dict(ra="17:55:00", dec="-29:30:00", pi_e_n=0.3, pi_e_e=-0.1)
    sim = causeway.simulate(1.2, 4e-3, 8300.0, 0.3, 60.0, 30.0, 0.002, times, sigma_mag=0.005,
                            seed=11, **truth)
    static = dict(s=1.2, q=4e-3, alpha=30.0, u0=0.3, t0=8300.0, te=60.0, rho=0.002)
    rows = causeway.refine_with_motion([sim["data"]], [static], "17:55:00", "-29:30:00",
                                       orbit=False, theta_star=0.6, ds=8.0)
    assert len(rows) == 2 and [r["model"] for r in rows] == ["parallax", "parallax"]
    assert rows[0]["u0"] > 0 > rows[1]["u0"] and rows[0]["t0_par"] == 8300.0
    best = min(rows, key=lambda r: r["chi2"])
    assert best["delta_chi2_static"] > 100
    for k, want in (("pi_e_n", 0.3), ("pi_e_e", -0.1)):
        assert abs(best[k] - want) < 3 * best["sigma"][k], (k, best[k], best["sigma"][k])
    lens = best["lens"]
    assert lens["lens_mass_msun"] == pytest.approx(
        causeway.lens_from_parallax(0.6e-3 / best["rho"], best["te"], best["pi_e_n"],
                                    best["pi_e_e"])["lens_mass_msun"], rel=1e-12)
    assert lens["lens_mass_msun_err"] > 0


@pytest.mark.parametrize("kwargs, name", [
    (dict(pi_e_n=0.1), "ra"),
    (dict(ra=270.0, pi_e_n=0.1), "dec"),
    (dict(ra=270.0, dec=-95.0, pi_e_n=0.1), "dec"),
    (dict(ra="25:00:00", dec=-30.0, pi_e_n=0.1), "ra"),
    (dict(ra=270.0, dec=-30.0, pi_e_n=0.1, t0_par=1e7), "t0_par"),
    (dict(t0_par=8300.0), "t0_par"),
    (dict(t0_kep=8300.0), "t0_kep"),
    (dict(ra=270.0, dec=-30.0, pi_e_n=float("nan")), "pi_e_n"),
    (dict(ra=270.0, dec=-30.0, pi_e_n=0.1, ephemeris=np.zeros((3, 3))), "ephemeris"),
])
def test_bad_motion_arguments_name_the_argument(kwargs, name):
    with pytest.raises(ValueError, match=rf"^{name}\b"):
        causeway.model_magnification(1.2, 1e-3, 8300.0, 0.1, 60.0, 30.0, 1e-3, [8300.0], **kwargs)


def test_bad_lens_and_stage_arguments_name_the_argument():
    with pytest.raises(ValueError, match=r"^theta_e\b"):
        causeway.lens_from_parallax(-0.5, 40.0, 0.3, 0.4)
    with pytest.raises(ValueError, match=r"^covariance\b"):
        causeway.lens_from_parallax(0.5, 40.0, 0.3, 0.4, covariance=np.eye(5))
    with pytest.raises(ValueError, match=r"^minima\b"):
        d = causeway.DataSet([1.0, 2.0, 3.0], mag=[18, 18, 18], mag_err=[0.01] * 3)
        causeway.refine_with_motion([d], [{"s": 1.2}], 270.0, -30.0)


def test_fit_event_runs_the_motion_stage_as_the_command_line_does(cli, tmp_path):
    # An invented planetary event with pi_E = (0.3, -0.1) toward the bulge, fitted over a 2 x 2
    # library with the event's coordinates: the parallax rows equal `causeway search --ra --dec`
    # bit for bit (no time budget: deterministic), and the better one is near the truth.
    times = np.r_[np.linspace(8260, 8340, 120), np.linspace(8311, 8314.5, 40)]
    sky = dict(ra="17:55:00", dec="-29:30:00")
    sim = causeway.simulate(1.3, 3e-3, 8300.0, 0.15, 25.0, 343.56, 0.003, times, seed=2,
                            pi_e_n=0.3, pi_e_e=-0.1, **sky)
    write_csv(tmp_path / "event.csv", "t,mag,mag_err", sim["t"], sim["value"], sim["error"])
    store = causeway.Store.create(tmp_path / "maps")
    causeway.build_library('s = [1.25, 1.35]\nq = [2e-3, 4e-3]\npixels = 300\nrays = 50\n'
                           '[window]\nrule = "planetary"\n', store)
    data = causeway.DataSet.read(tmp_path / "event.csv")
    fit = causeway.fit_event([data], store, rhos=[0.002, 0.003, 0.005], refine=1, zoom_levels=0,
                             clip=0, rescale_errors=False, budget=0, orbit=False,
                             parallax_minima=1, **sky)
    rows = fit["motion"]
    assert [r["model"] for r in rows] == ["parallax", "parallax"]
    assert rows[0]["u0"] > 0 > rows[1]["u0"] and rows[0]["t0_par"] == 8300.0
    out = read_csv(cli("search", tmp_path / "event.csv", "--library", tmp_path / "maps", "--rho",
                       "0.002,0.003,0.005", "--refine", 1, "--zoom", 0, "--clip", 0,
                       "--fixed-errors", "--budget", 0, "--ra", "17:55:00", "--dec", "-29:30:00",
                       "--no-orbit", "--parallax-minima", 1))
    theirs = [k for k, m in enumerate(out["model"]) if m == "parallax"]
    assert len(theirs) == 2
    for row, k in zip(rows, theirs):
        for ours, col in (("pi_e_n", "pi_EN"), ("pi_e_e", "pi_EE"), ("u0", "u0"), ("chi2", "chi2")):
            assert row[ours] == out[col][k], (ours, row[ours], out[col][k])
    best = min(rows, key=lambda r: r["chi2"])
    assert best["delta_chi2_static"] > 0
    assert abs(best["pi_e_n"] - 0.3) < 3 * best["sigma"]["pi_e_n"] + 0.05
