"""The break scan's false alarms, detection and dating, measured on simulated data of known structure.

    .venv/bin/python benchmarks/break_scan_checks.py [--datasets 200] [--resamples 199] [--cells NAME ...]

Prints the table recorded in the break-scan section of docs/inference.md. Each
cell simulates ``--datasets`` series of 3 variables with one relation plus
equal noise (``tests/analysis/inference_sims.one_relation_cov`` with noise
variance 0.1: the relation vector is ``(cos t, sin t, -1)``, so a turn of 20
in ``t`` turns it by 14.1 degrees), time-ordered (the pipeline's case for data
with a time column), optionally AR(1) in every series, and runs
``relspan.analysis.breaks.subspace_break_scan`` at the 5% level:

- stable: no change (every break found is a false alarm);
- one: the relation turned once, at 50% of the rows (found = detection;
  a second break reported = a false further break; the true date inside the
  first break's interval is counted);
- two: turned twice, at 33% and 67% of the rows, 20 each time (both found,
  each true date inside the interval of the break found nearest it).

The CI-sized versions of these cells are in tests/analysis/test_breaks.py.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from relspan.analysis.breaks import subspace_break_scan  # noqa: E402
from relspan.analysis.resample import GranuleStats  # noqa: E402
from tests.analysis.inference_sims import one_relation_cov  # noqa: E402

#: name: (rows, AR(1) coefficient, turns at shares of the rows, seed)
CELLS = {
    "stable iid 300": (300, 0.0, (), 11),
    "stable AR0.5 300": (300, 0.5, (), 12),
    "stable AR0.5 800": (800, 0.5, (), 13),
    "stable AR0.8 300": (300, 0.8, (), 14),
    "one iid 300": (300, 0.0, (0.5,), 15),
    "one AR0.5 300": (300, 0.5, (0.5,), 16),
    "one AR0.8 300": (300, 0.8, (0.5,), 17),
    "two iid 300": (300, 0.0, (1 / 3, 2 / 3), 18),
    "two AR0.5 300": (300, 0.5, (1 / 3, 2 / 3), 19),
}


def simulate(rng, t: int, rho: float, at: tuple[float, ...], turn: float = 20.0) -> tuple[np.ndarray, list[int]]:
    """Rows of one series and the true split rows (first row of each new regime)."""
    cuts = [int(round(a * t)) for a in at]
    edges = [0] + cuts + [t]
    # one noise path, each regime's rows with its own covariance; one AR(1) filter across the regimes
    # (stationary from the first row: var(x_t) = the regime's covariance away from a change)
    x = np.vstack([rng.normal(size=(edges[i + 1] - edges[i], 3))
                   @ np.linalg.cholesky(one_relation_cov(turn * i, 0.1)[0]).T for i in range(len(edges) - 1)])
    if rho:
        from scipy.signal import lfilter
        x[1:] *= np.sqrt(1.0 - rho**2)
        x = lfilter([1.0], [1.0, -rho], x, axis=0)
    return x, cuts


def run_cell(name: str, datasets: int, resamples: int) -> dict:
    t, rho, at, seed = CELLS[name]
    rng = np.random.default_rng(seed)
    any_found = exact = covered = extra = 0
    t0 = time.process_time()
    for _ in range(datasets):
        x, cuts = simulate(rng, t, rho, at)
        res = subspace_break_scan(GranuleStats.from_rows(x, ordered=True), q=1, rng=rng, resamples=resamples)
        got = sorted(res.dates, key=lambda b: b.split_row)
        any_found += bool(got)
        exact += len(got) == len(cuts)
        extra += len(got) > max(len(cuts), 0)
        if cuts and len(got) >= len(cuts):
            ok = True
            for c in cuts:
                b = min(got, key=lambda b: abs(b.split_row - c))
                ok &= b.split_interval[0] <= c <= b.split_interval[1]
            covered += ok
    return {"name": name, "rows": t, "rho": rho, "breaks": len(at), "datasets": datasets, "any": any_found,
            "exact": exact, "extra": extra, "covered": covered, "cpu_s": time.process_time() - t0}


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--datasets", type=int, default=200)
    ap.add_argument("--resamples", type=int, default=199)
    ap.add_argument("--cells", nargs="*", default=list(CELLS))
    a = ap.parse_args()
    print(f"break scan, 3 variables, 5% level, {a.resamples} resamples, {a.datasets} datasets per cell")
    print("cell | any break found | exactly the true number | more than the true number | "
          "every true date inside its interval | CPU s")
    for name in a.cells:
        r = run_cell(name, a.datasets, a.resamples)
        n = r["datasets"]
        print(f"{name} | {r['any']}/{n} | {r['exact']}/{n} | {r['extra']}/{n} | {r['covered']}/{n} | "
              f"{r['cpu_s']:.0f}", flush=True)


if __name__ == "__main__":
    main()
