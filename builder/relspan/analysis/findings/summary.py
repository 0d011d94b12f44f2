"""The plain summary of a dataset and the statements of each page section.

Built once by the driver (:func:`relspan.run.pipeline.analyse_prepared`) from
the results and the findings of :mod:`~relspan.analysis.findings.statements`;
the report lays these sentences out and never recomputes a number in them.
One function per kind of statement, so each can be corrected in one place.
"""

from __future__ import annotations

import numpy as np

from relspan.analysis.findings.records import (AssumptionRow, DatasetSummary, Statement, Tolerance,
                                               WindowReading)
from relspan.analysis.stability import principal_angles
from relspan.assumptions import ASSUMPTION_IDS, assumption
from relspan.words import cap, count, fmt, join_words

__all__ = ["dataset_summary", "why_assumptions_differ", "assumption_rows", "PURE_NOISE_SHARE"]

#: a noise share at or above this is read as "almost all of the variable's variance is noise"
PURE_NOISE_SHARE = 0.9


# --------------------------------------------------------------------------- across windows

def _largest_angle_between_windows(plan, q: int, assumption_id: str = "equal") -> float | None:
    """Largest angle (degrees) between the windows' corank-q relations, or None when not every window has one."""
    bases = [a.bases.get(assumption_id, {}).get(q) for a in plan.analyses]
    if len(bases) < 2 or any(b is None for b in bases):
        return None
    worst = 0.0
    for i in range(len(bases)):
        for j in range(i + 1, len(bases)):
            worst = max(worst, float(np.max(principal_angles(bases[i], bases[j]))))
    return worst


def _windowed_relations(plans) -> list[tuple]:
    """Plans (not the full sample) in which every window supports the same corank >= 1 under equal noise.

    Returns a list of ``(plan, q, largest angle between windows in degrees or None)``.
    """
    out = []
    for plan in plans:
        if plan.plan.kind == "full" or not plan.analyses:
            continue
        seq = plan.coranks.coranks.get("equal")
        if not seq or any(c is None for c in seq) or len(set(seq)) != 1 or seq[0] < 1:
            continue
        out.append((plan, int(seq[0]), _largest_angle_between_windows(plan, int(seq[0]))))
    return out


def _turns(plan) -> tuple[float | None, ...]:
    """Per window, the angle (degrees) between its equal-noise relation and the previous window's."""
    out, prev = [], None
    for a in plan.analyses:
        basis = a.bases.get("equal", {}).get(1)
        out.append(float(np.max(principal_angles(prev, basis)))
                   if prev is not None and basis is not None else None)
        prev = basis
    return tuple(out)


def _one_relation_each(plan) -> bool:
    seq = plan.coranks.coranks.get("equal") or ()
    return bool(seq) and all(c == 1 for c in seq)


# ------------------------------------------------------------------- why assumptions differ

def why_assumptions_differ(full, labels) -> str:
    """Plain words on why the independent-noise corank differs from the equal-noise one ("" if it does not)."""
    eq, dg = full.coranks.get("equal"), full.coranks.get("diagonal")
    if eq is None or dg is None or eq == dg or full.diagonal is None:
        return ""
    corank = full.diagonal.corank
    allowed = (f"at most {100 * full.eps:g}% of each series' variance" if full.scale == "correlation"
               else f"noise of size at most {full.eps:g} in the data's units")
    cert = next((c for c in corank.certificates if c.q == dg and c.status == "certified"), None)
    rel = lambda k: count(k, "relation")  # noqa: E731
    if dg > eq:
        shares = np.asarray(cert.noise_share, dtype=float) if cert is not None and cert.noise_share else None
        if shares is not None and np.any(shares >= PURE_NOISE_SHARE):
            pure = [k for k in range(full.n) if shares[k] >= PURE_NOISE_SHARE]
            who = join_words([f"{labels[k]} ({100 * shares[k]:.0f}% of its variance)" for k in pure])
            text = (f"Equal noise finds {rel(eq)}, independent noise {rel(dg)}. This is not a contradiction: "
                    f"when each series may have its own error of any size, {who} can be declared almost "
                    f"pure measurement error, because {'it is' if len(pure) == 1 else 'they are'} nearly "
                    "unrelated to the other series. A series that is all noise counts as one more relation "
                    "(\u201cit stays at its average\u201d), which says nothing about how the other series are "
                    "tied together.")
        else:
            most = int(np.argmax(shares)) if shares is not None else None
            extra = (f" (here up to {100 * shares[most]:.0f}% of the variance of {labels[most]})"
                     if most is not None else "")
            text = (f"Equal noise finds {rel(eq)}, independent noise {rel(dg)}. Independent noise of unknown "
                    f"size is the looser assumption: it lets each series carry its own error{extra}, while "
                    f"the equal-noise check allows {allowed}. Extra relations "
                    "found this way are weak evidence.")
        if dg <= corank.ledermann:
            text += (f" With only {count(full.n, 'series')}, up to {rel(corank.ledermann)} of this kind can "
                     "appear from chance variation alone.")
        return text
    return (f"Equal noise finds {rel(eq)}, independent noise only {rel(dg)}: the independent-noise check "
            "could not fit the larger number with non-negative error variances within the tolerance.")


# ------------------------------------------------------------------------- assumption rows

def _corank_words(a: str, corank) -> str:
    if a == "elementary":
        return "1 (assumed)"
    return "undetermined" if corank is None else str(corank)


def _coefficients(analysis, a: str, q, labels) -> dict:
    """The coefficient cells of one assumption: points, intervals, or a note."""
    ref = analysis.ref
    ks = [k for k in range(analysis.n) if k != ref]
    if q == 1 and a == "diagonal" and analysis.frisch_lower is not None:
        return {"intervals": tuple((labels[k], float(analysis.frisch_lower[k]), float(analysis.frisch_upper[k]))
                                   for k in ks)}
    if q == 1 and a in analysis.coefficients:
        c = analysis.coefficients[a]
        return {"points": tuple((labels[k], float(c[k])) for k in ks)}
    if q is not None and q >= 2:
        return {"coefficients_note": f"none: with {q} relations a single equation is not fixed"}
    return {"coefficients_note": "\u2014"}


def _relations_words(full, a: str, q) -> str:
    if a == "elementary":
        return f"{full.n} different answers, one per noisy variable"
    if q is None:
        return "undetermined at this tolerance"
    if q == 0:
        return "no relation at this tolerance"
    if a == "bounded" and full.bounded is not None:
        entry = next((c for c in full.bounded.coranks if c.q == q), None)
        return (f"within {fmt(entry.angle_bound_deg)}\u00b0 of the equal-noise answer"
                if entry is not None and not entry.vacuous else "not bounded (noise as large as the gap)")
    if a == "diagonal" and full.diagonal is not None:
        fr = full.diagonal
        if q >= 2 and q * (q + 1) < 2 * full.n:
            text = "a family of answers, not one"
            if fr.spread is not None and fr.spread.q == q and fr.spread.max_angle_deg is not None:
                text += f" (members differ by up to {fmt(fr.spread.max_angle_deg)}\u00b0)"
            return text
        if q == 1:
            return ("a set of answers (every mix of the elementary regressions)" if fr.q1.status == "bounded"
                    else "an unbounded set of answers")
        return "one answer (enough equations to fix it)"
    return "one answer"


def _identified_words(full, a: str, q) -> str:
    if a == "elementary":
        return "a point, but only because the assumption fixes which variable is noisy"
    if q is None:
        return "undetermined"
    if q == 0:
        return "nothing (no relation)"
    if q >= 2:
        return f"the {q} relations as a set; no single coefficient"
    if a == "diagonal":
        bounded = full.frisch_lower is not None and np.all(np.isfinite(np.delete(full.frisch_lower, full.ref)))
        return "a range for each coefficient" if bounded else "no bounds on the coefficients"
    if a == "bounded":
        return "the relation, to within the angle shown"
    return "each coefficient, as a point"


def assumption_rows(analysis, labels, *, describe: bool = True) -> tuple[AssumptionRow, ...]:
    """One row per assumption analysed, in the table's order (:data:`relspan.assumptions.ASSUMPTION_IDS`).

    With ``describe`` the rows also say what the relations found are and what
    is identified (the full sample's side-by-side table).
    """
    rows = []
    for a in ASSUMPTION_IDS:
        if a not in analysis.coranks:
            continue
        corank = analysis.coranks[a]
        q = 1 if a == "elementary" else corank
        words = ({"relations": _relations_words(analysis, a, q), "identified": _identified_words(analysis, a, q)}
                 if describe else {})
        rows.append(AssumptionRow(assumption=a, corank=corank, corank_words=_corank_words(a, corank),
                                  **words, **_coefficients(analysis, a, q, labels)))
    return tuple(rows)


# ------------------------------------------------------------------------- plans and windows

def _plan_sentences(plan, examined) -> tuple[str, ...]:
    """Per examined corank, how the plan's windows compare with the full sample (lower case: it follows a label)."""
    out = []
    n = len(plan.analyses)
    for q in examined:
        stab = plan.stability.get(("equal", q))
        if stab is not None and n >= 2:
            what = "relation" if q == 1 else "set of relations"
            word = "stays" if stab.stable else "moves"
            out.append(f"under equal noise the {what} {word} within an angle of {fmt(stab.max_to_reference_deg)}"
                       f"\u00b0 of the full sample's in every window (threshold {fmt(stab.threshold_deg)}\u00b0). "
                       + stab.verdict)
    return tuple(out)


def _window_plain(plan, i: int, a, w, q) -> str:
    """The plain opening of one window page."""
    words = []
    for key in ("equal", "shaped", "bounded", "diagonal"):
        if key in a.coranks:
            c = a.coranks[key]
            words.append(f"{assumption(key).title.lower()}: " + ("undetermined" if c is None else count(c, "relation")))
    span = f"{w.first_time} to {w.last_time}, " if w.first_time is not None else ""
    text = f"This window covers {span}{w.rows} rows. Relations found \u2014 " + "; ".join(words) + "."
    if q is not None and ("equal", q) in plan.stability:
        stab = plan.stability[("equal", q)]
        what = "relation" if q == 1 else "set of relations"
        text += (f" Under equal noise its {what} is {fmt(stab.to_reference_deg[i])}\u00b0 from the full sample's "
                 f"(0\u00b0: the same; the stability threshold is {fmt(stab.threshold_deg)}\u00b0).")
    return text


def _window_readings(plan, examined, labels) -> tuple[WindowReading, ...]:
    q = examined[0] if examined else None
    turns = _turns(plan) if _one_relation_each(plan) else (None,) * len(plan.analyses)
    return tuple(WindowReading(plain=_window_plain(plan, i, a, w, q),
                               rows=assumption_rows(a, labels, describe=False), angle_to_previous_deg=t)
                 for i, (a, w, t) in enumerate(zip(plan.analyses, plan.windows, turns)))


# ------------------------------------------------------------------------------ the summary

def dataset_summary(*, full, plans, examined, identified, labels, findings, period=None) -> DatasetSummary:
    """The plain summary of one dataset and the statements of its pages.

    Built from the results alone (no dataset-specific wording), so any spec gets them.

    Parameters
    ----------
    full : WindowAnalysis
        The full sample under every assumption.
    plans : sequence of PlanResult
    examined : tuple of int
        The coranks examined.
    identified : mapping int -> Identified
    labels : tuple of str
        The variables' labels, in order.
    findings : sequence of Finding
        :func:`~relspan.analysis.findings.statements.dataset_findings` of the same results.
    period : (str, str) or None
        First and last time of the rows analysed.
    """
    names = full.names
    n = full.n
    tol = Tolerance.of(full)
    q = examined[0] if examined else None
    series = count(n, "series")
    stab = []
    for plan in plans:
        if plan.plan.kind == "full" or len(plan.analyses) < 2 or q is None:
            continue
        st = plan.stability.get(("equal", q))
        if st is not None and st.max_to_reference_deg is not None:
            stab.append((plan, st))
    single = False
    every_windowed = _windowed_relations(plans)
    windowed = list(every_windowed) if q is None else []
    if windowed:
        windowed.sort(key=lambda t: (t[0].plan.kind != "periods", -(t[2] or 0.0)))
    covers = [("pinned_down", "corank")]
    ev = {"pinned": "corank", "open": "identified", "depends": "assumptions"}
    rests = {"pinned": ("equal",), "open": ()}
    if q is not None and q >= 1:
        what = "relation" if q == 1 else "relations"
        pinned = f"{cap(count(q, 'relation'))} tie{'s' if q == 1 else ''} the {series} together"
        entry = None
        if full.bounded is not None:
            entry = next((c for c in full.bounded.coranks if c.q == q and not c.vacuous), None)
        bits = []
        if entry is not None:
            bits.append(f"the {what} {'is' if q == 1 else 'are'} fixed to within an angle of "
                        f"{entry.angle_bound_deg:.2g} degrees, whatever form the noise takes")
            rests["pinned"] += ("bounded",)
        steady = [st for _, st in stab if st.stable]
        if stab and len(steady) == len(stab):
            worst = max(st.max_to_reference_deg for st in steady)
            bits.append(f"{'it moves' if q == 1 else 'they move'} at most {worst:.2g} degrees between "
                        "windows of time")
        elif stab:
            worst = max(st.max_to_reference_deg for _, st in stab)
            bits.append(f"but {'it moves' if q == 1 else 'they move'} by up to {worst:.2g} degrees between "
                        "windows of time")
        pinned += (": " + "; ".join(bits) if bits else "") + "."
        covers += [("pinned_down", "subspace")] if entry is not None else []
        covers += [("stable", "stability")] if stab and len(steady) == len(stab) else []
        pinned_short = f"{count(q, 'relation')} among the {series}"
        if stab:
            pinned_short += (", steady across time windows" if len(steady) == len(stab)
                             else ", but moving across time windows")
        if q >= 2:
            ident = identified.get(q)
            targets = ([labels[names.index(t)] for t in ident.targets] if ident is not None else [])
            open_ = (f"No single weight of one series in \u201cthe\u201d equation: with {count(q, 'relation')}, "
                     "any mix of them is also a relation, so such a weight is a choice, not a finding.")
            if targets:
                open_ += (f" What is fixed is {join_words(targets)} written through the other "
                          f"series.")
            open_short = "the weight of any single series (only the relations as a set are fixed)"
            covers += [("not_identified", "coefficient"), ("pinned_down", "reduced_form")]
            single = True
        elif full.frisch_lower is not None:
            ks = [k for k in range(n) if k != full.ref]
            lo, hi = full.frisch_lower, full.frisch_upper
            rests["open"] = ("diagonal",)
            if all(np.isfinite(lo[k]) and np.isfinite(hi[k]) for k in ks):
                ranges = join_words([f"{labels[k]} {fmt(lo[k])} to {fmt(hi[k])}" for k in ks])
                open_ = (f"The exact weights, if each series has its own error of unknown size: the data only "
                         f"give ranges in the equation for {labels[full.ref]} ({ranges}).")
                ev["open"] = "frisch"
                open_short = "the exact weights: only ranges, if each series has its own error"
                covers += [("set_only", "coefficient")]
            else:
                open_short = "the weights: unbounded if each series has its own error"
                open_ = (f"The weights in the equation for {labels[full.ref]}, if each series has its own error "
                         "of unknown size: they are then not bounded at all.")
            single = True
        else:
            open_ = ("The exact weights depend on the noise assumption; see the assumptions side by side.")
            open_short = "the exact weights (they depend on the noise assumption)"
            single = True
    else:
        span = (f" over the whole period ({period[0]} to {period[1]})" if period else " over all the rows together")
        if windowed:
            plan, qq, change = windowed[0]
            titles = join_words([f"\u201c{p.plan.title or p.plan.id}\u201d" for p, _, _ in windowed])
            pinned = (f"Within each window of {titles}, {count(qq, 'relation')} "
                      f"tie{'s' if qq == 1 else ''} the {series} together.")
            open_ = f"No single relation fits{span}"
            if change is not None:
                open_ += (f": the relation differs between the windows of \u201c{plan.plan.title or plan.plan.id}"
                          f"\u201d by an angle of up to {change:.2g} degrees, the pattern a change of relation "
                          "over time leaves in the data.")
            else:
                open_ += "."
            ev["pinned"] = f"plan-{plan.plan.id}"
            ev["open"] = f"plan-{plan.plan.id}"
            pinned_short = f"{count(qq, 'relation')} within each time window"
            open_short = "a single relation for the whole period" + (
                f": it differs between windows by up to {change:.2g} degrees" if change is not None else "")
        else:
            pinned = (f"No linear relation ties the {series} together at the stated tolerance: each "
                      "combination of them varies more than the noise allows.")
            open_ = "Nothing further can be identified without a relation."
            pinned_short = f"no relation among the {series}"
            open_short = "nothing further without a relation"
    depends_rests: tuple = ()
    depends = why_assumptions_differ(full, labels)
    if depends:
        covers.append(("depends", "corank"))
        depends_rests = ("equal", "diagonal")
    else:
        flips = [f for f in findings if f.kind == "depends" and f.topic == "coefficient"]
        if flips and q is not None and q >= 2:
            depends = ("The signs of single weights differ between methods. With several relations this is "
                       "expected: each method picks a different mix of the same relations.")
            single = True
            depends_rests = flips[0].assumptions
        elif flips:
            depends = flips[0].headline
            single = True
            depends_rests = flips[0].assumptions
    unstable = ""
    unstable_ev = "stability"
    swings = [f for f in findings if f.kind == "unstable" and f.topic == "coefficient"]
    moving = [f for f in findings if f.kind == "unstable" and f.topic == "stability"]
    if swings and stab and not moving:
        worst = max(st.max_to_reference_deg for _, st in stab)
        unstable = (f"Single weights swing between windows of time, some even change sign, while the "
                    f"relations as a set stay within {worst:.2g} degrees. With several relations this is "
                    "expected and is no evidence that the relation changed." if q and q >= 2 else
                    f"Single weights swing between windows of time while the relation stays within "
                    f"{worst:.2g} degrees.")
        unstable_ev = swings[0].evidence
        single = True
    elif moving:
        unstable = "The relations move between windows of time by more than the stated threshold."
        unstable_ev = moving[0].evidence
    elif q is None and windowed and windowed[0][2] is not None:
        plan, _, change = windowed[0]
        unstable = (f"The relation itself changes over time: between the windows of \u201c"
                    f"{plan.plan.title or plan.plan.id}\u201d it turns by an angle of up to {change:.2g} degrees.")
        unstable_ev = f"plan-{plan.plan.id}"
    cards = {"pinned": [], "open": [], "depends": [], "unstable": []}
    for f in findings:
        if (f.kind, f.topic) not in covers:
            cards[f.card].append(f)
    return DatasetSummary(
        pinned=Statement(pinned, cap(pinned_short), ev["pinned"], rests["pinned"], tol),
        open=Statement(open_, cap(open_short), ev["open"], rests["open"], tol),
        depends=Statement(depends, "", ev["depends"], depends_rests, tol) if depends else None,
        unstable=Statement(unstable, "", unstable_ev, ("equal",), tol) if unstable else None,
        single_coefficient=single,
        cards={k: tuple(v) for k, v in cards.items()},
        rows=assumption_rows(full, labels),
        windowed=tuple((p.plan.id, qq, change) for p, qq, change in every_windowed),
        plans={p.plan.id: _plan_sentences(p, examined) for p in plans},
        windows={p.plan.id: _window_readings(p, examined, labels) for p in plans},
        relation_track=frozenset(p.plan.id for p in plans if _one_relation_each(p)),
    )
