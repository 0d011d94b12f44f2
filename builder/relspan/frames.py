"""Notebook tables: analysis results as pandas DataFrames, and short summaries.

The Python face (:mod:`relspan.api`, :class:`relspan.run.build.Outcome`) shows
results through these functions. They read results (and never recompute an
analysis quantity) with the same rule as the site's pages: a normalised
coefficient is shown only where it is identified, i.e. where the assumption's
corank is one (a point for the elementary regressions, equal noise and the
known noise shape; a range for diagonal noise); with two or more relations
any mix of them is a relation too, so no single coefficient is shown, and the
``coefficients`` column says why. Every coefficient column is named after its
variable and the ``normalised_on`` column names the variable whose
coefficient is fixed at 1 (the equation is solved for it).

Summaries (``summary_lines``, ``html_table``) stay short whatever the size of
the run: reprs in a notebook must not print arrays.
"""

from __future__ import annotations

import html
from typing import Iterable, Sequence

import numpy as np

__all__ = ["coefficient_status", "assumptions_frame", "windows_frame", "verdicts_frame",
           "findings_frame", "html_table", "short"]


def short(text: object, limit: int = 80) -> str:
    """``text`` cut to ``limit`` characters (with an ellipsis)."""
    s = " ".join(str(text).split())
    return s if len(s) <= limit else s[: limit - 1] + "\u2026"


def coefficient_status(window, assumption: str) -> tuple[str, dict[str, float]]:
    """What a window shows for one assumption's coefficients: ``(status, {column: value})``.

    ``status`` is ``point``, ``range``, ``unbounded``, ``not identified (q relations)``,
    ``no relation`` or ``corank undetermined``; the mapping holds ``coef[x]`` (points)
    or ``low[x]``/``high[x]`` (diagonal-noise ranges) for every variable but the
    normalising one, and is empty where nothing is identified.
    """
    q = window.coranks.get(assumption)
    names, ref = window.names, window.ref
    others = [k for k in range(len(names)) if k != ref]
    if assumption != "elementary":
        if q is None:
            return "corank undetermined", {}
        if q == 0:
            return "no relation", {}
        if q >= 2:
            return f"not identified ({q} relations)", {}
    if assumption == "diagonal":
        lo, hi = window.frisch_lower, window.frisch_upper
        if lo is None or hi is None:
            return "not computed", {}
        values = {}
        for k in others:
            values[f"low[{names[k]}]"] = float(lo[k])
            values[f"high[{names[k]}]"] = float(hi[k])
        finite = all(np.isfinite(v) for v in values.values())
        return ("range" if finite else "unbounded"), values
    coef = window.coefficients.get(assumption)
    if coef is None:
        return "no point answer", {}
    status = "point, given which variable is noisy" if assumption == "elementary" else "point"
    return status, {f"coef[{names[k]}]": float(coef[k]) for k in others}


def assumptions_frame(window, assumptions: Sequence[str] | None = None):
    """One row per noise assumption: corank, normalising variable, coefficients where identified."""
    import pandas as pd

    rows = []
    for a in assumptions or tuple(window.coranks):
        status, values = coefficient_status(window, a)
        q = window.coranks.get(a)
        rows.append({"assumption": a, "corank": q, "normalised_on": window.names[window.ref],
                     "coefficients": status, **values})
    frame = pd.DataFrame(rows)
    if frame.empty:
        return frame
    return frame.astype({"corank": "Int64"}).set_index("assumption")


def windows_frame(dataset_result):
    """One row per window and assumption of every plan of a dataset.

    Columns: ``plan``, ``window`` (label), ``start``/``end`` (times of the first
    and last row, in the data's notation; row numbers without a time column),
    ``rows``, ``assumption``, ``corank``, ``angle_to_full_deg`` (largest principal
    angle between the window's relation subspace and the full sample's at the
    examined corank, where both exist), ``normalised_on``, ``coefficients``
    (status) and the coefficient columns where identified.
    """
    import pandas as pd

    rows = []
    examined = tuple(getattr(dataset_result, "examined", ()) or ())
    for plan in dataset_result.plans:
        angles: dict[str, np.ndarray] = {}
        for a, stab in plan.stability.items():
            if examined and stab.reference_dim == examined[0]:
                angles[a] = np.asarray(stab.to_reference_deg, dtype=float)
        for i, (w, analysis) in enumerate(zip(plan.windows, plan.analyses)):
            start = w.first_time if w.first_time is not None else str(w.first_row)
            end = w.last_time if w.last_time is not None else str(w.last_row)
            for a in analysis.coranks:
                status, values = coefficient_status(analysis, a)
                angle = angles.get(a)
                rows.append({"plan": plan.plan.id, "window": w.label, "start": start, "end": end,
                             "rows": int(analysis.count), "assumption": a,
                             "corank": analysis.coranks.get(a),
                             "angle_to_full_deg": float(angle[i]) if angle is not None else np.nan,
                             "normalised_on": analysis.names[analysis.ref],
                             "coefficients": status, **values})
    base = ["plan", "window", "start", "end", "rows", "assumption", "corank", "angle_to_full_deg",
            "normalised_on", "coefficients"]
    frame = pd.DataFrame(rows)
    if frame.empty:
        return pd.DataFrame(columns=base)
    extra = [c for c in frame.columns if c not in base]
    frame = frame[base + extra]
    # an undetermined corank is a missing value, not a float: keep whole numbers whole
    return frame.astype({"rows": "int64", "corank": "Int64"})


def verdicts_frame(verdicts: Iterable):
    """One row per claim: id, kind, dataset, plan, verdict, what was observed, the claim's text."""
    import pandas as pd

    rows = [{"claim": v.claim.id, "kind": v.claim.kind, "dataset": v.claim.dataset,
             "plan": v.claim.plan, "holds": bool(v.holds), "verdict": v.word,
             "observed": v.observed, "windows_failing": ", ".join(v.windows_failing),
             "text": v.claim.text} for v in verdicts]
    cols = ["claim", "kind", "dataset", "plan", "holds", "verdict", "observed", "windows_failing", "text"]
    frame = pd.DataFrame(rows, columns=cols)
    return frame.set_index("claim")


def findings_frame(findings: Iterable):
    """One row per finding: kind, topic and headline (the site's statements)."""
    import pandas as pd

    return pd.DataFrame([{"kind": f.kind, "topic": f.topic, "headline": f.headline}
                         for f in findings], columns=["kind", "topic", "headline"])


def html_table(caption: str, header: Sequence[str], rows: Iterable[Sequence[object]], *,
               limit: int = 12, more: str = "") -> str:
    """A small escaped HTML table (at most ``limit`` rows, then a line saying how many more)."""
    rows = list(rows)
    out = [f"<table><caption style=\"text-align:left\">{html.escape(caption)}</caption><thead><tr>"]
    out += [f"<th>{html.escape(str(h))}</th>" for h in header]
    out.append("</tr></thead><tbody>")
    for r in rows[:limit]:
        out.append("<tr>" + "".join(f"<td>{html.escape(short(c, 120))}</td>" for c in r) + "</tr>")
    out.append("</tbody></table>")
    if len(rows) > limit:
        out.append(f"<p>\u2026 and {len(rows) - limit} more{html.escape(more)}.</p>")
    return "".join(out)
