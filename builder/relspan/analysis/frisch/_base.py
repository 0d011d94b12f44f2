"""Private pieces shared by the Frisch-scheme modules: input checks and scale-free thresholds."""

from __future__ import annotations

import math
from typing import Any, Sequence

import numpy as np

from relspan.analysis._common import check_cov, check_positive_variances, check_psd, correlation_scale

__all__: list[str] = []

# Relative size below which an entry of a scale-free matrix counts as zero.
_ZERO = 1e-12
# Smallest eigenvalue of R (correlation scale) below which R is singular.
_SINGULAR = 1e-12


def frisch_cov(cov: Any, names: Sequence[str] | None) -> tuple[np.ndarray, tuple[str, ...]]:
    """Validate the covariance and names of a diagonal-noise analysis; return ``(S, names)``.

    Beyond :func:`relspan.analysis._common.check_cov` (``OptionsError``), the
    scheme needs at least 2 variables and a positive semidefinite ``S``
    (``OptionsError``), and every variance positive (``DataError``: a
    constant variable). ``names`` defaults to ``x1 .. xn``.
    """
    s, nm = check_cov(cov, names=names, names_required=False, min_vars=2)
    check_positive_variances(s, method="the diagonal-noise (Frisch) analysis")
    check_psd(s)
    return s, nm


def check_eps(value: Any, *, key: str = "eps") -> float:
    """A tolerance on the correlation scale: a finite number > 0 (``OptionsError`` naming ``key``).

    No upper limit: a tolerance converted from an absolute one
    (:meth:`relspan.analysis.bounded.NoiseTolerance.diagonal_eps`) can exceed
    1 when it is larger than a variable's variance; every certificate keeps
    its meaning then.
    """
    from relspan.errors import OptionsError

    try:
        e = float(value)
    except (TypeError, ValueError):
        e = float("nan")
    if isinstance(value, bool) or not (math.isfinite(e) and e > 0.0):
        raise OptionsError(f"{key} (the tolerance on the correlation scale) must be a finite number > 0; "
                           f"got {value!r}.", key=key,
                           fix="use a small relative tolerance such as 1e-6 or 0.01.")
    return e


def correlation(s: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """``(R, sd)``: the correlation matrix (unit diagonal) and the standard deviations."""
    return correlation_scale(s, unit_diagonal=True)


def is_singular(r: np.ndarray) -> bool:
    """Whether the correlation matrix ``R`` is singular to working precision."""
    return bool(np.linalg.eigvalsh(r)[0] <= _SINGULAR * r.shape[0])
