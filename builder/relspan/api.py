"""The Python face of relspan: load a spec, check it, build its site, analyse a DataFrame.

A thin face: ``check`` and ``build`` are the driver's (:mod:`relspan.run.build`);
this module adds the notebook view of a DataFrame's analysis.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path
from typing import Sequence

from relspan.errors import OptionsError
from relspan.run.build import Outcome, build, check

__all__ = ["Outcome", "check", "build", "analyse_frame", "FrameAnalysis"]


@dataclass(frozen=True, slots=True, eq=False)
class FrameAnalysis:
    """Analysis of a DataFrame (notebook use): the dataset result and table views.

    ``to_frame()`` gives one row per noise assumption for the full sample;
    ``windows_frame()`` one row per window and assumption; ``findings_frame()``
    the findings. In a notebook the object itself shows as the first table.
    """

    result: object

    def to_frame(self):
        import pandas as pd

        full = self.result.full
        rows = []
        for a, q in full.coranks.items():
            coef = full.coefficients.get(a)
            row = {"assumption": a, "corank": q}
            if coef is not None:
                for k, name in enumerate(full.names):
                    if k != full.ref:
                        row[f"coef[{name}]"] = coef[k]
            rows.append(row)
        return pd.DataFrame(rows).set_index("assumption")

    def windows_frame(self):
        import pandas as pd

        rows = []
        for plan in self.result.plans:
            for a in plan.analyses:
                for assumption, q in a.coranks.items():
                    rows.append({"plan": plan.plan.id, "window": a.label, "rows": a.count,
                                 "assumption": assumption, "corank": q})
        frame = pd.DataFrame(rows, columns=["plan", "window", "rows", "assumption", "corank"])
        # an undetermined corank is a missing value, not a float: keep whole numbers whole
        return frame.astype({"rows": "int64", "corank": "Int64"})

    def findings_frame(self):
        import pandas as pd

        return pd.DataFrame([{"kind": f.kind, "topic": f.topic, "headline": f.headline}
                             for f in self.result.findings])

    def _repr_html_(self) -> str:
        return self.to_frame()._repr_html_()

    def __repr__(self) -> str:
        return repr(self.to_frame())


def analyse_frame(df, *, columns: Sequence[str], time: str | None = None, labels: Sequence[str] | None = None,
                  transforms: Sequence[str] | None = None, rolling: int | None = None, step: int | None = None,
                  assumptions: Sequence[str] | None = None, relative_tolerance: float = 0.05,
                  normalise_on: str = "auto", coranks: Sequence[int] = (), max_angle_deg: float = 10.0
                  ) -> FrameAnalysis:
    """Run the whole analysis on a pandas DataFrame, without a spec file.

    Parameters
    ----------
    df : pandas.DataFrame
    columns : sequence of str
        Columns to analyse (numeric).
    time : str, optional
        Time column (parsed like a spec's ``time.column`` with ``format: auto``).
    rolling, step : int, optional
        A rolling window plan in rows, in addition to the full sample.
    assumptions, relative_tolerance, normalise_on, coranks, max_angle_deg
        As the spec's ``checks``.
    """
    from pathlib import Path as _P

    from relspan.data.prepare import prepare_frame
    from relspan.run.pipeline import analyse_prepared
    from relspan.spec.model import (ASSUMPTIONS, ChecksSpec, DatasetSpec, Span, TimeSpec, Tolerance,
                                    VariableSpec, WindowPlanSpec)

    columns = tuple(columns)
    missing = [c for c in columns if c not in df.columns]
    if missing:
        raise OptionsError(f"columns {missing} are not in the DataFrame; it has {list(df.columns)}.",
                           key="columns", fix="pass column names that exist.")
    labels = tuple(labels) if labels is not None else columns
    transforms = tuple(transforms) if transforms is not None else ("none",) * len(columns)
    plans = [WindowPlanSpec(id="full", kind="full", title="Full sample")]
    if rolling:
        plans.append(WindowPlanSpec(id="rolling", kind="rolling", title="Rolling",
                                    width=Span(int(rolling)), step=Span(int(step or max(1, rolling // 5)))))
    checks = ChecksSpec(assumptions=tuple(assumptions or ASSUMPTIONS),
                        tolerance=Tolerance(absolute=None, relative=relative_tolerance),
                        normalise_on=normalise_on, coranks=tuple(coranks), max_angle_deg=max_angle_deg)
    ds = DatasetSpec(id="frame", title="DataFrame", source="<DataFrame>", source_path=_P("."),
                     variables=tuple(VariableSpec(column=c, label=lab, transform=t)
                                     for c, lab, t in zip(columns, labels, transforms)),
                     time=TimeSpec(column=time) if time else None, checks=checks)
    prepared = prepare_frame(df, columns=columns, time=time, transforms=transforms, plans=plans,
                             labels=labels)
    return FrameAnalysis(analyse_prepared(ds, prepared, plans))
