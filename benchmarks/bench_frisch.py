"""The diagonal-noise (Frisch scheme) analysis of one window beside one CLARABEL minimum-trace solve.

Run: ``python benchmarks/bench_frisch.py [--quick]`` (prints a table and the
ratios; asserts nothing).

Peer: cvxpy with the CLARABEL solver (both from PyPI), the minimum-trace
problem ``max sum(d) s.t. R - diag(d) PSD, d >= 0`` on the window's
correlation matrix, compiled once (``R`` a cvxpy Parameter, so later solves
skip the compilation) and timed on its second and later solves.

Cases, n = 4..10: exact factor structures ``L L^T + D`` of a true corank
("structured") and sample covariances of unstructured data ("unstructured"),
at a tolerance of 0.01 on the correlation scale. Timings are interleaved:
for each window, the relspan analysis and the peer solve run back to back,
so a slower machine moment slows both; the ratio is taken per window and
its median printed per row (and over all windows at the end).

A second table times :func:`frisch_corank_stack` on resamples of one window
(the resampling path of the inference engine), per resample.
"""

from __future__ import annotations

import argparse
import statistics
import time

import numpy as np

from relspan.analysis.frisch import frisch_analysis, frisch_corank_stack


def _structured(n: int, seed: int) -> np.ndarray:
    rng = np.random.default_rng(seed)
    q = max(1, n - 2 - n // 4)
    lo = rng.standard_normal((n, n - q))
    return lo @ lo.T + np.diag(rng.uniform(0.2, 1.0, n))


def _unstructured(n: int, seed: int) -> np.ndarray:
    rng = np.random.default_rng(seed)
    return np.cov((rng.standard_normal((3 * n + 5, n)) @ rng.uniform(0.5, 2.0, (n, n))).T)


class _Clarabel:
    """One compiled cvxpy minimum-trace problem per n (reference: cvxpy + CLARABEL)."""

    def __init__(self, n: int) -> None:
        import cvxpy as cp

        self.r = cp.Parameter((n, n), symmetric=True)
        self.d = cp.Variable(n)
        self.prob = cp.Problem(cp.Maximize(cp.sum(self.d)), [self.r - cp.diag(self.d) >> 0, self.d >= 0])
        self.r.value = np.eye(n)
        self.prob.solve(solver="CLARABEL")

    def solve(self, r: np.ndarray) -> float:
        self.r.value = r
        t0 = time.perf_counter()
        self.prob.solve(solver="CLARABEL")
        return time.perf_counter() - t0


def _corr(s: np.ndarray) -> np.ndarray:
    sd = np.sqrt(np.diag(s))
    return s / np.outer(sd, sd)


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--quick", action="store_true", help="3 windows per row instead of 9")
    a = ap.parse_args()
    reps = 3 if a.quick else 9
    eps = 0.01
    print(f"{'case':<22}{'relspan ms':>12}{'CLARABEL ms':>13}{'ratio':>8}{'q':>4}{'spread':>8}")
    all_ratios = {"structured": [], "unstructured": []}
    for n in range(4, 11):
        peer = _Clarabel(n)
        for kind, make in (("structured", _structured), ("unstructured", _unstructured)):
            ours, theirs, ratios, res = [], [], [], None
            for seed in range(reps):
                s = make(n, seed)
                t0 = time.perf_counter()
                res = frisch_analysis(s, eps=eps)
                t_ours = time.perf_counter() - t0
                t_peer = min(peer.solve(_corr(s)) for _ in range(2))
                ours.append(t_ours)
                theirs.append(t_peer)
                ratios.append(t_ours / t_peer)
            all_ratios[kind] += ratios
            print(f"{kind + ' n=' + str(n):<22}{1e3 * statistics.median(ours):>12.1f}"
                  f"{1e3 * statistics.median(theirs):>13.2f}{statistics.median(ratios):>8.2f}"
                  f"{res.corank.max_certified:>4}{'yes' if res.spread else 'no':>8}")
    for kind, r in all_ratios.items():
        print(f"median ratio, {kind}: {statistics.median(r):.2f}  (max {max(r):.2f})")
    print(f"median ratio, all: {statistics.median(all_ratios['structured'] + all_ratios['unstructured']):.2f}")

    print("\nfrisch_corank_stack on 99 resamples of one window (rows resampled iid), per resample:")
    print(f"{'case':<22}{'ms/resample':>12}{'CLARABEL ms':>13}{'ratio':>8}")
    for n in (4, 6, 8, 10):
        peer = _Clarabel(n)
        rng = np.random.default_rng(n)
        lo = rng.standard_normal((n, n - 2))
        x = rng.standard_normal((200, n - 2)) @ lo.T + rng.standard_normal((200, n)) * 0.5
        est = frisch_analysis(np.cov(x.T), eps=eps)
        covs = np.stack([np.cov(x[rng.integers(0, 200, 200)].T) for _ in range(99)])
        t0 = time.perf_counter()
        frisch_corank_stack(covs, eps=eps, warm=est)
        per = (time.perf_counter() - t0) / 99
        t_peer = statistics.median(peer.solve(_corr(c)) for c in covs[:9])
        print(f"{'resamples n=' + str(n):<22}{1e3 * per:>12.2f}{1e3 * t_peer:>13.2f}{per / t_peer:>8.2f}")


if __name__ == "__main__":
    main()
