"""The one table of noise assumptions: every layer reads its words and order here.

A noise assumption says what the measurement error of the variables may look
like. The spec names assumptions by ``id``; the analysis computes one result per
id; findings, pages, figures, CSV and JSON headers and the command line show
the reader one name per assumption, :attr:`Assumption.name`, and nothing else.
Trade names (total least squares, Frisch scheme) appear once, as
:attr:`Assumption.method`, on the methods page and in the glossary.

Examples
--------
>>> from relspan.assumptions import assumption, ASSUMPTION_IDS
>>> ASSUMPTION_IDS
('elementary', 'equal', 'shaped', 'bounded', 'diagonal')
>>> assumption("diagonal").name
'independent noise'
"""

from __future__ import annotations

from dataclasses import dataclass

__all__ = ["Assumption", "ASSUMPTIONS", "ASSUMPTION_IDS", "assumption", "corank_preference"]


@dataclass(frozen=True, slots=True)
class Assumption:
    """One noise assumption, as every layer of relspan names and orders it.

    Attributes
    ----------
    id : str
        The spec's identifier (``checks.assumptions``, ``claims[].assumption``).
    name : str
        The reader's name, lower case, used inside sentences, legends, table
        headers and command-line output (capitalise with :attr:`title`).
    method : str
        The trade's name of the method, for the methods page and glossary.
    meaning : str
        One sentence: what the assumption says about the measurement error.
    glossary : str
        The glossary entry (plain words, two or three sentences).
    preference : int or None
        Order in which assumptions are consulted when the spec leaves the
        examined corank to the evidence (``checks.coranks: auto``); None when
        the assumption never decides it.
    slot : int
        Fixed style slot in figures, so an assumption looks the same in every
        figure of a site.
    """

    id: str
    name: str
    method: str
    meaning: str
    glossary: str
    preference: int | None
    slot: int

    @property
    def title(self) -> str:
        """:attr:`name` with a capital first letter (headings, table rows)."""
        return self.name[:1].upper() + self.name[1:]

    @property
    def adjective(self) -> str:
        """The name as a compound adjective: ``'the equal-noise assumption'``."""
        return self.name.replace(" ", "-")


#: every assumption, in the order pages and tables show them
ASSUMPTIONS: tuple[Assumption, ...] = (
    Assumption(
        id="elementary",
        name="one variable alone noisy",
        method="elementary regressions (ordinary least squares)",
        meaning=("One chosen variable carries all the measurement error and the others are exact; "
                 "there are n such answers, one per variable."),
        glossary=("The assumption behind ordinary least squares: one variable is measured with error and "
                  "the others exactly. Regressing each variable in turn on the others gives the n "
                  "elementary regressions."),
        preference=None,
        slot=3,
    ),
    Assumption(
        id="equal",
        name="equal noise",
        method="total least squares",
        meaning=("Every variable carries measurement error of the same size on the scale analysed; "
                 "the answer depends on that scale, which relspan states."),
        glossary=("Every variable has measurement error of the same size (on the stated scale). The "
                  "relations are then the directions of least variance of the data (total least "
                  "squares)."),
        preference=0,
        slot=0,
    ),
    Assumption(
        id="shaped",
        name="noise of known relative size",
        method="generalised total least squares with a known noise shape",
        meaning=("The sizes of the measurement errors are known up to one common factor, as given in "
                 "the spec (noise_share)."),
        glossary=("The relative sizes of the measurement errors are known (for example from how each "
                  "variable is collected), their common level is not."),
        preference=1,
        slot=4,
    ),
    Assumption(
        id="bounded",
        name="bounded noise",
        method="perturbation bounds (Weyl; Davis and Kahan)",
        meaning=("The measurement error may have any shape, but its size is at most the stated "
                 "tolerance; this gives a range of possible answers."),
        glossary=("The measurement error may have any pattern, but its overall size is at most the stated "
                  "tolerance. A number of relations is admissible when the data can be moved that far "
                  "to satisfy it."),
        preference=2,
        slot=1,
    ),
    Assumption(
        id="diagonal",
        name="independent noise",
        method="the Frisch scheme",
        meaning=("Each variable has its own measurement error, independent of the others, of unknown "
                 "size; the data then give a set of answers, not one."),
        glossary=("Each variable has its own measurement error, independent of the other variables' "
                  "errors, of unknown size (the Frisch scheme). The data usually admit a whole set of "
                  "answers."),
        preference=3,
        slot=2,
    ),
)

#: the spec's identifiers, in display order
ASSUMPTION_IDS: tuple[str, ...] = tuple(a.id for a in ASSUMPTIONS)

_BY_ID = {a.id: a for a in ASSUMPTIONS}


def assumption(assumption_id: str) -> Assumption:
    """The record of one assumption, by its spec identifier.

    Raises
    ------
    KeyError
        For an identifier that is not in :data:`ASSUMPTION_IDS`.
    """
    return _BY_ID[assumption_id]


def corank_preference() -> tuple[Assumption, ...]:
    """Assumptions that may decide the examined corank, most preferred first."""
    return tuple(sorted((a for a in ASSUMPTIONS if a.preference is not None), key=lambda a: a.preference))
