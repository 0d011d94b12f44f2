"""Trends and dependence: per-series stationarity verdicts, the spurious-regression caution, effective sample size.

Each series gets two tests with opposite null hypotheses, both with a
constant (level) term (:mod:`relspan.analysis.unitroot`, which computes what
statsmodels' ``adfuller`` and ``kpss`` compute):

- ADF (Dickey & Fuller 1979; lag order by AIC): null "unit root";
- KPSS (Kwiatkowski, Phillips, Schmidt & Shin 1992; automatic bandwidth): null
  "level-stationary".

Verdict at significance ``alpha`` (default 0.05): **stationary** when ADF
rejects and KPSS does not; **trending** when KPSS rejects and ADF does not
(a unit root or a deterministic trend: either way not level-stationary);
**cannot be judged** when both reject or neither does.

Caution: when two or more analysed series are trending, linear relations among
their levels can appear without any real relation (Granger & Newbold 1974);
they hold only if the series are cointegrated, which these diagnostics do
not test. Differences or growth rates avoid it.

Effective sample size (stated rule): with ``r_j`` the lag-1 autocorrelation of
series j, the rows worth of independent information for a covariance or
correlation between series i and j is ``T (1 - r_i r_j) / (1 + r_i r_j)``
(Bartlett 1946, for two AR(1) series; as used by Bretherton et al. 1999); the
window's value is the smallest over pairs; per series ``T (1 - r_j) / (1 + r_j)``
(the same rule for its mean).

With granules of more than one row, the series passed are granule means:
the tests then judge the granule-mean series (fewer, smoother points).

References
----------
.. [1] D. A. Dickey and W. A. Fuller, "Distribution of the estimators for
       autoregressive time series with a unit root", JASA 74(366), 427-431, 1979.
.. [2] D. Kwiatkowski, P. C. B. Phillips, P. Schmidt and Y. Shin, "Testing the
       null hypothesis of stationarity against the alternative of a unit
       root", Journal of Econometrics 54(1-3), 159-178, 1992.
.. [3] C. W. J. Granger and P. Newbold, "Spurious regressions in
       econometrics", Journal of Econometrics 2(2), 111-120, 1974.
.. [4] M. S. Bartlett, "On the theoretical specification and sampling
       properties of autocorrelated time-series", JRSS Supplement 8(1), 27-41, 1946.
.. [5] C. S. Bretherton, M. Widmann, V. P. Dymnikov, J. M. Wallace and I.
       Bladé, "The effective number of spatial degrees of freedom of a
       time-varying field", Journal of Climate 12(7), 1990-2009, 1999.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Sequence

import numpy as np

from relspan.analysis._common import check_names_len, jsonable
from relspan.analysis.unitroot import adf_constant, kpss_level
from relspan.errors import OptionsError

__all__ = ["SeriesDiagnostic", "TrendReport", "series_diagnostics", "effective_sample_size",
           "lag1_autocorrelation", "VERDICTS", "dataset_trends", "LEVEL_TRANSFORMS", "MIN_ROWS"]

#: transforms that leave a series in levels (a trend in the data stays a trend in what is analysed)
LEVEL_TRANSFORMS = ("none", "log", "demean", "standardise")
#: fewest time-ordered points the tests are run on
MIN_ROWS = 12

VERDICTS = ("stationary", "trending", "cannot be judged")


@dataclass(frozen=True, slots=True)
class SeriesDiagnostic:
    """Stationarity diagnostics of one series.

    Attributes
    ----------
    name : str
    adf_statistic, adf_p_value : float
        ADF with a constant, lag order by AIC (:func:`relspan.analysis.unitroot.adf_constant`).
    kpss_statistic, kpss_p_value : float
        KPSS for level stationarity, automatic bandwidth (:func:`relspan.analysis.unitroot.kpss_level`);
        its p-value is read from a table and clipped to [0.01, 0.10].
    verdict : str
        ``"stationary"``, ``"trending"`` or ``"cannot be judged"``.
    lag1 : float
        Lag-1 autocorrelation.
    effective_rows : float
        ``T (1 - r) / (1 + r)`` (at most T).
    """

    name: str
    adf_statistic: float
    adf_p_value: float
    kpss_statistic: float
    kpss_p_value: float
    verdict: str
    lag1: float
    effective_rows: float

    def to_dict(self) -> dict:
        return jsonable({f: getattr(self, f) for f in self.__slots__})


@dataclass(frozen=True, slots=True)
class TrendReport:
    """Diagnostics of the analysed series of one window or dataset.

    Attributes
    ----------
    series : tuple of SeriesDiagnostic
    rows : int
    alpha : float
    spurious_caution : bool
        True when two or more series are trending.
    caution : str
        The plain-words caution ("" when none).
    effective_rows : float
        Smallest pairwise ``T (1 - r_i r_j) / (1 + r_i r_j)``.
    rule : str
    """

    series: tuple[SeriesDiagnostic, ...]
    rows: int
    alpha: float
    spurious_caution: bool
    caution: str
    effective_rows: float
    rule: str
    source: str = ""
    trending_levels: tuple[str, ...] = ()

    def to_dict(self) -> dict:
        return jsonable({"series": [s.to_dict() for s in self.series], "rows": self.rows,
                         "alpha": self.alpha, "spurious_caution": self.spurious_caution,
                         "caution": self.caution, "effective_rows": self.effective_rows, "rule": self.rule,
                         "source": self.source, "trending_levels": list(self.trending_levels)})


def lag1_autocorrelation(x) -> np.ndarray:
    """Lag-1 autocorrelation of each column (``sum d_t d_{t-1} / sum d_t^2`` about the mean)."""
    a = np.asarray(x, dtype=float)
    a = a[:, None] if a.ndim == 1 else a
    d = a - a.mean(axis=0)
    den = np.sum(d * d, axis=0)
    with np.errstate(invalid="ignore", divide="ignore"):
        r = np.sum(d[1:] * d[:-1], axis=0) / den
    return np.where(den > 0, r, 0.0)


def effective_sample_size(x) -> tuple[float, np.ndarray]:
    """``(for covariances, per series)``: see the module notes for the rule."""
    a = np.asarray(x, dtype=float)
    t = a.shape[0]
    r = np.clip(lag1_autocorrelation(a), -0.999, 0.999)
    per = np.minimum(t * (1 - r) / (1 + r), t)
    rr = np.outer(r, r)
    iu = np.triu_indices(r.size, 1)
    pair = t * (1 - rr[iu]) / (1 + rr[iu]) if iu[0].size else np.array([float(t)])
    return float(min(np.min(pair), t)), per


def series_diagnostics(x, *, names: Sequence[str], alpha: float = 0.05) -> TrendReport:
    """ADF and KPSS per series, a plain verdict, the spurious-regression caution and effective rows.

    Parameters
    ----------
    x : (T, n) array_like
        The analysed series in time order (after the spec's transforms).
    names : sequence of str
    alpha : float
        Significance level of both tests.

    Returns
    -------
    TrendReport

    References
    ----------
    .. [1] D. A. Dickey and W. A. Fuller, JASA 74(366), 427-431, 1979.
    .. [2] D. Kwiatkowski, P. C. B. Phillips, P. Schmidt and Y. Shin, Journal of Econometrics 54(1-3),
           159-178, 1992.
    .. [3] C. W. J. Granger and P. Newbold, Journal of Econometrics 2(2), 111-120, 1974.
    """
    a = np.asarray(x, dtype=float)
    if a.ndim == 1:
        a = a[:, None]
    if a.ndim != 2 or a.shape[0] < 12 or not np.all(np.isfinite(a)):
        raise OptionsError(f"x must be a finite (T, n) array with T >= 12; got shape {a.shape}.", key="x",
                           fix="Pass at least 12 time-ordered rows.")
    if not 0.0 < alpha < 1.0:
        raise OptionsError(f"alpha must be in (0, 1); got {alpha!r}.", key="alpha", fix="Use 0.05.")
    names_t = check_names_len(names, a.shape[1])
    eff, per = effective_sample_size(a)
    r1 = lag1_autocorrelation(a)
    out = []
    for j, name in enumerate(names_t):
        col = a[:, j]
        if np.ptp(col) == 0:
            out.append(SeriesDiagnostic(name, np.nan, np.nan, np.nan, np.nan, "cannot be judged",
                                        float(r1[j]), float(per[j])))
            continue
        adf, kp = adf_constant(col), kpss_level(col)
        adf_rej, kpss_rej = adf.p_value < alpha, kp.p_value < alpha
        # a rank-deficient test regression gives no valid p-value: the series cannot be judged
        verdict = ("cannot be judged" if adf.singular or not np.isfinite(adf.p_value) else
                   "stationary" if adf_rej and not kpss_rej else
                   "trending" if kpss_rej and not adf_rej else "cannot be judged")
        out.append(SeriesDiagnostic(name, adf.statistic, adf.p_value, kp.statistic, kp.p_value, verdict,
                                    float(r1[j]), float(per[j])))
    trending = [s.name for s in out if s.verdict == "trending"]
    caution = ""
    if len(trending) >= 2:
        caution = (f"{', '.join(trending)} trend (ADF does not reject a unit root and KPSS rejects level "
                   f"stationarity, each at {alpha:g}): relations among the levels of trending series can "
                   "appear without any real relation (Granger & Newbold 1974) unless the series are "
                   "cointegrated, which is not tested here. Analyse differences, growth rates or detrended "
                   "series, or read "
                   "these relations with that caution.")
    rule = (f"ADF (constant, lag by AIC) and KPSS (level, automatic bandwidth) at {alpha:g}: stationary when "
            "ADF rejects and KPSS does not, trending when KPSS rejects and ADF does not, otherwise cannot be "
            "judged. Effective rows: T(1 - r_i r_j)/(1 + r_i r_j) with lag-1 autocorrelations r, smallest pair.")
    return TrendReport(series=tuple(out), rows=int(a.shape[0]), alpha=float(alpha),
                       spurious_caution=len(trending) >= 2, caution=caution, effective_rows=eff, rule=rule)


def dataset_trends(stats, *, names: Sequence[str], labels: Sequence[str] | None = None,
                   transforms: Sequence[str], gaps: int = 0, alpha: float = 0.05) -> TrendReport | None:
    """The trend diagnostics of a whole dataset, from its granules (time order), or None when too short.

    Parameters
    ----------
    stats : GranuleStats
        The dataset's granules in the analysed coordinates, in time order
        (:meth:`relspan.data.prepare.PreparedDataset.granules_between`).
        With one row per granule the series tested are the analysed rows
        themselves; with ``g`` rows per granule they are the granule means
        (an approximation, said in ``source``).
    names, labels : sequence of str
        Variable names and the reader's labels (labels are used in the caution).
    transforms : sequence of str
        The row transform of each variable; a trending series counts as analysed
        in levels when its transform is one of :data:`LEVEL_TRANSFORMS`.
    gaps : int
        Rows dropped because the previous period was absent (differences across
        a gap); the tests take the remaining rows as equally spaced.
    alpha : float

    Returns
    -------
    TrendReport or None
        None with fewer than :data:`MIN_ROWS` granules.
    """
    import dataclasses

    means = np.asarray(stats.means, dtype=float)
    if means.shape[0] < MIN_ROWS:
        return None
    labels = tuple(labels) if labels is not None else tuple(names)
    report = series_diagnostics(means, names=labels, alpha=alpha)
    g = int(stats.rows_per_granule)
    source = ("the analysed rows in time order (after the transforms)" if g == 1 else
              f"means of consecutive runs of {g} rows (the dataset is large; the tests and the effective "
              "rows judge these means, an approximation to the rows themselves)")
    if gaps:
        source += (f"; {gaps} row(s) after gaps in the time index were dropped by the difference transform and "
                   "the remaining rows are taken as equally spaced")
    levels = tuple(lab for lab, t, s in zip(labels, transforms, report.series)
                   if s.verdict == "trending" and t in LEVEL_TRANSFORMS)
    # rows and effective_rows count the points tested (granule means when g > 1)
    return dataclasses.replace(report, source=source, trending_levels=levels)
