"""The weighted minimum-trace problem, solved by our own log-barrier interior-point method.

``max w'd  s.t.  R - diag(d) PSD, d >= 0``. Newton steps on
``-t w'd - log det(R - D) - sum log d`` with gradient
``-t w + diag(W) - 1/d`` and Hessian ``W o W + diag(1/d^2)``
(``W = inv(R - D)``, ``o`` the elementwise product), a step limited to the
feasible region by the largest eigenvalue of ``L^-1 diag(dx) L^-T``, and
``t`` multiplied by a fixed factor until the barrier duality gap ``2n/t`` is
below tolerance. Centring that fails through rounding (``R - D`` singular to
working precision) falls back to the last centred iterate. Many weight
vectors are solved in lockstep on stacked arrays.

References
----------
.. [1] A. Shapiro, "Rank-reducibility of a symmetric matrix and sampling
       theory of minimum trace factor analysis", Psychometrika 47(2),
       187-199, 1982.
.. [2] G. Della Riccia and A. Shapiro, "Minimum rank and minimum trace of
       covariance matrices", Psychometrika 47(4), 443-448, 1982.
.. [3] S. Boyd and L. Vandenberghe, Convex Optimization, Cambridge
       University Press, 2004, ch. 11.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Sequence

import numpy as np

from relspan.analysis._export import fields_dict
from relspan.analysis.frisch._base import correlation, frisch_cov
from relspan.errors import OptionsError

__all__ = ["MinimumTrace", "minimum_trace"]

#: Relative duality gap of the minimum-trace solve inside the diagonal-noise analysis.
_MT_GAP = 1e-12


@dataclass(frozen=True, slots=True)
class MinimumTrace:
    """Solution of ``max w'd  s.t.  S - diag(d) PSD, d >= 0``.

    Attributes
    ----------
    noise_variances : (n,) ndarray
        The maximising ``d`` (strictly feasible: ``d > 0``, ``S - D`` PD).
    weights : (n,) ndarray
        The weights ``w`` (all ones for minimum-trace factor analysis).
    value : float
        ``w'd``.
    gap : float
        Duality gap ``2n/t`` of the final central-path point (scaled to the
        weights): the optimum exceeds ``value`` by about this much at most.
    min_eigenvalue : float
        Smallest eigenvalue of ``S - D`` (>= 0: feasibility).
    newton_steps : int
        Newton steps taken.
    """

    noise_variances: np.ndarray
    weights: np.ndarray
    value: float
    gap: float
    min_eigenvalue: float
    newton_steps: int

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready dict with sorted keys."""
        return fields_dict(self)


try:    # the gufuncs behind numpy.linalg, without its per-call checks (same LAPACK calls, same bits)
    from numpy.linalg import _umath_linalg as _ul

    def _cholesky_or_nan(m: np.ndarray) -> np.ndarray:
        """Lower Cholesky factors of a (B, n, n) stack; a matrix that is not positive definite gets NaNs."""
        return _ul.cholesky_lo(m, signature="d->d")

    def _inv_raw(m: np.ndarray) -> np.ndarray:
        return _ul.inv(m, signature="d->d")
    _RAW = True
except (ImportError, AttributeError):        # pragma: no cover - another numpy layout
    def _cholesky_or_nan(m: np.ndarray) -> np.ndarray:
        out = np.full(m.shape, np.nan)
        for b in range(m.shape[0]):
            try:
                out[b] = np.linalg.cholesky(m[b])
            except np.linalg.LinAlgError:
                pass
        return out

    _inv_raw = np.linalg.inv
    _RAW = False


def _not_positive_definite(err: str, flag: int) -> None:
    raise np.linalg.LinAlgError("Matrix is not positive definite")


def _singular(err: str, flag: int) -> None:
    raise np.linalg.LinAlgError("Singular matrix")


def _cholesky(m: np.ndarray) -> np.ndarray:
    """Lower Cholesky factors of a (B, n, n) stack; raises as :func:`numpy.linalg.cholesky` does."""
    with np.errstate(call=_not_positive_definite, invalid="call", over="ignore", divide="ignore",
                     under="ignore"):
        return _cholesky_or_nan(m)


def _inv_lower(lc: np.ndarray) -> np.ndarray:
    """Inverses of a stack of Cholesky factors; raises as :func:`numpy.linalg.inv` does."""
    with np.errstate(call=_singular, invalid="call", over="ignore", divide="ignore", under="ignore"):
        return _inv_raw(lc)


if not _RAW:                                 # pragma: no cover - another numpy layout
    _cholesky, _inv_lower = np.linalg.cholesky, np.linalg.inv


def _barrier_batch(r: np.ndarray, w: np.ndarray, *, gap_tol: Any = 1e-10, mu: float = 20.0,
                   max_newton: int = 400):
    """Log-barrier Newton method for ``max w_b'd s.t. R_b - diag(d) PD, d > 0``, many problems at once.

    ``r`` is one (n, n) positive definite matrix shared by every problem, or
    a (B, n, n) stack (one per problem); ``w`` is (B, n) (or (n,) with a
    stack: the same weights for all). ``gap_tol`` is one number or one per
    problem. All B problems run in lockstep on stacked arrays, and each
    takes exactly the iterates it would take alone: its Newton steps are
    counted on their own (``max_newton`` applies to each problem), a
    singular Newton system falls back to least squares for that problem
    only, and a problem that has centred waits (its step is zero, which
    leaves its iterate and Newton decrement unchanged) while the others go
    on. Returns ``(d, gap, steps)``: the solutions (B, n), central-path
    duality gaps ``2n/t`` (B,) and the Newton steps of each problem (B,).
    """
    r = np.asarray(r, dtype=float)
    n = r.shape[-1]
    w = np.asarray(w, dtype=float)
    if r.ndim == 3 and w.ndim == 1:
        w = np.broadcast_to(w, (r.shape[0], n))
    w = np.atleast_2d(w)
    nb = w.shape[0]
    rs = np.broadcast_to(r, (nb, n, n)) if r.ndim == 2 else r
    tol = np.broadcast_to(np.asarray(gap_tol, dtype=float), (nb,))
    wscale = np.max(np.abs(w), axis=1)
    w = np.where(wscale[:, None] > 0, w, 1.0)
    wscale = np.where(wscale > 0, wscale, 1.0)
    wn = w / wscale[:, None]
    if r.ndim == 2:
        bound = np.tile(1.0 / np.diag(np.linalg.inv(r)), (nb, 1))
    else:
        bound = 1.0 / np.diagonal(np.linalg.inv(rs), axis1=1, axis2=2)
    # one product per problem, so that its bits do not depend on the other problems
    aw = np.abs(wn)
    wd_scale = np.maximum(1.0, np.array([aw[b] @ bound[b] for b in range(nb)]))
    # sum_j d_j / bound_j <= 1 makes diag(d) a convex combination of matrices <= R.
    d = bound / (2.0 * n)
    t = np.ones(nb)
    eye = np.eye(n)
    if nb == 1:
        d1, t1, s1 = _barrier_one(rs[0], wn[0], d[0], float(tol[0]), float(wd_scale[0]), mu, max_newton)
        return d1[None, :], np.array([2.0 * n / t1 * wscale[0]]), np.array([s1])
    active = np.ones(nb, dtype=bool)
    good_d, good_t = d.copy(), t.copy()      # last well-centred iterate of each problem
    steps = np.zeros(nb, dtype=int)
    # The factorisation at each problem's current iterate, kept from the last Newton
    # iteration of a centring: the next centring (same iterate, larger t) starts from it
    # instead of factorising the same matrix again.
    c_lc, c_li, c_wm = np.empty((nb, n, n)), np.empty((nb, n, n)), np.empty((nb, n, n))
    c_ok = np.zeros(nb, dtype=bool)            # c_li, c_wm hold the current iterate's
    c_lc_ok = np.zeros(nb, dtype=bool)         # c_lc holds the current iterate's
    while True:
        active &= steps < max_newton
        if not active.any():
            break
        idx = np.flatnonzero(active)
        dd, tt, ww, rr = d[idx], t[idx], wn[idx], rs[idx]
        lam2 = np.full(idx.size, np.inf)
        waiting = np.zeros(idx.size, dtype=bool)   # centred in this round: counts no more steps
        taken = np.zeros(idx.size, dtype=int)
        cached = bool(c_ok[idx].all())
        # The Cholesky factor at each row's next iterate: the check of a full step and the
        # line search factorise exactly the matrix of the iterate they accept.
        lc_next = c_lc[idx] if c_lc_ok[idx].all() else None
        step = np.zeros(idx.size)
        for _ in range(40):
            if cached:
                lc, li, wm = c_lc[idx], c_li[idx], c_wm[idx]
                cached = False
            else:
                lc = _cholesky(rr - dd[:, :, None] * eye) if lc_next is None else lc_next
                li = _inv_lower(lc)
                wm = li.transpose(0, 2, 1) @ li
            g = -tt[:, None] * ww + wm.diagonal(axis1=1, axis2=2) - 1.0 / dd
            # Newton system scaled by diag(d): (d W d) o (d W d) + I is well conditioned
            # even when some d_j -> 0.
            h = dd[:, :, None] * (wm * wm) * dd[:, None, :] + eye
            rhs = (dd * g)[:, :, None]
            try:
                y = np.linalg.solve(h, rhs)[:, :, 0]
            except np.linalg.LinAlgError:
                y = np.zeros_like(dd)
                for b in range(dd.shape[0]):
                    try:
                        y[b] = np.linalg.solve(h[b:b + 1], rhs[b:b + 1])[0, :, 0]
                    except np.linalg.LinAlgError:
                        y[b] = np.linalg.lstsq(h[b], dd[b] * g[b], rcond=None)[0]
            dx = -dd * y
            lam2 = -(g * dx).sum(axis=1)
            finite = np.isfinite(lam2)
            if not finite.all():
                # (a finite lam2 implies a finite dx: any infinite or NaN term makes the sum so)
                bad = ~np.isfinite(dx).all(axis=1) | ~finite
                dx[bad] = 0.0
                lam2[bad] = 0.0
            taken += ~waiting
            done = lam2 <= 1e-8
            waiting |= done
            if done.all():
                step = np.zeros(idx.size)
                lc_next = lc
                break
            going = ~done
            # Inside the Dikin ellipsoid (lam2 < 1/4) the full Newton step is
            # feasible and converges quadratically (self-concordance).
            # Rounding can still break that when R - D is nearly singular, so
            # every full step is checked before it is taken.
            step = np.where(done, 0.0, 1.0)
            lc_next = lc.copy()                 # rows that do not move keep theirs
            quad = ((lam2 < 0.25) & going).nonzero()[0]
            full_ok = np.zeros(dd.shape[0], dtype=bool)
            if quad.size:
                dq = dd[quad] + dx[quad]
                with np.errstate(invalid="ignore"):
                    fq = _cholesky_or_nan(rr[quad] - dq[:, :, None] * eye)
                okq = ~np.isnan(fq[:, -1, -1]) & (dq > 0).all(axis=1)
                full_ok[quad] = okq
                lc_next[quad[okq]] = fq[okq]
            damp = (going & ~full_ok).nonzero()[0]
            if damp.size:
                lid, dxd, ddd, rd = li[damp], dx[damp], dd[damp], rr[damp]
                gm = (lid * dxd[:, None, :]) @ np.swapaxes(lid, 1, 2)
                emax = np.linalg.eigvalsh(gm)[:, -1]
                with np.errstate(divide="ignore"):
                    smax = np.where(emax > 0, 1.0 / emax, np.inf)
                    ratio = np.where(dxd < 0, -ddd / np.where(dxd < 0, dxd, -1.0), np.inf)
                smax = np.minimum(smax, ratio.min(axis=1))
                s = np.minimum(1.0, 0.95 * smax)
                tdd, wdd = tt[damp], ww[damp]
                f0 = (-tdd * np.sum(wdd * ddd, axis=1)
                      - 2.0 * np.sum(np.log(np.diagonal(lc[damp], axis1=1, axis2=2)), axis=1)
                      - np.sum(np.log(ddd), axis=1))
                todo = np.ones(damp.size, dtype=bool)
                for _ in range(50):
                    k = np.flatnonzero(todo)
                    dn = ddd[k] + s[k, None] * dxd[k]
                    with np.errstate(invalid="ignore", divide="ignore"):
                        # log det by a Cholesky factorisation, which also decides
                        # definiteness (a failed factorisation is all NaN)
                        fk = _cholesky_or_nan(rd[k] - dn[:, :, None] * eye)
                        ld = np.log(np.diagonal(fk, axis1=1, axis2=2))
                        ok = np.isfinite(ld).all(axis=1) & np.all(dn > 0, axis=1)
                        f1 = (-tdd[k] * np.sum(wdd[k] * dn, axis=1)
                              - 2.0 * np.sum(np.where(ok[:, None], ld, 0.0), axis=1)
                              - np.sum(np.log(np.where(ok[:, None], dn, 1.0)), axis=1))
                    ok &= f1 <= f0[k] - 0.01 * s[k] * lam2[damp][k]
                    todo[k[ok]] = False
                    lc_next[damp[k[ok]]] = fk[ok]
                    if not todo.any():
                        break
                    s[k[~ok]] *= 0.5
                s[todo] = 0.0
                step[damp] = s
            dd = dd + step[:, None] * dx
        # the last factorisation is still that of the iterate where no step was taken
        fresh = step == 0.0
        c_li[idx[fresh]], c_wm[idx[fresh]] = li[fresh], wm[fresh]
        c_ok[idx] = fresh
        c_lc[idx] = lc_next
        c_lc_ok[idx] = True
        steps[idx] += taken
        # Centring that has not converged goes on at the same t, except at large
        # t, where the cause is rounding (R - D singular to working precision):
        # such a problem falls back to its last centred iterate and stops.
        centred = lam2 <= 1e-6
        stuck = ~centred & (tt >= 1e8)
        d[idx] = np.where(stuck[:, None], good_d[idx], dd)
        c_ok[idx[stuck]] = False
        c_lc_ok[idx[stuck]] = False
        t[idx] = np.where(stuck, good_t[idx], tt)
        good_d[idx[centred]], good_t[idx[centred]] = dd[centred], tt[centred]
        value = np.abs(np.sum(ww * d[idx], axis=1))
        rel_gap = 2.0 * n / t[idx] / np.maximum(value, 1e-3 * wd_scale[idx])
        fin = stuck | (centred & ((rel_gap <= tol[idx]) | (t[idx] * mu > 1e13)))
        active[idx[fin]] = False
        grow = idx[centred & ~fin]
        t[grow] *= mu
    # On the central path the duality gap is exactly 2n/t (n from log det, n
    # from the bounds d > 0); rescale to the caller's weights.
    gap = 2.0 * n / t * wscale
    return d, gap, steps


def _barrier_one(r: np.ndarray, wn: np.ndarray, d: np.ndarray, tol: float, wd_scale: float, mu: float,
                 max_newton: int) -> tuple[np.ndarray, float, int]:
    """:func:`_barrier_batch` of one problem, without the bookkeeping of a stack.

    The same arithmetic on the same numbers in the same order (one row of
    the stack as a vector; tests/analysis/test_frisch_barrier.py checks the
    iterates bit for bit against the stacked form): a solve of one problem,
    the commonest case (every minimum-trace solve, every descent from one
    point), costs about half the Python-level work. ``wn`` are the scaled
    weights, ``d`` the start; returns ``(d, t, steps)``.
    """
    n = r.shape[0]
    eye = np.eye(n)
    t = 1.0
    good_d, good_t = d, t
    steps = 0
    cache = None                 # factorisation at ``d``, from the last iteration of a centring
    lc_next = None               # Cholesky factor at ``d`` (from the check of the step that led there)
    while steps < max_newton:
        dd, tt = d, t
        lam2 = np.inf
        taken = 0
        step = 0.0
        for _ in range(40):
            if cache is not None:
                lc, li, wm = cache
                cache = None
            else:
                lc = _cholesky((r - dd[:, None] * eye)[None])[0] if lc_next is None else lc_next
                li = _inv_lower(lc[None])[0]
                wm = (li.T[None] @ li[None])[0]
            g = -tt * wn + wm.diagonal() - 1.0 / dd
            h = dd[:, None] * (wm * wm) * dd[None, :] + eye
            rhs = dd * g
            try:
                y = np.linalg.solve(h[None], rhs[None, :, None])[0, :, 0]
            except np.linalg.LinAlgError:
                y = np.linalg.lstsq(h, dd * g, rcond=None)[0]
            dx = -dd * y
            lam2 = -(g * dx).sum()
            if not np.isfinite(lam2):
                dx = np.zeros(n)
                lam2 = 0.0
            taken += 1
            if lam2 <= 1e-8:
                step = 0.0
                lc_next = lc
                break
            step = 1.0
            full_ok = False
            lc_next = lc
            if lam2 < 0.25:
                dq = dd + dx
                with np.errstate(invalid="ignore"):
                    fq = _cholesky_or_nan((r - dq[:, None] * eye)[None])[0]
                full_ok = not np.isnan(fq[-1, -1]) and bool((dq > 0).all())
                if full_ok:
                    lc_next = fq
            if not full_ok:
                gm = (li[None] * dx[None, None, :]) @ li.T[None]
                emax = np.linalg.eigvalsh(gm)[0, -1]
                smax = 1.0 / emax if emax > 0 else np.inf
                neg = dx < 0
                if neg.any():
                    smax = min(smax, float((-dd[neg] / dx[neg]).min()))
                s = min(1.0, 0.95 * smax)
                f0 = (-tt * np.sum(wn * dd) - 2.0 * np.sum(np.log(lc.diagonal())) - np.sum(np.log(dd)))
                ok = False
                for _ in range(50):
                    dn = dd + s * dx
                    with np.errstate(invalid="ignore", divide="ignore"):
                        fk = _cholesky_or_nan((r - dn[:, None] * eye)[None])[0]
                        ld = np.log(fk.diagonal())
                    ok = bool(np.isfinite(ld).all()) and bool((dn > 0).all())
                    if ok:
                        f1 = -tt * np.sum(wn * dn) - 2.0 * np.sum(ld) - np.sum(np.log(dn))
                        ok = bool(f1 <= f0 - 0.01 * s * lam2)
                    if ok:
                        lc_next = fk
                        break
                    s *= 0.5
                step = s if ok else 0.0
            dd = dd + step * dx
        steps += taken
        centred = lam2 <= 1e-6
        stuck = not centred and tt >= 1e8
        if stuck:
            d, t = good_d, good_t
            lc_next = None
        else:
            d, t = dd, tt
            if step == 0.0:
                cache = (lc, li, wm)
        if centred:
            good_d, good_t = dd, tt
        value = abs(np.sum(wn * d))
        rel_gap = 2.0 * n / t / max(value, 1e-3 * wd_scale)
        if stuck or (centred and (rel_gap <= tol or t * mu > 1e13)):
            break
        if centred:
            t *= mu
    return d, t, steps


def _barrier_trace(r: np.ndarray, w: np.ndarray, *, gap_tol: float = 1e-10,
                   mu: float = 20.0) -> tuple[np.ndarray, float, int]:
    """One weighted trace problem (see :func:`_barrier_batch`)."""
    d, gap, steps = _barrier_batch(r, np.asarray(w, dtype=float)[None, :], gap_tol=gap_tol,
                                      mu=mu)
    return d[0], float(gap[0]), int(steps[0])


def _regularised(r: np.ndarray) -> np.ndarray:
    """``R`` shifted to be safely positive definite for the barrier."""
    lam_min = float(np.linalg.eigvalsh(r)[0])
    floor = 1e-11
    return r if lam_min >= floor else r + (floor - lam_min) * np.eye(r.shape[0])


def minimum_trace(cov: Any, *, weights: Sequence[float] | None = None,
                  tol: float = 1e-10) -> MinimumTrace:
    """Weighted minimum-trace factor analysis by a log-barrier interior-point method.

    Solves ``max w'd  subject to  S - diag(d) PSD, d >= 0`` on the scale it is
    given (with ``w = 1``: minimum-trace factor analysis, i.e. the largest
    total noise variance that leaves a PSD noise-free part).

    Parameters
    ----------
    cov : (n, n) array_like
        Symmetric positive semidefinite matrix.
    weights : sequence of float, optional
        ``w`` (default all ones); any signs are allowed.
    tol : float
        Relative duality-gap target.

    Returns
    -------
    MinimumTrace

    References
    ----------
    .. [1] A. Shapiro, "Rank-reducibility of a symmetric matrix and sampling
           theory of minimum trace factor analysis", Psychometrika 47(2), 1982.
    .. [2] G. Della Riccia and A. Shapiro, "Minimum rank and minimum trace of
           covariance matrices", Psychometrika 47(4), 1982.
    .. [3] S. Boyd and L. Vandenberghe, Convex Optimization, 2004, ch. 11.

    Examples
    --------
    >>> import numpy as np
    >>> S = np.array([[4.0, 2.0, 1.0], [2.0, 3.0, 1.0], [1.0, 1.0, 2.0]])
    >>> mt = minimum_trace(S)
    >>> np.round(mt.noise_variances, 3).tolist(), round(mt.value, 3)
    ([2.0, 1.0, 1.5], 4.5)
    >>> mt.min_eigenvalue > -1e-9   # S - diag(d) stays positive semidefinite
    True
    """
    s, _ = frisch_cov(cov, None)
    n = s.shape[0]
    w = np.ones(n) if weights is None else np.asarray(weights, dtype=float)
    if w.shape != (n,) or not np.all(np.isfinite(w)):
        raise OptionsError(f"weights must be {n} finite numbers; got shape {w.shape}.",
                           key="weights", fix="pass one weight per variable.")
    r, sd = correlation(s)
    # Solve on the correlation scale (better conditioned): w'd = (w s^2)'d_R.
    wr = w * sd ** 2
    dr, gap, steps = _barrier_trace(_regularised(r), wr, gap_tol=tol)
    d = dr * sd ** 2
    lam_min = float(np.linalg.eigvalsh(s - np.diag(d))[0])
    return MinimumTrace(d, w.copy(), float(w @ d), gap, lam_min, steps)
