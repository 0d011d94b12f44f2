"""Tests of relspan.analysis.elementary (elementary regressions)."""

from __future__ import annotations

import json
import warnings
from fractions import Fraction

import numpy as np
import pytest

from relspan.analysis.elementary import choose_reference, elementary_regressions
from moment_oracles import MomentTree

from relspan.analysis.moments import merge_all, moments_of
from relspan.analysis.window import WindowOptions, analyse_window
from relspan.data import prepare_frame
from relspan.errors import IllConditionedWarning, OptionsError
from relspan.spec.model import Span, WindowPlanSpec

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
        # NIST StRD Longley certified values, as shipped in statsmodels' own test results
        # (statsmodels/regression/tests/results/results_regression.py, class Longley);
        # data: statsmodels.datasets.longley (ships the NIST data).
        nist = pytest.importorskip("statsmodels.regression.tests.results.results_regression")
        cert = nist.Longley()
        certified = dict(zip(["GNPDEFL", "GNP", "UNEMP", "ARMED", "POP", "YEAR"], cert.params[:6]))
        certified_intercept = cert.params[6]
        certified_scale = cert.scale  # residual variance, same source
        df = sm.datasets.longley.load_pandas().data
        names = list(df.columns)
        x = df.to_numpy(dtype=float)
        blocks = [moments_of(x[i:i + 4]) for i in range(0, len(x), 4)]
        for m in (merge_all(blocks), MomentTree(blocks).query(0, len(blocks))):
            hi, lo = m.covariance_parts()
            er = elementary_regressions(hi, cov_lo=lo, names=names, count=m.count, mean=m.mean)
            j = names.index("TOTEMP")
            for var, value in certified.items():
                assert _lre(er.coefficients[j, names.index(var)], value) >= 12, var
            assert _lre(er.intercepts[j], certified_intercept) >= 10
            assert _lre(er.residual_variance_unbiased[j], certified_scale) >= 10

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


def _lre(got: float, exact: float) -> float:
    """Log relative error, the StRD accuracy measure (digits that agree; 17 when equal)."""
    err = abs(float(got) - float(exact))
    return 17.0 if err == 0 else -np.log10(err / abs(float(exact)))


def _solve_exact(a: list, b: list) -> list:
    """Gauss-Jordan elimination in rational arithmetic (a is nonsingular)."""
    m = len(b)
    rows = [list(r) + [b[i]] for i, r in enumerate(a)]
    for c in range(m):
        p = next(r for r in range(c, m) if rows[r][c] != 0)
        rows[c], rows[p] = rows[p], rows[c]
        for r in range(m):
            if r != c and rows[r][c] != 0:
                f = rows[r][c] / rows[c][c]
                rows[r] = [u - f * v for u, v in zip(rows[r], rows[c])]
    return [rows[i][m] / rows[i][i] for i in range(m)]


@pytest.fixture(scope="module")
def longley_exact():
    """The Longley data and the exact OLS slopes of each variable on the other six.

    Data: statsmodels.datasets.longley (the NIST StRD file). Its values are
    short decimals, and each float's shortest repr is that decimal, so
    ``Fraction(repr(v))`` is the datum exactly; least squares with an
    intercept is then solved in rational arithmetic (normal equations on the
    centred data, exact): a reference computed here, no rounding anywhere.
    """
    df = sm.datasets.longley.load_pandas().data
    names = list(df.columns)
    x = [[Fraction(repr(float(v))) for v in row] for row in df.to_numpy(dtype=float)]
    t, n = len(x), len(names)
    mean = [sum(r[k] for r in x) / t for k in range(n)]
    dev = [[r[k] - mean[k] for k in range(n)] for r in x]
    c = [[sum(r[i] * r[k] for r in dev) for k in range(n)] for i in range(n)]
    slopes = {}
    for j in range(n):
        o = [k for k in range(n) if k != j]
        beta = _solve_exact([[c[i][k] for k in o] for i in o], [c[i][j] for i in o])
        slopes.update({(j, k): b for k, b in zip(o, beta)})
    return df, names, slopes


class TestLongleyAccuracy:
    """NIST StRD Longley: all 7 elementary regressions (42 slopes) to 12 digits or more."""

    def test_exact_rational_slopes_reproduce_the_nist_certified_totemp_regression(self, longley_exact):
        # NIST StRD Longley certified values (15 significant digits), as shipped in statsmodels'
        # test results (statsmodels/regression/tests/results/results_regression.py, class Longley)
        nist = pytest.importorskip("statsmodels.regression.tests.results.results_regression")
        _, names, slopes = longley_exact
        for k, value in zip(range(1, 7), nist.Longley().params[:6]):
            assert _lre(slopes[(0, k)], value) >= 14, names[k]

    @pytest.mark.parametrize(("kind", "width", "step", "sizes"), [
        ("rolling", 16, 1, [1] * 16), ("rolling", 16, 2, [2] * 8), ("rolling", 16, 4, [4] * 4),
        ("rolling", 16, 8, [8, 8]), ("rolling", 16, 16, [16]), ("expanding", 10, 6, [2] * 8),
        ("expanding", 12, 4, [4] * 4)])
    def test_all_42_slopes_reach_lre_12_through_blocks_and_the_window_analysis(
            self, longley_exact, kind, width, step, sizes):
        # references: exact rational least squares (fixture) for all 7 regressions; for TOTEMP
        # these agree with the NIST StRD certified values (test above)
        df, names, slopes = longley_exact
        # blocks are cut where a window of the rolling plan starts or ends
        plans = [WindowPlanSpec("full", "full"),
                 WindowPlanSpec("r", kind, width=Span(width, "rows"), step=Span(step, "rows"))]
        prepared = prepare_frame(df, columns=names, plans=plans, chunk_rows=5)
        assert prepared.blocks.counts.tolist() == sizes
        opts = WindowOptions(assumptions=("elementary",), absolute=None, relative=0.05, ref=0,
                             coranks=(1,))
        plan = prepared.plan("r")
        whole = [m for w, m in zip(plan.windows, plan.moments) if w.rows == 16]
        assert len(whole) == 1
        for m in [prepared.full] + whole:  # the full sample, and the plan's window of every row
            assert m.count == 16
            with warnings.catch_warnings():
                warnings.simplefilter("ignore", IllConditionedWarning)
                er = analyse_window(m, names=names, options=opts,
                                    common_std=np.ones(len(names))).elementary
            lre = {key: _lre(er.coefficients[key], v) for key, v in slopes.items()}
            assert len(lre) == 42
            worst = min(lre, key=lre.get)
            assert lre[worst] >= 12, (worst, lre[worst])


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
