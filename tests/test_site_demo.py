"""site_demo/ is the committed build of specs/demo.yaml, and it must stay byte-fresh.

Rebuilding the demo from scratch (no cache, serial) into a temporary folder
must give exactly the committed bytes; when code or data change on purpose,
refresh it with ``relspan build specs/demo.yaml --no-cache`` and commit the
result. The committed site must also pass the pure-Python link checker.
"""

from __future__ import annotations

import hashlib
import os
import subprocess
import sys
from pathlib import Path

import pytest

from relspan.site.links import check_site

ROOT = Path(__file__).resolve().parents[1]
SITE_DEMO = ROOT / "site_demo"
DEMO = ROOT / "specs" / "demo.yaml"
REFRESH = "relspan build specs/demo.yaml --no-cache"


def _digests(site: Path) -> dict[str, str]:
    return {p.relative_to(site).as_posix(): hashlib.sha256(p.read_bytes()).hexdigest()
            for p in sorted(site.rglob("*")) if p.is_file()}


@pytest.fixture(scope="module")
def committed() -> dict[str, str]:
    if not (SITE_DEMO / "index.html").is_file():
        pytest.fail(f"site_demo/ is missing or empty; build it with `{REFRESH}`")
    return _digests(SITE_DEMO)


@pytest.fixture(scope="module")
def rebuilt(tmp_path_factory) -> dict[str, str]:
    out = tmp_path_factory.mktemp("site-demo") / "site"
    env = {**os.environ, "PYTHONHASHSEED": "0"}
    env.pop("RELSPAN_DEBUG", None)
    done = subprocess.run([sys.executable, "-m", "relspan", "build", str(DEMO), "--out", str(out),
                           "--no-cache", "--jobs", "1", "-q"], cwd=ROOT, env=env, capture_output=True,
                          text=True, timeout=1800)
    assert done.returncode == 0, done.stderr
    return _digests(out)


@pytest.mark.slow
def test_committed_demo_site_is_byte_identical_to_a_fresh_build(committed, rebuilt):
    missing = sorted(set(rebuilt) - set(committed))
    extra = sorted(set(committed) - set(rebuilt))
    changed = sorted(k for k in set(committed) & set(rebuilt) if committed[k] != rebuilt[k])
    if missing or extra or changed:
        lines = [f"site_demo/ is stale: {len(changed)} file(s) differ, {len(missing)} missing, "
                 f"{len(extra)} no longer built. Refresh it with `{REFRESH}` and commit the result."]
        lines += [f"  differs: {k}" for k in changed[:40]]
        lines += [f"  missing from site_demo/: {k}" for k in missing[:40]]
        lines += [f"  only in site_demo/: {k}" for k in extra[:40]]
        pytest.fail("\n".join(lines), pytrace=False)


def test_committed_demo_site_has_no_broken_links(committed):
    problems = check_site(SITE_DEMO)
    assert not problems, "\n".join(str(p) for p in problems[:40])


def test_committed_demo_site_lists_every_file_in_its_checksums(committed):
    listed = {}
    for line in (SITE_DEMO / "SHA256SUMS").read_text(encoding="utf-8").splitlines():
        digest, name = line.split("  ", 1)
        listed[name] = digest
    expected = {k: v for k, v in committed.items() if k not in ("SHA256SUMS", ".relspan-site")}
    assert listed == expected, f"SHA256SUMS is out of step with site_demo/; refresh with `{REFRESH}`"
