#!/usr/bin/env python3
"""Binary-lens caustic topology boundaries (Erdl & Schneider 1993; Dominik 1999, A&A 349, 108).

Close/intermediate boundary s_c: the root in (0, 1) of
    s^8 = (1 + q)^2 / (27 q) * (1 - s^4)^3,
found with scipy.optimize.brentq; intermediate/wide boundary s_w = sqrt((1 + q^(1/3))^3 / (1 + q)).
At q = 1 these are 1/sqrt(2) and 2. Both are symmetric under q -> 1/q.

Writes topology.csv beside this file; `python3 topology.py --check` compares instead.
"""

import math
import os
import sys

from scipy.optimize import brentq

from refcheck import emit

HERE = os.path.dirname(os.path.abspath(__file__))
OUT = os.path.join(HERE, "topology.csv")
QS = [1.0, 0.5, 0.1, 1e-2, 1e-3, 1e-4, 1e-5, 1e-6, 10.0]


def s_close(q):
    f = lambda s: s**8 - (1 + q) ** 2 / (27 * q) * (1 - s**4) ** 3
    return brentq(f, 1e-6, 1.0, xtol=1e-15, rtol=4 * sys.float_info.epsilon, maxiter=500)


def s_wide(q):
    return math.sqrt((1 + q ** (1 / 3)) ** 3 / (1 + q))


def rows():
    return [(q, s_close(q), s_wide(q)) for q in QS]


def main():
    data = rows()
    assert abs(data[0][1] - 1 / math.sqrt(2)) < 1e-12 and abs(data[0][2] - 2) < 1e-12
    emit(OUT, ["q", "s_close", "s_wide"], data)


if __name__ == "__main__":
    main()
