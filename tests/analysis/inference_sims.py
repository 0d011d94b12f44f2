"""Simulated datasets of known structure for the inference tests (seeded; truth computed exactly)."""

from __future__ import annotations

import numpy as np


def one_relation_cov(theta_deg: float, noise: float = 0.3) -> tuple[np.ndarray, np.ndarray]:
    """Population covariance of 3 variables with one relation ``a`` (unit) plus equal noise, and ``a``.

    ``a`` is ``(cos t, sin t, -1)`` normalised: turning ``theta_deg`` turns the relation.
    """
    t = np.radians(theta_deg)
    a = np.array([np.cos(t), np.sin(t), -1.0])
    a /= np.linalg.norm(a)
    basis = np.linalg.svd(np.eye(3) - np.outer(a, a))[0][:, :2]
    return basis @ np.diag([3.0, 1.5]) @ basis.T + noise * np.eye(3), a


def rows(rng: np.random.Generator, cov: np.ndarray, t: int, rho: float = 0.0) -> np.ndarray:
    """``t`` Gaussian rows with covariance ``cov``; AR(1) with coefficient ``rho`` in every component."""
    e = rng.normal(size=(t, cov.shape[0])) @ np.linalg.cholesky(cov).T
    if rho == 0.0:
        return e
    from scipy.signal import lfilter
    e[1:] *= np.sqrt(1.0 - rho**2)  # stationary from the first row: var(x_t) = var(e_0) = cov
    return lfilter([1.0], [1.0, -rho], e, axis=0)


def coverage(*, rho: float, t: int, datasets: int, resamples: int = 199, level: float = 0.90,
             seed: int = 2024) -> dict[str, float]:
    """Share of simulated datasets whose nominal-``level`` intervals cover the truth.

    Per dataset: two windows of ``t`` rows, the relation turned by 20 degrees between them. Intervals:
    the smallest eigenvalue of window 1 (basic), the normalised coefficient of x1 in the relation solved
    for x3 (percentile, Procrustes-aligned bases) and the largest principal angle between the windows
    (basic, independent resamples of each window). Truth: the population covariance's values.
    """
    from relspan.analysis.intervals import (angle_interval, coefficient_intervals, interval,
                                            largest_angle_stack, relation_bases)
    from relspan.analysis.resample import GranuleStats, resample_covariances
    from relspan.analysis.stability import principal_angles

    rng = np.random.default_rng(seed)
    s1, a1 = one_relation_cov(0.0)
    s2, a2 = one_relation_cov(20.0)
    true_eig = float(np.linalg.eigvalsh(s1)[0])
    true_coef = float(-a1[0] / a1[2])
    true_angle = float(principal_angles(a1, a2)[-1])
    hits = np.zeros(3)
    for _ in range(datasets):
        fits = []
        for cov in (s1, s2):
            x = rows(rng, cov, t, rho)
            r = resample_covariances(GranuleStats.from_rows(x, ordered=rho != 0.0), resamples=resamples, rng=rng)
            w, v = np.linalg.eigh(r.estimate)
            wb, vb = r.eigh()
            fits.append((w, v[:, :1].T, wb, relation_bases(vb, 1)))
        (w, basis, wb, bases), (_, basis2, _, bases2) = fits
        e = interval(float(w[0]), wb[:, 0], level=level, method="basic")
        c = coefficient_intervals(basis, bases, targets=[2], level=level)[(0, 0)]
        est = float(largest_angle_stack(basis, basis2[None])[0])
        a = angle_interval(est, bases, bases2, level=level, method="basic")
        hits += [e.contains(true_eig), c.contains(true_coef), a.contains(true_angle)]
    share = hits / datasets
    return {"eigenvalue": float(share[0]), "coefficient": float(share[1]), "angle": float(share[2])}
