"""Checks of a figure function's arguments: one clear error per bad argument, naming it and the fix."""

from __future__ import annotations

from collections.abc import Iterable, Mapping

import numpy as np
import pandas as pd

from relspan.errors import OptionsError
from relspan.words import num

__all__ = ["fail", "as_float_array", "as_labels", "as_times", "time_text", "time_values", "check_mapping"]


def fail(func: str, key: str, message: str, fix: str, *, got: object | None = None) -> OptionsError:
    """Build the one-paragraph error for a bad argument of figure function ``func``."""
    text = f"{func}(): {key} {message}"
    if got is not None:
        text += f"; got {got}"
    return OptionsError(text + ".", key=key, got=None if got is None else str(got), fix=fix)


def as_float_array(func: str, key: str, value, *, ndim: int, shape: tuple | None = None,
                   allow_nan: bool = False, allow_inf: bool = False) -> np.ndarray:
    """``value`` as a float array of ``ndim`` dimensions, checked for shape and finiteness."""
    try:
        arr = np.asarray(value, dtype=float)
    except (TypeError, ValueError):
        raise fail(func, key, "must be numbers", "Pass a numpy array or a list of floats.",
                   got=type(value).__name__) from None
    if arr.ndim != ndim:
        raise fail(func, key, f"must be a {ndim}-dimensional array", "Check the argument's shape.",
                   got=f"shape {arr.shape}")
    if shape is not None:
        for axis, want in enumerate(shape):
            if want is not None and arr.shape[axis] != want:
                raise fail(func, key, f"must have shape {tuple('*' if s is None else s for s in shape)}",
                           "Pass one value per item (see the docstring).", got=f"shape {arr.shape}")
    bad = np.isnan(arr) if not allow_nan else np.zeros(arr.shape, bool)
    if not allow_inf:
        bad = bad | np.isinf(arr)
    if bad.any():
        idx = tuple(int(i) for i in np.argwhere(bad)[0])
        raise fail(func, key, f"has a non-finite value at index {idx[0] if len(idx) == 1 else idx}",
                   "Remove or replace missing values before plotting.", got=arr[idx])
    return arr


def as_labels(func: str, key: str, value, *, length: int | None = None) -> list[str]:
    """``value`` as a list of non-empty strings (of ``length`` items when given)."""
    if isinstance(value, str) or not isinstance(value, Iterable):
        raise fail(func, key, "must be a sequence of labels", "Pass a list of strings.",
                   got=type(value).__name__)
    labels = [str(v) for v in value]
    if length is not None and len(labels) != length:
        raise fail(func, key, f"must have {length} labels (one per item)",
                   "Pass one label per item.", got=f"{len(labels)} labels")
    for i, lab in enumerate(labels):
        if not lab.strip():
            raise fail(func, key, f"has an empty label at index {i}", "Give every item a name.")
    return labels


def as_times(func: str, key: str, value, *, length: int | None = None) -> tuple[np.ndarray, bool]:
    """Times as (float positions for plotting, is_datetime).

    ``value`` may be datetime64 (any unit), pandas timestamps, or numbers (e.g.
    row numbers). Datetimes are converted with ``matplotlib.dates.date2num``.
    """
    import matplotlib.dates as mdates

    arr = np.asarray(value)
    if arr.dtype == object and arr.size and isinstance(arr.flat[0], (pd.Timestamp, np.datetime64)):
        arr = pd.to_datetime(arr).to_numpy()
    if arr.ndim != 1:
        raise fail(func, key, "must be one-dimensional", "Pass one time per row.", got=f"shape {arr.shape}")
    if length is not None and arr.shape[0] != length:
        raise fail(func, key, f"must have {length} entries", "Pass one time per item.",
                   got=f"{arr.shape[0]} entries")
    if np.issubdtype(arr.dtype, np.datetime64):
        if np.isnat(arr).any():
            raise fail(func, key, f"has a missing time at index {int(np.argmax(np.isnat(arr)))}",
                       "Drop rows without a time before plotting.")
        return np.asarray(mdates.date2num(arr.astype("datetime64[us]")), dtype=float), True
    pos = as_float_array(func, key, arr, ndim=1)
    return pos, False


def time_text(pos: float, is_datetime: bool) -> str:
    """A time position as text: ISO date for datetimes, a plain number otherwise."""
    if is_datetime:
        import matplotlib.dates as mdates
        dt = mdates.num2date(pos)
        if dt.hour == dt.minute == dt.second == 0:
            return dt.strftime("%Y-%m-%d")
        return dt.strftime("%Y-%m-%d %H:%M")
    return num(pos)


def time_values(pos: np.ndarray, is_datetime: bool):
    """Positions back as table values (datetime64[s] or floats)."""
    if is_datetime:
        import matplotlib.dates as mdates
        return pd.to_datetime([mdates.num2date(p).replace(tzinfo=None) for p in pos]).round("s")
    return np.asarray(pos, dtype=float)


def check_mapping(func: str, key: str, value) -> Mapping:
    if not isinstance(value, Mapping) or not value:
        raise fail(func, key, "must be a non-empty mapping of label to values",
                   "Pass a dict such as {'equal': [...], 'diagonal': [...]}.", got=type(value).__name__)
    return value
