"""Same content, same bytes: independent of the hash seed and of the process."""

from __future__ import annotations

import hashlib
import json
import os
import subprocess
import sys
from pathlib import Path

from relspan.site import formula_svg, render_site
from sample_content import build_sample_content

_HERE = Path(__file__).resolve().parent

_SCRIPT = """
import hashlib, json, sys
sys.path.insert(0, sys.argv[1])
from sample_content import build_sample_content
from relspan.site import render_site
out = render_site(build_sample_content())
print(json.dumps({p: hashlib.sha256(b).hexdigest() for p, b in out.items()}, sort_keys=True))
"""


def _start(seed: str) -> subprocess.Popen:
    env = {k: v for k, v in os.environ.items() if k != "SOURCE_DATE_EPOCH"}
    env["PYTHONHASHSEED"] = seed
    return subprocess.Popen([sys.executable, "-c", _SCRIPT, str(_HERE)], env=env,
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)


def _digests(proc: subprocess.Popen) -> dict[str, str]:
    out, err = proc.communicate(timeout=300)
    assert proc.returncode == 0, err
    return json.loads(out)


def test_rendering_in_processes_with_different_hash_seeds_gives_identical_bytes():
    procs = [_start("1"), _start("2")]  # run side by side
    first, second = (_digests(p) for p in procs)
    assert first == second
    here = {p: hashlib.sha256(b).hexdigest() for p, b in
            render_site(build_sample_content()).items()}
    assert here == first


def test_rendered_site_holds_no_absolute_path_of_this_machine():
    out = render_site(build_sample_content())
    needles = [str(_HERE.parents[1]).encode(), os.path.expanduser("~").encode()]
    for path, data in out.items():
        for needle in needles:
            assert needle not in data, (path, needle)


def test_formula_bytes_do_not_depend_on_global_matplotlib_settings():
    import matplotlib
    before = formula_svg(r"x_1 = \beta x_2")
    with matplotlib.rc_context({"svg.hashsalt": None, "mathtext.fontset": "stix",
                                "text.color": "red"}):
        during = formula_svg(r"x_1 = \beta x_2")
    assert during == before
