"""The data overview: the analysed series (standardised) over time and the windows of each plan."""

from __future__ import annotations

from collections.abc import Mapping, Sequence

import numpy as np
import pandas as pd
from matplotlib.ticker import MaxNLocator

from relspan.report.figures.checks import (as_float_array, as_labels, as_times, check_mapping, fail, time_text,
                                           time_values)
from relspan.report.figures.contract import FigureResult, fit_alt, settle
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
                  units: Mapping[str, str] | None = None, title: str | None = None,
                  name: str = "data-overview") -> FigureResult:
    """One small panel per series over time (each in its own units), with the windows of each plan
    in a strip below.

    Parameters
    ----------
    times : (T,) array_like of datetime64, pandas Timestamps or numbers
        The time of each row (row numbers when the data have no time column).
    series : mapping of str to (T,) array_like
        Variable label -> values (after the spec's transforms). Missing values
        (NaN) leave gaps. Each series gets its own panel and vertical axis, in
        its own units; the table also gives the standardised values (minus the
        mean, divided by the standard deviation, ddof = 1).
    windows : mapping of str to sequence of (start, end, label), optional
        Plan label -> its windows; ``start``/``end`` are in the units of
        ``times`` (inclusive). Each plan gets one row in the strip; windows
        that overlap go on separate lines of that row.
    units : mapping of str to str, optional
        Series label -> its unit, written after the label in the panel title.
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

    # ---- figure: one small panel per series, each in its own units, sharing the time axis
    units = dict(units or {})
    lane_of = [_lanes(list(zip(st, en))) for _, st, en, _ in plans]
    n_lanes = [max(l) + 1 for l in lane_of]
    strip_units = sum(n_lanes) + 1.5 * len(plans)
    strip_h = 0.0 if not plans else min(0.35 + 0.16 * strip_units, 3.2)
    k = len(labels)
    panel_h = 1.05 if k <= 4 else 0.85
    with style_context():
        fig = new_figure(0.55 + panel_h * k + strip_h + (0.3 if title else 0.0))
        ratios = [panel_h] * k + ([max(strip_h, 0.5)] if plans else [])
        gs = fig.add_gridspec(len(ratios), 1, height_ratios=ratios, hspace=0.08)
        axs = [fig.add_subplot(gs[0])]
        axs += [fig.add_subplot(gs[i], sharex=axs[0]) for i in range(1, k)]
        axw = fig.add_subplot(gs[k], sharex=axs[0]) if plans else None
        if title:
            fig.suptitle(title, x=0.01, ha="left", fontweight="bold", fontsize=11)
        step = max(1, t.size // 12)
        styles = [series_style(i) for i in range(k)]
        for ax, lab, st in zip(axs, labels, styles):
            ax.plot(t, values[lab], color=st.color, linestyle="-", marker=st.marker,
                    markevery=(st.slot % step, step), markersize=4, linewidth=1.3,
                    markerfacecolor="white" if st.slot % 2 else st.color)
            unit = units.get(lab, "")
            ax.set_title(f"{lab} ({unit})" if unit else lab, fontsize=9.5, fontweight="bold", loc="left",
                         pad=2, color=st.color)
            ax.yaxis.set_major_locator(MaxNLocator(nbins=4, prune="upper"))  # no tick label at the top edge
            ax.tick_params(axis="y", labelsize=8.5)
            ax.margins(x=0.01, y=0.12)
        if is_dt:
            axs[0].xaxis_date()
        for ax in axs[:-1] + ([axs[-1]] if axw is not None else []):
            ax.tick_params(labelbottom=False)
        if axw is None and not is_dt:
            axs[-1].set_xlabel("row")
        if axw is not None:
            settle(fig)
            _draw_window_strip(fig, axw, plans, lane_of, n_lanes)
            if is_dt:  # the plan labels narrow the axes: few enough dates that the labels never overlap
                import matplotlib.dates as mdates

                axw.xaxis.set_major_locator(mdates.AutoDateLocator(minticks=3, maxticks=6))
            else:
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
        fin = values[lab][np.isfinite(values[lab])]
        u = f" {units[lab]}" if units.get(lab) else ""
        txt = (f"{lab}: from {num(fin.min())} to {num(fin.max())}{u}, mean {num(m)}, standard deviation "
               f"{num(s)} (standardised values from {num(zz.min())} to {num(zz.max())})")
        if s == 0:
            txt = f"{lab}: constant at {num(m)} (drawn at 0)"
        if miss:
            txt += f", {plural(miss, 'missing value')}"
        parts.append(txt)
    desc = (f"One small line chart per variable ({plural(len(labels), 'panel')}, stacked, sharing the "
            f"time axis) over {span}, each in its own units on its own vertical axis. "
            + "; ".join(parts) + ".")
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
    head = f"{plural(len(labels), 'series', 'series')}, one panel each, over {span}"
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
        name_txt = axw.text(0.0, top - 0.4, plan, transform=label_at, va="center", ha="left",
                            fontsize=8.5, color=MUTED)
        name_txt.set_in_layout(False)
        top -= 0.9  # the name's line and a gap: the window labels inside the bars below never touch it
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
