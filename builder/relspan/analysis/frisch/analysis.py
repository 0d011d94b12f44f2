"""The whole diagonal-noise (Frisch scheme) analysis of one window."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Sequence

from relspan.analysis._common import check_fraction, check_whole, variable_index
from relspan.analysis._export import fields_dict
from relspan.analysis.frisch._base import frisch_cov
from relspan.analysis.frisch.corank import FrischCorank, frisch_max_corank
from relspan.analysis.frisch.identification import FrischIdentification, frisch_identification
from relspan.analysis.frisch.orthant import FrischSet, OrthantTest, frisch_q1, one_orthant
from relspan.analysis.frisch.spread import SolutionSpread, solution_spread
from relspan.analysis.frisch.triad import TriadResult, triad

__all__ = ["FrischResult", "frisch_analysis"]


@dataclass(frozen=True, slots=True)
class FrischResult:
    """The diagonal-noise (Frisch scheme) analysis of one window.

    Attributes
    ----------
    names : tuple of str
        Variable names.
    eps : float
        Tolerance on the correlation scale.
    starts, seed : int
        Search starts and seed.
    orthant : OrthantTest
        Whether the elementary regressions lie in one orthant.
    q1 : FrischSet
        The set of single relations.
    triad : TriadResult or None
        The one-factor triad (only for three variables).
    corank : FrischCorank
        Certificates for every corank.
    identification : FrischIdentification or None
        The parameter count at the largest certified corank (None if 0).
    spread : SolutionSpread or None
        The spread of the solution family at the largest certified corank
        when it is at least 2 and fails the parameter count.
    summary : str
        Plain-language summary for the report.
    """

    names: tuple[str, ...]
    eps: float
    starts: int
    seed: int
    orthant: OrthantTest
    q1: FrischSet
    triad: TriadResult | None
    corank: FrischCorank
    identification: FrischIdentification | None
    spread: SolutionSpread | None
    summary: str

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready dict with sorted keys."""
        return fields_dict(self)

    def to_frame(self):
        """The per-corank table of :meth:`FrischCorank.to_frame`."""
        return self.corank.to_frame()


def frisch_analysis(cov: Any, *, names: Sequence[str] | None = None, eps: float,
                    starts: int = 8, seed: int = 0, ref: str | int | None = None) -> FrischResult:
    """Run the whole diagonal-noise analysis for one window.

    Bundles :func:`one_orthant`, :func:`frisch_q1`, :func:`triad` (for three
    variables), :func:`frisch_max_corank`, :func:`frisch_identification` and,
    when the largest certified corank ``q >= 2`` fails the parameter count,
    :func:`solution_spread`.

    Parameters
    ----------
    cov : (n, n) array_like
        Sample covariance of the window.
    names : sequence of str, optional
        Variable names.
    eps : float
        Tolerance in (0, 1) on the correlation scale.
    starts, seed : int
        Starts of the minimum-rank search and their seed.
    ref : str or int, optional
        Normalise the single-relation intervals on this variable only.

    Returns
    -------
    FrischResult

    References
    ----------
    .. [1] R. Frisch, Statistical Confluence Analysis by Means of Complete
           Regression Systems, 1934.
    .. [2] S. Klepper and E. E. Leamer, Econometrica 52(1), 1984.
    .. [3] J. M. F. ten Berge and H. A. L. Kiers, Psychometrika 56(2), 1991.

    Examples
    --------
    >>> import numpy as np
    >>> S = np.array([[4.0, 2.0, 1.0], [2.0, 3.0, 1.0], [1.0, 1.0, 2.0]])
    >>> fr = frisch_analysis(S, names=["a", "b", "c"], eps=0.01)
    >>> fr.corank.max_certified, fr.q1.status, fr.triad.feasible
    (2, 'unbounded', True)
    >>> np.round(fr.triad.noise_variances, 3).tolist()
    [2.0, 1.0, 1.5]
    """
    s, nm = frisch_cov(cov, names)
    n = s.shape[0]
    eps = check_fraction(eps, key="eps", meaning="the tolerance on the correlation scale")
    starts = check_whole(starts, key="starts", minimum=1)
    seed = check_whole(seed, key="seed", minimum=0)
    if ref is not None:
        variable_index(nm, ref, key="ref")
    orth = one_orthant(s, names=nm)
    q1 = frisch_q1(s, names=nm, ref=ref)
    tri = triad(s, names=nm) if n == 3 else None
    cor = frisch_max_corank(s, names=nm, eps=eps, starts=starts, seed=seed)
    qs = cor.max_certified
    ident = frisch_identification(n, qs) if qs >= 1 else None
    spread = None
    if ident is not None and qs >= 2 and not ident.count_met:
        spread = solution_spread(s, qs, eps, names=nm, starts=starts, seed=seed)
    # TODO(architecture): reader-facing prose (FrischResult.summary, carried into results.json);
    # it moves to analysis/findings with the report restructuring, not in this refactor.
    parts = [cor.summary]
    if q1.status == "bounded":
        parts.append("A single relation is bounded: its coefficients lie between those of the "
                     f"{n} one-variable-at-a-time regressions.")
    elif q1.status == "unbounded":
        t = orth.failing[0].variables if orth.failing else None
        parts.append("A single relation is not bounded: the one-variable-at-a-time regressions "
                     "point in different directions"
                     + (f" (variables {', '.join(t)})" if t else "")
                     + ", so its coefficients can take any value.")
    else:
        parts.append(q1.reason[0].upper() + q1.reason[1:] + ".")
    if tri is not None:
        parts.append(tri.reason[0].upper() + tri.reason[1:] + ".")
    if spread is not None:
        parts.append(spread.summary)
    elif ident is not None and qs >= 2:
        parts.append(ident.text[0].upper() + ident.text[1:] + ".")
    return FrischResult(nm, eps, starts, seed, orth, q1, tri, cor, ident, spread, " ".join(parts))
