"""The reading pass against a bare pyarrow read of the same CSV, as whole processes.

Writes a CSV of invented numbers (seeded), then runs one of:

    python benchmarks/bench_read.py write PATH [--rows R] [--cols N] [--time]
    python benchmarks/bench_read.py bare PATH       # pyarrow.csv.read_csv, the whole table (the peer)
    python benchmarks/bench_read.py pass PATH       # relspan's prepare_dataset (read, hash, check, blocks)
    python benchmarks/bench_read.py pass-nogranules PATH   # the same without the granule statistics
    python benchmarks/bench_read.py hash PATH       # SHA-256 of the file alone (hashlib)

Compare two modes side by side with an interleaving timer (A B A B ..., ratio per pair),
e.g. ``... pass PATH`` against ``... bare PATH``; docs/performance.md records the ratios.
Each mode prints one line (what it did and its own in-process time); nothing is asserted.

``--repeat R`` runs the mode R more times in the same process after the first (imports and
pyarrow's thread pool warm) and prints the CPU seconds (user + system of the whole process, all
threads: ``time.process_time``) and wall seconds of each run and their medians: the cost of the
pass itself, without the interpreter's start and the imports.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import numpy as np


def write(path: Path, rows: int, cols: int, timed: bool, seed: int = 7) -> None:
    rng = np.random.default_rng(seed)
    names = [f"x{j}" for j in range(cols)]
    with open(path, "w", encoding="utf-8") as fh:
        fh.write(",".join((["when"] if timed else []) + names) + "\n")
        start = np.datetime64("2000-01-01T00:00", "m")
        for a in range(0, rows, 100_000):
            m = min(100_000, rows - a)
            x = rng.normal(size=(m, cols)) * 3.0 + np.arange(1, cols + 1) * 10.0
            parts = [np.char.mod("%.6f", x[:, j]) for j in range(cols)]
            if timed:
                parts.insert(0, np.datetime_as_string(start + np.arange(a, a + m) * np.timedelta64(60, "m")))
            fh.write("\n".join(",".join(r) for r in np.column_stack(parts).tolist()) + "\n")


def _spec(path: Path):
    from relspan.spec.model import DatasetSpec, Span, TimeSpec, VariableSpec, WindowPlanSpec

    header = path.open(encoding="utf-8").readline().strip().split(",")
    timed = header[0] == "when"
    cols = header[1:] if timed else header
    ds = DatasetSpec(id="bench", title="bench", source=path.name, source_path=path,
                     variables=tuple(VariableSpec(c, c) for c in cols),
                     time=TimeSpec("when") if timed else None)
    plans = [WindowPlanSpec("full", "full"),
             WindowPlanSpec("r", "rolling", width=Span(20000), step=Span(5000))]
    return ds, plans


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("mode", choices=["write", "bare", "pass", "pass-nogranules", "hash"])
    ap.add_argument("path", type=Path)
    ap.add_argument("--rows", type=int, default=1_000_000)
    ap.add_argument("--cols", type=int, default=6)
    ap.add_argument("--time", action="store_true")
    ap.add_argument("--repeat", type=int, default=0)
    args = ap.parse_args()
    if args.mode == "write":
        write(args.path, args.rows, args.cols, args.time)
        print(f"wrote {args.path} ({args.path.stat().st_size / 1e6:.1f} MB)")
        return
    t = time.perf_counter()
    what = _run(args)
    print(f"{args.mode}: {what}; {time.perf_counter() - t:.3f} s in process", file=sys.stderr)
    if args.repeat:
        cpu, wall = [], []
        for _ in range(args.repeat):
            c, w = time.process_time(), time.perf_counter()
            _run(args)
            cpu.append(time.process_time() - c)
            wall.append(time.perf_counter() - w)
        print(f"{args.mode} repeated {args.repeat}x in process: CPU s "
              f"{' '.join(f'{v:.3f}' for v in cpu)} (median {np.median(cpu):.3f}); wall s "
              f"{' '.join(f'{v:.3f}' for v in wall)} (median {np.median(wall):.3f})")


def _run(args) -> str:
    if args.mode == "bare":
        import pyarrow.csv as pacsv

        table = pacsv.read_csv(args.path)
        what = f"pyarrow read_csv: {table.num_rows} rows"
    elif args.mode == "hash":
        from relspan.data.sources import file_sha256

        what = f"sha256 {file_sha256(args.path)[:12]}"
    else:
        from relspan.data import prepare_dataset

        if args.mode == "pass-nogranules":
            from relspan.data import blocks, prepare

            class _NoGranules:
                def __init__(self, *a, **k):
                    pass

                def push(self, *a):
                    pass

                def finish(self, origin):
                    return None

            prepare.GranuleBuilder = _NoGranules  # type: ignore[misc]
            del blocks
        ds, plans = _spec(args.path)
        prep = prepare_dataset(ds, plans)
        what = f"prepare_dataset: {prep.rows_used} rows, {len(prep.blocks)} blocks, sha {prep.sha256[:12]}"
    return what


if __name__ == "__main__":
    main()
