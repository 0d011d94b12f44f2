"""Cost of bootstrap resamples of one window: stacked granule merges + batched eigh vs a naive loop.

    .venv/bin/python benchmarks/bench_resample.py [--rows 400] [--vars 5]

Batched: draw B resamples of the window's granules, merge their stored moments
in one matrix product (relspan.analysis.resample.resample_covariances) and
eigendecompose the (B, n, n) stack in one call. Loop: the same draws, each
resample merged from the stored moments on its own and eigendecomposed on its
own (what the stored-statistics design costs without batching). Rows: for
reference only, np.cov of the drawn raw rows per resample (the pipeline does
not keep rows, so this is not an option there). Prints seconds and ratios.
"""

from __future__ import annotations

import argparse
import time

import numpy as np

from relspan.analysis.resample import (GranuleStats, draw_granules, merge_weighted, politis_white_block_length,
                                       resample_covariances)


def _best(f, repeat=3):
    out = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        f()
        out.append(time.perf_counter() - t0)
    return min(out)


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--rows", type=int, default=400)
    ap.add_argument("--vars", type=int, default=5)
    a = ap.parse_args()
    rng = np.random.default_rng(0)
    x = rng.normal(size=(a.rows, a.vars))
    st = GranuleStats.from_rows(x)
    print(f"window: {a.rows} rows x {a.vars} variables, one granule per row, stationary bootstrap")
    print(f"{'B':>5} {'batched s':>10} {'loop s':>10} {'loop/batched':>13} {'rows s':>10} {'rows/batched':>13}")
    for b in (199, 499):
        def batched():
            r = resample_covariances(st, resamples=b, rng=np.random.default_rng(1))
            np.linalg.eigh(r.covariances)

        def loop():
            bl = politis_white_block_length(st.means).value
            idx = draw_granules(st.k, scheme="stationary", resamples=b, rng=np.random.default_rng(1),
                                block_length=bl)
            for row in idx:
                w = np.bincount(row, minlength=st.k)[None, :]
                c, _, cm = merge_weighted(st.counts, st.means, st.comoments, w)
                np.linalg.eigh(cm[0] / (c[0] - 1))

        def rows():
            bl = politis_white_block_length(st.means).value
            idx = draw_granules(st.k, scheme="stationary", resamples=b, rng=np.random.default_rng(1),
                                block_length=bl)
            for row in idx:
                np.linalg.eigh(np.cov(x[row].T))

        tb, tl, tr = _best(batched), _best(loop), _best(rows)
        print(f"{b:>5} {tb:>10.4f} {tl:>10.4f} {tl / tb:>13.1f} {tr:>10.4f} {tr / tb:>13.1f}")


if __name__ == "__main__":
    main()
