"""Inputs that used to give silently wrong data (issue 17): each is now read right or refused.

Data are invented for the tests (seeded).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from relspan.data import prepare_dataset
from relspan.data.transforms import REASON_GAP
from relspan.errors import DataError

from data_helpers import FULL, make_spec, quarters, rolling
from relspan.spec.model import TimeSpec


def _rows(t=30, seed=5):
    rng = np.random.default_rng(seed)
    x = rng.normal(size=(t, 3)) @ np.array([[1.0, 0.4, 0.0], [0.0, 1.0, 0.3], [0.0, 0.0, 1.0]])
    return [(1950 + i, *(f"{v:.6f}" for v in x[i])) for i in range(t)]


def _text(rows, header="year,a,b,c", end="\n"):
    return header + "\n" + "".join(",".join(map(str, r)) + end for r in rows)


def _pass(path, engine, **kw):
    return prepare_dataset(make_spec(path, ["a", "b", "c"], **kw), [FULL], engine=engine)


ENGINES = ["pandas", "auto"]


class TestTrailingSeparator:
    @pytest.mark.parametrize("engine", ENGINES)
    def test_rows_ending_with_a_separator_read_like_the_plain_file(self, write_csv, engine):
        plain = _pass(write_csv(_text(_rows()), "plain.csv"), engine, time="year")
        trailing = _pass(write_csv(_text(_rows(), end=",\n"), "trail.csv"), engine, time="year")
        assert trailing.full == plain.full
        assert trailing.period == plain.period == ("1950", "1979")

    @pytest.mark.parametrize("engine", ENGINES)
    def test_without_a_time_column_too(self, write_csv, engine):
        plain = _pass(write_csv(_text(_rows()), "plain.csv"), engine)
        trailing = _pass(write_csv(_text(_rows(), end=",\n"), "trail.csv"), engine)
        np.testing.assert_array_equal(trailing.full.mean, plain.full.mean)

    @pytest.mark.parametrize("engine", ENGINES)
    def test_header_ending_with_a_separator_and_rows_without(self, write_csv, engine):
        plain = _pass(write_csv(_text(_rows()), "plain.csv"), engine)
        odd = _pass(write_csv(_text(_rows(), header="year,a,b,c,"), "odd.csv"), engine)
        assert odd.full == plain.full

    @pytest.mark.parametrize("engine", ENGINES)
    def test_an_extra_value_at_the_end_of_a_row_is_still_refused(self, write_csv, engine):
        rows = [list(r) for r in _rows()]
        rows[4].append("9.5")
        with pytest.raises(DataError, match="line 6 has 5 fields but the header has 4"):
            _pass(write_csv(_text(rows)), engine)


class TestShortRow:
    @pytest.mark.parametrize("engine", ENGINES)
    def test_a_row_with_a_value_left_out_is_refused_naming_its_line(self, write_csv, engine):
        rows = [list(r) for r in _rows()]
        del rows[7][2]  # b left out: c's value would land in b's column
        with pytest.raises(DataError, match=r"line 9 has 3 fields but the header has 4: a value is left out"):
            _pass(write_csv(_text(rows)), engine, time="year")

    def test_even_when_the_padded_column_is_not_analysed(self, write_csv):
        rows = [list(r) for r in _rows()]
        del rows[7][1]
        ds = make_spec(write_csv(_text(rows)), ["a", "b"], time="year")
        with pytest.raises(DataError, match="line 9"):
            prepare_dataset(ds, [FULL])

    def test_an_empty_cell_between_separators_is_a_missing_value_not_a_short_row(self, write_csv):
        rows = [list(r) for r in _rows()]
        rows[7][2] = ""
        p = _pass(write_csv(_text(rows)), "pandas", time="year")
        assert p.rows_dropped == 1


class TestDiffAcrossGaps:
    def _quarterly(self, write_csv, absent):
        rng = np.random.default_rng(11)
        q = quarters("1990Q1", 40)
        x = np.cumsum(rng.normal(size=(40, 3)), axis=0)
        df = pd.DataFrame({"quarter": q, "a": x[:, 0], "b": x[:, 1], "c": x[:, 2]})
        return df, write_csv(df.drop(index=list(absent)))

    def test_difference_across_absent_quarters_is_dropped_with_a_reason(self, write_csv):
        df, path = self._quarterly(write_csv, absent=range(20, 24))
        p = prepare_dataset(make_spec(path, ["a", "b", "c"], time="quarter",
                                      transforms=dict.fromkeys("abc", "diff")), [FULL])
        gap = [d for d in p.drops if d.reason == REASON_GAP]
        assert len(gap) == 1 and gap[0].count == 1 and gap[0].first_rows == (21,)
        # what remains are exactly the one-quarter changes of the present quarters
        full = df.set_index("quarter")[["a", "b", "c"]]
        d = full.diff().drop(index=full.index[20:25]).dropna().to_numpy()
        np.testing.assert_allclose(p.full.mean, d.mean(axis=0), rtol=1e-12)
        assert p.rows_used == d.shape[0]

    def test_consecutive_quarters_lose_only_the_first_row(self, write_csv):
        _, path = self._quarterly(write_csv, absent=())
        p = prepare_dataset(make_spec(path, ["a", "b", "c"], time="quarter",
                                      transforms=dict.fromkeys("abc", "diff")), [FULL])
        assert [d.reason for d in p.drops] == ["no previous row to difference"]

    def test_gap_across_a_chunk_boundary(self, write_csv):
        _, path = self._quarterly(write_csv, absent=(10,))
        ds = make_spec(path, ["a", "b", "c"], time="quarter", transforms=dict.fromkeys("abc", "diff"))
        small = prepare_dataset(ds, [FULL], chunk_rows=10)  # row 11 (1992Q4) starts a chunk
        assert [d for d in small.drops if d.reason == REASON_GAP][0].first_rows == (11,)
        assert small.full == prepare_dataset(ds, [FULL]).full


pa = pytest.importorskip("pyarrow")
pq = pytest.importorskip("pyarrow.parquet")


class TestParquet:
    @staticmethod
    def _paris_months(tmp_path):
        """36 monthly values stamped at local midnight in Paris (UTC+1/+2): the previous day in UTC."""
        rng = np.random.default_rng(2)
        stamps = pd.date_range("2019-01-01", periods=36, freq="MS", tz="Europe/Paris")
        df = pd.DataFrame({"month": stamps, **{c: rng.normal(size=36) for c in "abc"}})
        path = tmp_path / "tz.parquet"
        df.to_parquet(path)
        return path

    def test_time_zone_keeps_the_local_wall_time(self, tmp_path):
        path = self._paris_months(tmp_path)
        p = prepare_dataset(make_spec(path, ["a", "b", "c"], time=TimeSpec("month", "month")), [FULL])
        assert p.period == ("2019-01", "2021-12")  # not 2018-12 .. 2021-11 in UTC

    def test_yearly_periods_hold_january_to_december_local_time(self, tmp_path):
        path = self._paris_months(tmp_path)
        plan = rolling("y", 1, 1, "years")
        p = prepare_dataset(make_spec(path, ["a", "b", "c"], time=TimeSpec("month", "month")), [plan])
        assert [w.rows for w in p.plan("y").windows] == [12, 12, 12]
        assert p.plan("y").windows[1].first_time == "2020-01"

    def test_whole_numbers_above_2_to_the_53_are_refused(self, tmp_path):
        base = 2 ** 60
        a = np.array([base + k for k in range(20)], dtype=np.int64)
        rng = np.random.default_rng(3)
        table = pa.table({"a": a, "b": rng.normal(size=20), "c": rng.normal(size=20)})
        path = tmp_path / "big.parquet"
        pq.write_table(table, path)
        with pytest.raises(DataError, match=r"column 'a', row 2: the whole number 1152921504606846977 "
                                            r"is larger than 2\^53"):
            prepare_dataset(make_spec(path, ["a", "b", "c"]), [FULL])

    def test_large_whole_numbers_a_double_holds_exactly_are_read(self, tmp_path):
        rng = np.random.default_rng(3)
        a = (rng.integers(0, 1000, size=20) * 2 ** 20).astype(np.int64) + 2 ** 40
        table = pa.table({"a": a, "b": rng.normal(size=20), "c": rng.normal(size=20)})
        path = tmp_path / "ok.parquet"
        pq.write_table(table, path)
        p = prepare_dataset(make_spec(path, ["a", "b", "c"]), [FULL])
        assert p.full.mean[0] == pytest.approx(a.mean(), rel=1e-15)


class TestTinyValues:
    def test_a_column_of_values_near_1e_161_is_refused_naming_it(self, write_csv):
        rows = [(r[0], f"{float(r[1]) * 1e-161:.6e}", r[2], r[3]) for r in _rows()]
        with pytest.raises(DataError, match=r"column 'a': every value is smaller than 1e-150"):
            _pass(write_csv(_text(rows)), "auto")

    def test_small_but_safe_values_are_analysed(self, write_csv):
        rows = [(r[0], f"{float(r[1]) * 1e-100:.6e}", r[2], r[3]) for r in _rows()]
        p = _pass(write_csv(_text(rows)), "auto")
        assert p.full.covariance()[0, 0] > 0
