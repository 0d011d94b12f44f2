"""Double-double arithmetic on numpy arrays: error-free transformations and friends.

A double-double number is an unevaluated sum ``hi + lo`` of two float64 with
``hi = fl(hi + lo)``; it carries about 106 significant bits. Everything here
is elementwise numpy (broadcasting), uses only IEEE-754 round-to-nearest
additions and multiplications (no fused multiply-add, no extended registers),
and so gives the same bits on every machine.

Values must stay well inside the float range: the splitting constant
multiplies by 2^27 + 1, so magnitudes above about 1e300 overflow (the
callers keep data relative to a nearby origin; a non-finite low part is
reset to 0 by :func:`finite_lo`, which degrades to plain float64 accuracy).

References
----------
.. [1] T. J. Dekker, "A floating-point technique for extending the available
       precision", Numerische Mathematik 18, 224-242, 1971.
.. [2] D. E. Knuth, The Art of Computer Programming, vol. 2, 3rd ed.,
       Addison-Wesley, 1997, sec. 4.2.2 (TwoSum).
.. [3] T. Ogita, S. M. Rump and S. Oishi, "Accurate sum and dot product",
       SIAM J. Sci. Comput. 26(6), 1955-1988, 2005.
.. [4] K. Ozaki, T. Ogita, S. Oishi and S. M. Rump, "Error-free
       transformations of matrix multiplication by using fast routines of
       matrix multiplication and its applications", Numerical Algorithms
       59(1), 95-118, 2012.
"""

from __future__ import annotations

import numpy as np

_SPLITTER = 134217729.0  # 2^27 + 1 (Dekker / Veltkamp splitting)


def two_sum(a, b):
    """``(s, e)`` with ``s = fl(a + b)`` and ``a + b = s + e`` exactly (Knuth)."""
    s = a + b
    bb = s - a
    e = (a - (s - bb)) + (b - bb)
    return s, e


def fast_two_sum(a, b):
    """``(s, e)`` as :func:`two_sum`, valid when ``|a| >= |b|`` (or a is 0) (Dekker)."""
    s = a + b
    e = b - (s - a)
    return s, e


def split(a):
    """``(hi, lo)`` with ``a = hi + lo`` and each part at most 26 significant bits (Veltkamp)."""
    c = _SPLITTER * a
    hi = c - (c - a)
    return hi, a - hi


def two_prod_split(a, ah, al, b, bh, bl):
    """``(p, e)`` with ``p = fl(a b)`` and ``a b = p + e`` exactly, from pre-split operands."""
    p = a * b
    e = ((ah * bh - p) + ah * bl + al * bh) + al * bl
    return p, e


def two_prod(a, b):
    """``(p, e)`` with ``p = fl(a b)`` and ``a b = p + e`` exactly (Dekker)."""
    ah, al = split(a)
    bh, bl = split(b)
    return two_prod_split(a, ah, al, b, bh, bl)


def dd_add(ah, al, bh, bl):
    """Double-double sum ``(ah + al) + (bh + bl)``, normalised (accurate even with cancellation)."""
    s, e = two_sum(ah, bh)
    t, f = two_sum(al, bl)
    e = e + t
    s, e = fast_two_sum(s, e)
    e = e + f
    return fast_two_sum(s, e)


def dd_mul(ah, al, bh, bl):
    """Double-double product ``(ah + al)(bh + bl)``, normalised."""
    p, e = two_prod(ah, bh)
    e = e + (ah * bl + al * bh)
    return fast_two_sum(p, e)


def dd_div_float(ah, al, b):
    """Double-double quotient ``(ah + al) / b`` for a float64 ``b != 0``, normalised."""
    q1 = ah / b
    p, e = two_prod(q1, b)
    r = ((ah - p) - e) + al   # ah - p is exact (Sterbenz): p is within an ulp of ah
    q2 = r / b
    return fast_two_sum(q1, q2)


def ratio(num, den):
    """``num / den`` as a double-double for whole numbers below 2^53 (``den > 0``)."""
    num = np.asarray(num, dtype=float)
    return dd_div_float(num, np.zeros_like(num), den)


def finite_lo(lo):
    """Low parts that overflowed (non-finite) become 0: plain float64 accuracy there."""
    return np.where(np.isfinite(lo), lo, 0.0)


def exact_comoment(y: np.ndarray, ones: np.ndarray | None = None):
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
    # exact deviations dh + dl = y - m (TwoSum, Knuth), in three (k, L, n) buffers reused in
    # place: the same operations in the same order as two_sum(y, -m), so the same bits
    neg = -m[:, None, :]
    dh = np.add(y, neg)                                # s = y + (-m)
    t = np.subtract(dh, y)                             # bb = s - y
    dl = np.subtract(dh, t)                            # s - bb
    np.subtract(y, dl, out=dl)                         # y - (s - bb)
    np.subtract(neg, t, out=t)                         # (-m) - bb
    np.add(dl, t, out=dl)                              # e
    mu = np.max(np.abs(dh, out=t), axis=1)             # (k, n)
    _, ex = np.frexp(mu)
    # a * a products have <= 2 (52 - beta) bits; L of them must add up exactly in 53 bits
    beta = (53 + int(np.ceil(np.log2(max(length, 1)))) + 1) // 2 + 1
    with np.errstate(over="ignore", invalid="ignore"):
        sigma = np.ldexp(1.0, ex + beta)[:, None, :]
        a = np.add(dh, sigma, out=t)
        np.subtract(a, sigma, out=a)
        bad = ~np.isfinite(sigma)
        if bad.any():                                  # out of range: no split there
            a[np.broadcast_to(bad, a.shape)] = 0.0
    r = np.subtract(dh, a, out=dh)                     # dh - a is exact
    np.add(r, dl, out=r)
    del dl
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


def merge_dd(ca, mah, mal, cah, cal, cb, mbh, mbl, cbh, cbl):
    """Chan-Golub-LeVeque merge of paired stacked statistics in double-double (a before b).

    ``ca, cb`` are ``(w,)`` counts (whole numbers as float or int), means
    ``(w, n)`` and co-moments ``(w, n, n)`` as ``hi, lo`` pairs. Returns
    ``tot, mean_hi, mean_lo, com_hi, com_lo`` for
    ``mean = mean_a + delta n_b / n`` and
    ``C = C_a + C_b + delta delta^T n_a n_b / n``, ``delta = mean_b - mean_a``.
    A side with count 0 leaves the other side's numbers unchanged.
    """
    ca = np.asarray(ca)
    cb = np.asarray(cb)
    tot = ca + cb
    safe = np.where(tot > 0, tot, 1).astype(float)
    dh, dl = two_sum(mbh, -mah)
    dl = dl + (mbl - mal)
    dh, dl = fast_two_sum(dh, dl)
    wh, wl = ratio(cb, safe)
    ph, pl = dd_mul(dh, dl, wh[:, None], wl[:, None])
    mh, ml = dd_add(mah, mal, ph, pl)
    fh, fl = ratio(np.asarray(ca, dtype=float) * cb, safe)   # products of counts < 2^53: exact
    uh, ul = dd_mul(dh, dl, fh[:, None], fl[:, None])        # u = delta f, per variable
    ush, usl = split(uh)
    dsh, dsl = split(dh)
    th, tl = two_prod_split(uh[:, :, None], ush[:, :, None], usl[:, :, None],
                            dh[:, None, :], dsh[:, None, :], dsl[:, None, :])
    tl = tl + (uh[:, :, None] * dl[:, None, :] + ul[:, :, None] * dh[:, None, :])
    # u_i delta_k and u_k delta_i agree to about 2^-104: keep the upper triangle, mirror it
    n = dh.shape[1]
    if n > 1:
        iu, ju = np.triu_indices(n, 1)
        th[:, ju, iu] = th[:, iu, ju]
        tl[:, ju, iu] = tl[:, iu, ju]
    # the three parts are added with one TwoSum each and the low parts in float: their
    # rounding is about 2^-106 of |C_a| + |C_b| + |term| (Dekker 1971, add2)
    ch, e = two_sum(cah, cbh)
    ch, e2 = two_sum(ch, th)
    ch, cl = fast_two_sum(ch, ((e + e2) + (cal + cbl)) + tl)
    return tot, mh, finite_lo(ml), ch, finite_lo(cl)


def dot2_residual(ah, al, x):
    """``I - (ah + al) x`` for square matrices, accurate as if computed in double the precision.

    Products by TwoProduct, summed pairwise by TwoSum with every rounding
    error gathered (Ogita, Rump & Oishi 2005, Dot2); rounded to float64 at
    the end.
    """
    n = ah.shape[0]
    p, e = two_prod(ah[:, :, None], x[None, :, :])            # (i, k, j): ah_ik x_kj = p + e
    comp = -(e.sum(axis=1) + np.matmul(al, x))               # small terms, rounded
    terms = np.concatenate([np.eye(n)[:, None, :], -p], axis=1)
    while terms.shape[1] > 1:
        k = terms.shape[1]
        even = k - (k % 2)
        s, err = two_sum(terms[:, 0:even:2], terms[:, 1:even:2])
        comp = comp + err.sum(axis=1)
        terms = np.concatenate([s, terms[:, even:]], axis=1) if k % 2 else s
    return terms[:, 0] + comp
