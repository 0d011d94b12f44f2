"""The JSON-ready export of results (``relspan.analysis._export.jsonable``).

Invented values only. The reference is the element-by-element walk the function did before its
array fast path: the same values, of the same Python types, for every kind of input.
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest

from relspan.analysis._export import jsonable


def _walk(x):
    """The element-by-element conversion (before the fast path), kept here as the reference."""
    if isinstance(x, np.ndarray):
        return [_walk(v) for v in x.tolist()] if x.ndim else _walk(x.item())
    if isinstance(x, (list, tuple)):
        return [_walk(v) for v in x]
    if isinstance(x, dict):
        return {str(k): _walk(v) for k, v in x.items()}
    if isinstance(x, (bool, np.bool_)):
        return bool(x)
    if isinstance(x, (int, np.integer)):
        return int(x)
    if isinstance(x, (float, np.floating)):
        v = float(x)
        return v if math.isfinite(v) else None
    if hasattr(x, "to_dict") and not isinstance(x, type):
        return x.to_dict()
    return x


class _Result:
    def to_dict(self):
        return {"a": 1}


def _typed(x):
    """The value with every leaf's type beside it (so 1 and 1.0 and True differ)."""
    if isinstance(x, list):
        return ["list", [_typed(v) for v in x]]
    if isinstance(x, dict):
        return ["dict", {k: _typed(v) for k, v in x.items()}]
    return [type(x).__name__, x]


RNG = np.random.default_rng(20261205)  # invented values
CASES = [
    RNG.standard_normal((3, 4)),
    RNG.standard_normal(5).astype(np.float32),
    np.array([1.0, np.nan, -np.inf, np.inf, 2.5]),
    np.array([[1.0, 2.0], [np.nan, 3.0]]),
    np.array(2.5), np.array(np.nan), np.array(3), np.array(True),
    np.arange(6, dtype=np.int64).reshape(2, 3), np.arange(4, dtype=np.uint8), np.array([2**63 + 5], dtype=np.uint64),
    np.array([True, False]),
    np.zeros((0, 3)), np.zeros(0, dtype=int),
    np.array([1.5, None, "x"], dtype=object),
    np.array([1 + 2j]),
    [np.float64(1.5), np.int32(3), np.bool_(False), float("nan"), float("inf"), 1, True, None, "s"],
    {"a": np.array([1.0, np.nan]), 3: (np.float32(0.25), _Result()), "b": {"c": np.array([[1, 2]])}},
    _Result(), 7, 2.0, -0.0, float("-inf"), "text", None, True, np.float64(np.nan), np.int8(-4),
]


@pytest.mark.parametrize("value", CASES, ids=range(len(CASES)))
def test_same_values_and_types_as_the_element_walk(value):
    got, ref = jsonable(value), _walk(value)
    assert _typed(got) == _typed(ref)
    if not (isinstance(value, np.ndarray) and value.dtype.kind == "c"):  # complex values pass through both
        assert json.dumps(got) == json.dumps(ref)


def test_plain_arrays_come_out_as_plain_python():
    out = jsonable(np.array([[1.0, 2.0], [3.0, np.inf]]))
    assert out == [[1.0, 2.0], [3.0, None]] and all(type(v) is float for v in out[0])
    assert type(jsonable(np.float32(0.5))) is float and type(jsonable(np.int64(2))) is int
