"""The driver adds the spec location to errors the analysis raises about its own parameters."""

from __future__ import annotations

import numpy as np
import pytest

from relspan.analysis.moments import moments_of
from relspan.analysis.window import WindowOptions
from relspan.errors import OptionsError
from relspan.run.pipeline import _analyse_task


def test_frisch_starts_out_of_range_is_reported_at_checks_frisch_starts():
    rng = np.random.default_rng(0)
    x = rng.standard_normal((40, 3)) * 10.0
    options = WindowOptions(assumptions=("diagonal",), absolute=None, relative=0.05, ref=0,
                            coranks=(1, 2), frisch_starts=0)
    item = (moments_of(x), ("a", "b", "c"), options, x.std(axis=0, ddof=1), "full")
    with pytest.raises(OptionsError, match=r"starts must be a whole number >= 1") as e:
        _analyse_task(item)
    assert e.value.key == "checks.frisch_starts"
    assert isinstance(e.value.__cause__, OptionsError) and e.value.__cause__.key == "starts"


def test_absolute_tolerance_larger_than_one_reaches_the_diagonal_analysis_converted():
    # issue 12 item 1: {absolute: 5} on variances near 100 was read as eps = 5 on the
    # correlation scale and refused with "eps must be in (0, 1)"
    rng = np.random.default_rng(0)
    x = rng.standard_normal((40, 3)) * 10.0
    options = WindowOptions(assumptions=("diagonal",), absolute=5.0, relative=None, ref=0,
                            coranks=(1, 2))
    item = (moments_of(x), ("a", "b", "c"), options, x.std(axis=0, ddof=1), "full")
    out = _analyse_task(item)
    wa = out[0] if isinstance(out, tuple) else out
    v = np.diag(np.cov(x.T))
    assert wa.diagonal.eps == pytest.approx(5.0 / v.max(), rel=1e-12)
    assert wa.diagonal.corank.eps_impossible == pytest.approx(5.0 / v.min(), rel=1e-12)
