"""Test oracle: the granule builder as first written (commit 7d40cc3), kept to check the lean one.

It holds every granule's double-double low parts, merges whole copies of the
table at each doubling and concatenates its parts at the end; the build's
:class:`relspan.data.blocks.GranuleBuilder` keeps the low parts only while it
merges, packs the symmetric co-moments and coarsens in place. The two must give
the same numbers bit for bit (``tests/data/test_granules.py``).
"""

from __future__ import annotations

from typing import Callable

import numpy as np

from relspan.data.blocks import BlockBuilder, BlockTable, GranuleTable, _lo_parts, _merge_arrays


def _concat_tables(parts: list[BlockTable], origin: np.ndarray) -> BlockTable:
    timed = parts[0].first_time is not None
    cat = np.concatenate
    return BlockTable(
        counts=cat([p.counts for p in parts]), means=cat([p.means for p in parts]),
        comoments=cat([p.comoments for p in parts]), first_pos=cat([p.first_pos for p in parts]),
        last_pos=cat([p.last_pos for p in parts]),
        first_source_row=cat([p.first_source_row for p in parts]),
        last_source_row=cat([p.last_source_row for p in parts]),
        first_time=cat([p.first_time for p in parts]) if timed else None,
        last_time=cat([p.last_time for p in parts]) if timed else None,
        origin=np.asarray(origin, dtype=float).copy())


def coarsen(table: BlockTable, g: int, plan_keys: np.ndarray) -> BlockTable:
    """Merge neighbouring granules that share their plan bucket and their ``g``-row bucket.

    Each new granule is the Chan-Golub-LeVeque merge of at most two old
    ones (the builder only ever doubles ``g``), so the result depends on the
    rows alone, not on how they arrived.

    Parameters
    ----------
    table : BlockTable
        Granules of ``g / 2`` rows.
    g : int
        New granule size.
    plan_keys : (k, K) int array
        The plan-grid bucket of each granule (of its first row).
    """
    k = len(table)
    if k < 2:
        return table
    fp = table.first_pos
    same = np.all(plan_keys[1:] == plan_keys[:-1], axis=1) & (fp[1:] // g == fp[:-1] // g)
    start = np.concatenate([[True], ~same])
    gid = np.cumsum(start) - 1
    size = np.bincount(gid)
    if size.max() > 2:
        raise AssertionError("coarsen merges at most two granules at a time")
    first = np.flatnonzero(start)
    pair = first[size == 2]
    ml, cml = _lo_parts(table)
    c, m, ml, cm, cml = (table.counts.copy(), table.means.copy(), ml.copy(), table.comoments.copy(), cml.copy())
    if pair.size:
        merged = _merge_arrays(c[pair], m[pair], ml[pair], cm[pair], cml[pair],
                               c[pair + 1], m[pair + 1], ml[pair + 1], cm[pair + 1], cml[pair + 1])
        c[pair], m[pair], ml[pair], cm[pair], cml[pair] = merged
    last = first + size - 1
    return BlockTable(
        counts=c[first], means=m[first], comoments=cm[first], means_lo=ml[first], comoments_lo=cml[first],
        first_pos=fp[first],
        last_pos=table.last_pos[last], first_source_row=table.first_source_row[first],
        last_source_row=table.last_source_row[last],
        first_time=None if table.first_time is None else table.first_time[first],
        last_time=None if table.last_time is None else table.last_time[last],
        origin=table.origin)


class OracleGranuleBuilder:
    """Collect granule statistics in the same pass as the blocks, with a bounded count.

    Granules start at one row each. Whenever the pass reaches row
    ``cap * g`` the granules so far are merged in pairs (``g`` doubles), so
    memory stays near ``cap`` granules whatever the number of rows, and the
    result does not depend on the chunk size (the switch happens at fixed
    row positions, and a granule is always the two-pass reduction of its own
    rows or a merge of two such).

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
                 timed: bool, cap: int = 16384) -> None:
        if cap < 2:
            raise ValueError("cap must be at least 2")
        self.n = n
        self._plan_keys = keys
        self._timed = timed
        self._cap = int(cap) + int(cap) % 2
        self._g = 1
        self._parts: list[BlockTable] = []
        self._inner = self._new_inner()

    def _new_inner(self) -> BlockBuilder:
        g = self._g
        return BlockBuilder(self.n, lambda p, t: np.column_stack([self._plan_keys(p, t), p // g]),
                            timed=self._timed)

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
                self._inner.push(y, pos, source_rows, times)
                return
            if cut:
                self._inner.push(y[:cut], pos[:cut], source_rows[:cut],
                                 None if times is None else times[:cut])
            self._double()
            y, pos, source_rows = y[cut:], pos[cut:], source_rows[cut:]
            times = None if times is None else times[cut:]

    def _double(self) -> None:
        part = self._inner.finish(np.zeros(self.n))
        if len(part):
            self._parts.append(part)
        self._g *= 2
        if self._parts:
            whole = _concat_tables(self._parts, np.zeros(self.n))
            self._parts = [coarsen(whole, self._g, self._keys_of(whole))]
        self._inner = self._new_inner()

    def _keys_of(self, t: BlockTable) -> np.ndarray:
        times = None if t.first_time is None else t.first_time
        return np.asarray(self._plan_keys(t.first_pos, times))

    def finish(self, origin: np.ndarray) -> GranuleTable:
        """All granules (rows were pushed minus ``origin``, as for :class:`BlockBuilder`)."""
        part = self._inner.finish(origin)
        parts = [p for p in self._parts + [part] if len(p)]
        if not parts:
            return GranuleTable(part, self._g, self._cap)
        return GranuleTable(_concat_tables(parts, origin), self._g, self._cap)
