"""Benchmark the data pass: time and peak Python memory of prepare_dataset on a generated CSV.

Compares the streaming pass (several chunk sizes) with the in-memory way (read the whole
file with pandas, then np.cov on every window's rows). Run:

    .venv/bin/python benchmarks/data_pass.py [--rows 760000]

Numbers are printed, never asserted (speed is not tested in unit tests).
"""

from __future__ import annotations

import argparse
import sys
import tempfile
import time
import tracemalloc
from pathlib import Path

import numpy as np
import pandas as pd

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests" / "data"))

from relspan.data import prepare_dataset  # noqa: E402
from relspan.spec.model import DatasetSpec, Span, TimeSpec, VariableSpec, WindowPlanSpec  # noqa: E402


def write_csv(path: Path, rows: int, seed: int = 42) -> None:
    rng = np.random.default_rng(seed)
    start = np.datetime64("1900-01-01T00:00", "m")
    with open(path, "w", encoding="utf-8") as fh:
        fh.write("when,a,b,c,d\n")
        for a in range(0, rows, 100_000):
            m = min(100_000, rows - a)
            stamps = np.datetime_as_string(start + np.arange(a, a + m) * np.timedelta64(60, "m"))
            x = 1e3 + rng.normal(size=(m, 4))
            body = np.column_stack([stamps] + [np.char.mod("%.6f", x[:, j]) for j in range(4)])
            fh.write("\n".join(",".join(r) for r in body.tolist()) + "\n")


def measure(fn, *, traced: bool):
    if traced:
        tracemalloc.start()
    t = time.perf_counter()
    out = fn()
    dt = time.perf_counter() - t
    peak = tracemalloc.get_traced_memory()[1] if traced else float("nan")
    if traced:
        tracemalloc.stop()
    return out, dt, peak


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--rows", type=int, default=760_000)
    args = ap.parse_args()
    with tempfile.TemporaryDirectory() as d:
        path = Path(d) / "bench.csv"
        write_csv(path, args.rows)
        size = path.stat().st_size / 1e6
        ds = DatasetSpec(id="bench", title="bench", source="bench.csv", source_path=path,
                         variables=tuple(VariableSpec(c, c) for c in "abcd"),
                         time=TimeSpec("when"))
        plans = [WindowPlanSpec("full", "full"),
                 WindowPlanSpec("r", "rolling", width=Span(20000), step=Span(5000)),
                 WindowPlanSpec("w", "rolling", width=Span(8, "weeks"), step=Span(4, "weeks"))]
        print(f"file: {size:.1f} MB, {args.rows} rows, 4 variables + time; plans: full, "
              "rolling 20000/5000 rows, rolling 8/4 weeks")
        for chunk in (5_000, 16_384, 65_536, 262_144):
            _, dt, _ = measure(lambda: prepare_dataset(ds, plans, chunk_rows=chunk), traced=False)
            prep, _, peak = measure(lambda: prepare_dataset(ds, plans, chunk_rows=chunk),
                                    traced=True)
            print(f"streaming chunk_rows={chunk:>7}: {dt:6.2f} s  ({size / dt:5.1f} MB/s), "
                  f"peak traced {peak / 1e6:6.1f} MB, {len(prep.blocks)} blocks, "
                  f"{sum(len(p.windows) for p in prep.plans)} windows")

        def in_memory():
            df = pd.read_csv(path)
            x = df[list("abcd")].to_numpy()
            covs = [np.cov(x[s:s + 20000].T) for s in range(0, len(x) - 20000 + 1, 5000)]
            return covs

        _, dt, _ = measure(in_memory, traced=False)
        _, _, peak = measure(in_memory, traced=True)
        print(f"in-memory pandas + np.cov (row plan only): {dt:6.2f} s, peak traced "
              f"{peak / 1e6:6.1f} MB")


if __name__ == "__main__":
    main()
