"""The whole diagonal-noise (Frisch scheme) analysis of one window."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Sequence

from relspan.analysis._common import check_whole, variable_index
from relspan.analysis._export import fields_dict
from relspan.analysis.frisch._base import frisch_cov
from relspan.analysis.frisch.corank import FrischCorank, _check_eps_pair, frisch_max_corank
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
        The parameter count at the largest certified corank (None if 0), with
        what the analysis adds (closed form for three variables, the search
        for a second solution at the counting equality).
    spread : SolutionSpread or None
        The spread of the solutions at the largest certified corank when it
        is at least 2 and fails the parameter count, or meets it with
        equality (n > 3: the search for a second solution).
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
                    eps_impossible: float | None = None, starts: int = 8, seed: int = 0,
                    ref: str | int | None = None, warm: Any = None) -> FrischResult:
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
        Tolerance (> 0) of the existence certificates on the correlation
        scale.
    eps_impossible : float, optional
        Tolerance (>= ``eps``) of the impossibility certificates; default
        ``eps``. For an absolute tolerance take both from
        :meth:`relspan.analysis.bounded.NoiseTolerance.diagonal_eps`.
    starts, seed : int
        Starts of the minimum-rank search and their seed.
    ref : str or int, optional
        Normalise the single-relation intervals on this variable only.
    warm : FrischResult or FrischCorank, optional
        A previous analysis of the same variables (overlapping window, or the
        estimate when this is a resample); see :func:`frisch_max_corank`.

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
    eps, eps_imp = _check_eps_pair(eps, eps_impossible)
    starts = check_whole(starts, key="starts", minimum=1)
    seed = check_whole(seed, key="seed", minimum=0)
    if ref is not None:
        variable_index(nm, ref, key="ref")
    orth = one_orthant(s, names=nm)
    q1 = frisch_q1(s, names=nm, ref=ref)
    tri = triad(s, names=nm) if n == 3 else None
    cor = frisch_max_corank(s, names=nm, eps=eps, eps_impossible=eps_imp, starts=starts, seed=seed,
                            warm=warm)
    qs = cor.max_certified
    spread = None
    ident = None
    if qs >= 1:
        cert = cor.certificate(qs)
        equality = qs * (qs + 1) == 2 * n
        if qs >= 2 and (qs * (qs + 1) < 2 * n or (equality and tri is None)):
            # A family, or the counting equality where a second solution can exist
            # (Wilson & Worcester 1939): search with more starts there.
            spread = solution_spread(s, qs, eps, names=nm, starts=starts if not equality else 4 * starts,
                                     seed=seed, certified=cert.noise_share)
        evidence = None
        angle = None
        if tri is not None and qs == 2:
            evidence = "unique" if tri.feasible else "approximate"
        elif spread is not None and equality:
            angle = spread.max_angle_deg
            evidence = "second" if spread.distinct > 1 else "searched"
        ident = frisch_identification(n, qs, evidence=evidence, second_angle_deg=angle,
                                      starts=4 * starts if equality else None)
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
        parts.append(_triad_sentence(tri, cor.certificate(2).status, eps))
    if spread is not None and not (ident is not None and ident.status == "locally identified"):
        parts.append(spread.summary)
    elif ident is not None and qs >= 2 and (tri is None or ident.status == "count met"):
        parts.append(ident.text[0].upper() + ident.text[1:] + ".")
    return FrischResult(nm, eps, starts, seed, orth, q1, tri, cor, ident, spread, " ".join(parts))


def _triad_sentence(tri: TriadResult, status: str, eps: float) -> str:
    """One sentence on corank 2 of three variables: the exact formula and the certificate agree.

    The triad formula says whether two relations hold *exactly* with
    non-negative noise variances; the certificate says whether they hold
    within the tolerance. Both are true at once, so they are said together.
    """
    if tri.feasible:
        return ("A single factor reproduces the covariances exactly with non-negative noise variances "
                "(three-variable formula): two relations hold exactly, and their noise variances are "
                "pinned down.")
    why = ("the product of the three covariances is not positive" if not tri.sign_condition else
           "Heywood case: " + ", ".join(tri.heywood) + " would need a negative noise variance")
    within = {"certified": f"but two relations fit within tolerance {eps:g}, approximately, so their "
                           "noise variances are not pinned down",
              "ruled out": f"and none fits within tolerance {eps:g} either",
              "undetermined": f"whether two fit within tolerance {eps:g} cannot be judged"}[status]
    return f"No exact fit with two relations exists ({why}); {within}."
