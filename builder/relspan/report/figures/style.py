"""House style of the figures: palette, fonts, sizes and the series styles of the noise assumptions.

Five categorical inks (one per noise assumption) on white, chosen so that
(i) their CIELAB lightness L* is 19, 28, 38, 50 and 59, at least 8 units
apart, so the series stay apart in greyscale, (ii) each has a contrast ratio
of at least 3:1 against white (WCAG 2.1 success criterion 1.4.11, non-text
contrast), and (iii) they stay apart under simulated colour-vision deficiency.
The tests measure all three with the ``colorspacious`` package. Colour is
never the only cue: every series also has its own marker and line style.

Style is applied only inside :func:`style_context` (a ``matplotlib.rc_context``);
importing this module changes no rcParams.
"""

from __future__ import annotations

from collections.abc import Sequence
from contextlib import contextmanager
from dataclasses import dataclass

import matplotlib
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.colors import LinearSegmentedColormap, to_rgb
from matplotlib.figure import Figure

from relspan.assumptions import ASSUMPTIONS

__all__ = ["PALETTE", "INK", "MUTED", "FAINT", "SEQUENTIAL", "FIG_WIDTH_IN", "DPI", "SHOWN_PX_PER_IN",
           "MIN_TEXT_PT", "style_context", "new_figure",
           "SeriesStyle", "series_style", "styles_for", "text_color_on"]

#: figure width in inches; with DPI this makes a 760 px wide PNG (the content column)
FIG_WIDTH_IN = 6.4
#: dots per inch for PNG output: 6.4 in x 118.75 = 760 px
DPI = 118.75
#: CSS px per inch at which the site shows a figure (its <img> width and height; CSS's 96 px to the
#: inch): 6.4 in are 614 px, and a figure is never shown smaller than that except as a home-page
#: thumbnail (narrow screens keep this width inside a frame that scrolls sideways, site.css)
SHOWN_PX_PER_IN = 96
#: the smallest text a figure may carry, in points: 8.5 pt at SHOWN_PX_PER_IN is 8.5 x 96 / 72 = 11.3 CSS px,
#: above the 11 px floor of issue 14 (tests/site/test_browser.py measures it in the browser at 1280 and
#: 360 px; tests/report/test_figure_fit.py in matplotlib)
MIN_TEXT_PT = 8.5
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


