"""Per-variable transforms and the missing-value policy, applied chunk by chunk.

Row-wise transforms run during the single pass:

- ``none``: the value as read;
- ``log``: natural logarithm (a value <= 0 is an error naming its row);
- ``diff``: ``x[t] - x[t-1]``; ``logdiff``: ``log x[t] - log x[t-1]``. The
  previous row is carried across chunks; the first row has no previous value
  and is dropped. ``t-1`` is the previous row of the file inside the
  from/to range, so a missing value also makes the next row's difference
  missing (a two-step change is never passed off as a one-step one). With a
  time column of years, quarters or months, only consecutive periods are
  differenced: when periods are absent from the file (a gap), the difference
  across the gap is missing and the row is dropped with the reason
  :data:`REASON_GAP`. Daily and finer times are differenced row to row (a
  calendar gap there, e.g. a weekend, is usually not missing data).

- ``detrend``: ``x[t] - (a + b t)``, the residual from a straight line in
  time fitted by least squares to all analysed rows (a first, cheap pass over
  the file fits it: :class:`TrendFit`). ``t`` is the period number for
  years, quarters and months and the day (fractional) otherwise, so a gap in
  the time index is a gap in ``t``: the line is fitted and removed across it
  correctly. Needs a time column.

Whole-sample transforms act on the statistics at the end, as an affine map
``y' = (y - shift) / scale`` applied to every window's moments and to the
overview (:func:`affine_for`, :func:`affine_moments`):

- ``demean``: ``shift`` = full-sample mean (covariances do not change);
- ``standardise``: also ``scale`` = full-sample standard deviation (ddof 1),
  so covariances become ``C_ij / (s_i s_j)``.

Missing values: ``drop`` removes every row with an empty selected cell (the
rows are counted and the first few listed), ``fail`` stops at the first empty
cell.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Sequence

import numpy as np

from relspan.analysis import _dd
from relspan.analysis.moments import Moments
from relspan.errors import DataError

__all__ = [
    "ROW_TRANSFORMS",
    "SAMPLE_TRANSFORMS",
    "MISSING_POLICIES",
    "Drop",
    "StreamTransform",
    "affine_for",
    "affine_moments",
    "check_variation",
    "check_window_variation",
    "TrendFit",
]

#: transforms applied row by row during the pass
ROW_TRANSFORMS = ("none", "log", "diff", "logdiff", "detrend")
#: transforms applied to the statistics of the whole sample at the end
SAMPLE_TRANSFORMS = ("demean", "standardise")
MISSING_POLICIES = ("drop", "fail")

#: how many dropped row numbers a :class:`Drop` keeps
FIRST_ROWS = 5

#: relative spread below which a column counts as constant: a few hundred units
#: in the last place of double precision (machine epsilon 2.2e-16, IEEE 754)
CONSTANT_RTOL = 1e-13

REASON_MISSING = "missing value"
REASON_NO_PREVIOUS = "no previous row to difference"
REASON_GAP = "difference across a gap in the time column (the previous period is absent)"


class TrendFit:
    """Least-squares straight line in time per column, accumulated chunk by chunk (shifted sums).

    ``push(t, y)`` with ``t`` the numeric time of each kept row and ``y`` the values;
    ``line()`` returns ``(a, b)`` per column so that ``y - (a + b t)`` is the residual.
    """

    def __init__(self, n: int) -> None:
        self.n = n
        self.count = 0
        self.t0: float | None = None
        self.y0: np.ndarray | None = None
        self.st = 0.0
        self.stt = 0.0
        self.sy = np.zeros(n)
        self.sty = np.zeros(n)

    def push(self, t: np.ndarray, y: np.ndarray) -> None:
        if t.size == 0:
            return
        if self.t0 is None:
            self.t0, self.y0 = float(t[0]), np.asarray(y[0], dtype=float).copy()
        dt = np.asarray(t, dtype=float) - self.t0
        dy = np.asarray(y, dtype=float) - self.y0
        self.count += int(t.size)
        self.st += float(dt.sum())
        self.stt += float(dt @ dt)
        self.sy += dy.sum(axis=0)
        self.sty += dt @ dy

    def line(self) -> tuple[np.ndarray, np.ndarray]:
        """``(a, b)``: intercept and slope per column (in the column's units per time unit)."""
        if self.count < 2 or self.t0 is None:
            return np.zeros(self.n), np.zeros(self.n)
        m = self.count
        vt = self.stt - self.st * self.st / m
        b = (self.sty - self.st * self.sy / m) / vt if vt > 0 else np.zeros(self.n)
        ybar = self.y0 + self.sy / m
        tbar = self.t0 + self.st / m
        return ybar - b * tbar, b


@dataclass(frozen=True, slots=True)
class Drop:
    """Rows left out of the analysis for one reason.

    Attributes
    ----------
    reason : str
        ``"missing value"`` or ``"no previous row to difference"``.
    count : int
        How many rows.
    first_rows : tuple of int
        The first few (1-based data rows of the file).
    """

    reason: str
    count: int
    first_rows: tuple[int, ...]


class StreamTransform:
    """Apply row-wise transforms and the missing-value policy to chunks in order.

    Parameters
    ----------
    names : sequence of str
        Column names of the variables (for messages).
    transforms : sequence of str
        One per variable, from ``ROW_TRANSFORMS + SAMPLE_TRANSFORMS``.
    missing : {"drop", "fail"}
        The missing-value policy.
    path : str or None
        The file, for messages.
    time_column : str or None
        Name of the time column (its empty cells count as missing values).
    """

    def __init__(self, names: Sequence[str], transforms: Sequence[str], *, missing: str,
                 path: str | None, time_column: str | None = None,
                 trend: tuple[np.ndarray, np.ndarray] | None = None) -> None:
        self.names = tuple(names)
        self.transforms = tuple(transforms)
        self.missing = missing
        self.path = path
        self.time_column = time_column
        n = len(self.names)
        self._log = np.array([t in ("log", "logdiff") for t in self.transforms])
        self._diff = np.array([t in ("diff", "logdiff") for t in self.transforms])
        self._detrend = np.array([t == "detrend" for t in self.transforms])
        self._trend = trend  # (a, b) per column for detrend (None on the fitting pass)
        self._prev = np.full(n, np.nan)       # previous raw row (after log), carried
        self._prev_period: int | None = None  # period number of that row (None: unknown)
        self._started = False
        self.present = np.zeros(n, dtype=np.int64)   # non-empty cells per column
        self.rows_seen = 0
        self._drops = {REASON_MISSING: [0, []], REASON_NO_PREVIOUS: [0, []], REASON_GAP: [0, []]}

    @property
    def drops(self) -> tuple[Drop, ...]:
        """Rows dropped so far, one :class:`Drop` per reason that occurred."""
        return tuple(Drop(r, c, tuple(f)) for r, (c, f) in self._drops.items() if c)

    def _record(self, reason: str, rows: np.ndarray) -> None:
        entry = self._drops[reason]
        entry[0] += int(rows.size)
        need = FIRST_ROWS - len(entry[1])
        if need > 0:
            entry[1].extend(int(r) for r in rows[:need])

    def apply(self, values: np.ndarray, rows: np.ndarray,
              time_missing: np.ndarray | None = None,
              periods: np.ndarray | None = None,
              tnum: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray]:
        """Transform one chunk (rows already inside the from/to range).

        Parameters
        ----------
        values : (m, n) float array
            Raw values, NaN for empty cells.
        rows : (m,) int array
            1-based data rows.
        time_missing : (m,) bool array, optional
            True where the time cell is empty.
        periods : (m,) int64 array, optional
            Period number of each row (consecutive periods differ by 1; rows
            with an empty time cell are ignored); a difference is taken only
            between consecutive periods.
        tnum : (m,) float array, optional
            Numeric time of each row (period number, or days): the ``t`` of
            ``detrend``.

        Returns
        -------
        y : (k, n) float array
            Transformed values of the kept rows.
        keep : (m,) bool array
            Which input rows were kept.
        """
        m, n = values.shape
        raw_missing = np.isnan(values)
        self.present += (~raw_missing).sum(axis=0)
        self.rows_seen += m
        row_missing = raw_missing.any(axis=1)
        if time_missing is not None:
            row_missing = row_missing | time_missing
        if self.missing == "fail" and row_missing.any():
            i = int(np.flatnonzero(row_missing)[0])
            if time_missing is not None and time_missing[i]:
                col = self.time_column
            else:
                col = self.names[int(np.flatnonzero(raw_missing[i])[0])]
            raise DataError(
                f"column {col!r}, row {int(rows[i])} is empty, and the dataset says "
                "missing: fail.", path=self.path, column=col, row=int(rows[i]), key="missing",
                fix="fill in the cell, or set missing: drop to leave such rows out "
                    "(they are counted and reported).")
        x = values
        if self._log.any():
            lx = x[:, self._log]
            bad = ~np.isnan(lx) & (lx <= 0)
            if bad.any():
                i, j = (int(v) for v in np.argwhere(bad)[0])
                col = [nm for nm, f in zip(self.names, self._log) if f][j]
                tr = [t for t, f in zip(self.transforms, self._log) if f][j]
                raise DataError(
                    f"column {col!r}, row {int(rows[i])}: {lx[i, j]:.6g} is not positive, so "
                    f"transform {tr} (a logarithm) cannot be taken.", path=self.path,
                    column=col, row=int(rows[i]), got=repr(float(lx[i, j])),
                    fix="use transform: none or diff for this variable, or correct the value.")
            x = x.copy()
            with np.errstate(invalid="ignore", divide="ignore"):
                x[:, self._log] = np.log(x[:, self._log])
        if self._detrend.any() and self._trend is not None and m:
            if tnum is None:
                raise DataError("transform detrend needs a time column.", path=self.path,
                                key="transform", fix="add time: {column: ...} to the dataset, or use diff.")
            a, b = self._trend
            x = x.copy()
            x[:, self._detrend] = x[:, self._detrend] - (a[self._detrend][None, :]
                                                         + np.asarray(tnum, float)[:, None] * b[self._detrend][None, :])
        y = x
        no_prev = np.zeros(m, dtype=bool)
        if self._diff.any() and m:
            prev = np.vstack([self._prev[None, :], x[:-1]])
            y = x.copy()
            y[:, self._diff] = x[:, self._diff] - prev[:, self._diff]
            no_prev = (np.isnan(prev[:, self._diff]) & ~np.isnan(x[:, self._diff])).any(axis=1)
            self._prev = x[-1].copy()
            if periods is not None:
                known = ~time_missing if time_missing is not None else np.ones(m, dtype=bool)
                p = np.asarray(periods, dtype=np.int64)
                prev_p = np.concatenate([[self._prev_period if self._prev_period is not None else 0],
                                         p[:-1]])
                prev_known = np.concatenate([[self._prev_period is not None], known[:-1]])
                gap = known & prev_known & (p - prev_p != 1) & ~no_prev
                if gap.any():
                    y[np.ix_(gap, self._diff)] = np.nan
                    self._record(REASON_GAP, rows[gap & ~row_missing])
                self._prev_period = int(p[-1]) if known[-1] else None
        if y is values:  # no row transform: NaN only where a cell was empty
            keep = ~row_missing
        else:
            keep = ~(np.isnan(y).any(axis=1) | row_missing)
        self._record(REASON_MISSING, rows[row_missing])
        self._record(REASON_NO_PREVIOUS, rows[no_prev & ~row_missing & ~keep])
        return y[keep], keep

    def check_columns(self) -> None:
        """After the pass: a column with no value at all is an error."""
        for j, name in enumerate(self.names):
            if self.rows_seen and self.present[j] == 0:
                raise DataError(
                    f"column {name!r} has no values: all {self.rows_seen} rows in range are "
                    "empty.", path=self.path, column=name,
                    fix="drop the variable from the dataset, or point at the column that holds "
                        "the data.")


def affine_for(transforms: Sequence[str], full: Moments) -> tuple[np.ndarray, np.ndarray]:
    """Shift and scale of the whole-sample transforms (``y' = (y - shift) / scale``).

    Parameters
    ----------
    transforms : sequence of str
        One per variable.
    full : Moments
        Full-sample moments of the row-transformed data.
    """
    n = full.n
    shift = np.zeros(n)
    scale = np.ones(n)
    std = full.std(ddof=1) if full.count > 1 else np.ones(n)
    for j, t in enumerate(transforms):
        if t in ("demean", "standardise"):
            shift[j] = full.mean[j]
        if t == "standardise":
            scale[j] = std[j]
    return shift, scale


def _scale_comoments(hi: np.ndarray, lo: np.ndarray | None, scale: np.ndarray):
    """``C_ij / (scale_i scale_j)`` for double-double co-moments ``hi + lo`` (stacks too)."""
    lo = np.zeros_like(hi) if lo is None else lo
    ci = scale[:, None] * np.ones_like(scale)[None, :]
    hi, lo = _dd.dd_div_float(hi, lo, ci)
    hi, lo = _dd.dd_div_float(hi, lo, ci.T)
    swap = (0, 2, 1) if hi.ndim == 3 else (1, 0)
    return 0.5 * (hi + hi.transpose(swap)), 0.5 * (lo + lo.transpose(swap))


def affine_moments(m: Moments, shift: np.ndarray, scale: np.ndarray,
                   offset: np.ndarray | None = None) -> Moments:
    """Moments of ``(y - shift) / scale + offset`` from the moments of ``y`` (no rows needed).

    The co-moment only scales (``C_ij / (scale_i scale_j)``, in double-double
    so its low part stays valid); shift and offset move the mean alone (the
    mean's low part is dropped: nothing after this step merges means).
    """
    mean = (m.mean - shift) / scale
    if offset is not None:
        mean = mean + offset
    if np.all(scale == 1.0):
        return Moments(m.count, mean, m.comoment, None, m.comoment_lo)
    c, clo = _scale_comoments(m.comoment, m.comoment_lo, scale)
    return Moments(m.count, mean, c, None, clo)


def affine_stacked(counts: np.ndarray, means: np.ndarray, comoments: np.ndarray,
                   shift: np.ndarray, scale: np.ndarray, offset: np.ndarray | None = None,
                   comoments_lo: np.ndarray | None = None):
    """:func:`affine_moments` for stacked moments (``(w,)``, ``(w, n)``, ``(w, n, n)``).

    The same operations elementwise, so each window's result equals
    ``affine_moments`` of that window bit for bit. Returns ``counts, means,
    comoments, comoments_lo`` (the last None when not given).
    """
    mean = (means - shift) / scale
    if offset is not None:
        mean = mean + offset
    if np.all(scale == 1.0):
        return counts, mean, comoments, comoments_lo
    c, clo = _scale_comoments(comoments, comoments_lo, scale)
    return counts, mean, c, clo


def check_variation(full: Moments, names: Sequence[str], transforms: Sequence[str], *,
                    path: str | None) -> None:
    """A variable that does not vary over the analysed rows cannot be analysed.

    The test is relative: variance <= (CONSTANT_RTOL * max(|mean|, tiny))^2.
    """
    var = np.diag(full.comoment) / max(full.count - 1, 1)
    scale = np.maximum(np.abs(full.mean), np.finfo(float).tiny)
    flat = var <= (CONSTANT_RTOL * scale) ** 2
    for j in np.flatnonzero(flat):
        tr = transforms[j]
        after = "" if tr == "none" else f" after transform {tr}"
        raise DataError(
            f"column {names[j]!r} is constant{after} over the {full.count} analysed rows "
            f"(value {full.mean[j]:.6g}): no variation, cannot be analysed.", path=path,
            column=names[j], fix="drop the variable from the dataset (or choose another "
                                 "transform if differencing made it constant).")


def check_window_variation(windows: Sequence, moments: Sequence[Moments], names: Sequence[str], *,
                           plan_id: str, dataset_id: str, path: str | None) -> None:
    """Every variable must vary within every window (same relative test as :func:`check_variation`).

    A variable that is flat in one window only (a price fixed for a decade, a sensor
    stuck for a season) makes that window's covariance singular for a reason that is
    no relation among the variables; say which window and which column.
    """
    counts = getattr(moments, "counts", None)
    if counts is not None:  # stacked moments: one vectorised test, then the first flat window
        var = np.diagonal(moments.comoments, axis1=1, axis2=2) / np.maximum(counts - 1, 1)[:, None]
        scale = np.maximum(np.abs(moments.means), np.finfo(float).tiny)
        hit = np.flatnonzero((var <= (CONSTANT_RTOL * scale) ** 2).any(axis=1))
        if not hit.size:
            return
        pairs = [(windows[int(hit[0])], moments[int(hit[0])])]
    else:
        pairs = zip(windows, moments)
    for w, m in pairs:
        var = np.diag(m.comoment) / max(m.count - 1, 1)
        scale = np.maximum(np.abs(m.mean), np.finfo(float).tiny)
        flat = np.flatnonzero(var <= (CONSTANT_RTOL * scale) ** 2)
        if flat.size:
            j = int(flat[0])
            raise DataError(
                f"dataset {dataset_id!r}, window plan {plan_id!r}: column {names[j]!r} is "
                f"constant in window {w.index + 1} ({w.label}, {m.count} rows, value "
                f"{m.mean[j]:.6g}): no variation there, so that window cannot be analysed.",
                path=path, column=names[j],
                fix="use wider windows (or a later time.from) so that every window sees the "
                    "variable move, or drop the variable from the dataset.")
