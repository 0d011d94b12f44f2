"""Diagonal noise (Frisch scheme): the faster barrier solver takes the same iterates as before.

The solver of the weighted trace problems (relspan.analysis.frisch.mintrace._barrier_batch) keeps
the factorisation of a centred iterate for the next centring, decides its line search by a
Cholesky factorisation instead of an eigendecomposition and calls the LAPACK routines behind
numpy.linalg directly. None of that may change an iterate: the solutions, duality gaps and Newton
step counts must equal, bit for bit, those of the solver as it was at commit 055e2ee
(tests/analysis/_barrier_reference.py, a verbatim copy). Both run the same LAPACK calls on the same
machine, so the comparison holds under any maths-library kernel. Every matrix here is invented by
a seeded generator in this file.
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import pytest

sys.path.insert(0, str(Path(__file__).resolve().parent))
from _barrier_reference import _barrier_batch as _reference_batch  # noqa: E402

from relspan.analysis.frisch.mintrace import (  # noqa: E402
    _barrier_batch, _cholesky, _cholesky_or_nan, _regularised)


def _correlations(seed: int, n: int, k: int, b: int, rows: int) -> np.ndarray:
    """``b`` correlation matrices of ``rows`` invented rows with ``k`` near-relations among ``n`` variables."""
    rng = np.random.default_rng(seed)
    out = []
    for _ in range(b):
        x = rng.standard_normal((rows, n - k)) @ rng.standard_normal((n - k, n))
        x = x + rng.uniform(0.01, 0.5) * rng.standard_normal((rows, n))
        c = np.cov(x.T)
        sd = np.sqrt(np.diag(c))
        out.append(_regularised(c / np.outer(sd, sd)))
    return np.stack(out)


class TestSameIterates:
    @pytest.mark.parametrize("n,k", [(3, 1), (4, 2), (6, 3), (8, 2), (10, 5)])
    @pytest.mark.parametrize("gap", [1e-3, 1e-7, 1e-12])
    def test_stack_gives_the_previous_solvers_solutions_gaps_and_steps_bit_for_bit(self, n, k, gap):
        r = _correlations(10 * n + k, n, k, b=6, rows=n + 4)
        w = np.random.default_rng(n).uniform(0.0, 1.0, (6, n)) ** 2     # ten Berge & Kiers weights
        d, g, s = _barrier_batch(r, w, gap_tol=gap)
        d0, g0, s0 = _reference_batch(r, w, gap_tol=gap)
        assert np.array_equal(d, d0) and np.array_equal(g, g0) and np.array_equal(s, s0)

    def test_one_shared_matrix_with_weights_of_both_signs_and_one_gap_per_problem(self):
        r = _correlations(7, 5, 2, b=1, rows=9)[0]
        w = np.random.default_rng(7).uniform(-0.3, 1.0, (9, 5))
        gaps = np.array([1e-3, 1e-7, 1e-10] * 3)
        d, g, s = _barrier_batch(r, w, gap_tol=gaps)
        d0, g0, s0 = _reference_batch(r, w, gap_tol=gaps)
        assert np.array_equal(d, d0) and np.array_equal(g, g0) and np.array_equal(s, s0)


class TestFactorisationHelpers:
    def test_a_failed_factorisation_is_all_nan_exactly_where_numpy_cholesky_fails(self):
        rng = np.random.default_rng(3)
        a = rng.standard_normal((40, 5, 5))
        m = a @ a.transpose(0, 2, 1) - rng.uniform(0.0, 2.0, (40, 1, 1)) * np.eye(5)
        expected = []
        for x in m:
            try:
                np.linalg.cholesky(x)
                expected.append(True)
            except np.linalg.LinAlgError:
                expected.append(False)
        assert 0 < sum(expected) < 40
        with np.errstate(invalid="ignore"):
            lc = _cholesky_or_nan(m)
        assert (~np.isnan(lc[:, -1, -1])).tolist() == expected
        assert np.isnan(lc[~np.array(expected)]).all()

    def test_cholesky_raises_like_numpy_when_one_matrix_is_not_positive_definite(self):
        m = np.stack([np.eye(3), np.diag([1.0, -1.0, 1.0])])
        with pytest.raises(np.linalg.LinAlgError, match="not positive definite"):
            _cholesky(m)
        assert np.array_equal(_cholesky(m[:1]), np.linalg.cholesky(m[:1]))


class TestOneProblem:
    @pytest.mark.parametrize("n,k", [(3, 1), (4, 2), (5, 1), (6, 3), (7, 2), (8, 4), (9, 3), (10, 5)])
    @pytest.mark.parametrize("gap", [1e-3, 1e-7, 1e-12])
    def test_one_problem_alone_gives_the_previous_solvers_iterates_bit_for_bit(self, n, k, gap):
        # a stack of one takes the solver's one-problem path
        for i, r in enumerate(_correlations(100 * n + k, n, k, b=4, rows=n + 3)):
            w = np.ones(n) if i == 0 else np.random.default_rng(i).uniform(0.0, 1.0, n) ** 2
            d, g, s = _barrier_batch(r, w[None, :], gap_tol=gap)
            d0, g0, s0 = _reference_batch(r, w[None, :], gap_tol=gap)
            assert np.array_equal(d, d0) and np.array_equal(g, g0) and np.array_equal(s, s0), (i, s, s0)
