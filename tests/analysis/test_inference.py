"""Inference wired into the window analysis: coranks decided by tests, intervals, supports, outer sets.

All data are invented and seeded here; outside references are named beside each check.
"""

from __future__ import annotations

import numpy as np
import pytest

from relspan.analysis.inference import (ResamplingOptions, equal_noise_corank_rule, imbens_manski_critical,
                                        imbens_manski_outer, window_inference)
from relspan.analysis.moments import Moments
from relspan.analysis.resample import GranuleStats
from relspan.analysis.window import WindowOptions, analyse_window

NAMES = ("x1", "x2", "x3", "x4", "x5")


def _issue_case(seed: int = 11, rows: int = 2000):
    """Five variables, two exact relations, noise sigma^2 I about 7% of each variance."""
    rng = np.random.default_rng(seed)
    load = rng.normal(size=(5, 3))
    load /= np.linalg.norm(load, axis=1, keepdims=True)     # every signal variance 1
    clean = rng.normal(size=(rows, 3)) @ load.T               # rank 3: two exact relations
    return clean + np.sqrt(0.075) * rng.normal(size=(rows, 5)), load


def _analyse(x, *, resamples=199, assumptions=("elementary", "equal", "bounded"), diagonal=0):
    opts = WindowOptions(assumptions=assumptions, absolute=None, relative=0.05, ref=0, coranks=(1, 2, 3, 4))
    stats = GranuleStats.from_rows(x, ordered=False)
    c, mean, cm = stats.window_moments()
    m = Moments(count=int(c), mean=mean, comoment=cm)
    res = ResamplingOptions(resamples=resamples, level=0.90, scheme="iid", seed=3, diagonal_resamples=diagonal)
    return analyse_window(m, names=NAMES[: x.shape[1]], options=opts, common_std=x.std(axis=0, ddof=1),
                          label="test", granules=stats, resampling=res, seed_key=("d", "p", 0))


def test_issue_case_equal_noise_corank_is_two_by_the_eigenvalue_equality_test():
    x, _ = _issue_case()
    w = _analyse(x)
    lam = np.linalg.eigvalsh(np.corrcoef(x.T))
    assert lam[0] > 0.05 and lam[1] > 0.05            # both above the tolerance: counting gave 0
    from relspan.analysis.equal_test import equal_noise_corank
    # the test alone (no tolerance) accepts two equal smallest eigenvalues and rejects three
    assert equal_noise_corank(np.corrcoef(x.T), nobs=2000, scale="correlation").corank == 2
    assert w.coranks["equal"] == 2
    support = w.inference.coranks["equal"]
    # the most supported corank is 2 (bootstrap eigenvalues scatter more than the test expects, so some
    # resamples reject equality: the support says so rather than hiding it)
    assert support.estimate == 2 and support.support(2) == max(support.chosen_share) and support.support(2) > 0.5
    assert "2: in" in support.as_text()


def test_equal_rule_one_relation_needs_its_noise_within_the_tolerance():
    # a distinct smallest eigenvalue above the tolerance: corank 1 fits any data, so 0 is reported
    assert equal_noise_corank_rule([0.2, 0.9, 1.9], eps=0.05, nobs=500) == 0
    assert equal_noise_corank_rule([0.01, 0.9, 2.09], eps=0.05, nobs=500) == 1


def test_equal_rule_counts_eigenvalues_within_the_tolerance_of_the_smallest_whatever_their_level():
    # 5000 rows: the test rejects 0.20 = 0.24 (ratio 1.2), but they lie within eps = 0.05 of each other,
    # so equal noise up to a deviation of norm eps/2 (Weyl) holds with s^2 = 0.22, well above eps
    lam = [0.20, 0.24, 1.6, 1.96]
    from relspan.analysis.equal_test import sequential_corank
    assert sequential_corank(lam, nobs=5000) == 1
    assert equal_noise_corank_rule(lam, eps=0.05, nobs=5000) == 2
    # near-exact relations with unequal tiny noise (the demo's harbour series look like this)
    assert equal_noise_corank_rule([0.0048, 0.0098, 0.9968, 2.9886], eps=0.05, nobs=144) == 2
    # a gap wider than eps with the test rejecting: only the test decides, and one relation needs l_1 <= eps
    assert equal_noise_corank_rule([0.20, 0.30, 1.6, 1.9], eps=0.05, nobs=5000) == 0
    assert equal_noise_corank_rule([0.01, 0.07, 1.6, 2.32], eps=0.05, nobs=5000) == 1


def test_equal_noise_coefficient_intervals_cover_the_true_reduced_form():
    x, load = _issue_case(seed=5)
    w = _analyse(x)
    inf = w.inference
    targets = [NAMES.index(t) for t in inf.targets[2]]
    # true relations: the null space of load^T (rows a with a @ load = 0), reduced on the same targets
    _, _, vt = np.linalg.svd(load.T)
    a = vt[3:]
    red = np.linalg.solve(a[:, targets], a)
    for c in inf.coefficients[2]:
        i = [NAMES[t] for t in targets].index(c.equation)
        truth = -red[i, NAMES.index(c.variable)]
        assert c.interval.low - 0.05 <= truth <= c.interval.high + 0.05, (c, truth)


def test_elementary_intervals_match_a_statsmodels_ols_interval_in_width():
    sm = pytest.importorskip("statsmodels.api")  # reference library: OLS standard errors
    rng = np.random.default_rng(2)
    x = rng.normal(size=(800, 3))
    x[:, 0] = 0.7 * x[:, 1] - 0.4 * x[:, 2] + 0.5 * rng.normal(size=800)
    w = _analyse(x, resamples=499)
    iv = w.inference.elementary_coefficient("x1", "x2")
    fit = sm.OLS(x[:, 0], sm.add_constant(x[:, 1:])).fit()
    lo, hi = fit.conf_int(alpha=0.10)[1]
    assert iv.estimate == pytest.approx(fit.params[1], rel=1e-9)
    assert (iv.high - iv.low) == pytest.approx(hi - lo, rel=0.25)   # bootstrap vs normal theory


def test_eigenvalue_intervals_bracket_the_estimates_on_the_correlation_scale():
    x, _ = _issue_case()
    w = _analyse(x)
    lam = np.linalg.eigvalsh(np.corrcoef(x.T))
    for iv, l in zip(w.inference.eigenvalues, lam):
        assert iv.low <= l <= iv.high and iv.level == 0.90 and iv.resamples == 199


def test_same_seed_same_numbers_other_window_index_other_numbers():
    x, _ = _issue_case(rows=300)
    a = _analyse(x).inference
    b = _analyse(x).inference
    assert a.eigenvalues == b.eigenvalues
    stats = GranuleStats.from_rows(x, ordered=False)
    kw = dict(names=NAMES, scale="correlation", eps=0.05, ref=0, coranks=(), assumptions=("equal",), nobs=300,
              estimates={"eigenvalues": np.linalg.eigvalsh(np.corrcoef(x.T))})
    opts = ResamplingOptions(resamples=49, scheme="iid", seed=3)
    one = window_inference(stats, options=opts, seed_key=("d", "p", 0), **kw)
    two = window_inference(stats, options=opts, seed_key=("d", "p", 1), **kw)
    assert one.eigenvalues != two.eigenvalues


def test_diagonal_support_and_outer_set_for_one_relation_in_one_orthant():
    rng = np.random.default_rng(4)
    f = rng.normal(size=(600, 1))
    x = f @ np.array([[1.0, 0.8, 0.6]]) + 0.4 * rng.normal(size=(600, 3))
    w = _analyse(x, assumptions=("elementary", "equal", "bounded", "diagonal"), diagonal=19)
    inf = w.inference
    assert inf.coranks["diagonal"].resamples == 19
    assert abs(sum(inf.coranks["diagonal"].chosen_share) + inf.coranks["diagonal"].undetermined_share - 1) < 1e-12
    for o in inf.outer:
        k = NAMES.index(o.variable)
        assert o.lower == pytest.approx(w.frisch_lower[k]) and o.upper == pytest.approx(w.frisch_upper[k])
        assert o.low <= o.lower <= o.upper <= o.high


def test_imbens_manski_critical_value_between_one_and_two_sided_normal_quantiles():
    # Imbens & Manski (2004): c = z_{0.95} = 1.645 for a point, -> z_{0.90} = 1.2816 for a wide set
    # (normal quantiles, handbook values)
    d = np.random.default_rng(0).normal(size=(2, 4000))
    _, _, c_point = imbens_manski_outer(0.0, 0.0, d[0], d[1], level=0.90)
    _, _, c_wide = imbens_manski_outer(0.0, 100.0, d[0], 100 + d[1], level=0.90)
    assert c_point == pytest.approx(1.6449, abs=1e-3)
    assert c_wide == pytest.approx(1.2816, abs=1e-3)


@pytest.mark.parametrize("level", [0.5, 0.8, 0.9, 0.95, 0.99, 0.999])
def test_imbens_manski_critical_value_matches_scipy_brentq(level):
    # reference library: SciPy's brentq on the same equation, run to xtol 1e-15 (its default stops at 2e-12)
    from scipy import optimize
    from scipy.special import ndtr

    widths = np.concatenate([[1e-12, 1e-6, 1e-3], np.linspace(0.01, 10.0, 60), [20.0, 40.0, 100.0, 1e6]])
    for w in widths:
        ref = optimize.brentq(lambda z: ndtr(z + w) - ndtr(-z) - level, 0.0, 10.0, xtol=1e-15)
        assert imbens_manski_critical(float(w), level) == pytest.approx(ref, abs=1e-13), w
    # the two ends: a point (width 0) takes the two-sided quantile
    assert imbens_manski_critical(0.0, level) == pytest.approx(float(optimize.brentq(
        lambda z: ndtr(z) - ndtr(-z) - level, 0.0, 10.0, xtol=1e-15)), abs=1e-13)


def test_imbens_manski_outer_does_not_import_scipy_optimize():
    # about 80 ms of import on every build that reports outer sets (measured); the root is found in-house
    import subprocess
    import sys

    code = ("import sys, numpy as np; from relspan.analysis.inference import imbens_manski_outer; "
            "d = np.random.default_rng(0).normal(size=(2, 50)); "
            "imbens_manski_outer(0.0, 1.0, d[0], 1 + d[1], level=0.9); "
            "print('scipy.optimize' in sys.modules)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout
    assert out.strip() == "False"


def test_resampling_off_leaves_no_inference():
    x, _ = _issue_case(rows=200)
    w = _analyse(x, resamples=0)
    assert w.inference is None


def test_batched_intervals_equal_the_one_column_intervals_bit_for_bit():
    from relspan.analysis.inference import _intervals
    from relspan.analysis.intervals import interval

    rng = np.random.default_rng(11)  # invented draws
    d = rng.standard_normal((199, 7)) * np.logspace(-6, 6, 7)
    d[5, 2] = np.nan           # a column with a failed resample goes through the one-column path
    d[:, 4] = np.inf
    est = rng.standard_normal(7)
    for method in ("percentile", "basic"):
        got = _intervals(est, d, level=0.9, method=method)
        want = [interval(float(est[j]), d[:, j], level=0.9, method=method) for j in range(7)]
        assert [repr(g) for g in got] == [repr(w) for w in want]


def _orthonormal_stack(rng, b, q, n):
    """Invented resampled bases: ``(b, q, n)`` orthonormal rows (QR of random matrices)."""
    return np.swapaxes(np.linalg.qr(rng.standard_normal((b, n, q)))[0], 1, 2)


def test_reduced_forms_equal_reduced_form_stack_bit_for_bit():
    from relspan.analysis.inference import _reduced_forms
    from relspan.analysis.intervals import reduced_form_stack

    rng = np.random.default_rng(21)  # invented bases, both signs of the one-relation rows
    for q, targets in ((1, [2]), (2, [0, 3]), (3, [1, 2, 4])):
        est = _orthonormal_stack(rng, 1, q, 5)[0]
        draws = _orthonormal_stack(rng, 199, q, 5) * rng.choice([-1.0, 1.0], size=(199, 1, 1))
        draws[7, :, targets[0]] = 0.0            # a resample whose target block is singular
        got = _reduced_forms(np.concatenate([est[None], draws]), targets)
        want = reduced_form_stack(np.concatenate([est[None], draws]), targets)
        assert got.shape == want.shape
        assert np.array_equal(got, want, equal_nan=True)
        assert np.isnan(got[8]).all() or q > 1   # the singular one-relation resample gives NaN


def test_reduced_forms_do_not_depend_on_the_basis_chosen_within_each_subspace():
    # (R A)_c^{-1} (R A) = A_c^{-1} A for any invertible R: rotating, reflecting or rescaling each
    # resampled basis within its span (an orthogonal R keeps the rows orthonormal) changes only
    # rounding, which is why the resampled bases are not rotated onto the estimate first
    from relspan.analysis.inference import _reduced_forms

    rng = np.random.default_rng(23)  # invented bases and rotations
    for q, targets in ((2, [0, 3]), (3, [1, 2, 4]), (4, [0, 1, 2, 5])):
        n = 6
        draws = _orthonormal_stack(rng, 99, q, n)
        rot = np.linalg.qr(rng.standard_normal((99, q, q)))[0] * rng.choice([-1.0, 1.0], size=(99, 1, q))
        a = _reduced_forms(draws, targets)
        b = _reduced_forms(rot @ draws, targets)
        np.testing.assert_allclose(b, a, rtol=0, atol=1e-11 * max(1.0, float(np.nanmax(np.abs(a)))))


def _exact_reduced_form(a, targets):
    """``A_c^{-1} A`` of a float matrix in exact rational arithmetic (Gauss-Jordan on the target block)."""
    from fractions import Fraction

    m = [[Fraction(float(x)) for x in row] for row in a]
    for col, t in enumerate(targets):
        piv = next(r for r in range(col, len(m)) if m[r][t] != 0)
        m[col], m[piv] = m[piv], m[col]
        m[col] = [x / m[col][t] for x in m[col]]
        for r in range(len(m)):
            if r != col and m[r][t] != 0:
                f = m[r][t]
                m[r] = [x - f * y for x, y in zip(m[r], m[col])]
    return np.array([[float(x) for x in row] for row in m])


def test_reduced_forms_in_data_units_are_accurate_and_nan_for_a_constant_variable():
    # A = V D^-1 in data units, its reduced form D_c (V_c^-1 V) D^-1 solved on the analysis scale,
    # against exact rational arithmetic on A; standard deviations spread over six decades (the
    # earlier path, QR of A's rows then a solve, was off by up to about 3e-9 of each equation's
    # largest coefficient on these cases); a zero standard deviation gives NaN
    from relspan.analysis.inference import _reduced_forms_in_data_units

    rng = np.random.default_rng(24)  # invented bases and standard deviations
    for q, targets in ((1, [2]), (2, [0, 3]), (3, [1, 2, 4]), (4, [0, 1, 2, 5])):
        v = _orthonormal_stack(rng, 20, q, 6)
        std = 10.0 ** rng.uniform(-3, 3, size=(20, 6))
        std[5, 1] = 0.0
        got = _reduced_forms_in_data_units(v, std, targets)
        assert np.isnan(got[5]).all() and np.isfinite(np.delete(got, 5, axis=0)).all()
        for b in set(range(20)) - {5}:
            want = _exact_reduced_form(v[b] / std[b][None, :], targets)
            scale = np.abs(want).max(axis=1, keepdims=True)
            assert np.all(np.abs(got[b] - want) <= 1e-11 * scale), (q, b)


def test_reduced_forms_keep_the_condition_rule_of_reduced_form_stack():
    from relspan.analysis.inference import _reduced_forms_of_orthonormal
    from relspan.analysis.intervals import reduced_form_stack

    rng = np.random.default_rng(22)  # invented bases; some target blocks nearly or exactly singular
    stack = _orthonormal_stack(rng, 300, 2, 6)
    stack[:40, 1, 0] = stack[:40, 0, 0] * np.logspace(-18, -1, 40)[:, None].ravel()
    stack[:40, 1, 1] = stack[:40, 0, 1] * np.logspace(-18, -1, 40)
    stack[40, :, :2] = 0.0                                 # exactly singular: the general path
    for s in (stack, stack[41:]):
        got = _reduced_forms_of_orthonormal(s, [0, 1])
        want = reduced_form_stack(s, [0, 1])
        assert np.array_equal(got, want, equal_nan=True)
