"""Claim verdicts: the authors' statements, re-checked on every build.

A claim (``claims:`` in the spec, :class:`relspan.spec.model.ClaimSpec`) is
tested against the analysis of every window of its plan (``no_break``: against
the scan of the whole sample). The verdict keeps the numbers behind it so the
site and ``relspan check`` can show them.

Three verdicts: the claim holds, fails, or *cannot be judged* (the data or the
analysis cannot support either: e.g. a stability claim where a compared window
has no determined relation, or where sampling alone moves the subspace by more
than the claimed angle). ``relspan check`` exits 1 unless every claim holds.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from relspan.assumptions import assumption as _assumption
from relspan.spec.model import ClaimSpec

__all__ = ["ClaimVerdict", "evaluate_claims", "evaluate_claim"]



@dataclass(frozen=True, slots=True)
class ClaimVerdict:
    """The verdict on one claim.

    Attributes
    ----------
    claim : ClaimSpec
        The claim as written in the spec.
    holds : bool
        True when the data support the claim in every window of its plan.
    observed : str
        What the analysis found, in plain words with the numbers.
    numbers : dict
        The numbers behind the verdict (JSON-ready).
    windows_failing : tuple of str
        Labels of the windows where the claim does not hold.
    judged : bool
        False when the claim cannot be judged (``holds`` is then False too).
    why : str
        Why it cannot be judged ("" otherwise).
    """

    claim: ClaimSpec
    holds: bool
    observed: str
    numbers: dict = field(default_factory=dict)
    windows_failing: tuple[str, ...] = ()
    judged: bool = True
    why: str = ""

    @property
    def word(self) -> str:
        """``"holds"``, ``"fails"`` or ``"cannot be judged"``."""
        if not self.judged:
            return "cannot be judged"
        return "holds" if self.holds else "fails"

    def to_dict(self) -> dict:
        from relspan.analysis._common import jsonable

        c = self.claim
        return jsonable({"id": c.id, "kind": c.kind, "dataset": c.dataset, "plan": c.plan,
                         "text": c.text, "holds": self.holds, "verdict": self.word, "why": self.why,
                         "observed": self.observed,
                         "numbers": self.numbers, "windows_failing": list(self.windows_failing)})


def _fmt(x: float) -> str:
    return f"{x:.3g}"


def _unjudged(claim: ClaimSpec, observed: str, why: str, numbers: dict | None = None) -> ClaimVerdict:
    return ClaimVerdict(claim, False, observed, numbers or {}, (), judged=False, why=why)


def _support_words(plan, assumption: str) -> str:
    """Each window's count with its resampling support, in a few words ("" when resampling is off).

    The smallest share of resamples giving a window's own count, and how many windows fall below
    :data:`~relspan.analysis.findings.support.SETTLED_SHARE` (their count is not confirmed by resampling).
    """
    from relspan.analysis.findings.support import SETTLED_SHARE, count_support, windows_support

    own = windows_support(plan.analyses, assumption)
    if own.share is None:
        return f"; resampling support: {own.why}" if own.why else ""
    weak = sum(1 for a in plan.analyses if a.coranks.get(assumption) is not None
               and count_support(a, assumption).weak)
    least = "at least " if round(100 * own.share) < 100 else ""
    text = f"; each window's count chosen in {least}{100 * own.share:.0f}% of its {own.resamples} resamples"
    if weak:
        text += (f" ({weak} window(s) below {100 * SETTLED_SHARE:.0f}%: there the count is not confirmed "
                 "by resampling)")
    return text


def _corank(claim: ClaimSpec, plan) -> ClaimVerdict:
    assumption = claim.assumption  # the spec requires it for corank claims
    seq = [a.coranks.get(assumption) for a in plan.analyses]
    labels = plan.labels

    def ok(q):
        if q is None:
            return False
        if claim.equals is not None and q != claim.equals:
            return False
        if claim.at_least is not None and q < claim.at_least:
            return False
        if claim.at_most is not None and q > claim.at_most:
            return False
        return True

    failing = tuple(lab for lab, q in zip(labels, seq) if not ok(q))
    want = " and ".join(f"{word} {v}" for word, v in (("exactly", claim.equals), ("at least", claim.at_least),
                                                      ("at most", claim.at_most)) if v is not None)
    values = sorted({q for q in seq if q is not None})
    undetermined = sum(q is None for q in seq)
    found = ", ".join(str(v) for v in values) or "none determined"
    observed = (f"Corank under {_assumption(assumption).name} ({want} wanted): {found} across "
                f"{len(seq)} window(s); {len(seq) - len(failing)} of {len(seq)} agree")
    if undetermined:
        observed += f"; undetermined at the tolerance in {undetermined}"
    observed += _support_words(plan, assumption)
    numbers = {"assumption": assumption, "coranks": dict(zip(labels, seq))}
    determined_failing = tuple(lab for lab, q in zip(labels, seq) if q is not None and not ok(q))
    if undetermined and not determined_failing:
        return ClaimVerdict(claim, False, observed + ".", numbers, failing, judged=False,
                            why=f"the corank is undetermined at the tolerance in {undetermined} of "
                                f"{len(seq)} window(s), and every determined one agrees")
    return ClaimVerdict(claim, not failing, observed + ".", numbers, failing)


def _subspace(claim: ClaimSpec, plan, result) -> ClaimVerdict:
    """The windows' relation subspaces compared with each other (not with the full sample)."""
    assumption = claim.assumption or "equal"
    q = int(claim.corank)
    name = _assumption(assumption).name
    below = float(claim.below_deg)
    labels = plan.labels
    numbers = {"assumption": assumption, "corank": q, "below_deg": below}
    head = f"Corank-{q} relation subspaces of the windows of plan {plan.plan.id!r} under {name}"
    if len(plan.analyses) < 2:
        why = "the plan has a single window, so there is nothing to compare"
        return _unjudged(claim, f"{head}: cannot be judged: {why}.", why, numbers)
    seq = [a.coranks.get(assumption) for a in plan.analyses]
    numbers["coranks"] = dict(zip(labels, seq))
    other = tuple(lab for lab, c in zip(labels, seq) if c is not None and c >= 1 and c != q)
    if other:
        return ClaimVerdict(claim, False, f"{head}: the number of relations is not {q} in "
                            f"{len(other)} window(s) ({', '.join(other[:4])}), so no {q}-dimensional "
                            "subspace persists across them.", numbers, other)
    missing = [(lab, c) for lab, c in zip(labels, seq) if c is None or c == 0]
    if missing:
        parts = [f"{lab} ({'undetermined at the tolerance' if c is None else 'no relation found'})"
                 for lab, c in missing[:4]]
        why = (f"under {name} the corank is not {q} in compared window(s): {', '.join(parts)}; angles "
               "between relations that the data do not show mean nothing")
        return _unjudged(claim, f"{head}: cannot be judged: {why}.", why, numbers)
    stab = plan.stability.get(assumption)
    if stab is None:
        why = (f"under {name} the answer in a window is a set or family of subspaces, not one subspace, "
               "so windows cannot be compared by one angle" if assumption == "diagonal" else
               f"no comparison of windows was computed under {name}")
        return _unjudged(claim, f"{head}: cannot be judged: {why}.", why, numbers)
    if stab.pairwise_deg is not None:
        iu = np.triu_indices(len(labels), 1)
        ang, thr = stab.pairwise_deg[iu], stab.pairwise_threshold_deg[iu]
        pairs = list(zip(iu[0].tolist(), iu[1].tolist()))
        compared = "every pair of windows"
    else:
        ang, thr = stab.neighbour_deg, stab.neighbour_threshold_deg
        pairs = [tuple(p) for p in stab.neighbour_pairs.tolist()]
        compared = "neighbouring windows"
    worst = float(np.max(ang)) if ang.size else 0.0
    spread = float(np.max(thr)) if thr.size else 0.0
    numbers.update({"max_between_windows_deg": worst, "max_sampling_threshold_deg": spread,
                    "compared": compared, "rule": stab.rule,
                    "between_windows_deg": {f"{labels[i]} | {labels[j]}": float(a)
                                            for (i, j), a in zip(pairs, ang)}})
    failing = tuple(dict.fromkeys(lab for (i, j), a in zip(pairs, ang) if not a < below
                                  for lab in (labels[i], labels[j])))
    observed = (f"{head}, compared between {compared}: largest angle {_fmt(worst)} degrees (claim: below "
                f"{_fmt(below)}); sampling alone produces angles up to {_fmt(spread)} degrees here "
                f"({stab.rule.rstrip('.')})")
    if failing:
        return ClaimVerdict(claim, False, observed + ".", numbers, failing)
    if spread >= below:
        why = (f"sampling alone moves these subspaces by up to {_fmt(spread)} degrees, more than the claimed "
               f"{_fmt(below)}, so an angle below {_fmt(below)} is no evidence of stability")
        return _unjudged(claim, observed + f"; cannot be judged: {why}.", why, numbers)
    return ClaimVerdict(claim, True, observed + ".", numbers, ())


def _no_break(claim: ClaimSpec, result) -> ClaimVerdict:
    """No break of the relation subspace at any date (the scan of the whole sample)."""
    assumption = claim.assumption or "equal"
    name = _assumption(assumption).name
    br = getattr(result, "breaks", {}).get(assumption)
    if br is None:
        why = f"no break scan was run under {name}"
        return _unjudged(claim, f"Break scan under {name}: cannot be judged: {why}.", why,
                         {"assumption": assumption})
    if br.scan is None:
        why = br.reason.rstrip(".")
        return _unjudged(claim, f"Break scan under {name}: {br.reason}", why, br.to_dict())
    sc = br.scan
    if sc.found:
        dated = br.dated() or [(None, br.date, br.date_low, br.date_high)]
        parts = []
        for b, date, low, high in dated:
            if b is None:  # a scan result without per-break records: the whole sample's test only
                parts.append(f"at {date} (interval {low} to {high}); angle before/after "
                             f"{_fmt(sc.angle_deg)} degrees; statistic {_fmt(sc.statistic)} above the "
                             f"critical value {_fmt(sc.critical_value)} (p = {_fmt(sc.p_value)})")
                continue
            parts.append(f"at {date} (interval {low} to {high}); angle between the neighbouring "
                         f"segments {_fmt(b.angle_deg)} degrees; statistic {_fmt(b.statistic)} above the "
                         f"critical value {_fmt(b.critical_value)} (p = {_fmt(b.p_value)})")
        head = ("A break" if len(parts) == 1 else f"{len(parts)} breaks")
        observed = (f"{head} of the {sc.q}-dimensional relation subspace under {name}: "
                    + "; ".join(parts) + f". {sc.rule}")
        return ClaimVerdict(claim, False, observed, br.to_dict(), tuple(str(d[1]) for d in dated))
    observed = (f"No break of the {sc.q}-dimensional relation subspace under {name}: statistic "
                f"{_fmt(sc.statistic)} at most the critical value {_fmt(sc.critical_value)} "
                f"(p = {_fmt(sc.p_value)}). {sc.rule}")
    return ClaimVerdict(claim, True, observed, br.to_dict(), ())


def _sign(claim: ClaimSpec, plan, names) -> ClaimVerdict:
    assumption = claim.assumption or "elementary"
    i, k = names.index(claim.normalise_on), names.index(claim.variable)
    vals = [a.coefficient(assumption, i, k) for a in plan.analyses]
    signs = [None if v is None or not np.isfinite(v) or abs(v) <= 1e-12 else (1 if v > 0 else -1)
             for v in vals]
    if claim.sign in ("positive", "negative"):
        want = 1 if claim.sign == "positive" else -1
    else:
        known = [s for s in signs if s is not None]
        want = known[0] if known else 1
    failing = tuple(lab for lab, s in zip(plan.labels, signs) if s != want)
    finite = [v for v in vals if v is not None and np.isfinite(v)]
    rng = f"from {_fmt(min(finite))} to {_fmt(max(finite))}" if finite else "not available"
    observed = (f"Coefficient of {claim.variable} in the equation for {claim.normalise_on} under "
                f"{_assumption(assumption).name}: {rng} across {len(vals)} window(s); "
                f"{'positive' if want > 0 else 'negative'} in {len(vals) - len(failing)} of {len(vals)}.")
    return ClaimVerdict(claim, not failing, observed,
                        {"assumption": assumption, "values": dict(zip(plan.labels, vals))}, failing)


def _bounded(claim: ClaimSpec, plan, names) -> ClaimVerdict:
    i, k = names.index(claim.normalise_on), names.index(claim.variable)
    intervals = [a.frisch_interval(i, k) for a in plan.analyses]
    failing = tuple(lab for lab, iv in zip(plan.labels, intervals)
                    if iv is None or not (np.isfinite(iv[0]) and np.isfinite(iv[1])))
    finite = [iv for iv in intervals if iv is not None and np.isfinite(iv[0]) and np.isfinite(iv[1])]
    span = (f"intervals from [{_fmt(min(iv[0] for iv in finite))}, {_fmt(min(iv[1] for iv in finite))}] "
            f"to [{_fmt(max(iv[0] for iv in finite))}, {_fmt(max(iv[1] for iv in finite))}]") if finite else "no finite interval"
    observed = (f"Under independent noise, the coefficient of "
                f"{claim.variable} in the equation for {claim.normalise_on} is bounded in "
                f"{len(intervals) - len(failing)} of {len(intervals)} window(s); {span}.")
    return ClaimVerdict(claim, not failing, observed,
                        {"intervals": {lab: (None if iv is None else list(iv))
                                       for lab, iv in zip(plan.labels, intervals)}}, failing)


def evaluate_claim(claim: ClaimSpec, datasets) -> ClaimVerdict:
    """Verdict on one claim against the :class:`~relspan.analysis.results.DatasetResult` s of a run."""
    result = next(d for d in datasets if d.spec.id == claim.dataset)  # the loader checked it exists
    if claim.kind == "no_break":
        return _no_break(claim, result)
    plan = result.plan(claim.plan)
    if claim.kind == "corank":
        return _corank(claim, plan)
    if claim.kind == "subspace_stable":
        return _subspace(claim, plan, result)
    if claim.kind == "sign_stable":
        return _sign(claim, plan, result.names)
    if claim.kind == "coefficient_bounded":
        return _bounded(claim, plan, result.names)
    raise ValueError(f"unknown claim kind {claim.kind!r}")  # the spec loader rejects these first


def evaluate_claims(claims, datasets) -> list[ClaimVerdict]:
    """Verdicts on every claim, in the spec's order, against the datasets' results."""
    return [evaluate_claim(c, datasets) for c in claims]
