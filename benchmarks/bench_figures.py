"""Benchmark the figures: the demo's cold build side by side with another revision, the figure
stage by family, and SVG bytes under two CPU kernels of OpenBLAS.

Three modes (numbers are printed, never asserted; speed is not tested in unit tests):

    # 1. cold demo build (--jobs 1 --no-cache) of this tree against REV, interleaved A B A B ...;
    #    prints each run, the medians and the per-pair ratio this/REV
    .venv/bin/python benchmarks/bench_figures.py --vs-rev 7d40cc3 --rounds 5

    # 2. the figure stage alone: every figure job of the demo drawn in this process, by family
    .venv/bin/python benchmarks/bench_figures.py --stage

    # 2b. the cold demo build (--jobs 1 --no-cache) stage by stage in CPU seconds of the process,
    #     this tree against REV, interleaved A B A B; prints each run and the per-stage ratios
    #     (each side prepared as its relspan command prepares, e.g. gc.freeze where it has it)
    .venv/bin/python benchmarks/bench_figures.py --stages-vs 055e2ee --rounds 2

    # 2c. the figure stage alone, this tree against REV: the demo's figure jobs (one analysis,
    #     pickled) drawn in a child process per run, interleaved; CPU seconds, layout passes, tick runs
    .venv/bin/python benchmarks/bench_figures.py --figures-vs main --rounds 3

    # 3. the demo built under two OpenBLAS kernels (OPENBLAS_CORETYPE, set for the build only,
    #    --no-cache, to temporary folders); prints how many SVGs differ (with --vs-rev: for REV too)
    .venv/bin/python benchmarks/bench_figures.py --kernels Haswell SkylakeX [--vs-rev 7d40cc3]

REV is exported with ``git archive`` to a temporary folder and imported from there
(``PYTHONPATH``), with the same interpreter and libraries, so only the code differs. The machine
may be shared: quote the median of the pairwise ratios, not single times.
"""

from __future__ import annotations

import argparse
import collections
import os
import statistics
import subprocess
import sys
import tarfile
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
SPEC = ROOT / "specs" / "demo.yaml"


def export_rev(rev: str, into: Path) -> Path:
    """The package of revision ``rev`` unpacked under ``into``; returns the folder to import from."""
    tar = into / "rev.tar"
    with open(tar, "wb") as fh:
        subprocess.run(["git", "-C", str(ROOT), "archive", rev, "builder"], stdout=fh, check=True)
    with tarfile.open(tar) as tf:
        tf.extractall(into, filter="data")
    # compiled now, as this checkout's modules are: with PYTHONDONTWRITEBYTECODE set no run would
    # write the bytecode, and every run of REV would compile its modules again (about 0.1 s)
    subprocess.run([sys.executable, "-m", "compileall", "-q", str(into / "builder")], check=True)
    return into / "builder"


def build_cmd(out: Path) -> list[str]:
    return [sys.executable, "-m", "relspan", "build", str(SPEC), "--jobs", "1", "--no-cache", "-q",
            "--out", str(out)]


def run_build(out: Path, pythonpath: str | None, extra_env: dict | None = None) -> float:
    env = dict(os.environ)
    if pythonpath:
        env["PYTHONPATH"] = pythonpath
    env.update(extra_env or {})
    t = time.perf_counter()
    subprocess.run(build_cmd(out), env=env, check=True, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    return time.perf_counter() - t


def side_by_side(rev: str, rounds: int) -> None:
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        other = str(export_rev(rev, tmp))
        here = str(ROOT / "builder")
        a, b = [], []
        run_build(tmp / "warm", here)  # warm-up (imports, font cache)
        for k in range(rounds):
            a.append(run_build(tmp / f"a{k}", here))
            b.append(run_build(tmp / f"b{k}", other))
            print(f"round {k + 1}: this tree {a[-1]:.2f} s, {rev} {b[-1]:.2f} s, ratio {a[-1] / b[-1]:.3f}")
        ratios = [x / y for x, y in zip(a, b)]
        print(f"cold demo build --jobs 1: this tree median {statistics.median(a):.2f} s, {rev} median "
              f"{statistics.median(b):.2f} s; ratio this/{rev}: median {statistics.median(ratios):.3f} "
              f"(min {min(ratios):.3f}, max {max(ratios):.3f}) over {rounds} interleaved pairs")


def stage() -> None:
    import warnings

    from relspan.report.site_content import site_draft
    from relspan.run.figures import draw_figures, render_job
    from relspan.run.pipeline import run_analysis
    from relspan.spec import load_spec

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        run = run_analysis(load_spec(SPEC), jobs=1, use_cache=False, progress=False)
    draft = site_draft(run)
    jobs = draft.figure_jobs
    t = time.perf_counter()
    rendered = draw_figures(jobs, "svg")
    total = time.perf_counter() - t
    drawn = sum(r is not None for r in rendered)
    print(f"figure stage: {len(jobs)} jobs, {drawn} figures, {total:.2f} s (shared content drawn once)")
    per = collections.defaultdict(list)
    for job in jobs:
        t = time.perf_counter()
        render_job((job.fn, job.args, "svg"))
        per[job.fn.__name__].append(time.perf_counter() - t)
    for name, ts in sorted(per.items(), key=lambda kv: -sum(kv[1])):
        print(f"  {name:20s} {len(ts):3d} jobs  {sum(ts):6.2f} s  {1000 * statistics.median(ts):6.0f} ms median")


#: run in a child process: one build, the CPU seconds of the process at each stage boundary
#: (the calls relspan.run.build.build makes), printed as one JSON line
_STAGES_CHILD = r"""
import json, sys, time, warnings
t_start = time.process_time()  # CPU since the interpreter started: its start-up is in the first stage
import relspan.report.site_content, relspan.run.build, relspan.run.figures, relspan.site
B = sys.modules["relspan.run.build"]
marks = {}
def timed(mod, name, label):
    real = getattr(mod, name)
    def wrapper(*a, **k):
        t = time.process_time()
        try:
            return real(*a, **k)
        finally:
            marks[label] = marks.get(label, 0.0) + time.process_time() - t
    setattr(mod, name, wrapper)
timed(B, "run_analysis", "analysis")
timed(sys.modules["relspan.report.site_content"], "site_draft", "pages")
timed(sys.modules["relspan.run.figures"], "draw_figures", "figures")
timed(relspan.site, "render_site", "html")
timed(relspan.site, "write_site", "write")
try:  # what the relspan command does before it runs (gc.freeze), when the revision has it
    from relspan.cli import _freeze_imports
except ImportError:
    pass
else:
    _freeze_imports()
imports = time.process_time()
with warnings.catch_warnings():
    warnings.simplefilter("ignore")
    B.build(sys.argv[1], out=sys.argv[2], jobs=1, use_cache=False, progress=False)
marks["imports"] = imports
marks["whole"] = time.process_time()
print(json.dumps(marks))
"""
STAGES = ("imports", "analysis", "pages", "figures", "html", "write", "whole")


def run_stages(out: Path, pythonpath: str) -> dict:
    import json

    env = dict(os.environ, PYTHONPATH=pythonpath)
    res = subprocess.run([sys.executable, "-c", _STAGES_CHILD, str(SPEC), str(out)], env=env, check=True,
                         capture_output=True, text=True)
    return json.loads(res.stdout.strip().splitlines()[-1])


def stages_vs(rev: str, rounds: int) -> None:
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        other = str(export_rev(rev, tmp))
        here = str(ROOT / "builder")
        a, b = [], []
        for k in range(rounds):
            b.append(run_stages(tmp / f"b{k}", other))
            a.append(run_stages(tmp / f"a{k}", here))
        print(f"cold demo build --jobs 1, CPU seconds of the process by stage ({rounds} interleaved pairs, "
              f"{rev} first in each pair)")
        print(f"  {'stage':10s} {rev + ' (each run)':>24s} {'this tree (each run)':>24s}  ratio this/{rev}")
        for st in STAGES:
            ra = [x[st] for x in a]
            rb = [y[st] for y in b]
            ratios = [x / y for x, y in zip(ra, rb) if y > 0]
            print(f"  {st:10s} {', '.join(f'{v:.2f}' for v in rb):>24s} {', '.join(f'{v:.2f}' for v in ra):>24s}"
                  f"  {', '.join(f'{r:.2f}' for r in ratios)}")


#: run in a child process: the demo's figure jobs (pickled by the parent from one analysis) drawn
#: with the child's relspan, as the build draws them; CPU seconds, and two counts that do not depend
#: on the machine's load: layout-engine passes and runs of an axis's tick locator and formatter
_FIGURES_CHILD = r"""
import json, pickle, sys, time
import matplotlib._constrained_layout as CL
import matplotlib.layout_engine as LE
from matplotlib.axis import Axis
from relspan.run.figures import draw_figures
jobs = pickle.load(open(sys.argv[1], "rb"))
n = {"ticks": 0, "layouts": 0}
real_ticks, real_layout = Axis._update_ticks, CL.do_constrained_layout
def ticks(self):
    n["ticks"] += 1
    return real_ticks(self)
def layout(*a, **k):
    n["layouts"] += 1
    return real_layout(*a, **k)
Axis._update_ticks = ticks
LE.do_constrained_layout = layout
t = time.process_time()
out = draw_figures(jobs, "svg")
print(json.dumps({"cpu": time.process_time() - t, "figures": sum(o is not None for o in out), **n}))
"""


def figures_vs(rev: str, rounds: int) -> None:
    import json
    import pickle
    import warnings

    from relspan.report.site_content import site_draft
    from relspan.run.pipeline import run_analysis
    from relspan.spec import load_spec

    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        other = str(export_rev(rev, tmp))
        here = str(ROOT / "builder")
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            run = run_analysis(load_spec(SPEC), jobs=1, use_cache=False, progress=False)
        jobs_file = tmp / "jobs.pkl"
        jobs_file.write_bytes(pickle.dumps(site_draft(run).figure_jobs))

        def child(path):
            res = subprocess.run([sys.executable, "-c", _FIGURES_CHILD, str(jobs_file)], check=True,
                                 env=dict(os.environ, PYTHONPATH=path), capture_output=True, text=True)
            return json.loads(res.stdout.strip().splitlines()[-1])

        a, b = [], []
        for k in range(rounds):
            b.append(child(other))
            a.append(child(here))
            print(f"round {k + 1}: {rev} {b[-1]}, this tree {a[-1]}")
        ratios = [x["cpu"] / y["cpu"] for x, y in zip(a, b)]
        print(f"figure stage of the demo ({a[0]['figures']} figures), CPU s: {rev} median "
              f"{statistics.median(y['cpu'] for y in b):.2f}, this tree median {statistics.median(x['cpu'] for x in a):.2f}; "
              f"per-pair ratio this/{rev}: {', '.join(f'{r:.2f}' for r in ratios)} (median {statistics.median(ratios):.2f}); "
              f"layout passes {b[0]['layouts']} -> {a[0]['layouts']}, tick runs {b[0]['ticks']} -> {a[0]['ticks']}")


def svg_files(folder: Path) -> dict[str, bytes]:
    return {str(p.relative_to(folder)): p.read_bytes() for p in sorted(folder.rglob("*.svg"))}


def kernels(names: list[str], rev: str | None) -> None:
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        trees = [("this tree", str(ROOT / "builder"))]
        if rev:
            trees.append((rev, str(export_rev(rev, tmp))))
        for label, path in trees:
            sites = []
            for k in names:
                out = tmp / f"{label.replace(' ', '_')}-{k}"
                run_build(out, path, {"OPENBLAS_CORETYPE": k})
                sites.append(svg_files(out))
            a, b = sites[0], sites[1]
            differ = sorted(p for p in a if a[p] != b.get(p))
            version = sum(b"Matplotlib v" in v for v in a.values())
            print(f"{label}: {len(a)} SVGs, {len(differ)} differ between {names[0]} and {names[1]}; "
                  f"{version} name a matplotlib version")
            for p in differ[:10]:
                print(f"  differs: {p}")


def main(argv=None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--vs-rev", help="git revision to compare with (e.g. the merge base)")
    ap.add_argument("--rounds", type=int, default=5)
    ap.add_argument("--stage", action="store_true", help="time the figure stage by family")
    ap.add_argument("--kernels", nargs=2, metavar="CORETYPE", help="two OPENBLAS_CORETYPE values")
    ap.add_argument("--stages-vs", metavar="REV", help="the cold build by stage (CPU s), this tree against REV")
    ap.add_argument("--figures-vs", metavar="REV", help="the figure stage alone (CPU s, layout passes, tick "
                    "runs), this tree against REV, one child process per run")
    args = ap.parse_args(argv)
    if args.stage:
        stage()
    elif args.figures_vs:
        figures_vs(args.figures_vs, args.rounds)
    elif args.stages_vs:
        stages_vs(args.stages_vs, args.rounds)
    elif args.kernels:
        kernels(args.kernels, args.vs_rev)
    elif args.vs_rev:
        side_by_side(args.vs_rev, args.rounds)
    else:
        ap.error("choose --vs-rev REV, --stage or --kernels A B")


if __name__ == "__main__":
    main()
