"""Tests of relspan.analysis.elementary (elementary regressions)."""

from __future__ import annotations

import json
import warnings

import numpy as np
import pytest

from relspan.analysis.elementary import choose_reference, elementary_regressions
from moment_oracles import MomentTree

from relspan.analysis.moments import merge_all, moments_of
from relspan.errors import IllConditionedWarning, OptionsError

sm = pytest.importorskip("statsmodels.api")


def _data(seed: int = 0, t: int = 200, n: int = 4) -> np.ndarray:
    rng = np.random.default_rng(seed)
    mix = rng.normal(size=(n, n))
    return rng.normal(size=(t, n)) @ mix + rng.normal(size=n) * 10


class TestElementaryRegressions:
    def test_each_regression_matches_statsmodels_ols_with_intercept(self):
        # reference: statsmodels OLS (with intercept) of each variable on the others
        x = _data(1)
        t, n = x.shape
        names = [f"v{i}" for i in range(n)]
        m = moments_of(x)
        er = elementary_regressions(m.covariance(), names=names, count=m.count, mean=m.mean)
        for j in range(n):
            others = [k for k in range(n) if k != j]
            res = sm.OLS(x[:, j], sm.add_constant(x[:, others])).fit()
            np.testing.assert_allclose(er.coefficients[j, others], res.params[1:], rtol=1e-10)
            np.testing.assert_allclose(er.intercepts[j], res.params[0], rtol=1e-10)
            # statsmodels' scale is SSR / (T - n): n - 1 slopes plus the intercept
            np.testing.assert_allclose(er.residual_variance_unbiased[j], res.scale, rtol=1e-10)
            np.testing.assert_allclose(er.residual_variance[j], res.ssr / (t - 1), rtol=1e-10)
            np.testing.assert_allclose(er.r_squared[j], res.rsquared, rtol=1e-10)

    def test_longley_certified_coefficients_through_merged_blocks(self):
        # NIST StRD Longley certified values, as reproduced in statsmodels' own test results
        # (statsmodels/regression/tests/results/results_regression.py, class Longley);
        # data: statsmodels.datasets.longley (ships the NIST data).
        certified = {
            "GNPDEFL": 15.0618722713733, "GNP": -0.358191792925910e-01, "UNEMP": -2.02022980381683,
            "ARMED": -1.03322686717359, "POP": -0.511041056535807e-01, "YEAR": 1829.15146461355,
        }
        certified_intercept = -3482258.63459582
        certified_scale = 92936.0061673238  # residual variance, same source
        df = sm.datasets.longley.load_pandas().data
        names = list(df.columns)
        x = df.to_numpy(dtype=float)
        blocks = [moments_of(x[i:i + 4]) for i in range(0, len(x), 4)]
        for m in (merge_all(blocks), MomentTree(blocks).query(0, len(blocks))):
            er = elementary_regressions(m.covariance(), names=names, count=m.count, mean=m.mean)
            j = names.index("TOTEMP")
            for var, value in certified.items():
                got = er.coefficients[j, names.index(var)]
                lre = -np.log10(abs(got - value) / abs(value))
                assert lre >= 11, (var, got, value, lre)
            assert -np.log10(abs(er.intercepts[j] - certified_intercept) / abs(certified_intercept)) >= 10
            assert -np.log10(abs(er.residual_variance_unbiased[j] - certified_scale) / certified_scale) >= 10

    def test_relation_rows_are_rows_of_the_inverse_scaled_to_one(self):
        x = _data(2)
        s = np.cov(x.T)
        er = elementary_regressions(s, names=list("abcd"))
        p = np.linalg.inv(s)
        np.testing.assert_allclose(er.relations, p / np.diag(p)[:, None], rtol=1e-10)
        np.testing.assert_allclose(er.residual_variance, 1.0 / np.diag(p), rtol=1e-10)

    def test_normalised_sets_reference_coefficient_to_one(self):
        er = elementary_regressions(np.cov(_data(3).T), names=list("abcd"))
        a = er.normalised("c")
        np.testing.assert_allclose(a[:, 2], 1.0)
        # same relations, only rescaled
        np.testing.assert_allclose(a * er.relations[:, [2]], er.relations, rtol=1e-12)

    def test_singular_covariance_reports_exact_relation_instead_of_failing(self):
        rng = np.random.default_rng(4)
        z = rng.normal(size=(50, 3))
        x = np.column_stack([z[:, 0], z[:, 1], 2 * z[:, 0] - 3 * z[:, 1], z[:, 2]])
        er = elementary_regressions(np.cov(x.T), names=["p", "q", "r", "s"])
        assert er.singular and er.rank == 3
        assert "rank 3 of 4" in er.singular_reason
        assert er.exact_relations.shape == (1, 4)
        truth = np.array([2.0, -3.0, -1.0, 0.0]) / np.sqrt(14.0)
        assert abs(abs(er.exact_relations[0] @ truth) - 1) < 1e-12
        # the reduced form solves for one variable of the relation
        piv = er.exact_pivots[0]
        np.testing.assert_allclose(er.exact_normalised[0], truth / truth[piv], atol=1e-10)
        # p, q, r enter the exact relation: residual variance 0
        assert er.residual_variance[:3].tolist() == [0.0, 0.0, 0.0]
        # s is in none: its residual variance is that of the (unique) least-squares fit on p, q, r;
        # reference: statsmodels OLS on p, q (r is redundant) with intercept, SSR / (T - 1)
        res = sm.OLS(x[:, 3], sm.add_constant(x[:, :2])).fit()
        np.testing.assert_allclose(er.residual_variance[3], res.ssr / (len(x) - 1), rtol=1e-8)
        assert np.isnan(er.relations).all()

    def test_constant_variable_is_reported_as_exact_relation(self):
        rng = np.random.default_rng(5)
        x = np.column_stack([rng.normal(size=30), np.full(30, 7.0), rng.normal(size=30)])
        er = elementary_regressions(np.cov(x.T), names=["a", "b", "c"])
        assert er.singular
        assert "b constant" in er.singular_reason
        np.testing.assert_allclose(np.abs(er.exact_relations[0]), [0, 1, 0], atol=1e-12)

    def test_near_singular_covariance_warns_with_condition_and_window(self):
        rng = np.random.default_rng(6)
        z = rng.normal(size=(100, 2))
        x = np.column_stack([z, z[:, 0] + z[:, 1] + 1e-6 * rng.normal(size=100)])
        with pytest.warns(IllConditionedWarning, match="window 'w3'.*condition number") as rec:
            er = elementary_regressions(np.cov(x.T), names=list("abc"), label="w3")
        w = rec[0].message
        assert w.window == "w3" and w.condition == pytest.approx(er.condition_correlation)
        assert not er.singular

    def test_well_conditioned_covariance_does_not_warn(self):
        with warnings.catch_warnings():
            warnings.simplefilter("error")
            elementary_regressions(np.cov(_data(7).T), names=list("abcd"))

    def test_to_dict_is_json_ready_and_to_frame_has_one_row_per_regression(self):
        m = moments_of(_data(8))
        er = elementary_regressions(m.covariance(), names=list("abcd"), count=m.count, mean=m.mean)
        d = er.to_dict()
        json.dumps(d, allow_nan=False)
        assert d["names"] == list("abcd")
        df = er.to_frame()
        assert list(df.index) == list("abcd")
        assert df.loc["a", "b"] == pytest.approx(er.coefficients[0, 1])

    def test_bad_names_give_one_paragraph_error_naming_the_key(self):
        with pytest.raises(OptionsError, match="names has 2 entries but cov has 3") as exc:
            elementary_regressions(np.eye(3), names=["a", "b"])
        assert exc.value.key == "names" and exc.value.fix

    def test_asymmetric_matrix_is_rejected(self):
        with pytest.raises(OptionsError, match="not symmetric"):
            elementary_regressions(np.array([[1.0, 0.5], [0.1, 1.0]]), names=["a", "b"])


class TestChooseReference:
    def test_avoids_variable_with_near_zero_coefficient(self):
        # x3 is nearly independent of the others: every relation other than its own has a tiny x3 entry
        rng = np.random.default_rng(9)
        f = rng.normal(size=(500, 1))
        x = np.column_stack([f + 0.3 * rng.normal(size=(500, 1)), f + 0.3 * rng.normal(size=(500, 1)),
                             rng.normal(size=(500, 1))])
        er = elementary_regressions(np.cov(x.T), names=["a", "b", "c"])
        ref = choose_reference(er)
        assert ref != 2
        assert np.all(np.isfinite(er.normalised(ref)))

    def test_score_is_the_largest_smallest_share(self):
        er = elementary_regressions(np.cov(_data(10).T), names=list("abcd"))
        a = er.relations * er.std
        a = a / np.linalg.norm(a, axis=1, keepdims=True)
        scores = np.abs(a).min(axis=0)
        assert choose_reference(er) == int(np.argmax(scores))

    def test_choice_does_not_depend_on_units(self):
        x = _data(11)
        er1 = elementary_regressions(np.cov(x.T), names=list("abcd"))
        er2 = elementary_regressions(np.cov((x * [1e3, 1e-2, 1.0, 50.0]).T), names=list("abcd"))
        assert choose_reference(er1) == choose_reference(er2)
