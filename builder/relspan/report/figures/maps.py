"""Maps of the elementary regressions and their fitted flat (one window, or a gallery).

Normalised on a reference variable, the n elementary regressions are n points
in the space of the other n - 1 coefficients. When q relations hold, the
points lie near a (q - 1)-flat (a line for q = 2) and their distance from it
grows with the noise variance; when q = 1 and they lie in one orthant, their
convex hull is the Frisch set of consistent relations [1]_, [3]_.

References
----------
.. [1] R. Frisch, Statistical Confluence Analysis by Means of Complete
       Regression Systems, 1934.
.. [2] O. Reiersol, Confluence analysis by means of lag moments and other
       methods of confluence analysis, Econometrica 9, 1941.
.. [3] S. Klepper and E. E. Leamer, Consistent sets of estimates for
       regressions with errors in all variables, Econometrica 52, 1984.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd
from matplotlib.patches import Circle, Polygon
from matplotlib.ticker import MaxNLocator

from relspan.report.figures import geometry
from relspan.report.figures.checks import as_float_array, as_labels, fail
from relspan.report.figures.contract import drop_layout_engine, keep_inside, FigureResult, fit_alt, settle
from relspan.report.figures.labels import place_point_labels
from relspan.report.figures.style import (FAINT, INK, MIN_TEXT_PT, MUTED, PALETTE, SEQUENTIAL, new_figure,
                                          series_style, style_context)
from relspan.words import angle_text, fmt, num, num_fig, num_range, plural

__all__ = ["ElementaryMapData", "elementary_map", "window_gallery", "drawn_angles_deg"]

_MAX_PANELS = 30


@dataclass(frozen=True, slots=True, eq=False)
class ElementaryMapData:
    """The inputs of one elementary-regression map (one window).

    Attributes
    ----------
    points : (n, n - 1) ndarray
        Row j: the elementary regression that treats ``names[j]`` alone as
        noisy, normalised so the coefficient on ``ref`` is 1; columns are the
        coefficients on the other variables in the order of ``names``
        (``ref`` left out).
    names : tuple of str
        The n variables.
    ref : str
        The reference variable (one of ``names``).
    flat_point : (n - 1,) ndarray
        A point of the fitted flat.
    flat_dirs : (q - 1, n - 1) ndarray
        Directions spanning the fitted flat (an empty (0, n - 1) array for
        q = 1, where the flat is a point; one row, a line, for q = 2).
    distances : (n,) ndarray
        Euclidean distance of each point from the flat, in coefficient units
        (the band drawn has their root-mean-square as half-width).
    simplex : (m, n - 1) ndarray or None
        Vertices of the Frisch set to shade (for q = 1 in one orthant: the
        points themselves); None when not shown.
    """

    points: np.ndarray
    names: tuple[str, ...]
    ref: str
    flat_point: np.ndarray
    flat_dirs: np.ndarray
    distances: np.ndarray
    simplex: np.ndarray | None = None

    def __post_init__(self) -> None:
        func = "elementary_map"
        names = tuple(as_labels(func, "names", self.names))
        n = len(names)
        if n < 3:
            raise fail(func, "names", "must name at least 3 variables",
                       "With two variables the two elementary regressions are two numbers: "
                       "show them with frisch_intervals.", got=f"{n} names")
        if len(set(names)) != n:
            raise fail(func, "names", "has repeated names", "Give every variable its own label.")
        if self.ref not in names:
            raise fail(func, "ref", "must be one of names", f"Use one of {', '.join(names)}.",
                       got=repr(self.ref))
        d = n - 1
        pts = as_float_array(func, "points", self.points, ndim=2, shape=(n, d))
        fp = as_float_array(func, "flat_point", self.flat_point, ndim=1, shape=(d,))
        fd = np.asarray(self.flat_dirs, dtype=float)
        if fd.size == 0:
            fd = np.zeros((0, d))
        elif fd.ndim == 1:
            fd = fd[None, :]
        fd = as_float_array(func, "flat_dirs", fd, ndim=2, shape=(None, d))
        if fd.shape[0] > d - 1:
            raise fail(func, "flat_dirs", f"may have at most {d - 1} rows (corank at most n - 1)",
                       "Pass the q - 1 directions of the fitted flat.", got=f"{fd.shape[0]} rows")
        if fd.shape[0]:
            if not geometry.independent_rows(fd):
                raise fail(func, "flat_dirs", "are linearly dependent",
                           "Pass independent directions (e.g. an orthonormal basis of the flat).")
        dist = as_float_array(func, "distances", self.distances, ndim=1, shape=(n,))
        if (dist < 0).any():
            raise fail(func, "distances", "must be >= 0", "Pass Euclidean distances from the flat.",
                       got=num(dist.min()))
        sx = None
        if self.simplex is not None:
            sx = as_float_array(func, "simplex", self.simplex, ndim=2, shape=(None, d))
            if sx.shape[0] < 2:
                raise fail(func, "simplex", "needs at least 2 vertices",
                           "Pass the vertices of the Frisch set, or None.")
        for field, value in (("names", names), ("points", pts), ("flat_point", fp),
                             ("flat_dirs", fd), ("distances", dist), ("simplex", sx)):
            object.__setattr__(self, field, value)

    @property
    def q(self) -> int:
        """Corank: one more than the dimension of the flat."""
        return self.flat_dirs.shape[0] + 1

    @property
    def coef_names(self) -> list[str]:
        """The variables whose coefficients are the coordinates (``ref`` left out)."""
        return [v for v in self.names if v != self.ref]

    @property
    def rms(self) -> float:
        """Root-mean-square distance of the points from the flat."""
        return float(np.sqrt(np.mean(self.distances ** 2)))

    def main_direction(self) -> np.ndarray | None:
        """Unit direction inside the flat along which the points spread most (None for q = 1)."""
        return geometry.main_direction(self.points, self.flat_point, self.flat_dirs)

    def residuals(self) -> np.ndarray:
        """Points minus their orthogonal projections on the flat."""
        return geometry.residuals(self.points, self.flat_point, self.flat_dirs)


def _limits(maps: Sequence[ElementaryMapData], frame: geometry.Frame) -> tuple[float, float, float, float]:
    xy = np.vstack([np.vstack([frame.coords(m.points), frame.coords(m.flat_point)]) for m in maps]
                   + [frame.coords(m.simplex) for m in maps if m.simplex is not None])
    pad_r = max(m.rms for m in maps)
    x0, y0 = xy.min(axis=0) - pad_r
    x1, y1 = xy.max(axis=0) + pad_r
    span = max(x1 - x0, y1 - y0, 1e-9)
    px = max(0.1 * (x1 - x0), 0.04 * span)
    py = max(0.1 * (y1 - y0), 0.04 * span)
    return x0 - px, x1 + px, y0 - py, y1 + py


def _draw_flat(ax, m: ElementaryMapData, frame: geometry.Frame, *, color: str, band: bool = True,
               linestyle="-", linewidth: float = 1.6, zorder: int = 2) -> tuple[np.ndarray, np.ndarray | None]:
    """Draw the flat (line or point) and its RMS band; returns (point, direction) in plot coordinates."""
    p0 = frame.coords(m.flat_point)[0]
    main = m.main_direction()
    rms = m.rms
    if main is None:
        if band and rms > 0:
            ax.add_patch(Circle(p0, rms, facecolor="none", edgecolor=MUTED, linestyle=(0, (4, 2)),
                                linewidth=1.0, zorder=1))
        ax.plot([p0[0]], [p0[1]], marker="+", markersize=12, markeredgewidth=2, color=color,
                linestyle="none", zorder=zorder)
        return p0, None
    dvec = frame.direction(main)
    nrm = geometry.norm(dvec)
    if nrm < 1e-12:
        ax.plot([p0[0]], [p0[1]], marker="+", markersize=12, markeredgewidth=2, color=color,
                linestyle="none", zorder=zorder)
        return p0, None
    dvec = dvec / nrm
    normal = np.array([-dvec[1], dvec[0]])
    big = 1e4 * max(1.0, float(np.max(np.abs(frame.coords(m.points) - p0))))
    if band and rms > 0:
        corners = [p0 - big * dvec - rms * normal, p0 + big * dvec - rms * normal,
                   p0 + big * dvec + rms * normal, p0 - big * dvec + rms * normal]
        ax.add_patch(Polygon(corners, closed=True, facecolor=FAINT, edgecolor="none", alpha=0.9,
                             zorder=1))
    # the second point one data extent away, so the line's direction survives the rounding of
    # plotted numbers (snap.py) to a few millionths of a degree
    reach = max(float(np.max(np.abs(frame.coords(m.points) - p0))), 1e-12)
    ax.axline(tuple(p0), tuple(p0 + reach * dvec), color=color, linestyle=linestyle, linewidth=linewidth,
              zorder=zorder)
    return p0, dvec


def _draw_simplex(ax, m: ElementaryMapData, frame: geometry.Frame) -> None:
    xy = frame.coords(m.simplex)
    hull = _hull_2d(xy)
    ax.add_patch(Polygon(hull, closed=True, facecolor="#d5e8e2", edgecolor=PALETTE[2], linewidth=1.3,
                         hatch="////", zorder=0.5))


def _hull_2d(xy: np.ndarray) -> np.ndarray:
    """Convex hull of 2-D points, counter-clockwise (monotone chain; collinear input gives a segment)."""
    pts = sorted(map(tuple, np.round(xy, 14)))
    pts = list(dict.fromkeys(pts))
    if len(pts) <= 2:
        return np.array(pts)

    def cross(o, a, b):
        return (a[0] - o[0]) * (b[1] - o[1]) - (a[1] - o[1]) * (b[0] - o[0])

    lower, upper = [], []
    for p in pts:
        while len(lower) >= 2 and cross(lower[-2], lower[-1], p) <= 0:
            lower.pop()
        lower.append(p)
    for p in reversed(pts):
        while len(upper) >= 2 and cross(upper[-2], upper[-1], p) <= 0:
            upper.pop()
        upper.append(p)
    return np.array(lower[:-1] + upper[:-1])


def _draw_points(ax, m: ElementaryMapData, frame: geometry.Frame, *, size: float = 7.5) -> np.ndarray:
    xy = frame.coords(m.points)
    for j in range(len(m.names)):
        st = series_style(j)
        ax.plot([xy[j, 0]], [xy[j, 1]], marker=st.marker, markersize=size, color=st.color,
                markeredgecolor="white" if j % 2 == 0 else st.color,
                markerfacecolor=st.color if j % 2 == 0 else "white", markeredgewidth=1.2,
                linestyle="none", zorder=6, label=f"{m.names[j]} alone noisy")
    return xy


def _axis_labels(m: ElementaryMapData, frame: geometry.Frame) -> tuple[str, str]:
    if frame.axes is None:
        a, b = m.coef_names
        return f"coefficient on {a}", f"coefficient on {b}"
    if m.q == 1:
        return "largest spread around the fitted point", "second-largest spread"
    return "along the fitted flat (main direction)", "across the flat (largest residual spread)"


def _flat_word(q: int) -> str:
    return {1: "point", 2: "line", 3: "plane"}.get(q, f"{q - 1}-dimensional flat")


def _set_limits(fig, ax, lims: tuple[float, float, float, float]) -> bool:
    """Set the limits; use equal scales on both axes (so distances look true) unless
    that would squeeze the data into a sliver (range ratio beyond 2.5 either way).
    Returns whether the scales are equal."""
    x0, x1, y0, y1 = lims
    ax.set_xlim(x0, x1)
    ax.set_ylim(y0, y1)
    settle(fig)
    bb = ax.get_window_extent()
    rb = bb.width / max(bb.height, 1.0)
    rd = (x1 - x0) / (y1 - y0)
    if not (1 / 2.5 <= rd / rb <= 2.5):
        return False
    if rd > rb:
        c, h = 0.5 * (y0 + y1), (x1 - x0) / rb
        ax.set_ylim(c - h / 2, c + h / 2)
    else:
        c, wd = 0.5 * (x0 + x1), (y1 - y0) * rb
        ax.set_xlim(c - wd / 2, c + wd / 2)
    ax.set_aspect("equal", adjustable="box")
    keep_inside(fig)  # the new limits bring new tick labels: keep them on the figure before labels are placed
    return True


def _label_flat(fig, ax, p0: np.ndarray, dvec: np.ndarray, text: str, avoid=None):
    """Write ``text`` along the flat line, ending near the right end of its visible
    part, where it covers the fewest points; returns display boxes covering the
    label (for the point labels to avoid), or None when the line is not visible."""
    settle(fig)
    x0, x1 = ax.get_xlim()
    y0, y1 = ax.get_ylim()
    ts = []
    for lim, c, dc in ((x0, p0[0], dvec[0]), (x1, p0[0], dvec[0]), (y0, p0[1], dvec[1]), (y1, p0[1], dvec[1])):
        if abs(dc) > 1e-12:
            ts.append((lim - c) / dc)
    tol_x, tol_y = 1e-9 * (x1 - x0), 1e-9 * (y1 - y0)
    inside = [t for t in ts
              if x0 - tol_x <= p0[0] + t * dvec[0] <= x1 + tol_x and y0 - tol_y <= p0[1] + t * dvec[1] <= y1 + tol_y]
    if len(inside) < 2:
        return None
    ends = [p0 + min(inside) * dvec, p0 + max(inside) * dvec]
    disp = ax.transData.transform(np.array(ends))
    far, near = (ends[1], ends[0]) if disp[1][0] >= disp[0][0] else (ends[0], ends[1])
    d = ax.transData.transform([far])[0] - ax.transData.transform([near])[0]
    ang = math.degrees(math.atan2(d[1], d[0]))
    renderer = fig.canvas.get_renderer()
    box = ax.get_window_extent(renderer)
    pts = ax.transData.transform(np.asarray(avoid, float)) if avoid is not None else np.zeros((0, 2))
    px_pt = fig.dpi / 72.0
    pad = 6.0 * px_pt
    probe = ax.annotate(text, xy=tuple(near), fontsize=8.5, ha="center", va="bottom",
                        multialignment="center")
    ext = probe.get_window_extent(renderer)
    probe.remove()
    length, height = ext.width, ext.height
    c, s_ = math.cos(math.radians(ang)), math.sin(math.radians(ang))
    best = None
    off = 5.0
    for side in (1, -1):
        for frac in (0.5, 0.35, 0.65, 0.2, 0.8, 0.1, 0.9):
            at = near + frac * (far - near)
            t = ax.annotate(text, xy=tuple(at), xytext=(-side * off * s_, side * off * c),
                            textcoords="offset points", fontsize=8.5, color=INK, ha="center",
                            va="bottom" if side > 0 else "top", rotation=ang, rotation_mode="anchor",
                            multialignment="center")
            bb = t.get_window_extent(renderer)
            t.remove()
            anchor = ax.transData.transform([at])[0]
            cost = 0.0
            for p in pts:  # points under the text's own (rotated) rectangle
                u = (p[0] - anchor[0]) * c + (p[1] - anchor[1]) * s_
                v = side * (-(p[0] - anchor[0]) * s_ + (p[1] - anchor[1]) * c)
                if abs(u) <= length / 2 + pad and -pad <= v <= off * px_pt + height + pad:
                    cost += 1.0
            cost += 2.0 * (max(0.0, box.x0 - bb.x0) + max(0.0, bb.x1 - box.x1) + max(0.0, box.y0 - bb.y0)
                           + max(0.0, bb.y1 - box.y1)) / pad
            if best is None or cost < best[0] - 1e-9:
                best = (cost, at, anchor, side)
    side = best[3]
    t = ax.annotate(text, xy=tuple(best[1]), xytext=(-side * off * s_, side * off * c),
                    textcoords="offset points", fontsize=8.5, color=INK, ha="center",
                    va="bottom" if side > 0 else "top", rotation=ang, rotation_mode="anchor",
                    multialignment="center",
                    bbox=dict(boxstyle="square,pad=0.1", facecolor="white", edgecolor="none", alpha=0.75))
    t.set_in_layout(False)
    # the rotated label as a chain of small squares, for the point labels to avoid
    anchor = best[2]
    nrm = np.array([-s_, c])
    centre = anchor + side * nrm * (off * px_pt + height / 2)
    k = max(2, int(length / max(height, 1.0)))
    boxes = []
    for u in np.linspace(-length / 2, length / 2, k):
        q = centre + u * np.array([c, s_])
        boxes.append((q[0] - height / 2, q[1] - height / 2, q[0] + height / 2, q[1] + height / 2))
    return boxes


def _point_rows(m: ElementaryMapData, frame: geometry.Frame, extra: dict) -> list[dict]:
    cn = m.coef_names
    xy = frame.coords(m.points)
    rows = []
    for j, nm in enumerate(m.names):
        r = dict(extra, kind="elementary regression", alone_noisy=nm)
        r.update({f"coefficient on {c}": m.points[j, i] for i, c in enumerate(cn)})
        r.update(distance_to_flat=m.distances[j], plot_x=xy[j, 0], plot_y=xy[j, 1])
        rows.append(r)
    fp = frame.coords(m.flat_point)[0]
    r = dict(extra, kind="flat point", alone_noisy=None)
    r.update({f"coefficient on {c}": m.flat_point[i] for i, c in enumerate(cn)})
    r.update(distance_to_flat=None, plot_x=fp[0], plot_y=fp[1])
    rows.append(r)
    for k in range(m.flat_dirs.shape[0]):
        r = dict(extra, kind=f"flat direction {k + 1}", alone_noisy=None)
        r.update({f"coefficient on {c}": m.flat_dirs[k, i] for i, c in enumerate(cn)})
        r.update(distance_to_flat=None, plot_x=None, plot_y=None)
        rows.append(r)
    if m.simplex is not None:
        sxy = frame.coords(m.simplex)
        for k in range(m.simplex.shape[0]):
            r = dict(extra, kind="Frisch set vertex", alone_noisy=None)
            r.update({f"coefficient on {c}": m.simplex[k, i] for i, c in enumerate(cn)})
            r.update(distance_to_flat=None, plot_x=sxy[k, 0], plot_y=sxy[k, 1])
            rows.append(r)
    return rows


def _vec(v: np.ndarray) -> str:
    return "(" + ", ".join(num(x) for x in v) + ")"


def elementary_map(points, *, names: Sequence[str], ref: str, flat_point, flat_dirs, distances,
                   simplex=None, title: str | None = None,
                   name: str = "elementary-map") -> FigureResult:
    """The n elementary regressions as points, with the fitted flat and its RMS band.

    Each point is the least-squares relation obtained when one variable alone
    is treated as noisy, normalised so the coefficient on ``ref`` is 1 [1]_.
    For n = 3 the plane is that of the two remaining coefficients. For n > 3
    the figure shows a 2-D projection chosen so the flat is visible: the
    horizontal axis runs along the flat's main direction (the direction within
    the flat along which the points spread most), the vertical axis along the
    largest spread of the points away from the flat, so the flat appears as the
    horizontal line through 0; the description says so and gives the share of
    squared distances the vertical axis carries. For q = 1 (the flat is a
    point) the axes are the two directions of largest spread around it.

    Parameters
    ----------
    points, names, ref, flat_point, flat_dirs, distances, simplex
        See :class:`ElementaryMapData`.
    title : str, optional
        Drawn above the map.
    name : str
        File stem.

    Returns
    -------
    FigureResult
        Table: one row per elementary regression (``kind`` "elementary
        regression", ``alone_noisy``, one ``coefficient on X`` column per
        coordinate, ``distance_to_flat``, ``plot_x``/``plot_y`` as drawn), then
        the flat point, the flat directions and any Frisch set vertices.

    References
    ----------
    .. [1] R. Frisch, Statistical Confluence Analysis by Means of Complete
           Regression Systems, 1934.
    .. [2] S. Klepper and E. E. Leamer, Consistent sets of estimates for
           regressions with errors in all variables, Econometrica 52, 1984.
    """
    m = ElementaryMapData(points, tuple(names), ref, flat_point, flat_dirs, distances, simplex)
    frame = geometry.frame_for([m])
    n, q = len(m.names), m.q
    with style_context():
        fig = new_figure(5.0 + (0.3 if title else 0.0))
        ax = fig.add_subplot(1, 1, 1)
        if title:
            ax.set_title(title)
        lims = _limits([m], frame)
        if m.simplex is not None:
            _draw_simplex(ax, m, frame)
        p0, dvec = _draw_flat(ax, m, frame, color=PALETTE[0])
        xy = _draw_points(ax, m, frame)
        xl, yl = _axis_labels(m, frame)
        ax.set_xlabel(xl)
        ax.set_ylabel(yl)
        equal = _set_limits(fig, ax, lims)
        anchors = [xy]
        texts = [f"{v} alone noisy" for v in m.names]
        colors = [series_style(j).color for j in range(n)]
        boxes = []
        if dvec is not None:
            flat_text = f"fitted {_flat_word(q)} (corank {q})"
            if frame.axes is not None and q >= 3:
                flat_text += ", seen edge-on"
            flat_text += f"\nband: RMS distance {num_fig(m.rms)}"
            boxes += _label_flat(fig, ax, p0, dvec, flat_text, avoid=xy) or []
        else:
            anchors.append(p0[None, :])
            texts.append(f"fitted point (corank 1)\ncircle: RMS distance {num_fig(m.rms)}")
            colors.append(MUTED)
        if m.simplex is not None:
            anchors.append(_hull_2d(frame.coords(m.simplex)).mean(axis=0)[None, :])
            texts.append("Frisch set")
            colors.append(PALETTE[2])
        place_point_labels(fig, ax, np.vstack(anchors), texts, colors=colors, boxes=boxes)

    table = pd.DataFrame(_point_rows(m, frame, {}))
    desc = (f"Scatter of the {n} elementary regressions of {', '.join(m.names)}, each normalised so "
            f"the coefficient on {m.ref} is 1; each point is the relation found when one variable "
            f"alone is treated as noisy. ")
    if frame.axes is None:
        desc += (f"Horizontal axis: coefficient on {m.coef_names[0]}; vertical axis: coefficient on "
                 f"{m.coef_names[1]}" + ("" if equal else " (the two axes are not to the same scale)") + ". ")
        pts = "; ".join(f"{v} alone noisy at {_vec(m.points[j])}, distance {num(m.distances[j])}"
                        for j, v in enumerate(m.names))
    else:
        if q == 1:
            desc += (f"The {n - 1} coefficients are shown in a 2-D projection: the axes are the two "
                     f"directions of largest spread of the points around the fitted point "
                     f"({num(100 * frame.share, 2)}% of the squared distances). ")
        else:
            desc += (f"The {n - 1} coefficients are shown in a 2-D projection chosen so the fitted flat "
                     f"is visible: the horizontal axis runs along the flat's main direction, the vertical "
                     f"axis along the largest spread of the points away from the flat "
                     f"({num(100 * frame.share, 2)}% of the squared distances), so the flat appears as "
                     f"the horizontal line at 0. Full coefficients are in the table. ")
        xyp = frame.coords(m.points)
        pts = "; ".join(f"{v} alone noisy at {_vec(xyp[j])} in the projection, distance "
                        f"{num(m.distances[j])}" for j, v in enumerate(m.names))
    desc += f"Points: {pts}. "
    if q == 1:
        desc += (f"Corank 1: the fitted flat is a single point, {_vec(m.flat_point)}; the circle around "
                 f"it has the root-mean-square (RMS) distance {num(m.rms)} as radius. ")
    else:
        main = m.main_direction()
        desc += (f"Corank {q}: the points should lie on a {_flat_word(q)}; the fitted {_flat_word(q)} "
                 f"passes through {_vec(m.flat_point)}"
                 + (f" with direction {_vec(main)}" if q == 2 else "")
                 + f". The band around it has the root-mean-square (RMS) distance of the points, "
                 f"{num(m.rms)}, as half-width. ")
    if m.simplex is not None:
        rng = "; ".join(f"coefficient on {c} from {num_range(m.simplex[:, i].min(), m.simplex[:, i].max())}"
                        for i, c in enumerate(m.coef_names))
        desc += (f"Shaded and hatched: the Frisch set (convex hull of {plural(m.simplex.shape[0], 'vertex', 'vertices')}), "
                 f"the relations consistent with independent noise of unknown variances: {rng}.")
    alt = fit_alt(
        f"Elementary regressions of {n} variables normalised on {m.ref}: RMS distance {num(m.rms)} "
        f"from the fitted {_flat_word(q)} (corank {q}).",
        f"{n} elementary regressions: RMS distance {num(m.rms)} from the fitted {_flat_word(q)} (corank {q}).")
    return FigureResult(name, fig, alt, desc.strip(), table)


def _panel_indices(w: int, cap: int) -> list[int]:
    """Which of ``w`` windows get a panel: all when ``w <= cap``, else ``cap`` evenly spaced
    ones, the first and the last among them."""
    if w <= cap:
        return list(range(w))
    return sorted({int(round(i * (w - 1) / (cap - 1))) for i in range(cap)})


def drawn_angles_deg(maps: Sequence[ElementaryMapData], reference: ElementaryMapData,
                     frame: geometry.Frame) -> np.ndarray | None:
    """Angle, on the drawing's axes, between each window's drawn line and the reference's
    (None when the sets are points). This is the number the gallery's description states."""
    ref = reference.main_direction()
    if ref is None:
        return None
    r2 = frame.direction(ref)
    out = []
    for m in maps:
        d = m.main_direction()
        if d is None:
            return None
        out.append(geometry.line_angle_deg(r2, frame.direction(d)))
    return np.array(out)


def _fixed_grid(fig, top, cells: list, ncols: int, top_ratio: float) -> None:
    """Place a wide top axes over a grid of same-sized small panels, measured once.

    ``cells`` are the grid's axes row by row (hidden ones are unused cells). The layout follows
    the rules the constrained layout applies to such a grid (axes of one size; per column, the
    largest left and right decoration of its axes; per row, the largest top and bottom one; the
    outside legend and the figure's x and y labels in margins of their own, each with the same
    pads), but measures only what differs: the top axes, one panel of each kind of decoration
    (tick labels on the left, at the bottom, both, none), every panel title's width (titles are
    the only text that differs between panels of a kind) and the figure-level texts. Positions
    are final after this one pass: the tick labels do not depend on the axes' size (fixed tick
    counts), and text sizes never change.
    """
    import matplotlib

    renderer = fig.canvas.get_renderer()
    wpx, hpx = fig.bbox.width, fig.bbox.height
    w_pad = matplotlib.rcParams["figure.constrained_layout.w_pad"] * fig.dpi
    h_pad = matplotlib.rcParams["figure.constrained_layout.h_pad"] * fig.dpi

    def margins(ax):  # decoration outside the axes box: left, right, bottom, top (px)
        box, tight = ax.get_window_extent(renderer), ax.get_tightbbox(renderer)
        return (max(box.x0 - tight.x0, 0.0), max(tight.x1 - box.x1, 0.0),
                max(box.y0 - tight.y0, 0.0), max(tight.y1 - box.y1, 0.0))

    def kind(ax):
        return (ax.yaxis.get_tick_params().get("labelleft", True),
                ax.xaxis.get_tick_params().get("labelbottom", True))

    nrows = math.ceil(len(cells) / ncols)
    shown = [ax.get_visible() for ax in cells]
    measured = {}
    for ax, v in zip(cells, shown):
        if v and kind(ax) not in measured:
            measured[kind(ax)] = margins(ax)
    none = (0.0, 0.0, 0.0, 0.0)
    dec = [measured[kind(ax)] if v else none for ax, v in zip(cells, shown)]
    title_w = [max(t.get_window_extent(renderer).width for t in (ax.title, ax._left_title, ax._right_title))
               if v else 0.0 for ax, v in zip(cells, shown)]
    m_top = margins(top)
    left = [max(d[0] for d in dec[c::ncols]) for c in range(ncols)]
    right = [max(d[1] for d in dec[c::ncols]) for c in range(ncols)]
    left[0] = max(left[0], m_top[0])
    right[-1] = max(right[-1], m_top[1])
    bottom = [max(d[2] for d in dec[r * ncols:(r + 1) * ncols]) for r in range(nrows)]
    above = [max(d[3] for d in dec[r * ncols:(r + 1) * ncols]) for r in range(nrows)]

    # figure-level texts, placed where the constrained layout puts them, and their margins
    x_lo, y_lo, y_hi = 0.0, 0.0, hpx
    if fig._supylabel is not None:
        fig._supylabel.set_x(w_pad / wpx)
        x_lo = fig._supylabel.get_window_extent(renderer).width + 2 * w_pad
    if fig._supxlabel is not None:
        fig._supxlabel.set_y(h_pad / hpx)
        y_lo = fig._supxlabel.get_window_extent(renderer).height + 2 * h_pad
    if fig._suptitle is not None:
        fig._suptitle.set_y(1 - h_pad / hpx)
        y_hi -= fig._suptitle.get_window_extent(renderer).height + 2 * h_pad
    for leg in fig.legends:
        y_hi -= leg.get_window_extent(renderer).height + 2 * h_pad

    # columns: equal axes widths; a panel title longer than its axes widens its column's right margin
    room = wpx - x_lo - sum(left) - 2 * w_pad * ncols
    longest = [max(title_w[c::ncols]) for c in range(ncols)]
    aw = (room - sum(right)) / ncols
    binding: set[int] = set()
    while True:  # the columns whose title overhangs: each pass adds one at least, so at most ncols passes
        more = {c for c in range(ncols) if longest[c] - aw > right[c]} | binding
        if more == binding or len(more) == ncols:
            break
        binding = more
        aw = ((room - sum(longest[c] for c in binding) - sum(right[c] for c in range(ncols) if c not in binding))
              / (ncols - len(binding)))
    right = [max(right[c], longest[c] - aw) for c in range(ncols)]
    xs, x = [], x_lo
    for c in range(ncols):
        xs.append(x + w_pad + left[c])
        x = xs[-1] + aw + right[c] + w_pad
    # rows: the top axes is top_ratio panels high
    ah = ((y_hi - y_lo - m_top[2] - m_top[3] - sum(bottom) - sum(above) - 2 * h_pad * (nrows + 1))
          / (top_ratio + nrows))
    y = y_hi - h_pad - m_top[3] - top_ratio * ah
    top.set_position([xs[0] / wpx, y / hpx, (xs[-1] + aw - xs[0]) / wpx, top_ratio * ah / hpx], which="both")
    y -= m_top[2] + h_pad
    for r in range(nrows):
        y -= h_pad + above[r] + ah
        for c, ax in enumerate(cells[r * ncols:(r + 1) * ncols]):
            ax.set_position([xs[c] / wpx, y / hpx, aw / wpx, ah / hpx], which="both")
        y -= bottom[r] + h_pad


def window_gallery(maps: Sequence[ElementaryMapData], labels: Sequence[str], *,
                   reference: ElementaryMapData | None = None, title: str | None = None,
                   set_name: str = "fitted flat", subspace_angles: tuple[str, Sequence[float]] | None = None,
                   max_panels: int = 24, name: str = "window-gallery") -> FigureResult:
    """Every window in ONE coordinate frame: an overlay of all windows, then one panel per window.

    The top panel draws every window's fitted set (a line for two relations, a
    point for one; shade from light to dark follows the windows' order) and
    every window's elementary regressions (one marker per variable), so the
    reader sees whether the set stays put (or moves at a break) while single
    normalised points wander. Below, small multiples on the very same axes show
    one window each with its points, its set and the band of their RMS distance
    from it. All panels use one drawing plane (for n > 3 a common projection:
    the horizontal axis along the direction closest to all windows' sets, the
    vertical axis along the largest pooled spread of the points away from
    them). The description states the largest angle between a window's drawn
    line and the full sample's, measured on the drawing's axes
    (:func:`drawn_angles_deg`), beside the principal angles the page reports.

    Parameters
    ----------
    maps : sequence of ElementaryMapData
        One per window, all with the same ``names`` and ``ref``; ``flat_point``
        and ``flat_dirs`` are the set drawn (``set_name``).
    labels : sequence of str
        Window labels, one per map (panel titles).
    reference : ElementaryMapData, optional
        The full sample; its set is drawn dashed grey in every panel and
        angles are measured against it.
    set_name : str
        What the drawn set is, e.g. ``"relation set under equal noise"``.
    subspace_angles : (str, sequence of float), optional
        What the page states about the same sets: a description of the
        measure and the per-window angle to the full sample in degrees
        (principal angles between relation subspaces).
    max_panels : int
        At most this many small panels (evenly spaced windows, first and last
        included); the overlay and the table always hold every window.
    title, name : str
        Optional title; file stem.

    Returns
    -------
    FigureResult
        Table: the rows of :func:`elementary_map`'s table for every window,
        with a ``window`` column (``"full sample"`` for the reference).

    References
    ----------
    .. [1] R. Frisch, Statistical Confluence Analysis by Means of Complete
           Regression Systems, 1934.
    """
    func = "window_gallery"
    maps = list(maps)
    if not maps:
        raise fail(func, "maps", "is empty", "Pass one ElementaryMapData per window.")
    if not 1 <= int(max_panels) <= _MAX_PANELS:
        raise fail(func, "max_panels", f"must be between 1 and {_MAX_PANELS}",
                   "Pass a smaller number; the overlay shows every window.", got=max_panels)
    for i, m in enumerate(maps):
        if not isinstance(m, ElementaryMapData):
            raise fail(func, f"maps[{i}]", "must be an ElementaryMapData", "Build one per window.",
                       got=type(m).__name__)
        if m.names != maps[0].names or m.ref != maps[0].ref:
            raise fail(func, f"maps[{i}]", "has other variables or another reference variable than maps[0]",
                       "Normalise every window on the same variable.")
    if reference is not None and (reference.names != maps[0].names or reference.ref != maps[0].ref):
        raise fail(func, "reference", "has other variables or another reference variable than the windows",
                   "Normalise the full sample on the same variable.")
    wl = as_labels(func, "labels", labels, length=len(maps))
    w = len(maps)
    m0 = maps[0]
    n = len(m0.names)
    allm = maps + ([reference] if reference is not None else [])
    frame = geometry.frame_for(allm)
    shown = _panel_indices(w, int(max_panels))
    ws = len(shown)
    ncols = ws if ws <= 3 else (3 if ws <= 9 else 4)
    nrows = math.ceil(ws / ncols)
    x0, x1, y0, y1 = _limits(allm, frame)
    shade = [SEQUENTIAL(0.35 + 0.65 * k / max(w - 1, 1)) for k in range(w)]
    with style_context():
        panel_h = 2.1 if ncols <= 3 else 1.6
        over_h = 3.2
        fig = new_figure(1.0 + over_h + panel_h * nrows + (0.3 if title else 0.0))
        drop_layout_engine(fig)  # laid out by _fixed_grid: measured once, no constrained-layout pass
        # provisional boxes (wide, so no title overhangs while measured); _fixed_grid places them
        ov = fig.add_axes((0.1, 0.5, 0.8, 0.3))
        axs = [[fig.add_axes((0.1, 0.1, 0.8, 0.3), sharex=ov, sharey=ov) for c in range(ncols)]
               for r in range(nrows)]
        if title:
            fig.suptitle(title, x=0.01, ha="left", fontweight="bold", fontsize=11)
        # the overlay: every window's set and points in one frame
        ov.set_title(f"All {plural(w, 'window')} in one frame", fontsize=10, fontweight="bold", loc="left",
                     pad=4)
        if reference is not None:
            _draw_flat(ov, reference, frame, color=MUTED, band=False, linestyle=(0, (4, 2)), linewidth=1.3,
                       zorder=3)
        for k, m in enumerate(maps):
            _draw_flat(ov, m, frame, color=shade[k], band=False, linewidth=1.1, zorder=2)
        cloud = np.array([frame.coords(m.points) for m in maps])  # (w, n, 2)
        for j in range(n):
            st = series_style(j)
            ov.plot(cloud[:, j, 0], cloud[:, j, 1], marker=st.marker, markersize=4.5, color=st.color,
                    markerfacecolor=st.color if j % 2 == 0 else "white", markeredgewidth=1.0,
                    linestyle="none", alpha=0.85, zorder=6, label=f"{m0.names[j]} alone noisy")
        ov.tick_params(labelbottom=True)
        # the small multiples, one window each, same axes
        for k in range(nrows * ncols):
            ax = axs[k // ncols][k % ncols]
            if k >= ws:
                ax.set_visible(False)
                continue
            m = maps[shown[k]]
            if m.simplex is not None:
                _draw_simplex(ax, m, frame)
            if reference is not None:
                _draw_flat(ax, reference, frame, color=MUTED, band=False, linestyle=(0, (4, 2)),
                           linewidth=1.1, zorder=2)
            _draw_flat(ax, m, frame, color=PALETTE[0])
            _draw_points(ax, m, frame, size=6 if ncols <= 3 else 5)
            ax.set_title(wl[shown[k]], fontsize=9, fontweight="normal", loc="left", pad=3)
            ax.annotate(f"RMS {num_fig(m.rms)}", xy=(1, 0), xycoords="axes fraction", xytext=(-3, 3),
                        textcoords="offset points", ha="right", va="bottom", fontsize=MIN_TEXT_PT, color=MUTED)
            ax.tick_params(labelsize=MIN_TEXT_PT, labelbottom=k + ncols >= ws, labelleft=k % ncols == 0)
        if frame.axes is None:
            xl, yl = _axis_labels(m0, frame)
        elif m0.q == 1:
            xl, yl = "largest spread around the fitted points", "second-largest spread"
        else:
            xl, yl = "along the sets (direction closest to all)", "across the sets (largest spread of the points)"
        fig.supxlabel(xl, fontsize=9.5)
        fig.supylabel(yl, fontsize=9.5)
        from matplotlib.lines import Line2D
        handles, hl = ov.get_legend_handles_labels()
        handles.append(Line2D([], [], color=shade[-1], linewidth=1.3) if m0.q > 1 else
                       Line2D([], [], color=shade[-1], marker="+", markersize=9, markeredgewidth=2,
                              linestyle="none"))
        hl.append(f"{set_name}, one per window (light: early, dark: late)")
        if reference is not None:
            handles.append(Line2D([], [], color=MUTED, linestyle=(0, (4, 2)), linewidth=1.3) if m0.q > 1 else
                           Line2D([], [], color=MUTED, marker="+", markersize=9, markeredgewidth=2,
                                  linestyle="none"))
            hl.append(f"full sample's {set_name}")
        fig.legend(handles, hl, loc="outside upper center", ncol=2 if n > 3 else 3, fontsize=8.5,
                   handletextpad=0.3, columnspacing=1.0)
        # shared axes, each axis fitted to the data (the panels are too small for equal scales)
        ov.set_xlim(x0, x1)
        ov.set_ylim(y0, y1)
        ov.xaxis.set_major_locator(MaxNLocator(nbins=4, steps=[1, 2, 2.5, 5, 10]))
        # no tick label at the top edge, where it would meet the panel title or legend above
        ov.yaxis.set_major_locator(MaxNLocator(nbins=4, steps=[1, 2, 2.5, 5, 10], prune="upper"))
        equal = False
        _fixed_grid(fig, ov, [a for row in axs for a in row], ncols, over_h / panel_h)
        settle(fig)

    rows = []
    if reference is not None:
        rows += _point_rows(reference, frame, {"window": "full sample"})
    for m, lab in zip(maps, wl):
        rows += _point_rows(m, frame, {"window": lab})
    table = pd.DataFrame(rows)

    rms = np.array([m.rms for m in maps])
    i_lo, i_hi = int(np.argmin(rms)), int(np.argmax(rms))
    q_set = sorted({m.q for m in maps})
    panels = (f"{plural(ws, 'panel')}, one per window" if ws == w else
              f"{plural(ws, 'panel')} for {ws} evenly spaced windows of {w} (first and last included; "
              f"every window is in the top panel and the table)")
    desc = (f"Top: all {plural(w, 'window')} in one frame, each window's {set_name}, light to dark in "
            f"time order, and its {n} elementary regressions normalised on {m0.ref} (coefficient on "
            f"{m0.ref} fixed at 1). Below: {panels}, with the same axes. ")
    if frame.axes is None:
        desc += (f"Horizontal axis: coefficient on {m0.coef_names[0]}; vertical axis: coefficient on "
                 f"{m0.coef_names[1]}" + ("" if equal else " (not to the same scale)") + ". ")
    else:
        desc += (f"The {n - 1} coefficients are shown in one common 2-D projection: horizontal along the "
                 f"direction closest to all windows' sets, vertical along the largest spread of the points "
                 f"away from them ({num(100 * frame.share, 2)}% of the squared distances). ")
    desc += ("Corank " + join_q(q_set) + " in these windows. ")
    drawn = drawn_angles_deg(maps, reference, frame) if reference is not None else None
    if drawn is not None:
        j = int(np.argmax(drawn))
        desc += (f"Measured in coefficient units on the drawing's axes (not drawn to the same scale, so "
                 f"angles on screen look different), every window's line is within {angle_text(drawn[j])} "
                 f"degrees of the full sample's (largest: {wl[j]}). ")
    elif reference is not None and all(m.q == 1 for m in allm):
        d0 = frame.coords(reference.flat_point)[0]
        dist = np.array([geometry.norm(frame.coords(m.flat_point)[0] - d0) for m in maps])
        j = int(np.argmax(dist))
        desc += (f"Each window's fitted point lies within {num(dist[j])} (coefficient units, on the drawing) "
                 f"of the full sample's (farthest: {wl[j]}). ")
    if subspace_angles is not None:
        what, ang = subspace_angles
        ang = np.asarray(ang, dtype=float)
        if ang.size == w and np.isfinite(ang).any():
            j = int(np.nanargmax(ang))
            desc += (f"The page's measure, {what}, is at most {fmt(ang[j])} degrees ({wl[j]}); it "
                     f"compares whole relation subspaces, so it need not equal the angle between drawn "
                     f"lines. ")
    desc += (f"The RMS distance of the points from the window's {set_name} ranges from {num(rms[i_lo])} "
             f"({wl[i_lo]}) to {num(rms[i_hi])} ({wl[i_hi]}). ")
    moves = []
    for j, v in enumerate(m0.names):
        p = np.array([m.points[j] for m in maps])
        diff = p[:, None, :] - p[None, :, :]
        moves.append(float(np.sqrt((diff ** 2).sum(-1)).max()))
    jm = int(np.argmax(moves))
    desc += (f"Across windows the point for {m0.names[jm]} alone noisy moves the most, by up to "
             f"{num(moves[jm])} in coefficient units; "
             + "; ".join(f"{v} alone noisy up to {num(moves[j])}" for j, v in enumerate(m0.names) if j != jm)
             + ".")
    if drawn is not None:
        alt = fit_alt(
            f"{plural(w, 'window')} in one frame: each window's {set_name} within {angle_text(drawn.max())} "
            f"degrees of the full sample's while single points move up to {num(max(moves))}.",
            f"{plural(w, 'window')} in one frame: lines within {angle_text(drawn.max())} degrees; points move "
            f"up to {num(max(moves))}.")
    else:
        alt = fit_alt(
            f"{plural(w, 'window')} in one frame: elementary regressions around each window's {set_name}; "
            f"RMS distance {num(rms[i_lo])} to {num(rms[i_hi])}.",
            f"{plural(w, 'window')}: RMS distance {num(rms[i_lo])} to {num(rms[i_hi])}.")
    return FigureResult(name, fig, alt, desc.strip(), table)


def join_q(qs: list[int]) -> str:
    return " or ".join(str(q) for q in qs)
