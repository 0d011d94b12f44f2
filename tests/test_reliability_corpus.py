"""The bad-input corpus (tests/corpus/*/case.yaml) through the real command line.

Every case is a small project (spec and/or data) that a user could plausibly
write. Each runs as ``python -m relspan COMMAND SPEC ...`` in a temporary copy
and must end with exit code 2, one located paragraph on stderr (the message and
a ``Fix:`` line, never a traceback) holding the case's message fragment, and
nothing written: the copy is byte-identical afterwards, including a previous
good site where the case installs one.
"""

from __future__ import annotations

import os
import shutil
from concurrent.futures import ThreadPoolExecutor

import pytest

from corpus.harness import (CORPUS, case_argv, case_meta, copy_case, corpus_cases, paragraph_problems,
                            run_cli, snapshot)

CASES = corpus_cases()
BAD = [c for c in CASES if case_meta(c)["exit"] == 2]
POSITIVE = [c for c in CASES if case_meta(c)["exit"] == 0]


@pytest.fixture(scope="module")
def good_site(tmp_path_factory):
    """A real site built from the positive control ``ok-plain`` (the spec every bad case breaks)."""
    project = copy_case("ok-plain", tmp_path_factory.mktemp("good"))
    result = run_cli(*case_argv(case_meta("ok-plain")), cwd=project)
    assert result.returncode == 0, result.stderr
    return project / "_site"


@pytest.fixture(scope="module")
def corpus_runs(tmp_path_factory, good_site):
    """Run every bad case once (two at a time: the work is subprocesses), keyed by case name."""
    root = tmp_path_factory.mktemp("corpus")

    def run(name):
        meta = case_meta(name)
        project = copy_case(name, root)
        if meta.get("previous_site"):
            shutil.copytree(good_site, project / meta["previous_site"], symlinks=True)
        case_dir = project.parent
        before = snapshot(case_dir)
        result = run_cli(*case_argv(meta), cwd=project, timeout=300)
        return name, (meta, result, before, snapshot(case_dir))

    with ThreadPoolExecutor(max_workers=max(2, min(4, os.cpu_count() or 1))) as pool:
        return dict(pool.map(run, BAD))


def test_corpus_holds_at_least_forty_bad_input_cases():
    assert len(BAD) >= 40


@pytest.mark.parametrize("name", CASES)
def test_case_file_names_command_exit_code_fragment_and_a_project(name):
    meta = case_meta(name)
    assert meta["command"] in ("check", "build")
    assert meta["exit"] in (0, 2)
    assert meta["what"].strip()
    if meta["exit"] == 2:
        assert meta["fragment"].strip()
    assert (CORPUS / name / "project").is_dir()


@pytest.mark.parametrize("name", BAD)
def test_bad_input_exits_2_with_one_fix_paragraph_and_writes_nothing(name, corpus_runs):
    meta, result, before, after = corpus_runs[name]
    assert result.returncode == 2, (meta["what"], result.returncode, result.stderr)
    assert meta["fragment"] in result.stderr, (meta["what"], result.stderr)
    assert paragraph_problems(result.stderr) == [], result.stderr
    assert result.stdout == "", result.stdout
    assert sorted(after) == sorted(before), "files or folders appeared or vanished"
    changed = [p for p in before if before[p] != after[p]]
    assert changed == [], f"changed: {changed}"


def test_previous_good_site_cases_really_have_a_site_to_keep(corpus_runs):
    kept = [n for n in BAD if case_meta(n).get("previous_site")]
    assert len(kept) >= 3
    for name in kept:
        _, _, before, _ = corpus_runs[name]
        site = case_meta(name)["previous_site"]
        assert f"project/{site}/index.html" in before
        assert f"project/{site}/.relspan-site" in before


@pytest.mark.parametrize("name", POSITIVE)
def test_positive_control_succeeds(name, tmp_path):
    meta = case_meta(name)
    project = copy_case(name, tmp_path)
    result = run_cli(*case_argv(meta), cwd=project)
    assert result.returncode == 0, result.stderr
    assert "Traceback" not in result.stderr
    if meta["command"] == "build":
        assert (project / "_site" / "index.html").is_file()
    else:
        assert not (project / "_site").exists()
