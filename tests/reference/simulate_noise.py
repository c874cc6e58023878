#!/usr/bin/env python3
"""Acceptance ranges for the noise of simulated photometry (scipy.stats).

For n points with independent Gaussian errors, the chi^2 of the true model follows the chi-square
distribution with n degrees of freedom, and the mean of the normalised residuals is normal with
standard deviation 1/sqrt(n). Columns: points, probability (the central range's coverage),
chi2_low and chi2_high (scipy.stats.chi2.ppf at (1 - p)/2 and (1 + p)/2), mean_bound
(scipy.stats.norm.ppf((1 + p)/2) / sqrt(n)).

`python3 simulate_noise.py --check` compares with the committed simulate_noise.csv.
"""
import math
from pathlib import Path

from scipy import stats

from refcheck import emit

HERE = Path(__file__).parent


def rows():
    out = []
    for n in (2000,):
        for p in (0.999,):
            lo, hi = stats.chi2.ppf((1 - p) / 2, n), stats.chi2.ppf((1 + p) / 2, n)
            out.append((n, p, float(lo), float(hi), float(stats.norm.ppf((1 + p) / 2) / math.sqrt(n))))
    return out


def main():
    emit(HERE / "simulate_noise.csv", ["points", "probability", "chi2_low", "chi2_high", "mean_bound"], rows())


if __name__ == "__main__":
    main()
