"""The normal and chi-squared distribution functions relspan uses, from scipy.special.

scipy.stats computes these with the very same scipy.special calls (normal: ``ndtr`` and
``ndtri``; chi-squared: ``chdtrc`` for the upper tail and ``2 * gammaincinv(df / 2, p)`` for
quantiles, with the upper tail 1 below zero), so the numbers are bit-identical to
``scipy.stats.norm.cdf``/``ppf`` and ``scipy.stats.chi2.sf``/``ppf``
(tests/analysis/test_dist.py compares them on 10^5 arguments, edges included). Importing
scipy.stats costs about 0.7 s of CPU per process (``import scipy.stats`` after numpy, pandas
and scipy.linalg in a fresh interpreter, on the 2-core machine of docs/performance.md), which
every relspan command and every pool worker paid for these four functions.
"""

from __future__ import annotations

import numpy as np
from scipy import special

__all__ = ["norm_cdf", "norm_ppf", "chi2_sf", "chi2_ppf"]


def norm_cdf(x):
    """Standard normal distribution function (as ``scipy.stats.norm.cdf``)."""
    return special.ndtr(x)


def norm_ppf(q):
    """Standard normal quantile function (as ``scipy.stats.norm.ppf``)."""
    return special.ndtri(q)


def chi2_sf(x, df):
    """Upper tail of the chi-squared distribution with ``df`` degrees of freedom (as
    ``scipy.stats.chi2.sf``: 1 below zero)."""
    return np.where(np.asarray(x) < 0, 1.0, special.chdtrc(df, x))[()]


def chi2_ppf(q, df):
    """Chi-squared quantile function with ``df`` degrees of freedom (as ``scipy.stats.chi2.ppf``)."""
    return 2 * special.gammaincinv(np.divide(df, 2), q)
