"""The studentised eigenvalue intervals stay stable: against hand computations, near-exact relations
and last-bit changes of the input (the way two BLAS kernels differ).

Invented, seeded data only. Hand computations follow the published formulas: the bootstrap-t interval
``[t - se q_(1-a), t - se q_a]`` with ``q`` quantiles of ``(theta*_b - t) / se*_b`` (Hall 1988; Davison
& Hinkley 1997, eq. 5.7), quantiles by linear interpolation between order statistics (Hyndman & Fan
1996, definition 7, numpy's default); the blockwise standard error of a resample, the root of the sum
of its squared centred block sums over its rows (Goetze & Kuensch 1996).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from relspan.analysis.inference import (SE_RESOLUTION, ResamplingOptions, draw_window,
                                        eigenvalue_intervals, window_inference)
from relspan.analysis.resample import (GranuleStats, blocks_per_resample, drawn_blocks, resample_influence_sd,
                                       studentized_interval)


def _quantile7(x, p):
    """Hyndman & Fan (1996) definition 7, written out: h = (n - 1) p, interpolate order statistics."""
    s = sorted(x)
    h = (len(s) - 1) * p
    lo = math.floor(h)
    return s[lo] + (h - lo) * (s[min(lo + 1, len(s) - 1)] - s[lo])


def test_studentized_interval_against_a_hand_computation():
    t, se = 2.0, 0.5
    draws = [2.3, 1.6, 2.1, 2.9, 1.8, 2.05, 2.6, 1.2, 2.2, 1.9, 2.4]
    sds = [0.4, 0.6, 0.5, 0.7, 0.45, 0.5, 0.55, 0.8, 0.5, 0.3, 0.6]
    z = [(d - t) / s for d, s in zip(draws, sds)]
    want_low = t - se * _quantile7(z, 0.95)
    want_high = t - se * _quantile7(z, 0.05)
    got = studentized_interval(t, draws, se, sds, level=0.90)
    assert got.method == "studentized" and got.resamples == 11
    assert got.low == pytest.approx(want_low, rel=1e-12) and got.high == pytest.approx(want_high, rel=1e-12)
    # on the log scale: z = (log d - log t) / (s / d), scale se / t, ends t exp(-(se/t) q)
    zl = [(math.log(d) - math.log(t)) / (s / d) for d, s in zip(draws, sds)]
    got_log = studentized_interval(t, draws, se, sds, level=0.90, log=True)
    assert got_log.low == pytest.approx(t * math.exp(-(se / t) * _quantile7(zl, 0.95)), rel=1e-12)
    assert got_log.high == pytest.approx(t * math.exp(-(se / t) * _quantile7(zl, 0.05)), rel=1e-12)


def test_standard_errors_at_or_below_the_resolution_are_left_out():
    t, se = 2.0, 0.5
    draws = np.array([2.3, 1.6, 2.1, 2.9, 1.8, 2.05, 2.6, 1.2, 2.2, 1.9, 2.4])
    sds = np.array([0.4, 0.6, 0.5, 0.7, 0.45, 0.5, 0.55, 0.8, 0.5, 0.3, 0.6])
    noisy = sds.copy()
    noisy[[0, 3]] = 1e-17                       # rounding in place of a standard error
    got = studentized_interval(t, draws, se, noisy, level=0.90, resolution=1e-8)
    keep = np.ones(11, dtype=bool)
    keep[[0, 3]] = False
    want = studentized_interval(t, draws[keep], se, sds[keep], level=0.90)
    assert got.resamples == 9 and (got.low, got.high) == (want.low, want.high)
    # the window's own standard error unresolved: no interval (the caller falls back)
    none = studentized_interval(t, draws, 1e-12, sds, level=0.90, resolution=1e-8)
    assert math.isnan(none.low) and math.isnan(none.high)


def test_resample_standard_error_by_hand_and_zero_for_a_single_block():
    u = np.array([0.5, -1.0, 2.0, 0.25, -0.75, 1.5])
    counts = np.array([1.0, 2.0, 1.0, 1.0, 3.0, 1.0])
    idx = np.array([[0, 1, 2, 4, 5, 0],      # blocks 0,0,0,1,1,2
                    [3, 4, 5, 0, 1, 2]])     # one block: a rotation of the window
    blk = np.array([[0, 0, 0, 1, 1, 2],
                    [0, 0, 0, 0, 0, 0]])
    got = resample_influence_sd(u, counts, idx, blk)
    # by hand, resample 0: centre u at the resample's mean per row, sum within blocks
    uu, cc = u[idx[0]], counts[idx[0]]
    mean = uu.sum() / cc.sum()
    e = uu - cc * mean
    sums = [e[0] + e[1] + e[2], e[3] + e[4], e[5]]
    assert got[0] == pytest.approx(math.sqrt(sum(s * s for s in sums)) / cc.sum(), rel=1e-12)
    assert got[1] == 0.0                        # exactly, not rounding
    assert blocks_per_resample(blk).tolist() == [3, 1]


def _ar_rows(rng, t, rho, load, noise):
    n = load.shape[0]
    z = np.zeros((t, load.shape[1]))
    e = rng.normal(size=z.shape)
    w = np.zeros((t, n))
    f = rng.normal(size=(t, n))
    for i in range(1, t):
        z[i] = rho * z[i - 1] + e[i]
        w[i] = rho * w[i - 1] + f[i]
    return z @ load.T + noise * w


def _eig_intervals(x, *, block_length=None, resamples=199, scale="as given"):
    stats = GranuleStats.from_rows(x, ordered=True)
    opts = ResamplingOptions(resamples=resamples, level=0.90, scheme="stationary", seed=3,
                             block_length=block_length)
    cov = np.cov(x.T)
    if scale == "correlation":
        d = np.sqrt(np.diag(cov))
        cov = cov / np.outer(d, d)
    got = window_inference(stats, names=tuple("abcd"[:x.shape[1]]), options=opts, seed_key=("d", "p", 0),
                           scale=scale, eps=0.05, ref=0, coranks=(), assumptions=("equal",), nobs=x.shape[0],
                           estimates={"eigenvalues": np.linalg.eigvalsh(cov)})
    return got


def test_exact_relation_does_not_blow_up():
    # x3 = x1 + x2 exactly (up to rounding): the smallest eigenvalue and every standard error of it are
    # rounding. Its interval must stay at rounding size (the basic interval), not a studentised ratio of
    # rounding to rounding.
    rng = np.random.default_rng(8)
    x = _ar_rows(rng, 600, 0.5, np.array([[1.0, 0.2], [0.3, 1.0]]), 0.3)
    x = np.column_stack([x, x[:, 0] + x[:, 1]])
    got = _eig_intervals(x)
    top = got.eigenvalues[-1].estimate
    small = got.eigenvalues[0]
    assert small.method == "basic"
    assert 0.0 <= small.low <= small.high <= 1e-12 * top
    assert [iv.method for iv in got.eigenvalues[1:]] == ["studentized"] * 2
    assert "studentised" in got.rules["eigenvalues"].lower()


def test_near_exact_relation_stays_finite_and_close_to_the_basic_interval():
    # x3 = x1 + x2 + 1e-6 noise: a resolved but tiny eigenvalue (about 1e-12 of the largest): the
    # studentised interval is used and stays on the eigenvalue's own scale.
    rng = np.random.default_rng(9)
    x = _ar_rows(rng, 600, 0.5, np.array([[1.0, 0.2], [0.3, 1.0]]), 0.3)
    x = np.column_stack([x, x[:, 0] + x[:, 1] + 1e-6 * rng.normal(size=600)])
    got = _eig_intervals(x)
    small = got.eigenvalues[0]
    assert np.isfinite(small.low) and np.isfinite(small.high)
    assert small.low <= small.estimate <= small.high <= 3 * small.estimate


def test_few_blocks_single_block_resamples_are_left_out():
    # 144 rows with mean blocks of 36: 4 block lengths in the window, so about 2% of stationary resamples
    # are a single block (a rotation of the window); they are left out of every eigenvalue's interval.
    rng = np.random.default_rng(10)
    x = _ar_rows(rng, 144, 0.9, np.array([[1.0, 0.2], [0.3, 1.0], [0.8, 0.7]]), 0.1)
    stats = GranuleStats.from_rows(x, ordered=True)
    opts = ResamplingOptions(resamples=499, level=0.90, scheme="stationary", seed=3, block_length=36.0)
    res = draw_window(stats, options=opts, seed_key=("d", "p", 0))
    single = int(np.sum(blocks_per_resample(drawn_blocks(res)[1]) == 1))
    assert single > 0
    got = _eig_intervals(x, block_length=36.0, resamples=499)
    assert [iv.method for iv in got.eigenvalues] == ["studentized"] * 3
    assert all(iv.resamples == 499 - single for iv in got.eigenvalues)
    assert all(iv.low <= iv.estimate <= iv.high < np.inf for iv in got.eigenvalues)


@pytest.mark.parametrize("scale", ["as given", "correlation"])
def test_intervals_do_not_follow_last_bit_changes_of_the_data(scale):
    # Two BLAS kernels differ in the last bits of the co-moments; mimic that by changing every row by a
    # relative 1e-15 and require the eigenvalue intervals to agree to 1e-9 relative (published: at most
    # 9 significant digits). Both a window with short blocks (T = 400) and one with long blocks (T = 144,
    # 4 block lengths, where single-block resamples once made the ends arbitrary).
    for t, rho, blen in ((400, 0.5, None), (144, 0.9, 36.0)):
        rng = np.random.default_rng(t)
        x = _ar_rows(rng, t, rho, np.array([[1.0, 0.2], [0.3, 1.0], [0.8, 0.7], [0.1, 0.9]]), 0.1)
        y = x * (1.0 + 1e-15 * rng.choice([-1.0, 1.0], size=x.shape))
        a = _eig_intervals(x, block_length=blen, scale=scale).eigenvalues
        b = _eig_intervals(y, block_length=blen, scale=scale).eigenvalues
        assert [iv.method for iv in a] == [iv.method for iv in b]
        for p, q in zip(a, b):
            assert q.low == pytest.approx(p.low, rel=1e-9, abs=1e-12 * a[-1].estimate)
            assert q.high == pytest.approx(p.high, rel=1e-9, abs=1e-12 * a[-1].estimate)


def test_resolution_is_relative_to_the_largest_eigenvalue():
    # the same data in other units: the same intervals, scaled (the floor moves with the data)
    rng = np.random.default_rng(11)
    x = _ar_rows(rng, 400, 0.5, np.array([[1.0, 0.2], [0.3, 1.0], [0.8, 0.7]]), 0.2)
    stats, stats_k = GranuleStats.from_rows(x, ordered=True), GranuleStats.from_rows(1e3 * x, ordered=True)
    opts = ResamplingOptions(resamples=99, level=0.90, scheme="stationary", seed=3)
    out = []
    for st in (stats, stats_k):
        res = draw_window(st, options=opts, seed_key=("d", "p", 0))
        lam = np.linalg.eigvalsh(res.covariances)
        out.append(eigenvalue_intervals(st, res, np.linalg.eigvalsh(res.estimate), lam, scale="as given",
                                        level=0.90)[0])
    for p, q in zip(*out):
        assert q.method == p.method == "studentized"
        assert q.low == pytest.approx(1e6 * p.low, rel=1e-8) and q.high == pytest.approx(1e6 * p.high, rel=1e-8)
    assert SE_RESOLUTION < 1e-6


def _whitened(x):
    """Rows whose sample covariance is the identity up to rounding: every eigenvalue tied."""
    y = x - x.mean(axis=0)
    chol = np.linalg.cholesky(np.cov(y.T))
    return np.linalg.solve(chol, y.T).T


def test_tied_eigenvalues_get_the_basic_interval_and_do_not_follow_last_bits():
    # a whitened sample: the eigenvalues of its covariance agree to rounding, so no eigenvalue is
    # simple and its eigenvector (the gradient of the studentised standard error) is arbitrary within
    # the tied space; a relative 1e-15 change of the rows (what two BLAS kernels do) must not move the
    # intervals beyond rounding
    rng = np.random.default_rng(21)
    x = _whitened(_ar_rows(rng, 400, 0.5, np.array([[1.0, 0.2], [0.3, 1.0], [0.5, -0.4]]), 0.5))
    lam = np.linalg.eigvalsh(np.cov(x.T))
    assert lam[-1] - lam[0] <= SE_RESOLUTION * lam[-1]
    a = _eig_intervals(x)
    b = _eig_intervals(x * (1.0 + 1e-15 * rng.standard_normal(x.shape)))
    assert [iv.method for iv in a.eigenvalues] == ["basic"] * 3
    for u, v in zip(a.eigenvalues, b.eigenvalues):
        assert u.low == pytest.approx(v.low, rel=1e-9, abs=1e-12)
        assert u.high == pytest.approx(v.high, rel=1e-9, abs=1e-12)
    assert "tied" in a.rules["eigenvalues"]
