"""Minimum-rank search on a correlation matrix (private): ten Berge & Kiers iterations.

The sum of the ``q`` smallest eigenvalues of ``R - D`` is concave in ``d``;
replacing it by its linearisation at the current eigenvectors ``V`` gives the
weighted trace problem with weights ``w_j = sum_k V[j, k]^2``
(:mod:`relspan.analysis.frisch.mintrace`), whose solution never increases the
objective. Also the existence check of a corank-q certificate and walks along
a family of corank-q solutions.

References
----------
.. [1] J. M. F. ten Berge and H. A. L. Kiers, "A numerical approach to the
       approximate and the exact minimum rank of a covariance matrix",
       Psychometrika 56(2), 309-315, 1991.
.. [2] L. Ning, T. T. Georgiou, A. Tannenbaum and S. P. Boyd, "Linear models
       based on noisy data and the Frisch scheme", SIAM Review 57(2),
       167-197, 2015.
"""

from __future__ import annotations

import numpy as np

from relspan.analysis.frisch.mintrace import _barrier_batch, _regularised

__all__: list[str] = []


def _e_norm(lam: np.ndarray, q: int) -> float:
    """``||E||_2`` for the split of ``R - D``'s spectrum at ``q``."""
    parts = [np.abs(lam[:q])]
    if np.any(lam[q:] < 0):
        parts.append(np.abs(lam[q:][lam[q:] < 0]))
    return float(np.max(np.concatenate(parts)))


def _relations_back(vecs: np.ndarray, sd: np.ndarray) -> np.ndarray:
    """Relation vectors on the correlation scale (columns) -> orthonormal rows, covariance scale."""
    a = (vecs / sd[:, None])
    qm, _ = np.linalg.qr(a)
    return qm.T


class _Searcher:
    """Minimum-rank search on one correlation matrix (private; holds no results).

    Weighted trace problems are solved at two precisions: a coarse relative
    gap (1e-3) while the ten Berge & Kiers iteration is far from converged,
    and a fine one (``1e-3 eps``, between 1e-10 and 1e-7) once a run's
    ``lambda_q`` is within reach of ``eps``. The barrier leaves ``R - D``
    about ``gap`` inside the feasible set, so the fine phase is what makes
    small ``eps`` certifiable.
    """

    def __init__(self, r: np.ndarray, eps: float, *, certify: tuple[np.ndarray, float] | None = None) -> None:
        # certify: the matrix and tolerance a point must pass to count (default: r, eps); the
        # search on R + eps I (R - D indefinite) certifies on R at eps.
        self.cert_r, self.cert_eps = (r, eps) if certify is None else certify
        self.r = r
        self.rb = _regularised(r)
        self.eps = eps
        self.gap = max(1e-10, min(1e-7, 1e-3 * eps))
        self.gap_coarse = max(self.gap, 1e-3)
        self.bound = 1.0 / np.diag(np.linalg.inv(self.rb))

    @classmethod
    def indefinite(cls, r: np.ndarray, eps: float) -> "_Searcher":
        """The search on ``R + eps I`` with target ``2 eps``: certificates whose ``R - D`` is indefinite.

        ``d >= 0`` certifies corank ``q`` within ``eps`` (``|lambda_1..q(R - D)| <= eps``,
        no eigenvalue below ``-eps``) exactly when ``R + eps I - D`` is positive
        semidefinite with ``lambda_q <= 2 eps``.
        """
        return cls(r + eps * np.eye(r.shape[0]), 2.0 * eps, certify=(r, eps))

    def solve(self, w: np.ndarray, gap: float | np.ndarray | None = None) -> np.ndarray:
        """Weighted trace problems, one per row of ``w`` (``gap``: one target, or one per row)."""
        d, _, _ = _barrier_batch(self.rb, w, gap_tol=self.gap if gap is None else gap)
        return d

    def random_starts(self, rng: np.random.Generator, k: int) -> np.ndarray:
        """``k`` random feasible noise vectors (rows): ``sum_j d_j / bound_j < 1``."""
        n = self.r.shape[0]
        v = rng.dirichlet(np.ones(n), size=k) * rng.uniform(0.5, 1.0, size=(k, 1))
        return v * self.bound

    def tangent(self, q: int, d: np.ndarray) -> np.ndarray:
        """Orthonormal basis (columns) of directions keeping corank ``q`` to first order.

        With ``V`` the eigenvectors of the ``q`` zero eigenvalues of
        ``R - D``, a change ``delta`` of ``d`` keeps them zero to first order
        iff ``sum_j delta_j v_j v_j^T = 0`` (``v_j`` row ``j`` of ``V``):
        ``q (q + 1) / 2`` linear conditions.
        """
        n = d.shape[0]
        _, vec = np.linalg.eigh(self.r - np.diag(d))
        v = vec[:, :q]
        iu = np.triu_indices(q)
        a = np.stack([np.outer(v[j], v[j])[iu] for j in range(n)], axis=1)
        _, sv, vt = np.linalg.svd(a)
        rank = int(np.sum(sv > 1e-10 * max(sv[0], 1e-300)))
        return vt[rank:].T

    def _tangent_steps(self, q: int, d: np.ndarray, directions: np.ndarray) -> np.ndarray:
        """Each row of ``directions`` projected on the tangent space at the matching row of ``d``.

        The stacked form of :meth:`tangent` (one batched ``eigh`` and SVD for
        all walkers): rows of zeros where the tangent space is trivial.
        """
        k, n = d.shape
        _, vec = np.linalg.eigh(self.r[None] - d[:, :, None] * np.eye(n))
        v = vec[:, :, :q]
        iu = np.triu_indices(q)
        a = np.swapaxes((v[:, :, :, None] * v[:, :, None, :])[:, :, iu[0], iu[1]], 1, 2)
        _, sv, vt = np.linalg.svd(a, full_matrices=True)
        out = np.zeros((k, n))
        for b in range(k):
            rank = int(np.sum(sv[b] > 1e-10 * max(sv[b][0], 1e-300)))
            t = vt[b, rank:].T
            if t.size:
                out[b] = t @ (t.T @ directions[b])
        return out

    def walk(self, q: int, d0: np.ndarray, directions: np.ndarray, *, steps: int = 6,
             h0: float = 0.02) -> list[np.ndarray]:
        """Walk along the corank-q family from ``d0``, one walker per direction.

        Each step moves ``h`` (doubling from ``h0``, correlation scale) along
        the direction projected on the tangent space, then returns to the
        family by ten Berge & Kiers iterations. A walker stops at its first
        step that does not end on a certified member (the family's edge:
        some ``d_j`` reaches 0 or ``R - D`` loses definiteness) after one
        halving. Returns every certified point visited.
        """
        k, n = directions.shape
        cur = np.tile(d0, (k, 1))
        alive = np.ones(k, dtype=bool)
        h = np.full(k, h0)
        found: list[np.ndarray] = []
        for _ in range(steps):
            idx = np.flatnonzero(alive)
            if idx.size == 0:
                break
            p = self._tangent_steps(q, cur[idx], directions[idx])
            norm = np.linalg.norm(p, axis=1)
            moving = norm >= 1e-8
            p = np.where(moving[:, None], p / np.where(moving, norm, 1.0)[:, None], 0.0)
            trial = np.clip(cur[idx] + h[idx, None] * p, 0.0, None)
            alive[idx[~moving]] = False
            new, _ = self.descend(q, trial, max_iter=5)
            for m, b in enumerate(idx):
                if not moving[m]:
                    continue
                ok, _, _ = _certify(self.cert_r, new[m], q, self.cert_eps)
                if ok and np.linalg.norm(new[m] - cur[b]) > 1e-9:
                    cur[b] = new[m]
                    found.append(new[m].copy())
                    h[b] *= 2.0
                elif h[b] > h0:
                    h[b] *= 0.25          # retry once with half the last good step
                else:
                    alive[b] = False
        return found

    def descend(self, q: int, d0: np.ndarray, *, max_iter: int,
                stop_on_first: bool = False) -> tuple[np.ndarray, int]:
        """ten Berge & Kiers iterations from each row of ``d0``, in lockstep.

        A run stops when its ``lambda_q(R - D)`` is below ``eps / 100``, when
        the sum of its ``q`` smallest eigenvalues stalls (decrease below 0.1 %
        of its value) in the fine phase, or after ``max_iter`` iterations. A
        run that stalls in the coarse phase moves to the fine phase if its
        ``lambda_q`` is within ``eps + 10 gap_coarse``, else stops. With
        ``stop_on_first``, all runs stop once one reaches the target.
        Returns ``(d, solves)``.
        """
        return _descend_many([(self, d0)], q, max_iter=max_iter, stop_on_first=stop_on_first)[0]


def _descend_many(requests: list[tuple["_Searcher", np.ndarray]], q: int, *, max_iter: int,
                  stop_on_first: bool) -> list[tuple[np.ndarray, int]]:
    """:meth:`_Searcher.descend` of many searchers (matrices) in lockstep, each as if alone.

    ``requests`` holds ``(searcher, d0)`` pairs; every row of every ``d0``
    runs the same iterations as in ``searcher.descend(q, d0, ...)`` (the
    eigendecompositions and the weighted trace problems of all rows are
    stacked; each problem of a stack takes exactly its own iterates), and
    ``stop_on_first`` stops the rows of one request together. Returns one
    ``(d, solves)`` per request.
    """
    d = np.vstack([np.atleast_2d(np.asarray(d0, dtype=float)) for _, d0 in requests])
    sizes = [np.atleast_2d(d0).shape[0] for _, d0 in requests]
    grp = np.repeat(np.arange(len(requests)), sizes)
    nb, n = d.shape
    r = np.stack([requests[g][0].r for g in grp])
    rb = np.stack([requests[g][0].rb for g in grp])
    eps = np.array([requests[g][0].eps for g in grp])
    gap = np.array([requests[g][0].gap for g in grp])
    gap_coarse = np.array([requests[g][0].gap_coarse for g in grp])
    target = 0.01 * eps
    f_old = np.full(nb, np.inf)
    active = np.ones(nb, dtype=bool)
    fine = np.zeros(nb, dtype=bool)
    solves = np.zeros(len(requests), dtype=int)
    eye = np.eye(n)
    for _ in range(max_iter):
        idx = np.flatnonzero(active)
        if idx.size == 0:
            break
        lam, vec = np.linalg.eigh(r[idx] - d[idx][:, :, None] * eye)
        f = lam[:, :q].sum(axis=1)
        reached = (np.max(np.abs(lam[:, :q]), axis=1) <= target[idx]) & (lam[:, 0] >= -target[idx])
        stop = reached.copy()
        stalled = f_old[idx] - f <= np.maximum(1e-10 * np.maximum(1.0, np.abs(f)), 1e-3 * f)
        promote = stalled & ~fine[idx] & ~reached & (
            lam[:, q - 1] <= eps[idx] + 10.0 * gap_coarse[idx])
        stop |= stalled & ~promote
        fine[idx[promote]] = True
        f_old[idx] = np.where(promote, np.inf, f)
        if stop_on_first and reached.any():
            stop |= np.isin(grp[idx], grp[idx[reached]])    # that request's rows stop, as alone
        active[idx[stop]] = False
        keep = ~stop
        if not keep.any():
            continue
        w = np.sum(vec[keep][:, :, :q] ** 2, axis=2)
        rows = idx[keep]
        d[rows], _, _ = _barrier_batch(rb[rows], w, gap_tol=np.where(fine[rows], gap[rows], gap_coarse[rows]))
        np.add.at(solves, grp[rows], 1)
    out, start = [], 0
    for g, k in enumerate(sizes):
        out.append((d[start:start + k], int(solves[g])))
        start += k
    return out


def _certify(r: np.ndarray, d: np.ndarray, q: int, eps: float) -> tuple[bool, np.ndarray, float]:
    lam = np.linalg.eigvalsh(r - np.diag(d))
    en = _e_norm(lam, q)
    return bool(np.all(d >= 0) and en <= eps), lam, en
