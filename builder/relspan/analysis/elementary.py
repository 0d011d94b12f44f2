"""Elementary regressions: the n least-squares relations, each treating one variable as the only noisy one.

For a window covariance ``S`` with inverse ``P``, the regression of ``x_j`` on
all other variables (with intercept) has coefficients ``-P[j, k] / P[j, j]``
and residual variance ``1 / P[j, j]``. Written as a relation ``a . x = 0``
(about the means) with ``a[j] = 1``, it is row ``j`` of ``P`` divided by
``P[j, j]``. These are the vertices of Frisch's complete regression system.

Sign convention used throughout relspan: a *relation vector* ``a`` states
``a . (x - mean) = 0``; normalised on variable ``r`` it has ``a[r] = 1``, so
``x_r = mean_r - sum_{k != r} a[k] (x_k - mean_k)``.

References
----------
.. [1] R. Frisch, Statistical Confluence Analysis by Means of Complete
       Regression Systems, Publ. No. 5, University Institute of Economics,
       Oslo, 1934.
.. [2] T. W. Anderson, An Introduction to Multivariate Statistical Analysis,
       Wiley, 1958, ch. 2 (partial regression coefficients from the inverse
       covariance matrix).
"""

from __future__ import annotations

import dataclasses

import warnings
from dataclasses import dataclass
from typing import Sequence

import numpy as np
import pandas as pd
import scipy.linalg as sla

from relspan.analysis import _dd
from relspan.analysis._common import (EPS, check_cov, correlation_scale, orthonormal_rows, pivot_columns,
                                      reduced_form, variable_index)
from relspan.analysis._export import jsonable
from relspan.errors import IllConditionedWarning, OptionsError

__all__ = ["ElementaryRegressions", "elementary_regressions", "choose_reference",
           "DEFAULT_WARN_CONDITION", "elementary_regressions_stack", "warn_ill_conditioned",
           "REFINE_ABOVE_ERROR", "inverse_error_bound"]

#: condition number (correlation scale, 2-norm) above which a window is reported as
#: ill-conditioned: about 10 of the 16 significant digits may be lost beyond it.
DEFAULT_WARN_CONDITION = 1e10


@dataclass(frozen=True, slots=True, eq=False)
class ElementaryRegressions:
    """The n elementary regressions of one window.

    Method: ordinary least squares of each variable on all others (with an
    intercept), obtained from the inverse covariance matrix (Frisch 1934,
    *Statistical Confluence Analysis by Means of Complete Regression Systems*).

    Attributes
    ----------
    names : tuple of str
        Variable names, in the order of the rows and columns of the covariance.
    relations : (n, n) ndarray
        Row ``j`` is the relation vector ``a`` (``a . (x - mean) = 0``) with
        ``a[j] = 1``: row ``j`` of ``inv(cov)`` divided by its diagonal entry.
        NaN when the covariance is singular.
    coefficients : (n, n) ndarray
        ``coefficients[j, k]`` is the OLS coefficient of ``x_k`` in the
        regression of ``x_j`` on the others (``-relations[j, k]``); the
        diagonal is 0. NaN when singular.
    intercepts : (n,) ndarray or None
        Intercept of each regression, when the window mean was given.
    residual_variance : (n,) ndarray
        ``1 / P[j, j]``: the residual sum of squares divided by
        ``count - ddof`` (the divisor of the covariance), i.e. the residual
        variance on the covariance's own scale. In the singular case, the
        residual variance of the (non-unique) least-squares fit; 0 for the
        variables that enter an exact relation.
    residual_variance_unbiased : (n,) ndarray or None
        Residual sum of squares divided by ``count - n`` (``n - 1`` slopes and
        an intercept are estimated), when ``count`` was given and exceeds n.
    r_squared : (n,) ndarray
        Coefficient of determination of each regression, ``1 - 1 / (P[j,j] S[j,j])``.
    std : (n,) ndarray
        Standard deviations ``sqrt(diag(cov))`` (the correlation scaling).
    condition : float
        2-norm condition number of ``cov`` (inf when singular).
    condition_correlation : float
        2-norm condition number of the correlation matrix; this is what
        governs the accuracy of the results (they are computed on that scale).
    rank : int
        Numerical rank of the correlation matrix (eigenvalues above
        ``rank_rtol`` times the largest count).
    singular : bool
        True when the covariance is rank deficient to tolerance.
    singular_reason : str
        Plain-words explanation when ``singular``; empty otherwise.
    exact_relations : (k, n) ndarray
        Orthonormal basis (rows, original units) of the null space of
        ``cov``: the ``k = n - rank`` relations that hold exactly in the
        window. Shape ``(0, n)`` when not singular.
    exact_normalised : (k, n) ndarray
        The same subspace in reduced form: identity in the columns
        ``exact_pivots`` (each pivot variable expressed through the others).
    exact_pivots : tuple of int
        Columns chosen by QR with column pivoting for ``exact_normalised``.
    count : int or None
        Rows in the window, when given.
    ddof : int
        Divisor offset of the covariance (``comoment / (count - ddof)``).
    """

    names: tuple[str, ...]
    relations: np.ndarray
    coefficients: np.ndarray
    intercepts: np.ndarray | None
    residual_variance: np.ndarray
    residual_variance_unbiased: np.ndarray | None
    r_squared: np.ndarray
    std: np.ndarray
    condition: float
    condition_correlation: float
    rank: int
    singular: bool
    singular_reason: str
    exact_relations: np.ndarray
    exact_normalised: np.ndarray
    exact_pivots: tuple[int, ...]
    count: int | None
    ddof: int

    @property
    def n(self) -> int:
        """Number of variables."""
        return len(self.names)

    def index(self, var: int | str) -> int:
        """Column index of a variable given by index or name."""
        return variable_index(self.names, var, key="ref")

    def normalised(self, ref: int | str) -> np.ndarray:
        """The n relations normalised on ``ref``: row ``j`` is ``relations[j] / relations[j, ref]``.

        Each row ``a`` satisfies ``a[ref] = 1`` and ``a . (x - mean) = 0``, so
        ``x_ref = mean_ref - sum_{k != ref} a[k] (x_k - mean_k)``. A relation
        in which ``ref`` has coefficient 0 gives infinite (or NaN) entries;
        :func:`choose_reference` picks a ``ref`` that avoids this.
        """
        r = self.index(ref)
        with np.errstate(divide="ignore", invalid="ignore"):
            out = self.relations / self.relations[:, [r]]
        return out

    def unit_relations(self) -> np.ndarray:
        """Relations scaled to unit Euclidean length (original units), sign fixed so ``a[j] > 0``."""
        norms = np.linalg.norm(self.relations, axis=1, keepdims=True)
        return self.relations / norms

    def to_dict(self) -> dict:
        """JSON-ready dict (plain lists and floats; NaN and inf become None)."""
        return jsonable({
            "names": list(self.names),
            "relations": self.relations,
            "coefficients": self.coefficients,
            "intercepts": self.intercepts,
            "residual_variance": self.residual_variance,
            "residual_variance_unbiased": self.residual_variance_unbiased,
            "r_squared": self.r_squared,
            "std": self.std,
            "condition": self.condition,
            "condition_correlation": self.condition_correlation,
            "rank": self.rank,
            "singular": self.singular,
            "singular_reason": self.singular_reason,
            "exact_relations": self.exact_relations,
            "exact_normalised": self.exact_normalised,
            "exact_pivots": list(self.exact_pivots),
            "count": self.count,
            "ddof": self.ddof,
        })

    def to_frame(self) -> pd.DataFrame:
        """One row per regression (dependent variable): coefficients, intercept, variances, R^2."""
        df = pd.DataFrame(self.coefficients, index=pd.Index(self.names, name="dependent"),
                          columns=list(self.names))
        df["intercept"] = np.nan if self.intercepts is None else self.intercepts
        df["residual_variance"] = self.residual_variance
        df["residual_variance_unbiased"] = (np.nan if self.residual_variance_unbiased is None
                                            else self.residual_variance_unbiased)
        df["r_squared"] = self.r_squared
        return df


def elementary_regressions(cov, *, names: Sequence[str], count: int | None = None,
                           mean=None, ddof: int = 1, cov_lo=None, label: str | None = None,
                           rank_rtol: float | None = None,
                           warn_condition: float = DEFAULT_WARN_CONDITION) -> ElementaryRegressions:
    """All n least-squares relations, each treating one variable as the only noisy one.

    Parameters
    ----------
    cov : (n, n) array_like
        Sample covariance about the window mean (symmetric, positive semi-definite).
    names : sequence of str
        One name per variable.
    count : int, optional
        Rows in the window; enables the unbiased residual variance
        (divisor ``count - n``).
    mean : (n,) array_like, optional
        Window means; enables the intercepts.
    ddof : int, default 1
        The covariance is ``comoment / (count - ddof)``.
    cov_lo : (n, n) array_like, optional
        Low-order part of the covariance: ``cov + cov_lo`` is the covariance
        to about twice float64 precision (a double-double, as from
        :meth:`relspan.analysis.moments.Moments.covariance_parts`). The
        inverse is refined against it; without it, against ``cov`` itself.
    label : str, optional
        Window name, used in warnings.
    rank_rtol : float, optional
        Eigenvalues of the correlation matrix at or below ``rank_rtol`` times
        the largest count as zero (default ``100 n eps``).
    warn_condition : float, default 1e10
        Emit :class:`~relspan.errors.IllConditionedWarning` when the
        correlation-scale condition number exceeds this.

    Returns
    -------
    ElementaryRegressions

    Notes
    -----
    The inverse is computed on the correlation scale ``R = D^-1 S D^-1``
    (Cholesky factorisation) and rescaled, so units do not spoil accuracy;
    it is then refined by iterative refinement of the inverse,
    ``X <- X + X (I - S X)``, with the residual ``I - S X`` evaluated in
    double-double arithmetic against ``cov + cov_lo`` (Dot2, Ogita, Rump &
    Oishi 2005) on a power-of-two scaling of ``S`` (exact), one to three
    steps until the correction is below ``2^-26`` of the result. The
    coefficients then carry the accuracy of ``cov + cov_lo`` rather than
    ``cond(R) * eps`` (for a condition number well below ``1 / eps``).
    A covariance that is singular to tolerance does not raise: the exact
    relations (null space) are returned and ``singular`` is set.

    References
    ----------
    .. [1] R. Frisch, Statistical Confluence Analysis by Means of Complete
           Regression Systems, University Institute of Economics, Oslo, 1934.
    .. [2] N. J. Higham, Accuracy and Stability of Numerical Algorithms, 2nd
           ed., SIAM, 2002, ch. 10 (Cholesky), 7.3 (scaling) and 12
           (iterative refinement).
    .. [3] T. Ogita, S. M. Rump and S. Oishi, "Accurate sum and dot product",
           SIAM J. Sci. Comput. 26(6), 1955-1988, 2005.

    Examples
    --------
    >>> import numpy as np
    >>> S = np.array([[4.0, 2.0, 1.0], [2.0, 3.0, 1.0], [1.0, 1.0, 2.0]])
    >>> er = elementary_regressions(S, names=["a", "b", "c"])
    >>> np.round(er.coefficients[0], 3).tolist()   # a on b and c: a = 0.6 b + 0.2 c
    [0.0, 0.6, 0.2]
    >>> np.round(er.residual_variance, 3).tolist()   # 1 / P[j, j]
    [2.6, 1.857, 1.625]
    """
    s, names_t = check_cov(cov, names=names)
    n = s.shape[0]
    if count is not None:
        if int(count) != count or count < 1:
            raise OptionsError(f"count must be a positive whole number of rows; got {count!r}.",
                               key="count", fix="Pass the window's row count, or leave it out.")
        count = int(count)
    mean_v = None
    if mean is not None:
        mean_v = np.asarray(mean, dtype=float).reshape(-1)
        if mean_v.shape != (n,) or not np.all(np.isfinite(mean_v)):
            raise OptionsError(f"mean must be {n} finite values; got shape {mean_v.shape}.", key="mean",
                               fix="Pass the window means in the order of names, or leave it out.")
    rtol = 100.0 * n * EPS if rank_rtol is None else float(rank_rtol)
    r, d = correlation_scale(s)
    # eigenvalues alone (LAPACK's value-only path); the vectors only where they are used
    # (exact relations of a singular window, a Cholesky breakdown), from eigh, whose columns
    # are in the same ascending order
    w = np.linalg.eigvalsh(r)
    wmax = float(max(w[-1], 0.0))
    tol = rtol * wmax if wmax > 0 else 1.0
    null = w <= tol
    rank = int(n - np.count_nonzero(null))
    ws = np.linalg.eigvalsh(s)
    condition = float(ws[-1] / ws[0]) if ws[0] > 0 and rank == n else float("inf")
    cond_r = float(w[-1] / w[0]) if rank == n and w[0] > 0 else float("inf")

    if rank == n:
        try:
            c = sla.cho_factor(r, lower=True, check_finite=False)
            pr = sla.cho_solve(c, np.eye(n), check_finite=False)
        except np.linalg.LinAlgError:  # positive by eigvalsh but Cholesky broke down: the spectrum
            wv, v = np.linalg.eigh(r)
            pr = (v / wv) @ v.T
        pr = 0.5 * (pr + pr.T)
        s_lo = _check_lo(cov_lo, n)
        pr = _refined_inverse(s, s_lo, pr, d)
        diag = np.diag(pr).copy()
        # relation row j in original units: P[j,k]/P[j,j] = pr[j,k] d_j / (pr[j,j] d_k)
        rel = pr / diag[:, None] * (d[:, None] / d[None, :])
        np.fill_diagonal(rel, 1.0)
        resvar = d**2 / diag
        r2 = 1.0 - 1.0 / diag
        if cond_r > warn_condition:
            warnings.warn(_ill_conditioned(cond_r, condition, label), stacklevel=2)
        exact = np.zeros((0, n))
        exact_norm = np.zeros((0, n))
        pivots: tuple[int, ...] = ()
        reason = ""
    else:
        _, v = np.linalg.eigh(r)
        u = v[:, null]  # correlation-scale null vectors (columns; null is the first n - rank)
        exact = orthonormal_rows((u / d[:, None]).T)
        pivots = pivot_columns(exact)
        exact_norm, _ = reduced_form(exact, pivots)
        support = np.linalg.norm(u, axis=1) > 1e-8
        # residual variance of x_j on the others via the pseudo-inverse (correlation scale)
        resvar = np.empty(n)
        for j in range(n):
            if support[j]:
                resvar[j] = 0.0
                continue
            o = [k for k in range(n) if k != j]
            roo = r[np.ix_(o, o)]
            roj = r[o, j]
            beta = np.linalg.lstsq(roo, roj, rcond=rtol)[0]
            resvar[j] = max(r[j, j] - roj @ beta, 0.0) * d[j] ** 2
        with np.errstate(divide="ignore", invalid="ignore"):
            r2 = np.where(np.diag(s) > 0, 1.0 - resvar / np.where(np.diag(s) > 0, np.diag(s), 1.0), np.nan)
        rel = np.full((n, n), np.nan)
        k = n - rank
        involved = [names_t[j] for j in range(n) if support[j]]
        const = [names_t[j] for j in range(n) if s[j, j] <= tol * max(float(np.max(np.diag(s))), 1e-300)]
        reason = (f"The covariance is singular to tolerance (rank {rank} of {n}): {k} exact linear "
                  f"relation{'s' if k > 1 else ''} hold{'' if k > 1 else 's'} in this window among "
                  f"{', '.join(involved)}"
                  + (f" ({', '.join(const)} constant)" if const else "")
                  + ". The elementary regressions are not unique, so the exact relations are "
                    "reported instead.")
    coef = -rel
    np.fill_diagonal(coef, 0.0 if rank == n else np.nan)
    intercepts = None if mean_v is None else (rel @ mean_v if rank == n else np.full(n, np.nan))
    unbiased = None
    if count is not None and count > n:
        unbiased = resvar * (count - ddof) / (count - n)
    return ElementaryRegressions(
        names=names_t, relations=rel, coefficients=coef, intercepts=intercepts,
        residual_variance=resvar, residual_variance_unbiased=unbiased, r_squared=r2, std=d,
        condition=condition, condition_correlation=cond_r, rank=rank, singular=rank < n,
        singular_reason=reason, exact_relations=exact, exact_normalised=exact_norm,
        exact_pivots=pivots, count=count, ddof=int(ddof))


def _check_lo(cov_lo, n: int) -> np.ndarray:
    if cov_lo is None:
        return np.zeros((n, n))
    lo = np.asarray(cov_lo, dtype=float)
    if lo.shape != (n, n) or not np.all(np.isfinite(lo)):
        raise OptionsError(f"cov_lo must be a finite {n} x {n} matrix; got shape {lo.shape}.",
                           key="cov_lo", fix="Pass the low-order part of the covariance from "
                                             "Moments.covariance_parts(), or leave it out.")
    return 0.5 * (lo + lo.T)


#: refinement stops once a step changes the inverse by less than this (relative, max norm)
_REFINE_TOL = 2.0 ** -26
_REFINE_STEPS = 3


def _refined_inverse(s: np.ndarray, s_lo: np.ndarray, pr: np.ndarray, d: np.ndarray) -> np.ndarray:
    """Refine the correlation-scale inverse ``pr`` of ``s / (d d^T)`` against ``s + s_lo``.

    Works on ``A = S / (t t^T)`` with ``t`` the powers of two nearest ``d``
    (an exact scaling, so ``A``'s low part is exact too): ``X = inv(A)`` is
    improved by ``X + X (I - A X)``, the residual in double-double (Higham
    2002, ch. 12; Ogita, Rump & Oishi 2005). Returns the refined
    ``inv(s / (d d^T))``.
    """
    _, ex = np.frexp(d)
    t = np.ldexp(1.0, ex)
    tt = np.outer(t, t)
    a_hi, a_lo = s / tt, s_lo / tt
    if not (np.all(np.isfinite(a_hi)) and np.all(np.isfinite(a_lo))):
        return pr
    dd = np.outer(d, d)
    x = pr / dd * tt
    for _ in range(_REFINE_STEPS):
        step = x @ _dd.dot2_residual(a_hi, a_lo, x)
        x = x + step
        x = 0.5 * (x + x.T)
        if not np.all(np.isfinite(x)):
            return pr
        if np.max(np.abs(step)) <= _REFINE_TOL * np.max(np.abs(x)):
            break
    return x / tt * dd


def choose_reference(er: ElementaryRegressions) -> int:
    """Pick the variable to normalise on so every normalised coefficient stays finite and well conditioned.

    Rule: put each relation on the correlation scale (``a_k * std_k``, which
    removes units) and scale it to unit length; the score of a candidate
    ``ref`` is the smallest ``|a_j[ref]|`` over the n relations, and the
    candidate with the largest score wins (lowest index on ties). Dividing by
    ``a_j[ref]`` then never amplifies a unit-length relation by more than
    ``1 / score``. For a singular window, the first pivot of the exact
    relations is returned.

    Returns
    -------
    int
        Column index of the reference variable.
    """
    if er.singular:
        return int(er.exact_pivots[0])
    a = er.relations * er.std[None, :]
    a = a / np.linalg.norm(a, axis=1, keepdims=True)
    score = np.min(np.abs(a), axis=0)
    return int(np.argmax(score))



def warn_ill_conditioned(er: ElementaryRegressions, *, label: str | None = None,
                         warn_condition: float = DEFAULT_WARN_CONDITION) -> None:
    """Emit the :class:`~relspan.errors.IllConditionedWarning` :func:`elementary_regressions` gives.

    For results computed by :func:`elementary_regressions_stack`, which does not
    warn, so that a window analysed from a precomputed result says the same.
    """
    cond_r, condition = er.condition_correlation, er.condition
    if er.singular or not cond_r > warn_condition:
        return
    warnings.warn(_ill_conditioned(cond_r, condition, label), stacklevel=3)


def _ill_conditioned(cond_r: float, condition: float, label: str | None) -> IllConditionedWarning:
    where = f"window {label!r}: " if label else ""
    return IllConditionedWarning(
        f"{where}the covariance is nearly singular (condition number {cond_r:.3g} on the "
        f"correlation scale, {condition:.3g} in the data's units); about "
        f"{max(0, int(np.log10(cond_r))):d} of 16 significant digits of the regression "
        "coefficients may be lost.", window=label, condition=cond_r)


def _dot2_residual_stack(ah: np.ndarray, al: np.ndarray, x: np.ndarray) -> np.ndarray:
    """:func:`relspan.analysis._dd.dot2_residual` for stacks ``(w, n, n)``: the same operations per matrix."""
    n = ah.shape[-1]
    p, e = _dd.two_prod(ah[:, :, :, None], x[:, None, :, :])     # (w, i, k, j)
    comp = -(e.sum(axis=2) + np.matmul(al, x))
    terms = np.concatenate([np.broadcast_to(np.eye(n)[None, :, None, :], (x.shape[0], n, 1, n)), -p],
                           axis=2)
    while terms.shape[2] > 1:
        k = terms.shape[2]
        even = k - (k % 2)
        s, err = _dd.two_sum(terms[:, :, 0:even:2], terms[:, :, 1:even:2])
        comp = comp + err.sum(axis=2)
        terms = np.concatenate([s, terms[:, :, even:]], axis=2) if k % 2 else s
    return terms[:, :, 0] + comp


def _refined_inverse_stack(s: np.ndarray, s_lo: np.ndarray, pr: np.ndarray, d: np.ndarray) -> np.ndarray:
    """:func:`_refined_inverse` for stacks: every matrix takes the steps it would take alone."""
    _, ex = np.frexp(d)
    t = np.ldexp(1.0, ex)
    tt = t[:, :, None] * t[:, None, :]
    a_hi, a_lo = s / tt, s_lo / tt
    dd = d[:, :, None] * d[:, None, :]
    ok = np.all(np.isfinite(a_hi), axis=(1, 2)) & np.all(np.isfinite(a_lo), axis=(1, 2))
    out = pr.copy()
    x = pr / dd * tt
    active = np.flatnonzero(ok)
    for _ in range(_REFINE_STEPS):
        if active.size == 0:
            break
        xa = x[active]
        step = np.matmul(xa, _dot2_residual_stack(a_hi[active], a_lo[active], xa))
        xa = xa + step
        xa = 0.5 * (xa + xa.transpose(0, 2, 1))
        x[active] = xa
        finite = np.all(np.isfinite(xa), axis=(1, 2))
        ok[active[~finite]] = False          # as alone: a non-finite step keeps the first inverse
        with np.errstate(invalid="ignore"):
            small = np.max(np.abs(step), axis=(1, 2)) <= _REFINE_TOL * np.max(np.abs(xa), axis=(1, 2))
        active = active[finite & ~small]
    good = np.flatnonzero(ok)
    out[good] = x[good] / tt[good] * dd[good]
    return out


#: :func:`elementary_regressions_stack` refines a window's first inverse only where
#: :func:`inverse_error_bound` exceeds this: two decimal digits below the quantum of the published
#: closed forms (nine significant digits of an array's largest entry, ``relspan.precision``)
REFINE_ABOVE_ERROR = 1e-11


def inverse_error_bound(cond_r, n: int):
    """A-priori bound on the normwise relative error of a window's unrefined float64 inverse.

    The inverse of the correlation matrix ``R`` computed by an LU solve in float64 from the
    float64 covariance (its double-double low part dropped) has
    ``||X - inv(R)|| / ||inv(R)|| <= c_n cond(R) u`` to first order, ``u = 2^-53`` (Higham
    2002, ch. 14, inversion by Gaussian elimination; the rounding of the covariance and of the
    scaling to correlations adds a perturbation of a few ``u`` per entry, ch. 7). The constant
    used here, ``c_n = 2 n (n + 3)``, is deliberately generous (``n (n + 3)``: the elimination's
    ``n`` terms per entry and the three roundings of the scaling, for each of ``n`` columns;
    a factor 2 for pivot growth); ``tests/analysis/test_elementary_stack.py`` checks it against
    the refined inverse on random windows up to the cut.

    Parameters
    ----------
    cond_r : float or ndarray
        2-norm condition number of the correlation matrix.
    n : int
        Number of variables.

    References
    ----------
    .. [1] N. J. Higham, Accuracy and Stability of Numerical Algorithms, 2nd ed., SIAM, 2002,
           ch. 7 (perturbation theory), 14 (matrix inversion).
    """
    return 2.0 * n * (n + 3) * np.asarray(cond_r, dtype=float) * 2.0 ** -53


#: bytes of the largest temporaries of one batch of :func:`elementary_regressions_stack`
_STACK_BYTES = 1 << 22


_FIELD_SETTERS = tuple(getattr(ElementaryRegressions, f.name).__set__
                       for f in dataclasses.fields(ElementaryRegressions))


def _complete(*values) -> ElementaryRegressions:
    """An :class:`ElementaryRegressions` with every field given, in the order of the fields.

    The same object the keyword constructor builds (complete, once), for the stack's
    thousands of windows: the slots are filled by their descriptors directly, which costs
    about half of the frozen dataclass's ``__init__`` (one ``object.__setattr__`` per field).
    ``tests/analysis/test_elementary_stack.py`` checks it against the constructor.
    """
    if len(values) != len(_FIELD_SETTERS):
        raise TypeError(f"{len(_FIELD_SETTERS)} field values expected, got {len(values)}")
    obj = object.__new__(ElementaryRegressions)
    for put, v in zip(_FIELD_SETTERS, values):
        put(obj, v)
    return obj


def elementary_regressions_stack(covs, *, names: Sequence[str], counts=None, means=None, cov_los=None,
                                 ddof: int = 1, labels: Sequence[str] | None = None,
                                 warn_condition: float = DEFAULT_WARN_CONDITION,
                                 warn: bool = False) -> list[ElementaryRegressions]:
    """:func:`elementary_regressions` for a stack of windows in one batched call.

    Every window gets the result :func:`elementary_regressions` gives it
    (same fields, same rules); the arithmetic runs on the whole stack at once
    (correlation scaling, eigenvalues, inverse, refinement). Windows whose
    covariance is singular to tolerance are handed to
    :func:`elementary_regressions` one by one.

    Parameters
    ----------
    covs : (w, n, n) array_like
        Window covariances.
    names : sequence of str
    counts : (w,) array_like of int, optional
    means : (w, n) array_like, optional
    cov_los : (w, n, n) array_like, optional
        Low-order parts of the covariances (double-double), as for ``cov_lo``.
    ddof : int, default 1
    labels : sequence of str, optional
        Window names for warnings.
    warn_condition : float
    warn : bool, default False
        Emit the ill-conditioning warnings here; by default the caller does
        (:func:`warn_ill_conditioned`, as :func:`relspan.analysis.window.analyse_window`).

    Returns
    -------
    list of ElementaryRegressions

    Notes
    -----
    Against :func:`elementary_regressions` window by window, eigenvalues,
    ranks and condition numbers are the same numbers (the same LAPACK routine
    on the same matrices); the first inverse comes from a batched LU solve
    instead of a Cholesky solve. It is refined against the double-double
    covariance (as the one-window function always does) only where the
    a-priori bound :func:`inverse_error_bound` exceeds :data:`REFINE_ABOVE_ERROR`
    (a correlation-scale condition number above about 800 for n = 6): there
    coefficients, residual variances and R^2 agree with the one-window function
    to a few units in the last place; elsewhere the float64 inverse is kept, within
    that bound of the refined one, two digits below what the site publishes
    (``tests/analysis/test_elementary_stack.py`` checks both).

    References
    ----------
    As :func:`elementary_regressions` (Frisch 1934; Higham 2002; Ogita, Rump & Oishi 2005).
    """
    s = np.array(covs, dtype=float)
    if s.ndim != 3 or s.shape[1] != s.shape[2]:
        raise OptionsError(f"covs must be a (w, n, n) stack; got shape {s.shape}.", key="covs",
                           fix="Stack the window covariances along a first axis.")
    w, n = s.shape[0], s.shape[1]
    names_t = tuple(str(x) for x in names)
    if len(names_t) != n:
        raise OptionsError(f"names has {len(names_t)} entries but covs has {n} variables.", key="names",
                           fix=f"Pass exactly {n} names.")
    if w == 0:
        return []
    per = max(64, _STACK_BYTES // (8 * n ** 3))
    if w > per:   # bounded temporaries (the refinement holds a few (w, n, n, n) arrays)
        out_all: list[ElementaryRegressions] = []
        for a in range(0, w, per):
            sl = slice(a, a + per)
            out_all.extend(elementary_regressions_stack(
                s[sl], names=names_t, counts=None if counts is None else np.asarray(counts)[sl],
                means=None if means is None else np.asarray(means)[sl],
                cov_los=None if cov_los is None else np.asarray(cov_los)[sl], ddof=ddof,
                labels=None if labels is None else list(labels)[sl], warn_condition=warn_condition,
                warn=warn))
        return out_all
    lab = [None] * w if labels is None else [str(x) or None for x in labels]
    cnt = [None] * w if counts is None else [int(c) for c in np.asarray(counts)]
    mv = None if means is None else np.asarray(means, dtype=float).reshape(w, n)
    lo = np.zeros_like(s) if cov_los is None else np.asarray(cov_los, dtype=float).reshape(w, n, n)

    if not (np.all(np.isfinite(s)) and np.all(np.isfinite(lo))):
        bad_rows = np.flatnonzero(~(np.isfinite(s).all(axis=(1, 2)) & np.isfinite(lo).all(axis=(1, 2))))
    else:
        bad_rows = np.zeros(0, np.int64)
    st = s.transpose(0, 2, 1)
    asym = np.max(np.abs(s - st), axis=(1, 2))
    scale = np.maximum(np.max(np.abs(s), axis=(1, 2)), np.finfo(float).tiny)
    odd = (asym > 1e-8 * scale) | np.any(np.diagonal(s, axis1=1, axis2=2) < 0, axis=1)
    s = 0.5 * (s + st)                                       # check_cov's symmetrised copy
    lo = 0.5 * (lo + lo.transpose(0, 2, 1))                  # _check_lo

    d = np.sqrt(np.diagonal(s, axis1=1, axis2=2))            # correlation_scale, per window
    d = np.where(d > 0, d, 1.0)
    r = s / (d[:, :, None] * d[:, None, :])
    r = 0.5 * (r + r.transpose(0, 2, 1))
    ev = np.linalg.eigvalsh(r)                               # as elementary_regressions
    wmax = np.maximum(ev[:, -1], 0.0)
    rtol = 100.0 * n * EPS
    tol = np.where(wmax > 0, rtol * wmax, 1.0)
    rank = n - np.count_nonzero(ev <= tol[:, None], axis=1)
    ws = np.linalg.eigvalsh(s)
    full = (rank == n) & ~odd
    full[bad_rows] = False
    idx = np.flatnonzero(full)

    out: list[ElementaryRegressions | None] = [None] * w
    if idx.size:
        if idx.size == w:   # every window full rank: the stacks themselves, no gathered copies
            sf, rf, df, lof = s, r, d, lo
        else:
            sf, rf, df, lof = s[idx], r[idx], d[idx], lo[idx]
        pr = np.linalg.inv(rf)
        pr = 0.5 * (pr + pr.transpose(0, 2, 1))
        evf = ev[idx]
        with np.errstate(divide="ignore", invalid="ignore"):
            cond_f = np.where(evf[:, 0] > 0, evf[:, -1] / np.where(evf[:, 0] > 0, evf[:, 0], 1.0), np.inf)
        # refinement only where the float64 inverse may miss the published digits (a-priori bound)
        need = np.flatnonzero(~(inverse_error_bound(cond_f, n) <= REFINE_ABOVE_ERROR))
        if need.size:
            pr[need] = _refined_inverse_stack(sf[need], lof[need], pr[need], df[need])
        diag = np.diagonal(pr, axis1=1, axis2=2).copy()
        rel = pr / diag[:, :, None] * (df[:, :, None] / df[:, None, :])
        eye = np.eye(n, dtype=bool)
        rel[:, eye] = 1.0
        resvar = df ** 2 / diag
        r2 = 1.0 - 1.0 / diag
        coef = -rel
        coef[:, eye] = 0.0
        wsf = ws[idx]
        empty = np.zeros((0, n))
        with np.errstate(divide="ignore", invalid="ignore"):
            conds = np.where(wsf[:, 0] > 0, wsf[:, -1] / wsf[:, 0], np.inf).tolist()
        conds_r = cond_f.tolist()
        icpt = [None] * idx.size if mv is None else list(np.matmul(rel, mv[idx][:, :, None])[:, :, 0])
        rels, coefs, resvars, r2s, ds = list(rel), list(coef), list(resvar), list(r2), list(df)
        unb: list = [None] * idx.size
        if counts is not None:   # resvar (c - ddof) / (c - n) where c > n, as one array operation
            cf = np.array([cnt[i] for i in idx.tolist()], dtype=np.int64)
            has = np.flatnonzero(cf > n)
            if has.size:
                vals = resvar[has] * (cf[has] - ddof)[:, None] / (cf[has] - n)[:, None]
                for a, v in zip(has.tolist(), vals):
                    unb[a] = v
        ddof_i = int(ddof)
        for a, i in enumerate(idx.tolist()):
            out[i] = _complete(names_t, rels[a], coefs[a], icpt[a], resvars[a], unb[a], r2s[a], ds[a],
                               conds[a], conds_r[a], n, False, "", empty, empty, (), cnt[i], ddof_i)
    for i in range(w):
        if out[i] is None:   # singular, or input the one-window function must judge (and name)
            with warnings.catch_warnings():
                warnings.simplefilter("ignore", IllConditionedWarning)
                out[i] = elementary_regressions(
                    s[i] if i not in set(bad_rows.tolist()) and not odd[i] else np.asarray(covs)[i],
                    names=names_t, count=cnt[i], mean=None if mv is None else mv[i], ddof=ddof,
                    cov_lo=lo[i], label=lab[i], warn_condition=warn_condition)
    if warn:
        for i, er in enumerate(out):
            warn_ill_conditioned(er, label=lab[i], warn_condition=warn_condition)
    return out  # type: ignore[return-value]
