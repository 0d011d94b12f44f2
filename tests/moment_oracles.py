"""Test oracles for window statistics: a segment tree and a vectorised run merge of block moments.

They were ``relspan.analysis.moments.MomentTree`` and ``batched_window_moments``;
the build never used them (``relspan.data.blocks`` assembles windows), so they
live here, where tests compare the build's windows against them
(``tests/data/test_windows.py``) and the benchmark's batched merge against them
(``tests/benchmarks/test_batched.py``).
"""

from __future__ import annotations

from typing import Sequence

import numpy as np

from relspan.analysis.moments import Moments, empty, merge


class MomentTree:
    """Segment tree over a sequence of block moments.

    ``query(lo, hi)`` returns the merge of blocks ``lo .. hi-1`` using
    O(log k) merges and no subtraction, so any window that is a run of whole
    blocks is assembled exactly as accurately as a direct merge.
    """

    def __init__(self, blocks: Sequence[Moments]):
        if not blocks:
            raise ValueError("MomentTree needs at least one block")
        self._k = len(blocks)
        self._n = blocks[0].n
        size = 1
        while size < self._k:
            size *= 2
        self._size = size
        self._tree: list[Moments] = [empty(self._n)] * (2 * size)
        for i, b in enumerate(blocks):
            self._tree[size + i] = b
        for i in range(size - 1, 0, -1):
            self._tree[i] = merge(self._tree[2 * i], self._tree[2 * i + 1])

    def __len__(self) -> int:
        return self._k

    def query(self, lo: int, hi: int) -> Moments:
        """Merge of blocks ``[lo, hi)`` in left-to-right order."""
        if not 0 <= lo < hi <= self._k:
            raise IndexError(f"block range [{lo}, {hi}) outside 0..{self._k}")
        left = empty(self._n)
        right = empty(self._n)
        lo += self._size
        hi += self._size
        while lo < hi:
            if lo & 1:
                left = merge(left, self._tree[lo])
                lo += 1
            if hi & 1:
                hi -= 1
                right = merge(self._tree[hi], right)
            lo //= 2
            hi //= 2
        return merge(left, right)


def batched_window_moments(counts: np.ndarray, means: np.ndarray, comoments: np.ndarray,
                           starts: np.ndarray, lengths: np.ndarray):
    """Merge runs of consecutive blocks for many windows at once, vectorised.

    Parameters
    ----------
    counts : (k,) int array; means : (k, n); comoments : (k, n, n)
        Block statistics in order.
    starts, lengths : (w,) int arrays
        Window ``i`` is blocks ``starts[i] .. starts[i] + lengths[i] - 1``.

    Returns
    -------
    counts (w,), means (w, n), comoments (w, n, n)
        Each window merged left to right with the Chan-Golub-LeVeque update,
        all windows advanced together (no subtraction).
    """
    counts = np.asarray(counts)
    means = np.asarray(means, dtype=float)
    comoments = np.asarray(comoments, dtype=float)
    starts = np.asarray(starts, dtype=int)
    lengths = np.asarray(lengths, dtype=int)
    c = counts[starts].astype(float)
    m = means[starts].copy()
    cm = comoments[starts].copy()
    for step in range(1, int(lengths.max(initial=1))):
        active = lengths > step
        if not active.any():
            break
        idx = starts[active] + step
        cb = counts[idx].astype(float)
        ca = c[active]
        tot = ca + cb
        delta = means[idx] - m[active]
        w = np.where(tot > 0, cb / np.where(tot > 0, tot, 1), 0.0)
        m[active] = m[active] + delta * w[:, None]
        f = np.where(tot > 0, ca * cb / np.where(tot > 0, tot, 1), 0.0)
        cm[active] = cm[active] + comoments[idx] + delta[:, :, None] * delta[:, None, :] * f[:, None, None]
        c[active] = tot
    return c.astype(np.int64), m, cm
