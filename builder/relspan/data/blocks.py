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

Means and co-moments are double-doubles (a float64 value and a float64 low
part; :mod:`relspan.analysis._dd`), reduced and merged with error-free
transformations, so a window's covariance is known to far more digits than
float64 holds and the analysis can refine its solves against it.

References
----------
.. [1] T. F. Chan, G. H. Golub and R. J. LeVeque, "Updating formulae and a
       pairwise algorithm for computing sample variances", Technical Report
       STAN-CS-79-773, Stanford University, 1979.
.. [2] Å. Björck, Numerical Methods for Least Squares Problems, SIAM, 1996
       (corrected two-pass algorithm).
.. [3] T. J. Dekker, "A floating-point technique for extending the available
       precision", Numerische Mathematik 18, 224-242, 1971.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np

from relspan.analysis import _dd
from relspan.analysis.moments import Moments

__all__ = ["BlockTable", "BlockBuilder", "assemble", "assemble_stacked", "tree_levels", "GRANULE_CAP",
           "GranuleTable", "GranuleBuilder", "granulate", "granule_rows_for"]

#: runs at least this long are reduced with one BLAS product each; shorter
#: runs are reduced together, vectorised
_LONG_RUN = 64
#: windows merged together in one vectorised batch (bounds temporary memory)
_WINDOW_BATCH = 512


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
    means_lo : (k, n) float or None
    comoments_lo : (k, n, n) float or None
        Low-order parts (``means + means_lo`` and ``comoments + comoments_lo``
        are double-doubles); None reads as zeros.
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
    means_lo: np.ndarray | None = None
    comoments_lo: np.ndarray | None = None

    def __len__(self) -> int:
        return int(self.counts.shape[0])

    @property
    def rows(self) -> int:
        """Analysed rows in all blocks."""
        return int(self.counts.sum())

    def moments(self, i: int, *, relative: bool = False) -> Moments:
        """Block ``i`` as a :class:`Moments` (mean relative to ``origin`` if ``relative``)."""
        mlo = np.zeros(self.means.shape[1]) if self.means_lo is None else self.means_lo[i].copy()
        clo = (np.zeros_like(self.comoments[i]) if self.comoments_lo is None
               else self.comoments_lo[i].copy())
        mean = self.means[i].copy()
        if not relative:
            mean, mlo = _dd.dd_add(mean, mlo, self.origin, np.zeros_like(mlo))
        return Moments(int(self.counts[i]), mean, self.comoments[i].copy(), mlo, clo)


class _Grow:
    """An append-only numpy array with amortised doubling, grown and trimmed in place.

    ``ndarray.resize`` reallocates the buffer (for large arrays the C library
    remaps the pages instead of copying them), so neither growing nor the final
    trim holds the old and the new buffer at once: the peak stays near the
    final size instead of three times it.
    """

    __slots__ = ("_a", "_n", "_factor")

    def __init__(self, shape_tail: tuple[int, ...], dtype, factor: float = 2.0) -> None:
        self._a = np.empty((16, *shape_tail), dtype=dtype)
        self._n = 0
        self._factor = factor

    def __len__(self) -> int:
        return self._n

    def view(self) -> np.ndarray:
        """The rows so far, as a writable view (valid until the next extend)."""
        return self._a[:self._n]

    def truncate(self, k: int) -> None:
        """Keep the first ``k`` rows (the buffer keeps its size for later rows)."""
        self._n = min(int(k), self._n)

    def extend(self, values: np.ndarray) -> None:
        k = values.shape[0]
        if self._n + k > self._a.shape[0]:
            cap = max(int(self._factor * self._a.shape[0]), self._n + k, 16)
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
                 timed: bool, packed: bool = False, growth: float = 2.0) -> None:
        # packed (granules): co-moments stored as their upper triangle and no low parts
        self.n = n
        self._keys = keys
        self._timed = timed
        self._tri = np.triu_indices(n) if packed else None
        tail = (n * (n + 1) // 2,) if packed else (n, n)
        self._counts = _Grow((), np.int64, growth)
        self._means = _Grow((n,), float, growth)
        self._comoments = _Grow(tail, float, growth)
        self._means_lo = None if packed else _Grow((n,), float, growth)
        self._comoments_lo = None if packed else _Grow(tail, float, growth)
        self._meta = _Grow((4,), np.int64, growth)
        self._times = _Grow((2,), np.int64, growth)
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

    def flush(self) -> None:
        """Close the open block (the next row starts a new one whatever its bucket)."""
        if self._carry is not None:
            cy, cp, cs, ct = self._carry
            self._carry = None
            self._emit(cy, np.array([0]), cp, cs, ct)

    def finish(self, origin: np.ndarray) -> BlockTable:
        """Close the last block and return all blocks (rows were pushed minus ``origin``)."""
        if self._tri is not None:
            raise TypeError("a packed builder is read by its owner (GranuleBuilder), not finished")
        self.flush()
        meta = self._meta.get()
        t = self._times.get()
        return BlockTable(
            counts=self._counts.get(), means=self._means.get(), comoments=self._comoments.get(),
            first_pos=meta[:, 0], last_pos=meta[:, 1], first_source_row=meta[:, 2],
            last_source_row=meta[:, 3],
            first_time=t[:, 0].astype("datetime64[s]") if self._timed else None,
            last_time=t[:, 1].astype("datetime64[s]") if self._timed else None,
            origin=np.asarray(origin, dtype=float).copy(), means_lo=self._means_lo.get(),
            comoments_lo=self._comoments_lo.get())

    def _emit(self, y: np.ndarray, starts: np.ndarray, pos: np.ndarray, src: np.ndarray,
              times: np.ndarray | None) -> None:
        m, n = y.shape
        ends = np.concatenate([starts[1:], [m]])
        counts = ends - starts
        means = np.empty((starts.size, n))
        comoments = np.empty((starts.size, n, n))
        means_lo = np.empty((starts.size, n))
        comoments_lo = np.empty((starts.size, n, n))
        # granules (packed) are stacked whatever their length: a block's numbers are the same
        # alone or in a stack (exact_comoment treats one block as a stack of one)
        long = (counts >= _LONG_RUN) if self._tri is None else np.zeros(counts.size, bool)
        for i in np.flatnonzero(long):
            means[i], means_lo[i], comoments[i], comoments_lo[i] = _dd.exact_comoment(
                y[starts[i]:ends[i]])
        short = np.flatnonzero(~long)
        # short runs of one length at a time, as a (k, L, n) stack: each block's numbers
        # depend on its own rows and length only, never on the chunk it arrived in
        for length in np.unique(counts[short]):
            sel = short[counts[short] == length]
            per = _stack_blocks(int(length), n)
            for p0 in range(0, sel.size, per):
                part = sel[p0:p0 + per]
                (means[part], means_lo[part], comoments[part],
                 comoments_lo[part]) = _short_moments(y, starts[part], int(length))
        self._counts.extend(counts.astype(np.int64))
        self._means.extend(means)
        if self._tri is not None:
            self._comoments.extend(comoments[:, self._tri[0], self._tri[1]])
        else:
            self._comoments.extend(comoments)
            self._means_lo.extend(means_lo)
            self._comoments_lo.extend(comoments_lo)
        self._meta.extend(np.stack([pos[starts], pos[ends - 1], src[starts], src[ends - 1]], axis=1))
        if self._timed and times is not None:
            ti = times.astype("datetime64[s]").astype(np.int64)
            self._times.extend(np.stack([ti[starts], ti[ends - 1]], axis=1))


def _short_moments(y: np.ndarray, starts: np.ndarray, length: int):
    """Double-double means and co-moments of blocks of ``length`` rows starting at ``starts``.

    Per block, the corrected two-pass co-moment ``d^T d - (sum d)(sum d)^T / L``
    (Bjorck 1996) with exact deviations and double-double sums
    (:func:`relspan.analysis._dd.exact_comoment`), all blocks in one stack
    ``(k, L, n)`` through batched matrix products.

    Returns
    -------
    means, means_lo (k, n), comoments, comoments_lo (k, n, n)
    """
    k = starts.shape[0]
    s0 = int(starts[0])
    if int(starts[-1]) - s0 == (k - 1) * length and (k == 1 or bool(
            (np.diff(starts) == length).all())):  # back to back: a view, no gather
        rows = y[s0:s0 + k * length].reshape(k, length, -1)
    else:
        rows = y[starts[:, None] + np.arange(length)]   # (k, L, n)
    if length == 1:  # one row: its own mean, no spread
        m = rows[:, 0, :].copy()
        z = np.zeros((k, m.shape[1], m.shape[1]))
        return m, np.zeros_like(m), z, z.copy()
    return _dd.exact_comoment(rows)


#: short blocks reduced together in one stack (bounds the temporary copy of their rows)
_STACK_BLOCKS = 2048
#: bytes of temporaries one stack may use (about a dozen (n, n) and eight (L, n) arrays per block)
_STACK_BYTES = 1 << 21


def _stack_blocks(length: int, n: int) -> int:
    """Blocks of ``length`` rows reduced in one stack: at most ``_STACK_BLOCKS`` and about ``_STACK_BYTES``.

    Each block's numbers depend on its own rows only, so the stack size changes
    memory and speed, never a result.
    """
    per_block = 8 * (12 * n * n + 8 * length * n)
    return max(1, min(_STACK_BLOCKS, _STACK_BYTES // per_block))


def _merge_arrays(ca, ma, mla, cma, cmla, cb, mb, mlb, cmb, cmlb):
    """Vectorised Chan-Golub-LeVeque merge of paired statistics (a before b), in double-double.

    The same arithmetic as :func:`relspan.analysis.moments.merge`, so a
    merge with an empty side returns the other side unchanged.
    """
    tot, m, ml, cm, cml = _dd.merge_dd(ca, ma, mla, cma, cmla, cb, mb, mlb, cmb, cmlb)
    return tot.astype(np.int64), m, ml, cm, cml


def _lo_parts(blocks: BlockTable) -> tuple[np.ndarray, np.ndarray]:
    ml = np.zeros_like(blocks.means) if blocks.means_lo is None else blocks.means_lo
    cml = np.zeros_like(blocks.comoments) if blocks.comoments_lo is None else blocks.comoments_lo
    return ml, cml


def tree_levels(blocks: BlockTable) -> list[tuple[np.ndarray, ...]]:
    """The segment tree over the blocks, level by level (pairwise merges, no subtraction).

    Each level is ``(counts, means, means_lo, comoments, comoments_lo)``.
    """
    ml, cml = _lo_parts(blocks)
    level = (blocks.counts.astype(np.int64), blocks.means, ml, blocks.comoments, cml)
    levels = [level]
    while level[0].shape[0] > 1:
        k = level[0].shape[0]
        e = k - (k % 2)
        nxt = _merge_arrays(*(a[0:e:2] for a in level), *(a[1:e:2] for a in level))
        if k % 2:
            nxt = tuple(np.concatenate([a, b[-1:]]) for a, b in zip(nxt, level))
        level = nxt
        levels.append(level)
    return levels


def assemble(blocks: BlockTable, lo: np.ndarray, hi: np.ndarray, *,
             relative: bool = False) -> list[Moments]:
    """Moments of many windows, each the run of blocks ``lo[i] .. hi[i]-1``, as objects.

    :func:`assemble_stacked` (the same numbers) returned as one
    :class:`Moments` per window; see there for the parameters.
    """
    c, m, cm, ml, cml = assemble_stacked(blocks, lo, hi, relative=relative, low=True)
    return [Moments(int(c[j]), m[j].copy(), cm[j].copy(), ml[j].copy(), cml[j].copy())
            for j in range(c.shape[0])]


def assemble_stacked(blocks: BlockTable, lo: np.ndarray, hi: np.ndarray, *,
                     relative: bool = False, levels: list | None = None,
                     low: bool = False) -> tuple[np.ndarray, ...]:
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
    low : bool
        Also return the low-order parts of the means and co-moments.

    Returns
    -------
    counts (w,) int64, means (w, n), comoments (w, n, n)
        Stacked: 8 (1 + n + n^2) bytes per window, no Python object per window;
        with ``low``, then also ``means_lo (w, n)`` and ``comoments_lo (w, n, n)``.
    """
    lo = np.asarray(lo, dtype=np.int64)
    hi = np.asarray(hi, dtype=np.int64)
    n = blocks.means.shape[1]
    if lo.size == 0:
        out = (np.zeros(0, np.int64), np.zeros((0, n)), np.zeros((0, n, n)))
        return out + (np.zeros((0, n)), np.zeros((0, n, n))) if low else out
    if np.any(lo < 0) or np.any(hi > len(blocks)) or np.any(lo >= hi):
        raise IndexError("block ranges must satisfy 0 <= lo < hi <= number of blocks")
    levels = tree_levels(blocks) if levels is None else levels
    out_c = np.empty(lo.size, np.int64)
    out_m, out_ml = np.empty((lo.size, n)), np.empty((lo.size, n))
    out_cm, out_cml = np.empty((lo.size, n, n)), np.empty((lo.size, n, n))

    def zeros(w):
        return (np.zeros(w, np.int64), np.zeros((w, n)), np.zeros((w, n)), np.zeros((w, n, n)),
                np.zeros((w, n, n)))

    for b0 in range(0, lo.size, _WINDOW_BATCH):
        L = lo[b0:b0 + _WINDOW_BATCH].copy()
        H = hi[b0:b0 + _WINDOW_BATCH].copy()
        w = L.size
        left, right = zeros(w), zeros(w)
        for level in levels:
            if not np.any(L < H):
                break
            take = (L < H) & (L % 2 == 1)
            if take.any():
                i = L[take]
                merged = _merge_arrays(*(a[take] for a in left), *(a[i] for a in level))
                for a, v in zip(left, merged):
                    a[take] = v
                L[take] += 1
            take = (L < H) & (H % 2 == 1)
            if take.any():
                H[take] -= 1
                i = H[take]
                merged = _merge_arrays(*(a[i] for a in level), *(a[take] for a in right))
                for a, v in zip(right, merged):
                    a[take] = v
            L //= 2
            H //= 2
        tc, tm, tml, tcm, tcml = _merge_arrays(*left, *right)
        if not relative:
            tm, tml = _dd.dd_add(tm, tml, blocks.origin[None, :], np.zeros((1, n)))
        sl = slice(b0, b0 + w)
        out_c[sl], out_m[sl], out_ml[sl], out_cm[sl], out_cml[sl] = tc, tm, tml, tcm, tcml
    if low:
        return out_c, out_m, out_cm, out_ml, out_cml
    return out_c, out_m, out_cm


# --------------------------------------------------------------------------------------------
# Granules: the fine units that resampling draws from
# --------------------------------------------------------------------------------------------

#: about this many granules per dataset at most (granule rows double until they fit)
GRANULE_CAP = 16384


@dataclass(frozen=True, slots=True, eq=False)
class GranuleTable:
    """Fine block statistics for resampling: runs of ``rows_per_granule`` rows.

    Granules are the common refinement of the plan grid (so every window is a
    run of whole granules) and of a grid of ``rows_per_granule`` rows counted
    from the first analysed row. A resample of a window is a merge of its
    granules, drawn with replacement (see :mod:`relspan.analysis.resample`).

    Attributes
    ----------
    table : BlockTable
        The granules' statistics, in row order (means relative to ``table.origin``).
    rows_per_granule : int
        ``g``: a granule holds at most ``g`` rows (fewer where a plan boundary
        or the end of the data cuts it). 1 means one row per granule.
    cap : int
        The most granules aimed at; ``g`` is the smallest power of two that keeps
        the count near or below it.

    Notes
    -----
    With ``g = 1`` a resample draws rows (iid) or runs of rows (blocks). With
    ``g > 1`` the rows inside a granule always stay together, so (a) the iid
    bootstrap becomes a bootstrap of non-overlapping blocks of ``g`` rows,
    (b) moving or stationary blocks start and end only at granule boundaries
    (block lengths are multiples of ``g`` rows and only one start in ``g`` is
    possible), and (c) the automatic block length is estimated from the
    series of granule means, which does not see dependence within a granule.
    All three leave the resampled covariance valid for dependence shorter than
    a block; they cost some efficiency, and (a) adds mild variance when rows
    are independent.
    """

    table: BlockTable
    rows_per_granule: int
    cap: int

    def __len__(self) -> int:
        return len(self.table)

    @property
    def note(self) -> str:
        """One sentence for the output stating the granule size and what it approximates."""
        g = self.rows_per_granule
        if g == 1:
            return "Resampling draws single rows (one row per granule): nothing is approximated."
        return (f"Resampling draws granules of up to {g} consecutive rows (at most about {self.cap} "
                "granules per dataset): rows inside a granule stay together, blocks start only at "
                "granule boundaries and the block length is estimated from granule means.")

    def span(self, first_pos: int, last_pos: int) -> tuple[int, int]:
        """Half-open granule range ``[lo, hi)`` covering analysed rows ``first_pos .. last_pos`` (0-based).

        Raises
        ------
        ValueError
            When the rows do not start and end on granule boundaries (they
            always do for windows of plans the granules were built for).
        """
        fp = self.table.first_pos
        lo = int(np.searchsorted(fp, first_pos, side="left"))
        hi = int(np.searchsorted(fp, last_pos, side="right"))
        if lo >= hi or fp[lo] != first_pos or int(self.table.last_pos[hi - 1]) != last_pos:
            raise ValueError(f"rows {first_pos}..{last_pos} do not start and end on granule "
                             "boundaries; build the granules on the same window plans")
        return lo, hi


def granule_rows_for(rows: int, cap: int = GRANULE_CAP) -> int:
    """Smallest power of two ``g`` with ``ceil(rows / g) <= cap``."""
    if cap < 1:
        raise ValueError("cap must be at least 1")
    g = 1
    while -(-rows // g) > cap:
        g *= 2
    return g


def _merge_packed(ca, mah, mal, cah, cal, cb, mbh, mbl, cbh, cbl, tri):
    """:func:`relspan.analysis._dd.merge_dd` on co-moments packed as their upper triangle.

    ``cah, cal, cbh, cbl`` are ``(w, p)`` with ``p = n (n + 1) / 2`` entries
    ``(i, j), i <= j`` in ``tri`` order. Every entry gets exactly the
    arithmetic ``merge_dd`` gives the same entry of the full matrix (which
    computes the upper triangle and mirrors it), so unpacking the result gives
    the full merge bit for bit.
    """
    i, j = tri
    ca = np.asarray(ca)
    cb = np.asarray(cb)
    tot = ca + cb
    safe = np.where(tot > 0, tot, 1).astype(float)
    dh, dl = _dd.two_sum(mbh, -mah)
    dl = dl + (mbl - mal)
    dh, dl = _dd.fast_two_sum(dh, dl)
    wh, wl = _dd.ratio(cb, safe)
    ph, pl = _dd.dd_mul(dh, dl, wh[:, None], wl[:, None])
    mh, ml = _dd.dd_add(mah, mal, ph, pl)
    fh, fl = _dd.ratio(np.asarray(ca, dtype=float) * cb, safe)
    uh, ul = _dd.dd_mul(dh, dl, fh[:, None], fl[:, None])
    ush, usl = _dd.split(uh)
    dsh, dsl = _dd.split(dh)
    th, tl = _dd.two_prod_split(uh[:, i], ush[:, i], usl[:, i], dh[:, j], dsh[:, j], dsl[:, j])
    tl = tl + (uh[:, i] * dl[:, j] + ul[:, i] * dh[:, j])
    ch, e = _dd.two_sum(cah, cbh)
    ch, e2 = _dd.two_sum(ch, th)
    ch, cl = _dd.fast_two_sum(ch, ((e + e2) + (cal + cbl)) + tl)
    return tot.astype(np.int64), mh, _dd.finite_lo(ml), ch, _dd.finite_lo(cl)


def _unpack(packed: np.ndarray, n: int) -> np.ndarray:
    """``(k, p)`` upper triangles -> ``(k, n, n)`` symmetric matrices."""
    i, j = np.triu_indices(n)
    out = np.empty((packed.shape[0], n, n))
    out[:, i, j] = packed
    out[:, j, i] = packed
    return out


#: granule pairs merged (and rows moved) at a time when the granules coarsen (bounds temporaries)
_COARSEN_BATCH = 256


class GranuleBuilder:
    """Collect granule statistics in the same pass as the blocks, with a bounded count.

    Granules start at one row each. Whenever the pass reaches row
    ``cap * g`` the granules so far are merged in pairs (``g`` doubles), so
    memory stays near ``cap`` granules whatever the number of rows, and the
    result does not depend on the chunk size (the switch happens at fixed
    row positions, and a granule is always the two-pass reduction of its own
    rows or a merge of two such).

    Memory: one table of granules, grown by a quarter at a time and coarsened
    in place (pairs merged in batches, rows moved down), co-moments packed as
    upper triangles, no double-double low parts: a granule is a float64
    value, and a merge of two granules is the double-double merge of those
    values rounded to float64 (the numbers of the first granule builder, bit
    for bit; ``tests/granule_oracle.py``). About ``8 (4 + 2 n + n (n + 1) / 2)``
    bytes per granule (and two time stamps with a time column), at most about
    ``1.25 cap`` granules held.

    Parameters
    ----------
    n : int
        Number of variables.
    keys : callable
        The plan grid's bucket function, as for :class:`BlockBuilder`.
    timed : bool
        Whether rows carry times.
    cap : int
        About this many granules at most.
    """

    def __init__(self, n: int, keys: Callable[[np.ndarray, np.ndarray | None], np.ndarray], *,
                 timed: bool, cap: int = GRANULE_CAP) -> None:
        if cap < 2:
            raise ValueError("cap must be at least 2")
        self.n = n
        self._plan_keys = keys
        self._timed = timed
        self._cap = int(cap) + int(cap) % 2
        self._g = 1
        self._tri = np.triu_indices(n)
        self._store = BlockBuilder(n, lambda p, t: np.column_stack([keys(p, t), p // self._g]),
                                   timed=timed, packed=True, growth=1.25)

    @property
    def rows_per_granule(self) -> int:
        return self._g

    def push(self, y: np.ndarray, pos: np.ndarray, source_rows: np.ndarray,
             times: np.ndarray | None) -> None:
        """Add analysed rows (in order), as for :meth:`BlockBuilder.push`."""
        while y.shape[0]:
            limit = self._cap * self._g  # cap is even: a multiple of the next granule size
            cut = int(np.searchsorted(pos, limit, side="left"))
            if cut == y.shape[0]:
                self._store.push(y, pos, source_rows, times)
                return
            if cut:
                self._store.push(y[:cut], pos[:cut], source_rows[:cut],
                                 None if times is None else times[:cut])
            self._double()
            y, pos, source_rows = y[cut:], pos[cut:], source_rows[cut:]
            times = None if times is None else times[cut:]

    def _double(self) -> None:
        """Close the open granule, double ``g`` and merge neighbours in place."""
        s = self._store
        s.flush()
        self._g *= 2
        k = len(s._counts)
        if k < 2:
            return
        g = self._g
        meta = s._meta.view()
        fp = meta[:, 0]
        times = s._times.view()[:, 0].astype("datetime64[s]") if self._timed else None
        plan_keys = np.asarray(self._plan_keys(fp, times))
        same = np.all(plan_keys[1:] == plan_keys[:-1], axis=1) & (fp[1:] // g == fp[:-1] // g)
        del plan_keys, times
        start = np.concatenate([[True], ~same])
        first = np.flatnonzero(start)
        size = np.diff(np.append(first, k))
        if size.max() > 2:
            raise AssertionError("coarsening merges at most two granules at a time")
        pair = first[size == 2]
        c, m, cm = s._counts.view(), s._means.view(), s._comoments.view()
        for b0 in range(0, pair.size, _COARSEN_BATCH):
            a = pair[b0:b0 + _COARSEN_BATCH]
            b = a + 1
            zm, zc = np.zeros((a.size, self.n)), np.zeros((a.size, cm.shape[1]))
            c[a], m[a], _, cm[a], _ = _merge_packed(c[a], m[a], zm, cm[a], zc, c[b], m[b], zm,
                                                    cm[b], zc, self._tri)
        last = first + size - 1
        # move the merged granules down: row i takes row first[i] >= i (last[i] for the ends),
        # batch by batch, so no batch overwrites a row a later batch still reads
        tv = s._times.view() if self._timed else None
        for b0 in range(0, first.size, _COARSEN_BATCH):
            sl = slice(b0, min(b0 + _COARSEN_BATCH, first.size))
            f, e = first[sl], last[sl]
            for arr in (c, m, cm):
                arr[sl] = arr[f]
            meta[sl] = np.column_stack([meta[f, 0], meta[e, 1], meta[f, 2], meta[e, 3]])
            if tv is not None:
                tv[sl] = np.column_stack([tv[f, 0], tv[e, 1]])
        for grow in (s._counts, s._means, s._comoments, s._meta, s._times):
            grow.truncate(first.size)

    def finish(self, origin: np.ndarray) -> GranuleTable:
        """All granules (rows were pushed minus ``origin``, as for :class:`BlockBuilder`).

        Co-moments are unpacked to ``(k, n, n)``; the table has no low parts.
        """
        s = self._store
        s.flush()
        comoments = _unpack(s._comoments.view(), self.n)
        s._comoments = None
        meta = s._meta.get()
        t = s._times.get()
        table = BlockTable(
            counts=s._counts.get(), means=s._means.get(), comoments=comoments,
            first_pos=meta[:, 0], last_pos=meta[:, 1], first_source_row=meta[:, 2],
            last_source_row=meta[:, 3],
            first_time=t[:, 0].astype("datetime64[s]") if self._timed else None,
            last_time=t[:, 1].astype("datetime64[s]") if self._timed else None,
            origin=np.asarray(origin, dtype=float).copy())
        return GranuleTable(table, self._g, self._cap)


def granulate(y, *, cap: int = GRANULE_CAP, cuts=None) -> GranuleTable:
    """Granules of rows held in memory (tests, notebooks, :func:`relspan.data.prepare_frame`).

    Parameters
    ----------
    y : (T, n) array_like
        Analysed rows in order.
    cap : int
        About this many granules at most.
    cuts : sequence of int, optional
        Row positions where a granule must end before (window boundaries).
    """
    y = np.asarray(y, dtype=float)
    if y.ndim != 2 or y.shape[0] < 1:
        raise ValueError("y must be a (T, n) array with at least one row")
    cut_arr = np.unique(np.asarray([] if cuts is None else cuts, dtype=np.int64))
    origin = y[0].copy()

    def keys(p, t):
        return np.searchsorted(cut_arr, p, side="right").astype(np.int64)[:, None]

    b = GranuleBuilder(y.shape[1], keys, timed=False, cap=cap)
    pos = np.arange(y.shape[0], dtype=np.int64)
    b.push(y - origin, pos, pos + 1, None)
    return b.finish(origin)
