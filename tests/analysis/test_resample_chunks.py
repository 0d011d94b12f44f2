"""Drawing resamples in chunks gives the draws of drawing them all at once, bit for bit.

The oracle below is the all-at-once drawing of ``relspan.analysis.resample`` as it was before
the draws were chunked (commit 1ea21b6), written out: every index, block number, covariance and
the generator's state after drawing must match it whatever the chunk size, including chunks that
end inside the stationary scheme's stream of block starts (each resample has a random number of
blocks, and all their starts follow all the block breaks in the stream).
"""

from __future__ import annotations

import numpy as np
import pytest

from relspan.analysis import resample
from relspan.analysis.resample import (GranuleStats, draw_blocks, iter_draw_blocks, iter_drawn_blocks,
                                       resample_covariances, resample_influence_sd, stack_covariances,
                                       window_rng)


def _all_at_once(k, *, scheme, resamples, rng, block_length=1.0):
    """draw_blocks of commit 1ea21b6: every resample drawn in one call per stream step."""
    if scheme == "iid" or k == 1:
        return rng.integers(0, k, size=(resamples, k)), np.broadcast_to(np.arange(k), (resamples, k))
    if scheme == "moving":
        b = int(min(max(round(block_length), 1), k))
        nb = -(-k // b)
        starts = rng.integers(0, k - b + 1, size=(resamples, nb))
        idx = (starts[:, :, None] + np.arange(b)).reshape(resamples, nb * b)
        return idx[:, :k], np.broadcast_to(np.arange(k) // b, (resamples, k))
    p = 1.0 / max(float(block_length), 1.0)
    new = rng.random((resamples, k), dtype=np.float32) < np.float32(p)
    new[:, 0] = True
    block = np.cumsum(new.ravel()) - 1
    starts = rng.integers(0, k, size=int(block[-1]) + 1)
    t = np.arange(k)
    begin = np.maximum.accumulate(np.where(new, t, 0), axis=1)
    idx = (starts[block].reshape(resamples, k) + (t - begin)) % k
    return idx, np.cumsum(new, axis=1) - 1


def _granules(k=120, n=4, seed=3):
    rng = np.random.default_rng(seed)
    x = rng.standard_normal((k * 3, n)) @ rng.standard_normal((n, n)) + 5.0
    c = np.full(k, 3.0)
    means = x.reshape(k, 3, n).mean(axis=1)
    d = x.reshape(k, 3, n) - means[:, None, :]
    return GranuleStats(c, means, np.einsum("kti,ktj->kij", d, d), 3, True)


CASES = [("iid", 1.0), ("moving", 1.0), ("moving", 6.0), ("moving", 200.0),
         ("stationary", 1.0), ("stationary", 2.5), ("stationary", 9.0), ("stationary", 500.0)]


@pytest.mark.parametrize("scheme,block", CASES)
@pytest.mark.parametrize("chunk", [1, 3, 7, 37, 1000])
def test_chunked_draws_equal_drawing_every_resample_at_once(scheme, block, chunk):
    k, resamples = 150, 37
    want_idx, want_blk = _all_at_once(k, scheme=scheme, resamples=resamples, rng=np.random.default_rng(8),
                                      block_length=block)
    rng = np.random.default_rng(8)
    got = list(iter_draw_blocks(k, scheme=scheme, resamples=resamples, rng=rng, block_length=block, chunk=chunk))
    assert [b0 for b0, _, _ in got] == list(range(0, resamples, chunk))
    assert np.array_equal(np.concatenate([g[1] for g in got]), want_idx)
    assert np.array_equal(np.concatenate([g[2] for g in got]), want_blk)
    # the stream is left where drawing at once leaves it
    ref = np.random.default_rng(8)
    _all_at_once(k, scheme=scheme, resamples=resamples, rng=ref, block_length=block)
    assert rng.integers(0, 2**62) == ref.integers(0, 2**62)


def test_stationary_chunks_end_inside_the_stream_of_block_starts():
    # resamples with different numbers of blocks: the chunk boundaries fall at uneven places in the starts
    k, resamples = 40, 11
    idx, blk = _all_at_once(k, scheme="stationary", resamples=resamples, rng=np.random.default_rng(2),
                            block_length=4.0)
    per = blk.max(axis=1) + 1
    assert len(set(per.tolist())) > 3
    got = list(iter_draw_blocks(k, scheme="stationary", resamples=resamples, rng=np.random.default_rng(2),
                                block_length=4.0, chunk=4))
    for b0, i, b in got:
        assert np.array_equal(i, idx[b0:b0 + i.shape[0]]) and np.array_equal(b, blk[b0:b0 + b.shape[0]])


@pytest.mark.parametrize("scheme,block", CASES)
def test_draw_blocks_is_the_chunks_put_together(scheme, block, monkeypatch):
    monkeypatch.setattr(resample, "_DRAW_CELLS", 500)   # 3 resamples of 150 granules per chunk
    want = _all_at_once(150, scheme=scheme, resamples=20, rng=np.random.default_rng(5), block_length=block)
    got = draw_blocks(150, scheme=scheme, resamples=20, rng=np.random.default_rng(5), block_length=block)
    assert np.array_equal(got[0], want[0]) and np.array_equal(got[1], want[1])


@pytest.mark.parametrize("scheme,block", [("iid", None), ("moving", 5.0), ("stationary", 3.0), ("stationary", None)])
@pytest.mark.parametrize("draw_cells,merge_cells", [(130, 1000), (1000, 130), (250, 250), (10**6, 4 * 10**6)])
def test_chunked_covariances_equal_the_all_at_once_merge_bit_for_bit(scheme, block, draw_cells, merge_cells,
                                                                     monkeypatch):
    stats = _granules()
    key = (7, "d", "p", 3)
    monkeypatch.setattr(resample, "_CHUNK_CELLS", merge_cells)
    # the all-at-once path: every index drawn by the oracle, merged in the merge's partition
    once = resample_covariances(stats, resamples=41, rng=window_rng(*key), scheme=scheme, block_length=block,
                                seed=key, keep_draws=True)
    idx, blk = _all_at_once(stats.k, scheme=once.scheme, resamples=41, rng=window_rng(*key),
                            block_length=once.block_length)
    assert np.array_equal(once.draws, idx) and np.array_equal(once.blocks, blk)
    covs, rows = stack_covariances(stats, idx)
    monkeypatch.setattr(resample, "_DRAW_CELLS", draw_cells)
    chunked = resample_covariances(stats, resamples=41, rng=window_rng(*key), scheme=scheme, block_length=block,
                                   seed=key)
    assert chunked.draws is None
    assert np.array_equal(chunked.covariances, covs) and np.array_equal(chunked.rows, rows)
    assert np.array_equal(chunked.covariances, once.covariances)
    # the studentised intervals' redraw, chunk by chunk, gives the same draws and standard errors
    u = np.random.default_rng(1).standard_normal(stats.k)
    want_sd = resample_influence_sd(u, stats.counts, idx, blk)
    got_sd = np.empty(41)
    seen = 0
    for b0, i, b in iter_drawn_blocks(chunked):
        assert np.array_equal(i, idx[b0:b0 + i.shape[0]]) and np.array_equal(b, blk[b0:b0 + b.shape[0]])
        got_sd[b0:b0 + i.shape[0]] = resample_influence_sd(u, stats.counts, i, b)
        seen += i.shape[0]
    assert seen == 41 and np.array_equal(got_sd, want_sd)


def test_chunked_merge_at_the_full_samples_size_is_the_same_bit_for_bit():
    # the size that made the peak: tens of thousands of granules, merges of 133 resamples
    rng = np.random.default_rng(11)
    k, n = 30_013, 6
    stats = GranuleStats(np.full(k, 16.0), rng.standard_normal((k, n)) + 3.0,
                         np.broadcast_to(np.eye(n) * 15.0, (k, n, n)).copy(), 16, False)
    once = resample_covariances(stats, resamples=140, rng=np.random.default_rng(4), keep_draws=True)
    chunked = resample_covariances(stats, resamples=140, rng=np.random.default_rng(4))
    assert np.array_equal(chunked.covariances, once.covariances) and np.array_equal(chunked.rows, once.rows)
