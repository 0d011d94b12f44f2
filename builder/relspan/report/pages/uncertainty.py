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


def _pct(x: float) -> str:
    return f"{100 * x:.0f}%"


def support_words(analysis, assumption: str) -> str:
    """The resampling support of the window's count, for brackets after it, or why there is none.

    ``"chosen in 96% of 499 resamples; 3: 4%"`` (the other counts the resamples give, most frequent
    first); bounded noise: ``"admissible in 100% of 499 resamples; the largest admissible in 96%; 3: 4%"``;
    an undetermined count: every count's share.
    """
    inf = analysis.inference
    if inf is None:
        return NOT_COMPUTED
    s = inf.coranks.get(assumption)
    if s is None:
        return _NO_SUPPORT.get(assumption, "resampling support is not computed for this assumption")
    q = analysis.coranks.get(assumption)
    if q is None:
        return f"{s.as_text()}; {s.resamples} resamples"
    others = sorted(((k, x) for k, x in zip(s.coranks, s.chosen_share) if k != q and x >= 0.005),
                    key=lambda t: (-t[1], t[0]))
    rest = "".join(f"; {k}: {_pct(x)}" for k, x in others)
    if s.undetermined_share >= 0.005:
        rest += f"; undetermined: {_pct(s.undetermined_share)}"
    of = f"of {s.resamples} resamples"
    if assumption == "bounded" and s.admissible_share is not None and 1 <= q < len(s.admissible_share):
        return (f"admissible in {_pct(s.admissible_share[q])} {of}; the largest admissible in "
                f"{_pct(s.support(q))}{rest}")
    if assumption == "bounded":
        return f"the largest admissible count in {_pct(s.support(q))} {of}{rest}"
    return f"chosen in {_pct(s.support(q))} {of}{rest}"


def corank_cell(analysis, row) -> Raw:
    """A table cell for an :class:`~relspan.analysis.findings.AssumptionRow`'s corank: the count and its
    support in brackets (``"2 (chosen in 96% of 499 resamples; 3: 4%)"``)."""
    words = support_words(analysis, row.assumption)
    if row.corank_words.endswith(")"):          # "1 (assumed)": one pair of brackets
        return md("{}; {})", row.corank_words[:-1], words)
    return md("{} ({})", row.corank_words, words)


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
