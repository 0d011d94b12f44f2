"""report/ renders results and findings; it never computes an analysis quantity.

Every module under ``builder/relspan/report/`` is read as a syntax tree (nothing is imported to
find out), and three rules are checked:

1. no ``numpy.linalg`` / ``scipy.linalg`` (imported, or reached as ``np.linalg.*``);
2. from ``relspan.analysis`` only the result types (``analysis.results``), the findings
   interpreter (``analysis.findings``) and public result dataclasses may be imported: a function
   from an analysis module (``principal_angles``, ``elementary_flat``, ...) is a recomputation;
3. one named exception, with its reason, for drawing geometry that no statement rests on.
"""

from __future__ import annotations

import ast
import dataclasses
import importlib
from pathlib import Path

import pytest

REPORT = Path(__file__).resolve().parents[2] / "builder" / "relspan" / "report"

#: modules allowed to use numpy.linalg, each with the reason (display geometry only)
LINALG_ALLOWED = {
    "figures/geometry.py": "the drawing plane of an elementary-regression map (a display projection "
                           "of the points, chosen for legibility); no statement on the site rests on it",
}

#: analysis modules report/ may import anything from
ANALYSIS_MODULES_ALLOWED = ("relspan.analysis.results", "relspan.analysis.findings")

_LINALG = ("numpy.linalg", "scipy.linalg")


def _modules() -> list[Path]:
    return sorted(REPORT.rglob("*.py"))


def _aliases(tree: ast.AST) -> dict[str, str]:
    """Local name -> full module name, for ``import numpy as np`` and friends."""
    out = {}
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            for a in node.names:
                out[a.asname or a.name.split(".")[0]] = a.name if a.asname else a.name.split(".")[0]
    return out


def _dotted(node: ast.AST) -> str | None:
    parts = []
    while isinstance(node, ast.Attribute):
        parts.append(node.attr)
        node = node.value
    if isinstance(node, ast.Name):
        parts.append(node.id)
        return ".".join(reversed(parts))
    return None


def linalg_uses(tree: ast.AST) -> list[str]:
    """Every place a module imports or reaches numpy.linalg / scipy.linalg (line: what)."""
    found = []
    aliases = _aliases(tree)
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            found += [f"{node.lineno}: import {a.name}" for a in node.names if a.name.startswith(_LINALG)]
        elif isinstance(node, ast.ImportFrom) and node.module:
            names = [f"{node.module}.{a.name}" for a in node.names]
            if node.module.startswith(_LINALG) or any(n in _LINALG for n in names):
                found.append(f"{node.lineno}: from {node.module} import ...")
        elif isinstance(node, ast.Attribute) and node.attr == "linalg":
            base = _dotted(node.value)
            if base is not None and aliases.get(base.split(".")[0], base) in ("numpy", "scipy"):
                found.append(f"{node.lineno}: {base}.linalg")
    return found


def analysis_imports(tree: ast.AST) -> list[str]:
    """Imports of relspan.analysis that are neither allowed modules nor result dataclasses."""
    bad = []
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            for a in node.names:
                if a.name.startswith("relspan.analysis") and not a.name.startswith(ANALYSIS_MODULES_ALLOWED):
                    bad.append(f"{node.lineno}: import {a.name}")
        elif isinstance(node, ast.ImportFrom) and node.module and node.module.startswith("relspan.analysis"):
            if node.module.startswith(ANALYSIS_MODULES_ALLOWED):
                continue
            module = importlib.import_module(node.module)
            for a in node.names:
                obj = getattr(module, a.name, None)
                if not (isinstance(obj, type) and dataclasses.is_dataclass(obj)):
                    bad.append(f"{node.lineno}: from {node.module} import {a.name}")
    return bad


def _rel(path: Path) -> str:
    return path.relative_to(REPORT).as_posix()


@pytest.mark.parametrize("path", _modules(), ids=_rel)
def test_report_module_does_not_use_linear_algebra(path):
    if _rel(path) in LINALG_ALLOWED:
        pytest.skip(f"allowed: {LINALG_ALLOWED[_rel(path)]}")
    assert linalg_uses(ast.parse(path.read_text(encoding="utf-8"))) == []


@pytest.mark.parametrize("path", _modules(), ids=_rel)
def test_report_module_imports_no_analysis_function(path):
    assert analysis_imports(ast.parse(path.read_text(encoding="utf-8"))) == []


def test_linalg_exception_names_an_existing_module():
    for rel in LINALG_ALLOWED:
        assert (REPORT / rel).is_file(), rel


def test_the_checks_catch_the_forms_a_recomputation_takes():
    src = ("import numpy as np\nimport scipy.linalg\nfrom numpy import linalg\n"
           "from relspan.analysis.stability import principal_angles\n"
           "from relspan.analysis.window import WindowAnalysis\n"
           "def f(a):\n    return np.linalg.svd(a)\n")
    tree = ast.parse(src)
    assert sorted(int(u.split(":")[0]) for u in linalg_uses(tree)) == [2, 3, 7]
    assert analysis_imports(tree) == ["4: from relspan.analysis.stability import principal_angles"]
