"""Bounded noise: any noise covariance of spectral norm at most eps.

If ``S = S_hat + N`` with ``||N||_2 <= eps`` and ``S_hat`` has corank q, then
Weyl's inequality gives ``lambda_q(S) <= lambda_q(S_hat) + eps = eps``; so
corank q is *possible* iff ``lambda_q(S) <= eps`` (the converse holds with
``N`` the projection of ``S`` on its q smallest eigenvectors).

Where q is possible, the relation subspace ``U`` (null space of ``S_hat``)
lies close to the span ``V`` of the q smallest eigenvectors of ``S``. We use
the Davis-Kahan sin-theta theorem in its residual form: ``U`` is an exact
invariant subspace of ``S_hat`` with eigenvalue 0, its residual in ``S`` is
``S U - U 0 = N U`` with ``||N U||_2 <= eps``, and the eigenvalues of ``S``
belonging to the complement of ``V`` are ``>= lambda_{q+1}(S) > 0``, so

    ||sin Theta(U, V)||_2 <= eps / lambda_{q+1}(S).

(Davis & Kahan 1970, sin-theta theorem; Stewart & Sun 1990, Theorem V.3.6.)
This is tighter than the form ``eps / (lambda_{q+1}(S) - eps)`` obtained by
measuring the gap on ``S_hat`` through Weyl's inequality; both are valid.
When the bound reaches 1 it says nothing, and the angle is reported as 90
degrees with ``vacuous`` set.

References
----------
.. [1] H. Weyl, "Das asymptotische Verteilungsgesetz der Eigenwerte linearer
       partieller Differentialgleichungen", Mathematische Annalen 71,
       441-479, 1912.
.. [2] C. Davis and W. M. Kahan, "The rotation of eigenvectors by a
       perturbation. III", SIAM Journal on Numerical Analysis 7(1), 1-46, 1970.
.. [3] G. W. Stewart and J.-G. Sun, Matrix Perturbation Theory, Academic
       Press, 1990.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Sequence

import numpy as np
import pandas as pd

from relspan.analysis._common import check_cov, correlation_scale, fix_signs, orthonormal_rows
from relspan.analysis._export import jsonable
from relspan.errors import OptionsError

__all__ = ["BoundedNoise", "BoundedCorank", "NoiseTolerance", "bounded_noise", "tolerance_eps",
           "BOUND_FORM"]

#: the exact form of the subspace bound used (see the module docstring)
BOUND_FORM = "sin(theta) <= eps / lambda_{q+1}(S)  (Davis & Kahan 1970, sin-theta theorem, residual form)"


@dataclass(frozen=True, slots=True, eq=False)
class NoiseTolerance:
    """The matrix to analyse and its noise bound eps, with the convention used.

    Attributes
    ----------
    matrix : (n, n) ndarray
        The covariance as given (absolute tolerance) or the correlation
        matrix (relative tolerance).
    eps : float
        Bound on the spectral norm of the noise covariance, on ``matrix``'s scale.
    scale : str
        ``"as given"`` or ``"correlation"``.
    std : (n,) ndarray
        Standard deviations used for the correlation scale (ones for "as given").
    convention : str
        Plain-words statement of what eps means.
    """

    matrix: np.ndarray
    eps: float
    scale: str
    std: np.ndarray
    convention: str

    def diagonal_eps(self) -> tuple[float, float]:
        """The tolerance of the diagonal-noise (Frisch scheme) certificates on the correlation scale.

        The one place an absolute tolerance is converted for that analysis.
        Returns ``(eps_exist, eps_impossible)``. A relative tolerance is
        already a share of each variable's variance: both are ``eps``. An
        absolute tolerance ``e`` bounds the spectral norm of the noise
        covariance's non-diagonal part ``E`` in the data's units; on the
        correlation scale ``E_R = Sigma^-1 E Sigma^-1`` (``Sigma`` the standard
        deviations), so ``||E|| <= max_j s_jj ||E_R||`` and
        ``||E_R|| <= ||E|| / min_j s_jj``. Hence a certificate found with
        ``||E_R|| <= e / max s_jj`` has ``||E|| <= e`` (existence), and any
        corank admitted at ``e`` has ``||E_R|| <= e / min s_jj``, so ruling
        it out at that tolerance rules it out at ``e`` (impossibility). Both
        are valid; between them a corank can stay undetermined.

        Examples
        --------
        >>> import numpy as np
        >>> tolerance_eps(np.diag([8000.0, 9000.0, 10000.0]), absolute=900.0).diagonal_eps()
        (0.09, 0.1125)
        """
        if self.scale == "correlation":
            return self.eps, self.eps
        v = np.diag(self.matrix)
        return float(self.eps / v.max()), float(self.eps / v.min())

    def to_dict(self) -> dict:
        """JSON-ready dict."""
        return jsonable({"matrix": self.matrix, "eps": self.eps, "scale": self.scale, "std": self.std,
                         "convention": self.convention})


def tolerance_eps(cov, *, absolute: float | None = None, relative: float | None = None) -> NoiseTolerance:
    """Turn a spec tolerance into the matrix to analyse and its eps.

    Exactly one of ``absolute`` and ``relative`` must be given.

    - ``absolute=e``: ``||N||_2 <= e`` in the data's own units; the matrix is
      the covariance as given.
    - ``relative=r``: the noise may carry a share ``r`` of each variable's
      variance. We work on the correlation scale (each variable divided by
      its standard deviation, so every variance is 1) where the bound is
      ``eps = r``. A diagonal noise with ``N_jj <= r S_jj`` satisfies it;
      a general N is bounded in the scaled spectral norm.
    """
    if (absolute is None) == (relative is None):
        raise OptionsError("give exactly one of absolute= and relative= for the noise tolerance.",
                           key="tolerance", fix="Use tolerance: {relative: 0.05} or {absolute: 0.01}.")
    s, _ = check_cov(cov, names=None, names_required=False)
    value = absolute if absolute is not None else relative
    kind = "absolute" if absolute is not None else "relative"
    if (isinstance(value, bool) or not isinstance(value, (int, float, np.floating, np.integer))
            or not math.isfinite(value) or value < 0):
        raise OptionsError(f"tolerance.{kind} must be a finite number >= 0; got {value!r}.",
                           key=f"tolerance.{kind}", fix="Use a small non-negative number such as 0.05.")
    n = s.shape[0]
    if absolute is not None:
        return NoiseTolerance(matrix=s, eps=float(absolute), scale="as given", std=np.ones(n),
                              convention=(f"The noise covariance has spectral norm at most {float(absolute):g} "
                                          "in the data's own units."))
    if relative > 1:
        raise OptionsError(f"tolerance.relative is a share of each variable's variance and must be at "
                           f"most 1; got {relative!r}.", key="tolerance.relative",
                           fix="Use a share such as 0.05 (5 per cent).")
    r, d = correlation_scale(s)
    return NoiseTolerance(matrix=r, eps=float(relative), scale="correlation", std=d,
                          convention=(f"On the correlation scale (every variable divided by its standard "
                                      f"deviation), the noise covariance has spectral norm at most "
                                      f"{float(relative):g}: noise of up to {100 * float(relative):g}% of "
                                      "each variable's variance."))


@dataclass(frozen=True, slots=True, eq=False)
class BoundedCorank:
    """One admissible corank under bounded noise.

    Attributes
    ----------
    q : int
        Corank.
    basis : (q, n) ndarray
        Orthonormal rows: the q smallest eigenvectors of the analysed matrix
        (in the analysed matrix's coordinates).
    gap : float
        ``lambda_{q+1}(S)``, the separation used in the bound (inf for q = n).
    sin_bound : float
        ``eps / gap`` (may exceed 1).
    angle_bound_deg : float
        ``degrees(arcsin(min(sin_bound, 1)))``: every relation subspace of a
        corank-q model within the tolerance lies within this largest
        principal angle of ``basis``; 90 when vacuous.
    vacuous : bool
        True when ``sin_bound >= 1`` (the bound says nothing).
    """

    q: int
    basis: np.ndarray
    gap: float
    sin_bound: float
    angle_bound_deg: float
    vacuous: bool

    def to_dict(self) -> dict:
        """JSON-ready dict."""
        return jsonable({"q": self.q, "basis": self.basis, "gap": self.gap, "sin_bound": self.sin_bound,
                         "angle_bound_deg": self.angle_bound_deg, "vacuous": self.vacuous})


@dataclass(frozen=True, slots=True, eq=False)
class BoundedNoise:
    """Coranks possible when the noise covariance has spectral norm at most eps.

    Methods: Weyl (1912) for the admissible coranks; Davis & Kahan (1970),
    *The rotation of eigenvectors by a perturbation. III*, for the subspace
    bound (form in :data:`BOUND_FORM`).

    Attributes
    ----------
    names : tuple of str
        Variable names.
    eps : float
        The bound on ``||N||_2`` (on the analysed matrix's scale).
    eigenvalues : (n,) ndarray
        Eigenvalues of the analysed matrix, ascending.
    eigenvectors : (n, n) ndarray
        Row i is the eigenvector of ``eigenvalues[i]``.
    admissible : tuple of int
        Coranks q in 1..n with ``lambda_q <= eps``; consecutive from 1.
    max_corank : int
        Largest admissible corank (0 when none is).
    all_noise : bool
        True when even q = n is admissible: the whole covariance could be noise.
    coranks : tuple of BoundedCorank
        One entry per admissible q <= n - 1.
    bound_form : str
        The exact inequality used.
    """

    names: tuple[str, ...]
    eps: float
    eigenvalues: np.ndarray
    eigenvectors: np.ndarray
    admissible: tuple[int, ...]
    max_corank: int
    all_noise: bool
    coranks: tuple[BoundedCorank, ...]
    bound_form: str

    def to_dict(self) -> dict:
        """JSON-ready dict."""
        return jsonable({"names": list(self.names), "eps": self.eps, "eigenvalues": self.eigenvalues,
                         "eigenvectors": self.eigenvectors, "admissible": list(self.admissible),
                         "max_corank": self.max_corank, "all_noise": self.all_noise,
                         "coranks": [c.to_dict() for c in self.coranks], "bound_form": self.bound_form})

    def to_frame(self) -> pd.DataFrame:
        """One row per corank 1..n: eigenvalue, admissible, gap, bound (degrees)."""
        n = len(self.names)
        by_q = {c.q: c for c in self.coranks}
        rows = []
        for q in range(1, n + 1):
            c = by_q.get(q)
            rows.append({"q": q, "eigenvalue": float(self.eigenvalues[q - 1]),
                         "admissible": q in self.admissible,
                         "gap": np.nan if c is None else c.gap,
                         "angle_bound_deg": np.nan if c is None else c.angle_bound_deg,
                         "vacuous": None if c is None else c.vacuous})
        return pd.DataFrame(rows).set_index("q")


def bounded_noise(cov, *, names: Sequence[str], eps: float) -> BoundedNoise:
    """Admissible coranks and subspace bounds when ``||N||_2 <= eps``.

    Parameters
    ----------
    cov : (n, n) array_like
        The matrix to analyse (see :func:`tolerance_eps` for the scale).
    names : sequence of str
        One name per variable.
    eps : float
        Bound on the spectral norm of the noise covariance (>= 0).

    Returns
    -------
    BoundedNoise

    References
    ----------
    .. [1] H. Weyl, Mathematische Annalen 71, 441-479, 1912.
    .. [2] C. Davis and W. M. Kahan, SIAM J. Numer. Anal. 7(1), 1-46, 1970.

    Examples
    --------
    >>> import numpy as np
    >>> S = np.array([[4.0, 2.0, 1.0], [2.0, 3.0, 1.0], [1.0, 1.0, 2.0]])
    >>> bd = bounded_noise(S, names=["a", "b", "c"], eps=1.5)
    >>> bd.admissible, bd.max_corank   # lambda_1 = 1.308 <= 1.5 < lambda_2 = 1.643
    ((1,), 1)
    """
    s, names_t = check_cov(cov, names=names)
    if (isinstance(eps, bool) or not isinstance(eps, (int, float, np.floating, np.integer))
            or not math.isfinite(eps) or eps < 0):
        raise OptionsError(f"eps must be a finite number >= 0; got {eps!r}.", key="eps",
                           fix="Pass the noise bound from tolerance_eps(...).eps.")
    eps = float(eps)
    n = s.shape[0]
    lam, vec = np.linalg.eigh(s)
    rows = fix_signs(vec.T)
    admissible = tuple(q for q in range(1, n + 1) if lam[q - 1] <= eps)
    max_q = max(admissible, default=0)
    coranks = []
    for q in admissible:
        if q >= n:
            continue
        gap = float(lam[q])
        sin_b = eps / gap if gap > 0 else math.inf
        vac = sin_b >= 1.0
        ang = 90.0 if vac else math.degrees(math.asin(sin_b))
        coranks.append(BoundedCorank(q=q, basis=orthonormal_rows(rows[:q]), gap=gap, sin_bound=sin_b,
                                     angle_bound_deg=ang, vacuous=vac))
    return BoundedNoise(names=names_t, eps=eps, eigenvalues=lam, eigenvectors=rows, admissible=admissible,
                        max_corank=max_q, all_noise=n in admissible, coranks=tuple(coranks),
                        bound_form=BOUND_FORM)
