"""Crash safety of the whole build: SIGKILL and Ctrl-C never damage the previous site.

A small project is built once (the good site). A second build is then killed
(SIGKILL) or interrupted (SIGINT, as a terminal's Ctrl-C sends it to the whole
process group) while it writes the new site, or while it analyses and draws.
Afterwards the previous site must be byte-identical, nothing the user would
see may be left beside it (hidden leftovers are allowed only if the next
build removes them), and an interrupted build must exit promptly with code 130
and one line on stderr.
"""

from __future__ import annotations

import os
import pty
import select
import shutil
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest

from corpus.harness import CORPUS, FAST, cli_command, cli_env, run_cli, snapshot

SPEC = """relspan: 1
report: {title: "Crash safety"}
datasets:
  - id: d
    source: data/d.csv
    time: {column: year, format: year}
    variables: [{column: a}, {column: b}, {column: c}]
windows:
  - {id: full, kind: full}
  - {id: roll, kind: rolling, width: 20, step: 10}
checks: {assumptions: [elementary, equal]}
site: {out: _site}
"""
_WAIT_S = 120  # generous for a loaded CI runner; the wait ends as soon as the flag appears


def _write_project(folder: Path, seed: int = 11) -> Path:
    rng = np.random.default_rng(seed)
    x, y = rng.normal(10, 1, 50), rng.normal(5, 1, 50)
    z = x + y + 0.1 * rng.normal(size=50)
    rows = "".join(f"{1950 + t},{x[t]:.4f},{y[t]:.4f},{z[t]:.4f}\n" for t in range(50))
    (folder / "data").mkdir(parents=True)
    (folder / "data" / "d.csv").write_text("year,a,b,c\n" + rows, encoding="utf-8")
    (folder / "spec.yaml").write_text(SPEC, encoding="utf-8")
    return folder


@pytest.fixture(scope="module")
def built(tmp_path_factory):
    """(project folder, snapshot of its good site) built once; each test works on a copy."""
    project = _write_project(tmp_path_factory.mktemp("crash") / "project")
    result = run_cli("build", "spec.yaml", *FAST, cwd=project)
    assert result.returncode == 0, result.stderr
    return project, snapshot(project / "_site")


@pytest.fixture
def project(built, tmp_path):
    src, _ = built
    dest = tmp_path / "project"
    shutil.copytree(src, dest, symlinks=True)
    # a changed data file, so that the interrupted build would write a different site
    data = dest / "data" / "d.csv"
    data.write_text(data.read_text(encoding="utf-8").replace("1950,", "1950,1", 1), encoding="utf-8")
    return dest


def _start_paused(project: Path, flag: Path, after: int, *args: str) -> subprocess.Popen:
    cmd = [sys.executable, str(CORPUS / "paused_cli.py"), str(flag), str(after), "--",
           "build", "spec.yaml", *args]
    return subprocess.Popen(cmd, cwd=project, env=cli_env(), stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True, start_new_session=True)


def _wait_for(path: Path, proc: subprocess.Popen) -> None:
    deadline = time.monotonic() + _WAIT_S
    while not path.exists():
        if proc.poll() is not None:
            out, err = proc.communicate()
            pytest.fail(f"the build ended (exit {proc.returncode}) before the pause: {err}")
        if time.monotonic() > deadline:
            proc.kill()
            pytest.fail("the build never reached the pause")
        time.sleep(0.01)


def _visible(folder: Path) -> list[str]:
    return sorted(p.name for p in folder.iterdir() if not p.name.startswith("."))


def _leftovers(folder: Path) -> list[str]:
    return sorted(p.name for p in folder.iterdir() if ".relspan-tmp-" in p.name or ".relspan-old-" in p.name)


def test_sigkill_while_writing_keeps_previous_site_byte_identical(built, project, tmp_path):
    _, good = built
    flag = tmp_path / "paused"
    proc = _start_paused(project, flag, 5, *FAST)
    _wait_for(flag, proc)
    assert _leftovers(project), "the writer should be part-way through its temporary folder"
    proc.send_signal(signal.SIGKILL)
    proc.communicate(timeout=30)
    assert proc.returncode == -signal.SIGKILL
    assert snapshot(project / "_site") == good
    assert _visible(project) == ["_site", "data", "spec.yaml"]


def test_next_build_removes_what_a_killed_build_left(built, project, tmp_path):
    _, good = built
    flag = tmp_path / "paused"
    proc = _start_paused(project, flag, 3, *FAST)
    _wait_for(flag, proc)
    os.killpg(proc.pid, signal.SIGKILL)
    proc.communicate(timeout=30)
    assert _leftovers(project)
    result = run_cli("build", "spec.yaml", *FAST, cwd=project)
    assert result.returncode == 0, result.stderr
    assert _leftovers(project) == []
    assert _visible(project) == ["_site", "data", "spec.yaml"]
    new = snapshot(project / "_site")
    assert new != good and "index.html" in new  # the changed data made a new, complete site


def test_ctrl_c_while_writing_exits_130_with_one_line_and_keeps_site(built, project, tmp_path):
    _, good = built
    flag = tmp_path / "paused"
    proc = _start_paused(project, flag, 5, *FAST)
    _wait_for(flag, proc)
    os.killpg(proc.pid, signal.SIGINT)
    t0 = time.monotonic()
    out, err = proc.communicate(timeout=60)
    waited = time.monotonic() - t0
    assert proc.returncode == 130, err
    assert err.strip().count("\n") == 0 and "interrupted" in err and "Traceback" not in err, err
    assert waited < 30  # "promptly": the pause would last 120 s if the signal were ignored
    assert snapshot(project / "_site") == good
    assert _leftovers(project) == []  # the writer removes its own temporary folder on Ctrl-C
    assert _visible(project) == ["_site", "data", "spec.yaml"]


@pytest.mark.parametrize("jobs, stage", [("1", "analysis of"), ("1", "figures: 1/"), ("2", "figures: 1/")])
def test_ctrl_c_during_analysis_and_figures_exits_130_and_keeps_site(built, project, jobs, stage):
    _, good = built
    # stderr on a pseudo-terminal, as at a shell: the progress line says which stage is running
    master, slave = pty.openpty()
    proc = subprocess.Popen(cli_command("build", "spec.yaml", "--jobs", jobs, "--no-cache"),
                            cwd=project, env={**cli_env(), "TERM": "xterm"}, stdout=subprocess.PIPE,
                            stderr=slave, text=True, start_new_session=True)
    os.close(slave)
    seen = _read_until(master, f"{stage}", proc)
    os.killpg(proc.pid, signal.SIGINT)
    out, _ = proc.communicate(timeout=60)
    err = seen + _drain(master)
    os.close(master)
    assert proc.returncode == 130, err
    lines = [ln for ln in err.replace("\r", "\n").splitlines() if ln.strip() and stage not in ln
             and not ln.strip().startswith(("analysis", "figures"))]
    assert len(lines) == 1 and "interrupted" in lines[0] and "Traceback" not in err, err
    assert snapshot(project / "_site") == good
    assert _leftovers(project) == []
    assert _visible(project) == ["_site", "data", "spec.yaml"]


def _read_until(fd: int, word: str, proc: subprocess.Popen) -> str:
    """Read the terminal until ``word`` appears (the stage has started)."""
    seen = ""
    deadline = time.monotonic() + _WAIT_S
    while word not in seen:
        if time.monotonic() > deadline:
            proc.kill()
            pytest.fail(f"never saw {word!r} on the terminal: {seen!r}")
        ready, _, _ = select.select([fd], [], [], 0.1)
        if ready:
            try:
                seen += os.read(fd, 4096).decode("utf-8", "replace")
            except OSError:  # the build closed the terminal: it ended
                break
        elif proc.poll() is not None:
            pytest.fail(f"the build ended (exit {proc.returncode}) before {word!r}: {seen!r}")
    return seen


def _drain(fd: int) -> str:
    out = ""
    while select.select([fd], [], [], 0.2)[0]:
        try:
            chunk = os.read(fd, 4096)
        except OSError:
            break
        if not chunk:
            break
        out += chunk.decode("utf-8", "replace")
    return out
