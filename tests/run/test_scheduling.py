"""Where tasks run when nobody says: serial below a stated amount of work, a pool above it."""

from __future__ import annotations

import pytest

from relspan.run.executors import POOL_ABOVE_S, SerialExecutor, choose_local, window_work
from relspan.run.pipeline import LazyExecutor


def test_small_work_runs_in_this_process_and_says_why():
    workers, words = choose_local(0.3, 2)
    assert workers == 1
    assert words.startswith("in this process") and f"{POOL_ABOVE_S:g} s" in words and "0.3 s" in words


def test_large_work_runs_on_every_core_and_says_why():
    workers, words = choose_local(10 * POOL_ABOVE_S, 2)
    assert workers == 2 and words.startswith("on 2 worker processes") and "above" in words


def test_one_core_always_runs_in_this_process():
    assert choose_local(1e6, 1)[0] == 1


def test_the_diagonal_analysis_dominates_the_estimate_and_grows_with_n_squared():
    base = window_work(1000, 4, ("elementary", "equal", "bounded"))
    diag4 = window_work(1000, 4, ("elementary", "diagonal"))
    diag8 = window_work(1000, 8, ("elementary", "diagonal"))
    assert base < POOL_ABOVE_S < diag4 and diag8 > 3.5 * diag4 - base


def test_lazy_executor_chooses_per_stage_and_records_the_reason(monkeypatch):
    monkeypatch.setattr("relspan.run.executors.available_cores", lambda: 2)
    lazy = LazyExecutor(auto=True)
    lazy.expect(0.1, "analysis of small")
    assert isinstance(lazy.get(), SerialExecutor)
    assert lazy.decisions == [("analysis of small", choose_local(0.1, 2)[1])]
    lazy.close()


def test_the_verbose_summary_names_each_stage_with_its_choice(monkeypatch):
    # stages with the same choice and reason are named together; the figures' own choice is told apart
    from relspan.run.build import AUTO, _where

    monkeypatch.setattr("relspan.run.executors.available_cores", lambda: 2)
    lazy = LazyExecutor(auto=True)
    for work, stage in ((0.5, "analysis of a"), (0.5, "analysis of b"), (3 * POOL_ABOVE_S, "figures")):
        lazy.expect(work, stage)
        lazy.get()
    said = _where(AUTO, lazy)
    lazy.close()
    small, large = choose_local(0.5, 2)[1], choose_local(3 * POOL_ABOVE_S, 2)[1]
    assert said == f"analysis of a and analysis of b {small}; figures {large}"


@pytest.mark.parametrize("jobs, scheduler", [(1, None), (3, None), (None, "tcp://127.0.0.1:1")])
def test_explicit_jobs_or_a_cluster_are_never_second_guessed(jobs, scheduler):
    assert not LazyExecutor(jobs, scheduler, auto=True).auto


def test_a_first_build_does_not_hash_its_file_before_the_pass_and_a_rebuild_only_hashes_it(tmp_path, monkeypatch):
    """No separate hashing pass before the data pass on a cold run; an unchanged rebuild hashes
    the file alone (no data pass)."""
    import numpy as np

    import relspan
    import relspan.data.sources as sources
    from relspan.run import pipeline

    rng = np.random.default_rng(3)
    x = rng.normal(size=(400, 3))
    x[:, 2] = x[:, 0] - x[:, 1] + 0.05 * rng.normal(size=400)
    data = tmp_path / "d.csv"
    np.savetxt(data, x, delimiter=",", header="a,b,c", comments="", fmt="%.6f")
    spec = tmp_path / "s.yaml"
    spec.write_text("relspan: 1\nreport: {title: t}\ndatasets:\n  - id: d\n    title: d\n    source: d.csv\n"
                    "    variables: [{column: a}, {column: b}, {column: c}]\n"
                    "windows:\n  - {id: full, kind: full}\n"
                    "checks: {assumptions: [elementary, equal]}\n", encoding="utf-8")
    hashed, passes = [], []
    real_hash = sources.file_sha256
    monkeypatch.setattr(sources, "file_sha256", lambda p, **k: hashed.append(p) or real_hash(p, **k))
    import relspan.data.prepare as prepare
    real_prepare = prepare.prepare_dataset
    monkeypatch.setattr(prepare, "prepare_dataset", lambda *a, **k: passes.append(1) or real_prepare(*a, **k))
    first = relspan.check(spec, jobs=1)
    assert first.run.cache_misses == 1 and not hashed and len(passes) == 1
    again = relspan.check(spec, jobs=1)
    assert again.run.cache_hits == 1 and len(hashed) == 1 and len(passes) == 1
    data.write_text(data.read_text() + "0.1,0.2,0.3\n")
    changed = relspan.check(spec, jobs=1)
    assert changed.run.cache_misses == 1 and len(passes) == 2
    assert pipeline is not None


def test_resampling_counts_in_the_estimate_and_in_proportion_to_the_resamples():
    base = window_work(1000, 6, ("elementary", "equal", "bounded"))
    stab = window_work(1000, 6, ("elementary", "equal", "bounded"), stability_resamples=199)
    both = window_work(1000, 6, ("elementary", "equal", "bounded"), resamples=199, stability_resamples=199)
    twice = window_work(1000, 6, ("elementary", "equal", "bounded"), resamples=398, stability_resamples=398)
    assert base < stab < both
    assert twice - base == pytest.approx(2 * (both - base))
    # a task that resamples for its intervals draws once: the stability draws are not counted twice
    assert window_work(10, 6, ("equal",), resamples=199) == window_work(10, 6, ("equal",), resamples=199,
                                                                        stability_resamples=199)


def _spec(tmp_path, windows: int, resamples: int | None, assumptions: str = "elementary, equal, bounded"):
    from relspan.spec import load_spec

    rows = 100 + 10 * (windows - 1)
    (tmp_path / "d.csv").write_text("a,b,c\n" + "".join(f"{i % 7},{i % 5},{i % 3}\n" for i in range(rows)))
    extra = "" if resamples is None else f", resampling: {{resamples: {resamples}}}"
    (tmp_path / "s.yaml").write_text(
        "relspan: 1\nreport: {title: t}\ndatasets:\n  - id: d\n    title: d\n    source: d.csv\n"
        "    variables: [{column: a}, {column: b}, {column: c}]\n"
        f"windows:\n  - {{id: full, kind: full}}\n  - {{id: r, kind: rolling, width: 100, step: 10}}\n"
        f"checks: {{assumptions: [{assumptions}]{extra}}}\n", encoding="utf-8")
    spec = load_spec(tmp_path / "s.yaml")
    ds = spec.datasets[0]
    return ds, [(p, 1 if p.kind == "full" else windows) for p in spec.plans_for(ds)]


def test_a_plan_whose_resampling_dominates_goes_to_the_pool_where_the_analyses_alone_would_not(tmp_path):
    from relspan.run.pipeline import _analysis_work

    ds, counts = _spec(tmp_path, 1000, None)
    work = _analysis_work(ds, counts)
    analyses_alone = window_work(1 + 1000, 3, tuple(ds.checks.assumptions))
    assert analyses_alone < POOL_ABOVE_S < work
    assert choose_local(analyses_alone, 2)[0] == 1 and choose_local(work, 2)[0] == 2


def test_resamples_zero_still_counts_the_stability_draws_and_small_plans_stay_in_process(tmp_path):
    from relspan.run.pipeline import _analysis_work

    ds0, counts0 = _spec(tmp_path, 1000, 0)
    ds, counts = _spec(tmp_path, 1000, None)
    analyses_alone = window_work(1 + 1000, 3, tuple(ds0.checks.assumptions))
    assert analyses_alone < _analysis_work(ds0, counts0) < _analysis_work(ds, counts)
    small, small_counts = _spec(tmp_path, 20, None)
    assert choose_local(_analysis_work(small, small_counts), 2)[0] == 1


def test_plans_of_many_windows_are_costed_at_their_capped_resamples(tmp_path):
    from relspan.analysis.inference import MANY_WINDOWS, MANY_WINDOWS_RESAMPLES
    from relspan.run.executors import _INTERVAL_RESAMPLE_S, _STABILITY_RESAMPLE_S
    from relspan.run.pipeline import _analysis_work

    few, few_counts = _spec(tmp_path, MANY_WINDOWS, None)
    many, many_counts = _spec(tmp_path, MANY_WINDOWS + 1, None)
    # the full sample's task and the full plan's one window keep the spec's 499
    full = 2 * window_work(1, 3, tuple(few.checks.assumptions), resamples=499)
    per_few = _analysis_work(few, few_counts) - full
    per_many = _analysis_work(many, many_counts) - full
    each = _STABILITY_RESAMPLE_S + _INTERVAL_RESAMPLE_S
    assert per_few / MANY_WINDOWS == pytest.approx(window_work(1, 3, ("elementary", "equal", "bounded"))
                                                   + 499 * each)
    assert per_many / (MANY_WINDOWS + 1) == pytest.approx(window_work(1, 3, ("elementary", "equal", "bounded"))
                                                          + MANY_WINDOWS_RESAMPLES * each)
