"""Claim verdicts: the authors' statements, re-checked on every build.

A claim (``claims:`` in the spec, :class:`relspan.spec.model.ClaimSpec`) is
tested against the analysis of every window of its plan. The verdict keeps
the numbers behind it so the site and ``relspan check`` can show them.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from relspan.analysis.stability import subspace_stability
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
    """

    claim: ClaimSpec
    holds: bool
    observed: str
    numbers: dict = field(default_factory=dict)
    windows_failing: tuple[str, ...] = ()

    @property
    def word(self) -> str:
        return "holds" if self.holds else "fails"

    def to_dict(self) -> dict:
        from relspan.analysis._common import jsonable

        c = self.claim
        return jsonable({"id": c.id, "kind": c.kind, "dataset": c.dataset, "plan": c.plan,
                         "text": c.text, "holds": self.holds, "observed": self.observed,
                         "numbers": self.numbers, "windows_failing": list(self.windows_failing)})


def _fmt(x: float) -> str:
    return f"{x:.3g}"


def _corank(claim: ClaimSpec, plan) -> ClaimVerdict:
    assumption = claim.assumption or "equal"
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
    return ClaimVerdict(claim, not failing, observed + ".",
                        {"assumption": assumption, "coranks": dict(zip(labels, seq))}, failing)


def _subspace(claim: ClaimSpec, plan, result) -> ClaimVerdict:
    assumption = claim.assumption or "equal"
    q = claim.corank or (result.examined[0] if result.examined else 1)
    stab = plan.stability.get((assumption, q))
    if stab is None:
        bases = [a.bases.get(assumption, {}).get(q) for a in plan.analyses]
        ref = result.full.bases.get(assumption, {}).get(q)
        if ref is None or any(b is None for b in bases):
            return ClaimVerdict(claim, False, f"No corank-{q} relation subspace under "
                                f"{_assumption(assumption).name} could be computed in every window, so the "
                                "claim cannot be confirmed.", {"assumption": assumption, "corank": q})
        stab = subspace_stability(bases, labels=plan.labels, reference=ref,
                                  threshold_deg=float(claim.below_deg))
    angles = np.asarray(stab.to_reference_deg, dtype=float)
    failing = tuple(lab for lab, a in zip(plan.labels, angles) if not a < claim.below_deg)
    worst = float(np.max(angles)) if angles.size else 0.0
    observed = (f"Largest angle between a window's corank-{q} relation subspace and the full sample's, "
                f"under {_assumption(assumption).name}: {_fmt(worst)} degrees (claim: below "
                f"{_fmt(claim.below_deg)}); largest angle between any two windows: "
                f"{_fmt(stab.max_pairwise_deg)} degrees.")
    return ClaimVerdict(claim, not failing, observed,
                        {"assumption": assumption, "corank": q, "max_to_full_deg": worst,
                         "max_pairwise_deg": float(stab.max_pairwise_deg),
                         "to_full_deg": dict(zip(plan.labels, angles.tolist()))}, failing)


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
    observed = (f"Under independent noise of unknown size (Frisch scheme), the coefficient of "
                f"{claim.variable} in the equation for {claim.normalise_on} is bounded in "
                f"{len(intervals) - len(failing)} of {len(intervals)} window(s); {span}.")
    return ClaimVerdict(claim, not failing, observed,
                        {"intervals": {lab: (None if iv is None else list(iv))
                                       for lab, iv in zip(plan.labels, intervals)}}, failing)


def evaluate_claim(claim: ClaimSpec, datasets) -> ClaimVerdict:
    """Verdict on one claim against the :class:`~relspan.analysis.results.DatasetResult` s of a run."""
    result = next(d for d in datasets if d.spec.id == claim.dataset)  # the loader checked it exists
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
