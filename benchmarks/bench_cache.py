"""The result cache on the user's path: `check` writing it, and `check` (or `build`) reading it.

    python benchmarks/bench_cache.py SPEC --before DIR [--pairs 3]

Runs ``relspan.check(SPEC, jobs=1)`` in fresh processes, interleaved A B A B ...: A is this
checkout, B the package folder DIR put first on ``PYTHONPATH`` (e.g. ``git archive COMMIT
builder | tar -x -C /tmp/before`` and ``--before /tmp/before/builder``). Each side has a cache
folder of its own. "cold" starts from an empty cache (the analysis plus writing the cache);
"warm" finds every result in the cache (reading it back: what a `build` after a `check` does).
Prints the median CPU seconds (user + system of the child) of each, the ratio A / B (memory: run
``farm-bench`` on the same commands, which reads each child's own peak). Nothing is asserted; the figures go to docs/performance.md.
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


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("spec")
    ap.add_argument("--before", required=True, help="the package folder to compare against (B)")
    ap.add_argument("--pairs", type=int, default=3)
    args = ap.parse_args()
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
