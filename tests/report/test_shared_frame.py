"""The picture of the idea: every window in one frame, and its words agree with what is drawn.

The shared-frame figure states (i) the largest angle between a window's drawn relation line and
the full sample's, measured on the drawing's axes, and (ii) the page's own measure (principal
angles between relation subspaces). These tests measure (i) from the drawn artists and check (ii)
against the stability result the page prints, on invented data and on the demo.
"""

from __future__ import annotations

import re
import warnings
from pathlib import Path

import numpy as np
import pytest

from relspan.report import window_gallery
from relspan.report.figures import geometry
from relspan.report.figures.style import MUTED
from relspan.words import angle_text, fmt

import figure_inputs as fi  # noqa: E402

ROOT = Path(__file__).resolve().parents[2]


def _drawn_lines(fig):
    """(reference direction, window directions) of the overlay's lines, from the artists as drawn."""
    from matplotlib.colors import to_hex

    overlay = fig.axes[0]
    ref, wins = None, []
    for ln in overlay.lines:
        if not hasattr(ln, "get_xy1"):
            continue
        d = np.subtract(ln.get_xy2(), ln.get_xy1())
        if to_hex(ln.get_color()) == to_hex(MUTED):
            ref = d
        else:
            wins.append(d)
    return ref, wins


def _stated_drawn_angle(desc: str) -> str:
    m = re.search(r"every window's line is within ([0-9.]+) degrees of the full sample's", desc)
    assert m, desc
    return m.group(1)


def _check_words_match_drawing(res):
    ref, wins = _drawn_lines(res.figure)
    assert ref is not None and wins
    worst = max(geometry.line_angle_deg(ref, d) for d in wins)
    assert _stated_drawn_angle(res.description) == angle_text(worst)


def test_overlay_draws_every_window_in_the_frame_of_the_panels():
    gal = [fi.map_data(fi.two_relation_data(3, 3, rows=600)[60 * k: 60 * k + 240], fi.NAMES3) for k in range(6)]
    res = window_gallery(gal, fi.LABELS6, reference=fi.map_data(fi.two_relation_data(3, 3, rows=600), fi.NAMES3))
    axes = [a for a in res.figure.axes if a.get_visible()]
    assert len({a.get_xlim() for a in axes}) == 1 and len({a.get_ylim() for a in axes}) == 1
    _, wins = _drawn_lines(res.figure)
    assert len(wins) == 6


def test_stated_largest_drawn_angle_is_measured_from_the_drawn_lines():
    gal = [fi.map_data(fi.two_relation_data(3, 3, rows=600)[60 * k: 60 * k + 240], fi.NAMES3) for k in range(6)]
    res = window_gallery(gal, fi.LABELS6, reference=fi.map_data(fi.two_relation_data(3, 3, rows=600), fi.NAMES3))
    _check_words_match_drawing(res)


def test_a_moved_set_is_drawn_and_stated_as_moved():
    # one window's relation set turned by 30 degrees: the words and the lines both show it
    base = fi.map_data(fi.two_relation_data(3, 3, rows=600), fi.NAMES3)
    turn = np.radians(30.0)
    rot = np.array([[np.cos(turn), -np.sin(turn)], [np.sin(turn), np.cos(turn)]])
    moved = type(base)(base.points, base.names, base.ref, base.flat_point, base.flat_dirs @ rot.T,
                       base.distances)
    res = window_gallery([base, base, moved], ["a", "b", "c"], reference=base)
    _check_words_match_drawing(res)
    assert "(largest: c)" in res.description
    assert float(_stated_drawn_angle(res.description)) == pytest.approx(30.0, abs=0.1)


@pytest.fixture(scope="module")
def demo_run():
    from relspan.run.pipeline import run_analysis
    from relspan.spec import load_spec

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return run_analysis(load_spec(ROOT / "specs" / "demo.yaml"), jobs=1, use_cache=False, progress=False)


def test_demo_shared_frame_figures_agree_with_the_drawing_and_with_the_page(demo_run):
    from relspan.report.figures import inputs as ff

    checked = 0
    for result in demo_run.datasets:
        q = result.examined[0] if result.examined else None
        for plan in result.plans:
            res = ff.gallery_figure(result, plan, q) if q is not None else None
            if res is None:
                continue
            stab = plan.stability.get(ff.GALLERY_ASSUMPTION)
            if stab is None or stab.reference_dim != q or stab.max_to_reference_deg is None:
                continue
            # the page's number, printed as the page prints it (analysis/findings/summary.py)
            assert f"is at most {fmt(stab.max_to_reference_deg)} degrees" in res.description
            if q >= 2:
                _check_words_match_drawing(res)
            checked += 1
    assert checked >= 3
