"""Tests of relspan.analysis.identified (what a relation subspace pins down)."""

from __future__ import annotations

import itertools
import json

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays

from relspan.analysis.identified import identified_quantities
from relspan.errors import OptionsError

NAMES = list("abcde")


def _statuses(idq, form):
    return [s for s in idq.statuses if s.form == form]


class TestIdentifiedQuantities:
    def test_single_relation_every_normalised_coefficient_is_a_point(self):
        a = np.array([[2.0, -1.0, 0.5, 4.0]])
        idq = identified_quantities(a, names=list("wxyz"), normalise_on="w")
        norm = _statuses(idq, "normalised")
        assert all(s.identified and s.kind == "point" for s in norm)
        np.testing.assert_allclose([s.value for s in norm], [-0.5, 0.25, 2.0])
        assert "identified up to scale" in idq.summary

    def test_reduced_form_has_identity_in_target_columns_and_reads_as_regression(self):
        rng = np.random.default_rng(0)
        b = rng.normal(size=(2, 5))
        idq = identified_quantities(b, names=NAMES, ref_vars=["a", "c"])
        np.testing.assert_allclose(idq.reduced_form[:, [0, 2]], np.eye(2), atol=1e-12)
        # every row of the reduced form is a relation: it lies in the row space of b
        resid = idq.reduced_form - idq.reduced_form @ np.linalg.pinv(b) @ b
        assert np.abs(resid).max() < 1e-10
        red = {(s.relation, s.variable): s.value for s in _statuses(idq, "reduced")}
        assert red[("a", "b")] == pytest.approx(-idq.reduced_form[0, 1])
        assert all(s.identified for s in _statuses(idq, "reduced"))

    @settings(max_examples=50, deadline=None)
    @given(arrays(np.float64, (2, 2), elements=st.floats(-3, 3)))
    def test_reduced_form_does_not_depend_on_the_basis_given(self, mix):
        if abs(np.linalg.det(mix)) < 1e-2:
            return
        b = np.random.default_rng(1).normal(size=(2, 5))
        r1 = identified_quantities(b, names=NAMES, ref_vars=["b", "e"]).reduced_form
        r2 = identified_quantities(mix @ b, names=NAMES, ref_vars=["b", "e"]).reduced_form
        np.testing.assert_allclose(r1, r2, atol=1e-8)

    def test_with_two_relations_a_single_normalised_coefficient_is_not_identified(self):
        b = np.random.default_rng(2).normal(size=(2, 5))
        idq = identified_quantities(b, names=NAMES, normalise_on="a")
        norm = _statuses(idq, "normalised")
        assert not any(s.identified for s in norm)
        assert all(s.kind == "not identified" and "any combination" in s.why for s in norm)
        # the claim is real: two relations normalised on a give different coefficients of b
        ob = idq.basis
        r1, r2 = ob[0] / ob[0, 0], (ob[0] + ob[1]) / (ob[0, 0] + ob[1, 0])
        assert abs(r1[1] - r2[1]) > 1e-3

    def test_variable_in_no_relation_is_identified_as_exactly_zero(self):
        b = np.array([[1.0, 2.0, 0.0, -1.0, 0.5], [0.0, 1.0, 0.0, 3.0, -2.0]])
        idq = identified_quantities(b, names=NAMES, normalise_on="a")
        assert idq.zero_variables == ("c",)
        zero = [s for s in idq.statuses if s.variable == "c"]
        assert zero and all(s.identified and s.kind == "zero" and s.value == 0.0 for s in zero)
        assert "coefficient exactly 0" in idq.summary

    def test_coefficient_proportional_to_reference_is_identified_for_two_relations(self):
        # column d is -3 times column a in every relation: a_d = -3 once a_a = 1
        b = np.array([[1.0, 2.0, 0.5, -3.0, 1.0], [2.0, -1.0, 1.0, -6.0, 0.0]])
        idq = identified_quantities(b, names=NAMES, normalise_on="a")
        d = next(s for s in _statuses(idq, "normalised") if s.variable == "d")
        assert d.identified and d.value == pytest.approx(-3.0)

    def test_automatic_targets_avoid_a_singular_block(self):
        # columns a and b are proportional: solving for both is impossible
        b = np.array([[1.0, 2.0, 0.0, 1.0, 0.0], [0.5, 1.0, 1.0, 0.0, 1.0]])
        idq = identified_quantities(b, names=NAMES)
        assert set(idq.targets) != {"a", "b"}
        assert idq.targets_chosen == "automatic" and np.isfinite(idq.reduced_condition)
        conds = [np.linalg.cond(idq.basis[:, list(c)]) for c in itertools.combinations(range(5), 2)]
        assert idq.reduced_condition <= 10 * min(conds)

    def test_given_targets_with_singular_block_are_rejected(self):
        b = np.array([[1.0, 2.0, 0.0, 1.0, 0.0], [0.5, 1.0, 1.0, 0.0, 1.0]])
        with pytest.raises(OptionsError, match="cannot be solved for a, b") as exc:
            identified_quantities(b, names=NAMES, ref_vars=["a", "b"])
        assert exc.value.key == "ref_vars"

    def test_wrong_number_of_targets_is_rejected(self):
        with pytest.raises(OptionsError, match="exactly 2 variables"):
            identified_quantities(np.eye(5)[:2], names=NAMES, ref_vars=["a"])

    def test_dependent_basis_rows_are_rejected(self):
        with pytest.raises(OptionsError, match="linearly dependent"):
            identified_quantities(np.array([[1.0, 2, 3, 4, 5], [2.0, 4, 6, 8, 10]]), names=NAMES)

    def test_to_dict_json_and_frame(self):
        idq = identified_quantities(np.random.default_rng(3).normal(size=(2, 5)), names=NAMES)
        json.dumps(idq.to_dict(), allow_nan=False)
        df = idq.to_frame()
        assert set(df["form"]) == {"reduced", "normalised"} and len(df) == 2 * 3 + 4
