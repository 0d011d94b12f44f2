"""Cost of judging stability across windows: batched vs per pair, and growth with the number of windows.

    .venv/bin/python benchmarks/bench_stability.py [--vars 4] [--resamples 99] [--max-windows 20000]

Part 1, batched vs per pair: the same comparisons (neighbours and each window
against the full sample, each with its resampled null), once through
:func:`relspan.analysis.stability.compare_windows` (observed angles in one
batched call, null draws and direct rotations batched over chunks of
comparisons), once as a Python loop of
:func:`relspan.analysis.intervals.angle_change_test` per comparison (the
single-pair rule). Timings are interleaved (batched, loop, batched, ...) and the
minimum of each is compared, so a busy shared machine hurts both alike.

Part 2, growth: compare_windows on 10 to 20,000 windows (above 40 windows:
neighbours and reference only). Prints seconds and microseconds per window;
linear growth shows as a flat microseconds-per-window column. The resampled
bases come from a pool drawn once (the resampling itself is measured by
benchmarks/bench_resample.py).
"""

from __future__ import annotations

import argparse
import time

import numpy as np

from relspan.analysis.intervals import angle_change_test
from relspan.analysis.stability import compare_windows


def _pool(n: int, resamples: int, seed: int = 0, size: int = 64):
    """``size`` windows' estimates (one relation near e_1) and their resampled bases (B, 1, n)."""
    rng = np.random.default_rng(seed)
    est, draws = [], []
    for _ in range(size):
        a = np.zeros((1, n))
        a[0, 0] = 1.0
        a = a + rng.normal(scale=0.01, size=(1, n))
        a /= np.linalg.norm(a)
        d = a[None] + rng.normal(scale=0.02, size=(resamples, 1, n))
        est.append(a)
        draws.append(d / np.linalg.norm(d, axis=2, keepdims=True))
    return est, draws


def _batched(est, draws, w):
    return compare_windows([est[i % len(est)] for i in range(w)], labels=[f"w{i}" for i in range(w)],
                           resampled=lambda i: draws[i % len(draws)], reference=est[0], pairwise_cap=0)


def _per_pair(est, draws, w):
    m = len(est)
    for i in range(1, w):
        angle_change_test(est[(i - 1) % m], draws[(i - 1) % m], est[i % m], draws[i % m])
    for i in range(w):  # the reference treated as fixed: its "draws" are its estimate
        angle_change_test(est[i % m], draws[i % m], est[0], np.repeat(est[0][None], draws[0].shape[0], 0))


def _timed(f) -> float:
    t0 = time.perf_counter()
    f()
    return time.perf_counter() - t0


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--vars", type=int, default=4)
    ap.add_argument("--resamples", type=int, default=99)
    ap.add_argument("--max-windows", type=int, default=20000)
    ap.add_argument("--repeat", type=int, default=3)
    a = ap.parse_args()
    est, draws = _pool(a.vars, a.resamples)
    print(f"{a.vars} variables, one relation, {a.resamples} resamples per window")
    print("\nbatched vs per pair (neighbours + reference, interleaved, minimum of "
          f"{a.repeat} runs each)")
    print(f"{'windows':>8} {'comparisons':>12} {'batched s':>10} {'per pair s':>11} {'per pair/batched':>17}")
    for w in (50, 200, 1000):
        tb, tl = [], []
        for _ in range(a.repeat):
            tb.append(_timed(lambda: _batched(est, draws, w)))
            tl.append(_timed(lambda: _per_pair(est, draws, w)))
        b, l_ = min(tb), min(tl)
        print(f"{w:>8} {2 * w - 1:>12} {b:>10.3f} {l_:>11.3f} {l_ / b:>17.1f}")
    print("\ngrowth with the number of windows (batched; above 40 windows neighbours + reference only)")
    print(f"{'windows':>8} {'seconds':>9} {'us/window':>10} {'vs 1,000':>9}")
    sizes = [w for w in (10, 100, 1000, 5000, 20000) if w <= a.max_windows]
    per = {}
    for w in sizes:
        t = min(_timed(lambda: _batched(est, draws, w)) for _ in range(a.repeat if w <= 5000 else 1))
        per[w] = t / w * 1e6
        rel = f"{per[w] / per[1000]:.2f}" if 1000 in per else ""
        print(f"{w:>8} {t:>9.3f} {per[w]:>10.1f} {rel:>9}")


if __name__ == "__main__":
    main()
