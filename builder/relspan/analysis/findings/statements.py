"""Findings: the analysis turned into typed, plain-words statements.

Each :class:`~relspan.analysis.findings.records.Finding` says one thing the
data pin down, leave open, make depend on the noise assumption, or show to be
(un)stable across windows, and carries the numbers, the assumptions and the
tolerance behind it. The report renders them; nothing here formats HTML or
reads files.

Kinds (``Finding.kind``):

* ``pinned_down``      - a quantity the data identify (with its value or bound);
* ``set_only``         - identified only as a set (an interval, a family);
* ``not_identified``   - the data cannot pin it down, and why;
* ``depends``          - the answer changes with the noise assumption;
* ``unstable``         - the answer changes across windows;
* ``stable``           - the answer holds across windows (thresholds stated);
* ``no_relation``      - no linear relation is supported at the tolerance.
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np

from relspan.assumptions import assumption as _assumption

from relspan.analysis.findings.records import Finding, Tolerance
from relspan.analysis.findings.support import (count_support, share_words, support_record, support_words,
                                               windows_support, SETTLED_RULE)
from relspan.words import cap, count, fmt, fmt_range, times as _times

__all__ = ["dataset_findings", "corank_words", "no_evidence", "window_supports", "DIAGONAL_ALWAYS"]


def _g(x: float) -> str:
    """A number in a finding (ASCII, also stored in results.json and findings.csv)."""
    return fmt(x, minus="-", missing="n/a")


#: under independent noise (Frisch scheme) corank 1 is always reachable: d = lambda_min * ones makes
#: S - diag(d) singular and positive semidefinite, so a count of 1 there is no evidence of a relation
DIAGONAL_ALWAYS = 1


def no_evidence(a: str, q) -> bool:
    """True when assumption ``a``'s corank ``q`` holds for any data (independent noise, corank 1)."""
    return a == "diagonal" and q == DIAGONAL_ALWAYS


def corank_words(a: str, q, analysis=None) -> str:
    """One assumption's full-sample count, with what the count means under it ("2, admissible, ...").

    With ``analysis`` (the window analysis the count comes from) the count's resampling support
    follows in brackets (:func:`~relspan.analysis.findings.support.support_words`; nothing when
    resampling is off).
    """
    name = _assumption(a).name
    if q is None:
        return f"{name}: undetermined"
    words = support_words(count_support(analysis, a, q), lead="chosen") if analysis is not None else ""
    if q == 0:
        text = f"{name}: 0"
    elif no_evidence(a, q) and words:
        return f"{name}: {q}, {words}, always reachable and so no evidence"
    elif no_evidence(a, q):
        text = f"{name}: {q}, always reachable under this assumption and so no evidence"
    elif a == "bounded" and words.startswith("admissible "):
        return f"{name}: {q}, {words}, not shown to hold"
    elif a == "bounded":
        text = f"{name}: {q}, admissible, not shown to hold"
    else:
        text = f"{name}: {q}"
    return f"{text}, {words}" if words else text


def window_supports(plan, assumption_id: str, q: int) -> bool:
    """True when every window of ``plan`` settles at least ``q`` relations under the assumption.

    A window's corank-q relation can be compared across windows only where the window supports it.
    """
    counts = plan.coranks.coranks.get(assumption_id)
    return bool(counts) and all(c is not None and c >= q for c in counts)


def _corank_findings(result) -> list[Finding]:
    full = result.full
    cor = {a: q for a, q in full.coranks.items() if a != "elementary"}
    known = {a: q for a, q in cor.items() if q is not None}
    out: list[Finding] = []
    n = full.n
    if not known:
        return out
    values = sorted(set(known.values()))
    tol = Tolerance.of(full)
    rests = tuple(known)
    undetermined = [a for a, q in cor.items() if q is None]
    supports = {a: count_support(full, a, q) for a, q in known.items()}
    record = [support_record(cs) for cs in supports.values()]
    by = "; ".join(corank_words(a, q, full) for a, q in cor.items())
    detail = (f"Full-sample corank by assumption at {tol.short}: "
              f"{'; '.join(corank_words(a, q) for a, q in cor.items())}. {SETTLED_RULE}")
    if len(values) == 1:
        q = values[0]
        names = ", ".join(_assumption(a).name for a in known)
        every = "under every noise assumption checked" if not undetermined else f"under {names}"
        unsettled = (f"; {', '.join(_assumption(a).name for a in undetermined)}: undetermined"
                     if undetermined else "")
        weak = [a for a, cs in supports.items() if cs.weak]
        said = [f"{_assumption(a).name}: {share_words(cs)}" for a, cs in supports.items() if share_words(cs)]
        backing = f" (resampling support: {'; '.join(said)})" if said else ""
        support_part = [f"resampling support: {'; '.join(said)}"] if said else []
        numbers = {"corank": q, "by_assumption": cor, "support": record}
        if weak:
            modal = all(supports[a].modal for a in weak)
            what = "no linear relation" if q == 0 else count(q, "linear relation")
            out.append(Finding("set_only", "corank",
                               f"The data give {what} among the {n} variables {every}, at {tol.short}{unsettled}, "
                               f"a count {'likely but ' if modal else ''}not confirmed by resampling under "
                               f"{', '.join(_assumption(a).name for a in weak)}{backing}.", detail, numbers,
                               "corank", assumptions=rests, tolerance=tol))
        elif q == 0:
            out.append(Finding("no_relation", "corank",
                               f"No linear relation among the {n} variables is supported {every}, at "
                               f"{tol.short}{backing}: every direction of the data varies more than that noise"
                               f"{unsettled}.", detail, numbers, "corank",
                               assumptions=rests, tolerance=tol))
        else:
            caveats = []
            if "bounded" in known:
                caveats.append("under bounded noise the count is admissible, not shown to hold")
            if any(no_evidence(a, q) for a in known):
                caveats.append("under independent noise one relation is always reachable, so that agreement "
                               "is no evidence")
            more = f" ({'; '.join(support_part + caveats)})" if support_part + caveats else ""
            out.append(Finding("pinned_down", "corank",
                               f"{cap(count(q, 'linear relation'))} among the {n} variables {every}, at "
                               f"{tol.short}{unsettled}{more}.", detail,
                               numbers, "corank", assumptions=rests, tolerance=tol))
    else:
        out.append(Finding("depends", "corank",
                           f"How many relations hold depends on the noise assumption ({tol.short}): "
                           f"{by}.", detail, {"by_assumption": cor, "support": record}, "corank",
                           assumptions=tuple(cor), tolerance=tol))
    if undetermined:
        out.append(Finding("set_only", "corank",
                           f"Under independent noise the number of relations is not "
                           f"settled at {tol.short}.",
                           "The diagonal-noise search neither certified nor ruled out every corank "
                           "(\u201cundetermined at eps\u201d).", {"undetermined": undetermined}, "corank",
                           assumptions=tuple(undetermined), tolerance=tol))
    return out


def _subspace_findings(result) -> list[Finding]:
    full = result.full
    out: list[Finding] = []
    n = full.n
    tol = Tolerance.of(full)
    for q in result.examined:
        ident = result.identified.get(q)
        what = "relation" if q == 1 else f"{q}-dimensional subspace of relations"
        if full.bounded is not None:
            entry = next((c for c in full.bounded.coranks if c.q == q), None)
        else:
            entry = None
        if entry is not None and not entry.vacuous:
            sp = result.spread.get("bounded")
            sp = sp if sp is not None and sp.q == q else None
            sampling = (f"; sampling moves it by up to {sp.angle_deg:.2g} degrees more ({sp.rule})" if sp
                        else "; sampling adds an error this bound does not cover")
            out.append(Finding("pinned_down", "subspace",
                               f"If {q} relation{'s' if q > 1 else ''} hold{'' if q > 1 else 's'} and the noise is "
                               f"within {tol.short}, whatever its form, the {what} lies within "
                               f"{entry.angle_bound_deg:.2g} degrees of the estimate by the population bound"
                               + sampling + ".",
                               f"Davis-Kahan bound for corank {q} under bounded noise, treating the sample "
                               f"covariance as the population's: largest principal angle at most "
                               f"{entry.angle_bound_deg:.3g} degrees (eps {full.eps:g}, gap {entry.gap:.3g}; "
                               f"{full.scale} scale)"
                               + (f"; bootstrap spread of the same subspace: {sp.angle_deg:.3g} degrees "
                                  f"({sp.rule})." if sp else "."),
                               {"corank": q, "angle_bound_deg": entry.angle_bound_deg,
                                "sampling_spread_deg": None if sp is None else sp.angle_deg}, "assumptions",
                               assumptions=("bounded",), tolerance=tol))
        elif entry is not None:
            out.append(Finding("set_only", "subspace",
                               f"The {what} is not pinned down by the bounded-noise assumption alone: the "
                               f"noise allowed ({tol.short}) is as large as the signal gap.",
                               f"Davis-Kahan bound vacuous for corank {q} (eps {full.eps:g} vs gap "
                               f"{entry.gap:.3g}).", {"corank": q}, "assumptions",
                               assumptions=("bounded",), tolerance=tol))
        fr = full.diagonal
        if fr is not None and q >= 2:
            ok = q * (q + 1) >= 2 * n
            spread = (fr.spread.max_angle_deg if fr.spread is not None and fr.spread.q == q else None)
            if not ok:
                extra = (f" Solutions that fit within the tolerance (approximately, not exactly) differ by up "
                         f"to {spread:.2g} degrees." if spread is not None and np.isfinite(spread) else "")
                out.append(Finding("set_only", "subspace",
                                   f"Under independent noise, at {tol.short}, the {what} is a "
                                   f"family, not a single answer.{extra}",
                                   f"Frisch scheme: point identification needs q(q+1) >= 2n; here "
                                   f"{q * (q + 1)} < {2 * n}.", {"corank": q, "spread_deg": spread},
                                   "assumptions", assumptions=("diagonal",), tolerance=tol))
        if ident is not None and q >= 2:
            targets = [result.labels[result.names.index(t)] for t in ident.targets]
            out.append(Finding("not_identified", "coefficient",
                               f"No single coefficient of one relation is pinned down: with {q} relations "
                               f"(equal noise, {tol.short}), any mix of them is also a relation.",
                               f"Corank {q}: a normalised coefficient depends on which member of the "
                               "relation subspace is picked; only the subspace (or a reduced form chosen in "
                               "advance) is identified.", {"corank": q}, "identified", single_coefficient=True,
                               assumptions=("equal",), tolerance=tol))
            out.append(Finding("pinned_down", "reduced_form",
                               f"Under equal noise, at {tol.short}, a reduced form is pinned down: "
                               f"{', '.join(targets)} expressed through the other variables.",
                               f"Reduced form from the equal-noise subspace; condition number of the choice "
                               f"{ident.reduced_condition:.3g}.", {"corank": q, "targets": targets,
                                                           "condition": ident.reduced_condition}, "identified",
                               assumptions=("equal",), tolerance=tol))
    return out


def _coefficient_findings(result) -> list[Finding]:
    full = result.full
    out: list[Finding] = []
    ref = full.ref
    names, labels = result.names, result.labels
    q1 = (result.examined and result.examined[0] == 1)
    # signs across assumptions (full sample): only where one relation makes a single coefficient
    # meaningful; with several (or none) the site calls single coefficients unidentified
    flips = []
    for k in (range(full.n) if q1 else ()):
        if k == ref:
            continue
        vals = {a: full.coefficient(a, ref, k) for a in ("elementary", "equal", "shaped")
                if a in full.coefficients}
        vals = {a: v for a, v in vals.items() if v is not None and np.isfinite(v) and abs(v) > 1e-12}
        if len({np.sign(v) for v in vals.values()}) > 1:
            flips.append((k, vals))
    for k, vals in flips:
        parts = "; ".join(f"{_assumption(a).name}: {_g(v)}" for a, v in vals.items())
        out.append(Finding("depends", "coefficient",
                           f"The sign of the coefficient of {labels[k]} in the equation for {labels[ref]} "
                           "depends on the noise assumption.",
                           f"Full-sample normalised coefficient of {names[k]} (equation for {names[ref]}): "
                           f"{parts}.", {"variable": names[k], "normalise_on": names[ref], "values": vals},
                           "assumptions", single_coefficient=True, assumptions=tuple(vals)))
    if q1 and full.frisch_lower is not None:
        lo, hi = full.frisch_lower, full.frisch_upper
        bounded = [k for k in range(full.n) if k != ref and np.isfinite(lo[k]) and np.isfinite(hi[k])]
        if len(bounded) == full.n - 1:
            items = ", ".join(f"{labels[k]} between {fmt_range(lo[k], hi[k], sep=' and ', minus='-')}"
                              for k in bounded)
            out.append(Finding("set_only", "coefficient",
                               f"Under independent noise, at {Tolerance.of(full).short}, each "
                               f"coefficient of the equation for {labels[ref]} is bounded: {items}.",
                               "Frisch scheme, corank 1: all elementary regressions lie in one orthant, so the "
                               "solutions form their convex hull (Klepper & Leamer 1984).",
                               {"normalise_on": names[ref],
                                "intervals": {names[k]: [lo[k], hi[k]] for k in bounded}},
                               "frisch", single_coefficient=True, assumptions=("diagonal",),
                               tolerance=Tolerance.of(full)))
        else:
            out.append(Finding("not_identified", "coefficient",
                               f"Under independent noise the coefficients of the equation for "
                               f"{labels[ref]} are not bounded.",
                               "Frisch scheme, corank 1: the elementary regressions do not lie in one "
                               "orthant, so the set of solutions is unbounded.",
                               {"normalise_on": names[ref]}, "frisch", single_coefficient=True,
                               assumptions=("diagonal",), tolerance=Tolerance.of(full)))
    return out


def _stability_findings(result) -> list[Finding]:
    out: list[Finding] = []
    names, labels = result.names, result.labels
    ref = result.full.ref
    for plan in result.plans:
        if len(plan.analyses) < 2:
            continue
        title = plan.plan.title or plan.plan.id
        for q in result.examined:
            key = next((a for a in ("equal", "shaped", "bounded") if a in plan.stability
                        and plan.stability[a].reference_dim == q), None)
            if key is None:
                continue
            # a change found among the windows that can be compared is evidence of change; only a
            # "no change" needs every window to support the relation
            if not window_supports(plan, key, q) and plan.stability[key].stable is not False:
                counts = plan.coranks.coranks.get(key, ())
                short = sum(1 for c in counts if c is None or c < q)
                tol = Tolerance.of(result.full)
                out.append(Finding("cannot_be_judged", "stability",
                                   f"Whether the {'relation' if q == 1 else f'{q} relations'} stay"
                                   f"{'s' if q == 1 else ''} put across \u201c{title}\u201d cannot be judged under "
                                   f"{_assumption(key).name} at {tol.short}: {short} of the {len(counts)} windows "
                                   f"do not support {count(q, 'relation')}.",
                                   "A window's relation can only be compared with the full sample's when the window "
                                   "supports it.", {"plan": plan.plan.id, "corank": q, "windows_without": short},
                                   f"plan-{plan.plan.id}", plan=plan.plan.id, assumptions=(key,), tolerance=tol))
                continue
            stab = plan.stability[key]
            worst = stab.max_to_reference_deg if stab.max_to_reference_deg is not None else (
                stab.max_pairwise_deg if stab.max_pairwise_deg is not None else stab.max_neighbour_deg)
            what = "relation" if q == 1 else "plane of relations" if q == 2 else f"{q}-dimensional relation subspace"
            tol = Tolerance.of(result.full)
            under = f"under {_assumption(key).name} (tolerance: {tol.words})"
            rule = ("a change counts only beyond what resampling each window produces when nothing changes, "
                    "all comparisons judged together at the 5% level")
            if stab.stable is None or worst is None:
                out.append(Finding("cannot_be_judged", "stability",
                                   f"Whether the {what} changes across \u201c{title}\u201d cannot be judged "
                                   f"{under}.", stab.verdict, {"plan": plan.plan.id, "corank": q},
                                   f"plan-{plan.plan.id}", plan=plan.plan.id, assumptions=(key,), tolerance=tol))
                continue
            if stab.stable:
                headline = (f"Across the {len(plan.analyses)} windows of \u201c{title}\u201d the {what} "
                            f"{under} stays within {worst:.2g} degrees of the full sample's: within what "
                            "resampling produces when nothing changes.")
            else:
                headline = (f"Across the windows of \u201c{title}\u201d the {what} {under} moves: up to "
                            f"{worst:.2g} degrees, more than resampling produces when nothing changes.")
            out.append(Finding("stable" if stab.stable else "unstable", "stability", headline,
                               f"{stab.verdict} Rule: {rule}.", {"plan": plan.plan.id, "corank": q,
                                                                 "max_to_full_deg": worst,
                                                                 "family_critical": stab.family_critical},
                               f"plan-{plan.plan.id}", plan=plan.plan.id, assumptions=(key,),
                               tolerance=tol))
            swing = plan.swings.get("elementary")
            if swing is not None:
                changed = [k for k in range(len(names)) if k != ref and swing.sign_changes[k] > 0]
                if changed:
                    k = changed[0]
                    more = f" (and {len(changed) - 1} more)" if len(changed) > 1 else ""
                    out.append(Finding("unstable", "coefficient",
                                       f"The least-squares coefficient of {labels[k]} in the equation for "
                                       f"{labels[ref]} changes sign {_times(int(swing.sign_changes[k]))} across "
                                       f"\u201c{title}\u201d{more}, from "
                                       f"{fmt_range(swing.minimum[k], swing.maximum[k], minus='-')}"
                                       + (f", while the {what} found under {_assumption(key).name} moves at "
                                          f"most {worst:.2g} degrees." if stab.stable
                                          else "."),
                                       "Elementary regression (only the reference variable noisy), normalised "
                                       "coefficient per window.",
                                       {"plan": plan.plan.id, "variable": names[k],
                                        "sign_changes": int(swing.sign_changes[k]),
                                        "min": swing.minimum[k], "max": swing.maximum[k]},
                                       f"plan-{plan.plan.id}", plan=plan.plan.id, single_coefficient=True,
                                       assumptions=("elementary",)))
        if not any(f.topic == "stability" and f.plan == plan.plan.id for f in out):
            # windows compared with each other where the full sample offers no common reference
            key = next((a for a in ("equal", "shaped", "bounded")
                        if a in plan.stability and plan.stability[a].stable is False), None)
            if key is not None:
                st = plan.stability[key]
                worst = max(x for x in (st.max_pairwise_deg, st.max_neighbour_deg, st.max_to_reference_deg)
                            if x is not None)
                dims = sorted({d for d in st.dims if d})
                what = ("relation" if dims == [1] else "relations")
                tol = Tolerance.of(result.full)
                out.append(Finding(
                    "unstable", "stability",
                    f"Across the windows of \u201c{title}\u201d the {what} under {_assumption(key).name} "
                    f"(tolerance: {tol.words}) change{'s' if what == 'relation' else ''}: windows differ by up "
                    f"to {worst:.2g} degrees, more than resampling produces when nothing changes.",
                    f"{st.verdict} Rule: a change counts only beyond what resampling each window produces "
                    "when nothing changes, all comparisons judged together at the 5% level.",
                    {"plan": plan.plan.id, "max_between_windows_deg": worst,
                     "family_critical": st.family_critical},
                    f"plan-{plan.plan.id}", plan=plan.plan.id, assumptions=(key,), tolerance=tol))
        seq = plan.coranks
        tol = Tolerance.of(result.full)
        # an undetermined window is not a different count: only settled counts are compared
        settled = {a: [c for c in cs if c is not None] for a, cs in seq.coranks.items() if a != "elementary"}
        changes = seq.changes or {}
        moving = [a for a in seq.assumptions if a != "elementary" and changes.get(a) and settled.get(a)]
        if moving:
            def _own(a):
                own = windows_support(plan.analyses, a)
                least = "at least " if own.share is not None and round(100 * own.share) < 100 else ""
                return (f", each window's count chosen in {least}{100 * own.share:.0f}% of its "
                        f"{own.resamples} resamples" if own.share is not None else
                        (f", {own.why}" if own.why else ""))

            spans = "; ".join(f"{_assumption(a).name}: from {min(settled[a])} to {max(settled[a])}{_own(a)}"
                              for a in moving)
            out.append(Finding("unstable", "corank",
                               f"The number of relations changes across the windows of \u201c{title}\u201d "
                               f"at {tol.short} ({spans}).",
                               "Corank per window: see the timeline. Windows whose count is undetermined are "
                               "not counted as a change; where resampling support is known (equal, known-shape "
                               "and bounded noise) two windows differ only when no count has at least 5% "
                               "support in both.",
                               {"plan": plan.plan.id, "assumptions": moving,
                                "support": [support_record(windows_support(plan.analyses, a)) for a in moving]},
                               f"plan-{plan.plan.id}",
                               plan=plan.plan.id, assumptions=tuple(moving), tolerance=tol))
        for a, cs in seq.coranks.items():
            missing = sum(c is None for c in cs)
            if a != "elementary" and missing:
                out.append(Finding("set_only", "corank",
                                   f"Under {_assumption(a).name} the number of relations is undetermined in "
                                   f"{missing} of the {len(cs)} windows of \u201c{title}\u201d at {tol.short}; "
                                   "those windows are not counted as a change.",
                                   "Undetermined at eps: the search neither certified nor ruled out the corank.",
                                   {"plan": plan.plan.id, "assumption": a, "undetermined": missing},
                                   f"plan-{plan.plan.id}", plan=plan.plan.id, assumptions=(a,), tolerance=tol))
    return out


class _Evidence(NamedTuple):
    """What the interpreter reads of one dataset's analysis (the numbers, before any statement)."""

    full: object
    plans: tuple
    examined: tuple
    identified: dict
    labels: tuple
    spread: dict = {}

    @property
    def names(self) -> tuple[str, ...]:
        return self.full.names


def _influence_findings(influence) -> list[Finding]:
    """Said when one row or one block of rows decides the full-sample count (leave-one-out, robust covariance)."""
    if influence is None or not influence.findings:
        return []
    return list(influence.findings)


def _trend_findings(trends) -> list[Finding]:
    """The spurious-regression caution (Granger & Newbold 1974) when two or more analysed series trend."""
    if trends is None or not trends.spurious_caution:
        return []
    trending = [s.name for s in trends.series if s.verdict == "trending"]
    return [Finding("caution", "trend",
                    f"{cap(count(len(trending), 'analysed series'))} trend ({', '.join(trending)}): relations "
                    "among trending series can appear without any real relation (spurious regression), so every "
                    "relation on this page needs that caution.",
                    trends.caution + " " + trends.rule,
                    {"trending": trending, "in_levels": list(trends.trending_levels),
                     "effective_rows": trends.effective_rows, "rows": trends.rows}, "trends")]


def dataset_findings(*, full, plans, examined, identified, labels, trends=None, influence=None,
                     spread=None) -> list[Finding]:
    """All findings for one dataset, most important first.

    Parameters
    ----------
    full : WindowAnalysis
        The full sample under every assumption.
    plans : sequence of PlanResult
        Every window plan with its cross-window summaries.
    examined : tuple of int
        The coranks examined.
    identified : mapping int -> Identified
        Identified quantities per examined corank.
    labels : tuple of str
        The variables' labels (the reader's names), in order.
    trends : TrendReport, optional
        :func:`relspan.analysis.trends.dataset_trends` (the trend caution).
    influence : InfluenceReport, optional
        :func:`relspan.analysis.influence.influence_report` (a single row or block deciding a finding).
    spread : mapping assumption -> SamplingSpread, optional
        The bootstrap spread of the full sample's subspace, said beside the
        bounded-noise population bound.
    """
    result = _Evidence(full, tuple(plans), tuple(examined), identified, tuple(labels), dict(spread or {}))
    out = []
    out += _corank_findings(result)
    out += _subspace_findings(result)
    out += _coefficient_findings(result)
    out += _stability_findings(result)
    out = _trend_findings(trends) + _influence_findings(influence) + out
    if result.full.elementary.singular:
        rests = tuple(a for a in result.full.coranks if a != "elementary") or ("elementary",)
        out.insert(0, Finding("pinned_down", "corank",
                              "Some relations hold exactly in the data: they need no noise at all, so they hold "
                              f"at any tolerance ({Tolerance.of(result.full).short} here).",
                              result.full.elementary.singular_reason,
                              {"exact": result.full.elementary.exact_relations}, "assumptions",
                              assumptions=rests, tolerance=Tolerance.of(result.full)))
    return out
