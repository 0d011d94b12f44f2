"""The result cache on the user's path: `check` writing it, and `check` (or `build`) reading it.

    python benchmarks/bench_cache.py SPEC --before DIR [--pairs 3]

Runs ``relspan.check(SPEC, jobs=1)`` in fresh processes, interleaved A B A B ...: A is this
checkout, B the package folder DIR put first on ``PYTHONPATH`` (e.g. ``git archive COMMIT
builder | tar -x -C /tmp/before`` and ``--before /tmp/before/builder``). Each side has a cache
folder of its own. "cold" starts from an empty cache (the analysis plus writing the cache);
"warm" finds every result in the cache (reading it back: what a `build` after a `check` does).
Prints the median CPU seconds (user + system of the child) of each, the ratio A / B (memory: run
``farm-bench`` on the same commands, which reads each child's own peak). Nothing is asserted; the figures go to docs/performance.md.

    python benchmarks/bench_cache.py SPEC --before DIR --entry

The entry alone: in one fresh process per side, the spec's first dataset is analysed once
(``--no-cache``, ``jobs=1``), then its result is written to an entry in memory and read back
(``cache._encode`` / ``cache._decode``, best of two each), then both again under ``tracemalloc``
for the peak of Python allocations while writing (the entry's bytes included) and while reading
(the result it rebuilds included).
"""

from __future__ import annotations

import argparse
import os
import resource
import shutil
import statistics
import subprocess
import sys
import tempfile
from pathlib import Path

ONE_CHECK = ("import sys, warnings; warnings.simplefilter('ignore'); import relspan; "
             "relspan.check(sys.argv[1], jobs=1, cache_dir=sys.argv[2])")


def _run(spec: str, cache: Path, pythonpath: str | None) -> float:
    env = dict(os.environ)
    if pythonpath:
        env["PYTHONPATH"] = pythonpath
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    done = subprocess.run([sys.executable, "-c", ONE_CHECK, spec, str(cache)], env=env,
                          stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True)
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    if done.returncode not in (0, 1):
        raise SystemExit(f"check failed ({done.returncode}): {done.stderr[-800:]}")
    cpu = (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)
    return cpu


ONE_ENTRY = """
import sys, time, tracemalloc, warnings
warnings.simplefilter("ignore")
from relspan.spec import load_spec
from relspan.run.pipeline import run_analysis
from relspan.run import cache as C
run = run_analysis(load_spec(sys.argv[1]), jobs=1, use_cache=False, write_cache=False)
value, key = (run.datasets[0], ()), "0" * 64
times = {"encode": [], "decode": []}
for _ in range(2):
    t = time.perf_counter(); blob = C._encode(value, key, "x"); times["encode"].append(time.perf_counter() - t)
    t = time.perf_counter(); C._decode(blob, key, "x"); times["decode"].append(time.perf_counter() - t)
tracemalloc.start()
del blob
tracemalloc.reset_peak(); base = tracemalloc.get_traced_memory()[0]
blob = C._encode(value, key, "x"); enc_peak = tracemalloc.get_traced_memory()[1] - base
tracemalloc.reset_peak(); base = tracemalloc.get_traced_memory()[0]
back = C._decode(blob, key, "x"); dec_peak = tracemalloc.get_traced_memory()[1] - base
print(min(times["encode"]), min(times["decode"]), enc_peak / 1e6, dec_peak / 1e6, len(blob) / 1e6)
"""


def _entry(spec: str, pythonpath: str | None) -> list[float]:
    env = dict(os.environ)
    if pythonpath:
        env["PYTHONPATH"] = pythonpath
    done = subprocess.run([sys.executable, "-c", ONE_ENTRY, spec], env=env, capture_output=True, text=True)
    if done.returncode != 0:
        raise SystemExit(f"entry run failed: {done.stderr[-800:]}")
    return [float(x) for x in done.stdout.split()]


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("spec")
    ap.add_argument("--before", required=True, help="the package folder to compare against (B)")
    ap.add_argument("--pairs", type=int, default=3)
    ap.add_argument("--entry", action="store_true", help="time and trace one entry's writing and reading")
    args = ap.parse_args()
    if args.entry:
        a, b = _entry(args.spec, None), _entry(args.spec, args.before)
        print(f"{args.spec}: one entry in memory, A = this checkout, B = {args.before}")
        for i, what in enumerate(("encode s", "decode s", "encode peak MB", "decode peak MB", "entry MB")):
            print(f"  {what:15s} A {a[i]:8.2f}  B {b[i]:8.2f}  A/B {a[i] / b[i]:5.2f}")
        return
    root = Path(tempfile.mkdtemp(prefix="bench-cache-"))
    sides = {"A": None, "B": args.before}
    cpu = {(s, k): [] for s in sides for k in ("cold", "warm")}
    try:
        for _ in range(args.pairs):
            for s, path in sides.items():
                cache = root / s
                shutil.rmtree(cache, ignore_errors=True)
                for kind in ("cold", "warm"):
                    cpu[(s, kind)].append(_run(args.spec, cache, path))
        print(f"{args.spec}: {args.pairs} pair(s), CPU seconds (median), A = this checkout, B = {args.before}")
        for kind in ("cold", "warm"):
            a, b = statistics.median(cpu[("A", kind)]), statistics.median(cpu[("B", kind)])
            print(f"  {kind:5s} check: A {a:7.2f}  B {b:7.2f}  A/B {a / b:5.2f}")
    finally:
        shutil.rmtree(root, ignore_errors=True)


if __name__ == "__main__":
    main()
