"""The data overview: the analysed series (standardised) over time and the windows of each plan."""

from __future__ import annotations

from collections.abc import Mapping, Sequence

import numpy as np
import pandas as pd

from relspan.report.figures.checks import (as_float_array, as_labels, as_times, check_mapping, fail, time_text,
                                           time_values)
from relspan.report.figures.contract import FigureResult, fit_alt, settle
from relspan.report.figures.labels import spread_1d
from relspan.report.figures.style import MUTED, PALETTE, new_figure, series_style, style_context
from relspan.words import num, plural

__all__ = ["data_overview"]


def _lanes(intervals: list[tuple[float, float]]) -> list[int]:
    """Greedy interval-graph colouring: the lowest lane whose last window ended
    before this one starts (windows sorted by start, then end)."""
    order = sorted(range(len(intervals)), key=lambda i: (intervals[i][0], intervals[i][1], i))
    ends: list[float] = []
    lane = [0] * len(intervals)
    for i in order:
        s, e = intervals[i]
        for k, last in enumerate(ends):
            if last < s:
                lane[i] = k
                ends[k] = e
                break
        else:
            lane[i] = len(ends)
            ends.append(e)
    return lane


def data_overview(times, series: Mapping[str, Sequence[float]],
                  windows: Mapping[str, Sequence[tuple]] | None = None, *,
                  title: str | None = None, name: str = "data-overview") -> FigureResult:
    """Standardised series over time, with the windows of each plan in a strip below.

    Parameters
    ----------
    times : (T,) array_like of datetime64, pandas Timestamps or numbers
        The time of each row (row numbers when the data have no time column).
    series : mapping of str to (T,) array_like
        Variable label -> values (after the spec's transforms). Missing values
        (NaN) leave gaps. Each series is drawn standardised: minus its mean,
        divided by its standard deviation (ddof = 1), so all share one axis.
    windows : mapping of str to sequence of (start, end, label), optional
        Plan label -> its windows; ``start``/``end`` are in the units of
        ``times`` (inclusive). Each plan gets one row in the strip; windows
        that overlap go on separate lines of that row.
    title : str, optional
        Drawn above the figure (pages usually give the caption instead).
    name : str
        File stem of the figure.

    Returns
    -------
    FigureResult
        Table columns: ``layer`` ("series" or "window"), ``name`` (variable or
        plan), ``window``, ``time``, ``value``, ``standardised``, ``start``,
        ``end``, ``lane``.
    """
    func = "data_overview"
    t, is_dt = as_times(func, "times", times)
    if t.size < 2:
        raise fail(func, "times", "must have at least 2 rows", "Pass the whole data set.", got=t.size)
    series = check_mapping(func, "series", series)
    labels = as_labels(func, "series", list(series.keys()))
    values = {lab: as_float_array(func, f"series[{lab!r}]", series[key], ndim=1, shape=(t.size,),
                                  allow_nan=True)
              for lab, key in zip(labels, series.keys())}
    windows = {} if windows is None else windows
    if not isinstance(windows, Mapping):
        raise fail(func, "windows", "must be a mapping of plan label to (start, end, label) triples",
                   "Pass e.g. {'rolling': [(start, end, 'w1'), ...]}.", got=type(windows).__name__)
    plans: list[tuple[str, np.ndarray, np.ndarray, list[str]]] = []
    for plan, wins in windows.items():
        key = f"windows[{plan!r}]"
        try:
            triples = [tuple(w) for w in wins]
        except TypeError:
            raise fail(func, key, "must be a sequence of (start, end, label) triples",
                       "Pass one triple per window.") from None
        if not triples:
            raise fail(func, key, "has no windows", "Drop the plan or give it its windows.")
        for i, tr in enumerate(triples):
            if len(tr) != 3:
                raise fail(func, f"{key}[{i}]", "must be a (start, end, label) triple",
                           "Pass start, end and a label for each window.", got=repr(tr))
        starts, _ = as_times(func, f"{key} starts", np.array([tr[0] for tr in triples]))
        ends, _ = as_times(func, f"{key} ends", np.array([tr[1] for tr in triples]))
        wl = as_labels(func, f"{key} labels", [tr[2] for tr in triples])
        bad = np.flatnonzero(ends < starts)
        if bad.size:
            raise fail(func, f"{key}[{int(bad[0])}]", "ends before it starts",
                       "Swap start and end.", got=f"{wl[bad[0]]}")
        plans.append((str(plan), starts, ends, wl))

    # ---- numbers
    stats = {}
    z = {}
    for lab, v in values.items():
        ok = np.isfinite(v)
        if ok.sum() < 2:
            raise fail(func, f"series[{lab!r}]", "has fewer than 2 finite values",
                       "Check the column or drop the variable.")
        m = float(np.mean(v[ok]))
        s = float(np.std(v[ok], ddof=1))
        z[lab] = (v - m) / s if s > 0 else np.where(ok, 0.0, np.nan)
        stats[lab] = (m, s, int((~ok).sum()))

    # ---- figure
    lane_of = [_lanes(list(zip(st, en))) for _, st, en, _ in plans]
    n_lanes = [max(l) + 1 for l in lane_of]
    strip_units = sum(n_lanes) + 1.4 * len(plans)
    strip_h = 0.0 if not plans else min(0.35 + 0.16 * strip_units, 3.2)
    with style_context():
        fig = new_figure(3.4 + strip_h + (0.3 if title else 0.0))
        if plans:
            gs = fig.add_gridspec(2, 1, height_ratios=[3.4, max(strip_h, 0.5)], hspace=0.04)
            ax = fig.add_subplot(gs[0])
            axw = fig.add_subplot(gs[1], sharex=ax)
        else:
            ax = fig.add_subplot(1, 1, 1)
            axw = None
        if title:
            fig.suptitle(title, x=0.01, ha="left", fontweight="bold", fontsize=11)
        step = max(1, t.size // 12)
        styles = [series_style(i) for i in range(len(labels))]
        for lab, st in zip(labels, styles):
            ax.plot(t, z[lab], color=st.color, linestyle=st.linestyle, marker=st.marker,
                    markevery=(st.slot % step, step), markersize=4.5, linewidth=1.4,
                    markerfacecolor="white" if st.slot % 2 else st.color)
        ax.axhline(0, color=MUTED, linewidth=0.8, zorder=1)
        ax.set_ylabel("standardised value\n(standard deviations)")
        ax.margins(x=0.01)
        if is_dt:
            ax.xaxis_date()
        else:
            ax.set_xlabel("row" if axw is None else "")
        # direct labels at the end of each line
        settle(fig)
        last = []
        for lab in labels:
            ok = np.flatnonzero(np.isfinite(z[lab]))
            last.append(float(z[lab][ok[-1]]))
        lo, hi = ax.get_ylim()
        height_px = ax.get_window_extent().height
        gap = (hi - lo) * (15.0 * fig.dpi / 72.0) / max(height_px, 1.0)
        ys = spread_1d(last, gap, lo + gap / 2, hi - gap / 2)
        for lab, st, y in zip(labels, styles, ys):
            ax.annotate(lab, xy=(1.0, y), xycoords=("axes fraction", "data"), xytext=(6, 0),
                        textcoords="offset points", va="center", ha="left", color=st.color,
                        fontsize=9.5, fontweight="bold", annotation_clip=False)
        if axw is not None:
            _draw_window_strip(fig, axw, plans, lane_of, n_lanes)
            for lab in ax.get_xticklabels():
                lab.set_visible(False)
            if is_dt:  # the plan labels narrow the axes: few enough dates that the labels never overlap
                import matplotlib.dates as mdates

                axw.xaxis.set_major_locator(mdates.AutoDateLocator(minticks=3, maxticks=6))
            if not is_dt:
                axw.set_xlabel("row")

    # ---- table
    rows = []
    tv = time_values(t, is_dt)
    for lab in labels:
        for i in range(t.size):
            rows.append({"layer": "series", "name": lab, "window": None, "time": tv[i],
                         "value": values[lab][i], "standardised": z[lab][i],
                         "start": None, "end": None, "lane": None})
    for (plan, st, en, wl), lanes in zip(plans, lane_of):
        sv, ev = time_values(st, is_dt), time_values(en, is_dt)
        for i in range(len(wl)):
            rows.append({"layer": "window", "name": plan, "window": wl[i], "time": None,
                         "value": None, "standardised": None, "start": sv[i], "end": ev[i],
                         "lane": lanes[i] + 1})
    table = pd.DataFrame(rows, columns=["layer", "name", "window", "time", "value", "standardised",
                                        "start", "end", "lane"])
    if is_dt:
        for c in ("time", "start", "end"):
            table[c] = pd.to_datetime(table[c])
    for c in ("value", "standardised"):
        table[c] = pd.to_numeric(table[c])
    table["lane"] = table["lane"].astype("Int64")

    # ---- words
    t0, t1 = time_text(t[0], is_dt), time_text(t[-1], is_dt)
    span = f"{plural(t.size, 'row')} from {t0} to {t1}" if is_dt else f"{plural(t.size, 'row')}"
    parts = []
    for lab in labels:
        m, s, miss = stats[lab]
        zz = z[lab][np.isfinite(z[lab])]
        txt = (f"{lab}: mean {num(m)}, standard deviation {num(s)}, standardised values from "
               f"{num(zz.min())} to {num(zz.max())}")
        if s == 0:
            txt = f"{lab}: constant at {num(m)} (drawn at 0)"
        if miss:
            txt += f", {plural(miss, 'missing value')}"
        parts.append(txt)
    desc = (f"Line chart of {plural(len(labels), 'variable')} over {span}, each standardised "
            f"(minus its mean, divided by its standard deviation) so they share one vertical axis "
            f"in standard deviations. " + "; ".join(parts) + ".")
    if plans:
        pdesc = []
        for plan, st, en, wl in plans:
            if len(wl) == 1:
                pdesc.append(f"{plan}: 1 window ({wl[0]}, {time_text(st[0], is_dt)} to "
                             f"{time_text(en[0], is_dt)})")
            else:
                pdesc.append(f"{plan}: {len(wl)} windows, the first ({wl[0]}) from "
                             f"{time_text(st[0], is_dt)} to {time_text(en[0], is_dt)}, the last "
                             f"({wl[-1]}) from {time_text(st[-1], is_dt)} to {time_text(en[-1], is_dt)}")
        desc += (" Below the lines, one strip per window plan shows each window as a bar over the "
                 "rows it covers (overlapping windows on separate lines): " + "; ".join(pdesc) + ".")
    alt_plans = ", ".join(f"{p}: {len(w)}" for p, _, _, w in plans)
    head = f"{plural(len(labels), 'standardised series', 'standardised series')} over {span}"
    alt = fit_alt(f"{head}, with the windows of each plan ({alt_plans})." if plans else f"{head}.",
                  f"{head}, with {plural(len(plans), 'window plan')}." if plans else head,
                  f"{plural(len(labels), 'series', 'series')}, {plural(t.size, 'row')}.")
    return FigureResult(name, fig, alt, desc, table)


def _draw_window_strip(fig, axw, plans, lane_of, n_lanes) -> None:
    """One band per plan (top to bottom), windows as bars, overlapping ones on separate lines."""
    from matplotlib.patches import Rectangle

    y_top = 0.0
    centres, names = [], []
    bars = []
    from matplotlib.transforms import blended_transform_factory

    label_at = blended_transform_factory(axw.transAxes, axw.transData)
    for (plan, st, en, wl), lanes, nl in zip(plans, lane_of, n_lanes):
        top = y_top
        # the plan's name on a line of its own above its bars, so long names never narrow the axes
        name_txt = axw.text(0.0, top - 0.45, plan, transform=label_at, va="center", ha="left",
                            fontsize=8.5, color=MUTED)
        name_txt.set_in_layout(False)
        top -= 0.8
        for i in range(len(wl)):
            y = top - 0.3 - lanes[i]
            width = max(en[i] - st[i], 0.0)
            rect = Rectangle((st[i], y - 0.36), width, 0.72, facecolor=PALETTE[0],
                             edgecolor="white", linewidth=0.6)
            axw.add_patch(rect)
            bars.append((rect, wl[i], len(wl)))
        bottom = top - 0.6 - nl
        centres.append(0.5 * (top + bottom))
        names.append(plan)
        axw.axhline(bottom, color="#c8c8c8", linewidth=0.6)
        y_top = bottom
    axw.set_ylim(y_top, 0.05)
    axw.set_yticks([])
    axw.tick_params(axis="y", length=0)
    axw.grid(axis="y", visible=False)
    axw.spines["left"].set_visible(False)
    # window labels inside bars when there are few windows and the label fits
    settle(fig)
    renderer = fig.canvas.get_renderer()
    for rect, label, count in bars:
        if count > 8:
            continue
        x0, y0 = rect.get_x(), rect.get_y()
        txt = axw.text(x0, y0 + 0.36, " " + label, va="center", ha="left", color="white",
                       fontsize=8.5, clip_on=True)
        txt.set_in_layout(False)
        tb = txt.get_window_extent(renderer)
        rb = rect.get_window_extent(renderer)
        if tb.width > rb.width - 2:
            txt.remove()
