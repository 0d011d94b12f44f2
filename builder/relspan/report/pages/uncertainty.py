"""Sampling uncertainty on the pages: coranks as sets with resampling support, numbers with intervals.

Everything here reads :class:`relspan.analysis.inference.WindowInference` (attached to each window's
result) and writes it; nothing is recomputed. Where no support or interval exists, the cell says why.
"""

from __future__ import annotations

import math

from relspan.site.markdown import Raw, joined, md
from relspan.words import fmt

__all__ = ["corank_cell", "support_words", "coefficient_cell_with_intervals", "interval_words",
           "resampling_sentence", "NOT_COMPUTED"]

#: said wherever an interval or a support would be, when resampling is off
NOT_COMPUTED = ("intervals and resampling support were not computed (checks.resampling.resamples is 0)")

_NO_SUPPORT = {
    "elementary": "presupposed by this assumption, so no resampling support applies",
    "shaped": "resampling support is not computed for the known-noise-shape assumption",
    "diagonal": ("resampling support is computed for the full sample and named periods only, not for rolling "
                 "or expanding windows (cost; see Methods)"),
}


def support_words(analysis, assumption: str) -> str:
    """``"2: in 96% of resamples; 3: 4%"``, or why there is no support."""
    inf = analysis.inference
    if inf is None:
        return NOT_COMPUTED
    s = inf.coranks.get(assumption)
    if s is None:
        return _NO_SUPPORT.get(assumption, "resampling support is not computed for this assumption")
    return f"{s.as_text()} (of {s.resamples})"


def corank_cell(analysis, row) -> Raw:
    """A table cell for an :class:`~relspan.analysis.findings.AssumptionRow`'s corank: the count and its set."""
    return md("{}; {}", row.corank_words, support_words(analysis, row.assumption))


def interval_words(iv) -> str:
    """``"0.52 to 0.61"`` for an interval (``"not available"`` without finite ends)."""
    if iv is None or not (math.isfinite(iv.low) and math.isfinite(iv.high)):
        return "not available"
    return f"{fmt(iv.low)} to {fmt(iv.high)}"


def _same(a: float, b: float) -> bool:
    return math.isfinite(a) and math.isfinite(b) and abs(a - b) <= 1e-9 * max(1.0, abs(a), abs(b))


def coefficient_cell_with_intervals(row, analysis, names, labels) -> Raw | None:
    """The coefficients of one assumption row with their intervals (None: the row has no numbers).

    ``equal``: the reduced-form interval of the single relation; ``elementary``: the regression's
    interval; ``diagonal`` (a set): the Imbens-Manski outer set beside the identified range.
    """
    inf = analysis.inference
    lab_to_name = dict(zip(labels, names))
    ref = names[analysis.ref]
    level = f"{inf.level:.0%}" if inf is not None else ""
    if row.points:
        parts = []
        for lab, v in row.points:
            iv = None
            if inf is not None:
                name = lab_to_name.get(lab)
                if row.assumption == "equal" and inf.targets.get(1) == (ref,):
                    iv = inf.coefficient(1, ref, name)
                elif row.assumption == "elementary":
                    iv = inf.elementary_coefficient(ref, name)
            if iv is not None and _same(iv.estimate, float(v)):
                parts.append(md("{}: {} ({} interval {})", lab, fmt(v), level, interval_words(iv)))
            else:
                parts.append(md("{}: {}", lab, fmt(v)))
        return joined(parts, "; ")
    if row.intervals:
        outer = {o.variable: o for o in inf.outer} if inf is not None else {}
        parts = []
        for lab, lo, hi in row.intervals:
            o = outer.get(lab_to_name.get(lab))
            if o is not None and _same(o.lower, float(lo)) and _same(o.upper, float(hi)):
                widened = (f"{fmt(o.low) if math.isfinite(o.low) else 'unbounded'} to "
                           f"{fmt(o.high) if math.isfinite(o.high) else 'unbounded'}")
                parts.append(md("{}: {} to {} ({} outer set {})", lab, fmt(lo), fmt(hi), level, widened))
            else:
                parts.append(md("{}: {} to {}", lab, fmt(lo), fmt(hi)))
        return joined(parts, "; ")
    return None


def resampling_sentence(analysis) -> str:
    """One sentence saying how the window's intervals and supports were made."""
    inf = analysis.inference
    if inf is None:
        return "Intervals and corank supports were not computed: resampling is off (checks.resampling.resamples: 0)."
    how = {"stationary": f"stationary block bootstrap, mean block length {fmt(inf.block_length_rows)} rows",
           "moving": f"moving block bootstrap, block length {fmt(inf.block_length_rows)} rows",
           "iid": "bootstrap of single rows"}[inf.scheme]
    note = f" {inf.note}" if inf.note else ""
    return (f"Intervals are {inf.level:.0%} bootstrap intervals from {inf.resamples} resamples ({how}); a corank "
            f"is shown with the share of resamples that give each value (see Methods).{note}")
