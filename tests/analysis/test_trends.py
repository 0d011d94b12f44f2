"""Stationarity verdicts, the spurious-regression caution and effective rows (relspan.analysis.trends)."""

import numpy as np
import pytest

from relspan.analysis.trends import effective_sample_size, series_diagnostics


def test_adf_and_kpss_match_statsmodels():
    # reference: statsmodels.tsa.stattools.adfuller / kpss called directly (relspan computes them itself:
    # tests/analysis/test_unitroot.py; equal within 1e-12 relative)
    import warnings
    from statsmodels.tsa.stattools import adfuller, kpss
    x = np.cumsum(np.random.default_rng(0).normal(size=200))
    r = series_diagnostics(x, names=["walk"]).series[0]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        adf = adfuller(x, regression="c", autolag="AIC")
        kp = kpss(x, regression="c", nlags="auto")
    assert r.adf_statistic == pytest.approx(adf[0], rel=1e-12) and r.adf_p_value == pytest.approx(adf[1], rel=1e-12)
    assert r.kpss_statistic == pytest.approx(kp[0], rel=1e-12) and r.kpss_p_value == pytest.approx(kp[1], rel=1e-12)


def test_independent_random_walks_raise_the_caution_and_white_noise_does_not():
    rng = np.random.default_rng(1)
    walks = np.cumsum(rng.normal(size=(300, 3)), axis=0)
    r = series_diagnostics(walks, names=["a", "b", "c"])
    assert r.spurious_caution and "Granger & Newbold 1974" in r.caution
    noise = series_diagnostics(rng.normal(size=(300, 3)), names=["a", "b", "c"])
    assert not noise.spurious_caution and noise.caution == ""
    assert all(s.verdict == "stationary" for s in noise.series)


def test_macro_log_levels_trend_and_their_growth_rates_do_not():
    # real data: statsmodels.datasets.macrodata (US quarterly macro series 1959-2009, shipped with statsmodels)
    from statsmodels.datasets import macrodata
    d = macrodata.load_pandas().data
    logs = np.log(d[["realgdp", "cpi", "m1"]].to_numpy())
    levels = series_diagnostics(logs, names=["realgdp", "cpi", "m1"])
    assert levels.spurious_caution
    assert all(s.verdict == "trending" for s in levels.series)
    growth = series_diagnostics(np.diff(logs, axis=0), names=["realgdp", "cpi", "m1"])
    assert not growth.spurious_caution


def test_effective_rows_follow_the_ar1_rule():
    # Bartlett (1946) rule for two AR(1) series: T (1 - r1 r2) / (1 + r1 r2), evaluated by hand
    x = np.array([[1.0, 2.0], [2.0, 1.0], [3.0, 2.0], [4.0, 1.0], [5.0, 2.0]])
    eff, per = effective_sample_size(x)
    d = x - x.mean(axis=0)
    r = (d[1:] * d[:-1]).sum(axis=0) / (d * d).sum(axis=0)
    assert eff == pytest.approx(min(5 * (1 - r[0] * r[1]) / (1 + r[0] * r[1]), 5))  # never above T
    assert per[0] == pytest.approx(min(5 * (1 - r[0]) / (1 + r[0]), 5))


def test_a_series_of_few_steps_cannot_be_judged_and_raises_no_warning():
    import warnings

    # 0, 0, 0, 1 repeated: the ADF regression is rank-deficient (statsmodels warns SingularMatrixWarning)
    # and its p = 0.0 would read as "stationary"
    steps = np.tile([0.0, 0.0, 0.0, 1.0], 15)
    noise = np.random.default_rng(0).normal(size=60)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        report = series_diagnostics(np.column_stack([steps, noise]), names=["steps", "noise"])
    assert report.series[0].verdict == "cannot be judged"
    assert report.series[1].verdict == "stationary"
