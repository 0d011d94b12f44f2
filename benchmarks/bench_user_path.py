"""The user's path, stage by stage, beside its peers; prints ratios (nothing is asserted).

    python benchmarks/bench_user_path.py elementary [--rows 100000]   # all elementary regressions
    python benchmarks/bench_user_path.py stages --windows 1000 --n 6 [--assumptions elementary,equal,bounded]
    python benchmarks/bench_user_path.py check SPEC                   # one `relspan check`, for whole-process timing
    python benchmarks/bench_user_path.py check-stages SPEC            # `relspan check` (in process, serial) by stage
    python benchmarks/bench_user_path.py spec FOLDER --windows 1000 --n 6 [--resamples 499]  # write the generated spec
    python benchmarks/bench_user_path.py side-by-side SPEC --before DIR [--pairs 2]  # check-stages, A B A B
    python benchmarks/bench_user_path.py task-costs FOLDER [--windows 300 --n 6 --pairs 2]  # the scheduler's constants

``elementary``: every elementary regression (each variable on the others, with intercept) of
every rolling window (width 250, step 50 rows), n = 6, on invented rows (seeded):
relspan's pipeline path (block statistics of the rows, windows merged from blocks,
``elementary_regressions_stack``), the floor (one X'X pass over the rows, window sums,
one batched ``numpy.linalg.inv`` of the window stack), a per-window numpy loop
(``np.cov`` + ``np.linalg.inv``) and statsmodels ``RollingOLS`` (per fitted window: it fits
every step-1 window). Timed interleaved, best of 5 (wall, and CPU seconds of the process for the stack against the floor).

``stages``: a generated CSV and spec with the asked number of windows and variables; the
stages of ``relspan check`` timed in this process: the data pass (``prepare_dataset``), the
batched elementary regressions, the per-window tasks (serial), the cross-window summaries and
findings (``analyse_prepared`` minus the above); peak RSS of the process at the end.

``check-stages``: one ``relspan.check(SPEC, jobs=1)`` (no cache) with the stages of the
user's path timed where they are called (wall and CPU seconds of this process): the
data pass, the batched elementary regressions, the window tasks (each window's analysis
and its resampling), the cross-window stability (``run/cross_window.plan_stability``),
the break scan, the full sample's spread, trends and influence, the findings, the claims.
``side-by-side``: ``check-stages`` of SPEC in fresh processes, interleaved: this checkout
(A) and the package folder DIR (B, e.g. ``git archive COMMIT builder | tar -x -C DIR``, then
``DIR/builder``) put first on ``PYTHONPATH``, A B A B ...; prints each stage's CPU seconds
(median over the pairs), the ratio B / A, and each side's peak RSS.
``task-costs``: the per-window and per-resample CPU seconds of the window tasks that the
scheduler's cost model uses (``relspan.run.executors.window_work``): ``check-stages`` of three
generated specs in fresh processes, interleaved: ``resamples: 0`` without the stability draws
(``pipeline.HAND_OVER = False``: the analyses alone), ``resamples: 0`` (the analyses and the
stability stage's draws) and the default resampling (intervals too); the window-task CPU
seconds divided by the tasks and resamples (plans of more than 200 windows: 199 per window).
``spec`` writes the generated CSV and spec of ``stages`` into FOLDER (``--resamples``
sets ``checks.resampling.resamples``; 0 turns the window tasks' resampling off), for
``check``, ``check-stages`` and whole-process timers.
"""

from __future__ import annotations

import argparse
import resource
import sys
import tempfile
import time
import warnings
from pathlib import Path

import numpy as np

WIDTH, STEP, N = 250, 50, 6
SEED = 15015  # invented data


def rows(t: int, n: int = N, seed: int = SEED) -> np.ndarray:
    """Invented rows: n - 2 common factors plus noise, offset from zero (two near-relations)."""
    rng = np.random.default_rng(seed)
    f = rng.standard_normal((t, max(n - 2, 1)))
    return f @ rng.uniform(-1, 1, (f.shape[1], n)) + 0.2 * rng.standard_normal((t, n)) + rng.uniform(10, 100, n)


def _best(fn, repeats=3):
    best, out = float("inf"), None
    for _ in range(repeats):
        t = time.perf_counter()
        out = fn()
        best = min(best, time.perf_counter() - t)
    return best, out


def relspan_path(x: np.ndarray):
    """Block statistics -> window moments -> elementary_regressions_stack (as the pipeline)."""
    from relspan.analysis import _dd
    from relspan.analysis.elementary import elementary_regressions_stack
    from relspan.data.blocks import BlockBuilder, assemble_stacked

    t = x.shape[0]
    origin = x[0].copy()
    b = BlockBuilder(x.shape[1], lambda p, _t: (p // STEP)[:, None], timed=False)
    pos = np.arange(t, dtype=np.int64)
    b.push(x - origin, pos, pos + 1, None)
    blocks = b.finish(origin)
    lo = np.arange(0, (t - WIDTH) // STEP + 1)
    c, m, cm, _, cml = assemble_stacked(blocks, lo, lo + WIDTH // STEP, low=True)
    t1 = time.perf_counter()
    hi, clo = _dd.dd_div_float(cm, cml, (c - 1).astype(float)[:, None, None])
    ers = elementary_regressions_stack(hi, cov_los=0.5 * (clo + clo.transpose(0, 2, 1)),
                                       names=[f"x{j}" for j in range(x.shape[1])], counts=c, means=m)
    return ers, time.perf_counter() - t1


def _window_moments(x: np.ndarray):
    """Covariances (high and low parts), counts and means of the rolling windows of ``x``."""
    from relspan.analysis import _dd
    from relspan.data.blocks import BlockBuilder, assemble_stacked

    t = x.shape[0]
    b = BlockBuilder(x.shape[1], lambda p, _t: (p // STEP)[:, None], timed=False)
    pos = np.arange(t, dtype=np.int64)
    b.push(x - x[0], pos, pos + 1, None)
    blocks = b.finish(x[0].copy())
    lo = np.arange(0, (t - WIDTH) // STEP + 1)
    c, m, cm, _, cml = assemble_stacked(blocks, lo, lo + WIDTH // STEP, low=True)
    hi, clo = _dd.dd_div_float(cm, cml, (c - 1).astype(float)[:, None, None])
    return hi, 0.5 * (clo + clo.transpose(0, 2, 1)), c, m


_STACK_INPUT: dict = {}


def _stack_again(x: np.ndarray):
    """elementary_regressions_stack alone on the window moments of ``x`` (built once, kept)."""
    from relspan.analysis.elementary import elementary_regressions_stack

    key = (x.shape, float(x[0, 0]))
    if key not in _STACK_INPUT:
        _STACK_INPUT.clear()
        _STACK_INPUT[key] = _window_moments(x)
    hi, clo, c, m = _STACK_INPUT[key]
    return elementary_regressions_stack(hi, cov_los=clo, names=[f"x{j}" for j in range(x.shape[1])],
                                        counts=c, means=m)


def floor_path(x: np.ndarray):
    """One X'X pass (per block of STEP rows), window sums, one batched inverse."""
    t, n = x.shape
    k = t // STEP
    xb = x[:k * STEP].reshape(k, STEP, n)
    xtx = np.matmul(xb.transpose(0, 2, 1), xb)
    s = xb.sum(axis=1)
    per = WIDTH // STEP
    cx = np.concatenate([np.zeros((1, n, n)), np.cumsum(xtx, axis=0)])
    cs = np.concatenate([np.zeros((1, n)), np.cumsum(s, axis=0)])
    lo = np.arange(0, (t - WIDTH) // STEP + 1)
    wx, ws = cx[lo + per] - cx[lo], cs[lo + per] - cs[lo]
    cov = (wx - ws[:, :, None] * ws[:, None, :] / WIDTH) / (WIDTH - 1)
    return np.linalg.inv(cov)


def loop_path(x: np.ndarray):
    out = []
    for s in range(0, x.shape[0] - WIDTH + 1, STEP):
        out.append(np.linalg.inv(np.cov(x[s:s + WIDTH], rowvar=False)))
    return np.array(out)


def rolling_ols(x: np.ndarray):
    import statsmodels.api as sm
    from statsmodels.regression.rolling import RollingOLS

    for j in range(x.shape[1]):
        others = [k for k in range(x.shape[1]) if k != j]
        RollingOLS(x[:, j], sm.add_constant(x[:, others]), window=WIDTH).fit()


def one_vs_stack(x: np.ndarray) -> None:
    """The stack against the one-window function the pipeline called before, same windows."""
    from relspan.analysis.elementary import elementary_regressions, elementary_regressions_stack

    hi, clo, c, m = _window_moments(x)
    names = [f"x{j}" for j in range(x.shape[1])]

    def one_by_one():
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            for i in range(len(c)):
                elementary_regressions(hi[i], cov_lo=clo[i], names=names, count=int(c[i]), mean=m[i])

    ts, to = [], []
    for _ in range(3):
        a = time.perf_counter()
        elementary_regressions_stack(hi, cov_los=clo, names=names, counts=c, means=m)
        ts.append(time.perf_counter() - a)
        a = time.perf_counter()
        one_by_one()
        to.append(time.perf_counter() - a)
    print(f"  stack {min(ts) * 1e3:.0f} ms against elementary_regressions window by window "
          f"{min(to) * 1e3:.0f} ms: {min(to) / min(ts):.1f}x")


def elementary(t: int, repeats: int = 5) -> None:
    x = rows(t)
    w = (t - WIDTH) // STEP + 1
    timings = {"relspan": [], "floor": [], "loop": []}
    cpu = {"stack": [], "floor": []}
    stack_only = []
    for _ in range(repeats):   # interleaved; wall (perf_counter) and CPU of the process (all threads)
        a = time.perf_counter()
        ers, st = relspan_path(x)
        timings["relspan"].append(time.perf_counter() - a)
        stack_only.append(st)
        c0 = time.process_time()
        _stack_again(x)
        cpu["stack"].append(time.process_time() - c0)
        a, c0 = time.perf_counter(), time.process_time()
        p = floor_path(x)
        timings["floor"].append(time.perf_counter() - a)
        cpu["floor"].append(time.process_time() - c0)
        a = time.perf_counter()
        loop_path(x)
        timings["loop"].append(time.perf_counter() - a)
    best = {k: min(v) for k, v in timings.items()}
    st = min(stack_only)
    rel = np.array([e.relations for e in ers])
    ref = p / np.diagonal(p, axis1=1, axis2=2)[:, :, None]
    diff = float(np.max(np.abs(rel - ref) / np.maximum(np.abs(ref), 1e-300)))
    print(f"elementary regressions, n={N}, T={t:,}, {w:,} windows (width {WIDTH}, step {STEP}); best of {repeats}, interleaved")
    print(f"  relspan pipeline path (blocks + merge + stack): {best['relspan'] * 1e3:8.1f} ms "
          f"({best['relspan'] / best['floor']:.2f}x the floor, {best['loop'] / best['relspan']:.1f}x faster than the loop)")
    print(f"    of which elementary_regressions_stack:         {st * 1e3:8.1f} ms ({st / best['floor']:.2f}x the floor)")
    print(f"  floor (one X'X pass + batched inverse):         {best['floor'] * 1e3:8.1f} ms")
    cs, cf = min(cpu["stack"]), min(cpu["floor"])
    print(f"  CPU seconds of the process (all threads), best of {repeats}: stack {cs * 1e3:.1f} ms, floor "
          f"{cf * 1e3:.1f} ms: the stack is {cs / cf:.2f}x the floor")
    print(f"  per-window loop (np.cov + np.linalg.inv):       {best['loop'] * 1e3:8.1f} ms")
    print(f"  largest relative difference of the relations, relspan vs floor: {diff:.1e}")
    if w <= 5_000:
        one_vs_stack(x)
    if t <= 20_000:
        r, _ = _best(lambda: rolling_ols(x), 1)
        fitted = t - WIDTH + 1
        print(f"  statsmodels RollingOLS x {N} (every step-1 window, {fitted:,} fits each): {r:.2f} s; "
              f"per fitted window {r / fitted * 1e6:.0f} us for all {N} fits vs relspan "
              f"{best['relspan'] / w * 1e6:.1f} us per window")


def _spec(folder: Path, windows: int, n: int, assumptions: list[str], resamples: int | None = None) -> Path:
    step = 10
    width = 100
    t = width + step * (windows - 1)
    x = rows(t, n)
    names = [f"x{j}" for j in range(n)]
    np.savetxt(folder / "d.csv", x, delimiter=",", header=",".join(names), comments="", fmt="%.6f")
    vars_ = ", ".join("{column: %s}" % c for c in names)
    (folder / "s.yaml").write_text(
        "relspan: 1\nreport: {title: bench}\ndatasets:\n  - id: d\n    title: d\n    source: d.csv\n"
        f"    variables: [{vars_}]\nwindows:\n  - {{id: full, kind: full}}\n"
        f"  - {{id: r, kind: rolling, width: {width}, step: {step}}}\n"
        f"checks: {{assumptions: [{', '.join(assumptions)}]"
        + ("" if resamples is None else f", resampling: {{resamples: {resamples}}}") + "}\n", encoding="utf-8")
    return folder / "s.yaml"


def stages(windows: int, n: int, assumptions: list[str], summaries: bool) -> None:
    from relspan.data import prepare_dataset
    from relspan.run import pipeline
    from relspan.spec import load_spec

    with tempfile.TemporaryDirectory() as d, warnings.catch_warnings():
        warnings.simplefilter("ignore")
        spec = load_spec(_spec(Path(d), windows, n, assumptions))
        ds = spec.datasets[0]
        plans = spec.plans_for(ds)
        a = time.perf_counter()
        prepared = prepare_dataset(ds, plans)
        t_prep = time.perf_counter() - a
        names = tuple(prepared.variables)
        opts = pipeline._window_options(ds, 0)
        items = [(prepared.full, names, opts, prepared.full.std(), "full sample")]
        items += [(m, names, opts, prepared.full.std(), w.label)
                  for w, m in pipeline.window_moments(prepared, "r")] if hasattr(pipeline, "window_moments") \
            else [(m, names, opts, prepared.full.std(), w.label) for w, m in zip(prepared.plan("r").windows,
                                                                                  prepared.plan("r").moments)]
        a = time.perf_counter()
        with_er = pipeline._with_elementary(items, names)
        t_er = time.perf_counter() - a
        a = time.perf_counter()
        for it in with_er:
            pipeline._analyse_task(it)
        t_tasks = time.perf_counter() - a
        t_rest = None
        if summaries:
            a = time.perf_counter()
            pipeline.analyse_prepared(ds, prepared, plans)
            t_rest = time.perf_counter() - a - t_er - t_tasks
        rss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
        print(f"stages of check: {windows:,} windows, n={n}, assumptions {','.join(assumptions)}")
        print(f"  data pass {t_prep:.2f} s; elementary (batched, all windows) {t_er:.3f} s; "
              f"window tasks {t_tasks:.2f} s ({t_tasks / len(items) * 1e3:.2f} ms per window)"
              + ("" if t_rest is None else f"; summaries + findings {max(t_rest, 0):.2f} s")
              + f"; peak RSS {rss:.0f} MiB")


#: (module, attribute, stage) of every timed call in ``check-stages``; a stage called inside another
#: is subtracted from it (the stability feed, which runs as the window tasks finish, from the tasks);
#: attributes a checkout does not have (an older one, compared side by side) are skipped
_STAGES = (
    ("relspan.data.prepare", "prepare_dataset", "data pass (reading)"),
    ("relspan.run.pipeline", "_with_elementary", "elementary regressions (batched)"),
    ("relspan.run.executors", "map_in_chunks", "window tasks (analysis + resampling)"),
    ("relspan.run.cross_window", "plan_stability", "cross-window stability"),
    ("relspan.run.cross_window", "PlanFeed.add", "cross-window stability"),
    ("relspan.run.cross_window", "PlanFeed.result", "cross-window stability"),
    ("relspan.run.cross_window", "dataset_breaks", "break scan"),
    ("relspan.run.cross_window", "full_sample_spread", "full-sample spread"),
    ("relspan.run.pipeline", "_trends", "trends"),
    ("relspan.run.pipeline", "_influence", "influence"),
    ("relspan.analysis.findings", "dataset_findings", "findings"),
    ("relspan.analysis.findings", "dataset_summary", "findings"),
    ("relspan.run.pipeline", "_check_findings", "findings"),
    ("relspan.analysis.claims", "evaluate_claims", "claims"),
)


def check_stages(spec_path: str) -> None:
    """One serial ``relspan.check`` with each stage of :data:`_STAGES` timed where it is called."""
    import importlib

    import relspan

    spent: dict[str, list[float]] = {}
    inner: list[list[float]] = []     # per running timed call: time spent in timed calls inside it
    peaks: dict[str, float] = {}      # per stage: the highest resident memory while it ran (MiB)
    held: dict[str, float] = {}       # per stage: resident memory when it last returned (MiB)

    def timed(fn, stage):
        def wrapper(*a, **k):
            w, c = time.perf_counter(), time.process_time()
            if inner:   # the caller's peak so far, before the kernel's peak is reset for this stage
                inner[-1][2] = max(inner[-1][2], _peak_mib())
            inner.append([0.0, 0.0, 0.0])
            _reset_peak()
            try:
                return fn(*a, **k)
            finally:
                dw, dc = time.perf_counter() - w, time.process_time() - c
                nested = inner.pop()
                acc = spent.setdefault(stage, [0.0, 0.0])
                acc[0] += dw - nested[0]
                acc[1] += dc - nested[1]
                top = max(_peak_mib(), nested[2])
                peaks[stage] = max(peaks.get(stage, 0.0), top)
                held[stage] = _rss_mib()
                if inner:
                    inner[-1][0] += dw
                    inner[-1][1] += dc
                    inner[-1][2] = max(inner[-1][2], top)
                    _reset_peak()
        return wrapper

    for mod, attr, stage in _STAGES:
        owner = importlib.import_module(mod)
        *path, name = attr.split(".")
        try:
            for part in path:
                owner = getattr(owner, part)
            setattr(owner, name, timed(getattr(owner, name), stage))
        except AttributeError:
            continue
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        w, c = time.perf_counter(), time.process_time()
        relspan.check(spec_path, jobs=1, use_cache=False)
        total = (time.perf_counter() - w, time.process_time() - c)
    # the stages reset the kernel's peak (ru_maxrss reads the same counter): the whole run's is their largest
    rss = max([resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024, _peak_mib(), *peaks.values()])
    print(f"relspan.check({spec_path!r}, jobs=1), in process: {total[0]:.2f} s wall, {total[1]:.2f} s CPU; "
          f"peak RSS {rss:.0f} MiB")
    listed = 0.0
    for stage, (sw, sc) in spent.items():
        listed += sc
        mem = (f"; RSS peak {peaks[stage]:6.0f} MiB, after {held[stage]:6.0f} MiB" if _HAS_PEAK and stage in peaks
               else "")
        print(f"  {stage:40s} {sw:8.2f} s wall {sc:8.2f} s CPU ({sc / total[1]:5.1%} of CPU){mem}")
    print(f"  {'the rest (spec, imports, glue)':40s} {'':8s}   {'':4s} {total[1] - listed:8.2f} s CPU")


def _status_mib(key: str) -> float:
    """``VmHWM`` / ``VmRSS`` of this process from /proc (Linux), in MiB; 0 where /proc is missing."""
    import re

    try:
        with open("/proc/self/status", encoding="ascii") as fh:
            return int(re.search(key + r":\s+(\d+)", fh.read()).group(1)) / 1024
    except (OSError, AttributeError):
        return 0.0


def _peak_mib() -> float:
    return _status_mib("VmHWM")


def _rss_mib() -> float:
    return _status_mib("VmRSS")


def _reset_peak() -> None:
    """Reset the kernel's resident-memory peak to the current RSS (Linux: ``echo 5 > /proc/self/clear_refs``)."""
    try:
        with open("/proc/self/clear_refs", "w", encoding="ascii") as fh:
            fh.write("5")
    except OSError:
        pass


_HAS_PEAK = bool(_peak_mib())


def _stage_lines(text: str) -> dict[str, float]:
    """CPU seconds per stage (and the whole check, ``total``; peak RSS in MiB, ``rss``) from check-stages."""
    import re

    out: dict[str, float] = {}
    for line in text.splitlines():
        m = re.search(r"in process: [\d.]+ s wall, ([\d.]+) s CPU; peak RSS (\d+) MiB", line)
        if m:
            out["total"], out["rss"] = float(m.group(1)), float(m.group(2))
            continue
        m = re.match(r"  (.+?)\s+[\d.]+ s wall\s+([\d.]+) s CPU", line)
        if m:
            out[m.group(1).strip()] = float(m.group(2))
            continue
        m = re.match(r"  (the rest.*?)\s+([\d.]+) s CPU", line)
        if m:
            out[m.group(1).strip()] = float(m.group(2))
    return out


def side_by_side(spec_path: str, before: str, pairs: int) -> None:
    """check-stages of this checkout (A) and of ``before`` (B) in fresh processes, A B A B ..."""
    import os
    import statistics
    import subprocess

    here = Path(__file__).resolve()
    runs: dict[str, list[dict[str, float]]] = {"A": [], "B": []}
    for _ in range(pairs):
        for side in ("A", "B"):
            env = dict(os.environ)
            if side == "B":
                env["PYTHONPATH"] = before + (os.pathsep + env["PYTHONPATH"] if env.get("PYTHONPATH") else "")
            done = subprocess.run([sys.executable, str(here), "check-stages", spec_path], env=env,
                                  capture_output=True, text=True, check=True)
            runs[side].append(_stage_lines(done.stdout))
    stages_ = [k for k in runs["B"][0] if k not in ("total", "rss")] + ["total"]
    print(f"check-stages {spec_path}: A = this checkout, B = {before}; {pairs} interleaved pairs, "
          "CPU seconds (median)")
    print(f"  {'stage':40s} {'B':>8s} {'A':>8s} {'B / A':>7s}")
    for k in stages_:
        b = statistics.median(r.get(k, 0.0) for r in runs["B"])
        a = statistics.median(r.get(k, 0.0) for r in runs["A"])
        ratio = f"{b / a:7.2f}" if a > 0.05 else f"{'':7s}"
        print(f"  {k:40s} {b:8.2f} {a:8.2f} {ratio}")
    print(f"  peak RSS MiB: B {max(r['rss'] for r in runs['B']):.0f}, A {max(r['rss'] for r in runs['A']):.0f}; "
          "per-run CPU of the whole check: B " + ", ".join(f"{r['total']:.2f}" for r in runs["B"])
          + "; A " + ", ".join(f"{r['total']:.2f}" for r in runs["A"]))


def task_costs(folder: str, windows: int, n: int, pairs: int) -> None:
    """Per-window and per-resample CPU seconds of the window tasks (see the module notes)."""
    import os
    import re
    import statistics
    import subprocess

    base = Path(folder)
    specs = {}
    for name, resamples in (("zero", 0), ("on", None)):
        (base / name).mkdir(parents=True, exist_ok=True)
        specs[name] = str(_spec(base / name, windows, n, ["elementary", "equal", "bounded"], resamples))
    here = Path(__file__).resolve()

    def tasks(spec: str, hand: bool) -> float:
        code = (f"import sys; sys.path.insert(0, {str(here.parent)!r}); import relspan.run.pipeline as p; "
                f"p.HAND_OVER = {hand!r}; import bench_user_path as b; b.check_stages({spec!r})")
        out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True,
                             env=dict(os.environ)).stdout
        return float(re.search(r"window tasks.*?([\d.]+) s CPU", out).group(1))

    runs: dict[str, list[float]] = {"alone": [], "stability": [], "intervals": []}
    for _ in range(pairs):
        runs["alone"].append(tasks(specs["zero"], False))
        runs["stability"].append(tasks(specs["zero"], True))
        runs["intervals"].append(tasks(specs["on"], True))
    c, a, b = (statistics.median(runs[k]) for k in ("alone", "stability", "intervals"))
    per = 199 if windows > 200 else 499
    w = windows + 1
    print(f"window tasks of {w} (n = {n}, {per} resamples each), CPU seconds, median of {pairs}: "
          f"analyses alone {c:.2f}, with the stability draws {a:.2f}, with the intervals too {b:.2f}")
    print(f"  per window, the analyses: {c / w * 1e3:.3f} ms")
    print(f"  per resample, drawing it and the stability decompositions: {(a - c) / (w * per) * 1e6:.1f} us")
    print(f"  per resample, the intervals and corank supports beyond that: {(b - a) / (w * per) * 1e6:.1f} us")


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("what", choices=["elementary", "stages", "check", "check-stages", "spec", "side-by-side",
                                    "task-costs"])
    ap.add_argument("spec", nargs="?")
    ap.add_argument("--rows", type=int, default=100_000)
    ap.add_argument("--windows", type=int, default=1000)
    ap.add_argument("--n", type=int, default=6)
    ap.add_argument("--assumptions", default="elementary,equal,bounded")
    ap.add_argument("--no-summaries", action="store_true")
    ap.add_argument("--resamples", type=int, default=None)
    ap.add_argument("--before", default=None, help="side-by-side: the package folder to compare against")
    ap.add_argument("--pairs", type=int, default=2)
    args = ap.parse_args()
    if args.what == "elementary":
        elementary(args.rows)
    elif args.what == "spec":
        folder = Path(args.spec)
        folder.mkdir(parents=True, exist_ok=True)
        print(_spec(folder, args.windows, args.n, args.assumptions.split(","), args.resamples))
    elif args.what == "check-stages":
        check_stages(args.spec)
    elif args.what == "side-by-side":
        if not args.before:
            ap.error("side-by-side needs --before DIR (the package folder of the other checkout)")
        side_by_side(args.spec, args.before, args.pairs)
    elif args.what == "task-costs":
        task_costs(args.spec, args.windows, args.n, args.pairs)
    elif args.what == "stages":
        stages(args.windows, args.n, args.assumptions.split(","), not args.no_summaries)
    else:
        import relspan

        out = relspan.check(args.spec, jobs=1, use_cache=False)
        print(f"check: {out.seconds:.2f} s", file=sys.stderr)


if __name__ == "__main__":
    main()
