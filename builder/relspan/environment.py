"""The computing environment of a build, captured in two parts.

* :func:`portable_environment` - what a rebuild on another machine must match
  to give the same bytes: Python, the operating-system family and processor
  architecture, the maths library (name and version, not its CPU kernel) and
  the version of every distribution relspan needs at run time (its required
  dependencies and theirs, from the installed metadata). It goes into
  ``results.json``, onto the reproduce page and into the site's own
  ``data/constraints.txt``; it is the same on every machine of the pinned
  environment.
* :func:`machine_environment` - what differs from machine to machine and is
  recorded for the record only: the CPU model, the CPU kernel each maths
  library chose, the operating-system release and every installed
  distribution (test tools and optional readers included). It is written to
  ``build-machine.json`` at the site's root, outside ``SHA256SUMS`` and outside
  every byte comparison.
"""

from __future__ import annotations

import json
import platform
import re
from importlib import metadata

__all__ = ["portable_environment", "machine_environment", "runtime_distributions", "constraints_text",
           "machine_json_bytes", "MACHINE_FILE", "cpu_model", "blas_libraries",
           "linked_maths_libraries"]

#: the site file holding the machine-specific record (not in SHA256SUMS, not byte-compared)
MACHINE_FILE = "build-machine.json"

_ROOT = "relspan"


def _canon(name: str) -> str:
    """PEP 503 normalised distribution name."""
    return re.sub(r"[-_.]+", "-", name).lower()


def runtime_distributions(root: str = _ROOT) -> dict[str, str]:
    """Normalised name -> installed version of every distribution ``root`` requires at run time.

    The required dependencies of ``root`` (no extras), and theirs, recursively,
    as installed; environment markers are evaluated for this interpreter.
    ``root`` itself is left out. A requirement that is not installed is skipped.
    """
    from packaging.requirements import InvalidRequirement, Requirement

    seen: dict[str, str] = {}
    todo = [root]
    while todo:
        name = todo.pop()
        try:
            dist = metadata.distribution(name)
        except metadata.PackageNotFoundError:
            continue
        for text in dist.requires or ():
            try:
                req = Requirement(text)
            except InvalidRequirement:
                continue
            if req.marker is not None and not req.marker.evaluate({"extra": ""}):
                continue
            key = _canon(req.name)
            if key in seen or key == _canon(root):
                continue
            try:
                seen[key] = metadata.version(req.name)
            except metadata.PackageNotFoundError:
                continue
            todo.append(req.name)
    return dict(sorted(seen.items()))


def blas_libraries(*, with_kernel: bool) -> list[dict]:
    """The maths libraries loaded in this process (threadpoolctl), optionally with the CPU kernel."""
    import numpy  # noqa: F401 - loads numpy's BLAS
    import scipy.linalg  # noqa: F401 - loads SciPy's BLAS

    try:
        from threadpoolctl import threadpool_info
    except ImportError:  # pragma: no cover - a required dependency
        return []
    libs = []
    for info in threadpool_info():
        if info.get("user_api") != "blas":
            continue
        row = {"library": str(info.get("internal_api")), "version": str(info.get("version"))}
        if with_kernel:
            row["kernel"] = str(info.get("architecture"))
            row["threads"] = int(info.get("num_threads") or 0)
        libs.append(row)
    unique = {json.dumps(r, sort_keys=True): r for r in libs}
    return [unique[k] for k in sorted(unique)]


def linked_maths_libraries() -> list[dict]:
    """The BLAS/LAPACK library NumPy and SciPy were built against (name and version, from their build info).

    Read from ``numpy.show_config`` and ``scipy.show_config`` rather than from the
    libraries loaded in this process, which depend on what else the process has
    imported (a test run or a notebook may have loaded other copies).
    """
    import numpy
    import scipy

    rows = []
    for package in (numpy, scipy):
        try:
            deps = package.show_config(mode="dicts").get("Build Dependencies", {})
        except Exception:  # pragma: no cover - an unusual build without build information
            deps = {}
        blas = deps.get("blas") or {}
        rows.append({"used_by": package.__name__, "library": str(blas.get("name", "unknown")),
                     "version": str(blas.get("version", "unknown"))})
    return rows


def portable_environment() -> dict:
    """What a rebuild must match to give the same bytes (same on every machine of the pinned set)."""
    from relspan import __version__

    return {
        "python": platform.python_version(),
        "implementation": platform.python_implementation(),
        "os": platform.system(),
        "architecture": platform.machine(),
        "relspan": __version__,
        "distributions": runtime_distributions(),
        "blas": linked_maths_libraries(),
    }


def cpu_model() -> str:
    """The processor's model name, as the operating system reports it ("" when unknown)."""
    try:
        with open("/proc/cpuinfo", encoding="utf-8", errors="replace") as fh:
            for line in fh:
                if line.lower().startswith("model name"):
                    return line.split(":", 1)[1].strip()
    except OSError:
        pass
    return platform.processor() or ""


def machine_environment() -> dict:
    """What differs from machine to machine (kept out of every byte-compared file)."""
    installed = {}
    for dist in metadata.distributions():
        name = dist.metadata.get("Name")
        if name:
            installed[_canon(name)] = dist.version
    return {
        "note": "Machine-specific record of the build; not listed in SHA256SUMS and not compared by the "
                "freshness test or by `relspan verify`.",
        "cpu_model": cpu_model(),
        "os_release": f"{platform.system()} {platform.release()}",
        "blas": blas_libraries(with_kernel=True),
        "installed": dict(sorted(installed.items())),
    }


def machine_json_bytes() -> bytes:
    return (json.dumps(machine_environment(), sort_keys=True, indent=1, ensure_ascii=False) + "\n").encode()


def constraints_text(env: dict | None = None) -> str:
    """A pip constraints file pinning the portable environment (``pip install -c constraints.txt``)."""
    env = portable_environment() if env is None else env
    lines = [f"# Pinned environment of this build: Python {env['python']} on {env['os']} "
             f"{env['architecture']}, relspan {env['relspan']}.",
             f"# Install with: pip install -c constraints.txt relspan=={env['relspan']}"]
    lines += [f"{name}=={version}" for name, version in sorted(env["distributions"].items())]
    return "\n".join(lines) + "\n"
