"""The typed statements the interpreter hands to the report.

Every record carries its words and what they rest on: the noise assumptions
(ids of :mod:`relspan.assumptions`), the tolerance and the numbers. The
report escapes and lays them out; it never rewords or recomputes them.
"""

from __future__ import annotations

from dataclasses import dataclass, field

__all__ = ["FINDING_KINDS", "CARD_OF_KIND", "KIND_WORDS", "Tolerance", "Finding", "Statement",
           "AssumptionRow", "WindowReading", "DatasetSummary"]

FINDING_KINDS = ("pinned_down", "set_only", "not_identified", "depends", "unstable", "stable",
                 "no_relation", "cannot_be_judged", "influence", "caution")

#: which home-page card each kind belongs to
CARD_OF_KIND = {
    "pinned_down": "pinned", "stable": "pinned",
    "set_only": "open", "not_identified": "open", "no_relation": "open",
    "depends": "depends",
    "unstable": "unstable",
    "cannot_be_judged": "open", "influence": "open", "caution": "open",
}

#: each kind in a reader's words (the label before a finding in a list)
KIND_WORDS = {
    "pinned_down": "Pinned down", "stable": "Stable", "set_only": "Known only as a set",
    "not_identified": "Not identified", "no_relation": "No relation",
    "depends": "Depends on the noise assumption", "unstable": "Unstable across windows",
    "cannot_be_judged": "Cannot be judged", "influence": "Driven by a few rows", "caution": "Caution",
}


@dataclass(frozen=True, slots=True)
class Tolerance:
    """The tolerance a statement rests on.

    Attributes
    ----------
    eps : float
        The tolerance on the analysed scale.
    scale : str
        ``"correlation"`` (each window on its own correlation scale; ``eps``
        is a share of each variable's variance) or the data's units.
    """

    eps: float
    scale: str

    @classmethod
    def of(cls, analysis) -> "Tolerance":
        """The tolerance a window analysis (or the full sample) was decided at."""
        return cls(float(analysis.eps), str(analysis.scale))

    @property
    def words(self) -> str:
        """The noise the tolerance allows, in a reader's words."""
        if self.scale == "correlation":
            return f"noise up to {100 * self.eps:g}% of each variable's variance"
        return f"noise of spectral norm up to {self.eps:g} in the data's units"

    @property
    def short(self) -> str:
        """The tolerance in a few words, for the end of a sentence ("at a tolerance of ...")."""
        if self.scale == "correlation":
            return f"a tolerance of {100 * self.eps:g}% of each variable's variance"
        return f"a tolerance of {self.eps:g} in the data's units"


@dataclass(frozen=True, slots=True)
class Finding:
    """One statement for the report.

    Attributes
    ----------
    kind : str
        One of :data:`FINDING_KINDS`.
    topic : str
        What it is about: ``corank``, ``subspace``, ``coefficient``,
        ``reduced_form``, ``stability``.
    headline : str
        Plain words, one sentence, with its key number.
    detail : str
        The technical statement (assumptions, thresholds, method).
    numbers : dict
        The numbers behind it (JSON-ready).
    evidence : str
        Fragment id on the dataset page where the evidence is shown.
    plan : str or None
        Window plan the finding is about, if any.
    single_coefficient : bool
        True when it quotes a single normalised coefficient (the report
        then links the caution page).
    assumptions : tuple of str
        The noise assumptions (ids) the statement rests on.
    tolerance : Tolerance or None
        The tolerance it was decided at (None when no tolerance enters).
    """

    kind: str
    topic: str
    headline: str
    detail: str
    numbers: dict = field(default_factory=dict)
    evidence: str = "assumptions"
    plan: str | None = None
    single_coefficient: bool = False
    assumptions: tuple[str, ...] = ()
    tolerance: Tolerance | None = None

    @property
    def card(self) -> str:
        return CARD_OF_KIND[self.kind]

    @property
    def kind_words(self) -> str:
        return KIND_WORDS[self.kind]

    def to_dict(self) -> dict:
        from relspan.analysis._common import jsonable

        return jsonable({"kind": self.kind, "topic": self.topic, "headline": self.headline,
                         "detail": self.detail, "numbers": self.numbers, "evidence": self.evidence,
                         "plan": self.plan, "single_coefficient": self.single_coefficient})


@dataclass(frozen=True, slots=True)
class Statement:
    """One sentence of a dataset's plain summary.

    Attributes
    ----------
    text : str
        The sentence (plain text; the report escapes it).
    short : str
        The same in a few words (the home page's first screen); "" if none.
    evidence : str
        Fragment id on the dataset page that shows the evidence.
    assumptions : tuple of str
        Noise assumptions it rests on.
    tolerance : Tolerance or None
    numbers : dict
        The numbers it quotes; ``"support"``: the resampling support of each count it states
        (:func:`~relspan.analysis.findings.support.support_record`).
    """

    text: str
    short: str = ""
    evidence: str = ""
    assumptions: tuple[str, ...] = ()
    tolerance: Tolerance | None = None
    numbers: dict = field(default_factory=dict)

    @property
    def settled(self) -> bool:
        """False when a count it states is not confirmed by resampling (``numbers["support"]``)."""
        return not any(r.get("status") == "weak" for r in (self.numbers or {}).get("support", ()))


@dataclass(frozen=True, slots=True)
class AssumptionRow:
    """What one noise assumption says about one window (a row of the side-by-side tables).

    Attributes
    ----------
    assumption : str
        Assumption id.
    corank : int or None
        Relations found (None: undetermined); for ``elementary`` 1 by assumption.
    corank_words : str
        "2", "undetermined", "1 (assumed)".
    relations : str
        What the relations found are (one answer, a family, ...); full sample only.
    identified : str
        What the assumption identifies; full sample only.
    points : tuple of (label, value)
        Normalised coefficients of the reference equation, when the assumption gives a point.
    intervals : tuple of (label, low, high)
        Ranges of those coefficients, when it gives a set (independent noise, one relation).
    coefficients_note : str
        Said instead of coefficients when there are none (e.g. several relations).
    support : str
        The count's resampling support in a few words ("chosen in 96% of 499 resamples"; why there
        is none; "" when resampling is off or the assumption presupposes its count).
    """

    assumption: str
    corank: int | None
    corank_words: str
    relations: str = ""
    identified: str = ""
    points: tuple = ()
    intervals: tuple = ()
    coefficients_note: str = ""
    support: str = ""


@dataclass(frozen=True, slots=True)
class WindowReading:
    """The statements of one window's page.

    Attributes
    ----------
    plain : str
        The opening paragraph (span, rows, relations per assumption, angle to the full sample).
    rows : tuple of AssumptionRow
        One per assumption, in the table's order.
    angle_to_previous_deg : float or None
        Largest principal angle between this window's equal-noise relation and
        the previous window's (plans whose windows each support exactly one).
    """

    plain: str
    rows: tuple[AssumptionRow, ...]
    angle_to_previous_deg: float | None = None


@dataclass(frozen=True, slots=True)
class DatasetSummary:
    """What a reader should take from one dataset: the plain summary and the statements per section.

    Attributes
    ----------
    pinned, open : Statement
        What the data pin down and what they leave open.
    depends : Statement or None
        What changes with the noise assumption, and why.
    unstable : Statement or None
        What changes across windows of time.
    single_coefficient : bool
        True when a summary sentence quotes a single coefficient (link the caution page).
    cards : mapping card -> tuple of Finding
        The findings each home card lists under its summary sentence: every
        finding of the card that the summary sentence does not already state.
    rows : tuple of AssumptionRow
        The full sample under each assumption (the side-by-side table).
    windowed : tuple of (plan id, corank, largest angle between windows or None)
        Plans whose every window supports the same corank >= 1 under equal noise.
    plans : mapping plan id -> tuple of str
        Plain sentences on each plan's stability, one per examined corank.
    windows : mapping plan id -> tuple of WindowReading
        The statements of each window page.
    relation_track : frozenset of str
        Plans whose windows each support exactly one equal-noise relation
        (their table of per-window relations is shown).
    diagonal_search : str
        The independent-noise corank search in words (what is certified within
        the tolerance, and Ledermann's caution); "" when not run.
    """

    pinned: Statement
    open: Statement
    depends: Statement | None
    unstable: Statement | None
    single_coefficient: bool
    cards: dict
    rows: tuple[AssumptionRow, ...]
    windowed: tuple
    plans: dict
    windows: dict
    relation_track: frozenset = frozenset()
    diagonal_search: str = ""
