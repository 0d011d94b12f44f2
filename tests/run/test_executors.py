"""relspan.run.executors: one Executor interface for serial, process-pool and Dask runs."""

from __future__ import annotations

import os
import socket
import sys
from pathlib import Path

import pytest

from relspan.errors import DependencyError, OptionsError
from relspan.run import executors
from relspan.run.executors import (
    SerialExecutor, auto_chunk_size, available_cores, map_in_chunks, open_executor, worker_count)

from . import _tasks

# Workers (process pool, Dask) import the helpers by module name (``run._tasks`` or
# ``tests.run._tasks``, depending on pytest's import mode). Spawned workers inherit sys.path,
# so make sure the folder holding that top-level package is on it in every import mode.
_ROOT = str(Path(_tasks.__file__).resolve().parents[len(_tasks.__name__.split(".")) - 1])
if _ROOT not in sys.path:
    sys.path.insert(0, _ROOT)


class Counter:
    def __init__(self) -> None:
        self.done = 0

    def update(self, k: int = 1) -> None:
        self.done += k


@pytest.fixture(scope="module")
def dask_cluster():
    distributed = pytest.importorskip("distributed")
    cluster = distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                       host="127.0.0.1", dashboard_address="127.0.0.1:0")
    try:
        yield cluster
    finally:
        cluster.close()


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


class TestSerialExecutor:
    def test_runs_the_task_on_submit_and_returns_a_done_future(self):
        with SerialExecutor() as ex:
            f = ex.submit(_tasks.square, 12)
            assert f.done() and f.result() == 144

    def test_keeps_the_task_exception_in_the_future(self):
        f = SerialExecutor().submit(_tasks.fail_on_seven, 7)
        with pytest.raises(ValueError, match="task 7 failed on purpose"):
            f.result()

    def test_refuses_work_after_shutdown(self):
        ex = SerialExecutor()
        ex.shutdown()
        with pytest.raises(RuntimeError, match="after shutdown"):
            ex.submit(_tasks.square, 1)


class TestOpenExecutor:
    def test_one_job_runs_in_this_process(self):
        with open_executor(jobs=1) as ex:
            assert isinstance(ex, SerialExecutor)
            assert map_in_chunks(ex, _tasks.process_id, range(3)) == [os.getpid()] * 3

    def test_default_is_serial_when_one_core_is_available(self, monkeypatch):
        monkeypatch.setattr(executors.os, "sched_getaffinity", lambda pid: {0})
        with open_executor() as ex:
            assert isinstance(ex, SerialExecutor)

    def test_default_uses_every_core_in_the_affinity_mask(self, monkeypatch):
        monkeypatch.setattr(executors.os, "sched_getaffinity", lambda pid: {0, 2, 5})
        assert available_cores() == 3
        with open_executor() as ex:  # workers start on first submit; none here
            assert worker_count(ex) == 3

    def test_process_pool_does_not_fork_and_runs_elsewhere(self):
        with open_executor(jobs=2) as ex:
            assert ex.start_method in ("forkserver", "spawn")
            pids = set(map_in_chunks(ex, _tasks.process_id, range(8), chunk_size=1))
        assert os.getpid() not in pids

    @pytest.mark.parametrize("jobs", [0, -3, 1.5, True, "4"])
    def test_rejects_jobs_that_are_not_a_positive_whole_number(self, jobs):
        with pytest.raises(OptionsError, match=r"--jobs must be a whole number") as info:
            with open_executor(jobs=jobs):
                pass
        assert info.value.fix and "--jobs 1" in info.value.fix

    @pytest.mark.parametrize("address", ["localhost:8786", "http://h:1", "tcp://", "tcp://a b:1"])
    def test_rejects_a_malformed_scheduler_address(self, address):
        with pytest.raises(OptionsError, match=r"tcp://10\.0\.0\.5:8786"):
            with open_executor(scheduler=address):
                pass

    def test_jobs_and_scheduler_together_are_refused(self):
        with pytest.raises(OptionsError, match="both given") as info:
            with open_executor(jobs=2, scheduler="tcp://127.0.0.1:8786"):
                pass
        assert "drop --jobs" in info.value.fix

    def test_missing_dask_asks_for_the_cluster_extra(self, monkeypatch):
        monkeypatch.setitem(sys.modules, "distributed", None)  # makes the import fail
        with pytest.raises(DependencyError) as info:
            with open_executor(scheduler="tcp://127.0.0.1:8786"):
                pass
        assert "pip install 'relspan[cluster]'" in str(info.value)

    def test_unreachable_scheduler_names_the_address_and_a_fix(self):
        pytest.importorskip("distributed")
        address = f"tcp://127.0.0.1:{_free_port()}"
        with pytest.raises(OptionsError, match="could not reach the Dask scheduler") as info:
            with open_executor(scheduler=address, timeout=1.0):
                pass
        assert address in str(info.value)
        assert "scheduler is running" in info.value.fix

    def test_dask_executor_reports_its_worker_threads(self, dask_cluster):
        with open_executor(scheduler=dask_cluster.scheduler_address) as ex:
            assert worker_count(ex) == 2


class TestAutoChunkSize:
    def test_aims_at_four_chunks_per_worker(self):
        assert auto_chunk_size(480, 2) == 60
        assert auto_chunk_size(1000, 8) == 32  # ceil(1000 / 32)

    def test_never_makes_empty_chunks_for_few_items(self):
        assert auto_chunk_size(3, 16) == 1
        assert auto_chunk_size(0, 4) == 1

    def test_in_process_runs_are_cut_only_for_progress(self):
        assert auto_chunk_size(3200, 1) == 100

    def test_large_plans_get_chunks_of_at_most_200_items(self):
        # one chunk's results travel (pickled) in one piece: their size is bounded
        assert auto_chunk_size(20001, 2) == 200
        assert auto_chunk_size(20001, 1) == 200
        assert auto_chunk_size(1600, 2) == 200
        assert auto_chunk_size(1599, 2) == 200
        assert auto_chunk_size(1000, 2) == 125


class TestMapInChunks:
    @pytest.mark.parametrize("chunk_size", [None, 1, 3, 100])
    def test_returns_results_in_item_order(self, chunk_size):
        with open_executor(jobs=1) as ex:
            assert map_in_chunks(ex, _tasks.square, range(10), chunk_size=chunk_size) == \
                [i * i for i in range(10)]

    def test_empty_input_gives_empty_list(self):
        with open_executor(jobs=1) as ex:
            assert map_in_chunks(ex, _tasks.square, []) == []

    def test_rejects_a_bad_chunk_size(self):
        with pytest.raises(ValueError, match="chunk_size"):
            map_in_chunks(SerialExecutor(), _tasks.square, [1], chunk_size=0)

    def test_advances_progress_by_every_item_serial(self):
        counter = Counter()
        with open_executor(jobs=1) as ex:
            map_in_chunks(ex, _tasks.square, range(50), chunk_size=7, progress=counter)
        assert counter.done == 50

    def test_advances_progress_by_every_item_in_a_pool(self):
        counter = Counter()
        with open_executor(jobs=2) as ex:
            map_in_chunks(ex, _tasks.square, range(50), chunk_size=7, progress=counter)
        assert counter.done == 50

    @pytest.mark.parametrize("jobs", [1, 2])
    def test_reraises_the_task_error(self, jobs):
        with open_executor(jobs=jobs) as ex:
            with pytest.raises(ValueError, match="task 7 failed on purpose"):
                map_in_chunks(ex, _tasks.fail_on_seven, range(20), chunk_size=2)

    def test_serial_run_stops_at_the_first_failing_chunk(self):
        counter = Counter()
        with pytest.raises(ValueError):
            map_in_chunks(SerialExecutor(), _tasks.fail_on_seven, range(20), chunk_size=2,
                          progress=counter)
        assert counter.done == 6  # chunks [0,1] [2,3] [4,5] finished; [6,7] failed; rest never ran

    def test_consume_reads_each_chunk_in_item_order_even_when_a_later_chunk_finishes_first(self):
        import threading
        from concurrent.futures import ThreadPoolExecutor

        first_may_finish = threading.Event()

        def task(x):
            if x == 0:      # the first chunk waits until the second has finished
                assert first_may_finish.wait(timeout=60)
            return x * x

        seen, finished = [], []

        def consume(start, results):
            seen.append((start, list(results)))
            return [r + 1 for r in results]      # what it returns stands for the results

        with ThreadPoolExecutor(2) as ex:
            real = ex.submit

            def submit(fn, *a):
                f = real(fn, *a)
                if a[1][0] == 2:    # the chunk holding item 2: let the first chunk go once it is done
                    f.add_done_callback(lambda _: (finished.append(2), first_may_finish.set()))
                return f

            ex.submit = submit
            out = map_in_chunks(ex, task, range(6), chunk_size=2, consume=consume)
        assert finished == [2]
        assert [s for s, _ in seen] == [0, 2, 4]
        assert [r for _, rs in seen for r in rs] == [x * x for x in range(6)]
        assert out == [x * x + 1 for x in range(6)]

    def test_consume_runs_as_chunks_finish_in_process_not_after_all_of_them(self):
        ran, order = [], []

        def task(x):
            ran.append(x)
            return x

        def consume(start, results):
            order.append((start, len(ran)))    # how many tasks had run when this chunk was read
            return results

        map_in_chunks(SerialExecutor(), task, range(9), chunk_size=3, consume=consume)
        assert order == [(0, 3), (3, 6), (6, 9)]

    def test_dask_reraises_the_task_error(self, dask_cluster):
        with open_executor(scheduler=dask_cluster.scheduler_address) as ex:
            with pytest.raises(ValueError, match="task 7 failed on purpose"):
                map_in_chunks(ex, _tasks.fail_on_seven, range(20), chunk_size=2)


def test_results_are_identical_serial_process_pool_and_dask(dask_cluster):
    seeds = list(range(37))
    with open_executor(jobs=1) as ex:
        serial = map_in_chunks(ex, _tasks.window_statistics, seeds)
    with open_executor(jobs=2) as ex:
        pool = map_in_chunks(ex, _tasks.window_statistics, seeds)
    with open_executor(scheduler=dask_cluster.scheduler_address) as ex:
        dask = map_in_chunks(ex, _tasks.window_statistics, seeds)
    assert serial == pool == dask  # bit for bit, in order
    assert len(serial) == 37
