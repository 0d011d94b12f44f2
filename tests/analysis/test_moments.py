"""Tests of relspan.analysis.moments (mergeable window statistics)."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays

from moment_oracles import MomentTree, batched_window_moments

from relspan.analysis.moments import empty, merge, merge_all, moments_of


def _rows(seed: int, t: int = 60, n: int = 3) -> np.ndarray:
    rng = np.random.default_rng(seed)
    return rng.normal(size=(t, n)) @ rng.normal(size=(n, n)) + 50.0


def _close(a, b, rtol=1e-11, atol=1e-9):
    assert a.count == b.count
    np.testing.assert_allclose(a.mean, b.mean, rtol=rtol, atol=atol)
    np.testing.assert_allclose(a.comoment, b.comoment, rtol=rtol, atol=atol)


class TestMomentsOf:
    def test_mean_and_covariance_match_numpy(self):
        # reference: numpy.mean and numpy.cov (two-pass)
        x = _rows(0)
        m = moments_of(x)
        np.testing.assert_allclose(m.mean, x.mean(axis=0), rtol=1e-13)
        np.testing.assert_allclose(m.covariance(), np.cov(x.T), rtol=1e-12)
        np.testing.assert_allclose(m.correlation(), np.corrcoef(x.T), rtol=1e-12)

    def test_data_far_from_zero_keep_their_covariance(self):
        # y on a 1/1024 grid is exact in binary, and so is 1e6 + y: np.cov(y) is the exact reference
        rng = np.random.default_rng(1)
        y = np.round(rng.normal(size=(500, 2)) * 1024) / 1024
        m = moments_of(y + 1e6)
        np.testing.assert_allclose(m.covariance(), np.cov(y.T), rtol=1e-12)

    def test_too_few_rows_for_covariance_raise(self):
        with pytest.raises(ValueError, match="more than 1 rows"):
            moments_of(np.ones((1, 2))).covariance()

    def test_constant_column_has_nan_correlation(self):
        x = np.column_stack([np.arange(5.0), np.full(5, 3.0)])
        r = moments_of(x).correlation()
        assert r[0, 0] == 1.0 and np.isnan(r[1, 1]) and np.isnan(r[0, 1])


class TestMerge:
    @pytest.mark.parametrize("cut", [1, 7, 30, 59])
    def test_merge_of_two_blocks_equals_direct_moments(self, cut):
        x = _rows(2)
        _close(merge(moments_of(x[:cut]), moments_of(x[cut:])), moments_of(x))

    def test_empty_block_is_identity(self):
        m = moments_of(_rows(3))
        assert merge(empty(3), m) is m and merge(m, empty(3)) is m

    @settings(max_examples=60, deadline=None)
    @given(arrays(np.float64, st.tuples(st.integers(1, 12), st.just(2)), elements=st.floats(-1e3, 1e3)),
           arrays(np.float64, st.tuples(st.integers(1, 12), st.just(2)), elements=st.floats(-1e3, 1e3)),
           arrays(np.float64, st.tuples(st.integers(1, 12), st.just(2)), elements=st.floats(-1e3, 1e3)))
    def test_merge_is_associative(self, a, b, c):
        ma, mb, mc = moments_of(a), moments_of(b), moments_of(c)
        left = merge(merge(ma, mb), mc)
        right = merge(ma, merge(mb, mc))
        scale = 1.0 + float(np.max(np.abs(np.vstack([a, b, c]))))
        _close(left, right, rtol=1e-9, atol=1e-9 * scale**2)

    @settings(max_examples=40, deadline=None)
    @given(st.lists(st.integers(1, 9), min_size=1, max_size=8))
    def test_merge_all_equals_moments_of_concatenation(self, sizes):
        x = _rows(4, t=sum(sizes))
        cuts = np.cumsum([0] + sizes)
        blocks = [moments_of(x[cuts[i]:cuts[i + 1]]) for i in range(len(sizes))]
        _close(merge_all(blocks), moments_of(x))


class TestMomentTree:
    def test_every_range_query_equals_merge_all(self):
        x = _rows(5, t=70)
        blocks = [moments_of(x[i:i + 10]) for i in range(0, 70, 10)]
        tree = MomentTree(blocks)
        for lo in range(7):
            for hi in range(lo + 1, 8):
                _close(tree.query(lo, hi), moments_of(x[10 * lo:10 * hi]))

    def test_out_of_range_query_raises(self):
        tree = MomentTree([moments_of(_rows(6, t=5))])
        with pytest.raises(IndexError, match="outside"):
            tree.query(0, 2)


class TestBatchedWindowMoments:
    def test_each_window_equals_direct_moments(self):
        x = _rows(7, t=80)
        blocks = [moments_of(x[i:i + 8]) for i in range(0, 80, 8)]
        counts = np.array([b.count for b in blocks])
        means = np.stack([b.mean for b in blocks])
        comoments = np.stack([b.comoment for b in blocks])
        starts = np.array([0, 2, 4, 1])
        lengths = np.array([4, 4, 6, 1])
        c, m, cm = batched_window_moments(counts, means, comoments, starts, lengths)
        for i, (s, ln) in enumerate(zip(starts, lengths)):
            ref = moments_of(x[8 * s:8 * (s + ln)])
            assert c[i] == ref.count
            np.testing.assert_allclose(m[i], ref.mean, rtol=1e-12)
            np.testing.assert_allclose(cm[i], ref.comoment, rtol=1e-10)


class TestDoubleDouble:
    def test_merged_blocks_carry_the_exact_comoment_far_beyond_float64(self):
        # reference: exact rational arithmetic (fractions.Fraction) on the same float rows
        from fractions import Fraction

        x = _rows(7, t=40) * [1.0, 1e4, 1e-3] + [0.0, 1e7, 5.0]
        blocks = [moments_of(x[a:b]) for a, b in [(0, 1), (1, 8), (8, 10), (10, 33), (33, 40)]]
        m = MomentTree(blocks).query(0, len(blocks))
        ex = [[Fraction(v) for v in r] for r in x]
        mean = [sum(r[k] for r in ex) / len(ex) for k in range(3)]
        for i in range(3):
            assert abs(Fraction(m.mean[i]) + Fraction(m.mean_lo[i]) - mean[i]) <= 1e-28 * abs(mean[i])
            for k in range(3):
                c = sum((r[i] - mean[i]) * (r[k] - mean[k]) for r in ex)
                scale = float(np.sqrt(m.comoment[i, i] * m.comoment[k, k]))
                err = abs(Fraction(m.comoment[i, k]) + Fraction(m.comoment_lo[i, k]) - c)
                assert float(err) <= 1e-20 * scale, (i, k)
