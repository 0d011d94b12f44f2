"""Cell checks: every selected cell becomes a float or a located error.

- :func:`numeric_block`: a chunk's columns -> a float matrix; text that is not
  a number is refused, naming the column, the first bad row and the value.
- :func:`check_finite`: infinities and magnitudes above :data:`MAX_MAGNITUDE`
  are refused (NaN marks an empty cell).
- :func:`time_text`: time cells as text for :mod:`relspan.data.timeindex`.
- :class:`RawChunk`: what every reader engine yields.

Every reader engine and :func:`relspan.data.prepare.prepare_frame` go through
these, so one input cell gets one verdict whichever way it was read.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Sequence

import numpy as np
import pandas as pd

from relspan.errors import DataError

__all__ = ["MAX_MAGNITUDE", "MIN_MAGNITUDE", "check_not_tiny", "RawChunk", "numeric_block", "check_finite", "time_text"]

#: larger magnitudes are refused: their squares (about 1e300) come close to the
#: largest double (about 1.8e308, IEEE 754 binary64), and co-moments would overflow
MAX_MAGNITUDE = 1e150

#: a column whose every value is smaller in magnitude is refused: its squares (below about
#: 1e-300) reach the subnormal range of doubles (below 2.2e-308, IEEE 754 binary64), where
#: digits are lost and co-moments underflow to zero
MIN_MAGNITUDE = 1e-150


@dataclass(frozen=True, slots=True)
class RawChunk:
    """One chunk of selected columns, as read.

    Attributes
    ----------
    values : (m, n) float ndarray
        Variables in the order asked for; NaN marks an empty cell.
    times : Series, ndarray or None
        The time column: text (a pandas string Series, or an object array
        of str/None) or datetime64 (typed Parquet columns); None without a
        time column.
    times_typed : bool
        True when ``times`` is datetime64 already.
    rows : (m,) int64 ndarray
        1-based data row numbers.
    """

    values: np.ndarray
    times: pd.Series | np.ndarray | None
    times_typed: bool
    rows: np.ndarray


def numeric_block(frame: pd.DataFrame, names: Sequence[str], rows: np.ndarray, *,
                  path: str | None, decimal: str = ".") -> np.ndarray:
    """Turn selected columns of a chunk into a float matrix, checking every cell.

    Parameters
    ----------
    frame : DataFrame
        The chunk; columns in the order of ``names``.
    names : sequence of str
        Column names (for messages).
    rows : (m,) int array
        1-based data row numbers of the chunk.
    path : str or None
        The file (for messages).
    decimal : str
        The file's decimal mark: with ``","``, text cells such as ``"1,5"`` (in a
        column that also holds a bad cell, which the CSV reader left as text)
        read as 1.5.

    Raises
    ------
    DataError
        A cell that is not a number (file, column, first bad row and value),
        an infinite value, or a magnitude above :data:`MAX_MAGNITUDE`.
    """
    m = frame.shape[0]
    out = np.empty((m, len(names)), dtype=float)
    for j, name in enumerate(names):
        s = frame.iloc[:, j]
        if pd.api.types.is_bool_dtype(s.dtype):
            conv = pd.Series(np.full(m, np.nan))
            bad = s.notna().to_numpy()
        elif pd.api.types.is_integer_dtype(s.dtype):
            conv = s
            bad = None
            _check_exact_integers(s, name, rows, path=path)
        elif pd.api.types.is_numeric_dtype(s.dtype):
            conv = s
            bad = None
        else:
            obj = s.astype(object)
            if decimal != ".":
                obj = obj.map(lambda v: v.replace(decimal, ".") if isinstance(v, str) and "." not in v
                              else v)
            conv = pd.to_numeric(obj.where(~obj.map(lambda v: isinstance(v, bool)), "x"),
                                 errors="coerce") if m else pd.Series([], dtype=float)
            bad = (conv.isna() & s.notna()).to_numpy(dtype=bool)
        if bad is not None and bad.any():
            i = int(np.flatnonzero(bad)[0])
            value = s.iloc[i]
            shown = repr(str(value)) if len(str(value)) <= 40 else repr(str(value)[:40] + "...")
            raise DataError(
                f"column {name!r}, row {int(rows[i])}: {shown} is not a number.", path=path,
                column=name, row=int(rows[i]), got=str(value),
                fix="correct or empty that cell (empty cells are missing values; write numbers "
                    f"with {decimal!r} as the decimal mark and no thousands separators).")
        out[:, j] = pd.Series(conv).to_numpy(dtype=float, na_value=np.nan)
    check_finite(out, names, rows, path=path)
    return out


#: integers up to this magnitude are exact in double precision (2**53, IEEE 754 binary64)
EXACT_INTEGER = 2 ** 53


def _check_exact_integers(s: pd.Series, name: str, rows: np.ndarray, *, path: str | None) -> None:
    """Refuse whole numbers a double cannot hold exactly (typed integer columns, e.g. Parquet int64).

    Above 2**53 neighbouring integers round to the same double, so values that
    differ would be analysed as equal (a column could even look constant).
    """
    present = s.notna().to_numpy(dtype=bool)
    unsigned = pd.api.types.is_unsigned_integer_dtype(s.dtype)
    ints = s[present].to_numpy(dtype=np.uint64 if unsigned else np.int64)
    if ints.size == 0:
        return
    limit = np.uint64(EXACT_INTEGER) if unsigned else np.int64(EXACT_INTEGER)
    big = (ints > limit) if unsigned else ((ints > limit) | (ints < -limit))
    if not big.any():
        return
    lossy = np.zeros(ints.size, dtype=bool)
    for k in np.flatnonzero(big):  # few, and Python ints compare exactly
        v = int(ints[k])
        lossy[k] = int(float(v)) != v
    if lossy.any():
        k = int(np.flatnonzero(lossy)[0])
        i = int(np.flatnonzero(present)[k])
        v = int(ints[k])
        raise DataError(
            f"column {name!r}, row {int(rows[i])}: the whole number {v} is larger than 2^53 = "
            f"{EXACT_INTEGER} and has no exact double-precision value, so values that differ in "
            "their last digits would be analysed as equal.", path=path, column=name,
            row=int(rows[i]), got=str(v),
            fix="store the column in a larger unit (e.g. thousands), or subtract a common baseline "
                "before saving the file.")


def check_finite(values: np.ndarray, names: Sequence[str], rows: np.ndarray, *,
                 path: str | None) -> None:
    """Refuse infinities and magnitudes above :data:`MAX_MAGNITUDE` (NaN is a missing cell).

    Parameters
    ----------
    values : (m, n) float ndarray
        One chunk, columns in the order of ``names``.
    names : sequence of str
        Column names (for messages).
    rows : (m,) int array
        1-based data row numbers.
    path : str or None
        The file (for messages).

    Raises
    ------
    DataError
        Naming the column, the first offending row and the value.
    """
    with np.errstate(invalid="ignore"):
        ok = np.abs(values) <= MAX_MAGNITUDE  # False for inf, huge values and NaN
    suspect = ~ok & ~np.isnan(values)
    if not suspect.any():
        return
    for j, name in enumerate(names):
        col = values[:, j]
        finite = np.isfinite(col)
        weird = ~finite & ~np.isnan(col)
        if weird.any():
            i = int(np.flatnonzero(weird)[0])
            raise DataError(
                f"column {name!r}, row {int(rows[i])}: the value is {'-' if col[i] < 0 else '+'}"
                "infinity; relspan needs finite numbers.", path=path, column=name,
                row=int(rows[i]), got=str(col[i]),
                fix="replace the infinite value by the measured number, or empty the cell to "
                    "mark it missing.")
        big = finite & (np.abs(np.where(finite, col, 0.0)) > MAX_MAGNITUDE)
        if big.any():
            i = int(np.flatnonzero(big)[0])
            raise DataError(
                f"column {name!r}, row {int(rows[i])}: {col[i]:.3g} is too large in magnitude "
                f"(above {MAX_MAGNITUDE:.0e}): its square would overflow double precision.",
                path=path, column=name, row=int(rows[i]), got=repr(col[i]),
                fix="rescale the column (e.g. to thousands or millions of its unit), or correct "
                    "the cell if it is a typing error.")


def check_not_tiny(largest: np.ndarray, names: Sequence[str], *, path: str | None) -> None:
    """Refuse a column whose largest magnitude is above 0 but below :data:`MIN_MAGNITUDE`.

    ``largest`` holds each column's largest absolute value over the analysed rows.
    """
    for j, name in enumerate(names):
        v = float(largest[j])
        if 0.0 < v < MIN_MAGNITUDE:
            raise DataError(
                f"column {name!r}: every value is smaller than {MIN_MAGNITUDE:.0e} in magnitude "
                f"(the largest is {v:.3g}); squares and products of such numbers fall where double "
                "precision loses its digits, so covariances and coefficients would be wrong.",
                path=path, column=name, got=f"{v:.3g}",
                fix="rescale the column in the file (express it in a unit many powers of ten "
                    "smaller, so its values are nearer 1).")


def time_text(t: pd.Series) -> np.ndarray:
    """Time cells as text; whole-number floats (years stored as float) lose their '.0'."""
    if pd.api.types.is_float_dtype(t.dtype):
        arr = t.to_numpy(dtype=float, na_value=np.nan)
        whole = np.isfinite(arr) & (arr == np.round(arr))
        return np.array([None if np.isnan(v) else (str(int(v)) if w else repr(v))
                         for v, w in zip(arr, whole)], dtype=object)
    return t.astype(object).where(t.notna(), None).map(
        lambda v: v if v is None else str(v)).to_numpy(dtype=object)
