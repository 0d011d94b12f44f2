"""Breaks in the relation subspace at unknown dates: a sup-type fit scan with resampled critical values.

Everything is computed on one common scale for the whole sample: each
variable divided by its full-sample standard deviation when the analysis
uses correlation scales (a relative tolerance), the data's own units when it
uses them. For every candidate date (granule boundary) between the first and
last ``trim`` share of the rows, with ``C_b`` and ``C_a`` the co-moment
matrices (about each side's own mean) before and after the date,

    S_1 = sum of the q smallest eigenvalues of C_b + same of C_a
          (the misfit of separate q-dimensional relation subspaces),
    S_0 = sum of the q smallest eigenvalues of C_b + C_a
          (the misfit of one common subspace; the means may differ),
    LR  = T log(S_0 / S_1).

``S`` is the total-least-squares residual sum of squares (Eckart & Young
1936), so ``LR`` is the likelihood-ratio form ``T log(RSS_0 / RSS_1)`` of
the equal-noise model with one noise variance, the orthogonal-regression
analogue of the Quandt-Andrews sup-LR statistic (Andrews 1993). The scan
statistic is the supremum over dates. A relation that fits well on each
side but not across makes ``S_0`` much larger than ``S_1``; a well-fitting
relation that merely turns a little makes it a little larger.

Critical values come from a bootstrap that reproduces "no change" (a
restricted bootstrap): at the most likely date, each side's granules are
turned about their own mean by the direct rotation (Davis & Kahan 1970)
that carries the side's relation subspace onto the common one (fitted to
``C_b + C_a``), and moved to the overall mean. The turned sequence has one
relation subspace and one level throughout, with each granule's misfit kept
at its size; its granules are drawn independently with replacement and the
scan is rerun on each resample. The p-value is
``(1 + #{sup* >= sup}) / (1 + B)``.

Serial dependence: the statistic is driven by the partial sums of the
units' scores, the products of the misfit (coordinates in the common
relation subspace) with the coordinates in its complement (Andrews 1993);
dependence inflates their variance by the long-run ratio
``tr(Gamma_0^{-1} Omega) / p``, by which the observed statistic of
time-ordered rows is divided, as the sup-Wald statistic uses a long-run
covariance, before it is compared with the resamples (which carry no
dependence). ``Omega`` is estimated after prewhitening each score series by
an AR(1) filter (Andrews & Monahan 1992; :func:`prewhitened_long_run_ratio`),
the residuals' long-run covariance by the flat-top lag window with the
bandwidth of Politis (2003) (:func:`long_run_ratio`). Measured on 3 series
of 300 AR(1) rows (coefficient 0.5, 5% level, benchmarks/break_scan_checks.py,
docs/inference.md): the lag window alone gave 10-12% false alarms, the
prewhitened ratio brings them near the level. A block bootstrap of the
turned sample (stationary or moving blocks, automatic length) was measured
beside it and gave 14-18%: with the automatic length on the scores (3.4
units on average) its resamples carry too little of the dependence.

Several breaks (Bai 1997; Bai & Perron 1998, sequential procedure): after a
break is found, every segment between the breaks found so far is scanned
the same way (candidate dates leave at least the trimmed share of the whole
sample on each side, so a segment shorter than twice that is not tested),
each with its own turned resamples; with ``l`` breaks found each of the
``l + 1`` segments is tested at the quantile ``level ** (1 / (l + 1))``
(Sidak 1967), so that a further false break is declared with chance about
``1 - level`` when the segments hold none; the segment with the smallest
p-value among those above their critical value gets the next break, up to
:data:`MAX_BREAKS`.

When a break is found, its date is the most likely one between its
neighbouring breaks (or the sample's ends: the refinement of Bai 1997), and
its interval is the percentile interval of that date over resamples drawn
separately on each side, between the neighbours, of the data as observed
(stationary bootstrap, Politis & Romano 1994, blocks by the automatic rule
of Politis & White 2004 with the Patton, Politis & White 2009 correction,
applied to the scores; iid for unordered rows); the angle reported is the
largest principal angle (Björck & Golub 1973) between the subspaces of the
two neighbouring segments on the common scale.

References
----------
.. [1] D. W. K. Andrews, "Tests for parameter instability and structural
       change with unknown change point", Econometrica 61(4), 821-856, 1993.
.. [2] J. Bai and P. Perron, "Estimating and testing linear models with
       multiple structural changes", Econometrica 66(1), 47-78, 1998.
.. [3] D. N. Politis and J. P. Romano, "The stationary bootstrap", JASA
       89(428), 1303-1313, 1994.
.. [4] D. N. Politis and H. White, "Automatic block-length selection for the
       dependent bootstrap", Econometric Reviews 23(1), 53-70, 2004; A. Patton,
       D. N. Politis and H. White, correction, 28(4), 372-375, 2009.
.. [5] C. Davis and W. M. Kahan, "The rotation of eigenvectors by a
       perturbation. III", SIAM J. Numer. Anal. 7(1), 1-46, 1970.
.. [6] C. Eckart and G. Young, "The approximation of one matrix by another
       of lower rank", Psychometrika 1(3), 211-218, 1936.
.. [7] Å. Björck and G. H. Golub, "Numerical methods for computing angles
       between linear subspaces", Mathematics of Computation 27(123),
       579-594, 1973.
.. [8] D. N. Politis, "Adaptive bandwidth choice", Journal of Nonparametric
       Statistics 15(4-5), 517-533, 2003.
.. [9] D. W. K. Andrews and J. C. Monahan, "An improved heteroskedasticity and
       autocorrelation consistent covariance matrix estimator", Econometrica
       60(4), 953-966, 1992.
.. [10] J. Bai, "Estimating multiple breaks one at a time", Econometric Theory
        13(3), 315-352, 1997.
.. [11] Z. Šidák, "Rectangular confidence regions for the means of
        multivariate normal distributions", JASA 62(318), 626-633, 1967.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from relspan.analysis._common import jsonable
from relspan.analysis.intervals import direct_rotation, largest_angle_stack
from relspan.analysis.resample import (GranuleStats, _flat_top, draw_granules, merge_weighted,
                                       politis_white_block_length, scale_stack)
from relspan.errors import OptionsError

__all__ = ["BreakScan", "BreakDate", "DatasetBreak", "subspace_break_scan", "long_run_ratio",
           "prewhitened_long_run_ratio", "DEFAULT_TRIM", "MAX_SCAN_UNITS", "MAX_BREAKS"]

#: share of the sample excluded at each end (Andrews 1993 uses 0.15)
DEFAULT_TRIM = 0.15
#: granules are merged into at most this many consecutive units before scanning (bounds cost)
MAX_SCAN_UNITS = 400
#: most breaks reported: with 15% trimming at most six segments of 15% fit (Bai & Perron 1998 bound the
#: number of breaks by the trimming in the same way)
MAX_BREAKS = 5


@dataclass(frozen=True, slots=True)
class BreakDate:
    """One break found by the scan.

    Attributes
    ----------
    split_row : int
        0-based position of the first row after the break (the most likely
        date between the neighbouring breaks, or the sample's ends).
    split_interval : tuple of int
        Percentile interval of ``split_row`` over resamples drawn separately on
        each side (between the neighbouring breaks).
    angle_deg : float
        Largest principal angle between the relation subspaces of the two
        neighbouring segments, on the common scale.
    statistic, critical_value, p_value : float
        The test that found it: the statistic of its segment (divided by the
        long-run ratio), the critical value at ``level`` and the p-value.
    level : float
        The quantile it was tested at: the scan's level for the whole sample,
        the Sidak share of it for a further break.
    segment : tuple of int
        Rows ``[first, end)`` of the segment that test scanned.
    step : int
        1 for the whole-sample test, 2 for the first further break, ...
    long_run_ratio : float
        The divisor of that test's statistic.
    block_length : float
        Mean block length (units) of the date's interval resamples (1 for iid).
    """

    split_row: int
    split_interval: tuple[int, int]
    angle_deg: float
    statistic: float
    critical_value: float
    p_value: float
    level: float
    segment: tuple[int, int]
    step: int
    long_run_ratio: float
    block_length: float

    def to_dict(self) -> dict:
        return jsonable({"split_row": self.split_row, "split_interval": list(self.split_interval),
                         "angle_deg": self.angle_deg, "statistic": self.statistic,
                         "critical_value": self.critical_value, "p_value": self.p_value, "level": self.level,
                         "segment": list(self.segment), "step": self.step,
                         "long_run_ratio": self.long_run_ratio, "block_length": self.block_length})


@dataclass(frozen=True, slots=True)
class BreakScan:
    """Result of the scan for one break in the relation subspace.

    Attributes
    ----------
    q : int
        Dimension of the relation subspace compared.
    statistic : float
        ``sup`` over candidate dates of ``T log(S_0 / S_1)`` (misfit of one
        common subspace over the misfit of separate ones; module notes).
    critical_value : float
        The ``floor((1 - level)(B + 1))``-th largest of the ``B`` statistics of
        the restricted-bootstrap resamples (one relation subspace throughout):
        the statistic exceeds it exactly when ``p_value <= 1 - level``.
    p_value : float
    level : float
    found : bool
        ``statistic > critical_value``: at least one break.
    split_row : int
        0-based position of the first row after the whole sample's most likely
        date (when found: that break's date, re-estimated between its
        neighbouring breaks, as in ``dates``).
    split_interval : tuple of int
        Percentile interval (at ``level``) of the split row from the date bootstrap;
        ``(split_row, split_row)`` when no break is found.
    angle_deg : float
        Largest principal angle between before and after at that date, on the
        common scale.
    trim : float
    candidates : int
        Dates scanned.
    resamples : int
    scheme : str
        ``"stationary"`` (time-ordered rows) or ``"iid"``: how the two
        segments are resampled for the date's interval.
    block_length : float
        Mean block length in scan units for the date's interval (1 for iid),
        from the scores (module notes).
    long_run_ratio : float
        The statistic's divisor for serial dependence (1 for unordered rows;
        :func:`long_run_ratio`).
    rule : str
    dates : tuple of BreakDate
        Every break found, in time order (empty when none).
    max_breaks : int
        Most breaks looked for.
    further_tests : int
        Segment tests run after the whole-sample one.
    min_segment_rows : int
        Fewest rows a candidate date leaves on either side.
    segments : tuple of (int, int, float)
        The segments the breaks leave: rows ``[first, end)`` and the p-value of
        the last test of that segment (NaN when it was too short to test, or
        when the search stopped at ``max_breaks``).
    segment_level : float
        The quantile the last round tested each segment at (``level`` when no
        break was found; NaN when the search stopped at ``max_breaks``).
    """

    q: int
    statistic: float
    critical_value: float
    p_value: float
    level: float
    found: bool
    split_row: int
    split_interval: tuple[int, int]
    angle_deg: float
    trim: float
    candidates: int
    resamples: int
    scheme: str
    block_length: float
    long_run_ratio: float
    rule: str
    dates: tuple[BreakDate, ...] = ()
    max_breaks: int = 1
    further_tests: int = 0
    min_segment_rows: int = 0
    segments: tuple[tuple[int, int, float], ...] = ()
    segment_level: float = math.nan

    def to_dict(self) -> dict:
        return jsonable({"dates": [x.to_dict() for x in self.dates], "max_breaks": self.max_breaks,
                         "further_tests": self.further_tests, "min_segment_rows": self.min_segment_rows,
                         "segments": [list(x) for x in self.segments], "segment_level": self.segment_level,
                         "q": self.q, "statistic": self.statistic, "critical_value": self.critical_value,
                         "p_value": self.p_value, "level": self.level, "found": self.found,
                         "split_row": self.split_row, "split_interval": list(self.split_interval),
                         "angle_deg": self.angle_deg, "trim": self.trim, "candidates": self.candidates,
                         "resamples": self.resamples, "scheme": self.scheme,
                         "block_length": self.block_length, "long_run_ratio": self.long_run_ratio,
                         "rule": self.rule})


@dataclass(frozen=True, slots=True)
class DatasetBreak:
    """The break scan of one dataset under one noise assumption, or why it was not run.

    Attributes
    ----------
    assumption : str
    q : int or None
        Dimension of the subspace scanned.
    q_from : str
        Where ``q`` came from, in words (the full sample's corank, or the one
        most windows show when the full sample shows none).
    scan : BreakScan or None
        None when not scanned (see ``reason``).
    reason : str
        Why the scan did not run ("" when it ran).
    date, date_low, date_high : str or None
        The first time (or row) after the whole sample's most likely break, and
        the ends of its interval, in the data's notation (None when not scanned).
    dates : tuple of (str, str, str)
        For each of ``scan.dates`` (every break found, in time order): its
        first time after the break and the ends of its interval.
    """

    assumption: str
    q: int | None
    q_from: str
    scan: BreakScan | None
    reason: str
    date: str | None = None
    date_low: str | None = None
    date_high: str | None = None
    dates: tuple[tuple[str, str, str], ...] = ()

    def dated(self) -> list[tuple[BreakDate, str, str, str]]:
        """Every break found, in time order, with its date and interval in the data's notation."""
        if self.scan is None:
            return []
        return [(b, *t) for b, t in zip(self.scan.dates, self.dates)]

    @property
    def status(self) -> str:
        """``"break"``, ``"no break"`` or ``"cannot be judged"``."""
        if self.scan is None:
            return "cannot be judged"
        return "break" if self.scan.found else "no break"

    def to_dict(self) -> dict:
        return jsonable({"assumption": self.assumption, "q": self.q, "q_from": self.q_from,
                         "status": self.status, "reason": self.reason, "date": self.date,
                         "date_low": self.date_low, "date_high": self.date_high,
                         "dates": [{"date": t[0], "date_low": t[1], "date_high": t[2], **b.to_dict()}
                                   for b, t in zip(self.scan.dates if self.scan else (), self.dates)],
                         "scan": None if self.scan is None else self.scan.to_dict()})


def _units(stats: GranuleStats, max_units: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Merge consecutive granules into at most ``max_units`` units (exact merges)."""
    k = stats.k
    if k <= max_units:
        return stats.counts, stats.means, stats.comoments
    edges = np.linspace(0, k, max_units + 1).round().astype(int)
    w = np.zeros((max_units, k))
    for u in range(max_units):
        w[u, edges[u]:edges[u + 1]] = 1.0
    c, m, cm = merge_weighted(stats.counts, stats.means, stats.comoments, w)
    return c, m, cm


def _common_scale(c, m, cm, scale) -> np.ndarray:
    """Per-variable divisors of the common scale (module notes)."""
    n = m.shape[1]
    if isinstance(scale, str):
        if scale == "as given":
            return np.ones(n)
        if scale == "correlation":
            tot, _, cov = merge_weighted(c, m, cm, np.ones((1, c.shape[0])))
            sd = np.sqrt(np.diag(cov[0]) / max(tot[0] - 1.0, 1.0))
            return np.where(sd > 0, sd, 1.0)
        raise OptionsError(f"scale must be 'as given', 'correlation' or an array of scales; got {scale!r}.",
                           key="scale", fix="Use the scale the analysis uses.")
    d = np.asarray(scale, dtype=float)
    if d.shape != (n,) or np.any(d <= 0):
        raise OptionsError(f"scale must hold {n} positive numbers.", key="scale",
                           fix="Pass one positive scale (e.g. a standard deviation) per variable.")
    return d


def _parts(c, m, cm) -> tuple[np.ndarray, np.ndarray]:
    """Per unit: second moment about the overall mean (flattened) and count times offset."""
    k, n = m.shape
    d = m - (c @ m) / c.sum()
    g = (cm + c[:, None, None] * d[:, :, None] * d[:, None, :]).reshape(k, n * n)
    return g, c[:, None] * d


def _sides(c, g, cd, seqs, splits):
    """Rows and co-moments (about each side's own mean) before and after each split, per sequence."""
    n = cd.shape[1]
    cs = np.cumsum(c[seqs], axis=1)                       # (B, K)
    cg = np.cumsum(g[seqs], axis=1)                       # (B, K, n*n)
    ccd = np.cumsum(cd[seqs], axis=1)                     # (B, K, n)
    tot, gtot, dtot = cs[:, -1], cg[:, -1], ccd[:, -1]
    i = splits - 1
    nb, gb, db = cs[:, i], cg[:, i], ccd[:, i]            # (B, S), (B, S, n*n), (B, S, n)
    na, ga, da = tot[:, None] - nb, gtot[:, None] - gb, dtot[:, None] - db

    def com(nn, gg, dd):
        out = gg.reshape(*gg.shape[:2], n, n) - dd[..., :, None] * dd[..., None, :] / nn[..., None, None]
        return 0.5 * (out + np.swapaxes(out, -1, -2))
    return nb, na, com(nb, gb, db), com(na, ga, da)


def _fit_stat(c, g, cd, seqs, splits, q, floor):
    """``T log(S_0 / S_1)`` per sequence and split ``(B, S)``, and the rows before each split."""
    nb, na, cb, ca = _sides(c, g, cd, seqs, splits)
    s1 = np.linalg.eigvalsh(cb)[..., :q].sum(-1) + np.linalg.eigvalsh(ca)[..., :q].sum(-1)
    s0 = np.linalg.eigvalsh(cb + ca)[..., :q].sum(-1)
    s1 = np.maximum(s1, floor)
    return (nb + na) * np.log(np.maximum(s0, s1) / s1), nb


def _smallest(mat, q):
    return np.linalg.eigh(mat)[1][:, :q]


def _null_units(c, m, cm, s, q):
    """The units turned so that one relation subspace and one level hold throughout (module notes).

    Returns the turned means and co-moments, the common relation basis ``(n, q)``,
    the two sides' bases and each side's slice.
    """
    k = c.shape[0]
    g, cd = _parts(c, m, cm)
    _, _, cb, ca = _sides(c, g, cd, np.arange(k)[None], np.array([s]))
    cb, ca = cb[0, 0], ca[0, 0]
    vb, va, v0 = _smallest(cb, q), _smallest(ca, q), _smallest(cb + ca, q)
    overall = (c @ m) / c.sum()
    m2, cm2 = np.empty_like(m), np.empty_like(cm)
    for sl, v in ((slice(0, s), vb), (slice(s, k), va)):
        rot = direct_rotation(v.T, v0.T)
        own = (c[sl] @ m[sl]) / c[sl].sum()
        m2[sl] = overall + (m[sl] - own) @ rot.T
        cm2[sl] = rot[None] @ cm[sl] @ rot.T[None]
    return m2, cm2, v0, vb, va


def _scores(c, m, cm, basis) -> np.ndarray:
    """Per unit: misfit coordinates times complement coordinates (``q (n - q)`` series), about the mean."""
    k, n = m.shape
    q = basis.shape[1]
    comp = np.linalg.svd(basis, full_matrices=True)[0][:, q:]
    d = m - (c @ m) / c.sum()
    mom = cm + c[:, None, None] * d[:, :, None] * d[:, None, :]
    return (basis.T[None] @ mom @ comp[None]).reshape(k, q * (n - q))


def _turned_scores(c, m, cm, cuts, q) -> np.ndarray:
    """:func:`_scores` of the units with each segment between ``cuts`` turned onto one common subspace.

    Each segment is turned about its own mean by the direct rotation carrying
    its relation subspace onto the one fitted to the sum of the segments'
    co-moments, and moved to the overall mean (as :func:`_null_units` does for
    two sides).
    """
    k, n = m.shape
    bounds = [0, *cuts, k]
    g, cd = _parts(c, m, cm)
    pieces = []
    for lo, hi in zip(bounds[:-1], bounds[1:]):
        cc = c[lo:hi]
        own = (cc @ m[lo:hi]) / cc.sum()
        dd = m[lo:hi] - own
        pieces.append((lo, hi, own, cm[lo:hi].sum(axis=0) + (cc[:, None, None] * dd[:, :, None] * dd[:, None, :])
                       .sum(axis=0)))
    v0 = _smallest(sum(p[3] for p in pieces), q)
    overall = (c @ m) / c.sum()
    m2, cm2 = np.empty_like(m), np.empty_like(cm)
    for lo, hi, own, com in pieces:
        rot = direct_rotation(_smallest(0.5 * (com + com.T), q).T, v0.T)
        m2[lo:hi] = overall + (m[lo:hi] - own) @ rot.T
        cm2[lo:hi] = rot[None] @ cm[lo:hi] @ rot.T[None]
    return _scores(c, m2, cm2, v0)


def _standardised(scores) -> np.ndarray | None:
    """The score series centred and scaled to unit variance, constant ones dropped (None: too few to judge)."""
    z = np.asarray(scores, dtype=float)
    z = z - z.mean(axis=0)
    sd = np.sqrt((z * z).mean(axis=0))
    keep = sd > 0
    if z.shape[0] < 8 or not keep.any():
        return None
    return z[:, keep] / sd[keep]


def long_run_ratio(scores) -> float:
    """How much serial dependence inflates the variance of the scores' partial sums (>= 1).

    ``tr(Gamma_0^{-1} Omega) / p`` for the ``p`` standardised score series, with
    ``Omega`` the flat-top lag-window estimate of the long-run covariance and
    the bandwidth of Politis (2003): per series, ``m_hat`` the smallest lag
    after which ``K = max(5, ceil(sqrt(log10 k)))`` autocorrelations in a row
    lie within ``2 sqrt(log10 k / k)``; ``M = 2 max m_hat`` (at most
    ``ceil(sqrt k) + K``). Values below 1 (an estimate, or negative
    dependence) count as 1, so the correction never shrinks the statistic.

    References
    ----------
    .. [1] D. N. Politis, "Adaptive bandwidth choice", Journal of Nonparametric
           Statistics 15(4-5), 517-533, 2003.
    """
    z = _standardised(scores)
    if z is None:
        return 1.0
    k, p = z.shape
    kn = max(5, math.ceil(math.sqrt(math.log10(k))))
    m_max = math.ceil(math.sqrt(k)) + kn
    lags = min(k - 1, m_max + kn)
    gam = np.stack([z[j:].T @ z[:k - j] / k for j in range(lags + 1)])   # Gamma(j) = E z_{t+j} z_t^T
    bound = 2.0 * math.sqrt(math.log10(k) / k)
    m_hat = 0
    for col in range(p):
        rho = gam[1:, col, col] / gam[0, col, col]
        small = np.abs(rho) < bound
        first = next((m for m in range(0, lags - kn + 1) if small[m:m + kn].all()), m_max)
        m_hat = max(m_hat, first)
    big_m = min(2 * max(m_hat, 1), m_max, lags)
    lam = _flat_top(np.arange(1, big_m + 1) / big_m)
    omega = gam[0] + np.einsum("j,jab->ab", lam, gam[1:big_m + 1] + np.swapaxes(gam[1:big_m + 1], 1, 2))
    ratio = float(np.trace(np.linalg.pinv(gam[0]) @ omega)) / max(int(np.linalg.matrix_rank(gam[0])), 1)
    return max(1.0, ratio) if np.isfinite(ratio) else 1.0



#: largest AR(1) coefficient the prewhitening uses (Andrews & Monahan 1992 bound the VAR's eigenvalues by 0.97)
_AR_CAP = 0.97


def prewhitened_long_run_ratio(scores) -> float:
    """:func:`long_run_ratio` after prewhitening each score series by an AR(1) filter (>= 1).

    Per standardised series ``z_i``: the least-squares lag-1 coefficient
    ``r_i``, corrected for its small-sample bias by Kendall's (1954)
    ``r_i + (1 + 3 r_i) / k`` and held within ``+-0.97``; the residuals
    ``e_t = z_t - r z_{t-1}`` get the flat-top long-run covariance of
    :func:`long_run_ratio` (``Omega_e``), recoloured by ``D = diag(1 / (1 - r_i))``:
    ``Omega = D Omega_e D`` (Andrews & Monahan 1992, with a diagonal AR(1) in
    place of their VAR(1), so that the cost does not grow with the square of
    the number of series). The ratio is ``tr(Gamma_0^{-1} Omega) / p``.

    A lag window alone needs many lags to capture a slowly decaying
    dependence, and at a few hundred units the automatic bandwidth keeps few:
    on the scores of AR(1) rows with coefficient 0.5 (true ratio 5/3) the
    flat-top estimate averaged 1.40 and this one 1.55 (200 simulated samples
    of 300 rows, measured; docs/inference.md).

    References
    ----------
    .. [1] D. W. K. Andrews and J. C. Monahan, "An improved heteroskedasticity
           and autocorrelation consistent covariance matrix estimator",
           Econometrica 60(4), 953-966, 1992.
    .. [2] M. G. Kendall, "Note on bias in the estimation of autocorrelation",
           Biometrika 41(3-4), 403-404, 1954.
    .. [3] D. N. Politis, Journal of Nonparametric Statistics 15(4-5), 517-533, 2003.
    """
    z = _standardised(scores)
    if z is None:
        return 1.0
    k = z.shape[0]
    den = (z[:-1] ** 2).sum(axis=0)
    r = np.where(den > 0, (z[1:] * z[:-1]).sum(axis=0) / np.where(den > 0, den, 1.0), 0.0)
    r = np.clip(r + (1.0 + 3.0 * r) / k, -_AR_CAP, _AR_CAP)
    e = z[1:] - z[:-1] * r
    omega_e = long_run_ratio(e) * (e.T @ e) / (k - 1)
    d = 1.0 / (1.0 - r)
    omega = omega_e * d[:, None] * d[None, :]
    g0 = z.T @ z / k
    ratio = float(np.trace(np.linalg.pinv(g0) @ omega)) / max(int(np.linalg.matrix_rank(g0)), 1)
    return max(1.0, ratio) if np.isfinite(ratio) else 1.0


@dataclass(frozen=True, slots=True)
class _Test:
    """One segment's scan: the statistic at its most likely date and its restricted-bootstrap null."""

    lo: int
    hi: int
    split: int               # unit index of the first unit after the most likely date
    raw: float               # the statistic before the division by a long-run ratio
    null: np.ndarray
    candidates: int

    def critical(self, quantile: float) -> float:
        """The critical value at level ``1 - quantile``: the statistic exceeds it exactly when the p-value
        ``(1 + #{null >= statistic}) / (1 + B)`` is at most ``1 - quantile`` (infinite when ``B`` is too small
        for that level)."""
        allowed = math.floor((1.0 - quantile) * (self.null.size + 1) + 1e-9) - 1   # null draws at or above
        if allowed < 0:
            return math.inf
        return float(np.sort(self.null)[::-1][allowed])

    def p_value(self, ratio: float) -> float:
        return float((1 + np.sum(self.null >= self.raw / ratio)) / (1 + self.null.size))


class _Scan:
    """The units of one sample on the common scale, and the scans of its segments."""

    def __init__(self, c, m, cm, *, q, trim, scheme, rng, resamples):
        self.c, self.m, self.cm, self.q = c, m, cm, q
        self.n = m.shape[1]
        self.cum = np.cumsum(c)
        self.total = float(self.cum[-1])
        # each side of a candidate date keeps the trimmed share of the whole sample's rows, and n + 2 rows
        self.min_rows = max(trim * self.total, float(self.n + 2))
        g, _ = _parts(c, m, cm)
        # misfits at or below rounding of the whole sample's scale count as rounding (exact relations)
        self.floor = float(np.trace(g.sum(axis=0).reshape(self.n, self.n))) * 1e-12
        self.scheme, self.rng, self.resamples = scheme, rng, resamples
        self.chunk_cells = 2_000_000
        self._ratios: dict[tuple[int, ...], float] = {}

    def rows_before(self, unit: int) -> int:
        """Rows before unit ``unit`` (0 for the first)."""
        return 0 if unit <= 0 else int(round(float(self.cum[unit - 1])))

    def splits(self, lo: int, hi: int) -> np.ndarray:
        """Candidate dates (relative unit positions 1 .. hi-lo-1) inside units ``lo .. hi-1``."""
        base = self.cum[lo - 1] if lo > 0 else 0.0
        before = self.cum[lo:hi - 1] - base
        seg = (self.cum[hi - 1] - base)
        ok = (before >= self.min_rows) & (seg - before >= self.min_rows)
        return np.flatnonzero(ok) + 1

    def _chunk(self, k: int, splits: int) -> int:
        return max(1, self.chunk_cells // max(k * splits * self.n * self.n, 1))

    def test(self, lo: int, hi: int) -> _Test | None:
        """Scan units ``lo .. hi-1`` for one break; None when no candidate date fits."""
        splits = self.splits(lo, hi)
        if splits.size == 0:
            return None
        c, m, cm, q = self.c[lo:hi], self.m[lo:hi], self.cm[lo:hi], self.q
        k = hi - lo
        g, cd = _parts(c, m, cm)
        stat, _ = _fit_stat(c, g, cd, np.arange(k)[None, :], splits, q, self.floor)
        j = int(np.argmax(stat[0]))
        su = int(splits[j])
        m0, cm0, _, _, _ = _null_units(c, m, cm, su, q)
        g0, cd0 = _parts(c, m0, cm0)
        null = np.empty(self.resamples)
        chunk = self._chunk(k, splits.size)
        for s0 in range(0, self.resamples, chunk):
            nb_ = min(chunk, self.resamples - s0)
            seqs = draw_granules(k, scheme="iid", resamples=nb_, rng=self.rng)
            null[s0:s0 + nb_] = _fit_stat(c, g0, cd0, seqs, splits, q, self.floor)[0].max(axis=1)
        return _Test(lo=lo, hi=hi, split=lo + su, raw=float(stat[0, j]), null=null, candidates=int(splits.size))

    def ratio(self, cuts: tuple[int, ...]) -> float:
        """The long-run ratio of the scores of the whole sample turned so that the segments between
        ``cuts`` (unit indices of the breaks) share one relation subspace and one level (1 for iid rows)."""
        if self.scheme == "iid":
            return 1.0
        if cuts not in self._ratios:
            self._ratios[cuts] = prewhitened_long_run_ratio(_turned_scores(self.c, self.m, self.cm, cuts, self.q))
        return self._ratios[cuts]

    def locate(self, lo: int, at: int, hi: int, level: float, block_length: float | None):
        """Date, date interval, angle and block length of the break at unit ``at`` between units ``lo`` and ``hi``.

        The date is re-estimated as the most likely one between the neighbouring
        breaks (or the sample's ends); its interval is the percentile interval of
        that date over resamples drawn separately on each side (module notes).
        """
        c, m, cm, q = self.c[lo:hi], self.m[lo:hi], self.cm[lo:hi], self.q
        k = hi - lo
        splits = self.splits(lo, hi)
        g, cd = _parts(c, m, cm)
        stat, _ = _fit_stat(c, g, cd, np.arange(k)[None, :], splits, q, self.floor)
        su = int(splits[int(np.argmax(stat[0]))])
        m0, cm0, v0, vb, va = _null_units(c, m, cm, su, q)
        angle = float(largest_angle_stack(vb.T, va.T[None])[0])
        if self.scheme == "iid":
            b = 1.0
        else:
            b = (politis_white_block_length(_scores(c, m0, cm0, v0), kind=self.scheme).value
                 if block_length is None else float(block_length))
        left, right = np.arange(su), np.arange(su, k)
        dates = np.empty(self.resamples, dtype=np.int64)
        chunk = self._chunk(k, splits.size)
        base = self.rows_before(lo)
        for s0 in range(0, self.resamples, chunk):
            nb_ = min(chunk, self.resamples - s0)
            sl = left[draw_granules(left.size, scheme=self.scheme, resamples=nb_, rng=self.rng, block_length=b)]
            sr = right[draw_granules(right.size, scheme=self.scheme, resamples=nb_, rng=self.rng,
                                     block_length=b)]
            st, nbs = _fit_stat(c, g, cd, np.concatenate([sl, sr], axis=1), splits, q, self.floor)
            jj = np.argmax(st, axis=1)
            dates[s0:s0 + nb_] = base + np.round(nbs[np.arange(nb_), jj]).astype(np.int64)
        a = (1.0 - level) / 2.0
        lo_q, hi_q = np.quantile(dates, [a, 1.0 - a])
        return lo + su, (int(math.floor(lo_q)), int(math.ceil(hi_q))), angle, b


def _sidak(level: float, segments: int) -> float:
    """The per-segment quantile that keeps the family of ``segments`` tests at ``level`` (Sidak 1967)."""
    return float(level) ** (1.0 / segments)


def subspace_break_scan(stats: GranuleStats, *, q: int, rng: np.random.Generator, scale="as given",
                        trim: float = DEFAULT_TRIM, resamples: int = 199, level: float = 0.95,
                        scheme: str | None = None, block_length: float | None = None,
                        max_units: int = MAX_SCAN_UNITS, max_breaks: int = MAX_BREAKS) -> BreakScan:
    """Scan for changes of the q-dimensional relation subspace at unknown dates.

    The whole sample is tested for one break; when one is found, the
    segments between the breaks found so far are tested the same way, one
    further break at a time, up to ``max_breaks`` (module notes).

    Parameters
    ----------
    stats : GranuleStats
        The sample's granules, in time order.
    q : int
        Dimension of the relation subspace (the corank the analysis uses), 1 .. n-1.
    rng : numpy.random.Generator
        The stream for the resamples (record its seed with the result).
    scale : "as given", "correlation" or (n,) array
        The analysis scale. The scan needs one scale for both sides:
        "correlation" means each variable divided by its standard deviation
        over the whole sample; an array ``d`` divides variable j by ``d[j]``.
    trim : float
        Share of the whole sample's rows excluded at each end from the
        candidate dates (0.15); also the shortest segment a further break may
        leave on either side.
    resamples : int
        Resamples for each test's critical value and for each date interval.
    level : float
        Quantile for the whole-sample test's critical value (0.95: a break is
        declared at the 5% level) and coverage of each date interval. With
        ``l`` breaks found, each of the ``l + 1`` segments is tested at the
        quantile ``level ** (1 / (l + 1))`` (Šidák).
    scheme, block_length
        How the two sides of a break are resampled for the date's interval
        (default: stationary blocks for time-ordered rows, iid otherwise) and
        the mean block length in units (default: the automatic rule on the
        scores). Any scheme but "iid" also divides each statistic by the
        prewhitened long-run ratio of the scores (module notes).
    max_units : int
        Consecutive granules are merged into at most this many units; dates
        are the units' boundaries.
    max_breaks : int
        Most breaks reported (5; 0 or 1 look for one break only).

    Returns
    -------
    BreakScan

    References
    ----------
    .. [1] D. W. K. Andrews, Econometrica 61(4), 821-856, 1993.
    .. [2] J. Bai, Econometric Theory 13(3), 315-352, 1997.
    .. [3] J. Bai and P. Perron, Econometrica 66(1), 47-78, 1998.
    .. [4] D. N. Politis and J. P. Romano, JASA 89(428), 1303-1313, 1994.
    .. [5] C. Davis and W. M. Kahan, SIAM J. Numer. Anal. 7(1), 1-46, 1970.
    """
    n = stats.n
    if not isinstance(q, (int, np.integer)) or not 1 <= q < n:
        raise OptionsError(f"q must be a whole number from 1 to {n - 1}; got {q!r}.", key="q",
                           fix="Scan at the corank the analysis found.")
    if not 0.0 < float(trim) < 0.5:
        raise OptionsError(f"trim must be in (0, 0.5); got {trim!r}.", key="trim",
                           fix="Use 0.15 (15% at each end).")
    if not isinstance(max_breaks, (int, np.integer)) or max_breaks < 0:
        raise OptionsError(f"max_breaks must be a whole number >= 0; got {max_breaks!r}.", key="max_breaks",
                           fix=f"Use {MAX_BREAKS}, or 1 to look for one break only.")
    q = int(q)
    c, m, cm = _units(stats, max_units)
    k = c.shape[0]
    d = _common_scale(c, m, cm, scale)
    m, cm = m / d, cm / np.outer(d, d)
    scheme = scheme or ("stationary" if stats.ordered else "iid")
    sc = _Scan(c, m, cm, q=q, trim=float(trim), scheme=scheme, rng=rng, resamples=int(resamples))
    first = sc.test(0, k)
    if first is None:
        need = int(math.ceil(sc.min_rows))
        raise OptionsError(f"no candidate date leaves {need} rows on each side after trimming {trim:.0%}.",
                           key="trim", fix="Scan a longer sample, or use fewer variables.")
    crit = first.critical(level)
    r1 = sc.ratio((first.split,))
    found: list[tuple[_Test, float, int, float]] = []     # (test, quantile judged at, step, ratio used)
    if first.raw / r1 > crit:
        found.append((first, float(level), 1, r1))
    tests: dict[tuple[int, int], _Test | None] = {(0, k): first}
    further = 0
    stopped = False                                     # the search stopped at max_breaks
    final_quant, final_ratio = float(level), r1
    while found:
        cuts = [0] + sorted(t.split for t, _, _, _ in found) + [k]
        if len(found) >= max(int(max_breaks), 1):
            stopped = True
            break
        quant = _sidak(level, len(cuts) - 1)
        # serial dependence judged on the whole sample under the breaks found so far
        ratio = sc.ratio(tuple(cuts[1:-1]))
        final_quant, final_ratio = quant, ratio
        best = None
        for lo, hi in zip(cuts[:-1], cuts[1:]):
            if (lo, hi) not in tests:
                tests[(lo, hi)] = sc.test(lo, hi)
                further += tests[(lo, hi)] is not None
            t = tests[(lo, hi)]
            if t is None or not t.raw / ratio > t.critical(quant):
                continue
            key = (t.p_value(ratio), -t.raw / ratio / t.critical(quant))
            if best is None or key < best[0]:
                best = (key, t)
        if best is None:
            break
        found.append((best[1], quant, len(found) + 1, ratio))
    cuts = [0] + sorted(t.split for t, _, _, _ in found) + [k]
    segments = tuple((sc.rows_before(lo), sc.rows_before(hi),
                      math.nan if stopped or tests.get((lo, hi)) is None else tests[(lo, hi)].p_value(final_ratio))
                     for lo, hi in zip(cuts[:-1], cuts[1:]))
    dates: list[BreakDate] = []
    inner = cuts[1:-1]
    by_split = {t.split: (t, qt, step, r) for t, qt, step, r in found}
    for i, at in enumerate(inner):
        unit, interval, angle, b = sc.locate(cuts[i], at, cuts[i + 2], level, block_length)
        t, qt, step, r = by_split[at]
        dates.append(BreakDate(split_row=sc.rows_before(unit), split_interval=interval, angle_deg=angle,
                               statistic=t.raw / r, critical_value=t.critical(qt), p_value=t.p_value(r),
                               level=qt, segment=(sc.rows_before(t.lo), sc.rows_before(t.hi)), step=step,
                               long_run_ratio=r, block_length=float(b)))
    # the whole-sample test's most likely date, its interval and angle (the first break when found)
    if found:
        main = next(x for x in dates if x.step == 1)
        split_row, interval, angle, b = main.split_row, main.split_interval, main.angle_deg, main.block_length
    else:
        m0, cm0, v0, vb, va = _null_units(c, m, cm, first.split, q)
        angle = float(largest_angle_stack(vb.T, va.T[None])[0])
        split_row = sc.rows_before(first.split)
        interval = (split_row, split_row)
        b = 1.0
        if scheme != "iid":
            b = (politis_white_block_length(_scores(c, m0, cm0, v0), kind=scheme).value
                 if block_length is None else float(block_length))
    return BreakScan(q=q, statistic=first.raw / r1, critical_value=crit, p_value=first.p_value(r1),
                     level=float(level), found=bool(found), split_row=split_row, split_interval=interval,
                     angle_deg=angle, trim=float(trim), candidates=first.candidates,
                     resamples=int(resamples), scheme=scheme, block_length=float(b),
                     long_run_ratio=float(r1), rule=_rule(scale, first, r1, trim, q, level, resamples,
                                                          scheme, max_breaks, sc.min_rows),
                     dates=tuple(dates), max_breaks=int(max_breaks), further_tests=int(further),
                     min_segment_rows=int(math.ceil(sc.min_rows)), segments=segments,
                     segment_level=math.nan if stopped else final_quant)


def _rule(scale, first: _Test, ratio: float, trim, q, level, resamples, scheme, max_breaks, min_rows) -> str:
    where = ("each variable divided by its standard deviation over the whole sample"
             if isinstance(scale, str) and scale == "correlation" else
             "the data's own units" if isinstance(scale, str) else "the analysis's common scale")
    dep = ("" if scheme == "iid" else
           " For time-ordered rows each statistic is divided by the factor by which serial dependence of the "
           "fit's scores inflates their partial sums (long-run variance after an AR(1) prewhitening of each "
           "score series, at least 1): "
           + (f"{ratio:.3g} for the whole sample." if ratio > 1.0 else
              "1 for the whole sample, so its statistic is used as it is."))
    alpha = 1.0 - level
    more = ("" if max_breaks <= 1 else
            f" After a break is found, each segment between the breaks found so far is scanned the same way "
            f"(candidate dates leaving at least {math.ceil(min_rows)} rows, {trim:.0%} of the sample, on each "
            "side; its own resamples; the long-run factor of the whole sample under the breaks found), one "
            f"further break at a time, up to {max_breaks}: with l breaks found each of the l + 1 segments is "
            f"tested at the level 1 - {level:g}^(1/(l + 1)) (Šidák; {1 - level ** 0.5:.1%} each for two "
            f"segments), so that a further false break is declared with a chance of about {alpha:.0%}.")
    return (f"Scan over {first.candidates} dates between the first and last {trim:.0%} of rows for a change of "
            f"the {q}-dimensional relation subspace, on one scale ({where}): at each date, T log(S0/S1), "
            "where S0 is the misfit (sum of the smallest eigenvalues) of one common subspace and S1 that "
            f"of separate subspaces before and after.{dep} The p-value counts the statistic among {resamples} "
            "resamples drawn with replacement from the rows (as stored: single rows or short runs of rows) of "
            "the sample turned so that one relation subspace holds throughout, each row keeping the size of its "
            f"misfit: one plus those at or above it, over one plus {resamples}; a break when it is at most "
            f"{alpha:.0%} (the critical value is the resampled statistic at that boundary).{more}")
