"""relspan: what do error-ridden multivariate data really pin down?

Python face of relspan (the command line is :mod:`builder.cli`).
"""

__version__ = "0.1.0"

__all__ = ["__version__"]
