"""One orthant and the set of single relations (q = 1) under diagonal noise.

With ``P = inv(S)``, the elementary regressions are the rows of ``P``. They
lie in one orthant when a signature makes ``P`` elementwise positive (every
``P_ij P_jk P_ki > 0``); the single relations then form the simplex of the
elementary regressions, and otherwise an unbounded set.

References
----------
.. [1] R. Frisch, Statistical Confluence Analysis by Means of Complete
       Regression Systems, Universitetets Økonomiske Institutt, Oslo, 1934.
.. [2] O. Reiersøl, "Confluence analysis by means of lag moments and other
       methods of confluence analysis", Econometrica 9(1), 1-24, 1941.
.. [3] S. Klepper and E. E. Leamer, "Consistent sets of estimates for
       regressions with errors in all variables", Econometrica 52(1),
       163-183, 1984.
.. [4] C. Gini, "Sull'interpolazione di una retta quando i valori della
       variabile indipendente sono affetti da errori accidentali", Metron 1,
       63-82, 1921.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from itertools import combinations
from typing import Any, Sequence

import numpy as np

from relspan.analysis._common import variable_index
from relspan.analysis._export import fields_dict, frame
from relspan.analysis.frisch._base import _SINGULAR, _ZERO, correlation, frisch_cov, is_singular

__all__ = ["FailingTriple", "OrthantTest", "CoefficientInterval", "FrischSet", "one_orthant", "frisch_q1"]


@dataclass(frozen=True, slots=True)
class FailingTriple:
    """A triple of variables whose entries of ``P = inv(S)`` cannot be signed positive.

    Attributes
    ----------
    variables : tuple of str
        The three variables ``(i, j, k)``.
    product : float
        Scale-free ``P_ij P_jk P_ki / (P_ii P_jj P_kk)``; one orthant needs it
        positive for every triple (zero counts as failing).
    """

    variables: tuple[str, str, str]
    product: float

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready dict with sorted keys."""
        return fields_dict(self)


@dataclass(frozen=True, slots=True)
class OrthantTest:
    """Whether all elementary regressions lie in one orthant.

    Attributes
    ----------
    names : tuple of str
        Variable names.
    holds : bool
        True when a signature ``sigma`` (entries +-1) makes
        ``sigma_i sigma_j P_ij > 0`` for all ``i != j``.
    signature : tuple of int or None
        That signature (first entry +1) when ``holds``; otherwise None.
    failing : tuple of FailingTriple
        Every triple with ``P_ij P_jk P_ki <= 0`` (empty when ``holds``).
    zero_pairs : tuple of tuple of str
        Pairs whose partial correlation ``-P_ij / sqrt(P_ii P_jj)`` is zero to
        within 1e-12; they put the regressions on an orthant's boundary.
    singular : bool
        True when ``S`` is singular: an exact relation holds and the
        elementary regressions are not defined; ``holds`` is then False.
    reason : str
        One sentence saying why the test holds or fails.
    """

    names: tuple[str, ...]
    holds: bool
    signature: tuple[int, ...] | None
    failing: tuple[FailingTriple, ...]
    zero_pairs: tuple[tuple[str, str], ...]
    singular: bool
    reason: str

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready dict with sorted keys."""
        return fields_dict(self)

    def to_frame(self):
        """Failing triples as a table (columns ``i, j, k, product``)."""
        rows = [{"i": t.variables[0], "j": t.variables[1], "k": t.variables[2],
                 "product": t.product} for t in self.failing]
        return frame(rows, columns=["i", "j", "k", "product"])


def _orthant_from_precision(p: np.ndarray, names: tuple[str, ...]) -> OrthantTest:
    n = p.shape[0]
    dp = np.sqrt(np.diag(p))
    pc = p / np.outer(dp, dp)            # scale-free: diag 1, off-diagonal -partial corr.
    zero = [(names[i], names[j]) for i, j in combinations(range(n), 2) if abs(pc[i, j]) <= _ZERO]
    failing = []
    if n >= 3:
        idx = np.array(list(combinations(range(n), 3)))
        i, j, k = idx[:, 0], idx[:, 1], idx[:, 2]
        prod = pc[i, j] * pc[j, k] * pc[k, i]
        bad = np.flatnonzero(prod <= _ZERO ** 1.5)
        failing = [FailingTriple((names[i[b]], names[j[b]], names[k[b]]), float(prod[b])) for b in bad]
    holds = not zero and not failing
    signature = None
    if holds:
        sig = np.sign(pc[0])
        sig[0] = 1.0
        signature = tuple(int(v) for v in sig)
        reason = ("all elementary regressions lie in one orthant: every triple "
                  "P_ij P_jk P_ki is positive")
    elif zero:
        a, b = zero[0]
        reason = (f"the partial correlation of {a} and {b} is zero, so the elementary "
                  "regressions touch an orthant's boundary")
    else:
        t = failing[0]
        reason = (f"the triple ({', '.join(t.variables)}) has P_ij P_jk P_ki = {t.product:.3g} <= 0 "
                  "(scale-free), so no signing puts all elementary regressions in one orthant")
    return OrthantTest(names, holds, signature, tuple(failing), tuple(zero), False, reason)


def one_orthant(cov: Any, *, names: Sequence[str] | None = None) -> OrthantTest:
    """Test whether all elementary regressions lie in one orthant.

    The elementary regressions are the rows of ``P = inv(S)``. They lie in
    one orthant when a diagonal signature ``Sigma`` makes ``Sigma P Sigma``
    elementwise positive, which holds iff every off-diagonal entry is nonzero
    and every triple ``P_ij P_jk P_ki`` is positive; the signature is then
    ``sigma_j = sign(P_0j)``.

    Parameters
    ----------
    cov : (n, n) array_like
        Sample covariance, symmetric positive semidefinite.
    names : sequence of str, optional
        Variable names (default ``x1 .. xn``).

    Returns
    -------
    OrthantTest

    References
    ----------
    .. [1] O. Reiersøl, "Confluence analysis by means of lag moments and other
           methods of confluence analysis", Econometrica 9(1), 1941.
    .. [2] S. Klepper and E. E. Leamer, "Consistent sets of estimates for
           regressions with errors in all variables", Econometrica 52(1), 1984.

    Examples
    --------
    >>> import numpy as np
    >>> S = np.array([[1.0, 0.5, 0.5], [0.5, 1.0, 0.1], [0.5, 0.1, 1.0]])
    >>> res = one_orthant(S, names=["a", "b", "c"])
    >>> res.holds, res.signature
    (True, (1, -1, -1))
    >>> iv = frisch_q1(S, names=["a", "b", "c"], ref="a").interval("b", "a")
    >>> round(iv.low, 3), round(iv.high, 3)
    (-1.667, -0.333)
    """
    s, nm = frisch_cov(cov, names)
    r, _ = correlation(s)
    if is_singular(r):
        return OrthantTest(nm, False, None, (), (), True,
                           "the covariance is singular: an exact relation holds and the "
                           "elementary regressions are not defined")
    return _orthant_from_precision(np.linalg.inv(r), nm)


@dataclass(frozen=True, slots=True)
class CoefficientInterval:
    """Range of one normalised relation coefficient over the q = 1 solution set.

    Attributes
    ----------
    variable : str
        The coefficient's variable.
    normalised_on : str
        The variable whose coefficient is fixed at 1.
    low, high : float
        Smallest and largest value; ``-inf`` and ``inf`` when unbounded
        (``None`` in :meth:`to_dict`).
    bounded : bool
        Whether the interval is finite.
    """

    variable: str
    normalised_on: str
    low: float
    high: float
    bounded: bool

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready dict with sorted keys (infinite ends become None)."""
        return fields_dict(self)


@dataclass(frozen=True, slots=True)
class FrischSet:
    """The set of single relations (corank 1) under diagonal noise.

    The relation ``a`` is normalised on a variable ``k`` (``a_k = 1``), so
    the relation reads ``x_k + sum_{i != k} a_i x_i = 0``; the least-squares
    slope of ``x_k`` on ``x_i`` is ``-a_i``.

    Attributes
    ----------
    names : tuple of str
        Variable names.
    status : str
        ``"bounded"`` (one orthant: the set is the simplex of the elementary
        regressions), ``"unbounded"`` (not one orthant), or ``"exact"``
        (``S`` singular: an exact relation holds without noise).
    reason : str
        One sentence: why the set is bounded or not (names the failing triple).
    elementary : (n, n) ndarray
        Row ``j`` is elementary regression ``j`` (row ``j`` of ``inv(S)``
        scaled so entry ``j`` is 1); these are the simplex's vertices. For
        ``"exact"``, the exact relation(s) instead, one per row.
    ref : str or None
        The variable the intervals are normalised on, or None for every one.
    intervals : tuple of CoefficientInterval
        For each normalisation and each other variable, the coefficient's
        range: min and max over the vertices when bounded, ``(-inf, inf)``
        when unbounded (never clipped), a point for a single full-support
        exact relation.
    orthant : OrthantTest
        The test the status rests on.
    """

    names: tuple[str, ...]
    status: str
    reason: str
    elementary: np.ndarray
    ref: str | None
    intervals: tuple[CoefficientInterval, ...]
    orthant: OrthantTest

    @property
    def bounded(self) -> bool:
        """True when every interval is finite."""
        return self.status in ("bounded", "exact") and all(iv.bounded for iv in self.intervals)

    def vertices(self, on: str | int) -> np.ndarray:
        """The elementary regressions normalised on variable ``on`` (rows).

        Entries are infinite where a regression has a zero coefficient on ``on``.
        """
        k = variable_index(self.names, on, key="on")
        with np.errstate(divide="ignore", invalid="ignore"):
            return self.elementary / self.elementary[:, [k]]

    def interval(self, variable: str, normalised_on: str) -> CoefficientInterval:
        """The interval of ``variable``'s coefficient, normalised on ``normalised_on``."""
        for iv in self.intervals:
            if iv.variable == variable and iv.normalised_on == normalised_on:
                return iv
        raise KeyError(f"no interval for {variable!r} normalised on {normalised_on!r}")

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready dict with sorted keys."""
        return fields_dict(self)

    def to_frame(self):
        """Intervals as a table: ``normalised_on, variable, low, high, bounded``."""
        rows = [{"normalised_on": iv.normalised_on, "variable": iv.variable, "low": iv.low,
                 "high": iv.high, "bounded": iv.bounded} for iv in self.intervals]
        return frame(rows, columns=["normalised_on", "variable", "low", "high", "bounded"])


def _hull_intervals(elem: np.ndarray, names: tuple[str, ...], ks: Sequence[int],
                    bounded: bool) -> tuple[CoefficientInterval, ...]:
    out = []
    n = elem.shape[0]
    for k in ks:
        v = elem / elem[:, [k]]
        for i in range(n):
            if i == k:
                continue
            if bounded:
                out.append(CoefficientInterval(names[i], names[k], float(v[:, i].min()),
                                               float(v[:, i].max()), True))
            else:
                out.append(CoefficientInterval(names[i], names[k], -math.inf, math.inf, False))
    return tuple(out)


def frisch_q1(cov: Any, *, names: Sequence[str] | None = None,
              ref: str | int | None = None) -> FrischSet:
    """The set of single relations consistent with diagonal noise (q = 1).

    When all elementary regressions lie in one orthant, the relations ``a``
    with ``(S - D) a = 0`` for some ``D = diag(d) >= 0`` and ``S - D`` PSD
    form the cone spanned by the (signed) rows of ``P = inv(S)``; normalised
    on any variable this is the simplex whose vertices are the ``n``
    elementary regressions, and each coefficient ranges between its smallest
    and largest vertex value. Otherwise the set is unbounded: the intervals
    are reported as ``(-inf, inf)`` and the reason names the failing triple.

    Parameters
    ----------
    cov : (n, n) array_like
        Sample covariance, symmetric positive semidefinite.
    names : sequence of str, optional
        Variable names (default ``x1 .. xn``).
    ref : str or int, optional
        Normalise on this variable only; by default intervals are given for
        every normalisation.

    Returns
    -------
    FrischSet

    Notes
    -----
    For any point of the simplex, ``a = P Sigma lambda`` with ``lambda >= 0``
    and the unique noise variances are ``d_j = (S a)_j / a_j``.
    For ``n = 2`` this is the classical bound: the slope of ``y`` on ``x``
    lies between ``b_yx`` and ``1/b_xy`` (Gini 1921; Frisch 1934).

    References
    ----------
    .. [1] R. Frisch, Statistical Confluence Analysis by Means of Complete
           Regression Systems, 1934.
    .. [2] O. Reiersøl, "Confluence analysis by means of lag moments and other
           methods of confluence analysis", Econometrica 9(1), 1941.
    .. [3] S. Klepper and E. E. Leamer, "Consistent sets of estimates for
           regressions with errors in all variables", Econometrica 52(1), 1984.
    """
    s, nm = frisch_cov(cov, names)
    n = s.shape[0]
    k_ref = None if ref is None else variable_index(nm, ref, key="ref")
    ks = range(n) if k_ref is None else [k_ref]
    ref_name = None if k_ref is None else nm[k_ref]
    r, sd = correlation(s)
    if is_singular(r):
        orth = OrthantTest(nm, False, None, (), (), True,
                           "the covariance is singular: an exact relation holds and the "
                           "elementary regressions are not defined")
        lam, vec = np.linalg.eigh(r)
        null = vec[:, lam <= _SINGULAR * n].T / sd            # back to the covariance scale
        null = null / np.linalg.norm(null, axis=1, keepdims=True)
        if null.shape[0] == 1 and np.all(np.abs(null[0]) > 1e-8 * np.abs(null[0]).max()):
            ivs = []
            for k in ks:
                a = null[0] / null[0, k]
                ivs += [CoefficientInterval(nm[i], nm[k], float(a[i]), float(a[i]), True)
                        for i in range(n) if i != k]
            reason = ("the covariance is singular: one exact relation holds, involving every "
                      "variable, so it needs no noise and is the only single relation")
        else:
            ivs = [CoefficientInterval(nm[i], nm[k], math.nan, math.nan, False)
                   for k in ks for i in range(n) if i != k]
            reason = (f"the covariance is singular with {null.shape[0]} exact relation(s) not "
                      "involving every variable; single-relation intervals are not defined "
                      "(see the corank analysis)")
        return FrischSet(nm, "exact", reason, null, ref_name, tuple(ivs), orth)
    p = np.linalg.inv(s)
    p = 0.5 * (p + p.T)
    elem = p / np.diag(p)[:, None]
    orth = _orthant_from_precision(np.linalg.inv(r), nm)
    if orth.holds:
        reason = ("one orthant holds, so the single relations form the simplex of the "
                  f"{n} elementary regressions and every coefficient is bounded")
        return FrischSet(nm, "bounded", reason, elem, ref_name,
                         _hull_intervals(elem, nm, ks, True), orth)
    reason = ("the set of single relations is unbounded: " + orth.reason +
              "; coefficient intervals are (-inf, inf)")
    return FrischSet(nm, "unbounded", reason, elem, ref_name,
                     _hull_intervals(elem, nm, ks, False), orth)
