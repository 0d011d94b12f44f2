"""Worker processes die with the build that started them (Linux: at once; elsewhere: within a second).

A pool's processes outliving their parent (a ``kill -9`` of the build, a CI job
cancelled) would go on computing and hold the caller's stdout and stderr open,
so a wrapper waiting for them hangs. Two guards, both set up before any task runs:

* :func:`die_with_parent` asks the kernel (``prctl(PR_SET_PDEATHSIG, SIGKILL)``,
  Linux) to kill this process when its parent exits. The fork server runs it
  when it starts (this module is in its preload list, which calls
  :func:`forkserver_start`): the fork server then dies with the build, and every
  worker, whose parent is the fork server, dies with the fork server.
* :func:`worker_start`, the pool's initializer, also starts a watchdog thread
  that ends the worker when the build's process is gone (polled every
  :data:`POLL_S` seconds; the only guard where ``prctl`` does not exist).

Importing this module changes nothing; the fork server calls :func:`forkserver_start`
through ``multiprocessing``'s preload mechanism (see :mod:`relspan.run.executors`).
"""

from __future__ import annotations

import os
import signal
import sys
import threading
import time

__all__ = ["die_with_parent", "worker_start", "forkserver_start", "POLL_S"]

#: seconds between two checks of the watchdog
POLL_S = 0.5

_PR_SET_PDEATHSIG = 1  # <linux/prctl.h>


def die_with_parent() -> bool:
    """Ask the kernel to SIGKILL this process when its parent exits; whether it could (Linux only)."""
    if not sys.platform.startswith("linux"):
        return False
    try:
        import ctypes
        import ctypes.util

        libc = ctypes.CDLL(ctypes.util.find_library("c") or "libc.so.6", use_errno=True)
        ok = libc.prctl(_PR_SET_PDEATHSIG, int(signal.SIGKILL), 0, 0, 0) == 0
    except (OSError, AttributeError):
        return False
    return ok


def _start_time(pid: int) -> str | None:
    """The kernel's start time of ``pid`` (so a reused pid is not taken for the build)."""
    try:
        with open(f"/proc/{pid}/stat", "rb") as fh:
            return fh.read().rsplit(b")", 1)[1].split()[19].decode()
    except (OSError, IndexError):
        return None


def _alive(pid: int, started: str | None) -> bool:
    if started is not None:
        return _start_time(pid) == started
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True
    return True


def _watch(pid: int, started: str | None) -> None:
    while _alive(pid, started):
        time.sleep(POLL_S)
    os._exit(1)  # the build is gone: no result can reach it


def worker_start(build_pid: int, build_started: str | None) -> None:
    """Initializer of every pool worker: ignore Ctrl-C, die with the fork server, watch the build.

    Workers ignore SIGINT (a terminal sends it to the whole process group): the
    build alone handles it and shuts the pool down.
    """
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    die_with_parent()
    if not _alive(build_pid, build_started):
        os._exit(1)
    threading.Thread(target=_watch, args=(build_pid, build_started), name="relspan-lifeline",
                     daemon=True).start()


def forkserver_start() -> None:
    """Run in the fork server as it starts: die with the build (its parent)."""
    parent = os.getppid()
    die_with_parent()
    if os.getppid() != parent:  # the build died before the guard was set
        os._exit(1)


def build_identity() -> tuple[int, str | None]:
    """This process's pid and kernel start time, for :func:`worker_start`."""
    pid = os.getpid()
    return pid, _start_time(pid)
