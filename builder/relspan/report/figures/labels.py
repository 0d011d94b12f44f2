"""Label placement: labels beside points and at line ends that avoid each other and the data."""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
from matplotlib.figure import Figure

from relspan.report.figures.style import INK, MUTED

__all__ = ["spread_1d", "place_point_labels", "widest_text_px"]


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

    The figure layout must be final (call ``contract.settle(fig)``
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


def widest_text_px(fig: Figure, ax, texts: Sequence[str], fontsize: float, **props) -> float:
    """Width in display pixels of the widest of ``texts`` at ``fontsize`` (0 for none; ``props`` such
    as ``fontweight`` as for ``Axes.text``): whether numbers fit their cells at a readable size, how
    much room labels placed after the layout need. Text widths do not depend on the layout."""
    renderer = fig.canvas.get_renderer()
    widest = 0.0
    for text in dict.fromkeys(texts):
        probe = ax.text(0, 0, text, fontsize=fontsize, transform=ax.transAxes, **props)
        widest = max(widest, probe.get_window_extent(renderer).width)
        probe.remove()
    return widest
