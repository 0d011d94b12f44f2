"""benchmarks/batched.py: window statistics vectorised over the window axis (the benchmark's reference)."""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import pytest

sys.path.insert(0, str(Path(__file__).resolve().parents[2] / "benchmarks"))

from batched import (  # noqa: E402
    batched_correlations, batched_covariances, batched_eigh, batched_elementary_regressions,
    merge_window_runs, stacked_block_moments)
from moment_oracles import batched_window_moments  # noqa: E402

from relspan.analysis.moments import moments_of  # noqa: E402


def _series(t=2000, n=5, seed=0):
    """Rows with two exact relations plus noise, far from zero (tests the shift)."""
    rng = np.random.default_rng(seed)
    f = rng.standard_normal((t, n - 2))
    x = f @ rng.standard_normal((n - 2, n)) + 0.3 * rng.standard_normal((t, n))
    return x + 1e3 * np.arange(1, n + 1)


def _rolling(x, block, width_blocks, step_blocks):
    counts, means, comoments = stacked_block_moments(x, block)
    k = counts.size
    starts = np.arange(0, k - width_blocks + 1, step_blocks)
    lengths = np.full(starts.size, width_blocks)
    c, m, cm = batched_window_moments(counts, means, comoments, starts, lengths)
    rows = [(s * block, (s + width_blocks) * block) for s in starts]
    return c, m, cm, rows


class TestStackedBlockMoments:
    def test_equals_moments_of_on_every_block_including_a_short_last_one(self):
        x = _series(t=1037)
        counts, means, comoments = stacked_block_moments(x, 50)
        assert counts.tolist() == [50] * 20 + [37]
        for i in range(21):
            ref = moments_of(x[50 * i:50 * (i + 1)])
            assert counts[i] == ref.count
            np.testing.assert_allclose(means[i], ref.mean, rtol=1e-14)
            np.testing.assert_allclose(comoments[i], ref.comoment, rtol=1e-12, atol=1e-9)

    def test_rejects_a_block_size_below_one(self):
        with pytest.raises(ValueError, match="rows_per_block"):
            stacked_block_moments(np.zeros((4, 2)), 0)


class TestMergeWindowRuns:
    def test_is_bit_for_bit_batched_window_moments_for_rolling_windows(self):
        counts, means, comoments = stacked_block_moments(_series(), 50)
        starts = np.arange(0, counts.size - 4)
        lengths = np.full(starts.size, 5)
        ours = merge_window_runs(counts, means, comoments, starts, lengths)
        ref = batched_window_moments(counts, means, comoments, starts, lengths)
        for a, b in zip(ours, ref):
            assert np.array_equal(a, b)

    def test_is_bit_for_bit_batched_window_moments_for_mixed_lengths(self):
        counts, means, comoments = stacked_block_moments(_series(), 50)
        starts = np.array([0, 3, 3, 10, 0, 39])
        lengths = np.array([40, 1, 7, 2, 5, 1])  # expanding-, period- and one-block windows
        ours = merge_window_runs(counts, means, comoments, starts, lengths)
        ref = batched_window_moments(counts, means, comoments, starts, lengths)
        for a, b in zip(ours, ref):
            assert np.array_equal(a, b)

    def test_equals_moments_of_the_raw_rows(self):
        x = _series()
        counts, means, comoments = stacked_block_moments(x, 50)
        c, m, cm = merge_window_runs(counts, means, comoments, np.array([2]), np.array([9]))
        ref = moments_of(x[100:550])
        assert c[0] == 450
        np.testing.assert_allclose(m[0], ref.mean, rtol=1e-14)
        np.testing.assert_allclose(cm[0], ref.comoment, rtol=1e-11)

    def test_skips_empty_blocks(self):
        counts = np.array([3, 0, 2])
        means = np.array([[1.0], [0.0], [4.0]])
        comoments = np.array([[[2.0]], [[0.0]], [[0.5]]])
        c, m, cm = merge_window_runs(counts, means, comoments, np.array([0]), np.array([3]))
        assert c[0] == 5 and m[0, 0] == pytest.approx(2.2)
        assert cm[0, 0, 0] == pytest.approx(2.0 + 0.5 + 9.0 * 3 * 2 / 5)  # Chan et al. update

    def test_rejects_windows_outside_the_blocks(self):
        with pytest.raises(ValueError, match="run of existing blocks"):
            merge_window_runs(np.ones(3), np.zeros((3, 2)), np.zeros((3, 2, 2)),
                              np.array([2]), np.array([2]))


class TestBatchedCovariances:
    def test_rolling_windows_equal_np_cov_of_the_raw_rows(self):
        x = _series()
        c, _, cm, rows = _rolling(x, 50, 5, 1)
        cov = batched_covariances(c, cm)
        for i, (a, b) in enumerate(rows):
            np.testing.assert_allclose(cov[i], np.cov(x[a:b], rowvar=False), rtol=1e-10, atol=1e-10)

    def test_a_window_too_short_for_ddof_is_named(self):
        with pytest.raises(ValueError, match="window 1 has 1 rows"):
            batched_covariances(np.array([5, 1]), np.zeros((2, 3, 3)))

    def test_correlations_have_unit_diagonal_and_nan_for_constant_columns(self):
        cov = np.array([[[4.0, 2.0], [2.0, 9.0]], [[1.0, 0.0], [0.0, 0.0]]])
        r = batched_correlations(cov)
        np.testing.assert_allclose(r[0], [[1.0, 1 / 3], [1 / 3, 1.0]])
        assert np.isnan(r[1, 1, 1]) and r[1, 0, 0] == 1.0


class TestBatchedElementaryRegressions:
    def test_equals_a_per_window_cov_and_inverse_loop(self):
        x = _series()
        c, m, cm, rows = _rolling(x, 50, 5, 1)
        res = batched_elementary_regressions(c, cm, means=m)
        assert not res.singular.any()
        for i, (a, b) in enumerate(rows):
            p = np.linalg.inv(np.cov(x[a:b], rowvar=False))
            rel = p / np.diag(p)[:, None]
            np.testing.assert_allclose(res.precision[i], p, rtol=1e-10, atol=1e-12)
            np.testing.assert_allclose(res.relations[i], rel, rtol=1e-10, atol=1e-10)
            np.testing.assert_allclose(res.residual_variance[i], 1 / np.diag(p), rtol=1e-10)

    def test_many_variables_use_the_lapack_inverse_and_still_match_the_loop(self):
        x = _series(t=3000, n=14, seed=8)  # n above the small-n recurrences
        c, m, cm, rows = _rolling(x, 500, 2, 1)
        res = batched_elementary_regressions(c, cm)
        for i, (a, b) in enumerate(rows):
            p = np.linalg.inv(np.cov(x[a:b], rowvar=False))
            np.testing.assert_allclose(res.relations[i], p / np.diag(p)[:, None], rtol=1e-9,
                                       atol=1e-10)

    def test_results_do_not_depend_on_how_windows_are_split_into_pieces(self):
        x = _series(t=60_000, n=3, seed=6)  # more windows than one cache-sized piece
        c, m, cm, rows = _rolling(x, 10, 5, 1)
        whole = batched_elementary_regressions(c, cm, means=m)
        part = batched_elementary_regressions(c[1000:1010], cm[1000:1010], means=m[1000:1010])
        assert c.size > 4000
        assert np.array_equal(whole.relations[1000:1010], part.relations)
        assert np.array_equal(whole.intercepts[1000:1010], part.intercepts)

    def test_matches_statsmodels_ols_on_a_few_windows(self):
        sm = pytest.importorskip("statsmodels.api")  # reference library: statsmodels OLS
        x = _series(seed=3)
        c, m, cm, rows = _rolling(x, 50, 5, 7)
        res = batched_elementary_regressions(c, cm, means=m)
        n = x.shape[1]
        for i in (0, len(rows) // 2, len(rows) - 1):
            a, b = rows[i]
            for j in range(n):
                others = [k for k in range(n) if k != j]
                fit = sm.OLS(x[a:b, j], sm.add_constant(x[a:b, others])).fit()
                np.testing.assert_allclose(res.coefficients[i, j, others], fit.params[1:],
                                           rtol=1e-8, atol=1e-10)
                np.testing.assert_allclose(res.intercepts[i, j], fit.params[0], rtol=1e-8)
                # ssr = (T - 1) / P[j, j] with the ddof=1 covariance
                np.testing.assert_allclose(res.residual_variance[i, j] * (b - a - 1), fit.ssr,
                                           rtol=1e-9)
                np.testing.assert_allclose(res.r_squared[i, j], fit.rsquared, rtol=1e-9)
                assert res.coefficients[i, j, j] == 0.0

    def test_longley_regression_matches_statsmodels_and_nist_certified_values(self):
        longley = pytest.importorskip("statsmodels.datasets.longley")  # dataset shipped by statsmodels
        sm = pytest.importorskip("statsmodels.api")
        data = longley.load_pandas().data.to_numpy(dtype=float)  # TOTEMP first, then 6 regressors
        m = moments_of(data)
        res = batched_elementary_regressions(np.array([m.count]), m.comoment[None],
                                             means=m.mean[None])
        fit = sm.OLS(data[:, 0], sm.add_constant(data[:, 1:])).fit()  # reference: statsmodels OLS
        np.testing.assert_allclose(res.coefficients[0, 0, 1:], fit.params[1:], rtol=1e-7)
        # NIST StRD "Longley" certified regression coefficients (values recalled from memory):
        # b1..b6 for GNPDEFL, GNP, UNEMP, ARMED, POP, YEAR; b0 = -3482258.63459582
        certified = [15.0618722713733, -0.358191792925910e-01, -2.02022980381683,
                     -1.03322686717359, -0.511041056535807e-01, 1829.15146461355]
        np.testing.assert_allclose(res.coefficients[0, 0, 1:], certified, rtol=1e-7)
        np.testing.assert_allclose(res.intercepts[0, 0], -3482258.63459582, rtol=1e-7)

    def test_exactly_collinear_window_is_flagged_and_others_are_unaffected(self):
        x = _series(t=500, n=4, seed=5)
        x[250:500, 3] = 2.0 * x[250:500, 0] - x[250:500, 1]  # exact relation in window 1 only
        c, m, cm, rows = _rolling(x, 250, 1, 1)
        res = batched_elementary_regressions(c, cm)
        assert res.singular.tolist() == [False, True]
        assert np.isinf(res.condition[1]) and np.isnan(res.coefficients[1]).all()
        p = np.linalg.inv(np.cov(x[:250], rowvar=False))
        np.testing.assert_allclose(res.precision[0], p, rtol=1e-10)

    def test_constant_column_makes_the_window_singular(self):
        x = _series(t=100, n=3)
        x[:, 2] = 7.0
        m = moments_of(x)
        res = batched_elementary_regressions(np.array([m.count]), m.comoment[None])
        assert res.singular.tolist() == [True]

    def test_condition_number_is_the_1_norm_one_of_the_correlation_matrix(self):
        x = _series(t=500, n=3, seed=2)
        m = moments_of(x)
        res = batched_elementary_regressions(np.array([m.count]), m.comoment[None])
        r = m.correlation()
        np.testing.assert_allclose(res.condition[0], np.linalg.cond(r, 1), rtol=1e-8)
        assert np.linalg.cond(r) <= res.condition[0] <= 3 * np.linalg.cond(r)

    def test_nearly_collinear_but_regular_window_is_not_flagged(self):
        x = _series(t=250, n=3, seed=4)
        x[:, 2] = x[:, 0] + x[:, 1] + 1e-6 * np.random.default_rng(1).standard_normal(250)
        m = moments_of(x)
        res = batched_elementary_regressions(np.array([m.count]), m.comoment[None])
        assert not res.singular[0] and res.condition[0] > 1e9
        p = np.linalg.inv(m.covariance())
        np.testing.assert_allclose(res.relations[0], p / np.diag(p)[:, None], rtol=1e-5)

    def test_means_of_the_wrong_shape_are_refused(self):
        m = moments_of(_series(t=100, n=3))
        with pytest.raises(ValueError, match="means must have shape"):
            batched_elementary_regressions(np.array([m.count]), m.comoment[None], means=m.mean)


class TestBatchedEigh:
    def test_equals_per_window_eigh_up_to_a_fixed_sign(self):
        x = _series()
        c, _, cm, _ = _rolling(x, 100, 4, 2)
        cov = batched_covariances(c, cm)
        spec = batched_eigh(cov)
        for i in range(cov.shape[0]):
            vals, vecs = np.linalg.eigh(cov[i])
            np.testing.assert_allclose(spec.eigenvalues[i], vals, rtol=1e-10, atol=1e-10)
            for k in range(vals.size):
                v = spec.eigenvectors[i, :, k]
                np.testing.assert_allclose(np.abs(v @ vecs[:, k]), 1.0, rtol=1e-8)
                assert v[np.argmax(np.abs(v))] > 0

    def test_relation_basis_spans_the_smallest_eigenvectors(self):
        x = _series(t=1000, n=5, seed=9)
        m = moments_of(x)
        s = m.covariance()
        spec = batched_eigh(s[None])
        basis = spec.relation_basis(2)[0]  # (2, n): equal-noise (total least squares) relations
        assert basis.shape == (2, 5)
        np.testing.assert_allclose(basis @ s, spec.eigenvalues[0, :2, None] * basis, atol=1e-9)
        np.testing.assert_allclose(basis @ basis.T, np.eye(2), atol=1e-12)
        with pytest.raises(ValueError, match="q must be between 1 and 5"):
            spec.relation_basis(6)
