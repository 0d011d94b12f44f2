"""Diagonal noise of unknown variances: the Frisch scheme.

Every variable is observed with its own independent noise, ``N = D = diag(d)``
with ``d >= 0``, and the noise-free covariance ``S_hat = S - D`` must be
positive semidefinite. Corank ``q`` means ``rank(S_hat) = n - q``; the
relations are the rows of ``A`` (``q x n``) with ``A S_hat = 0``. With
``P = inv(S)``, every feasible noise variance lies in ``[0, 1/P[j, j]]``.

What this module offers
-----------------------
* :func:`one_orthant`: can ``P`` be signed elementwise positive (all
  elementary regressions in one orthant)?
* :func:`frisch_q1`: the set of single relations (q = 1): the simplex of the
  elementary regressions when one orthant holds, an unbounded set otherwise.
* :func:`triad`: for three variables, the one-factor (rank-1) decomposition.
* :func:`minimum_trace`: our own interior-point solver of the (weighted)
  minimum-trace problem ``max w'd  s.t.  S - diag(d) PSD, d >= 0``.
* :func:`frisch_max_corank`: the largest corank with an existence
  certificate, impossibility certificates, and "undetermined" in between.
* :func:`frisch_identification` and :func:`solution_spread`: the parameter
  count for point identification and, when it fails, the spread of the
  relation subspaces across many corank-q solutions.
* :func:`frisch_analysis`: all of the above for one window.

Numerical method
----------------
All searches run on the correlation scale ``R = diag(s)^-1 S diag(s)^-1``
(the scheme is equivariant under diagonal scaling) and are mapped back:
noise variances by ``s_j^2``, relation coefficients by ``1/s_j``. The
tolerance ``eps`` is therefore relative to each variable's variance.

The weighted minimum-trace problem is solved by a log-barrier (primal)
interior-point method: Newton steps on ``-t w'd - log det(R - D) - sum log d``
with gradient ``-t w + diag(W) - 1/d`` and Hessian ``W o W + diag(1/d^2)``
(``W = inv(R - D)``, ``o`` the elementwise product), a step limited to the
feasible region by the largest eigenvalue of ``L^-1 diag(dx) L^-T``, and
``t`` multiplied by a fixed factor until the barrier duality gap ``2n/t`` is
below tolerance (Boyd & Vandenberghe 2004, ch. 11). On the central path the
duality gap is ``2n/t``; the solver reports it. Centring that fails through
rounding (``R - D`` singular to working precision) falls back to the last
centred iterate.

Minimum-rank refinement follows ten Berge & Kiers (1991): the sum of the
``q`` smallest eigenvalues of ``R - D`` is concave in ``d``; replacing it by
its linearisation at the current eigenvectors ``V`` gives the weighted trace
problem with weights ``w_j = sum_k V[j, k]^2``, whose solution never
increases the objective. This is run from the minimum-trace solution and
from random feasible starts.

Certificates (on the correlation scale)
---------------------------------------
* Existence of corank ``q`` within ``eps``: ``d >= 0`` and ``R - D - E`` PSD
  with ``q`` zero eigenvalues, where ``E`` collects the ``q`` smallest
  eigen-pairs of ``R - D`` (and any negative ones); ``||E||_2 <= eps``.
* Impossibility: with ``r_j(eps) = 1/inv(R + eps I)[j, j]``, every ``d``
  admitted above satisfies ``d <= r(eps)``, hence
  ``lambda_q(R - diag r(eps)) <= eps``; a larger value rules corank ``q`` out.

References
----------
.. [1] R. Frisch, Statistical Confluence Analysis by Means of Complete
       Regression Systems, Universitetets Økonomiske Institutt, Oslo, 1934.
.. [2] O. Reiersøl, "Confluence analysis by means of lag moments and other
       methods of confluence analysis", Econometrica 9(1), 1-24, 1941.
.. [3] S. Klepper and E. E. Leamer, "Consistent sets of estimates for
       regressions with errors in all variables", Econometrica 52(1),
       163-183, 1984.
.. [4] A. Shapiro, "Rank-reducibility of a symmetric matrix and sampling
       theory of minimum trace factor analysis", Psychometrika 47(2),
       187-199, 1982.
.. [5] G. Della Riccia and A. Shapiro, "Minimum rank and minimum trace of
       covariance matrices", Psychometrika 47(4), 443-448, 1982.
.. [6] J. M. F. ten Berge and H. A. L. Kiers, "A numerical approach to the
       approximate and the exact minimum rank of a covariance matrix",
       Psychometrika 56(2), 309-315, 1991.
.. [7] A. Shapiro and J. M. F. ten Berge, "Statistical inference of minimum
       rank factor analysis", Psychometrika 67(1), 79-94, 2002.
.. [8] L. Ning, T. T. Georgiou, A. Tannenbaum and S. P. Boyd, "Linear models
       based on noisy data and the Frisch scheme", SIAM Review 57(2),
       167-197, 2015.
.. [9] W. Ledermann, "On the rank of the reduced correlational matrix in
       multiple-factor analysis", Psychometrika 2(2), 85-93, 1937.
.. [10] C. Spearman, "'General intelligence', objectively determined and
        measured", American Journal of Psychology 15(2), 201-292, 1904.
.. [11] C. Gini, "Sull'interpolazione di una retta quando i valori della
        variabile indipendente sono affetti da errori accidentali", Metron 1,
        63-82, 1921.
.. [12] S. Boyd and L. Vandenberghe, Convex Optimization, Cambridge
        University Press, 2004.
.. [13] Å. Björck and G. H. Golub, "Numerical methods for computing angles
        between linear subspaces", Mathematics of Computation 27(123),
        579-594, 1973.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from itertools import combinations
from typing import Any, Sequence

import numpy as np

from relspan.errors import DataError, OptionsError

__all__ = [
    "FailingTriple",
    "OrthantTest",
    "CoefficientInterval",
    "FrischSet",
    "TriadResult",
    "MinimumTrace",
    "CorankCertificate",
    "FrischCorank",
    "FrischIdentification",
    "SolutionSpread",
    "FrischResult",
    "one_orthant",
    "frisch_q1",
    "triad",
    "minimum_trace",
    "ledermann_corank",
    "frisch_max_corank",
    "frisch_identification",
    "solution_spread",
    "frisch_analysis",
]

_STATUSES = ("certified", "ruled out", "undetermined")
# Relative size below which an entry of a scale-free matrix counts as zero.
_ZERO = 1e-12
# Smallest eigenvalue of R (correlation scale) below which R is singular.
_SINGULAR = 1e-12


# --------------------------------------------------------------------------
# JSON and frame helpers
# --------------------------------------------------------------------------

def _json(value: Any) -> Any:
    """Convert numbers, arrays and nested results to JSON-ready values.

    Non-finite floats become ``None`` (strict JSON has no infinity); the
    fields beside them (``bounded``, ``status``) say what that means.
    """
    if value is None or isinstance(value, (bool, str)):
        return value
    if isinstance(value, (bool, np.bool_)):
        return bool(value)
    if isinstance(value, (int, np.integer)):
        return int(value)
    if isinstance(value, (float, np.floating)):
        v = float(value)
        return v if math.isfinite(v) else None
    if isinstance(value, np.ndarray):
        return [_json(v) for v in value.tolist()] if value.ndim else _json(value.item())
    if isinstance(value, (list, tuple)):
        return [_json(v) for v in value]
    if isinstance(value, dict):
        return {str(k): _json(v) for k, v in sorted(value.items())}
    if hasattr(value, "to_dict"):
        return value.to_dict()
    raise TypeError(f"cannot convert {type(value).__name__} to JSON")


def _fields_dict(obj: Any) -> dict[str, Any]:
    return {name: _json(getattr(obj, name)) for name in sorted(obj.__slots__)}


def _pandas():
    import pandas as pd

    return pd


# --------------------------------------------------------------------------
# Input validation
# --------------------------------------------------------------------------

def _as_covariance(cov: Any) -> np.ndarray:
    """Validate a covariance matrix; return a symmetric float copy."""
    try:
        s = np.array(cov, dtype=float)
    except (TypeError, ValueError) as exc:
        raise DataError(
            f"the covariance matrix for the diagonal-noise (Frisch) analysis is not numeric ({exc}).",
            key="cov", fix="pass an (n, n) array of numbers, e.g. Moments.covariance().") from None
    if s.ndim != 2 or s.shape[0] != s.shape[1]:
        raise DataError(
            f"the covariance matrix for the diagonal-noise (Frisch) analysis must be square; got shape {s.shape}.",
            key="cov", fix="pass the (n, n) covariance of the window's n variables.")
    n = s.shape[0]
    if n < 2:
        raise DataError(
            f"the diagonal-noise (Frisch) analysis needs at least 2 variables; got {n}.",
            key="cov", fix="add variables to the dataset or drop the 'diagonal' assumption.")
    if not np.all(np.isfinite(s)):
        i, j = np.argwhere(~np.isfinite(s))[0]
        raise DataError(
            f"the covariance matrix has a non-finite entry at ({i + 1}, {j + 1}): {s[i, j]}.",
            key="cov", fix="remove missing or infinite values from the data (datasets[].missing: drop).")
    scale = max(float(np.max(np.abs(s))), np.finfo(float).tiny)
    asym = np.abs(s - s.T)
    if np.max(asym) > 1e-10 * scale:
        i, j = np.unravel_index(int(np.argmax(asym)), asym.shape)
        raise DataError(
            f"the covariance matrix is not symmetric: entry ({i + 1}, {j + 1}) is {s[i, j]:.6g} "
            f"but ({j + 1}, {i + 1}) is {s[j, i]:.6g}.",
            key="cov", fix="pass a covariance matrix (e.g. Moments.covariance()), not raw data.")
    s = 0.5 * (s + s.T)
    diag = np.diag(s)
    if np.any(diag <= 0):
        j = int(np.argmin(diag))
        raise DataError(
            f"variable {j + 1} has variance {diag[j]:.6g}; the diagonal-noise analysis needs every "
            "variance to be positive.",
            key="cov", fix="drop constant variables from the dataset, or widen the window.")
    sd = np.sqrt(diag)
    lam_min = float(np.linalg.eigvalsh(s / np.outer(sd, sd))[0])
    if lam_min < -1e-9 * n:
        raise DataError(
            f"the covariance matrix is not positive semidefinite (smallest eigenvalue of its "
            f"correlation matrix {lam_min:.3g}).",
            key="cov", fix="compute the covariance from the data rows of one window (pairwise "
            "deletion of missing values can produce such matrices).")
    return s


def _names(names: Sequence[str] | None, n: int) -> tuple[str, ...]:
    if names is None:
        return tuple(f"x{j + 1}" for j in range(n))
    out = tuple(names)
    if len(out) != n or not all(isinstance(v, str) and v for v in out):
        raise OptionsError(
            f"names must be {n} non-empty strings, one per variable; got {len(out)}.",
            key="names", fix="pass the variables' column names in the covariance's order.")
    if len(set(out)) != n:
        dup = sorted({v for v in out if out.count(v) > 1})
        raise OptionsError(f"names must be unique; repeated: {', '.join(dup)}.", key="names",
                           fix="give every variable its own name.")
    return out


def _check_eps(eps: Any) -> float:
    try:
        e = float(eps)
    except (TypeError, ValueError):
        e = float("nan")
    if not (math.isfinite(e) and 0.0 < e < 1.0):
        raise OptionsError(
            f"eps (the tolerance on the correlation scale) must be a number in (0, 1); got {eps!r}.",
            key="checks.tolerance", fix="use a small relative tolerance such as 1e-6 or 0.01.")
    return e


def _check_starts_seed(starts: Any, seed: Any) -> tuple[int, int]:
    if isinstance(starts, bool) or not isinstance(starts, (int, np.integer)) or starts < 1:
        raise OptionsError(f"frisch_starts must be a whole number >= 1; got {starts!r}.",
                           key="checks.frisch_starts", fix="use e.g. frisch_starts: 8.")
    if isinstance(seed, bool) or not isinstance(seed, (int, np.integer)) or seed < 0:
        raise OptionsError(f"seed must be a whole number >= 0; got {seed!r}.", key="checks.seed",
                           fix="use e.g. seed: 0.")
    return int(starts), int(seed)


def _ref_index(ref: Any, names: tuple[str, ...]) -> int | None:
    if ref is None:
        return None
    if isinstance(ref, str):
        if ref in names:
            return names.index(ref)
    elif isinstance(ref, (int, np.integer)) and not isinstance(ref, bool) and 0 <= ref < len(names):
        return int(ref)
    raise OptionsError(
        f"ref must name one of the variables ({', '.join(names)}); got {ref!r}.",
        key="checks.normalise_on", fix="use one of the listed column names, or auto.")


def _correlation(s: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    sd = np.sqrt(np.diag(s))
    r = s / np.outer(sd, sd)
    r = 0.5 * (r + r.T)
    np.fill_diagonal(r, 1.0)
    return r, sd


def _is_singular(r: np.ndarray) -> bool:
    return bool(np.linalg.eigvalsh(r)[0] <= _SINGULAR * r.shape[0])


# --------------------------------------------------------------------------
# 1. One orthant
# --------------------------------------------------------------------------

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
        return _fields_dict(self)


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
        return _fields_dict(self)

    def to_frame(self):
        """Failing triples as a table (columns ``i, j, k, product``)."""
        pd = _pandas()
        rows = [{"i": t.variables[0], "j": t.variables[1], "k": t.variables[2],
                 "product": t.product} for t in self.failing]
        return pd.DataFrame(rows, columns=["i", "j", "k", "product"])


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
    """
    s = _as_covariance(cov)
    nm = _names(names, s.shape[0])
    r, _ = _correlation(s)
    if _is_singular(r):
        return OrthantTest(nm, False, None, (), (), True,
                           "the covariance is singular: an exact relation holds and the "
                           "elementary regressions are not defined")
    return _orthant_from_precision(np.linalg.inv(r), nm)


# --------------------------------------------------------------------------
# 2. q = 1: the simplex of elementary regressions
# --------------------------------------------------------------------------

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
        return _fields_dict(self)


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
        k = _ref_index(on, self.names)
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
        return _fields_dict(self)

    def to_frame(self):
        """Intervals as a table: ``normalised_on, variable, low, high, bounded``."""
        pd = _pandas()
        rows = [{"normalised_on": iv.normalised_on, "variable": iv.variable, "low": iv.low,
                 "high": iv.high, "bounded": iv.bounded} for iv in self.intervals]
        return pd.DataFrame(rows, columns=["normalised_on", "variable", "low", "high", "bounded"])


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
    s = _as_covariance(cov)
    n = s.shape[0]
    nm = _names(names, n)
    k_ref = _ref_index(ref, nm)
    ks = range(n) if k_ref is None else [k_ref]
    ref_name = None if k_ref is None else nm[k_ref]
    r, sd = _correlation(s)
    if _is_singular(r):
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


# --------------------------------------------------------------------------
# 3. Three variables: the one-factor triad
# --------------------------------------------------------------------------

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
        return _fields_dict(self)

    def to_frame(self):
        """One row per variable: ``variable, loading, noise_variance, heywood``."""
        pd = _pandas()
        rows = [{"variable": v,
                 "loading": None if self.loadings is None else self.loadings[i],
                 "noise_variance": None if self.noise_variances is None else self.noise_variances[i],
                 "heywood": v in self.heywood} for i, v in enumerate(self.names)]
        return pd.DataFrame(rows, columns=["variable", "loading", "noise_variance", "heywood"])


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
    """
    s = _as_covariance(cov)
    if s.shape[0] != 3:
        raise DataError(f"the triad needs exactly 3 variables; got {s.shape[0]}.", key="cov",
                        fix="use frisch_max_corank for other numbers of variables.")
    nm = _names(names, 3)
    s12, s13, s23 = s[0, 1], s[0, 2], s[1, 2]
    prod = s12 * s13 * s23
    scale = float(np.prod(np.diag(s)))
    if not prod > _ZERO * scale:
        reason = (f"s12 s13 s23 = {prod:.3g} is not positive, so no single factor reproduces the "
                  "covariances: corank 2 is impossible")
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
                  "corank 2 holds and is point-identified")
    else:
        reason = ("Heywood case: the one-factor fit needs a negative noise variance for "
                  + ", ".join(hey) + ", so corank 2 is impossible under diagonal noise")
    return TriadResult(nm, True, feasible, tuple(float(v) for v in lam),
                       tuple(float(v) for v in d), hey, relations, reason)


# --------------------------------------------------------------------------
# 4. The weighted minimum-trace problem (interior point)
# --------------------------------------------------------------------------

@dataclass(frozen=True, slots=True)
class MinimumTrace:
    """Solution of ``max w'd  s.t.  S - diag(d) PSD, d >= 0``.

    Attributes
    ----------
    noise_variances : (n,) ndarray
        The maximising ``d`` (strictly feasible: ``d > 0``, ``S - D`` PD).
    weights : (n,) ndarray
        The weights ``w`` (all ones for minimum-trace factor analysis).
    value : float
        ``w'd``.
    gap : float
        Duality gap ``2n/t`` of the final central-path point (scaled to the
        weights): the optimum exceeds ``value`` by about this much at most.
    min_eigenvalue : float
        Smallest eigenvalue of ``S - D`` (>= 0: feasibility).
    newton_steps : int
        Newton steps taken.
    """

    noise_variances: np.ndarray
    weights: np.ndarray
    value: float
    gap: float
    min_eigenvalue: float
    newton_steps: int

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready dict with sorted keys."""
        return _fields_dict(self)


def _barrier_batch(r: np.ndarray, w: np.ndarray, *, gap_tol: float = 1e-10, mu: float = 20.0,
                   max_newton: int = 400):
    """Log-barrier Newton method for ``max w_b'd s.t. R - diag(d) PD, d > 0``, many ``w_b`` at once.

    ``r`` (n, n) must be positive definite; ``w`` is (B, n). All B problems
    run in lockstep on stacked arrays. Returns ``(d, gap, steps)``: the
    solutions (B, n), central-path duality gaps ``2n/t`` (B,) and the number
    of (batched) Newton steps.
    """
    w = np.atleast_2d(np.asarray(w, dtype=float))
    nb, n = w.shape
    wscale = np.max(np.abs(w), axis=1)
    w = np.where(wscale[:, None] > 0, w, 1.0)
    wscale = np.where(wscale > 0, wscale, 1.0)
    wn = w / wscale[:, None]
    bound = 1.0 / np.diag(np.linalg.inv(r))
    # sum_j d_j / bound_j <= 1 makes diag(d) a convex combination of matrices <= R.
    d = np.tile(bound / (2.0 * n), (nb, 1))
    t = np.ones(nb)
    wd_scale = np.maximum(1.0, np.abs(wn) @ bound)
    eye = np.eye(n)
    active = np.ones(nb, dtype=bool)
    good_d, good_t = d.copy(), t.copy()      # last well-centred iterate of each problem
    steps = 0
    while active.any() and steps < max_newton:
        idx = np.flatnonzero(active)
        dd, tt, ww = d[idx], t[idx], wn[idx]
        lam2 = np.full(idx.size, np.inf)
        for _ in range(40):
            m = r[None] - dd[:, :, None] * eye
            lc = np.linalg.cholesky(m)
            li = np.linalg.inv(lc)
            wm = np.swapaxes(li, 1, 2) @ li
            g = -tt[:, None] * ww + np.diagonal(wm, axis1=1, axis2=2) - 1.0 / dd
            # Newton system scaled by diag(d): (d W d) o (d W d) + I is well conditioned
            # even when some d_j -> 0.
            h = dd[:, :, None] * (wm * wm) * dd[:, None, :] + eye
            try:
                y = np.linalg.solve(h, (dd * g)[:, :, None])[:, :, 0]
            except np.linalg.LinAlgError:
                y = np.zeros_like(dd)
                for b in range(dd.shape[0]):
                    y[b] = np.linalg.lstsq(h[b], dd[b] * g[b], rcond=None)[0]
            dx = -dd * y
            lam2 = -np.sum(g * dx, axis=1)
            bad = ~np.all(np.isfinite(dx), axis=1) | ~np.isfinite(lam2)
            dx[bad] = 0.0
            lam2[bad] = 0.0
            steps += 1
            done = lam2 <= 1e-8
            if done.all():
                break
            # Inside the Dikin ellipsoid (lam2 < 1/4) the full Newton step is
            # feasible and converges quadratically (self-concordance).
            # Rounding can still break that when R - D is nearly singular, so
            # every full step is checked before it is taken.
            step = np.where(done, 0.0, 1.0)
            quad = np.flatnonzero((lam2 < 0.25) & ~done)
            full_ok = np.zeros(dd.shape[0], dtype=bool)
            if quad.size:
                dq = dd[quad] + dx[quad]
                evq = np.linalg.eigvalsh(r[None] - dq[:, :, None] * eye)[:, 0]
                full_ok[quad] = (evq > 0) & np.all(dq > 0, axis=1)
            damp = np.flatnonzero(~full_ok & ~done)
            if damp.size:
                lid, dxd, ddd = li[damp], dx[damp], dd[damp]
                gm = (lid * dxd[:, None, :]) @ np.swapaxes(lid, 1, 2)
                emax = np.linalg.eigvalsh(gm)[:, -1]
                with np.errstate(divide="ignore"):
                    smax = np.where(emax > 0, 1.0 / emax, np.inf)
                    ratio = np.where(dxd < 0, -ddd / np.where(dxd < 0, dxd, -1.0), np.inf)
                smax = np.minimum(smax, ratio.min(axis=1))
                s = np.minimum(1.0, 0.95 * smax)
                tdd, wdd = tt[damp], ww[damp]
                f0 = (-tdd * np.sum(wdd * ddd, axis=1)
                      - 2.0 * np.sum(np.log(np.diagonal(lc[damp], axis1=1, axis2=2)), axis=1)
                      - np.sum(np.log(ddd), axis=1))
                todo = np.ones(damp.size, dtype=bool)
                for _ in range(50):
                    k = np.flatnonzero(todo)
                    dn = ddd[k] + s[k, None] * dxd[k]
                    ev = np.linalg.eigvalsh(r[None] - dn[:, :, None] * eye)
                    ok = (ev[:, 0] > 0) & np.all(dn > 0, axis=1)
                    with np.errstate(invalid="ignore", divide="ignore"):
                        f1 = (-tdd[k] * np.sum(wdd[k] * dn, axis=1)
                              - np.sum(np.log(np.where(ok[:, None], ev, 1.0)), axis=1)
                              - np.sum(np.log(np.where(ok[:, None], dn, 1.0)), axis=1))
                    ok &= f1 <= f0[k] - 0.01 * s[k] * lam2[damp][k]
                    todo[k[ok]] = False
                    if not todo.any():
                        break
                    s[k[~ok]] *= 0.5
                s[todo] = 0.0
                step[damp] = s
            dd = dd + step[:, None] * dx
        # Centring that has not converged goes on at the same t, except at large
        # t, where the cause is rounding (R - D singular to working precision):
        # such a problem falls back to its last centred iterate and stops.
        centred = lam2 <= 1e-6
        stuck = ~centred & (tt >= 1e8)
        d[idx] = np.where(stuck[:, None], good_d[idx], dd)
        t[idx] = np.where(stuck, good_t[idx], tt)
        good_d[idx[centred]], good_t[idx[centred]] = dd[centred], tt[centred]
        value = np.abs(np.sum(ww * d[idx], axis=1))
        rel_gap = 2.0 * n / t[idx] / np.maximum(value, 1e-3 * wd_scale[idx])
        fin = stuck | (centred & ((rel_gap <= gap_tol) | (t[idx] * mu > 1e13)))
        active[idx[fin]] = False
        grow = idx[centred & ~fin]
        t[grow] *= mu
    # On the central path the duality gap is exactly 2n/t (n from log det, n
    # from the bounds d > 0); rescale to the caller's weights.
    gap = 2.0 * n / t * wscale
    return d, gap, steps


def _barrier_trace(r: np.ndarray, w: np.ndarray, *, gap_tol: float = 1e-10,
                   mu: float = 20.0) -> tuple[np.ndarray, float, int]:
    """One weighted trace problem (see :func:`_barrier_batch`)."""
    d, gap, steps = _barrier_batch(r, np.asarray(w, dtype=float)[None, :], gap_tol=gap_tol,
                                      mu=mu)
    return d[0], float(gap[0]), steps


def _regularised(r: np.ndarray) -> np.ndarray:
    """``R`` shifted to be safely positive definite for the barrier."""
    lam_min = float(np.linalg.eigvalsh(r)[0])
    floor = 1e-11
    return r if lam_min >= floor else r + (floor - lam_min) * np.eye(r.shape[0])


def minimum_trace(cov: Any, *, weights: Sequence[float] | None = None,
                  tol: float = 1e-10) -> MinimumTrace:
    """Weighted minimum-trace factor analysis by a log-barrier interior-point method.

    Solves ``max w'd  subject to  S - diag(d) PSD, d >= 0`` on the scale it is
    given (with ``w = 1``: minimum-trace factor analysis, i.e. the largest
    total noise variance that leaves a PSD noise-free part).

    Parameters
    ----------
    cov : (n, n) array_like
        Symmetric positive semidefinite matrix.
    weights : sequence of float, optional
        ``w`` (default all ones); any signs are allowed.
    tol : float
        Relative duality-gap target.

    Returns
    -------
    MinimumTrace

    References
    ----------
    .. [1] A. Shapiro, "Rank-reducibility of a symmetric matrix and sampling
           theory of minimum trace factor analysis", Psychometrika 47(2), 1982.
    .. [2] G. Della Riccia and A. Shapiro, "Minimum rank and minimum trace of
           covariance matrices", Psychometrika 47(4), 1982.
    .. [3] S. Boyd and L. Vandenberghe, Convex Optimization, 2004, ch. 11.
    """
    s = _as_covariance(cov)
    n = s.shape[0]
    w = np.ones(n) if weights is None else np.asarray(weights, dtype=float)
    if w.shape != (n,) or not np.all(np.isfinite(w)):
        raise OptionsError(f"weights must be {n} finite numbers; got shape {w.shape}.",
                           key="weights", fix="pass one weight per variable.")
    r, sd = _correlation(s)
    # Solve on the correlation scale (better conditioned): w'd = (w s^2)'d_R.
    wr = w * sd ** 2
    dr, gap, steps = _barrier_trace(_regularised(r), wr, gap_tol=tol)
    d = dr * sd ** 2
    lam_min = float(np.linalg.eigvalsh(s - np.diag(d))[0])
    return MinimumTrace(d, w.copy(), float(w @ d), gap, lam_min, steps)


# --------------------------------------------------------------------------
# 4. Maximal corank with certificates
# --------------------------------------------------------------------------

def ledermann_corank(n: int) -> int:
    """Largest corank a generic covariance of ``n`` variables can have exactly.

    Ledermann's bound ``phi(n) = (2n + 1 - sqrt(8n + 1)) / 2``: matrices
    whose minimum rank is below ``phi(n)`` have measure zero (Shapiro 1982),
    so an exact corank above ``n - ceil(phi(n))`` has probability zero for a
    sample covariance, while coranks up to it can occur without any true
    relation.

    References
    ----------
    .. [1] W. Ledermann, "On the rank of the reduced correlational matrix in
           multiple-factor analysis", Psychometrika 2(2), 1937.
    .. [2] A. Shapiro, Psychometrika 47(2), 1982.
    """
    phi = (2 * n + 1 - math.sqrt(8 * n + 1)) / 2
    return int(n - math.ceil(phi - 1e-12))


@dataclass(frozen=True, slots=True)
class CorankCertificate:
    """Evidence on one corank ``q`` under diagonal noise, at tolerance ``eps``.

    All eigenvalues, ``eps`` and ``e_norm`` are on the correlation scale.

    Attributes
    ----------
    q : int
        The corank.
    status : str
        ``"certified"`` (existence certificate found), ``"ruled out"``
        (impossibility certificate holds) or ``"undetermined"`` (neither at
        this ``eps``).
    noise_variances : tuple of float or None
        The certifying ``d`` on the covariance scale (None unless certified).
    noise_share : tuple of float or None
        The same as a share of each variable's variance (``d_j / s_jj``).
    eigenvalues : tuple of float or None
        All eigenvalues of ``R - D`` (ascending) for the certifying ``D``.
    e_norm : float or None
        ``||E||_2``: the largest of ``|lambda_1..q|`` and any negative eigenvalue.
    relations : (q, n) ndarray or None
        Orthonormal rows spanning the relations on the covariance scale.
    bound_share : tuple of float
        ``r_j(eps) = 1/inv(R + eps I)[j, j]``: the largest admissible noise
        share of each variable at this ``eps``.
    bound_eigenvalue : float
        ``lambda_q(R - diag r(eps))``; above ``eps`` it rules corank ``q`` out.
    found_by : str
        How the certificate was found (``"minimum trace"``, ``"start 3"``, ...)
        or why the search was not run.
    iterations : int
        Minimum-rank iterations spent on this ``q`` (all starts).
    """

    q: int
    status: str
    noise_variances: tuple[float, ...] | None
    noise_share: tuple[float, ...] | None
    eigenvalues: tuple[float, ...] | None
    e_norm: float | None
    relations: np.ndarray | None
    bound_share: tuple[float, ...]
    bound_eigenvalue: float
    found_by: str
    iterations: int

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready dict with sorted keys."""
        return _fields_dict(self)


@dataclass(frozen=True, slots=True)
class FrischCorank:
    """How many relations diagonal noise allows, with certificates for each corank.

    Attributes
    ----------
    names : tuple of str
        Variable names.
    eps : float
        Tolerance on the correlation scale.
    starts : int
        Starts of the minimum-rank search (minimum trace plus random ones).
    seed : int
        Seed of the random starts (``numpy.random.default_rng(seed)``).
    certificates : tuple of CorankCertificate
        One per ``q = 1 .. n-1``.
    max_certified : int
        Largest certified corank (0 when none).
    min_ruled_out : int or None
        Smallest ruled-out corank (None when none is ruled out).
    ledermann : int
        :func:`ledermann_corank` of ``n``: coranks up to it can arise from
        sampling alone; exact coranks above it cannot.
    min_trace : MinimumTrace
        The minimum-trace solution (covariance scale) used as the first start.
    summary : str
        Plain-language summary.
    """

    names: tuple[str, ...]
    eps: float
    starts: int
    seed: int
    certificates: tuple[CorankCertificate, ...]
    max_certified: int
    min_ruled_out: int | None
    ledermann: int
    min_trace: MinimumTrace
    summary: str

    def certificate(self, q: int) -> CorankCertificate:
        """The certificate for corank ``q``."""
        for c in self.certificates:
            if c.q == q:
                return c
        raise KeyError(f"no corank {q}: coranks run from 1 to {len(self.names) - 1}")

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready dict with sorted keys."""
        return _fields_dict(self)

    def to_frame(self):
        """One row per corank: ``q, status, e_norm, bound_eigenvalue, found_by``."""
        pd = _pandas()
        rows = [{"q": c.q, "status": c.status, "e_norm": c.e_norm,
                 "bound_eigenvalue": c.bound_eigenvalue, "found_by": c.found_by}
                for c in self.certificates]
        return pd.DataFrame(rows, columns=["q", "status", "e_norm", "bound_eigenvalue", "found_by"])


def _e_norm(lam: np.ndarray, q: int) -> float:
    """``||E||_2`` for the split of ``R - D``'s spectrum at ``q``."""
    parts = [np.abs(lam[:q])]
    if np.any(lam[q:] < 0):
        parts.append(np.abs(lam[q:][lam[q:] < 0]))
    return float(np.max(np.concatenate(parts)))


def _relations_back(vecs: np.ndarray, sd: np.ndarray) -> np.ndarray:
    """Relation vectors on the correlation scale (columns) -> orthonormal rows, covariance scale."""
    a = (vecs / sd[:, None])
    qm, _ = np.linalg.qr(a)
    return qm.T


class _Searcher:
    """Minimum-rank search on one correlation matrix (private; holds no results).

    Weighted trace problems are solved at two precisions: a coarse relative
    gap (1e-3) while the ten Berge & Kiers iteration is far from converged,
    and a fine one (``1e-3 eps``, between 1e-10 and 1e-7) once a run's
    ``lambda_q`` is within reach of ``eps``. The barrier leaves ``R - D``
    about ``gap`` inside the feasible set, so the fine phase is what makes
    small ``eps`` certifiable.
    """

    def __init__(self, r: np.ndarray, eps: float) -> None:
        self.r = r
        self.rb = _regularised(r)
        self.eps = eps
        self.gap = max(1e-10, min(1e-7, 1e-3 * eps))
        self.gap_coarse = max(self.gap, 1e-3)
        self.bound = 1.0 / np.diag(np.linalg.inv(self.rb))

    def solve(self, w: np.ndarray, gap: float | None = None) -> np.ndarray:
        """Weighted trace problems, one per row of ``w``."""
        d, _, _ = _barrier_batch(self.rb, w, gap_tol=self.gap if gap is None else gap)
        return d

    def random_starts(self, rng: np.random.Generator, k: int) -> np.ndarray:
        """``k`` random feasible noise vectors (rows): ``sum_j d_j / bound_j < 1``."""
        n = self.r.shape[0]
        v = rng.dirichlet(np.ones(n), size=k) * rng.uniform(0.5, 1.0, size=(k, 1))
        return v * self.bound

    def tangent(self, q: int, d: np.ndarray) -> np.ndarray:
        """Orthonormal basis (columns) of directions keeping corank ``q`` to first order.

        With ``V`` the eigenvectors of the ``q`` zero eigenvalues of
        ``R - D``, a change ``delta`` of ``d`` keeps them zero to first order
        iff ``sum_j delta_j v_j v_j^T = 0`` (``v_j`` row ``j`` of ``V``):
        ``q (q + 1) / 2`` linear conditions.
        """
        n = d.shape[0]
        _, vec = np.linalg.eigh(self.r - np.diag(d))
        v = vec[:, :q]
        iu = np.triu_indices(q)
        a = np.stack([np.outer(v[j], v[j])[iu] for j in range(n)], axis=1)
        _, sv, vt = np.linalg.svd(a)
        rank = int(np.sum(sv > 1e-10 * max(sv[0], 1e-300)))
        return vt[rank:].T

    def walk(self, q: int, d0: np.ndarray, directions: np.ndarray, *, steps: int = 6,
             h0: float = 0.02) -> list[np.ndarray]:
        """Walk along the corank-q family from ``d0``, one walker per direction.

        Each step moves ``h`` (doubling from ``h0``, correlation scale) along
        the direction projected on the tangent space, then returns to the
        family by ten Berge & Kiers iterations. A walker stops at its first
        step that does not end on a certified member (the family's edge:
        some ``d_j`` reaches 0 or ``R - D`` loses definiteness) after one
        halving. Returns every certified point visited.
        """
        k, n = directions.shape
        cur = np.tile(d0, (k, 1))
        alive = np.ones(k, dtype=bool)
        h = np.full(k, h0)
        found: list[np.ndarray] = []
        for _ in range(steps):
            idx = np.flatnonzero(alive)
            if idx.size == 0:
                break
            trial = np.empty((idx.size, n))
            moving = np.ones(idx.size, dtype=bool)
            for m, b in enumerate(idx):
                t = self.tangent(q, cur[b])
                p = t @ (t.T @ directions[b]) if t.size else np.zeros(n)
                norm = float(np.linalg.norm(p))
                if norm < 1e-8:
                    moving[m] = False
                    p = np.zeros(n)
                else:
                    p = p / norm
                trial[m] = np.clip(cur[b] + h[b] * p, 0.0, None)
            alive[idx[~moving]] = False
            new, _ = self.descend(q, trial, max_iter=5)
            for m, b in enumerate(idx):
                if not moving[m]:
                    continue
                ok, _, _ = _certify(self.r, new[m], q, self.eps)
                if ok and np.linalg.norm(new[m] - cur[b]) > 1e-9:
                    cur[b] = new[m]
                    found.append(new[m].copy())
                    h[b] *= 2.0
                elif h[b] > h0:
                    h[b] *= 0.25          # retry once with half the last good step
                else:
                    alive[b] = False
        return found

    def descend(self, q: int, d0: np.ndarray, *, max_iter: int,
                stop_on_first: bool = False) -> tuple[np.ndarray, int]:
        """ten Berge & Kiers iterations from each row of ``d0``, in lockstep.

        A run stops when its ``lambda_q(R - D)`` is below ``eps / 100``, when
        the sum of its ``q`` smallest eigenvalues stalls (decrease below 0.1 %
        of its value) in the fine phase, or after ``max_iter`` iterations. A
        run that stalls in the coarse phase moves to the fine phase if its
        ``lambda_q`` is within ``eps + 10 gap_coarse``, else stops. With
        ``stop_on_first``, all runs stop once one reaches the target.
        Returns ``(d, solves)``.
        """
        d = np.array(np.atleast_2d(d0), dtype=float)
        nb, n = d.shape
        target = 0.01 * self.eps
        f_old = np.full(nb, np.inf)
        active = np.ones(nb, dtype=bool)
        fine = np.zeros(nb, dtype=bool)
        eye = np.eye(n)
        solves = 0
        for it in range(1, max_iter + 1):
            idx = np.flatnonzero(active)
            lam, vec = np.linalg.eigh(self.r[None] - d[idx][:, :, None] * eye)
            f = lam[:, :q].sum(axis=1)
            # reached: ||E|| <= target (q eigenvalues near 0 and none negative)
            reached = (np.max(np.abs(lam[:, :q]), axis=1) <= target) & (lam[:, 0] >= -target)
            stop = reached.copy()
            stalled = f_old[idx] - f <= np.maximum(1e-10 * np.maximum(1.0, np.abs(f)), 1e-3 * f)
            promote = stalled & ~fine[idx] & ~reached & (
                lam[:, q - 1] <= self.eps + 10.0 * self.gap_coarse)
            stop |= stalled & ~promote
            fine[idx[promote]] = True
            f_old[idx] = np.where(promote, np.inf, f)
            if stop_on_first and reached.any():
                break
            active[idx[stop]] = False
            keep = ~stop
            if not keep.any():
                break
            w = np.sum(vec[keep][:, :, :q] ** 2, axis=2)
            rows = idx[keep]
            for level in (False, True):
                sel = fine[rows] == level
                if not sel.any():
                    continue
                d[rows[sel]] = self.solve(w[sel], self.gap if level else self.gap_coarse)
            solves += int(keep.sum())
        return d, solves


def _impossibility(r: np.ndarray, eps: float) -> tuple[np.ndarray, np.ndarray]:
    n = r.shape[0]
    rb = 1.0 / np.diag(np.linalg.inv(r + eps * np.eye(n)))
    lam = np.linalg.eigvalsh(r - np.diag(rb))
    return rb, lam


def _certify(r: np.ndarray, d: np.ndarray, q: int, eps: float) -> tuple[bool, np.ndarray, float]:
    lam = np.linalg.eigvalsh(r - np.diag(d))
    en = _e_norm(lam, q)
    return bool(np.all(d >= 0) and en <= eps), lam, en


def _corank_summary(certs: Sequence[CorankCertificate], eps: float, n: int, led: int) -> str:
    best = max((c.q for c in certs if c.status == "certified"), default=0)
    ruled = [c.q for c in certs if c.status == "ruled out"]
    und = [c.q for c in certs if c.status == "undetermined"]
    parts = []
    if best:
        parts.append(f"Under independent noise of unknown variances (Frisch scheme), up to {best} "
                     f"exact linear relation{'s' if best > 1 else ''} fit these {n} variables "
                     f"within tolerance {eps:g}.")
    else:
        parts.append(f"Under independent noise of unknown variances (Frisch scheme), no exact "
                     f"linear relation could be shown to fit these {n} variables within "
                     f"tolerance {eps:g}.")
    if ruled:
        parts.append(f"{min(ruled)} or more relations are ruled out.")
    if und:
        parts.append("Undetermined at this tolerance: corank " + ", ".join(str(q) for q in und) + ".")
    if best and best <= led:
        parts.append(f"Caution: with {n} variables, up to {led} such relations can appear from "
                     "sampling noise alone (Ledermann's bound), so this count is not by itself "
                     "evidence of real relations.")
    return " ".join(parts)


def frisch_max_corank(cov: Any, *, names: Sequence[str] | None = None, eps: float,
                      starts: int = 8, seed: int = 0, max_iter: int = 25) -> FrischCorank:
    """The largest corank compatible with diagonal noise, with certificates.

    On the correlation scale, minimum-trace factor analysis (our interior
    point solver, :func:`minimum_trace`) gives a first noise estimate; for
    each corank ``q`` not settled by it, minimum-rank factor analysis
    minimises the sum of the ``q`` smallest eigenvalues of ``R - D`` by the
    ten Berge & Kiers sequence of weighted trace problems, from the
    minimum-trace solution and ``starts - 1`` random feasible starts.
    Each ``q`` then gets an existence certificate, an impossibility
    certificate, or "undetermined" (see the module docstring).

    Parameters
    ----------
    cov : (n, n) array_like
        Sample covariance.
    names : sequence of str, optional
        Variable names.
    eps : float
        Tolerance in (0, 1), relative to each variable's variance.
    starts : int
        Number of starts for the minimum-rank search (>= 1).
    seed : int
        Seed for the random starts.
    max_iter : int
        Iteration cap per start.

    Returns
    -------
    FrischCorank

    Notes
    -----
    Coranks are nested (a corank-q solution is a corank-(q-1) one), so the
    search stops at the first ``q`` it cannot certify; larger coranks are
    then "undetermined" unless their impossibility certificate holds.

    References
    ----------
    .. [1] A. Shapiro, Psychometrika 47(2), 1982; G. Della Riccia and
           A. Shapiro, Psychometrika 47(4), 1982 (minimum trace).
    .. [2] J. M. F. ten Berge and H. A. L. Kiers, "A numerical approach to the
           approximate and the exact minimum rank of a covariance matrix",
           Psychometrika 56(2), 1991.
    .. [3] A. Shapiro and J. M. F. ten Berge, "Statistical inference of
           minimum rank factor analysis", Psychometrika 67(1), 2002.
    .. [4] L. Ning, T. T. Georgiou, A. Tannenbaum and S. P. Boyd, "Linear
           models based on noisy data and the Frisch scheme", SIAM Review
           57(2), 2015.
    .. [5] W. Ledermann, Psychometrika 2(2), 1937.
    """
    s = _as_covariance(cov)
    n = s.shape[0]
    nm = _names(names, n)
    eps = _check_eps(eps)
    starts, seed = _check_starts_seed(starts, seed)
    r, sd = _correlation(s)
    search = _Searcher(r, eps)
    rng = np.random.default_rng(seed)
    d_mt, gap, steps = _barrier_trace(search.rb, np.ones(n), gap_tol=search.gap)
    # Minimum trace on the correlation scale: max sum_j d_j / s_jj on the covariance scale.
    mt = MinimumTrace(d_mt * sd ** 2, 1.0 / sd ** 2, float(np.sum(d_mt)), gap,
                      float(np.linalg.eigvalsh(s - np.diag(d_mt * sd ** 2))[0]), steps)
    rand_starts = search.random_starts(rng, starts - 1)
    bound_share, bound_lam = _impossibility(r, eps)
    certs: list[CorankCertificate] = []
    best_d: np.ndarray | None = d_mt
    best_label = "minimum trace"
    stopped_at: int | None = None
    for q in range(1, n):
        ruled = bool(bound_lam[q - 1] > eps)
        found = None
        label = "not searched"
        iters = 0
        if not ruled:
            if best_d is not None:
                ok, lam, en = _certify(r, best_d, q, eps)
                if ok:
                    found = (best_d, lam, en)
                    label = best_label
            if found is None and stopped_at is None:
                # The best point so far alone first (usually enough when a true
                # structure is there), then all random starts in lockstep.
                first_label = best_label if best_d is not None else "minimum trace"
                first = d_mt if best_d is None else best_d
                batches = [([first_label], first[None, :])]
                if starts > 1:
                    batches.append(([f"start {i + 2}" for i in range(starts - 1)], rand_starts))
                labels = [first_label] + batches[-1][0] if starts > 1 else [first_label]
                for labs, d0 in batches:
                    d1s, it = search.descend(q, d0, max_iter=max_iter, stop_on_first=True)
                    iters += it
                    for lab, d1 in zip(labs, d1s):
                        ok, lam, en = _certify(r, d1, q, eps)
                        if ok:
                            found = (d1, lam, en)
                            label = lab if lab.startswith("start") else f"{lab}, refined"
                            best_d, best_label = d1, label
                            break
                    if found is not None:
                        break
                if found is None:
                    stopped_at = q
                    label = f"searched from {len(labels)} starts without success"
            elif found is None:
                label = f"not searched: corank {stopped_at} was not found"
        else:
            label = "impossibility certificate"
        if found is not None:
            d1, lam, en = found
            _, vec = np.linalg.eigh(r - np.diag(d1))
            certs.append(CorankCertificate(
                q, "certified", tuple(float(v) for v in d1 * sd ** 2), tuple(float(v) for v in d1),
                tuple(float(v) for v in lam), en, _relations_back(vec[:, :q], sd),
                tuple(float(v) for v in bound_share), float(bound_lam[q - 1]), label, iters))
        else:
            certs.append(CorankCertificate(
                q, "ruled out" if ruled else "undetermined", None, None, None, None, None,
                tuple(float(v) for v in bound_share), float(bound_lam[q - 1]), label, iters))
    best = max((c.q for c in certs if c.status == "certified"), default=0)
    ruled_qs = [c.q for c in certs if c.status == "ruled out"]
    led = ledermann_corank(n)
    return FrischCorank(nm, eps, starts, seed, tuple(certs), best,
                        min(ruled_qs) if ruled_qs else None, led, mt,
                        _corank_summary(certs, eps, n, led))


# --------------------------------------------------------------------------
# 5. Identification count and the spread of a family of solutions
# --------------------------------------------------------------------------

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
        return _fields_dict(self)


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


def _principal_angles_deg(qa: np.ndarray, qb: np.ndarray) -> np.ndarray:
    """Principal angles (ascending, degrees) between the column spaces of ``qa`` and ``qb``.

    The one implementation in :func:`relspan.analysis.stability.principal_angles`
    (sines and cosines combined by atan2; Björck & Golub 1973).
    """
    from relspan.analysis.stability import principal_angles

    return principal_angles(qa, qb, layout="columns")


@dataclass(frozen=True, slots=True)
class SolutionSpread:
    """The spread of the relation subspaces over many corank-q solutions.

    Attributes
    ----------
    names : tuple of str
        Variable names.
    q : int
        Corank.
    eps : float
        Tolerance (correlation scale) for a solution to count.
    identification : FrischIdentification
        The parameter count for this ``n`` and ``q``.
    members : int
        Number of corank-q solutions found (each certified within ``eps``).
    distinct : int
        Number of them whose relation subspaces differ by more than 0.001 degrees.
    representative : (q, n) ndarray or None
        Orthonormal relation rows (covariance scale) of the medoid member:
        the one whose largest angle to any other member is smallest.
    representative_noise : tuple of float or None
        Its noise variances (covariance scale).
    max_angle_deg : float or None
        Largest principal angle between any two members' subspaces.
    widest_pair_deg : tuple of float or None
        All ``q`` principal angles between the two most distant members.
    angles_to_representative_deg : tuple of float
        Largest principal angle from each member to the representative.
    noise_low, noise_high : tuple of float or None
        Per variable, the smallest and largest noise variance over members.
    member_noise : (members, n) ndarray
        Every member's noise variances (covariance scale).
    starts : int
        Random starts used (besides the minimum-trace and directed ones).
    seed : int
        Seed of the random starts.
    summary : str
        Plain-language summary.
    """

    names: tuple[str, ...]
    q: int
    eps: float
    identification: FrischIdentification
    members: int
    distinct: int
    representative: np.ndarray | None
    representative_noise: tuple[float, ...] | None
    max_angle_deg: float | None
    widest_pair_deg: tuple[float, ...] | None
    angles_to_representative_deg: tuple[float, ...]
    noise_low: tuple[float, ...] | None
    noise_high: tuple[float, ...] | None
    member_noise: np.ndarray
    starts: int
    seed: int
    summary: str

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready dict with sorted keys."""
        return _fields_dict(self)

    def to_frame(self):
        """Per variable: ``variable, noise_low, noise_high, representative_noise``."""
        pd = _pandas()
        rows = []
        for i, v in enumerate(self.names):
            rows.append({"variable": v,
                         "noise_low": None if self.noise_low is None else self.noise_low[i],
                         "noise_high": None if self.noise_high is None else self.noise_high[i],
                         "representative_noise": (None if self.representative_noise is None
                                                  else self.representative_noise[i])})
        return pd.DataFrame(rows, columns=["variable", "noise_low", "noise_high",
                                           "representative_noise"])


def solution_spread(cov: Any, q: int, eps: float, *, names: Sequence[str] | None = None,
                    starts: int = 8, seed: int = 0, max_iter: int = 20) -> SolutionSpread:
    """Sample distinct corank-q solutions and report how far their relations differ.

    Solutions come from the ten Berge & Kiers minimum-rank iteration started
    from the minimum-trace solution and from ``starts - 1`` random feasible
    starts, and from ``2 n`` walkers that move from the first solution along
    the family: each step follows the tangent space of the corank-q set
    (directions ``delta`` with ``V^T diag(delta) V = 0``) toward raising or
    lowering one noise variance, with a doubling step, and returns to the
    family by the same iteration, until the family's edge. Every member is
    certified within ``eps``. The spread found is a lower bound on the
    family's true spread.
    The spread is the largest principal angle between members' relation
    subspaces (sines and cosines combined by atan2); the representative is
    the medoid member, reported beside the spread, never alone.

    Parameters
    ----------
    cov : (n, n) array_like
        Sample covariance.
    q : int
        Corank, 1 <= q <= n - 1.
    eps : float
        Tolerance in (0, 1) on the correlation scale.
    names : sequence of str, optional
        Variable names.
    starts, seed : int
        Random starts and their seed.
    max_iter : int
        Iteration cap per run.

    Returns
    -------
    SolutionSpread

    References
    ----------
    .. [1] J. M. F. ten Berge and H. A. L. Kiers, Psychometrika 56(2), 1991.
    .. [2] L. Ning, T. T. Georgiou, A. Tannenbaum and S. P. Boyd, SIAM Review
           57(2), 2015.
    .. [3] Å. Björck and G. H. Golub, Mathematics of Computation 27(123), 1973.
    """
    s = _as_covariance(cov)
    n = s.shape[0]
    nm = _names(names, n)
    eps = _check_eps(eps)
    starts, seed = _check_starts_seed(starts, seed)
    ident = frisch_identification(n, q)
    q = int(q)
    r, sd = _correlation(s)
    search = _Searcher(r, eps)
    rng = np.random.default_rng(seed)
    d_mt = search.solve(np.ones((1, n)))[0]
    members: list[np.ndarray] = []
    bases: list[np.ndarray] = []

    def _keep(d: np.ndarray) -> None:
        ok, _, _ = _certify(r, d, q, eps)
        if ok:
            _, vec = np.linalg.eigh(r - np.diag(d))
            members.append(d)
            bases.append(_relations_back(vec[:, :q], sd).T)

    first, _ = search.descend(q, d_mt[None, :], max_iter=max_iter)
    _keep(first[0])
    rand, _ = search.descend(q, search.random_starts(rng, starts - 1), max_iter=max_iter)
    for d1 in rand:
        _keep(d1)
    if members:
        dirs = np.vstack([np.eye(n), -np.eye(n)])
        for d1 in search.walk(q, members[0], dirs):
            _keep(d1)
    k = len(members)
    if k == 0:
        summary = (f"No solution with {q} relation{'s' if q > 1 else ''} was found within "
                   f"tolerance {eps:g}, so no spread can be reported.")
        return SolutionSpread(nm, q, eps, ident, 0, 0, None, None, None, None, (), None, None,
                              np.zeros((0, n)), starts, seed, summary)
    ang = np.zeros((k, k))
    for a in range(k):
        for b in range(a + 1, k):
            ang[a, b] = ang[b, a] = _principal_angles_deg(bases[a], bases[b])[-1]
    rep = int(np.argmin(ang.max(axis=1)))
    a_max, b_max = np.unravel_index(int(np.argmax(ang)), ang.shape)
    widest = _principal_angles_deg(bases[a_max], bases[b_max])
    distinct: list[int] = []
    for a in range(k):
        if all(ang[a, b] > 1e-3 for b in distinct):
            distinct.append(a)
    noise = np.array(members) * sd ** 2
    max_angle = float(ang.max())
    lo, hi = noise.min(axis=0), noise.max(axis=0)
    rel = "relations" if q > 1 else "relation"
    if len(distinct) > 1:
        j = int(np.argmax((hi - lo) / np.diag(s)))
        summary = (f"Under diagonal noise, {q} {rel} among {n} variables are not pinned down: "
                   f"{k} solutions found within tolerance {eps:g} ({len(distinct)} distinct) have "
                   f"relation subspaces up to {max_angle:.3g} degrees apart; the noise variance of "
                   f"{nm[j]} ranges from {lo[j]:.3g} to {hi[j]:.3g}. Any member of this family "
                   "fits the data equally well.")
    else:
        summary = (f"{k} solutions with {q} {rel} found within tolerance {eps:g} all give the same "
                   f"relation subspace (within 0.001 degrees)"
                   + ("" if ident.count_met else
                      ", although the parameter count does not guarantee uniqueness; the family "
                      "may be wider than this search found") + ".")
    return SolutionSpread(
        nm, q, eps, ident, k, len(distinct), bases[rep].T,
        tuple(float(v) for v in noise[rep]), max_angle, tuple(float(v) for v in widest),
        tuple(float(v) for v in ang[rep]), tuple(float(v) for v in lo),
        tuple(float(v) for v in hi), noise, starts, seed, summary)


# --------------------------------------------------------------------------
# 6. Everything for one window
# --------------------------------------------------------------------------

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
        return _fields_dict(self)

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
    """
    s = _as_covariance(cov)
    n = s.shape[0]
    nm = _names(names, n)
    eps = _check_eps(eps)
    starts, seed = _check_starts_seed(starts, seed)
    _ref_index(ref, nm)
    orth = one_orthant(s, names=nm)
    q1 = frisch_q1(s, names=nm, ref=ref)
    tri = triad(s, names=nm) if n == 3 else None
    cor = frisch_max_corank(s, names=nm, eps=eps, starts=starts, seed=seed)
    qs = cor.max_certified
    ident = frisch_identification(n, qs) if qs >= 1 else None
    spread = None
    if ident is not None and qs >= 2 and not ident.count_met:
        spread = solution_spread(s, qs, eps, names=nm, starts=starts, seed=seed)
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
