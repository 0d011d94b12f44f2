"""Transforms against direct pandas computations; missing-value policy; unusable columns."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from relspan.data import prepare_dataset, prepare_frame
from relspan.errors import DataError

from data_helpers import FULL, make_spec, rolling


@pytest.fixture
def positive_frame():
    rng = np.random.default_rng(11)
    x = np.exp(rng.normal(size=(60, 3)) * 0.1 + np.array([3.0, 5.0, 1.0]))
    return pd.DataFrame(x, columns=["a", "b", "c"])


def _direct(df, transform):
    """The transformed columns computed directly with pandas (the reference)."""
    if transform == "none":
        return df
    if transform == "log":
        return np.log(df)
    if transform == "diff":
        return df.diff().iloc[1:]
    if transform == "logdiff":
        return np.log(df).diff().iloc[1:]
    if transform == "demean":
        return df - df.mean()
    if transform == "standardise":
        return (df - df.mean()) / df.std(ddof=1)
    raise AssertionError(transform)


@pytest.mark.parametrize("transform", ["none", "log", "diff", "logdiff", "demean", "standardise"])
def test_each_transform_matches_pandas(transform, positive_frame):
    plans = [FULL, rolling("r", 20, 10)]
    prepared = prepare_frame(positive_frame, columns=["a", "b", "c"], transforms=transform,
                             plans=plans, chunk_rows=7)
    ref = _direct(positive_frame, transform).to_numpy()  # reference: pandas
    np.testing.assert_allclose(prepared.full.covariance(), np.cov(ref.T), rtol=1e-11)
    np.testing.assert_allclose(prepared.full.mean, ref.mean(axis=0), rtol=1e-11, atol=1e-13)
    for w, m in zip(prepared.plan("r").windows, prepared.plan("r").moments):
        rows = ref[w.first_row - 1:w.last_row]
        np.testing.assert_allclose(m.covariance(), np.cov(rows.T), rtol=1e-11)
        np.testing.assert_allclose(m.mean, rows.mean(axis=0), rtol=1e-11, atol=1e-13)
    np.testing.assert_allclose(prepared.overview.values.to_numpy(), ref, rtol=1e-11, atol=1e-13)
    if transform in ("diff", "logdiff"):
        assert prepared.rows_dropped == 1 and prepared.drops[0].first_rows == (1,)


def test_log_of_non_positive_value_names_the_row(write_csv):
    path = write_csv("x,y\n1,2\n2,3\n0,4\n3,1\n")
    ds = make_spec(path, ["x", "y"], transforms={"x": "log"})
    with pytest.raises(DataError, match=r"column 'x', row 3: 0 is not positive, so transform log "
                                        r"\(a logarithm\) cannot be taken\.\n  Fix: use transform: "
                                        r"none or diff"):
        prepare_dataset(ds, [FULL])


def test_diff_carries_the_previous_row_across_chunks(positive_frame):
    a = prepare_frame(positive_frame, columns=["a", "b"], transforms="diff", plans=[FULL],
                      chunk_rows=1)
    ref = positive_frame[["a", "b"]].diff().iloc[1:].to_numpy()  # reference: pandas
    np.testing.assert_allclose(a.full.covariance(), np.cov(ref.T), rtol=1e-12)


def test_drop_counts_rows_with_missing_values_and_lists_the_first(write_csv):
    lines = ["x,y"] + [f"{i},{(i * 7) % 5}" if i % 4 else f"{i}," for i in range(1, 25)]
    path = write_csv("\n".join(lines) + "\n")
    prepared = prepare_dataset(make_spec(path, ["x", "y"]), [FULL], chunk_rows=5)
    assert prepared.rows_read == 24 and prepared.rows_used == 18
    (drop,) = prepared.drops
    assert drop.reason == "missing value" and drop.count == 6
    assert drop.first_rows == (4, 8, 12, 16, 20)


def test_diff_after_a_missing_value_is_not_a_two_step_change(write_csv):
    path = write_csv("x,y\n1,5\n2,3\n,4\n7,1\n9,2\n12,8\n13,1\n")
    prepared = prepare_dataset(make_spec(path, ["x", "y"], transforms={"x": "diff"}), [FULL])
    reasons = {d.reason: d.first_rows for d in prepared.drops}
    assert reasons == {"missing value": (3,), "no previous row to difference": (1, 4)}
    np.testing.assert_allclose(prepared.full.mean, [np.mean([1, 2, 3, 1]), np.mean([3, 2, 8, 1])])


def test_fail_policy_names_the_first_missing_cell(write_csv):
    path = write_csv("x,y\n1,2\n2,3\n3,\n4,1\n")
    with pytest.raises(DataError, match=r"column 'y', row 3 is empty, and the dataset says missing: "
                                        r"fail\.\n  Fix: fill in the cell, or set missing: drop"):
        prepare_dataset(make_spec(path, ["x", "y"], missing="fail"), [FULL])


def test_all_missing_column_is_an_error(write_csv):
    path = write_csv("x,y\n1,\n2,\n3,\n4,\n5,\n")
    with pytest.raises(DataError, match=r"column 'y' has no values: all 5 rows in range are empty\."
                                        r"\n  Fix: drop the variable"):
        prepare_dataset(make_spec(path, ["x", "y"]), [FULL])


def test_constant_column_is_an_error(write_csv):
    path = write_csv("x,y\n1,7\n2,7\n3,7\n4,7\n5,7\n")
    with pytest.raises(DataError, match=r"column 'y' is constant over the 5 analysed rows \(value 7\): "
                                        r"no variation, cannot be analysed\.\n  Fix: drop the variable"):
        prepare_dataset(make_spec(path, ["x", "y"]), [FULL])


def test_column_made_constant_by_differencing_is_an_error(write_csv):
    path = write_csv("x,y\n1,7\n2,9\n3,4\n4,1\n5,3\n6,2\n")
    with pytest.raises(DataError, match=r"column 'x' is constant after transform diff"):
        prepare_dataset(make_spec(path, ["x", "y"], transforms={"x": "diff"}), [FULL])
