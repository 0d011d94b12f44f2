"""Tests of relspan.analysis.flat (the flat of elementary regressions)."""

from __future__ import annotations

import json

import numpy as np
import pytest

from relspan.analysis.elementary import choose_reference, elementary_regressions
from relspan.analysis.flat import elementary_flat
from relspan.analysis.stability import principal_angles
from relspan.errors import OptionsError


def _population_cov(seed: int, n: int, q: int, noise: float):
    """Exact (population) covariance S_hat + noise * I with S_hat of corank q, and the true relations."""
    rng = np.random.default_rng(seed)
    u = np.linalg.qr(rng.normal(size=(n, n)))[0]
    lam = np.concatenate([np.zeros(q), np.linspace(1.0, 2.0, n - q)])
    s_hat = (u * lam) @ u.T
    return s_hat + noise * np.eye(n), u[:, :q].T


class TestElementaryFlat:
    def test_line_through_elementary_relations_recovers_two_relations(self):
        names = list("abcd")
        s, truth = _population_cov(0, 4, 2, 1e-6)
        er = elementary_regressions(s, names=names)
        fl = elementary_flat(er, q=2, ref=choose_reference(er))
        assert fl.form == "affine"
        assert fl.directions.shape == (1, 3)
        assert fl.rms_distance < 1e-4
        assert principal_angles(fl.basis, truth).max() < 0.01
        assert principal_angles(fl.projective_basis, truth).max() < 0.01

    def test_distance_from_flat_grows_like_noise_variance(self):
        # with exact covariances S_hat + s^2 I the points leave the flat at first order in s^2
        names = list("abcd")
        rms = []
        for noise in (1e-4, 4e-4):
            s, _ = _population_cov(1, 4, 2, noise)
            er = elementary_regressions(s, names=names)
            rms.append(elementary_flat(er, q=2, ref=0).rms_distance)
        assert 3.5 < rms[1] / rms[0] < 4.5

    def test_single_relation_puts_all_points_together(self):
        s, truth = _population_cov(2, 3, 1, 1e-8)
        er = elementary_regressions(s, names=list("abc"))
        fl = elementary_flat(er, q=1, ref=0)
        assert fl.directions.shape == (0, 2)
        assert fl.rms_distance < 1e-5
        np.testing.assert_allclose(fl.center, (truth[0] / truth[0, 0])[1:], rtol=1e-5)

    def test_projective_form_is_used_when_reference_coefficient_is_near_zero(self):
        # c is independent of a and b: its elementary relation has (almost) no weight on a
        s = np.array([[1.0, 0.9, 0.0], [0.9, 1.0, 0.0], [0.0, 0.0, 1.0]])
        er = elementary_regressions(s, names=["a", "b", "c"])
        fl = elementary_flat(er, q=1, ref="a")
        assert fl.form == "projective"
        assert "near-zero coefficient on a" in fl.form_reason
        assert fl.distances is None and np.isnan(fl.rms_distance)
        np.testing.assert_allclose(fl.basis, fl.projective_basis)
        json.dumps(fl.to_dict(), allow_nan=False)

    def test_residual_sines_are_distances_of_unit_relations_from_subspace(self):
        s, _ = _population_cov(3, 5, 2, 0.01)
        er = elementary_regressions(s, names=list("abcde"))
        fl = elementary_flat(er, q=2, ref=choose_reference(er))
        # reference: numpy SVD best rank-2 subspace of the unit rows
        _, _, vt = np.linalg.svd(fl.unit_relations)
        proj = fl.unit_relations @ vt[:2].T @ vt[:2]
        np.testing.assert_allclose(fl.residual_sines, np.linalg.norm(fl.unit_relations - proj, axis=1),
                                   atol=1e-12)
        assert np.all(fl.residual_sines <= 1.0)

    def test_frame_has_one_row_per_regression(self):
        s, _ = _population_cov(4, 3, 1, 0.01)
        fl = elementary_flat(elementary_regressions(s, names=list("abc")), q=1, ref="b")
        df = fl.to_frame()
        assert list(df.index) == list("abc") and list(df.columns)[:2] == ["a", "c"]

    def test_q_out_of_range_is_rejected(self):
        er = elementary_regressions(np.eye(3) + 0.1, names=list("abc"))
        with pytest.raises(OptionsError, match="q must be a corank from 1 to 2"):
            elementary_flat(er, q=3, ref=0)

    def test_singular_window_is_rejected_with_pointer_to_exact_relations(self):
        er = elementary_regressions(np.ones((2, 2)), names=["a", "b"])
        with pytest.raises(OptionsError, match="singular") as exc:
            elementary_flat(er, q=1, ref=0)
        assert "exact_relations" in exc.value.fix
