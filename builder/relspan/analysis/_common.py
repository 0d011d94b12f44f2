"""Private helpers shared by the analysis modules: input checks, scaling, bases.

Nothing here is public API; the modules re-export what users need.

Input checks follow the rule in :mod:`relspan.errors`: an argument a pure
analysis function cannot accept (wrong type, shape, range; a matrix that is
not a covariance) raises :class:`~relspan.errors.OptionsError` naming the
function's own parameter (``cov``, ``eps``, ``names``, ``ref``...); a valid
argument whose data make a method inapplicable (a constant variable) raises
:class:`~relspan.errors.DataError`. Every method module uses these checks, so
the same bad input raises the same class, with the same words, everywhere.
JSON and table export helpers live in :mod:`relspan.analysis._export`.
"""

from __future__ import annotations

import math
from typing import Any, Sequence

import numpy as np
import scipy.linalg as sla
from scipy.linalg import lapack as _lapack

# Re-exported for modules that still import it from here (findings, claims, report/site_content).
# TODO(architecture): they should import it from relspan.analysis._export.
from relspan.analysis._export import jsonable as jsonable  # noqa: F401
from relspan.errors import DataError, OptionsError

__all__: list[str] = []

#: machine epsilon of float64
EPS = float(np.finfo(float).eps)


def check_cov(cov: Any, *, names: Sequence[str] | None, what: str = "cov",
              names_required: bool = True, min_vars: int = 1) -> tuple[np.ndarray, tuple[str, ...]]:
    """Validate a covariance matrix and its variable names; return a float copy and the names.

    With ``names_required=False`` and ``names=None`` the names are
    ``x1 .. xn``. The copy is symmetrised, ``(S + S^T) / 2``.

    Raises
    ------
    OptionsError
        When ``cov`` is not a finite, square, symmetric matrix with a
        non-negative diagonal and at least ``min_vars`` rows, or ``names``
        does not give one unique name per variable.
    """
    try:
        s = np.array(cov, dtype=float)
    except (TypeError, ValueError) as exc:
        raise OptionsError(f"{what} must be a numeric (n, n) matrix; got {type(cov).__name__} ({exc}).",
                           key=what, fix="Pass the window covariance as a 2-D float array.") from None
    if s.ndim != 2 or s.shape[0] != s.shape[1] or s.shape[0] < 1:
        raise OptionsError(f"{what} must be a square (n, n) matrix; got shape {s.shape}.", key=what,
                           fix="Pass the window covariance matrix, one row and column per variable.")
    if s.shape[0] < min_vars:
        raise OptionsError(f"{what} must have at least {min_vars} variables; got {s.shape[0]}.", key=what,
                           fix=f"Pass the covariance of {min_vars} or more variables.")
    if not np.all(np.isfinite(s)):
        i, j = np.argwhere(~np.isfinite(s))[0]
        raise OptionsError(f"{what} contains NaN or infinite entries (first at ({i + 1}, {j + 1}): "
                           f"{s[i, j]}).", key=what,
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


def correlation_scale(s: np.ndarray, *, unit_diagonal: bool = False) -> tuple[np.ndarray, np.ndarray]:
    """``(R, d)`` with ``d = sqrt(diag(S))`` and ``R = S / (d d^T)``; zero variances keep scale 1.

    With ``unit_diagonal`` the diagonal of ``R`` is set to exactly 1 (it can
    differ from 1 in the last bit otherwise).
    """
    d = np.sqrt(np.diag(s))
    d = np.where(d > 0, d, 1.0)
    r = s / np.outer(d, d)
    r = 0.5 * (r + r.T)
    if unit_diagonal:
        np.fill_diagonal(r, 1.0)
    return r, d


def check_positive_variances(s: np.ndarray, *, method: str) -> None:
    """Raise :class:`DataError` when a variable of a valid covariance has zero variance.

    A constant variable is a property of the data (one window can hold a
    constant column), not a malformed argument, hence ``DataError``.
    """
    diag = np.diag(s)
    if np.any(diag <= 0):
        j = int(np.argmin(diag))
        raise DataError(
            f"variable {j + 1} has variance {diag[j]:.6g}; {method} needs every variance to be positive.",
            key="cov", fix="drop constant variables from the dataset, or widen the window.")


def check_psd(s: np.ndarray, *, what: str = "cov") -> None:
    """Raise :class:`OptionsError` when ``S`` (positive diagonal) is not positive semidefinite.

    Judged on the correlation scale, with a tolerance of ``1e-9 n`` on the
    smallest eigenvalue. The covariance of the rows of one window always
    passes; pairwise deletion of missing values can produce matrices that fail.
    """
    n = s.shape[0]
    sd = np.sqrt(np.diag(s))
    lam_min = float(np.linalg.eigvalsh(s / np.outer(sd, sd))[0])
    if lam_min < -1e-9 * n:
        raise OptionsError(
            f"{what} is not positive semidefinite (smallest eigenvalue of its correlation matrix "
            f"{lam_min:.3g}).", key=what,
            fix="compute the covariance from the data rows of one window (pairwise deletion of "
                "missing values can produce such matrices).")


def check_fraction(value: Any, *, key: str, meaning: str) -> float:
    """A number strictly between 0 and 1 (``OptionsError`` naming ``key`` otherwise)."""
    try:
        e = float(value)
    except (TypeError, ValueError):
        e = float("nan")
    if not (math.isfinite(e) and 0.0 < e < 1.0):
        raise OptionsError(f"{key} ({meaning}) must be a number in (0, 1); got {value!r}.", key=key,
                           fix="use a small relative tolerance such as 1e-6 or 0.01.")
    return e


def check_whole(value: Any, *, key: str, minimum: int) -> int:
    """A whole number (not a bool) ``>= minimum`` (``OptionsError`` naming ``key`` otherwise)."""
    if isinstance(value, bool) or not isinstance(value, (int, np.integer)) or value < minimum:
        raise OptionsError(f"{key} must be a whole number >= {minimum}; got {value!r}.", key=key,
                           fix=f"pass e.g. {key}={max(minimum, 8 if minimum else 0)}.")
    return int(value)


def variable_index(names: Sequence[str], var: int | str, *, key: str) -> int:
    """Index of a variable given by name or by 0-based index (``OptionsError`` naming ``key`` otherwise)."""
    if isinstance(var, (int, np.integer)) and not isinstance(var, bool):
        i = int(var)
        if not 0 <= i < len(names):
            raise OptionsError(f"{key} index {i} is out of range for {len(names)} variables.", key=key,
                               fix=f"Use an index from 0 to {len(names) - 1} or a variable name.")
        return i
    if isinstance(var, str) and var in names:
        return list(names).index(var)
    raise OptionsError(f"{key} {var!r} is not one of the variables ({', '.join(names)}).", key=key,
                       fix="Use one of the listed variable names or its index.")


def orthonormal_columns(a: np.ndarray) -> np.ndarray:
    """``Q`` of the reduced QR decomposition of one ``(m, k)`` matrix, ``m >= k``: ``numpy.linalg.qr(a)[0]``.

    The same LAPACK calls as NumPy's (Householder ``dgeqrf``, then ``dorgqr`` for the first ``k``
    columns), made through SciPy's LAPACK wrappers, which skip NumPy's per-call work (the
    triangular ``R`` it builds and the caller throws away): 1.4 against 10 microseconds for a
    6 x 2 matrix, and the window analysis makes about 17 such calls per window. Other shapes,
    and a LAPACK error, go to NumPy.
    """
    a = np.asarray(a, dtype=float)
    if a.ndim != 2 or a.shape[1] == 0 or a.shape[0] < a.shape[1]:
        return np.linalg.qr(a)[0]
    qr, tau, _, info = _lapack.dgeqrf(a)
    if info != 0:
        return np.linalg.qr(a)[0]
    q, _, info = _lapack.dorgqr(qr[:, :a.shape[1]], tau)
    return q if info == 0 else np.linalg.qr(a)[0]


def orthonormal_rows(basis: np.ndarray) -> np.ndarray:
    """Orthonormal rows spanning the row space of ``basis`` (QR of its transpose).

    The sign of each row is fixed so that its largest-magnitude entry is
    positive, which makes the output deterministic.
    """
    b = np.atleast_2d(np.asarray(basis, dtype=float))
    if b.shape[0] == 0:
        return b.copy()
    return fix_signs(orthonormal_columns(b.T).T)


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
    if b.size and np.isfinite(b).all():
        # LAPACK's dgeqp3 directly, with the optimal workspace as scipy.linalg.qr asks for it: the
        # same routine, the same pivots, without forming Q (about 1 us instead of 50 us)
        work, info = _lapack.dgeqp3(b, lwork=-1)[3:]
        if info == 0:
            _, jpvt, _, _, info = _lapack.dgeqp3(b, lwork=int(work[0]))
            if info == 0:
                return tuple(int(p) - 1 for p in jpvt[:q])
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
