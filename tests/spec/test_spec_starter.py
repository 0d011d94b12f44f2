"""starter_spec writes a commented spec that loads, from the head of a CSV and a row count."""

from __future__ import annotations

import re

import numpy as np
import pandas as pd
import pytest

from relspan.errors import DataError
from relspan.spec import load_spec, starter_spec
from relspan.spec.starter import HEAD_ROWS, guess_time_column, prettify


def _csv(path, rows=400, time=("quarter", None), text_col=False, seed=0):
    rng = np.random.default_rng(seed)
    name, values = time
    frame = {}
    if name is not None:
        frame[name] = values if values is not None else [f"{1900 + i // 4}Q{i % 4 + 1}"
                                                         for i in range(rows)]
    frame["cargo_handled"] = rng.normal(size=rows)
    frame["shipCalls"] = rng.integers(0, 100, size=rows)
    frame["jobs"] = rng.normal(size=rows)
    if text_col:
        frame["berth"] = ["north"] * rows
    path.parent.mkdir(parents=True, exist_ok=True)
    pd.DataFrame(frame).to_csv(path, index=False)
    return path


def _write(tmp_path, csv, name="spec.yaml"):
    spec_path = tmp_path / name
    spec_path.parent.mkdir(parents=True, exist_ok=True)
    text = starter_spec(csv, spec_path)
    spec_path.write_text(text, encoding="utf-8")
    return text, load_spec(spec_path)


def test_starter_spec_loads_without_error(tmp_path):
    text, spec = _write(tmp_path, _csv(tmp_path / "data" / "harbour.csv"))
    (ds,) = spec.datasets
    assert ds.source == "data/harbour.csv"
    assert [w.id for w in spec.windows] == ["full", "rolling"]
    assert spec.claims == ()


def test_numeric_columns_become_variables_with_prettified_labels(tmp_path):
    _, spec = _write(tmp_path, _csv(tmp_path / "h.csv", text_col=True))
    (ds,) = spec.datasets
    assert ds.columns == ("cargo_handled", "shipCalls", "jobs")
    assert [v.label for v in ds.variables] == ["Cargo handled", "Ship Calls", "Jobs"]


def test_time_column_is_guessed_from_its_name(tmp_path):
    _, spec = _write(tmp_path, _csv(tmp_path / "h.csv"))
    assert spec.datasets[0].time.column == "quarter"


def test_time_column_is_guessed_from_values_that_parse_as_dates(tmp_path):
    dates = pd.date_range("2000-01-01", periods=400, freq="D").strftime("%Y-%m-%d").tolist()
    _, spec = _write(tmp_path, _csv(tmp_path / "h.csv", time=("obs", dates)))
    assert spec.datasets[0].time.column == "obs"
    assert "obs" not in spec.datasets[0].columns


def test_numeric_year_column_is_the_time_column_not_a_variable(tmp_path):
    years = list(range(1601, 2001))
    _, spec = _write(tmp_path, _csv(tmp_path / "h.csv", time=("Year", years)))
    assert spec.datasets[0].time.column == "Year"
    assert "Year" not in spec.datasets[0].columns


def test_measurement_named_like_time_is_not_taken_for_the_time_column():
    head = pd.DataFrame({"time_at_berth": [1.5, 2.25, 3.0], "cargo": [1.0, 2.0, 3.0]})
    assert guess_time_column(head) is None


def test_no_time_column_gives_no_time_key(tmp_path):
    text, spec = _write(tmp_path, _csv(tmp_path / "h.csv", time=(None, None)))
    assert spec.datasets[0].time is None and "time:" not in text


def test_rolling_plan_without_a_time_column_is_a_quarter_of_the_rows_stepping_a_fifth_of_that(tmp_path):
    _, spec = _write(tmp_path, _csv(tmp_path / "h.csv", rows=1000, time=(None, None)))
    rolling = spec.plan("rolling")
    assert (rolling.width.count, rolling.width.unit) == (250, "rows")
    assert (rolling.step.count, rolling.step.unit) == (50, "rows")


def test_rolling_plan_with_a_time_column_is_in_time_units(tmp_path):
    # 1000 quarters = 250 years: a quarter of that is 62.5 years, rounded to 62; a fifth of 62 is 12
    text, spec = _write(tmp_path, _csv(tmp_path / "h.csv", rows=1000))
    rolling = spec.plan("rolling")
    assert (rolling.width.count, rolling.width.unit) == (62, "years")
    assert (rolling.step.count, rolling.step.unit) == (12, "years")
    assert "rows about one quarter apart" in text


def test_short_daily_data_get_widths_in_days(tmp_path):
    days = pd.date_range("2020-01-01", periods=120, freq="D").strftime("%Y-%m-%d")
    text, spec = _write(tmp_path, _csv(tmp_path / "d.csv", rows=120, time=("date", list(days))))
    rolling = spec.plan("rolling")
    assert (rolling.width.count, rolling.width.unit) == (30, "days")
    assert (rolling.step.count, rolling.step.unit) == (6, "days")


def test_units_in_brackets_are_split_from_column_names():
    from relspan.spec.starter import split_unit

    assert split_unit("Dissolved oxygen (mg/l)") == ("Dissolved oxygen", "mg/l")
    assert split_unit("conductivity [uS/cm]") == ("Conductivity", "uS/cm")
    assert split_unit("cargo_handled") == ("Cargo handled", "")


def test_draft_writes_label_and_unit_for_a_column_with_a_unit(tmp_path):
    rng = np.random.default_rng(5)
    pd.DataFrame({"Dissolved oxygen (mg/l)": rng.normal(size=50), "Temperature (°C)": rng.normal(size=50)}
                 ).to_csv(tmp_path / "river.csv", index=False)
    text, spec = _write(tmp_path, tmp_path / "river.csv")
    v = spec.datasets[0].variables
    assert [(x.column, x.label, x.unit) for x in v] == [
        ("Dissolved oxygen (mg/l)", "Dissolved oxygen", "mg/l"), ("Temperature (°C)", "Temperature", "°C")]


def test_day_first_dates_get_a_format_that_reads_them(tmp_path):
    dates = pd.date_range("2001-01-01", periods=300, freq="7D").strftime("%d/%m/%Y")
    text, spec = _write(tmp_path, _csv(tmp_path / "w.csv", rows=300, time=("Date", list(dates))))
    assert spec.datasets[0].time.format == "%d/%m/%Y"
    assert "day first (a first field above 12" in text
    from relspan.run.build import check

    outcome = check(tmp_path / "spec.yaml", use_cache=False)  # the dates really read with that format
    prepared = outcome.run.datasets[0].prepared
    assert prepared.rows_used == 300 and tuple(prepared.period) == (dates[0], dates[-1])


def test_month_first_and_undecided_dates_are_said():
    from relspan.spec.starter import time_format

    assert time_format(pd.Series(["01/13/2001", "01/14/2001"]))[0] == "%m/%d/%Y"
    fmt, why = time_format(pd.Series(["01.02.2001", "01.03.2001"]))
    assert fmt == "%d.%m.%Y" and "a guess" in why
    assert time_format(pd.Series([1990, 1991]))[0] == "year"


def test_skipped_columns_are_listed_with_the_reason(tmp_path):
    text, _ = _write(tmp_path, _csv(tmp_path / "h.csv", text_col=True))
    assert '# Columns left out (1): "berth" (text, not numbers).' in text


def test_the_proposed_example_claim_loads_and_holds_once_uncommented(tmp_path):
    text, _ = _write(tmp_path, _csv(tmp_path / "h.csv", rows=120))
    assert "#   - id: a-relation-holds" in text
    live = text.replace("claims: []\n", "").replace("# claims:", "claims:")
    live = re.sub(r"^#(   .*)$", lambda m: m.group(1)[1:], live, flags=re.M)
    path = tmp_path / "live.yaml"
    path.write_text(live, encoding="utf-8")
    spec = load_spec(path)
    claim = spec.claims[0]
    assert (claim.kind, claim.plan, claim.assumption) == ("corank", "rolling", "equal")


def test_row_count_covers_the_whole_file_beyond_the_head(tmp_path):
    rows = HEAD_ROWS * 3 + 7
    text, _ = _write(tmp_path, _csv(tmp_path / "h.csv", rows=rows))
    assert f"({rows} rows, 3 numeric columns)" in text


def test_every_key_has_a_comment_above_it(tmp_path):
    text, _ = _write(tmp_path, _csv(tmp_path / "h.csv"))
    lines = text.splitlines()
    for i, line in enumerate(lines):
        if re.match(r"^\s*(- )?[a-z_]+:", line):
            assert lines[i - 1].lstrip().startswith("#"), line


def test_data_outside_the_spec_folder_sets_allow_outside(tmp_path):
    csv = _csv(tmp_path / "shared" / "h.csv")
    text, spec = _write(tmp_path, csv, name="specs/spec.yaml")
    assert "allow_outside: true" in text
    assert spec.datasets[0].source_path == csv.resolve()


def test_default_checks_are_written_and_equal_the_loaded_defaults(tmp_path):
    _, spec = _write(tmp_path, _csv(tmp_path / "h.csv"))
    assert spec.checks == spec.datasets[0].checks


def test_csv_with_fewer_than_two_numeric_columns_is_a_data_error(tmp_path):
    path = tmp_path / "words.csv"
    path.write_text("date,name,count\n2000-01-01,a,1\n2000-01-02,b,2\n", encoding="utf-8")
    with pytest.raises(DataError, match=r"words\.csv: the file has 1 numeric column besides the "
                                        r"time column; relations need at least two"):
        starter_spec(path, tmp_path / "spec.yaml")


def test_missing_csv_is_a_data_error(tmp_path):
    with pytest.raises(DataError, match=r"nope\.csv: data file not found\."):
        starter_spec(tmp_path / "nope.csv", tmp_path / "spec.yaml")


@pytest.mark.parametrize("column, label", [("cargo_handled", "Cargo handled"),
                                           ("GDP", "GDP"), ("ship-calls", "Ship calls"),
                                           ("jobsTotal", "Jobs Total")])
def test_prettify_makes_readable_labels(column, label):
    assert prettify(column) == label


def _frame(rows=120, seed=3):
    rng = np.random.default_rng(seed)
    return pd.DataFrame({"quarter": [f"{1990 + i // 4}Q{i % 4 + 1}" for i in range(rows)],
                         "cargo": np.round(rng.normal(size=rows), 4),
                         "rail": np.round(rng.normal(size=rows), 4)})


@pytest.mark.parametrize("name,write,keys", [
    ("d.parquet", lambda f, p: f.to_parquet(p, index=False), []),
    ("d.xlsx", lambda f, p: f.to_excel(p, index=False, sheet_name="Data"),
     ["format: excel", 'sheet: "Data"']),
    ("d.dta", lambda f, p: f.to_stata(p, write_index=False), ["format: stata"]),
    ("d.csv", lambda f, p: f.to_csv(p, index=False, sep=";", decimal=",", encoding="utf-16"),
     ['separator: ";"', 'decimal: ","', "encoding: utf-16"]),
    ("d.csv.gz", lambda f, p: f.to_csv(p, index=False, compression="gzip"), []),
])
def test_starter_reads_every_format_build_reads_and_pins_what_it_detected(tmp_path, name, write, keys):
    if name.endswith(".parquet"):
        pytest.importorskip("pyarrow")
    if name.endswith(".xlsx"):
        pytest.importorskip("openpyxl")
    data = tmp_path / name
    write(_frame(), data)
    text, spec = _write(tmp_path, data)
    for key in keys:
        assert f"    {key}\n" in text, key
    ds = spec.datasets[0]
    assert ds.columns == ("cargo", "rail") and ds.time.column == "quarter"
    assert "(120 rows, 2 numeric columns)" in text
