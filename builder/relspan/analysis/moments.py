"""Mergeable window statistics: count, mean and co-moment matrix.

A window's covariance is never computed from raw rows twice. Each block of
rows is reduced once, with a shift and a two-pass (corrected) sum, to a
:class:`Moments`; windows are merges of blocks (Chan, Golub & LeVeque 1979),
done pairwise so that no statistic is ever obtained by subtraction.

Means and co-moments are carried as double-doubles (a float64 value plus a
float64 low part, about 106 significant bits; see
:mod:`relspan.analysis._dd`): the float64 parts are the statistics rounded
once, and the low parts let a solve refine against the covariance the data
actually have rather than its rounding (a condition number of 10^4 turns a
rounding of 1e-16 in the covariance into 1e-12 in a regression slope).

References
----------
.. [1] T. F. Chan, G. H. Golub and R. J. LeVeque, "Updating formulae and a
       pairwise algorithm for computing sample variances", Technical Report
       STAN-CS-79-773, Stanford University, 1979.
.. [2] B. P. Welford, "Note on a method for calculating corrected sums of
       squares and products", Technometrics 4(3), 419-420, 1962.
.. [3] Å. Björck, Numerical Methods for Least Squares Problems, SIAM, 1996
       (corrected two-pass algorithm).
.. [4] T. J. Dekker, "A floating-point technique for extending the available
       precision", Numerische Mathematik 18, 224-242, 1971.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Iterable

import numpy as np

from relspan.analysis import _dd

__all__ = ["Moments", "moments_of", "merge", "merge_all"]


@dataclass(frozen=True, slots=True, eq=False)
class Moments:
    """Sufficient statistics of a block of rows for means and covariances.

    Attributes
    ----------
    count : int
        Number of rows.
    mean : (n,) ndarray
        Column means.
    comoment : (n, n) ndarray
        Sum over rows of ``(x - mean)(x - mean)^T`` (symmetric), rounded to float64.
    mean_lo, comoment_lo : ndarray or None
        Low-order parts: ``mean + mean_lo`` and ``comoment + comoment_lo``
        are the statistics to about twice float64 precision (double-double).
        None when unknown (read as zeros: plain float64 accuracy).
    """

    count: int
    mean: np.ndarray
    comoment: np.ndarray
    mean_lo: np.ndarray | None = None
    comoment_lo: np.ndarray | None = None

    @property
    def n(self) -> int:
        """Number of variables."""
        return int(self.mean.shape[0])

    def covariance(self, ddof: int = 1) -> np.ndarray:
        """Sample covariance ``comoment / (count - ddof)``."""
        if self.count - ddof <= 0:
            raise ValueError(f"covariance needs more than {ddof} rows; got {self.count}")
        return self.comoment / (self.count - ddof)

    def covariance_parts(self, ddof: int = 1) -> tuple[np.ndarray, np.ndarray]:
        """Sample covariance as a double-double ``(hi, lo)``; ``hi`` equals :meth:`covariance`
        up to its last bit (it is the correctly rounded quotient of the double-double co-moment)."""
        if self.count - ddof <= 0:
            raise ValueError(f"covariance needs more than {ddof} rows; got {self.count}")
        lo = np.zeros_like(self.comoment) if self.comoment_lo is None else self.comoment_lo
        hi, lo = _dd.dd_div_float(self.comoment, lo, float(self.count - ddof))
        return hi, 0.5 * (lo + lo.T)

    def std(self, ddof: int = 1) -> np.ndarray:
        """Column standard deviations."""
        return np.sqrt(np.clip(np.diag(self.covariance(ddof)), 0.0, None))

    def correlation(self) -> np.ndarray:
        """Correlation matrix; a constant column gives NaN in its row and column."""
        d = np.sqrt(np.clip(np.diag(self.comoment), 0.0, None))
        with np.errstate(divide="ignore", invalid="ignore"):
            r = self.comoment / np.outer(d, d)
        r[np.diag_indices_from(r)] = np.where(d > 0, 1.0, np.nan)
        return r

    def __eq__(self, other: object) -> bool:  # arrays need elementwise comparison
        if not isinstance(other, Moments):
            return NotImplemented
        return (self.count == other.count and np.array_equal(self.mean, other.mean)
                and np.array_equal(self.comoment, other.comoment)
                and np.array_equal(_lo(self.mean, self.mean_lo), _lo(other.mean, other.mean_lo))
                and np.array_equal(_lo(self.comoment, self.comoment_lo),
                                   _lo(other.comoment, other.comoment_lo)))

    __hash__ = None  # type: ignore[assignment]


def _lo(hi: np.ndarray, lo: np.ndarray | None) -> np.ndarray:
    return np.zeros_like(hi) if lo is None else lo


def empty(n: int) -> Moments:
    """Moments of zero rows over ``n`` variables (the identity of :func:`merge`)."""
    return Moments(0, np.zeros(n), np.zeros((n, n)), np.zeros(n), np.zeros((n, n)))


def moments_of(x: np.ndarray) -> Moments:
    """Reduce a block of rows to its :class:`Moments`.

    Parameters
    ----------
    x : (T, n) array_like
        Rows of the block (finite values).

    Notes
    -----
    Corrected two-pass algorithm: with ``d = x - mean(x)`` the co-moment is
    ``d^T d - (sum d)(sum d)^T / T``; the second term removes the rounding
    error left in the mean (Bjorck 1996). The deviations are formed exactly
    (so data far from zero need no shift) and the sums of products are
    accumulated in double-double (:func:`relspan.analysis._dd.exact_comoment`),
    which fills in ``mean_lo`` and ``comoment_lo``.

    Examples
    --------
    >>> import numpy as np
    >>> x = np.array([[1.0, 2.0], [2.0, 4.5], [3.0, 5.5], [4.0, 8.0]])
    >>> m = moments_of(x)
    >>> m.count, m.mean.tolist()
    (4, [2.5, 5.0])
    >>> np.round(m.comoment, 6).tolist()   # sums of products about the mean
    [[5.0, 9.5], [9.5, 18.5]]
    """
    x = np.asarray(x, dtype=float)
    if x.ndim != 2:
        raise ValueError("x must be a 2-D array of rows")
    t, n = x.shape
    if t == 0:
        return empty(n)
    mh, ml, ch, cl = _dd.exact_comoment(x)
    return Moments(int(t), mh, ch, ml, cl)


def merge(a: Moments, b: Moments) -> Moments:
    """Moments of the union of two disjoint blocks (Chan, Golub & LeVeque 1979).

    ``mean = mean_a + delta * n_b / n`` and
    ``C = C_a + C_b + delta delta^T * n_a n_b / n`` with ``delta = mean_b - mean_a``.

    Examples
    --------
    >>> import numpy as np
    >>> x = np.array([[1.0, 2.0], [2.0, 4.5], [3.0, 5.5], [4.0, 8.0]])
    >>> m = merge(moments_of(x[:1]), moments_of(x[1:]))
    >>> m.count, m.mean.tolist(), np.round(m.comoment, 6).tolist()
    (4, [2.5, 5.0], [[5.0, 9.5], [9.5, 18.5]])
    """
    if a.count == 0:
        return b
    if b.count == 0:
        return a
    tot, mh, ml, ch, cl = _dd.merge_dd(
        np.array([a.count]), a.mean[None], _lo(a.mean, a.mean_lo)[None], a.comoment[None],
        _lo(a.comoment, a.comoment_lo)[None],
        np.array([b.count]), b.mean[None], _lo(b.mean, b.mean_lo)[None], b.comoment[None],
        _lo(b.comoment, b.comoment_lo)[None])
    return Moments(int(tot[0]), mh[0], ch[0], ml[0], cl[0])


def merge_all(blocks: Iterable[Moments]) -> Moments:
    """Merge many blocks pairwise (a balanced tree keeps rounding error at O(log k))."""
    items = list(blocks)
    if not items:
        raise ValueError("merge_all needs at least one block")
    while len(items) > 1:
        nxt = [merge(items[i], items[i + 1]) for i in range(0, len(items) - 1, 2)]
        if len(items) % 2:
            nxt.append(items[-1])
        items = nxt
    return items[0]
