"""Three variables under diagonal noise: the one-factor triad (corank 2).

A rank-1 ``S - D`` with ``D >= 0`` exists iff ``s12 s13 s23 > 0`` and each
``s_ij s_ik / s_jk <= s_ii`` (otherwise a Heywood case).

References
----------
.. [1] C. Spearman, "'General intelligence', objectively determined and
       measured", American Journal of Psychology 15(2), 201-292, 1904.
.. [2] R. Frisch, Statistical Confluence Analysis by Means of Complete
       Regression Systems, Universitetets Økonomiske Institutt, Oslo, 1934.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Sequence

import numpy as np

from relspan.analysis._export import fields_dict, frame
from relspan.analysis.frisch._base import _ZERO, frisch_cov
from relspan.errors import OptionsError

__all__ = ["TriadResult", "triad"]


@dataclass(frozen=True, slots=True)
class TriadResult:
    """Rank-1 (one-factor) decomposition of a 3 x 3 covariance (corank 2).

    Attributes
    ----------
    names : tuple of str
        The three variable names.
    sign_condition : bool
        ``s12 s13 s23 > 0``.
    feasible : bool
        A rank-1 ``S - D`` with ``D >= 0`` exists: the sign condition holds
        and every ``s_ij s_ik / s_jk <= s_ii``.
    loadings : tuple of float or None
        ``l`` with ``S - D = l l^T`` (``l_1 > 0``), from
        ``l_i^2 = s_ij s_ik / s_jk``; None when the sign condition fails.
    noise_variances : tuple of float or None
        ``d_i = s_ii - l_i^2``; negative entries are Heywood cases.
    heywood : tuple of str
        Variables with ``l_i^2 > s_ii`` (negative noise variance needed).
    relations : (2, 3) ndarray or None
        Orthonormal basis of the two relations (``l``'s orthogonal
        complement) when feasible.
    reason : str
        One sentence on the outcome.
    """

    names: tuple[str, ...]
    sign_condition: bool
    feasible: bool
    loadings: tuple[float, ...] | None
    noise_variances: tuple[float, ...] | None
    heywood: tuple[str, ...]
    relations: np.ndarray | None
    reason: str

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready dict with sorted keys."""
        return fields_dict(self)

    def to_frame(self):
        """One row per variable: ``variable, loading, noise_variance, heywood``."""
        rows = [{"variable": v,
                 "loading": None if self.loadings is None else self.loadings[i],
                 "noise_variance": None if self.noise_variances is None else self.noise_variances[i],
                 "heywood": v in self.heywood} for i, v in enumerate(self.names)]
        return frame(rows, columns=["variable", "loading", "noise_variance", "heywood"])


def triad(cov: Any, *, names: Sequence[str] | None = None) -> TriadResult:
    """One-factor decomposition of three variables (Spearman's triad formula).

    A rank-1 ``S - D`` with ``D = diag(d) >= 0`` exists iff
    ``s12 s13 s23 > 0`` and ``s_ij s_ik / s_jk <= s_ii`` for each ``i``; the
    loadings are then ``l_i = sqrt(s_ij s_ik / s_jk)`` up to a common sign
    (signed so ``l_i l_j = s_ij``) and ``d_i = s_ii - l_i^2``. A variable with
    ``l_i^2 > s_ii`` is a Heywood case. For generic ``S`` exactly one of
    "one orthant" (:func:`one_orthant`) and "rank-1 feasible" holds.

    Parameters
    ----------
    cov : (3, 3) array_like
        Sample covariance.
    names : sequence of str, optional
        Variable names.

    Returns
    -------
    TriadResult

    References
    ----------
    .. [1] C. Spearman, "'General intelligence', objectively determined and
           measured", American Journal of Psychology 15(2), 1904.
    .. [2] R. Frisch, Statistical Confluence Analysis by Means of Complete
           Regression Systems, 1934.

    Examples
    --------
    >>> import numpy as np
    >>> S = np.array([[4.0, 2.0, 1.0], [2.0, 3.0, 1.0], [1.0, 1.0, 2.0]])
    >>> t = triad(S, names=["a", "b", "c"])
    >>> t.feasible, np.round(t.loadings, 3).tolist(), np.round(t.noise_variances, 3).tolist()
    (True, [1.414, 1.414, 0.707], [2.0, 1.0, 1.5])

    A Heywood case: the one-factor fit needs a negative noise variance.

    >>> triad(np.array([[1.0, 0.5, 0.5], [0.5, 1.0, 0.1], [0.5, 0.1, 1.0]])).heywood
    ('x1',)
    """
    s, nm = frisch_cov(cov, names)
    if s.shape[0] != 3:
        raise OptionsError(f"cov must be the covariance of exactly 3 variables for the triad; got "
                           f"{s.shape[0]}.", key="cov",
                           fix="use frisch_max_corank for other numbers of variables.")
    s12, s13, s23 = s[0, 1], s[0, 2], s[1, 2]
    prod = s12 * s13 * s23
    scale = float(np.prod(np.diag(s)))
    if not prod > _ZERO * scale:
        reason = (f"s12 s13 s23 = {prod:.3g} is not positive, so no single factor reproduces the "
                  "covariances exactly: no exact corank 2 (within a tolerance it can still be certified)")
        return TriadResult(nm, False, False, None, None, (), None, reason)
    l1 = math.sqrt(s12 * s13 / s23)
    lam = np.array([l1, s12 / l1, s13 / l1])
    d = np.diag(s) - lam ** 2
    hey = tuple(nm[i] for i in range(3) if d[i] < -1e-12 * s[i, i])
    feasible = not hey
    relations = None
    if feasible:
        u = lam / np.linalg.norm(lam)
        _, _, vt = np.linalg.svd(u[None, :])
        relations = vt[1:]
        reason = ("a single factor reproduces the covariances with non-negative noise variances: "
                  "corank 2 holds exactly and is point-identified")
    else:
        reason = ("Heywood case: the one-factor fit needs a negative noise variance for "
                  + ", ".join(hey) + ", so no exact corank 2 under diagonal noise (within a tolerance it can "
                  "still be certified)")
    return TriadResult(nm, True, feasible, tuple(float(v) for v in lam),
                       tuple(float(v) for v in d), hey, relations, reason)
