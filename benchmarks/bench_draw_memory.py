"""Peak memory of drawing a large window's resamples, for the package first on the path; prints figures.

    python benchmarks/bench_draw_memory.py                      # this checkout
    PYTHONPATH=/tmp/before/builder python benchmarks/bench_draw_memory.py   # an exported package

Invented granule statistics of the size of the 20,000-window spec's full sample (30,013
granules of 16 rows, n = 6, seeded): the peak traced allocation (``tracemalloc``) and CPU
seconds of ``resample_covariances`` with 499 resamples (iid, and stationary with a mean block of
4 granules), and of the studentised intervals' redraw with the resample standard errors of six
statistics (``drawn_blocks`` + ``resample_influence_sd`` where the package has no
``iter_drawn_blocks``). Run both sides in turn (A B A B) and compare; the checksum must agree.
Nothing is asserted.
"""

from __future__ import annotations

import time
import tracemalloc

import numpy as np

import relspan
from relspan.analysis import resample as R

K, N, B = 30_013, 6, 499


def _stats(ordered: bool) -> R.GranuleStats:
    rng = np.random.default_rng(11)
    return R.GranuleStats(np.full(K, 16.0), rng.standard_normal((K, N)) + 3.0,
                          np.broadcast_to(np.eye(N) * 15.0, (K, N, N)).copy(), 16, ordered)


def _measure(fn):
    tracemalloc.start()
    c = time.process_time()
    out = fn()
    c = time.process_time() - c
    peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    return peak / 2**20, c, out


def main() -> None:
    where = relspan.__file__
    print(f"package: {where}")
    for scheme, block in (("iid", None), ("stationary", 4.0)):
        st = _stats(scheme != "iid")
        peak, cpu, res = _measure(lambda: R.resample_covariances(st, resamples=B, rng=np.random.default_rng(4),
                                                                 scheme=scheme, block_length=block))
        print(f"  resample_covariances {scheme:10s}: peak traced {peak:7.1f} MiB, {cpu:5.2f} s CPU, "
              f"checksum {float(res.covariances.sum())!r}")
    st = _stats(True)
    res = R.resample_covariances(st, resamples=B, rng=R.window_rng(1, "d", "full", 0), scheme="stationary",
                                 block_length=4.0, seed=(1, "d", "full", 0))
    u = [np.random.default_rng(j).standard_normal(K) for j in range(6)]

    def studentised():
        if hasattr(R, "iter_drawn_blocks"):
            out = {j: np.empty(B) for j in range(6)}
            for b0, idx, blk in R.iter_drawn_blocks(res):
                for j in range(6):
                    out[j][b0:b0 + idx.shape[0]] = R.resample_influence_sd(u[j], st.counts, idx, blk)
                del idx, blk
            return out
        idx, blk = R.drawn_blocks(res)
        return {j: R.resample_influence_sd(u[j], st.counts, idx, blk) for j in range(6)}

    peak, cpu, out = _measure(studentised)
    print(f"  studentised redraw, 6 statistics: peak traced {peak:7.1f} MiB, {cpu:5.2f} s CPU, "
          f"checksum {sum(float(v.sum()) for v in out.values())!r}")


if __name__ == "__main__":
    main()
