"""Window statistics for many windows at once, vectorised over the window axis.

Rolling and expanding plans give thousands of windows of a few variables each;
looping over them in Python costs far more than the arithmetic. These pure
functions take *stacks*: counts ``(w,)``, means ``(w, n)``, co-moments
``(w, n, n)`` (as from :func:`builder.analysis.moments.batched_window_moments`)
and return stacked results, using numpy's batched LAPACK calls
(``np.linalg.cholesky``, ``inv``, ``eigvalsh``, ``eigh`` on the whole stack).

References
----------
.. [1] R. Frisch, Statistical Confluence Analysis by Means of Complete
       Regression Systems, University Institute of Economics, Oslo, 1934.
.. [2] C. Eckart and G. Young, "The approximation of one matrix by another of
       lower rank", Psychometrika 1(3), 211-218, 1936.
.. [3] G. H. Golub and C. F. Van Loan, "An analysis of the total least squares
       problem", SIAM J. Numer. Anal. 17(6), 883-893, 1980.
.. [4] T. F. Chan, G. H. Golub and R. J. LeVeque, "Updating formulae and a
       pairwise algorithm for computing sample variances", Technical Report
       STAN-CS-79-773, Stanford University, 1979.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .moments import moments_of

__all__ = [
    "stacked_block_moments",
    "batched_covariances",
    "batched_correlations",
    "BatchedRegressions",
    "batched_elementary_regressions",
    "BatchedSpectrum",
    "batched_eigh",
]


def stacked_block_moments(x: np.ndarray, rows_per_block: int):
    """Block statistics of consecutive blocks of ``rows_per_block`` rows.

    The same corrected two-pass reduction as
    :func:`builder.analysis.moments.moments_of` (shift by each block's first
    row, mean, co-moment with the rounding correction), done for all equal
    blocks at once through a reshape; a shorter last block is reduced on its
    own.

    Parameters
    ----------
    x : (T, n) array_like
        Rows in order (finite values).
    rows_per_block : int
        Rows per block, >= 1.

    Returns
    -------
    counts (k,) int64, means (k, n), comoments (k, n, n)
        ``k = ceil(T / rows_per_block)``.
    """
    x = np.asarray(x, dtype=float)
    if x.ndim != 2:
        raise ValueError("x must be a 2-D array of rows")
    b = int(rows_per_block)
    if b < 1:
        raise ValueError(f"rows_per_block must be >= 1; got {rows_per_block!r}")
    t, n = x.shape
    full = t // b
    y = x[:full * b].reshape(full, b, n)
    shift = y[:, :1, :]
    y = y - shift
    m = y.mean(axis=1)
    d = y - m[:, None, :]
    sd = d.sum(axis=1)
    c = np.matmul(d.transpose(0, 2, 1), d) - sd[:, :, None] * sd[:, None, :] / b
    c = 0.5 * (c + c.transpose(0, 2, 1))
    means = m + sd / b + shift[:, 0, :]
    counts = np.full(full, b, dtype=np.int64)
    if t > full * b:
        last = moments_of(x[full * b:])
        counts = np.append(counts, last.count)
        means = np.concatenate([means, last.mean[None]])
        c = np.concatenate([c, last.comoment[None]])
    return counts, means, c


def _stack_inputs(counts, comoments, ddof):
    counts = np.asarray(counts)
    comoments = np.asarray(comoments, dtype=float)
    if comoments.ndim != 3 or comoments.shape[1] != comoments.shape[2]:
        raise ValueError(f"comoments must have shape (w, n, n); got {comoments.shape}")
    if counts.shape != comoments.shape[:1]:
        raise ValueError(f"counts must have shape ({comoments.shape[0]},); got {counts.shape}")
    short = np.flatnonzero(counts - ddof <= 0)
    if short.size:
        i = int(short[0])
        raise ValueError(f"window {i} has {int(counts[i])} rows; a covariance with ddof={ddof} "
                         f"needs more than {ddof} ({short.size} such windows)")
    return counts, comoments


def batched_covariances(counts: np.ndarray, comoments: np.ndarray, *, ddof: int = 1) -> np.ndarray:
    """Sample covariances ``comoments[i] / (counts[i] - ddof)`` for every window.

    Parameters
    ----------
    counts : (w,) array_like
        Rows per window (each > ``ddof``).
    comoments : (w, n, n) array_like
        Co-moment matrices about the window means.
    ddof : int
        Delta degrees of freedom (1: the unbiased sample covariance).

    Returns
    -------
    (w, n, n) ndarray
    """
    counts, comoments = _stack_inputs(counts, comoments, ddof)
    return comoments / (counts - ddof).astype(float)[:, None, None]


def batched_correlations(cov: np.ndarray) -> np.ndarray:
    """Correlation matrices of a stack of covariances (NaN rows for constant columns)."""
    cov = np.asarray(cov, dtype=float)
    d = np.sqrt(np.clip(np.diagonal(cov, axis1=1, axis2=2), 0.0, None))
    with np.errstate(divide="ignore", invalid="ignore"):
        r = cov / (d[:, :, None] * d[:, None, :])
    idx = np.arange(cov.shape[1])
    r[:, idx, idx] = np.where(d > 0, 1.0, np.nan)
    return r


@dataclass(frozen=True, slots=True, eq=False)
class BatchedRegressions:
    """All ``n`` elementary regressions in each of ``w`` windows.

    Attributes
    ----------
    covariance : (w, n, n) ndarray
        Sample covariance ``S`` of each window.
    precision : (w, n, n) ndarray
        ``P = inv(S)``; NaN for singular windows.
    relations : (w, n, n) ndarray
        ``relations[i, j]`` is row ``j`` of ``P`` scaled so its ``j``-th entry
        is 1: the least-squares relation treating ``x_j`` as the only noisy
        variable (Frisch 1934).
    coefficients : (w, n, n) ndarray
        OLS slopes of ``x_j`` on the other variables (with an intercept):
        ``coefficients[i, j, k] = -P[j, k] / P[j, j]`` for ``k != j``, 0 on
        the diagonal.
    residual_variance : (w, n) ndarray
        ``1 / P[j, j]``: the residual sum of squares of regression ``j`` over
        ``count - ddof``.
    r_squared : (w, n) ndarray
        ``1 - 1 / (P[j, j] S[j, j])``.
    intercepts : (w, n) ndarray or None
        ``mean_j - sum_k coefficients[j, k] mean_k`` when means were given.
    condition : (w,) ndarray
        2-norm condition number of each window's correlation matrix (scale
        free; ``inf`` when singular).
    singular : (w,) bool ndarray
        Windows whose covariance is singular to working precision (an exact
        linear relation, or a constant column); their regressions are NaN and
        the exact relations are the null space (see :func:`batched_eigh`).
    """

    covariance: np.ndarray
    precision: np.ndarray
    relations: np.ndarray
    coefficients: np.ndarray
    residual_variance: np.ndarray
    r_squared: np.ndarray
    intercepts: np.ndarray | None
    condition: np.ndarray
    singular: np.ndarray

    @property
    def windows(self) -> int:
        return int(self.covariance.shape[0])


def _cholesky_inverse(r: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Inverses of SPD matrices via Cholesky; returns (inverses, failed mask)."""
    failed = np.zeros(r.shape[0], dtype=bool)
    try:
        chol = np.linalg.cholesky(r)
    except np.linalg.LinAlgError:  # find the windows that fail, then redo the rest at once
        for i in range(r.shape[0]):
            try:
                np.linalg.cholesky(r[i])
            except np.linalg.LinAlgError:
                failed[i] = True
        chol = np.broadcast_to(np.eye(r.shape[1]), r.shape).copy()
        if (~failed).any():
            chol[~failed] = np.linalg.cholesky(r[~failed])
    linv = np.linalg.inv(chol)
    return np.matmul(linv.transpose(0, 2, 1), linv), failed


def batched_elementary_regressions(counts: np.ndarray, comoments: np.ndarray, *,
                                   means: np.ndarray | None = None,
                                   ddof: int = 1) -> BatchedRegressions:
    """The ``n`` elementary regressions of every window, from stacked moments.

    Parameters
    ----------
    counts : (w,) array_like
        Rows per window.
    comoments : (w, n, n) array_like
        Co-moment matrices about the window means.
    means : (w, n) array_like, optional
        Window means; needed only for the intercepts.
    ddof : int
        Covariance convention (``count - ddof`` divides the co-moments).

    Returns
    -------
    BatchedRegressions

    Notes
    -----
    Each covariance is scaled to its correlation matrix ``R = D^-1 S D^-1``
    first (the elementary regressions are equivariant under this scaling),
    so the Cholesky factorisation and its triangular inverse see numbers of
    order one; then ``P = D^-1 inv(R) D^-1``. The OLS slope of ``x_j`` on the
    others is ``-P[j, k] / P[j, j]`` and its residual variance ``1 / P[j, j]``
    (partitioned-inverse identities; e.g. Frisch 1934).

    References
    ----------
    .. [1] R. Frisch, Statistical Confluence Analysis by Means of Complete
           Regression Systems, 1934.
    """
    counts, comoments = _stack_inputs(counts, comoments, ddof)
    w, n, _ = comoments.shape
    cov = comoments / (counts - ddof).astype(float)[:, None, None]
    var = np.diagonal(cov, axis1=1, axis2=2)
    flat = ~(var > 0).all(axis=1)
    d = np.sqrt(np.where(var > 0, var, 1.0))
    r = cov / (d[:, :, None] * d[:, None, :])
    r = 0.5 * (r + r.transpose(0, 2, 1))
    ev = np.linalg.eigvalsh(r)
    lo, hi = ev[:, 0], ev[:, -1]
    # numerical rank test as in numpy.linalg.matrix_rank: eigenvalues below n * eps * max are zero
    singular = flat | (lo <= n * np.finfo(float).eps * hi)
    with np.errstate(divide="ignore", invalid="ignore"):
        condition = np.where(singular, np.inf, hi / np.where(lo > 0, lo, 1.0))

    precision = np.full((w, n, n), np.nan)
    ok = ~singular
    if ok.any():
        rinv, failed = _cholesky_inverse(r[ok])
        if failed.any():  # not positive definite after all: treat as singular
            bad = np.flatnonzero(ok)[failed]
            singular[bad] = True
            condition[bad] = np.inf
            rinv[failed] = np.nan
        dk = d[ok]
        precision[ok] = rinv / (dk[:, :, None] * dk[:, None, :])

    pjj = np.diagonal(precision, axis1=1, axis2=2)
    relations = precision / pjj[:, :, None]
    coefficients = -relations
    idx = np.arange(n)
    coefficients[:, idx, idx] = np.where(singular[:, None], np.nan, 0.0)
    residual_variance = 1.0 / pjj
    r_squared = 1.0 - residual_variance / var
    intercepts = None
    if means is not None:
        means = np.asarray(means, dtype=float)
        if means.shape != (w, n):
            raise ValueError(f"means must have shape ({w}, {n}); got {means.shape}")
        intercepts = np.einsum("wjk,wk->wj", relations, means)
    return BatchedRegressions(cov, precision, relations, coefficients, residual_variance,
                              r_squared, intercepts, condition, singular)


@dataclass(frozen=True, slots=True, eq=False)
class BatchedSpectrum:
    """Eigen-decompositions of a stack of symmetric matrices.

    Attributes
    ----------
    eigenvalues : (w, n) ndarray
        Ascending in each window.
    eigenvectors : (w, n, n) ndarray
        Column ``k`` of ``eigenvectors[i]`` belongs to ``eigenvalues[i, k]``;
        each column's entry of largest magnitude is positive (the first such
        entry on ties), so the output does not depend on LAPACK's sign choice.
    """

    eigenvalues: np.ndarray
    eigenvectors: np.ndarray

    def relation_basis(self, q: int) -> np.ndarray:
        """Rows spanning the corank-``q`` total-least-squares relations, (w, q, n).

        Under equal noise variances the relations span the eigenvectors of the
        ``q`` smallest eigenvalues of the covariance (Eckart & Young 1936;
        Golub & Van Loan 1980).
        """
        n = self.eigenvalues.shape[1]
        if not 1 <= q <= n:
            raise ValueError(f"q must be between 1 and {n}; got {q!r}")
        return self.eigenvectors[:, :, :q].transpose(0, 2, 1).copy()


def batched_eigh(matrices: np.ndarray) -> BatchedSpectrum:
    """``np.linalg.eigh`` on a stack of symmetric matrices, with fixed signs.

    Parameters
    ----------
    matrices : (w, n, n) array_like
        Symmetric matrices (covariances or correlations); only their
        symmetric part is used.

    Returns
    -------
    BatchedSpectrum

    References
    ----------
    .. [1] C. Eckart and G. Young, "The approximation of one matrix by another
           of lower rank", Psychometrika 1(3), 211-218, 1936.
    """
    a = np.asarray(matrices, dtype=float)
    if a.ndim != 3 or a.shape[1] != a.shape[2]:
        raise ValueError(f"matrices must have shape (w, n, n); got {a.shape}")
    a = 0.5 * (a + a.transpose(0, 2, 1))
    values, vectors = np.linalg.eigh(a)
    lead = np.argmax(np.abs(vectors), axis=1)  # (w, n): row of the largest entry per column
    signs = np.sign(np.take_along_axis(vectors, lead[:, None, :], axis=1))
    signs[signs == 0] = 1.0
    return BatchedSpectrum(values, vectors * signs)
