"""The Python face for notebooks: load_spec, check, build, analyse_frame.

Outside references: statsmodels OLS (reference library) for the elementary
regression that ``analyse_frame`` reports; the data are the invented demo's
(specs/data/trio.csv, made by specs/generate_demo.py).
"""

from __future__ import annotations

import shutil
import textwrap
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

import relspan
from relspan.errors import DataError, OptionsError, SpecError

ROOT = Path(__file__).resolve().parents[1]
SPECS = ROOT / "specs"
DEMO = SPECS / "demo.yaml"
TRIO_CSV = SPECS / "data" / "trio.csv"
TRIO_COLUMNS = ["cargo", "rail", "customs", "kelp"]
TRIO_ASSUMPTIONS = ["elementary", "equal", "bounded", "diagonal"]  # as specs/demo.yaml for trio


@pytest.fixture(scope="module")
def demo_check():
    """relspan.check on the demo (serial, no cache): the reference for analyse_frame."""
    return relspan.check(DEMO, jobs=1, use_cache=False)


@pytest.fixture(scope="module")
def trio_frame() -> pd.DataFrame:
    return pd.read_csv(TRIO_CSV)


@pytest.fixture(scope="module")
def trio_analysis(trio_frame):
    # the demo's trio set-up: ten-year windows every two years are 40 and 8 quarterly rows
    return relspan.analyse_frame(trio_frame, columns=TRIO_COLUMNS, time="quarter", rolling=40, step=8,
                                 assumptions=TRIO_ASSUMPTIONS, normalise_on="cargo")


# --------------------------------------------------------------- load_spec


def test_load_spec_returns_the_validated_demo():
    spec = relspan.load_spec(DEMO)
    assert [d.id for d in spec.datasets] == ["trio", "accounts", "shift"]
    assert len(spec.claims) == 5
    assert spec.dataset("accounts").noise_shape == (0.4093, 0.81, 0.49, 1.44)
    assert spec.path == DEMO.resolve() or spec.path == DEMO


def test_load_spec_raises_a_located_spec_error_with_its_fields(tmp_path):
    bad = tmp_path / "bad.yaml"
    bad.write_text(DEMO.read_text(encoding="utf-8").replace("  seed: 0\n", "  sead: 0\n"),
                   encoding="utf-8")
    with pytest.raises(SpecError, match=r"unknown key checks\.sead; did you mean 'seed'\?") as info:
        relspan.load_spec(bad)
    assert info.value.line is not None and info.value.line > 100
    assert "seed" in (info.value.fix or "")


# ------------------------------------------------------------------- check


def test_check_returns_an_outcome_with_every_demo_claim_holding_and_no_site(demo_check):
    assert demo_check.all_claims_hold
    assert demo_check.out_dir is None
    assert [v.claim.id for v in demo_check.run.verdicts] == [c.id for c in relspan.load_spec(DEMO).claims]
    table = demo_check.verdict_table()
    assert table.count("HOLDS") == 5
    assert "5 of 5 claim(s) hold" in table


def test_check_fills_the_cache_that_build_reads_so_build_recomputes_no_dataset(tmp_path):
    folder = tmp_path / "demo"
    (folder / "data").mkdir(parents=True)
    shutil.copy2(SPECS / "data" / "shift.csv", folder / "data" / "shift.csv")
    spec = folder / "fares.yaml"
    spec.write_text(_SMALL_SPEC, encoding="utf-8")
    checked = relspan.check(spec, jobs=1)
    assert checked.all_claims_hold and checked.run.cache_misses == len(checked.run.datasets) >= 1
    assert (folder / ".relspan-cache").is_dir()
    built = relspan.build(spec, jobs=1, out=tmp_path / "site")
    assert built.run.cache_misses == 0 and built.run.cache_hits == len(checked.run.datasets)


# ------------------------------------------------------------------- build

#: a small spec of our own on the demo's invented ferry-fare table (quick to build)
_SMALL_SPEC = textwrap.dedent("""\
    relspan: 1
    report:
      title: "Ferry fares before and after 2008 (invented data)"
    datasets:
      - id: fares
        title: "Caddren ferry fares"
        source: data/shift.csv
        time: {column: quarter, format: quarter}
        variables:
          - {column: fares, label: "Ferry fares"}
          - {column: fuel, label: "Fuel costs"}
          - {column: wages, label: "Crew wages"}
        missing: fail
    windows:
      - {id: full, kind: full}
      - id: eras
        kind: periods
        periods:
          - {label: "Old formula", from: "1990-01-01", to: "2007-12-31"}
          - {label: "New formula", from: "2008-01-01", to: "2025-12-31"}
    checks:
      assumptions: [elementary, equal, bounded, diagonal]
      normalise_on: fares
    claims:
      - id: one-formula-per-era
        kind: corank
        dataset: fares
        plan: eras
        assumption: equal
        equals: 1
    site:
      out: _site
    """)


@pytest.fixture(scope="module")
def small_build(tmp_path_factory):
    folder = tmp_path_factory.mktemp("api-build")
    (folder / "data").mkdir()
    shutil.copy2(SPECS / "data" / "shift.csv", folder / "data" / "shift.csv")
    spec = folder / "fares.yaml"
    spec.write_text(_SMALL_SPEC, encoding="utf-8")
    outcome = relspan.build(spec, jobs=1, cache_dir=folder / "cache")
    return spec, outcome


def test_build_writes_the_site_to_site_out_beside_the_spec(small_build):
    spec, outcome = small_build
    assert outcome.all_claims_hold
    assert outcome.out_dir == spec.parent / "_site"
    for name in ("index.html", "claims.html", "caution.html", "data/results.json", "SHA256SUMS"):
        assert (outcome.out_dir / name).is_file(), name
    assert outcome.run.cache_misses == 1 and outcome.run.cache_hits == 0


def test_build_again_from_the_cache_gives_the_same_bytes(small_build):
    spec, first = small_build
    before = {p: p.read_bytes() for p in first.out_dir.rglob("*") if p.is_file()}
    again = relspan.build(spec, jobs=1, cache_dir=spec.parent / "cache")
    assert again.run.cache_hits == 1 and again.run.cache_misses == 0
    assert {p: p.read_bytes() for p in again.out_dir.rglob("*") if p.is_file()} == before


def test_build_into_the_spec_folder_raises_before_analysing(small_build):
    spec, _ = small_build
    from relspan.errors import OutputError

    with pytest.raises(OutputError):
        relspan.build(spec, out=spec.parent, jobs=1, use_cache=False)


# ----------------------------------------------------------- analyse_frame


def test_analyse_frame_to_frame_has_one_row_per_assumption_with_the_spec_runs_coranks(
        trio_analysis, demo_check):
    table = trio_analysis.to_frame()
    assert isinstance(table, pd.DataFrame)
    assert list(table.index) == TRIO_ASSUMPTIONS
    expected = demo_check.run.dataset("trio").full.coranks
    assert table["corank"].to_dict() == {a: expected[a] for a in TRIO_ASSUMPTIONS}
    assert {"coef[rail]", "coef[customs]", "coef[kelp]"} <= set(table.columns)


def test_analyse_frame_elementary_coefficients_equal_ols_of_the_reference_variable(trio_analysis,
                                                                                  trio_frame):
    sm = pytest.importorskip("statsmodels.api")  # reference library: statsmodels OLS
    fit = sm.OLS(trio_frame["cargo"], sm.add_constant(trio_frame[["rail", "customs", "kelp"]])).fit()
    row = trio_analysis.to_frame().loc["elementary"]
    for name in ("rail", "customs", "kelp"):
        assert row[f"coef[{name}]"] == pytest.approx(fit.params[name], rel=1e-9)


def test_analyse_frame_windows_frame_has_a_row_per_window_and_assumption(trio_analysis, demo_check):
    windows = trio_analysis.windows_frame()
    assert list(windows.columns)[:10] == ["plan", "window", "start", "end", "rows", "assumption",
                                          "corank", "angle_to_full_deg", "normalised_on", "coefficients"]
    assert len(windows) == (1 + 14) * len(TRIO_ASSUMPTIONS)
    assert str(windows["corank"].dtype) == "Int64"
    rolling = windows[(windows["plan"] == "rolling") & (windows["assumption"] == "equal")]
    reference = demo_check.run.dataset("trio").plan("rolling")
    assert list(rolling["window"]) == list(reference.labels)
    assert list(rolling["corank"]) == [w.coranks["equal"] for w in reference.analyses] == [2] * 14
    assert set(rolling["rows"]) == {40}


def test_analyse_frame_findings_frame_lists_every_finding(trio_analysis):
    findings = trio_analysis.findings_frame()
    assert list(findings.columns) == ["kind", "topic", "headline"]
    assert len(findings) == len(trio_analysis.result.findings) > 0
    assert "corank" in set(findings["topic"])


def test_analyse_frame_shows_as_an_html_table_in_a_notebook(trio_analysis):
    html = trio_analysis._repr_html_()
    assert "<table" in html and "equal" in html and "corank" in html
    assert "corank" in repr(trio_analysis)


def test_analyse_frame_names_a_missing_column_and_the_columns_that_exist(trio_frame):
    with pytest.raises(OptionsError, match=r"columns \['seaweed'\] are not in the DataFrame; it has "
                                           r"\['quarter', 'cargo', 'rail', 'customs', 'kelp'\]"):
        relspan.analyse_frame(trio_frame, columns=["cargo", "seaweed"])


def test_analyse_frame_names_the_first_non_numeric_row(trio_frame):
    frame = trio_frame.astype({"rail": object}).copy()
    frame.loc[6, "rail"] = "about 700"
    with pytest.raises(DataError, match=r"column 'rail', row 7: 'about 700' is not a number"):
        relspan.analyse_frame(frame, columns=TRIO_COLUMNS, time="quarter")


def test_analyse_frame_without_time_uses_row_windows(trio_frame):
    result = relspan.analyse_frame(trio_frame[TRIO_COLUMNS], columns=TRIO_COLUMNS, rolling=40, step=8,
                                   assumptions=["equal"])
    windows = result.windows_frame()
    assert list(windows.loc[windows["plan"] == "rolling", "window"])[:2] == ["rows 1–40", "rows 9–48"]
    assert np.all(windows["corank"] == 2)


def test_windows_frame_has_each_windows_start_end_and_angle_to_the_full_sample(trio_analysis):
    windows = trio_analysis.windows_frame()
    plan = trio_analysis.result.plan("rolling")
    rows = windows[(windows["plan"] == "rolling") & (windows["assumption"] == "equal")]
    assert list(rows["start"]) == [w.first_time for w in plan.windows]
    assert list(rows["end"]) == [w.last_time for w in plan.windows]
    assert rows["start"].iloc[0] == "1990Q1" and rows["end"].iloc[0] == "1999Q4"
    q = trio_analysis.result.examined[0]
    np.testing.assert_array_equal(rows["angle_to_full_deg"].to_numpy(),
                                  plan.stability["equal"].to_reference_deg)


def test_coefficients_appear_only_where_one_relation_holds_and_name_the_normalising_variable(
        trio_analysis):
    table = trio_analysis.to_frame()
    assert set(table["normalised_on"]) == {"cargo"}
    # trio: two relations under equal noise: no single equation is fixed (the site says so too)
    assert table.loc["equal", "corank"] == 2
    assert table.loc["equal", "coefficients"] == "not identified (2 relations)"
    assert table.loc[["equal"], ["coef[rail]", "coef[customs]", "coef[kelp]"]].isna().all(axis=None)
    assert table.loc["elementary", "coefficients"] == "point, given which variable is noisy"
    windows = trio_analysis.windows_frame()
    two = windows[windows["corank"] >= 2]
    assert len(two) and two.filter(like="coef[").isna().all(axis=None)


def test_one_relation_gives_equal_noise_coefficients_near_the_truth():
    rng = np.random.default_rng(16)
    t = 400
    x = rng.normal(size=(t, 2)) * [3.0, 2.0]
    y = 2.0 * x[:, 0] - 0.5 * x[:, 1]          # the one relation: y = 2 a - 0.5 b
    frame = pd.DataFrame({"y": y, "a": x[:, 0], "b": x[:, 1]}) + 0.01 * rng.normal(size=(t, 3))
    table = relspan.analyse_frame(frame, columns=["y", "a", "b"], normalise_on="y",
                                  assumptions=["elementary", "equal"]).to_frame()
    assert table.loc["equal", "corank"] == 1 and table.loc["equal", "coefficients"] == "point"
    assert table.loc["equal", "coef[a]"] == pytest.approx(2.0, abs=0.01)
    assert table.loc["equal", "coef[b]"] == pytest.approx(-0.5, abs=0.01)


@pytest.mark.parametrize("index_kind", ["period", "datetime"])
def test_a_period_or_datetime_index_is_the_time_axis(trio_frame, index_kind):
    periods = pd.PeriodIndex(trio_frame["quarter"], freq="Q")
    frame = trio_frame.drop(columns="quarter")
    frame.index = periods if index_kind == "period" else periods.to_timestamp()
    result = relspan.analyse_frame(frame, columns=TRIO_COLUMNS, rolling=40, step=8,
                                   assumptions=["equal"])
    reference = relspan.analyse_frame(trio_frame, columns=TRIO_COLUMNS, time="quarter", rolling=40,
                                      step=8, assumptions=["equal"])
    got = result.windows_frame()
    assert result.result.prepared.time_column is not None
    if index_kind == "period":
        assert list(got["window"]) == list(reference.windows_frame()["window"])
    else:
        assert got["start"].iloc[1] == "1990-01-01"
    assert list(got["corank"]) == list(reference.windows_frame()["corank"])


def _trio_table(result):
    return result.to_frame().drop(columns=["coefficients"])


@pytest.mark.parametrize("library", ["pyarrow", "polars", "xarray"])
def test_tables_of_other_libraries_are_converted_and_give_the_same_answer(trio_frame, library):
    lib = pytest.importorskip(library)
    if library == "pyarrow":
        data, time = lib.Table.from_pandas(trio_frame), "quarter"
    elif library == "polars":
        data, time = lib.from_pandas(trio_frame), "quarter"
    else:
        indexed = trio_frame.set_index(pd.PeriodIndex(trio_frame["quarter"], freq="Q").to_timestamp())
        data, time = lib.Dataset.from_dataframe(indexed.drop(columns="quarter")), None
    got = relspan.analyse_frame(data, columns=TRIO_COLUMNS, time=time, assumptions=["elementary", "equal"])
    ref = relspan.analyse_frame(trio_frame, columns=TRIO_COLUMNS, time="quarter",
                                assumptions=["elementary", "equal"])
    pd.testing.assert_frame_equal(_trio_table(got), _trio_table(ref))


def test_an_object_with_the_dataframe_interchange_protocol_is_converted(trio_frame):
    class Interchange:
        def __init__(self, frame):
            self._frame = frame

        def __dataframe__(self, nan_as_null=False, allow_copy=True):
            return self._frame.__dataframe__(nan_as_null=nan_as_null, allow_copy=allow_copy)

    got = relspan.analyse_frame(Interchange(trio_frame[TRIO_COLUMNS]), columns=TRIO_COLUMNS,
                                assumptions=["equal"])
    assert got.to_frame().loc["equal", "corank"] == 2


def test_an_object_with_the_arrow_pycapsule_interface_is_converted(trio_frame):
    pa = pytest.importorskip("pyarrow")

    class Capsule:
        def __init__(self, table):
            self._table = table

        def __arrow_c_stream__(self, requested_schema=None):
            return self._table.__arrow_c_stream__(requested_schema)

    got = relspan.analyse_frame(Capsule(pa.Table.from_pandas(trio_frame[TRIO_COLUMNS])),
                                columns=TRIO_COLUMNS, assumptions=["equal"])
    assert got.to_frame().loc["equal", "corank"] == 2


@pytest.mark.parametrize("data", [[[1.0, 2.0]], np.ones((5, 2)), {"a": [1, 2]}])
def test_anything_else_is_one_clear_type_error(data):
    with pytest.raises(TypeError, match=r"analyse_frame needs a table: a pandas\.DataFrame, or a "
                                        r"polars, pyarrow or xarray table.*; got "):
        relspan.analyse_frame(data, columns=["a", "b"])


# ------------------------------------------------------------ notebook display


def test_reprs_are_short_whatever_the_size_of_the_run(demo_check, trio_analysis):
    spec = relspan.load_spec(DEMO)
    for obj in (demo_check, spec, demo_check.run, demo_check.run.datasets[0],
                demo_check.run.datasets[0].plans[-1], trio_analysis):
        assert len(repr(obj)) < 2000, type(obj).__name__
    assert "5 of 5 claim(s) hold" in repr(demo_check)
    assert "3 dataset(s) (trio, accounts, shift)" in repr(spec)
    for obj in (demo_check, spec, trio_analysis):
        html = obj._repr_html_()
        assert html.startswith("<div>") and len(html) < 20_000, type(obj).__name__


def test_outcome_html_escapes_what_the_spec_says(demo_check):
    html = demo_check._repr_html_()
    assert "<table>" in html and "trio-two-relations" in html
    assert "<script" not in html


def test_verdicts_frame_has_one_row_per_claim(demo_check):
    frame = demo_check.verdicts_frame()
    assert list(frame.index) == [v.claim.id for v in demo_check.run.verdicts]
    assert frame["holds"].all() and set(frame["verdict"]) == {"holds"}
    assert {"kind", "dataset", "plan", "observed", "text"} <= set(frame.columns)


def test_outcome_tables_of_a_named_dataset(demo_check):
    assert set(demo_check.windows_frame("shift")["plan"]) == {p.plan.id for p in
                                                            demo_check.run.dataset("shift").plans}
    with pytest.raises(KeyError, match="no dataset 'nope'; the datasets are trio, accounts, shift"):
        demo_check.assumptions_frame("nope")
