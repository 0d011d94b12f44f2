"""Arbitrary bytes in a CSV file give a PreparedDataset or a DataError, never another exception."""

from __future__ import annotations

import tempfile
from pathlib import Path

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from relspan.data import PreparedDataset, prepare_dataset
from relspan.errors import DataError
from relspan.spec.model import TimeSpec

from data_helpers import FULL, make_spec, rolling

# bytes biased towards CSV-like content, plus anything at all
_csv_alphabet = st.sampled_from(list(b"0123456789.,;\t\n\r\"'-+eE xyzQ:TnaNif") + [0, 0xC3, 0xA9,
                                                                                   0xFF, 0xEF])
_content = st.one_of(st.binary(max_size=300),
                     st.lists(_csv_alphabet, max_size=400).map(bytes),
                     st.lists(st.sampled_from([b"x,y,z\n", b"1,2,3\n", b"4,5,6\n", b"7,,9\n",
                                               b"1e400,1,1\n", b"a,b\n", b"1994Q1,3,4\n",
                                               b"\"1,2\",3,4\n", b"\n", b"2,3,4,5\n",
                                               b"9,8,7\r\n", b"\xef\xbb\xbf"]),
                              max_size=30).map(b"".join))
_names = st.lists(st.sampled_from(["x", "y", "z", "a", "b", "", "1", "x.1"]), min_size=1,
                  max_size=3, unique=True)


@settings(max_examples=300, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(content=_content, columns=_names, time=st.sampled_from([None, "x", "z", "t"]),
       chunk=st.integers(1, 5), ext=st.sampled_from([".csv", ".txt", ".tsv", ".dat"]))
def test_any_bytes_give_prepared_dataset_or_data_error(content, columns, time, chunk, ext):
    if time in columns:
        time = None
    with tempfile.TemporaryDirectory() as d:
        path = Path(d) / f"f{ext}"
        path.write_bytes(content)
        ds = make_spec(path, columns, time=None if time is None else TimeSpec(time))
        plans = [FULL] if time is None else [FULL, rolling("y", 1, 1, "years")]
        try:
            result = prepare_dataset(ds, plans, chunk_rows=chunk)
        except DataError as err:
            text = str(err)
            assert text.startswith(f"data/f{ext}") and "\n  Fix: " in text
            assert "Traceback" not in text
        else:
            assert isinstance(result, PreparedDataset)
            assert result.rows_used >= len(columns) + 2
