"""One rule for errors across the analysis functions (see relspan.errors).

A malformed argument raises OptionsError (a ValueError) naming the function's own
parameter; the same bad covariance raises the same class from every function.
"""

from __future__ import annotations

import numpy as np
import pytest

from relspan.analysis import (bounded_noise, elementary_regressions, equal_noise, frisch_analysis,
                              frisch_max_corank, frisch_q1, minimum_trace, one_orthant,
                              solution_spread, tolerance_eps, triad)
from relspan.errors import OptionsError

NAMES = ("a", "b", "c")

CALLS = {
    "elementary_regressions": lambda s: elementary_regressions(s, names=NAMES),
    "equal_noise": lambda s: equal_noise(s, names=NAMES),
    "bounded_noise": lambda s: bounded_noise(s, names=NAMES, eps=0.01),
    "tolerance_eps": lambda s: tolerance_eps(s, relative=0.01),
    "one_orthant": lambda s: one_orthant(s, names=NAMES),
    "frisch_q1": lambda s: frisch_q1(s, names=NAMES),
    "triad": lambda s: triad(s, names=NAMES),
    "minimum_trace": lambda s: minimum_trace(s),
    "frisch_max_corank": lambda s: frisch_max_corank(s, names=NAMES, eps=0.01),
    "solution_spread": lambda s: solution_spread(s, 1, 0.01, names=NAMES),
    "frisch_analysis": lambda s: frisch_analysis(s, names=NAMES, eps=0.01),
}

GOOD = np.array([[1.0, 0.5, 0.3], [0.5, 1.0, 0.4], [0.3, 0.4, 1.0]])


def _asymmetric():
    s = GOOD.copy()
    s[0, 1] += 0.1
    return s


def _with_nan():
    s = GOOD.copy()
    s[1, 2] = s[2, 1] = np.nan
    return s


BAD = {
    "asymmetric": (_asymmetric(), "not symmetric"),
    "not square": (np.ones((3, 2)), r"square \(n, n\) matrix"),
    "missing value": (_with_nan(), "NaN or infinite"),
    "negative variance": (np.diag([1.0, -1.0, 1.0]), "negative variance"),
}


@pytest.mark.parametrize("func", sorted(CALLS))
@pytest.mark.parametrize("case", sorted(BAD))
def test_same_bad_covariance_raises_options_error_naming_cov_from_every_function(func, case):
    s, words = BAD[case]
    with pytest.raises(OptionsError, match=words) as e:
        CALLS[func](s)
    assert e.value.key == "cov"
    assert isinstance(e.value, ValueError)


@pytest.mark.parametrize("func", sorted(CALLS))
def test_good_covariance_is_accepted_by_every_function(func):
    CALLS[func](GOOD)
