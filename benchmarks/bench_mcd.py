"""FAST-MCD (the influence check's robust fit): nested starts for many rows beside every start on all rows.

Run (prints a table and ratios; asserts nothing)::

    python benchmarks/bench_mcd.py [--n 6] [--share 0.1] [--repeats 3]

For each row count, invented rows (a seeded random mixing of ``n`` normal columns, the first
``share`` of the rows shifted by 6 as a cluster of outliers) are fitted three ways, interleaved in one
process, best CPU time of ``--repeats``:

* relspan's ``fast_mcd`` as the pipeline runs it (above 600 rows: the starts in up to five random
  subsets of 300 rows, merged; Rousseeuw & Van Driessen 1999, section 3.3);
* the same function with every one of the 500 starts on all rows (the plain algorithm, which relspan
  ran at every size before);
* scikit-learn's ``MinCovDet`` (a reference library; its own subset scheme and 30 trials), as a peer.

Besides the times: the determinant of the nested fit's ``h``-subset over the plain one's (the MCD
objective: below 1 is a better subset), and the share of rows both flag alike.
"""

from __future__ import annotations

import argparse
import time

import numpy as np


def _cpu(fn, repeats: int):
    best, out = np.inf, None
    for _ in range(repeats):
        t0 = time.process_time()
        out = fn()
        best = min(best, time.process_time() - t0)
    return best, out


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--n", type=int, default=6)
    ap.add_argument("--share", type=float, default=0.1)
    ap.add_argument("--repeats", type=int, default=3)
    ap.add_argument("--rows", type=int, nargs="*", default=[600, 1000, 2000, 5000, 10090, 20000])
    a = ap.parse_args()
    from relspan.analysis import influence

    try:
        from sklearn.covariance import MinCovDet
    except ImportError:  # the peer is optional
        MinCovDet = None

    def plain(x):
        keep = influence.MCD_NESTED_ABOVE
        influence.MCD_NESTED_ABOVE = 10 ** 12
        try:
            return influence.fast_mcd(x, rng=np.random.default_rng(0))
        finally:
            influence.MCD_NESTED_ABOVE = keep

    print(f"n = {a.n}, outlier share {a.share}, CPU seconds, best of {a.repeats}")
    print(f"{'rows':>6} {'nested':>8} {'plain':>8} {'plain/nested':>12} {'sklearn':>8} "
          f"{'det nested/plain':>16} {'flags alike':>11}")
    for t in a.rows:
        rng = np.random.default_rng(t)
        x = rng.standard_normal((t, a.n)) @ rng.standard_normal((a.n, a.n))
        x[: int(a.share * t)] += 6.0
        tn, fit_n = _cpu(lambda: influence.fast_mcd(x, rng=np.random.default_rng(0)), a.repeats)
        tp, fit_p = _cpu(lambda: plain(x), a.repeats)
        ts = _cpu(lambda: MinCovDet(random_state=0).fit(x), a.repeats)[0] if MinCovDet else float("nan")
        print(f"{t:>6} {tn:>8.3f} {tp:>8.3f} {tp / tn:>12.2f} {ts:>8.3f} "
              f"{fit_n.determinant / fit_p.determinant:>16.6f} {np.mean(fit_n.flagged == fit_p.flagged):>11.4f}")


if __name__ == "__main__":
    main()
