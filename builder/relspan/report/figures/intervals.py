"""Bounds on normalised coefficients under the Frisch scheme (independent noise of unknown size)."""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import pandas as pd

from relspan.report.figures.checks import as_float_array, as_labels, fail
from relspan.report.figures.contract import FigureResult, fit_alt, settle
from relspan.report.figures.style import INK, MUTED, PALETTE, new_figure, style_context
from relspan.words import join_words, num, num_fig, num_range, plural

__all__ = ["frisch_intervals"]


def frisch_intervals(names: Sequence[str], lower, upper, point=None,
                     unbounded_reason: str | None = None, *, point_label: str = "point estimate",
                     normalised_on: str | None = None, title: str | None = None,
                     name: str = "frisch-intervals", outer=None, outer_level: float | None = None
                     ) -> FigureResult:
    """One horizontal interval per normalised coefficient (the Frisch scheme's bounds).

    Under the Frisch scheme (independent noise of unknown variances) with one
    relation, the normalised coefficients consistent with the data form the
    convex hull of the elementary regressions when those lie in one orthant;
    otherwise the set is unbounded [1]_, [2]_, [3]_. This figure draws each
    coefficient's range. An unbounded side is drawn as an arrow to the axis
    edge labelled "unbounded" - never clipped silently.

    Parameters
    ----------
    names : sequence of str
        The variables the coefficients belong to.
    lower, upper : (k,) array_like
        Bounds; ``-inf`` / ``+inf`` mark an unbounded side. NaN is not allowed.
    point : (k,) array_like, optional
        A point estimate to mark inside the ranges (e.g. the full-sample
        total least squares coefficients), labelled ``point_label``.
    unbounded_reason : str, optional
        Why a set is unbounded, in plain words; shown under the chart and in
        the description.
    normalised_on : str, optional
        The variable whose coefficient is fixed at 1 (named in the axis label).
    title, name : str
        Optional title; file stem.
    outer : ((k,), (k,)) array_like, optional
        An outer confidence set per coefficient (low, high; infinite when open),
        drawn as a thin bar with end ticks behind each range (Imbens & Manski 2004).
    outer_level : float, optional
        Its level, e.g. 0.9 (required with ``outer``).

    Returns
    -------
    FigureResult
        Table columns: ``coefficient``, ``lower``, ``upper`` (``-inf``/``inf`` when
        unbounded), ``lower_unbounded``, ``upper_unbounded``, ``point``, ``status``;
        with ``outer`` also ``outer_low``, ``outer_high``.

    References
    ----------
    .. [1] R. Frisch, Statistical Confluence Analysis by Means of Complete
           Regression Systems, 1934.
    .. [2] O. Reiersol, Confluence analysis by means of lag moments and other
           methods of confluence analysis, Econometrica 9, 1941.
    .. [3] S. Klepper and E. E. Leamer, Consistent sets of estimates for
           regressions with errors in all variables, Econometrica 52, 1984.
    """
    func = "frisch_intervals"
    labels = as_labels(func, "names", names)
    k = len(labels)
    if k == 0:
        raise fail(func, "names", "is empty", "Pass at least one coefficient.")
    lo = as_float_array(func, "lower", lower, ndim=1, shape=(k,), allow_inf=True)
    hi = as_float_array(func, "upper", upper, ndim=1, shape=(k,), allow_inf=True)
    if np.isposinf(lo).any() or np.isneginf(hi).any():
        i = int(np.flatnonzero(np.isposinf(lo) | np.isneginf(hi))[0])
        raise fail(func, "lower" if np.isposinf(lo[i]) else "upper",
                   f"is +inf/-inf on the wrong side at index {i} ({labels[i]})",
                   "Use -inf for a lower bound and +inf for an upper bound.")
    bad = np.flatnonzero(lo > hi)
    if bad.size:
        i = int(bad[0])
        raise fail(func, "lower", f"exceeds upper at index {i} ({labels[i]})",
                   "Swap the bounds.", got=f"{num(lo[i])} > {num(hi[i])}")
    pt = None if point is None else as_float_array(func, "point", point, ndim=1, shape=(k,),
                                                   allow_nan=True)
    lo_unb, hi_unb = np.isneginf(lo), np.isposinf(hi)
    o_lo = o_hi = None
    if outer is not None:
        o_lo = as_float_array(func, "outer", outer[0], ndim=1, shape=(k,), allow_inf=True)
        o_hi = as_float_array(func, "outer", outer[1], ndim=1, shape=(k,), allow_inf=True)
        if outer_level is None or not 0 < float(outer_level) < 1:
            raise fail(func, "outer_level", "must be a level in (0, 1) when outer is given", "Pass e.g. 0.9.")

    finite = [0.0] + [v for v in np.concatenate([lo, hi] + ([o_lo, o_hi] if o_lo is not None else []))
                      if np.isfinite(v)]
    if pt is not None:
        finite += [v for v in pt if np.isfinite(v)]
    fmin, fmax = min(finite), max(finite)
    span = fmax - fmin if fmax > fmin else 1.0
    xmin = fmin - span * (0.3 if lo_unb.any() else 0.12)
    xmax = fmax + span * (0.3 if hi_unb.any() else 0.12)

    with style_context():
        fig = new_figure(1.25 + 0.48 * k + (0.3 if unbounded_reason else 0) + (0.3 if title else 0))
        ax = fig.add_subplot(1, 1, 1)
        if title:
            ax.set_title(title)
        ys = np.arange(k)[::-1].astype(float)
        ax.set_xlim(xmin, xmax)
        ax.set_ylim(-0.7, k - 0.3)
        ax.axvline(0, color=MUTED, linewidth=1.0, linestyle=(0, (4, 2)), zorder=1)
        ax.set_yticks(ys, labels)
        ax.tick_params(axis="y", length=0)
        ax.grid(axis="y", visible=False)
        ax.spines["left"].set_visible(False)
        xl = "normalised coefficient"
        if normalised_on:
            xl += f" (coefficient on {normalised_on} = 1)"
        ax.set_xlabel(xl)
        color = PALETTE[2]
        # 1) numbers at the finite ends and the point estimates
        for i, y in enumerate(ys):
            for side, unb in (("lower", lo_unb[i]), ("upper", hi_unb[i])):
                if not unb:
                    v = lo[i] if side == "lower" else hi[i]
                    ax.annotate(num_fig(v), xy=(v, y), xytext=(-6 if side == "lower" else 6, 0),
                                textcoords="offset points", ha="right" if side == "lower" else "left",
                                va="center", fontsize=9, color=INK)
            if pt is not None and np.isfinite(pt[i]):
                ax.plot([pt[i]], [y], marker="D", markersize=7, markerfacecolor="white",
                        markeredgecolor=PALETTE[0], markeredgewidth=1.6, zorder=5, linestyle="none",
                        label=point_label if i == 0 else None)
        if pt is not None and o_lo is not None:
            ax.plot([], [], color=INK, linewidth=1.2, label=f"{float(outer_level):.0%} outer confidence set")
        if pt is not None:
            ax.legend(loc="lower left", bbox_to_anchor=(0.0, 1.0), ncol=1, borderaxespad=0.2,
                      handletextpad=0.3)
        if unbounded_reason and (lo_unb.any() or hi_unb.any()):
            import textwrap
            fig.supxlabel("\n".join(textwrap.wrap(f"Unbounded: {unbounded_reason}", 95)), x=0.01,
                          ha="left", fontsize=9, color=INK, fontstyle="italic")
        # 2) widen the axis so no end label leaves it
        for _ in range(2):
            settle(fig)
            renderer = fig.canvas.get_renderer()
            box = ax.get_window_extent(renderer)
            need_l = need_r = 0.0
            for t in ax.texts:
                bb = t.get_window_extent(renderer)
                need_l = max(need_l, box.x0 - bb.x0)
                need_r = max(need_r, bb.x1 - box.x1)
            if need_l <= 0 and need_r <= 0:
                break
            per_px = (xmax - xmin) / box.width
            xmin -= (need_l + 6) * per_px * 1.15 if need_l > 0 else 0.0
            xmax += (need_r + 6) * per_px * 1.15 if need_r > 0 else 0.0
            ax.set_xlim(xmin, xmax)
        # 3) the intervals; unbounded sides run to the final axis edge as arrows
        width = xmax - xmin
        if o_lo is not None:
            for i, y in enumerate(ys):
                a = xmin if not np.isfinite(o_lo[i]) else o_lo[i]
                b = xmax if not np.isfinite(o_hi[i]) else o_hi[i]
                ax.plot([a, b], [y, y], color=INK, linewidth=1.2, zorder=2,
                        label=f"{float(outer_level):.0%} outer confidence set" if i == 0 else None)
                for end, fin in ((a, np.isfinite(o_lo[i])), (b, np.isfinite(o_hi[i]))):
                    if fin:
                        ax.plot([end], [y], marker="|", markersize=11, color=INK, markeredgewidth=1.4, zorder=2)
            if pt is None:
                ax.legend(loc="lower left", bbox_to_anchor=(0.0, 1.0), ncol=1, borderaxespad=0.2,
                          handletextpad=0.3)
        for i, y in enumerate(ys):
            a = xmin if lo_unb[i] else lo[i]
            b = xmax if hi_unb[i] else hi[i]
            if a == b:
                ax.plot([a], [y], marker="|", markersize=14, color=color, markeredgewidth=3)
            else:
                ax.plot([a + (0.03 * width if lo_unb[i] else 0.0), b - (0.03 * width if hi_unb[i] else 0.0)],
                        [y, y], color=color, linewidth=5, solid_capstyle="butt", zorder=3)
            for side, unb, edge in (("lower", lo_unb[i], xmin), ("upper", hi_unb[i], xmax)):
                if not unb:
                    continue
                ax.annotate("", xy=(edge, y), xytext=(edge + (0.08 if side == "lower" else -0.08) * width, y),
                            arrowprops=dict(arrowstyle="-|>", color=color, lw=2.2, mutation_scale=18,
                                            shrinkA=0, shrinkB=0), zorder=4, annotation_clip=False)
                ax.annotate("unbounded", xy=(edge, y), xytext=(2 if side == "lower" else -2, 8),
                            textcoords="offset points", ha="left" if side == "lower" else "right",
                            va="bottom", fontsize=9, fontstyle="italic", color=INK)

    status = []
    for i in range(k):
        if lo_unb[i] and hi_unb[i]:
            status.append("unbounded on both sides")
        elif lo_unb[i]:
            status.append("unbounded below")
        elif hi_unb[i]:
            status.append("unbounded above")
        elif lo[i] == hi[i]:
            status.append("point")
        else:
            status.append("bounded")
    table = pd.DataFrame({"coefficient": labels, "lower": lo, "upper": hi,
                          "lower_unbounded": lo_unb, "upper_unbounded": hi_unb,
                          "point": pt if pt is not None else np.full(k, np.nan), "status": status})
    if o_lo is not None:
        table["outer_low"], table["outer_high"] = o_lo, o_hi

    def span_text(i: int, short: bool = False) -> str:
        if status[i] == "point":
            return f"exactly {num(lo[i])}"
        if status[i] == "bounded":
            return num_range(lo[i], hi[i]) if short else f"from {num_range(lo[i], hi[i])}"
        if status[i] == "unbounded below":
            return f"unbounded below, up to {num(hi[i])}"
        if status[i] == "unbounded above":
            return f"unbounded above, from {num(lo[i])}"
        return "unbounded on both sides"

    parts = []
    for i in range(k):
        txt = f"{labels[i]}: {span_text(i)}"
        if pt is not None and np.isfinite(pt[i]):
            txt += f", {point_label} {num(pt[i])}"
        parts.append(txt)
    zero_in = [labels[i] for i in range(k) if lo[i] <= 0 <= hi[i]]
    n_unb = int((lo_unb | hi_unb).sum())
    desc = ("Horizontal intervals, one per coefficient, showing the range of normalised coefficients "
            "consistent with the data when every variable has independent noise of unknown variance "
            "(Frisch scheme)")
    desc += f", with the coefficient on {normalised_on} fixed at 1. " if normalised_on else ". "
    desc += "; ".join(parts) + ". "
    if n_unb:
        desc += (f"{plural(n_unb, 'interval')} {'is' if n_unb == 1 else 'are'} unbounded: drawn as an "
                 "arrow to the edge of the chart with the word unbounded")
        desc += f" ({unbounded_reason}). " if unbounded_reason else ". "
    if zero_in:
        desc += (f"Zero lies inside the range for {join_words(zero_in)}, so the sign of "
                 f"{'that coefficient' if len(zero_in) == 1 else 'those coefficients'} is not pinned down.")
    else:
        desc += "No range contains zero, so every sign is pinned down."
    if o_lo is not None:
        def end(v):
            return num(v) if np.isfinite(v) else "unbounded"
        desc += (f" A thin bar behind each range is its {float(outer_level):.0%} outer confidence set from "
                 "resampling (Imbens & Manski 2004), which covers the true coefficient at that level: "
                 + "; ".join(f"{labels[i]} {end(o_lo[i])} to {end(o_hi[i])}" for i in range(k)) + ".")
    short = "; ".join(f"{labels[i]} {span_text(i, short=True)}" for i in range(k))
    alt = fit_alt(f"Frisch bounds: {short}.",
                  f"Frisch bounds for {plural(k, 'coefficient')}; {n_unb} unbounded; "
                  f"{len(zero_in)} contain zero.")
    return FigureResult(name, fig, alt, desc.strip(), table)
