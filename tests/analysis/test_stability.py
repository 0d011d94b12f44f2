"""Tests of relspan.analysis.stability (principal angles, window stability, swings, coranks)."""

from __future__ import annotations

import json

import numpy as np
import pytest
import scipy.linalg as sla
from hypothesis import given, settings
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays

from relspan.analysis.equal_noise import equal_noise
from relspan.analysis.stability import (coefficient_swing, corank_sequence, principal_angles,
                                        subspace_stability)
from relspan.errors import OptionsError


class TestPrincipalAngles:
    def test_match_scipy_subspace_angles_on_generic_random_pairs(self):
        # reference: scipy.linalg.subspace_angles (accurate away from zero angles); p + r <= n so that
        # generic subspaces meet only at 0 and no angle is exactly zero
        rng = np.random.default_rng(0)
        for _ in range(200):
            n = int(rng.integers(2, 9))
            p = int(rng.integers(1, n))
            r = int(rng.integers(1, n - p + 1))
            a, b = rng.normal(size=(p, n)), rng.normal(size=(r, n))
            ours = principal_angles(a, b)
            ref = np.sort(np.degrees(sla.subspace_angles(a.T, b.T)))
            np.testing.assert_allclose(ours, ref, atol=1e-10 * 180 / np.pi, rtol=1e-10)

    def test_known_tiny_angle_is_recovered(self):
        # exact construction: lines e1 and cos(t) e1 + sin(t) e2 meet at angle t = 1e-6 degrees
        t = np.radians(1e-6)
        a = np.array([[1.0, 0.0, 0.0]])
        b = np.array([[np.cos(t), np.sin(t), 0.0]])
        assert principal_angles(a, b)[0] == pytest.approx(1e-6, rel=1e-9)
        # arccos of the cosine cannot resolve it (it rounds to 0 or to ~1e-6 deg with 1e-3 relative error)
        naive = np.degrees(np.arccos(min(1.0, float(a[0] @ b[0]))))
        assert abs(naive - 1e-6) > 1e-11

    def test_planes_at_known_small_angles(self):
        # exact construction: span(e1, e2) against span(e1, cos(t) e2 + sin(t) e3), t = 1e-5 degrees
        t = np.radians(1e-5)
        a = np.array([[1.0, 0, 0, 0], [0, 1.0, 0, 0]])
        b = np.array([[1.0, 0, 0, 0], [0, np.cos(t), np.sin(t), 0]])
        ang = principal_angles(a, b)
        assert ang[0] == 0.0
        assert ang[1] == pytest.approx(1e-5, rel=1e-9)

    def test_same_subspace_in_another_basis_gives_exactly_zero(self):
        rng = np.random.default_rng(1)
        a = rng.normal(size=(3, 6))
        b = rng.normal(size=(3, 3)) @ a
        ang = principal_angles(a, b)
        assert ang.tolist() == [0.0, 0.0, 0.0]
        # scipy.linalg.subspace_angles returns rounding noise here, not 0
        assert principal_angles(a, a).tolist() == [0.0, 0.0, 0.0]

    def test_subspaces_of_total_dimension_above_n_share_exactly_zero_angles(self):
        # dimension count (common practice): dim(A cap B) >= p + r - n, so that many angles are 0;
        # scipy.linalg.subspace_angles was seen to give about 1.7e-6 degrees instead of 0 on such pairs
        rng = np.random.default_rng(5)
        for _ in range(50):
            a, b = rng.normal(size=(3, 5)), rng.normal(size=(4, 5))
            ang = principal_angles(a, b)
            assert ang[:2].tolist() == [0.0, 0.0]
            assert ang[2] > 1e-3

    def test_orthogonal_subspaces_are_ninety_degrees(self):
        ang = principal_angles(np.eye(4)[:2], np.eye(4)[2:])
        np.testing.assert_allclose(ang, [90.0, 90.0])

    def test_column_layout_matches_row_layout(self):
        rng = np.random.default_rng(2)
        a, b = rng.normal(size=(2, 5)), rng.normal(size=(3, 5))
        np.testing.assert_allclose(principal_angles(a, b), principal_angles(a.T, b.T, layout="columns"))

    @settings(max_examples=60, deadline=None)
    @given(arrays(np.float64, (2, 4), elements=st.floats(-10, 10)),
           arrays(np.float64, (2, 4), elements=st.floats(-10, 10)))
    def test_angles_are_symmetric(self, a, b):
        if min(np.linalg.svd(a, compute_uv=False)[-1], np.linalg.svd(b, compute_uv=False)[-1]) < 1e-3:
            return  # rank deficient draws are not bases
        np.testing.assert_allclose(principal_angles(a, b), principal_angles(b, a), atol=1e-9)

    @settings(max_examples=60, deadline=None)
    @given(arrays(np.float64, (2, 5), elements=st.floats(-5, 5)),
           arrays(np.float64, (2, 2), elements=st.floats(-5, 5)))
    def test_angles_do_not_depend_on_the_choice_of_basis(self, a, mix):
        if np.linalg.svd(a, compute_uv=False)[-1] < 1e-2 or abs(np.linalg.det(mix)) < 1e-2:
            return
        b = np.random.default_rng(3).normal(size=(2, 5))
        np.testing.assert_allclose(principal_angles(a, b), principal_angles(mix @ a, b), atol=1e-7)

    def test_rank_deficient_basis_is_rejected(self):
        with pytest.raises(OptionsError, match="does not have full rank"):
            principal_angles(np.array([[1.0, 0, 0], [2.0, 0, 0]]), np.eye(3)[:1])


def _plane_cov(phi: float, tilt: float) -> np.ndarray:
    """Covariance whose two smallest eigenvectors span a plane near span(u1, u2), ordered by phi.

    The relation plane is span(u1, u2) tilted by ``tilt`` radians towards u3; inside it the
    smallest eigenvector is cos(phi) p1 + sin(phi) p2 (eigenvalues 0.010 and 0.011).
    """
    u = np.linalg.qr(np.random.default_rng(42).normal(size=(4, 4)))[0].T
    p1 = u[0]
    p2 = np.cos(tilt) * u[1] + np.sin(tilt) * u[2]
    p3 = -np.sin(tilt) * u[1] + np.cos(tilt) * u[2]
    small1 = np.cos(phi) * p1 + np.sin(phi) * p2
    small2 = -np.sin(phi) * p1 + np.cos(phi) * p2
    vecs = np.vstack([small1, small2, p3, u[3]])
    lam = np.array([0.010, 0.011, 1.0, 2.0])
    return (vecs.T * lam) @ vecs


def _draws(basis, spread_deg: float, seed: int, resamples: int = 199) -> np.ndarray:
    """Resampled bases scattered around ``basis`` by about ``spread_deg`` degrees (constructed)."""
    rng = np.random.default_rng(seed)
    b = np.atleast_2d(basis)
    d = np.tile(b, (resamples, 1, 1)) + rng.normal(scale=np.radians(spread_deg), size=(resamples,) + b.shape)
    return np.swapaxes(np.linalg.qr(np.swapaxes(d, 1, 2))[0], 1, 2)


class TestSubspaceStability:
    def test_single_coefficient_flips_sign_while_subspace_barely_moves(self):
        # constructed: two windows with the same 2-relation plane (tilted by 0.01 degrees); the single
        # smallest-eigenvector relation turns inside the plane, so its coefficient changes sign
        names = list("abcd")
        covs = [_plane_cov(0.3, 0.0), _plane_cov(0.3 + np.pi / 2, np.radians(0.01))]
        fits = [equal_noise(s, names=names) for s in covs]
        bases = [f.corank(2).basis for f in fits]
        stab = subspace_stability(bases, labels=["w1", "w2"], draws=[_draws(b, 1.0, i) for i, b in enumerate(bases)])
        assert stab.stable and stab.max_pairwise_deg < 0.02
        single = np.array([f.corank(1).basis[0] / f.corank(1).basis[0][0] for f in fits])
        swing = coefficient_swing(single, labels=["w1", "w2"], names=names)
        assert swing.sign_changes.sum() >= 1
        assert not swing.sign_stable.all()

    def test_pairwise_matrix_reference_and_verdict(self):
        base = np.array([[1.0, 0, 0], [0, 1.0, 0]])
        tilt = lambda t: np.array([[1.0, 0, 0], [0, np.cos(t), np.sin(t)]])  # noqa: E731
        bases = [base, tilt(np.radians(2.0)), tilt(np.radians(5.0))]
        draws = [_draws(b, 0.3, i) for i, b in enumerate(bases)]   # sampling spread well below 3 degrees
        st_ = subspace_stability(bases, labels=["a", "b", "c"], draws=draws, reference=base)
        assert st_.pairwise_deg[0, 2] == pytest.approx(5.0)
        assert st_.pairwise_deg[1, 2] == pytest.approx(3.0)
        np.testing.assert_allclose(st_.to_reference_deg, [0.0, 2.0, 5.0], atol=1e-12)
        assert st_.max_to_reference_deg == pytest.approx(5.0)
        assert not st_.stable and st_.changes_at == (("a", "b"), ("b", "c"))
        assert "Changes under the equal-noise assumption" in st_.verdict
        # the same angles with a sampling spread of several degrees are no evidence of change
        wide = [_draws(b, 6.0, i) for i, b in enumerate(bases)]
        assert subspace_stability(bases, labels=["a", "b", "c"], draws=wide, reference=base).stable
        json.dumps(st_.to_dict(), allow_nan=False)
        assert list(st_.to_frame().columns) == ["corank", "to_reference_deg", "reference_threshold_deg",
                                                "reference_change"]

    def test_different_dimensions_are_not_compared_by_angle(self):
        b1, b2 = np.eye(3)[:1], np.eye(3)[:2]
        st_ = subspace_stability([b1, b2], labels=["a", "b"], draws=[_draws(b1, 1, 0), _draws(b2, 1, 1)])
        assert st_.compared == 0 and st_.stable is None and np.isnan(st_.pairwise_deg[0, 1])

    def test_labels_must_match_windows(self):
        with pytest.raises(OptionsError, match="labels has 1 entries but 2 are needed"):
            subspace_stability([np.eye(2)[:1], np.eye(2)[:1]], labels=["a"], draws=[None, None])

    def test_level_outside_range_is_rejected(self):
        with pytest.raises(OptionsError, match=r"level must be in \[0.5, 1\)"):
            subspace_stability([np.eye(2)[:1]], labels=["a"], draws=[None], level=1.0)


class TestCoefficientSwing:
    def test_min_max_and_sign_changes_with_locations(self):
        v = np.array([[1.0, -2.0], [-0.5, -1.0], [0.0, -3.0], [2.0, -0.1]])
        sw = coefficient_swing(v, labels=["w1", "w2", "w3", "w4"], names=["b1", "b2"])
        np.testing.assert_allclose(sw.minimum, [-0.5, -3.0])
        np.testing.assert_allclose(sw.maximum, [2.0, -0.1])
        assert sw.argmin == ("w2", "w3") and sw.argmax == ("w4", "w4")
        # the exact zero in w3 has no sign: the change is counted from w2 to w4
        assert sw.sign_changes.tolist() == [2, 0]
        assert sw.changes_at[0] == (("w1", "w2"), ("w2", "w4"))
        assert sw.sign_stable.tolist() == [False, True]

    def test_values_within_tolerance_of_zero_have_no_sign(self):
        sw = coefficient_swing(np.array([[1.0], [-1e-13], [2.0]]), labels=["a", "b", "c"], names=["x"])
        assert sw.sign_changes.tolist() == [0]

    def test_missing_values_are_skipped_and_counted(self):
        sw = coefficient_swing(np.array([[1.0], [np.nan], [-1.0]]), labels=["a", "b", "c"], names=["x"])
        assert sw.missing.tolist() == [1] and sw.changes_at[0] == (("a", "c"),)
        json.dumps(sw.to_dict(), allow_nan=False)
        assert sw.to_frame().loc["x", "changes_at"] == "a -> c"

    def test_three_dimensional_values_are_flattened_with_nested_names(self):
        v = np.arange(12.0).reshape(2, 2, 3) - 5
        sw = coefficient_swing(v, labels=["a", "b"], names=[["r1x", "r1y", "r1z"], ["r2x", "r2y", "r2z"]])
        assert sw.names[3] == "r2x" and sw.values.shape == (2, 6)

    def test_name_count_mismatch_is_rejected(self):
        with pytest.raises(OptionsError, match="names has 1 entries but 2 are needed"):
            coefficient_swing(np.zeros((2, 2)), labels=["a", "b"], names=["x"])


class TestCorankSequence:
    def test_constant_and_changing_sequences(self):
        cs = corank_sequence({"equal": [2, 2, 2], "diagonal": [1, None, 2]}, labels=["a", "b", "c"])
        assert cs.constant == {"equal": True, "diagonal": False}
        assert cs.values["diagonal"] == (1, 2)
        assert cs.changes_at["diagonal"] == (("a", "c"),)
        json.dumps(cs.to_dict(), allow_nan=False)
        df = cs.to_frame()
        assert df.loc["b", "diagonal"] is pd_na()

    def test_undetermined_window_makes_sequence_not_constant(self):
        cs = corank_sequence({"bounded": [1, None]}, labels=["a", "b"])
        assert not cs.constant["bounded"] and cs.changes_at["bounded"] == ()

    def test_an_undetermined_window_is_not_a_change(self):
        # issue 12: an undetermined window counted as a different corank
        cs = corank_sequence({"diagonal": [1, None, 1, None], "equal": [None, None, None, None]},
                             labels=list("abcd"))
        assert cs.changes == {"diagonal": False, "equal": None}
        assert cs.undetermined == {"diagonal": 2, "equal": 4}

    def test_counts_differ_only_when_their_resampling_supports_do_not_overlap(self):
        seq = {"equal": [1, 0, 1, 2]}
        overlapping = corank_sequence(seq, labels=list("abcd"),
                                      plausible={"equal": [{0, 1}, {0, 1}, {1}, {1, 2}]})
        assert overlapping.changes["equal"] is False and overlapping.changes_at["equal"] == ()
        apart = corank_sequence(seq, labels=list("abcd"), plausible={"equal": [{1}, {0}, {1}, {2}]})
        assert apart.changes["equal"] is True and len(apart.changes_at["equal"]) == 3
        assert corank_sequence(seq, labels=list("abcd")).changes["equal"] is True

    def test_wrong_length_names_the_assumption(self):
        with pytest.raises(OptionsError, match=r"coranks\['equal'\] has 1 entries for 2 windows"):
            corank_sequence({"equal": [1]}, labels=["a", "b"])


def pd_na():
    import pandas as pd

    return pd.NA
