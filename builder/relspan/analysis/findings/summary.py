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
from relspan.analysis.findings.statements import window_supports
from relspan.analysis.findings.support import (count_support, count_with_support, hedge, share_words,
                                               support_record, support_words, windows_support)
from relspan.analysis.stability import principal_angles
from relspan.assumptions import ASSUMPTION_IDS, assumption
from relspan.words import cap, count, fmt, fmt_range, join_words

__all__ = ["dataset_summary", "why_assumptions_differ", "assumption_rows", "frisch_search_words",
           "PURE_NOISE_SHARE"]

#: a noise share at or above this is read as "almost all of the variable's variance is noise"
PURE_NOISE_SHARE = 0.9


# --------------------------------------------------------------------------- across windows

def _largest_angle_between_windows(plan, q: int, assumption_id: str = "equal") -> float | None:
    """Largest angle (degrees) between compared windows' corank-q relations (every pair in small plans,
    neighbours in large ones), or None when not every window has one; read from the stability result."""
    st = plan.stability.get(assumption_id)
    if st is None or len(plan.analyses) < 2 or any(d != q for d in st.dims):
        return None
    return st.max_pairwise_deg if st.max_pairwise_deg is not None else st.max_neighbour_deg


def _equal_stability(plan, q):
    """The plan's equal-noise stability when it judged corank-q subspaces against the full sample's."""
    st = plan.stability.get("equal")
    if st is None or q is None or st.reference_dim != q:
        return None
    return st


STABILITY_RULE = ("a change counts only where an angle exceeds what resampling each window produces when "
                  "nothing changes, all comparisons judged together at the 5% level")


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


def examined_from_assumption(full, q: int) -> str:
    """The assumption whose full-sample count is the examined corank ``q`` (the preference order)."""
    from relspan.assumptions import corank_preference

    for record in corank_preference():
        if full.coranks.get(record.id) == q:
            return record.id
    return "equal"


def _other_counts(full, q) -> str:
    """What the other assumptions say when they differ from the examined count ("" when all agree)."""
    from relspan.analysis.findings.statements import corank_words

    q = 0 if q is None else q
    differ = [(a, c) for a, c in full.coranks.items() if a != "elementary" and c != q]
    if not differ:
        return ""
    return "other assumptions differ (" + "; ".join(corank_words(a, c, full) for a, c in differ) + ")"


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
    eq_said = count_with_support(count_support(full, "equal", eq))
    dg_said = count_with_support(count_support(full, "diagonal", dg))
    if dg > eq:
        shares = np.asarray(cert.noise_share, dtype=float) if cert is not None and cert.noise_share else None
        if shares is not None and np.any(shares >= PURE_NOISE_SHARE):
            pure = [k for k in range(full.n) if shares[k] >= PURE_NOISE_SHARE]
            var = np.diag(np.asarray(full.cov, dtype=float))
            who = join_words([f"{labels[k]} ({100 * shares[k]:.0f}% of its variance, a noise standard deviation of "
                              f"about {fmt(np.sqrt(shares[k] * var[k]), 2)} in its own units)" for k in pure])
            text = (f"Equal noise finds {eq_said}, independent noise {dg_said}. This is not a contradiction: "
                    f"when each series may have its own error of any size, {who} can be declared almost "
                    f"pure measurement error, because {'it is' if len(pure) == 1 else 'they are'} nearly "
                    "unrelated to the other series. A series that is all noise counts as one more relation "
                    "(\u201cit stays at its average\u201d), which says nothing about how the other series are "
                    "tied together.")
        else:
            most = int(np.argmax(shares)) if shares is not None else None
            var = np.diag(np.asarray(full.cov, dtype=float))
            extra = (f" (here up to {100 * shares[most]:.0f}% of the variance of {labels[most]}, a noise standard "
                     f"deviation of about {fmt(np.sqrt(shares[most] * var[most]), 2)} in its own units)"
                     if most is not None else "")
            text = (f"Equal noise finds {eq_said}, independent noise {dg_said}. Independent noise of unknown "
                    f"size is the looser assumption: it lets each series carry its own error{extra}, while "
                    f"the equal-noise check allows {allowed}. Extra relations "
                    "found this way are weak evidence.")
        if dg <= corank.ledermann:
            text += (f" With only {count(full.n, 'series')}, up to {rel(corank.ledermann)} of this kind can "
                     "appear from chance variation alone.")
        else:
            text += (f" With {count(full.n, 'series')}, chance variation alone fits up to "
                     f"{rel(corank.ledermann)} of this kind exactly; the {rel(dg)} found here fit only "
                     "approximately, within the tolerance, so they too are weak evidence.")
        if eq == 0 and dg == 1:
            text += (" Under independent noise one relation can always be fitted (take each series' error "
                     "variance equal to the smallest eigenvalue), so this count is no evidence of a relation.")
        return text
    return (f"Equal noise finds {eq_said}, independent noise only {dg_said}: the independent-noise check "
            "could not fit the larger number with non-negative error variances within the tolerance.")


def frisch_search_words(full) -> str:
    """The independent-noise corank search in words ("" when not run): what is certified, how, and its caution.

    Certificates hold within the tolerance (S - D has q eigenvalues within eps of zero), so the relations
    they certify fit approximately, not exactly; Ledermann's caution is kept when the count exceeds the bound.
    """
    fr = full.diagonal
    if fr is None:
        return ""
    corank = fr.corank
    n = full.n
    tol = Tolerance.of(full)
    certs = corank.certificates
    best = max((c.q for c in certs if c.status == "certified"), default=0)
    ruled = [c.q for c in certs if c.status == "ruled out"]
    und = [c.q for c in certs if c.status == "undetermined"]
    led = corank.ledermann
    words = support_words(count_support(full, "diagonal", best))
    backing = f" ({words})" if words else ""
    if best:
        parts = [f"Under independent noise of unknown variances (Frisch scheme), up to {count(best, 'linear relation')} "
                 f"{'fit' if best > 1 else 'fits'} these {n} variables within {tol.short}{backing}: approximately, not "
                 f"exactly (after removing the certified noise variances, {best} eigenvalue{'s' if best > 1 else ''} "
                 f"of the remainder {'lie' if best > 1 else 'lies'} within the tolerance of zero)."]
    else:
        parts = [f"Under independent noise of unknown variances (Frisch scheme), no linear relation could be "
                 f"shown to fit these {n} variables within {tol.short}{backing}."]
    if ruled:
        parts.append(f"{min(ruled)} or more relations are ruled out.")
    if und:
        parts.append("Not settled at this tolerance: " + join_words([str(q) for q in und]) + " relations.")
    if best == 1:
        parts.append("One relation is always reachable under this assumption (take every noise variance equal to "
                     "the smallest eigenvalue), so a count of one is no evidence of a relation.")
    if best and best <= led:
        parts.append(f"Caution: with {n} variables, up to {count(led, 'relation')} of this kind can appear from "
                     "sampling noise alone (Ledermann's bound), so this count is not by itself evidence of real "
                     "relations.")
    elif best:
        parts.append(f"Caution: with {n} variables, sampling noise alone can produce up to {count(led, 'relation')} "
                     f"of this kind exactly (Ledermann's bound); the {count(best, 'relation')} found here exceed "
                     "it only approximately, within the tolerance, so this count too is weak evidence.")
    return " ".join(parts)


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
        status = fr.identification.status if fr.identification is not None else "count met"
        return {"identified": "one answer (three-variable formula)",
                "approximate only": "no exact answer; a set within the tolerance",
                "locally identified": "locally one answer; a second may exist",
                "not unique": "two or more answers",
                }.get(status, "one answer near the estimate (enough equations to fix it locally; a second "
                        "solution is not ruled out)")
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
        backing = (share_words(count_support(analysis, a, corank), lead="chosen")
                   if a != "elementary" and corank is not None else "")
        rows.append(AssumptionRow(assumption=a, corank=corank, corank_words=_corank_words(a, corank),
                                  **words, **_coefficients(analysis, a, q, labels), support=backing))
    return tuple(rows)


# ------------------------------------------------------------------------- plans and windows

def _plan_sentences(plan, examined) -> tuple[str, ...]:
    """Per examined corank, how the plan's windows compare with the full sample (lower case: it follows a label)."""
    out = []
    n = len(plan.analyses)
    for q in examined:
        stab = _equal_stability(plan, q)
        if stab is not None and n >= 2 and not window_supports(plan, "equal", q) and stab.stable is not False:
            out.append(f"under equal noise not every window supports {count(q, 'relation')}, so whether "
                       f"{'it stays' if q == 1 else 'they stay'} put cannot be judged.")
        elif stab is not None and n >= 2:
            what = "relation" if q == 1 else "set of relations"
            if stab.stable is None or stab.max_to_reference_deg is None:
                out.append(stab.verdict[:1].lower() + stab.verdict[1:])
                continue
            word = "shows no change" if stab.stable else "changes"
            tol = Tolerance.of(plan.analyses[0]).words
            out.append(f"under equal noise (tolerance: {tol}) the {what} {word}: its largest angle to the full "
                       f"sample's is {fmt(stab.max_to_reference_deg)}\u00b0 ({STABILITY_RULE}). " + stab.verdict)
    return tuple(out)


def _window_plain(plan, i: int, a, w, q) -> str:
    """The plain opening of one window page."""
    words = []
    for key in ("equal", "shaped", "bounded", "diagonal"):
        if key in a.coranks:
            c = a.coranks[key]
            said = "undetermined" if c is None else count(c, "relation")
            notes = []
            if key == "diagonal" and c == 1:
                notes.append("always reachable under this assumption, so no evidence")
            cs = count_support(a, key, c)
            backing = support_words(cs) if c is not None else ""
            if key == "bounded" and c:
                said += " admissible"
                if backing.startswith("admissible "):
                    backing = backing[len("admissible "):]
            if backing and cs.weak:
                said += f", {backing}"
            elif backing:
                notes.append(backing)
            if notes:
                said += f" ({'; '.join(notes)})"
            words.append(f"{assumption(key).title.lower()}: {said}")
    span = f"{w.first_time} to {w.last_time}, " if w.first_time is not None else ""
    text = (f"This window covers {span}{w.rows} rows. Relations found at {Tolerance.of(a).short} \u2014 "
            + "; ".join(words) + ".")
    stab = _equal_stability(plan, q)
    if stab is not None and np.isfinite(stab.to_reference_deg[i]):
        what = "relation" if q == 1 else "set of relations"
        beyond = "beyond" if stab.reference_change[i] else "within"
        text += (f" Under equal noise its {what} is {fmt(stab.to_reference_deg[i])}\u00b0 from the full sample's "
                 f"(0\u00b0: the same), {beyond} what resampling produces when nothing changes "
                 f"({fmt(stab.reference_threshold_deg[i])}\u00b0 at the 5% level, all comparisons together).")
    return text


def _window_readings(plan, examined, labels) -> tuple[WindowReading, ...]:
    q = examined[0] if examined else None
    turns = _turns(plan) if _one_relation_each(plan) else (None,) * len(plan.analyses)
    return tuple(WindowReading(plain=_window_plain(plan, i, a, w, q),
                               rows=assumption_rows(a, labels, describe=False), angle_to_previous_deg=t)
                 for i, (a, w, t) in enumerate(zip(plan.analyses, plan.windows, turns)))


# ------------------------------------------------------------------------------ the summary

def _short_count(backing, said: str) -> str:
    """A count in a few words with its support: "... (chosen in 100% of 499 resamples)"; weak: "likely ..."."""
    if backing.weak:
        return f"{'likely ' if backing.modal else ''}{said} ({hedge(backing).replace('likely but ', '')})"
    words = share_words(backing, lead="chosen")
    return f"{said} ({words})" if words else said


def _add_note(short: str, note: str) -> str:
    """``short`` with ``note`` in its closing brackets ("... (chosen in 100% of 499 resamples; note)")."""
    return f"{short[:-1]}; {note})" if short.endswith(")") else f"{short} ({note})"


def _depends_support(full) -> list:
    return [support_record(count_support(full, a, full.coranks.get(a))) for a in ("equal", "diagonal")]


def dataset_summary(*, full, plans, examined, identified, labels, findings, period=None,
                    spread=None) -> DatasetSummary:
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
        st = _equal_stability(plan, q)
        if (st is not None and st.max_to_reference_deg is not None and st.stable is not None
                and (window_supports(plan, "equal", q) or st.stable is False)):
            stab.append((plan, st))
    single = False
    every_windowed = _windowed_relations(plans)
    windowed = list(every_windowed) if q is None else []
    if windowed:
        windowed.sort(key=lambda t: (t[0].plan.kind != "periods", -(t[2] or 0.0)))
    covers = [("pinned_down", "corank")]
    ev = {"pinned": "corank", "open": "identified", "depends": "assumptions"}
    rests = {"pinned": ("equal",), "open": ()}
    open_numbers: dict = {}
    others = _other_counts(full, q)
    if q is not None and q >= 1:
        what = "relation" if q == 1 else "relations"
        source = examined_from_assumption(full, q)
        backing = count_support(full, source, q)
        support = [support_record(backing)]
        if full.coranks.get(source) == q and backing.weak:
            pinned = (f"Under {assumption(source).name}, at {tol.short}, the data point to {count(q, 'relation')} "
                      f"tying the {series} together, a count {hedge(backing)} ({share_words(backing)})")
        elif full.coranks.get(source) == q:
            pinned = (f"Under {assumption(source).name}, at {tol.short}, {count_with_support(backing)} "
                      f"tie{'s' if q == 1 else ''} the {series} together")
        else:  # the spec chose the corank to examine (checks.coranks); no assumption finds it
            from relspan.analysis.findings.statements import corank_words

            found = "; ".join(corank_words(a, c, full) for a, c in full.coranks.items() if a != "elementary")
            support = [support_record(count_support(full, a, c)) for a, c in full.coranks.items()
                       if a != "elementary" and c is not None]
            pinned = (f"The spec asks for {count(q, 'relation')} to be examined (checks.coranks), but no noise "
                      f"assumption finds that many in the full sample at {tol.short} ({found}); what follows "
                      f"describes {count(q, 'relation')} only as the spec's choice")
            others = ""
        rests["pinned"] = (source,)
        entry = None
        if full.bounded is not None:
            entry = next((c for c in full.bounded.coranks if c.q == q and not c.vacuous), None)
        bits = []
        if others:
            bits.append(others)
        if entry is not None:
            sp = (spread or {}).get("bounded")
            bits.append(f"if the sample were the population, the {what} {'would be' if q == 1 else 'would be'} "
                        f"fixed to within an angle of {entry.angle_bound_deg:.2g} degrees for any form of noise "
                        "within the tolerance"
                        + (f", and sampling moves {'it' if q == 1 else 'them'} by up to "
                           f"{sp.angle_deg:.2g} degrees more ({sp.level:.0%} of bootstrap resamples)"
                           if sp is not None and sp.q == q else ""))
            rests["pinned"] += ("bounded",)
        steady = [st for _, st in stab if st.stable]
        to_full = [st.max_to_reference_deg for st in steady if st.max_to_reference_deg is not None]
        if stab and len(steady) == len(stab) and to_full:
            # the angle to the full sample's subspace (windows differ from each other by more; the
            # dataset page gives both)
            bits.append(f"under equal noise {'it stays' if q == 1 else 'they stay'} within {max(to_full):.2g} "
                        "degrees of the full sample's in every window of time, within what resampling "
                        "produces when nothing changes")
        elif stab and len(steady) < len(stab):
            apart = [d for _, st in stab for d in (st.max_pairwise_deg, st.max_to_reference_deg) if d is not None]
            bits.append("but under equal noise the windows of time differ "
                        + (f"by up to {max(apart):.2g} degrees, " if apart else "")
                        + "more than resampling produces when nothing changes")
        pinned += (": " + "; ".join(bits) if bits else "") + "."
        covers += [("pinned_down", "subspace")] if entry is not None else []
        covers += [("stable", "stability")] if stab and len(steady) == len(stab) else []
        pinned_short = (_short_count(backing, f"{count(q, 'relation')} among the {series} under "
                                              f"{assumption(source).name}")
                        if full.coranks.get(source) == q else
                        f"{count(q, 'relation')} examined as the spec asks (not found by any assumption)")
        if others:
            pinned_short = _add_note(pinned_short, "other assumptions differ")
        if stab:
            pinned_short += (", steady across time windows" if len(steady) == len(stab)
                             else ", but moving across time windows")
        if q >= 2:
            ident = identified.get(q)
            targets = ([labels[names.index(t)] for t in ident.targets] if ident is not None else [])
            open_ = (f"No single weight of one series in \u201cthe\u201d equation: with {count(q, 'relation')}, "
                     "any mix of them is also a relation, so such a weight is a choice, not a finding.")
            if targets:
                open_ += (f" What is fixed, under equal noise, is {join_words(targets)} written through the "
                          f"other series.")
            rests["open"] = ("equal",)
            open_short = "the weight of any single series (only the relations as a set are fixed)"
            covers += [("not_identified", "coefficient"), ("pinned_down", "reduced_form")]
            single = True
        elif full.frisch_lower is not None:
            ks = [k for k in range(n) if k != full.ref]
            lo, hi = full.frisch_lower, full.frisch_upper
            rests["open"] = ("diagonal",)
            if all(np.isfinite(lo[k]) and np.isfinite(hi[k]) for k in ks):
                ranges = join_words([f"{labels[k]} {fmt_range(lo[k], hi[k])}" for k in ks])
                open_ = (f"The exact weights, if each series has its own error of unknown size: at "
                         f"{tol.short} the data only give ranges in the equation for {labels[full.ref]} "
                         f"({ranges}).")
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
            backing = windows_support([a for p, _, _ in windowed for a in p.analyses], "equal", qq)
            support = [support_record(backing)]
            if backing.weak:
                pinned = (f"Under equal noise, at {tol.short}, the data point to {count(qq, 'relation')} tying "
                          f"the {series} together within each window of {titles}, a count {hedge(backing)} "
                          f"({share_words(backing)})")
            else:
                pinned = (f"Under equal noise, at {tol.short}, {count_with_support(backing, lead='chosen')} "
                          f"tie{'s' if qq == 1 else ''} the {series} together within each window of {titles}")
            pinned += (f"; over all rows, {others}" if others else "") + "."
            none = count_support(full, "equal", 0)
            if none.weak:
                open_ = (f"Under equal noise the data give no single relation{span}, a count {hedge(none)} "
                         f"({share_words(none)})")
            else:
                open_ = f"Under equal noise no single relation fits{span}" + (
                    f" ({share_words(none)})" if share_words(none) else "")
            open_numbers = {"support": [support_record(none)]}
            rests["open"] = ("equal",)
            if change is not None:
                open_ += (f": the relation differs between the windows of \u201c{plan.plan.title or plan.plan.id}"
                          f"\u201d by an angle of up to {change:.2g} degrees, the pattern a change of relation "
                          "over time leaves in the data.")
            else:
                open_ += "."
            ev["pinned"] = f"plan-{plan.plan.id}"
            ev["open"] = f"plan-{plan.plan.id}"
            pinned_short = _short_count(backing, f"{count(qq, 'relation')} within each time window under "
                                                 "equal noise")
            open_short = "a single relation for the whole period" + (
                f": it differs between windows by up to {change:.2g} degrees" if change is not None else "")
        else:
            backing = count_support(full, "equal", 0)
            support = [support_record(backing)]
            if backing.weak:
                pinned = (f"Under equal noise, at {tol.short}, the data show no linear relation tying the "
                          f"{series} together, a finding {hedge(backing)} ({share_words(backing)})"
                          + (f"; {others}" if others else "") + ".")
            else:
                words = share_words(backing)
                pinned = (f"Under equal noise no linear relation ties the {series} together at {tol.short}"
                          + (f" ({words})" if words else "") + ": each combination of them varies more than "
                          "that noise" + (f"; {others}" if others else "") + ".")
            open_ = "Nothing further can be identified without a relation."
            pinned_short = _short_count(backing, f"no relation among the {series} under equal noise")
            if others:
                pinned_short = _add_note(pinned_short, "other assumptions differ")
            open_short = "nothing further without a relation"
    driven = [f for f in findings if f.kind == "influence"]
    if driven:
        pinned += (" This count rests on a single row or block of rows: leaving it out changes it (see the "
                   "influence check).")
        pinned_short = _add_note(pinned_short, "resting on a single row or block")
    depends_rests: tuple = ()
    depends = why_assumptions_differ(full, labels)
    if depends:
        covers.append(("depends", "corank"))
        depends_rests = ("equal", "diagonal")
    else:
        flips = [f for f in findings if f.kind == "depends" and f.topic == "coefficient"]
        if flips:
            depends = flips[0].headline
            single = True
            depends_rests = flips[0].assumptions
    unstable = ""
    unstable_ev = "stability"
    swings = [f for f in findings if f.kind == "unstable" and f.topic == "coefficient"]
    moving = [f for f in findings if f.kind == "unstable" and f.topic == "stability"]
    if swings and stab and not moving:
        worst = max(st.max_to_reference_deg for _, st in stab)
        unstable = (f"Single least-squares weights swing between windows of time, some even change sign, while "
                    f"the relations as a set found under equal noise ({tol.short}) stay within {worst:.2g} "
                    "degrees of the full sample's. With several relations this is expected and is no evidence "
                    "that the relation changed." if q and q >= 2 else
                    f"Single least-squares weights swing between windows of time while the relation found under "
                    f"equal noise ({tol.short}) stays within {worst:.2g} degrees of the full sample's.")
        unstable_ev = swings[0].evidence
        single = True
    elif moving:
        unstable = (f"Under {join_words(sorted({assumption(a).name for f in moving for a in f.assumptions}))}, "
                    "the relations move between windows of time by more than resampling produces when "
                    "nothing changes (5% level, all comparisons together).")
        unstable_ev = moving[0].evidence
    elif q is None and windowed and windowed[0][2] is not None:
        plan, _, change = windowed[0]
        unstable = (f"Under equal noise ({tol.short}) the relation itself changes over time: between the "
                    f"windows of \u201c{plan.plan.title or plan.plan.id}\u201d it turns by an angle of up to "
                    f"{change:.2g} degrees.")
        unstable_ev = f"plan-{plan.plan.id}"
    cards = {"pinned": [], "open": [], "depends": [], "unstable": []}
    for f in findings:
        if (f.kind, f.topic) not in covers:
            cards[f.card].append(f)
    return DatasetSummary(
        pinned=Statement(pinned, cap(pinned_short), ev["pinned"], rests["pinned"], tol, {"support": support}),
        open=Statement(open_, cap(open_short), ev["open"], rests["open"], tol, open_numbers),
        depends=Statement(depends, "", ev["depends"], depends_rests, tol,
                          {"support": _depends_support(full)} if depends and depends_rests == ("equal", "diagonal")
                          else {}) if depends else None,
        unstable=Statement(unstable, "", unstable_ev, ("equal",), tol) if unstable else None,
        single_coefficient=single,
        cards={k: tuple(v) for k, v in cards.items()},
        rows=assumption_rows(full, labels),
        windowed=tuple((p.plan.id, qq, change) for p, qq, change in every_windowed),
        plans={p.plan.id: _plan_sentences(p, examined) for p in plans},
        windows={p.plan.id: _window_readings(p, examined, labels) for p in plans},
        relation_track=frozenset(p.plan.id for p in plans if _one_relation_each(p)),
        diagonal_search=frisch_search_words(full),
    )
