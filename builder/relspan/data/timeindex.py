"""Parse a dataset's time column and apply its from/to range.

Times are held as ``numpy.datetime64[s]`` (the start of the period a value
names: ``1994Q2`` is 1994-04-01 00:00:00). A :class:`TimeFormat` remembers the
notation the file uses so that labels come back in the reader's own notation
("1990Q1", "1994-03", "1994").

Supported notations (``TimeSpec.format``):

- ``auto``: decided from the first non-empty value, then enforced on every row
  (a file that mixes notations is an error naming the first odd row);
- ``year`` (``1994``), ``quarter`` (``1994Q1`` or ``1994-Q1``), ``month``
  (``1994-03``), ISO dates (``1994-03-05``) and ISO date-times
  (``1994-03-05T14:00`` or with a space, seconds optional);
- any ``strftime`` pattern containing ``%`` (e.g. ``"%d/%m/%Y"``).

Time values must increase strictly from row to row (checked across chunks by
:class:`OrderCheck`); the ``from``/``to`` bounds are inclusive.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

import numpy as np
import pandas as pd

from relspan.errors import DataError

__all__ = [
    "TimeFormat",
    "KINDS",
    "detect_kind",
    "resolve_format",
    "parse_times",
    "from_datetimes",
    "OrderCheck",
    "parse_bound",
    "add_months",
    "format_times",
]

#: notations a time column can use (``pattern`` is a strftime pattern)
KINDS = ("year", "quarter", "month", "date", "datetime", "pattern")

_NAT = np.datetime64("NaT", "s")

_REGEX = {
    "year": re.compile(r"^\s*(\d{4})\s*$"),
    "quarter": re.compile(r"^\s*(\d{4})-?[Qq]([1-4])\s*$"),
    "month": re.compile(r"^\s*(\d{4})-(\d{2})\s*$"),
    "date": re.compile(r"^\s*\d{4}-\d{2}-\d{2}\s*$"),
    "datetime": re.compile(r"^\s*\d{4}-\d{2}-\d{2}[T ]\d{2}:\d{2}(:\d{2}(\.\d+)?)?\s*$"),
}

_EXAMPLE = {
    "year": "1994",
    "quarter": "1994Q1",
    "month": "1994-03",
    "date": "1994-03-05",
    "datetime": "1994-03-05T14:00",
}


@dataclass(frozen=True, slots=True)
class TimeFormat:
    """The notation of a time column.

    Attributes
    ----------
    kind : str
        One of :data:`KINDS`.
    pattern : str or None
        The strftime pattern when ``kind == "pattern"``.
    """

    kind: str
    pattern: str | None = None

    @property
    def description(self) -> str:
        """Words for error messages, e.g. ``"a quarter like 1994Q1"``."""
        if self.kind == "pattern":
            return f"a time matching the pattern {self.pattern!r}"
        noun = self._noun
        article = "an" if noun[0] in "AEIOUaeiou" else "a"
        return f"{article} {noun} like {_EXAMPLE[self.kind]}"

    @property
    def _noun(self) -> str:
        return {"date": "ISO date", "datetime": "ISO date-time"}.get(self.kind, self.kind)

    def period_months_days_seconds(self) -> tuple[int, int, int]:
        """Length of one period of this notation as (months, days, seconds).

        Used for the exclusive end of the last period ("the data cover up to
        the end of 2024Q4") and for inclusive ``to`` bounds.
        """
        if self.kind == "year":
            return (12, 0, 0)
        if self.kind == "quarter":
            return (3, 0, 0)
        if self.kind == "month":
            return (1, 0, 0)
        if self.kind == "date":
            return (0, 1, 0)
        if self.kind == "datetime":
            return (0, 0, 1)
        pat = self.pattern or ""
        if any(d in pat for d in ("%H", "%I", "%M", "%S", "%f", "%p", "%X", "%c", "%T")):
            return (0, 0, 1)
        if any(d in pat for d in ("%d", "%j", "%e", "%x", "%F", "%D", "%a", "%A", "%u", "%w")):
            return (0, 1, 0)
        if any(d in pat for d in ("%m", "%b", "%B", "%h")):
            return (1, 0, 0)
        return (12, 0, 0)

    def end_of(self, t: np.datetime64) -> np.datetime64:
        """Exclusive end of the period that starts at ``t``."""
        months, days, seconds = self.period_months_days_seconds()
        out = np.datetime64(t, "s")
        if months:
            out = add_months(np.array([out]), np.array([months]))[0]
        return out + np.timedelta64(days, "D") + np.timedelta64(seconds, "s")


def detect_kind(value: str) -> str | None:
    """The notation a single time value is written in, or None."""
    for kind in ("year", "quarter", "month", "date", "datetime"):
        if _REGEX[kind].match(value):
            return kind
    return None


def resolve_format(spec_format: str, first_value: str | None, *, path: str | None, column: str,
                   row: int | None) -> TimeFormat:
    """Turn ``TimeSpec.format`` into a :class:`TimeFormat`.

    Parameters
    ----------
    spec_format : str
        ``"auto"``, a kind name, or a strftime pattern.
    first_value : str or None
        The first non-empty time value (needed for ``auto``).
    path, column, row
        Where the value came from, for the error message.
    """
    fmt = spec_format.strip()
    if fmt in ("year", "quarter", "month", "date", "datetime"):
        return TimeFormat(fmt)
    if "%" in fmt:
        why = pattern_problem(fmt)
        if why is not None:
            raise DataError(f"the time format {spec_format!r} for column {column!r} cannot be "
                            f"used: {why}.", path=path, column=column, key="time.format",
                            got=spec_format,
                            fix="use a pattern of %Y, %m, %d, %H, %M, %S (e.g. '%d/%m/%Y'), or "
                                "one of auto, year, quarter, month, date, datetime.")
        return TimeFormat("pattern", fmt)
    if fmt != "auto":
        raise DataError(
            f"the time format {spec_format!r} for column {column!r} is not one relspan knows.",
            path=path, column=column, key="time.format",
            fix="use auto, year, quarter, month, date, datetime or a strftime pattern "
                "such as '%d/%m/%Y'.")
    if first_value is None:
        return TimeFormat("date")
    kind = detect_kind(first_value)
    if kind is None:
        raise DataError(
            f"column {column!r}, row {row}: cannot tell what time {first_value!r} is; "
            "auto understands years (1994), quarters (1994Q1 or 1994-Q1), months (1994-03), "
            "ISO dates (1994-03-05) and ISO date-times (1994-03-05T14:00).",
            path=path, column=column, row=row, got=first_value,
            fix="write the time column in one of those notations, or set time.format to a "
                "strftime pattern such as '%d/%m/%Y'.")
    return TimeFormat(kind)


def pattern_problem(pattern: str) -> str | None:
    """Why the strftime ``pattern`` cannot be used to read times (None when it can).

    A pattern must be one Python's ``strptime`` reads: ``%s`` (seconds since
    1970), ``%Q`` and other unknown directives, and ISO weeks (``%G``/``%V``
    without a weekday) are not. Checked by writing a known time with the
    pattern and reading it back.
    """
    import datetime as _dt

    if "%s" in pattern.replace("%%", ""):
        return ("%s (seconds since 1970) cannot be read by a pattern; convert the column to dates "
                "(e.g. 1994-03-05) first")
    try:
        sample = _dt.datetime(2001, 2, 3, 4, 5, 6, tzinfo=_dt.timezone.utc).strftime(pattern)
        _dt.datetime.strptime(sample, pattern)
    except ValueError as err:
        return f"Python's date parser cannot read it ({' '.join(str(err).split())})"
    return None


def _as_str_series(values) -> tuple[pd.Series, np.ndarray]:
    """Values as a pandas string Series (Arrow-backed when pyarrow is there: fast regexes)."""
    s = values if isinstance(values, pd.Series) else pd.Series(values, dtype=object)
    s = s.reset_index(drop=True)
    if isinstance(s.dtype, pd.StringDtype):
        return s, s.isna().to_numpy(dtype=bool)
    try:
        s = s.astype("string[pyarrow]")
    except (ImportError, TypeError, ValueError):
        s = s.astype("string")
    missing = s.isna().to_numpy(dtype=bool)
    return s, missing


def _match(txt: pd.Series, pattern: str) -> np.ndarray:
    """Rows whose text matches ``pattern`` (Arrow's vectorised regex when available)."""
    try:
        import pyarrow as pa  # noqa: PLC0415 (optional, only for speed)
        import pyarrow.compute as pc  # noqa: PLC0415

        arr = pa.array(txt, type=pa.string(), from_pandas=True)
        return np.asarray(pc.fill_null(pc.match_substring_regex(arr, pattern), False)
                          .to_numpy(zero_copy_only=False), dtype=bool)
    except ImportError:
        return txt.str.match(pattern).fillna(False).to_numpy(dtype=bool)


def _has_zone(pattern: str | None) -> bool:
    p = (pattern or "").replace("%%", "")
    return "%z" in p or "%Z" in p or "%:z" in p


def _wall_time(text: str, pattern: str):
    """One time read with a pattern holding a UTC offset: its local wall time (offset dropped).

    Times are compared and grouped into periods as written (a value stamped
    2020-03-01 00:00+02:00 belongs to March 2020), whatever offset each row has.
    """
    import datetime as _dt

    try:
        return _dt.datetime.strptime(str(text).strip(), pattern).replace(tzinfo=None)
    except ValueError:
        return None


def parse_times(values, fmt: TimeFormat, *, path: str | None, column: str,
                rows: np.ndarray) -> np.ndarray:
    """Parse a chunk of time values written as text.

    Parameters
    ----------
    values : sequence of str or None
        The chunk's time cells (None / NaN for empty cells).
    fmt : TimeFormat
        The column's notation (see :func:`resolve_format`).
    path, column : str
        For error messages.
    rows : (m,) int array
        1-based data row numbers of ``values``.

    Returns
    -------
    (m,) datetime64[s] array
        NaT where a cell is empty.

    Raises
    ------
    DataError
        On the first value that does not follow ``fmt``, naming its row.
    """
    s, missing = _as_str_series(values)
    m = len(s)
    out = np.full(m, _NAT)
    if m == 0 or missing.all():
        return out
    present = ~missing
    txt = s[present].reset_index(drop=True)
    kind = fmt.kind
    if kind in ("year", "quarter", "month"):
        ext = txt.str.extract(_REGEX[kind].pattern)
        y = pd.to_numeric(ext[0], errors="coerce").to_numpy(dtype=float)
        if kind == "year":
            mo = np.zeros_like(y)
        elif kind == "quarter":
            mo = (pd.to_numeric(ext[1], errors="coerce").to_numpy(dtype=float) - 1.0) * 3.0
        else:
            mo = pd.to_numeric(ext[1], errors="coerce").to_numpy(dtype=float) - 1.0
            mo = np.where((mo >= 0) & (mo <= 11), mo, np.nan)
        ok = np.isfinite(y) & np.isfinite(mo)
        parsed = np.full(len(txt), _NAT)
        months = (np.where(ok, y, 1970) - 1970) * 12 + np.where(ok, mo, 0)
        parsed[ok] = months[ok].astype(np.int64).astype("datetime64[M]").astype("datetime64[s]")
    else:
        if kind == "date":
            good_shape = _match(txt, _REGEX["date"].pattern)
            dt = pd.to_datetime(txt.str.strip(), format="%Y-%m-%d", errors="coerce")
        elif kind == "datetime":
            good_shape = _match(txt, _REGEX["datetime"].pattern)
            dt = pd.to_datetime(txt.str.strip(), format="ISO8601", errors="coerce")
        elif _has_zone(fmt.pattern):
            good_shape = np.ones(len(txt), dtype=bool)
            dt = pd.Series([_wall_time(v, fmt.pattern) for v in txt], dtype="datetime64[s]")
        else:
            good_shape = np.ones(len(txt), dtype=bool)
            dt = pd.to_datetime(txt, format=fmt.pattern, errors="coerce")
        parsed = dt.to_numpy().astype("datetime64[s]")
        ok = good_shape & ~np.isnat(parsed)
    if not ok.all():
        j = int(np.flatnonzero(~ok)[0])
        idx = int(np.flatnonzero(present)[j])
        bad = txt.iloc[j]
        other = detect_kind(bad)
        if other is not None and other != kind and fmt.kind != "pattern":
            msg = (f"column {column!r} mixes time notations: the first value is "
                   f"{fmt.description}, but row {int(rows[idx])} has {bad!r}, which is "
                   f"{TimeFormat(other).description}.")
        else:
            msg = (f"column {column!r}, row {int(rows[idx])}: {bad!r} is not "
                   f"{fmt.description}.")
        raise DataError(msg, path=path, column=column, row=int(rows[idx]), got=bad,
                        fix="write every time value in one notation (or blank it), or set "
                            "time.format to the notation the file uses.")
    out[present] = parsed
    return out


def from_datetimes(values) -> tuple[np.ndarray, bool]:
    """Times from an already typed column (datetime64 in a DataFrame or Parquet file).

    Returns the datetime64[s] array (NaT for missing) and whether any value
    has a time of day (then the notation is ``datetime``, else ``date``).
    """
    s = pd.Series(values)
    if getattr(s.dt, "tz", None) is not None:
        s = s.dt.tz_localize(None)  # the local wall time the values were stamped with
    arr = s.to_numpy().astype("datetime64[s]")
    ok = ~np.isnat(arr)
    tod = bool(ok.any() and ((arr[ok] - arr[ok].astype("datetime64[D]")).astype(np.int64) != 0).any())
    return arr, tod


class OrderCheck:
    """Check, chunk after chunk, that time values increase strictly.

    Parameters
    ----------
    path, column : str
        For error messages.
    fmt : TimeFormat
        For writing times back in the file's notation.
    """

    __slots__ = ("path", "column", "fmt", "_last", "_last_row")

    def __init__(self, *, path: str | None, column: str, fmt: TimeFormat) -> None:
        self.path = path
        self.column = column
        self.fmt = fmt
        self._last: np.datetime64 | None = None
        self._last_row: int | None = None

    def check(self, times: np.ndarray, rows: np.ndarray) -> None:
        """Raise DataError at the first duplicated or out-of-order time (NaT rows are skipped)."""
        ok = ~np.isnat(times)
        if not ok.any():
            return
        t = times[ok]
        r = rows[ok]
        if self._last is not None:
            t = np.concatenate([[self._last], t])
            r = np.concatenate([[self._last_row], r])
        d = np.diff(t.astype(np.int64))
        bad = np.flatnonzero(d <= 0)
        if bad.size:
            i = int(bad[0])
            a, b = format_times(t[i:i + 2], self.fmt)
            ra, rb = int(r[i]), int(r[i + 1])
            if d[i] == 0:
                msg = (f"column {self.column!r} repeats the time {a}: rows {ra} and {rb} "
                       "have the same time.")
                fix = "remove or combine the duplicated rows so each time appears once."
            elif self._two_digit_pivot(t[i], t[i + 1]):
                ya, yb = (int(str(x.astype("datetime64[Y]"))) for x in t[i:i + 2])
                msg = (f"column {self.column!r} uses two-digit years (%y), which are read as "
                       f"2000-2068 for 00-68 and 1969-1999 for 69-99: row {ra} ({a}) is read as "
                       f"{ya}, so row {rb} ({b}), read as {yb}, seems to go back in time.")
                fix = (f"write four-digit years in {self.column!r} and use %Y in time.format "
                       "(two digits cannot say which century is meant).")
            else:
                msg = (f"column {self.column!r} is not in time order: row {rb} ({b}) comes "
                       f"after row {ra} ({a}).")
                fix = f"sort the file by {self.column!r} (oldest first) and save it again."
            raise DataError(msg, path=self.path, column=self.column, row=rb, fix=fix)
        self._last = t[-1]
        self._last_row = int(r[-1])


    def _two_digit_pivot(self, a: np.datetime64, b: np.datetime64) -> bool:
        """Whether a backward step is the %y century pivot (a year 2000-2068, then 1969-1999)."""
        if self.fmt.kind != "pattern" or "%y" not in (self.fmt.pattern or "").replace("%%", ""):
            return False
        ya, yb = (int(str(np.datetime64(x, "Y"))) for x in (a, b))
        return 2000 <= ya <= 2068 and 1969 <= yb <= 1999


def add_months(t: np.ndarray, k: np.ndarray) -> np.ndarray:
    """Add ``k`` calendar months to each time, clipping the day to the month's length.

    ``add_months(1990-01-31, 1)`` is 1990-02-28 (common practice for calendar
    arithmetic, as in pandas' ``DateOffset(months=1)``).
    """
    t = np.asarray(t, dtype="datetime64[s]")
    k = np.asarray(k, dtype=np.int64)
    t_m = t.astype("datetime64[M]")
    t_d = t.astype("datetime64[D]")
    day = (t_d - t_m.astype("datetime64[D]")).astype(np.int64)
    tod = (t - t_d.astype("datetime64[s]")).astype(np.int64)
    target = t_m + k.astype("timedelta64[M]")
    length = ((target + np.timedelta64(1, "M")).astype("datetime64[D]")
              - target.astype("datetime64[D]")).astype(np.int64)
    day = np.minimum(day, length - 1)
    return (target.astype("datetime64[D]") + day.astype("timedelta64[D]")).astype(
        "datetime64[s]") + tod.astype("timedelta64[s]")


def format_times(t: np.ndarray, fmt: TimeFormat) -> list[str]:
    """Write times back in the notation of ``fmt`` (e.g. ``1994Q1``)."""
    t = np.asarray(t, dtype="datetime64[s]")
    out: list[str] = []
    for v in t:
        if np.isnat(v):
            out.append("")
            continue
        if fmt.kind in ("year", "quarter", "month"):
            m = int(v.astype("datetime64[M]").astype(np.int64))
            y, mo = 1970 + m // 12, m % 12
            if fmt.kind == "year":
                out.append(f"{y:04d}")
            elif fmt.kind == "quarter":
                out.append(f"{y:04d}Q{mo // 3 + 1}")
            else:
                out.append(f"{y:04d}-{mo + 1:02d}")
        elif fmt.kind == "date":
            out.append(str(v.astype("datetime64[D]")))
        elif fmt.kind == "datetime":
            out.append(str(v).replace("T", " "))
        else:
            try:
                out.append(pd.Timestamp(v).strftime(fmt.pattern or "%Y-%m-%d"))
            except ValueError:
                out.append(str(v.astype("datetime64[D]")))
    return out


def parse_bound(text: str, *, inclusive_end: bool, path: str | None, key: str) -> np.datetime64:
    """Parse a ``from``/``to`` bound or a period bound.

    Parameters
    ----------
    text : str
        An ISO date (``1990-01-01``), a year, a quarter, a month or an ISO
        date-time.
    inclusive_end : bool
        If True (a ``to`` bound) return the exclusive end of the period the
        text names (``2024Q4`` -> 2025-01-01, ``2024-12-31`` -> 2025-01-01);
        else its start.
    path, key : str
        Where the bound was written, for the error message.
    """
    value = str(text).strip()
    kind = detect_kind(value)
    if kind is None:
        raise DataError(
            f"the date bound {text!r} is not a date relspan can read.", path=path, key=key,
            got=str(text), fix="write it as an ISO date such as 1990-01-01 (or 1990, 1990Q1, "
                                "1990-01).")
    fmt = TimeFormat(kind)
    try:
        t = parse_times([value], fmt, path=path, column=key, rows=np.array([1]))[0]
    except DataError:
        raise DataError(f"the date bound {text!r} is not a valid date.", path=path, key=key,
                        got=str(text), fix="use a real calendar date such as 1990-01-01.") from None
    return fmt.end_of(t) if inclusive_end else t
