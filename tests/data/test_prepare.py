"""prepare_dataset / prepare_frame: one pass, window moments equal direct computation."""

from __future__ import annotations

import hashlib

import numpy as np
import pandas as pd
import pytest

from relspan.analysis.moments import moments_of
from relspan.data import prepare_dataset, prepare_frame, window_moments
from relspan.errors import OptionsError
from relspan.spec.model import Period, WindowPlanSpec

from data_helpers import FULL, make_spec, rolling

PLANS = [
    FULL,
    rolling("r40", 40, 8),
    rolling("r10y", 10, 2, "years"),
    rolling("grow", 40, 12, kind="expanding"),
    rolling("q", 12, 6, "quarters"),
    WindowPlanSpec("eras", "periods", periods=(Period("first", "1980-01-01", "1994-12-31"),
                                               Period("second", "1995Q1", "2019Q4"))),
]


def _assert_matches_numpy(prepared, x):
    """Every window's covariance and mean against np.cov / np.mean of its raw rows."""
    for plan in prepared.plans:
        for w, m in zip(plan.windows, plan.moments):
            rows = x[w.first_row - 1:w.last_row]
            assert m.count == rows.shape[0] == w.rows
            ref = np.cov(rows.T)  # reference: numpy on the raw rows
            np.testing.assert_allclose(m.covariance(), ref, rtol=1e-12,
                                       atol=1e-12 * np.abs(ref).max())
            np.testing.assert_allclose(m.mean, rows.mean(axis=0), rtol=1e-15)


def test_streamed_window_covariances_match_numpy_on_large_offset_data(write_csv, offset_frame):
    path = write_csv(offset_frame)
    ds = make_spec(path, ["a", "b", "c"], time="quarter")
    prepared = prepare_dataset(ds, PLANS, chunk_rows=5)
    _assert_matches_numpy(prepared, offset_frame[["a", "b", "c"]].to_numpy())
    np.testing.assert_allclose(prepared.full.covariance(),
                               np.cov(offset_frame[["a", "b", "c"]].to_numpy().T), rtol=1e-12)


def test_results_do_not_depend_on_chunk_size(write_csv, offset_frame):
    path = write_csv(offset_frame)
    ds = make_spec(path, ["a", "b", "c"], time="quarter")
    runs = [prepare_dataset(ds, PLANS, chunk_rows=c) for c in (1, 7, 64, 100000)]
    for other in runs[1:]:
        for pa, pb in zip(runs[0].plans, other.plans):
            assert pa.windows == pb.windows
            assert all(a == b for a, b in zip(pa.moments, pb.moments))  # bit for bit


def test_frame_and_file_give_identical_moments(write_csv, offset_frame):
    path = write_csv(offset_frame)
    from_file = prepare_dataset(make_spec(path, ["a", "b", "c"], time="quarter"), PLANS)
    from_frame = prepare_frame(offset_frame, columns=["a", "b", "c"], time="quarter", plans=PLANS)
    for pa, pb in zip(from_file.plans, from_frame.plans):
        assert pa.windows == pb.windows
        assert all(a == b for a, b in zip(pa.moments, pb.moments))
    assert from_frame.source is None and from_frame.labels == ("a", "b", "c")


def test_parquet_and_csv_give_identical_moments(write_csv, offset_frame, tmp_path):
    pytest.importorskip("pyarrow")
    csv_path = write_csv(offset_frame)
    pq_path = tmp_path / "t.parquet"
    offset_frame.to_parquet(pq_path, row_group_size=33)
    a = prepare_dataset(make_spec(csv_path, ["a", "b", "c"], time="quarter"), PLANS, chunk_rows=50)
    b = prepare_dataset(make_spec(pq_path, ["a", "b", "c"], time="quarter"), PLANS, chunk_rows=17)
    for pa, pb in zip(a.plans, b.plans):
        assert pa.windows == pb.windows
        assert all(x == y for x, y in zip(pa.moments, pb.moments))


def test_parquet_typed_dates_are_read_as_dates(tmp_path, offset_frame):
    pytest.importorskip("pyarrow")
    df = offset_frame.copy()
    df["day"] = pd.date_range("2001-01-01", periods=len(df), freq="D")
    p = tmp_path / "d.parquet"
    df.drop(columns="quarter").to_parquet(p)
    prepared = prepare_dataset(make_spec(p, ["a", "b"], time="day"), [rolling("w", 4, 2, "weeks")])
    assert prepared.period == ("2001-01-01", "2001-06-09")
    assert prepared.plan("w").windows[0].label == "2001-01-01–2001-01-28"


def test_sha256_is_that_of_the_file_bytes(write_csv, offset_frame):
    path = write_csv(offset_frame)
    prepared = prepare_dataset(make_spec(path, ["a"], time="quarter"), [FULL], chunk_rows=3)
    assert prepared.sha256 == hashlib.sha256(path.read_bytes()).hexdigest()  # reference: hashlib


def test_reading_only_some_columns_reports_counts_and_period(write_csv, offset_frame):
    path = write_csv(offset_frame)
    prepared = prepare_dataset(make_spec(path, ["c", "a"], time="quarter"), [FULL])
    assert prepared.variables == ("c", "a")
    assert prepared.rows_read == prepared.rows_used == 160
    assert prepared.period == ("1980Q1", "2019Q4")
    x = offset_frame[["c", "a"]].to_numpy()
    np.testing.assert_allclose(prepared.full.covariance(), np.cov(x.T), rtol=1e-12)


def test_overview_keeps_rows_of_a_small_dataset(write_csv, offset_frame):
    path = write_csv(offset_frame)
    ov = prepare_dataset(make_spec(path, ["a", "b"], time="quarter"), [FULL]).overview
    assert ov.kind == "rows" and len(ov.values) == 160
    np.testing.assert_array_equal(ov.values["a"].to_numpy(), offset_frame["a"].to_numpy())
    assert ov.positions["time_label"].iloc[-1] == "2019Q4"


def test_overview_of_a_large_dataset_is_bounded_bin_means():
    rng = np.random.default_rng(5)
    x = rng.normal(size=(50000, 2)) + np.arange(50000)[:, None] * 1e-3
    df = pd.DataFrame(x, columns=["u", "v"])
    ov = prepare_frame(df, columns=["u", "v"], plans=[FULL], chunk_rows=3000).overview
    assert ov.kind == "bins" and len(ov.values) <= 4096
    assert ov.positions["rows"].sum() == 50000
    first = ov.positions.iloc[3]
    sl = slice(int(first["first_row"]) - 1, int(first["last_row"]))
    np.testing.assert_allclose(ov.values.iloc[3].to_numpy(), x[sl].mean(axis=0), rtol=1e-12)
    np.testing.assert_allclose(ov.low.iloc[3].to_numpy(), x[sl].min(axis=0))
    np.testing.assert_allclose(ov.high.iloc[3].to_numpy(), x[sl].max(axis=0))


def test_window_moments_pairs_windows_with_their_moments(write_csv, offset_frame):
    path = write_csv(offset_frame)
    prepared = prepare_dataset(make_spec(path, ["a", "b"], time="quarter"), PLANS)
    pairs = window_moments(prepared, "r40")
    assert [w.index for w, _ in pairs] == list(range(len(pairs)))
    w, m = pairs[2]
    x = offset_frame[["a", "b"]].to_numpy()[w.first_row - 1:w.last_row]
    np.testing.assert_allclose(m.comoment, moments_of(x).comoment, rtol=1e-11)


def test_unknown_plan_id_names_the_known_plans(write_csv, offset_frame):
    path = write_csv(offset_frame)
    prepared = prepare_dataset(make_spec(path, ["a", "b"], time="quarter"), [FULL])
    with pytest.raises(OptionsError, match=r"has no window plan 'nope'; its plans are 'full'"):
        window_moments(prepared, "nope")


def test_windows_without_time_column_are_labelled_by_rows(offset_frame):
    prepared = prepare_frame(offset_frame, columns=["a", "b"], plans=[rolling("r", 40, 40)])
    labels = [w.label for w in prepared.plan("r").windows]
    assert labels == ["rows 1–40", "rows 41–80", "rows 81–120", "rows 121–160"]


def _assert_granules_rebuild_windows(prepared):
    """Merging a window's granules (each once) gives the window's moments after all transforms."""
    for plan in prepared.plans:
        for i, m in enumerate(plan.moments):
            g = prepared.window_granules(plan.plan_id, i)
            c, mean, cm = g.window_moments()
            assert c == m.count
            np.testing.assert_allclose(mean, m.mean, rtol=1e-12, atol=1e-12 * np.abs(m.mean).max())
            np.testing.assert_allclose(cm, m.comoment, rtol=1e-9, atol=1e-11 * np.abs(m.comoment).max())


def test_window_granules_rebuild_every_window(write_csv, offset_frame):
    path = write_csv(offset_frame)
    ds = make_spec(path, ["a", "b", "c"], time="quarter", transforms={"b": "standardise", "c": "demean"})
    prepared = prepare_dataset(ds, PLANS, chunk_rows=7)
    assert prepared.granules.rows_per_granule == 1 and len(prepared.granules) == len(offset_frame)
    _assert_granules_rebuild_windows(prepared)
    assert prepared.window_granules("r40", 0).ordered


def test_window_granules_when_granules_hold_several_rows(write_csv, monkeypatch):
    import relspan.data.blocks as blocks

    monkeypatch.setattr(blocks.GranuleBuilder.__init__, "__kwdefaults__", {"timed": False, "cap": 32})
    rng = np.random.default_rng(7)
    x = 50 + rng.normal(size=(500, 3)) @ np.array([[1.0, 0.2, 0.0], [0.0, 1.0, 0.4], [0.0, 0.0, 1.5]])
    path = write_csv(pd.DataFrame(x, columns=["a", "b", "c"]))
    prepared = prepare_dataset(make_spec(path, ["a", "b", "c"]), [FULL, rolling("r90", 90, 35)],
                               chunk_rows=13)
    assert prepared.granules.rows_per_granule > 1
    _assert_granules_rebuild_windows(prepared)
    assert not prepared.window_granules("r90", 1).ordered   # no time column: unordered rows
