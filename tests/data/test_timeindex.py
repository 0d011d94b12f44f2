"""The time column: notations, order, from/to range."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from relspan.data import prepare_dataset
from relspan.errors import DataError
from relspan.spec.model import TimeSpec

from data_helpers import FULL, make_spec

VALUES = "x,y\n" + "".join(f"{v},{w}\n" for v, w in zip([1, 4, 2, 8, 5, 7], [3, 1, 4, 1, 5, 9]))


def _table(times, write_csv, extra=""):
    lines = ["t,x,y"] + [f"{t},{x},{y}" for t, x, y in zip(times, [1, 4, 2, 8, 5, 7, 3, 6],
                                                            [3, 1, 4, 1, 5, 9, 2, 6])]
    return write_csv("\n".join(lines) + "\n" + extra)


@pytest.mark.parametrize("times, period", [
    (["1990", "1991", "1992", "1993", "1994", "1995"], ("1990", "1995")),
    (["1990Q1", "1990Q2", "1990-Q3", "1990Q4", "1991Q1", "1991Q2"], ("1990Q1", "1991Q2")),
    (["1990-01", "1990-02", "1990-03", "1990-04", "1990-05", "1990-06"], ("1990-01", "1990-06")),
    (["2001-03-01", "2001-03-02", "2001-03-05", "2001-03-06", "2001-03-07", "2001-03-08"],
     ("2001-03-01", "2001-03-08")),
    (["2001-03-01T10:00", "2001-03-01T11:00", "2001-03-01 12:00", "2001-03-01T13:00:30",
      "2001-03-01T14:00", "2001-03-01T15:00"], ("2001-03-01 10:00:00", "2001-03-01 15:00:00")),
])
def test_auto_recognises_each_notation(times, period, write_csv):
    prepared = prepare_dataset(make_spec(_table(times, write_csv), ["x", "y"], time="t"), [FULL])
    assert prepared.period == period


def test_explicit_strftime_pattern_is_used_and_kept_for_labels(write_csv):
    times = ["01/02/2003", "02/02/2003", "03/02/2003", "04/02/2003", "05/02/2003", "06/02/2003"]
    ds = make_spec(_table(times, write_csv), ["x", "y"], time=TimeSpec("t", "%d/%m/%Y"))
    assert prepare_dataset(ds, [FULL]).period == ("01/02/2003", "06/02/2003")


def test_unreadable_time_names_first_bad_row(write_csv):
    times = ["1990Q1", "1990Q2", "1990Q5", "1990Q4", "1991Q1", "1991Q2"]
    with pytest.raises(DataError, match=r"column 't', row 3: '1990Q5' is not a quarter like 1994Q1\."
                                        r"\n  Fix: write every time value in one notation"):
        prepare_dataset(make_spec(_table(times, write_csv), ["x", "y"], time="t"), [FULL])


def test_unknown_first_time_value_is_explained(write_csv):
    times = ["early", "1990Q2", "1990Q3", "1990Q4", "1991Q1", "1991Q2"]
    with pytest.raises(DataError, match=r"column 't', row 1: cannot tell what time 'early' is"):
        prepare_dataset(make_spec(_table(times, write_csv), ["x", "y"], time="t"), [FULL])


def test_mixed_notations_name_the_first_odd_row(write_csv):
    times = ["1990Q1", "1990Q2", "1990Q3", "1990-10", "1991Q1", "1991Q2"]
    with pytest.raises(DataError, match=r"column 't' mixes time notations: the first value is a "
                                        r"quarter like 1994Q1, but row 4 has '1990-10', which is a "
                                        r"month like 1994-03\."):
        prepare_dataset(make_spec(_table(times, write_csv), ["x", "y"], time="t"), [FULL],
                        chunk_rows=2)


def test_unsorted_times_name_both_rows(write_csv):
    times = ["1990", "1991", "1993", "1992", "1994", "1995"]
    with pytest.raises(DataError, match=r"column 't' is not in time order: row 4 \(1992\) comes after "
                                        r"row 3 \(1993\)\.\n  Fix: sort the file by 't'"):
        prepare_dataset(make_spec(_table(times, write_csv), ["x", "y"], time="t"), [FULL],
                        chunk_rows=3)


def test_duplicated_times_name_both_rows(write_csv):
    times = ["1990", "1991", "1992", "1992", "1994", "1995"]
    with pytest.raises(DataError, match=r"column 't' repeats the time 1992: rows 3 and 4 have the "
                                        r"same time\.\n  Fix: remove or combine"):
        prepare_dataset(make_spec(_table(times, write_csv), ["x", "y"], time="t"), [FULL])


def test_from_to_range_is_inclusive(write_csv):
    times = [f"{y}Q{q}" for y in (1990, 1991) for q in (1, 2, 3, 4)]
    ds = make_spec(_table(times, write_csv), ["x", "y"],
                   time=TimeSpec("t", start="1990-04-01", end="1991-06-30"))
    prepared = prepare_dataset(ds, [FULL])
    assert prepared.period == ("1990Q2", "1991Q2")
    assert prepared.rows_outside_range == 3 and prepared.rows_used == 5
    np.testing.assert_allclose(prepared.full.mean, [np.mean([4, 2, 8, 5, 7]),
                                                    np.mean([1, 4, 1, 5, 9])])


def test_range_that_excludes_everything_is_an_error(write_csv):
    times = ["1990", "1991", "1992", "1993", "1994", "1995"]
    ds = make_spec(_table(times, write_csv), ["x", "y"], time=TimeSpec("t", start="2001-01-01"))
    with pytest.raises(DataError, match=r"no row of dataset 'demo' lies between 2001-01-01 and the "
                                        r"end \(all 6 rows are outside\)"):
        prepare_dataset(ds, [FULL])
