"""relspan.analysis._dist against scipy.stats (the reference library): bit for bit.

relspan takes the normal and chi-squared functions from scipy.special (the calls scipy.stats makes
itself) so that no command imports scipy.stats for them; the numbers must not move by one bit.
"""

from __future__ import annotations

import subprocess
import sys

import numpy as np
import pytest
from scipy import stats

from relspan.analysis import _dist

RNG = np.random.default_rng(20261204)
P = np.concatenate([RNG.random(100_000), [0.0, 1.0, 0.5, 1e-300, 1.0 - 1e-16, -0.1, 1.1, np.nan]])
X = np.concatenate([RNG.normal(size=100_000) * 5.0, [0.0, np.inf, -np.inf, np.nan, 40.0, -40.0]])


def _same(a, b) -> bool:
    return np.array_equal(np.asarray(a, float), np.asarray(b, float), equal_nan=True)


def test_normal_functions_are_scipy_stats_bit_for_bit():
    assert _same(_dist.norm_ppf(P), stats.norm.ppf(P))
    assert _same(_dist.norm_cdf(X), stats.norm.cdf(X))
    assert _dist.norm_ppf(0.95) == stats.norm.ppf(0.95)


@pytest.mark.parametrize("df", [1, 2, 3, 5, 9, 14, 27, 45, 2.5])
def test_chi2_functions_are_scipy_stats_bit_for_bit(df):
    xs = np.concatenate([RNG.random(20_000) * 100.0, [0.0, -1.0, -1e-300, np.inf, np.nan]])
    assert _same(_dist.chi2_sf(xs, df), stats.chi2.sf(xs, df))
    assert _same(_dist.chi2_ppf(P, df), stats.chi2.ppf(P, df))
    assert _dist.chi2_sf(-1.0, df) == 1.0 == stats.chi2.sf(-1.0, df)   # below zero: all the mass above
    assert isinstance(_dist.chi2_sf(3.2, df), np.floating) and _dist.chi2_sf(3.2, df) == stats.chi2.sf(3.2, df)
    assert _dist.chi2_ppf(0.5, df) == stats.chi2.ppf(0.5, df)


def test_the_analysis_and_the_pipeline_import_without_scipy_stats():
    code = ("import sys, relspan.run, relspan.analysis.inference, relspan.analysis.influence; "
            "print('scipy.stats' in sys.modules)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "False", out
