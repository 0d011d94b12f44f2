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
    monkeypatch.setattr(pipeline, "HAND_BYTES", 0)        # nothing handed over: the stage draws each window
    asked = _count_draws(monkeypatch)
    drawn = run_analysis(spec, jobs=1, use_cache=False, progress=False)
    assert {k for k in asked if k[1] == "roll"}            # the stage drew them itself
    assert _same(_results(handed), _results(drawn))       # stability and plausible coranks included
    assert handed.dataset("alpha").plan("roll").stability["equal"].compared > 0


def test_stability_is_the_same_whether_later_draws_are_kept_or_drawn_again(tmp_path, monkeypatch):
    spec = _load(tmp_path)
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
