"""The lean granule builder gives the numbers of the first one (tests/granule_oracle.py) bit for bit."""

from __future__ import annotations

import numpy as np
import pytest

from relspan.data.blocks import GranuleBuilder

from granule_oracle import OracleGranuleBuilder


def _feed(builder, y, chunk, times=None):
    for s in range(0, y.shape[0], chunk):
        pos = np.arange(s, min(s + chunk, y.shape[0]), dtype=np.int64)
        builder.push(y[pos] - y[0], pos, pos + 3, None if times is None else times[pos])
    return builder.finish(y[0])


def _same(a, b):
    ta, tb = a.table, b.table
    assert a.rows_per_granule == b.rows_per_granule and len(a) == len(b)
    for name in ("counts", "means", "comoments", "first_pos", "last_pos", "first_source_row",
                 "last_source_row", "origin"):
        assert np.array_equal(getattr(ta, name), getattr(tb, name)), name
    if ta.first_time is None:
        assert tb.first_time is None
    else:
        assert np.array_equal(ta.first_time, tb.first_time)
        assert np.array_equal(ta.last_time, tb.last_time)


@pytest.mark.parametrize("n", [1, 2, 4, 7])
@pytest.mark.parametrize("cap,chunk", [(40, 33), (64, 500), (8, 7), (1000, 129)])
def test_granules_equal_the_first_builder_bit_for_bit(n, cap, chunk):
    rng = np.random.default_rng(n * 1000 + cap)
    t = 3001
    y = rng.normal(size=(t, n)) * rng.uniform(0.01, 100, size=n) + rng.uniform(-1e6, 1e6, size=n)
    cuts = np.sort(rng.choice(t, size=25, replace=False))

    def keys(p, _t):
        return np.column_stack([np.searchsorted(cuts, p, side="right"), p // 700])

    lean = _feed(GranuleBuilder(n, keys, timed=False, cap=cap), y, chunk)
    first = _feed(OracleGranuleBuilder(n, keys, timed=False, cap=cap), y, chunk)
    assert lean.rows_per_granule > 1 or cap == 1000
    _same(lean, first)


def test_timed_granules_cut_at_calendar_buckets_as_before():
    rng = np.random.default_rng(5)
    t = 2000
    y = rng.normal(size=(t, 3)) + 50.0
    times = np.datetime64("2001-01-01T00", "h") + np.arange(t) * np.timedelta64(7, "h")

    def keys(p, tt):
        return (tt.astype("datetime64[W]").astype(np.int64) // 3)[:, None]

    lean = _feed(GranuleBuilder(3, keys, timed=True, cap=50), y, 77, times)
    first = _feed(OracleGranuleBuilder(3, keys, timed=True, cap=50), y, 77, times)
    _same(lean, first)
    assert lean.table.means_lo is None   # granules carry no low parts
