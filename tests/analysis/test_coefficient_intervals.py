"""Coefficient intervals held compactly (relspan.analysis.inference.CoefficientIntervals).

The compact sequence must give back, bit for bit, the CoefficientInterval objects the window's
inference computed before (one object per coefficient); it must pickle, cache and compare like a
tuple of them. All data are invented and seeded here.
"""

from __future__ import annotations

import pickle

import numpy as np
import pytest

from relspan.analysis.inference import (CoefficientInterval, CoefficientIntervals, _coefficient_intervals,
                                        _interval_rows)
from relspan.analysis.intervals import Interval, interval
from relspan.run.codec import decode, encode

NAMES = ("x1", "x2", "x3", "x4")


def _draws(seed=4):
    rng = np.random.default_rng(seed)
    d = rng.standard_normal((199, 6)) * np.logspace(-8, 8, 6)
    d[7, 1] = np.nan          # a failed resample: this column goes through the one-column path
    d[:, 3] = np.inf          # no finite draw
    return rng.standard_normal(6) * 1e3, d


def _cells():
    return [(0, 1), (0, 2), (1, 3), (2, 0), (3, 1), (3, 2)]


def test_items_are_the_one_column_intervals_bit_for_bit():
    est, d = _draws()
    got = _coefficient_intervals(NAMES, _cells(), _interval_rows(est, d, level=0.9, method="percentile"),
                                 0.9, "percentile")
    want = tuple(CoefficientInterval(NAMES[e], NAMES[v], interval(float(est[j]), d[:, j], level=0.9))
                 for j, (e, v) in enumerate(_cells()))
    assert len(got) == len(want) == 6
    assert [repr(g) for g in got] == [repr(w) for w in want]      # repr shows every float's digits
    for g, w in zip(got, want):
        for f in ("estimate", "low", "high"):
            a, b = getattr(g.interval, f), getattr(w.interval, f)
            assert np.float64(a).tobytes() == np.float64(b).tobytes()
        assert type(g.interval.resamples) is int and g.interval.resamples == w.interval.resamples
    assert got == want and got == list(want)          # NaN bounds (column 3) equal NaN bounds
    assert got != want[:-1] + (CoefficientInterval("x3", "x4", want[-1].interval),)
    with pytest.raises(TypeError):
        hash(got)
    assert got[1].interval.resamples == 198 and np.isnan(got[3].interval.low)


def test_indexing_slicing_and_search_behave_as_a_tuple():
    est, d = _draws(5)
    rows = _interval_rows(est, d, level=0.8, method="basic")
    got = _coefficient_intervals(NAMES, _cells(), rows, 0.8, "basic")
    items = tuple(got)
    assert got[-1] == items[-1] and type(got[1:4]) is tuple   # slices are tuples (fresh items: compare reprs)
    assert repr(got[1:4]) == repr(items[1:4]) and repr(got[::-2]) == repr(items[::-2])
    assert items[2] in got and got.index(items[4]) == 4 and repr(list(reversed(got))) == repr(list(reversed(items)))
    with pytest.raises(IndexError):
        got[6]
    with pytest.raises(IndexError):
        got[-7]
    assert got != items[:-1] and got != "x"
    assert repr(got.find("x4", "x3")) == repr(items[5]) and got.find("x3", "x4") is None
    assert got.find("x9", "x1") is None
    empty = _coefficient_intervals(NAMES, [], [], 0.9, "percentile")
    assert len(empty) == 0 and tuple(empty) == ()


def test_pickle_and_the_cache_codec_round_trip_exactly():
    est, d = _draws(6)
    got = _coefficient_intervals(NAMES, _cells(), _interval_rows(est, d, level=0.9, method="percentile"),
                                 0.9, "percentile")
    assert pickle.loads(pickle.dumps(got)) == got
    doc, arrays = encode({"c": got})
    back = decode(doc, arrays)["c"]
    assert type(back) is CoefficientIntervals and back == got and repr(back) == repr(got)


def test_levels_or_methods_that_differ_are_kept_per_item():
    rows = [(1.0, 0.5, 1.5, 0.9, "percentile", 199), (2.0, 1.0, 3.0, 0.8, "basic", 150)]
    got = _coefficient_intervals(NAMES, [(0, 1), (1, 0)], rows, 0.9, "percentile")
    assert got[0].interval == Interval(1.0, 0.5, 1.5, 0.9, "percentile", 199)
    assert got[1].interval == Interval(2.0, 1.0, 3.0, 0.8, "basic", 150)


@pytest.mark.parametrize("bad", [
    dict(pairs=b"\x00\x00\x01"),                            # not four bytes per item
    dict(values=b"\x00" * 23),                              # not 24 bytes per item
    dict(pairs=np.array([0, 9], dtype="<u2").tobytes()),     # a name index past the names
    dict(extra=((0.9, "percentile"), (0.9, "percentile"))),  # one item, two extras
    dict(names=("x1", 2)),
])
def test_inconsistent_arguments_are_refused(bad):
    args = dict(names=("x1", "x2"), pairs=np.array([0, 1], dtype="<u2").tobytes(),
                values=np.array([1.0, 0.5, 1.5]).tobytes(), resamples=np.array([199], dtype="<i4").tobytes(),
                level=0.9, method="percentile", extra=None)
    args.update(bad)
    with pytest.raises(ValueError):
        CoefficientIntervals(**args)


def test_window_inference_holds_them_compactly_and_reads_them_back():
    from relspan.analysis.moments import Moments
    from relspan.analysis.resample import GranuleStats
    from relspan.analysis.inference import ResamplingOptions
    from relspan.analysis.window import WindowOptions, analyse_window

    rng = np.random.default_rng(2)
    x = rng.standard_normal((400, 2)) @ rng.standard_normal((2, 4)) + 0.2 * rng.standard_normal((400, 4))
    stats = GranuleStats.from_rows(x, ordered=False)
    c, mean, cm = stats.window_moments()
    w = analyse_window(Moments(count=int(c), mean=mean, comoment=cm), names=NAMES,
                       options=WindowOptions(assumptions=("elementary", "equal", "bounded"), absolute=None,
                                             relative=0.05, ref=0, coranks=(1, 2, 3)),
                       common_std=x.std(axis=0, ddof=1), label="t", granules=stats,
                       resampling=ResamplingOptions(resamples=99, level=0.9, scheme="iid", seed=1),
                       seed_key=("d", "p", 0))
    inf = w.inference
    assert isinstance(inf.elementary, CoefficientIntervals) and len(inf.elementary) == 12
    assert all(isinstance(v, CoefficientIntervals) for v in inf.coefficients.values())
    one = inf.elementary[5]
    assert inf.elementary_coefficient(one.equation, one.variable) == one.interval
    q, cs = next(iter(inf.coefficients.items()))
    assert inf.coefficient(q, cs[0].equation, cs[0].variable) == cs[0].interval
    assert len(inf.to_dict()["elementary"]) == 12


def test_two_quantiles_are_numpys_bit_for_bit():
    # reference: numpy.quantile(d, [a, 1 - a], axis=0) (default "linear" method), on draws with
    # ties, signed zeros, magnitudes from 1e-10 to 1e10 and the resample counts relspan uses
    from relspan.analysis.inference import _two_quantiles

    rng = np.random.default_rng(31)
    for t in range(1500):
        b = int(rng.choice([2, 3, 10, 99, 199, 200, 499, 999]))
        d = rng.standard_normal((b, int(rng.integers(1, 40)))) * 10.0 ** rng.uniform(-10, 10)
        if t % 3 == 0:
            d = np.round(d)
        if t % 5 == 0:
            d[rng.random(d.shape) < 0.3] = -0.0
        a = (1.0 - float(rng.choice([0.9, 0.95, 0.5, 0.8, 0.99, 0.6180339887, 0.001]))) / 2.0
        assert _two_quantiles(d, a).tobytes() == np.quantile(d, [a, 1.0 - a], axis=0).tobytes()
