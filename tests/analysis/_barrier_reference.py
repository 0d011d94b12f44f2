"""The log-barrier solver of the weighted trace problems as it was at commit 055e2ee (test reference only).

Kept verbatim (its docstrings shortened) so that tests/analysis/test_frisch_barrier.py can check
that the faster solver in relspan.analysis.frisch.mintrace takes the same iterates, bit for bit.
"""

from __future__ import annotations

from typing import Any

import numpy as np


def _positive_definite(m: np.ndarray) -> np.ndarray:
    """Per matrix of a (B, n, n) stack: does its Cholesky factorisation exist (positive definite)?

    One batched factorisation; only when one of them fails, each alone.
    """
    try:
        np.linalg.cholesky(m)
        return np.ones(m.shape[0], dtype=bool)
    except np.linalg.LinAlgError:
        pass
    ok = np.zeros(m.shape[0], dtype=bool)
    for b in range(m.shape[0]):
        try:
            np.linalg.cholesky(m[b])
            ok[b] = True
        except np.linalg.LinAlgError:
            pass
    return ok


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
    active = np.ones(nb, dtype=bool)
    good_d, good_t = d.copy(), t.copy()      # last well-centred iterate of each problem
    steps = np.zeros(nb, dtype=int)
    while True:
        active &= steps < max_newton
        if not active.any():
            break
        idx = np.flatnonzero(active)
        dd, tt, ww, rr = d[idx], t[idx], wn[idx], rs[idx]
        lam2 = np.full(idx.size, np.inf)
        waiting = np.zeros(idx.size, dtype=bool)   # centred in this round: counts no more steps
        taken = np.zeros(idx.size, dtype=int)
        for _ in range(40):
            m = rr - dd[:, :, None] * eye
            lc = np.linalg.cholesky(m)
            li = np.linalg.inv(lc)
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
                break
            going = ~done
            # Inside the Dikin ellipsoid (lam2 < 1/4) the full Newton step is
            # feasible and converges quadratically (self-concordance).
            # Rounding can still break that when R - D is nearly singular, so
            # every full step is checked before it is taken.
            step = np.where(done, 0.0, 1.0)
            quad = ((lam2 < 0.25) & going).nonzero()[0]
            full_ok = np.zeros(dd.shape[0], dtype=bool)
            if quad.size:
                dq = dd[quad] + dx[quad]
                full_ok[quad] = _positive_definite(rr[quad] - dq[:, :, None] * eye) & (dq > 0).all(axis=1)
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
                    ev = np.linalg.eigvalsh(rd[k] - dn[:, :, None] * eye)
                    ok = (ev[:, 0] > 0) & np.all(dn > 0, axis=1)
                    with np.errstate(invalid="ignore", divide="ignore"):
                        f1 = (-tdd[k] * np.sum(wdd[k] * dn, axis=1)
                              - np.sum(np.log(np.where(ok[:, None], ev, 1.0)), axis=1)
                              - np.sum(np.log(np.where(ok[:, None], dn, 1.0)), axis=1))
                    ok &= f1 <= f0[k] - 0.01 * s[k] * lam2[damp][k]
                    todo[k[ok]] = False
                    if not todo.any():
                        break
                    s[k[~ok]] *= 0.5
                s[todo] = 0.0
                step[damp] = s
            dd = dd + step[:, None] * dx
        steps[idx] += taken
        # Centring that has not converged goes on at the same t, except at large
        # t, where the cause is rounding (R - D singular to working precision):
        # such a problem falls back to its last centred iterate and stops.
        centred = lam2 <= 1e-6
        stuck = ~centred & (tt >= 1e8)
        d[idx] = np.where(stuck[:, None], good_d[idx], dd)
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
