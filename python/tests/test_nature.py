"""Who is the lens: `lens_nature` from explicit values and from the fit's posterior samples,
against the direct numpy Monte Carlos of tests/reference/galaxy.py and galaxy_samples.py, and
against `causeway nature` bit for bit."""
import numpy as np
import pytest

import causeway
from conftest import REFERENCE, reference

FIELD = dict(l=1.0, b=-3.0)

# `causeway nature --out` columns and the arrays `lens_nature` returns for them.
CSV_COLUMNS = [("dl_kpc", "dl"), ("ds_kpc", "ds"), ("mass_total_msun", "mass"),
               ("mass_host_msun", "host_mass"), ("theta_E_mas", "theta_e"),
               ("mu_rel_mas_per_yr", "mu_rel"), ("pi_rel_mas", "pi_rel"), ("tE_days", "te")]


def quantity(name):
    """A row of a two-column reference table (quantity, value) as a dict."""
    table = reference(name)
    return dict(zip(table["quantity"], table["value"]))


def wquantile(x, w, qs):
    o = np.argsort(x)
    x, c = x[o], np.cumsum(w[o])
    return np.array([x[np.searchsorted(c, q * c[-1])] for q in qs])


def kept(r):
    """The samples `causeway nature --out` writes (weights above the floor)."""
    floor = causeway.NATURE_WEIGHT_FLOOR
    return (r["weight"] > floor * r["weight"].max()) | (
        r["weight_imaging"] > floor * r["weight_imaging"].max())


def compare_with_csv(r, text):
    rows = np.genfromtxt(text.splitlines(), delimiter=",", names=True, dtype=None,
                         encoding="utf-8")
    k = kept(r)
    assert len(rows) == k.sum()
    np.testing.assert_array_equal(rows["weight"], r["weight"][k])
    np.testing.assert_array_equal(rows["weight_imaging"], r["weight_imaging"][k])
    for col, key in CSV_COLUMNS:
        np.testing.assert_array_equal(rows[col], r[key][k], err_msg=col)
    pops = np.array(["disk", "bulge"])[r["population"][k]]
    np.testing.assert_array_equal(rows["population"], pops)


def test_shapes_dtypes_and_class_probabilities():
    r = causeway.lens_nature(**FIELD, te=(28.0, 1.0), theta_e=(0.5, 0.05), q=2e-3, s=1.2,
                             samples=8192)
    n = len(r["weight"])
    assert n > 8000
    for key in ("weight", "dl", "host_mass", "planet_mjup", "separation_au", "te"):
        assert r[key].dtype == np.float64 and r[key].shape == (n,)
    assert r["population"].dtype == np.uint8 and r["class_p"].shape == (n, 5)
    assert list(r["classes"]) == causeway.LENS_CLASSES == ["ms", "bd", "wd", "ns", "bh"]
    assert abs(sum(r["classes"].values()) - 1) < 1e-12
    # The class probabilities are the weighted means of the per-sample ones.
    p = r["weight"] @ r["class_p"] / r["weight"].sum()
    np.testing.assert_allclose(p, list(r["classes"].values()), rtol=1e-9)
    # Without imaging the two sets of weights are one.
    np.testing.assert_array_equal(r["weight"], r["weight_imaging"])
    assert "most probable" in r["summary"]


def test_te_alone_matches_the_direct_numpy_monte_carlo():
    # galaxy.py: 1.5 million events drawn from the prior and weighted by the tE likelihood
    # (25 +- 2 d) at (l, b) = (1, -3), sources at 8 kpc; the tolerances of the Rust test
    # (tests/integration/galaxy.rs): the Monte Carlo noise of both sides.
    ref = quantity("galaxy_mc.csv")
    r = causeway.lens_nature(**FIELD, te=(25.0, 2.0), ds=(8.0, 0.0), samples=300_000)
    qs = [0.16, 0.5, 0.84]
    mass = wquantile(r["host_mass"], r["weight"], qs)
    dl = wquantile(r["dl"], r["weight"], qs)
    for k, q in enumerate(("16", "50", "84")):
        assert mass[k] == pytest.approx(ref[f"post_mass_q{q}"], rel=0.03)
        assert dl[k] == pytest.approx(ref[f"post_dl_q{q}"], rel=0.01)
    for c in causeway.LENS_CLASSES:
        assert abs(r["classes"][c] - ref[f"post_p_{c}"]) < 0.01


def test_posterior_samples_match_the_direct_numpy_monte_carlo():
    # galaxy_samples.py: numpy weights the prior by the known density of an invented fit's
    # posterior (tE and rho anti-correlated, theta_* = 0.6 +- 0.03 uas); causeway sees only its
    # 4000 rows. Tolerances as in tests/integration/galaxy/samples.rs.
    ref = quantity("galaxy_samples_mc.csv")
    rows = reference("galaxy_samples.csv")
    r = causeway.lens_nature(**FIELD, posterior={"te": rows["tE"], "rho": rows["rho"]},
                             theta_star=(0.6, 0.03), ds=(8.0, 0.0), samples=400_000)
    qs = [0.16, 0.5, 0.84]
    for name, key, tol in (("mass", "host_mass", 0.04), ("dl", "dl", 0.02),
                           ("theta_e", "theta_e", 0.02), ("te", "te", 0.01)):
        got = wquantile(r[key], r["weight"], qs)
        want = [ref[f"{name}_q{q}"] for q in ("16", "50", "84")]
        np.testing.assert_allclose(got, want, rtol=tol, err_msg=name)
    for c in causeway.LENS_CLASSES:
        assert abs(r["classes"][c] - ref[f"p_{c}"]) < 0.015


def test_explicit_values_equal_the_command_line_bit_for_bit(cli, tmp_path):
    args = dict(te=(32.0, 1.5), theta_e=(0.45, 0.05), pi_en=(0.1, 0.02), pi_ee=(0.07, 0.02),
                earth_velocity=(5.2, -21.0), q=3e-3, s=1.1, ds=(8.2, 0.5), band="I",
                extinction=1.4, excess=(20.3, 0.2), samples=20_000, seed=5)
    r = causeway.lens_nature(ra=270.1, dec=-29.5, **args, threads=1)
    cli("nature", "--equatorial", "270.1,-29.5", "--te", "32,1.5", "--theta-e", "0.45,0.05",
        "--pi-en", "0.1,0.02", "--pi-ee", "0.07,0.02", "--earth-velocity", "5.2,-21", "--q",
        "3e-3", "--s", "1.1", "--ds", "8.2,0.5", "--band", "I", "--extinction", "1.4",
        "--excess", "20.3,0.2", "--samples", "20000", "--seed", "5", "--out",
        tmp_path / "lens.csv")
    compare_with_csv(r, (tmp_path / "lens.csv").read_text())
    # The same seed gives the same samples whatever the thread count.
    again = causeway.lens_nature(ra=270.1, dec=-29.5, **args, threads=2)
    np.testing.assert_array_equal(again["weight_imaging"], r["weight_imaging"])


def test_posterior_from_arrays_file_and_command_line_agree(cli, tmp_path):
    rows = reference("galaxy_samples.csv")
    common = dict(theta_star=(0.6, 0.03), ds=(8.0, 0.0), samples=20_000, **FIELD)
    a = causeway.lens_nature(posterior={"te": rows["tE"], "rho": rows["rho"]}, **common)
    b = causeway.lens_nature(posterior=REFERENCE / "galaxy_samples.csv", **common)
    np.testing.assert_array_equal(a["weight"], b["weight"])
    np.testing.assert_array_equal(a["dl"], b["dl"])
    cli("nature", "--posterior", REFERENCE / "galaxy_samples.csv", "--theta-star", "0.6,0.03",
        "--galactic", "1,-3", "--ds", "8,0", "--samples", "20000", "--out", tmp_path / "p.csv")
    compare_with_csv(a, (tmp_path / "p.csv").read_text())


def test_the_remnant_probability_rises_as_the_imaging_limit_deepens():
    ps = []
    for limit in (None, 18.0, 20.0, 22.0):
        r = causeway.lens_nature(**FIELD, te=(28.0, 1.0), theta_e=(0.5, 0.05), q=2e-3,
                                 extinction=0.3, fainter_than=limit, samples=40_000)
        p = r["classes_imaging"]
        ps.append(p["wd"] + p["ns"] + p["bh"])
    assert all(b >= a for a, b in zip(ps, ps[1:])), ps
    assert ps[-1] > 0.5 and ps[-1] > 2 * ps[0], ps


@pytest.mark.parametrize("kwargs, name", [
    (dict(**FIELD), "te"),
    (dict(te=(30, 1)), "l"),
    (dict(**FIELD, te=(30, 0)), "te"),
    (dict(l=1.0, b=-95.0, te=(30, 1)), "b"),
    (dict(**FIELD, te=(30, 1), band="H"), "band"),
    (dict(**FIELD, te=(30, 1), ds=(20.0, 1.0)), "ds"),
    (dict(**FIELD, te=(30, 1), rho=(1e-3, 1e-4)), "rho"),
    (dict(**FIELD, te=(30, 1), pi_en=(0.1, 0.01)), "pi_en"),
    (dict(**FIELD, te=(30, 1), samples=0), "samples"),
    (dict(**FIELD, te=(30, 1), excess=(20.0, 0.1), fainter_than=21.0), "excess"),
    (dict(**FIELD, te=(30, 1), posterior={"te": [30.0, 31.0]}), "te"),
    (dict(**FIELD, posterior={"rho": [1e-3, 2e-3]}), "posterior"),
    (dict(**FIELD, posterior={"te": [30.0, -1.0]}), "posterior"),
    (dict(**FIELD, posterior={"te": [30.0, 31.0]}, theta_star=(0.6, 0.1)), "theta_star"),
    (dict(**FIELD, posterior={"te": [30.0, 31.0], "pi_en": [0.1, 0.2]}), "posterior"),
])
def test_bad_input_names_the_argument(kwargs, name):
    with pytest.raises(ValueError, match=rf"^{name}\b"):
        causeway.lens_nature(samples=kwargs.pop("samples", 1000), **kwargs)


def test_a_missing_posterior_file_is_an_oserror(tmp_path):
    with pytest.raises(OSError):
        causeway.lens_nature(**FIELD, posterior=tmp_path / "none.csv")


def test_a_minimum_of_the_fit_equals_the_command_lines_table(cli, tmp_path):
    # A row of the fit (as fit_event's "motion" or refine_with_motion give it) and the same row
    # in the table `causeway nature --minima` reads give the same samples.
    minimum = {"s": 1.25, "q": 2e-3, "te": 28.0, "rho": 1.2e-3, "pi_e_n": 0.12, "pi_e_e": -0.05,
               "sigma": {"s": 0.01, "q": 1e-4, "te": 0.8, "rho": 1e-4, "pi_e_n": 0.03,
                         "pi_e_e": 0.02}}
    (tmp_path / "minima.csv").write_text(
        "rank,s,q,tE,tE_err,rho,rho_err,pi_EN,pi_EN_err,pi_EE,pi_EE_err,chi2\n"
        "1,1.25,0.002,28,0.8,0.0012,0.0001,0.12,0.03,-0.05,0.02,600\n")
    r = causeway.lens_nature(**FIELD, minimum=minimum, theta_star=(0.6, 0.05), extinction=0.25,
                             fainter_than=21.5, samples=20_000)
    cli("nature", "--minima", tmp_path / "minima.csv", "--theta-star", "0.6,0.05", "--galactic",
        "1,-3", "--extinction", "0.25", "--fainter-than", "21.5", "--samples", "20000", "--out",
        tmp_path / "lens.csv")
    compare_with_csv(r, (tmp_path / "lens.csv").read_text())
    # Explicit values win over the minimum's.
    other = causeway.lens_nature(**FIELD, minimum=minimum, te=(40.0, 1.0), samples=4096)
    assert np.median(other["te"]) > 35
    with pytest.raises(ValueError, match=r"^minimum\b"):
        causeway.lens_nature(**FIELD, minimum={"te": 30.0}, samples=4096)
