"""Tests of relspan.analysis.bounded (noise of bounded spectral norm)."""

from __future__ import annotations

import json
import math

import numpy as np
import pytest

from relspan.analysis.bounded import bounded_noise, tolerance_eps
from relspan.analysis.stability import principal_angles
from relspan.errors import OptionsError


def _corank_matrix(rng, n: int, q: int, low: float = 1.0, high: float = 3.0):
    """A PSD matrix of corank exactly q, its null space (rows) and its nonzero eigenvalues."""
    v = np.linalg.qr(rng.normal(size=(n, n)))[0]
    lam = np.concatenate([np.zeros(q), rng.uniform(low, high, size=n - q)])
    return (v * lam) @ v.T, v[:, :q].T


def _noise_of_norm(rng, n: int, eps: float) -> np.ndarray:
    """A random noise covariance (PSD) of spectral norm exactly eps."""
    e = rng.normal(size=(n, n))
    e = e @ e.T
    return e * (eps / np.linalg.norm(e, 2))


class TestBoundedNoise:
    def test_true_corank_is_admissible_when_noise_is_within_bound(self):
        # Weyl: lambda_q(S_hat + N) <= lambda_q(S_hat) + ||N|| = ||N||
        rng = np.random.default_rng(0)
        for _ in range(50):
            s_hat, _ = _corank_matrix(rng, 5, 2)
            eps = rng.uniform(0.01, 0.5)
            bn = bounded_noise(s_hat + _noise_of_norm(rng, 5, eps), names=list("abcde"), eps=eps)
            assert 2 in bn.admissible and 1 in bn.admissible

    def test_admissible_iff_eigenvalue_below_eps(self):
        s = np.diag([0.01, 0.04, 0.2, 1.0])
        bn = bounded_noise(s, names=list("abcd"), eps=0.05)
        assert bn.admissible == (1, 2) and bn.max_corank == 2 and not bn.all_noise
        assert bounded_noise(s, names=list("abcd"), eps=0.005).admissible == ()
        assert bounded_noise(s, names=list("abcd"), eps=2.0).all_noise

    def test_davis_kahan_bound_holds_on_random_perturbations(self):
        # Davis & Kahan (1970) sin-theta theorem: the null space of S_hat is within the bound
        rng = np.random.default_rng(1)
        checked = 0
        tightest = 0.0
        for trial in range(300):
            n = int(rng.integers(3, 7))
            q = int(rng.integers(1, n))
            s_hat, null = _corank_matrix(rng, n, q, low=0.2, high=2.0)
            eps = float(rng.uniform(0.001, 0.3))
            if trial % 3 == 0:  # aim the perturbation at the null space and the weakest signal direction
                w, v = np.linalg.eigh(s_hat)
                d = (v[:, 0] + v[:, q]) / np.sqrt(2.0)
                noise = eps * np.outer(d, d)
            else:
                noise = _noise_of_norm(rng, n, eps)
            bn = bounded_noise(s_hat + noise, names=[f"x{i}" for i in range(n)], eps=eps)
            c = next(c for c in bn.coranks if c.q == q)
            angle = principal_angles(c.basis, null).max()
            assert angle <= c.angle_bound_deg + 1e-9, (trial, angle, c.angle_bound_deg)
            if not c.vacuous:
                checked += 1
                tightest = max(tightest, angle / c.angle_bound_deg)
        assert checked > 200
        assert tightest > 0.3  # the bound is not trivially loose here (measured: angle reaches 0.63 of it)

    def test_vacuous_bound_is_flagged_as_ninety_degrees(self):
        s = np.diag([0.01, 0.03, 1.0])
        bn = bounded_noise(s, names=list("abc"), eps=0.05)
        c1 = bn.coranks[0]
        assert c1.q == 1 and c1.vacuous and c1.angle_bound_deg == 90.0
        c2 = bn.coranks[1]
        assert not c2.vacuous
        assert c2.angle_bound_deg == pytest.approx(math.degrees(math.asin(0.05 / 1.0)))

    def test_to_dict_json_and_frame(self):
        bn = bounded_noise(np.diag([0.01, 0.5, 1.0]), names=list("abc"), eps=0.1)
        json.dumps(bn.to_dict(), allow_nan=False)
        df = bn.to_frame()
        assert df.loc[1, "admissible"] and not df.loc[2, "admissible"]

    def test_negative_eps_is_rejected(self):
        with pytest.raises(OptionsError, match="eps must be a finite number >= 0"):
            bounded_noise(np.eye(2), names=["a", "b"], eps=-1.0)


class TestToleranceEps:
    def test_relative_tolerance_works_on_the_correlation_scale(self):
        s = np.array([[4.0, 1.0], [1.0, 9.0]])
        tol = tolerance_eps(s, relative=0.05)
        assert tol.scale == "correlation" and tol.eps == 0.05
        np.testing.assert_allclose(np.diag(tol.matrix), 1.0)
        np.testing.assert_allclose(tol.matrix[0, 1], 1.0 / 6.0)
        np.testing.assert_allclose(tol.std, [2.0, 3.0])
        assert "5%" in tol.convention

    def test_relative_noise_share_on_every_variable_is_within_the_bound(self):
        # diagonal noise with N_jj = r S_jj has scaled spectral norm exactly r
        s = np.array([[4.0, 1.0, 0.5], [1.0, 9.0, 2.0], [0.5, 2.0, 1.0]])
        tol = tolerance_eps(s, relative=0.1)
        n_scaled = np.diag(0.1 * np.diag(s)) / np.outer(tol.std, tol.std)
        assert np.linalg.norm(n_scaled, 2) <= tol.eps + 1e-15

    def test_absolute_tolerance_keeps_the_matrix(self):
        s = np.array([[4.0, 1.0], [1.0, 9.0]])
        tol = tolerance_eps(s, absolute=0.2)
        assert tol.scale == "as given" and tol.eps == 0.2
        np.testing.assert_array_equal(tol.matrix, s)
        json.dumps(tol.to_dict(), allow_nan=False)

    def test_exactly_one_of_absolute_and_relative(self):
        with pytest.raises(OptionsError, match="exactly one") as exc:
            tolerance_eps(np.eye(2))
        assert exc.value.key == "tolerance"
        with pytest.raises(OptionsError, match="exactly one"):
            tolerance_eps(np.eye(2), absolute=0.1, relative=0.1)

    def test_relative_above_one_is_rejected(self):
        with pytest.raises(OptionsError, match="at most 1"):
            tolerance_eps(np.eye(2), relative=1.5)
