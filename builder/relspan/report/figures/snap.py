"""Plotted numbers at a stated precision, so figure bytes do not depend on floating-point noise.

Two builds of the same inputs on different CPU kernels of the maths library
(e.g. OpenBLAS ``Haswell`` and ``SkylakeX``) compute the same quantities up to
the last bits. Drawn as they are, those bits reach the SVG: path coordinates,
a label's ``rotate(-0)`` against no rotation, and the clip-path ids that
matplotlib derives from hashed coordinates. :func:`snap_figure` rounds every
number a figure draws in data coordinates (line and patch vertices, offsets,
text anchors and angles, axis limits, image values) to :data:`FIGURE_DIGITS`
significant digits: of the axis span on a linear axis (so a date axis keeps
its resolution), of each value on a log axis. Six significant digits are
below anything a reader can see (a 760 px figure resolves about three) and
far above the noise of closed-form results (about 1e-12 relative).

The precision is one constant in one place; when the per-quantity precision
table of :mod:`relspan.precision` lands, this constant is read from it.
"""

from __future__ import annotations

import math

import numpy as np
from matplotlib.collections import Collection
from matplotlib.figure import Figure
from matplotlib.image import AxesImage
from matplotlib.lines import Line2D
from matplotlib.patches import Circle, Ellipse, Patch, PathPatch, Polygon, Rectangle
from matplotlib.text import Annotation, Text

__all__ = ["FIGURE_DIGITS", "round_sig", "round_grid", "snap_figure"]

#: significant digits of every number a figure draws (data coordinates, angles, limits)
FIGURE_DIGITS = 6


def round_sig(values, digits: int = FIGURE_DIGITS, *, zero_below: float = 0.0) -> np.ndarray:
    """``values`` rounded to ``digits`` significant digits (elementwise; non-finite kept).

    Entries with ``abs(x) <= zero_below`` become exactly 0 (never -0).
    """
    x = np.array(values, dtype=float, copy=True)
    fin = np.isfinite(x) & (x != 0)
    if fin.any():
        mag = np.floor(np.log10(np.abs(x[fin])))
        scale = 10.0 ** (digits - 1 - mag)
        x[fin] = np.round(x[fin] * scale) / scale
    x[np.isfinite(x) & (np.abs(x) <= zero_below)] = 0.0
    return x + 0.0  # -0.0 -> 0.0


def _round_scalar(v: float, digits: int, zero_below: float) -> float:
    return float(round_sig([v], digits, zero_below=zero_below)[0])


def _span(lo: float, hi: float) -> float:
    s = abs(float(hi) - float(lo))
    return s if math.isfinite(s) and s > 0 else 1.0


def round_grid(values, quantum: float) -> np.ndarray:
    """``values`` rounded to whole multiples of ``quantum`` (non-finite kept; never -0)."""
    x = np.array(values, dtype=float, copy=True)
    fin = np.isfinite(x)
    x[fin] = np.round(x[fin] / quantum) * quantum
    return x + 0.0


def _axis_rounder(scale: str, lo: float, hi: float, digits: int):
    """How one axis' data are rounded: on a linear axis to ``digits`` significant digits of its span
    (a grid of 10**(floor(log10(span)) - digits + 1), so dates and offsets keep their resolution);
    on any other scale each value to ``digits`` significant digits."""
    if scale != "linear":
        return lambda a: round_sig(a, digits)
    span = _span(lo, hi)
    quantum = 10.0 ** (math.floor(math.log10(span)) - digits + 1)
    mid = 0.5 * (float(lo) + float(hi)) if math.isfinite(float(lo) + float(hi)) else 0.0

    def rounder(a):
        a = np.asarray(a, dtype=float)
        out = round_grid(a, quantum)
        # far outside the view (the clipped ends of bands and lines drawn "to infinity") only the
        # direction matters: fewer digits there, so their last-bit noise never reaches the bytes
        far = np.isfinite(a) & (np.abs(a - mid) > 1.5 * span)
        if far.any():
            out[far] = round_sig(a[far], digits - 2)
        return out

    return rounder


def snap_figure(fig: Figure, digits: int = FIGURE_DIGITS) -> None:
    """Round every number ``fig`` draws in data coordinates to ``digits`` significant digits.

    On a linear axis the digits are those of the axis span (values on a grid of
    ``10 ** (floor(log10(span)) - digits + 1)``), on a log axis those of each
    value. Axis limits are rounded first (they fix the transforms and the
    ticks), then the data of lines, patches, collections, images and texts.
    Text rotations are rounded to 1e-6 degrees (so -0 and 0 agree); tick label
    rotations are the constants the figure functions set. Call it
    when the figure is complete, before its layout is frozen.
    """
    for ax in fig.axes:
        x0, x1 = ax.get_xlim()
        y0, y1 = ax.get_ylim()
        fx = _axis_rounder(ax.get_xscale(), x0, x1, digits)
        fy = _axis_rounder(ax.get_yscale(), y0, y1, digits)
        # only limits that change are set: setting a limit of an axes that shares it (the small
        # multiples of a gallery) sets it on every sibling, which then all redo their ticks
        nx = tuple(float(v) for v in fx([x0, x1]))
        ny = tuple(float(v) for v in fy([y0, y1]))
        if nx != (x0, x1):
            ax.set_xlim(*nx)
        if ny != (y0, y1):
            ax.set_ylim(*ny)
        data = ax.transData

        def rxy(a, fx=fx, fy=fy):
            a = np.asarray(a, dtype=float)
            if a.ndim == 1:
                return np.array([fx([a[0]])[0], fy([a[1]])[0]])
            out = a.copy()
            out[:, 0] = fx(a[:, 0])
            out[:, 1] = fy(a[:, 1])
            return out

        def in_data(artist) -> bool:
            try:
                return artist.get_transform().contains_branch(data)
            except (AttributeError, ValueError):
                return False

        for line in ax.lines:
            if type(line).__name__ == "AxLine" or hasattr(line, "get_xy1"):
                xy1 = getattr(line, "get_xy1", lambda: None)()
                xy2 = getattr(line, "get_xy2", lambda: None)()
                if xy1 is not None:
                    _set_point(line.set_xy1, rxy(xy1))
                if xy2 is not None:
                    _set_point(line.set_xy2, rxy(xy2))
                slope = getattr(line, "get_slope", lambda: None)()
                if slope is not None:
                    line.set_slope(_round_scalar(slope, digits, 0.0))
                continue
            if isinstance(line, Line2D):
                x, y = line.get_xdata(orig=False), line.get_ydata(orig=False)
                try:
                    x = np.asarray(x, dtype=float)
                    y = np.asarray(y, dtype=float)
                except (TypeError, ValueError):
                    continue
                if line.get_transform().contains_branch(data):
                    line.set_data(fx(x), fy(y))
                else:  # blended (e.g. axhline): round the data side as data, the other as a fraction
                    line.set_data(round_sig(x, digits), round_sig(y, digits))
        for patch in ax.patches:
            _snap_patch(patch, rxy, digits, in_data(patch))
        for coll in ax.collections:
            _snap_collection(coll, rxy, digits, in_data(coll), ax)
        for im in ax.images:
            if isinstance(im, AxesImage):
                arr = im.get_array()
                if arr is not None and np.issubdtype(np.asarray(arr).dtype, np.floating):
                    mask = np.ma.getmaskarray(arr)
                    im.set_array(np.ma.array(round_sig(np.ma.getdata(arr), digits), mask=mask))
        for t in ax.texts:
            _snap_text(t, rxy, digits)
    for t in fig.texts:
        _snap_text(t, None, digits)
    # tick labels are left alone: their texts come from the formatters (of rounded limits) at each
    # draw, and their rotations are constants set with ``tick_params`` (asking for the labels here
    # ran every axis's locator and formatter once more)


def _set_point(setter, xy) -> None:
    # matplotlib >= 3.10 takes one tuple; 3.8-3.9 take x and y
    try:
        setter(tuple(float(v) for v in xy))
    except TypeError:
        setter(*(float(v) for v in xy))


def _round_rot(angle: float) -> float:
    return round(float(angle), 6) + 0.0


def _snap_patch(patch: Patch, rxy, digits: int, data: bool) -> None:
    r = rxy if data else (lambda a: round_sig(a, digits))
    if isinstance(patch, Rectangle):
        x, y = r(np.array([patch.get_x(), patch.get_y()]))
        w, h = round_sig([patch.get_width(), patch.get_height()], digits)
        patch.set_bounds(x, y, w, h)
    elif isinstance(patch, Circle):
        patch.set_center(tuple(r(np.asarray(patch.get_center(), float))))
        patch.set_radius(float(round_sig([patch.get_radius()], digits)[0]))
    elif isinstance(patch, Ellipse):
        patch.set_center(tuple(r(np.asarray(patch.get_center(), float))))
        patch.set_width(float(round_sig([patch.get_width()], digits)[0]))
        patch.set_height(float(round_sig([patch.get_height()], digits)[0]))
    elif isinstance(patch, Polygon):
        xy = patch.get_xy()
        if len(xy):
            patch.set_xy(r(xy))
    elif isinstance(patch, PathPatch) and data:
        path = patch.get_path()
        path.vertices = r(path.vertices)


def _snap_collection(coll: Collection, rxy, digits: int, data: bool, ax) -> None:
    offs = coll.get_offsets()
    if offs is not None and np.size(offs) and coll.get_offset_transform().contains_branch(ax.transData):
        coll.set_offsets(rxy(np.asarray(offs, dtype=float).reshape(-1, 2)))
    if data:
        for path in coll.get_paths():
            if path.vertices.size:
                path.vertices = rxy(path.vertices)


def _snap_text(t: Text, rxy, digits: int) -> None:
    t.set_rotation(_round_rot(t.get_rotation()))
    if isinstance(t, Annotation):
        if rxy is not None and t.xycoords == "data":
            t.xy = tuple(rxy(np.asarray(t.xy, float)))
        elif isinstance(t.xycoords, str) and not callable(t.xycoords):
            t.xy = tuple(round_sig(np.asarray(t.xy, float), digits))
        tc = t.anncoords
        pos = np.asarray(t.get_position(), float)
        if rxy is not None and tc == "data":
            t.set_position(tuple(rxy(pos)))
        elif isinstance(tc, str):
            t.set_position(tuple(round_sig(pos, digits)))
        return
    pos = t.get_position()
    try:
        pos = np.asarray(pos, dtype=float)
    except (TypeError, ValueError):
        return
    if rxy is not None and t.axes is not None and t.get_transform().contains_branch(t.axes.transData):
        t.set_position(tuple(rxy(pos)))
    else:
        t.set_position(tuple(round_sig(pos, digits)))
