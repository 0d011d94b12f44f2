"""The cross-window stage draws each window's resamples once, whichever assumptions read them.

Invented data (tests/run/test_pipeline_scale.py's seeded writer).
"""

from __future__ import annotations

import collections

import numpy as np

from relspan.run import cross_window
from relspan.run.pipeline import run_analysis
from relspan.spec.load import load_spec

from .test_pipeline_scale import _results, _same, _spec, _write_data

RESAMPLING = "  resampling: {resamples: 39, seed: 3}\n"


def _load(folder):
    _write_data(folder)
    path = _spec(folder, assumptions="[elementary, equal, bounded]")
    path.write_text(path.read_text() + RESAMPLING)
    return load_spec(path)


def _count_draws(monkeypatch) -> collections.Counter:
    """Counts every draw of a window's resamples (window tasks and the cross-window stage) by stream."""
    from relspan.analysis import inference

    asked = collections.Counter()
    real = inference.draw_window

    def counting(stats, *, options, seed_key):
        asked[tuple(seed_key)] += 1
        return real(stats, options=options, seed_key=seed_key)

    monkeypatch.setattr(inference, "draw_window", counting)
    return asked


def test_each_window_is_resampled_once_for_its_intervals_and_every_assumption(tmp_path, monkeypatch):
    spec = _load(tmp_path)
    asked = _count_draws(monkeypatch)
    run = run_analysis(spec, jobs=1, use_cache=False, progress=False)
    stability = run.dataset("alpha").plan("roll").stability
    assert {"elementary", "equal", "bounded"} <= set(stability)     # three assumptions compared
    drawn = {k: v for k, v in asked.items() if k[1] == "roll"}
    assert len(drawn) == len(run.dataset("alpha").plan("roll").analyses)
    assert set(drawn.values()) == {1}          # the task's draw serves its intervals and the stage


def test_without_intervals_the_stability_still_rests_on_one_draw_per_window(tmp_path, monkeypatch):
    _write_data(tmp_path)
    path = _spec(tmp_path, assumptions="[elementary, equal, bounded]")
    path.write_text(path.read_text() + "  resampling: {resamples: 0, seed: 3}\n")
    asked = _count_draws(monkeypatch)
    run = run_analysis(load_spec(path), jobs=1, use_cache=False, progress=False)
    plan = run.dataset("alpha").plan("roll")
    assert all(a.inference is None for a in plan.analyses)            # no intervals asked for
    drawn = {k: v for k, v in asked.items() if k[1] == "roll"}
    assert len(drawn) == len(plan.analyses) and set(drawn.values()) == {1}
    assert plan.stability["equal"].resamples == cross_window.plan_options(
        run.dataset("alpha").spec, len(plan.analyses)).resamples


def test_stability_is_the_same_whether_the_tasks_hand_their_draws_over_or_not(tmp_path, monkeypatch):
    from relspan.run import pipeline

    spec = _load(tmp_path)
    handed = run_analysis(spec, jobs=1, use_cache=False, progress=False)
    monkeypatch.setattr(pipeline, "HAND_OVER", False)     # nothing handed over: the stage draws each window
    asked = _count_draws(monkeypatch)
    drawn = run_analysis(spec, jobs=1, use_cache=False, progress=False)
    assert {k for k in asked if k[1] == "roll"}            # the stage drew them itself
    assert _same(_results(handed), _results(drawn))       # stability and plausible coranks included
    assert handed.dataset("alpha").plan("roll").stability["equal"].compared > 0


def test_stability_is_the_same_whether_later_draws_are_kept_or_drawn_again(tmp_path, monkeypatch):
    from relspan.run import pipeline

    spec = _load(tmp_path)
    monkeypatch.setattr(pipeline, "HAND_OVER", False)     # the stage draws (and keeps) windows itself
    kept = run_analysis(spec, jobs=1, use_cache=False, progress=False)
    monkeypatch.setattr(cross_window, "KEEP_BYTES", 0)      # nothing kept: drawn again when asked
    again = run_analysis(spec, jobs=1, use_cache=False, progress=False)
    assert _same(_results(kept), _results(again))
    plan = kept.dataset("alpha").plan("roll")
    assert plan.stability["equal"].compared > 0
    assert np.isfinite(plan.stability["equal"].family_critical)


def test_plausible_coranks_apply_the_window_rule_to_every_resample():
    import types

    from relspan.analysis.resample import GranuleStats, resample_covariances
    from relspan.analysis.window import _corank_by_eigenvalues

    rng = np.random.default_rng(4)   # invented rows: two near-relations among four variables
    f = rng.standard_normal((300, 2))
    x = np.hstack([f, f @ [[1.0, 0.5], [-0.3, 1.0]]]) + 0.15 * rng.standard_normal((300, 4))
    cr = resample_covariances(GranuleStats.from_rows(x, ordered=False), resamples=49, rng=rng)
    for eps in (0.01, 0.03, 0.1):
        w = types.SimpleNamespace(scale="correlation", eps=eps, coranks={"equal": None})
        d = np.sqrt(np.diagonal(cr.covariances, axis1=1, axis2=2))
        cor = cr.covariances / (d[:, :, None] * d[:, None, :])
        lam = np.linalg.eigvalsh(cor)
        qs = np.array([_corank_by_eigenvalues(v, eps) for v in lam])
        want = frozenset(int(q) for q in np.flatnonzero(np.bincount(qs, minlength=4) >= 0.05 * 49))
        assert cross_window.plausible_coranks(cr, w, "equal") == want


def test_the_stability_stage_draws_what_the_window_tasks_draw(tmp_path, monkeypatch):
    """Same scheme, block length and per-plan cap as the window tasks (analysis/inference.py), so both
    stages read one stream of resamples and the methods page's cap is true of both."""
    from relspan.analysis.inference import MANY_WINDOWS, MANY_WINDOWS_RESAMPLES

    path = _spec(tmp_path, assumptions="[equal]")
    _write_data(tmp_path)
    path.write_text(path.read_text() + "  resampling: {resamples: 499, scheme: moving, block_length: 7, seed: 3}\n")
    ds = load_spec(path).datasets[0]
    opts = cross_window._resampling_options(ds)
    assert (opts.scheme, opts.block_length) == ("moving", 7)
    assert cross_window._for_plan(opts, MANY_WINDOWS).resamples == 499
    assert cross_window._for_plan(opts, MANY_WINDOWS + 1).resamples == MANY_WINDOWS_RESAMPLES
    seen = []
    real = cross_window.resample.resample_covariances

    def spy(stats, **kw):
        seen.append((kw["scheme"], kw["block_length"], stats.rows_per_granule))
        return real(stats, **kw)

    from relspan.analysis import inference

    monkeypatch.setattr(inference, "resample_covariances", spy)
    run_analysis(load_spec(path), jobs=1, use_cache=False, progress=False)
    assert seen and all(s == "moving" and b == max(7 / g, 1.0) for s, b, g in seen)


def _many_windows(folder, rows: int = 9000):
    """A rolling plan of 89 windows (above the pairwise cap: neighbours and the reference only)."""
    _write_data(folder, rows=rows)
    path = _spec(folder, assumptions="[elementary, equal, bounded]")
    path.write_text(path.read_text() + RESAMPLING)
    return load_spec(path)


def test_the_stage_reads_each_window_as_its_task_finishes_and_holds_few_windows_draws(tmp_path, monkeypatch):
    """Every window is handed over and drawn once, and the handed bases of finished windows are let go
    while later tasks run (not all held until the last task: memory bounded whatever the plan's size)."""
    import weakref

    from relspan.analysis import stability
    from relspan.run.executors import auto_chunk_size

    spec = _many_windows(tmp_path)
    monkeypatch.setattr(stability, "_CHUNK", 16)        # comparisons per batch: several batches here
    asked = _count_draws(monkeypatch)
    alive: list = []
    most = [0]
    real = cross_window.handed_draws

    def tracking(*a, **k):
        h = real(*a, **k)
        alive.extend(weakref.ref(b) for b in h.bases.values())
        most[0] = max(most[0], sum(r() is not None for r in alive))
        return h

    monkeypatch.setattr(cross_window, "handed_draws", tracking)
    run = run_analysis(spec, jobs=1, use_cache=False, progress=False)
    plan = run.dataset("alpha").plan("roll")
    w = len(plan.analyses)
    assert w > stability.PAIRWISE_CAP and plan.stability["equal"].pairwise_deg is None
    drawn = {k: v for k, v in asked.items() if k[1] == "roll"}
    assert len(drawn) == w and set(drawn.values()) == {1}      # nothing drawn again by the stage
    per_window = len(alive) // w                                # elementary, and equal/bounded's shared one
    # held at once: the executor's chunk of finished tasks, and the first windows up to the pairwise cap
    # (every pair is compared below it) or the windows of one batch of comparisons past it
    bound = per_window * (auto_chunk_size(w + 1, 1) + max(stability.PAIRWISE_CAP, 16) + 2)
    assert most[0] <= bound < per_window * w, (most[0], bound, w)


def test_streamed_stability_equals_the_stage_drawing_every_window_itself(tmp_path, monkeypatch):
    from relspan.analysis import stability
    from relspan.run import pipeline

    spec = _many_windows(tmp_path)
    monkeypatch.setattr(stability, "_CHUNK", 16)
    streamed = run_analysis(spec, jobs=1, use_cache=False, progress=False)
    monkeypatch.setattr(pipeline, "HAND_OVER", False)
    drawn = run_analysis(spec, jobs=1, use_cache=False, progress=False)
    assert _same(_results(streamed), _results(drawn))
    st = streamed.dataset("alpha").plan("roll").stability
    assert all(s.compared > stability._CHUNK for s in st.values())   # several batches were streamed
