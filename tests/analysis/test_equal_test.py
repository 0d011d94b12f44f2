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
