"""Bad input raises ValueError naming the argument; files raise OSError."""
import os
import signal
import tempfile
import threading
import time

import numpy as np
import pytest

import causeway

L = causeway.Lens.binary(1.0, 0.5)
S = causeway.Store.create(tempfile.mkdtemp())
D = causeway.DataSet([1, 2, 3], flux=[1, 2, 3], flux_err=[1, 1, 1])
M = causeway.build_map(causeway.Lens.single(), (0.0, 0.0), 1.0, 16, rays=4)


@pytest.mark.parametrize(
    "call, name",
    [
        (lambda: causeway.Lens.binary(1.0, -1.0), "q"),
        (lambda: causeway.Lens.binary(float("nan"), 0.1), "s"),
        (lambda: causeway.Lens([0, 1], [0, 0], [1, -1]), "mass"),
        (lambda: causeway.Lens([0, 1], [0, 0], [1]), "mass"),
        (lambda: causeway.magnification(L, [0, 1], [0]), "y"),
        (lambda: causeway.magnification(L, [0], [0], threads=0), "threads"),
        (lambda: causeway.build_map(L, (0, 0), -1.0, 10), "width"),
        (lambda: causeway.build_map(L, (0, 0), 1.0, 0), "pixels"),
        (lambda: causeway.build_map(L, (0, float("inf")), 1.0, 10), "center"),
        (lambda: causeway.build_map(L, (0, 0), 1.0, 10, engine="nope"), "engine"),
        (lambda: causeway.build_map(L, (0, 0), 1.0, 10, rays=0), "rays"),
        (lambda: causeway.build_map(L, (0, 0), 1.0, 100000, max_memory=10**6), "pixels"),
        (lambda: causeway.contour_magnification(L, [0], [0], -0.1), "rho"),
        (lambda: causeway.contour_magnification(L, [0], [0], 0.1, ld=1.5), "ld"),
        (lambda: causeway.contour_magnification(L, [0], [0], 0.1, ld_sqrt=(0.2, 2)), "ld_sqrt"),
        (lambda: causeway.contour_magnification(L, [0], [0], 0.1, ld=0.5, ld_sqrt=(0.2, 0.2)), "ld_sqrt"),
        (lambda: causeway.contour_magnification(L, [0], [0], 0.1, tol=0.5), "tol"),
        (lambda: causeway.map_magnification(M, [0], [0], 0.1, evaluation="fast"), "evaluation"),
        (lambda: causeway.map_magnification(M, [0], [0], 0.1, tol=-1), "tol"),
        (lambda: causeway.trajectory(0, 0.1, -5, 0, [1.0]), "te"),
        (lambda: causeway.trajectory(0, float("nan"), 5, 0, [1.0]), "u0"),
        (lambda: causeway.model_magnification(1, 0, 0, 0.1, 10, 0, 0.01, [0.0]), "q"),
        (lambda: causeway.DataSet([1, 2, 3], mag=[1, 2, 3], mag_err=[0.1, 0, 0.1]), "mag_err"),
        (lambda: causeway.DataSet([1, 2, 3], mag=[1, 2], mag_err=[0.1, 0.1, 0.1]), "mag"),
        (lambda: causeway.DataSet([1, 1, 3], flux=[1, 2, 3], flux_err=[1, 1, 1]), "t"),
        (lambda: causeway.DataSet([1, 2, 3], flux=[1, 2, 3]), "mag"),
        (lambda: causeway.DataSet([1, 2, 3], flux=[1, 2, 3], flux_err=[1, 1, 1], ld=2), "ld"),
        (lambda: causeway.simulate(1, 1e-3, 0, 0.1, 10, 0, 0.01, [0, 1, 2], sigma_mag=0), "sigma"),
        (lambda: S.nearest(1.0, -1.0), "q"),
        (lambda: causeway.fit_event([], S), "data"),
        (lambda: causeway.fit_event([D], [1, 2]), "maps"),
        (lambda: causeway.fit_event([D], S, clip=1), "clip"),
    ],
)
def test_bad_input_names_the_argument(call, name):
    with pytest.raises(ValueError) as e:
        call()
    assert str(e.value).startswith(name), str(e.value)


def test_files_raise_os_errors(tmp_path):
    missing = tmp_path / "none"
    for call in (
        lambda: causeway.Map.load(missing / "m.fits"),
        lambda: causeway.Store.open(missing),
        lambda: causeway.DataSet.read(missing / "d.csv"),
        lambda: causeway.Lens.read_csv(missing / "l.csv"),
        lambda: M.save(missing / "m.fits"),
    ):
        with pytest.raises(OSError):
            call()
    # A file that is not a map is bad input, not an I/O failure.
    (tmp_path / "bad.fits").write_text("SIMPLE  = F")
    with pytest.raises(ValueError):
        causeway.Map.load(tmp_path / "bad.fits")


def test_wrong_types_raise_type_errors():
    with pytest.raises(TypeError):
        causeway.magnification("lens", [0], [0])
    with pytest.raises((TypeError, ValueError)):
        causeway.magnification(L, ["a"], [0])


def test_ctrl_c_stops_a_long_call_between_chunks():
    # SIGINT 0.3 s into a call of some 5 s: KeyboardInterrupt after the chunk that is running.
    x = np.linspace(-1, 1, 4_000_000)
    timer = threading.Timer(0.3, lambda: os.kill(os.getpid(), signal.SIGINT))
    started = time.perf_counter()
    timer.start()
    with pytest.raises(KeyboardInterrupt):
        causeway.magnification(L, x, 0.3 * x)
    timer.join()
    assert time.perf_counter() - started < 2.5
