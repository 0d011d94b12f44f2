"""Measured coverage of 90% bootstrap intervals and the break scan's power, on simulated data.

    .venv/bin/python benchmarks/inference_checks.py [--datasets 200]

Prints the table recorded in docs/inference.md (the same simulations as
tests/analysis/test_coverage.py and tests/analysis/test_breaks.py).
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from relspan.analysis.breaks import subspace_break_scan  # noqa: E402
from relspan.analysis.resample import GranuleStats  # noqa: E402
from tests.analysis.inference_sims import coverage, one_relation_cov, rows  # noqa: E402


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--datasets", type=int, default=200)
    a = ap.parse_args()
    print(f"coverage of nominal 90% intervals, {a.datasets} datasets, 199 resamples each")
    print(f"{'rows':<28} {'eigenvalue':>10} {'coefficient':>12} {'angle':>8}")
    for label, rho, t, seed in (("iid, T = 400", 0.0, 400, 2024), ("iid, T = 400 (seed 11)", 0.0, 400, 11),
                                ("AR(1) 0.5, T = 400", 0.5, 400, 2024), ("AR(1) 0.5, T = 800", 0.5, 800, 7),
                                ("AR(1) 0.5, T = 800 (seed 1)", 0.5, 800, 1)):
        c = coverage(rho=rho, t=t, datasets=a.datasets, seed=seed)
        print(f"{label:<28} {c['eigenvalue']:>10.3f} {c['coefficient']:>12.3f} {c['angle']:>8.3f}")
    rng = np.random.default_rng(2024)
    runs = 40
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


if __name__ == "__main__":
    main()
