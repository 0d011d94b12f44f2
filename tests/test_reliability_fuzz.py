"""End-to-end fuzzing: random small specs and random small tables through ``relspan.api.check``.

Whatever a user writes, ``check`` either returns an :class:`~relspan.api.Outcome`
or raises one of our :class:`~relspan.errors.RelspanError` subclasses (which the
command line turns into exit code 2); any other exception is a bug. Every table
``check`` accepts is also read by an independent path, the standard library's
``csv`` module with ``float()`` and the transforms written out in numpy, and
compared cell by cell with the rows relspan analysed (differential check). The spec
loader and the data readers are fuzzed on their own in tests/spec and
tests/data; this test drives the whole pipeline, analysis and claims included.
"""

from __future__ import annotations

import csv
import io
import math
import tempfile
import warnings
from pathlib import Path

import numpy as np
import yaml
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from relspan.api import Outcome, check
from relspan.errors import RelspanError, RelspanWarning
from relspan.spec.model import ASSUMPTIONS, CLAIM_KINDS, TRANSFORMS

COLUMN_NAMES = ["a", "b", "c", "d", "x y", "Größe", "数量", "a,b", "", "year"]


@st.composite
def tables(draw):
    """A small table: a time column of years (sometimes unsorted or repeated) and 2-4 numeric columns.

    The numbers are mostly well-behaved (random normals, an exact linear combination,
    a constant column) with a few bad cells (blank, text, inf, huge, tiny) mixed in.
    """
    size = draw(st.integers(0, 9))
    n_rows = 0 if size == 9 else 3 if size == 8 else draw(st.integers(8, 24))
    names = draw(st.lists(st.sampled_from(COLUMN_NAMES[:8]), min_size=2, max_size=4, unique=True))
    seed = draw(st.integers(0, 2**16))
    rng = np.random.default_rng(seed)
    scale = 10.0 ** draw(st.integers(-8, 8))
    data = (rng.normal(size=(n_rows, len(names))) + draw(st.sampled_from([0.0, 8.0]))) * scale
    shape = draw(st.sampled_from(["generic", "exact", "constant", "scaled"]))
    if shape == "exact" and len(names) >= 3:
        data[:, -1] = data[:, 0] - 2.0 * data[:, 1]
    elif shape == "constant":
        data[:, draw(st.integers(0, len(names) - 1))] = 3.25
    elif shape == "scaled":
        data *= 10.0 ** np.arange(-8, -8 + 4 * len(names), 4)[: len(names)]
    cells = [[repr(float(v)) for v in row] for row in data]
    bad = draw(st.lists(st.tuples(st.integers(0, max(n_rows - 1, 0)), st.integers(0, len(names) - 1),
                                  st.sampled_from(["", "NaN", "inf", "-inf", "abc", "1e300",
                                                   "1e-320", "1,5", "  7 ", "0x10", "\"3\""])),
                        max_size=draw(st.sampled_from([0, 0, 0, 1, 2]))))
    for r, c, v in bad:
        if r < n_rows:
            cells[r][c] = v
    years = list(range(1980, 1980 + n_rows))
    order = draw(st.sampled_from(["sorted"] * 8 + ["swap", "repeat"]))
    if order == "swap" and n_rows > 3:
        years[1], years[2] = years[2], years[1]
    elif order == "repeat" and n_rows > 3:
        years[3] = years[2]
    lines = [",".join(["year"] + [_csv_field(n) for n in names])]
    ending = draw(st.sampled_from(["plain"] * 6 + ["trailing separator", "crlf", "blank lines"]))
    tail = "," if ending == "trailing separator" else ""
    lines += [",".join([str(y)] + row) + tail for y, row in zip(years, cells)]
    if ending == "blank lines" and len(lines) > 3:
        lines.insert(3, "")
    newline = "\r\n" if ending == "crlf" else "\n"
    return names, newline.join(lines) + newline


def _csv_field(name: str) -> str:
    return f'"{name}"' if ("," in name or '"' in name) else name


def _window(draw, i, timed):
    kind = draw(st.sampled_from(["full", "rolling", "expanding"] + (["periods"] if timed else [])))
    plan = {"id": f"w{i}", "kind": kind}
    if kind in ("rolling", "expanding"):
        if timed and draw(st.booleans()):
            plan["width"] = draw(st.sampled_from(["5 years", "12 years", "40 years"]))
            plan["step"] = draw(st.sampled_from(["2 years", "1 year", "5 years"]))
        else:
            plan["width"] = draw(st.sampled_from([2, 40]) | st.integers(6, 20))
            plan["step"] = draw(st.integers(1, 12))
    elif kind == "periods":
        start = draw(st.integers(1975, 2000))
        plan["periods"] = [{"label": "p", "from": f"{start}-01-01", "to": f"{start + draw(st.integers(0, 20))}-12-31"}]
    return plan


def _claim(draw, names, plans, checked):
    kind = draw(st.sampled_from(list(CLAIM_KINDS) + ["corank"]))
    claim = {"id": "c", "kind": kind, "text": "A claim.", "dataset": draw(st.sampled_from(["d"] * 9 + ["e"])),
             "plan": draw(st.sampled_from(plans * 9 + ["nope"]))}
    assumption = draw(st.sampled_from(checked))
    if kind == "corank":
        claim.update(assumption=assumption, equals=draw(st.integers(0, len(names) - 1)))
    elif kind == "subspace_stable":
        claim.update(assumption=assumption, corank=draw(st.integers(1, len(names) - 1)),
                     below_deg=draw(st.sampled_from([0.001, 5, 45])))
    else:
        claim.update(assumption=assumption, normalise_on=draw(st.sampled_from(names)),
                     variable=draw(st.sampled_from(names)))
    return claim


@st.composite
def projects(draw):
    """(spec dict, csv text): a spec over the table, mostly valid, sometimes not."""
    names, text = draw(tables())
    pool = names + (["zz"] if draw(st.integers(0, 9)) == 0 else [])
    picked = draw(st.lists(st.sampled_from(pool), min_size=2, max_size=4, unique=True))
    variables = []
    for col in picked:
        v = {"column": col}
        if draw(st.integers(0, 3)) == 0:
            v["transform"] = draw(st.sampled_from(list(TRANSFORMS)))  # log of negatives: a DataError
        variables.append(v)
    if draw(st.booleans()):
        share = draw(st.sampled_from([0.0, 0.5, 1.0, 2.0]))
        for v in variables:
            v["noise_share"] = share if draw(st.booleans()) else 1.0
    timed = draw(st.integers(0, 4)) > 0
    windows = [_window(draw, i, timed) for i in range(draw(st.integers(1, 2)))]
    plan_ids = [w["id"] for w in windows]
    dataset = {"id": "d", "source": "data/t.csv", "variables": variables,
               "missing": draw(st.sampled_from(["drop", "fail"]))}
    if timed:
        dataset["time"] = {"column": "year", "format": draw(st.sampled_from(["auto", "year"]))}
    shared = "noise_share" in variables[0]
    allowed = [a for a in ASSUMPTIONS if shared or a != "shaped"]
    checks = {"assumptions": draw(st.lists(st.sampled_from(allowed), min_size=1, max_size=3, unique=True)),
              "tolerance": draw(st.sampled_from([{"relative": 0.05}, {"relative": 1e-9}, {"relative": 0.9},
                                                 {"absolute": 1e-6}, {"absolute": 10.0}])),
              "coranks": draw(st.sampled_from(["auto"] * 6 + [[1], [1, 2]])),
              "frisch_starts": 2}
    if draw(st.booleans()):
        checks["normalise_on"] = draw(st.sampled_from(picked))
    # resampling off or small: both paths run on odd tables, at a cost the suite can afford
    # (the default of 499 resamples per window is checked in tests/analysis/test_inference.py)
    checks["resampling"] = {"resamples": draw(st.sampled_from([0, 19])),
                            "scheme": draw(st.sampled_from(["auto", "iid", "moving"]))}
    spec = {"relspan": 1, "report": {"title": "Fuzz"}, "datasets": [dataset], "windows": windows,
            "checks": checks, "site": {"out": "_site"}}
    if draw(st.booleans()):
        spec["claims"] = [_claim(draw, picked, plan_ids, checks["assumptions"])]
    return spec, text


@settings(max_examples=150, deadline=None, derandomize=True,
          suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])
@given(project=projects())
def test_random_specs_and_tables_give_an_outcome_or_a_relspan_error(project):
    spec, text = project
    with tempfile.TemporaryDirectory() as d:
        folder = Path(d)
        (folder / "data").mkdir()
        (folder / "data" / "t.csv").write_text(text, encoding="utf-8")
        (folder / "spec.yaml").write_text(yaml.safe_dump(spec, allow_unicode=True, sort_keys=False),
                                          encoding="utf-8")
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RelspanWarning)
            try:
                outcome = check(folder / "spec.yaml", jobs=1, use_cache=False, progress=False)
            except RelspanError as err:
                message = str(err)
                assert message.strip() and "Traceback" not in message
                assert err.fix and message.endswith(f"\n  Fix: {err.fix}")
                assert err.path, f"the error names no file: {message}"
                return
        assert isinstance(outcome, Outcome)
        assert isinstance(outcome.all_claims_hold, bool)
        for verdict in outcome.run.verdicts:
            assert verdict.observed.strip()
        for ds in outcome.run.datasets:
            for plan in ds.plans:
                for a in plan.analyses:
                    for q in a.coranks.values():
                        assert q is None or (isinstance(q, (int, np.integer)) and 0 <= q < len(ds.full.names))
        assert math.isfinite(outcome.seconds)
        for ds in outcome.run.datasets:
            _same_cells_as_an_independent_read(text, spec["datasets"][0], ds)


#: cells pandas reads as missing (pandas.read_csv's default na_values list, pandas docs)
_MISSING = {"", "#N/A", "#N/A N/A", "#NA", "-1.#IND", "-1.#QNAN", "-NaN", "-nan", "1.#IND", "1.#QNAN",
            "<NA>", "N/A", "NA", "NULL", "NaN", "None", "n/a", "nan", "null"}


def _independent_rows(text: str, columns: list[str]) -> tuple[list[int], np.ndarray]:
    """Data rows (1-based) and the selected cells as floats (NaN where missing), via the csv module."""
    reader = csv.reader(io.StringIO(text))
    header = next(reader)
    at = [header.index(c) for c in columns]
    rows, values = [], []
    i = 0
    for row in reader:
        if not row:
            continue  # a blank line is no data row: relspan numbers data rows, blank lines not counted
        i += 1
        cells = []
        for j in at:
            cell = row[j] if j < len(row) else ""
            cells.append(math.nan if cell in _MISSING else float(cell))
        rows.append(i)
        values.append(cells)
    return rows, np.array(values, dtype=float).reshape(len(rows), len(columns))


def _same_cells_as_an_independent_read(text: str, dataset: dict, result) -> None:
    """The rows relspan analysed equal, cell by cell, the csv module's reading of the same file."""
    overview = result.prepared.overview
    if overview.kind != "rows":
        return  # only bins are kept for long tables; the fuzz tables are short
    columns = [v["column"] for v in dataset["variables"]]
    transforms = [v.get("transform", "none") for v in dataset["variables"]]
    rows, x = _independent_rows(text, columns)
    y = x.copy()
    logged = np.array([t in ("log", "logdiff") for t in transforms])
    with np.errstate(invalid="ignore", divide="ignore"):
        y[:, logged] = np.log(x[:, logged])
    differenced = np.array([t in ("diff", "logdiff") for t in transforms])
    if differenced.any():
        prev = np.vstack([np.full((1, y.shape[1]), np.nan), y[:-1]])
        y[:, differenced] = y[:, differenced] - prev[:, differenced]
    keep = ~np.isnan(x).any(axis=1) & ~np.isnan(y).any(axis=1)
    y, kept_rows = y[keep], [r for r, k in zip(rows, keep) if k]
    for j, t in enumerate(transforms):
        if t in ("demean", "standardise"):
            y[:, j] -= y[:, j].mean()
        if t == "standardise":
            y[:, j] /= y[:, j].std(ddof=1)
    analysed_rows = overview.positions["source_first_row"].to_numpy().tolist()
    assert analysed_rows == kept_rows, "relspan analysed other rows than the csv module reads"
    got = overview.values.to_numpy()
    assert got.shape == y.shape
    scale = np.maximum(np.abs(y).max(axis=0), np.finfo(float).tiny)
    # the overview is rebuilt from values relative to the first row, (y - y0) + y0: a few ulps
    assert_close_columns(got, y, scale)


def assert_close_columns(got: np.ndarray, want: np.ndarray, scale: np.ndarray) -> None:
    """Equal to 1e-12 of each column's largest magnitude (a few units in the last place)."""
    bad = np.abs(got - want) > 1e-12 * scale[None, :] * 16
    assert not bad.any(), f"cells differ: relspan {got[bad][:3]}, csv module {want[bad][:3]}"
