"""Lenses, point-source images, caustics and topology against outside references."""
import numpy as np
import pytest

import causeway
from conftest import read_csv, reference, write_csv


def paczynski(u):
    """Point lens, point source: A(u) = (u^2 + 2) / (u sqrt(u^2 + 4)) (Paczynski 1986, ApJ 304, 1)."""
    return (u * u + 2) / (u * np.sqrt(u * u + 4))


def test_binary_frame_and_masses():
    # DESIGN.md's frame: m1 = 1/(1+q) at -s q/(1+q), m2 = q/(1+q) at s/(1+q).
    s, q = 1.25, 2e-3
    lens = causeway.Lens.binary(s, q)
    assert lens.x.dtype == np.float64 and lens.x.shape == (2,)
    np.testing.assert_allclose(lens.x, [-s * q / (1 + q), s / (1 + q)], rtol=1e-15)
    np.testing.assert_allclose(lens.mass, [1 / (1 + q), q / (1 + q)], rtol=1e-15)
    assert lens.binary_parameters == (s, q)
    triple = causeway.Lens([0, 1, 0], [0, 0, 1], [2, 1, 1])
    np.testing.assert_allclose(triple.mass, [0.5, 0.25, 0.25])
    assert len(triple) == 3 and triple.binary_parameters is None


def test_single_lens_is_paczynski_with_shapes_kept():
    u = np.geomspace(1e-3, 20, 60).reshape(3, 4, 5)
    a = causeway.magnification(causeway.Lens.single(), u, np.zeros_like(u))
    assert a.shape == (3, 4, 5) and a.dtype == np.float64
    np.testing.assert_allclose(a, paczynski(u), rtol=1e-12)
    # A(1) = 3/sqrt(5) (Paczynski 1986).
    assert abs(causeway.magnification(causeway.Lens.single(), 1.0, 0.0) - 3 / 5**0.5) < 1e-14


def test_images_agree_with_numpy_roots_reference():
    # tests/reference/images.py: numpy.roots of the lens-equation polynomial (Witt 1990),
    # polished in 40 digits (mpmath). Counts equal; A to max(1e-8, 30 x the problem's own
    # double-precision sensitivity), as tests/integration/solve.rs.
    ref = reference("images.csv")
    checked = 0
    for n in (2, 3, 4):
        rows = np.flatnonzero(ref["n"] == n)
        for lens_key in {tuple(ref[f"{c}{i}"][r] for i in range(1, n + 1) for c in "xym") for r in rows}:
            sel = [r for r in rows if tuple(ref[f"{c}{i}"][r] for i in range(1, n + 1) for c in "xym") == lens_key]
            x, y, m = np.array(lens_key).reshape(n, 3).T
            lens = causeway.Lens(x, y, m)
            got = causeway.images(lens, ref["zeta_x"][sel], ref["zeta_y"][sel])
            want = ref["magnification"][sel]
            tol = np.maximum(1e-8, 30 * ref["sensitivity"][sel])
            assert np.all(np.abs(got["magnification"] / want - 1) <= tol)
            np.testing.assert_array_equal(got["count"], ref["images"][sel].astype(int))
            # The same sums from the vectorised magnification call, bit for bit.
            a = causeway.magnification(lens, ref["zeta_x"][sel], ref["zeta_y"][sel])
            np.testing.assert_array_equal(a, got["magnification"])
            checked += len(sel)
    assert checked > 500


def test_image_rows_solve_the_lens_equation_with_the_parity_rule():
    lens = causeway.Lens.binary(0.9, 0.3)
    rng = np.random.default_rng(3)
    x, y = rng.uniform(-1, 1, (2, 400))
    got = causeway.images(lens, x, y)
    assert got["parity"].dtype == np.int8 and got["count"].dtype == np.int32
    # Lens equation zeta = z - sum m_i / conj(z - z_i), evaluated here with numpy.
    z = got["image_x"] + 1j * got["image_y"]
    zl = lens.x + 1j * lens.y
    zeta = z - np.sum(lens.mass / np.conj(z[:, None] - zl[None, :]), axis=1)
    k = got["point"]
    assert np.max(np.abs(zeta - (x[k] + 1j * y[k]))) < 1e-10
    # Parity: positive minus negative = 1 - N (Rhie 1997; Petters, Levine & Wambsganss 2001).
    np.testing.assert_array_equal(np.bincount(k, weights=got["parity"], minlength=400), -1.0)
    # Sum of |1/det J| over the images is the magnification.
    np.testing.assert_allclose(
        np.bincount(k, weights=got["image_magnification"]), got["magnification"], rtol=1e-13
    )


def test_critical_curves_and_caustics():
    lens = causeway.Lens.binary(1.0, 0.1)
    crit = causeway.caustics(lens, critical=True)
    caus = causeway.caustics(lens)
    assert len(crit) == len(caus) == 1 and causeway.topology(lens) == "intermediate"
    zl = lens.x + 1j * lens.y
    for c, k in zip(crit, caus):
        assert c.shape[1] == 2 and c.dtype == np.float64
        np.testing.assert_array_equal(c[0], c[-1])  # closed
        z = c[:, 0] + 1j * c[:, 1]
        # |sum m_i / (z - z_i)^2| = 1 on the critical curve (Witt 1990, A&A 236, 311).
        assert np.max(np.abs(np.abs(np.sum(lens.mass / (z[:, None] - zl) ** 2, axis=1)) - 1)) < 1e-9
        # The caustic is the critical curve mapped by the lens equation.
        xs, ys = lens.source_position(c[:, 0], c[:, 1])
        np.testing.assert_allclose(np.c_[xs, ys], k, atol=1e-12)


def test_topology_boundaries():
    # tests/reference/topology.py: s_c^8 = (1+q)^2/(27 q) (1 - s_c^4)^3 and
    # s_w = sqrt((1+q^(1/3))^3/(1+q)) (Erdl & Schneider 1993; Dominik 1999, A&A 349, 108).
    ref = reference("topology.csv")
    for q, sc, sw in zip(ref["q"], ref["s_close"], ref["s_wide"]):
        assert causeway.topology(causeway.Lens.binary(0.97 * sc, q)) == "close"
        assert causeway.topology(causeway.Lens.binary((sc * sw) ** 0.5, q)) == "intermediate"
        assert causeway.topology(causeway.Lens.binary(1.03 * sw, q)) == "wide"


def test_images_equal_the_command_line(cli, tmp_path):
    rng = np.random.default_rng(5)
    x, y = rng.uniform(-1.5, 1.5, (2, 300))
    write_csv(tmp_path / "p.csv", "x,y", x, y)
    out = read_csv(cli("images", "--s", 0.8, "--q", 0.05, "--points", tmp_path / "p.csv"))
    got = causeway.images(causeway.Lens.binary(0.8, 0.05), x, y, threads=1)
    np.testing.assert_array_equal(np.array(out["magnification"]), got["magnification"])
    np.testing.assert_array_equal(np.array(out["images"]), got["count"])


def test_threads_do_not_change_results():
    lens = causeway.Lens.binary(1.1, 1e-3)
    rng = np.random.default_rng(7)
    x, y = rng.uniform(-1, 1, (2, 70_000))  # more than one chunk
    one = causeway.magnification(lens, x, y, threads=1)
    two = causeway.magnification(lens, x, y, threads=2)
    np.testing.assert_array_equal(one, two)
