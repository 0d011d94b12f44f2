"""The parameter count for point identification under diagonal noise.

``q`` relations among ``n`` variables can be pinned down only if
``q (q + 1) >= 2 n``; otherwise the corank-q solutions form a family.

References
----------
.. [1] W. Ledermann, "On the rank of the reduced correlational matrix in
       multiple-factor analysis", Psychometrika 2(2), 85-93, 1937.
.. [2] A. Shapiro, "Rank-reducibility of a symmetric matrix and sampling
       theory of minimum trace factor analysis", Psychometrika 47(2),
       187-199, 1982.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from relspan.analysis._export import fields_dict
from relspan.errors import OptionsError

__all__ = ["FrischIdentification", "frisch_identification"]


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
    """

    n: int
    q: int
    parameters: int
    required: int
    count_met: bool
    text: str

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready dict with sorted keys."""
        return fields_dict(self)


def frisch_identification(n: int, q: int) -> FrischIdentification:
    """Whether ``q`` relations among ``n`` variables pass the parameter count.

    Point identification of the noise variances (and so of the relation
    subspace) under diagonal noise needs ``q (q + 1) >= 2 n``; otherwise the
    solutions of corank ``q`` form a continuum (e.g. ``n = 4, q = 2``).

    References
    ----------
    .. [1] W. Ledermann, Psychometrika 2(2), 1937.
    .. [2] A. Shapiro, Psychometrika 47(2), 1982.
    """
    for key, v in (("n", n), ("q", q)):
        if isinstance(v, bool) or not isinstance(v, (int, np.integer)):
            raise OptionsError(f"{key} must be a whole number; got {v!r}.", key=key,
                               fix="pass integers: the number of variables and the corank.")
    n, q = int(n), int(q)
    if n < 2 or not 1 <= q <= n - 1:
        raise OptionsError(f"the corank q must lie in 1..n-1 for n >= 2 variables; got n={n}, q={q}.",
                           key="q", fix="choose q between 1 and the number of variables minus 1.")
    # TODO(architecture): reader-facing prose (FrischIdentification.text, part of
    # FrischResult.summary and results.json); it moves to analysis/findings with the report restructuring.
    par, req = q * (q + 1), 2 * n
    if par >= req:
        text = (f"{q} relation{'s' if q > 1 else ''} among {n} variables pass the parameter count "
                f"q(q+1) = {par} >= 2n = {req}: the noise variances can be pinned down (the count "
                "is necessary, not sufficient)")
    else:
        text = (f"{q} relation{'s' if q > 1 else ''} among {n} variables fail the parameter count "
                f"q(q+1) = {par} < 2n = {req}: the solutions form a family, and only their spread "
                "can be reported")
    return FrischIdentification(n, q, par, req, par >= req, text)
