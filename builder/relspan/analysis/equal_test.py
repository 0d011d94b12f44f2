"""Equal-noise corank by a test: how many of the smallest eigenvalues are equal.

Under equal noise ``N = s^2 I`` a corank-q model puts the q smallest
eigenvalues of the population covariance at ``s^2`` and the others above
it, whatever ``s^2`` is: the corank is the multiplicity of the smallest
eigenvalue. It is decided here by the likelihood-ratio test of equality of
the k smallest eigenvalues (Lawley 1956; Anderson 1963), applied for
k = 2, 3, ... until the first rejection; the probabilistic-PCA evidence of
Minka (2000) is a second opinion. Counting eigenvalues below a tolerance is
the bounded-noise rule, not this one.

Corank 1 is always available under equal noise (take ``s^2`` equal to the
smallest eigenvalue): choosing q = 1 says only that no second relation is
supported, not that one relation is shown.

Scale: the equal-noise model is not scale invariant; the test applies to
the covariance on the scale the analysis uses (the caller passes that
matrix: data units, the common scale of full-sample standard deviations, or
a window's correlation scale). On the correlation scale the chi-square
reference is approximate, because the standardisation is itself estimated.

References
----------
.. [1] D. N. Lawley, "Tests of significance for the latent roots of
       covariance and correlation matrices", Biometrika 43(1/2), 128-136, 1956.
.. [2] T. W. Anderson, "Asymptotic theory for principal component
       analysis", Annals of Mathematical Statistics 34(1), 122-148, 1963.
.. [3] M. S. Bartlett, "A note on the multiplying factors for various chi-square
       approximations", JRSS B 16(2), 296-298, 1954.
.. [4] M. E. Tipping and C. M. Bishop, "Probabilistic principal component
       analysis", JRSS B 61(3), 611-622, 1999.
.. [5] T. P. Minka, "Automatic choice of dimensionality for PCA", Advances in
       Neural Information Processing Systems 13, 598-604, 2000.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import special

from relspan.analysis._common import check_cov, jsonable
from relspan.analysis._dist import chi2_sf
from relspan.errors import OptionsError

__all__ = ["EigenEqualityTest", "EqualNoiseCorankTest", "equal_eigenvalues_test", "equal_noise_corank",
           "sequential_corank", "minka_log_evidence", "DEFAULT_TEST_LEVEL", "SerialDependence",
           "serial_dependence", "effective_nobs_by_k", "SERIAL_CLIP"]

#: lag-1 autocorrelations are clipped to this magnitude before the inflation factor is formed
SERIAL_CLIP = 0.99

#: significance level of each test in the sequence when the spec does not say
DEFAULT_TEST_LEVEL = 0.05


@dataclass(frozen=True, slots=True)
class EigenEqualityTest:
    """Test that the k smallest eigenvalues of a covariance are equal.

    Attributes
    ----------
    k : int
        How many of the smallest eigenvalues are tested.
    statistic : float
        ``nu' * (k log(mean l) - sum log l)`` over the k smallest eigenvalues ``l``.
    df : int
        ``k (k + 1) / 2 - 1``.
    p_value : float
        Upper tail of the chi-square distribution with ``df`` degrees of freedom.
    multiplier : float
        ``nu'``, the Lawley-corrected multiplier (see :func:`equal_eigenvalues_test`).
    nobs : float
        Observations used (the covariance's rows, or an effective sample size).
    """

    k: int
    statistic: float
    df: int
    p_value: float
    multiplier: float
    nobs: float

    def to_dict(self) -> dict:
        return jsonable({"k": self.k, "statistic": self.statistic, "df": self.df, "p_value": self.p_value,
                         "multiplier": self.multiplier, "nobs": self.nobs})


def _check_eigs(eigenvalues) -> np.ndarray:
    lam = np.sort(np.asarray(eigenvalues, dtype=float).reshape(-1))
    if lam.size < 2 or not np.all(np.isfinite(lam)):
        raise OptionsError(f"need at least 2 finite eigenvalues; got {lam.size}.", key="eigenvalues",
                           fix="Pass the eigenvalues of the window covariance on the analysis scale.")
    return lam


def equal_eigenvalues_test(eigenvalues, *, k: int, nobs: float) -> EigenEqualityTest:
    """Likelihood-ratio test that the ``k`` smallest eigenvalues of a covariance are equal.

    Parameters
    ----------
    eigenvalues : (n,) array_like
        Eigenvalues of the sample covariance (any order; divisor ``N - 1``).
    k : int
        2 <= k <= n.
    nobs : float
        ``N``, the rows behind the covariance (for dependent rows an
        effective sample size, which makes the reference distribution approximate).

    Returns
    -------
    EigenEqualityTest

    Notes
    -----
    With ``l_1 >= ... >= l_n`` the sample eigenvalues, ``m = n - k`` the
    larger ones kept, ``lbar`` the mean of the k smallest and ``nu = N - 1``:

        X^2 = nu' [ k ln(lbar) - sum_{j=m+1}^{n} ln(l_j) ],
        nu' = nu - m - (2k^2 + k + 2) / (6k) + lbar^2 sum_{i=1}^{m} 1 / (l_i - lbar)^2,

    referred to chi-square with ``k(k+1)/2 - 1`` degrees of freedom (Gaussian
    rows). ``nu' = nu`` is Anderson's (1963) large-sample form; the
    Bartlett-type correction terms are Lawley's (1956); with ``m = 0`` the
    statistic is the sphericity test with Bartlett's (1954) factor. (The form
    of ``nu'`` is as usually quoted from Lawley 1956, recalled from memory and
    checked here by the test's simulated size.) The test assumes Gaussian
    rows; heavy tails make it reject too often (Waternaux 1976).

    References
    ----------
    .. [1] D. N. Lawley, Biometrika 43(1/2), 128-136, 1956.
    .. [2] T. W. Anderson, Ann. Math. Statist. 34(1), 122-148, 1963.
    .. [3] M. S. Bartlett, JRSS B 16(2), 296-298, 1954.
    .. [4] C. M. Waternaux, "Asymptotic distribution of the sample roots for a
           nonnormal population", Biometrika 63(3), 639-645, 1976.
    """
    lam = _check_eigs(eigenvalues)[::-1]  # descending
    n = lam.size
    if not isinstance(k, (int, np.integer)) or not 2 <= k <= n:
        raise OptionsError(f"k must be a whole number from 2 to {n}; got {k!r}.", key="k",
                           fix="Test two or more of the smallest eigenvalues.")
    if not (float(nobs) > n):
        raise OptionsError(f"nobs must exceed the number of variables ({n}); got {nobs!r}.", key="nobs",
                           fix="Pass the number of rows behind the covariance.")
    m = n - k
    small = lam[m:]
    df = k * (k + 1) // 2 - 1
    if small[-1] <= 0:
        # a zero eigenvalue: exact collinearity among the smallest; equality holds only if all are 0
        eq = bool(np.all(small == 0))
        return EigenEqualityTest(k=int(k), statistic=0.0 if eq else math.inf, df=df,
                                 p_value=1.0 if eq else 0.0, multiplier=float("nan"), nobs=float(nobs))
    lbar = float(small.mean())
    nu = float(nobs) - 1.0
    corr = lbar**2 * float(np.sum(1.0 / (lam[:m] - lbar) ** 2)) if m else 0.0
    mult = nu - m - (2.0 * k * k + k + 2.0) / (6.0 * k) + corr
    raw = k * math.log(lbar) - float(np.sum(np.log(small)))
    stat = max(mult, 0.0) * max(raw, 0.0)
    return EigenEqualityTest(k=int(k), statistic=stat, df=df, p_value=float(chi2_sf(stat, df)),
                             multiplier=mult, nobs=float(nobs))


def sequential_corank(eigenvalues, *, nobs: float, level: float = DEFAULT_TEST_LEVEL) -> int:
    """The corank chosen by testing k = 2, 3, ... smallest eigenvalues equal, up to the first rejection.

    Returns q in 1 .. n: the largest k reached without a rejection (1 when
    the two smallest already differ; n when all eigenvalues are equal).
    """
    lam = _check_eigs(eigenvalues)
    q = 1
    for k in range(2, lam.size + 1):
        if equal_eigenvalues_test(lam, k=k, nobs=nobs).p_value < level:
            break
        q = k
    return q


def sequential_corank_stack(eigenvalues: np.ndarray, *, nobs, level: float = DEFAULT_TEST_LEVEL
                            ) -> np.ndarray:
    """:func:`sequential_corank` for a ``(B, n)`` stack of eigenvalues, vectorised over rows.

    ``nobs`` is a number, a ``(B,)`` array (rows of each resample) or a
    ``(B, n - 1)`` array whose column ``k - 2`` is the sample size of the test
    of the k smallest eigenvalues (:func:`effective_nobs_by_k`).
    """
    lam = np.sort(np.asarray(eigenvalues, dtype=float), axis=1)[:, ::-1]
    b, n = lam.shape
    nobs_a = np.asarray(nobs, dtype=float)
    if nobs_a.ndim == 2:
        nu_k = np.broadcast_to(nobs_a, (b, n - 1)) - 1.0
    else:
        nu_k = np.broadcast_to(np.broadcast_to(nobs_a, (b,))[:, None], (b, n - 1)) - 1.0
    q = np.ones(b, dtype=int)
    alive = np.ones(b, dtype=bool)
    with np.errstate(divide="ignore", invalid="ignore"):
        for k in range(2, n + 1):
            m = n - k
            nu = nu_k[:, k - 2]
            small = lam[:, m:]
            lbar = small.mean(axis=1)
            corr = (lbar**2 * np.sum(1.0 / (lam[:, :m] - lbar[:, None]) ** 2, axis=1)) if m else 0.0
            mult = np.maximum(nu - m - (2.0 * k * k + k + 2.0) / (6.0 * k) + corr, 0.0)
            raw = np.maximum(k * np.log(lbar) - np.sum(np.log(small), axis=1), 0.0)
            stat = np.where(small[:, -1] > 0, mult * raw, np.where(np.all(small == 0, axis=1), 0.0, np.inf))
            p = chi2_sf(stat, k * (k + 1) // 2 - 1)
            ok = alive & (p >= level)
            q[ok] = k
            alive = ok
            if not alive.any():
                break
    return q


@dataclass(frozen=True, slots=True, eq=False)
class SerialDependence:
    """Lag-0 and lag-1 autocovariance matrices of a time-ordered window (analysed coordinates).

    Attributes
    ----------
    c0 : (n, n) ndarray
        Covariance of the series the lags are read from.
    c1 : (n, n) ndarray
        Lag-1 autocovariance, symmetrised (``(G + G') / 2``, ``G = sum_t z_t z_{t+1}' / K``).
    points : int
        ``K``, the points of that series (rows, or granule means).
    rows_per_point : int
        1 when the series is the rows themselves; ``g`` when it is the means of granules of up to
        ``g`` rows (then only dependence between granules is seen and the correction is smaller).
    """

    c0: np.ndarray
    c1: np.ndarray
    points: int
    rows_per_point: int = 1

    def lag1(self, directions) -> np.ndarray:
        """Lag-1 autocorrelation of the series projected on each direction.

        ``directions`` is ``(..., n, k)``: columns are directions in analysed coordinates.
        Returns ``(..., k)``, clipped to ``[-SERIAL_CLIP, SERIAL_CLIP]`` (0 where undefined).
        """
        u = np.asarray(directions, dtype=float)
        with np.errstate(divide="ignore", invalid="ignore"):
            num = np.einsum("...ik,ij,...jk->...k", u, self.c1, u)
            den = np.einsum("...ik,ij,...jk->...k", u, self.c0, u)
            r = num / den
        r = np.where(np.isfinite(r), r, 0.0)
        return np.clip(r, -SERIAL_CLIP, SERIAL_CLIP)


def serial_dependence(means, *, rows_per_point: int = 1) -> SerialDependence | None:
    """:class:`SerialDependence` of a ``(K, n)`` series in time order (None when ``K < 3``)."""
    z = np.asarray(means, dtype=float)
    if z.ndim != 2 or z.shape[0] < 3 or not np.all(np.isfinite(z)):
        return None
    z = z - z.mean(axis=0, keepdims=True)
    k = z.shape[0]
    c0 = z.T @ z / k
    g = z[:-1].T @ z[1:] / k
    return SerialDependence(c0=c0, c1=(g + g.T) / 2.0, points=int(k), rows_per_point=int(rows_per_point))


def effective_nobs_by_k(nobs, lag1) -> np.ndarray:
    """Sample size of the test of the k smallest eigenvalues, k = 2 .. n, under serial dependence.

    Parameters
    ----------
    nobs : float or (B,) array_like
        ``T``, the rows behind each covariance.
    lag1 : (n,) or (B, n) array_like
        Lag-1 autocorrelations ``r_a`` of the eigen-components, in ascending order of eigenvalue.

    Returns
    -------
    (B, n - 1) ndarray
        Column ``k - 2``: ``T / max_{a, b <= k} (1 + r_a r_b) / (1 - r_a r_b)``, at most ``T``.

    Notes
    -----
    The test statistic is a smooth function of the sample covariance of the k
    components it tests. For two series with lag-1 autocorrelations ``r_a``,
    ``r_b`` that behave like AR(1) series, the variance of their sample
    covariance (and, with ``a = b``, of a sample variance) is that of
    ``T (1 - r_a r_b) / (1 + r_a r_b)`` independent rows (Bartlett 1946; the
    factor the trends section uses for effective rows). The test takes the
    largest factor over the pairs it tests (``a = b`` included), so it errs
    toward rejecting less; with equal coefficients ``r`` this is
    ``T (1 - r^2) / (1 + r^2)``. The factor never raises the sample size above ``T``.

    References
    ----------
    .. [1] M. S. Bartlett, "On the theoretical specification and sampling
           properties of autocorrelated time-series", JRSS Supplement 8(1), 27-41, 1946.
    """
    r = np.atleast_2d(np.clip(np.asarray(lag1, dtype=float), -SERIAL_CLIP, SERIAL_CLIP))
    b, n = r.shape
    t = np.broadcast_to(np.asarray(nobs, dtype=float), (b,)) if np.ndim(nobs) else np.full(b, float(nobs))
    # the largest r_a r_b over a, b <= k is max(max r, -min r)^2 (the pair of the largest |r|)
    top = np.maximum.accumulate(np.abs(r), axis=1)[:, 1:]
    p = top**2
    factor = np.maximum((1.0 + p) / (1.0 - p), 1.0)
    return t[:, None] / factor


def minka_log_evidence(eigenvalues, *, nobs: float) -> np.ndarray:
    """Laplace approximation to the probabilistic-PCA evidence for each signal dimension (Minka 2000).

    Parameters
    ----------
    eigenvalues : (n,) array_like
        Eigenvalues of the sample covariance.
    nobs : float
        Rows behind it.

    Returns
    -------
    (n - 1,) ndarray
        Entry ``d - 1`` is the log evidence of ``d`` signal dimensions, i.e.
        of corank ``q = n - d`` under equal noise, for d = 1 .. n-1
        (``-inf`` where an eigenvalue is zero).

    Notes
    -----
    Minka (2000), eq. (30)-(31): with ``l`` descending, ``v`` the mean of the
    ``n - d`` smallest, ``m = n d - d (d + 1) / 2``,
    ``log p = log p(U) - N/2 sum_{i<=d} log l_i - N (n - d)/2 log v
    + (m + d)/2 log(2 pi) - 1/2 log|A_Z| - d/2 log N``, with
    ``log p(U) = -d log 2 + sum_{i<=d} [lgamma((n - i + 1)/2) - (n - i + 1)/2 log pi]``
    and ``|A_Z| = prod_{i<=d} prod_{j>i} N (l~_j^{-1} - l~_i^{-1})(l_i - l_j)``,
    ``l~_j = v`` for ``j > d``.

    References
    ----------
    .. [1] T. P. Minka, NIPS 13, 598-604, 2000.
    .. [2] M. E. Tipping and C. M. Bishop, JRSS B 61(3), 611-622, 1999.
    """
    lam = _check_eigs(eigenvalues)[::-1]
    n = lam.size
    nn = float(nobs)
    out = np.full(n - 1, -np.inf)
    for d in range(1, n):
        if lam[d - 1] <= 0:
            continue
        v = float(lam[d:].mean())
        if v <= 0:
            continue
        pu = -d * math.log(2.0) + sum(special.gammaln((n - i + 1) / 2.0) - math.log(math.pi) * (n - i + 1) / 2.0
                                      for i in range(1, d + 1))
        pl = -nn / 2.0 * float(np.sum(np.log(lam[:d])))
        pv = -nn * (n - d) / 2.0 * math.log(v)
        m = n * d - d * (d + 1) / 2.0
        pp = math.log(2.0 * math.pi) * (m + d) / 2.0
        lt = lam.copy()
        lt[d:] = v
        pa = 0.0
        for i in range(d):
            for j in range(i + 1, n):
                pa += math.log((lam[i] - lam[j]) * (1.0 / lt[j] - 1.0 / lt[i])) + math.log(nn)
        out[d - 1] = pu + pl + pv + pp - pa / 2.0 - d * math.log(nn) / 2.0
    return out


@dataclass(frozen=True, slots=True)
class EqualNoiseCorankTest:
    """The equal-noise corank decided by tests of equal smallest eigenvalues.

    Attributes
    ----------
    corank : int
        Chosen q (1 .. n): the multiplicity of the smallest eigenvalue the
        sequential tests accept. 1 means "no second relation is supported"
        (corank 1 always fits equal noise); n means all eigenvalues look equal
        (nothing distinguishes the data from pure equal noise).
    consistent : tuple of int
        Every k whose own test is not rejected at ``level`` (1 always
        included): the coranks the data do not contradict.
    tests : tuple of EigenEqualityTest
        One per k = 2 .. n.
    level : float
        Significance level of each test.
    nobs : float
        Rows (or effective sample size) used.
    scale : str
        The scale of the covariance tested (as stated by the caller).
    evidence_corank : int or None
        Second opinion: corank ``n - d`` of the signal dimension ``d`` with the
        largest Minka (2000) evidence (None when it cannot be computed).
    log_evidence : tuple of float
        Minka log evidence for coranks n-1, n-2, ..., 1 (i.e. d = 1 .. n-1), in that order.
    rule : str
        The decision rule in one sentence.
    """

    corank: int
    consistent: tuple[int, ...]
    tests: tuple[EigenEqualityTest, ...]
    level: float
    nobs: float
    scale: str
    evidence_corank: int | None
    log_evidence: tuple[float, ...]
    rule: str

    def to_dict(self) -> dict:
        return jsonable({"corank": self.corank, "consistent": list(self.consistent),
                         "tests": [t.to_dict() for t in self.tests], "level": self.level, "nobs": self.nobs,
                         "scale": self.scale, "evidence_corank": self.evidence_corank,
                         "log_evidence": list(self.log_evidence), "rule": self.rule})


def equal_noise_corank(cov, *, nobs: float, scale: str, level: float = DEFAULT_TEST_LEVEL,
                       names=None) -> EqualNoiseCorankTest:
    """Choose the equal-noise corank of a window by sequential tests of equal smallest eigenvalues.

    Parameters
    ----------
    cov : (n, n) array_like
        The covariance on the analysis scale (say which in ``scale``).
    nobs : float
        Rows behind it (an effective sample size for autocorrelated rows).
    scale : str
        A label for the scale of ``cov`` ("data units", "common scale",
        "correlation"), recorded on the result.
    level : float
        Significance level of each test, in (0, 1).
    names : sequence of str, optional
        Variable names (only checked for length).

    Returns
    -------
    EqualNoiseCorankTest

    References
    ----------
    .. [1] D. N. Lawley, Biometrika 43(1/2), 128-136, 1956.
    .. [2] T. W. Anderson, Ann. Math. Statist. 34(1), 122-148, 1963.
    .. [3] T. P. Minka, NIPS 13, 598-604, 2000.
    """
    s, _ = check_cov(cov, names=names, names_required=False)
    if not (0.0 < float(level) < 1.0):
        raise OptionsError(f"level must be in (0, 1); got {level!r}.", key="level",
                           fix="Use a significance level such as 0.05.")
    lam = np.linalg.eigvalsh(s)
    n = lam.size
    tests = tuple(equal_eigenvalues_test(lam, k=k, nobs=nobs) for k in range(2, n + 1))
    q = 1
    for t in tests:
        if t.p_value < level:
            break
        q = t.k
    consistent = (1,) + tuple(t.k for t in tests if t.p_value >= level)
    ev = minka_log_evidence(lam, nobs=nobs) if n >= 2 else np.zeros(0)
    ev_q = None
    if ev.size and np.isfinite(ev).any():
        ev_q = int(n - (int(np.argmax(ev)) + 1))
    rule = (f"Test that the k smallest eigenvalues are equal (Lawley 1956; Anderson 1963) for k = 2, 3, "
            f"..., each at level {float(level):g}; the corank is the largest k reached before the first "
            f"rejection, on the {scale} scale with {float(nobs):g} observations.")
    return EqualNoiseCorankTest(corank=q, consistent=consistent, tests=tests, level=float(level),
                                nobs=float(nobs), scale=scale, evidence_corank=ev_q,
                                log_evidence=tuple(float(x) for x in ev), rule=rule)
