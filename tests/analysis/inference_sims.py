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


def coverage_design() -> tuple[np.ndarray, np.ndarray, float, float, float]:
    """The two windows' population covariances (relation turned 20 degrees) and the true smallest
    eigenvalue of the first, coefficient of x1 in its relation solved for x3, and largest angle."""
    from relspan.analysis.stability import principal_angles

    s1, a1 = one_relation_cov(0.0)
    s2, a2 = one_relation_cov(20.0)
    return (s1, s2, float(np.linalg.eigvalsh(s1)[0]), float(-a1[0] / a1[2]),
            float(principal_angles(a1, a2)[-1]))


def coverage(*, rho: float, t: int, datasets: int, resamples: int = 199, level: float = 0.90,
             seed: int = 2024, studentized: bool = False, widths: bool = False) -> dict[str, float]:
    """Share of simulated datasets whose nominal-``level`` intervals cover the truth.

    Per dataset: two windows of ``t`` rows, the relation turned by 20 degrees between them. Intervals:
    the smallest eigenvalue of window 1 (the pipeline's own
    :func:`relspan.analysis.inference.eigenvalue_intervals`: blockwise studentised for AR(1) rows,
    basic for iid rows), the normalised coefficient of x1 in the relation solved
    for x3 (percentile, reduced forms of the resampled bases) and the largest principal angle between the windows
    (basic, independent resamples of each window). Truth: the population covariance's values.

    ``studentized=True`` adds, from the same data and resamples: ``"eigenvalue (basic)"`` (the interval
    the pipeline showed before), the studentised intervals of
    :func:`relspan.analysis.resample.studentized_interval` (keys ending in ``" (studentized)"``, with
    the pipeline's resolution rule) and the same on the log scale for the eigenvalue and the angle
    (keys ending in ``" (log studentized)"``), and ``"eigenvalue (pipeline, log)"``. ``widths=True``
    (with ``studentized``) adds the median and the 95th percentile over datasets of the ratio of the
    studentised eigenvalue interval's width to the basic one's (``"width ratio (median)"``,
    ``"width ratio (p95)"``).
    """
    from relspan.analysis.inference import SE_RESOLUTION, eigenvalue_intervals
    from relspan.analysis.intervals import (angle_interval, coefficient_intervals, interval,
                                            largest_angle_stack, relation_bases)
    from relspan.analysis.resample import (GranuleStats, influence_sd, influence_values, resample_covariances,
                                           resample_influence_sd, statistic_gradient, studentized_interval)

    rng = np.random.default_rng(seed)
    s1, s2, true_eig, true_coef, true_angle = coverage_design()
    keys = ["eigenvalue", "coefficient", "angle"]
    if studentized:
        keys += ["eigenvalue (basic)", "eigenvalue (pipeline, log)", "eigenvalue (studentized)",
                 "coefficient (studentized)", "angle (studentized)", "eigenvalue (log studentized)",
                 "angle (log studentized)"]
    hits = dict.fromkeys(keys, 0)
    ratios = []

    def smallest(cov):
        return np.linalg.eigh(cov)[1][:, 0]

    def eig(cov):
        return np.linalg.eigvalsh(cov)[0]

    def coef(cov):
        v = smallest(cov)
        return -v[0] / v[2]

    def sd_pair(stats, res, f):
        u = influence_values(stats, statistic_gradient(f, res.estimate))
        return (influence_sd(u, stats.counts, ordered=stats.ordered),
                resample_influence_sd(u, stats.counts, res.draws, res.blocks))

    for _ in range(datasets):
        fits = []
        for cov in (s1, s2):
            x = rows(rng, cov, t, rho)
            st = GranuleStats.from_rows(x, ordered=rho != 0.0)
            r = resample_covariances(st, resamples=resamples, rng=rng, keep_draws=studentized or rho != 0.0)
            w, v = np.linalg.eigh(r.estimate)
            wb, vb = r.eigh()
            fits.append((w, v[:, :1].T, wb, relation_bases(vb, 1), st, r))
        (w, basis, wb, bases, st1, r1), (_, basis2, _, bases2, st2, r2) = fits
        e = eigenvalue_intervals(st1, r1, w, wb, scale="as given", level=level)[0][0]
        c = coefficient_intervals(basis, bases, targets=[2], level=level)[(0, 0)]
        est = float(largest_angle_stack(basis, basis2[None])[0])
        draws_a = largest_angle_stack(bases, bases2)
        a = angle_interval(est, bases, bases2, level=level, method="basic")
        got = {"eigenvalue": e.contains(true_eig), "coefficient": c.contains(true_coef),
               "angle": a.contains(true_angle)}
        if studentized:
            floor = SE_RESOLUTION * float(w[-1])
            eb = interval(float(w[0]), wb[:, 0], level=level, method="basic")
            got["eigenvalue (basic)"] = eb.contains(true_eig)
            got["eigenvalue (pipeline, log)"] = eigenvalue_intervals(st1, r1, w, wb, scale="as given", level=level,
                                                                     log=True)[0][0].contains(true_eig)
            se, se_b = sd_pair(st1, r1, eig)
            es = studentized_interval(float(w[0]), wb[:, 0], se, se_b, level=level, resolution=floor)
            got["eigenvalue (studentized)"] = es.contains(true_eig)
            ratios.append((es.high - es.low) / (eb.high - eb.low))
            got["eigenvalue (log studentized)"] = studentized_interval(
                float(w[0]), wb[:, 0], se, se_b, level=level, resolution=floor, log=True).contains(true_eig)
            sc, sc_b = sd_pair(st1, r1, coef)
            # the coefficient's draws: each resample's reduced form (sign-free for one relation)
            got["coefficient (studentized)"] = studentized_interval(
                c.estimate, -bases[:, 0, 0] / bases[:, 0, 2], sc, sc_b, level=level).contains(true_coef)
            v2 = basis2[0]

            def ang_a(cov):
                return largest_angle_stack(smallest(cov)[None], v2[None][None])[0]

            v1 = basis[0]

            def ang_b(cov):
                return largest_angle_stack(v1[None], smallest(cov)[None][None])[0]

            sa, sa_b = sd_pair(st1, r1, ang_a)
            sb, sb_b = sd_pair(st2, r2, ang_b)
            sab, sab_b = float(np.hypot(sa, sb)), np.hypot(sa_b, sb_b)
            got["angle (studentized)"] = studentized_interval(est, draws_a, sab, sab_b,
                                                              level=level).contains(true_angle)
            got["angle (log studentized)"] = studentized_interval(est, draws_a, sab, sab_b, level=level,
                                                                  log=True).contains(true_angle)
        for k, v in got.items():
            hits[k] += bool(v)
    out = {k: hits[k] / datasets for k in keys}
    if studentized and widths:
        r = np.asarray(ratios, dtype=float)
        r = np.where(np.isfinite(r), r, np.inf)
        out["width ratio (median)"] = float(np.median(r))
        out["width ratio (p95)"] = float(np.quantile(r, 0.95))
    return out
