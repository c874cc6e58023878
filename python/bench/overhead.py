#!/usr/bin/env python3
"""The Python binding's overhead on arrays, measured in one process and one run.

The same batch is timed two ways: a call from Python on numpy arrays (conversion in and out,
chunks with Ctrl-C checks, the GIL released) and the library call alone, timed inside Rust by
the module's timing entry points (`_time_magnification`, `_time_map_magnification`). Each is
run `--repeats` times, alternating, and the medians compared: overhead = python / rust - 1.

    python python/bench/overhead.py                 # 1e6 point-source values, 1e5 map reads
                                                    # (auto: pre-convolved), 1e4 direct reads
    python python/bench/overhead.py --points 1e5    # smaller batches

Prints one line per batch. Timing is reported, never asserted.
"""
import argparse
import time

import numpy as np

import causeway


def median_pair(python_call, rust_call, repeats):
    """Median wall time of the Python call and median time the Rust entry point reports."""
    py_times, rust_times = [], []
    for _ in range(repeats):
        t = time.perf_counter()
        python_call()
        py_times.append(time.perf_counter() - t)
        rust_times.append(rust_call())
    return float(np.median(py_times)), float(np.median(rust_times))


def report(name, count, py_s, rust_s):
    print(
        f"{name}: {count:.0e} values, python {py_s:.4f} s, rust {rust_s:.4f} s, "
        f"overhead {100 * (py_s / rust_s - 1):+.2f}%"
    )


def main():
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--points", type=float, default=1e6, help="point-source batch size")
    p.add_argument("--reads", type=float, default=1e5, help="finite-source map reads")
    p.add_argument("--repeats", type=int, default=9)
    p.add_argument("--threads", type=int, default=None)
    a = p.parse_args()
    rng = np.random.default_rng(1)

    lens = causeway.Lens.binary(1.25, 2e-3)
    n = int(a.points)
    x, y = rng.uniform(-1.5, 1.5, (2, n))
    py_s, rust_s = median_pair(
        lambda: causeway.magnification(lens, x, y, threads=a.threads),
        lambda: causeway._time_magnification(lens, x, y, threads=a.threads),
        a.repeats,
    )
    report("point-source magnification", n, py_s, rust_s)

    m = causeway.build_map(lens, (0.447, 0.0), 0.1, 1000, rays=100, threads=a.threads)
    for evaluation, k in (("auto", int(a.reads)), ("direct", int(a.reads) // 10)):
        x, y = rng.uniform(0.41, 0.49, k), rng.uniform(-0.035, 0.035, k)
        kw = dict(ld=0.5, evaluation=evaluation, threads=a.threads)
        py_s, rust_s = median_pair(
            lambda: causeway.map_magnification(m, x, y, 0.001, fallback=False, **kw),
            lambda: causeway._time_map_magnification(m, x, y, 0.001, **kw),
            a.repeats,
        )
        report(f"finite-source map reads, rho = 10 px ({evaluation})", k, py_s, rust_s)

if __name__ == "__main__":
    main()
