"""relspan: what do error-ridden multivariate data really pin down?

Python face of relspan (the command line is :mod:`builder.cli`):

* :func:`load_spec` - read and validate a spec file;
* :func:`check` - analyse a spec and evaluate its claims (writes nothing);
* :func:`build` - analyse a spec and write its site;
* :func:`analyse_frame` - the whole analysis on a pandas DataFrame (notebooks).
"""

__version__ = "0.1.0"

from builder.api import FrameAnalysis, Outcome, analyse_frame, build, check  # noqa: E402
from builder.spec.loader import load_spec  # noqa: E402

__all__ = ["__version__", "load_spec", "check", "build", "analyse_frame", "Outcome", "FrameAnalysis"]
