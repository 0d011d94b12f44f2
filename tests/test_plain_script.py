"""The Python face in a plain script: no `if __name__ == "__main__":` block, or piped to python.

Worker processes of a local pool import the calling script again, so relspan
must not start them from a script that would run the call again (or that is
read from standard input); from Python it runs in this process unless asked.
"""

from __future__ import annotations

import os
import re
import shutil
import subprocess
import sys
import textwrap
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
README = ROOT / "README.md"


def readme_python_example() -> str:
    """The README's Python example (the first ```python block), as written."""
    blocks = re.findall(r"```python\n(.*?)```", README.read_text(encoding="utf-8"), flags=re.S)
    assert blocks, "the README has no ```python block"
    return blocks[0]


def _project(tmp_path: Path) -> Path:
    """A folder laid out like the repository root for the example (specs/ with its data)."""
    folder = tmp_path / "project"
    shutil.copytree(ROOT / "specs", folder / "specs",
                    ignore=shutil.ignore_patterns(".relspan-cache", "_site", "__pycache__"))
    return folder


def _run(args, cwd, stdin=None, timeout=600):
    env = dict(os.environ, PYTHONWARNINGS="default")
    return subprocess.run(args, cwd=cwd, input=stdin, capture_output=True, text=True, timeout=timeout,
                          env=env)


def _example(tmp_path: Path) -> tuple[str, Path]:
    out = tmp_path / "demo-site"
    code = readme_python_example()
    assert 'out="/tmp/demo-site"' in code
    return code.replace('"/tmp/demo-site"', repr(str(out))), out


@pytest.mark.slow  # a whole check and build of the demo in one process (about half a minute)
def test_readme_python_example_runs_as_a_plain_script_without_a_main_block(tmp_path):
    code, out = _example(tmp_path)
    assert "__main__" not in code
    project = _project(tmp_path)
    script = project / "example.py"
    script.write_text(code, encoding="utf-8")
    done = _run([sys.executable, str(script)], cwd=project)
    assert done.returncode == 0, done.stderr[-3000:]
    assert "Traceback" not in done.stderr and "bootstrapping" not in done.stderr
    assert "5 of 5 claim(s) hold" in done.stdout
    assert (out / "index.html").is_file()


@pytest.mark.slow
def test_readme_python_example_runs_piped_to_python(tmp_path):
    code, out = _example(tmp_path)
    done = _run([sys.executable, "-"], cwd=_project(tmp_path), stdin=code)
    assert done.returncode == 0, done.stderr[-3000:]
    assert "Traceback" not in done.stderr
    assert (out / "index.html").is_file()


SMALL_SPEC = """\
relspan: 1
report: {title: small}
datasets:
  - id: d
    source: d.csv
    variables: [{column: x}, {column: y}, {column: z}]
windows:
  - {id: full, kind: full}
  - {id: roll, kind: rolling, width: 30, step: 10}
checks: {assumptions: [elementary, equal]}
"""


def _small(tmp_path: Path) -> Path:
    import numpy as np

    rng = np.random.default_rng(5)
    x = rng.normal(size=(120, 2))
    rows = [f"{a:.6f},{b:.6f},{a + b + 0.01 * e:.6f}" for (a, b), e in zip(x, rng.normal(size=120))]
    (tmp_path / "d.csv").write_text("x,y,z\n" + "\n".join(rows) + "\n", encoding="utf-8")
    (tmp_path / "spec.yaml").write_text(SMALL_SPEC, encoding="utf-8")
    return tmp_path / "spec.yaml"


def test_asking_for_workers_from_an_unguarded_script_runs_in_process_and_says_how(tmp_path):
    _small(tmp_path)
    script = tmp_path / "unguarded.py"
    script.write_text(textwrap.dedent("""\
        import relspan
        outcome = relspan.check("spec.yaml", jobs=2, use_cache=False)
        print("WHERE:", outcome.where)
        """), encoding="utf-8")
    done = _run([sys.executable, str(script)], cwd=tmp_path)
    assert done.returncode == 0, done.stderr[-3000:]
    assert "WHERE: in this process" in done.stdout
    assert "RuntimeWarning: relspan runs the analysis in this process instead of 2 worker processes" \
        in done.stderr
    assert 'if __name__ == "__main__":' in done.stderr and "jobs=N" in done.stderr


def test_a_guarded_script_gets_the_workers_it_asks_for(tmp_path):
    _small(tmp_path)
    script = tmp_path / "guarded.py"
    script.write_text(textwrap.dedent("""\
        import relspan

        def main():
            outcome = relspan.check("spec.yaml", jobs=2, use_cache=False)
            print("WHERE:", outcome.where)

        if __name__ == "__main__":
            main()
        """), encoding="utf-8")
    done = _run([sys.executable, str(script)], cwd=tmp_path)
    assert done.returncode == 0, done.stderr[-3000:]
    assert "WHERE: on 2 worker processes" in done.stdout
    assert "RuntimeWarning" not in done.stderr


def test_python_default_is_in_process_and_says_how_to_use_more_cores(tmp_path):
    import relspan

    outcome = relspan.check(_small(tmp_path), use_cache=False)
    assert outcome.where.startswith("in this process") and "jobs=N" in outcome.where
