"""Resampling from stored granule statistics (relspan.analysis.resample, relspan.data.blocks granules)."""

import numpy as np
import pytest
from scipy.signal import lfilter

from relspan.analysis.moments import merge_all
from relspan.analysis.resample import (GranuleStats, draw_blocks, draw_granules, influence_sd, influence_values,
                                       merge_weighted, politis_white_block_length, resample_covariances,
                                       resample_influence_sd, scale_stack, stack_covariances, statistic_gradient,
                                       studentized_interval, window_rng, window_seed)
from relspan.data.blocks import granulate, granule_rows_for
from relspan.errors import OptionsError


def _rows(seed=0, t=500, n=3):
    return np.random.default_rng(seed).normal(size=(t, n)) * [1.0, 20.0, 0.1] + [1e6, -3.0, 5.0]


class TestGranules:
    def test_granules_merge_back_to_the_window_moments(self):
        y = _rows()
        for cap in (10_000, 64, 7):
            g = granulate(y, cap=cap, cuts=[100, 333])
            m = merge_all([g.table.moments(i) for i in range(len(g))])
            assert m.count == y.shape[0]
            # np.cov subtracts a mean near 1e6 from column 0: compare to a precision that reference keeps
            np.testing.assert_allclose(m.comoment, np.cov(y.T) * (y.shape[0] - 1), rtol=1e-9, atol=1e-6)

    def test_granule_size_doubles_until_the_count_fits_the_cap(self):
        g = granulate(_rows(t=1000), cap=100)
        assert g.rows_per_granule == granule_rows_for(1000, 100) == 16
        assert len(g) <= 100 + 2
        assert "16" in g.note

    def test_windows_are_runs_of_whole_granules(self):
        g = granulate(_rows(), cap=40, cuts=[100, 333])
        lo, hi = g.span(100, 332)
        assert g.table.counts[lo:hi].sum() == 233
        with pytest.raises(ValueError, match="granule boundaries"):
            g.span(101, 332)

    def test_granules_do_not_depend_on_how_rows_arrive(self):
        from relspan.data.blocks import GranuleBuilder
        y = _rows(t=700)
        keys = lambda p, t: (p // 50)[:, None]  # noqa: E731
        out = []
        for chunk in (700, 33, 128):
            b = GranuleBuilder(3, keys, timed=False, cap=40)
            for s in range(0, 700, chunk):
                pos = np.arange(s, min(s + chunk, 700))
                b.push(y[pos] - y[0], pos, pos + 1, None)
            out.append(b.finish(y[0]).table)
        for t in out[1:]:
            assert np.array_equal(t.comoments, out[0].comoments)
            assert np.array_equal(t.first_pos, out[0].first_pos)


class TestMerge:
    def test_weighted_merge_equals_the_covariance_of_the_drawn_rows(self):
        y = _rows(t=200)
        st = GranuleStats.from_rows(y)
        for scheme in ("iid", "moving", "stationary"):
            idx = draw_granules(st.k, scheme=scheme, resamples=4, rng=np.random.default_rng(1), block_length=6)
            covs, n = stack_covariances(st, idx)
            for b in range(4):
                np.testing.assert_allclose(covs[b], np.cov(y[idx[b]].T), rtol=1e-9, atol=1e-12)
                assert n[b] == 200

    def test_weighted_merge_of_granules_of_many_rows(self):
        y = _rows(t=300)
        g = granulate(y, cap=20)
        st = GranuleStats.from_table(g, 0, len(g))
        w = np.zeros((1, st.k))
        w[0, [0, 0, 3, 5]] = [2, 2, 1, 1]
        w[0, 0] = 2
        c, _, cm = merge_weighted(st.counts, st.means, st.comoments, w)
        starts = np.concatenate([[0], np.cumsum(g.table.counts)])
        rows = np.concatenate([y[starts[i]:starts[i + 1]] for i in (0, 0, 3, 5)])
        assert c[0] == rows.shape[0]
        np.testing.assert_allclose(cm[0] / (c[0] - 1), np.cov(rows.T), rtol=1e-9)


class TestSeeds:
    def test_window_streams_depend_only_on_seed_dataset_plan_and_window(self):
        a = window_rng(7, "ds", "plan", 3).integers(0, 1 << 30, 5)
        window_rng(7, "ds", "plan", 2).integers(0, 1 << 30, 5)  # another window run first changes nothing
        b = window_rng(7, "ds", "plan", 3).integers(0, 1 << 30, 5)
        c = window_rng(7, "ds", "plan2", 3).integers(0, 1 << 30, 5)
        assert np.array_equal(a, b) and not np.array_equal(a, c)

    def test_negative_seed_is_refused_with_a_fix(self):
        with pytest.raises(OptionsError, match="whole number >= 0"):
            window_seed(-1, "d", "p", 0)

    def test_same_stream_gives_identical_resamples(self):
        st = GranuleStats.from_rows(_rows(t=120))
        r1 = resample_covariances(st, resamples=50, rng=window_rng(1, "d", "p", 0), seed=(1, "d", "p", 0))
        r2 = resample_covariances(st, resamples=50, rng=window_rng(1, "d", "p", 0))
        assert np.array_equal(r1.covariances, r2.covariances)
        assert r1.to_dict()["seed"] == [1, "d", "p", 0]


class TestBlockLength:
    def test_independent_rows_get_short_blocks_and_persistent_rows_long_ones(self):
        rng = np.random.default_rng(3)
        e = rng.normal(size=(800, 2))
        x = np.empty_like(e)
        x[0] = e[0]
        for t in range(1, 800):
            x[t] = 0.8 * x[t - 1] + e[t]
        assert politis_white_block_length(e).value < 3
        assert politis_white_block_length(x).value > 8

    def test_block_length_for_an_ar1_is_near_its_closed_form(self):
        # Politis & White (2004), section 3: for AR(1) with coefficient r, G / g0 = 2 r / (1 - r^2), so the
        # stationary-bootstrap length is (2 (G/g0)^2 / 2)^(1/3) N^(1/3) (handbook formula, worked by hand)
        rng = np.random.default_rng(11)
        r, n = 0.5, 20_000
        e = rng.normal(size=n)
        x = np.empty(n)
        x[0] = e[0]
        for t in range(1, n):
            x[t] = r * x[t - 1] + e[t]
        ratio = 2 * r / (1 - r**2)
        expected = (ratio**2) ** (1 / 3) * n ** (1 / 3)
        got = politis_white_block_length(x).value
        assert 0.7 * expected < got < 1.3 * expected


class TestResampleCovariances:
    def test_stack_shape_estimate_and_batched_eigh(self):
        y = _rows(t=150)
        r = resample_covariances(GranuleStats.from_rows(y), resamples=30, rng=np.random.default_rng(0))
        assert r.covariances.shape == (30, 3, 3)
        np.testing.assert_allclose(r.estimate, np.cov(y.T), rtol=1e-9)
        w, v = r.eigh("correlation")
        assert w.shape == (30, 3) and np.all(np.diff(w, axis=1) >= 0)
        np.testing.assert_allclose(np.diagonal(scale_stack(r.covariances, "correlation"), axis1=1, axis2=2), 1.0)

    def test_unordered_rows_use_the_iid_bootstrap(self):
        r = resample_covariances(GranuleStats.from_rows(_rows(t=80), ordered=False), resamples=5,
                                 rng=np.random.default_rng(0))
        assert r.scheme == "iid" and r.block_length == 1.0

    def test_iid_bootstrap_spread_matches_the_normal_theory_standard_error(self):
        # handbook formula (Anderson 1958, ch. 4): var(s_11) = 2 sigma_11^2 / (T - 1) for Gaussian rows
        y = np.random.default_rng(5).normal(size=(400, 2)) * [2.0, 1.0]
        r = resample_covariances(GranuleStats.from_rows(y, ordered=False), resamples=2000,
                                 rng=np.random.default_rng(6))
        se = r.covariances[:, 0, 0].std()
        expect = np.sqrt(2 * r.estimate[0, 0] ** 2 / 399)
        assert 0.85 * expect < se < 1.15 * expect

    def test_bad_resample_count_is_refused(self):
        with pytest.raises(OptionsError, match="resamples must be"):
            resample_covariances(GranuleStats.from_rows(_rows(t=20)), resamples=0, rng=np.random.default_rng(0))


class TestStudentized:
    """Blockwise studentised (bootstrap-t) intervals: the pieces, each against a hand computation."""

    def test_draw_blocks_gives_the_draws_of_draw_granules_and_their_blocks(self):
        for scheme, b in (("iid", 1.0), ("moving", 7.0), ("stationary", 6.5)):
            idx = draw_granules(200, scheme=scheme, resamples=30, rng=np.random.default_rng(4), block_length=b)
            idx2, block = draw_blocks(200, scheme=scheme, resamples=30, rng=np.random.default_rng(4),
                                      block_length=b)
            np.testing.assert_array_equal(idx, idx2)
            # inside a block the granules are consecutive (wrapping at the end for stationary blocks)
            same = block[:, 1:] == block[:, :-1]
            assert np.all(((idx2[:, 1:] - idx2[:, :-1]) % 200)[same] == 1)
            assert np.all(np.diff(block, axis=1) >= 0) and np.all(block[:, 0] == 0)
            if scheme == "moving":
                np.testing.assert_array_equal(block[0], np.arange(200) // 7)

    def test_influence_of_a_variance_is_the_textbook_one(self):
        # f(S) = S[0, 0]: influence of row t is (x_t - m)^2 - s^2 (divisor N); its standard error
        # sqrt(sum((x - m)^2 - s^2)^2) / N is the usual delta-method one (common practice)
        x = np.random.default_rng(1).normal(size=(300, 2))
        st = GranuleStats.from_rows(x, ordered=False)
        g = statistic_gradient(lambda s: s[0, 0], np.cov(x.T))
        np.testing.assert_allclose(g, [[1.0, 0.0], [0.0, 0.0]], atol=1e-8)
        u = influence_values(st, g)
        d2 = (x[:, 0] - x[:, 0].mean()) ** 2
        np.testing.assert_allclose(u, d2 - d2.mean(), atol=1e-10)
        want = np.sqrt(np.sum((d2 - d2.mean()) ** 2)) / 300
        assert influence_sd(u, st.counts, ordered=False) == pytest.approx(want, rel=1e-8)  # numerical gradient

    def test_influence_of_granules_is_the_sum_over_their_rows(self):
        x = np.random.default_rng(2).normal(size=(240, 3))
        g = statistic_gradient(lambda s: np.linalg.eigvalsh(s)[0], np.cov(x.T))
        rows_u = influence_values(GranuleStats.from_rows(x), g)
        gr = granulate(x, cap=60, cuts=[])
        st = GranuleStats.from_table(gr, 0, len(gr))
        k = gr.rows_per_granule
        np.testing.assert_allclose(influence_values(st, g), rows_u.reshape(-1, k).sum(axis=1), atol=1e-9)

    def test_long_run_sd_of_an_ar1_mean_is_near_its_closed_form(self):
        # AR(1) with coefficient 0.5 and unit variance: long-run variance (1 + r) / (1 - r) = 3
        # (closed form, common practice); the flat-top estimate over 20000 rows is within 10%
        rng = np.random.default_rng(3)
        e = rng.normal(size=20000)
        e[1:] *= np.sqrt(0.75)
        x = lfilter([1.0], [1.0, -0.5], e)
        sd = influence_sd(x - x.mean(), np.ones(x.size), ordered=True)
        assert sd == pytest.approx(np.sqrt(3.0 / x.size), rel=0.10)
        assert influence_sd(x - x.mean(), np.ones(x.size), ordered=False) == pytest.approx(
            np.sqrt(1.0 / x.size), rel=0.05)

    def test_resample_sd_sums_influence_within_blocks(self):
        u = np.array([1.0, -2.0, 3.0, 0.5, -1.5, -1.0])
        idx = np.array([[0, 1, 2, 3, 4, 5], [2, 3, 2, 3, 0, 1]])
        block = np.array([[0, 0, 1, 1, 2, 2], [0, 0, 1, 1, 2, 2]])
        got = resample_influence_sd(u, np.ones(6), idx, block)
        e0 = u - u.mean()
        want0 = np.sqrt((e0[0] + e0[1]) ** 2 + (e0[2] + e0[3]) ** 2 + (e0[4] + e0[5]) ** 2) / 6
        v = u[idx[1]] - u[idx[1]].mean()
        want1 = np.sqrt((v[0] + v[1]) ** 2 + (v[2] + v[3]) ** 2 + (v[4] + v[5]) ** 2) / 6
        np.testing.assert_allclose(got, [want0, want1], rtol=1e-12)

    def test_studentized_interval_inverts_the_quantiles_of_the_t_draws(self):
        # hand computation: t draws (d - 2) / s = -2, -1, 0, 1, 4; 50% quantiles (linear) -1 and 1
        iv = studentized_interval(2.0, [0.0, 1.0, 2.0, 3.0, 6.0], 0.5, [1.0] * 5, level=0.5)
        assert (iv.low, iv.high, iv.method, iv.resamples) == (1.5, 2.5, "studentized", 5)
        # a resample without a standard error is left out
        assert studentized_interval(2.0, [0.0, 1.0, 9.0], 1.0, [1.0, 1.0, 0.0], level=0.5).resamples == 2
