"""Cost of bootstrap resamples of one window: stacked granule merges + batched eigh vs a naive loop.

    .venv/bin/python benchmarks/bench_resample.py [--rows 400] [--vars 5]

Batched: draw B resamples of the window's granules, merge their stored moments
in one matrix product (relspan.analysis.resample.resample_covariances) and
eigendecompose the (B, n, n) stack in one call. Loop: the same draws, each
resample merged from the stored moments on its own and eigendecomposed on its
own (what the stored-statistics design costs without batching). Rows: for
reference only, np.cov of the drawn raw rows per resample (the pipeline does
not keep rows, so this is not an option there). Prints seconds and ratios.

Window inference (the pipeline's per-window cost): ``analyse_window`` of one
window with and without its resampling (499 resamples: every interval and the
equal / bounded supports; then also the diagonal-noise support on 99
resamples), side by side, with the ratio to the window analysis alone.
"""

from __future__ import annotations

import argparse
import time

import numpy as np

from relspan.analysis.resample import (GranuleStats, draw_granules, merge_weighted, politis_white_block_length,
                                       resample_covariances)


def window_inference_cost(rows: int, nvars: int, repeat: int = 3) -> None:
    """Per-window cost of the pipeline's inference, against the window analysis without it."""
    import warnings

    from relspan.analysis.inference import ResamplingOptions
    from relspan.analysis.moments import Moments
    from relspan.analysis.window import WindowOptions, analyse_window

    rng = np.random.default_rng(3)
    f = rng.normal(size=(rows, nvars - 1))
    x = np.column_stack([f, f.sum(axis=1)]) + 0.3 * rng.normal(size=(rows, nvars))  # one relation
    st = GranuleStats.from_rows(x)
    c, mean, cm = st.window_moments()
    m = Moments(count=int(c), mean=mean, comoment=cm)
    names = [f"x{i}" for i in range(nvars)]
    std = x.std(axis=0, ddof=1)
    print(f"\nwindow analysis with inference: {rows} rows x {nvars} variables, stationary bootstrap")
    print(f"{'case':<44} {'s/window':>9} {'ratio':>7}")
    base = None
    for label, assumptions, res in (
            ("no inference (elementary, equal, bounded)", ("elementary", "equal", "bounded"), None),
            ("499 resamples (elementary, equal, bounded)", ("elementary", "equal", "bounded"),
             ResamplingOptions(resamples=499, diagonal_resamples=0)),
            ("no inference (+ diagonal)", ("elementary", "equal", "bounded", "diagonal"), None),
            ("499 resamples, diagonal support off", ("elementary", "equal", "bounded", "diagonal"),
             ResamplingOptions(resamples=499, diagonal_resamples=0)),
            ("499 resamples, diagonal support on 99", ("elementary", "equal", "bounded", "diagonal"),
             ResamplingOptions(resamples=499, diagonal_resamples=99))):
        opts = WindowOptions(assumptions=assumptions, absolute=None, relative=0.05, ref=nvars - 1,
                             coranks=tuple(range(1, nvars)))

        def run():
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                analyse_window(m, names=names, options=opts, common_std=std, label="w", granules=st,
                               resampling=res, seed_key=("bench", "plan", 0))

        t = _best(run, repeat)
        if res is None:
            base = t
        print(f"{label:<44} {t:>9.4f} {t / base:>7.1f}")


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
    window_inference_cost(a.rows, a.vars)


if __name__ == "__main__":
    main()
