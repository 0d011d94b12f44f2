"""relspan: what do error-ridden multivariate data really pin down?

Python face of relspan (the command line is :mod:`relspan.cli`):

* :func:`load_spec` - read and validate a spec file;
* :func:`check` - analyse a spec and evaluate its claims (writes no site; fills the result cache);
* :func:`build` - analyse a spec and write its site;
* :func:`analyse_frame` - the whole analysis on a pandas DataFrame (notebooks);
* :func:`verify` - re-run a published site's analysis and compare every number and verdict.

The names are loaded on first use (PEP 562), so that ``import relspan.cli`` stays
light: the command line starts fast and a Ctrl-C during start-up reaches its
handler (exit 130, one line) instead of interrupting an import of pandas.
"""

from __future__ import annotations

import importlib

__version__ = "0.1.0"

__all__ = ["__version__", "load_spec", "check", "build", "analyse_frame", "Outcome", "FrameAnalysis",
           "verify"]

_LAZY = {"check": "relspan.run.build", "build": "relspan.run.build", "analyse_frame": "relspan.api",
         "Outcome": "relspan.run.build", "FrameAnalysis": "relspan.api", "load_spec": "relspan.spec.load", "verify": "relspan.verify"}


def __getattr__(name: str):
    if name in _LAZY:
        value = getattr(importlib.import_module(_LAZY[name]), name)
        globals()[name] = value
        return value
    raise AttributeError(f"module 'relspan' has no attribute {name!r}")


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(__all__))
