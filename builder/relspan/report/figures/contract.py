"""The figure contract: every figure function returns a :class:`FigureResult`.

A figure comes with a short alt text, a long description that states the numbers shown in plain words,
and the tidy table behind it. Validation of the figure itself (name, alt length, literal dollar signs,
a frozen layout) happens when the result is built.
"""

from __future__ import annotations

import re
from contextlib import contextmanager
from dataclasses import dataclass

import pandas as pd
from matplotlib.figure import Figure

from relspan.errors import OptionsError
from relspan.report.figures.snap import round_sig, snap_figure
from relspan.report.figures.style import style_context

__all__ = ["FigureResult", "ALT_MAX", "fit_alt", "literal_dollars", "settle", "freeze_layout", "keep_inside",
           "drop_layout_engine", "ticks_once_per_geometry"]

#: longest alt text we accept (characters)
ALT_MAX = 150


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
        snap_figure(self.figure)
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
    from matplotlib.ticker import FixedFormatter

    for text in _texts_except_ticks(fig):
        value = text.get_text()
        if "$" in value:
            text.set_text(_escape_dollars(value))
    for ax in fig.axes:
        for axis in (ax.xaxis, ax.yaxis):
            for fmt in (axis.get_major_formatter(), axis.get_minor_formatter()):
                if isinstance(fmt, FixedFormatter):
                    fmt.seq = [_escape_dollars(str(v)) for v in fmt.seq]


def _texts_except_ticks(fig: Figure):
    """Every Text artist of the figure except the tick labels, in drawing-tree order.

    ``Figure.findobj`` would also walk each axis's ticks, and asking an axis for its ticks
    runs its locator and builds every tick (a large part of a figure's cost when it is done
    at each :func:`settle`); tick labels are rewritten by their formatters at every draw and
    are escaped there (:func:`literal_dollars`), so they are not needed here.
    """
    from matplotlib.axis import Axis
    from matplotlib.text import Text

    stack = [fig]
    while stack:
        artist = stack.pop()
        if isinstance(artist, Text):
            yield artist
        if isinstance(artist, Axis):
            children = [artist.label, artist.offsetText]
        else:
            children = artist.get_children()
        stack.extend(reversed(children))


def _escape_dollars(value: str) -> str:
    return re.sub(r"(?<!\\)\$", lambda m: "\\$", value)


def settle(fig: Figure) -> None:
    """Fix the figure's layout with ONE pass of its layout engine, then keep it fixed.

    The first call runs the constrained layout once (a layout pass: text and
    tick extents, no drawing of the data), switches the engine off and applies
    each axes' aspect, so axes boxes, transforms and text extents are final for
    label placement. Later calls only re-apply the aspects (after new limits).
    Figure functions call it wherever they need display coordinates, instead of
    a full draw; the save is then the figure's only full draw.
    """
    literal_dollars(fig)  # user text is measured by the layout pass: its '$' must not start mathtext
    with style_context():
        engine = fig.get_layout_engine()
        if engine is not None:
            with ticks_once_per_geometry(fig):
                engine.execute(fig)
            drop_layout_engine(fig)
        for ax in fig.axes:
            ax.apply_aspect()


@contextmanager
def ticks_once_per_geometry(fig: Figure):
    """During the layout pass (and a save), each axis works out its ticks once per geometry.

    Measuring one axes for the constrained layout asks each of its axes for its ticks five or six
    times (its extent, its label's position against its own tick labels and each spine's extent,
    the title's position), and each time runs the locator and the formatter and rewrites every
    tick. Within the pass nothing else changes an axis's ticks, and they depend only on its view
    interval, the axes' box in pixels (the room for ticks), and its locators and formatters (all in
    the key): the same key gives the same ticks, already in place, so the last answer is kept.
    The wrapper is an instance attribute removed after the pass.

    A save draws every axes once, and the drawing asks each axis for its ticks three to five
    times more (its label's position against its siblings' tick labels, each spine's extent for
    the title's position); :func:`~relspan.report.figures.render.render_figure` runs the save
    under the same rule, so each axis runs its locator and formatter once per save.
    """
    wrapped = []
    for ax in fig.axes:
        for axis in ax._axis_map.values():
            if "_update_ticks" in vars(axis):
                continue
            wrapped.append(axis)
            axis._update_ticks = _LastTicks(axis)
    try:
        yield
    finally:
        for axis in wrapped:
            vars(axis).pop("_update_ticks", None)


class _LastTicks:
    """``axis._update_ticks`` that recomputes only when its inputs changed (see above)."""

    __slots__ = ("axis", "key", "ticks")

    def __init__(self, axis) -> None:
        self.axis, self.key, self.ticks = axis, None, None

    def __call__(self):
        axis = self.axis
        key = (tuple(float(v) for v in axis.get_view_interval()), tuple(axis.axes.bbox.bounds),
               id(axis.major.locator), id(axis.major.formatter), id(axis.minor.locator),
               id(axis.minor.formatter))
        if key != self.key:
            self.ticks = type(axis)._update_ticks(axis)
            self.key = key
        return list(self.ticks)


def drop_layout_engine(fig: Figure) -> None:
    """Leave the figure with no layout engine at all (``get_layout_engine()`` is None).

    ``set_layout_engine("none")`` keeps a placeholder engine, and ``savefig`` draws a figure
    that has any engine once more before the real drawing (a whole draw of every tick and
    text, about 40% of a save, for nothing: the layout is already fixed). With no engine the
    save is the figure's one draw. ``set_layout_engine(None)`` removes the engine when neither
    ``figure.autolayout`` nor ``figure.constrained_layout.use`` is set, so both are switched off
    for the call.
    """
    import matplotlib

    with matplotlib.rc_context({"figure.autolayout": False, "figure.constrained_layout.use": False}):
        fig.set_layout_engine(None)


def freeze_layout(fig: Figure) -> None:
    """The layout made final (:func:`settle`); with a fixed count of passes (one) the positions never
    depend on timing or state, so every later rendering sees exactly the same positions.

    The axes positions are then rounded to :data:`~.snap.FIGURE_DIGITS` significant digits (of the
    figure's width and height): a layout computed before the plotted data were rounded may carry
    last-bit noise, and matplotlib names clip paths after a hash of the exact axes box.
    """
    settle(fig)
    for ax in fig.axes:
        box = ax.get_position(original=True)
        ax.set_position([float(v) for v in round_sig([box.x0, box.y0, box.width, box.height])],
                        which="both")
        ax.apply_aspect()


def fit_alt(*candidates: str) -> str:
    """The first candidate alt text that fits in :data:`ALT_MAX` characters
    (the last one is cut at a word boundary if none fits)."""
    for c in candidates:
        if len(c) <= ALT_MAX:
            return c
    last = candidates[-1]
    cut = last[: ALT_MAX - 1].rsplit(" ", 1)[0]
    return cut + "…"


def keep_inside(fig: Figure, *, passes: int = 3, margin_px: float = 2.0) -> None:
    """Pull every axes in so that no text sticks out of the figure, where no reader would see it.

    Limits, ticks and labels set after the layout pass (equal-aspect maps, labels placed beside
    points) can push a tick label or an axis label past the figure's edge. Each pass measures the
    texts that overflow and maps the axes boxes from the overflowing extent back onto the figure
    (text sizes never change); a fixed count of passes keeps the result independent of timing.
    """
    from matplotlib.text import Text

    renderer = fig.canvas.get_renderer()
    w, h = fig.bbox.width, fig.bbox.height
    for _ in range(passes):
        boxes = []
        for ax in fig.axes:
            if not ax.get_visible():
                continue
            boxes.append(ax.get_tightbbox(renderer))
            boxes.extend(t.get_window_extent(renderer) for t in ax.texts
                         if t.get_visible() and t.get_text().strip())
        boxes.extend(t.get_window_extent(renderer) for t in fig.findobj(Text, include_self=False)
                     if t.figure is fig and t.axes is None and t.get_visible() and t.get_text().strip())
        boxes = [b for b in boxes if b is not None and b.width > 0 and b.height > 0]
        if not boxes:
            return
        x0 = min(b.x0 for b in boxes) - margin_px
        y0 = min(b.y0 for b in boxes) - margin_px
        x1 = max(b.x1 for b in boxes) + margin_px
        y1 = max(b.y1 for b in boxes) + margin_px
        lo_x, hi_x, lo_y, hi_y = min(x0, 0.0), max(x1, w), min(y0, 0.0), max(y1, h)
        if lo_x >= 0 and hi_x <= w and lo_y >= 0 and hi_y <= h:
            return
        sx, sy = w / (hi_x - lo_x), h / (hi_y - lo_y)
        for ax in fig.axes:
            b = ax.get_position(original=True)
            ax.set_position([(b.x0 * w - lo_x) * sx / w, (b.y0 * h - lo_y) * sy / h,
                             b.width * sx, b.height * sy], which="both")
            ax.apply_aspect()
