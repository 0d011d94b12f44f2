"""Equal (or known-shape) noise: total least squares and its generalised form.

With noise covariance ``N = s^2 I`` a corank-q model ``S = S_hat + s^2 I``
(``S_hat`` of rank ``n - q``) puts the q smallest eigenvalues of ``S`` all at
``s^2``, and the relations span their eigenvectors: the total least squares
solution, the best rank ``n - q`` approximation of ``S`` (Eckart & Young 1936;
Golub & Van Loan 1980). With noise of known shape ``N = s^2 W`` (``W``
diagonal, relative noise variances) the same holds for the generalised problem
``S v = lambda W v`` (Koopmans 1937; Deming 1943 for n = 2).

Neither is scale invariant: rescaling one variable changes the answer unless
``W`` is rescaled with it. Working on the correlation scale fixes the units
but is itself an assumption (noise variance proportional to total variance).

References
----------
.. [1] C. Eckart and G. Young, "The approximation of one matrix by another of
       lower rank", Psychometrika 1(3), 211-218, 1936.
.. [2] G. H. Golub and C. F. Van Loan, "An analysis of the total least squares
       problem", SIAM Journal on Numerical Analysis 17(6), 883-893, 1980.
.. [3] T. C. Koopmans, Linear Regression Analysis of Economic Time Series,
       De Erven F. Bohn, Haarlem, 1937.
.. [4] W. E. Deming, Statistical Adjustment of Data, Wiley, 1943.
.. [5] M. E. Tipping and C. M. Bishop, "Probabilistic principal component
       analysis", Journal of the Royal Statistical Society B 61(3), 611-622,
       1999 (the mean of the discarded eigenvalues as the noise variance).
"""

from __future__ import annotations

import sys
from dataclasses import dataclass
from typing import Sequence

import numpy as np
import pandas as pd
import scipy.linalg as sla

from relspan.analysis._common import check_cov, correlation_scale, fix_signs, orthonormal_rows
from relspan.analysis._export import jsonable
from relspan.errors import OptionsError

__all__ = ["EqualNoise", "EqualNoiseCorank", "equal_noise"]


@dataclass(frozen=True, slots=True, eq=False)
class EqualNoiseCorank:
    """Equal-noise (or shaped-noise) result for one corank q.

    Attributes
    ----------
    q : int
        Corank (number of relations).
    basis : (q, n) ndarray
        Orthonormal rows spanning the relation subspace (original units):
        the eigenvectors of the q smallest (generalised) eigenvalues,
        orthonormalised in the Euclidean inner product.
    noise_scale : float
        ``lambda_q``, the q-th smallest eigenvalue: the common noise variance
        (equal noise) or the factor multiplying ``W`` (shaped noise) at which
        a corank-q model holds when the q smallest eigenvalues are equal in
        the population; it is the largest of the q values the data give.
    noise_scale_mean : float
        Mean of the q smallest eigenvalues: the maximum-likelihood noise
        variance of the Gaussian equal-noise model (Tipping & Bishop 1999).
    noise_variances : (n,) ndarray
        Implied noise variance of each variable, ``noise_scale * W_jj``
        (``W = I`` for equal noise).
    gap_ratio : float
        ``lambda_q / lambda_{q+1}``: near 0 when the q smallest eigenvalues
        stand clearly apart from the rest (evidence for corank q), near 1
        when they do not.
    spread_ratio : float
        ``lambda_1 / lambda_q``: near 1 when the q smallest eigenvalues are
        equal, as the model requires.
    """

    q: int
    basis: np.ndarray
    noise_scale: float
    noise_scale_mean: float
    noise_variances: np.ndarray
    gap_ratio: float
    spread_ratio: float

    def to_dict(self) -> dict:
        """JSON-ready dict."""
        return jsonable({"q": self.q, "basis": self.basis, "noise_scale": self.noise_scale,
                         "noise_scale_mean": self.noise_scale_mean,
                         "noise_variances": self.noise_variances, "gap_ratio": self.gap_ratio,
                         "spread_ratio": self.spread_ratio})


@dataclass(frozen=True, slots=True, eq=False)
class EqualNoise:
    """Total least squares (equal noise) or its known-shape generalisation for one window.

    Methods: Eckart & Young (1936), *The approximation of one matrix by
    another of lower rank*; Golub & Van Loan (1980), *An analysis of the
    total least squares problem*; with a noise shape, Koopmans (1937),
    *Linear Regression Analysis of Economic Time Series*, and Deming (1943),
    *Statistical Adjustment of Data*.

    Attributes
    ----------
    names : tuple of str
        Variable names.
    eigenvalues : (n,) ndarray
        Eigenvalues of ``S`` (or of ``S v = lambda W v``), ascending, on the
        scale analysed (see ``scale``).
    eigenvectors : (n, n) ndarray
        Row ``i`` is the eigenvector of ``eigenvalues[i]``, in original units
        (unit length; sign fixed so its largest entry is positive).
    shape : (n,) ndarray or None
        The relative noise variances ``diag(W)`` used, or None for equal noise.
    scale : str
        ``"as given"`` or ``"correlation"``: the scale the eigenproblem was solved on.
    coranks : tuple of EqualNoiseCorank
        One entry for each q in 1 .. n-1.
    scale_note : str
        Plain-words note on units (results are not scale invariant).
    method : str
        ``"total least squares"`` or ``"generalised total least squares (known noise shape)"``.
    """

    names: tuple[str, ...]
    eigenvalues: np.ndarray
    eigenvectors: np.ndarray
    shape: np.ndarray | None
    scale: str
    coranks: tuple[EqualNoiseCorank, ...]
    scale_note: str
    method: str

    def corank(self, q: int) -> EqualNoiseCorank:
        """The result for corank ``q`` (1 .. n-1)."""
        for c in self.coranks:
            if c.q == q:
                return c
        raise OptionsError(f"corank {q} is outside 1..{len(self.names) - 1}.", key="q",
                           fix=f"Ask for a corank from 1 to {len(self.names) - 1}.")

    def to_dict(self) -> dict:
        """JSON-ready dict."""
        return jsonable({"names": list(self.names), "eigenvalues": self.eigenvalues,
                         "eigenvectors": self.eigenvectors, "shape": self.shape, "scale": self.scale,
                         "coranks": [c.to_dict() for c in self.coranks],
                         "scale_note": self.scale_note, "method": self.method})

    def to_frame(self) -> pd.DataFrame:
        """One row per corank: eigenvalue, noise scales, gap and spread ratios."""
        rows = [{"q": c.q, "eigenvalue": float(self.eigenvalues[c.q - 1]), "noise_scale": c.noise_scale,
                 "noise_scale_mean": c.noise_scale_mean, "gap_ratio": c.gap_ratio,
                 "spread_ratio": c.spread_ratio} for c in self.coranks]
        return pd.DataFrame(rows).set_index("q")


def equal_noise(cov, *, names: Sequence[str], shape=None, scale: str = "as given") -> EqualNoise:
    """Relations under equal noise (total least squares) or noise of known relative shape.

    Parameters
    ----------
    cov : (n, n) array_like
        Window covariance.
    names : sequence of str
        One name per variable.
    shape : (n,) array_like, optional
        Relative noise variances (positive); the noise covariance is assumed
        to be ``s^2 diag(shape)`` with ``s^2`` unknown. Default: equal noise.
    scale : {"as given", "correlation"}
        Solve on the covariance as given, or on the correlation scale (each
        variable divided by its standard deviation; ``shape`` is then read
        as relative noise *shares* of each variable's variance). Bases are
        always returned in original units.

    Returns
    -------
    EqualNoise

    References
    ----------
    .. [1] C. Eckart and G. Young, Psychometrika 1(3), 211-218, 1936.
    .. [2] G. H. Golub and C. F. Van Loan, SIAM J. Numer. Anal. 17(6), 883-893, 1980.
    .. [3] T. C. Koopmans, Linear Regression Analysis of Economic Time Series, 1937.
    .. [4] W. E. Deming, Statistical Adjustment of Data, Wiley, 1943.

    Examples
    --------
    >>> import numpy as np
    >>> S = np.array([[4.0, 2.0, 1.0], [2.0, 3.0, 1.0], [1.0, 1.0, 2.0]])
    >>> eq = equal_noise(S, names=["a", "b", "c"])
    >>> np.round(eq.eigenvalues, 3).tolist()
    [1.308, 1.643, 6.049]
    >>> np.round(eq.coranks[0].basis, 3).tolist()   # the eigenvector of the smallest eigenvalue
    [[-0.328, 0.737, -0.591]]
    """
    s, names_t = check_cov(cov, names=names)
    n = s.shape[0]
    if n < 2:
        raise OptionsError("equal_noise needs at least 2 variables.", key="cov",
                           fix="Analyse two or more variables together.")
    if scale not in ("as given", "correlation"):
        raise OptionsError(f"scale must be 'as given' or 'correlation'; got {scale!r}.", key="scale",
                           fix="Use scale='as given' or scale='correlation'.")
    w_diag = None
    if shape is not None:
        w_diag = np.asarray(shape, dtype=float).reshape(-1)
        if w_diag.shape != (n,) or not np.all(np.isfinite(w_diag)) or np.any(w_diag <= 0):
            raise OptionsError(f"shape must be {n} positive relative noise variances; got {shape!r}.",
                               key="shape", fix="Give every variable a positive noise share "
                                                "(e.g. noise_share: 1.0 for all).")
    if scale == "correlation":
        mat, d = correlation_scale(s)
    else:
        mat, d = s, np.ones(n)
    if w_diag is None:
        lam, vec = np.linalg.eigh(mat)
        method = "total least squares"
    else:
        lam, vec = sla.eigh(mat, np.diag(w_diag))
        method = "generalised total least squares (known noise shape)"
    # back to original units: a relation b . z = 0 on z = x / d is (b / d) . x = 0
    vec_orig = (vec / d[:, None]).T
    vec_orig = fix_signs(vec_orig / np.linalg.norm(vec_orig, axis=1, keepdims=True))
    wv = np.ones(n) if w_diag is None else w_diag
    coranks = []
    for q in range(1, n):
        basis = orthonormal_rows(vec_orig[:q])
        lq = float(lam[q - 1])
        coranks.append(EqualNoiseCorank(
            q=q, basis=basis, noise_scale=lq, noise_scale_mean=float(np.mean(lam[:q])),
            noise_variances=lq * wv * (d**2 if scale == "correlation" else 1.0),
            gap_ratio=_ratio(lq, float(lam[q])), spread_ratio=_ratio(float(lam[0]), lq)))
    if scale == "correlation":
        note = ("Computed on the correlation scale (each variable divided by its standard deviation): "
                "the result does not depend on the units, but assumes noise variances proportional to "
                "each variable's total variance" + (" times its stated share." if w_diag is not None else "."))
    else:
        note = ("Computed in the data's own units: rescaling a variable (for example thousands instead "
                "of units) changes the relations and the noise estimate, because equal "
                + ("relative " if w_diag is not None else "") + "noise means something different in "
                "different units. Compare with the correlation-scale result before relying on it.")
    return EqualNoise(names=names_t, eigenvalues=np.asarray(lam, dtype=float), eigenvectors=vec_orig,
                      shape=w_diag, scale=scale, coranks=tuple(coranks), scale_note=sys.intern(note), method=method)


def _ratio(a: float, b: float) -> float:
    if b == 0:
        return float("nan") if a == 0 else float("inf")
    return a / b
