"""Resampling runs inside each window task: the same numbers serially, on a process pool and from the cache.

Invented data (tests/run/test_pipeline_scale.py's seeded writer).
"""

from __future__ import annotations

import numpy as np

from relspan.analysis.inference import resampling_options
from relspan.run.pipeline import run_analysis
from relspan.spec.load import load_spec

from .test_pipeline_scale import _results, _same, _spec, _write_data

RESAMPLING = "  resampling: {resamples: 59, diagonal_resamples: 9, seed: 5}\n"


def _load(folder, extra=RESAMPLING):
    _write_data(folder)
    path = _spec(folder, assumptions="[elementary, equal, bounded, diagonal]")
    path.write_text(path.read_text() + extra)
    return load_spec(path)


def test_every_window_carries_its_inference_identical_with_one_and_two_jobs(tmp_path):
    spec = _load(tmp_path)
    one = run_analysis(spec, jobs=1, use_cache=False, progress=False)
    two = run_analysis(spec, jobs=2, use_cache=False, progress=False)
    alpha = one.dataset("alpha")
    windows = [alpha.full, *alpha.plan("roll").analyses]
    assert all(w.inference is not None and w.inference.resamples == 59 for w in windows)
    assert alpha.full.inference.coranks["diagonal"].resamples == 9
    assert "diagonal" not in alpha.plan("roll").analyses[0].inference.coranks   # rolling: not computed
    assert alpha.full.inference.seed[0] == 5
    assert _same(_results(one), _results(two))


def test_cached_inference_equals_the_computed_one(tmp_path):
    spec = _load(tmp_path)
    first = run_analysis(spec, jobs=1, cache_dir=tmp_path / "cache", progress=False)
    again = run_analysis(spec, jobs=1, cache_dir=tmp_path / "cache", progress=False)
    assert again.cache_hits == 2
    assert _same(_results(first), _results(again))
    a, b = (r.dataset("alpha").full.inference for r in (first, again))
    assert a.to_dict() == b.to_dict() and a.eigenvalues == b.eigenvalues


def test_resamples_zero_turns_inference_off(tmp_path):
    spec = _load(tmp_path, extra="  resampling: {resamples: 0}\n")
    run = run_analysis(spec, jobs=1, use_cache=False, progress=False)
    assert all(w.inference is None for d in run.datasets for w in [d.full, *(a for p in d.plans for a in p.analyses)])


def test_resampling_options_resolve_auto_scheme_and_seed(tmp_path):
    spec = _load(tmp_path, extra="")
    opts = resampling_options(spec.datasets[0])
    # no time column: rows have no order, so the iid bootstrap; seed from checks.seed; defaults 499 / 0.90
    assert (opts.scheme, opts.seed, opts.resamples, opts.level, opts.block_length) == ("iid", 0, 499, 0.90, None)
    assert np.isclose(opts.level, 0.9)


def test_plans_with_very_many_windows_get_the_stated_cap():
    from relspan.analysis.inference import (MANY_WINDOWS, MANY_WINDOWS_RESAMPLES, ResamplingOptions,
                                            diagonal_scope)
    from relspan.report.text import INFERENCE_RULES

    opts = ResamplingOptions(resamples=499, diagonal_resamples=99)
    assert diagonal_scope(opts, "periods", 2) == opts
    assert diagonal_scope(opts, "rolling", 14).diagonal_resamples == 0
    capped = diagonal_scope(opts, "periods", MANY_WINDOWS + 1)
    assert (capped.resamples, capped.diagonal_resamples) == (MANY_WINDOWS_RESAMPLES, 99)
    # the methods page states the same numbers
    assert any(f"more than {MANY_WINDOWS} windows" in r and f"{MANY_WINDOWS_RESAMPLES} times" in r
               for r in INFERENCE_RULES)


def test_window_task_granules_equal_the_prepared_datasets_own(tmp_path):
    from relspan.data.prepare import prepare_dataset
    from relspan.run.pipeline import _GranuleSpan

    spec = _load(tmp_path)
    ds = spec.datasets[0]
    prepared = prepare_dataset(ds, spec.plans_for(ds))
    w = prepared.plan("roll").windows[2]
    lo, hi = prepared.granules.span(w.first_row - 1, w.last_row - 1)
    mine = _GranuleSpan.of(prepared, lo, hi).stats()
    theirs = prepared.window_granules("roll", 2)
    for f in ("counts", "means", "comoments"):
        assert np.array_equal(getattr(mine, f), getattr(theirs, f))
    assert (mine.rows_per_granule, mine.ordered) == (theirs.rows_per_granule, theirs.ordered)
