"""The Python face of relspan: load a spec, check it, build its site, analyse a DataFrame.

A thin face: ``check`` and ``build`` are the driver's (:mod:`relspan.run.build`;
from Python they run in this process unless ``jobs`` asks for workers, so a
plain script needs no ``if __name__ == "__main__":`` block); this module adds
the notebook view of a DataFrame's analysis and the conversion of the tables
notebooks hold (polars, pyarrow, xarray) to pandas.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path
from typing import Sequence

from relspan.errors import OptionsError
from relspan.run.build import Outcome, build, check

__all__ = ["Outcome", "check", "build", "analyse_frame", "FrameAnalysis", "as_pandas"]


@dataclass(frozen=True, slots=True, eq=False)
class FrameAnalysis:
    """Analysis of a DataFrame (notebook use): the dataset result and table views.

    ``to_frame()`` gives one row per noise assumption for the full sample
    (coefficients only where identified, with the normalising variable named);
    ``windows_frame()`` one row per window and assumption with the window's start,
    end and numbers; ``findings_frame()`` the findings. In a notebook the object
    shows as a short summary and the first table.

    Attributes
    ----------
    result : DatasetResult
        Everything computed (see :class:`relspan.analysis.results.DatasetResult`).
    """

    result: object

    def to_frame(self):
        """Full sample, one row per noise assumption (see :func:`relspan.frames.assumptions_frame`)."""
        from relspan.frames import assumptions_frame

        return assumptions_frame(self.result.full)

    def windows_frame(self):
        """Every window and assumption (see :func:`relspan.frames.windows_frame`)."""
        from relspan.frames import windows_frame

        return windows_frame(self.result)

    def findings_frame(self):
        """The findings: kind, topic, headline (the statements the site would print)."""
        from relspan.frames import findings_frame

        return findings_frame(self.result.findings)

    def _summary(self) -> str:
        r = self.result
        p = r.prepared
        period = f", {p.period[0]} to {p.period[1]}" if getattr(p, "period", None) else ""
        coranks = ", ".join(f"{a} {'?' if q is None else q}" for a, q in r.full.coranks.items())
        names = ", ".join(r.names)
        names = names if len(names) <= 80 else names[:79] + "\u2026"
        windows = sum(len(pl.analyses) for pl in r.plans)
        return (f"{len(r.names)} variables ({names}); {p.rows_used} rows{period}; full-sample corank "
                f"by assumption: {coranks}; {windows} window(s); normalised on "
                f"{r.names[r.full.ref]!r}")

    def _repr_html_(self) -> str:
        import html

        return (f"<div><p>{html.escape(self._summary())}</p>"
                f"{self.to_frame()._repr_html_()}</div>")

    def __repr__(self) -> str:
        return f"<relspan FrameAnalysis: {self._summary()}>"


_KNOWN_FRAMES = ("pandas.DataFrame, or a polars, pyarrow or xarray table, or any object with the "
                 "Arrow PyCapsule interface (__arrow_c_stream__, read with pyarrow) or the dataframe "
                 "interchange protocol (__dataframe__)")


def as_pandas(data):
    """A pandas DataFrame from the tables notebooks hold; one clear TypeError for anything else.

    pandas DataFrames pass through; polars DataFrames and LazyFrames, pyarrow
    Tables and RecordBatches, and xarray Datasets and two-dimensional
    DataArrays are converted with their own ``to_pandas``/``to_dataframe``
    (imported lazily: nothing here imports polars, pyarrow or xarray); any other
    object with the Arrow PyCapsule interface (``__arrow_c_stream__``) is read
    by ``pyarrow.table``, and one that offers only the dataframe interchange
    protocol (``__dataframe__``) goes through ``pandas.api.interchange.from_dataframe``.

    Raises
    ------
    TypeError
        Naming the type given and what is accepted.
    """
    import pandas as pd

    if isinstance(data, pd.DataFrame):
        return data
    module = type(data).__module__.split(".")[0]
    name = type(data).__name__
    try:
        if module == "polars":
            if name == "LazyFrame":
                data = data.collect()
            if name in ("DataFrame", "LazyFrame"):
                return data.to_pandas()
        elif module == "pyarrow" and name in ("Table", "RecordBatch"):
            return data.to_pandas()
        elif module == "xarray":
            if name == "Dataset":
                return data.to_dataframe()
            if name == "DataArray":
                if data.ndim != 2:
                    raise TypeError(f"an xarray DataArray with {data.ndim} dimension(s) is not a table; "
                                    "pass one with two dimensions (time x variable) or a Dataset "
                                    "with one variable per column.")
                return data.to_pandas()
        if hasattr(data, "__arrow_c_stream__"):  # the Arrow PyCapsule interface
            import pyarrow as pa  # noqa: PLC0415 (optional dependency)

            return pa.table(data).to_pandas()
        if hasattr(data, "__dataframe__"):
            import warnings

            with warnings.catch_warnings():
                # pandas 3 deprecates the interchange protocol in favour of the PyCapsule
                # interface (tried first, above); for tables that offer only this one it still works
                warnings.simplefilter("ignore")
                return pd.api.interchange.from_dataframe(data)
    except ImportError as err:  # e.g. polars' to_pandas needs pyarrow
        raise TypeError(f"cannot convert the {module}.{name} to pandas: {err}") from None
    raise TypeError(f"analyse_frame needs a table: a {_KNOWN_FRAMES}; got "
                    f"{type(data).__module__}.{name}.")


def _time_from_index(df, time: str | None):
    """``(frame, time column)``: a DatetimeIndex or PeriodIndex becomes the time column."""
    import pandas as pd

    idx = df.index
    if time is not None and time in df.columns:
        return df, time
    is_time_index = isinstance(idx, (pd.DatetimeIndex, pd.PeriodIndex))
    if time is not None and not (is_time_index and time == idx.name):
        return df, time  # prepare_frame names the missing column
    if not is_time_index:
        return df, None
    name = str(idx.name) if idx.name is not None else "time"
    while name in df.columns:
        name = "_" + name
    if isinstance(idx, pd.PeriodIndex):
        # the period's own notation: 1990Q1, 1990-01, 1990, 1990-01-31 (read with format auto)
        values = pd.Series(idx.astype(str), index=df.index)
    else:
        values = pd.Series(idx, index=df.index)
    out = df.copy(deep=False)
    out.insert(len(out.columns), name, values.to_numpy())
    return out.reset_index(drop=True), name


def analyse_frame(df, *, columns: Sequence[str], time: str | None = None, labels: Sequence[str] | None = None,
                  transforms: Sequence[str] | None = None, rolling: int | None = None, step: int | None = None,
                  assumptions: Sequence[str] | None = None, relative_tolerance: float = 0.05,
                  normalise_on: str = "auto", coranks: Sequence[int] = (), max_angle_deg: float = 10.0
                  ) -> FrameAnalysis:
    """Run the whole analysis on a pandas DataFrame, without a spec file.

    Runs in this process (no worker processes), so it is safe in any script or
    notebook.

    Parameters
    ----------
    df : table
        A pandas DataFrame; polars, pyarrow and xarray tables and objects with
        the dataframe interchange protocol are converted (:func:`as_pandas`).
    columns : sequence of str
        Columns to analyse (numeric).
    time : str, optional
        Time column (parsed like a spec's ``time.column`` with ``format: auto``).
        Default: the frame's DatetimeIndex or PeriodIndex when it has one (periods
        keep their notation, e.g. ``1990Q1``), else no time axis (windows are
        counted in rows).
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

    df = as_pandas(df)
    df, time = _time_from_index(df, time)
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
