"""Equal-noise corank by tests of equal smallest eigenvalues (relspan.analysis.equal_test)."""

import math

import numpy as np
import pytest
from scipy import stats

from relspan.analysis.equal_test import (equal_eigenvalues_test, equal_noise_corank, minka_log_evidence,
                                         sequential_corank, sequential_corank_stack)
from relspan.errors import OptionsError


class TestEqualEigenvaluesTest:
    def test_statistic_matches_a_hand_computation_from_the_published_formula(self):
        # Lawley (1956) multiplier as quoted in Jolliffe, Principal Component Analysis (2002), sec. 6.1.4
        # (recalled from memory), evaluated by hand for eigenvalues 5, 2, 0.5, 0.4 with N = 41, k = 2:
        lam = [5.0, 2.0, 0.5, 0.4]
        lbar = 0.45
        nu = 40 - 2 - (2 * 4 + 2 + 2) / 12 + lbar**2 * (1 / (5 - lbar) ** 2 + 1 / (2 - lbar) ** 2)
        x2 = nu * (2 * math.log(lbar) - math.log(0.5) - math.log(0.4))
        t = equal_eigenvalues_test(lam, k=2, nobs=41)
        assert t.multiplier == pytest.approx(nu, rel=1e-14)
        assert t.statistic == pytest.approx(x2, rel=1e-12)
        assert t.df == 2
        assert t.p_value == pytest.approx(stats.chi2.sf(x2, 2), rel=1e-12)

    def test_all_eigenvalues_equal_is_the_sphericity_test_of_statsmodels(self):
        # reference: statsmodels.stats.multivariate.test_cov_spherical (Bartlett 1954 factor)
        from statsmodels.stats.multivariate import test_cov_spherical
        s = np.cov(np.random.default_rng(0).normal(size=(50, 4)).T)
        ref = test_cov_spherical(s, 50)
        t = equal_eigenvalues_test(np.linalg.eigvalsh(s), k=4, nobs=50)
        assert t.statistic == pytest.approx(ref.statistic, rel=1e-12)
        assert t.p_value == pytest.approx(ref.pvalue, rel=1e-10)

    @pytest.mark.parametrize("n,k", [(4, 2), (5, 3)])
    def test_size_under_the_null_is_near_five_percent(self, n, k):
        # simulation: k equal smallest population eigenvalues (1), the others 4, 2.25, ...; N = 100
        rng = np.random.default_rng(20 + n)
        sd = np.concatenate([[2.0, 1.5, 1.2][: n - k], np.ones(k)])
        rej = 0
        for _ in range(1000):
            s = np.cov((rng.normal(size=(100, n)) * sd).T)
            rej += equal_eigenvalues_test(np.linalg.eigvalsh(s), k=k, nobs=100).p_value < 0.05
        assert 0.03 <= rej / 1000 <= 0.08

    def test_k_outside_range_is_refused(self):
        with pytest.raises(OptionsError, match="k must be"):
            equal_eigenvalues_test([1.0, 2.0, 3.0], k=1, nobs=10)


class TestSequentialCorank:
    def test_two_exact_relations_with_noise_above_the_tolerance_give_corank_two(self):
        # the case in the inference issue: noise sigma^2 I, two relations among five variables, T = 2000,
        # noise about 7% of each variance; counting eigenvalues below 5% would say 0
        rng = np.random.default_rng(1)
        f = rng.normal(size=(2000, 3)) @ rng.normal(size=(3, 5))
        f /= f.std(axis=0)
        x = f + np.sqrt(0.07) * rng.normal(size=(2000, 5))
        r = equal_noise_corank(np.cov(x.T), nobs=2000, scale="data units")
        assert r.corank == 2
        assert r.evidence_corank == 2
        assert 2 in r.consistent and 3 not in r.consistent
        assert "data units" in r.rule

    def test_stack_version_agrees_with_the_scalar_version(self):
        rng = np.random.default_rng(2)
        lam = np.sort(rng.gamma(2.0, size=(40, 4)), axis=1)
        lam[:20, :2] = lam[:20, :1]  # some with exactly equal smallest pair
        got = sequential_corank_stack(lam, nobs=60)
        want = [sequential_corank(row, nobs=60) for row in lam]
        assert got.tolist() == want


class TestMinkaEvidence:
    def test_matches_scikit_learn(self):
        # reference: scikit-learn's PCA(n_components="mle") evidence, sklearn.decomposition._pca._assess_dimension
        from sklearn.decomposition._pca import _assess_dimension
        lam = np.linalg.eigvalsh(np.cov(np.random.default_rng(3).normal(size=(60, 5)).T))[::-1]
        ours = minka_log_evidence(lam, nobs=60)
        ref = [_assess_dimension(lam, d, 60) for d in range(1, 5)]
        np.testing.assert_allclose(ours, ref, rtol=1e-12)


class TestEffectiveSampleSize:
    """The test's sample size under serial dependence (Bartlett 1946 factor, see effective_nobs_by_k)."""

    def test_factor_is_the_largest_over_the_tested_pairs(self):
        from relspan.analysis.equal_test import effective_nobs_by_k
        # hand computation: (1 - r^2) / (1 + r^2) with r the largest |r_a| among the k smallest components
        got = effective_nobs_by_k(1000.0, [0.0, -0.5, 0.2, 0.9])[0]
        assert got == pytest.approx([1000 * 0.75 / 1.25, 1000 * 0.75 / 1.25, 1000 * 0.19 / 1.81], rel=1e-12)
        # independent components keep T; the factor never raises it above T
        assert effective_nobs_by_k([400.0, 500.0], np.zeros((2, 3))).tolist() == [[400.0, 400.0], [500.0, 500.0]]

    def test_lag1_of_a_direction_matches_the_sample_autocorrelation(self):
        from relspan.analysis.equal_test import serial_dependence
        rng = np.random.default_rng(5)
        x = rng.normal(size=(3000, 3))
        x[1:, 0] += 0.9 * x[:-1, 0]
        s = serial_dependence(x)
        z = x[:, 0] - x[:, 0].mean()
        # the usual lag-1 sample autocorrelation (common practice: sum z_t z_{t+1} / sum z_t^2)
        assert s.lag1(np.eye(3))[0] == pytest.approx(np.sum(z[:-1] * z[1:]) / np.sum(z * z), rel=1e-12)
        assert serial_dependence(x[:2]) is None


def _two_relations_ar1(rng, t, rho, noise=0.4):
    """Five variables, two exact relations, equal noise; factors and noise AR(1) with coefficient rho."""
    from scipy.signal import lfilter
    load = rng.normal(size=(5, 3))
    load /= np.linalg.norm(load, axis=1, keepdims=True)
    f = rng.normal(size=(t, 3))
    e = rng.normal(size=(t, 5)) * np.sqrt(noise)
    for z in (f, e):
        z[1:] *= np.sqrt(1.0 - rho**2)
        z[:] = lfilter([1.0], [1.0, -rho], z, axis=0)
    return f @ load.T + e


def _window_equal_corank(x, ordered):
    from relspan.analysis.moments import Moments
    from relspan.analysis.resample import GranuleStats
    from relspan.analysis.window import WindowOptions, analyse_window
    stats_ = GranuleStats.from_rows(x, ordered=ordered)
    c, mean, cm = stats_.window_moments()
    opts = WindowOptions(assumptions=("equal",), absolute=None, relative=0.05, ref=0, coranks=(1, 2))
    w = analyse_window(Moments(count=int(c), mean=mean, comoment=cm), names=("a", "b", "c", "d", "e"),
                       options=opts, common_std=x.std(axis=0, ddof=1), label="w", granules=stats_)
    return w.coranks["equal"]


def test_time_ordered_ar1_rows_keep_the_size_of_the_equality_test_near_its_level():
    # True corank 2 under equal noise; rows AR(1) with coefficient 0.5. Taking the 400 rows as
    # independent rejected equality of the two smallest eigenvalues in about 16% of datasets
    # (benchmarks/inference_checks.py corank); with the effective sample size about 5%.
    rng = np.random.default_rng(20261203)
    runs = 150
    q = np.array([_window_equal_corank(_two_relations_ar1(rng, 400, 0.5), True) for _ in range(runs)])
    assert np.mean(q < 2) <= 0.09          # nominal 5%; 0.09 is about 2 binomial standard errors above
    assert np.mean(q == 2) >= 0.75


def test_iid_rows_keep_the_row_count():
    # unordered rows: no serial correction, the corank is the one of the row count
    rng = np.random.default_rng(3)
    x = _two_relations_ar1(rng, 400, 0.5)
    from relspan.analysis.inference import equal_noise_corank_rule
    lam = np.linalg.eigvalsh(np.corrcoef(x.T))
    assert _window_equal_corank(x, False) == equal_noise_corank_rule(lam, eps=0.05, nobs=400)


def test_issue_case_as_time_ordered_rows_still_gives_corank_two_with_resampling():
    # the issue's worked case (iid rows, T = 2000, two exact relations, noise about 7% of each variance),
    # analysed as time-ordered rows with stationary-block resamples: the lag-1 autocorrelations are near 0,
    # so the effective sample size stays near T and the corank stays 2, on the data and in resamples
    from relspan.analysis.inference import ResamplingOptions
    from relspan.analysis.moments import Moments
    from relspan.analysis.resample import GranuleStats
    from relspan.analysis.window import WindowOptions, analyse_window
    rng = np.random.default_rng(11)
    load = rng.normal(size=(5, 3))
    load /= np.linalg.norm(load, axis=1, keepdims=True)
    x = rng.normal(size=(2000, 3)) @ load.T + np.sqrt(0.075) * rng.normal(size=(2000, 5))
    stats_ = GranuleStats.from_rows(x, ordered=True)
    c, mean, cm = stats_.window_moments()
    opts = WindowOptions(assumptions=("equal",), absolute=None, relative=0.05, ref=0, coranks=(1, 2))
    res = ResamplingOptions(resamples=199, level=0.90, scheme="stationary", seed=3, diagonal_resamples=0)
    w = analyse_window(Moments(count=int(c), mean=mean, comoment=cm), names=("a", "b", "c", "d", "e"),
                       options=opts, common_std=x.std(axis=0, ddof=1), label="w", granules=stats_,
                       resampling=res, seed_key=("d", "p", 0))
    assert w.coranks["equal"] == 2
    support = w.inference.coranks["equal"]
    assert support.estimate == 2 and support.support(2) == max(support.chosen_share)


def test_resamples_of_dependent_rows_use_the_windows_lag1_autocovariance():
    # a block bootstrap keeps the dependence: each resample's components are read against the window's
    # lag-1 autocovariance, so with AR(1) rows the resampled sizes shrink as the data's do
    from relspan.analysis.equal_test import effective_nobs_by_k, serial_dependence
    from relspan.analysis.inference import equal_noise_corank_stack
    rng = np.random.default_rng(8)
    x = _two_relations_ar1(rng, 400, 0.5)
    s = serial_dependence(x)
    c = np.corrcoef(x.T)
    lam, vec = np.linalg.eigh(c)
    d = x.std(axis=0, ddof=1)
    r = s.lag1(vec / d[:, None])
    assert np.all((r > 0.35) & (r < 0.65))     # every component AR(1) with 0.5 (sampling spread)
    lam_b = np.stack([lam, lam * np.array([0.8, 1.25, 1, 1, 1])])
    vec_b = np.stack([vec, vec]) / d[None, :, None]
    via_serial = equal_noise_corank_stack(lam_b, eps=0.0, nobs=400, serial=s, directions=vec_b)
    via_lag1 = equal_noise_corank_stack(lam_b, eps=0.0, nobs=400, lag1=np.stack([r, r]))
    by_hand = sequential_corank_stack(lam_b, nobs=effective_nobs_by_k(400, np.stack([r, r])))
    assert via_serial.tolist() == via_lag1.tolist()
    # with eps = 0 the rule maps 1 (no second relation, smallest eigenvalue above 0) and 5 (all equal) to 0
    assert via_serial.tolist() == np.where((by_hand == 1) | (by_hand == 5), 0, by_hand).tolist()
    assert via_serial[0] == 2
