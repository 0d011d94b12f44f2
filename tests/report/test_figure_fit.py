"""Figures that fit: no overlapping labels (text bounding boxes from matplotlib's renderer) and
text large enough at the rendered size of the content column."""

from __future__ import annotations

import itertools

import numpy as np

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


def _grid_texts(fig) -> list[str]:
    return [t.get_text() for t in fig.figure.axes[0].texts]


@pytest.mark.parametrize("w", [6, 14, 24, 60])
def test_corank_grid_writes_numbers_only_at_a_readable_size_and_its_key_says_where_they_are(w):
    from relspan.report.figures.corank import corank_timeline
    from relspan.report.figures.style import MIN_TEXT_PT

    labels = [f"{1990 + k}Q1" for k in range(w)]
    fig = corank_timeline(labels, {"equal": [2] * w, "bounded": [2] * (w - 1) + [None]},
                          support={"equal": [0.97] * w, "bounded": [0.5] * w})
    texts = [t for t in fig.figure.axes[0].texts if t.get_visible()]
    assert all(t.get_fontsize() >= MIN_TEXT_PT for t in texts)
    key = fig.figure.axes[0].get_xlabel()
    shares = [s for s in _grid_texts(fig) if s.rstrip("%") in ("97", "50")]
    if any(s.endswith("%") for s in shares):
        assert key.startswith("Small number: the share") and "written under it" in fig.description
    elif shares:
        assert key.startswith("Small number: the %") and "written under it" in fig.description
    else:
        assert "in the table" in key and "is in the table" in fig.description
    if w <= 14:
        assert shares  # the demo's plans (up to 14 windows) keep their shares in the cells
    if w == 60:
        assert not shares
    # every written number fits its cell: no two cell texts overlap
    with style_context():
        fig.figure.canvas.draw()
        boxes = [t.get_window_extent() for t in texts]
    for a, b in itertools.combinations(boxes, 2):
        assert min(a.x1, b.x1) - max(a.x0, b.x0) <= 0 or min(a.y1, b.y1) - max(a.y0, b.y0) <= 0


@pytest.mark.parametrize("w", [6, 9, 12, 20])
def test_stability_heatmap_writes_angles_only_where_they_fit_at_a_readable_size(w):
    from relspan.report.figures.style import MIN_TEXT_PT
    from relspan.report.figures.windows import subspace_stability

    rng = np.random.default_rng(w)
    a = rng.uniform(0, 9, (w, w))
    a = np.triu(a, 1) + np.triu(a, 1).T
    fig = subspace_stability(a, [f"{2000 + k}-{2009 + k}" for k in range(w)], rng.uniform(0, 5, w), threshold_deg=6)
    cells = fig.figure.axes[0].texts
    assert all(t.get_fontsize() >= MIN_TEXT_PT for t in cells)
    assert bool(cells) == ("values written in the cells" in fig.description)
    if w <= 6:
        assert cells
    if w >= 20:
        assert not cells
