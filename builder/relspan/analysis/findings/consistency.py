"""Do the findings of one dataset contradict each other? Explicit rules, checked on every build.

Each rule reads the typed findings and the summary statements of one
dataset (what they claim and what they rest on), and reports a
:class:`Conflict` naming the two statements that cannot both be true, or a
statement that claims more than its grounds. The driver runs
:func:`check_consistency` after building the findings; a conflict becomes a
located :class:`~relspan.errors.FindingsConflictWarning` (``check --strict``
exits 1), and the test suite turns that warning into an error.

The rules (ids as reported):

* ``grounds``: every corank, subspace and stability statement names the
  noise assumption(s) and the tolerance it rests on.
* ``every-assumption``: "under every noise assumption" only when every
  assumption analysed settled the same count.
* ``whatever-noise``: "whatever form (shape) the noise takes" only together
  with "within the tolerance" (the bounded-noise bound holds for noise of any
  form *within the tolerance*, never beyond it).
* ``steady-vs-changes``: no statement that the relations are steady across
  windows under an assumption beside one that they (or their count) change
  across windows under the same assumption.
* ``sign-unidentified``: no sign or value of a single coefficient featured
  under an assumption for which another finding calls single coefficients
  unidentified.
* ``pinned-vs-cannot``: nothing "pinned down" about a topic that another
  finding says cannot be judged under the same assumption.
* ``count-unqualified``: when the assumptions give different counts, every
  summary sentence that states a count says which assumption it rests on.
* ``count-without-support``: once resampling ran for a dataset (a statement
  records a support, :func:`~relspan.analysis.findings.support.support_record`),
  every corank finding and every summary sentence that states a count of
  relations records the support of its count(s) and says it in words ("... of
  499 resamples", or why it was "not computed"): never a bare count.
* ``count-unsettled``: a statement whose recorded support is weak (below
  :data:`~relspan.analysis.findings.support.SETTLED_SHARE`) says the count is
  "not confirmed" by resampling; and a finding that calls it "pinned down" is a
  conflict.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

from relspan.assumptions import assumption as _assumption

__all__ = ["Conflict", "check_consistency", "RULES"]

RULES = ("grounds", "every-assumption", "whatever-noise", "steady-vs-changes", "sign-unidentified",
         "pinned-vs-cannot", "count-unqualified", "count-without-support", "count-unsettled")

#: corank findings of these kinds state counts as a list ("equal noise: 2; ..."); others when they name one
_COUNT_KINDS = ("depends", "unstable")

_TOPICS_WITH_GROUNDS = ("corank", "subspace", "stability")
_STEADY = re.compile(r"\b(steady|stays? within|stable)\b", re.I)
_CHANGES = re.compile(r"\b(changes|moves|moving|turns)\b", re.I)
_COUNT = re.compile(r"\b(no|one|two|three|four|five|six|\d+) (linear )?relations?\b", re.I)


@dataclass(frozen=True, slots=True)
class Conflict:
    """Two statements of one dataset that cannot both be true (or one that overclaims).

    Attributes
    ----------
    rule : str
        One of :data:`RULES`.
    first, second : str
        The statements involved (``second`` is "" for a single overclaim).
    why : str
        The rule, in words.
    """

    rule: str
    first: str
    second: str
    why: str

    def __str__(self) -> str:
        other = f" \u2014 beside \u2014 \u201c{self.second}\u201d" if self.second else ""
        return f"[{self.rule}] {self.why}: \u201c{self.first}\u201d{other}"


def _texts(findings, summary):
    """(text, kind, topic, assumptions, tolerance, plan) of every finding and summary sentence."""
    out = [(f.headline, f.kind, f.topic, tuple(f.assumptions), f.tolerance, f.plan) for f in findings]
    if summary is not None:
        for key in ("pinned", "open", "depends", "unstable"):
            st = getattr(summary, key)
            if st is None:
                continue
            for text in (st.text, st.short):
                if text:
                    out.append((text, f"summary:{key}", "summary", tuple(st.assumptions), st.tolerance, None))
    return out


def _names(assumptions) -> set[str]:
    return {_assumption(a).name for a in assumptions}


def check_consistency(findings, summary=None, *, coranks=None) -> tuple[Conflict, ...]:
    """Every conflict among the findings and summary sentences of one dataset (empty when none).

    Parameters
    ----------
    findings : sequence of Finding
    summary : DatasetSummary, optional
    coranks : mapping assumption id -> int or None, optional
        The full-sample corank under each assumption (``WindowAnalysis.coranks``).
    """
    out: list[Conflict] = []
    coranks = {a: q for a, q in (coranks or {}).items() if a != "elementary"}
    texts = _texts(findings, summary)

    for f in findings:
        if f.topic in _TOPICS_WITH_GROUNDS and (not f.assumptions or f.tolerance is None):
            out.append(Conflict("grounds", f.headline, "", "a corank, subspace or stability statement must name "
                                "its noise assumption and tolerance"))

    settled = {q for q in coranks.values() if q is not None}
    all_agree = bool(coranks) and None not in coranks.values() and len(settled) == 1
    for text, *_ in texts:
        if "under every noise assumption" in text.lower() and not all_agree:
            out.append(Conflict("every-assumption", text, "", "\u201cevery noise assumption\u201d although the "
                                f"assumptions give {dict(coranks)}"))
        low = text.lower()
        if re.search(r"whatever (form|the shape of) the noise|whatever form the noise takes|whatever its form",
                     low) and "tolerance" not in low:
            out.append(Conflict("whatever-noise", text, "", "\u201cwhatever the noise\u201d without \u201cwithin "
                                "the tolerance\u201d"))

    # steady beside changes, under a shared assumption and plan
    steady = [t for t in texts if t[1] == "stable" or (t[1].startswith("summary") and _STEADY.search(t[0])
                                                       and not _CHANGES.search(t[0]))]
    changes = [t for t in texts if t[1] == "unstable" and t[2] in ("stability", "corank")]
    for s_ in steady:
        for c in changes:
            same_plan = s_[5] is None or c[5] is None or s_[5] == c[5]
            shared = set(s_[3]) & set(c[3])
            if same_plan and shared:
                out.append(Conflict("steady-vs-changes", s_[0], c[0], "steady and changing under "
                                    + ", ".join(sorted(_names(shared)))))

    # a single coefficient's sign or value featured where single coefficients are called unidentified
    unident = [f for f in findings if f.kind == "not_identified" and f.topic == "coefficient"]
    for u in unident:
        scope = set(u.assumptions) or set(coranks)
        for f in findings:
            if f is u or f.topic != "coefficient" or f.kind == "not_identified":
                continue
            if f.kind == "unstable" and set(f.assumptions) == {"elementary"}:
                continue  # least-squares coefficients exist by assumption; their swings are shown as such
            if set(f.assumptions) & scope or (f.kind == "depends" and not f.assumptions):
                out.append(Conflict("sign-unidentified", f.headline, u.headline,
                                    "a single coefficient featured where the site calls it unidentified"))

    # pinned down beside cannot be judged
    cannot = [f for f in findings if f.kind == "cannot_be_judged"]
    for c in cannot:
        for f in findings:
            if f.kind == "pinned_down" and f.topic == c.topic and (set(f.assumptions) & set(c.assumptions)
                                                                   or not c.assumptions):
                out.append(Conflict("pinned-vs-cannot", f.headline, c.headline,
                                    "pinned down and cannot be judged on the same topic"))

    # a count stated without its assumption when the assumptions differ
    if len({q for q in coranks.values()}) > 1 and summary is not None:
        names = {_assumption(a).name.lower() for a in coranks}
        for key in ("pinned",):
            st = getattr(summary, key)
            for text in (st.text, st.short):
                if _COUNT.search(text) and not any(nm in text.lower() for nm in names):
                    out.append(Conflict("count-unqualified", text, "", "a count stated without the assumption it "
                                        "rests on, while the assumptions give different counts"))
    out += _support_conflicts(findings, summary)
    return tuple(dict.fromkeys(out))


def _records(numbers) -> list:
    return list((numbers or {}).get("support") or ())


def _support_conflicts(findings, summary) -> list[Conflict]:
    """``count-without-support`` and ``count-unsettled`` (see the module notes)."""
    from relspan.analysis.findings.support import APPLIED, NOT_COMPUTED, SUPPORT_PATTERN, UNSETTLED_MARKER

    stating = []    # (text, numbers, is a count statement)
    for f in findings:
        if f.topic == "corank":
            stating.append((f.headline, f.numbers, f.kind in _COUNT_KINDS or bool(_COUNT.search(f.headline)), f))
    if summary is not None:
        for key in ("pinned", "depends"):
            st = getattr(summary, key)
            if st is None:
                continue
            for text in (st.text, st.short):
                if text and "as the spec asks" not in text:
                    stating.append((text, st.numbers, bool(_COUNT.search(text)), None))
        if summary.open is not None and _records(summary.open.numbers):
            stating.append((summary.open.text, summary.open.numbers, True, None))
    resampled = any(r.get("status") in APPLIED + (NOT_COMPUTED,) for _, numbers, _, _ in stating
                    for r in _records(numbers))
    out = []
    for text, numbers, states, finding in stating:
        records = _records(numbers)
        low = text.lower()
        said = bool(SUPPORT_PATTERN.search(low))
        if resampled and states and (not records or (not said and any(r.get("status") != "off" for r in records))):
            out.append(Conflict("count-without-support", text, "", "a count of relations stated without its "
                                "resampling support (a bare count)"))
        if any(r.get("status") == "weak" for r in records):
            if UNSETTLED_MARKER not in low:
                out.append(Conflict("count-unsettled", text, "", "a count chosen in fewer resamples than the "
                                    "settled share, stated without \u201cnot confirmed\u201d"))
            if finding is not None and finding.kind == "pinned_down":
                out.append(Conflict("count-unsettled", text, "", "a count not confirmed by resampling called "
                                    "pinned down"))
    return out
