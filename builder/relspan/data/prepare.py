"""One streaming pass: a data table -> block statistics -> window moments.

:func:`prepare_dataset` reads a dataset's file once, in chunks, and returns a
:class:`PreparedDataset`: the moments of every window of every plan (merged
from blocks, never recomputed from rows), the full-sample moments, what was
dropped and why, the file's SHA-256 and a bounded overview for plotting.
:func:`prepare_frame` does the same for a pandas DataFrame (notebooks).

Memory does not grow with the number of rows beyond the block statistics
(about ``rows / gcd(width, step)`` blocks for row plans, one per calendar
bucket for time plans, at most ``rows / 8192`` otherwise) and a fixed-size
overview (the rows themselves up to :data:`OVERVIEW_ROWS` rows, else at most
:data:`OVERVIEW_BINS` bin means).

Order of work on each chunk: cells checked (sources) -> time parsed and its
order checked -> from/to range applied -> missing-value policy and row-wise
transforms -> rows assigned to blocks. Whole-sample transforms (demean,
standardise) are applied to the statistics after the pass.
"""

from __future__ import annotations

import dataclasses
import hashlib
from dataclasses import dataclass
from typing import Mapping, Sequence

import numpy as np
import pandas as pd

from relspan.analysis.moments import Moments
from relspan.data.blocks import (BlockBuilder, BlockTable, GranuleBuilder, GranuleTable, assemble_stacked,
                                  tree_levels)
from relspan.data.sources.cells import check_not_tiny
from relspan.data.sources import (ENGINES, FastPathDeclined, RawChunk, TableReader, TableSource, noted,
                                  arrow_available, numeric_block, open_source, select_columns,
                                  time_text)
from relspan.data.timeindex import (OrderCheck, TimeFormat, format_times, parse_bound,
                                    parse_times, resolve_format)
from relspan.data.transforms import (MISSING_POLICIES, ROW_TRANSFORMS, SAMPLE_TRANSFORMS, Drop, TrendFit,
                                     StreamTransform, affine_for, affine_moments, affine_stacked, check_variation,
                                     check_window_variation)
from relspan.data.windows import Grid, Window, WindowTable, plan_grid, plan_windows
from relspan.errors import DataError, OptionsError
from relspan.spec.model import DatasetSpec, TimeSpec, WindowPlanSpec

__all__ = [
    "DEFAULT_CHUNK_ROWS",
    "OVERVIEW_ROWS",
    "OVERVIEW_BINS",
    "Overview",
    "PlanWindows",
    "PreparedDataset",
    "StackedMoments",
    "prepare_dataset",
    "prepare_frame",
    "window_moments",
    "without_blocks",
]

DEFAULT_CHUNK_ROWS = 1 << 16
#: up to this many analysed rows the overview keeps every row
OVERVIEW_ROWS = 20000
#: above it, the overview keeps at most this many equal-size bins (means, minima, maxima)
OVERVIEW_BINS = 4096


@dataclass(frozen=True, slots=True, eq=False)
class Overview:
    """The transformed series, for plotting.

    Attributes
    ----------
    kind : {"rows", "bins"}
        Every analysed row, or equal-size bins of consecutive rows.
    rows_per_bin : int
        1 for ``"rows"``.
    positions : DataFrame
        One line per row or bin: ``first_row``, ``last_row`` (1-based among
        analysed rows), ``rows``, ``source_first_row``, ``source_last_row``
        and, with a time column, ``first_time``, ``last_time``
        (datetime64) and ``time_label``.
    values : DataFrame
        One column per variable: the value (rows) or the bin mean (bins).
    low, high : DataFrame or None
        Bin minima and maxima (None for ``"rows"``).
    """

    kind: str
    rows_per_bin: int
    positions: pd.DataFrame
    values: pd.DataFrame
    low: pd.DataFrame | None
    high: pd.DataFrame | None


class StackedMoments(Sequence):
    """Window moments held as three stacked arrays, read as a sequence of :class:`Moments`.

    ``counts (w,)``, ``means (w, n)``, ``comoments (w, n, n)`` and the
    co-moments' low-order parts ``comoments_lo (w, n, n)`` (double-double;
    zeros when not given) cost ``8 (1 + n + 2 n^2)`` bytes per window; a
    :class:`Moments` (views into the arrays, which are read-only) is built
    only when an item is asked for.
    """

    __slots__ = ("counts", "means", "comoments", "comoments_lo")

    def __init__(self, counts: np.ndarray, means: np.ndarray, comoments: np.ndarray,
                 comoments_lo: np.ndarray | None = None) -> None:
        if comoments_lo is None:
            comoments_lo = np.zeros_like(np.asarray(comoments, dtype=float))
        arrays = tuple(np.asarray(a) for a in (counts, means, comoments, comoments_lo))
        for a in arrays:
            a.setflags(write=False)
        self.counts, self.means, self.comoments, self.comoments_lo = arrays

    def __len__(self) -> int:
        return int(self.counts.shape[0])

    def __getitem__(self, i):
        if isinstance(i, slice):
            return StackedMoments(self.counts[i], self.means[i], self.comoments[i],
                                  self.comoments_lo[i])
        return Moments(int(self.counts[i]), self.means[i], self.comoments[i], None,
                       self.comoments_lo[i])

    def __iter__(self):
        for i in range(len(self)):
            yield self[i]

    def __eq__(self, other: object) -> bool:
        if not isinstance(other, StackedMoments):
            return NotImplemented
        return (np.array_equal(self.counts, other.counts) and np.array_equal(self.means, other.means)
                and np.array_equal(self.comoments, other.comoments)
                and np.array_equal(self.comoments_lo, other.comoments_lo))

    __hash__ = None  # type: ignore[assignment]

    def __reduce__(self):
        return (StackedMoments, (np.array(self.counts), np.array(self.means),
                                 np.array(self.comoments), np.array(self.comoments_lo)))


@dataclass(frozen=True, slots=True, eq=False)
class PlanWindows:
    """The windows of one plan and their moments (same order).

    Attributes
    ----------
    plan_id, kind : str
    windows : tuple of Window, or WindowTable
        A sequence of :class:`Window` (row plans: a :class:`WindowTable`).
    moments : StackedMoments
        Counts ``(w,)``, means ``(w, n)`` and co-moments ``(w, n, n)`` of the
        windows (after all transforms), read as a sequence of :class:`Moments`
        built on access.
    """

    plan_id: str
    kind: str
    windows: Sequence[Window]
    moments: StackedMoments


@dataclass(frozen=True, slots=True, eq=False)
class PreparedDataset:
    """A dataset reduced to window statistics by one pass.

    Attributes
    ----------
    dataset_id : str
    variables, labels, units : tuple of str
        Column names, labels and units of the analysed variables.
    transforms : tuple of str
        The transform applied to each variable.
    source : str or None
        The file as written in the spec (None for a DataFrame).
    sha256 : str
        SHA-256 of the file's bytes; for a DataFrame, of the selected columns
        (values as float64, times as datetime64[s]).
    rows_read : int
        Data rows in the file.
    rows_outside_range : int
        Rows left out by the from/to range.
    rows_used : int
        Analysed rows.
    drops : tuple of Drop
        Rows left out within the range, by reason, with the first rows.
    time_column : str or None
    time_format : TimeFormat or None
    period : (str, str) or None
        First and last analysed time, in the data's notation.
    plans : tuple of PlanWindows
    full : Moments
        Full-sample moments (after all transforms).
    blocks : BlockTable
        Block statistics of the row-transformed data, before demean and
        standardise, with means relative to ``blocks.origin``.
    shift, scale : (n,) ndarray
        The whole-sample transforms as an affine map: a row-transformed value
        ``y`` is analysed as ``(y - shift) / scale``.
    overview : Overview
    read_as : str
        How the file was read, in words, naming what was detected (compression,
        encoding, separator, decimal mark, sheet); "" for plain UTF-8 CSV/TSV and
        for a DataFrame.
    granules : GranuleTable or None
        Fine block statistics for resampling (:class:`relspan.data.blocks.GranuleTable`),
        collected in the same pass as the blocks, before the whole-sample transforms
        (like ``blocks``); :meth:`window_granules` returns one window's granules in
        the analysed coordinates. None once dropped (:func:`without_blocks`).
    """

    dataset_id: str
    variables: tuple[str, ...]
    labels: tuple[str, ...]
    units: tuple[str, ...]
    transforms: tuple[str, ...]
    source: str | None
    sha256: str
    rows_read: int
    rows_outside_range: int
    rows_used: int
    drops: tuple[Drop, ...]
    time_column: str | None
    time_format: TimeFormat | None
    period: tuple[str, str] | None
    plans: tuple[PlanWindows, ...]
    full: Moments
    blocks: BlockTable
    shift: np.ndarray
    scale: np.ndarray
    overview: Overview
    read_as: str = ""
    granules: GranuleTable | None = None

    @property
    def n_variables(self) -> int:
        return len(self.variables)

    @property
    def rows_dropped(self) -> int:
        """Rows inside the range that were left out (all reasons)."""
        return sum(d.count for d in self.drops)

    def window_granules(self, plan_id: str, index: int, *, ordered: bool | None = None):
        """The granules of window ``index`` of plan ``plan_id``, in the analysed coordinates.

        Returns a :class:`relspan.analysis.resample.GranuleStats` whose merge of
        every granule once gives the window's moments (after all transforms).
        ``ordered`` (default: whether the dataset has a time column) says whether
        rows are time-ordered, so that a block bootstrap applies.

        Raises
        ------
        ValueError
            When the granules were dropped (:func:`without_blocks`).
        """
        if self.granules is None:
            raise ValueError(f"dataset {self.dataset_id!r}: the granule statistics were dropped "
                             "after the analysis; resample before without_blocks()")
        w = self.plan(plan_id).windows[index]
        lo, hi = self.granules.span(w.first_row - 1, w.last_row - 1)
        return self.granules_between(lo, hi, ordered=ordered)

    def granules_between(self, lo: int, hi: int, *, ordered: bool | None = None):
        """Granules ``lo .. hi-1`` (half-open) in the analysed coordinates (see :meth:`window_granules`)."""
        from relspan.analysis.resample import GranuleStats

        if self.granules is None:
            raise ValueError(f"dataset {self.dataset_id!r}: the granule statistics were dropped")
        t = self.granules.table
        scale = np.asarray(self.scale, dtype=float)
        means = (t.means[lo:hi] + t.origin - self.shift) / scale
        comoments = t.comoments[lo:hi] / np.outer(scale, scale)
        return GranuleStats(t.counts[lo:hi].astype(float), means, comoments,
                            int(self.granules.rows_per_granule),
                            self.time_column is not None if ordered is None else bool(ordered))

    def plan(self, plan_id: str) -> PlanWindows:
        """The windows of plan ``plan_id``."""
        for p in self.plans:
            if p.plan_id == plan_id:
                return p
        known = ", ".join(repr(p.plan_id) for p in self.plans) or "none"
        raise OptionsError(f"dataset {self.dataset_id!r} has no window plan {plan_id!r}; "
                           f"its plans are {known}.", key="plan",
                           fix="use one of those plan ids.")


def without_blocks(prepared: PreparedDataset) -> PreparedDataset:
    """A copy that no longer holds the block statistics (everything else is kept).

    Once every window's moments are assembled, the blocks are needed by no
    later stage; dropping them halves what a result with a window every few
    blocks keeps in memory and in the result cache. ``blocks`` becomes an
    empty :class:`BlockTable` (zero blocks, same variables and origin).
    """
    b = prepared.blocks
    n = b.means.shape[1]
    none = np.zeros(0, np.int64)
    t = None if b.first_time is None else np.zeros(0, "datetime64[s]")
    empty = BlockTable(counts=none, means=np.zeros((0, n)), comoments=np.zeros((0, n, n)),
                       first_pos=none, last_pos=none, first_source_row=none,
                       last_source_row=none, first_time=t, last_time=t, origin=b.origin)
    return dataclasses.replace(prepared, blocks=empty, granules=None)


def window_moments(prepared: PreparedDataset, plan_id: str) -> list[tuple[Window, Moments]]:
    """The windows of one plan with their moments, in order."""
    p = prepared.plan(plan_id)
    return list(zip(p.windows, p.moments))


# -- the overview --------------------------------------------------------------

class _OverviewBuilder:
    def __init__(self, n: int, timed: bool) -> None:
        self.n = n
        self.timed = timed
        self.total = 0
        self._rows: list[tuple] | None = []
        self.width = 1
        self._bins: dict[str, np.ndarray] | None = None

    def push(self, y: np.ndarray, pos: np.ndarray, src: np.ndarray, t: np.ndarray | None) -> None:
        m = y.shape[0]
        if m == 0:
            return
        self.total += m
        if self._rows is not None:
            self._rows.append((y.copy(), pos.copy(), src.copy(), None if t is None else t.copy()))
            if self.total > OVERVIEW_ROWS:
                self._rows = None
        ti = (t.astype("datetime64[s]").astype(np.int64) if t is not None
              else np.zeros(m, dtype=np.int64))
        ids = pos // self.width
        starts = np.concatenate([[0], np.flatnonzero(np.diff(ids)) + 1])
        ends = np.concatenate([starts[1:], [m]])
        new = {
            "id": ids[starts], "count": (ends - starts).astype(np.int64),
            "sum": np.add.reduceat(y, starts, axis=0),
            "min": np.minimum.reduceat(y, starts, axis=0),
            "max": np.maximum.reduceat(y, starts, axis=0),
            "first_pos": pos[starts], "last_pos": pos[ends - 1],
            "first_src": src[starts], "last_src": src[ends - 1],
            "first_t": ti[starts], "last_t": ti[ends - 1],
        }
        if self._bins is None:
            self._bins = new
        else:
            self._bins = self._combine(self._bins, new)
        while self._bins["id"].size > OVERVIEW_BINS:
            self.width *= 2
            b = dict(self._bins)
            b["id"] = b["id"] // 2
            self._bins = self._regroup(b)

    @staticmethod
    def _regroup(b: dict[str, np.ndarray]) -> dict[str, np.ndarray]:
        ids = b["id"]
        starts = np.concatenate([[0], np.flatnonzero(np.diff(ids)) + 1])
        ends = np.concatenate([starts[1:], [ids.size]])
        return {
            "id": ids[starts], "count": np.add.reduceat(b["count"], starts),
            "sum": np.add.reduceat(b["sum"], starts, axis=0),
            "min": np.minimum.reduceat(b["min"], starts, axis=0),
            "max": np.maximum.reduceat(b["max"], starts, axis=0),
            "first_pos": b["first_pos"][starts], "last_pos": b["last_pos"][ends - 1],
            "first_src": b["first_src"][starts], "last_src": b["last_src"][ends - 1],
            "first_t": b["first_t"][starts], "last_t": b["last_t"][ends - 1],
        }

    def _combine(self, a, b):
        joined = {k: np.concatenate([a[k], b[k]]) for k in a}
        return self._regroup(joined)

    def finish(self, names, shift, scale, offset, fmt: TimeFormat | None) -> Overview:
        if self._rows is not None:
            if self._rows:
                y = np.concatenate([r[0] for r in self._rows])
                pos = np.concatenate([r[1] for r in self._rows])
                src = np.concatenate([r[2] for r in self._rows])
                t = np.concatenate([r[3] for r in self._rows]) if self.timed else None
            else:
                y = np.empty((0, self.n))
                pos = src = np.empty(0, dtype=np.int64)
                t = np.empty(0, dtype="datetime64[s]") if self.timed else None
            positions = {"first_row": pos + 1, "last_row": pos + 1,
                         "rows": np.ones(pos.size, dtype=np.int64),
                         "source_first_row": src, "source_last_row": src}
            if self.timed:
                positions.update(first_time=t, last_time=t, time_label=format_times(t, fmt))
            values = pd.DataFrame((y - shift) / scale + offset, columns=list(names))
            return Overview("rows", 1, pd.DataFrame(positions), values, None, None)
        b = self._bins
        ft = b["first_t"].astype("datetime64[s]")
        lt = b["last_t"].astype("datetime64[s]")
        positions = {"first_row": b["first_pos"] + 1, "last_row": b["last_pos"] + 1,
                     "rows": b["count"], "source_first_row": b["first_src"],
                     "source_last_row": b["last_src"]}
        if self.timed:
            fl, ll = format_times(ft, fmt), format_times(lt, fmt)
            positions.update(first_time=ft, last_time=lt,
                             time_label=[a if a == z else f"{a}–{z}" for a, z in zip(fl, ll)])
        mean = b["sum"] / b["count"][:, None]
        mk = lambda v: pd.DataFrame((v - shift) / scale + offset, columns=list(names))  # noqa: E731
        return Overview("bins", self.width, pd.DataFrame(positions), mk(mean), mk(b["min"]),
                        mk(b["max"]))


# -- the pass ------------------------------------------------------------------

class _Pass:
    """State of one streaming pass over a table."""

    def __init__(self, *, dataset_id: str, names: Sequence[str], transforms: Sequence[str],
                 missing: str, path: str | None, time: TimeSpec | None, grid: Grid,
                 trend=None, fit_trend: bool = False) -> None:
        self.dataset_id = dataset_id
        self.names = tuple(names)
        self.transforms = tuple(transforms)
        self.path = path
        self.time = time
        self.grid = grid
        n = len(self.names)
        self.stream = StreamTransform(self.names, self.transforms, missing=missing, path=path,
                                      time_column=None if time is None else time.column, trend=trend)
        self.trend_fit = TrendFit(n) if fit_trend else None
        self.fmt: TimeFormat | None = None
        self.order: OrderCheck | None = None
        self.t0: np.datetime64 | None = None
        self.typed_tod = False
        self.rows_outside = 0
        self.kept = 0
        self.first_chunk_rows = 0
        timed = time is not None
        self.blocks = BlockBuilder(n, lambda p, t: grid.keys(p, t, self.t0), timed=timed)
        self.granules = GranuleBuilder(n, lambda p, t: grid.keys(p, t, self.t0), timed=timed)
        self.origin: np.ndarray | None = None
        self.overview = _OverviewBuilder(n, timed)
        self.largest = np.zeros(n)   # largest |value| per column (after row transforms)
        self.lo = self.hi = None
        if timed:
            key = "time"
            self.lo = (parse_bound(time.start, inclusive_end=False, path=path, key=f"{key}.from")
                       if time.start else None)
            self.hi = (parse_bound(time.end, inclusive_end=True, path=path, key=f"{key}.to")
                       if time.end else None)

    def _times(self, chunk: RawChunk) -> np.ndarray:
        col = self.time.column
        if chunk.times_typed:
            t = chunk.times.astype("datetime64[s]")
            ok = ~np.isnat(t)
            if ok.any() and ((t[ok] - t[ok].astype("datetime64[D]")).astype(np.int64) != 0).any():
                self.typed_tod = True
            if self.fmt is None:
                spec = self.time.format
                self.fmt = TimeFormat(spec) if spec in ("year", "quarter", "month") else (
                    TimeFormat("datetime") if self.typed_tod else TimeFormat("date"))
                self.order = OrderCheck(path=self.path, column=col, fmt=self.fmt)
            elif self.typed_tod and self.fmt.kind == "date":
                self.fmt = TimeFormat("datetime")
                self.order.fmt = self.fmt
            return t
        if self.fmt is None:
            ts = chunk.times if isinstance(chunk.times, pd.Series) else pd.Series(
                chunk.times, dtype=object)
            present = ts.notna().to_numpy(dtype=bool)
            if not present.any():
                if self.time.format == "auto":
                    return np.full(len(ts), np.datetime64("NaT", "s"))
                first, row = None, None
            else:
                i = int(np.argmax(present))
                first, row = str(ts.iloc[i]), int(chunk.rows[i])
            self.fmt = resolve_format(self.time.format, first, path=self.path, column=col,
                                      row=row)
            self.order = OrderCheck(path=self.path, column=col, fmt=self.fmt)
        return parse_times(chunk.times, self.fmt, path=self.path, column=col, rows=chunk.rows)

    def _periods(self, t: np.ndarray | None) -> np.ndarray | None:
        """Period numbers of yearly, quarterly or monthly times (consecutive ones differ by 1).

        None for daily or finer times and without a time column: those are
        differenced row to row.
        """
        if t is None or self.fmt is None:
            return None
        months = self.fmt.period_months_days_seconds()[0]
        if not months:
            return None
        ok = ~np.isnat(t)
        out = np.zeros(t.size, dtype=np.int64)
        out[ok] = np.floor_divide(t[ok].astype("datetime64[M]").astype(np.int64), months)
        return out

    @staticmethod
    def _tnum(t: np.ndarray | None, periods: np.ndarray | None) -> np.ndarray | None:
        """Numeric time of each row for ``detrend``: period number (years, quarters, months) or days."""
        if t is None:
            return None
        if periods is not None:
            return periods.astype(float)
        out = np.full(t.size, np.nan)
        ok = ~np.isnat(t)
        out[ok] = t[ok].astype("datetime64[s]").astype(np.int64) / 86400.0
        return out

    def feed(self, chunk: RawChunk) -> None:
        values, rows = chunk.values, chunk.rows
        t = None
        if self.time is not None:
            t = self._times(chunk)
            if self.order is not None:
                self.order.check(t, rows)
            if self.lo is not None or self.hi is not None:
                inside = np.ones(t.size, dtype=bool)
                if self.lo is not None:
                    inside &= ~(t < self.lo)
                if self.hi is not None:
                    inside &= ~(t >= self.hi)
                inside |= np.isnat(t)
                self.rows_outside += int((~inside).sum())
                if not inside.all():
                    values, rows, t = values[inside], rows[inside], t[inside]
        periods = self._periods(t)
        tnum = self._tnum(t, periods)
        y, keep = self.stream.apply(values, rows, None if t is None else np.isnat(t), periods, tnum)
        if y.shape[0] == 0:
            return
        if self.trend_fit is not None:
            self.trend_fit.push(tnum[keep], y)
        src = rows[keep]
        tk = None if t is None else t[keep]
        if tk is not None and self.t0 is None:
            self.t0 = tk[0]
        self.largest = np.fmax(self.largest, np.abs(y).max(axis=0))
        if self.origin is None:
            self.origin = y[0].copy()
        rel = y - self.origin   # exact for values within a factor 2 of the origin (Sterbenz)
        pos = np.arange(self.kept, self.kept + y.shape[0], dtype=np.int64)
        self.kept += y.shape[0]
        self.blocks.push(rel, pos, src, tk)
        self.granules.push(rel, pos, src, tk)
        self.overview.push(rel, pos, src, tk)

    def finish(self, *, rows_read: int, sha256: str, plans: Sequence[WindowPlanSpec],
               labels, units, source: str | None) -> PreparedDataset:
        path = self.path
        n = len(self.names)
        if rows_read == 0:
            raise DataError("has a header but no data rows.", path=path,
                            fix="add data rows below the header, or point at the right file.")
        self.stream.check_columns()
        if self.kept == 0:
            if self.rows_outside == rows_read:
                a = self.time.start or "the start"
                b = self.time.end or "the end"
                raise DataError(f"no row of dataset {self.dataset_id!r} lies between {a} and {b} "
                                f"(all {rows_read} rows are outside).", path=path,
                                key="time.from", fix="widen or correct the time range from/to.")
            why = ", ".join(f"{d.count} for {d.reason} (first rows "
                            f"{', '.join(map(str, d.first_rows))})" for d in self.stream.drops)
            raise DataError(f"no row of dataset {self.dataset_id!r} is left to analyse: every row "
                            f"was dropped ({why}).", path=path,
                            fix="fill in missing values or drop the variables that are mostly "
                                "empty.")
        if self.kept < n + 2:
            raise DataError(f"dataset {self.dataset_id!r} has only {self.kept} analysed rows, but "
                            f"{n} variables need at least {n + 2}.", path=path,
                            fix="use more data, or analyse fewer variables.")
        check_not_tiny(self.largest, self.names, path=path)
        blocks = self.blocks.finish(self.origin)
        levels = tree_levels(blocks)
        fc, fm, fcm, fml, fcml = assemble_stacked(blocks, np.array([0]), np.array([len(blocks)]),
                                                  relative=True, levels=levels, low=True)
        rel_full = Moments(int(fc[0]), fm[0], fcm[0], fml[0], fcml[0])
        check_variation(Moments(rel_full.count, rel_full.mean + self.origin, rel_full.comoment),
                        self.names, self.transforms, path=path)
        # whole-sample transforms in coordinates relative to the origin:
        # y' = (y_rel - shift_rel) / scale + offset, offset = origin where no transform
        shift_rel, scale = affine_for(self.transforms, rel_full)
        sample = np.array([t in SAMPLE_TRANSFORMS for t in self.transforms])
        offset = np.where(sample, 0.0, self.origin)
        full = affine_moments(rel_full, shift_rel, scale, offset)
        shift = np.where(sample, shift_rel + self.origin, 0.0)
        prepared_plans = []
        for plan in plans:
            wins = plan_windows(plan, blocks, n_variables=n, time_format=self.fmt,
                                dataset_id=self.dataset_id, path=path)
            if isinstance(wins, WindowTable):
                lo, hi = wins.block_start, wins.block_stop
            else:
                lo = np.array([w.block_start for w in wins], np.int64)
                hi = np.array([w.block_stop for w in wins], np.int64)
            c, m, cm, _, cml = assemble_stacked(blocks, lo, hi, relative=True, levels=levels,
                                                low=True)
            mom = StackedMoments(*affine_stacked(c, m, cm, shift_rel, scale, offset,
                                                 comoments_lo=cml))
            del c, m, cm, cml
            check_window_variation(wins, mom, self.names, plan_id=plan.id,
                                   dataset_id=self.dataset_id, path=path)
            prepared_plans.append(PlanWindows(
                plan.id, plan.kind, wins if isinstance(wins, WindowTable) else tuple(wins), mom))
        del levels
        # after the segment tree is freed: the granules stay packed while it is held
        granules = self.granules.finish(self.origin)
        period = None
        if blocks.first_time is not None:
            a, b = format_times(np.array([blocks.first_time[0], blocks.last_time[-1]]), self.fmt)
            period = (a, b)
            _check_plottable(blocks.first_time[0], blocks.last_time[-1], a, b,
                             column=self.time.column, path=path)
        return PreparedDataset(
            dataset_id=self.dataset_id, variables=self.names, labels=tuple(labels),
            units=tuple(units), transforms=self.transforms, source=source, sha256=sha256,
            rows_read=rows_read, rows_outside_range=self.rows_outside, rows_used=self.kept,
            drops=self.stream.drops, time_column=None if self.time is None else self.time.column,
            time_format=self.fmt, period=period, plans=tuple(prepared_plans), full=full,
            blocks=blocks, shift=shift, scale=scale, granules=granules,
            overview=self.overview.finish(self.names, shift_rel, scale, offset, self.fmt))


#: calendar years the figures' date axes can show (matplotlib's date range is years 1 to 9999)
PLOTTABLE_YEARS = (1, 9999)


def _check_plottable(first, last, a: str, b: str, *, column: str, path: str | None) -> None:
    """Times must leave room for the axes' margins inside years 1-9999 (else figures fail).

    The margin allowed for is a tenth of the span (at least a year) on each side.
    """
    y0 = int(str(np.datetime64(first, "Y")))
    y1 = int(str(np.datetime64(last, "Y")))
    pad = max((y1 - y0) / 10.0, 1.0)
    lo, hi = PLOTTABLE_YEARS
    if y0 - pad < lo or y1 + pad > hi:
        raise DataError(
            f"column {column!r} runs from {a} to {b}, too close to year {lo if y0 - pad < lo else hi} "
            f"for the figures' date axes, which show years {lo} to {hi} with a margin on each side.",
            path=path, column=column, got=f"{a} to {b}",
            fix="if these numbers are not calendar years, leave the time column out (rows are then "
                "numbered) or add a fixed number of years to every value (e.g. 2000).")


def _check_setup(dataset_id: str, names: Sequence[str], transforms: Sequence[str], missing: str,
                 time: TimeSpec | None, plans: Sequence[WindowPlanSpec], path: str | None) -> None:
    if not names:
        raise DataError(f"dataset {dataset_id!r} lists no variables.", path=path, key="variables",
                        fix="list at least one column under variables.")
    seen: dict[str, int] = {}
    for j, c in enumerate(names):
        if c in seen:
            raise DataError(f"dataset {dataset_id!r} lists column {c!r} twice (variables "
                            f"{seen[c]} and {j}).", path=path, key=f"variables[{j}].column",
                            fix="list each column once.")
        seen[c] = j
    if time is not None and time.column in seen:
        raise DataError(f"dataset {dataset_id!r} uses column {time.column!r} both as the time "
                        "and as a variable.", path=path, key="time.column",
                        fix="pick a different time column, or drop it from the variables.")
    for j, t in enumerate(transforms):
        if t not in ROW_TRANSFORMS + SAMPLE_TRANSFORMS:
            raise DataError(f"transform {t!r} of column {names[j]!r} is not one of "
                            f"{', '.join(ROW_TRANSFORMS + SAMPLE_TRANSFORMS)}.", path=path,
                            key=f"variables[{j}].transform", got=t,
                            fix="use one of those transforms.")
    if time is None and "detrend" in transforms:
        j = list(transforms).index("detrend")
        raise DataError(f"transform detrend of column {names[j]!r} removes a straight line in time, but "
                        f"dataset {dataset_id!r} has no time column.", path=path,
                        key=f"variables[{j}].transform", got="detrend",
                        fix="add time: {column: ..., format: ...} to the dataset, or use transform: diff.")
    if missing not in MISSING_POLICIES:
        raise DataError(f"missing {missing!r} is not drop or fail.", path=path, key="missing",
                        got=missing, fix="set missing: drop or missing: fail.")
    ids: set[str] = set()
    for p in plans:
        if p.id in ids:
            raise DataError(f"window plan id {p.id!r} is given twice.", path=path,
                            key="windows", fix="give every window plan its own id.")
        ids.add(p.id)


def prepare_dataset(ds: DatasetSpec, plans: Sequence[WindowPlanSpec], *,
                    chunk_rows: int = DEFAULT_CHUNK_ROWS, engine: str = "auto") -> PreparedDataset:
    """Read a dataset once and reduce it to window statistics.

    Parameters
    ----------
    ds : DatasetSpec
        The dataset (its ``source`` is used in messages, ``source_path`` read).
    plans : sequence of WindowPlanSpec
        The plans that apply to it (e.g. ``spec.plans_for(ds)``).
    chunk_rows : int
        Rows read at a time; results do not depend on it.
    engine : {"auto", "pyarrow", "pandas"}
        CSV/TSV reader. ``auto`` uses pyarrow's multi-threaded streaming
        reader when pyarrow is installed and falls back to pandas for any file
        pyarrow cannot read exactly as pandas does (so results, and every
        error message, are those of the pandas reader, bit for bit);
        ``pandas`` always uses pandas; ``pyarrow`` never falls back (raises
        :class:`relspan.data.sources.FastPathDeclined`; for tests).

    Returns
    -------
    PreparedDataset

    Raises
    ------
    DataError
        Any problem with the file or its contents, one paragraph with a fix.
    DependencyError
        A Parquet file without pyarrow.
    """
    names = ds.columns
    transforms = tuple(v.transform for v in ds.variables)
    _check_setup(ds.id, names, transforms, ds.missing, ds.time, plans, ds.source)
    grid = plan_grid(plans, has_time=ds.time is not None, dataset_id=ds.id, path=ds.source)
    src = open_source(ds.source, ds.source_path, ds.format, separator=ds.separator,
                      decimal=ds.decimal, encoding=ds.encoding, sheet=ds.sheet)
    if engine not in ENGINES:
        raise OptionsError(f"engine {engine!r} is not one of {', '.join(ENGINES)}.", key="engine",
                           fix="use auto, pyarrow or pandas.")
    use = engine if engine != "auto" else ("pyarrow" if arrow_available() else "pandas")
    if use == "pyarrow" and src.format in ("csv", "tsv") and src.plain:
        try:
            return _one_pass(ds, src, names, transforms, grid, plans, chunk_rows, "pyarrow")
        except FastPathDeclined:
            if engine == "pyarrow":
                raise
    return _one_pass(ds, src, names, transforms, grid, plans, chunk_rows, "pandas")


def _fit_trend(ds, src, names, transforms, grid, chunk_rows, engine):
    """The first pass of ``detrend``: the least-squares line in time of each analysed column."""
    reader = TableReader(src, names, time_column=None if ds.time is None else ds.time.column,
                         chunk_rows=chunk_rows, engine=engine)
    plain = tuple("none" if t == "detrend" else t for t in transforms)
    run = _Pass(dataset_id=ds.id, names=names, transforms=plain, missing=ds.missing, path=ds.source,
                time=ds.time, grid=grid, fit_trend=True)
    with noted(src):
        for chunk in reader.chunks():
            run.feed(chunk)
    return run.trend_fit.line()


def _one_pass(ds, src, names, transforms, grid, plans, chunk_rows, engine) -> PreparedDataset:
    trend = (_fit_trend(ds, src, names, transforms, grid, chunk_rows, engine)
             if "detrend" in transforms else None)
    reader = TableReader(src, names, time_column=None if ds.time is None else ds.time.column,
                         chunk_rows=chunk_rows, engine=engine)
    run = _Pass(dataset_id=ds.id, names=names, transforms=transforms, missing=ds.missing,
                path=ds.source, time=ds.time, grid=grid, trend=trend)
    with noted(src):
        for chunk in reader.chunks():
            run.feed(chunk)
        prepared = run.finish(rows_read=reader.rows_read, sha256=reader.sha256 or "", plans=plans,
                              labels=[v.label for v in ds.variables],
                              units=[v.unit for v in ds.variables], source=ds.source)
    return prepared if src.plain else dataclasses.replace(prepared, read_as=src.read_as)


def _per_column(value, columns: Sequence[str], default: str, what: str) -> tuple[str, ...]:
    if value is None:
        return tuple(default for _ in columns)
    if isinstance(value, str):
        return tuple(value for _ in columns)
    if isinstance(value, Mapping):
        unknown = [k for k in value if k not in columns]
        if unknown:
            raise OptionsError(f"{what} names column {unknown[0]!r}, which is not among the "
                               "columns.", key=what, fix="name only columns you analyse.")
        return tuple(str(value.get(c, default)) for c in columns)
    seq = tuple(str(v) for v in value)
    if len(seq) != len(columns):
        raise OptionsError(f"{what} has {len(seq)} entries for {len(columns)} columns.", key=what,
                           fix=f"give one {what[:-1]} per column, or a mapping.")
    return seq


def prepare_frame(df: pd.DataFrame, *, columns: Sequence[str], time: str | TimeSpec | None = None,
                  transforms=None, plans: Sequence[WindowPlanSpec], labels=None, units=None,
                  missing: str = "drop", dataset_id: str = "frame",
                  chunk_rows: int = DEFAULT_CHUNK_ROWS) -> PreparedDataset:
    """:func:`prepare_dataset` for a DataFrame already in memory.

    Parameters
    ----------
    df : DataFrame
    columns : sequence of str
        Variable columns.
    time : str or TimeSpec, optional
        The time column (``format="auto"``), or a full TimeSpec.
    transforms, labels, units : str, sequence or mapping, optional
        Per column (a single string applies to all; default ``"none"``, the
        column name, ``""``).
    plans : sequence of WindowPlanSpec
    missing : {"drop", "fail"}
    dataset_id : str
    chunk_rows : int
        Rows handled at a time; results do not depend on it.

    Returns
    -------
    PreparedDataset
        ``source`` is None; ``sha256`` hashes the selected columns.
    """
    path = "DataFrame"
    columns = tuple(columns)
    ts = TimeSpec(time) if isinstance(time, str) else time
    tr = _per_column(transforms, columns, "none", "transforms")
    lab = _per_column(labels, columns, "", "labels")
    lab = tuple(l or c for l, c in zip(lab, columns))
    un = _per_column(units, columns, "", "units")
    _check_setup(dataset_id, columns, tr, missing, ts, plans, path)
    wanted = list(columns) + ([ts.column] if ts is not None else [])
    header = [str(c) for c in df.columns]

    fake = TableSource(path, None, "frame", None, tuple(header))  # type: ignore[arg-type]
    keys = [f"columns[{j}]" for j in range(len(columns))] + (["time"] if ts else [])
    positions = select_columns(fake, wanted, keys)
    grid = plan_grid(plans, has_time=ts is not None, dataset_id=dataset_id, path=path)
    h = hashlib.sha256()
    total = len(df)

    def chunks(hashing: bool):
        for a in range(0, total, max(int(chunk_rows), 1)):
            part = df.iloc[a:a + chunk_rows, positions]
            rows = np.arange(a + 1, a + part.shape[0] + 1, dtype=np.int64)
            values = numeric_block(part.iloc[:, :len(columns)], columns, rows, path=path)
            if hashing:
                h.update(np.ascontiguousarray(values).tobytes())
            times, typed = None, False
            if ts is not None:
                tcol = part.iloc[:, len(columns)]
                if pd.api.types.is_datetime64_any_dtype(tcol.dtype):
                    if getattr(tcol.dt, "tz", None) is not None:
                        tcol = tcol.dt.tz_convert("UTC").dt.tz_localize(None)
                    times, typed = tcol.to_numpy().astype("datetime64[s]"), True
                    if hashing:
                        h.update(times.astype(np.int64).tobytes())
                else:
                    times = time_text(tcol)
                    if hashing:
                        h.update("\x1f".join("" if v is None else v for v in times).encode())
            yield RawChunk(values, times, typed, rows)

    trend = None
    if "detrend" in tr:  # the first pass fits the straight line in time that detrend removes
        fit = _Pass(dataset_id=dataset_id, names=columns, transforms=tuple("none" if t == "detrend" else t
                                                                            for t in tr),
                    missing=missing, path=path, time=ts, grid=grid, fit_trend=True)
        for chunk in chunks(False):
            fit.feed(chunk)
        trend = fit.trend_fit.line()
    run = _Pass(dataset_id=dataset_id, names=columns, transforms=tr, missing=missing, path=path,
                time=ts, grid=grid, trend=trend)
    for chunk in chunks(True):
        run.feed(chunk)
    return run.finish(rows_read=total, sha256=h.hexdigest(), plans=plans, labels=lab, units=un,
                      source=None)
