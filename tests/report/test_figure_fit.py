"""Figures that fit: no overlapping labels (text bounding boxes from matplotlib's renderer) and
text large enough at the rendered size of the content column."""

from __future__ import annotations

import itertools

import pytest
from matplotlib.text import Text

from relspan.report.figures.style import FIG_WIDTH_IN, SHOWN_PX_PER_IN, style_context

import figure_inputs as fi  # noqa: E402

#: width in CSS px at which the site shows a figure (its <img> width, 614 px; on narrow screens it keeps
#: that width in a frame that scrolls sideways): a figure's points are drawn at COLUMN_PX / (72 * FIG_WIDTH_IN)
#: px each (the PNG is wider, style.DPI, for print and download)
COLUMN_PX = FIG_WIDTH_IN * SHOWN_PX_PER_IN
MIN_TEXT_PX = 11.0

#: figures whose labels are placed by relspan's own code and checked for overlaps. Known and left
#: for a later change: the five-variable map's point labels and tick labels, the stability heatmap's
#: rotated tick labels (their axis-aligned boxes touch, the glyphs do not), the swing figure's
#: angle-panel label.
CHECKED = ("overview", "map3", "map3q1", "gallery", "evidence", "timeline", "frisch")


@pytest.fixture(scope="module")
def figs():
    return fi.build_all()


def _text_boxes(fig):
    with style_context():
        fig.canvas.draw()
        renderer = fig.canvas.get_renderer()
        out = []
        for t in fig.findobj(Text):
            if not t.get_visible() or not t.get_text().strip():
                continue
            bb = t.get_window_extent(renderer)
            if bb.width > 0 and bb.height > 0:
                out.append((t, bb))
        return out


@pytest.mark.parametrize("name", CHECKED)
def test_no_two_labels_overlap(figs, name):
    overlaps = []
    for (a, x), (b, y) in itertools.combinations(_text_boxes(figs[name].figure), 2):
        ox = min(x.x1, y.x1) - max(x.x0, y.x0)
        oy = min(x.y1, y.y1) - max(x.y0, y.y0)
        if ox > 1.0 and oy > 1.0:  # more than a pixel each way
            overlaps.append((a.get_text(), b.get_text()))
    assert not overlaps, overlaps


@pytest.mark.parametrize("name", ("overview", "map3", "map3q1", "map5", "gallery", "stability", "swing",
                                  "evidence", "timeline", "frisch"))
def test_text_is_at_least_11_px_in_the_desktop_column(figs, name):
    fig = figs[name].figure
    px_per_pt = COLUMN_PX / (72.0 * FIG_WIDTH_IN)
    smallest = min(t.get_fontsize() for t, _ in _text_boxes(fig))
    assert smallest * px_per_pt >= MIN_TEXT_PX, f"{name}: {smallest} pt is {smallest * px_per_pt:.1f} px"
