"""Wall time and resident memory of one command and every process it starts (Linux /proc).

Run (prints one line; asserts nothing)::

    python benchmarks/tree_rss.py -- relspan check SPEC --no-cache -q [--jobs 1]

The command's output is discarded. Every 0.1 s the resident set size (``VmRSS``) of the command's
process and of each of its descendants (worker processes of a pool) is read; the line gives the
wall seconds from start to exit, the highest RSS of the command's own process, and the highest sum
over the whole process tree at one sampling instant (a peak shorter than 0.1 s can be missed; an
outside timer such as ``/usr/bin/time -v`` gives the exact peak of the largest single process, not
the sum). Used for the "20,000 windows <= 1 GB" rows of docs/performance.md.
"""

from __future__ import annotations

import subprocess
import sys
import time


def _tree(pid: int) -> list[int]:
    out = [pid]
    try:
        with open(f"/proc/{pid}/task/{pid}/children", encoding="ascii") as fh:
            kids = fh.read().split()
    except OSError:
        return out
    for k in kids:
        out += _tree(int(k))
    return out


def _rss_mib(pid: int) -> float:
    try:
        with open(f"/proc/{pid}/status", encoding="ascii") as fh:
            for line in fh:
                if line.startswith("VmRSS:"):
                    return int(line.split()[1]) / 1024.0
    except OSError:
        pass
    return 0.0


def main(argv: list[str]) -> int:
    if argv and argv[0] == "--":
        argv = argv[1:]
    if not argv:
        print(__doc__)
        return 2
    t0 = time.monotonic()
    proc = subprocess.Popen(argv, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    main_peak = tree_peak = 0.0
    while proc.poll() is None:
        main_peak = max(main_peak, _rss_mib(proc.pid))
        tree_peak = max(tree_peak, sum(_rss_mib(p) for p in _tree(proc.pid)))
        time.sleep(0.1)
    print(f"exit {proc.returncode}; {time.monotonic() - t0:.1f} s wall; peak RSS of the command's process "
          f"{main_peak:.0f} MiB, of its whole process tree at once {tree_peak:.0f} MiB")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
