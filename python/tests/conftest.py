"""Shared scaffolding of the Python package's tests: reference tables, the command line."""
import csv
import os
import subprocess
from pathlib import Path

import numpy as np
import pytest

ROOT = Path(__file__).resolve().parents[2]
REFERENCE = ROOT / "tests" / "reference"


def reference(name):
    """A committed reference table (tests/reference/NAME) as a dict of arrays (float arrays
    where the column is numeric)."""
    with open(REFERENCE / name, newline="") as f:
        rows = list(csv.DictReader(f))
    out = {}
    for k in rows[0]:
        try:
            out[k] = np.array([float(r[k]) for r in rows])
        except ValueError:
            out[k] = np.array([r[k] for r in rows])
    return out


def read_csv(text):
    """CSV text printed by the command line: a dict of columns (floats where they parse)."""
    rows = list(csv.DictReader(text.splitlines()))

    def value(v):
        try:
            return float(v)
        except ValueError:
            return v

    return {k: [value(r[k]) for r in rows] for k in rows[0]}


def write_csv(path, header, *columns):
    """Writes columns as CSV with a header, each number in shortest round-trip form."""
    rows = zip(*(np.asarray(c, dtype=float).tolist() for c in columns))
    path.write_text(header + "\n" + "".join(",".join(map(repr, r)) + "\n" for r in rows))
    return path


@pytest.fixture(scope="session")
def cli():
    """Runs the built `causeway` binary ($CAUSEWAY_BIN, else target/release/causeway) and
    returns its stdout; fails the test on a non-zero exit."""
    exe = Path(os.environ.get("CAUSEWAY_BIN", ROOT / "target" / "release" / "causeway"))
    if not exe.exists():
        pytest.fail(f"{exe} missing: run `cargo build --release` (scripts/test does)")

    def run(*args, cwd=None):
        done = subprocess.run([str(exe), *map(str, args)], capture_output=True, text=True, cwd=cwd)
        assert done.returncode == 0, done.stderr
        return done.stdout

    return run
