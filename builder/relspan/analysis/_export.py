"""Private export helpers shared by every analysis result: JSON-ready values and tables.

Each result type's ``to_dict`` returns :func:`jsonable` of its fields (or
:func:`fields_dict` of all of them) and its ``to_frame`` builds a pandas
table, imported lazily by :func:`frame` where a module does not already need
pandas. Nothing here is public API.
"""

from __future__ import annotations

import math
from typing import Any, Mapping, Sequence

import numpy as np

__all__: list[str] = []


def jsonable(x: Any) -> Any:
    """Plain Python (lists, floats, ints, str, None) for JSON; NaN and infinities become None.

    Nested results (anything with a ``to_dict`` method) become their
    ``to_dict()``; other values pass through unchanged. Arrays of booleans,
    integers and floats are converted by one ``tolist`` (element by element
    only where a float is not finite), which gives the same values.
    """
    t = type(x)
    if t is float:
        return x if math.isfinite(x) else None
    if t is str or t is int or t is bool or x is None:
        return x
    if isinstance(x, np.ndarray):
        if x.dtype.kind in "biu" or (x.dtype.kind == "f" and bool(np.isfinite(x).all())):
            return x.tolist()  # plain bools, ints or finite floats (a 0-d array: one of them)
        return [jsonable(v) for v in x.tolist()] if x.ndim else jsonable(x.item())
    if isinstance(x, (list, tuple)):
        return [jsonable(v) for v in x]
    if isinstance(x, dict):
        return {str(k): jsonable(v) for k, v in x.items()}
    if isinstance(x, (bool, np.bool_)):
        return bool(x)
    if isinstance(x, (int, np.integer)):
        return int(x)
    if isinstance(x, (float, np.floating)):
        v = float(x)
        return v if math.isfinite(v) else None
    if hasattr(x, "to_dict") and not isinstance(x, type):
        return x.to_dict()
    return x


def fields_dict(obj: Any) -> dict[str, Any]:
    """Every field of a slotted dataclass, JSON-ready, keys sorted."""
    return {name: jsonable(getattr(obj, name)) for name in sorted(obj.__slots__)}


def frame(rows: Sequence[Mapping[str, Any]], columns: Sequence[str]):
    """A :class:`pandas.DataFrame` of ``rows`` with the given column order (pandas imported lazily)."""
    import pandas as pd

    return pd.DataFrame(list(rows), columns=list(columns))
