"""A break in the relation subspace at an unknown date: a sup-type fit scan with resampled critical values.

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
granules' scores, the products of the misfit (coordinates in the common
relation subspace) with the coordinates in its complement (Andrews 1993);
dependence inflates their variance by the long-run ratio
``tr(Gamma_0^{-1} Omega) / p`` (:func:`long_run_ratio`; flat-top lag window
and bandwidth of Politis 2003), by which the observed statistic of
time-ordered rows is divided, as the sup-Wald statistic uses a long-run
covariance, before it is compared with the resamples (which carry no
dependence). A block bootstrap of the turned sample was tried first: on
independent rows its critical values fell as the blocks grew (10.2 against
11.3 for blocks of 10 and 1 rows: means over 20 simulated stable samples of
300 rows, measured), so it raised false alarms.

When a break is found, the date's interval is the percentile interval of
the most likely date over resamples drawn separately within the two
segments of the data as observed (stationary bootstrap, Politis & Romano
1994, blocks by the automatic rule of Politis & White 2004 with the Patton,
Politis & White 2009 correction, applied to the scores; iid for unordered
rows), and the angle reported is the largest principal angle (Björck &
Golub 1973) between the two sides' subspaces on the common scale.

One break only: a sequential search for several breaks in the spirit of Bai
& Perron (1998) needs critical values for the sequence of tests that this
resampling scheme does not give; it is left out.

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

__all__ = ["BreakScan", "DatasetBreak", "subspace_break_scan", "long_run_ratio", "DEFAULT_TRIM", "MAX_SCAN_UNITS"]

#: share of the sample excluded at each end (Andrews 1993 uses 0.15)
DEFAULT_TRIM = 0.15
#: granules are merged into at most this many consecutive units before scanning (bounds cost)
MAX_SCAN_UNITS = 400


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
        The ``level`` quantile of the statistic over restricted-bootstrap
        resamples (one relation subspace throughout).
    p_value : float
    level : float
    found : bool
        ``statistic > critical_value``.
    split_row : int
        0-based position of the first row after the most likely date.
    split_interval : tuple of int
        Percentile interval (at ``level``) of the split row from the date bootstrap;
        ``(split_row, split_row)`` when no break is found.
    angle_deg : float
        Largest principal angle between before and after at the most likely
        date, on the common scale.
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

    def to_dict(self) -> dict:
        return jsonable({"q": self.q, "statistic": self.statistic, "critical_value": self.critical_value,
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
        The first time (or row) after the most likely break, and the ends of
        its interval, in the data's notation (None when not scanned).
    """

    assumption: str
    q: int | None
    q_from: str
    scan: BreakScan | None
    reason: str
    date: str | None = None
    date_low: str | None = None
    date_high: str | None = None

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
    z = np.asarray(scores, dtype=float)
    k, p = z.shape
    z = z - z.mean(axis=0)
    sd = np.sqrt((z * z).mean(axis=0))
    keep = sd > 0
    if k < 8 or not keep.any():
        return 1.0
    z = z[:, keep] / sd[keep]
    p = z.shape[1]
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


def subspace_break_scan(stats: GranuleStats, *, q: int, rng: np.random.Generator, scale="as given",
                        trim: float = DEFAULT_TRIM, resamples: int = 199, level: float = 0.95,
                        scheme: str | None = None, block_length: float | None = None,
                        max_units: int = MAX_SCAN_UNITS) -> BreakScan:
    """Scan for one change of the q-dimensional relation subspace at an unknown date.

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
        Share of rows excluded at each end from the candidate dates (0.15).
    resamples : int
        Resamples for the critical value and for the date interval.
    level : float
        Quantile for the critical value (0.95: a break is declared at the 5% level)
        and coverage of the date interval.
    scheme, block_length
        How the two segments are resampled for the date's interval (default:
        stationary blocks for time-ordered rows, iid otherwise) and the mean
        block length in units (default: the automatic rule on the scores).
        Any scheme but "iid" also divides the statistic by the long-run ratio
        of the scores (module notes).
    max_units : int
        Consecutive granules are merged into at most this many units; dates
        are the units' boundaries.

    Returns
    -------
    BreakScan

    References
    ----------
    .. [1] D. W. K. Andrews, Econometrica 61(4), 821-856, 1993.
    .. [2] D. N. Politis and J. P. Romano, JASA 89(428), 1303-1313, 1994.
    .. [3] C. Davis and W. M. Kahan, SIAM J. Numer. Anal. 7(1), 1-46, 1970.
    """
    n = stats.n
    if not isinstance(q, (int, np.integer)) or not 1 <= q < n:
        raise OptionsError(f"q must be a whole number from 1 to {n - 1}; got {q!r}.", key="q",
                           fix="Scan at the corank the analysis found.")
    if not 0.0 < float(trim) < 0.5:
        raise OptionsError(f"trim must be in (0, 0.5); got {trim!r}.", key="trim",
                           fix="Use 0.15 (15% at each end).")
    q = int(q)
    c, m, cm = _units(stats, max_units)
    k = c.shape[0]
    d = _common_scale(c, m, cm, scale)
    m, cm = m / d, cm / np.outer(d, d)
    g, cd = _parts(c, m, cm)
    cum = np.cumsum(c)
    total = cum[-1]
    lo_rows, hi_rows = trim * total, (1.0 - trim) * total
    splits = np.flatnonzero((cum[:-1] >= lo_rows) & (cum[:-1] <= hi_rows)) + 1
    need = n + 2
    splits = splits[(cum[splits - 1] >= need) & (total - cum[splits - 1] >= need)]
    if splits.size == 0:
        raise OptionsError(f"no candidate date leaves {need} rows on each side after trimming {trim:.0%}.",
                           key="trim", fix="Scan a longer sample, or use fewer variables.")
    # misfits at or below rounding of the whole sample's scale count as rounding (exact relations)
    floor = float(np.trace(g.sum(axis=0).reshape(n, n))) * 1e-12
    stat, _ = _fit_stat(c, g, cd, np.arange(k)[None, :], splits, q, floor)
    j = int(np.argmax(stat[0]))
    observed = float(stat[0, j])
    split_unit = int(splits[j])
    m0, cm0, v0, vb, va = _null_units(c, m, cm, split_unit, q)
    angle = float(largest_angle_stack(vb.T, va.T[None])[0])
    scheme = scheme or ("stationary" if stats.ordered else "iid")
    scores = _scores(c, m0, cm0, v0)
    if scheme == "iid":
        b, ratio = 1.0, 1.0
    else:
        b = (politis_white_block_length(scores, kind=scheme).value if block_length is None
             else float(block_length))
        ratio = long_run_ratio(scores)
    observed = observed / ratio
    g0, cd0 = _parts(c, m0, cm0)
    null = np.empty(resamples)
    chunk = max(1, 2_000_000 // max(k * splits.size * n * n, 1))
    for s0 in range(0, resamples, chunk):
        nb_ = min(chunk, resamples - s0)
        seqs = draw_granules(k, scheme="iid", resamples=nb_, rng=rng)
        null[s0:s0 + nb_] = _fit_stat(c, g0, cd0, seqs, splits, q, floor)[0].max(axis=1)
    crit = float(np.quantile(null, level))
    p = float((1 + np.sum(null >= observed)) / (1 + resamples))
    found = observed > crit
    split_row = int(cum[split_unit - 1])
    interval = (split_row, split_row)
    if found:
        left, right = np.arange(split_unit), np.arange(split_unit, k)
        dates = np.empty(resamples, dtype=np.int64)
        for s0 in range(0, resamples, chunk):
            nb_ = min(chunk, resamples - s0)
            sl = left[draw_granules(left.size, scheme=scheme, resamples=nb_, rng=rng, block_length=b)]
            sr = right[draw_granules(right.size, scheme=scheme, resamples=nb_, rng=rng, block_length=b)]
            st, nbs = _fit_stat(c, g, cd, np.concatenate([sl, sr], axis=1), splits, q, floor)
            jj = np.argmax(st, axis=1)
            dates[s0:s0 + nb_] = np.round(nbs[np.arange(nb_), jj]).astype(np.int64)
        a = (1.0 - level) / 2.0
        lo, hi = np.quantile(dates, [a, 1.0 - a])
        interval = (int(math.floor(lo)), int(math.ceil(hi)))
    where = ("each variable divided by its standard deviation over the whole sample"
             if isinstance(scale, str) and scale == "correlation" else
             "the data's own units" if isinstance(scale, str) else "the analysis's common scale")
    dep = ("" if scheme == "iid" else
           " For time-ordered rows the statistic is divided by the factor by which serial dependence of the "
           "fit's scores inflates their partial sums (flat-top long-run variance, at least 1): "
           + (f"{ratio:.3g} here." if ratio > 1.0 else "here 1, so the statistic is used as it is."))
    rule = (f"Scan over {splits.size} dates between the first and last {trim:.0%} of rows for a change of the "
            f"{q}-dimensional relation subspace, on one scale ({where}): at each date, T log(S0/S1), "
            "where S0 is the misfit (sum of the smallest eigenvalues) of one common subspace and S1 that "
            f"of separate subspaces before and after.{dep} Critical value: the {level:.0%} quantile over "
            f"{resamples} resamples, drawn with replacement from the rows (as stored: single rows or "
            "short runs of rows) of the sample turned so that one relation subspace holds throughout, each "
            "row keeping the size of its misfit.")
    return BreakScan(q=q, statistic=observed, critical_value=crit, p_value=p, level=float(level),
                     found=bool(found), split_row=split_row, split_interval=interval,
                     angle_deg=angle, trim=float(trim), candidates=int(splits.size),
                     resamples=int(resamples), scheme=scheme, block_length=float(b),
                     long_run_ratio=float(ratio), rule=rule)
