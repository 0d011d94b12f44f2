"""All windows' elementary regressions in one batched call give the one-window results.

Bound (stated here, checked below): eigenvalue-based fields (rank, condition numbers, std) are
identical; relations, coefficients, residual variances, R^2 and intercepts agree with
:func:`elementary_regressions` window by window to ``ULPS`` units in the last place of the
largest entry of their row, times the correlation-scale condition number over 1e6 when that is
larger (the first inverse is found by LU instead of Cholesky; both are refined against the
double-double covariance, which leaves a few ulp times the condition). A window whose a-priori
error bound (``inverse_error_bound``: 2 n (n + 3) cond u) is at most ``REFINE_ABOVE_ERROR`` keeps
its float64 inverse unrefined in the stack: there each array agrees with the refined one-window
result within that bound times the array's largest magnitude (the reference of the published
quantum, ``relspan.precision``).
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest

from relspan.analysis import elementary as elementary_module
from relspan.analysis.elementary import (REFINE_ABOVE_ERROR, elementary_regressions, elementary_regressions_stack,
                                         inverse_error_bound)
from relspan.analysis.window import WindowOptions, analyse_window
from relspan.data import prepare_frame
from relspan.errors import IllConditionedWarning
from relspan.spec.model import Span, WindowPlanSpec

from test_elementary import _lre, longley_exact  # noqa: F401  (fixture)

sm = pytest.importorskip("statsmodels.api")

ULPS = 8


def _close(a, b, cond, unrefined=0.0):
    a, b = np.asarray(a, float), np.asarray(b, float)
    assert np.array_equal(np.isnan(a), np.isnan(b))
    if np.isnan(b).all():
        return
    scale = np.max(np.abs(np.nan_to_num(b)), axis=-1, keepdims=True) if b.ndim else np.abs(b)
    bound = ULPS * np.spacing(scale) * max(1.0, cond / 1e6)
    if unrefined:   # the a-priori bound, relative to the array's largest magnitude
        bound = np.maximum(bound, unrefined * np.max(np.abs(np.nan_to_num(b))))
    diff = np.abs(np.nan_to_num(a) - np.nan_to_num(b))
    assert np.all(diff <= bound), float(np.max(diff / np.spacing(scale)))


def _compare(stack, one):
    assert stack.rank == one.rank and stack.singular == one.singular
    assert stack.condition == one.condition and stack.condition_correlation == one.condition_correlation
    assert np.array_equal(stack.std, one.std) and stack.count == one.count
    assert stack.singular_reason == one.singular_reason
    cond = one.condition_correlation if np.isfinite(one.condition_correlation) else 1.0
    bound = float(inverse_error_bound(cond, one.n)) if not one.singular else 0.0
    unrefined = bound if bound <= REFINE_ABOVE_ERROR else 0.0
    for name in ("relations", "coefficients", "residual_variance", "r_squared", "intercepts",
                 "residual_variance_unbiased"):
        a, b = getattr(stack, name), getattr(one, name)
        if b is None:
            assert a is None
            continue
        _close(a, b, cond, unrefined)
    assert np.array_equal(stack.exact_relations, one.exact_relations)


def _windows(seed, w=60, n=5, t=80):
    rng = np.random.default_rng(seed)
    covs, los, means, counts = [], [], [], []
    for i in range(w):
        x = rng.normal(size=(t, n)) @ rng.normal(size=(n, n)) * rng.uniform(1e-3, 1e3, n) + rng.normal(0, 1e4, n)
        if i % 7 == 3:   # nearly collinear: a large condition number
            x[:, 0] = x[:, 1] - 2 * x[:, 2]
            x[:, 0] += 1e-6 * rng.normal(size=t) * x[:, 0].std()
        if i % 11 == 5:  # exactly collinear: singular, handed to the one-window function
            x[:, -1] = 2.0 * x[:, 0]
        covs.append(np.cov(x.T))
        los.append(rng.normal(size=(n, n)) * 1e-17 * np.abs(covs[-1]))
        means.append(x.mean(axis=0))
        counts.append(t)
    return np.array(covs), np.array(los), np.array(means), np.array(counts)


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_stack_matches_the_one_window_function_within_the_stated_bound(seed):
    covs, los, means, counts = _windows(seed)
    names = [f"x{i}" for i in range(covs.shape[1])]
    stack = elementary_regressions_stack(covs, names=names, counts=counts, means=means, cov_los=los)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", IllConditionedWarning)
        for i in range(covs.shape[0]):
            one = elementary_regressions(covs[i], names=names, count=int(counts[i]), mean=means[i],
                                         cov_lo=los[i])
            _compare(stack[i], one)
    assert any(er.singular for er in stack) and not all(er.singular for er in stack)


def test_stack_refines_only_windows_whose_error_bound_exceeds_the_cut(monkeypatch):
    covs, los, means, counts = _windows(4, w=120)
    names = [f"x{i}" for i in range(covs.shape[1])]
    refined = []
    real = elementary_module._refined_inverse_stack
    monkeypatch.setattr(elementary_module, "_refined_inverse_stack",
                        lambda s, lo, pr, d: (refined.append(len(s)), real(s, lo, pr, d))[1])
    stack = elementary_regressions_stack(covs, names=names, counts=counts, means=means, cov_los=los)
    above = [er for er in stack if not er.singular
             and inverse_error_bound(er.condition_correlation, er.n) > REFINE_ABOVE_ERROR]
    assert 0 < len(above) < sum(not er.singular for er in stack)   # both kinds occur here
    assert sum(refined) == len(above)


def test_stack_warns_like_the_one_window_function_only_when_asked():
    covs, los, means, counts = _windows(3, w=15)
    names = [f"x{i}" for i in range(covs.shape[1])]
    labels = [f"w{i}" for i in range(covs.shape[0])]
    with warnings.catch_warnings(record=True) as quiet:
        warnings.simplefilter("always")
        elementary_regressions_stack(covs, names=names, labels=labels)
    assert not [w for w in quiet if issubclass(w.category, IllConditionedWarning)]
    with warnings.catch_warnings(record=True) as loud:
        warnings.simplefilter("always")
        elementary_regressions_stack(covs, names=names, labels=labels, warn=True)
    with warnings.catch_warnings(record=True) as one:
        warnings.simplefilter("always")
        for i in range(covs.shape[0]):
            elementary_regressions(covs[i], names=names, label=labels[i])
    said = [str(w.message) for w in loud if issubclass(w.category, IllConditionedWarning)]
    assert said and said == [str(w.message) for w in one if issubclass(w.category, IllConditionedWarning)]


def test_longley_slopes_reach_lre_12_through_the_stack(longley_exact):  # noqa: F811
    # references: exact rational least squares of the NIST StRD Longley data (fixture in
    # test_elementary.py), which reproduce the NIST certified TOTEMP regression
    df, names, slopes = longley_exact
    plans = [WindowPlanSpec("full", "full"),
             WindowPlanSpec("r", "rolling", width=Span(16, "rows"), step=Span(4, "rows"))]
    prepared = prepare_frame(df, columns=names, plans=plans, chunk_rows=5)
    m = prepared.full
    hi, lo = m.covariance_parts()
    er = elementary_regressions_stack(hi[None], cov_los=lo[None], names=names, counts=[m.count],
                                      means=m.mean[None])[0]
    lre = {key: _lre(er.coefficients[key], v) for key, v in slopes.items()}
    assert min(lre.values()) >= 12
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", IllConditionedWarning)
        one = elementary_regressions(hi, cov_lo=lo, names=names, count=m.count, mean=m.mean)
    _compare(er, one)


def test_window_analysis_from_a_precomputed_result_equals_computing_it():
    covs, los, means, counts = _windows(4, w=6, n=4)
    from relspan.analysis.moments import Moments
    names = list("abcd")
    opts = WindowOptions(assumptions=("elementary", "equal", "bounded"), absolute=None, relative=0.05,
                         ref=0, coranks=(1,))
    for i in range(6):
        m = Moments(int(counts[i]), means[i], covs[i] * (counts[i] - 1))
        hi, lo = m.covariance_parts()
        er = elementary_regressions_stack(hi[None], cov_los=lo[None], names=names,
                                          counts=[m.count], means=m.mean[None], labels=["w"])[0]
        with warnings.catch_warnings(record=True) as a:
            warnings.simplefilter("always")
            given = analyse_window(m, names=names, options=opts, common_std=np.ones(4), label="w",
                                   elementary=er)
        with warnings.catch_warnings(record=True) as b:
            warnings.simplefilter("always")
            computed = analyse_window(m, names=names, options=opts, common_std=np.ones(4), label="w")
        assert given.notes == computed.notes
        assert [str(w.message) for w in a] == [str(w.message) for w in b]
        assert given.coranks == computed.coranks
        _compare(given.elementary, computed.elementary)


def test_stack_results_are_the_objects_the_keyword_constructor_builds():
    """The stack fills each result's fields directly (for speed); it must be the same object."""
    import dataclasses

    rng = np.random.default_rng(11)
    x = rng.normal(size=(400, 4)) + np.array([5.0, -2.0, 30.0, 0.5])
    covs = np.stack([np.cov(x[a:a + 100], rowvar=False) for a in range(0, 300, 50)])
    means = np.stack([x[a:a + 100].mean(axis=0) for a in range(0, 300, 50)])
    got = elementary_regressions_stack(covs, names=list("abcd"), counts=[100] * len(covs), means=means)
    for er in got:
        fields = {f.name: getattr(er, f.name) for f in dataclasses.fields(er)}
        rebuilt = type(er)(**fields)
        for name, value in fields.items():
            other = getattr(rebuilt, name)
            if isinstance(value, np.ndarray):
                assert np.array_equal(value, other), name
            else:
                assert value == other and type(value) is type(other), name
        with pytest.raises(dataclasses.FrozenInstanceError):
            er.rank = 0   # still frozen
    with pytest.raises(TypeError):
        elementary_module._complete(1, 2, 3)


def test_singular_windows_take_their_null_vectors_from_the_smallest_eigenvalues():
    """Rank from the eigenvalues alone; the exact relation from eigh's matching columns."""
    rng = np.random.default_rng(12)
    x = rng.normal(size=(200, 3))
    x = np.column_stack([x, x[:, 0] - 2.0 * x[:, 2]])     # an exact relation: a - 2c - d = 0
    one = elementary_regressions(np.cov(x, rowvar=False), names=list("abcd"))
    assert one.rank == 3 and one.singular
    a = one.exact_relations[0] / one.exact_relations[0][0]
    assert np.allclose(a, [1.0, 0.0, -2.0, -1.0], atol=1e-9)
