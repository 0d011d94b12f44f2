"""Unit-root and stationarity tests of one series, with NumPy alone: augmented Dickey-Fuller and KPSS.

Both tests take a constant (level) term, as :mod:`relspan.analysis.trends`
uses them:

- **ADF** (Dickey & Fuller 1979, augmented with lagged differences as in Said
  & Dickey 1984): the regression of the first difference on a constant, the
  lagged level and ``p`` lagged differences; the statistic is the t ratio of
  the lagged level. ``p`` is chosen by Akaike's information criterion (Akaike
  1974) among ``0 .. p_max`` on a common sample of rows, with ``p_max =
  ceil(12 (T / 100)^(1/4))`` (Schwert 1989), capped at ``T // 2 - 2``; the
  chosen regression is then refitted on every row it can use. The p-value is
  MacKinnon's (1994) response-surface approximation of the statistic's
  asymptotic distribution (one series, constant term): ``Phi(b0 + b1 t + b2
  t^2)`` with his coefficients, 1 above ``2.74`` and 0 below ``-18.83``.
- **KPSS** (Kwiatkowski, Phillips, Schmidt & Shin 1992) for level
  stationarity: ``eta = sum(S_t^2) / T^2 / s^2(l)`` with ``S_t`` the partial
  sums of the demeaned series and ``s^2(l)`` the Bartlett-weighted long-run
  variance (Newey & West 1987) at bandwidth ``l`` chosen from the data
  (Hobijn, Franses & Ooms 2004, after Newey & West 1994). The p-value is
  interpolated linearly in the authors' table of critical values (Table 1:
  0.347, 0.463, 0.574, 0.739 at 10%, 5%, 2.5%, 1%), and held at 0.10 above and
  0.01 below the table's ends.

Each least-squares fit uses the pseudo-inverse of its design (singular
values below ``1e-15`` of the largest treated as zero) and counts its rank as
NumPy's ``matrix_rank`` does; a design of deficient rank at any candidate lag
is reported (``singular``), since its t ratio and p-value are then not valid.
These are the computations of statsmodels' ``adfuller(x, regression="c",
autolag="AIC")`` and ``kpss(x, regression="c", nlags="auto")``, which the
tests use as the reference (``tests/analysis/test_unitroot.py``); relspan no
longer imports statsmodels at run time (its import cost about 0.4 s of every
build with a time column).

References
----------
.. [1] D. A. Dickey and W. A. Fuller, "Distribution of the estimators for
       autoregressive time series with a unit root", JASA 74(366), 427-431, 1979.
.. [2] S. E. Said and D. A. Dickey, "Testing for unit roots in autoregressive-moving
       average models of unknown order", Biometrika 71(3), 599-607, 1984.
.. [3] H. Akaike, "A new look at the statistical model identification", IEEE
       Transactions on Automatic Control 19(6), 716-723, 1974.
.. [4] G. W. Schwert, "Tests for unit roots: a Monte Carlo investigation", Journal
       of Business & Economic Statistics 7(2), 147-159, 1989.
.. [5] J. G. MacKinnon, "Approximate asymptotic distribution functions for unit-root
       and cointegration tests", Journal of Business & Economic Statistics 12(2),
       167-176, 1994.
.. [6] D. Kwiatkowski, P. C. B. Phillips, P. Schmidt and Y. Shin, "Testing the null
       hypothesis of stationarity against the alternative of a unit root", Journal
       of Econometrics 54(1-3), 159-178, 1992.
.. [7] W. K. Newey and K. D. West, "A simple, positive semi-definite,
       heteroskedasticity and autocorrelation consistent covariance matrix",
       Econometrica 55(3), 703-708, 1987.
.. [8] W. K. Newey and K. D. West, "Automatic lag selection in covariance matrix
       estimation", Review of Economic Studies 61(4), 631-653, 1994.
.. [9] B. Hobijn, P. H. Franses and M. Ooms, "Generalizations of the KPSS-test for
       stationarity", Statistica Neerlandica 58(4), 483-502, 2004.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

__all__ = ["AdfResult", "KpssResult", "adf_constant", "kpss_level", "mackinnon_p_value"]

#: MacKinnon (1994), one I(1) series, constant term: below ``TAU_STAR`` the small-p
#: coefficients apply, above it the large-p ones; outside ``[TAU_MIN, TAU_MAX]`` the
#: p-value is 0 or 1 (his Table 3 and the response-surface coefficients of his Table 4)
TAU_STAR, TAU_MIN, TAU_MAX = -1.61, -18.83, 2.74
TAU_SMALL_P = (2.1659, 1.4412, 3.8269e-2)
TAU_LARGE_P = (1.7339, 9.3202e-1, -1.2745e-1, -1.0368e-2)

#: Kwiatkowski et al. (1992), Table 1, level stationarity: critical values at the levels beside them
KPSS_CRITICAL = (0.347, 0.463, 0.574, 0.739)
KPSS_LEVELS = (0.10, 0.05, 0.025, 0.01)

_RCOND = 1e-15


@dataclass(frozen=True, slots=True)
class AdfResult:
    """Augmented Dickey-Fuller test with a constant: statistic, MacKinnon p-value, lags, rows, rank flag."""

    statistic: float
    p_value: float
    lags: int
    rows: int
    singular: bool


@dataclass(frozen=True, slots=True)
class KpssResult:
    """KPSS test of level stationarity: statistic, table p-value (0.01 .. 0.10) and bandwidth."""

    statistic: float
    p_value: float
    lags: int


def mackinnon_p_value(tau: float) -> float:
    """MacKinnon's (1994) approximate p-value of an ADF t ratio (one series, constant term)."""
    if tau > TAU_MAX:
        return 1.0
    if tau < TAU_MIN:
        return 0.0
    coef = TAU_SMALL_P if tau <= TAU_STAR else TAU_LARGE_P
    z = 0.0
    for c in reversed(coef):  # Horner, highest power first
        z = z * tau + c
    return 0.5 * math.erfc(-z / math.sqrt(2.0))


def _ols(y: np.ndarray, x: np.ndarray) -> tuple[np.ndarray, np.ndarray, float, int]:
    """Least squares by the pseudo-inverse: coefficients, their unscaled covariance, SSR, rank."""
    u, s, vt = np.linalg.svd(x, False)
    rank = int(np.count_nonzero(s > s.max() * s.size * np.finfo(float).eps))
    inv = np.where(s > _RCOND * s.max(), 1.0 / np.where(s > 0, s, 1.0), 0.0)
    pinv = np.dot(vt.T, inv[:, None] * u.T)
    beta = pinv @ y
    resid = y - x @ beta
    return beta, pinv @ pinv.T, float(resid @ resid), rank


def _with_constant(x: np.ndarray, first: bool) -> np.ndarray:
    """``x`` with a column of ones (first or last), unless a non-zero constant column is already there."""
    if np.any((np.ptp(x, axis=0) == 0) & (x[0] != 0)):
        return x
    ones = np.ones((x.shape[0], 1))
    return np.hstack([ones, x] if first else [x, ones])


def _design(x: np.ndarray, dx: np.ndarray, lags: int) -> tuple[np.ndarray, np.ndarray]:
    """Rows usable with ``lags`` lagged differences: columns level, dx(t-1) .. dx(t-lags); and dx(t)."""
    rows = dx.size - lags
    cols = [x[-rows - 1:-1]] + [dx[lags - i:lags - i + rows] for i in range(1, lags + 1)]
    return np.column_stack(cols), dx[-rows:]


def _aic(ssr: float, rows: int, rank: int) -> float:
    half = rows / 2.0
    with np.errstate(divide="ignore"):  # a perfect fit: log(0) = -inf, the smallest criterion
        llf = -np.log(ssr) * half - (1.0 + math.log(math.pi / half)) * half
    return float(-2.0 * llf + 2.0 * rank)


def adf_constant(x) -> AdfResult:
    """Augmented Dickey-Fuller test with a constant, lag order by AIC (module notes).

    Parameters
    ----------
    x : (T,) array_like
        A finite, non-constant series in time order, ``T >= 8``.

    Returns
    -------
    AdfResult
        ``singular`` is True when a candidate or the final regression's design
        has deficient rank (its statistic and p-value are then not valid).
    """
    a = np.asarray(x, dtype=float)
    t = a.size
    if a.ndim != 1 or t < 8 or not np.all(np.isfinite(a)) or np.ptp(a) == 0:
        raise ValueError("x must be a finite, non-constant series of at least 8 values")
    maxlag = min(t // 2 - 2, int(math.ceil(12.0 * (t / 100.0) ** 0.25)))
    dx = np.diff(a)
    full, y = _design(a, dx, maxlag)
    rhs = _with_constant(full, first=True)
    start = rhs.shape[1] - full.shape[1] + 1
    singular = False
    best = None
    for k in range(start, start + maxlag + 1):
        _, _, ssr, rank = _ols(y, rhs[:, :k])
        singular |= rank < k
        cand = (_aic(ssr, y.size, rank), k)
        best = cand if best is None or cand < best else best
    lags = best[1] - start
    design, y = _design(a, dx, lags)
    design = _with_constant(design, first=False)
    beta, cov, ssr, rank = _ols(y, design)
    singular |= rank < design.shape[1]
    with np.errstate(divide="ignore", invalid="ignore"):  # a perfect fit: t = +-inf or nan
        stat = float(beta[0] / np.sqrt(cov[0, 0] * (ssr / (y.size - rank))))
    p = math.nan if math.isnan(stat) else mackinnon_p_value(stat)
    return AdfResult(stat, p, int(lags), int(y.size), bool(singular))


def _bandwidth(e: np.ndarray) -> int:
    """Hobijn, Franses & Ooms' automatic Bartlett bandwidth for KPSS (after Newey & West 1994)."""
    t = e.size
    pilot = int(t ** (2.0 / 9.0))
    s0 = float(np.sum(e ** 2)) / t
    s1 = 0.0
    for i in range(1, pilot + 1):
        g = float(e[i:] @ e[:t - i]) / (t / 2.0)
        s0 += g
        s1 += i * g
    ratio = s1 / s0
    return int(1.1447 * (ratio * ratio) ** (1.0 / 3.0) * t ** (1.0 / 3.0))


def kpss_level(x) -> KpssResult:
    """KPSS test of level stationarity, automatic bandwidth, table p-value (module notes).

    Parameters
    ----------
    x : (T,) array_like
        A finite, non-constant series in time order, ``T >= 2``.

    Returns
    -------
    KpssResult
        ``p_value`` is held at 0.10 (the true value is larger) and 0.01 (smaller)
        outside the table.
    """
    a = np.asarray(x, dtype=float)
    t = a.size
    if a.ndim != 1 or t < 2 or not np.all(np.isfinite(a)) or np.ptp(a) == 0:
        raise ValueError("x must be a finite, non-constant series of at least 2 values")
    e = a - a.mean()
    lags = min(_bandwidth(e), t - 1)
    s2 = float(np.sum(e ** 2))
    for i in range(1, lags + 1):
        s2 += 2.0 * float(e[i:] @ e[:t - i]) * (1.0 - i / (lags + 1.0))
    s2 /= t
    eta = float(np.sum(np.cumsum(e) ** 2)) / (t * t)
    stat = eta / s2
    return KpssResult(stat, float(np.interp(stat, KPSS_CRITICAL, KPSS_LEVELS)), int(lags))
