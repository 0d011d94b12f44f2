"""Helpers shared by the reliability tests: run the real CLI in a subprocess, snapshot folders.

Imported as ``corpus.harness`` from ``tests/test_reliability*.py`` (``tests/`` is on
``sys.path`` under pytest's default import mode).
"""

from __future__ import annotations

import os
import shutil
import subprocess
import sys
from pathlib import Path

import yaml

CORPUS = Path(__file__).resolve().parent
REPO = CORPUS.parents[1]

#: default options of every CLI run in these tests: serial, no cache, no progress line
FAST = ("--jobs", "1", "--no-cache", "--quiet")


def cli_env() -> dict[str, str]:
    """The environment of a CLI subprocess: ours, without debug switches that add tracebacks."""
    env = {k: v for k, v in os.environ.items() if k not in ("RELSPAN_DEBUG", "PYTHONWARNINGS")}
    env.setdefault("SOURCE_DATE_EPOCH", "1700000000")
    return env


def cli_command(*args: str) -> list[str]:
    """``python -m relspan ARGS`` with the interpreter running the tests."""
    return [sys.executable, "-m", "relspan", *args]


def run_cli(*args: str, cwd: Path, timeout: float = 600) -> subprocess.CompletedProcess:
    """Run ``python -m relspan ARGS`` in ``cwd`` and capture its text output."""
    return subprocess.run(cli_command(*args), cwd=cwd, capture_output=True, text=True,
                          timeout=timeout, env=cli_env())


def snapshot(folder: Path) -> dict[str, bytes | None]:
    """Every file (its bytes), folder (None) and symbolic link (its target) below ``folder``,
    keyed by relative POSIX path."""
    out: dict[str, bytes | None] = {}
    for p in sorted(folder.rglob("*")):
        rel = p.relative_to(folder).as_posix()
        if p.is_symlink():
            out[rel] = b"-> " + os.fsencode(os.readlink(p))  # the link itself (it may loop)
        else:
            out[rel] = None if p.is_dir() else p.read_bytes()
    return out


def paragraph_problems(stderr: str) -> list[str]:
    """Why ``stderr`` is not one error paragraph (message line + ``  Fix:`` line); [] if it is."""
    problems = []
    text = stderr.rstrip("\n")
    lines = text.split("\n")
    if "Traceback" in stderr:
        problems.append("a traceback was printed")
    if not text.strip():
        problems.append("stderr is empty")
        return problems
    if len(lines) != 2:
        problems.append(f"{len(lines)} lines instead of 2 (message, Fix:)")
    if not lines[0].strip() or lines[0].startswith(" "):
        problems.append("the first line is not the message")
    if not lines[-1].startswith("  Fix: ") or len(lines[-1]) <= len("  Fix: "):
        problems.append("the last line is not a '  Fix: ...' line")
    return problems


# ------------------------------------------------------------------ the bad-input corpus

def corpus_cases() -> list[str]:
    """Names of the case folders (each holds case.yaml and project/)."""
    return sorted(p.name for p in CORPUS.iterdir() if (p / "case.yaml").is_file())


def case_meta(name: str) -> dict:
    return yaml.safe_load((CORPUS / name / "case.yaml").read_text(encoding="utf-8"))


def case_argv(meta: dict) -> list[str]:
    """The CLI arguments of a case: command, spec, the case's args, and the FAST defaults it lacks."""
    extra = list(meta.get("args", []))
    argv = [meta["command"], meta["spec"]]
    if not any(a in ("--jobs", "-j", "--scheduler") for a in extra):
        argv += ["--jobs", "1"]
    if "--cache-dir" not in extra:
        argv.append("--no-cache")
    return argv + ["--quiet"] + extra


def copy_case(name: str, dest: Path) -> Path:
    """Copy a case folder to ``dest``; returns the copy's ``project`` folder (the CLI's cwd)."""
    shutil.copytree(CORPUS / name, dest / name, symlinks=True)
    return dest / name / "project"
