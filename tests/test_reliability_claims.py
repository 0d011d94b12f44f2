"""Failing claims and --strict at the command line, and the verdict readers see on the site.

``build`` and ``check`` exit 1 when a claim fails (``build`` still writes the
site, which shows the verdict); ``--strict`` also fails a build whose claims
hold but whose numerics raised a warning.
"""

from __future__ import annotations

import html
import re
from pathlib import Path

import numpy as np
import pytest

from corpus.harness import FAST, run_cli

SPEC = """relspan: 1
report: {{title: "Claims"}}
datasets:
  - id: d
    source: data/d.csv
    time: {{column: year, format: year}}
    variables: [{{column: a}}, {{column: b}}, {{column: c}}]
windows:
  - {{id: full, kind: full}}
checks: {{assumptions: [elementary, equal]}}
claims:
  - {{id: one-relation, kind: corank, text: "One relation ties a, b and c.", dataset: d, plan: full, assumption: equal, equals: 1}}
{extra}site: {{out: _site}}
"""
FAILING = ('  - {id: two-relations, kind: corank, text: "Two relations tie a, b and c.", dataset: d, '
           'plan: full, assumption: equal, equals: 2}\n')


def _project(folder: Path, *, extra: str, noise: float) -> Path:
    rng = np.random.default_rng(21)
    a, b = rng.normal(10, 1, 40), rng.normal(5, 1, 40)
    c = a + b + noise * rng.normal(size=40)
    (folder / "data").mkdir(parents=True)
    rows = "".join(f"{1960 + t},{float(a[t])!r},{float(b[t])!r},{float(c[t])!r}\n" for t in range(40))
    (folder / "data" / "d.csv").write_text("year,a,b,c\n" + rows, encoding="utf-8")
    (folder / "spec.yaml").write_text(SPEC.format(extra=extra), encoding="utf-8")
    return folder


def _text(page: Path) -> str:
    return " ".join(html.unescape(re.sub(r"<[^>]+>", " ", page.read_text(encoding="utf-8"))).split())


@pytest.fixture(scope="module")
def failing(tmp_path_factory):
    return _project(tmp_path_factory.mktemp("failing"), extra=FAILING, noise=0.1)


@pytest.fixture(scope="module")
def failing_build(failing):
    return run_cli("build", "spec.yaml", *FAST, cwd=failing)


@pytest.fixture(scope="module")
def warned(tmp_path_factory):
    # relative noise 1e-5 on c = a + b: a covariance with condition number above 1e10
    return _project(tmp_path_factory.mktemp("warned"), extra="", noise=1e-5)


def test_check_exits_1_when_a_claim_fails(failing):
    result = run_cli("check", "spec.yaml", *FAST, cwd=failing)
    assert result.returncode == 1, result.stderr
    assert re.search(r"two-relations\s+d\s+full\s+FAILS", result.stdout)
    assert "1 of 2 claim(s) hold; 1 fail" in result.stdout
    assert not (failing / "_site").exists()


def test_build_exits_1_when_a_claim_fails_and_still_writes_the_site(failing, failing_build):
    assert failing_build.returncode == 1, failing_build.stderr
    assert "Traceback" not in failing_build.stderr
    assert (failing / "_site" / "index.html").is_file()


def test_site_shows_the_failed_verdict_on_the_claims_page(failing, failing_build):
    text = _text(failing / "_site" / "claims.html")
    assert re.search(r"1 of 2 claims hold on this build; 1 fail ?\.", text)
    assert re.search(r"fails\s+two-relations\s+Two relations tie a, b and c\.", text)
    assert re.search(r"holds\s+one-relation\s+One relation ties a, b and c\.", text)


def test_site_shows_the_failed_verdict_on_the_dataset_page(failing, failing_build):
    text = _text(failing / "_site" / "datasets" / "d" / "index.html")
    assert re.search(r"fails\s+two-relations", text)


def test_warning_alone_does_not_fail_without_strict(warned):
    result = run_cli("check", "spec.yaml", *FAST, cwd=warned)
    assert result.returncode == 0, result.stderr
    assert "nearly singular" in result.stderr


@pytest.mark.parametrize("command", ["check", "build"])
def test_strict_fails_on_a_warning_when_every_claim_holds(warned, command, tmp_path):
    out = ["--out", str(tmp_path / "site")] if command == "build" else []
    result = run_cli(command, "spec.yaml", *FAST, "--strict", *out, cwd=warned)
    assert result.returncode == 1, result.stderr
    assert "1 of 1 claim(s) hold" in result.stdout
    assert re.search(r"--strict: \d+ warning\(s\) count as failure\.", result.stderr)
    assert "Traceback" not in result.stderr
