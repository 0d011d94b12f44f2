"""docs/guide.md: every ``sh`` block runs, in order, in an empty folder holding a copy of specs/."""

from __future__ import annotations

import os
import re
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
GUIDE = ROOT / "docs" / "guide.md"


def guide_blocks() -> list[str]:
    """The guide's fenced ``sh`` blocks, in order."""
    return re.findall(r"^```sh\n(.*?)^```$", GUIDE.read_text(encoding="utf-8"), flags=re.S | re.M)


def test_the_guide_has_a_path_for_each_user_and_shell_blocks_to_run():
    text = GUIDE.read_text(encoding="utf-8")
    for user in ("research group", "policy analyst", "replication reviewer"):
        assert re.search(rf"^## \d\. A {user}", text, flags=re.M), user
    assert len(guide_blocks()) >= 6
    assert "association in the data, not causation" in text


@pytest.mark.slow  # three site builds
def test_every_command_in_the_guide_runs(tmp_path):
    shutil.copytree(ROOT / "specs", tmp_path / "specs",
                    ignore=shutil.ignore_patterns(".relspan-cache", "_site", "__pycache__"))
    bindir = Path(sys.executable).parent
    env = dict(os.environ, PATH=f"{bindir}{os.pathsep}{os.environ.get('PATH', '')}")
    script = "set -euo pipefail\n" + "\n".join(guide_blocks())
    done = subprocess.run(["bash", "-c", script], cwd=tmp_path, env=env, capture_output=True,
                          text=True, timeout=1200)
    assert done.returncode == 0, (done.stdout[-2000:], done.stderr[-3000:])
    assert (tmp_path / "appendix.zip").is_file()
    assert (tmp_path / "briefing" / "site" / "index.html").is_file()
    starter = (tmp_path / "briefing" / "briefing.yaml").read_text(encoding="utf-8")
    assert 'separator: ";"' in starter and 'decimal: ","' in starter
    assert "#### `datasets[].separator`" in (tmp_path / "spec-reference.md").read_text(encoding="utf-8")
