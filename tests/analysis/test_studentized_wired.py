"""Blockwise studentised eigenvalue intervals wired into the window analysis (time-ordered rows).

Invented, seeded data only. The closed-form eigenvalue gradient is checked against central differences
(relspan's own statistic_gradient); the interval against studentized_interval computed by hand from the
same resamples; results must not depend on whether the window's resamples were drawn by the task first.
"""

from __future__ import annotations

import numpy as np
import pytest

from relspan.analysis.inference import (ResamplingOptions, draw_window, drawn_granules, eigenvalue_gradient,
                                        window_inference)
from relspan.analysis.resample import (GranuleStats, drawn_blocks, influence_sd, influence_values,
                                       resample_covariances, resample_influence_sd, statistic_gradient,
                                       studentized_interval, window_rng)


def _ar_rows(seed=5, t=300, rho=0.5):
    rng = np.random.default_rng(seed)
    load = np.array([[1.0, 0.4], [0.3, 1.0], [0.8, 0.7]])
    z = np.zeros((t, 2))
    e = rng.normal(size=(t, 2))
    for i in range(1, t):
        z[i] = rho * z[i - 1] + e[i]
    noise = np.zeros((t, 3))
    f = rng.normal(size=(t, 3))
    for i in range(1, t):
        noise[i] = rho * noise[i - 1] + f[i]
    return z @ load.T + 0.3 * noise


@pytest.mark.parametrize("scale", ["correlation", "as given"])
def test_closed_form_eigenvalue_gradient_matches_central_differences(scale):
    x = _ar_rows()
    cov = np.cov(x.T) * np.array([1.0, 4.0, 0.25])[:, None] * np.array([1.0, 4.0, 0.25])[None, :]

    for j in range(3):
        def f(s, j=j):
            d = np.sqrt(np.diag(s)) if scale == "correlation" else np.ones(3)
            return np.linalg.eigvalsh(s / np.outer(d, d))[j]
        np.testing.assert_allclose(eigenvalue_gradient(cov, j, scale=scale), statistic_gradient(f, cov),
                                   rtol=1e-5, atol=1e-7)


@pytest.mark.parametrize("scheme", ["stationary", "moving", "iid"])
def test_drawn_blocks_remakes_the_kept_draws_bit_for_bit(scheme):
    stats = GranuleStats.from_rows(_ar_rows(), ordered=scheme != "iid")
    key = (7, "d", "p", 2)
    kept = resample_covariances(stats, resamples=37, rng=window_rng(*key), scheme=scheme, seed=key,
                                keep_draws=True)
    plain = resample_covariances(stats, resamples=37, rng=window_rng(*key), scheme=scheme, seed=key)
    assert plain.draws is None
    idx, blk = drawn_blocks(plain)
    assert np.array_equal(idx, kept.draws) and np.array_equal(blk, kept.blocks)
    assert drawn_blocks(resample_covariances(stats, resamples=5, rng=np.random.default_rng(1))) is None


def _window(stats, opts, scale="correlation"):
    g = getattr(stats, "stats", stats)
    x_cov = g.window_moments()[2] / (g.rows - 1)
    d = np.sqrt(np.diag(x_cov))
    mat = x_cov / np.outer(d, d) if scale == "correlation" else x_cov
    return window_inference(stats, names=("a", "b", "c"), options=opts, seed_key=("d", "p", 0), scale=scale,
                            eps=0.05, ref=0, coranks=(), assumptions=("equal",), nobs=g.rows,
                            estimates={"eigenvalues": np.linalg.eigvalsh(mat)})


@pytest.mark.parametrize("scale", ["correlation", "as given"])
def test_ordered_rows_get_blockwise_studentised_eigenvalue_intervals(scale):
    stats = GranuleStats.from_rows(_ar_rows(), ordered=True)
    opts = ResamplingOptions(resamples=99, level=0.90, scheme="stationary", seed=4)
    got = _window(stats, opts, scale)
    assert [iv.method for iv in got.eigenvalues] == ["studentized"] * 3
    assert "Studentised" in got.rules["eigenvalues"] and "Goetze & Kuensch 1996" in got.rules["eigenvalues"]
    # by hand from the same stream
    res = draw_window(stats, options=opts, seed_key=("d", "p", 0))
    idx, blk = drawn_blocks(res)
    covs = res.covariances
    if scale == "correlation":
        dd = np.sqrt(np.diagonal(covs, axis1=1, axis2=2))
        covs = covs / (dd[:, :, None] * dd[:, None, :])
    lam = np.linalg.eigh(covs)[0]
    for j, iv in enumerate(got.eigenvalues):
        u = influence_values(stats, eigenvalue_gradient(res.estimate, j, scale=scale))
        want = studentized_interval(iv.estimate, lam[:, j], influence_sd(u, stats.counts, ordered=True),
                                    resample_influence_sd(u, stats.counts, idx, blk), level=0.90)
        assert iv.low == max(want.low, 0.0) and iv.high == want.high
        assert iv.low <= iv.estimate <= iv.high


def test_iid_rows_keep_basic_eigenvalue_intervals():
    stats = GranuleStats.from_rows(_ar_rows(rho=0.0), ordered=False)
    got = _window(stats, ResamplingOptions(resamples=99, level=0.90, scheme="iid", seed=4))
    assert [iv.method for iv in got.eigenvalues] == ["basic"] * 3
    assert got.rules["eigenvalues"].startswith("Basic bootstrap")


def test_same_intervals_whether_or_not_the_task_drew_the_window_first():
    stats = GranuleStats.from_rows(_ar_rows(), ordered=True)
    opts = ResamplingOptions(resamples=99, level=0.90, scheme="stationary", seed=4)
    fresh = _window(stats, opts)
    pre = drawn_granules(stats, draw_window(stats, options=opts, seed_key=("d", "p", 0)), "correlation")
    assert pre.drawn.draws is None
    again = _window(pre, opts)
    assert fresh.eigenvalues == again.eigenvalues
