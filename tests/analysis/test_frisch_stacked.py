"""Diagonal noise (Frisch scheme): stacked solves give each problem exactly what it gets alone.

Every covariance here is invented by a seeded generator in this file.
"""

from __future__ import annotations

import numpy as np
import pytest

from relspan.analysis.frisch import frisch_max_corank, frisch_max_corank_many
from relspan.analysis.frisch.mintrace import _barrier_batch, _barrier_trace, _regularised
from relspan.analysis.inference import diagonal_corank_of, diagonal_coranks_of


def _resamples(seed: int, n: int, k: int, b: int = 12, rows: int = 40) -> np.ndarray:
    """``b`` iid resamples of ``rows`` invented rows with ``k`` near-relations among ``n`` variables."""
    rng = np.random.default_rng(seed)
    x = rng.standard_normal((rows, n - k)) @ rng.standard_normal((n - k, n))
    x = x + 0.3 * rng.standard_normal((rows, n))
    return np.stack([np.cov(x[rng.integers(0, rows, rows)].T) for _ in range(b)])


def _corr(c: np.ndarray) -> np.ndarray:
    sd = np.sqrt(np.diagonal(c, axis1=-2, axis2=-1))
    return c / (sd[..., :, None] * sd[..., None, :])


class TestBarrierStack:
    def test_each_problem_of_a_stack_takes_the_iterates_it_takes_alone(self):
        covs = _resamples(0, 5, 2, b=10, rows=14)
        rb = np.stack([_regularised(r) for r in _corr(covs)])
        w = np.random.default_rng(1).uniform(-0.2, 1.0, (10, 5))
        d, gap, steps = _barrier_batch(rb, w, gap_tol=1e-12)
        for i in range(10):
            d1, g1, s1 = _barrier_trace(rb[i], w[i], gap_tol=1e-12)
            assert np.array_equal(d[i], d1) and gap[i] == g1 and steps[i] == s1

    def test_a_problem_that_centres_first_waits_unchanged(self):
        # one easy and one hard problem: the easy one's steps do not grow with the hard one's
        covs = _resamples(2, 4, 1, b=2, rows=9)
        rb = np.stack([np.eye(4), _regularised(_corr(covs[0]))])
        d, _, steps = _barrier_batch(rb, np.ones(4), gap_tol=1e-12)
        alone = _barrier_trace(np.eye(4), np.ones(4), gap_tol=1e-12)
        assert np.array_equal(d[0], alone[0]) and steps[0] == alone[2]


class TestCorankMany:
    @pytest.mark.parametrize("seed,n,k", [(0, 3, 1), (1, 4, 2), (2, 5, 1), (3, 6, 3)])
    def test_same_certificates_as_one_search_per_covariance(self, seed, n, k):
        covs = _resamples(seed, n, k)
        many = frisch_max_corank_many(covs, eps=0.05, starts=1, seed=seed)
        for c, got in zip(covs, many):
            ref = frisch_max_corank(c, eps=0.05, starts=1, seed=seed)
            assert got.to_dict().keys() == ref.to_dict().keys()
            assert [x.status for x in got.certificates] == [x.status for x in ref.certificates]
            assert [x.noise_share for x in got.certificates] == [x.noise_share for x in ref.certificates]
            assert [x.found_by for x in got.certificates] == [x.found_by for x in ref.certificates]
            assert got.summary == ref.summary
            assert np.array_equal(got.min_trace.noise_variances, ref.min_trace.noise_variances)
            assert got.min_trace.newton_steps == ref.min_trace.newton_steps

    def test_a_covariance_the_analysis_cannot_take_is_none_and_the_rest_unchanged(self):
        covs = _resamples(4, 4, 1, b=3)
        bad = covs[1].copy()
        bad[0, 1] = bad[1, 0] = 10.0 * np.sqrt(bad[0, 0] * bad[1, 1])   # not positive semidefinite
        many = frisch_max_corank_many(np.stack([covs[0], bad, covs[2]]), eps=0.05, starts=1)
        assert many[1] is None
        assert many[2].summary == frisch_max_corank(covs[2], eps=0.05, starts=1).summary


def test_resample_coranks_of_a_stack_equal_one_call_per_resample():
    covs = _corr(_resamples(5, 4, 2, b=15, rows=30))
    stacked = diagonal_coranks_of(covs, eps=0.05, seed=3)
    for c, (q, certs) in zip(covs, stacked):
        q1, certs1 = diagonal_corank_of(c, None, eps=0.05, seed=3)
        assert q == q1
        assert {k: (v.status, v.noise_share) for k, v in certs.items()} == \
            {k: (v.status, v.noise_share) for k, v in certs1.items()}


def test_warm_started_stack_gives_each_resample_its_own_warm_search():
    covs = _resamples(6, 5, 2, b=10, rows=30)
    est = frisch_max_corank(np.mean(covs, axis=0), eps=0.01)
    many = frisch_max_corank_many(covs, eps=0.01, starts=2, warm=est)
    for c, got in zip(covs, many):
        ref = frisch_max_corank(c, eps=0.01, starts=2, warm=est)
        assert [(x.status, x.noise_share, x.found_by) for x in got.certificates] == \
            [(x.status, x.noise_share, x.found_by) for x in ref.certificates]
