"""Tests of relspan.analysis.equal_noise (total least squares, known noise shape)."""

from __future__ import annotations

import json
import warnings

import numpy as np
import pytest
import scipy.linalg as sla

from relspan.analysis.equal_noise import equal_noise
from relspan.analysis.stability import principal_angles
from relspan.errors import OptionsError


def _factor_data(seed: int, *, t: int, n: int, q: int, noise_share: float):
    """X = F B^T + E with q exact relations in the signal; equal noise of the given share.

    B (n x (n - q)) has random orthonormal directions and singular values spread evenly over
    [1, 2], so the signal is well separated from the noise (noise share of the mean signal variance).
    """
    rng = np.random.default_rng(seed)
    u = np.linalg.qr(rng.normal(size=(n, n - q)))[0]
    v = np.linalg.qr(rng.normal(size=(n - q, n - q)))[0]
    b = u @ np.diag(np.linspace(2.0, 1.0, n - q)) @ v
    f = rng.normal(size=(t, n - q))
    signal = f @ b.T
    sigma2 = noise_share * float(np.mean(np.var(signal, axis=0)))
    x = signal + rng.normal(scale=np.sqrt(sigma2), size=(t, n))
    truth = sla.null_space(b.T).T  # rows a with a . signal = 0
    return x, truth, sigma2


class TestEqualNoise:
    def test_relation_basis_is_complement_of_leading_principal_components(self):
        # reference: scikit-learn PCA; the TLS relation subspace is orthogonal to the n - q leading components
        skd = pytest.importorskip("sklearn.decomposition")
        x, _, _ = _factor_data(0, t=400, n=5, q=2, noise_share=0.1)
        en = equal_noise(np.cov(x.T), names=list("abcde"))
        pca = skd.PCA(n_components=3).fit(x)
        comp = sla.null_space(pca.components_).T
        assert principal_angles(en.corank(2).basis, comp).max() < 1e-8

    def test_eigenvalues_ascending_and_noise_scales(self):
        x, _, _ = _factor_data(1, t=300, n=4, q=1, noise_share=0.1)
        s = np.cov(x.T)
        en = equal_noise(s, names=list("abcd"))
        np.testing.assert_allclose(en.eigenvalues, np.linalg.eigvalsh(s), rtol=1e-12)
        assert np.all(np.diff(en.eigenvalues) >= 0)
        c2 = en.corank(2)
        assert c2.noise_scale == pytest.approx(en.eigenvalues[1])
        assert c2.noise_scale_mean == pytest.approx(en.eigenvalues[:2].mean())
        assert c2.gap_ratio == pytest.approx(en.eigenvalues[1] / en.eigenvalues[2])
        np.testing.assert_allclose(c2.noise_variances, en.eigenvalues[1])

    def test_tls_subspace_recovers_known_relations_over_many_seeds(self):
        # simulation with known truth: 10% equal noise, T = 2000, n = 5, q = 2; over 30 seeds
        # the largest principal angle to the true relation subspace stays under 2.5 degrees (measured worst: 1.3)
        worst = 0.0
        for seed in range(30):
            x, truth, sigma2 = _factor_data(100 + seed, t=2000, n=5, q=2, noise_share=0.1)
            en = equal_noise(np.cov(x.T), names=list("abcde"))
            worst = max(worst, float(principal_angles(en.corank(2).basis, truth).max()))
            assert en.corank(2).noise_scale_mean == pytest.approx(sigma2, rel=0.15)
        assert worst < 2.5, worst

    def test_gap_ratio_is_small_only_at_the_true_corank(self):
        x, _, _ = _factor_data(2, t=5000, n=5, q=2, noise_share=0.05)
        en = equal_noise(np.cov(x.T), names=list("abcde"))
        gaps = {c.q: c.gap_ratio for c in en.coranks}
        assert min(gaps, key=gaps.get) == 2
        assert en.corank(2).spread_ratio > 0.8

    def test_deming_closed_form_equals_shaped_noise_slope(self):
        # Deming (1943) closed form for y = a + b x with error variance ratio delta = var(e_y) / var(e_x):
        # b = (syy - delta sxx + sqrt((syy - delta sxx)^2 + 4 delta sxy^2)) / (2 sxy)  (handbook formula)
        rng = np.random.default_rng(3)
        xi = rng.normal(size=300)
        wx, wy = 0.5, 2.0
        x = xi + rng.normal(scale=np.sqrt(0.1 * wx), size=300)
        y = 1.0 + 1.7 * xi + rng.normal(scale=np.sqrt(0.1 * wy), size=300)
        s = np.cov(np.vstack([x, y]))
        delta = wy / wx
        sxx, syy, sxy = s[0, 0], s[1, 1], s[0, 1]
        b = (syy - delta * sxx + np.sqrt((syy - delta * sxx) ** 2 + 4 * delta * sxy**2)) / (2 * sxy)
        en = equal_noise(s, names=["x", "y"], shape=[wx, wy])
        v = en.corank(1).basis[0]
        assert -v[0] / v[1] == pytest.approx(b, rel=1e-12)

    def test_shaped_noise_slope_matches_scipy_odr(self):
        # reference: scipy.odr (ODRPACK) with analytic derivatives; weights 1/w give the same criterion.
        # ODRPACK stops on its own convergence test, so agreement is to about 1e-8, not to rounding.
        odr = pytest.importorskip("scipy.odr", reason="scipy.odr is not available in this SciPy")
        rng = np.random.default_rng(4)
        xi = rng.normal(size=200)
        wx, wy = 1.0, 3.0
        x = xi + rng.normal(scale=np.sqrt(0.05 * wx), size=200)
        y = -0.5 + 0.8 * xi + rng.normal(scale=np.sqrt(0.05 * wy), size=200)
        model = odr.Model(lambda beta, u: beta[0] + beta[1] * u,
                          fjacb=lambda beta, u: np.vstack([np.ones_like(u), u]),
                          fjacd=lambda beta, u: np.full_like(u, beta[1]))
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", DeprecationWarning)
            fit = odr.ODR(odr.RealData(x, y, sx=np.sqrt(wx), sy=np.sqrt(wy)), model, beta0=[0.0, 1.0],
                          sstol=1e-15, partol=1e-15, maxit=500).run()
        en = equal_noise(np.cov(np.vstack([x, y])), names=["x", "y"], shape=[wx, wy])
        v = en.corank(1).basis[0]
        assert -v[0] / v[1] == pytest.approx(fit.beta[1], rel=1e-7)

    def test_shaped_basis_is_orthonormal_and_solves_generalised_problem(self):
        x, _, _ = _factor_data(5, t=300, n=4, q=2, noise_share=0.1)
        s = np.cov(x.T)
        w = np.array([1.0, 2.0, 0.5, 1.5])
        en = equal_noise(s, names=list("abcd"), shape=w)
        lam, vec = sla.eigh(s, np.diag(w))
        np.testing.assert_allclose(en.eigenvalues, lam, rtol=1e-10)
        b = en.corank(2).basis
        np.testing.assert_allclose(b @ b.T, np.eye(2), atol=1e-12)
        assert principal_angles(b, vec[:, :2].T).max() < 1e-8
        np.testing.assert_allclose(en.corank(2).noise_variances, lam[1] * w)

    def test_as_given_depends_on_units_but_correlation_scale_does_not(self):
        x, _, _ = _factor_data(6, t=500, n=3, q=1, noise_share=0.2)
        scale = np.array([1.0, 1000.0, 0.01])
        a1 = equal_noise(np.cov(x.T), names=list("abc"))
        a2 = equal_noise(np.cov((x * scale).T), names=list("abc"))
        # a relation a . x = 0 becomes (a / scale) . (x * scale) = 0
        back = a2.corank(1).basis / (1 / scale)
        assert principal_angles(a1.corank(1).basis, back).max() > 1.0
        assert "units" in a1.scale_note
        c1 = equal_noise(np.cov(x.T), names=list("abc"), scale="correlation")
        c2 = equal_noise(np.cov((x * scale).T), names=list("abc"), scale="correlation")
        assert principal_angles(c1.corank(1).basis, c2.corank(1).basis * scale).max() < 1e-6
        assert "correlation scale" in c1.scale_note

    def test_to_dict_json_and_frame(self):
        x, _, _ = _factor_data(7, t=100, n=3, q=1, noise_share=0.1)
        en = equal_noise(np.cov(x.T), names=list("abc"))
        json.dumps(en.to_dict(), allow_nan=False)
        assert list(en.to_frame().index) == [1, 2]

    def test_non_positive_shape_is_rejected_with_fix(self):
        with pytest.raises(OptionsError, match="positive relative noise variances") as exc:
            equal_noise(np.eye(2), names=["a", "b"], shape=[1.0, 0.0])
        assert "noise_share" in exc.value.fix
