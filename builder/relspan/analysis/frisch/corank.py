"""The largest corank under diagonal noise: existence and impossibility certificates.

Certificates (on the correlation scale):

* Existence of corank ``q`` within ``eps``: ``d >= 0`` and ``R - D - E`` PSD
  with ``q`` zero eigenvalues, where ``E`` collects the ``q`` smallest
  eigen-pairs of ``R - D`` (and any negative ones); ``||E||_2 <= eps``.
* Impossibility: with ``r_j(eps) = 1/inv(R + eps I)[j, j]``, every ``d``
  admitted above satisfies ``d <= r(eps)``, hence
  ``lambda_q(R - diag r(eps)) <= eps``; a larger value rules corank ``q`` out.

Ledermann's bound says which coranks can arise from sampling alone.

References
----------
.. [1] A. Shapiro, "Rank-reducibility of a symmetric matrix and sampling
       theory of minimum trace factor analysis", Psychometrika 47(2),
       187-199, 1982.
.. [2] J. M. F. ten Berge and H. A. L. Kiers, "A numerical approach to the
       approximate and the exact minimum rank of a covariance matrix",
       Psychometrika 56(2), 309-315, 1991.
.. [3] A. Shapiro and J. M. F. ten Berge, "Statistical inference of minimum
       rank factor analysis", Psychometrika 67(1), 79-94, 2002.
.. [4] W. Ledermann, "On the rank of the reduced correlational matrix in
       multiple-factor analysis", Psychometrika 2(2), 85-93, 1937.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Sequence

import numpy as np

from relspan.analysis._common import check_whole
from relspan.analysis._export import fields_dict, frame
from relspan.analysis.frisch._base import check_eps, correlation, frisch_cov
from relspan.analysis.frisch.minrank import _certify, _descend_many, _relations_back, _Searcher
from relspan.analysis.frisch.mintrace import _MT_GAP, MinimumTrace, _barrier_batch, _barrier_trace
from relspan.errors import OptionsError

__all__ = ["CorankCertificate", "FrischCorank", "FrischCorankStack", "ledermann_corank", "frisch_max_corank",
           "frisch_max_corank_many", "corank_verdict", "frisch_corank_stack"]


def ledermann_corank(n: int) -> int:
    """Largest corank a generic covariance of ``n`` variables can have exactly.

    Ledermann's bound ``phi(n) = (2n + 1 - sqrt(8n + 1)) / 2``: matrices
    whose minimum rank is below ``phi(n)`` have measure zero (Shapiro 1982),
    so an exact corank above ``n - ceil(phi(n))`` has probability zero for a
    sample covariance, while coranks up to it can occur without any true
    relation.

    References
    ----------
    .. [1] W. Ledermann, "On the rank of the reduced correlational matrix in
           multiple-factor analysis", Psychometrika 2(2), 1937.
    .. [2] A. Shapiro, Psychometrika 47(2), 1982.
    """
    phi = (2 * n + 1 - math.sqrt(8 * n + 1)) / 2
    return int(n - math.ceil(phi - 1e-12))


@dataclass(frozen=True, slots=True)
class CorankCertificate:
    """Evidence on one corank ``q`` under diagonal noise, at tolerance ``eps``.

    All eigenvalues, ``eps`` and ``e_norm`` are on the correlation scale.

    Attributes
    ----------
    q : int
        The corank.
    status : str
        ``"certified"`` (existence certificate found), ``"ruled out"``
        (impossibility certificate holds) or ``"undetermined"`` (neither at
        this ``eps``).
    noise_variances : tuple of float or None
        The certifying ``d`` on the covariance scale (None unless certified).
    noise_share : tuple of float or None
        The same as a share of each variable's variance (``d_j / s_jj``).
    eigenvalues : tuple of float or None
        All eigenvalues of ``R - D`` (ascending) for the certifying ``D``.
    e_norm : float or None
        ``||E||_2``: the largest of ``|lambda_1..q|`` and any negative eigenvalue.
    relations : (q, n) ndarray or None
        Orthonormal rows spanning the relations on the covariance scale.
    bound_share : tuple of float
        ``r_j(eps) = 1/inv(R + eps I)[j, j]``: the largest admissible noise
        share of each variable at this ``eps``.
    bound_eigenvalue : float
        ``lambda_q(R - diag r(eps))``; above ``eps`` it rules corank ``q`` out.
    found_by : str
        How the certificate was found (``"minimum trace"``, ``"start 3"``, ...)
        or why the search was not run.
    iterations : int
        Minimum-rank iterations spent on this ``q`` (all starts).
    """

    q: int
    status: str
    noise_variances: tuple[float, ...] | None
    noise_share: tuple[float, ...] | None
    eigenvalues: tuple[float, ...] | None
    e_norm: float | None
    relations: np.ndarray | None
    bound_share: tuple[float, ...]
    bound_eigenvalue: float
    found_by: str
    iterations: int

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready dict with sorted keys."""
        return fields_dict(self)


@dataclass(frozen=True, slots=True)
class FrischCorank:
    """How many relations diagonal noise allows, with certificates for each corank.

    Attributes
    ----------
    names : tuple of str
        Variable names.
    eps : float
        Tolerance on the correlation scale.
    starts : int
        Starts of the minimum-rank search (minimum trace plus random ones).
    seed : int
        Seed of the random starts (``numpy.random.default_rng(seed)``).
    certificates : tuple of CorankCertificate
        One per ``q = 1 .. n-1``.
    max_certified : int
        Largest certified corank (0 when none).
    min_ruled_out : int or None
        Smallest ruled-out corank (None when none is ruled out).
    ledermann : int
        :func:`ledermann_corank` of ``n``: coranks up to it can arise from
        sampling alone; exact coranks above it cannot.
    min_trace : MinimumTrace
        The minimum-trace solution (covariance scale) used as the first start.
    summary : str
        Plain-language summary.
    eps_impossible : float
        Tolerance (correlation scale) of the impossibility certificates;
        equal to ``eps`` for a relative tolerance, ``e / min s_jj`` for an
        absolute one (``eps`` is then ``e / max s_jj``).
    """

    names: tuple[str, ...]
    eps: float
    starts: int
    seed: int
    certificates: tuple[CorankCertificate, ...]
    max_certified: int
    min_ruled_out: int | None
    ledermann: int
    min_trace: MinimumTrace
    summary: str
    eps_impossible: float | None = None

    def certificate(self, q: int) -> CorankCertificate:
        """The certificate for corank ``q``."""
        for c in self.certificates:
            if c.q == q:
                return c
        raise KeyError(f"no corank {q}: coranks run from 1 to {len(self.names) - 1}")

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready dict with sorted keys."""
        return fields_dict(self)

    def to_frame(self):
        """One row per corank: ``q, status, e_norm, bound_eigenvalue, found_by``."""
        rows = [{"q": c.q, "status": c.status, "e_norm": c.e_norm,
                 "bound_eigenvalue": c.bound_eigenvalue, "found_by": c.found_by}
                for c in self.certificates]
        return frame(rows, columns=["q", "status", "e_norm", "bound_eigenvalue", "found_by"])


def _impossibility(r: np.ndarray, eps: float) -> tuple[np.ndarray, np.ndarray]:
    n = r.shape[0]
    rb = 1.0 / np.diag(np.linalg.inv(r + eps * np.eye(n)))
    lam = np.linalg.eigvalsh(r - np.diag(rb))
    return rb, lam


# TODO(architecture): reader-facing prose; report/pages.py renders FrischCorank.summary
# and results.json carries it: it moves to analysis/findings with those files, not in this refactor.
def _corank_summary(certs: Sequence[CorankCertificate], eps: float, n: int, led: int,
                    eps_imp: float | None = None) -> str:
    best = max((c.q for c in certs if c.status == "certified"), default=0)
    ruled = [c.q for c in certs if c.status == "ruled out"]
    und = [c.q for c in certs if c.status == "undetermined"]
    parts = []
    if best:
        parts.append(f"Under independent noise of unknown variances (Frisch scheme), up to {best} "
                     f"linear relation{'s' if best > 1 else ''} fit these {n} variables "
                     f"within tolerance {eps:g}.")
    else:
        parts.append(f"Under independent noise of unknown variances (Frisch scheme), no exact "
                     f"linear relation could be shown to fit these {n} variables within "
                     f"tolerance {eps:g}.")
    if ruled:
        parts.append(f"{min(ruled)} or more relations are ruled out"
                     + (f" (at tolerance {eps_imp:g} on the same scale)" if eps_imp not in (None, eps)
                        else "") + ".")
    if und:
        parts.append("Undetermined at this tolerance: corank " + ", ".join(str(q) for q in und) + ".")
    if best and best <= led:
        parts.append(f"Caution: with {n} variables, up to {led} such relations can appear from "
                     "sampling noise alone (Ledermann's bound), so this count is not by itself "
                     "evidence of real relations.")
    return " ".join(parts)


def _warm_shares(warm: Any, s: np.ndarray) -> dict[int, np.ndarray]:
    """Certified noise variances of a previous analysis as noise shares of ``s`` (correlation scale).

    ``warm`` is a :class:`FrischCorank`, a ``FrischResult`` (its ``corank``)
    or None. Shares of the new window's variances, so a certificate carried
    over keeps its noise variances in the data's units.
    """
    cor = getattr(warm, "corank", warm)
    if cor is None:
        return {}
    if not isinstance(cor, FrischCorank):
        raise OptionsError(f"warm must be a previous FrischResult or FrischCorank; got "
                           f"{type(warm).__name__}.", key="warm",
                           fix="pass the result of frisch_analysis or frisch_max_corank on an "
                               "overlapping window (or of the full sample), or None.")
    if len(cor.names) != s.shape[0]:
        raise OptionsError(f"warm has {len(cor.names)} variables but cov has {s.shape[0]}.", key="warm",
                           fix="warm-start only from an analysis of the same variables.")
    v = np.diag(s)
    return {c.q: np.asarray(c.noise_variances, dtype=float) / v
            for c in cor.certificates if c.status == "certified" and c.noise_variances is not None}


def _triad_start(s: np.ndarray) -> np.ndarray | None:
    """Three variables: the one-factor noise shares (correlation scale) when they are all >= 0.

    The closed form of corank 2 (:func:`relspan.analysis.frisch.triad.triad`):
    ``d_i = s_ii - s_ij s_ik / s_jk``; an exact certificate when the sign
    condition holds and no variable is a Heywood case.
    """
    s12, s13, s23 = s[0, 1], s[0, 2], s[1, 2]
    if not s12 * s13 * s23 > 0:
        return None
    l2 = np.array([s12 * s13 / s23, s12 * s23 / s13, s13 * s23 / s12])
    share = 1.0 - l2 / np.diag(s)
    if np.any(share < -1e-12):
        return None
    return np.clip(share, 0.0, None)


def frisch_max_corank(cov: Any, *, names: Sequence[str] | None = None, eps: float,
                      eps_impossible: float | None = None, starts: int = 8, seed: int = 0,
                      max_iter: int = 25, warm: Any = None) -> FrischCorank:
    """The largest corank compatible with diagonal noise, with certificates.

    On the correlation scale, minimum-trace factor analysis (our interior
    point solver, :func:`minimum_trace`) gives a first noise estimate; for
    each corank ``q`` not settled by it, minimum-rank factor analysis
    minimises the sum of the ``q`` smallest eigenvalues of ``R - D`` by the
    ten Berge & Kiers sequence of weighted trace problems, from the
    minimum-trace solution and ``starts - 1`` random feasible starts.
    Each ``q`` then gets an existence certificate, an impossibility
    certificate, or "undetermined" (see the module docstring).

    Where that search (which keeps ``R - D`` positive semidefinite) finds
    nothing, a second search runs on ``R + eps I``: a noise vector ``d >= 0``
    is a certificate within ``eps`` exactly when ``R + eps I - D`` is
    positive semidefinite and its ``q``-th eigenvalue is at most ``2 eps``,
    so this search covers the certificates whose ``R - D`` is indefinite
    (found_by then ends in "R - D indefinite"). For three variables,
    corank 2 is first tried in closed form (the one-factor triad formula,
    an exact certificate when no variable is a Heywood case).

    Parameters
    ----------
    cov : (n, n) array_like
        Sample covariance.
    names : sequence of str, optional
        Variable names.
    eps : float
        Tolerance (> 0) of the existence certificates, relative to each
        variable's variance (the correlation scale).
    eps_impossible : float, optional
        Tolerance (>= ``eps``) of the impossibility certificates; default
        ``eps``. An absolute tolerance ``e`` in the data's units converts to
        ``eps = e / max s_jj`` and ``eps_impossible = e / min s_jj``
        (:meth:`relspan.analysis.bounded.NoiseTolerance.diagonal_eps`).
    starts : int
        Number of starts for the minimum-rank search (>= 1).
    seed : int
        Seed for the random starts.
    max_iter : int
        Iteration cap per start.
    warm : FrischCorank or FrischResult, optional
        A previous analysis of the same variables (an overlapping window,
        the full sample, or the estimate when this is a resample): its
        certified noise variances are tried first (a certificate is checked,
        never assumed) and start the search. Certificates and verdicts do
        not depend on it except that a certificate it supplies can settle a
        corank the search alone leaves undetermined.

    Returns
    -------
    FrischCorank

    Notes
    -----
    Coranks are nested (a corank-q solution is a corank-(q-1) one), so the
    search stops at the first ``q`` it cannot certify; larger coranks are
    then "undetermined" unless their impossibility certificate holds.

    References
    ----------
    .. [1] A. Shapiro, Psychometrika 47(2), 1982; G. Della Riccia and
           A. Shapiro, Psychometrika 47(4), 1982 (minimum trace).
    .. [2] J. M. F. ten Berge and H. A. L. Kiers, "A numerical approach to the
           approximate and the exact minimum rank of a covariance matrix",
           Psychometrika 56(2), 1991.
    .. [3] A. Shapiro and J. M. F. ten Berge, "Statistical inference of
           minimum rank factor analysis", Psychometrika 67(1), 2002.
    .. [4] L. Ning, T. T. Georgiou, A. Tannenbaum and S. P. Boyd, "Linear
           models based on noisy data and the Frisch scheme", SIAM Review
           57(2), 2015.
    .. [5] W. Ledermann, Psychometrika 2(2), 1937.
    .. [6] C. Spearman, American Journal of Psychology 15(2), 1904 (triad).
    """
    s, nm = frisch_cov(cov, names)
    eps, eps_imp = _check_eps_pair(eps, eps_impossible)
    starts = check_whole(starts, key="starts", minimum=1)
    seed = check_whole(seed, key="seed", minimum=0)
    warm_d = _warm_shares(warm, s)
    r, sd = correlation(s)
    search = _Searcher(r, eps)
    return _max_corank(s, nm, r, sd, search, _barrier_trace(search.rb, np.ones(s.shape[0]), gap_tol=_MT_GAP),
                       eps=eps, eps_imp=eps_imp, starts=starts, seed=seed, max_iter=max_iter, warm_d=warm_d)


def _max_corank(s: np.ndarray, nm: tuple[str, ...], r: np.ndarray, sd: np.ndarray, search: _Searcher,
                mt_solution: tuple[np.ndarray, float, int], **kw: Any) -> FrischCorank:
    """:func:`frisch_max_corank` after its checks, given the minimum-trace solve of ``search.rb``."""
    steps = _max_corank_steps(s, nm, r, sd, search, mt_solution, **kw)
    try:
        ask = next(steps)
        while True:
            searcher, q, d0, max_iter = ask
            ask = steps.send(searcher.descend(q, d0, max_iter=max_iter, stop_on_first=True))
    except StopIteration as done:
        return done.value


def _max_coranks_lockstep(runs: list) -> list:
    """Run many :func:`_max_corank_steps` generators, their descents stacked (one per round and corank).

    Each generator gets exactly what :meth:`_Searcher.descend` gives it alone
    (:func:`relspan.analysis.frisch.minrank._descend_many`). An exception in
    one run ends that run only: its place in the result holds None.
    """
    out: list = [None] * len(runs)
    asks: dict[int, tuple] = {}

    def advance(i: int, sent: Any) -> None:
        try:
            asks[i] = runs[i].send(sent)
        except StopIteration as done:
            out[i] = done.value
            asks.pop(i, None)
        except (ValueError, np.linalg.LinAlgError, ArithmeticError):
            asks.pop(i, None)

    for i in range(len(runs)):
        advance(i, None)
    while asks:
        by_key: dict[tuple[int, int], list[int]] = {}
        for i, (_, q, _, max_iter) in asks.items():
            by_key.setdefault((q, max_iter), []).append(i)
        for (q, max_iter), ids in sorted(by_key.items()):
            try:
                got = _descend_many([(asks[i][0], asks[i][2]) for i in ids], q, max_iter=max_iter,
                                    stop_on_first=True)
            except (ValueError, np.linalg.LinAlgError, ArithmeticError):
                got = []
                for i in ids:          # one failed the stacked descent: each alone, as one call would
                    try:
                        got.append(asks[i][0].descend(q, asks[i][2], max_iter=max_iter, stop_on_first=True))
                    except (ValueError, np.linalg.LinAlgError, ArithmeticError) as err:
                        got.append(err)
            for i, res in zip(ids, got):
                if isinstance(res, Exception):
                    asks.pop(i, None)
                else:
                    advance(i, res)
    return out


def _max_corank_steps(s: np.ndarray, nm: tuple[str, ...], r: np.ndarray, sd: np.ndarray, search: _Searcher,
                      mt_solution: tuple[np.ndarray, float, int], *, eps: float, eps_imp: float, starts: int,
                      seed: int, max_iter: int, warm_d: dict[int, np.ndarray]):
    """The body of :func:`_max_corank` as a generator: it yields each descent it needs
    ``(searcher, q, d0, max_iter)`` (always ``stop_on_first``), is sent ``(d, solves)``, and
    returns the :class:`FrischCorank`."""
    n = s.shape[0]
    rng = np.random.default_rng(seed)
    d_mt, gap, steps = mt_solution
    # Minimum trace on the correlation scale: max sum_j d_j / s_jj on the covariance scale.
    mt = MinimumTrace(d_mt * sd ** 2, 1.0 / sd ** 2, float(np.sum(d_mt)), gap,
                      float(np.linalg.eigvalsh(s - np.diag(d_mt * sd ** 2))[0]), steps)
    rand_starts = search.random_starts(rng, starts - 1)
    bound_share, bound_lam = _impossibility(r, eps_imp)
    triad_d = _triad_start(s) if n == 3 else None
    shifted: _Searcher | None = None
    certs: list[CorankCertificate] = []
    best_d: np.ndarray | None = d_mt
    best_label = "minimum trace"
    stopped_at: int | None = None
    for q in range(1, n):
        ruled = bool(bound_lam[q - 1] > eps_imp)
        found = None
        label = "not searched"
        iters = 0
        if not ruled:
            candidates = []
            if q == 2 and triad_d is not None:
                candidates.append((triad_d, "three-variable formula"))
            if best_d is not None:
                candidates.append((best_d, best_label))
            candidates += [(d, "previous analysis") for k, d in sorted(warm_d.items()) if k >= q]
            for cand, lab in candidates:
                ok, lam, en = _certify(r, cand, q, eps)
                if ok:
                    found = (cand, lam, en)
                    label = lab
                    if lab != best_label:
                        best_d, best_label = cand, lab
                    break
            if found is None and stopped_at is None:
                # The best point so far alone first (usually enough when a true
                # structure is there), then all random starts in lockstep.
                first_label = best_label if best_d is not None else "minimum trace"
                first = d_mt if best_d is None else best_d
                batches = [([first_label], first[None, :])]
                warm_q = [d for k, d in sorted(warm_d.items()) if k >= q]
                if warm_q:
                    batches.insert(0, (["previous analysis"] * len(warm_q), np.array(warm_q)))
                if starts > 1:
                    batches.append(([f"start {i + 2}" for i in range(starts - 1)], rand_starts))
                tried = 1 + (starts - 1)
                closest, closest_en = first, np.inf
                for labs, d0 in batches:
                    d1s, it = yield search, q, d0, max_iter
                    iters += it
                    for lab, d1 in zip(labs, d1s):
                        ok, lam, en = _certify(r, d1, q, eps)
                        if ok:
                            found = (d1, lam, en)
                            label = lab if lab.startswith("start") else f"{lab}, refined"
                            best_d, best_label = d1, label
                            break
                        if en < closest_en:
                            closest, closest_en = d1, en
                    if found is not None:
                        break
                if found is None:
                    # R - D indefinite: the same search on R + eps I (see the docstring).
                    if shifted is None:
                        shifted = _Searcher.indefinite(r, eps)
                    d1s, it = yield shifted, q, np.array([closest, d_mt]), max_iter
                    iters += it
                    for d1 in d1s:
                        ok, lam, en = _certify(r, d1, q, eps)
                        if ok:
                            found = (d1, lam, en)
                            label = "closest start, refined with R - D indefinite"
                            best_d, best_label = d1, label
                            break
                if found is None:
                    stopped_at = q
                    label = f"searched from {tried} starts without success"
            elif found is None:
                label = f"not searched: corank {stopped_at} was not found"
        else:
            label = "impossibility certificate"
        if found is not None:
            d1, lam, en = found
            _, vec = np.linalg.eigh(r - np.diag(d1))
            certs.append(CorankCertificate(
                q, "certified", tuple(float(v) for v in d1 * sd ** 2), tuple(float(v) for v in d1),
                tuple(float(v) for v in lam), en, _relations_back(vec[:, :q], sd),
                tuple(float(v) for v in bound_share), float(bound_lam[q - 1]), label, iters))
        else:
            certs.append(CorankCertificate(
                q, "ruled out" if ruled else "undetermined", None, None, None, None, None,
                tuple(float(v) for v in bound_share), float(bound_lam[q - 1]), label, iters))
    best = max((c.q for c in certs if c.status == "certified"), default=0)
    ruled_qs = [c.q for c in certs if c.status == "ruled out"]
    led = ledermann_corank(n)
    return FrischCorank(nm, eps, starts, seed, tuple(certs), best,
                        min(ruled_qs) if ruled_qs else None, led, mt,
                        _corank_summary(certs, eps, n, led, eps_imp), eps_imp)


def _check_eps_pair(eps: Any, eps_impossible: Any) -> tuple[float, float]:
    """``(eps, eps_impossible)`` checked: both > 0 and finite, ``eps_impossible >= eps``."""
    eps = check_eps(eps)
    if eps_impossible is None:
        return eps, eps
    eps_imp = check_eps(eps_impossible, key="eps_impossible")
    if eps_imp < eps:
        raise OptionsError(f"eps_impossible ({eps_imp:g}) must be at least eps ({eps:g}): a corank ruled "
                           "out at the smaller tolerance could still be certified at the larger one.",
                           key="eps_impossible",
                           fix="pass the pair from NoiseTolerance.diagonal_eps(), or leave it out.")
    return eps, eps_imp


def frisch_max_corank_many(covs: Any, *, eps: float, eps_impossible: float | None = None, starts: int = 8,
                           seed: int = 0, max_iter: int = 25, warm: Any = None) -> tuple[FrischCorank | None, ...]:
    """:func:`frisch_max_corank` of every covariance of a stack, the minimum-trace solves stacked.

    The same results, bit for bit, as one :func:`frisch_max_corank` call per
    covariance (with the same ``warm``): the minimum-trace problems of all
    covariances (the first and costliest solve of each analysis) run as one
    batched barrier solve, in which each problem takes exactly the iterates
    it takes alone (:func:`relspan.analysis.frisch.mintrace._barrier_batch`);
    the searches of all covariances then run in lockstep, corank by corank,
    their descents stacked the same way.

    Parameters
    ----------
    covs : (B, n, n) array_like
        Covariances (e.g. resamples of one window).
    eps, eps_impossible, starts, seed, max_iter, warm
        As for :func:`frisch_max_corank`, shared by all covariances.

    Returns
    -------
    tuple of (FrischCorank or None)
        One per covariance; None for one the analysis cannot take (a
        constant variable, a matrix that is not positive semidefinite, or a
        numerical failure), where :func:`frisch_max_corank` raises.

    Examples
    --------
    >>> import numpy as np
    >>> rng = np.random.default_rng(0)
    >>> x = rng.standard_normal((200, 2)) @ rng.standard_normal((2, 4)) + 0.3 * rng.standard_normal((200, 4))
    >>> covs = np.stack([np.cov(x[rng.integers(0, 200, 200)].T) for _ in range(5)])
    >>> many = frisch_max_corank_many(covs, eps=0.01, starts=1)
    >>> [c.max_certified for c in many] == [frisch_max_corank(c, eps=0.01, starts=1).max_certified for c in covs]
    True
    """
    c = np.asarray(covs, dtype=float)
    if c.ndim != 3 or c.shape[1] != c.shape[2]:
        raise OptionsError(f"covs must be a (B, n, n) stack of covariances; got shape {c.shape}.", key="covs",
                           fix="stack the covariances with numpy.stack.")
    eps, eps_imp = _check_eps_pair(eps, eps_impossible)
    starts = check_whole(starts, key="starts", minimum=1)
    seed = check_whole(seed, key="seed", minimum=0)
    prepared: list[tuple | None] = []
    for cov in c:
        try:
            s, nm = frisch_cov(cov, None)
            r, sd = correlation(s)
            prepared.append((s, nm, r, sd, _Searcher(r, eps), _warm_shares(warm, s)))
        except OptionsError as err:
            if err.key == "warm":
                raise
            prepared.append(None)
        except (ValueError, np.linalg.LinAlgError, ArithmeticError):
            prepared.append(None)
    ok = [i for i, p in enumerate(prepared) if p is not None]
    solved: dict[int, tuple[np.ndarray, float, int]] = {}
    if ok:
        rb = np.stack([prepared[i][4].rb for i in ok])
        try:
            d, gap, steps = _barrier_batch(rb, np.ones(c.shape[1]), gap_tol=_MT_GAP)
            solved = {i: (d[k], float(gap[k]), int(steps[k])) for k, i in enumerate(ok)}
        except (ValueError, np.linalg.LinAlgError, ArithmeticError):
            for i in ok:     # one problem failed the stacked solve: each alone, as the loop would
                try:
                    solved[i] = _barrier_trace(prepared[i][4].rb, np.ones(c.shape[1]), gap_tol=_MT_GAP)
                except (ValueError, np.linalg.LinAlgError, ArithmeticError):
                    pass
    order = [i for i in ok if i in solved]
    runs = [_max_corank_steps(*prepared[i][:5], solved[i], eps=eps, eps_imp=eps_imp, starts=starts, seed=seed,
                              max_iter=max_iter, warm_d=prepared[i][5]) for i in order]
    out: list[FrischCorank | None] = [None] * len(prepared)
    for i, res in zip(order, _max_coranks_lockstep(runs)):
        out[i] = res
    return tuple(out)


def corank_verdict(cor: FrischCorank) -> int | None:
    """The corank a :class:`FrischCorank` settles: the largest certified one, or None.

    None (undetermined) when a corank above the largest certified one is
    neither certified nor ruled out.
    """
    top = cor.max_certified
    if any(c.q > top and c.status == "undetermined" for c in cor.certificates):
        return None
    return int(top)


@dataclass(frozen=True, slots=True)
class FrischCorankStack:
    """The diagonal-noise corank of each of many covariances (e.g. resamples of one window).

    Attributes
    ----------
    coranks : tuple of (int or None)
        Per covariance, :func:`corank_verdict`: the largest certified corank,
        or None when a larger one is neither certified nor ruled out.
    eps, eps_impossible : float
        Tolerances on the correlation scale.
    settled_by_warm : int
        How many were settled by the warm estimate's certificate and the
        impossibility certificate alone (no search).
    """

    coranks: tuple[int | None, ...]
    eps: float
    eps_impossible: float
    settled_by_warm: int

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready dict with sorted keys."""
        return fields_dict(self)


def frisch_corank_stack(covs: Any, *, eps: float, eps_impossible: float | None = None,
                        warm: Any = None, starts: int = 4, seed: int = 0) -> FrischCorankStack:
    """The diagonal-noise corank of every covariance of a stack, warm-started from an estimate.

    For the resampling support of the corank (about 99 resamples per
    window). Per covariance the verdict is the one :func:`frisch_max_corank`
    would give with ``warm``: the largest certified corank, or None
    (undetermined). Fast path, on stacked arrays for all covariances at once:
    the estimate's largest certificate (its noise variances in the data's
    units, as shares of each resample's variances) is checked, and the
    impossibility certificate of the next corank computed; where the first
    holds and the second rules the next corank out, the corank is settled
    without any search. The rest get :func:`frisch_max_corank` with ``warm``
    (its certificates tried first, then the ten Berge & Kiers search from
    ``starts`` starts). Where the carried-over certificate just misses but
    the next corank is ruled out, a few ten Berge & Kiers iterations from it
    come first.

    Parameters
    ----------
    covs : (B, n, n) array_like
        Covariances (e.g. resamples of one window), each symmetric PSD.
    eps, eps_impossible : float
        Tolerances on the correlation scale, as for :func:`frisch_max_corank`.
    warm : FrischResult or FrischCorank, optional
        The analysis of the estimate (the window itself).
    starts, seed : int
        Starts and seed of the search where the fast path does not settle.

    Returns
    -------
    FrischCorankStack

    Notes
    -----
    Cost, measured by ``benchmarks/bench_frisch.py resamples`` (its last table:
    99 iid resamples of 200 rows, tolerance 0.01, CPU time on a shared 2-core
    machine): 0.8 ms per resample at n = 4, 6 ms at n = 6, 11 ms at n = 8 and
    31 ms at n = 10 (docs/performance.md, section 7); the resamples the fast
    path does not settle are searched in lockstep
    (:func:`frisch_max_corank_many`). A resample settled by the fast path
    costs its share of two small batched
    eigendecompositions and one batched inverse.

    Examples
    --------
    >>> import numpy as np
    >>> rng = np.random.default_rng(0)
    >>> x = rng.standard_normal((200, 2)) @ rng.standard_normal((2, 4)) + 0.3 * rng.standard_normal((200, 4))
    >>> est = frisch_max_corank(np.cov(x.T), eps=0.01)
    >>> covs = np.stack([np.cov(x[rng.integers(0, 200, 200)].T) for _ in range(20)])
    >>> out = frisch_corank_stack(covs, eps=0.01, warm=est)
    >>> est.max_certified, sorted(set(out.coranks)), out.settled_by_warm > 10
    (2, [2], True)
    """
    c = np.asarray(covs, dtype=float)
    if c.ndim != 3 or c.shape[1] != c.shape[2] or c.shape[0] < 1:
        raise OptionsError(f"covs must be a (B, n, n) stack of covariances; got shape {c.shape}.", key="covs",
                           fix="stack the resampled covariances with numpy.stack.")
    eps, eps_imp = _check_eps_pair(eps, eps_impossible)
    b, n, _ = c.shape
    for s in c[:1]:
        frisch_cov(s, None)  # the checks of one analysis (names, PSD, variances), on the first
    cor = getattr(warm, "corank", warm)
    shares = _warm_shares(cor, c[0]) if cor is not None else {}
    out: list[int | None] = [None] * b
    done = np.zeros(b, dtype=bool)
    if shares:
        qw = max(shares)
        dw = np.asarray(cor.certificate(qw).noise_variances, dtype=float)
        v = np.diagonal(c, axis1=1, axis2=2)
        if np.all(v > 0):
            sd = np.sqrt(v)
            r = c / (sd[:, :, None] * sd[:, None, :])
            eye = np.eye(n)
            d = dw[None, :] / v
            lam = np.linalg.eigvalsh(r - d[:, :, None] * eye)
            neg = np.where(lam[:, qw:] < 0, -lam[:, qw:], 0.0)
            en = np.maximum(np.abs(lam[:, :qw]).max(axis=1), neg.max(axis=1) if neg.size else 0.0)
            ok = (en <= eps) & np.all(d >= 0, axis=1)
            if qw == n - 1:
                nxt = ok
            else:
                rb = 1.0 / np.diagonal(np.linalg.inv(r + eps_imp * eye), axis1=1, axis2=2)
                bl = np.linalg.eigvalsh(r - rb[:, :, None] * eye)[:, qw]
                nxt_ruled = bl > eps_imp
                nxt = ok & nxt_ruled
            # Where only the carried-over certificate misses (the next corank is ruled out),
            # a few ten Berge & Kiers iterations from it, per resample, usually settle it.
            retry = np.flatnonzero(~ok & (nxt_ruled if qw < n - 1 else np.ones(b, dtype=bool))
                                   & np.all(d >= 0, axis=1))
            if retry.size:      # stacked: each resample's descent as alone
                ends = _descend_many([(_Searcher(r[i], eps), d[i][None, :]) for i in retry], qw, max_iter=8,
                                     stop_on_first=True)
                for i, (d1, _) in zip(retry, ends):
                    if _certify(r[i], d1[0], qw, eps)[0]:
                        nxt[i] = True
            for i in np.flatnonzero(nxt):
                out[i] = qw
            done = nxt
    rest = np.flatnonzero(~done)
    if rest.size:
        # every other resample gets the full search (warm-started), all of them in lockstep
        many = frisch_max_corank_many(c[rest], eps=eps, eps_impossible=eps_imp, starts=starts, seed=seed,
                                      warm=cor)
        for i, res in zip(rest, many):
            if res is None:     # what frisch_max_corank raises for this resample, raised here
                res = frisch_max_corank(c[i], eps=eps, eps_impossible=eps_imp, starts=starts, seed=seed, warm=cor)
            out[i] = corank_verdict(res)
    return FrischCorankStack(tuple(out), eps, eps_imp, int(done.sum()))
