"""The pipeline at scale: identical results on every executor, a cache that invalidates on
exactly the inputs a dataset's result depends on, and the spec's ``run:`` section.

All data here are invented (seeded) for the tests.
"""

from __future__ import annotations

import dataclasses
import sys
from pathlib import Path

import numpy as np
import pytest

import relspan.run.pipeline as pipeline
from relspan.run.build import where_tasks_run
from relspan.run.pipeline import run_analysis
from relspan.spec.load import load_spec

from . import _tasks

_ROOT = str(Path(_tasks.__file__).resolve().parents[len(_tasks.__name__.split(".")) - 1])
if _ROOT not in sys.path:
    sys.path.insert(0, _ROOT)

SPEC = """\
relspan: 1
report:
  title: "{title}"
datasets:
  - id: alpha
    title: "Alpha"
    source: alpha.csv
    variables: [{{column: a}}, {{column: b}}, {{column: c}}]
    plans: [full, roll]
  - id: beta
    title: "Beta"
    source: beta.csv
    variables: [{{column: a}}, {{column: {beta_second}}}]
    plans: [full]
windows:
  - {{id: full, kind: full}}
  - {{id: roll, kind: rolling, width: {width}, step: 100}}
  - {{id: spare, kind: rolling, width: {spare}, step: 150}}
checks:
  assumptions: {assumptions}
{run}"""


def _write_data(folder: Path, seed: int = 7, rows: int = 600) -> None:
    """Invented rows: c = a + b plus noise (one relation), and a loose pair for beta."""
    rng = np.random.default_rng(seed)
    a, b = rng.normal(size=(2, rows))
    c = a + b + 0.1 * rng.normal(size=rows)
    with open(folder / "alpha.csv", "w") as fh:
        fh.write("a,b,c\n")
        fh.writelines(f"{x:.6f},{y:.6f},{z:.6f}\n" for x, y, z in zip(a, b, c))
    d = 0.5 * a + rng.normal(size=rows)
    with open(folder / "beta.csv", "w") as fh:
        fh.write("a,d,e\n")
        fh.writelines(f"{x:.6f},{y:.6f},{y + 1:.6f}\n" for x, y in zip(a, d))


def _spec(folder: Path, **over) -> Path:
    values = dict(title="Scale test (invented data)", width=200, spare=300, beta_second="d",
                  assumptions="[elementary, equal, bounded]", run="")
    values.update(over)
    path = folder / "spec.yaml"
    path.write_text(SPEC.format(**values))
    return path


def _same(a, b) -> bool:
    """Deep equality: dataclasses field by field, arrays bit for bit (NaN equal to NaN)."""
    if type(a) is not type(b):
        return False
    if dataclasses.is_dataclass(a):
        return all(_same(getattr(a, f.name), getattr(b, f.name)) for f in dataclasses.fields(a))
    if isinstance(a, np.ndarray):
        return a.shape == b.shape and a.dtype == b.dtype and bool(
            np.array_equal(a, b, equal_nan=a.dtype.kind in "fc"))
    if isinstance(a, (list, tuple)):
        return len(a) == len(b) and all(_same(x, y) for x, y in zip(a, b))
    if isinstance(a, dict):
        return a.keys() == b.keys() and all(_same(a[k], b[k]) for k in a)
    if isinstance(a, float):
        return a == b or (a != a and b != b)
    return a == b


def _results(run):
    return [(d.full, d.plans, d.findings) for d in run.datasets]


@pytest.fixture(scope="module")
def dask_cluster():
    distributed = pytest.importorskip("distributed")
    cluster = distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                       host="127.0.0.1", dashboard_address="127.0.0.1:0")
    try:
        yield cluster
    finally:
        cluster.close()


@pytest.mark.slow
def test_whole_pipeline_gives_identical_results_serial_pool_and_dask(tmp_path, dask_cluster):
    _write_data(tmp_path)
    spec = load_spec(_spec(tmp_path, assumptions="[elementary, equal, bounded, diagonal]"))
    serial = run_analysis(spec, jobs=1, use_cache=False, progress=False)
    pool = run_analysis(spec, jobs=2, use_cache=False, progress=False)
    dask = run_analysis(spec, scheduler=dask_cluster.scheduler_address, use_cache=False,
                        progress=False)
    assert len(serial.dataset("alpha").plan("roll").analyses) == 5  # (600 - 200) / 100 + 1
    assert _same(_results(serial), _results(pool))
    assert _same(_results(serial), _results(dask))
    assert [v.holds for v in serial.verdicts] == [v.holds for v in dask.verdicts]


class TestResultCache:
    """A dataset's cached result is reused exactly when nothing it depends on changed."""

    def _run(self, folder: Path, **over):
        spec = load_spec(_spec(folder, **over))
        return run_analysis(spec, jobs=1, cache_dir=folder / "cache", progress=False)

    @pytest.fixture
    def warm(self, tmp_path):
        _write_data(tmp_path)
        first = self._run(tmp_path)
        assert (first.cache_hits, first.cache_misses) == (0, 2)
        return tmp_path

    def _alpha_hit(self, run) -> bool:
        return run.cache_hits >= 1 and run.dataset("alpha").cache_key != ""

    def test_unchanged_rebuild_hits_for_every_dataset(self, warm):
        again = self._run(warm)
        assert (again.cache_hits, again.cache_misses) == (2, 0)

    def test_report_title_does_not_invalidate(self, warm):
        again = self._run(warm, title="Another title")
        assert (again.cache_hits, again.cache_misses) == (2, 0)

    def test_a_plan_no_dataset_uses_does_not_invalidate(self, warm):
        again = self._run(warm, spare=250)
        assert (again.cache_hits, again.cache_misses) == (2, 0)

    def test_run_section_does_not_invalidate(self, warm):
        again = self._run(warm, run="run:\n  jobs: 1\n")
        assert (again.cache_hits, again.cache_misses) == (2, 0)

    def test_another_datasets_section_invalidates_only_that_dataset(self, warm):
        before = self._run(warm)
        again = self._run(warm, beta_second="e")
        assert (again.cache_hits, again.cache_misses) == (1, 1)
        assert again.dataset("alpha").cache_key == before.dataset("alpha").cache_key
        assert again.dataset("beta").cache_key != before.dataset("beta").cache_key

    def test_data_file_bytes_invalidate(self, warm):
        text = (warm / "alpha.csv").read_text()
        (warm / "alpha.csv").write_text(text.replace("\n", "\r\n", 1))  # same numbers, new bytes
        again = self._run(warm)
        assert (again.cache_hits, again.cache_misses) == (1, 1)

    def test_a_window_plan_the_dataset_uses_invalidates_it(self, warm):
        again = self._run(warm, width=300)
        assert (again.cache_hits, again.cache_misses) == (1, 1)  # beta uses only `full`

    def test_the_checks_invalidate(self, warm):
        again = self._run(warm, assumptions="[elementary, equal]")
        assert (again.cache_hits, again.cache_misses) == (0, 2)

    def test_relspans_version_invalidates(self, warm, monkeypatch):
        # the key holds relspan's version and a hash of its source files (code_version)
        monkeypatch.setattr(pipeline, "_CODE_VERSION", pipeline.code_version() + "-other")
        again = self._run(warm)
        assert (again.cache_hits, again.cache_misses) == (0, 2)

    def test_cached_result_equals_the_computed_one(self, warm):
        spec = load_spec(_spec(warm))
        fresh = run_analysis(spec, jobs=1, use_cache=False, progress=False)
        cached = self._run(warm)
        assert cached.cache_hits == 2
        assert _same(_results(fresh), _results(cached))


class TestRunSection:
    def test_spec_run_section_is_read(self, tmp_path):
        _write_data(tmp_path)
        spec = load_spec(_spec(tmp_path, run="run:\n  scheduler: tcp://127.0.0.1:8786\n"))
        assert spec.run.scheduler == "tcp://127.0.0.1:8786" and spec.run.jobs is None

    def test_spec_run_section_is_used_when_the_command_line_is_silent(self, tmp_path):
        _write_data(tmp_path)
        spec = load_spec(_spec(tmp_path, run="run:\n  jobs: 3\n"))
        assert where_tasks_run(spec, None, None) == (3, None)

    def test_command_line_overrides_the_spec(self, tmp_path):
        _write_data(tmp_path)
        spec = load_spec(_spec(tmp_path, run="run:\n  scheduler: tcp://127.0.0.1:8786\n"))
        assert where_tasks_run(spec, 1, None) == (1, None)
        assert where_tasks_run(spec, None, "tcp://10.1.1.1:8786") == (None, "tcp://10.1.1.1:8786")

    def test_both_jobs_and_scheduler_in_the_spec_is_refused_with_line(self, tmp_path):
        from relspan.errors import SpecError

        _write_data(tmp_path)
        path = _spec(tmp_path, run="run:\n  jobs: 2\n  scheduler: tcp://127.0.0.1:8786\n")
        with pytest.raises(SpecError, match=r"spec\.yaml:\d+: run must be a mapping with at most "
                                            r"one of `jobs` or `scheduler`"):
            load_spec(path)

    def test_unreachable_scheduler_from_the_spec_is_a_clear_error(self, tmp_path):
        from relspan.api import check
        from relspan.errors import OptionsError

        _write_data(tmp_path)
        import socket

        with socket.socket() as s:  # a port on this machine that nothing listens on
            s.bind(("127.0.0.1", 0))
            port = s.getsockname()[1]
        path = _spec(tmp_path, run=f"run:\n  scheduler: tcp://127.0.0.1:{port}\n")
        pytest.importorskip("distributed")
        with pytest.raises(OptionsError, match=f"could not reach the Dask scheduler at "
                                               f"tcp://127.0.0.1:{port}"):
            check(path, use_cache=False)
