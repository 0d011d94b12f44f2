"""A break in the relation subspace at an unknown date: a sup-type scan with resampled critical values.

For every candidate date (granule boundary) between the first and last
``trim`` share of the sample, the relation subspace before and after is
estimated (the eigenvectors of the q smallest eigenvalues of each side's
covariance, on the analysis scale) and compared by its largest principal
angle ``theta``. The statistic at a date is ``sqrt(T_b T_a / T) sin(theta)``
(``T_b``, ``T_a`` rows before and after): the sine shrinks like
``1 / sqrt(rows)`` on each side under no change, so the weight puts all dates
on one footing, as the sup-Wald weight does (Andrews 1993). The scan
statistic is the supremum over dates.

Critical values come from resampling under no change: the whole sequence of
granules is resampled by the block bootstrap (stationary bootstrap with the
automatic block length; iid for unordered rows), which keeps short-range
dependence and destroys any break, and the scan is rerun on each resample.
The p-value is ``(1 + #{sup* >= sup}) / (1 + B)``. When a break is found,
the date's interval is the percentile interval of the argmax over resamples
drawn separately within the two segments (bootstrap of the break date).

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
.. [4] Å. Björck and G. H. Golub, Mathematics of Computation 27(123), 579-594, 1973.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from relspan.analysis._common import jsonable
from relspan.analysis.intervals import largest_angle_stack
from relspan.analysis.resample import (GranuleStats, draw_granules, merge_weighted,
                                       politis_white_block_length, scale_stack)
from relspan.errors import OptionsError

__all__ = ["BreakScan", "DatasetBreak", "subspace_break_scan", "DEFAULT_TRIM", "MAX_SCAN_UNITS"]

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
        ``sup`` over candidate dates of ``sqrt(T_b T_a / T) sin(theta)``.
    critical_value : float
        The ``level`` quantile of the statistic over resamples under no change.
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
        Largest principal angle between before and after at the most likely date.
    trim : float
    candidates : int
        Dates scanned.
    resamples : int
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
    rule: str

    def to_dict(self) -> dict:
        return jsonable({"q": self.q, "statistic": self.statistic, "critical_value": self.critical_value,
                         "p_value": self.p_value, "level": self.level, "found": self.found,
                         "split_row": self.split_row, "split_interval": list(self.split_interval),
                         "angle_deg": self.angle_deg, "trim": self.trim, "candidates": self.candidates,
                         "resamples": self.resamples, "rule": self.rule})


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


def _scan(c, g, cd, seqs, splits, q, scale, ddof=1):
    """Statistic per sequence and split: arrays (B, S) of weighted sines and angles."""
    cs = np.cumsum(c[seqs], axis=1)                       # (B, K)
    cg = np.cumsum(g[seqs], axis=1)                       # (B, K, n*n)
    ccd = np.cumsum(cd[seqs], axis=1)                     # (B, K, n)
    n = cd.shape[1]
    tot, gtot, dtot = cs[:, -1], cg[:, -1], ccd[:, -1]
    i = splits - 1
    nb, gb, db = cs[:, i], cg[:, i], ccd[:, i]            # (B, S), (B, S, n*n), (B, S, n)
    na, ga, da = tot[:, None] - nb, gtot[:, None] - gb, dtot[:, None] - db
    def cov(nn, gg, dd):
        cm = gg.reshape(*gg.shape[:2], n, n) - dd[..., :, None] * dd[..., None, :] / nn[..., None, None]
        return cm / (nn - ddof)[..., None, None]
    sb, sa = cov(nb, gb, db), cov(na, ga, da)
    bsh = sb.shape
    sb = scale_stack(sb.reshape(-1, n, n), scale)
    sa = scale_stack(sa.reshape(-1, n, n), scale)
    vb = np.linalg.eigh(sb)[1][:, :, :q]
    va = np.linalg.eigh(sa)[1][:, :, :q]
    ang = largest_angle_stack(np.swapaxes(vb, 1, 2), np.swapaxes(va, 1, 2)).reshape(bsh[:2])
    weight = np.sqrt(nb * na / (nb + na))
    return weight * np.sin(np.radians(ang)), ang, nb


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
        The analysis scale (see :func:`relspan.analysis.resample.scale_stack`);
        with "correlation" each side is put on its own correlation scale.
    trim : float
        Share of rows excluded at each end from the candidate dates (0.15).
    resamples : int
        Resamples for the critical value and for the date interval.
    level : float
        Quantile for the critical value (0.95: a break is declared at the 5% level)
        and coverage of the date interval.
    scheme, block_length
        As for :func:`relspan.analysis.resample.resample_covariances`.
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
    """
    n = stats.n
    if not isinstance(q, (int, np.integer)) or not 1 <= q < n:
        raise OptionsError(f"q must be a whole number from 1 to {n - 1}; got {q!r}.", key="q",
                           fix="Scan at the corank the analysis found.")
    if not 0.0 < float(trim) < 0.5:
        raise OptionsError(f"trim must be in (0, 0.5); got {trim!r}.", key="trim",
                           fix="Use 0.15 (15% at each end).")
    c, m, cm = _units(stats, max_units)
    k = c.shape[0]
    center = (c @ m) / c.sum()
    d = m - center
    g = (cm + c[:, None, None] * d[:, :, None] * d[:, None, :]).reshape(k, n * n)
    cd = c[:, None] * d
    cum = np.cumsum(c)
    total = cum[-1]
    lo_rows, hi_rows = trim * total, (1.0 - trim) * total
    splits = np.flatnonzero((cum[:-1] >= lo_rows) & (cum[:-1] <= hi_rows)) + 1
    need = n + 2
    splits = splits[(cum[splits - 1] >= need) & (total - cum[splits - 1] >= need)]
    if splits.size == 0:
        raise OptionsError(f"no candidate date leaves {need} rows on each side after trimming {trim:.0%}.",
                           key="trim", fix="Scan a longer sample, or use fewer variables.")
    ident = np.arange(k)[None, :]
    stat, ang, nb = _scan(c, g, cd, ident, splits, q, scale)
    j = int(np.argmax(stat[0]))
    observed = float(stat[0, j])
    scheme = scheme or ("stationary" if stats.ordered else "iid")
    if scheme != "iid" and block_length is None:
        block_length = politis_white_block_length(m, kind=scheme).value
    b = float(block_length or 1.0)
    null = np.empty(resamples)
    chunk = max(1, 2_000_000 // max(k * splits.size * n * n, 1))
    for s0 in range(0, resamples, chunk):
        nb_ = min(chunk, resamples - s0)
        seqs = draw_granules(k, scheme=scheme, resamples=nb_, rng=rng, block_length=b)
        null[s0:s0 + nb_] = _scan(c, g, cd, seqs, splits, q, scale)[0].max(axis=1)
    crit = float(np.quantile(null, level))
    p = float((1 + np.sum(null >= observed)) / (1 + resamples))
    found = observed > crit
    split_unit = int(splits[j])
    split_row = int(cum[split_unit - 1])
    interval = (split_row, split_row)
    if found:
        left, right = np.arange(split_unit), np.arange(split_unit, k)
        dates = np.empty(resamples, dtype=np.int64)
        for s0 in range(0, resamples, chunk):
            nb_ = min(chunk, resamples - s0)
            sl = left[draw_granules(left.size, scheme=scheme, resamples=nb_, rng=rng, block_length=b)]
            sr = right[draw_granules(right.size, scheme=scheme, resamples=nb_, rng=rng, block_length=b)]
            seqs = np.concatenate([sl, sr], axis=1)
            st, _, nbs = _scan(c, g, cd, seqs, splits, q, scale)
            jj = np.argmax(st, axis=1)
            dates[s0:s0 + nb_] = np.round(nbs[np.arange(nb_), jj]).astype(np.int64)
        a = (1.0 - level) / 2.0
        lo, hi = np.quantile(dates, [a, 1.0 - a])
        interval = (int(math.floor(lo)), int(math.ceil(hi)))
    rule = (f"Scan over {splits.size} dates between the first and last {trim:.0%} of rows for a change of the "
            f"{q}-dimensional relation subspace (weighted sine of the largest principal angle before/after); "
            f"critical value: the {level:.0%} quantile over {resamples} {scheme} bootstrap resamples of the "
            "whole sample, which carry no break.")
    return BreakScan(q=int(q), statistic=observed, critical_value=crit, p_value=p, level=float(level),
                     found=bool(found), split_row=split_row, split_interval=interval,
                     angle_deg=float(ang[0, j]), trim=float(trim), candidates=int(splits.size),
                     resamples=int(resamples), rule=rule)
