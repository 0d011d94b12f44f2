"""The pyarrow streaming reader and the pandas reader give the same data pass, bit for bit.

``prepare_dataset(engine="auto")`` reads CSV/TSV with pyarrow's ``open_csv`` when pyarrow is
installed and falls back to pandas for anything pyarrow might read differently; these tests
pin that the two readers agree (moments, windows, drops, SHA-256) and that every error is the
pandas reader's own message. Data are invented for the tests (seeded).
"""

from __future__ import annotations

import pickle

import numpy as np
import pandas as pd
import pytest

from relspan.data import prepare_dataset, window_moments
from relspan.data.prepare import StackedMoments
from relspan.data.sources import FastPathDeclined
from relspan.data.windows import Window, WindowTable
from relspan.errors import DataError

from data_helpers import FULL, make_spec, rolling

pytest.importorskip("pyarrow")

PLANS = [FULL, rolling("r40", 40, 8), rolling("grow", 40, 12, kind="expanding"),
         rolling("q", 12, 6, "quarters")]


def _same_pass(a, b) -> None:
    assert a.sha256 == b.sha256 and a.rows_read == b.rows_read and a.rows_used == b.rows_used
    assert a.drops == b.drops and a.period == b.period and a.full == b.full
    for pa_, pb_ in zip(a.plans, b.plans, strict=True):
        assert pa_.windows == pb_.windows
        assert pa_.moments == pb_.moments  # stacked arrays, bit for bit
    for name in ("counts", "means", "comoments"):
        assert np.array_equal(getattr(a.blocks, name), getattr(b.blocks, name))
    pd.testing.assert_frame_equal(a.overview.values, b.overview.values)


def _both(path, columns, **kw):
    ds = make_spec(path, columns, **kw)
    fast = prepare_dataset(ds, PLANS, engine="pyarrow")
    ref = prepare_dataset(ds, PLANS, engine="pandas")
    return fast, ref


def test_pyarrow_and_pandas_readers_give_identical_passes(write_csv, offset_frame):
    path = write_csv(offset_frame)  # 1e8 + noise: every digit of the doubles matters
    fast, ref = _both(path, ["a", "b", "c"], time="quarter")
    _same_pass(fast, ref)


def test_readers_agree_on_missing_cells_quotes_and_a_bom(write_csv, offset_frame):
    df = offset_frame.copy()
    df.loc[[3, 50, 51], "b"] = np.nan
    text = df.to_csv(index=False).replace(",,", ",NA,", 1)  # pandas' own missing marker
    text = text.replace('"', "")
    lines = text.splitlines()
    lines[10] = ",".join(f'"{v}"' for v in lines[10].split(","))  # a quoted row
    path = write_csv(b"\xef\xbb\xbf" + ("\n".join(lines) + "\n").encode())
    fast, ref = _both(path, ["a", "b", "c"], time="quarter")
    _same_pass(fast, ref)
    assert sum(d.count for d in fast.drops) == 3


def test_readers_agree_on_a_tsv_with_more_columns_than_used(write_csv, offset_frame):
    df = offset_frame.assign(note="x", extra=np.arange(len(offset_frame)))
    fast, ref = _both(write_csv(df, "t.tsv"), ["c", "a"], time="quarter")
    _same_pass(fast, ref)


@pytest.mark.parametrize("cell", [" 4", "4 ", "+4", ".5", "5.", "1E3", "-0", "00012", '"4"',
                                  "1e-400", "4.000000000000000000000000001"])
def test_readers_agree_on_unusual_but_valid_number_spellings(write_csv, cell):
    path = write_csv(f"a,b\n1,2\n3,{cell}\n5,6\n7,8\n9,10\n1,5\n")
    ds = make_spec(path, ["a", "b"])
    fast = prepare_dataset(ds, [FULL], engine="pyarrow")
    ref = prepare_dataset(ds, [FULL], engine="pandas")
    assert fast.full == ref.full and fast.rows_used == ref.rows_used == 6


def test_round_trip_decimal_text_parses_to_the_same_doubles():
    # shortest round-trip text of random doubles over 20 orders of magnitude: both readers
    # must give back exactly the doubles that Python's float() gives (IEEE 754 correctly
    # rounded conversion, the reference here)
    import io

    import pyarrow.csv as pacsv

    rng = np.random.default_rng(3)
    v = (rng.standard_normal(20000) * 10.0 ** rng.uniform(-10, 10, 20000)).tolist()
    text = "a\n" + "\n".join(repr(x) for x in v) + "\n"
    arrow = pacsv.read_csv(io.BytesIO(text.encode())).column(0).to_numpy()
    pandas_ = pd.read_csv(io.StringIO(text), dtype={"a": float}).iloc[:, 0].to_numpy()
    assert np.array_equal(arrow, np.array(v)) and np.array_equal(pandas_, np.array(v))


@pytest.mark.parametrize("body, why", [
    ("a,b\n1,2\n3,4,\n5,6\n7,8\n9,1\n2,2\n", "a row ending with a separator (read as if it were not there)"),
])
def test_files_pyarrow_might_read_differently_fall_back_to_pandas(write_csv, body, why):
    path = write_csv(body)
    ds = make_spec(path, ["a", "b"])
    with pytest.raises(FastPathDeclined):
        prepare_dataset(ds, [FULL], engine="pyarrow")
    auto = prepare_dataset(ds, [FULL])
    ref = prepare_dataset(ds, [FULL], engine="pandas")
    assert auto.full == ref.full and auto.drops == ref.drops and auto.sha256 == ref.sha256, why


@pytest.mark.parametrize("body, match", [
    (b"a,b\n1,2\n3,x\n", r"column 'b', row 2: 'x' is not a number"),
    (b"a,b\n1,2\n3,4,5\n", r"line \d+ has 3 fields but the header has 2"),
    (b"a,b\n1,2\n3\n5,6\n", r"line 3 has 1 fields but the header has 2: a value is left out"),
    (b"a,b,c\n1,2,\xff\n3,4,5\n", r"is not UTF-8 text: the byte at offset 10 \(line 2\)"),
    (b"a,b\n1,2\n3,NAN\n", r"column 'b', row 2: 'NAN' is not a number"),
    (b"a,b\n1,2\n3,0x10\n", r"column 'b', row 2: '0x10' is not a number"),
    (b'a,b\n1,2\n3, "4"\n', r"""column 'b', row 2: ' "4"' is not a number"""),
    (b"a,b\n1,2\n3,inf\n", r"column 'b', row 2: the value is \+infinity"),
    (b"a,b\n1,2\n3,1e200\n", r"column 'b', row 2: 1e\+200 is too large in magnitude"),
])
def test_errors_are_the_pandas_readers_messages(write_csv, body, match):
    path = write_csv(body)
    ds = make_spec(path, ["a", "b"])
    with pytest.raises(DataError, match=match) as auto:
        prepare_dataset(ds, [FULL])
    with pytest.raises(DataError) as ref:
        prepare_dataset(ds, [FULL], engine="pandas")
    assert str(auto.value) == str(ref.value)


class TestStackedStatistics:
    """Windows and their moments are held as arrays, not one object per window."""

    def _prepared(self, write_csv, offset_frame):
        path = write_csv(offset_frame)
        return prepare_dataset(make_spec(path, ["a", "b", "c"], time="quarter"), PLANS)

    def test_moments_are_stacked_arrays_read_as_moments(self, write_csv, offset_frame):
        prepared = self._prepared(write_csv, offset_frame)
        plan = prepared.plan("r40")
        assert isinstance(plan.moments, StackedMoments)
        w = len(plan.windows)
        assert plan.moments.comoments.shape == (w, 3, 3) and plan.moments.means.shape == (w, 3)
        pairs = window_moments(prepared, "r40")
        assert [m.count for _, m in pairs] == [win.rows for win in plan.windows]
        assert not plan.moments.comoments.flags.writeable  # Moments views cannot change them

    def test_row_plan_windows_are_a_table_equal_to_the_windows_it_stands_for(self, write_csv,
                                                                             offset_frame):
        prepared = self._prepared(write_csv, offset_frame)
        table = prepared.plan("r40").windows
        assert isinstance(table, WindowTable)
        listed = list(table)
        assert all(isinstance(w, Window) for w in listed) and table == listed
        assert [w.index for w in listed] == list(range(len(table)))
        # 160 quarters from 1980Q1: window k covers rows 8k+1 .. 8k+40
        assert (listed[2].first_row, listed[2].last_row, listed[2].rows) == (17, 56, 40)
        assert listed[2].label == "1984Q1–1993Q4" and listed[-1] == table[-1]

    def test_prepared_dataset_pickles_and_compares_equal(self, write_csv, offset_frame):
        prepared = self._prepared(write_csv, offset_frame)
        back = pickle.loads(pickle.dumps(prepared))
        for a, b in zip(prepared.plans, back.plans):
            assert a.windows == b.windows and a.moments == b.moments
