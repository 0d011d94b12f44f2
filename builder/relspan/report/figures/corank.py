"""Figures on the corank: the eigen-spectrum against eps, and the corank per window.

Under bounded noise (spectral norm of the noise covariance at most eps),
corank q is possible iff the q-th smallest eigenvalue of the sample
covariance is at most eps - a consequence of Weyl's inequality for
eigenvalues of a perturbed symmetric matrix [1]_. With equal noise the q
smallest eigenvalues carry the q relations (total least squares) [2]_, [3]_.

References
----------
.. [1] H. Weyl, Das asymptotische Verteilungsgesetz der Eigenwerte linearer
       partieller Differentialgleichungen, Mathematische Annalen 71, 1912.
.. [2] C. Eckart and G. Young, The approximation of one matrix by another of
       lower rank, Psychometrika 1, 1936.
.. [3] G. H. Golub and C. F. Van Loan, An analysis of the total least squares
       problem, SIAM Journal on Numerical Analysis 17, 1980.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence

import numpy as np
import pandas as pd
from matplotlib.patches import Rectangle

from relspan.report.figures.checks import as_float_array, as_labels, check_mapping, fail
from relspan.report.figures.contract import FigureResult, fit_alt, settle
from relspan.report.figures.labels import spread_1d, widest_text_px
from relspan.report.figures.style import (INK, MIN_TEXT_PT, MUTED, PALETTE, SEQUENTIAL, new_figure,
                                          style_context, text_color_on)
from relspan.words import join_words, num, num_fig, plural

__all__ = ["corank_evidence", "corank_timeline"]

#: the key under a corank grid with resampling shares: the shares written with "%", written as bare
#: percentages (narrow cells), or not written (cells too narrow for readable text); the longest first,
#: each on one line (the layout is made for the first)
_SHARE_KEYS = ("Small number: the share of resamples giving that count.",
               "Small number: the % of resamples giving that count.",
               "The share of resamples giving each count: in the table.")

_EPS_STYLES = ((PALETTE[1], (0, (5, 2))), (PALETTE[3], (0, (1.5, 1.5))), (PALETTE[2], (0, (8, 2, 2, 2))),
               (PALETTE[4], "-"))
_SHADES = (("#e7ebf3", "////"), ("#f3e9df", "\\\\\\\\"), ("#e3efec", "...."), ("#eeeeee", "xx"))


def _ordinal(k: int) -> str:
    suffix = "th" if 10 <= k % 100 <= 20 else {1: "st", 2: "nd", 3: "rd"}.get(k % 10, "th")
    return f"{k}{suffix}"


def corank_evidence(eigenvalues, eps, labels: Sequence[str] | None = None, *,
                    scale_label: str = "eigenvalue", title: str | None = None,
                    name: str = "corank-evidence", intervals=None, level: float | None = None) -> FigureResult:
    """The eigenvalues of a window's covariance on a log scale, against the eps threshold(s).

    Eigenvalues are drawn smallest first, so position q is the eigenvalue that
    decides whether corank q is admissible: corank q is admissible at eps when
    the q-th smallest eigenvalue is at most eps (Weyl) [1]_. For each eps the
    admissible coranks 1..k are shaded (own fill and hatch, nested when there
    are several thresholds) and the threshold is a labelled horizontal line.
    Eigenvalues at or below 0 (exact relations, rounding) cannot sit on a log
    axis: they are drawn as downward triangles on the bottom edge, written
    "0" - never dropped.

    Parameters
    ----------
    eigenvalues : (n,) array_like
        Eigenvalues of the covariance (or correlation) matrix, any order.
    eps : float or mapping of str to float
        The threshold, or several: label -> eps (e.g. ``{"5% tolerance": 0.05}``).
    labels : sequence of str, optional
        Tick labels for the eigenvalue positions, smallest first (default "1".."n").
    scale_label : str
        Axis label for the eigenvalues (e.g. "eigenvalue of the correlation matrix").
    title, name : str
        Optional title; file stem.
    intervals : ((n,), (n,)) array_like, optional
        Bootstrap interval of each eigenvalue (low, high), smallest first; drawn
        as a bar with end ticks beside the point. A low end at or below 0 is
        drawn at the bottom edge.
    level : float, optional
        The intervals' level (required with ``intervals``).

    Returns
    -------
    FigureResult
        Table: ``kind`` "eigenvalue" (``position`` 1..n smallest first,
        ``value``, and ``low`` / ``high`` with intervals) and "threshold"
        (``label``, ``value``, ``admissible_up_to``).

    References
    ----------
    .. [1] H. Weyl, Das asymptotische Verteilungsgesetz der Eigenwerte linearer
           partieller Differentialgleichungen, Mathematische Annalen 71, 1912.
    """
    func = "corank_evidence"
    lam = np.sort(as_float_array(func, "eigenvalues", eigenvalues, ndim=1))
    n = lam.size
    if n < 2:
        raise fail(func, "eigenvalues", "must have at least 2 values", "Pass all n eigenvalues.", got=n)
    if isinstance(eps, Mapping):
        check_mapping(func, "eps", eps)
        eps_items = [(str(k), v) for k, v in eps.items()]
    else:
        eps_items = [("eps", eps)]
    epss = []
    for lab, v in eps_items:
        try:
            v = float(v)
        except (TypeError, ValueError):
            raise fail(func, f"eps[{lab!r}]" if lab != "eps" else "eps", "must be a number",
                       "Pass a positive tolerance.", got=repr(v)) from None
        if not np.isfinite(v) or v <= 0:
            raise fail(func, f"eps[{lab!r}]" if lab != "eps" else "eps", "must be a positive number",
                       "Pass a positive tolerance.", got=num(v))
        epss.append((lab, v))
    tick_labels = [str(i + 1) for i in range(n)] if labels is None else as_labels(func, "labels", labels, length=n)

    iv_lo = iv_hi = None
    if intervals is not None:
        iv_lo = as_float_array(func, "intervals", intervals[0], ndim=1, shape=(n,), allow_nan=True)
        iv_hi = as_float_array(func, "intervals", intervals[1], ndim=1, shape=(n,), allow_nan=True)
        if level is None or not 0 < float(level) < 1:
            raise fail(func, "level", "must be a level in (0, 1) when intervals are given", "Pass e.g. 0.9.")
    positive = lam[lam > 0]
    floor_ref = min(([float(positive.min())] if positive.size else []) + [min(v for _, v in epss)])
    floor = floor_ref / 30.0
    ks = [int(np.sum(lam <= v)) for _, v in epss]
    order = sorted(range(len(epss)), key=lambda i: -epss[i][1])  # largest eps shaded first (widest)

    with style_context():
        fig = new_figure(3.7 + (0.3 if title else 0.0))
        ax = fig.add_subplot(1, 1, 1)
        if title:
            ax.set_title(title)
        ax.set_yscale("log")
        top = max(float(lam.max()), max(v for _, v in epss),
                  float(np.nanmax(iv_hi)) if iv_hi is not None and np.isfinite(iv_hi).any() else 0.0) * 4
        bottom = floor / 2
        ax.set_ylim(bottom, top)
        ax.set_xlim(0.4, n + 0.6)
        x = np.arange(1, n + 1)
        # admissible region of each eps: positions 1..k, from the bottom up to its line
        for rank, i in enumerate(order):
            k = ks[i]
            if k == 0:
                continue
            fill, hatch = _SHADES[rank % len(_SHADES)]
            ax.add_patch(Rectangle((0.5, bottom), k, epss[i][1] - bottom, facecolor=fill,
                                   edgecolor=_EPS_STYLES[i % len(_EPS_STYLES)][0], hatch=hatch,
                                   linewidth=0.0, zorder=0))
        shown = np.where(lam > 0, lam, floor)
        ax.vlines(x, bottom, shown, color="#9a9a9a", linewidth=1.0, zorder=2)
        pos = lam > 0
        if iv_lo is not None:
            ok = np.isfinite(iv_lo) & np.isfinite(iv_hi)
            xb = x[ok] - 0.18
            lows = np.where(iv_lo[ok] > 0, iv_lo[ok], bottom)
            ax.vlines(xb, lows, iv_hi[ok], color=INK, linewidth=1.3, zorder=4,
                      label=f"{float(level):.0%} interval (resampling)")
            ax.plot(xb, iv_hi[ok], linestyle="none", marker="_", markersize=8, color=INK, zorder=4)
            ax.plot(xb[iv_lo[ok] > 0], iv_lo[ok][iv_lo[ok] > 0], linestyle="none", marker="_", markersize=8,
                    color=INK, zorder=4)
            ax.legend(loc="upper left", fontsize=8.5)
        ax.plot(x[pos], lam[pos], linestyle="none", marker="o", markersize=7, color=PALETTE[0], zorder=4)
        if (~pos).any():
            ax.plot(x[~pos], np.full((~pos).sum(), floor), linestyle="none", marker="v", markersize=8,
                    color=PALETTE[0], zorder=4)
        for xi, v in zip(x, lam):
            ax.annotate(num_fig(v) if v > 0 else "0", xy=(xi, v if v > 0 else floor), xytext=(7, 0),
                        textcoords="offset points", ha="left", va="center", fontsize=8.5, color=INK, zorder=5)
        ax.set_xticks(x, tick_labels)
        ax.grid(axis="x", visible=False)
        ax.set_xlabel("eigenvalue, smallest first (corank q needs the q-th at or below eps)")
        ax.set_ylabel(scale_label + " (log scale)")
        settle(fig)
        # threshold labels at the right edge, spread so they do not overlap
        logs = [math.log10(v) for _, v in epss]
        lo, hi = math.log10(bottom), math.log10(top)
        gap = (hi - lo) * (13.0 * fig.dpi / 72.0) / max(ax.get_window_extent().height, 1.0)
        ys = spread_1d(logs, gap, lo + gap, hi - gap)
        for (lab, v), (colr, ls), y, k in zip(epss, _EPS_STYLES * 4, ys, ks):
            ax.axhline(v, color=colr, linestyle=ls, linewidth=1.5, zorder=3)
            text = f"eps = {num_fig(v)}" if lab == "eps" else f"{lab}: eps = {num_fig(v)}"
            ax.annotate(text + f" (corank ≤ {k})", xy=(1.0, 10 ** y), xycoords=("axes fraction", "data"),
                        xytext=(-3, 3), textcoords="offset points", ha="right", va="bottom", fontsize=8.5,
                        color=colr, fontweight="bold",
                        bbox=dict(boxstyle="square,pad=0.1", facecolor="white", edgecolor="none", alpha=0.8))

    rows = [{"kind": "eigenvalue", "position": i + 1, "label": tick_labels[i], "value": lam[i],
             "admissible_up_to": None} for i in range(n)]
    rows += [{"kind": "threshold", "position": None, "label": lab, "value": v, "admissible_up_to": k}
             for (lab, v), k in zip(epss, ks)]
    table = pd.DataFrame(rows, columns=["kind", "position", "label", "value", "admissible_up_to"])
    table["position"] = table["position"].astype("Int64")
    table["admissible_up_to"] = table["admissible_up_to"].astype("Int64")
    if iv_lo is not None:
        table["low"] = list(iv_lo) + [np.nan] * len(epss)
        table["high"] = list(iv_hi) + [np.nan] * len(epss)

    lam_txt = join_words([num(v) if v > 0 else "0" for v in lam])
    desc = (f"The {n} eigenvalues, smallest first, on a logarithmic scale: {lam_txt}. "
            f"Corank q is admissible at a tolerance eps when the q-th smallest eigenvalue is at most eps. ")
    if (~pos).any():
        desc += (f"{plural(int((~pos).sum()), 'eigenvalue')} at or below zero (an exact relation) "
                 f"{'is' if (~pos).sum() == 1 else 'are'} drawn as a triangle on the bottom edge. ")
    for (lab, v), k in zip(epss, ks):
        name_txt = f"eps = {num(v)}" if lab == "eps" else f"{lab} (eps = {num(v)})"
        if k == 0:
            desc += f"At {name_txt} no eigenvalue is small enough: no relation is admissible. "
        elif k >= n:
            desc += f"At {name_txt} every eigenvalue is below it: the tolerance admits any corank. "
        else:
            desc += (f"At {name_txt}, {plural(k, 'eigenvalue')} {'is' if k == 1 else 'are'} at or below it: "
                     f"corank up to {k} is admissible (shaded); corank {k + 1} would need the "
                     f"{_ordinal(k + 1)} eigenvalue, {num(lam[k])}, to be at most {num(v)}. ")
    if iv_lo is not None:
        desc += (f"Beside each eigenvalue a bar shows its {float(level):.0%} interval from resampling: "
                 + join_words([f"{num(a)} to {num(b)}" for a, b in zip(iv_lo, iv_hi)
                               if np.isfinite(a) and np.isfinite(b)]) + ". ")
    short = "; ".join(f"eps {num(v)}: corank up to {k}" for (_, v), k in zip(epss, ks))
    alt = fit_alt(f"Eigenvalues {lam_txt} (log scale); {short}.",
                  f"Eigenvalues from {num(lam[0])} to {num(lam[-1])}; {short}.",
                  f"{n} eigenvalues on a log scale with {plural(len(epss), 'threshold')}.")
    return FigureResult(name, fig, alt, desc.strip(), table)


def corank_timeline(window_labels: Sequence[str], coranks: Mapping[str, Sequence[int | None]], *,
                    max_corank: int | None = None, title: str | None = None,
                    name: str = "corank-timeline",
                    support: Mapping[str, Sequence[float | None]] | None = None) -> FigureResult:
    """The corank found in each window, one strip per noise assumption.

    Each cell is a window; its fill darkens with the corank (sequential
    lightness scale) and the number is written in it. A window where the
    corank is undetermined (``None``) is white with cross hatching and a
    question mark - never told by colour alone; a note under the chart says so.

    Parameters
    ----------
    window_labels : sequence of str
        Window labels (w), in time order.
    coranks : mapping of str to (w,) sequence of int or None
        Assumption label -> corank per window (``None`` or NaN: undetermined).
    max_corank : int, optional
        Top of the colour scale (default: the largest corank shown, at least 1).
    title, name : str
        Optional title; file stem.
    support : mapping of str to (w,) sequence of float or None, optional
        Per assumption (same keys as ``coranks``) and window, the share of
        resamples giving the corank shown (None: not computed); written under
        each number as a percentage.

    Returns
    -------
    FigureResult
        Table columns: ``assumption``, ``window``, ``corank`` (empty when
        undetermined), ``status`` ("determined" / "undetermined"); with
        ``support`` also ``support`` (share of resamples, empty when not computed).
    """
    func = "corank_timeline"
    wl = as_labels(func, "window_labels", window_labels)
    w = len(wl)
    if w < 1:
        raise fail(func, "window_labels", "is empty", "Pass one label per window.")
    coranks = check_mapping(func, "coranks", coranks)
    names = as_labels(func, "coranks", list(coranks.keys()))
    grid: list[list[int | None]] = []
    for nm, key in zip(names, coranks.keys()):
        seq = list(coranks[key])
        if len(seq) != w:
            raise fail(func, f"coranks[{nm!r}]", f"must have {w} entries (one per window)",
                       "Pass one corank (or None) per window.", got=f"{len(seq)} entries")
        row = []
        for i, v in enumerate(seq):
            if v is None or (isinstance(v, float) and math.isnan(v)):
                row.append(None)
                continue
            if isinstance(v, bool) or not float(v).is_integer() or v < 0:
                raise fail(func, f"coranks[{nm!r}][{i}]", "must be a whole number >= 0 or None",
                           "Pass the corank as an int, or None when undetermined.", got=repr(v))
            row.append(int(v))
        grid.append(row)
    sup: list[list[float | None]] | None = None
    if support is not None:
        sup = []
        for nm, key in zip(names, coranks.keys()):
            seq = list(support.get(key, [None] * w))
            if len(seq) != w:
                raise fail(func, f"support[{nm!r}]", f"must have {w} entries (one per window)",
                           "Pass one share (or None) per window.", got=f"{len(seq)} entries")
            sup.append([None if v is None or not np.isfinite(v) else float(v) for v in seq])
    known = [v for row in grid for v in row if v is not None]
    top = max_corank if max_corank is not None else max(known + [1])
    if top < 1:
        raise fail(func, "max_corank", "must be at least 1", "Leave it out to use the largest corank.", got=top)
    a = len(names)

    with style_context():
        fig = new_figure(0.95 + 0.42 * a + (0.45 if max(len(s) for s in wl) > 4 and w > 6 else 0.0)
                         + (0.3 if title else 0.0) + (0.25 if sup is not None else 0.0))
        ax = fig.add_subplot(1, 1, 1)
        if title:
            ax.set_title(title)
        ax.set_xlim(-0.5, w - 0.5)
        ax.set_ylim(a - 0.5, -0.5)
        ax.grid(False)
        for sp in ax.spines.values():
            sp.set_visible(False)
        ax.set_yticks(range(a), names)
        step = max(1, int(np.ceil(w / 14)))
        ax.set_xticks(range(0, w, step), [wl[i] for i in range(0, w, step)])
        if w > 6 and max(len(s) for s in wl) > 4:
            ax.tick_params(axis="x", labelrotation=40)
            for t in ax.get_xticklabels():
                t.set_ha("right")
                t.set_rotation_mode("anchor")
        ax.tick_params(length=0)
        if sup is not None:  # the key to the shares; its final wording is chosen once the cells are measured
            ax.set_xlabel(_SHARE_KEYS[0], fontsize=MIN_TEXT_PT, color=MUTED, loc="left")
        if any(v is None for row in grid for v in row):
            from matplotlib.patches import Patch
            fig.legend(handles=[Patch(facecolor="white", edgecolor=MUTED, hatch="xxx", linewidth=0.8)],
                       labels=["? corank undetermined in that window"], loc="outside upper right",
                       fontsize=8.5, handlelength=1.6, handleheight=1.1)
        settle(fig)
        # numbers are written in the cells only at a readable size (MIN_TEXT_PT or more) and only where
        # they fit a cell's width; else the cell's fill and the figure's table carry them
        cell_px = abs(float(np.diff(ax.transData.transform([[0, 0], [1, 0]])[:, 0])[0])) - 3.0
        digits = [str(v) for row in grid for v in row if v is not None] + ["?"]
        fs = next((f for f in (10.0, 9.0, MIN_TEXT_PT) if widest_text_px(fig, ax, digits, f) <= cell_px), None)
        share_fmt = None
        if sup is not None and fs is not None:
            shares = [100 * v for row in sup for v in row if v is not None]
            for f in ("{:.0f}%", "{:.0f}"):
                if widest_text_px(fig, ax, [f.format(v) for v in shares], MIN_TEXT_PT) <= cell_px:
                    share_fmt = f
                    break
            ax.set_xlabel(_SHARE_KEYS[0 if share_fmt == "{:.0f}%" else 1 if share_fmt else 2])
        elif sup is not None:
            ax.set_xlabel(_SHARE_KEYS[2])
        if fs is None and fig.legends:  # no question marks are written: the key names the hatching alone
            fig.legends[0].get_texts()[0].set_text("hatched: corank undetermined in that window")
        for r, row in enumerate(grid):
            for c, v in enumerate(row):
                if v is None:
                    ax.add_patch(Rectangle((c - 0.5, r - 0.4), 1, 0.8, facecolor="white", edgecolor=MUTED,
                                           hatch="xxx", linewidth=0.8))
                    if fs is not None:
                        ax.text(c, r, "?", ha="center", va="center", fontsize=fs, color=INK, fontweight="bold",
                                bbox=dict(boxstyle="circle,pad=0.12", facecolor="white", edgecolor="none"))
                else:
                    fill = SEQUENTIAL(0.12 + 0.88 * min(v, top) / top)
                    ax.add_patch(Rectangle((c - 0.5, r - 0.4), 1, 0.8, facecolor=fill, edgecolor="white",
                                           linewidth=1.0))
                    if fs is None:
                        continue
                    share = sup[r][c] if sup is not None and share_fmt is not None else None
                    ax.text(c, r - (0.15 if share is not None else 0.0), str(v), ha="center", va="center",
                            fontsize=fs, color=text_color_on(fill))
                    if share is not None:
                        ax.text(c, r + 0.2, share_fmt.format(100 * share), ha="center", va="center",
                                fontsize=MIN_TEXT_PT, color=text_color_on(fill))

    rows = [{"assumption": nm, "window": wl[c], "corank": v,
             "status": "undetermined" if v is None else "determined"}
            for nm, row in zip(names, grid) for c, v in enumerate(row)]
    table = pd.DataFrame(rows, columns=["assumption", "window", "corank", "status"])
    table["corank"] = table["corank"].astype("Int64")
    if sup is not None:
        table["support"] = [sup[r][c] for r in range(a) for c in range(w)]

    parts, short = [], []
    for nm, row in zip(names, grid):
        vals = sorted({v for v in row if v is not None})
        counts = [f"corank {v} in {plural(sum(1 for x in row if x == v), 'window')}" for v in vals]
        und = [wl[c] for c, v in enumerate(row) if v is None]
        txt = f"{nm}: " + (join_words(counts) if counts else "no window determined")
        if und:
            shown = und[:5] + ([f"{len(und) - 5} more"] if len(und) > 5 else [])
            txt += f"; undetermined in {plural(len(und), 'window')} ({join_words(shown)})"
        changes = [(wl[c - 1], wl[c], row[c - 1], row[c]) for c in range(1, w)
                   if row[c] is not None and row[c - 1] is not None and row[c] != row[c - 1]]
        if changes:
            txt += "; changes " + "; ".join(f"from {p} to {q} between {x} and {y}" for x, y, p, q in changes[:3])
            if len(changes) > 3:
                txt += f" and {len(changes) - 3} more times"
        if sup is not None:
            r_i = names.index(nm)
            got = [(sup[r_i][c], wl[c]) for c in range(w) if sup[r_i][c] is not None and row[c] is not None]
            if got:
                low, where = min(got)
                txt += (f"; the share of resamples giving the corank shown is "
                        f"{'written under it' if share_fmt else 'in the table'}, lowest {100 * low:.0f}% "
                        f"({where})")
            elif any(v is not None for v in row):
                txt += "; no resampling support computed for these windows"
        parts.append(txt)
        if vals:
            mode = max(vals, key=lambda v: (sum(1 for x in row if x == v), -v))
            short.append(f"{nm} {mode} in {sum(1 for x in row if x == mode)} of {w}"
                         + (f", {len(und)} undetermined" if und else ""))
        else:
            short.append(f"{nm} undetermined")
    gives = "gives" if fs is not None else "shows by its shade"
    marked = " with a question mark" if fs is not None else ""
    desc = (f"A grid with one strip per noise assumption and one cell per window ({plural(w, 'window')}); "
            f"each cell {gives} the corank (number of relations) found in that window, darker for larger "
            f"coranks; hatched cells{marked} are undetermined. " + ". ".join(parts) + ".")
    alt = fit_alt(f"Corank per window: {'; '.join(short)}.",
                  f"Corank in {plural(w, 'window')} under {plural(a, 'assumption')}.")
    return FigureResult(name, fig, alt, desc.strip(), table)
