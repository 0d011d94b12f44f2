"""Packaging: one version, the licence, the citation file, package data, sdist and wheel.

The slow tests build for real: the sdist (with ``python -m build``), unpacked and running
a part of its own test suite from the unpacked tree; and a wheel with exactly the lowest
setuptools that pyproject.toml declares, in a fresh virtual environment
(``pip wheel --no-build-isolation``). Both need PyPI to fetch setuptools; they skip
with the reason when it cannot be reached.
"""

from __future__ import annotations

import glob
import re
import subprocess
import sys
import tarfile
import tomllib
import zipfile
from pathlib import Path

import pytest
import yaml

import relspan

ROOT = Path(__file__).resolve().parents[1]
PYPROJECT = tomllib.loads((ROOT / "pyproject.toml").read_text(encoding="utf-8"))
PROJECT = PYPROJECT["project"]


def test_the_version_is_written_in_one_place_and_the_citation_and_readme_agree():
    assert PROJECT["dynamic"] == ["version"] and "version" not in PROJECT
    assert PYPROJECT["tool"]["setuptools"]["dynamic"]["version"] == {"attr": "relspan.__version__"}
    cff = yaml.safe_load((ROOT / "CITATION.cff").read_text(encoding="utf-8"))
    assert str(cff["version"]) == relspan.__version__
    assert f"version {relspan.__version__}" in (ROOT / "README.md").read_text(encoding="utf-8")


def test_citation_file_has_the_cff_1_2_0_required_keys_and_no_invented_identifiers():
    text = (ROOT / "CITATION.cff").read_text(encoding="utf-8")
    cff = yaml.safe_load(text)
    # Citation File Format 1.2.0: cff-version, message, title, authors are required
    assert cff["cff-version"] == "1.2.0"
    assert {"message", "title", "authors", "version", "date-released", "license"} <= set(cff)
    assert cff["authors"] == [{"name": "The relspan developers"}]  # an entity, not persons
    assert cff["license"] == PROJECT["license"] == "MIT"
    assert not re.search(r"doi|url|repository", text, flags=re.I)


def test_licence_file_is_mit_for_the_relspan_developers_and_declared_as_a_licence_file():
    text = (ROOT / "LICENSE").read_text(encoding="utf-8")
    assert text.startswith("MIT License") and "The relspan developers" in text
    assert PROJECT["license-files"] == ["LICENSE"]


def test_setuptools_lower_bound_reads_pep_639_licence_expressions():
    requires = PYPROJECT["build-system"]["requires"]
    bound = next(r for r in requires if r.startswith("setuptools"))
    version = tuple(int(x) for x in bound.split(">=")[1].split("."))
    assert version >= (77,)  # PEP 639 `license = "MIT"` and `license-files` need setuptools 77


def test_classifiers_name_every_supported_python_from_the_declared_minimum():
    minimum = PROJECT["requires-python"]
    assert minimum == ">=3.11"
    versions = [c.rsplit(" :: ", 1)[1] for c in PROJECT["classifiers"]
                if re.fullmatch(r"Programming Language :: Python :: 3\.\d+", c)]
    assert versions[0] == "3.11" and versions == sorted(versions, key=lambda v: int(v.split(".")[1]))
    assert sys.version_info >= (3, 11)
    assert not any(c.startswith("License ::") for c in PROJECT["classifiers"])  # PEP 639 forbids both


def test_every_package_data_pattern_matches_a_file():
    base = ROOT / "builder" / "relspan"
    for pattern in PYPROJECT["tool"]["setuptools"]["package-data"]["relspan"]:
        assert glob.glob(str(base / pattern)), f"package-data pattern {pattern!r} matches nothing"


def test_no_project_urls_are_declared_while_the_project_has_none():
    assert "urls" not in PROJECT


def _run(args, **kw):
    return subprocess.run(args, capture_output=True, text=True, timeout=900, **kw)


_OFFLINE = ("No matching distribution", "Could not find a version", "Failed to establish",
            "Temporary failure in name resolution", "Network is unreachable")


def _skip_if_offline(done):
    text = done.stdout + done.stderr
    if done.returncode != 0 and any(s in text for s in _OFFLINE):
        pytest.skip("PyPI cannot be reached to fetch setuptools: " + text.strip().splitlines()[-1])


@pytest.mark.slow
def test_sdist_carries_what_its_tests_need_and_runs_part_of_them_unpacked(tmp_path):
    pytest.importorskip("build")
    done = _run([sys.executable, "-m", "build", "--sdist", "--outdir", str(tmp_path / "dist"), str(ROOT)])
    _skip_if_offline(done)
    assert done.returncode == 0, done.stderr[-3000:]
    (sdist,) = (tmp_path / "dist").glob("relspan-*.tar.gz")
    with tarfile.open(sdist) as tar:
        names = tar.getnames()
        tar.extractall(tmp_path / "unpacked", filter="data")
    top = f"relspan-{relspan.__version__}"
    for needed in ("LICENSE", "CITATION.cff", "README.md", "tests/conftest.py" if
                   (ROOT / "tests/conftest.py").exists() else "tests/test_api.py",
                   "specs/demo.yaml", "specs/data/trio.csv", "docs/spec.md", "site_demo/index.html",
                   "tests/corpus/README.md"):
        assert f"{top}/{needed}" in names, needed
    assert not [n for n in names if "__pycache__" in n or ".relspan-cache" in n]
    tree = tmp_path / "unpacked" / top
    env = {"PYTHONPATH": str(tree / "builder"), "PATH": "/usr/bin:/bin"}
    which = _run([sys.executable, "-c", "import relspan; print(relspan.__file__)"], cwd=tree, env=env)
    assert which.stdout.strip() == str(tree / "builder" / "relspan" / "__init__.py")
    tests = _run([sys.executable, "-m", "pytest", "-q", "-p", "no:cacheprovider", "-x", "-n", "0",
                  "tests/spec/test_spec_docs.py", "tests/test_demo_data.py", "tests/data/test_formats.py",
                  "tests/test_packaging.py", "-m", "not slow"], cwd=tree, env=env)
    assert tests.returncode == 0, tests.stdout[-3000:]
    assert re.search(r"\d+ passed", tests.stdout)


@pytest.mark.slow
def test_wheel_builds_with_the_declared_lowest_setuptools(tmp_path):
    bound = next(r for r in PYPROJECT["build-system"]["requires"] if r.startswith("setuptools"))
    lowest = bound.split(">=")[1]
    venv = tmp_path / "venv"
    done = _run([sys.executable, "-m", "venv", str(venv)])
    assert done.returncode == 0, done.stderr
    pip = str(venv / "bin" / "pip")
    done = _run([pip, "install", "-q", f"setuptools=={lowest}"])
    _skip_if_offline(done)
    assert done.returncode == 0, done.stderr[-3000:]
    done = _run([pip, "wheel", "-q", "--no-build-isolation", "--no-deps", "-w", str(tmp_path / "wheels"),
                 str(ROOT)])
    assert done.returncode == 0, done.stderr[-3000:]
    (wheel,) = (tmp_path / "wheels").glob("relspan-*.whl")
    with zipfile.ZipFile(wheel) as zf:
        names = set(zf.namelist())
        meta = zf.read(f"relspan-{relspan.__version__}.dist-info/METADATA").decode()
    assert f"relspan-{relspan.__version__}.dist-info/licenses/LICENSE" in names
    assert "License-Expression: MIT" in meta and f"Version: {relspan.__version__}" in meta
    for data in ("relspan/spec/spec-v1.schema.json", "relspan/site/templates/base.html",
                 "relspan/site/assets/site.css", "relspan/report/results.schema.json"):
        assert data in names, data
