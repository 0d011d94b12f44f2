"""Window plans -> windows, and the grid of blocks that makes every window a run of blocks.

Plan kinds (``WindowPlanSpec.kind``):

- ``full``: one window, every analysed row;
- ``rolling``: windows of ``width`` advanced by ``step``; in rows
  (``[k*step, k*step + width)``) or in time units (calendar windows
  ``[t0 + k*step, t0 + k*step + width)`` with ``t0`` the first analysed
  time); only whole windows are kept;
- ``expanding``: the first window is ``width`` long, each next one ``step``
  longer, all starting at the first row;
- ``periods``: one window per named period (inclusive dates).

The block grid is the common refinement of all plans' boundaries, known
before the data are read: row plans cut at multiples of
``gcd(widths, steps)`` rows from the first analysed row, month-based plans
(years, quarters, months) at multiples of the gcd in months from ``t0``,
week/day plans at multiples of the gcd in days, periods at their bounds; and
every block is cut after at most :data:`BLOCK_CAP` rows so that carried rows
stay few. A row's block is known from its position and time alone, so one
pass assigns rows to blocks without holding the rows.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Sequence

import numpy as np

from relspan.data.blocks import BlockTable
from relspan.data.timeindex import TimeFormat, add_months, format_times, parse_bound
from relspan.errors import DataError
from relspan.spec.model import Span, WindowPlanSpec

__all__ = ["PLAN_KINDS", "TIME_UNITS", "BLOCK_CAP", "Window", "WindowTable", "Grid",
           "plan_grid", "plan_windows"]

PLAN_KINDS = ("full", "rolling", "expanding", "periods")
#: time units and their length in the grid's base unit (months or days)
TIME_UNITS = {"years": ("months", 12), "quarters": ("months", 3), "months": ("months", 1),
              "weeks": ("days", 7), "days": ("days", 1)}
#: most rows in one block
BLOCK_CAP = 8192

_DAY = 86400


@dataclass(frozen=True, slots=True)
class Window:
    """One window of one plan.

    Attributes
    ----------
    plan_id : str
    index : int
        0-based position in the plan.
    label : str
        ``"1990Q1–1999Q4"`` with a time column, ``"rows 1–40"`` without, or the
        period's label.
    first_row, last_row : int
        1-based positions among the analysed rows (inclusive).
    rows : int
        Number of analysed rows.
    first_time, last_time : str or None
        Times of the first and last row, in the data's notation.
    block_start, block_stop : int
        The window is blocks ``block_start .. block_stop - 1``.
    source_first_row, source_last_row : int
        The first and last row as 1-based data rows of the file.
    calendar_start, calendar_end : str or None
        For time-based windows, the calendar range ``[start, end)`` (ISO).
    """

    plan_id: str
    index: int
    label: str
    first_row: int
    last_row: int
    rows: int
    first_time: str | None
    last_time: str | None
    block_start: int
    block_stop: int
    source_first_row: int
    source_last_row: int
    calendar_start: str | None = None
    calendar_end: str | None = None


class WindowTable(Sequence):
    """The windows of a row plan as arrays, read as a sequence of :class:`Window`.

    Equal, item for item, to the list of :class:`Window` it stands for (and
    compares equal to such a tuple or list); labels and times are written
    only for the windows that are read.
    """

    __slots__ = ("plan_id", "first_row", "last_row", "rows", "block_start", "block_stop",
                 "source_first_row", "source_last_row", "first_time", "last_time",
                 "time_format")

    def __init__(self, plan_id, first_row, last_row, rows, block_start, block_stop,
                 source_first_row, source_last_row, first_time, last_time, time_format) -> None:
        self.plan_id = plan_id
        self.first_row, self.last_row, self.rows = first_row, last_row, rows
        self.block_start, self.block_stop = block_start, block_stop
        self.source_first_row, self.source_last_row = source_first_row, source_last_row
        self.first_time, self.last_time = first_time, last_time
        self.time_format = time_format

    def __len__(self) -> int:
        return int(self.rows.shape[0])

    def __getitem__(self, i):
        if isinstance(i, slice):
            return [self[k] for k in range(*i.indices(len(self)))]
        k = range(len(self))[i]
        ft = lt = None
        if self.first_time is not None:
            ft, lt = format_times(np.array([self.first_time[k], self.last_time[k]]),
                                  self.time_format)
            label = ft if ft == lt else f"{ft}–{lt}"
        else:
            label = f"rows {int(self.first_row[k])}–{int(self.last_row[k])}"
        return Window(plan_id=self.plan_id, index=k, label=label,
                      first_row=int(self.first_row[k]), last_row=int(self.last_row[k]),
                      rows=int(self.rows[k]), first_time=ft, last_time=lt,
                      block_start=int(self.block_start[k]), block_stop=int(self.block_stop[k]),
                      source_first_row=int(self.source_first_row[k]),
                      source_last_row=int(self.source_last_row[k]))

    def __iter__(self):
        for k in range(len(self)):
            yield self[k]

    def __eq__(self, other: object) -> bool:
        if isinstance(other, WindowTable):
            return self.plan_id == other.plan_id and all(
                _same_array(getattr(self, f), getattr(other, f)) for f in self.__slots__[1:-1]) \
                and self.time_format == other.time_format
        if isinstance(other, (list, tuple)):
            return len(self) == len(other) and all(a == b for a, b in zip(self, other))
        return NotImplemented

    __hash__ = None  # type: ignore[assignment]

    def __reduce__(self):
        return (WindowTable, tuple(getattr(self, f) for f in self.__slots__))


def _same_array(a, b) -> bool:
    if a is None or b is None:
        return a is b
    return bool(np.array_equal(a, b))


def _span_kind(span: Span) -> tuple[str, int]:
    if span.unit == "rows":
        return "rows", int(span.count)
    base, mult = TIME_UNITS[span.unit]
    return base, int(span.count) * mult


@dataclass(frozen=True, slots=True, eq=False)
class Grid:
    """Where blocks must end, for a set of plans (see the module notes).

    Attributes
    ----------
    row_step, month_step, day_step : int or None
        gcd of the plans' widths and steps in rows / months / days.
    cuts : (c,) datetime64[s]
        Period bounds (starts and exclusive ends).
    cap : int
        Most rows per block.
    """

    row_step: int | None
    month_step: int | None
    day_step: int | None
    cuts: np.ndarray
    cap: int = BLOCK_CAP

    @property
    def needs_time(self) -> bool:
        return bool(self.month_step or self.day_step or self.cuts.size)

    def keys(self, pos: np.ndarray, times: np.ndarray | None, t0: np.datetime64 | None) -> np.ndarray:
        """Bucket of each row on every grid, ``(m, K)`` int64."""
        cols = [pos // self.cap]
        if self.row_step:
            cols.append(pos // self.row_step)
        if times is not None and t0 is not None:
            if self.month_step:
                cols.append(month_bucket(times, t0, self.month_step))
            if self.day_step:
                cols.append((times - t0).astype("timedelta64[s]").astype(np.int64)
                            // (self.day_step * _DAY))
            if self.cuts.size:
                cols.append(np.searchsorted(self.cuts, times, side="right").astype(np.int64))
        return np.stack(cols, axis=1).astype(np.int64)


def month_bucket(times: np.ndarray, t0: np.datetime64, step: int) -> np.ndarray:
    """Index k of the calendar bucket ``[t0 + k*step months, t0 + (k+1)*step months)``."""
    t = times.astype("datetime64[s]")
    t0 = np.datetime64(t0, "s")
    mdiff = (t.astype("datetime64[M]") - t0.astype("datetime64[M]")).astype(np.int64)
    k = mdiff // step
    start = add_months(np.full(t.shape, t0), k * step)
    return np.where(t < start, k - 1, k)


def _plan_error(plan: WindowPlanSpec, msg: str, fix: str, *, path: str | None,
                dataset_id: str) -> DataError:
    return DataError(f"dataset {dataset_id!r}, window plan {plan.id!r}: {msg}", path=path,
                     fix=fix)


def _spans(plan: WindowPlanSpec, *, path, dataset_id) -> tuple[Span, Span]:
    if plan.width is None:
        raise _plan_error(plan, f"a {plan.kind} plan needs a width.",
                          "give the plan a width, e.g. width: 40 (rows) or width: \"10 years\".",
                          path=path, dataset_id=dataset_id)
    width = plan.width
    step = plan.step if plan.step is not None else width
    for name, sp in (("width", width), ("step", step)):
        if sp.unit != "rows" and sp.unit not in TIME_UNITS:
            raise _plan_error(plan, f"{name} unit {sp.unit!r} is not rows, years, quarters, "
                              "months, weeks or days.", "use one of those units.",
                              path=path, dataset_id=dataset_id)
        if sp.count < 1:
            raise _plan_error(plan, f"{name} must be at least 1; got {sp.count}.",
                              f"give a positive {name}.", path=path, dataset_id=dataset_id)
    if _span_kind(width)[0] != _span_kind(step)[0]:
        raise _plan_error(plan, f"width ({width.count} {width.unit}) and step ({step.count} "
                          f"{step.unit}) are measured in units that do not divide each other.",
                          "measure both in rows, both in years/quarters/months, or both in "
                          "weeks/days.", path=path, dataset_id=dataset_id)
    return width, step


def plan_grid(plans: Sequence[WindowPlanSpec], *, has_time: bool, dataset_id: str,
              path: str | None) -> Grid:
    """Validate the plans for a dataset and derive the block grid.

    Raises
    ------
    DataError
        An unknown kind, a time-based plan (or periods) on a dataset without a
        time column, a missing width, width and step in incompatible units,
        a period that is not a date range.
    """
    steps = {"rows": [], "months": [], "days": []}
    cuts: list[np.datetime64] = []
    for plan in plans:
        if plan.kind not in PLAN_KINDS:
            raise _plan_error(plan, f"kind {plan.kind!r} is not one of {', '.join(PLAN_KINDS)}.",
                              "set kind to full, rolling, expanding or periods.",
                              path=path, dataset_id=dataset_id)
        if plan.kind in ("rolling", "expanding"):
            width, step = _spans(plan, path=path, dataset_id=dataset_id)
            base, w = _span_kind(width)
            _, s = _span_kind(step)
            if base != "rows" and not has_time:
                raise _plan_error(
                    plan, f"the width is measured in {width.unit}, but the dataset has no time "
                          "column.", "add time: {column: ...} to the dataset, or give width and "
                                     "step in rows.", path=path, dataset_id=dataset_id)
            steps[base].extend([w, s])
        elif plan.kind == "periods":
            if not has_time:
                raise _plan_error(plan, "periods need dates, but the dataset has no time column.",
                                  "add time: {column: ...} to the dataset, or use a rolling "
                                  "plan in rows.", path=path, dataset_id=dataset_id)
            if not plan.periods:
                raise _plan_error(plan, "a periods plan lists no periods.",
                                  "add periods: [{label: ..., from: ..., to: ...}].",
                                  path=path, dataset_id=dataset_id)
            for k, p in enumerate(plan.periods):
                a = parse_bound(p.start, inclusive_end=False, path=path,
                                key=f"windows[{plan.id}].periods[{k}].from")
                b = parse_bound(p.end, inclusive_end=True, path=path,
                                key=f"windows[{plan.id}].periods[{k}].to")
                if b <= a:
                    raise _plan_error(plan, f"period {p.label!r} ends ({p.end}) before it "
                                      f"starts ({p.start}).", "swap or correct its from/to dates.",
                                      path=path, dataset_id=dataset_id)
                cuts.extend([a, b])
    g = {k: (math.gcd(*v) if v else None) for k, v in steps.items()}
    cut_arr = np.unique(np.array(cuts, dtype="datetime64[s]")) if cuts else np.array(
        [], dtype="datetime64[s]")
    return Grid(g["rows"], g["months"], g["days"], cut_arr)


def _offset(t0: np.datetime64, base: str, amount: np.ndarray) -> np.ndarray:
    amount = np.asarray(amount, dtype=np.int64)
    if base == "months":
        return add_months(np.full(amount.shape, np.datetime64(t0, "s")), amount)
    return np.datetime64(t0, "s") + (amount * _DAY).astype("timedelta64[s]")


def plan_windows(plan: WindowPlanSpec, blocks: BlockTable, *, n_variables: int,
                 time_format: TimeFormat | None, dataset_id: str,
                 path: str | None) -> Sequence[Window]:
    """The windows of one plan, each a run of whole blocks.

    Plans in rows (rolling, expanding) give a :class:`WindowTable` (arrays,
    a :class:`Window` built on access: a plan of a million windows costs
    about 80 bytes per window); the others a list of :class:`Window`.

    Parameters
    ----------
    plan : WindowPlanSpec
    blocks : BlockTable
        From the pass (built on the grid of :func:`plan_grid`).
    n_variables : int
        A window needs at least ``n_variables + 2`` rows.
    time_format : TimeFormat or None
        The data's time notation (None without a time column).
    dataset_id, path : str
        For messages.

    Raises
    ------
    DataError
        The plan's width exceeds the data, or a window has fewer than
        ``n_variables + 2`` rows.
    """
    total = blocks.rows
    timed = blocks.first_time is not None
    bounds: list[tuple[int, int, str | None, str | None, str | None]] = []  # lo, hi, cal, label
    row_bounds: tuple[np.ndarray, np.ndarray] | None = None
    if plan.kind == "full":
        bounds.append((0, len(blocks), None, None, None))
    elif plan.kind in ("rolling", "expanding"):
        width, step = _spans(plan, path=path, dataset_id=dataset_id)
        base, w = _span_kind(width)
        _, s = _span_kind(step)
        if base == "rows":
            if w > total:
                raise _plan_error(
                    plan, f"the width is {w} rows, but the dataset has only {total} analysed rows.",
                    f"make the width at most {total} rows, or use more data.",
                    path=path, dataset_id=dataset_id)
            count = (total - w) // s + 1
            k = np.arange(count, dtype=np.int64)
            starts = k * s if plan.kind == "rolling" else np.zeros(count, dtype=np.int64)
            stops = k * s + w if plan.kind == "rolling" else w + k * s
            lo = np.searchsorted(blocks.first_pos, starts, side="left")
            hi = np.searchsorted(blocks.first_pos, stops, side="left")
            row_bounds = (lo.astype(np.int64), hi.astype(np.int64))
        else:
            t0 = blocks.first_time[0]
            end = time_format.end_of(blocks.last_time[-1])
            first_end = _offset(t0, base, np.array([w]))[0]
            if first_end > end:
                cover = format_times(np.array([t0, blocks.last_time[-1]]), time_format)
                raise _plan_error(
                    plan, f"the width is {width.count} {width.unit}, but the data cover only "
                          f"{cover[0]}–{cover[1]}.", "shorten the width, or use more data.",
                    path=path, dataset_id=dataset_id)
            if base == "months":
                span = int((end.astype("datetime64[M]") - t0.astype("datetime64[M]"))
                           .astype(np.int64)) + 1
            else:
                span = int((end - t0).astype("timedelta64[s]").astype(np.int64) // _DAY) + 1
            kmax = max((span - w) // s + 2, 1)
            k = np.arange(kmax, dtype=np.int64)
            if plan.kind == "rolling":
                cs, ce = _offset(t0, base, k * s), _offset(t0, base, k * s + w)
            else:
                cs, ce = np.full(kmax, t0), _offset(t0, base, w + k * s)
            ok = ce <= end
            cs, ce = cs[ok], ce[ok]
            lo = np.searchsorted(blocks.first_time, cs, side="left")
            hi = np.searchsorted(blocks.first_time, ce, side="left")
            for a, b, x, y in zip(lo, hi, cs, ce):
                bounds.append((int(a), int(b), str(x.astype("datetime64[D]")),
                               str(y.astype("datetime64[D]")), None))
    else:  # periods
        for k, p in enumerate(plan.periods):
            a = parse_bound(p.start, inclusive_end=False, path=path,
                            key=f"windows[{plan.id}].periods[{k}].from")
            b = parse_bound(p.end, inclusive_end=True, path=path,
                            key=f"windows[{plan.id}].periods[{k}].to")
            lo = int(np.searchsorted(blocks.first_time, a, side="left"))
            hi = int(np.searchsorted(blocks.first_time, b, side="left"))
            bounds.append((lo, hi, str(a.astype("datetime64[D]")),
                           str(b.astype("datetime64[D]")), p.label))
    need = n_variables + 2
    cum = np.concatenate([[0], np.cumsum(blocks.counts)])
    if row_bounds is not None:  # row plans: every window described by arrays, built on access
        lo, hi = row_bounds
        rows = cum[hi] - cum[lo]
        short = np.flatnonzero(rows < need)
        if short.size:
            i = int(short[0])
            where = f"window {i + 1}"
            if rows[i]:
                where = (f"window {i + 1} (rows {int(blocks.first_pos[lo[i]]) + 1}–"
                         f"{int(blocks.last_pos[hi[i] - 1]) + 1})")
            raise _plan_error(
                plan, f"{where} has {int(rows[i])} analysed rows, but {n_variables} variables "
                      f"need at least {need}.", "widen the plan's windows (or period), or analyse "
                                                "fewer variables.", path=path, dataset_id=dataset_id)
        first = blocks.first_pos[lo]
        last = blocks.last_pos[hi - 1]
        ft = lt = None
        if timed:
            ft, lt = blocks.first_time[lo], blocks.last_time[hi - 1]
        return WindowTable(plan.id, first + 1, last + 1, rows, lo, hi,
                           blocks.first_source_row[lo], blocks.last_source_row[hi - 1], ft, lt,
                           time_format)
    windows: list[Window] = []
    for index, (lo, hi, cal_a, cal_b, period_label) in enumerate(bounds):
        rows = int(cum[hi] - cum[lo])
        if rows < need:
            where = (f"window {index + 1} ({period_label or ''}{' ' if period_label else ''}"
                     f"from {cal_a} up to {cal_b})" if cal_a else f"window {index + 1}")
            if rows and not cal_a:
                where = (f"window {index + 1} (rows {int(blocks.first_pos[lo]) + 1}–"
                         f"{int(blocks.last_pos[hi - 1]) + 1})")
            raise _plan_error(
                plan, f"{where} has {rows} analysed rows, but {n_variables} variables need at "
                      f"least {need}.", "widen the plan's windows (or period), or analyse fewer "
                                        "variables.", path=path, dataset_id=dataset_id)
        first_pos = int(blocks.first_pos[lo])
        last_pos = int(blocks.last_pos[hi - 1])
        ft = lt = None
        if timed:
            ft, lt = format_times(np.array([blocks.first_time[lo], blocks.last_time[hi - 1]]),
                                  time_format)
        if period_label is not None:
            label = period_label
        elif timed:
            label = ft if ft == lt else f"{ft}–{lt}"
        else:
            label = f"rows {first_pos + 1}–{last_pos + 1}"
        windows.append(Window(
            plan_id=plan.id, index=index, label=label, first_row=first_pos + 1,
            last_row=last_pos + 1, rows=rows, first_time=ft, last_time=lt, block_start=lo,
            block_stop=hi, source_first_row=int(blocks.first_source_row[lo]),
            source_last_row=int(blocks.last_source_row[hi - 1]), calendar_start=cal_a,
            calendar_end=cal_b))
    return windows
