"""Window plans -> windows; blocks refine every plan; windows assemble like MomentTree."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from moment_oracles import MomentTree
from relspan.data import assemble, prepare_frame
from relspan.errors import DataError
from relspan.spec.model import Period, WindowPlanSpec

from data_helpers import FULL, quarters, rolling


@pytest.fixture
def quarterly():
    """30 years of quarterly data, 1990Q1-2019Q4 (120 rows), seeded."""
    rng = np.random.default_rng(3)
    return pd.DataFrame({"q": quarters("1990Q1", 120), "a": rng.normal(size=120),
                         "b": rng.normal(size=120), "c": rng.normal(size=120)})


def _plan(df, *plans, time="q"):
    return prepare_frame(df, columns=["a", "b", "c"], time=time, plans=list(plans), chunk_rows=13)


def test_rolling_in_rows_on_quarterly_data(quarterly):
    wins = _plan(quarterly, rolling("r", 40, 8)).plan("r").windows
    assert len(wins) == (120 - 40) // 8 + 1 == 11
    assert (wins[0].label, wins[-1].label) == ("1990Q1–1999Q4", "2010Q1–2019Q4")
    assert all(w.rows == 40 for w in wins)


def test_rolling_in_years_on_quarterly_data(quarterly):
    wins = _plan(quarterly, rolling("r", 10, 2, "years")).plan("r").windows
    assert len(wins) == 11
    assert (wins[0].label, wins[-1].label) == ("1990Q1–1999Q4", "2010Q1–2019Q4")
    assert (wins[1].calendar_start, wins[1].calendar_end) == ("1992-01-01", "2002-01-01")


def test_rolling_in_quarters_with_step_in_years(quarterly):
    wins = _plan(quarterly, rolling("r", 20, 1, ("quarters", "years"))).plan("r").windows
    assert len(wins) == 26
    assert (wins[0].label, wins[-1].label) == ("1990Q1–1994Q4", "2015Q1–2019Q4")


def test_calendar_window_counts_only_rows_present(quarterly):
    gappy = quarterly.drop(index=range(4, 8)).reset_index(drop=True)  # 1991 missing
    wins = _plan(gappy, rolling("r", 5, 5, "years")).plan("r").windows
    assert wins[0].label == "1990Q1–1994Q4" and wins[0].rows == 16


def test_expanding_grows_from_the_first_row(quarterly):
    wins = _plan(quarterly, rolling("e", 40, 20, kind="expanding")).plan("e").windows
    assert [w.rows for w in wins] == [40, 60, 80, 100, 120]
    assert {w.first_time for w in wins} == {"1990Q1"}
    assert wins[-1].label == "1990Q1–2019Q4"


def test_periods_cover_their_inclusive_dates(quarterly):
    plan = WindowPlanSpec("eras", "periods", periods=(
        Period("Before", "1990-01-01", "2004-12-31"), Period("After", "2005Q1", "2019")))
    wins = _plan(quarterly, plan).plan("eras").windows
    assert [(w.label, w.first_time, w.last_time, w.rows) for w in wins] == [
        ("Before", "1990Q1", "2004Q4", 60), ("After", "2005Q1", "2019Q4", 60)]


def test_blocks_refine_every_plan(quarterly):
    plans = [FULL, rolling("r", 12, 8), rolling("e", 30, 18, kind="expanding"),
             rolling("y", 3, 1, "years"),
             WindowPlanSpec("p", "periods", periods=(Period("odd", "1993-05-17", "2001-02-03"),))]
    prepared = _plan(quarterly, *plans)
    blocks = prepared.blocks
    # row plans cut at multiples of gcd(12, 8, 30, 18) = 2 rows
    assert set(np.diff(blocks.first_pos).tolist()) <= {1, 2}
    for plan in prepared.plans:
        for w in plan.windows:
            assert blocks.first_pos[w.block_start] == w.first_row - 1
            assert blocks.last_pos[w.block_stop - 1] == w.last_row - 1
            assert int(blocks.counts[w.block_start:w.block_stop].sum()) == w.rows


def test_assembled_windows_equal_moment_tree_queries(quarterly):
    prepared = _plan(quarterly, rolling("r", 12, 4), rolling("e", 12, 4, kind="expanding"))
    blocks = prepared.blocks
    tree = MomentTree([blocks.moments(i, relative=True) for i in range(len(blocks))])
    for plan in prepared.plans:
        lo = np.array([w.block_start for w in plan.windows])
        hi = np.array([w.block_stop for w in plan.windows])
        for m, a, b in zip(assemble(blocks, lo, hi, relative=True), lo, hi):
            assert m == tree.query(int(a), int(b))  # bit for bit


def test_window_with_too_few_rows_names_plan_and_window(quarterly):
    with pytest.raises(DataError, match=r"dataset 'frame', window plan 'r': window 1 \(rows 1–4\) has "
                                        r"4 analysed rows, but 3 variables need at least 5\.\n  Fix: "
                                        r"widen the plan's windows"):
        _plan(quarterly, rolling("r", 4, 4))


def test_empty_calendar_window_is_reported(quarterly):
    gappy = quarterly.drop(index=range(8, 16)).reset_index(drop=True)  # 1992-1993 missing
    with pytest.raises(DataError, match=r"window plan 'r': window 2 \(from 1992-01-01 up to "
                                        r"1994-01-01\) has 0 analysed rows"):
        _plan(gappy, rolling("r", 2, 2, "years"))


def test_width_beyond_the_data_is_an_error(quarterly):
    with pytest.raises(DataError, match=r"window plan 'r': the width is 200 rows, but the dataset has "
                                        r"only 120 analysed rows\.\n  Fix: make the width at most 120"):
        _plan(quarterly, rolling("r", 200, 10))
    with pytest.raises(DataError, match=r"the width is 40 years, but the data cover only "
                                        r"1990Q1–2019Q4"):
        _plan(quarterly, rolling("y", 40, 1, "years"))


def test_time_plan_without_time_column_is_an_error(quarterly):
    with pytest.raises(DataError, match=r"window plan 'y': the width is measured in years, but the "
                                        r"dataset has no time column\.\n  Fix: add time:"):
        _plan(quarterly, rolling("y", 5, 1, "years"), time=None)


def test_periods_without_time_column_are_an_error(quarterly):
    plan = WindowPlanSpec("p", "periods", periods=(Period("a", "1990-01-01", "1995-12-31"),))
    with pytest.raises(DataError, match=r"window plan 'p': periods need dates"):
        _plan(quarterly, plan, time=None)


def test_width_and_step_in_unrelated_units_are_an_error(quarterly):
    with pytest.raises(DataError, match=r"width \(2 years\) and step \(3 days\) are measured in units "
                                        r"that do not divide each other"):
        _plan(quarterly, rolling("m", 2, 3, ("years", "days")))


def test_weekly_windows_on_daily_data():
    rng = np.random.default_rng(8)
    df = pd.DataFrame({"d": pd.date_range("2020-01-01", periods=70, freq="D").strftime("%Y-%m-%d"),
                       "a": rng.normal(size=70), "b": rng.normal(size=70), "c": rng.normal(size=70)})
    wins = prepare_frame(df, columns=["a", "b", "c"], time="d",
                         plans=[rolling("w", 2, 1, "weeks")]).plan("w").windows
    assert len(wins) == 9 and all(w.rows == 14 for w in wins)
    assert wins[0].label == "2020-01-01–2020-01-14"
