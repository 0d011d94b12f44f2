"""Private helpers shared by the analysis modules: input checks, scaling, bases, JSON.

Nothing here is public API; the modules re-export what users need.
"""

from __future__ import annotations

import math
from typing import Any, Sequence

import numpy as np
import scipy.linalg as sla

from relspan.errors import OptionsError

__all__: list[str] = []

#: machine epsilon of float64
EPS = float(np.finfo(float).eps)


def check_cov(cov: Any, *, names: Sequence[str] | None, what: str = "cov",
              names_required: bool = True) -> tuple[np.ndarray, tuple[str, ...]]:
    """Validate a covariance matrix and its variable names; return a float copy and the names.

    Raises
    ------
    OptionsError
        When ``cov`` is not a finite, square, symmetric matrix with a
        non-negative diagonal, or ``names`` does not give one unique name per
        variable.
    """
    try:
        s = np.array(cov, dtype=float)
    except (TypeError, ValueError) as exc:
        raise OptionsError(f"{what} must be a numeric (n, n) matrix; got {type(cov).__name__} ({exc}).",
                           key=what, fix="Pass the window covariance as a 2-D float array.") from None
    if s.ndim != 2 or s.shape[0] != s.shape[1] or s.shape[0] < 1:
        raise OptionsError(f"{what} must be a square (n, n) matrix; got shape {s.shape}.", key=what,
                           fix="Pass the window covariance matrix, one row and column per variable.")
    if not np.all(np.isfinite(s)):
        raise OptionsError(f"{what} contains NaN or infinite entries.", key=what,
                           fix="Drop or fill missing values before computing the window covariance.")
    n = s.shape[0]
    scale = max(float(np.max(np.abs(s))), np.finfo(float).tiny)
    asym = float(np.max(np.abs(s - s.T)))
    if asym > 1e-8 * scale:
        raise OptionsError(f"{what} is not symmetric (largest |S - S^T| is {asym:.3g}, "
                           f"largest |S| is {scale:.3g}).", key=what,
                           fix="Pass a covariance matrix; symmetrise it with (S + S.T) / 2 if it "
                               "comes from a computation with rounding.")
    if np.any(np.diag(s) < 0):
        raise OptionsError(f"{what} has a negative variance on its diagonal.", key=what,
                           fix="Pass a covariance matrix (positive semi-definite).")
    s = 0.5 * (s + s.T)
    if names is None and not names_required:
        return s, tuple(f"x{i + 1}" for i in range(n))
    if names is None:
        raise OptionsError("names is required: one name per variable.", key="names",
                           fix=f"Pass names=[...] with {n} variable names.")
    names_t = tuple(str(x) for x in names)
    if len(names_t) != n:
        raise OptionsError(f"names has {len(names_t)} entries but {what} has {n} variables.",
                           key="names", fix=f"Pass exactly {n} names, in the order of the rows of {what}.")
    if len(set(names_t)) != n:
        dup = sorted({x for x in names_t if names_t.count(x) > 1})
        raise OptionsError(f"names must be unique; repeated: {', '.join(dup)}.", key="names",
                           fix="Give every variable its own name.")
    return s, names_t


def correlation_scale(s: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """``(R, d)`` with ``d = sqrt(diag(S))`` and ``R = S / (d d^T)``; zero variances keep scale 1."""
    d = np.sqrt(np.diag(s))
    d = np.where(d > 0, d, 1.0)
    r = s / np.outer(d, d)
    r = 0.5 * (r + r.T)
    return r, d


def orthonormal_rows(basis: np.ndarray) -> np.ndarray:
    """Orthonormal rows spanning the row space of ``basis`` (QR of its transpose).

    The sign of each row is fixed so that its largest-magnitude entry is
    positive, which makes the output deterministic.
    """
    b = np.atleast_2d(np.asarray(basis, dtype=float))
    if b.shape[0] == 0:
        return b.copy()
    q, _ = np.linalg.qr(b.T)
    out = q.T.copy()
    return fix_signs(out)


def fix_signs(rows: np.ndarray) -> np.ndarray:
    """Flip rows so that each row's largest-magnitude entry is positive (first one on ties)."""
    rows = np.array(rows, dtype=float)
    for i in range(rows.shape[0]):
        k = int(np.argmax(np.abs(rows[i])))
        if rows[i, k] < 0:
            rows[i] = -rows[i]
    return rows


def pivot_columns(basis: np.ndarray) -> tuple[int, ...]:
    """The q columns of a (q, n) basis chosen by QR with column pivoting (best-conditioned block).

    References
    ----------
    .. [1] P. Businger and G. H. Golub, "Linear least squares solutions by
           Householder transformations", Numerische Mathematik 7, 269-276, 1965.
    """
    b = np.atleast_2d(np.asarray(basis, dtype=float))
    q = b.shape[0]
    _, _, piv = sla.qr(b, mode="economic", pivoting=True)
    return tuple(int(p) for p in piv[:q])


def reduced_form(basis: np.ndarray, targets: Sequence[int]) -> tuple[np.ndarray, float]:
    """Rows ``A_c^{-1} A`` of a (q, n) basis ``A`` (identity in the ``targets`` columns) and cond(A_c)."""
    a = np.atleast_2d(np.asarray(basis, dtype=float))
    block = a[:, list(targets)]
    cond = float(np.linalg.cond(block))
    if not np.isfinite(cond) or cond > 1.0 / EPS:
        return np.full_like(a, np.nan), math.inf
    r = np.linalg.solve(block, a)
    r[:, list(targets)] = np.eye(len(targets))
    return r, cond


def jsonable(x: Any) -> Any:
    """Plain Python (lists, floats, ints, str, None) for JSON; NaN and infinities become None."""
    if isinstance(x, np.ndarray):
        return [jsonable(v) for v in x.tolist()] if x.ndim else jsonable(x.item())
    if isinstance(x, (list, tuple)):
        return [jsonable(v) for v in x]
    if isinstance(x, dict):
        return {str(k): jsonable(v) for k, v in x.items()}
    if isinstance(x, (bool, np.bool_)):
        return bool(x)
    if isinstance(x, (int, np.integer)):
        return int(x)
    if isinstance(x, (float, np.floating)):
        v = float(x)
        return v if math.isfinite(v) else None
    return x


def check_names_len(names: Sequence[str] | None, n: int, *, key: str = "names") -> tuple[str, ...]:
    """Validate a names sequence of length ``n`` (unique, one per variable)."""
    if names is None:
        raise OptionsError(f"{key} is required: one name per variable.", key=key,
                           fix=f"Pass {key}=[...] with {n} names.")
    t = tuple(str(x) for x in names)
    if len(t) != n:
        raise OptionsError(f"{key} has {len(t)} entries but {n} are needed.", key=key,
                           fix=f"Pass exactly {n} names, one per column.")
    if len(set(t)) != n:
        dup = sorted({x for x in t if t.count(x) > 1})
        raise OptionsError(f"{key} must be unique; repeated: {', '.join(dup)}.", key=key,
                           fix="Give every entry its own name.")
    return t
