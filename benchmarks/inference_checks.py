"""Measured behaviour of relspan's inference on simulated data of known structure.

    .venv/bin/python benchmarks/inference_checks.py coverage [--datasets 400]   # 90% intervals
    .venv/bin/python benchmarks/inference_checks.py corank [--datasets 400]     # equal-noise corank rule
    .venv/bin/python benchmarks/inference_checks.py blocks [--datasets 400]     # why AR(1) coverage is low
    .venv/bin/python benchmarks/inference_checks.py fewblocks [--datasets 400]  # short windows: basic kept
    .venv/bin/python benchmarks/inference_checks.py breaks [--runs 40]          # break scan
    .venv/bin/python benchmarks/inference_checks.py                             # all three

Prints the tables recorded in docs/inference.md (the same simulations as
tests/analysis/test_coverage.py, test_inference.py and test_breaks.py, with
more datasets). All data are invented here, seeded.
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from relspan.analysis.breaks import subspace_break_scan  # noqa: E402
from relspan.analysis.equal_test import effective_nobs_by_k, sequential_corank_stack, serial_dependence  # noqa: E402
from relspan.analysis.inference import equal_noise_corank_stack  # noqa: E402
from relspan.analysis.resample import GranuleStats  # noqa: E402
from tests.analysis.inference_sims import coverage, coverage_design, one_relation_cov, rows  # noqa: E402

#: coverage cells: label, AR(1) coefficient, rows per window, seed
COVERAGE_CELLS = (("iid, T = 400", 0.0, 400, 11), ("iid, T = 800", 0.0, 800, 13),
                  ("AR(1) 0.5, T = 400", 0.5, 400, 2024), ("AR(1) 0.5, T = 800", 0.5, 800, 7))

#: columns of the coverage table: (heading, key of tests.analysis.inference_sims.coverage)
COVERAGE_COLUMNS = (("eig basic", "eigenvalue (basic)"), ("eig pipeline", "eigenvalue"),
                    ("eig log", "eigenvalue (pipeline, log)"), ("coef pct", "coefficient"),
                    ("coef stud", "coefficient (studentized)"), ("angle basic", "angle"),
                    ("angle stud", "angle (studentized)"), ("angle log", "angle (log studentized)"))


def run_coverage(datasets: int, cells: str = "") -> None:
    """Coverage table; ``cells`` a comma-separated list of cell numbers (0-based) to run, all by default.

    Prints each share with its Monte Carlo standard error ``sqrt(p (1 - p) / N)``.
    """
    chosen = [int(c) for c in cells.split(",") if c.strip()] if cells else range(len(COVERAGE_CELLS))
    print(f"coverage of nominal 90% intervals, {datasets} datasets per cell, 199 resamples per window")
    print("eig basic: the interval shown before; eig pipeline: what window_inference shows now (studentised "
          "for AR(1) rows, basic for iid); eig log: the same studentised on the log scale; coef pct / "
          "angle basic: the pipeline's; *stud: studentised from the same resamples")
    print(f"{'rows (seed)':<26} " + " ".join(f"{h:>14}" for h, _ in COVERAGE_COLUMNS))
    for i in chosen:
        label, rho, t, seed = COVERAGE_CELLS[i]
        c = coverage(rho=rho, t=t, datasets=datasets, seed=seed, studentized=True)
        cols = []
        for _, key in COVERAGE_COLUMNS:
            p = c[key]
            cols.append(f"{p:.3f} ({(p * (1 - p) / datasets) ** 0.5:.3f})")
        print(f"{label + f' ({seed})':<26} " + " ".join(f"{x:>14}" for x in cols), flush=True)


#: short windows: label, AR(1) coefficient, rows per window, seed
FEW_BLOCK_CELLS = (("AR(1) 0.5, T = 100", 0.5, 100, 41), ("AR(1) 0.8, T = 100", 0.8, 100, 42),
                   ("AR(1) 0.9, T = 100", 0.9, 100, 43), ("AR(1) 0.9, T = 200", 0.9, 200, 44),
                   ("AR(1) 0.95, T = 100", 0.95, 100, 47), ("AR(1) 0.95, T = 200", 0.95, 200, 45))


def run_few_blocks(datasets: int) -> None:
    """Short, strongly dependent windows, whose resamples hold few blocks: studentised against basic.

    ``k / b``: rows over the automatic mean block length (median over 200 datasets of the cell's design);
    "one block": the share of resamples made of a single block (left out of the studentised interval).
    Widths: the ratio of the studentised interval's width to the basic one's, median and 95th percentile
    over datasets.
    """
    from relspan.analysis.resample import politis_white_block_length

    s1, *_ = coverage_design()
    print(f"smallest eigenvalue, nominal 90%, {datasets} datasets per cell, 199 stationary resamples")
    print(f"{'rows (seed)':<26} {'k / b':>7} {'one block':>10} {'basic':>14} {'studentised':>14} "
          f"{'width ratio: median':>20} {'p95':>6}")
    for label, rho, t, seed in FEW_BLOCK_CELLS:
        rng = np.random.default_rng(seed + 1000)
        blen = np.array([politis_white_block_length(rows(rng, s1, t, rho)).value for _ in range(200)])
        one = float(np.mean((1.0 - 1.0 / blen) ** (t - 1)))   # P(no new block after the first)
        c = coverage(rho=rho, t=t, datasets=datasets, seed=seed, studentized=True, widths=True)
        se = (lambda p: (p * (1 - p) / datasets) ** 0.5)
        cols = [f"{c[k]:.3f} ({se(c[k]):.3f})" for k in ("eigenvalue (basic)", "eigenvalue")]
        print(f"{label + f' ({seed})':<26} {np.median(t / blen):>7.1f} {one:>10.3f} "
              + " ".join(f"{x:>14}" for x in cols)
              + f" {c['width ratio (median)']:>20.2f} {c['width ratio (p95)']:>6.2f}", flush=True)


def run_blocks(datasets: int, *, t: int = 400, rho: float = 0.5, seed: int = 11) -> None:
    """Block-length rules and schemes side by side on the same AR(1) datasets (pipeline intervals)."""
    from relspan.analysis.intervals import (angle_interval, coefficient_intervals, interval, largest_angle_stack,
                                            relation_bases)
    from relspan.analysis.resample import draw_granules, politis_white_block_length, stack_covariances

    rng = np.random.default_rng(seed)
    s1, s2, te, tc, ta = coverage_design()
    true_sd = float(np.sqrt(2.0 * te**2 * (1 + rho**2) / ((1 - rho**2) * t)))   # closed form, Gaussian AR(1)

    def products(x):
        z = (x - x.mean(0)) / x.std(0)
        i, j = np.triu_indices(x.shape[1])
        return z[:, i] * z[:, j]

    variants = {  # name: (scheme, block length of the rows x)
        "stationary, Politis-White on x (pipeline)": ("stationary", lambda x: politis_white_block_length(x).value),
        "stationary, Politis-White on products": ("stationary", lambda x: politis_white_block_length(products(x)).value),
        "stationary, twice Politis-White": ("stationary", lambda x: 2 * politis_white_block_length(x).value),
        "moving, Politis-White (moving)": ("moving", lambda x: politis_white_block_length(x, kind="moving").value),
        "moving, 4 rows": ("moving", lambda x: 4.0),
        "moving, 8 rows": ("moving", lambda x: 8.0),
        "moving, 16 rows": ("moving", lambda x: 16.0),
    }
    hits = {k: np.zeros(3) for k in variants}
    sd = {k: [] for k in variants}
    blen = {k: [] for k in variants}
    for _ in range(datasets):
        xs = [rows(rng, s, t, rho) for s in (s1, s2)]
        est = [np.linalg.eigh(np.cov(x.T)) for x in xs]
        basis, basis2 = est[0][1][:, :1].T, est[1][1][:, :1].T
        angle = float(largest_angle_stack(basis, basis2[None])[0])
        for name, (scheme, rule) in variants.items():
            fits = []
            for x in xs:
                b = float(rule(x))
                b = float(round(b)) if scheme == "moving" else b
                idx = draw_granules(t, scheme=scheme, resamples=199, rng=rng, block_length=b)
                wb, vb = np.linalg.eigh(stack_covariances(GranuleStats.from_rows(x), idx)[0])
                fits.append((wb, relation_bases(vb, 1), b))
            (wb, bases, b), (_, bases2, _) = fits
            hits[name] += [interval(float(est[0][0][0]), wb[:, 0], level=0.9, method="basic").contains(te),
                           coefficient_intervals(basis, bases, targets=[2], level=0.9)[(0, 0)].contains(tc),
                           angle_interval(angle, bases, bases2, level=0.9).contains(ta)]
            sd[name].append(wb[:, 0].std())
            blen[name].append(b)
    print(f"AR(1) {rho}, T = {t}, {datasets} datasets (seed {seed}), 199 resamples; true sd of the smallest "
          f"eigenvalue {true_sd:.4f} (closed form)")
    print(f"{'scheme, block length':<44} {'rows':>5} {'eigenvalue':>10} {'coefficient':>11} {'angle':>6} "
          f"{'boot sd / true':>14} {'cv':>5}")
    for name in variants:
        h = hits[name] / datasets
        v = np.array(sd[name])
        print(f"{name:<44} {np.mean(blen[name]):>5.1f} {h[0]:>10.3f} {h[1]:>11.3f} {h[2]:>6.3f} "
              f"{v.mean() / true_sd:>14.3f} {v.std() / v.mean():>5.3f}", flush=True)


# --------------------------------------------------------------------------- equal-noise corank


def two_relations(rng: np.random.Generator, t: int, *, noise: float = 0.075, extra: float = 0.0,
                  rho: float = 0.0) -> np.ndarray:
    """Five variables, three unit-variance factors (two exact relations), equal noise ``noise``.

    ``extra`` adds noise of that variance along the second relation only (the two smallest population
    eigenvalues become ``noise`` and ``noise + extra``: equal noise fails). ``rho``: AR(1) rows.
    """
    load = rng.normal(size=(5, 3))
    load /= np.linalg.norm(load, axis=1, keepdims=True)
    f = rng.normal(size=(t, 3))
    e = rng.normal(size=(t, 5)) * np.sqrt(noise)
    if extra:
        a = np.linalg.svd(load.T)[2][4]
        e = e + rng.normal(size=(t, 1)) * np.sqrt(extra) * a[None, :]
    if rho:
        from scipy.signal import lfilter
        for z in (f, e):
            z[1:] *= np.sqrt(1.0 - rho**2)
            z[:] = lfilter([1.0], [1.0, -rho], z, axis=0)
    return f @ load.T + e


def corank_shares(rng, t: int, datasets: int, *, scale: str = "correlation", nobs: float | None = None,
                  eps: float = 0.05, serial: bool = False, **kw) -> tuple[np.ndarray, np.ndarray]:
    """Shares of datasets choosing corank 0..5: by the test alone, and by the pipeline's rule.

    ``serial``: the pipeline's effective sample size for time-ordered rows (per k, from the lag-1
    autocorrelations of the eigen-components: ``relspan.analysis.equal_test.effective_nobs_by_k``).
    """
    lam, nbs = [], []
    for _ in range(datasets):
        x = two_relations(rng, t, **kw)
        c = np.corrcoef(x.T) if scale == "correlation" else np.cov(x.T) / (1.0 + kw.get("noise", 0.075))
        vals, vecs = np.linalg.eigh(c)
        lam.append(vals)
        if serial:
            d = np.sqrt(np.diag(np.cov(x.T))) if scale == "correlation" else np.ones(x.shape[1])
            nbs.append(effective_nobs_by_k(t, serial_dependence(x).lag1(vecs / d[:, None]))[0])
    lam = np.array(lam)
    nb = (t if nobs is None else nobs) if not serial else np.array(nbs)
    test = np.bincount(sequential_corank_stack(lam, nobs=nb), minlength=6) / datasets
    rule = np.bincount(equal_noise_corank_stack(lam, eps=eps, nobs=nb), minlength=6) / datasets
    return test, rule


def run_corank(datasets: int) -> None:
    rng = np.random.default_rng(2026)
    print(f"equal-noise corank, five variables with two exact relations, {datasets} datasets per row, eps = 0.05")
    print("'fewer' = a corank below 2 chosen: under equal noise the size of the k = 2 test; "
          "under unequal noise its power")
    print(f"{'case':<52} {'test: 2':>8} {'fewer':>6} {'more':>6} | {'rule: 2':>8} {'fewer':>6} {'more':>6}")

    def row(label, t, **kw):
        test, rule = corank_shares(rng, t, datasets, **kw)
        print(f"{label:<52} {test[2]:>8.3f} {test[:2].sum():>6.3f} {test[3:].sum():>6.3f} | "
              f"{rule[2]:>8.3f} {rule[:2].sum():>6.3f} {rule[3:].sum():>6.3f}", flush=True)

    for t in (100, 400, 2000):
        for scale in ("correlation", "common"):
            row(f"equal noise 7.5%, T = {t}, {scale} scale", t, scale=scale)
    for t in (100, 400, 2000):
        row(f"equal noise 40%, T = {t}, correlation scale", t, noise=0.4)
    for t in (400, 2000):
        row(f"AR(1) 0.5, noise 40%, T = {t}, rows as independent", t, noise=0.4, rho=0.5)
        row(f"AR(1) 0.5, noise 40%, T = {t}, T (1 - r^2) / (1 + r^2)", t, noise=0.4, rho=0.5,
            nobs=t * 0.75 / 1.25)
        row(f"AR(1) 0.5, noise 40%, T = {t}, pipeline's effective rows", t, noise=0.4, rho=0.5, serial=True)
    for extra in (0.0375, 0.075, 0.15):
        for t in (400, 2000):
            row(f"unequal: extra {extra:g} on relation 2, T = {t}", t, extra=extra)
    for extra in (0.1, 0.2, 0.4):
        for t in (400, 2000):
            row(f"unequal, AR(1) 0.5, noise 40%: extra {extra:g}, T = {t}, indep.", t, noise=0.4, extra=extra,
                rho=0.5)
            row(f"unequal, AR(1) 0.5, noise 40%: extra {extra:g}, T = {t}, effective", t, noise=0.4, extra=extra,
                rho=0.5, serial=True)
    for t in (400, 2000):
        row(f"iid rows, noise 7.5%, T = {t}, effective rows (time-ordered)", t, serial=True)
    for t in (144, 400, 2000):
        row(f"near-exact: noise 0.5%, extra 0.5% on relation 2, T = {t}", t, noise=0.005, extra=0.005)


# --------------------------------------------------------------------------- break scan


def run_breaks(runs: int) -> None:
    rng = np.random.default_rng(2024)
    found = alarms = 0
    for _ in range(runs):
        for turn in (20.0, 0.0):
            k = 150
            x = np.vstack([rows(rng, one_relation_cov(0.0, 0.1)[0], k), rows(rng, one_relation_cov(turn, 0.1)[0], k)])
            hit = subspace_break_scan(GranuleStats.from_rows(x, ordered=False), q=1, rng=rng, resamples=99).found
            found += hit and turn > 0
            alarms += hit and turn == 0
    print(f"break scan, 300 rows, 3 variables, 5% level: 20-degree break found in {found}/{runs}; "
          f"false alarms {alarms}/{runs}")


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("what", nargs="?", default="all",
                    choices=("coverage", "corank", "blocks", "breaks", "fewblocks", "all"))
    ap.add_argument("--datasets", type=int, default=400)
    ap.add_argument("--runs", type=int, default=40)
    ap.add_argument("--cells", default="", help="coverage: comma-separated cell numbers (default all)")
    a = ap.parse_args()
    if a.what in ("corank", "all"):
        run_corank(a.datasets)
    if a.what in ("coverage", "all"):
        run_coverage(a.datasets, a.cells)
    if a.what in ("blocks", "all"):
        run_blocks(a.datasets)
    if a.what in ("fewblocks", "all"):
        run_few_blocks(a.datasets)
    if a.what in ("breaks", "all"):
        run_breaks(a.runs)


if __name__ == "__main__":
    main()
