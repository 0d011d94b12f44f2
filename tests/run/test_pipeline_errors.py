"""The driver adds the spec location to errors the analysis raises about its own parameters."""

from __future__ import annotations

import numpy as np
import pytest

from relspan.analysis.moments import moments_of
from relspan.analysis.window import WindowOptions
from relspan.errors import OptionsError
from relspan.run.pipeline import _analyse_task


def test_frisch_tolerance_out_of_range_is_reported_at_checks_tolerance():
    rng = np.random.default_rng(0)
    x = rng.standard_normal((40, 3)) * 10.0
    options = WindowOptions(assumptions=("diagonal",), absolute=5.0, relative=None, ref=0,
                            coranks=(1, 2))
    item = (moments_of(x), ("a", "b", "c"), options, x.std(axis=0, ddof=1), "full")
    with pytest.raises(OptionsError, match=r"eps .* must be a number in \(0, 1\)") as e:
        _analyse_task(item)
    assert e.value.key == "checks.tolerance"
    assert isinstance(e.value.__cause__, OptionsError) and e.value.__cause__.key == "eps"
