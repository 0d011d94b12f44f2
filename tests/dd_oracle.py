"""The first version of :func:`relspan.analysis._dd.exact_comoment` (commit 055e2ee), frozen.

The in-place version in the package must give the same bits: the block and granule statistics,
and through them the cache key's results and every published digit, rest on them.
"""

from __future__ import annotations

import numpy as np

from relspan.analysis._dd import dd_add, dd_div_float, fast_two_sum, finite_lo, two_sum


def exact_comoment_oracle(y: np.ndarray, ones: np.ndarray | None = None):
    """Mean and co-moment of the rows of each block, as double-doubles.

    Parameters
    ----------
    y : (L, n) or (k, L, n) ndarray
        Rows of one block, or of k blocks of the same length L (finite).

    Returns
    -------
    mean_hi, mean_lo : (n,) or (k, n)
    comoment_hi, comoment_lo : (n, n) or (k, n, n)
        ``sum_t (y_t - mean)(y_t - mean)^T`` to about 2^-100 relative to the
        sum of squares of the deviations (symmetric).

    Notes
    -----
    A float mean ``m`` is taken first and the deviations ``y - m`` are
    formed exactly as ``dh + dl`` (TwoSum). Each column of ``dh`` is split
    at a power of two chosen from its largest entry and the block length
    (Ozaki et al. 2012), ``dh = a + r`` with ``a`` so short that the
    matrix product ``a^T a`` and the column sums of ``a`` are exact in any
    summation order (so BLAS may compute them); the products involving the
    small remainders ``r + dl`` are rounded, which costs about 2^-72 of the
    result. The co-moment about the exact mean is then
    ``sum (y - m)(y - m)^T - s s^T / L`` with ``s = sum (y - m)``
    (corrected two-pass algorithm, Bjorck 1996).
    """
    stacked = y.ndim == 3
    if not stacked:
        y = y[None]
    k, length, n = y.shape
    if ones is None:
        ones = np.ones(length)
    m = np.matmul(ones, y) / length                    # (k, n) float mean
    dh, dl = two_sum(y, -m[:, None, :])                # exact deviations dh + dl
    mu = np.max(np.abs(dh), axis=1)                    # (k, n)
    _, ex = np.frexp(mu)
    # a * a products have <= 2 (52 - beta) bits; L of them must add up exactly in 53 bits
    beta = (53 + int(np.ceil(np.log2(max(length, 1)))) + 1) // 2 + 1
    with np.errstate(over="ignore", invalid="ignore"):
        sigma = np.ldexp(1.0, ex + beta)[:, None, :]
        a = (dh + sigma) - sigma
        bad = ~np.isfinite(sigma)
        if bad.any():                                  # out of range: no split there
            a = np.where(bad, 0.0, a)
    r = (dh - a) + dl                                  # dh - a is exact
    at = a.transpose(0, 2, 1)
    s1 = np.matmul(at, a)                              # exact
    x = np.matmul(at, r)
    s2 = x + x.transpose(0, 2, 1) + np.matmul(r.transpose(0, 2, 1), r)
    c_hi, c_lo = two_sum(s1, s2)
    sa = np.matmul(ones, a)                            # exact column sums
    sr = np.matmul(ones, r)
    sh, sl = two_sum(sa, sr)
    s = sh + sl
    c_lo = c_lo - s[:, :, None] * s[:, None, :] / length
    c_hi, c_lo = fast_two_sum(c_hi, c_lo)
    c_lo = 0.5 * (c_lo + c_lo.transpose(0, 2, 1))      # symmetric to the last bit
    qh, ql = dd_div_float(sh, sl, float(length))
    mh, ml = dd_add(m, np.zeros_like(m), qh, ql)
    ml = finite_lo(ml)
    c_lo = finite_lo(c_lo)
    if not stacked:
        return mh[0], ml[0], c_hi[0], c_lo[0]
    return mh, ml, c_hi, c_lo
