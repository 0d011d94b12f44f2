"""Figures across windows: subspace stability and the swing of single coefficients.

Angles between relation subspaces are principal angles (Bjorck & Golub 1973)
[1]_; the caller passes, for each pair, the largest principal angle in degrees.
A q >= 2 relation subspace can stay put to a fraction of a degree while one
normalised coefficient inside it changes sign between windows: any vector of
the subspace is a relation, so the single coefficient is not identified.

References
----------
.. [1] A. Bjorck and G. H. Golub, Numerical methods for computing angles
       between linear subspaces, Mathematics of Computation 27, 1973.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence

import numpy as np
import pandas as pd

from relspan.report.figures.checks import (as_float_array, as_labels, as_times, check_mapping, fail,
                                           time_values)
from relspan.report.figures.contract import FigureResult, fit_alt, settle
from relspan.report.figures.labels import spread_1d, widest_text_px
from relspan.report.figures.style import (INK, MIN_TEXT_PT, MUTED, PALETTE, SEQUENTIAL, new_figure,
                                          style_context, styles_for, text_color_on)
from relspan.words import angle_text, join_words, num, num_fig, num_range, plural

__all__ = ["subspace_stability", "coefficient_swing"]


def _check_angles(func: str, key: str, a: np.ndarray) -> None:
    bad = np.flatnonzero((a.ravel() < -1e-9) | (a.ravel() > 90 + 1e-9))
    if bad.size:
        raise fail(func, key, "must hold angles in degrees between 0 and 90",
                   "Pass principal angles in degrees (not radians, not cosines).",
                   got=num(a.ravel()[bad[0]]))


def _window_axis(func: str, ax, labels: list[str], times) -> tuple[np.ndarray, bool]:
    """x positions for windows (times, or 0..w-1 with the labels as ticks)."""
    w = len(labels)
    if times is not None:
        x, is_dt = as_times(func, "times", times, length=w)
        return x, is_dt
    x = np.arange(w, dtype=float)
    step = max(1, int(np.ceil(w / 12)))
    ax.set_xticks(x[::step], [labels[i] for i in range(0, w, step)])
    if w > 4 and max(len(s) for s in labels) > 5:
        ax.tick_params(axis="x", labelrotation=40)
        for t in ax.get_xticklabels():
            t.set_ha("right")
            t.set_rotation_mode("anchor")
    ax.set_xlim(-0.5, w - 0.5)
    return x, False


def _threshold_line(ax, threshold: float, text: str) -> None:
    ax.axhline(threshold, color=PALETTE[1], linewidth=1.2, linestyle=(0, (5, 2)), zorder=2)
    ax.annotate(text, xy=(1, threshold), xycoords=("axes fraction", "data"), xytext=(-2, 3),
                textcoords="offset points", ha="right", va="bottom", fontsize=9, color=PALETTE[1],
                fontweight="bold")


def _breaks_drawn(at, label) -> list[tuple[float, str | None]]:
    """``break_at`` / ``break_label`` as (position, label) pairs: one break (a number) or several (sequences)."""
    if at is None:
        return []
    if np.ndim(at) == 0:
        return [(at, label)]
    labels = list(label) if label is not None and not isinstance(label, str) else [label] * len(at)
    return list(zip(list(at), labels))


def _break_marker(ax, at, label) -> None:
    """The breaks the scan found: a dashed vertical line each, labelled (nothing when ``at`` is None)."""
    for x, text in _breaks_drawn(at, label):
        ax.axvline(x, color=INK, linewidth=1.1, linestyle=(0, (4, 2)), zorder=2)
        ax.annotate(text or "break", xy=(x, 1), xycoords=("data", "axes fraction"), xytext=(3, -3),
                    textcoords="offset points", rotation=90, ha="left", va="top", fontsize=MIN_TEXT_PT,
                    color=INK)


def _break_words(at, label) -> str:
    """The figure description's sentence on the dashed lines ("" when none)."""
    drawn = _breaks_drawn(at, label)
    if not drawn:
        return ""
    if len(drawn) == 1:
        return f" Dashed vertical line: {drawn[0][1] or 'the break the scan found'}."
    return f" Dashed vertical lines: {join_words([t or 'a break the scan found' for _, t in drawn])}."


def _angle_panel(ax, x, angles, threshold, is_dt) -> None:
    above = angles > threshold
    ax.plot(x, angles, color=PALETTE[0], marker="o", markersize=5, linewidth=1.4, zorder=3)
    if above.any():
        ax.plot(x[above], angles[above], linestyle="none", marker="^", markersize=8,
                color=PALETTE[3], markeredgecolor=INK, markeredgewidth=0.6, zorder=4)
    top = max(threshold * 1.25, float(angles.max()) * 1.15, 1e-6)
    ax.set_ylim(0, top)
    _threshold_line(ax, threshold, f"threshold {num_fig(threshold)}°")
    if is_dt:
        ax.xaxis_date()


def subspace_stability(angle_matrix, labels: Sequence[str], angle_to_full, times=None,
                       threshold_deg: float = 10.0, *, title: str | None = None,
                       name: str = "subspace-stability", break_at=None,
                       break_label=None) -> FigureResult:
    """Principal angles between the windows' relation subspaces, and each window's angle to the full sample.

    Left: a heatmap of the angle between every pair of windows (a sequential
    colormap whose lightness falls with the angle, scaled from 0 to the larger
    of the threshold and the largest angle; values written in the cells when
    every one fits its cell at the smallest readable size, ``style.MIN_TEXT_PT``;
    cells above the threshold outlined). Right:
    the angle of each window's subspace to the full-sample subspace over time,
    with the threshold as a labelled line (windows above it drawn as
    triangles).

    Parameters
    ----------
    angle_matrix : (w, w) array_like
        Largest principal angle in degrees between windows i and j [1]_;
        symmetric, zero diagonal.
    labels : sequence of str
        Window labels.
    angle_to_full : (w,) array_like
        Largest principal angle in degrees between each window and the full sample.
    times : (w,) array_like, optional
        Window positions in time (e.g. midpoints, datetime64 or numbers); by
        default windows are spaced evenly and labelled.
    threshold_deg : float
        The stability threshold (spec ``checks.max_angle_deg``).
    title, name : str
        Optional title; file stem.
    break_at : float or sequence of float, optional
        Where the break scan dates a break (or each of several), in the right
        panel's x units (a time, or a position between window indices): drawn
        as a dashed line labelled ``break_label`` (a str, or one per break).

    Returns
    -------
    FigureResult
        Table columns: ``kind`` ("between windows" for each pair i < j, or "to
        full sample"), ``window``, ``other``, ``angle_deg``, ``time``,
        ``above_threshold``.

    References
    ----------
    .. [1] A. Bjorck and G. H. Golub, Numerical methods for computing angles
           between linear subspaces, Mathematics of Computation 27, 1973.
    """
    func = "subspace_stability"
    wl = as_labels(func, "labels", labels)
    w = len(wl)
    if w < 1:
        raise fail(func, "labels", "is empty", "Pass one label per window.")
    a = as_float_array(func, "angle_matrix", angle_matrix, ndim=2, shape=(w, w))
    f = as_float_array(func, "angle_to_full", angle_to_full, ndim=1, shape=(w,))
    _check_angles(func, "angle_matrix", a)
    _check_angles(func, "angle_to_full", f)
    if not np.allclose(a, a.T, atol=1e-6, rtol=0):
        i, j = np.unravel_index(int(np.argmax(np.abs(a - a.T))), a.shape)
        raise fail(func, "angle_matrix", f"must be symmetric (entry [{i}, {j}] differs from [{j}, {i}])",
                   "Pass the full symmetric matrix of angles.", got=f"{num(a[i, j])} vs {num(a[j, i])}")
    if np.abs(np.diag(a)).max() > 1e-6:
        i = int(np.argmax(np.abs(np.diag(a))))
        raise fail(func, "angle_matrix", f"must have a zero diagonal (entry [{i}, {i}])",
                   "A window's angle to itself is 0.", got=num(a[i, i]))
    thr = float(threshold_deg)
    if not np.isfinite(thr) or thr <= 0 or thr > 90:
        raise fail(func, "threshold_deg", "must be an angle in degrees in (0, 90]",
                   "Use the spec's checks.max_angle_deg.", got=threshold_deg)
    a = np.clip(a, 0, 90)
    f = np.clip(f, 0, 90)
    vmax = max(thr, float(a.max()))

    with style_context():
        fig = new_figure(3.9 + (0.35 if w > 6 else 0.0) + (0.3 if title else 0.0))
        gs = fig.add_gridspec(1, 2, width_ratios=[1.0, 1.15], wspace=0.08)
        axh = fig.add_subplot(gs[0])
        axl = fig.add_subplot(gs[1])
        if title:
            fig.suptitle(title, x=0.01, ha="left", fontweight="bold", fontsize=11)
        im = axh.imshow(a, cmap=SEQUENTIAL, vmin=0, vmax=vmax, aspect="equal", interpolation="nearest")
        axh.grid(False)
        for sp in axh.spines.values():
            sp.set_visible(False)
        step = max(1, int(np.ceil(w / 12)))
        ticks = list(range(0, w, step))
        axh.set_xticks(ticks, [wl[i] for i in ticks], rotation=90, fontsize=8.5)
        axh.set_yticks(ticks, [wl[i] for i in ticks], fontsize=8.5)
        axh.tick_params(length=0)
        axh.set_title("angle between windows", fontsize=10, fontweight="normal")
        from matplotlib.patches import Rectangle
        for i in range(w):
            for j in range(w):
                if a[i, j] > thr:
                    axh.add_patch(Rectangle((j - 0.5, i - 0.5), 1, 1, fill=False, edgecolor=PALETTE[3],
                                            linewidth=1.6))
        cb = fig.colorbar(im, ax=axh, orientation="horizontal", location="bottom", shrink=0.9,
                          aspect=25, pad=0.02)
        cb.set_label("degrees", fontsize=9)
        cb.ax.tick_params(labelsize=8.5)
        cb.ax.axvline(thr, color=PALETTE[1], linewidth=1.6)
        cb.outline.set_visible(False)

        x, is_dt = _window_axis(func, axl, wl, times)
        _angle_panel(axl, x, f, thr, is_dt)
        _break_marker(axl, break_at, break_label)
        axl.set_title("angle to the full sample", fontsize=10, fontweight="normal")
        axl.set_ylabel("degrees")
        # the angles are written in the cells only at a readable size (MIN_TEXT_PT) and only if every one fits
        # its cell's width; else the shade, the colour bar and the figure's table carry them
        settle(fig)
        cell_px = abs(float(np.diff(axh.transData.transform([[0, 0], [1, 0]])[:, 0])[0])) - 3.0
        cell_text = [[angle_text(a[i, j]) for j in range(w)] for i in range(w)]
        written = widest_text_px(fig, axh, [t for row in cell_text for t in row], MIN_TEXT_PT) <= cell_px
        if written:
            for i in range(w):
                for j in range(w):
                    col = text_color_on(SEQUENTIAL(a[i, j] / vmax))
                    axh.text(j, i, cell_text[i][j], ha="center", va="center", fontsize=MIN_TEXT_PT, color=col)

    iu = np.triu_indices(w, 1)
    rows = []
    for i, j in zip(*iu):
        rows.append({"kind": "between windows", "window": wl[i], "other": wl[j], "angle_deg": a[i, j],
                     "time": None, "above_threshold": bool(a[i, j] > thr)})
    tv = time_values(x, is_dt) if times is not None else [None] * w
    for i in range(w):
        rows.append({"kind": "to full sample", "window": wl[i], "other": "full sample",
                     "angle_deg": f[i], "time": tv[i], "above_threshold": bool(f[i] > thr)})
    table = pd.DataFrame(rows, columns=["kind", "window", "other", "angle_deg", "time", "above_threshold"])
    if times is not None and is_dt:
        table["time"] = pd.to_datetime(table["time"])

    jf = int(np.argmax(f))
    above = [wl[i] for i in range(w) if f[i] > thr]
    head = (f"Largest angle between any window and the full sample: {angle_text(f[jf])} degrees "
            f"(threshold {num(thr)})")
    desc = (f"Left: heatmap of the angle between the relation subspaces of every pair of the "
            f"{plural(w, 'window')} (darker = larger, 0 to {angle_text(vmax)} degrees"
            + ("; values written in the cells" if written else "")
            + "). Right: the angle between each window's subspace and the full-sample subspace. ")
    if w >= 2:
        k = int(np.argmax(a[iu]))
        i, j = iu[0][k], iu[1][k]
        desc += (f"Largest angle between two windows: {angle_text(a[i, j])} degrees ({wl[i]} and {wl[j]}); "
                 f"median over pairs {angle_text(float(np.median(a[iu])))} degrees. ")
        n_pairs_above = int((a[iu] > thr).sum())
        if n_pairs_above:
            desc += f"{plural(n_pairs_above, 'pair')} of windows differ by more than the threshold (outlined). "
    desc += f"{head}, in {wl[jf]}. "
    if above:
        shown = above[:6] + ([f"{len(above) - 6} more"] if len(above) > 6 else [])
        desc += (f"{plural(len(above), 'window')} of {w} exceed the threshold: {join_words(shown)}.")
    else:
        desc += f"All {w} windows stay within the threshold."
    desc += _break_words(break_at, break_label)
    alt = fit_alt(f"{head}; {len(above)} of {w} windows above it.", f"{head}.",
                  f"Largest angle to the full sample: {angle_text(f[jf])} degrees (threshold {num(thr)}).")
    return FigureResult(name, fig, alt, desc.strip(), table)


def _sign_flips(v: np.ndarray) -> list[tuple[int, int]]:
    """Pairs (i, j) of consecutive finite, non-zero entries whose signs differ."""
    idx = [i for i in range(v.size) if np.isfinite(v[i]) and v[i] != 0]
    return [(i, j) for i, j in zip(idx, idx[1:]) if np.sign(v[i]) != np.sign(v[j])]


def coefficient_swing(labels: Sequence[str], coefficients: Mapping[str, Sequence[float]],
                      angle_to_full, threshold_deg: float, coefficient_label: str, *, times=None,
                      title: str | None = None, name: str = "coefficient-swing", break_at=None,
                      break_label=None) -> FigureResult:
    """A normalised coefficient per window under each noise assumption, above the subspace angle.

    Top: the chosen coefficient in every window, one line per assumption
    (own colour, marker and line style, labelled at its end), a zero line, and
    each sign change between consecutive windows marked by a dotted vertical
    line with the words "sign flip" and a tick on the zero line. Bottom, on the
    same time axis: each window's angle to the full-sample relation subspace
    with the threshold. Together they show a coefficient that swings, even
    changes sign, while the subspace stays put.

    Parameters
    ----------
    labels : sequence of str
        Window labels (w).
    coefficients : mapping of str to (w,) array_like
        Assumption label -> the coefficient in each window; NaN where it is not
        available (gaps). Labels that start with an assumption id (``equal``,
        ``elementary``, ...) keep that assumption's style.
    angle_to_full : (w,) array_like
        Largest principal angle (degrees) between each window and the full sample.
    threshold_deg : float
        The stability threshold.
    coefficient_label : str
        What the coefficient is, e.g. "coefficient on wages (prices = 1)".
    times : (w,) array_like, optional
        Window positions in time; by default windows are evenly spaced and labelled.
    title, name : str
        Optional title; file stem.
    break_at, break_label
        The break the scan found, as for :func:`subspace_stability` (both panels).

    Returns
    -------
    FigureResult
        Table columns: ``kind`` ("coefficient" or "angle to full sample"),
        ``assumption``, ``window``, ``time``, ``value``, ``sign_flip_from_previous``,
        ``above_threshold``.
    """
    func = "coefficient_swing"
    wl = as_labels(func, "labels", labels)
    w = len(wl)
    if w < 1:
        raise fail(func, "labels", "is empty", "Pass one label per window.")
    coefficients = check_mapping(func, "coefficients", coefficients)
    names = as_labels(func, "coefficients", list(coefficients.keys()))
    vals = {nm: as_float_array(func, f"coefficients[{nm!r}]", coefficients[key], ndim=1, shape=(w,),
                               allow_nan=True) for nm, key in zip(names, coefficients.keys())}
    f = as_float_array(func, "angle_to_full", angle_to_full, ndim=1, shape=(w,))
    _check_angles(func, "angle_to_full", f)
    thr = float(threshold_deg)
    if not np.isfinite(thr) or thr <= 0 or thr > 90:
        raise fail(func, "threshold_deg", "must be an angle in degrees in (0, 90]",
                   "Use the spec's checks.max_angle_deg.", got=threshold_deg)
    if not str(coefficient_label).strip():
        raise fail(func, "coefficient_label", "is empty", "Say which coefficient is shown.")
    styles = styles_for(names)
    flips = {nm: _sign_flips(vals[nm]) for nm in names}

    with style_context():
        fig = new_figure(4.8 + (0.3 if title else 0.0))
        gs = fig.add_gridspec(2, 1, height_ratios=[2.3, 1.0], hspace=0.05)
        ax = fig.add_subplot(gs[0])
        axa = fig.add_subplot(gs[1], sharex=ax)
        if title:
            fig.suptitle(title, x=0.01, ha="left", fontweight="bold", fontsize=11)
        x, is_dt = _window_axis(func, axa, wl, times)
        ax.axhline(0, color=MUTED, linewidth=1.0, zorder=1)
        for nm, st in zip(names, styles):
            ax.plot(x, vals[nm], color=st.color, linestyle=st.linestyle, marker=st.marker,
                    markersize=5.5, linewidth=1.5, zorder=3,
                    markerfacecolor="white" if st.slot % 2 else st.color)
        # sign flips: one dotted line and label per location, a tick in each flipping series' colour
        locations: dict[float, list[str]] = {}
        spacing = float(np.min(np.diff(x))) if w > 1 else 1.0
        for nm, st in zip(names, styles):
            for i, j in flips[nm]:
                xm = 0.5 * (x[i] + x[j])
                locations.setdefault(round(float(xm), 9), []).append(nm)
        for xm, who in locations.items():
            # one tick per flipping series, side by side when several flip at the same place
            for r, nm in enumerate(who):
                st = styles[names.index(nm)]
                dx = (r - (len(who) - 1) / 2) * 0.07 * spacing
                ax.plot([xm + dx], [0], marker="|", markersize=16, markeredgewidth=2.4, color=st.color,
                        zorder=4)
        for xm in sorted(locations):
            ax.axvline(xm, color=MUTED, linewidth=0.8, linestyle=(0, (1, 2)), zorder=1)
            ax.annotate("sign flip", xy=(xm, 1), xycoords=("data", "axes fraction"), xytext=(-2, -3),
                        textcoords="offset points", rotation=90, ha="right", va="top", fontsize=MIN_TEXT_PT,
                        color=INK)
        finite = np.concatenate([v[np.isfinite(v)] for v in vals.values()] + [np.zeros(1)])
        lo, hi = float(finite.min()), float(finite.max())
        pad = 0.12 * (hi - lo if hi > lo else 1.0)
        ax.set_ylim(lo - pad, hi + pad * 2.2)
        ax.set_ylabel(coefficient_label if len(coefficient_label) <= 30 else "coefficient")
        for t in ax.get_xticklabels():
            t.set_visible(False)
        _angle_panel(axa, x, f, thr, is_dt)
        _break_marker(axa, break_at, break_label)
        for xb, _ in _breaks_drawn(break_at, break_label):
            ax.axvline(xb, color=INK, linewidth=1.1, linestyle=(0, (4, 2)), zorder=2)
        axa.set_ylabel("angle to full\nsample (°)")
        ax.margins(x=0.03)
        if len(coefficient_label) > 30:  # a long label becomes the panel's title, wrapped, in the layout
            import textwrap

            ax.set_title("\n".join(textwrap.wrap(coefficient_label, 60)), fontsize=10, fontweight="normal")
        # room on the right for the series names written at the line ends (placed after the layout,
        # so the layout is told to leave their width free)
        named = [nm for nm in names if np.isfinite(vals[nm]).any()]
        if named:
            room_px = widest_text_px(fig, ax, named, 9.5, fontweight="bold") + 10.0 * fig.dpi / 72.0
            room = room_px / (fig.get_figwidth() * fig.dpi)
            fig.get_layout_engine().set(rect=(0.0, 0.0, 1.0 - min(room, 0.4), 1.0))
        settle(fig)
        ends = []
        for nm in names:
            ok = np.flatnonzero(np.isfinite(vals[nm]))
            ends.append(float(vals[nm][ok[-1]]) if ok.size else np.nan)
        y0, y1 = ax.get_ylim()
        gap = (y1 - y0) * (14.0 * fig.dpi / 72.0) / max(ax.get_window_extent().height, 1.0)
        has = [e for e in ends if np.isfinite(e)]
        ys = spread_1d(has, gap, y0 + gap / 2, y1 - gap / 2) if has else []
        k = 0
        for nm, st, e in zip(names, styles, ends):
            if not np.isfinite(e):
                continue
            ax.annotate(nm, xy=(1.0, ys[k]), xycoords=("axes fraction", "data"), xytext=(6, 0),
                        textcoords="offset points", ha="left", va="center", fontsize=9.5,
                        color=st.color, fontweight="bold", annotation_clip=False)
            k += 1

    rows = []
    tv = time_values(x, is_dt) if times is not None else [None] * w
    for nm in names:
        flip_after = {j for _, j in flips[nm]}
        for i in range(w):
            rows.append({"kind": "coefficient", "assumption": nm, "window": wl[i], "time": tv[i],
                         "value": vals[nm][i], "sign_flip_from_previous": i in flip_after,
                         "above_threshold": None})
    for i in range(w):
        rows.append({"kind": "angle to full sample", "assumption": None, "window": wl[i], "time": tv[i],
                     "value": f[i], "sign_flip_from_previous": None, "above_threshold": bool(f[i] > thr)})
    table = pd.DataFrame(rows, columns=["kind", "assumption", "window", "time", "value",
                                        "sign_flip_from_previous", "above_threshold"])
    if times is not None and is_dt:
        table["time"] = pd.to_datetime(table["time"])

    parts = []
    for nm in names:
        v = vals[nm]
        ok = np.isfinite(v)
        if not ok.any():
            parts.append(f"{nm}: not available in any window")
            continue
        txt = f"{nm}: from {num_range(v[ok].min(), v[ok].max())}"
        fl = flips[nm]
        if fl:
            where = "; ".join(f"between {wl[i]} and {wl[j]} ({num(v[i])} to {num(v[j])})" for i, j in fl[:4])
            if len(fl) > 4:
                where += f"; and {len(fl) - 4} more"
            txt += f", {plural(len(fl), 'sign flip')} ({where})"
        else:
            txt += ", no sign flip"
        if (~ok).sum():
            txt += f", missing in {plural(int((~ok).sum()), 'window')}"
        parts.append(txt)
    jf = int(np.argmax(f))
    head = (f"Largest angle between any window and the full sample: {angle_text(f[jf])} degrees "
            f"(threshold {num(thr)})")
    total_flips = sum(len(v) for v in flips.values())
    desc = (f"Top: the {coefficient_label} in each of the {plural(w, 'window')}, one line per noise "
            f"assumption, with a zero line; sign changes between consecutive windows are marked "
            f"'sign flip'. " + "; ".join(parts) + ". "
            f"Bottom, on the same axis: the angle between each window's relation subspace and the "
            f"full sample's. {head}, in {wl[jf]}; "
            + (f"{plural(int((f > thr).sum()), 'window')} above it. " if (f > thr).any()
               else "every window within it. "))
    if total_flips and not (f > thr).any():
        desc += ("The coefficient changes sign while the subspace of relations stays within the threshold: "
                 "the relations are stable, but this single coefficient is not pinned down by the data.")
    desc += _break_words(break_at, break_label)
    flipping = [nm for nm in names if flips[nm]]
    fl_txt = (f"sign flips under {join_words(flipping)}" if flipping else "no sign flip")
    alt = fit_alt(f"{coefficient_label}: {fl_txt}; angle to full sample at most {angle_text(f[jf])} "
                  f"degrees (threshold {num(thr)}).",
                  f"Coefficient per window: {plural(total_flips, 'sign flip')}; angle to full sample at most "
                  f"{angle_text(f[jf])} degrees (threshold {num(thr)}).")
    return FigureResult(name, fig, alt, desc.strip(), table)
