"""Workers die with their parent: SIGKILL or SIGTERM of ``build --jobs 2`` leaves no process behind.

The build runs in a session of its own, so every process it starts (fork server,
workers, resource tracker) is found by its session id; after the parent is killed
during the analysis, the session must empty within a bounded wait, and the pipes the
caller reads (stdout/stderr) must close.
"""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest

from corpus.harness import cli_command, cli_env

pytestmark = pytest.mark.skipif(not sys.platform.startswith("linux"), reason="reads /proc")

SPEC = """relspan: 1
report: {title: "Orphans"}
datasets:
  - id: d
    source: d.csv
    variables: [{column: a}, {column: b}, {column: c}, {column: e}]
windows:
  - {id: full, kind: full}
  - {id: roll, kind: rolling, width: 30, step: 1}
checks: {assumptions: [elementary, equal, bounded, diagonal]}
site: {out: _site}
"""


def _session(sid: int) -> list[int]:
    out = []
    for entry in os.listdir("/proc"):
        if not entry.isdigit():
            continue
        try:
            with open(f"/proc/{entry}/stat", "rb") as fh:
                fields = fh.read().rsplit(b")", 1)[1].split()
        except OSError:
            continue
        state, session = fields[0], int(fields[3])
        if session == sid and state != b"Z":
            out.append(int(entry))
    return out


def _wait_for(pred, seconds: float) -> bool:
    end = time.monotonic() + seconds
    while time.monotonic() < end:
        if pred():
            return True
        time.sleep(0.1)
    return pred()


@pytest.mark.parametrize("sig", [signal.SIGKILL, signal.SIGTERM])
def test_killing_a_parallel_build_during_the_analysis_leaves_no_process(tmp_path, sig):
    rng = np.random.default_rng(1)
    x = rng.normal(size=(3000, 4))
    np.savetxt(tmp_path / "d.csv", x, delimiter=",", header="a,b,c,e", comments="", fmt="%.6f")
    (tmp_path / "spec.yaml").write_text(SPEC, encoding="utf-8")
    proc = subprocess.Popen(cli_command("build", "spec.yaml", "--jobs", "2", "--no-cache", "--quiet"),
                            cwd=tmp_path, env=cli_env(), stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                            start_new_session=True)
    sid = proc.pid
    try:
        # the analysis is running once the fork server and both workers exist (4+ processes)
        assert _wait_for(lambda: len(_session(sid)) >= 4 or proc.poll() is not None, 120)
        assert proc.poll() is None, "the build ended before it could be killed; make it longer"
        time.sleep(0.5)
        os.kill(proc.pid, sig)
        proc.wait(timeout=30)
        gone = _wait_for(lambda: not _session(sid), 20)
        left = _session(sid)
        assert gone, f"processes left behind: {[Path(f'/proc/{p}/cmdline').read_bytes()[:120] for p in left]}"
        proc.stdout.read()  # returns: every holder of the pipe is gone
        proc.stderr.read()
    finally:
        for pid in _session(sid):
            try:
                os.kill(pid, signal.SIGKILL)
            except ProcessLookupError:
                pass
        proc.stdout.close()
        proc.stderr.close()
