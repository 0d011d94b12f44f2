"""Window statistics for many windows at once, vectorised over the window axis.

A reference implementation for the benchmarks (``bench_scale.py`` times it
against statsmodels); the build does not use it: ``relspan.run`` analyses each
window with the per-window functions of ``relspan.analysis``, whose numbers the
site publishes. Tested in ``tests/benchmarks/test_batched.py``.

Rolling and expanding plans give thousands of windows of a few variables each;
looping over them in Python costs far more than the arithmetic. These pure
functions take *stacks*: counts ``(w,)``, means ``(w, n)``, co-moments
``(w, n, n)`` (as from ``batched_window_moments`` in ``tests/moment_oracles.py``)
and return stacked results, using numpy's batched LAPACK calls
(``np.linalg.cholesky``, ``eigh`` on the whole stack) and loops over the
matrix dimension, never over windows.

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
.. [5] T. F. Chan, G. H. Golub and R. J. LeVeque, "Algorithms for computing
       the sample variance: analysis and recommendations", The American
       Statistician 37(3), 242-247, 1983.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from relspan.analysis.moments import moments_of

__all__ = [
    "stacked_block_moments",
    "merge_window_runs",
    "batched_covariances",
    "batched_correlations",
    "BatchedRegressions",
    "batched_elementary_regressions",
    "BatchedSpectrum",
    "batched_eigh",
]


#: doubles of raw data reduced at a time (1 MiB, half of a 2 MiB L2 cache): a piece stays in cache
_CACHE_DOUBLES = 1 << 17


def stacked_block_moments(x: np.ndarray, rows_per_block: int):
    """Block statistics of consecutive blocks of ``rows_per_block`` rows.

    The corrected two-pass reduction (mean; deviations; co-moment
    ``d^T d - (sum d)(sum d)^T / b``, the second term removing the rounding
    left in the mean) for all equal blocks at once through a reshape; a
    shorter last block is reduced by :func:`relspan.analysis.moments.moments_of`.
    Unlike ``moments_of`` no shift is subtracted first: with two passes the
    deviations are taken from the block mean itself, so a shift adds nothing
    but a pass over the data (Chan, Golub & LeVeque 1983, corrected two-pass
    algorithm).

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
    y = x[:full * b].reshape(full, b, n)  # a view: blocks of rows
    ones = np.ones(b)
    means = np.empty((full, n))
    c = np.empty((full, n, n))
    step = max(1, _CACHE_DOUBLES // (b * n))  # blocks per piece: deviations stay in cache
    for lo in range(0, full, step):
        yy = y[lo:lo + step]
        m = np.matmul(ones, yy) / b  # block means (sums through BLAS beat .sum(axis=1))
        d = yy - m[:, None, :]
        sd = np.matmul(ones, d)  # what rounding left in the mean
        cc = np.matmul(d.transpose(0, 2, 1), d)
        cc -= sd[:, :, None] * sd[:, None, :] / b
        c[lo:lo + step] = 0.5 * (cc + cc.transpose(0, 2, 1))
        means[lo:lo + step] = m + sd / b
    counts = np.full(full, b, dtype=np.int64)
    if t > full * b:
        last = moments_of(x[full * b:])
        counts = np.append(counts, last.count)
        means = np.concatenate([means, last.mean[None]])
        c = np.concatenate([c, last.comoment[None]])
    return counts, means, c


def merge_window_runs(counts: np.ndarray, means: np.ndarray, comoments: np.ndarray,
                      starts: np.ndarray, lengths: np.ndarray):
    """Window moments as merges of runs of consecutive blocks, all windows at once.

    The same left-to-right Chan-Golub-LeVeque merges as
    ``batched_window_moments`` (``tests/moment_oracles.py``), with the same
    result bit for bit, arranged for speed: windows are ordered by length so
    that the windows still growing at each step are a leading slice of the
    stack (views, updated in place, instead of masked copies).

    Parameters
    ----------
    counts : (k,) int array; means : (k, n); comoments : (k, n, n)
        Block statistics in order.
    starts, lengths : (w,) int arrays
        Window ``i`` is blocks ``starts[i] .. starts[i] + lengths[i] - 1``
        (``lengths >= 1``).

    Returns
    -------
    counts (w,) int64, means (w, n), comoments (w, n, n)

    References
    ----------
    .. [1] T. F. Chan, G. H. Golub and R. J. LeVeque, "Updating formulae and a
           pairwise algorithm for computing sample variances", Technical
           Report STAN-CS-79-773, Stanford University, 1979.
    """
    counts = np.asarray(counts)
    means = np.asarray(means, dtype=float)
    comoments = np.asarray(comoments, dtype=float)
    starts = np.asarray(starts, dtype=np.intp)
    lengths = np.asarray(lengths, dtype=np.intp)
    if starts.shape != lengths.shape or starts.ndim != 1:
        raise ValueError("starts and lengths must be 1-D arrays of the same length")
    if starts.size == 0:
        n = means.shape[1]
        return np.zeros(0, np.int64), np.zeros((0, n)), np.zeros((0, n, n))
    if lengths.min() < 1 or starts.min() < 0 or (starts + lengths).max() > counts.shape[0]:
        raise ValueError("every window must be a non-empty run of existing blocks")
    uniform = bool((lengths == lengths[0]).all())
    order = None if uniform else np.argsort(-lengths, kind="stable")
    st = starts if order is None else starts[order]
    ln = lengths if order is None else lengths[order]
    guard = not bool((counts > 0).all())
    # rolling windows start at evenly spaced blocks: take the next blocks as strided views
    stride = int(st[1] - st[0]) if st.size > 1 else 1
    spaced = uniform and stride > 0 and bool((np.diff(st) == stride).all())
    n = means.shape[1]
    c = np.empty(st.size)
    m = np.empty((st.size, n))
    cm = np.empty((st.size, n, n))
    piece = max(1, _CACHE_DOUBLES // (n * n))  # windows at a time: their sums stay in cache
    for lo in range(0, st.size, piece):
        hi = min(lo + piece, st.size)
        c[lo:hi], m[lo:hi], cm[lo:hi] = _merge_piece(
            counts, means, comoments, st[lo:hi], ln[lo:hi], uniform, spaced, stride, guard)
    if order is not None:
        back = np.empty_like(order)
        back[order] = np.arange(order.size)
        c, m, cm = c[back], m[back], cm[back]
    return c.astype(np.int64), m, cm


def _merge_piece(counts, means, comoments, st, ln, uniform, spaced, stride, guard):
    """Merge the runs of one piece of windows (sorted by decreasing length)."""
    c = counts[st].astype(float)
    m = means[st]  # fancy indexing: copies, updated in place below
    cm = comoments[st]
    for step in range(1, int(ln[0]) if not uniform else int(ln.max())):
        a = st.size if uniform else int(np.searchsorted(-ln, -step, side="left"))
        if spaced:
            idx = slice(int(st[0]) + step, int(st[-1]) + step + 1, stride)
        else:
            idx = st[:a] + step
        cb = counts[idx].astype(float)
        ca = c[:a]
        tot = ca + cb
        delta = means[idx] - m[:a]
        if guard:
            safe = np.where(tot > 0, tot, 1.0)
            w = np.where(tot > 0, cb / safe, 0.0)
            f = np.where(tot > 0, ca * cb / safe, 0.0)
        else:
            w = cb / tot
            f = ca * cb / tot
        m[:a] += delta * w[:, None]
        cm[:a] += comoments[idx]
        outer = delta[:, :, None] * delta[:, None, :]
        outer *= f[:, None, None]
        cm[:a] += outer
        c[:a] = tot
    return c, m, cm


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
        variable (Frisch 1934). :attr:`coefficients` gives the OLS slopes.
    residual_variance : (w, n) ndarray
        ``1 / P[j, j]``: the residual sum of squares of regression ``j`` over
        ``count - ddof``.
    r_squared : (w, n) ndarray
        ``1 - 1 / (P[j, j] S[j, j])``.
    intercepts : (w, n) ndarray or None
        ``mean_j - sum_k coefficients[j, k] mean_k`` when means were given.
    condition : (w,) ndarray
        1-norm condition number ``||R||_1 ||R^-1||_1`` of each window's
        correlation matrix ``R`` (scale free; between the 2-norm condition
        number and ``n`` times it; ``inf`` when singular).
    singular : (w,) bool ndarray
        Windows whose covariance is singular to working precision (an exact
        linear relation, or a constant column); their regressions are NaN and
        the exact relations are the null space (see :func:`batched_eigh`).
    """

    covariance: np.ndarray
    precision: np.ndarray
    relations: np.ndarray
    residual_variance: np.ndarray
    r_squared: np.ndarray
    intercepts: np.ndarray | None
    condition: np.ndarray
    singular: np.ndarray

    @property
    def windows(self) -> int:
        return int(self.covariance.shape[0])

    @property
    def coefficients(self) -> np.ndarray:
        """OLS slopes of ``x_j`` on the other variables (with an intercept), (w, n, n).

        ``coefficients[i, j, k] = -P[j, k] / P[j, j]`` for ``k != j``; 0 on the
        diagonal (NaN throughout for singular windows). Computed on access.
        """
        out = -self.relations
        idx = np.arange(out.shape[1])
        out[:, idx, idx] = np.where(self.singular[:, None], np.nan, 0.0)
        return out


def _failing_cholesky(r: np.ndarray, idx: np.ndarray, failed: np.ndarray) -> None:
    """Mark the matrices of ``r[idx]`` whose Cholesky factorisation fails (by halving)."""
    try:
        np.linalg.cholesky(r[idx])
    except np.linalg.LinAlgError:
        if idx.size == 1:
            failed[idx[0]] = True
        else:
            half = idx.size // 2
            _failing_cholesky(r, idx[:half], failed)
            _failing_cholesky(r, idx[half:], failed)


def _cholesky(r: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Lower Cholesky factors of a stack; failures get an identity factor and a True flag."""
    failed = np.zeros(r.shape[0], dtype=bool)
    try:
        return np.linalg.cholesky(r), failed
    except np.linalg.LinAlgError:
        _failing_cholesky(r, np.arange(r.shape[0]), failed)
    chol = np.broadcast_to(np.eye(r.shape[1]), r.shape).copy()
    if (~failed).any():
        chol[~failed] = np.linalg.cholesky(r[~failed])
    return chol, failed


#: up to this many variables the triangular inverse runs as scalar recurrences vectorised
#: over windows (about n^3 / 6 numpy calls); above it, LAPACK's batched inverse is faster
_SMALL_N = 10


def _cholesky_inverse(chol: np.ndarray) -> np.ndarray:
    """``inv(L L^T) = inv(L)^T inv(L)`` for a stack of lower Cholesky factors ``L``."""
    w, n, _ = chol.shape
    if n > _SMALL_N:
        linv = np.linalg.inv(chol)
        return np.matmul(linv.transpose(0, 2, 1), linv)
    lt = np.ascontiguousarray(chol.transpose(1, 2, 0))  # (n, n, w): windows on the fast axis
    x = np.zeros_like(lt)
    diag = [1.0 / lt[i, i] for i in range(n)]
    for i in range(n):  # forward substitution, row by row: x = inv(L)
        x[i, i] = diag[i]
        for j in range(i):
            acc = lt[i, j] * x[j, j]
            for k in range(j + 1, i):
                acc += lt[i, k] * x[k, j]
            x[i, j] = -acc * diag[i]
    out = np.empty_like(lt)
    for i in range(n):  # inv(L)^T inv(L), using that inv(L) is lower triangular
        for j in range(i + 1):
            acc = x[i, i] * x[i, j]
            for k in range(i + 1, n):
                acc += x[k, i] * x[k, j]
            out[i, j] = acc
            out[j, i] = acc
    return out.transpose(2, 0, 1)


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
    if means is not None:
        means = np.asarray(means, dtype=float)
        if means.shape != (w, n):
            raise ValueError(f"means must have shape ({w}, {n}); got {means.shape}")
    cov = comoments / (counts - ddof).astype(float)[:, None, None]
    precision = np.empty((w, n, n))
    relations = np.empty((w, n, n))
    residual_variance = np.empty((w, n))
    r_squared = np.empty((w, n))
    condition = np.empty(w)
    singular = np.empty(w, dtype=bool)
    intercepts = None if means is None else np.empty((w, n))
    step = max(1, _CACHE_DOUBLES // (n * n))  # windows at a time: work arrays stay in cache
    for lo in range(0, w, step):
        part = slice(lo, lo + step)
        _regress_piece(cov[part], None if means is None else means[part], precision[part],
                       relations[part], residual_variance[part], r_squared[part],
                       condition[part], singular[part],
                       None if intercepts is None else intercepts[part])
    return BatchedRegressions(cov, precision, relations, residual_variance,
                              r_squared, intercepts, condition, singular)


def _regress_piece(cov, means, precision, relations, residual_variance, r_squared, condition,
                   singular, intercepts) -> None:
    """Fill the output slices for one piece of windows (see batched_elementary_regressions)."""
    n = cov.shape[1]
    var = np.diagonal(cov, axis1=1, axis2=2)
    flat = ~(var > 0).all(axis=1)
    d = np.sqrt(np.where(var > 0, var, 1.0))
    outer = d[:, :, None] * d[:, None, :]
    r = cov / outer  # Cholesky reads the lower triangle only
    chol, failed = _cholesky(r)
    rinv = _cholesky_inverse(chol)
    # 1-norm condition number ||R||_1 ||R^-1||_1, as LAPACK's dpocon estimates it; for a
    # symmetric matrix it lies between the 2-norm condition number and n times it
    ones = np.ones(n)
    with np.errstate(over="ignore", invalid="ignore"):
        cond = np.matmul(ones, np.abs(r)).max(axis=1) * np.matmul(ones, np.abs(rinv)).max(axis=1)
    # singular to working precision: every window numpy.linalg.matrix_rank would call
    # rank-deficient (2-norm condition >= 1 / (n eps)) has condition >= 1 / (n eps) here too
    bad = flat | failed | ~(cond < 1.0 / (n * np.finfo(float).eps))
    singular[...] = bad
    condition[...] = np.where(bad, np.inf, cond)
    np.divide(rinv, outer, out=precision)
    if bad.any():
        precision[bad] = np.nan
    pjj = np.diagonal(precision, axis1=1, axis2=2)
    np.divide(precision, pjj[:, :, None], out=relations)
    np.divide(1.0, pjj, out=residual_variance)
    r_squared[...] = 1.0 - residual_variance / var
    if intercepts is not None:
        intercepts[...] = np.einsum("wjk,wk->wj", relations, means)


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
