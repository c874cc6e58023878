"""Shared helpers for the reference scripts: write a CSV, or --check it against the committed one."""
import csv
import io
import math
import sys
from pathlib import Path


def emit(path, header, rows, rel=1e-12, abs_=1e-14):
    """Write rows to `path`, or with --check compare them with the committed file."""
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(header)
    for r in rows:
        w.writerow([repr(float(v)) if isinstance(v, float) else v for v in r])
    text = buf.getvalue()
    path = Path(path)
    if "--check" not in sys.argv:
        path.write_text(text)
        print(f"wrote {path} ({len(rows)} rows)")
        return
    old = list(csv.reader(path.read_text().splitlines()))
    new = list(csv.reader(text.splitlines()))
    if len(old) != len(new) or old[0] != new[0]:
        sys.exit(f"{path}: committed file has a different shape from the regenerated one")
    for i, (a, b) in enumerate(zip(old[1:], new[1:]), start=2):
        for x, y in zip(a, b):
            try:
                fx, fy = float(x), float(y)
            except ValueError:
                if x != y:
                    sys.exit(f"{path}:{i}: '{x}' != '{y}'")
                continue
            if not math.isclose(fx, fy, rel_tol=rel, abs_tol=abs_):
                sys.exit(f"{path}:{i}: committed {x} but regenerated {y}")
    print(f"checked {path} ({len(rows)} rows)")
