"""Shared helpers of the data-layer tests (plain functions; fixtures live in conftest.py)."""

from __future__ import annotations

from pathlib import Path

import pandas as pd

from relspan.spec.model import DatasetSpec, Span, TimeSpec, VariableSpec, WindowPlanSpec

FULL = WindowPlanSpec("full", "full")


def make_spec(path: Path, columns, *, time=None, transforms=None, missing="drop", fmt="auto",
              source=None, ds_id="demo") -> DatasetSpec:
    """A DatasetSpec as the loader would build it (source written relative, path resolved)."""
    transforms = transforms or {}
    variables = tuple(VariableSpec(c, c.title(), "", transforms.get(c, "none")) for c in columns)
    ts = TimeSpec(time) if isinstance(time, str) else time
    return DatasetSpec(id=ds_id, title=ds_id, source=source or f"data/{path.name}",
                       source_path=path, variables=variables, format=fmt, time=ts,
                       missing=missing)


def rolling(pid, width, step, unit="rows", kind="rolling") -> WindowPlanSpec:
    wu = unit if isinstance(unit, str) else unit[0]
    su = unit if isinstance(unit, str) else unit[1]
    return WindowPlanSpec(pid, kind, width=Span(width, wu), step=Span(step, su))


def quarters(start: str, n: int) -> list[str]:
    return list(pd.period_range(start, periods=n, freq="Q").astype(str))
