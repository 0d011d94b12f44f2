"""The in-place block reduction gives the bits of its first version (``tests/dd_oracle.py``).

Data are invented for the tests (seeded): blocks near zero, far from zero (1e8 + noise, where
every digit of the deviations matters), of lengths 1 to 5,000, and columns so large that the
split is out of range.
"""

from __future__ import annotations

import numpy as np
import pytest

from relspan.analysis._dd import exact_comoment

from dd_oracle import exact_comoment_oracle


def _same(got, want) -> None:
    for g, w in zip(got, want, strict=True):
        assert g.shape == w.shape
        assert np.array_equal(g, w, equal_nan=True), np.max(np.abs(g - w))


@pytest.mark.parametrize("length", [1, 2, 3, 8, 64, 333, 5000])
@pytest.mark.parametrize("offset", [0.0, 1e8, -3e5])
def test_stacked_blocks_give_the_first_versions_bits(length, offset):
    rng = np.random.default_rng(length * 7 + int(abs(offset)) % 97)
    y = offset + rng.normal(size=(5, length, 4)) * np.array([1e-3, 1.0, 250.0, 3e4])
    _same(exact_comoment(y), exact_comoment_oracle(y))


def test_one_block_gives_the_first_versions_bits():
    rng = np.random.default_rng(3)
    y = 1e8 + rng.normal(size=(777, 6))
    _same(exact_comoment(y), exact_comoment_oracle(y))


def test_the_input_rows_are_left_unchanged():
    rng = np.random.default_rng(4)
    y = 10 + rng.normal(size=(3, 50, 3))
    copy = y.copy()
    exact_comoment(y)
    assert np.array_equal(y, copy)


def test_columns_beyond_the_split_range_give_the_first_versions_bits():
    rng = np.random.default_rng(5)
    y = rng.normal(size=(2, 40, 3)) * np.array([1.0, 1e300, 1e-3])
    with np.errstate(over="ignore", invalid="ignore"):
        _same(exact_comoment(y), exact_comoment_oracle(y))
