"""The spread of a family of corank-q solutions under diagonal noise.

When the parameter count fails, the corank-q solutions form a continuum;
this samples members (random starts and walkers along the family) and
reports how far their relation subspaces are apart (principal angles).

References
----------
.. [1] J. M. F. ten Berge and H. A. L. Kiers, Psychometrika 56(2), 1991.
.. [2] L. Ning, T. T. Georgiou, A. Tannenbaum and S. P. Boyd, "Linear models
       based on noisy data and the Frisch scheme", SIAM Review 57(2),
       167-197, 2015.
.. [3] Å. Björck and G. H. Golub, "Numerical methods for computing angles
       between linear subspaces", Mathematics of Computation 27(123),
       579-594, 1973.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Sequence

import numpy as np

from relspan.analysis._common import check_whole
from relspan.analysis._export import fields_dict, frame
from relspan.analysis.frisch._base import check_eps, correlation, frisch_cov
from relspan.analysis.frisch.identification import FrischIdentification, frisch_identification
from relspan.analysis.frisch.minrank import _certify, _relations_back, _Searcher

__all__ = ["SolutionSpread", "solution_spread"]


def _principal_angles_deg(qa: np.ndarray, qb: np.ndarray) -> np.ndarray:
    """Principal angles (ascending, degrees) between the column spaces of ``qa`` and ``qb``.

    The one implementation in :func:`relspan.analysis.stability.principal_angles`
    (sines and cosines combined by atan2; Björck & Golub 1973).
    """
    from relspan.analysis.stability import principal_angles

    return principal_angles(qa, qb, layout="columns")


def _pairwise_largest_angles_deg(bases: np.ndarray) -> np.ndarray:
    """Largest principal angle (degrees) between every pair of ``k`` subspaces, all at once.

    ``bases`` is (k, n, q) with orthonormal columns. For each pair the
    cosines are the singular values of ``Q_a^T Q_b`` and the sines those of
    ``Q_b - Q_a Q_a^T Q_b``; the largest angle is ``atan2(max sine, min
    cosine)`` (Björck & Golub 1973), the same formula as
    :func:`relspan.analysis.stability.principal_angles`, here on stacked
    arrays (one batched SVD for all ``k (k - 1) / 2`` pairs). Returns the
    symmetric (k, k) matrix with a zero diagonal.
    """
    k, n, q = bases.shape
    ang = np.zeros((k, k))
    if k < 2:
        return ang
    ia, ib = np.triu_indices(k, 1)
    qa, qb = bases[ia], bases[ib]
    c = np.swapaxes(qa, 1, 2) @ qb
    cos = np.linalg.svd(c, compute_uv=False)[:, -1]
    sin = np.linalg.svd(qb - qa @ c, compute_uv=False)[:, 0]
    sin = np.where(sin <= 4.0 * n * np.finfo(float).eps, 0.0, sin)
    a = np.degrees(np.arctan2(sin, np.clip(cos, 0.0, 1.0)))
    ang[ia, ib] = a
    ang[ib, ia] = a
    return ang


@dataclass(frozen=True, slots=True)
class SolutionSpread:
    """The spread of the relation subspaces over many corank-q solutions.

    Attributes
    ----------
    names : tuple of str
        Variable names.
    q : int
        Corank.
    eps : float
        Tolerance (correlation scale) for a solution to count.
    identification : FrischIdentification
        The parameter count for this ``n`` and ``q``.
    members : int
        Number of corank-q solutions found (each certified within ``eps``).
    distinct : int
        Number of them whose relation subspaces differ by more than 0.001 degrees.
    representative : (q, n) ndarray or None
        Orthonormal relation rows (covariance scale) of the medoid member:
        the one whose largest angle to any other member is smallest.
    representative_noise : tuple of float or None
        Its noise variances (covariance scale).
    max_angle_deg : float or None
        Largest principal angle between any two members' subspaces.
    widest_pair_deg : tuple of float or None
        All ``q`` principal angles between the two most distant members.
    angles_to_representative_deg : tuple of float
        Largest principal angle from each member to the representative.
    noise_low, noise_high : tuple of float or None
        Per variable, the smallest and largest noise variance over members.
    member_noise : (members, n) ndarray
        Every member's noise variances (covariance scale).
    starts : int
        Random starts used (besides the minimum-trace and directed ones).
    seed : int
        Seed of the random starts.
    summary : str
        Plain-language summary.
    """

    names: tuple[str, ...]
    q: int
    eps: float
    identification: FrischIdentification
    members: int
    distinct: int
    representative: np.ndarray | None
    representative_noise: tuple[float, ...] | None
    max_angle_deg: float | None
    widest_pair_deg: tuple[float, ...] | None
    angles_to_representative_deg: tuple[float, ...]
    noise_low: tuple[float, ...] | None
    noise_high: tuple[float, ...] | None
    member_noise: np.ndarray
    starts: int
    seed: int
    summary: str

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready dict with sorted keys."""
        return fields_dict(self)

    def to_frame(self):
        """Per variable: ``variable, noise_low, noise_high, representative_noise``."""
        rows = []
        for i, v in enumerate(self.names):
            rows.append({"variable": v,
                         "noise_low": None if self.noise_low is None else self.noise_low[i],
                         "noise_high": None if self.noise_high is None else self.noise_high[i],
                         "representative_noise": (None if self.representative_noise is None
                                                  else self.representative_noise[i])})
        return frame(rows, columns=["variable", "noise_low", "noise_high",
                                           "representative_noise"])


def solution_spread(cov: Any, q: int, eps: float, *, names: Sequence[str] | None = None,
                    starts: int = 8, seed: int = 0, max_iter: int = 20,
                    certified: np.ndarray | None = None) -> SolutionSpread:
    """Sample distinct corank-q solutions and report how far their relations differ.

    Solutions come from the ten Berge & Kiers minimum-rank iteration started
    from the minimum-trace solution and from ``starts - 1`` random feasible
    starts, and from ``2 n`` walkers that move from the first solution along
    the family: each step follows the tangent space of the corank-q set
    (directions ``delta`` with ``V^T diag(delta) V = 0``) toward raising or
    lowering one noise variance, with a doubling step, and returns to the
    family by the same iteration, until the family's edge. Every member is
    certified within ``eps``. The spread found is a lower bound on the
    family's true spread. Where no member keeps ``R - D`` positive
    semidefinite, the same search runs on ``R + eps I`` (members whose
    ``R - D`` is indefinite within ``eps``, as :func:`frisch_max_corank`
    certifies them).
    The spread is the largest principal angle between members' relation
    subspaces (sines and cosines combined by atan2); the representative is
    the medoid member, reported beside the spread, never alone.

    Parameters
    ----------
    cov : (n, n) array_like
        Sample covariance.
    q : int
        Corank, 1 <= q <= n - 1.
    eps : float
        Tolerance in (0, 1) on the correlation scale.
    names : sequence of str, optional
        Variable names.
    starts, seed : int
        Random starts and their seed.
    max_iter : int
        Iteration cap per run.
    certified : (n,) array_like, optional
        Noise shares (correlation scale) of a corank-q certificate already
        found (e.g. by :func:`frisch_max_corank`): kept as a member when the
        searches find none, so a certified corank never has an empty spread.

    Returns
    -------
    SolutionSpread

    References
    ----------
    .. [1] J. M. F. ten Berge and H. A. L. Kiers, Psychometrika 56(2), 1991.
    .. [2] L. Ning, T. T. Georgiou, A. Tannenbaum and S. P. Boyd, SIAM Review
           57(2), 2015.
    .. [3] Å. Björck and G. H. Golub, Mathematics of Computation 27(123), 1973.
    """
    s, nm = frisch_cov(cov, names)
    n = s.shape[0]
    eps = check_eps(eps)
    starts = check_whole(starts, key="starts", minimum=1)
    seed = check_whole(seed, key="seed", minimum=0)
    ident = frisch_identification(n, q)
    q = int(q)
    r, sd = correlation(s)
    search = _Searcher(r, eps)
    rng = np.random.default_rng(seed)
    d_mt = search.solve(np.ones((1, n)))[0]
    dirs = np.vstack([np.eye(n), -np.eye(n)])
    members: list[np.ndarray] = []
    bases: list[np.ndarray] = []

    def _keep(d: np.ndarray) -> None:
        ok, _, _ = _certify(r, d, q, eps)
        if ok:
            _, vec = np.linalg.eigh(r - np.diag(d))
            members.append(d)
            bases.append(_relations_back(vec[:, :q], sd).T)

    rand_starts = search.random_starts(rng, starts - 1)
    for attempt in (search, _Searcher.indefinite(r, eps)):
        # The search keeping R - D PSD first; where it finds no member, the
        # same on R + eps I (members whose R - D is indefinite, as certified).
        # the minimum-trace start and the random ones in one lockstep run (runs are
        # independent of each other), kept in that order
        ends, _ = attempt.descend(q, np.vstack([d_mt[None, :], rand_starts]), max_iter=max_iter)
        for d1 in ends:
            _keep(d1)
        if members:
            for d1 in attempt.walk(q, members[0], dirs):
                _keep(d1)
            break
    if not members and certified is not None:
        _keep(np.asarray(certified, dtype=float))
    k = len(members)
    if k == 0:
        summary = (f"No solution with {q} relation{'s' if q > 1 else ''} was found within "
                   f"tolerance {eps:g}, so no spread can be reported.")
        return SolutionSpread(nm, q, eps, ident, 0, 0, None, None, None, None, (), None, None,
                              np.zeros((0, n)), starts, seed, summary)
    ang = _pairwise_largest_angles_deg(np.array(bases))
    rep = int(np.argmin(ang.max(axis=1)))
    a_max, b_max = np.unravel_index(int(np.argmax(ang)), ang.shape)
    widest = _principal_angles_deg(bases[a_max], bases[b_max])
    distinct: list[int] = []
    for a in range(k):
        if all(ang[a, b] > 1e-3 for b in distinct):
            distinct.append(a)
    noise = np.array(members) * sd ** 2
    max_angle = float(ang.max())
    lo, hi = noise.min(axis=0), noise.max(axis=0)
    # TODO(architecture): reader-facing prose (SolutionSpread.summary, part of FrischResult.summary
    # and results.json); it moves to analysis/findings with the report restructuring.
    rel = "relations" if q > 1 else "relation"
    if len(distinct) > 1:
        j = int(np.argmax((hi - lo) / np.diag(s)))
        summary = (f"Under diagonal noise, {q} {rel} among {n} variables are not pinned down: "
                   f"{k} solutions found within tolerance {eps:g} ({len(distinct)} distinct) have "
                   f"relation subspaces up to {max_angle:.3g} degrees apart; the noise variance of "
                   f"{nm[j]} ranges from {lo[j]:.3g} to {hi[j]:.3g}. "
                   + ("Any member of this family fits the data equally well." if not ident.count_met
                      else "Each of them fits the data equally well."))
    else:
        summary = (f"{k} solutions with {q} {rel} found within tolerance {eps:g} all give the same "
                   f"relation subspace (within 0.001 degrees)"
                   + ("" if ident.count_met else
                      ", although the parameter count does not guarantee uniqueness; the family "
                      "may be wider than this search found") + ".")
    return SolutionSpread(
        nm, q, eps, ident, k, len(distinct), bases[rep].T,
        tuple(float(v) for v in noise[rep]), max_angle, tuple(float(v) for v in widest),
        tuple(float(v) for v in ang[rep]), tuple(float(v) for v in lo),
        tuple(float(v) for v in hi), noise, starts, seed, summary)
