"""Where independent tasks run: in this process, a local process pool, or Dask.

One interface, :class:`concurrent.futures.Executor`, serves all three, so the
pipeline has a single code path:

* ``jobs=1``: :class:`SerialExecutor` runs each task as it is submitted, in
  this process (no pickling, plain tracebacks, easiest to debug);
* ``jobs=N`` (default: the cores this process may use): a local
  :class:`~concurrent.futures.ProcessPoolExecutor` whose workers start with the
  ``forkserver`` method (``spawn`` where that is unavailable), never ``fork``,
  which is unsafe once threads (BLAS, Dask) exist;
* ``scheduler="tcp://host:port"``: a Dask ``distributed`` cluster through
  ``Client(address).get_executor()``.

Tasks are top-level functions (so that workers can import them) and must be
deterministic; :func:`map_in_chunks` then returns identical results whichever
executor ran them. Batching many small tasks into chunks amortises the
per-task overhead (a few milliseconds on Dask).
"""

from __future__ import annotations

import math
import multiprocessing
import os
import signal
import re
from concurrent.futures import FIRST_COMPLETED, Executor, Future, ProcessPoolExecutor, wait
from contextlib import contextmanager
from threading import Lock
from typing import Any, Callable, Iterable, Iterator, Protocol, Sequence

from ..errors import DependencyError, OptionsError

__all__ = [
    "POOL_ABOVE_S",
    "FIGURE_S",
    "window_work",
    "choose_local",
    "SerialExecutor",
    "open_executor",
    "available_cores",
    "worker_count",
    "auto_chunk_size",
    "map_in_chunks",
    "CONNECT_TIMEOUT_S",
]

#: seconds to wait for a Dask scheduler before reporting it unreachable
CONNECT_TIMEOUT_S = 5.0

#: chunks per worker when the chunk size is chosen automatically: enough to
#: balance uneven tasks, few enough that each chunk outweighs its overhead
_CHUNKS_PER_WORKER = 4

#: in-process runs are chunked only so that progress can advance
_SERIAL_CHUNKS = 32

#: most items in an automatically sized chunk: a worker pickles a chunk's results (with each
#: window's resampled bases, about 75 KB a window) in one piece and this process holds that piece
#: and its unpickled copy at once, so large plans are cut finer (2,500-window chunks of a
#: 20,000-window plan on two workers peaked at 1,004 MiB in this process, 1,736 MiB in all)
_MAX_CHUNK_ITEMS = 200

_ADDRESS = re.compile(r"^(tcp|tls)://[^\s/:]+(:\d{1,5})?$|^(tcp|tls)://\[[0-9a-fA-F:]+\](:\d{1,5})?$")


class _Counter(Protocol):
    def update(self, k: int = 1) -> None: ...


class SerialExecutor(Executor):
    """An :class:`~concurrent.futures.Executor` that runs each task on submit.

    The returned future is already done: it holds the result, or the
    exception the task raised (re-raised by ``future.result()``).
    """

    workers = 1

    def __init__(self) -> None:
        self._shutdown = False
        self._lock = Lock()

    def submit(self, fn: Callable[..., Any], /, *args: Any, **kwargs: Any) -> Future:
        with self._lock:
            if self._shutdown:
                raise RuntimeError("cannot schedule new futures after shutdown")
        future: Future = Future()
        future.set_running_or_notify_cancel()
        try:
            result = fn(*args, **kwargs)
        except BaseException as exc:  # the future carries it, as a pool's would
            if isinstance(exc, (KeyboardInterrupt, SystemExit)):
                raise
            future.set_exception(exc)
        else:
            future.set_result(result)
        return future

    def shutdown(self, wait: bool = True, *, cancel_futures: bool = False) -> None:
        with self._lock:
            self._shutdown = True


class _ProcessPool(ProcessPoolExecutor):
    """A process pool that remembers its size (for :func:`worker_count`)."""

    def __init__(self, workers: int) -> None:
        methods = multiprocessing.get_all_start_methods()
        method = "forkserver" if "forkserver" in methods else "spawn"
        # workers ignore Ctrl-C (a terminal sends it to the whole process group): the parent
        # alone handles it and shuts the pool down, so no worker prints a traceback. The fork
        # server is started with SIGINT blocked (the mask is inherited by it and by every
        # worker it forks), so a Ctrl-C during its start-up cannot interrupt its imports either.
        # Workers and the fork server die with this process (relspan.run._lifeline): the fork
        # server through its preload list, each worker through the pool's initializer.
        ctx = multiprocessing.get_context(method)
        if method == "forkserver":
            ctx.set_forkserver_preload(["__main__", "relspan.run._forkserver_preload"])
        if method == "forkserver" and hasattr(signal, "pthread_sigmask"):
            from multiprocessing import forkserver

            old = signal.pthread_sigmask(signal.SIG_BLOCK, {signal.SIGINT})
            try:
                forkserver.ensure_running()
            finally:
                signal.pthread_sigmask(signal.SIG_SETMASK, old)
        from relspan.run._lifeline import build_identity, worker_start

        super().__init__(max_workers=workers, mp_context=ctx, initializer=worker_start,
                         initargs=build_identity())
        self.workers = workers
        self.start_method = method


def available_cores() -> int:
    """Cores this process may run on (its CPU affinity, not the machine's count)."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except (AttributeError, OSError):  # not on Linux
        return max(1, os.cpu_count() or 1)


#: most worker processes ``--jobs`` may ask for (each is a Python process of its own)
MAX_JOBS = 1024


def _check_jobs(jobs: object) -> int:
    if jobs is None:
        return available_cores()
    if isinstance(jobs, bool) or not isinstance(jobs, int) or jobs < 1:
        raise OptionsError(
            f"--jobs must be a whole number of worker processes, 1 or more; got {jobs!r}.",
            key="jobs", expected="an integer >= 1", got=repr(jobs),
            fix="use --jobs 1 to run in this process, or leave it out to use every available core.")
    if jobs > MAX_JOBS:
        raise OptionsError(
            f"--jobs {jobs} asks for more worker processes than relspan starts (at most {MAX_JOBS}; "
            f"this machine lets it use {available_cores()} core(s)).",
            key="jobs", expected=f"an integer from 1 to {MAX_JOBS}", got=repr(jobs),
            fix="leave --jobs out to use every available core, or give a number up to the cores.")
    return jobs


def _connect(address: str, timeout: float):
    if not isinstance(address, str) or not _ADDRESS.match(address.strip()):
        raise OptionsError(
            f"--scheduler must be a Dask scheduler address such as tcp://10.0.0.5:8786; got {address!r}.",
            key="scheduler", expected="tcp://host:port", got=repr(address),
            fix="copy the address the scheduler prints when it starts (dask scheduler), "
                "or leave --scheduler out to run on this machine.")
    try:
        from distributed import Client
    except ImportError:
        raise DependencyError(
            f"--scheduler {address} needs Dask's distributed package, which is not installed.",
            key="scheduler",
            fix="pip install 'relspan[cluster]', or leave --scheduler out to run on this machine.",
        ) from None
    try:
        return Client(address.strip(), timeout=timeout, set_as_default=False)
    except (OSError, TimeoutError) as exc:
        raise OptionsError(
            f"could not reach the Dask scheduler at {address} within {timeout:g} s "
            f"({type(exc).__name__}).",
            key="scheduler", got=address,
            fix="check that the scheduler is running and that host and port are right "
                "(the scheduler prints its address when it starts) and that no firewall "
                "blocks the port; or leave --scheduler out to run on this machine.",
        ) from None


@contextmanager
def open_executor(jobs: int | None = None, scheduler: str | None = None, *,
                  timeout: float = CONNECT_TIMEOUT_S) -> Iterator[Executor]:
    """Open the executor the user asked for; close it (and its workers) on exit.

    Parameters
    ----------
    jobs : int, optional
        Worker processes on this machine. ``1`` runs every task in this
        process. Default: the cores available to this process
        (``os.sched_getaffinity``); serial when that is one.
    scheduler : str, optional
        Address of a running Dask scheduler (``tcp://host:port``). The tasks
        then run on that cluster; ``jobs`` must be left out.
    timeout : float
        Seconds to wait for the scheduler before giving up.

    Yields
    ------
    concurrent.futures.Executor

    Raises
    ------
    OptionsError
        Invalid ``jobs``, a malformed or unreachable scheduler address, or
        both options at once.
    DependencyError
        ``scheduler`` given but Dask ``distributed`` is not installed.

    Notes
    -----
    On an exception inside the ``with`` block (including Ctrl-C), tasks not
    yet started are cancelled before the workers are shut down.
    """
    if scheduler is not None:
        if jobs is not None:
            raise OptionsError(
                f"--jobs {jobs!r} and --scheduler {scheduler} were both given; the cluster "
                "decides how many workers run.",
                key="jobs", fix="drop --jobs when you give --scheduler (or drop --scheduler).")
        client = _connect(scheduler, timeout)
        executor = client.get_executor(pure=False)
        try:
            yield executor
        except BaseException:
            executor.shutdown(wait=False)
            raise
        else:
            executor.shutdown(wait=True)
        finally:
            client.close()
        return

    workers = _check_jobs(jobs)
    executor = SerialExecutor() if workers == 1 else _ProcessPool(workers)
    try:
        yield executor
    except BaseException:
        executor.shutdown(wait=True, cancel_futures=True)
        raise
    else:
        executor.shutdown(wait=True)


#: estimated work (seconds in one process) from which local worker processes are started;
#: below it the tasks run in this process. Starting two workers (fork server, imports, the
#: first pickled chunk) costs about a second on the 2-core machine of docs/performance.md,
#: and they then share the cores with the main process and other work
POOL_ABOVE_S = 4.0

#: seconds of one window task in one process, by assumption family (an estimate for choosing, never
#: a result; the diagonal and shaped figures are medians over n = 3..10 from earlier rounds)
_WINDOW_S = 0.0005
_SHAPED_S = 0.0002
_DIAGONAL_S_PER_N2 = 0.007
#: seconds per resample of a window task: drawing one resample and the stability stage's
#: decompositions of it (bases of each compared assumption, plausible coranks), and, beyond those,
#: its intervals and corank supports. Measured as ``benchmarks/bench_user_path.py task-costs``
#: measures them, on the idle Intel Xeon of docs/performance.md's latest round: the window tasks'
#: CPU seconds of 1,001 windows (n = 6, 100 rows, 199 resamples each) with the analyses alone
#: (0.49 s), with the stability draws (2.19 s) and with the intervals too (4.17 s), median of 2
#: (the previous constants, 0.4 ms, 14 us and 39 us, were measured on a loaded machine before
#: the window tasks were made cheaper, and overstated a check's work about twofold)
_STABILITY_RESAMPLE_S = 0.0000085
_INTERVAL_RESAMPLE_S = 0.0000099
#: seconds x n^2 per diagonal-noise resample (a corank search warm-started from the previous
#: resample; the demo's window tasks with ``diagonal_resamples`` 99 against 0, section 5)
_DIAGONAL_RESAMPLE_S_PER_N2 = 0.0002
#: seconds to draw one figure (median over the demo's figures, same machine)
FIGURE_S = 0.2


def window_work(windows: int, n: int, assumptions, *, frisch_starts: int = 8, resamples: int = 0,
                stability_resamples: int = 0, diagonal_resamples: int = 0) -> float:
    """Estimated seconds in one process for ``windows`` window tasks of ``n`` variables.

    A rough cost model (constants measured on the machine of docs/performance.md):
    about 0.5 ms per window for the elementary, equal and bounded analyses, and
    about 7 ms x n^2 per window for the diagonal-noise (Frisch scheme) search
    with 8 starts, in proportion to the starts. Resampling adds, per window,
    ``stability_resamples`` draws for the stability stage
    (:data:`_STABILITY_RESAMPLE_S` each; a task that also resamples for its
    intervals draws once, so the larger of the two counts), ``resamples``
    resamples of the intervals and corank supports (:data:`_INTERVAL_RESAMPLE_S`
    each, beyond the draw) and ``diagonal_resamples`` warm-started diagonal-noise
    searches (:data:`_DIAGONAL_RESAMPLE_S_PER_N2` x n^2 each). Used only to
    choose where tasks run; the choice never changes a result.
    """
    per = _WINDOW_S
    if "shaped" in assumptions:
        per += _SHAPED_S
    if "diagonal" in assumptions:
        per += _DIAGONAL_S_PER_N2 * n * n * max(int(frisch_starts), 1) / 8.0
        per += _DIAGONAL_RESAMPLE_S_PER_N2 * n * n * max(int(diagonal_resamples), 0)
    per += _STABILITY_RESAMPLE_S * max(int(stability_resamples), int(resamples), 0)
    per += _INTERVAL_RESAMPLE_S * max(int(resamples), 0)
    return float(windows) * per


def choose_local(work_s: float, workers: int) -> tuple[int, str]:
    """Serial or a local pool for ``work_s`` estimated seconds: ``(workers to use, words)``.

    Below :data:`POOL_ABOVE_S` (or with one core) the tasks run in this process;
    above it on ``workers`` processes. The words say which and why.
    """
    amount = "under 0.1 s" if work_s < 0.05 else f"about {work_s:.1f} s"
    if workers <= 1:
        return 1, f"in this process ({amount} of work; one core available)"
    if work_s < POOL_ABOVE_S:
        return 1, (f"in this process: {amount} of work, below the {POOL_ABOVE_S:g} s "
                   f"from which {workers} worker processes pay for their start")
    return workers, (f"on {workers} worker processes: about {work_s:.0f} s of work, above the "
                     f"{POOL_ABOVE_S:g} s from which they pay for their start")


def worker_count(executor: Executor) -> int:
    """How many tasks ``executor`` can run at once (1 when it cannot tell)."""
    workers = getattr(executor, "workers", None)
    if isinstance(workers, int) and workers >= 1:
        return workers
    client = getattr(executor, "_client", None)  # distributed's ClientExecutor
    if client is not None:
        try:
            return max(1, int(sum(client.nthreads().values())))
        except Exception:  # a cluster that is scaling or gone: be conservative
            return 1
    max_workers = getattr(executor, "_max_workers", None)  # a plain ProcessPoolExecutor
    if isinstance(max_workers, int) and max_workers >= 1:
        return max_workers
    return 1


def auto_chunk_size(n_items: int, n_workers: int) -> int:
    """Items per chunk: about four chunks per worker, one chunk at least per item, at most 200 items.

    With ``w`` workers the items are cut into ``min(n_items, 4 w)`` chunks of
    near-equal size, so every worker gets work, a slow chunk can be balanced by
    the others, and the fixed cost per task (a few ms on Dask) is paid only
    ``4 w`` times. In-process runs (one worker) are cut into at most 32 chunks,
    only so that progress can advance. No chunk holds more than
    :data:`_MAX_CHUNK_ITEMS` items, which bounds the memory of one chunk's
    results in transit (large plans get more, smaller chunks).
    """
    if n_items <= 0:
        return 1
    chunks = _SERIAL_CHUNKS if n_workers <= 1 else _CHUNKS_PER_WORKER * n_workers
    return max(1, min(math.ceil(n_items / min(n_items, chunks)), _MAX_CHUNK_ITEMS))


def _run_chunk(fn: Callable[[Any], Any], chunk: Sequence[Any]) -> list:
    """Apply ``fn`` to every item of one chunk (runs in the worker)."""
    return [fn(item) for item in chunk]


def one_blas_thread():
    """A context in which BLAS/OpenMP run one thread (threadpoolctl; a no-op without it).

    The cross-window stage of :func:`relspan.run.pipeline.analyse_prepared`
    runs in the main process under it, as window tasks run in their workers:
    its products are small (a few hundred resamples of an n x n covariance),
    so threads only add waiting, and results do not depend on the cores of
    the machine.
    """
    try:
        from threadpoolctl import threadpool_limits  # noqa: PLC0415 (optional)
    except ImportError:
        import contextlib

        return contextlib.nullcontext()
    return threadpool_limits(limits=1)


def _run_chunk_one_blas_thread(fn: Callable[[Any], Any], chunk: Sequence[Any]) -> list:
    """:func:`_run_chunk` with BLAS/OpenMP limited to one thread in the worker.

    Window tasks multiply small matrices; with several worker processes on a
    machine, each BLAS spawning a thread per core would oversubscribe the
    cores (workers x cores threads) and slow every task. Dask's nanny sets
    ``OMP_NUM_THREADS=1`` (and the OpenBLAS/MKL variables) for the workers it
    spawns; a process pool, or a cluster started some other way, may not, so
    the limit is also applied here (with threadpoolctl, when installed,
    :func:`one_blas_thread`). The serial executor uses it too, so that every
    executor sums in the same order and gives the same bits.
    """
    with one_blas_thread():
        return _run_chunk(fn, chunk)


def map_in_chunks(executor: Executor, fn: Callable[[Any], Any], items: Iterable[Any], *,
                  chunk_size: int | None = None, progress: _Counter | None = None,
                  consume: Callable[[int, list], list] | None = None) -> list:
    """``[fn(x) for x in items]``, run on ``executor`` in chunks, in order.

    Parameters
    ----------
    executor : concurrent.futures.Executor
        From :func:`open_executor` (or any executor).
    fn : callable
        A top-level (importable) function of one item; it must be
        deterministic for results to match across executors.
    items : iterable
        The task inputs; they (and ``fn``) are pickled to reach workers.
    chunk_size : int, optional
        Items per task. Default: :func:`auto_chunk_size` from the item count
        and the executor's worker count.
    progress : object with ``update(k)``, optional
        Advanced by the number of items of each chunk as it finishes (e.g. a
        :class:`relspan.run.progress.Progress`).
    consume : callable, optional
        ``consume(start, results)`` is called in this process with each
        chunk's results, in item order (``start`` is the index of the chunk's
        first item), as soon as the chunk and every chunk before it have
        finished; what it returns stands for those results in the list
        returned, and the chunk's own results are let go. A stage that reads
        each result once (the stability stage reads each window's resampled
        bases) so holds a few chunks at a time, not all of them.

    Returns
    -------
    list
        ``fn(item)`` (or what ``consume`` made of it) for every item, in the order of ``items``.

    Raises
    ------
    Exception
        The exception of the earliest failing chunk (in item order) among those
        that ran; chunks not yet started are cancelled first.
    """
    items = list(items)
    if not items:
        return []
    if chunk_size is None:
        chunk_size = auto_chunk_size(len(items), worker_count(executor))
    elif isinstance(chunk_size, bool) or not isinstance(chunk_size, int) or chunk_size < 1:
        raise ValueError(f"chunk_size must be an integer >= 1; got {chunk_size!r}")
    chunks = [items[i:i + chunk_size] for i in range(0, len(items), chunk_size)]
    futures: list[Future | None] = []
    index: dict[Future, int] = {}
    pending: set[Future] = set()
    failed = False
    done_chunks: list[list | None] = [None] * len(chunks)
    settled = [False] * len(chunks)
    delivered = 0     # chunks handed to ``consume`` (or kept), in order

    def settle(f: Future) -> None:
        nonlocal failed
        if f.cancelled() or f.exception() is not None:
            failed = True
            return
        settled[index[f]] = True
        if progress is not None:
            progress.update(len(chunks[index[f]]))

    def deliver() -> None:
        """Hand every finished chunk to ``consume`` in order, up to the first one still running."""
        nonlocal delivered
        while not failed and delivered < len(futures):
            f = futures[delivered]
            if f is None or not settled[delivered]:
                return
            got = f.result()
            done_chunks[delivered] = consume(delivered * chunk_size, got) if consume is not None else got
            futures[delivered] = None     # the future (and a worker's pickled results) can go
            del index[f]
            delivered += 1

    # one BLAS thread in every executor, the serial one included: a BLAS splitting a product over
    # threads may sum in another order, and results must be identical bit for bit across --jobs
    runner = _run_chunk_one_blas_thread
    for i, chunk in enumerate(chunks):
        f = executor.submit(runner, fn, chunk)
        futures.append(f)
        index[f] = i
        if f.done():  # in-process executors finish on submit: report as we go
            settle(f)
            if failed:
                break
            deliver()
        else:
            pending.add(f)
    while pending and not failed:
        done, pending = wait(pending, return_when=FIRST_COMPLETED)
        for f in sorted(done, key=index.__getitem__):
            settle(f)
        deliver()
    if failed:
        for f in pending:
            f.cancel()
        wait(pending)
        for f in futures:
            if f is not None and not f.cancelled() and f.exception() is not None:
                raise f.exception()
        raise RuntimeError("a chunk of tasks was cancelled before it ran")
    deliver()
    results: list = []
    for got in done_chunks:
        results.extend(got)
    return results
