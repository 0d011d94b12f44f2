"""A count of relations in words, with the resampling support it rests on.

Every sentence that states a corank says how often resampling gives the same
count (:class:`relspan.analysis.corank_support.CorankSupport`), in a few
words: "the count chosen in 100% of 499 resamples". Where the support is
weak (below :data:`SETTLED_SHARE`) the sentence says less: the count is
stated as the data's answer, "likely but not confirmed by resampling" (or "not
confirmed" when another count is chosen more often). Where no support exists,
the words say why (not computed for that assumption or window), and when
resampling is off nothing is added (pages have their own "not computed"
slot). The support recorded on a statement (``numbers["support"]``, from
:func:`support_record`) is what :mod:`.consistency` checks the words against.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

from relspan.words import count

__all__ = ["SETTLED_SHARE", "SETTLED_RULE", "CountSupport", "count_support", "windows_support", "support_words",
           "share_words", "hedge", "count_with_support", "settled_words", "support_record", "RESAMPLING_OFF",
           "NOT_COMPUTED", "APPLIED", "SUPPORT_PATTERN", "UNSETTLED_MARKER"]

#: a count is stated plainly only when the rule chooses it in at least this share of resamples
SETTLED_SHARE = 0.8

#: the rule, in words (methods page, statements' details)
SETTLED_RULE = (f"A count of relations is stated plainly only when the same rule, applied to each resample, gives "
                f"that count in at least {100 * SETTLED_SHARE:.0f}% of resamples; below that one resample in five "
                "or more gives another count, so the count is said to be likely (or, when another count is "
                "chosen more often, only the data's answer) but not confirmed by resampling. The share is itself "
                "estimated: with 499 resamples its standard error is at most 2.2 percentage points "
                "(sqrt(0.25/499)), so only counts within a few points of the boundary could read either way.")

#: status of a count's support
APPLIED = ("settled", "weak")
RESAMPLING_OFF = "off"
NOT_COMPUTED = "not computed"

#: what a sentence with a recorded support contains (:mod:`.consistency`): a share "of N resamples",
#: or why there is none, or that the count is not confirmed by resampling
SUPPORT_PATTERN = re.compile(r"\d+% of (its )?\d+ resamples|not computed|not confirmed")
#: words a sentence whose count is weakly supported contains
UNSETTLED_MARKER = "not confirmed"

_WHY_NONE = {
    "shaped": "support not computed under this assumption",
    "diagonal": "support not computed for rolling or expanding windows",
}


@dataclass(frozen=True, slots=True)
class CountSupport:
    """The resampling support of one count under one assumption (one window or a set of windows).

    Attributes
    ----------
    assumption : str
        Assumption id.
    q : int or None
        The count stated (None: undetermined on the data).
    status : str
        ``"settled"`` (share at least :data:`SETTLED_SHARE`), ``"weak"``,
        ``"not computed"`` (resampling ran, but not for this assumption or
        window) or ``"off"`` (resampling is off).
    share : float or None
        Share of resamples giving ``q`` (the smallest over windows for a set
        of windows); for bounded noise the share in which ``q`` is the
        largest admissible count.
    admissible : float or None
        Bounded noise: share of resamples in which ``q`` is admissible.
    resamples : int
        Resamples behind the share (the smallest over windows).
    other : tuple of (int, float)
        The counts other resamples give, most frequent first (shares at least 0.5%).
    modal : bool
        True when no other count is chosen more often than ``q``.
    windows : int
        How many windows the share covers (1 for one window).
    why : str
        Why there is no support (status ``"not computed"``).
    """

    assumption: str
    q: int | None
    status: str
    share: float | None = None
    admissible: float | None = None
    resamples: int = 0
    other: tuple = ()
    modal: bool = True
    windows: int = 1
    why: str = ""

    @property
    def settled(self) -> bool:
        return self.status == "settled"

    @property
    def weak(self) -> bool:
        return self.status == "weak"


def _pct(x: float) -> str:
    return f"{100 * x:.0f}%"


def count_support(analysis, assumption: str, q=None) -> CountSupport:
    """The support of the count ``q`` (default: the window's own) under ``assumption`` in one window analysis."""
    if q is None:
        q = analysis.coranks.get(assumption)
    inf = getattr(analysis, "inference", None)
    if inf is None:
        return CountSupport(assumption, q, RESAMPLING_OFF)
    s = inf.coranks.get(assumption)
    if s is None or q is None:
        why = (_WHY_NONE.get(assumption, "support not computed under this assumption") if s is None
               else "undetermined on the data")
        return CountSupport(assumption, q, NOT_COMPUTED, why=why)
    share = s.support(q)
    other = sorted(((k, x) for k, x in zip(s.coranks, s.chosen_share) if k != q and x >= 0.005),
                   key=lambda t: (-t[1], t[0]))
    adm = None
    if assumption == "bounded" and s.admissible_share is not None and 0 <= q < len(s.admissible_share):
        adm = float(s.admissible_share[q])
    return CountSupport(assumption, q, "settled" if share >= SETTLED_SHARE else "weak", float(share), adm,
                        int(s.resamples), tuple(other), modal=all(x <= share for _, x in other))


def windows_support(analyses, assumption: str, q: int | None = None) -> CountSupport:
    """The support of the same count ``q`` in every window of a plan: the smallest share over the windows.

    With ``q`` None, each window's own count (windows whose count is undetermined are left out).
    Settled only when every window's share is at least :data:`SETTLED_SHARE`.
    """
    each = [count_support(a, assumption, q) for a in analyses
            if q is not None or a.coranks.get(assumption) is not None]
    if not each or all(c.status == RESAMPLING_OFF for c in each):
        return CountSupport(assumption, q, RESAMPLING_OFF, windows=len(each))
    have = [c for c in each if c.status in APPLIED]
    if len(have) < len(each):
        why = next((c.why for c in each if c.status == NOT_COMPUTED), "support not computed")
        return CountSupport(assumption, q, NOT_COMPUTED, windows=len(each), why=why)
    low = min(have, key=lambda c: c.share)
    return CountSupport(assumption, q, "settled" if low.share >= SETTLED_SHARE else "weak", low.share, low.admissible,
                        min(c.resamples for c in have), low.other, modal=low.modal, windows=len(each))


def _others(cs: CountSupport, limit: int = 1) -> str:
    return ", ".join(f"{k} in {_pct(x)}" for k, x in cs.other[:limit])


def hedge(cs: CountSupport) -> str:
    """What a weak count is ("likely but not confirmed by resampling"; "" when settled or without support)."""
    if not cs.weak:
        return ""
    return f"{'likely but ' if cs.modal else ''}{UNSETTLED_MARKER} by resampling"


def share_words(cs: CountSupport, *, lead: str = "the count chosen") -> str:
    """The share alone: ``"the count chosen in 100% of 499 resamples"``, weak: ``"chosen in 62% of 499
    resamples, 3 in 31%"``; bounded noise says "admissible" (its admissible share when settled, else the share in
    which the count is the largest admissible); "" when resampling is off, why when not computed."""
    if cs.status == RESAMPLING_OFF:
        return ""
    if cs.status == NOT_COMPUTED:
        return cs.why
    every = " in each window" if cs.windows > 1 else ""
    least = "at least " if cs.windows > 1 and cs.share is not None and round(100 * cs.share) < 100 else ""
    of = f"of {cs.resamples} resamples{every}"
    tail = f", {_others(cs)}" if cs.weak and cs.other and cs.windows == 1 else ""
    if cs.assumption == "bounded":
        if cs.settled and cs.windows == 1 and cs.q and cs.admissible is not None:
            return f"admissible in {_pct(cs.admissible)} {of}"
        return f"the largest admissible count in {least}{_pct(cs.share)} {of}{tail}"
    if cs.settled:
        return f"{lead} in {least}{_pct(cs.share)} {of}"
    return f"chosen in {least}{_pct(cs.share)} {of}{tail}"


def support_words(cs: CountSupport, *, lead: str = "the count chosen") -> str:
    """The support in a few words, for brackets after a count ("" when resampling is off).

    ``"the count chosen in 100% of 499 resamples"``; weak: ``"likely but not confirmed by resampling
    (chosen in 62% of 499 resamples, 3 in 31%)"``.
    """
    words = share_words(cs, lead=lead)
    return f"{hedge(cs)} ({words})" if cs.weak and words else words


def settled_words(cs: CountSupport, k_words: str, *, lead: str = "the count chosen") -> str:
    """``k_words`` ("two relations") followed by its support: in brackets, or after a comma when weak."""
    words = support_words(cs, lead=lead)
    if not words:
        return k_words
    return f"{k_words}, {words}" if cs.weak else f"{k_words} ({words})"


def support_record(cs: CountSupport) -> dict:
    """The support as recorded in a statement's numbers (JSON-ready)."""
    return {"assumption": cs.assumption, "corank": cs.q, "status": cs.status, "share": cs.share,
            "admissible_share": cs.admissible, "resamples": cs.resamples, "windows": cs.windows,
            "settled_share": SETTLED_SHARE}


def count_with_support(cs: CountSupport, noun: str = "relation", *, lead: str = "the count chosen") -> str:
    """"two relations (the count chosen in 100% of 499 resamples)" (no brackets when resampling is off)."""
    return settled_words(cs, count(cs.q, noun) if cs.q is not None else "an undetermined number of " + noun + "s",
                         lead=lead)
