"""Maps: build, the numpy view, FITS files (astropy), the store and libraries."""
import numpy as np
import pytest
from astropy.io import fits

import causeway
from conftest import reference


def lattice_bound(perimeter, h, mean, area):
    """Rigorous relative bound of a lattice count's mean over a region whose image-plane
    boundary has length `perimeter` (two components): at most 4 (P/h + 2) cells miscounted
    by one ray each (as tests/integration/engine.rs derives it)."""
    return 4 * (perimeter / h + 2) * h * h / (mean * area)


def test_window_means_conserve_flux():
    # Window means of Paczynski's A (scipy.integrate.quad, tests/reference/single_lens_maps.py).
    ref = reference("single_lens_maps.csv")
    rows = np.flatnonzero(ref["pixels"] == 0)
    assert len(rows) == 5
    for r in rows:
        cx, cy, w, mean, per = (ref[k][r] for k in ("cx", "cy", "width", "mean", "perimeter"))
        m = causeway.build_map(causeway.Lens.single(), (cx, cy), w, 50, rays=1e4)
        h = w / 50 / 1e4**0.5
        assert abs(m.mean() / mean - 1) <= lattice_bound(per, h, mean, w * w) / 10


def test_pixel_means_land_at_iy_ix():
    # Pixel means (scipy dblquad) of an 8 x 8 window off the lens: every pixel distinct, so
    # data[iy, ix] with row 0 at the smallest y is checked cell by cell.
    ref = reference("single_lens_maps.csv")
    rows = np.flatnonzero(ref["pixels"] > 0)
    cx, cy, w, n = (ref[k][rows[0]] for k in ("cx", "cy", "width", "pixels"))
    n = int(n)
    m = causeway.build_map(causeway.Lens.single(), (cx, cy), w, n, rays=1600)
    data = m.data
    assert data.dtype == np.float32 and data.shape == (n, n) and data.flags.c_contiguous
    assert not data.flags.writeable
    h = w / n / 40
    for r in rows:
        ix, iy, mean, per = int(ref["ix"][r]), int(ref["iy"][r]), ref["mean"][r], ref["perimeter"][r]
        cells = 4 * (per / h + 2)
        assert abs(data[iy, ix] / mean - 1) <= cells / (mean * 1600)
    assert m.extent == pytest.approx((cx - w / 2, cx + w / 2, cy - w / 2, cy + w / 2), abs=1e-15)


def test_saved_map_opens_in_astropy_with_checksums(tmp_path):
    lens = causeway.Lens.binary(1.25, 2e-3)
    m = causeway.build_map(lens, (0.45, 0.0), 0.1, 64, rays=50)
    path = tmp_path / "m.fits"
    m.save(path)
    # FITS Standard 4.0 and the CHECKSUM/DATASUM convention (Seaman et al. 2002), by astropy.
    with fits.open(path, checksum=True) as hdul:
        hdu = hdul[0]
        assert hdu.verify_checksum() == 1 and hdu.verify_datasum() == 1
        np.testing.assert_array_equal(hdu.data, m.data)
        assert hdu.header["NAXIS1"] == 64 and hdu.header["BIN_Q"] == 2e-3
    back = causeway.Map.load(path)
    np.testing.assert_array_equal(back.data, m.data)
    assert back.center == m.center and back.width == m.width
    assert back.lens.binary_parameters == (1.25, 2e-3)
    assert back.provenance["rays_shot"] == m.provenance["rays_shot"]


def test_map_equals_the_command_line(cli, tmp_path):
    cli("map", "--s", 0.9, "--q", 0.2, "--center=-0.1,0.05", "--width", 0.8, "--pixels", 120,
        "--rays", 30, "--engine", "polygon", "--out", tmp_path / "cli.fits")
    lens = causeway.Lens.binary(0.9, 0.2)
    m = causeway.build_map(lens, (-0.1, 0.05), 0.8, 120, rays=30, engine="polygon", threads=1)
    np.testing.assert_array_equal(causeway.Map.load(tmp_path / "cli.fits").data, m.data)
    two = causeway.build_map(lens, (-0.1, 0.05), 0.8, 120, rays=30, engine="polygon", threads=2)
    np.testing.assert_array_equal(two.data, m.data)


def test_store_and_library(tmp_path):
    spec = """
s = [1.1, 1.3]
q = [1e-3]
pixels = 60
rays = 20
[window]
rule = "planetary"
"""
    seen = []
    built = causeway.build_library(spec, tmp_path / "maps", progress=lambda *a: seen.append(a))
    assert built == (2, 0) and [a[:2] for a in seen] == [(1, 2), (2, 2)]
    store = causeway.Store.open(tmp_path / "maps")
    assert causeway.build_library(spec, store) == (0, 2)
    entries = store.entries()
    assert sorted(e["s"] for e in entries) == [1.1, 1.3]
    near = store.nearest(1.28, 1e-3)
    assert [e["s"] for e in near] == [1.3]
    m = store.load(near[0]["file"])
    assert m.lens.binary_parameters == (1.3, 1e-3) and m.pixels == 60
    assert causeway.Store.key_file(m) == near[0]["file"]
    assert store.find(1.1, 1e-3)[0]["pixels"] == 60
    # The planetary caustic of a wide planet sits near s - 1/s from the host (Griest &
    # Safizadeh 1998; Han 2006): the window is placed on it.
    host = m.lens.x[0]
    assert abs(m.center[0] - host - (1.3 - 1 / 1.3)) < 0.05


def test_ctrl_c_stops_a_map_build():
    # A build of some 9e9 rays on one thread (about a minute at 1.5e8 rays/s) interrupted after
    # 0.3 s: KeyboardInterrupt arrives from inside the build, long before it could finish.
    import _thread
    import threading
    import time

    lens = causeway.Lens.binary(1.0, 1e-3)
    timer = threading.Timer(0.3, _thread.interrupt_main)
    started = time.monotonic()
    timer.start()
    with pytest.raises(KeyboardInterrupt):
        causeway.build_map(lens, (0.0, 0.0), 2.0, 3000, rays=1000, engine="rays", threads=1)
    timer.cancel()
    assert time.monotonic() - started < 20


def test_default_build_chooses_by_accuracy_and_carries_its_certificate():
    # As `causeway map` without --rays: polygon at the density for a median error of 1e-3, and
    # the certificate measured on the map (numbers checked against numpy in tests/python).
    m = causeway.build_map(causeway.Lens.binary(1.2, 1e-3), (0.0, 0.0), 0.4, 100)
    p = m.provenance
    assert p["engine"] == "polygon"
    count, median, p99 = p["certificate"]["away"]
    assert count > 100 and 0 <= median <= p99
    with pytest.raises(ValueError, match="accuracy"):
        causeway.build_map(causeway.Lens.single(), (0, 0), 1.0, 10, rays=10, accuracy=1e-3)
