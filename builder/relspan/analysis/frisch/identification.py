"""The parameter count for point identification under diagonal noise.

``q`` relations among ``n`` variables can be pinned down only if
``q (q + 1) >= 2 n``; otherwise the corank-q solutions form a family. At
the equality the solutions are isolated but need not be unique.

References
----------
.. [1] W. Ledermann, "On the rank of the reduced correlational matrix in
       multiple-factor analysis", Psychometrika 2(2), 85-93, 1937.
.. [2] A. Shapiro, "Rank-reducibility of a symmetric matrix and sampling
       theory of minimum trace factor analysis", Psychometrika 47(2),
       187-199, 1982.
.. [3] E. B. Wilson and J. Worcester, "The resolution of six tests into
       three general factors", Proceedings of the National Academy of
       Sciences 25(2), 73-77, 1939.
.. [4] P. A. Bekker and J. M. F. ten Berge, "Generic global identification
       in factor analysis", Linear Algebra and its Applications 264,
       255-263, 1997.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from relspan.analysis._export import fields_dict
from relspan.errors import OptionsError

__all__ = ["FrischIdentification", "frisch_identification"]


#: what is known about uniqueness, beyond the count (see :func:`frisch_identification`)
STATUSES = ("family", "count met", "locally identified", "not unique", "identified", "approximate only")


@dataclass(frozen=True, slots=True)
class FrischIdentification:
    """Parameter count for point identification of ``q`` relations among ``n`` variables.

    Attributes
    ----------
    n, q : int
        Variables and corank.
    parameters : int
        ``q (q + 1)``: the number of equations the corank condition adds
        (twice the ``q (q + 1) / 2`` conditions of a rank drop by ``q``).
    required : int
        ``2 n``: twice the ``n`` unknown noise variances.
    count_met : bool
        ``parameters >= required``. Necessary for point identification; when
        False the corank-q solutions form a family.
    text : str
        One sentence for the report.
    status : str
        One of :data:`STATUSES`: ``"family"`` (count fails), ``"count met"``
        (count exceeded: unique for almost every covariance, Bekker & ten
        Berge 1997), ``"locally identified"`` (count met with equality: the
        solutions are isolated, but a second one can exist, Wilson &
        Worcester 1939; a search found none), ``"not unique"`` (a second
        solution was found), ``"identified"`` (uniqueness shown in closed
        form: three variables, one-factor formula) or ``"approximate only"``
        (no exact solution; the ones within tolerance form a set).
    second_angle_deg : float or None
        At the counting equality: the largest angle between the relation
        subspaces of the solutions the search for a second one found.
    """

    n: int
    q: int
    parameters: int
    required: int
    count_met: bool
    text: str
    status: str = "count met"
    second_angle_deg: float | None = None

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready dict with sorted keys."""
        return fields_dict(self)


def frisch_identification(n: int, q: int, *, evidence: str | None = None,
                          second_angle_deg: float | None = None, starts: int | None = None,
                          ) -> FrischIdentification:
    """Whether ``q`` relations among ``n`` variables pass the parameter count, and what else is known.

    Point identification of the noise variances (and so of the relation
    subspace) under diagonal noise needs ``q (q + 1) >= 2 n``; otherwise the
    solutions of corank ``q`` form a continuum (e.g. ``n = 4, q = 2``). With
    the count exceeded, an exact solution is unique for almost every
    covariance (Bekker & ten Berge 1997). At the counting equality
    ``q (q + 1) = 2 n`` the solutions are isolated (locally identified) but
    need not be unique: two exact solutions can exist (Wilson & Worcester
    1939), so a search for a second one decides what is said.

    Parameters
    ----------
    n, q : int
        Variables and corank.
    evidence : str, optional
        What the analysis found beyond the count: ``"unique"`` (closed form:
        the three-variable formula gives the one exact solution),
        ``"approximate"`` (no exact solution, only solutions within the
        tolerance), ``"second"`` (the search found solutions whose relation
        subspaces differ by ``second_angle_deg``), ``"searched"`` (the search
        found no second solution). None: the count alone.
    second_angle_deg : float, optional
        With ``"second"`` or ``"searched"``: the largest angle found.
    starts : int, optional
        Starts of the search, for the text.

    References
    ----------
    .. [1] W. Ledermann, Psychometrika 2(2), 1937.
    .. [2] A. Shapiro, Psychometrika 47(2), 1982.
    .. [3] E. B. Wilson and J. Worcester, "The resolution of six tests into
           three general factors", Proceedings of the National Academy of
           Sciences 25(2), 73-77, 1939.
    .. [4] P. A. Bekker and J. M. F. ten Berge, "Generic global
           identification in factor analysis", Linear Algebra and its
           Applications 264, 255-263, 1997.
    """
    for key, v in (("n", n), ("q", q)):
        if isinstance(v, bool) or not isinstance(v, (int, np.integer)):
            raise OptionsError(f"{key} must be a whole number; got {v!r}.", key=key,
                               fix="pass integers: the number of variables and the corank.")
    n, q = int(n), int(q)
    if n < 2 or not 1 <= q <= n - 1:
        raise OptionsError(f"the corank q must lie in 1..n-1 for n >= 2 variables; got n={n}, q={q}.",
                           key="q", fix="choose q between 1 and the number of variables minus 1.")
    if evidence not in (None, "unique", "approximate", "second", "searched"):
        raise OptionsError(f"evidence must be one of unique, approximate, second, searched or None; got "
                           f"{evidence!r}.", key="evidence", fix="leave evidence out for the count alone.")
    # TODO(architecture): reader-facing prose (FrischIdentification.text, part of
    # FrischResult.summary and results.json); it moves to analysis/findings with the report restructuring.
    par, req = q * (q + 1), 2 * n
    rel = f"{q} relation{'s' if q > 1 else ''} among {n} variables"
    angle = None if second_angle_deg is None else float(second_angle_deg)
    if par < req:
        status = "family"
        text = (f"{rel} fail the parameter count q(q+1) = {par} < 2n = {req}: the solutions form a "
                "family, and only their spread can be reported")
    elif evidence == "approximate":
        status = "approximate only"
        text = (f"{rel} pass the parameter count q(q+1) = {par} >= 2n = {req}, but no exact solution "
                "exists; the solutions within the tolerance form a set, so the noise variances are not "
                "pinned down")
    elif evidence == "unique":
        status = "identified"
        text = (f"{rel}: the three-variable formula gives the one exact solution, so the noise variances "
                "are pinned down")
    elif par == req and evidence == "second" and angle is not None:
        status = "not unique"
        text = (f"{rel} meet the parameter count with equality (q(q+1) = 2n = {req}), where exact solutions "
                f"need not be unique: solutions found within the tolerance have relation subspaces up to "
                f"{angle:.3g} degrees apart, so the noise variances are not pinned down")
    elif par == req:
        status = "locally identified"
        text = (f"{rel} meet the parameter count with equality (q(q+1) = 2n = {req}): the noise variances "
                "are at best locally identified (isolated solutions), and a second, distant solution can "
                "exist"
                + (f" and was not found from {starts} starts" if evidence == "searched" and starts else "")
                + ", so uniqueness is not shown")
    else:
        status = "count met"
        text = (f"{rel} pass the parameter count q(q+1) = {par} > 2n = {req}: for almost every covariance "
                "an exact solution is the only one, so the noise variances can be pinned down (the count "
                "is necessary, not sufficient)")
    return FrischIdentification(n, q, par, req, par >= req, text, status, angle)
