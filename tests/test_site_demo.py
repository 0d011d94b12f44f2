"""site_demo/ is the committed build of specs/demo.yaml, and it must stay fresh, in two layers.

1. Inside the pinned environment (every distribution relspan needs at run time at the version
   constraints.txt pins, and the same Python): a rebuild from scratch (no cache, serial) gives
   exactly the committed bytes.
2. Outside it (other library versions, another Python): every number within its stated precision
   (relspan.precision, compared by relspan.verify) and every other byte of text identical
   (HTML pages, CSV text columns, checksums excepted); figures are not compared there.

The failure message says which layer failed and why. ``build-machine.json`` (CPU model, the maths
library's CPU kernel) is machine-specific and never compared. When code or data change on purpose,
refresh with ``relspan build specs/demo.yaml --no-cache`` and commit the result. The committed site
must also pass the pure-Python link checker. A slow test builds the demo under two OpenBLAS kernels
(Haswell and SkylakeX, or Nehalem without AVX-512) and requires the same bytes.
"""

from __future__ import annotations

import hashlib
import json
import os
import re
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

from relspan.site.links import check_site

ROOT = Path(__file__).resolve().parents[1]
SITE_DEMO = ROOT / "site_demo"
DEMO = ROOT / "specs" / "demo.yaml"
REFRESH = "relspan build specs/demo.yaml --no-cache"
CONSTRAINTS = ROOT / "constraints.txt"
#: machine-specific, outside SHA256SUMS and every byte comparison (relspan.environment.MACHINE_FILE)
MACHINE_FILE = "build-machine.json"


def _digests(site: Path) -> dict[str, str]:
    return {p.relative_to(site).as_posix(): hashlib.sha256(p.read_bytes()).hexdigest()
            for p in sorted(site.rglob("*")) if p.is_file() and p.name != MACHINE_FILE}


def pinned_environment_differences() -> list[str]:
    """How this environment differs from the pinned one (empty inside it).

    Compared: every distribution relspan needs at run time (its dependencies and theirs)
    against constraints.txt. Test tools may differ; they do not touch the site.
    """
    from relspan.environment import runtime_distributions

    pins = {}
    for line in CONSTRAINTS.read_text(encoding="utf-8").splitlines():
        line = line.split("#", 1)[0].strip()
        if "==" in line:
            name, version = line.split("==", 1)
            pins[re.sub(r"[-_.]+", "-", name).lower()] = version.strip()
    out = []
    for name, version in runtime_distributions().items():
        if pins.get(name) != version:
            out.append(f"{name} {version} (pinned: {pins.get(name, 'not pinned')})")
    return out


def _build(out: Path, **env_extra) -> subprocess.CompletedProcess:
    env = {**os.environ, "PYTHONHASHSEED": "0", **env_extra}
    env.pop("RELSPAN_DEBUG", None)
    return subprocess.run([sys.executable, "-m", "relspan", "build", str(DEMO), "--out", str(out),
                           "--no-cache", "--jobs", "1", "-q"], cwd=ROOT, env=env, capture_output=True,
                          text=True, timeout=1800)


@pytest.fixture(scope="module")
def committed() -> dict[str, str]:
    if not (SITE_DEMO / "index.html").is_file():
        pytest.fail(f"site_demo/ is missing or empty; build it with `{REFRESH}`")
    return _digests(SITE_DEMO)


@pytest.fixture(scope="module")
def rebuilt_site(tmp_path_factory) -> Path:
    out = tmp_path_factory.mktemp("site-demo") / "site"
    done = _build(out)
    assert done.returncode == 0, done.stderr
    return out


@pytest.fixture(scope="module")
def rebuilt(rebuilt_site) -> dict[str, str]:
    return _digests(rebuilt_site)


def _numbers_and_text_layer(rebuilt_site: Path, changed: list[str]) -> list[str]:
    """Layer 2: the changed files, compared as numbers within precision and text; what still differs."""
    from relspan.verify import compare_csv, compare_documents

    bad = []
    for name in changed:
        a, b = SITE_DEMO / name, rebuilt_site / name
        if name.endswith(".json"):
            pub, new = json.loads(a.read_text(encoding="utf-8")), json.loads(b.read_text(encoding="utf-8"))
            if name == "data/results.json":
                pub.pop("environment", None), new.pop("environment", None)
            c = compare_documents(pub, new)
        elif name.endswith(".csv"):
            c = compare_csv(a.read_bytes(), b.read_bytes(), name=name)
        elif name.endswith((".svg", ".png")) or name in ("SHA256SUMS", "data/constraints.txt",
                                                          "reproduce.html", "data/tables/software.csv"):
            continue  # figures, checksums and the version lists follow the versions
        else:
            bad.append(f"  text differs: {name}")
            continue
        bad += [f"  beyond precision: {e}" for e in c.examples[:3]]
    return bad


@pytest.mark.slow
def test_committed_demo_site_is_fresh_byte_identical_in_the_pinned_environment(committed, rebuilt,
                                                                              rebuilt_site):
    missing = sorted(set(rebuilt) - set(committed))
    extra = sorted(set(committed) - set(rebuilt))
    changed = sorted(k for k in set(committed) & set(rebuilt) if committed[k] != rebuilt[k])
    if not (missing or extra or changed):
        return
    outside = pinned_environment_differences()
    if not outside:
        lines = [f"layer 1 (same bytes in the pinned environment) failed: this environment matches "
                 f"constraints.txt, yet site_demo/ is stale: {len(changed)} file(s) differ, "
                 f"{len(missing)} missing, {len(extra)} no longer built. Refresh it with `{REFRESH}` "
                 "and commit the result (or, if only figures differ, see the figures' determinism)."]
    else:
        bad = _numbers_and_text_layer(rebuilt_site, changed)
        if not (bad or missing or extra):
            pytest.skip("outside the pinned environment (" + "; ".join(outside[:3]) + "): the bytes "
                        f"differ in {len(changed)} file(s), but every number is within its stated precision "
                        "and the text is identical (layer 2 passed; layer 1 needs constraints.txt)")
        lines = [f"layer 2 (numbers within precision, text identical, outside the pinned environment: "
                 f"{'; '.join(outside[:3])}) failed: {len(bad)} problem(s), {len(missing)} file(s) missing, "
                 f"{len(extra)} no longer built. If the change is meant, refresh with `{REFRESH}`."]
        lines += bad[:40]
    lines += [f"  differs: {k}" for k in changed[:40]]
    lines += [f"  missing from site_demo/: {k}" for k in missing[:40]]
    lines += [f"  only in site_demo/: {k}" for k in extra[:40]]
    pytest.fail("\n".join(lines), pytrace=False)


@pytest.mark.slow
def test_demo_builds_to_the_same_bytes_under_two_openblas_kernels(tmp_path):
    """OPENBLAS_CORETYPE picks the CPU kernel (Haswell: AVX2 and FMA; SkylakeX: AVX-512; Nehalem:
    SSE only); two of them must give the same site bytes (build-machine.json, which names the
    kernel, excepted). Haswell against SkylakeX where the CPU has AVX-512, else Haswell against
    Nehalem, so that a machine without AVX-512 (an AMD EPYC of this project's CI, for one) still
    compares two instruction sets."""
    flags = Path("/proc/cpuinfo").read_text(encoding="utf-8", errors="replace") if Path("/proc/cpuinfo").exists() else ""
    if " avx2" not in flags or " fma" not in flags:
        pytest.skip("this CPU has no AVX2/FMA (or is not x86-64), so the Haswell kernel cannot run here")
    other = "SkylakeX" if "avx512f" in flags else "Nehalem"
    sites = {}
    for kernel in ("Haswell", other):
        done = _build(tmp_path / kernel, OPENBLAS_CORETYPE=kernel)
        assert done.returncode == 0, done.stderr
        machine = json.loads((tmp_path / kernel / MACHINE_FILE).read_text(encoding="utf-8"))
        assert {b["kernel"] for b in machine["blas"]} == {kernel}, machine["blas"]
        sites[kernel] = _digests(tmp_path / kernel)
    a, b = sites["Haswell"], sites[other]
    assert set(a) == set(b)
    differ = sorted(k for k in a if a[k] != b[k])
    assert not differ, (f"{len(differ)} file(s) differ between the Haswell and {other} kernels: "
                        + ", ".join(differ[:30]))


def test_committed_demo_site_has_no_broken_links(committed):
    problems = check_site(SITE_DEMO)
    assert not problems, "\n".join(str(p) for p in problems[:40])


def test_committed_demo_site_lists_every_file_in_its_checksums(committed):
    listed = {}
    for line in (SITE_DEMO / "SHA256SUMS").read_text(encoding="utf-8").splitlines():
        digest, name = line.split("  ", 1)
        listed[name] = digest
    expected = {k: v for k, v in committed.items() if k not in ("SHA256SUMS", ".relspan-site", MACHINE_FILE)}
    assert listed == expected, f"SHA256SUMS is out of step with site_demo/; refresh with `{REFRESH}`"


def _readme_commands() -> list[str]:
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    return [line.strip() for line in text.splitlines() if line.startswith("    python3 -m venv .venv")]


def test_readme_has_exactly_two_setup_commands_and_ci_runs_the_test_one():
    demo, tests = _readme_commands()
    assert "-c constraints.txt" in demo and "-c constraints.txt" in tests
    assert "relspan build specs/demo.yaml --out " in demo and "pytest" in tests
    ci = (ROOT / ".ci" / "run").read_text(encoding="utf-8")
    assert tests in ci.splitlines()


def test_readme_demo_command_writes_only_where_git_ignores():
    """The demo build goes to an ignored folder (and its cache beside the spec is ignored), never site_demo/."""
    if shutil.which("git") is None or not (ROOT / ".git").exists():
        pytest.skip("not a git checkout")
    demo, _ = _readme_commands()
    out = demo.split("--out ", 1)[1].split()[0]
    assert Path(out).resolve() != SITE_DEMO.resolve() and "site_demo" not in out
    for path in (f"{out}/index.html", f"{out}/data/results.json", "specs/.relspan-cache/README.txt"):
        done = subprocess.run(["git", "check-ignore", "-q", path], cwd=ROOT)
        assert done.returncode == 0, f"{path} would show in git status"


def test_constraints_pin_every_runtime_dependency():
    from relspan.environment import runtime_distributions

    pinned = CONSTRAINTS.read_text(encoding="utf-8").lower().replace("_", "-")
    missing = [name for name in runtime_distributions() if f"\n{name}==" not in "\n" + pinned]
    assert not missing, f"constraints.txt does not pin {missing}; refresh it (command in its header)"
