"""Wall time of the diagonal-noise (Frisch scheme) analysis of one window.

Run: ``python benchmarks/bench_frisch.py`` (prints a table; asserts nothing).
Cases: exact factor structures L L^T + D (a true corank) and sample
covariances of unstructured data (coranks only up to Ledermann's bound, the
slow case: the search runs out its starts), for n = 3..8, eps = 1e-6 and 1e-3.
"""

from __future__ import annotations

import statistics
import time

import numpy as np

from relspan.analysis.frisch import frisch_analysis


def _factor(n: int, q: int, seed: int) -> np.ndarray:
    rng = np.random.default_rng(seed)
    lo = rng.standard_normal((n, n - q))
    return lo @ lo.T + np.diag(rng.uniform(0.2, 1.0, n))


def _sample(n: int, seed: int) -> np.ndarray:
    rng = np.random.default_rng(seed)
    return np.cov((rng.standard_normal((3 * n, n)) @ rng.uniform(0.5, 2.0, (n, n))).T)


def main(repeats: int = 5) -> None:
    print(f"{'case':<22}{'eps':>8}{'median ms':>12}{'max ms':>10}{'q cert':>8}{'spread':>8}")
    for n in range(3, 9):
        q = max(1, n - 2 - n // 4)
        cases = [(f"factor n={n} q={q}", lambda s, n=n, q=q: _factor(n, q, s)),
                 (f"sample n={n}", lambda s, n=n: _sample(n, s))]
        for label, make in cases:
            for eps in (1e-6, 1e-3):
                times, res = [], None
                for seed in range(repeats):
                    s = make(seed)
                    t0 = time.perf_counter()
                    res = frisch_analysis(s, eps=eps)
                    times.append(1e3 * (time.perf_counter() - t0))
                print(f"{label:<22}{eps:>8g}{statistics.median(times):>12.1f}{max(times):>10.1f}"
                      f"{res.corank.max_certified:>8}{'yes' if res.spread else 'no':>8}")


if __name__ == "__main__":
    main()
