"""Deterministic rendering: a :class:`~relspan.report.figures.contract.FigureResult` to SVG or PNG bytes and CSV.

The same bytes on any machine: no network, no system fonts (DejaVu Sans ships with matplotlib and SVG
text is written as paths), fixed hash salt, no dates. Figures are built with
:class:`matplotlib.figure.Figure` on an Agg canvas, never with pyplot.
"""

from __future__ import annotations

import io

import matplotlib
import pandas as pd

from relspan.errors import OptionsError
from relspan.report.figures.contract import FigureResult, ticks_once_per_geometry
from relspan.report.figures.style import DPI, style_context

__all__ = ["render_figure", "table_csv", "SVG_METADATA"]

#: SVG metadata: no date and no creator (matplotlib would write its version there, so every
#: matplotlib release would change the bytes of every figure)
SVG_METADATA = {"Date": None, "Creator": None}
#: rcParams for the save: no layout engine is attached to a figure during it
_NO_LAYOUT = {"figure.constrained_layout.use": False, "figure.autolayout": False}


def render_figure(result: FigureResult, fmt: str = "svg") -> bytes:
    """Render a figure to deterministic bytes.

    Parameters
    ----------
    result : FigureResult
        What a figure function returned.
    fmt : {"svg", "png"}
        SVG (text as paths, fixed hash salt, no date) or PNG (no software tag).

    Returns
    -------
    bytes
        The same bytes for the same inputs on every run and under any
        ``PYTHONHASHSEED``.
    """
    if fmt not in ("svg", "png"):
        raise OptionsError(f"render_figure: fmt must be 'svg' or 'png'; got {fmt!r}.",
                           key="fmt", fix="Use fmt='svg' (default) or fmt='png'.")
    buf = io.BytesIO()
    # the layout is fixed and the figure has no layout engine (contract.settle); savefig puts the
    # engine it finds back with ``set_layout_engine``, which under the style's rcParams would attach
    # a new constrained layout engine (and the next save would lay the figure out again)
    # (and the drawing works out each axis's ticks once, not at every question about them)
    with style_context(), matplotlib.rc_context(_NO_LAYOUT), ticks_once_per_geometry(result.figure):
        if fmt == "svg":
            result.figure.savefig(buf, format="svg", metadata=SVG_METADATA)
        else:
            result.figure.savefig(buf, format="png", dpi=DPI, metadata={"Software": None})
    return buf.getvalue()


def table_csv(result: FigureResult) -> bytes:
    """The figure's table as deterministic UTF-8 CSV.

    Floats are written with ``%.8g``, missing values as empty fields, infinite
    values as ``inf`` / ``-inf``, dates as ISO 8601, lines end in ``\\n``.
    """
    table = result.table.copy()
    for col in table.columns:
        if pd.api.types.is_datetime64_any_dtype(table[col]):
            table[col] = table[col].dt.strftime("%Y-%m-%dT%H:%M:%S").str.replace("T00:00:00", "", regex=False)
    text = table.to_csv(index=False, lineterminator="\n", float_format="%.8g", na_rep="")
    return text.encode("utf-8")
