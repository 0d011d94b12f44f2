"""The figure contract, house style and deterministic rendering.

Every figure function in :mod:`relspan.report` returns a :class:`FigureResult`:
the matplotlib figure together with a short alt text, a long description that
states the numbers shown in plain words, and the tidy table behind the figure.
:func:`render_figure` turns it into byte-identical SVG or PNG on any machine
(no network, no system fonts: DejaVu Sans ships with matplotlib and SVG text
is written as paths); :func:`table_csv` writes the table as deterministic CSV.

Style is applied only inside :func:`style_context` (a
``matplotlib.rc_context``); importing this module changes no rcParams.
Figures are built with :class:`matplotlib.figure.Figure` and an Agg canvas, not
with pyplot, so no figure is ever registered in pyplot's global figure list
and nothing has to be closed by hand.

Palette
-------
Five categorical inks (one per noise assumption) on white, chosen so that
(i) their CIELAB lightness L* is 19, 28, 38, 50 and 59, at least 8 units
apart, so the series stay apart in greyscale, (ii) each has a contrast ratio
of at least 3:1 against white (WCAG 2.1 success criterion 1.4.11, non-text
contrast), and (iii) they stay apart under simulated colour-vision deficiency.
The tests measure all three with the ``colorspacious`` package. Colour is
never the only cue: every series also has its own marker and line style.
"""

from __future__ import annotations

import io
import math
import re
from collections.abc import Iterable, Mapping, Sequence
from contextlib import contextmanager
from dataclasses import dataclass

import numpy as np

from relspan.assumptions import ASSUMPTIONS
import pandas as pd

import matplotlib
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.colors import LinearSegmentedColormap, to_rgb
from matplotlib.figure import Figure

from relspan.errors import OptionsError

__all__ = [
    "FigureResult",
    "render_figure",
    "table_csv",
    "style_context",
    "new_figure",
    "SeriesStyle",
    "series_style",
    "styles_for",
    "PALETTE",
    "INK",
    "MUTED",
    "FAINT",
    "SEQUENTIAL",
    "FIG_WIDTH_IN",
    "DPI",
    "ALT_MAX",
]

#: figure width in inches; with DPI this makes a 760 px wide PNG (the content column)
FIG_WIDTH_IN = 6.4
#: dots per inch for PNG output: 6.4 in x 118.75 = 760 px
DPI = 118.75
#: longest alt text we accept (characters)
ALT_MAX = 150

#: categorical inks, darkest first (L* 18.8, 28.0, 38.3, 49.7, 58.5; measured in the tests)
PALETTE = ("#1b2a5e", "#7a1f3d", "#00665b", "#c2560a", "#5d8fd0")
#: text and axis ink
INK = "#222222"
#: secondary text, reference lines
MUTED = "#666666"
#: shading behind data (bands, sets)
FAINT = "#d9dde8"

#: sequential colormap for magnitudes (angles, coranks): lightness falls monotonically
#: from near-white to the darkest ink, so it reads the same in greyscale
SEQUENTIAL = LinearSegmentedColormap.from_list(
    "relspan_sequential",
    ["#f7f5ee", "#c9d8e8", "#8fb0d8", "#5d7fb8", "#34497f", "#1b2a5e"],
    N=256,
)

_MARKERS = ("s", "o", "D", "^", "v", "P", "X")
_LINESTYLES = ("-", (0, (5, 2)), (0, (6, 2, 1.5, 2)), (0, (1.5, 1.5)), (0, (9, 3)),
               (0, (3, 1, 1, 1, 1, 1)), (0, (2, 3)))

#: fixed slot per noise assumption (its id or reader's name, from relspan.assumptions), so
#: that an assumption looks the same in every figure of a site
_ASSUMPTION_SLOT = {**{a.id: a.slot for a in ASSUMPTIONS}, **{a.name: a.slot for a in ASSUMPTIONS}}

_RC = {
    "font.family": "DejaVu Sans",
    "font.size": 10.5,
    "axes.titlesize": 11,
    "axes.titleweight": "bold",
    "axes.titlelocation": "left",
    "axes.labelsize": 10.5,
    "xtick.labelsize": 9.5,
    "ytick.labelsize": 9.5,
    "legend.fontsize": 9.5,
    "legend.frameon": False,
    "text.color": INK,
    "axes.labelcolor": INK,
    "axes.edgecolor": "#8a8a8a",
    "axes.linewidth": 0.8,
    "axes.spines.top": False,
    "axes.spines.right": False,
    "axes.grid": True,
    "axes.axisbelow": True,
    "grid.color": "#e4e4e4",
    "grid.linewidth": 0.6,
    "xtick.color": "#555555",
    "ytick.color": "#555555",
    "xtick.labelcolor": INK,
    "ytick.labelcolor": INK,
    "lines.linewidth": 1.6,
    "lines.markersize": 5.5,
    "hatch.color": "#6b7489",
    "hatch.linewidth": 0.6,
    "axes.unicode_minus": True,
    "axes.formatter.use_mathtext": False,
    "mathtext.fontset": "dejavusans",
    "figure.facecolor": "white",
    "axes.facecolor": "white",
    "savefig.facecolor": "white",
    "figure.dpi": DPI,
    "savefig.dpi": DPI,
    "savefig.bbox": None,
    "figure.constrained_layout.use": True,
    "date.converter": "concise",
    "svg.fonttype": "path",
    "svg.hashsalt": "relspan-figures",
    "svg.image_inline": True,
    "path.simplify": True,
    "image.interpolation": "nearest",
}


@contextmanager
def style_context():
    """Apply the relspan figure style (and the Agg backend's needs) for a block.

    Everything is restored on exit; see :data:`_RC` for the settings.
    """
    with matplotlib.rc_context(_RC):
        yield


def new_figure(height_in: float, *, width_in: float = FIG_WIDTH_IN) -> Figure:
    """A figure of fixed size on an Agg canvas (call inside :func:`style_context`)."""
    fig = Figure(figsize=(width_in, height_in), dpi=DPI)
    FigureCanvasAgg(fig)
    return fig


@dataclass(frozen=True, slots=True, eq=False)
class FigureResult:
    """A figure with everything a page needs to publish it accessibly.

    Attributes
    ----------
    name : str
        File stem, e.g. ``"subspace-stability"``; letters, digits, ``-`` and ``_``.
    figure : matplotlib.figure.Figure
        The figure, drawn with the relspan style.
    alt : str
        Short alternative text (at most 150 characters) stating the main number.
    description : str
        Long description in plain words with every number the figure shows.
    table : pandas.DataFrame
        The data behind the figure in tidy form (one row per drawn item);
        written as CSV beside the figure by :func:`table_csv`.
    """

    name: str
    figure: Figure
    alt: str
    description: str
    table: pd.DataFrame

    def __post_init__(self) -> None:
        if not self.name or not all(c.isalnum() or c in "-_" for c in self.name):
            raise OptionsError(
                f"FigureResult: name must be a file stem of letters, digits, '-' and '_'; got {self.name!r}.",
                key="name", fix="Pass a name such as 'subspace-stability'.")
        literal_dollars(self.figure)
        freeze_layout(self.figure)
        if len(self.alt) > ALT_MAX:
            raise OptionsError(
                f"FigureResult: alt text is {len(self.alt)} characters; at most {ALT_MAX} are allowed.",
                key="alt", fix="Shorten the alt text and put the detail in the description.")


def literal_dollars(fig: Figure) -> None:
    """Show every '$' of the figure's texts as a dollar sign, never as the start of mathtext.

    Labels, units and window names are user text; matplotlib would read a pair of
    dollar signs in them as a formula (and fail on an unbalanced one). Each unescaped
    '$' becomes '\\$', which matplotlib draws as '$'. Tick labels are written again by
    their formatters at every draw (so log-axis exponents keep their mathtext); fixed
    tick labels given as text are escaped in their formatter.
    """
    from matplotlib.text import Text
    from matplotlib.ticker import FixedFormatter

    for text in fig.findobj(Text):
        value = text.get_text()
        if "$" in value:
            text.set_text(_escape_dollars(value))
    for ax in fig.axes:
        for axis in (ax.xaxis, ax.yaxis):
            for fmt in (axis.get_major_formatter(), axis.get_minor_formatter()):
                if isinstance(fmt, FixedFormatter):
                    fmt.seq = [_escape_dollars(str(v)) for v in fmt.seq]


def _escape_dollars(value: str) -> str:
    return re.sub(r"(?<!\\)\$", lambda m: "\\$", value)


def freeze_layout(fig: Figure) -> None:
    """Run the constrained layout (twice), then switch it off.

    With fixed-aspect axes (heatmaps, maps on equal scales) the layout moves
    axes by fractions of a point on each draw until it settles; freezing it
    makes every later rendering see exactly the same positions.
    """
    if fig.get_layout_engine() is None:
        return
    with style_context():
        # two passes bring the layout within a small fraction of a point of its fixed
        # point; the count is fixed so the result never depends on timing or state
        for _ in range(2):
            fig.draw_without_rendering()
        fig.set_layout_engine("none")


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
    with style_context():
        if fmt == "svg":
            result.figure.savefig(buf, format="svg", metadata={"Date": None})
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


# --------------------------------------------------------------------- series styles

@dataclass(frozen=True, slots=True)
class SeriesStyle:
    """Colour, marker and line style of one series (all three always differ)."""

    color: str
    marker: str
    linestyle: object
    slot: int


def series_style(slot: int) -> SeriesStyle:
    """The style in slot ``slot`` (0-based); slots beyond the palette reuse colours
    with new marker/line-style pairs."""
    return SeriesStyle(PALETTE[slot % len(PALETTE)], _MARKERS[slot % len(_MARKERS)],
                       _LINESTYLES[slot % len(_LINESTYLES)], slot)


def styles_for(labels: Sequence[str]) -> list[SeriesStyle]:
    """Styles for a sequence of series labels.

    A label that is (or starts with) a noise assumption id of
    :mod:`relspan.assumptions` (id or reader's name) gets that assumption's fixed slot, so
    it looks the same in every figure; other labels take the free slots in order.
    """
    taken: dict[int, int] = {}
    out: list[SeriesStyle | None] = [None] * len(labels)
    for i, lab in enumerate(labels):
        text = str(lab).strip().lower()
        slot = _ASSUMPTION_SLOT.get(text.split(" ")[0].split("(")[0])
        if slot is None:
            slot = next((s for name, s in _ASSUMPTION_SLOT.items() if text.startswith(name)), None)
        if slot is not None and slot not in taken:
            taken[slot] = i
            out[i] = series_style(slot)
    free = (s for s in range(64) if s not in taken)
    for i in range(len(labels)):
        if out[i] is None:
            out[i] = series_style(next(free))
    return out  # type: ignore[return-value]


def text_color_on(rgba) -> str:
    """Black or white text, whichever contrasts more with a fill colour (WCAG relative luminance)."""
    r, g, b = to_rgb(rgba)

    def lin(c: float) -> float:  # sRGB transfer function (IEC 61966-2-1)
        return c / 12.92 if c <= 0.04045 else ((c + 0.055) / 1.055) ** 2.4

    y = 0.2126 * lin(r) + 0.7152 * lin(g) + 0.0722 * lin(b)
    return INK if (y + 0.05) / 0.05 > 1.05 / (y + 0.05) else "white"


# --------------------------------------------------------------------- input checks

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


# --------------------------------------------------------------------- number text

def num(x: float, sig: int = 3) -> str:
    """A number as it is printed in alt texts and descriptions (``sig`` significant digits).

    ASCII minus; negative zero printed as 0; infinities as "unbounded" is the caller's job.
    """
    x = float(x)
    if math.isnan(x):
        return "missing"
    if math.isinf(x):
        return "infinite" if x > 0 else "minus infinite"
    if x == 0:
        return "0"
    ax = abs(x)
    if 1e-3 <= ax < 1e5:
        digits = max(sig - 1 - int(math.floor(math.log10(ax))), 0)
        text = f"{x:.{digits}f}"
        if "." in text:
            text = text.rstrip("0").rstrip(".")
    else:
        text = f"{x:.{sig - 1}e}"
        mant, exp = text.split("e")
        mant = mant.rstrip("0").rstrip(".") if "." in mant else mant
        text = f"{mant}e{int(exp)}"
    if text in ("-0", "-0.0"):
        text = "0"
    return text


def num_fig(x: float, sig: int = 3) -> str:
    """:func:`num` with a typographic minus, for text drawn inside figures."""
    return num(x, sig).replace("-", "\u2212")


def angle_text(deg: float) -> str:
    """An angle in degrees as printed: one decimal, or two significant digits below 0.1."""
    deg = float(deg)
    if 0 < abs(deg) < 0.1:
        return num(deg, 2)
    return f"{deg:.1f}"


def join_words(items: Sequence[str]) -> str:
    """'a', 'a and b', 'a, b and c'."""
    items = list(items)
    if not items:
        return ""
    if len(items) == 1:
        return items[0]
    return ", ".join(items[:-1]) + " and " + items[-1]


def fit_alt(*candidates: str) -> str:
    """The first candidate alt text that fits in :data:`ALT_MAX` characters
    (the last one is cut at a word boundary if none fits)."""
    for c in candidates:
        if len(c) <= ALT_MAX:
            return c
    last = candidates[-1]
    cut = last[: ALT_MAX - 1].rsplit(" ", 1)[0]
    return cut + "…"


def plural(k: int, word: str, many: str | None = None) -> str:
    return f"{k} {word if k == 1 else (many or word + 's')}"


# --------------------------------------------------------------------- label placement

def spread_1d(values: Sequence[float], min_gap: float, lo: float, hi: float) -> np.ndarray:
    """Move sorted-by-value positions apart so neighbours are at least ``min_gap``
    apart, staying within [lo, hi] where possible (for stacked end-of-line labels)."""
    v = np.asarray(values, dtype=float)
    order = np.argsort(v, kind="stable")
    y = v[order].copy()
    for _ in range(50):
        moved = False
        for i in range(1, len(y)):
            if y[i] - y[i - 1] < min_gap - 1e-12:
                mid = 0.5 * (y[i] + y[i - 1])
                y[i - 1], y[i] = mid - min_gap / 2, mid + min_gap / 2
                moved = True
        if len(y):
            if y[0] < lo:
                y += lo - y[0]
                moved = True
            if y[-1] > hi and y[-1] - y[0] <= hi - lo:
                y -= y[-1] - hi
                moved = True
        if not moved:
            break
    out = np.empty_like(y)
    out[order] = y
    return out


def place_point_labels(fig: Figure, ax, xy: np.ndarray, texts: Sequence[str], *,
                       colors: Sequence[str] | None = None, fontsize: float = 9.5,
                       avoid: np.ndarray | None = None, gap_pt: float = 5.0,
                       boxes: Sequence | None = None) -> list:
    """Label points directly, choosing for each label the offset (right, left,
    above, below or a diagonal) that overlaps least with earlier labels, with
    the points in ``xy`` and ``avoid``, with the display-space ``boxes``
    (``(x0, y0, x1, y1)``, e.g. other labels) and with the axes edge; offsets
    of 5 and then 14 points are tried.

    The figure layout must be final (call ``fig.draw_without_rendering()``
    first); labels are excluded from the layout so they do not move it.
    Returns the text artists.
    """
    renderer = fig.canvas.get_renderer()
    to_disp = ax.transData.transform
    pts = to_disp(np.asarray(xy, float))
    others = pts if avoid is None else np.vstack([pts, to_disp(np.asarray(avoid, float))])
    box = ax.get_window_extent(renderer)
    px_per_pt = fig.dpi / 72.0
    pad = 4.0 * px_per_pt
    fixed: list[tuple[float, float, float, float]] = [tuple(b) for b in (boxes or [])]
    placed: list[tuple[float, float, float, float]] = []
    artists = []
    base = [(1, 0, "left", "center"), (-1, 0, "right", "center"), (0, 1, "center", "bottom"),
            (0, -1, "center", "top"), (1, 1, "left", "bottom"), (-1, 1, "right", "bottom"),
            (1, -1, "left", "top"), (-1, -1, "right", "top")]
    cands = [(dx * f, dy * f, ha, va) for f in (1.0, 2.8) for dx, dy, ha, va in base]
    for i, (p, text) in enumerate(zip(pts, texts)):
        best = None
        for dx, dy, ha, va in cands:
            t = ax.annotate(text, xy=tuple(ax.transData.inverted().transform(p)),
                            xytext=(dx * gap_pt, dy * gap_pt), textcoords="offset points",
                            ha=ha, va=va, fontsize=fontsize,
                            color=INK if colors is None else colors[i], annotation_clip=False)
            bb = t.get_window_extent(renderer)
            t.remove()
            x0, y0, x1, y1 = bb.x0, bb.y0, bb.x1, bb.y1
            cost = 0.0
            for q in placed + fixed:
                ox = max(0.0, min(x1, q[2]) - max(x0, q[0]))
                oy = max(0.0, min(y1, q[3]) - max(y0, q[1]))
                cost += ox * oy * 4
            for j, o in enumerate(others):
                if j == i:
                    continue
                ox = max(0.0, min(x1 + pad, o[0] + pad) - max(x0 - pad, o[0] - pad))
                oy = max(0.0, min(y1 + pad, o[1] + pad) - max(y0 - pad, o[1] - pad))
                cost += ox * oy * 8
            out_x = max(0.0, box.x0 - x0) + max(0.0, x1 - box.x1)
            out_y = max(0.0, box.y0 - y0) + max(0.0, y1 - box.y1)
            cost += (out_x * (y1 - y0) + out_y * (x1 - x0)) * 6
            cost += 1e-3 * (abs(dx) + abs(dy))  # prefer the near ring when costs tie
            if best is None or cost < best[0] - 1e-9:
                best = (cost, dx, dy, ha, va, (x0, y0, x1, y1))
        _, dx, dy, ha, va, bbox = best
        placed.append(bbox)
        far = max(abs(dx), abs(dy)) > 1.5
        t = ax.annotate(text, xy=tuple(ax.transData.inverted().transform(p)),
                        xytext=(dx * gap_pt, dy * gap_pt), textcoords="offset points",
                        ha=ha, va=va, fontsize=fontsize,
                        color=INK if colors is None else colors[i], annotation_clip=False,
                        arrowprops=dict(arrowstyle="-", color=MUTED, lw=0.6, shrinkA=1, shrinkB=4)
                        if far else None)
        t.set_in_layout(False)
        artists.append(t)
    return artists


def check_mapping(func: str, key: str, value) -> Mapping:
    if not isinstance(value, Mapping) or not value:
        raise fail(func, key, "must be a non-empty mapping of label to values",
                   "Pass a dict such as {'equal': [...], 'diagonal': [...]}.", got=type(value).__name__)
    return value
