"""Block statistics collected in one pass, and windows assembled from them.

During the pass every analysed row falls in exactly one *block* (an "atom"):
a maximal run of consecutive rows that share the same bucket on every grid
the window plans need (see :class:`relspan.data.windows.Grid`). Each block is
reduced once to its count, mean and co-moment matrix; a window is a run of
whole blocks, merged without subtraction (Chan, Golub & LeVeque 1979) by a
segment tree evaluated for many windows at once (:func:`assemble`), which
gives the same numbers as the test oracle ``MomentTree`` (``tests/moment_oracles.py``).

Because a block's rows are always reduced together (the rows of a block that
is still open at the end of a chunk are carried into the next chunk), the
statistics do not depend on the chunk size, and CSV and Parquet copies of
the same data give bit-identical moments.

References
----------
.. [1] T. F. Chan, G. H. Golub and R. J. LeVeque, "Updating formulae and a
       pairwise algorithm for computing sample variances", Technical Report
       STAN-CS-79-773, Stanford University, 1979.
.. [2] Å. Björck, Numerical Methods for Least Squares Problems, SIAM, 1996
       (corrected two-pass algorithm).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np

from relspan.analysis.moments import Moments, moments_of

__all__ = ["BlockTable", "BlockBuilder", "assemble", "assemble_stacked", "tree_levels"]

#: runs at least this long are reduced with one BLAS product each; shorter
#: runs are reduced together, vectorised
_LONG_RUN = 64
#: windows merged together in one vectorised batch (bounds temporary memory)
_WINDOW_BATCH = 4096


@dataclass(frozen=True, slots=True, eq=False)
class BlockTable:
    """Statistics of the blocks of one dataset, in row order.

    Attributes
    ----------
    counts : (k,) int64
    means : (k, n) float
    comoments : (k, n, n) float
    first_pos, last_pos : (k,) int64
        0-based positions of a block's first and last row among analysed rows.
    first_source_row, last_source_row : (k,) int64
        The same rows as 1-based data rows of the file.
    first_time, last_time : (k,) datetime64[s] or None
        Times of those rows (None without a time column).
    origin : (n,) float
        The block means are relative to this point (the first analysed row):
        merging means near 1e8 in absolute form would lose about eight
        digits of the deviations between blocks, relative means keep them.
    """

    counts: np.ndarray
    means: np.ndarray
    comoments: np.ndarray
    first_pos: np.ndarray
    last_pos: np.ndarray
    first_source_row: np.ndarray
    last_source_row: np.ndarray
    first_time: np.ndarray | None
    last_time: np.ndarray | None
    origin: np.ndarray

    def __len__(self) -> int:
        return int(self.counts.shape[0])

    @property
    def rows(self) -> int:
        """Analysed rows in all blocks."""
        return int(self.counts.sum())

    def moments(self, i: int, *, relative: bool = False) -> Moments:
        """Block ``i`` as a :class:`Moments` (mean relative to ``origin`` if ``relative``)."""
        mean = self.means[i].copy() if relative else self.means[i] + self.origin
        return Moments(int(self.counts[i]), mean, self.comoments[i].copy())


class _Grow:
    """An append-only numpy array with amortised doubling, grown and trimmed in place.

    ``ndarray.resize`` reallocates the buffer (for large arrays the C library
    remaps the pages instead of copying them), so neither growing nor the final
    trim holds the old and the new buffer at once: the peak stays near the
    final size instead of three times it.
    """

    __slots__ = ("_a", "_n")

    def __init__(self, shape_tail: tuple[int, ...], dtype) -> None:
        self._a = np.empty((16, *shape_tail), dtype=dtype)
        self._n = 0

    def extend(self, values: np.ndarray) -> None:
        k = values.shape[0]
        if self._n + k > self._a.shape[0]:
            cap = max(2 * self._a.shape[0], self._n + k)
            self._a.resize((cap, *self._a.shape[1:]), refcheck=False)  # only we hold it
        self._a[self._n:self._n + k] = values
        self._n += k

    def get(self) -> np.ndarray:
        """The rows so far; the builder is done with the buffer afterwards."""
        a, self._a = self._a, np.empty((0, *self._a.shape[1:]), dtype=self._a.dtype)
        a.resize((self._n, *a.shape[1:]), refcheck=False)
        self._n = 0
        return a


class BlockBuilder:
    """Collect block statistics from chunks of analysed rows.

    Parameters
    ----------
    n : int
        Number of variables.
    keys : callable
        ``keys(pos, times) -> (m, K) int64``: the bucket of each row on every
        grid; a block ends where any bucket changes.
    timed : bool
        Whether rows carry times.
    """

    def __init__(self, n: int, keys: Callable[[np.ndarray, np.ndarray | None], np.ndarray], *,
                 timed: bool) -> None:
        self.n = n
        self._keys = keys
        self._timed = timed
        self._counts = _Grow((), np.int64)
        self._means = _Grow((n,), float)
        self._comoments = _Grow((n, n), float)
        self._meta = _Grow((4,), np.int64)
        self._times = _Grow((2,), np.int64)
        self._carry: tuple | None = None

    def push(self, y: np.ndarray, pos: np.ndarray, source_rows: np.ndarray,
             times: np.ndarray | None) -> None:
        """Add analysed rows (in order). ``pos`` are their 0-based positions."""
        if y.shape[0] == 0:
            return
        if self._carry is not None:
            cy, cp, cs, ct = self._carry
            y = np.concatenate([cy, y])
            pos = np.concatenate([cp, pos])
            source_rows = np.concatenate([cs, source_rows])
            if times is not None:
                times = np.concatenate([ct, times])
            self._carry = None
        keys = self._keys(pos, times)
        change = np.flatnonzero(np.any(keys[1:] != keys[:-1], axis=1)) + 1
        last = int(change[-1]) if change.size else 0
        if last:
            starts = np.concatenate([[0], change[:-1]])
            self._emit(y[:last], starts, pos[:last], source_rows[:last],
                       None if times is None else times[:last])
        self._carry = (y[last:].copy(), pos[last:].copy(), source_rows[last:].copy(),
                       None if times is None else times[last:].copy())

    def finish(self, origin: np.ndarray) -> BlockTable:
        """Close the last block and return all blocks (rows were pushed minus ``origin``)."""
        if self._carry is not None:
            cy, cp, cs, ct = self._carry
            self._carry = None
            self._emit(cy, np.array([0]), cp, cs, ct)
        meta = self._meta.get()
        t = self._times.get()
        return BlockTable(
            counts=self._counts.get(), means=self._means.get(), comoments=self._comoments.get(),
            first_pos=meta[:, 0], last_pos=meta[:, 1], first_source_row=meta[:, 2],
            last_source_row=meta[:, 3],
            first_time=t[:, 0].astype("datetime64[s]") if self._timed else None,
            last_time=t[:, 1].astype("datetime64[s]") if self._timed else None,
            origin=np.asarray(origin, dtype=float).copy())

    def _emit(self, y: np.ndarray, starts: np.ndarray, pos: np.ndarray, src: np.ndarray,
              times: np.ndarray | None) -> None:
        m, n = y.shape
        ends = np.concatenate([starts[1:], [m]])
        counts = ends - starts
        means = np.empty((starts.size, n))
        comoments = np.empty((starts.size, n, n))
        long = counts >= _LONG_RUN
        for i in np.flatnonzero(long):
            mo = moments_of(y[starts[i]:ends[i]])
            means[i] = mo.mean
            comoments[i] = mo.comoment
        short = np.flatnonzero(~long)
        # short runs of one length at a time, as a (k, L, n) stack: each block's numbers
        # depend on its own rows and length only, never on the chunk it arrived in
        for length in np.unique(counts[short]):
            sel = short[counts[short] == length]
            for p0 in range(0, sel.size, _STACK_BLOCKS):
                part = sel[p0:p0 + _STACK_BLOCKS]
                means[part], comoments[part] = _short_moments(y, starts[part], int(length))
        self._counts.extend(counts.astype(np.int64))
        self._means.extend(means)
        self._comoments.extend(comoments)
        self._meta.extend(np.stack([pos[starts], pos[ends - 1], src[starts], src[ends - 1]], axis=1))
        if self._timed and times is not None:
            ti = times.astype("datetime64[s]").astype(np.int64)
            self._times.extend(np.stack([ti[starts], ti[ends - 1]], axis=1))


def _short_moments(y: np.ndarray, starts: np.ndarray, length: int):
    """Means and co-moments of blocks of ``length`` rows starting at ``starts``.

    Per block: shift by its first row, mean, deviations, corrected two-pass
    co-moment ``d^T d - (sum d)(sum d)^T / L`` (Bjorck 1996), with the
    products for all blocks in one batched matrix multiplication.
    """
    k = starts.shape[0]
    s0 = int(starts[0])
    shift = y[starts][:, None, :]
    if int(starts[-1]) - s0 == (k - 1) * length and (k == 1 or bool(
            (np.diff(starts) == length).all())):  # back to back: a view, no gather
        rows = y[s0:s0 + k * length].reshape(k, length, -1) - shift
    else:
        rows = y[starts[:, None] + np.arange(length)] - shift   # (k, L, n)
    ones = np.ones(length)
    mz = np.matmul(ones, rows) / length  # sums through BLAS beat .sum(axis=1) here
    rows -= mz[:, None, :]
    sd = np.matmul(ones, rows)
    c = np.matmul(rows.transpose(0, 2, 1), rows)
    c -= sd[:, :, None] * sd[:, None, :] / length
    return mz + sd / length + shift[:, 0, :], 0.5 * (c + c.transpose(0, 2, 1))


#: short blocks reduced together in one stack (bounds the temporary copy of their rows)
_STACK_BLOCKS = 2048


def _merge_arrays(ca, ma, cma, cb, mb, cmb):
    """Vectorised Chan-Golub-LeVeque merge of paired statistics (a before b).

    Written with the same operations, in the same order, as
    :func:`relspan.analysis.moments.merge`, so a merge with an empty side
    returns the other side unchanged.
    """
    tot = ca + cb
    safe = np.where(tot > 0, tot, 1)
    delta = mb - ma
    mean = ma + delta * (cb / safe)[:, None]
    f = (ca * cb) / safe
    cm = cma + cmb + delta[:, :, None] * delta[:, None, :] * f[:, None, None]
    return tot, mean, cm


def tree_levels(blocks: BlockTable) -> list[tuple[np.ndarray, np.ndarray, np.ndarray]]:
    """The segment tree over the blocks, level by level (pairwise merges, no subtraction)."""
    c, m, cm = blocks.counts.astype(np.int64), blocks.means, blocks.comoments
    levels = [(c, m, cm)]
    while c.shape[0] > 1:
        k = c.shape[0]
        e = k - (k % 2)
        nc, nm, ncm = _merge_arrays(c[0:e:2], m[0:e:2], cm[0:e:2], c[1:e:2], m[1:e:2], cm[1:e:2])
        if k % 2:
            nc = np.concatenate([nc, c[-1:]])
            nm = np.concatenate([nm, m[-1:]])
            ncm = np.concatenate([ncm, cm[-1:]])
        c, m, cm = nc, nm, ncm
        levels.append((c, m, cm))
    return levels


def assemble(blocks: BlockTable, lo: np.ndarray, hi: np.ndarray, *,
             relative: bool = False) -> list[Moments]:
    """Moments of many windows, each the run of blocks ``lo[i] .. hi[i]-1``, as objects.

    :func:`assemble_stacked` (the same numbers) returned as one
    :class:`Moments` per window; see there for the parameters.
    """
    c, m, cm = assemble_stacked(blocks, lo, hi, relative=relative)
    return [Moments(int(c[j]), m[j].copy(), cm[j].copy()) for j in range(c.shape[0])]


def assemble_stacked(blocks: BlockTable, lo: np.ndarray, hi: np.ndarray, *,
                     relative: bool = False,
                     levels: list | None = None) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Moments of many windows, each the run of blocks ``lo[i] .. hi[i]-1``.

    A segment tree over the blocks is built once (pairwise merges, level by
    level) and queried for all windows together: O(log k) vectorised merges
    per window, no subtraction, the same result as
    ``MomentTree(blocks).query(lo, hi)``.

    Parameters
    ----------
    blocks : BlockTable
    lo, hi : (w,) int arrays
        Half-open block ranges, ``0 <= lo < hi <= len(blocks)``.
    relative : bool
        Return means relative to ``blocks.origin`` (as merged) instead of absolute.
    levels : list, optional
        The tree from :func:`tree_levels` (built here when not given; pass it
        to share one tree between several calls).

    Returns
    -------
    counts (w,) int64, means (w, n), comoments (w, n, n)
        Stacked: 8 (1 + n + n^2) bytes per window, no Python object per window.
    """
    lo = np.asarray(lo, dtype=np.int64)
    hi = np.asarray(hi, dtype=np.int64)
    n = blocks.means.shape[1]
    if lo.size == 0:
        return np.zeros(0, np.int64), np.zeros((0, n)), np.zeros((0, n, n))
    if np.any(lo < 0) or np.any(hi > len(blocks)) or np.any(lo >= hi):
        raise IndexError("block ranges must satisfy 0 <= lo < hi <= number of blocks")
    levels = tree_levels(blocks) if levels is None else levels
    out_c = np.empty(lo.size, np.int64)
    out_m = np.empty((lo.size, n))
    out_cm = np.empty((lo.size, n, n))
    for b0 in range(0, lo.size, _WINDOW_BATCH):
        L = lo[b0:b0 + _WINDOW_BATCH].copy()
        H = hi[b0:b0 + _WINDOW_BATCH].copy()
        w = L.size
        lc, lm, lcm = np.zeros(w, np.int64), np.zeros((w, n)), np.zeros((w, n, n))
        rc, rm, rcm = np.zeros(w, np.int64), np.zeros((w, n)), np.zeros((w, n, n))
        for c, m, cm in levels:
            if not np.any(L < H):
                break
            take = (L < H) & (L % 2 == 1)
            if take.any():
                i = L[take]
                lc[take], lm[take], lcm[take] = _merge_arrays(lc[take], lm[take], lcm[take],
                                                              c[i], m[i], cm[i])
                L[take] += 1
            take = (L < H) & (H % 2 == 1)
            if take.any():
                H[take] -= 1
                i = H[take]
                rc[take], rm[take], rcm[take] = _merge_arrays(c[i], m[i], cm[i],
                                                              rc[take], rm[take], rcm[take])
            L //= 2
            H //= 2
        tc, tm, tcm = _merge_arrays(lc, lm, lcm, rc, rm, rcm)
        if not relative:
            tm = tm + blocks.origin
        out_c[b0:b0 + w], out_m[b0:b0 + w], out_cm[b0:b0 + w] = tc, tm, tcm
    return out_c, out_m, out_cm
