"""Coranks as sets with resampling support, under each noise assumption.

A corank is never reported as a bare count: each assumption's rule is applied
to every resampled covariance, and the share of resamples in which each q is
chosen (or admissible) is reported beside the choice on the data.

- equal noise: the sequential test of equal smallest eigenvalues
  (:mod:`relspan.analysis.equal_test`; Lawley 1956, Anderson 1963), chosen q per resample;
- bounded noise (``||N||_2 <= eps``): q is admissible iff ``lambda_q(S) <= eps``
  (Weyl's inequality); the share of resamples in which each q is admissible,
  and the share in which each q is the largest admissible;
- diagonal noise (Frisch scheme): a callable per resample (the analysis is
  expensive), run on a reduced number of resamples, each warm-started from
  the previous resample's answer.

References
----------
.. [1] D. N. Lawley, Biometrika 43(1/2), 128-136, 1956.
.. [2] T. W. Anderson, Ann. Math. Statist. 34(1), 122-148, 1963.
.. [3] H. Weyl, "Das asymptotische Verteilungsgesetz der Eigenwerte linearer
       partieller Differentialgleichungen", Mathematische Annalen 71, 441-479, 1912.
.. [4] R. Frisch, Statistical Confluence Analysis by Means of Complete
       Regression Systems, University Institute of Economics, Oslo, 1934.
"""

from __future__ import annotations

import sys
from dataclasses import dataclass
from typing import Any, Callable

import numpy as np

from relspan.analysis._common import jsonable
from relspan.analysis.equal_test import DEFAULT_TEST_LEVEL, sequential_corank, sequential_corank_stack
from relspan.errors import OptionsError

__all__ = ["CorankSupport", "equal_noise_support", "bounded_support", "diagonal_support",
           "DEFAULT_DIAGONAL_RESAMPLES"]

#: resamples for the diagonal-noise support when the spec does not say (each needs a full analysis)
DEFAULT_DIAGONAL_RESAMPLES = 99


@dataclass(frozen=True, slots=True)
class CorankSupport:
    """The corank under one noise assumption as a set with resampling support.

    Attributes
    ----------
    assumption : str
        ``"equal"``, ``"bounded"`` or ``"diagonal"``.
    estimate : int or None
        The corank the rule gives on the data (None: undetermined).
    coranks : tuple of int
        0 .. n.
    chosen_share : (n+1,) tuple of float
        Share of resamples in which each q is the rule's answer (the largest
        admissible q for bounded noise); the shares sum to 1 minus ``undetermined_share``.
    admissible_share : (n+1,) tuple of float or None
        Bounded noise: share of resamples in which each q is admissible.
    undetermined_share : float
        Share of resamples where the rule gave no answer (diagonal noise).
    resamples : int
    rule : str
        The rule applied to each resample.
    """

    assumption: str
    estimate: int | None
    coranks: tuple[int, ...]
    chosen_share: tuple[float, ...]
    admissible_share: tuple[float, ...] | None
    undetermined_share: float
    resamples: int
    rule: str

    def support(self, q: int) -> float:
        """Share of resamples choosing ``q``."""
        return self.chosen_share[q] if 0 <= q < len(self.chosen_share) else 0.0

    def as_text(self, *, min_share: float = 0.005) -> str:
        """``"2: in 96% of resamples; 3: 4%"`` (coranks with at least ``min_share``, largest support first)."""
        items = [(s, q) for q, s in zip(self.coranks, self.chosen_share) if s >= min_share]
        items.sort(key=lambda t: (-t[0], t[1]))
        parts = [f"{q}: {'in ' if i == 0 else ''}{100 * s:.0f}%{' of resamples' if i == 0 else ''}"
                 for i, (s, q) in enumerate(items)]
        if self.undetermined_share >= min_share:
            parts.append(f"undetermined: {100 * self.undetermined_share:.0f}%")
        return "; ".join(parts) if parts else "no resample gave an answer"

    def to_dict(self) -> dict:
        return jsonable({"assumption": self.assumption, "estimate": self.estimate,
                         "coranks": list(self.coranks), "chosen_share": list(self.chosen_share),
                         "admissible_share": None if self.admissible_share is None else list(self.admissible_share),
                         "undetermined_share": self.undetermined_share, "resamples": self.resamples,
                         "rule": self.rule, "text": self.as_text()})


def _shares(values: np.ndarray, n: int) -> tuple[float, ...]:
    counts = np.bincount(values, minlength=n + 1)[: n + 1]
    return tuple(float(c) / max(values.size, 1) for c in counts)


def equal_noise_support(estimate_eigenvalues, resampled_eigenvalues, *, nobs, resampled_nobs=None,
                        level: float = DEFAULT_TEST_LEVEL) -> CorankSupport:
    """Share of resamples in which the sequential equal-eigenvalue test chooses each corank.

    Parameters
    ----------
    estimate_eigenvalues : (n,) array_like
        Eigenvalues of the window covariance on the analysis scale.
    resampled_eigenvalues : (B, n) array_like
        The same for each resample (same scale).
    nobs : float
        Rows (or effective sample size) of the window.
    resampled_nobs : float or (B,) array_like, optional
        Rows of each resample (default ``nobs``).
    level : float
        Significance level of each test.
    """
    lam = np.asarray(resampled_eigenvalues, dtype=float)
    n = lam.shape[1]
    q_hat = sequential_corank(estimate_eigenvalues, nobs=nobs, level=level)
    qs = sequential_corank_stack(lam, nobs=nobs if resampled_nobs is None else resampled_nobs, level=level)
    rule = (f"Sequential tests that the k smallest eigenvalues are equal (k = 2, 3, ..., each at level "
            f"{level:g}; Lawley 1956, Anderson 1963), applied to the data and to each of {lam.shape[0]} "
            "resamples; corank 1 always fits equal noise and is no evidence of a relation by itself.")
    return CorankSupport(assumption="equal", estimate=int(q_hat), coranks=tuple(range(n + 1)),
                         chosen_share=_shares(qs, n), admissible_share=None, undetermined_share=0.0,
                         resamples=int(lam.shape[0]), rule=sys.intern(rule))


def bounded_support(estimate_eigenvalues, resampled_eigenvalues, *, eps: float) -> CorankSupport:
    """Share of resamples in which each corank is admissible under bounded noise ``||N||_2 <= eps``.

    Corank q is admissible iff ``lambda_q(S) <= eps`` (Weyl); the rule's answer
    is the largest admissible q. ``eps`` is on the same scale as the eigenvalues.
    """
    if not (float(eps) > 0):
        raise OptionsError(f"eps must be positive; got {eps!r}.", key="eps",
                           fix="Pass the tolerance on the scale of the eigenvalues.")
    est = np.sort(np.asarray(estimate_eigenvalues, dtype=float))
    lam = np.sort(np.asarray(resampled_eigenvalues, dtype=float), axis=1)
    n = lam.shape[1]
    adm = lam <= eps                               # [b, q-1]: corank q admissible
    qmax = adm.sum(axis=1)                         # eigenvalues ascending: admissible q form 1..qmax
    adm_share = (1.0,) + tuple(float(x) for x in adm.mean(axis=0))
    rule = (f"Corank q is admissible when the q-th smallest eigenvalue is at most the tolerance "
            f"{float(eps):.4g} (Weyl); shares over {lam.shape[0]} resamples. Admissible means the data "
            "allow that many relations within the tolerance, not that they are shown to hold.")
    return CorankSupport(assumption="bounded", estimate=int(np.sum(est <= eps)), coranks=tuple(range(n + 1)),
                         chosen_share=_shares(qmax, n), admissible_share=adm_share, undetermined_share=0.0,
                         resamples=int(lam.shape[0]), rule=sys.intern(rule))


def diagonal_support(estimate: int | None, covariances, analyse: Callable[[np.ndarray, Any], tuple],
                     *, resamples: int | None = DEFAULT_DIAGONAL_RESAMPLES,
                     rule: str = "the diagonal-noise (Frisch scheme) corank of each resample") -> CorankSupport:
    """Resampling support of the diagonal-noise corank through a per-resample callable.

    Parameters
    ----------
    estimate : int or None
        The corank found on the data (None: undetermined).
    covariances : (B, n, n) array_like
        Resampled covariances on the scale the diagonal analysis uses.
    analyse : callable
        ``analyse(cov, warm) -> (q or None, state)``: the corank of one
        covariance (None when undetermined) and a state handed to the next
        call as ``warm`` (e.g. the previous noise variances, to warm-start
        the minimum-rank search). The first call gets ``warm=None``.
    resamples : int, optional
        Use only the first ``resamples`` covariances (the analysis is expensive);
        None: all.
    rule : str
        What ``analyse`` decides, for the output.
    """
    covs = np.asarray(covariances, dtype=float)
    use = covs if resamples is None else covs[: int(resamples)]
    n = covs.shape[1]
    warm = None
    got = []
    undetermined = 0
    for s in use:
        q, warm = analyse(s, warm)
        if q is None:
            undetermined += 1
        else:
            got.append(int(q))
    b = int(use.shape[0])
    shares = np.bincount(np.asarray(got, dtype=int), minlength=n + 1)[: n + 1] / max(b, 1)
    return CorankSupport(assumption="diagonal", estimate=estimate, coranks=tuple(range(n + 1)),
                         chosen_share=tuple(float(x) for x in shares), admissible_share=None,
                         undetermined_share=undetermined / max(b, 1), resamples=b,
                         rule=sys.intern(f"{rule}, over {b} resamples, each warm-started from the previous one."))
