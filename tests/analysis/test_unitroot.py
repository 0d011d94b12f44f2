"""ADF and KPSS computed by relspan (relspan.analysis.unitroot) against statsmodels, the reference library.

Reference: statsmodels.tsa.stattools ``adfuller(x, regression="c", autolag="AIC")`` and
``kpss(x, regression="c", nlags="auto")``, called directly; its rank-deficiency warning
(``SingularMatrixWarning``) is the reference for the ``singular`` flag. The asymptotic critical
values in the p-value check are MacKinnon's (2010) response-surface values for one series with a
constant (statsmodels' ``tau_c_2010`` table, reference library); the KPSS table is Kwiatkowski et
al. (1992), Table 1.
"""

import subprocess
import sys
import warnings

import numpy as np
import pytest

from relspan.analysis.unitroot import (KPSS_CRITICAL, KPSS_LEVELS, adf_constant, kpss_level,
                                       mackinnon_p_value)

pytest.importorskip("statsmodels")


def _series(rng, kind, t):
    e = rng.standard_normal(t)
    if kind == "walk":
        return np.cumsum(e)
    if kind == "noise":
        return e
    if kind == "ar":
        x = np.zeros(t)
        for i in range(1, t):
            x[i] = 0.7 * x[i - 1] + e[i]
        return x
    if kind == "trend":
        return 0.05 * np.arange(t) + e
    return np.round(np.cumsum(e) * 0.3)  # few distinct steps: some designs lose rank


def _reference(x):
    from statsmodels.tools.sm_exceptions import InterpolationWarning, SingularMatrixWarning
    from statsmodels.tsa.stattools import adfuller, kpss
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("ignore", InterpolationWarning)
        warnings.simplefilter("ignore", FutureWarning)
        warnings.simplefilter("ignore", RuntimeWarning)
        warnings.simplefilter("always", SingularMatrixWarning)
        adf = adfuller(x, regression="c", autolag="AIC")
        kp = kpss(x, regression="c", nlags="auto")
    singular = any(issubclass(w.category, SingularMatrixWarning) for w in caught)
    return adf, kp, singular


def _close(a, b, rel):
    return a == b or abs(a - b) <= rel * max(1.0, abs(b))


@pytest.mark.parametrize("kind", ["walk", "noise", "ar", "trend", "steps"])
def test_statistics_lags_and_p_values_match_statsmodels(kind):
    rng = np.random.default_rng(["walk", "noise", "ar", "trend", "steps"].index(kind))
    singular_seen = 0
    for _ in range(60):
        x = _series(rng, kind, int(rng.integers(12, 60 if kind == "steps" else 400)))
        if np.ptp(x) == 0:
            continue
        adf, kp, singular = _reference(x)
        ours, kpo = adf_constant(x), kpss_level(x)
        assert ours.lags == adf[2] and ours.rows == adf[3]
        assert ours.singular == singular
        singular_seen += singular
        # same computation (pseudo-inverse fits, same order of operations): equal within 1e-12 relative
        assert _close(ours.statistic, adf[0], 1e-12)
        assert _close(ours.p_value, adf[1], 1e-12)  # erfc here, SciPy's ndtr there
        assert kpo.lags == kp[2]
        assert _close(kpo.statistic, kp[0], 1e-12) and _close(kpo.p_value, kp[1], 1e-12)
    if kind == "steps":
        assert singular_seen > 0  # the rank flag is exercised, not only its absence


@pytest.mark.parametrize("x", [
    np.r_[np.zeros(10), np.ones(10), np.zeros(10)],  # a perfect fit: t = -inf-like, p = 0
    np.arange(30.0),                                 # constant differences: rank-deficient
    np.arange(30.0) ** 2,
    np.r_[np.arange(15.0), np.arange(15.0)[::-1]],
])
def test_perfect_and_degenerate_fits_match_statsmodels(x):
    adf, kp, singular = _reference(x)
    ours = adf_constant(x)
    assert (ours.lags, ours.singular) == (adf[2], singular)
    assert _close(ours.statistic, adf[0], 1e-12) and _close(ours.p_value, adf[1], 1e-12)
    assert _close(kpss_level(x).statistic, kp[0], 1e-12)


def test_mackinnon_p_values_at_the_asymptotic_critical_values():
    # MacKinnon (2010) asymptotic critical values, one series, constant: 1%, 5%, 10%
    # (statsmodels' tau_c_2010 table, reference library); the 1994 response surface is within 0.001
    for crit, level in ((-3.43035, 0.01), (-2.86154, 0.05), (-2.56677, 0.10)):
        assert mackinnon_p_value(crit) == pytest.approx(level, abs=1e-3)
    grid = np.linspace(-25, 5, 601)
    p = np.array([mackinnon_p_value(t) for t in grid])
    assert np.all(np.diff(p) >= 0) and p[0] == 0.0 and p[-1] == 1.0


def test_kpss_p_value_reads_the_table_and_is_held_at_its_ends():
    for crit, level in zip(KPSS_CRITICAL, KPSS_LEVELS):
        assert np.interp(crit, KPSS_CRITICAL, KPSS_LEVELS) == level
    walk = np.cumsum(np.random.default_rng(3).standard_normal(500))
    assert kpss_level(walk).p_value == 0.01          # far above 0.739: held at the table's end
    noise = np.random.default_rng(4).standard_normal(500)
    assert 0.01 <= kpss_level(noise).p_value <= 0.10


def test_bad_series_are_refused():
    for bad in (np.ones(20), np.r_[np.arange(10.0), np.nan], np.arange(5.0)):
        with pytest.raises(ValueError):
            adf_constant(bad)
    with pytest.raises(ValueError):
        kpss_level(np.ones(20))


def test_trend_diagnostics_do_not_import_statsmodels():
    code = ("import sys, numpy as np\n"
            "from relspan.analysis.trends import series_diagnostics\n"
            "series_diagnostics(np.cumsum(np.ones((50, 2)) + np.arange(100).reshape(50, 2) % 3, axis=0),"
            " names=['a', 'b'])\n"
            "assert 'statsmodels' not in sys.modules, 'statsmodels imported'\n")
    subprocess.run([sys.executable, "-c", code], check=True)
