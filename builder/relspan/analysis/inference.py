"""Sampling uncertainty of one window: intervals and corank supports from one set of resamples.

:func:`window_inference` resamples a window's granules once
(:mod:`relspan.analysis.resample`: stationary or moving block bootstrap for
time-ordered rows, iid otherwise), eigendecomposes every resampled covariance
in one batched call, and reads off:

- intervals for the eigenvalues on the scale the analysis uses (blockwise
  studentised for block resamples, basic bootstrap for independent rows;
  bounded below by 0);
- intervals for the identified relation coefficients under equal noise: the
  reduced form of each kept corank's relation subspace (for one relation, the
  equation for the reference variable), each resample's subspace solved for the
  same variables as the estimate (percentile); the reduced form does not depend
  on the basis chosen within a subspace, so the resampled bases need no rotation;
- intervals for the elementary-regression coefficients (percentile);
- intervals for the equal-noise variance ``sigma^2`` (the mean of the q
  smallest eigenvalues) and for the diagonal-noise certificate's noise shares;
- the corank under each assumption as a set with resampling support (equal
  noise: the sequential test of equal smallest eigenvalues; bounded noise:
  admissible within the tolerance; diagonal noise: the corank search on the
  first ``diagonal_resamples`` resamples);
- an outer confidence set for each coefficient of the diagonal-noise
  (Frisch) single-relation set, in the spirit of Imbens & Manski (2004).

The equal-noise corank rule (:func:`equal_noise_corank_rule`) is the one the
window analysis itself uses on the data, so the corank shown and its support
come from one rule.

References
----------
.. [1] B. Efron, "Bootstrap methods: another look at the jackknife", Annals of
       Statistics 7(1), 1-26, 1979.
.. [2] D. N. Politis and J. P. Romano, "The stationary bootstrap", Journal of
       the American Statistical Association 89(428), 1303-1313, 1994.
.. [3] D. N. Lawley, "Tests of significance for the latent roots of covariance
       and correlation matrices", Biometrika 43(1/2), 128-136, 1956.
.. [4] T. W. Anderson, "Asymptotic theory for principal component analysis",
       Annals of Mathematical Statistics 34(1), 122-148, 1963.
.. [5] G. W. Imbens and C. F. Manski, "Confidence intervals for partially
       identified parameters", Econometrica 72(6), 1845-1857, 2004.
.. [6] A. C. Davison and D. V. Hinkley, Bootstrap Methods and their
       Application, Cambridge University Press, 1997.
"""

from __future__ import annotations

import dataclasses
import math
import struct
import sys
from dataclasses import dataclass
from typing import Any, Callable, Mapping, Sequence

import numpy as np

from relspan.analysis._common import EPS, jsonable, orthonormal_rows, pivot_columns
from relspan.analysis._dist import norm_cdf, norm_ppf
from relspan.analysis.corank_support import CorankSupport, bounded_support
from relspan.analysis.equal_test import DEFAULT_TEST_LEVEL, effective_nobs_by_k, sequential_corank_stack
from relspan.analysis.intervals import (Interval, interval,
                                        reduced_form_stack)
from relspan.analysis.resample import (DEFAULT_LEVEL, DEFAULT_RESAMPLES, CovarianceResamples, GranuleStats,
                                       can_redraw, influence_sd, influence_values, iter_drawn_blocks,
                                       resample_covariances, resample_influence_sd, scale_stack,
                                       studentized_interval, window_rng)

__all__ = ["ResamplingOptions", "CoefficientInterval", "CoefficientIntervals", "OuterSet", "WindowInference",
           "window_inference", "resampling_options", "equal_noise_corank_rule", "equal_noise_corank_stack",
           "imbens_manski_outer", "imbens_manski_critical", "diagonal_corank_of", "diagonal_coranks_of",
           "DEFAULT_DIAGONAL_RESAMPLES",
           "EQUAL_RULE", "FULL_SAMPLE_PLAN", "DIAGONAL_PLAN_KINDS",
           "DIAGONAL_SCOPE_RULE", "diagonal_scope", "MANY_WINDOWS", "MANY_WINDOWS_RESAMPLES",
           "MANY_WINDOWS_RULE", "eigenvalue_gradient", "eigenvalue_intervals", "SE_RESOLUTION"]

#: resamples behind the diagonal-noise support (each needs a corank search of its own)
DEFAULT_DIAGONAL_RESAMPLES = 99

#: the plan name the full sample's random stream is derived from
FULL_SAMPLE_PLAN = "(full sample)"

#: the equal-noise corank rule, in words (methods page, results.json)
EQUAL_RULE = ("Equal noise: the corank is the number of smallest eigenvalues (on the scale the analysis uses) "
              "that are equal, whatever the common noise variance: k of them count as equal when the test that "
              "the k smallest eigenvalues are equal (Lawley 1956; Anderson 1963) is not rejected at the 5% "
              "level for k = 2, ..., k in sequence (time-ordered rows: with the effective sample size T divided "
              "by the largest (1 + r_a r_b)/(1 - r_a r_b) over the k tested components, r their lag-1 "
              "autocorrelations (Bartlett 1946); unordered rows: T), or when they lie within the tolerance of "
              "one another (the "
              "largest minus the smallest at most eps: equal noise up to a deviation of norm at most eps/2, by "
              "Weyl's inequality). When all eigenvalues count as equal the data show nothing but equal noise "
              "and no relation is reported. Corank 1 fits equal noise whatever the data, so one relation is "
              "reported only when the noise variance it needs (the smallest eigenvalue) is within the "
              "tolerance; otherwise 0.")


@dataclass(frozen=True, slots=True)
class ResamplingOptions:
    """How a dataset's windows are resampled (from the spec's ``checks.resampling``).

    Attributes
    ----------
    resamples : int
        Resamples per window (0: no inference).
    level : float
        Nominal coverage of every interval.
    scheme : str
        ``"stationary"``, ``"moving"`` or ``"iid"`` (``auto`` already resolved).
    block_length : float or None
        In rows; None for the automatic rule (Politis & White 2004, 2009 correction).
    seed : int
        Seed of the window streams (:func:`relspan.analysis.resample.window_rng`).
    diagonal_resamples : int
        The first this many resamples get the diagonal-noise corank search.
    test_level : float
        Level of each test in the equal-noise sequence.
    """

    resamples: int = DEFAULT_RESAMPLES
    level: float = DEFAULT_LEVEL
    scheme: str = "stationary"
    block_length: float | None = None
    seed: int = 0
    diagonal_resamples: int = DEFAULT_DIAGONAL_RESAMPLES
    test_level: float = DEFAULT_TEST_LEVEL

    @property
    def enabled(self) -> bool:
        return self.resamples > 0

    def to_dict(self) -> dict:
        return jsonable({"resamples": self.resamples, "level": self.level, "scheme": self.scheme,
                         "block_length_rows": self.block_length, "seed": self.seed,
                         "diagonal_resamples": self.diagonal_resamples, "test_level": self.test_level})


def resampling_options(ds) -> ResamplingOptions:
    """The resampling options of one dataset spec (:class:`relspan.spec.model.DatasetSpec`).

    ``scheme: auto`` becomes ``stationary`` when the dataset has a time
    column and ``iid`` otherwise; a missing seed is ``checks.seed``.
    """
    r = ds.checks.resampling
    scheme = r.scheme
    if scheme == "auto":
        scheme = "stationary" if ds.time is not None else "iid"
    seed = ds.checks.seed if r.seed is None else r.seed
    block = None if r.block_length == "auto" else float(r.block_length)
    return ResamplingOptions(resamples=int(r.resamples), level=float(r.level), scheme=scheme,
                             block_length=block, seed=int(seed),
                             diagonal_resamples=int(min(r.diagonal_resamples, r.resamples)))


#: plan kinds whose windows get the diagonal-noise support (besides the full sample)
DIAGONAL_PLAN_KINDS = ("full", "periods")

#: the cost rule, in words (methods page)
DIAGONAL_SCOPE_RULE = ("The diagonal-noise corank support is computed for the full sample and for the windows of "
                       "full-sample and named-period plans; rolling and expanding windows get none, because each "
                       "resample needs a corank search of its own (more than all the other intervals of a "
                       "window cost together); their diagonal-noise coranks are shown without support and say so.")


#: plans with more windows than this resample each window at most :data:`MANY_WINDOWS_RESAMPLES` times
MANY_WINDOWS = 200
#: resamples per window in plans with more than :data:`MANY_WINDOWS` windows (90% intervals stay supported)
MANY_WINDOWS_RESAMPLES = 199

#: the cap for plans with very many windows, in words (methods page)
MANY_WINDOWS_RULE = (f"Plans with more than {MANY_WINDOWS} windows resample each window at most "
                     f"{MANY_WINDOWS_RESAMPLES} times (cost grows with the windows; shares and 90% intervals "
                     "are still supported by that many resamples); the full sample keeps the spec's number.")


def diagonal_scope(options: ResamplingOptions, plan_kind: str, windows: int = 1) -> ResamplingOptions:
    """The options for the windows of one plan (:data:`DIAGONAL_SCOPE_RULE`, :data:`MANY_WINDOWS_RULE`)."""
    out = options
    if plan_kind not in DIAGONAL_PLAN_KINDS and out.diagonal_resamples:
        out = dataclasses.replace(out, diagonal_resamples=0)
    if windows > MANY_WINDOWS and out.resamples > MANY_WINDOWS_RESAMPLES:
        out = dataclasses.replace(out, resamples=MANY_WINDOWS_RESAMPLES,
                                  diagonal_resamples=min(out.diagonal_resamples, MANY_WINDOWS_RESAMPLES))
    return out


@dataclass(frozen=True, slots=True)
class CoefficientInterval:
    """One coefficient with its interval: ``c`` in ``x_equation = ... + c x_variable`` (data units)."""

    equation: str
    variable: str
    interval: Interval

    def to_dict(self) -> dict:
        return jsonable({"equation": self.equation, "variable": self.variable, **self.interval.to_dict()})


class CoefficientIntervals(Sequence):
    """Coefficient intervals of one window held compactly: a read-only sequence of :class:`CoefficientInterval`.

    A window keeps ``n (n - 1)`` elementary and ``sum_q q (n - q)`` reduced-form
    coefficient intervals; as objects (the coefficient, its :class:`Interval` and
    three floats) they took about 220 bytes each, about 28 of the 78 MB a 2,000-window
    check kept (``tracemalloc``; 6 MB as held here). Here one window's numbers are
    one bytes buffer (estimate, low, high as float64), the two variables of each
    coefficient are indices into the window's ``names``, and the finite-draw counts
    are int32; an item is made when it is read, holding exactly the stored numbers
    (bit for bit what the intervals computed). Compares equal to a tuple or list of
    the same items (a NaN bound equal to a NaN bound), so it is not hashable; pickled
    and cached as its arguments.

    Parameters
    ----------
    names : tuple of str
        The window's variable names.
    pairs : bytes
        Per coefficient, (equation, variable) as two little-endian uint16 indices into ``names``.
    values : bytes
        Per coefficient, estimate, low and high as little-endian float64.
    resamples : bytes
        Per coefficient, the finite draws used, little-endian int32.
    level : float
    method : str
        The level and method of every interval, unless ``extra`` gives them per item.
    extra : tuple of (float, str), optional
    """

    __slots__ = ("_names", "_pairs", "_values", "_resamples", "_level", "_method", "_extra")

    def __init__(self, names, pairs: bytes, values: bytes, resamples: bytes, level: float, method: str,
                 extra=None) -> None:
        names, pairs, values, resamples = tuple(names), bytes(pairs), bytes(values), bytes(resamples)
        m = len(values) // 24
        idx = np.frombuffer(pairs, dtype="<u2")
        if (len(values) != 24 * m or len(pairs) != 4 * m or len(resamples) != 4 * m
                or (m and int(idx.max()) >= len(names)) or (extra is not None and len(extra) != m)
                or not all(isinstance(v, str) for v in names)):
            raise ValueError("CoefficientIntervals: inconsistent arguments")
        self._names, self._pairs, self._values, self._resamples = names, pairs, values, resamples
        self._level, self._method = float(level), str(method)
        self._extra = None if extra is None else tuple((float(lv), str(me)) for lv, me in extra)

    @classmethod
    def from_rows(cls, names: tuple, cells, rows, level: float, method: str) -> "CoefficientIntervals":
        """From ``(equation, variable)`` index pairs into ``names`` (a tuple of str) and, per pair, the
        fields of its :class:`Interval` (estimate, low, high, level, method, resamples), as
        :func:`_interval_rows` gives them; the numbers are packed exactly as they are."""
        m = len(rows)
        if len(cells) != m or not isinstance(names, tuple):
            raise ValueError("CoefficientIntervals: one (equation, variable) pair per row, names a tuple")
        lvl = float(level)
        self = object.__new__(cls)
        self._names = names
        self._pairs = struct.pack(f"<{2 * m}H", *(i for cell in cells for i in cell))
        self._values = struct.pack(f"<{3 * m}d", *(x for r in rows for x in r[:3]))
        self._resamples = struct.pack(f"<{m}i", *(r[5] for r in rows))
        self._level, self._method = lvl, str(method)
        self._extra = (None if all(r[3] == lvl and r[4] == method for r in rows)
                       else tuple((float(r[3]), str(r[4])) for r in rows))
        return self

    def __len__(self) -> int:
        return len(self._values) // 24

    def find(self, equation: str, variable: str) -> CoefficientInterval | None:
        """The item of coefficient ``variable`` in the equation for ``equation``, or None; only it is made."""
        try:
            e, v = self._names.index(equation), self._names.index(variable)
        except ValueError:
            return None
        idx = np.frombuffer(self._pairs, dtype="<u2").reshape(-1, 2)
        hit = np.flatnonzero((idx[:, 0] == e) & (idx[:, 1] == v))
        return self._item(int(hit[0])) if hit.size else None

    def _item(self, i: int) -> CoefficientInterval:
        est, low, high = _F3.unpack_from(self._values, 24 * i)
        e, v = _U2.unpack_from(self._pairs, 4 * i)
        level, method = (self._level, self._method) if self._extra is None else self._extra[i]
        return CoefficientInterval(self._names[e], self._names[v],
                                   Interval(est, low, high, level, method, _I1.unpack_from(self._resamples, 4 * i)[0]))

    def __getitem__(self, i):
        if isinstance(i, slice):
            return tuple(self._item(j) for j in range(*i.indices(len(self))))
        m = len(self)
        j = int(i) + m if int(i) < 0 else int(i)
        if not 0 <= j < m:
            raise IndexError("CoefficientIntervals index out of range")
        return self._item(j)

    def __iter__(self):
        return (self._item(j) for j in range(len(self)))

    def __eq__(self, other) -> bool:
        if not isinstance(other, (CoefficientIntervals, tuple, list)):
            return NotImplemented
        return len(self) == len(other) and all(map(_same_coefficient, self, other))

    __hash__ = None  # equal to tuples of its items (NaN bounds equal NaN), so not hashable

    def __repr__(self) -> str:
        return f"CoefficientIntervals({list(self)!r})"

    def __reduce__(self):
        return (CoefficientIntervals, (self._names, self._pairs, self._values, self._resamples, self._level,
                                       self._method, self._extra))


_F3, _U2, _I1 = struct.Struct("<3d"), struct.Struct("<2H"), struct.Struct("<i")


def _find(items, equation: str, variable: str) -> Interval | None:
    """The interval of coefficient ``variable`` in the equation for ``equation`` among ``items``, or None."""
    if isinstance(items, CoefficientIntervals):
        c = items.find(equation, variable)
        return None if c is None else c.interval
    for c in items:
        if c.equation == equation and c.variable == variable:
            return c.interval
    return None


def _same_coefficient(a, b) -> bool:
    """Equal coefficient intervals; a NaN bound equals a NaN bound (one fails to resample in both)."""
    if a is b:
        return True
    if not isinstance(b, CoefficientInterval) or (a.equation, a.variable) != (b.equation, b.variable):
        return False
    x, y = a.interval, b.interval
    return ((x.level, x.method, x.resamples) == (y.level, y.method, y.resamples)
            and all(u == v or (u != u and v != v) for u, v in ((x.estimate, y.estimate), (x.low, y.low),
                                                                 (x.high, y.high))))


@dataclass(frozen=True, slots=True)
class OuterSet:
    """An outer confidence set for one coefficient of the diagonal-noise single-relation set.

    Attributes
    ----------
    variable : str
    lower, upper : float
        The identified set on the data (data units; -inf / inf when unbounded).
    low, high : float
        The confidence set (-inf / inf when a side cannot be bounded).
    level : float
    critical : float
        Imbens-Manski ``c`` (NaN when a side is unbounded).
    unbounded_share : float
        Share of resamples in which the set is unbounded (no one orthant).
    resamples : int
    """

    variable: str
    lower: float
    upper: float
    low: float
    high: float
    level: float
    critical: float
    unbounded_share: float
    resamples: int

    def to_dict(self) -> dict:
        # infinite ends are written as null (unbounded), as every interval bound in results.json
        return jsonable({"variable": self.variable, "lower": self.lower, "upper": self.upper, "low": self.low,
                         "high": self.high, "level": self.level, "critical": self.critical,
                         "unbounded_share": self.unbounded_share, "resamples": self.resamples,
                         "method": "imbens-manski"})


@dataclass(frozen=True, slots=True, eq=False)
class WindowInference:
    """Intervals and corank supports of one window (see the module notes for each rule).

    Attributes
    ----------
    resamples, level : int, float
    scheme : str
    block_length_rows : float
        Mean (stationary) or fixed (moving) block length in rows; 1 for iid.
    block_rule : str
    rows_per_granule, granules : int
    seed : tuple
        ``(seed, dataset, plan, window index)`` the stream came from.
    note : str
        What the granule size approximates ("" for single rows).
    scale : str
        Scale of the eigenvalues and equal-noise variances: ``"correlation"`` or ``"as given"``.
    eigenvalues : tuple of Interval
        Ascending.
    coranks : mapping str -> CorankSupport
        ``equal``, ``bounded`` and ``diagonal`` (when computed).
    coefficients : mapping int -> sequence of CoefficientInterval
        Equal noise, per kept corank q: the reduced-form coefficients (data units), held
        compactly (:class:`CoefficientIntervals`).
    targets : mapping int -> tuple of str
        The variables each corank's reduced form is solved for.
    elementary : sequence of CoefficientInterval
        Every elementary-regression coefficient (equation = the regressand), held compactly.
    noise : mapping int -> Interval
        Equal noise: sigma^2 (mean of the q smallest eigenvalues), per kept q, on ``scale``.
    diagonal_noise : tuple of Interval
        Diagonal noise: each variable's noise share of its variance in the certificate
        of the window's corank (empty when none was certified); over the diagonal resamples
        whose search certified that corank.
    outer : tuple of OuterSet
        Diagonal noise, one relation: per coefficient of the reference equation.
    rules : mapping str -> str
        Every rule, in words.
    """

    resamples: int
    level: float
    scheme: str
    block_length_rows: float
    block_rule: str
    rows_per_granule: int
    granules: int
    seed: tuple
    note: str
    scale: str
    eigenvalues: tuple[Interval, ...]
    coranks: Mapping[str, CorankSupport]
    coefficients: Mapping[int, Sequence[CoefficientInterval]]
    targets: Mapping[int, tuple[str, ...]]
    elementary: Sequence[CoefficientInterval]
    noise: Mapping[int, Interval]
    diagonal_noise: tuple[Interval, ...]
    outer: tuple[OuterSet, ...]
    rules: Mapping[str, str]

    def coefficient(self, q: int, equation: str, variable: str) -> Interval | None:
        return _find(self.coefficients.get(q, ()), equation, variable)

    def elementary_coefficient(self, equation: str, variable: str) -> Interval | None:
        return _find(self.elementary, equation, variable)

    def to_dict(self) -> dict:
        return jsonable({
            "resamples": self.resamples, "level": self.level, "scheme": self.scheme,
            "block_length_rows": self.block_length_rows, "block_rule": self.block_rule,
            "rows_per_granule": self.rows_per_granule, "granules": self.granules,
            "seed": list(self.seed), "note": self.note, "scale": self.scale,
            "eigenvalues": [iv.to_dict() for iv in self.eigenvalues],
            "coranks": {a: s.to_dict() for a, s in self.coranks.items()},
            "coefficients": {str(q): {"targets": list(self.targets.get(q, ())),
                                      "intervals": [c.to_dict() for c in cs]}
                             for q, cs in sorted(self.coefficients.items())},
            "elementary": [c.to_dict() for c in self.elementary],
            "noise_variance": {str(q): iv.to_dict() for q, iv in sorted(self.noise.items())},
            "diagonal_noise_share": [iv.to_dict() for iv in self.diagonal_noise],
            "diagonal_outer_set": [o.to_dict() for o in self.outer],
            "rules": dict(self.rules),
        })


# --------------------------------------------------------------------------- equal-noise corank


def equal_noise_corank_rule(eigenvalues, *, eps: float, nobs: float, level: float = DEFAULT_TEST_LEVEL,
                            lag1=None) -> int:
    """The equal-noise corank of one covariance (see :data:`EQUAL_RULE`).

    ``eigenvalues`` on the analysis scale, ``eps`` the tolerance on that scale.
    Under equal noise ``s^2 I`` the corank is the multiplicity of the smallest
    eigenvalue, whatever ``s^2`` is. k smallest eigenvalues count as equal
    when the sequential test (Lawley 1956; Anderson 1963) does not reject
    k' = 2 .. k, or when they lie within ``eps`` of one another: the model
    "equal noise up to a deviation" ``N = s^2 I + E`` with ``||E||_2 <= eps/2``
    admits corank k exactly when ``l_k - l_1 <= eps`` (Weyl 1912: the k
    smallest eigenvalues of ``S_hat + s^2 I + E`` with rank-deficient
    ``S_hat`` lie in ``[s^2 - eps/2, s^2 + eps/2]``; conversely ``s^2`` the
    midpoint of ``l_1, l_k`` and ``E`` the rest on their eigenvectors
    leave ``S_hat`` positive semidefinite). That branch does not look at
    the level ``s^2``; the bounded-noise rule (``l_k <= eps``) does. It keeps
    near-exact relations whose tiny noise variances differ (the test
    rejects equality of 0.005 and 0.01 at a few hundred rows) from being
    read as one relation (measured in ``benchmarks/inference_checks.py corank``).
    Corank 1 always fits, so it is reported only when ``l_1 <= eps``.

    Serial dependence: ``lag1`` (None for rows taken as independent) gives the
    lag-1 autocorrelations of the eigen-components, one per eigenvalue in the
    order given; the test of the k smallest then uses the effective sample size
    ``T / max_{a,b<=k} (1 + r_a r_b) / (1 - r_a r_b)``
    (:func:`relspan.analysis.equal_test.effective_nobs_by_k`, Bartlett 1946).

    References
    ----------
    .. [1] D. N. Lawley, Biometrika 43(1/2), 128-136, 1956.
    .. [2] T. W. Anderson, Ann. Math. Statist. 34(1), 122-148, 1963.
    .. [3] H. Weyl, "Das asymptotische Verteilungsgesetz der Eigenwerte linearer
           partieller Differentialgleichungen", Mathematische Annalen 71, 441-479, 1912.
    .. [4] M. S. Bartlett, "On the theoretical specification and sampling
           properties of autocorrelated time-series", JRSS Supplement 8(1), 27-41, 1946.
    """
    return int(equal_noise_corank_stack(np.asarray(eigenvalues, dtype=float)[None, :], eps=eps,
                                        nobs=nobs, level=level,
                                        lag1=None if lag1 is None else np.asarray(lag1, dtype=float)[None, :])[0])


def equal_noise_corank_stack(eigenvalues, *, eps: float, nobs, level: float = DEFAULT_TEST_LEVEL,
                             lag1=None, serial=None, directions=None) -> np.ndarray:
    """:func:`equal_noise_corank_rule` for a ``(B, n)`` stack.

    ``lag1`` is ``(B, n)``, aligned with ``eigenvalues`` column by column, or None. Alternatively
    ``serial`` (:class:`relspan.analysis.equal_test.SerialDependence` of the
    window, None for independent rows) with ``directions`` ``(B, n, n)``, each
    resample's eigenvectors (columns aligned with ``eigenvalues``) carried to analysed
    coordinates: a block bootstrap keeps the window's dependence, so each
    resample's components are read against the window's lag-1 autocovariance.
    """
    order = np.argsort(np.asarray(eigenvalues, dtype=float), axis=1)
    lam = np.take_along_axis(np.asarray(eigenvalues, dtype=float), order, axis=1)
    n = lam.shape[1]
    if lag1 is None and serial is not None and directions is not None:
        lag1 = np.take_along_axis(serial.lag1(directions), order, axis=1)
    elif lag1 is not None:
        lag1 = np.take_along_axis(np.broadcast_to(np.asarray(lag1, dtype=float), lam.shape), order, axis=1)
    if lag1 is not None:
        nobs = effective_nobs_by_k(nobs, lag1)
    q_test = sequential_corank_stack(lam, nobs=nobs, level=level)
    # within the tolerance of the smallest (ascending: a prefix); independent of the level s^2
    q_near = np.sum(lam - lam[:, :1] <= eps, axis=1)
    q = np.maximum(q_test, q_near)
    # all n eigenvalues equal: nothing but equal noise is seen, so no relation is shown
    q = np.where(q >= n, 0, q)
    return np.where((q == 1) & ~(lam[:, 0] <= eps), 0, q)


def _support(assumption: str, estimate: int | None, values: np.ndarray, n: int, rule: str,
             undetermined: int = 0, total: int | None = None) -> CorankSupport:
    total = int(values.size + undetermined) if total is None else total
    counts = np.bincount(np.asarray(values, dtype=int), minlength=n + 1)[: n + 1]
    return CorankSupport(assumption=assumption, estimate=estimate, coranks=tuple(range(n + 1)),
                         chosen_share=tuple(float(c) / max(total, 1) for c in counts), admissible_share=None,
                         undetermined_share=undetermined / max(total, 1), resamples=total, rule=sys.intern(rule))


# --------------------------------------------------------------------------- diagonal noise


def diagonal_corank_of(cov: np.ndarray, warm: Any, *, eps: float, seed: int) -> tuple[int | None, Any]:
    """The diagonal-noise corank of one resampled covariance, and its certificates (the one place).

    Uses the corank search of the diagonal-noise analysis
    (:func:`relspan.analysis.frisch.frisch_max_corank`, one start): the
    largest certified corank, or None when a larger one is neither certified
    nor ruled out (the window analysis's rule). ``warm`` is accepted for a
    warm-started search and not used yet. Returns ``(q, certificates by q)``.
    :func:`diagonal_coranks_of` gives the same for a stack, faster.

    References
    ----------
    .. [1] J. M. F. ten Berge and H. A. L. Kiers, Psychometrika 56(2), 1991.
    """
    from relspan.analysis.frisch import frisch_max_corank

    return _corank_and_certificates(frisch_max_corank(cov, eps=eps, starts=1, seed=seed))


def diagonal_coranks_of(covs: np.ndarray, *, eps: float, seed: int) -> list[tuple[int | None, Any]]:
    """:func:`diagonal_corank_of` of every covariance of a ``(B, n, n)`` stack, bit for bit.

    The minimum-trace solves of all resamples run as one batched solve
    (:func:`relspan.analysis.frisch.frisch_max_corank_many`). A resample the
    search cannot take gives ``(None, {})`` (undetermined), as a
    ``ValueError``, ``LinAlgError`` or ``ArithmeticError`` of
    :func:`diagonal_corank_of` does in :func:`window_inference`.
    """
    from relspan.analysis.frisch import frisch_max_corank_many

    covs = np.asarray(covs, dtype=float)
    if covs.shape[0] == 0:
        return []
    return [(None, {}) if cor is None else _corank_and_certificates(cor)
            for cor in frisch_max_corank_many(covs, eps=eps, starts=1, seed=seed)]


def _corank_and_certificates(cor: Any) -> tuple[int | None, Any]:
    top = cor.max_certified
    q: int | None = int(top)
    for cert in cor.certificates:
        if cert.q > top and cert.status == "undetermined":
            q = None
    return q, {c.q: c for c in cor.certificates}


def _interval_rows(estimates, draws, *, level: float, method: str) -> list[tuple]:
    """:func:`relspan.analysis.intervals.interval` of each column of a ``(B, m)`` stack, batched, as the
    fields of each :class:`Interval` (estimate, low, high, level, method, resamples).

    Columns whose draws are all finite share one ``numpy.quantile`` along the
    resamples (the same order statistics and interpolation as one column at
    a time, so the same bits); the others go through :func:`interval` alone.
    """
    est = [float(e) for e in estimates]
    d = np.asarray(draws, dtype=float).reshape(-1, len(est))
    out: list[tuple | None] = [None] * len(est)
    full = np.isfinite(d).all(axis=0) if d.shape[0] >= 2 else np.zeros(len(est), dtype=bool)
    cols = np.flatnonzero(full)
    lvl = float(level)
    if cols.size and method in ("percentile", "basic") and 0.0 < lvl < 1.0:
        a = (1.0 - lvl) / 2.0
        qs = _two_quantiles(d[:, cols], a)
        b = int(d.shape[0])
        for c, j in enumerate(cols.tolist()):
            lo, hi = float(qs[0, c]), float(qs[1, c])
            t = est[j]
            out[j] = ((t, lo, hi, lvl, "percentile", b) if method == "percentile" else
                      (t, 2 * t - hi, 2 * t - lo, lvl, "basic", b))
    for j, row in enumerate(out):
        if row is None:
            iv = interval(est[j], d[:, j], level=level, method=method)
            out[j] = (iv.estimate, iv.low, iv.high, iv.level, iv.method, iv.resamples)
    return out


def _two_quantiles(d: np.ndarray, a: float) -> np.ndarray:
    """``numpy.quantile(d, [a, 1 - a], axis=0)`` of finite columns, bit for bit, from one sort.

    NumPy's default ("linear", Hyndman & Fan's definition 7) takes the order statistics at
    ``floor(h)`` and ``floor(h) + 1`` with ``h = (B - 1) q`` and interpolates them as its
    ``_lerp`` does (``lo + (hi - lo) g``, or ``hi - (hi - lo) (1 - g)`` when ``g >= 0.5``); the
    same operations on the same order statistics give the same bits, without the general
    function's per-call work (about 115 us for a window's columns, against 30 us here).
    Where an order statistic used is zero, NumPy itself is called (see below).
    ``tests/analysis/test_coefficient_intervals.py`` checks it against ``numpy.quantile``.
    """
    n = d.shape[0]
    virtual = (n - 1) * np.array([a, 1.0 - a])
    prev = np.floor(virtual)
    gamma = (virtual - prev)[:, None]
    lo_i = prev.astype(np.intp)
    hi_i = lo_i + 1
    top = virtual >= n - 1
    lo_i[top] = -1
    hi_i[top] = -1
    s = np.sort(d, axis=0)
    lo, hi = s[lo_i], s[hi_i]
    if not (lo.all() and hi.all()):
        # an order statistic of 0: -0.0 and 0.0 tie, and which one NumPy's partition puts there is
        # its own business; only then its own call (every other value has one representation)
        return np.quantile(d, [a, 1.0 - a], axis=0)
    diff = hi - lo
    out = lo + diff * gamma
    np.subtract(hi, diff * (1 - gamma), out=out, where=np.broadcast_to(gamma >= 0.5, out.shape))
    return out


def _intervals(estimates, draws, *, level: float, method: str) -> list[Interval]:
    """:func:`_interval_rows` as :class:`Interval` objects."""
    return [Interval(*row) for row in _interval_rows(estimates, draws, level=level, method=method)]


def _coefficient_intervals(names, cells, rows: list[tuple], level: float, method: str) -> CoefficientIntervals:
    """:class:`CoefficientIntervals` of ``(equation, variable)`` index pairs and their :func:`_interval_rows`."""
    return CoefficientIntervals.from_rows(tuple(names), cells, rows, level, method)


def _reduced_forms(stack: np.ndarray, targets: Sequence[int]) -> np.ndarray:
    """Reduced forms ``A_c^{-1} A`` of a ``(B, q, n)`` stack of orthonormal rows, solved for ``targets``.

    One batched call (:func:`_reduced_forms_of_orthonormal`, the rule of
    :func:`reduced_form_stack`: NaN where the target block is numerically
    singular). For one relation the solve is a division by the target entry,
    done directly with the floating-point operations of LAPACK's 1 x 1 solve
    (a multiplication by the reciprocal of the pivot).
    """
    if stack.shape[1] != 1:
        return _reduced_forms_of_orthonormal(stack, targets)
    t = int(targets[0])
    pivot = stack[:, :, t:t + 1]
    out = np.full_like(stack, np.nan)
    # cond of a 1 x 1 block is 1 when its entry is finite and non-zero, NaN otherwise (reduced_form_stack)
    ok = (np.isfinite(pivot) & (pivot != 0.0))[:, 0, 0]
    if ok.any():
        out[ok] = stack[ok] * (1.0 / pivot[ok])
    return out


def _reduced_forms_in_data_units(vectors: np.ndarray, std: np.ndarray, targets: Sequence[int]) -> np.ndarray:
    """Reduced forms in data units of relation bases given on the analysis scale, ``(B, q, n)``.

    ``vectors`` holds orthonormal rows ``V`` on the analysis scale and ``std`` each
    resample's standard deviations (the data-unit basis is ``A = V D^-1``). The
    reduced form does not depend on the basis chosen within a subspace, so
    ``A_c^{-1} A = D_c (V_c^{-1} V) D^{-1}``: it is solved on the analysis scale,
    where the rows are orthonormal (:func:`_reduced_forms`), and rescaled, with no
    orthonormalisation of the data-unit rows. A resample whose data-unit basis is
    not finite (a constant variable: a standard deviation of 0) gives NaN.
    """
    t = list(targets)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        fine = np.isfinite(vectors / std[:, None, :]).all(axis=(1, 2))
        if fine.all():
            return _reduced_forms(vectors, t) * (std[:, t][:, :, None] / std[:, None, :])
        out = np.full(vectors.shape, np.nan)
        if fine.any():
            s = std[fine]
            out[fine] = _reduced_forms(vectors[fine], t) * (s[:, t][:, :, None] / s[:, None, :])
    return out


def _reduced_forms_of_orthonormal(stack: np.ndarray, targets: Sequence[int]) -> np.ndarray:
    """:func:`reduced_form_stack` of a ``(B, q, n)`` stack of orthonormal rows, without most of its SVDs.

    The same matrices, the same rule (NaN where cond(A_c) >= 1/eps), the same
    solves: each matrix is solved on its own in one batched call, and cond is
    computed (an SVD each) only where a cheap bound cannot settle it. With
    orthonormal rows, ``||A_c||_2 <= 1`` and ``||A_c^{-1} A||_2 = ||A_c^{-1}||_2``,
    so ``cond(A_c) <= ||A_c^{-1} A||_F``: a solution of Frobenius norm below
    half of 1/eps (room for rounding) has a block well within the rule.
    """
    t = list(targets)
    block = stack[:, :, t]
    try:
        with np.errstate(all="ignore"):
            x = np.linalg.solve(block, stack)
    except np.linalg.LinAlgError:       # an exactly singular block: the general path
        return reduced_form_stack(stack, targets)
    with np.errstate(all="ignore"):
        norm = np.sqrt(np.sum(x * x, axis=(1, 2)))
    sure = np.isfinite(norm) & (norm < 0.5 / EPS)
    if sure.all():
        return x
    out = np.full_like(stack, np.nan)
    out[sure] = x[sure]
    rest = np.flatnonzero(~sure)
    cond = np.linalg.cond(block[rest])
    ok = np.isfinite(cond) & (cond < 1.0 / EPS)
    out[rest[ok]] = x[rest[ok]]
    return out


def _inv_stack(covs: np.ndarray) -> np.ndarray:
    """Inverses of a ``(B, n, n)`` stack; NaN for a singular resample (an exact relation in it)."""
    try:
        return np.linalg.inv(covs)
    except np.linalg.LinAlgError:
        out = np.full_like(covs, np.nan)
        for b, s in enumerate(covs):
            try:
                out[b] = np.linalg.inv(s)
            except np.linalg.LinAlgError:
                pass
        return out


def _one_orthant_stack(p: np.ndarray) -> np.ndarray:
    """Per matrix of a ``(B, n, n)`` stack: every ``P_ij P_jk P_ki > 0`` (the elementary regressions in one orthant)."""
    n = p.shape[1]
    ok = np.ones(p.shape[0], dtype=bool)
    for i in range(n):
        for j in range(i + 1, n):
            for k in range(j + 1, n):
                ok &= p[:, i, j] * p[:, j, k] * p[:, k, i] > 0
    if n == 2:
        ok &= p[:, 0, 1] != 0
    return ok


def _frisch_bounds_stack(covs: np.ndarray, ref: int) -> tuple[np.ndarray, np.ndarray]:
    """Diagonal-noise single-relation bounds of the reference equation, per resample (data units).

    With one orthant the set is the convex hull of the elementary regressions
    (Frisch 1934; Klepper & Leamer 1984): coefficient ``k`` ranges over
    ``-P[j, k] / P[j, ref]``, j = 1..n. Otherwise it is unbounded (+-inf).
    """
    p = _inv_stack(covs)
    with np.errstate(divide="ignore", invalid="ignore"):
        coef = -p / p[:, :, ref][:, :, None]        # [b, j, k]
    lo, hi = coef.min(axis=1), coef.max(axis=1)
    ok = _one_orthant_stack(p)
    lo = np.where(ok[:, None], lo, -np.inf)
    hi = np.where(ok[:, None], hi, np.inf)
    lo[:, ref] = hi[:, ref] = 0.0
    return lo, hi


def imbens_manski_critical(width: float, level: float) -> float:
    """The ``c`` of :func:`imbens_manski_outer`: the root of ``Phi(c + width) - Phi(-c) = level``.

    ``f(c) = Phi(c) - Phi(-c - width) - level`` (the same equation, each tail
    taken where it is small) increases in ``c`` and changes sign between the
    one-sided quantile ``Phi^-1(level)`` (``f <= 0``) and the two-sided one
    ``Phi^-1((1 + level) / 2)`` (``f >= 0``), so Newton steps
    (``f'(c) = phi(c) + phi(c + width)``) kept inside that shrinking bracket,
    and bisection where a step would leave it, converge to the root in a few
    iterations. Tests compare it with SciPy's ``brentq`` (run to full precision).
    """
    lo, hi = float(norm_ppf(level)), float(norm_ppf(0.5 * (1.0 + level)))
    if not width > 0.0:
        return hi
    z = lo
    for _ in range(200):
        f = float(norm_cdf(z)) - float(norm_cdf(-z - width)) - level
        if f > 0.0:
            hi = z
        elif f < 0.0:
            lo = z
        else:
            return z
        slope = _PHI0 * (math.exp(-0.5 * z * z) + math.exp(-0.5 * (z + width) ** 2))
        step = z - f / slope if slope > 0.0 else 0.5 * (lo + hi)
        new = step if lo < step < hi else 0.5 * (lo + hi)
        tol = 4.0 * _EPS * max(1.0, abs(z))
        if abs(new - z) <= tol or hi - lo <= tol:
            return new
        z = new
    return z


#: 1 / sqrt(2 pi), the standard normal density at 0; the spacing of doubles at 1
_PHI0 = 1.0 / math.sqrt(2.0 * math.pi)
_EPS = float(np.finfo(float).eps)


def imbens_manski_outer(lower: float, upper: float, lower_draws, upper_draws, *, level: float
                        ) -> tuple[float, float, float]:
    """An Imbens-Manski (2004) confidence set for a point in ``[lower, upper]`` from bootstrap draws.

    ``low = lower - c sd(lower_b)``, ``high = upper + c sd(upper_b)``, with
    ``c`` solving ``Phi(c + (upper - lower) / max(sd)) - Phi(-c) = level``
    (``c`` is the two-sided normal quantile for a point, the one-sided one for a
    wide set). A side whose draws are infinite in more than ``(1 - level) / 2``
    of resamples is left open (infinite). Returns ``(low, high, c)``.

    References
    ----------
    .. [1] G. W. Imbens and C. F. Manski, Econometrica 72(6), 1845-1857, 2004.
    """
    lo_d = np.asarray(lower_draws, dtype=float)
    hi_d = np.asarray(upper_draws, dtype=float)
    alpha = (1.0 - level) / 2.0
    if not (np.isfinite(lower) and np.isfinite(upper)):
        return (lower if np.isfinite(lower) else -np.inf, upper if np.isfinite(upper) else np.inf, np.nan)
    open_lo = np.mean(~np.isfinite(lo_d)) > alpha
    open_hi = np.mean(~np.isfinite(hi_d)) > alpha
    s_lo = float(np.std(lo_d[np.isfinite(lo_d)], ddof=1)) if np.isfinite(lo_d).sum() > 1 else np.nan
    s_hi = float(np.std(hi_d[np.isfinite(hi_d)], ddof=1)) if np.isfinite(hi_d).sum() > 1 else np.nan
    if not (np.isfinite(s_lo) and np.isfinite(s_hi)):
        return -np.inf, np.inf, np.nan
    smax = max(s_lo, s_hi)
    width = (upper - lower) / smax if smax > 0 else np.inf
    if not np.isfinite(width):
        c = float(norm_ppf(level))
    else:
        c = imbens_manski_critical(width, level)
    low = -np.inf if open_lo else lower - c * s_lo
    high = np.inf if open_hi else upper + c * s_hi
    return float(low), float(high), c


# --------------------------------------------------------------------------- eigenvalue intervals


def eigenvalue_gradient(cov, j: int, *, scale: str) -> np.ndarray:
    """Gradient ``G`` of eigenvalue ``j`` (ascending) of the covariance on the analysis scale, in closed form.

    ``lambda_j(S + E) = lambda_j(S) + tr(G E) + O(||E||^2)`` for symmetric ``E``
    (a simple eigenvalue): ``G = v v^T`` on the scale as given; on the
    correlation scale ``R = D^-1/2 S D^-1/2`` (``D = diag S``),
    ``G = w w^T - lambda diag(v_i^2 / S_ii)`` with ``w = D^-1/2 v`` (first-order
    perturbation of a simple eigenvalue, common practice, and the chain rule
    through the scaling; tests check it against
    :func:`relspan.analysis.resample.statistic_gradient`).
    """
    s = np.asarray(cov, dtype=float)
    if scale == "correlation":
        d = np.sqrt(np.clip(np.diag(s), 0.0, None))
        d = np.where(d > 0, d, 1.0)
        lam, vec = np.linalg.eigh(s / np.outer(d, d))
        v = vec[:, j]
        w = v / d
        return np.outer(w, w) - lam[j] * np.diag(v * v / (d * d))
    _, vec = np.linalg.eigh(s)
    return np.outer(vec[:, j], vec[:, j])


#: standard errors at most this share of the window's largest eigenvalue count as zero (not resolved)
SE_RESOLUTION = 1e-8
#: the eigenvalue intervals are studentised on the log scale (they are positive)
EIGENVALUE_LOG_SCALE = False

#: the eigenvalue intervals for block resamples, in words (methods page, results.json)
STUDENTIZED_RULE = ("Studentised (bootstrap-t) intervals (Hall 1988) of the eigenvalues on the {scale} scale, "
                    "from {resamples} block resamples: each resample is standardised by its own standard error "
                    "from the sums of influence values over its blocks (Goetze & Kuensch 1996), and the "
                    "interval's scale is the standard error from the flat-top lag-window long-run variance of "
                    "the influence values (Politis & Romano 1995). "
                    "Resamples made of a single block (a rotation of the window itself, with no standard error "
                    "of their own) are left out, and so are standard errors at most {res:g} of the largest "
                    "eigenvalue (not resolved from rounding); an eigenvalue whose own standard error is that "
                    "small, or which lies within that share of a neighbouring eigenvalue (tied, so without "
                    "a gradient), gets the basic interval. Lower ends below 0 set to 0.")
BASIC_RULE = ("Basic bootstrap intervals (Davison & Hinkley 1997) of the eigenvalues on the {scale} scale, from "
              "{resamples} resamples; lower ends below 0 set to 0.")


def eigenvalue_intervals(stats_: GranuleStats, res: CovarianceResamples, estimates, draws, *, scale: str,
                         level: float, log: bool | None = None) -> tuple[list[Interval], str]:
    """Intervals of the eigenvalues (ascending) on the analysis scale, and the rule that made them.

    Block resamples of time-ordered rows (``res.scheme`` moving or stationary):
    blockwise studentised intervals
    (:func:`relspan.analysis.resample.studentized_interval`), which cover
    closer to the stated level than the basic interval under autocorrelation,
    in short windows with few blocks too (docs/inference.md, measured
    coverage). Two rules keep them stable across BLAS kernels:

    - a resample made of one block has no standard error of its own (its one
      centred block sum is zero; floating point leaves rounding, which differs
      between BLAS kernels and gave the studentised quantiles arbitrary values)
      and is left out (:func:`relspan.analysis.resample.resample_influence_sd`):
      it is a rotation of the window, whose statistic is the estimate;
    - standard errors at most :data:`SE_RESOLUTION` times the largest
      eigenvalue count as zero (an exact relation's eigenvalue is rounding and
      so is its standard error): such resamples are left out, and an eigenvalue
      whose own standard error is that small gets the basic interval, method
      ``"basic"``;
    - an eigenvalue within that share of a neighbouring one is not simple: its
      eigenvector, and so the first-order gradient the standard errors use
      (:func:`eigenvalue_gradient`), is any vector of the tied space, and the
      one returned differs between BLAS kernels; it gets the basic interval.

    Independent rows: basic bootstrap intervals, as measured equally good
    there. Lower ends are at least 0. Every step is a function of the window's
    granules and its recorded stream, so the result is the same in every
    process. ``log`` (default :data:`EIGENVALUE_LOG_SCALE`) studentises the
    logarithm instead.

    References
    ----------
    .. [1] P. Hall, "Theoretical comparison of bootstrap confidence intervals",
           Annals of Statistics 16(3), 927-953, 1988.
    .. [2] F. Goetze and H. R. Kuensch, "Second-order correctness of the
           blockwise bootstrap for stationary observations", Annals of
           Statistics 24(5), 1914-1933, 1996.
    .. [3] D. N. Politis and J. P. Romano, "Bias-corrected nonparametric
           spectral estimation", Journal of Time Series Analysis 16(1), 67-103, 1995.
    .. [4] A. C. Davison and D. V. Hinkley, *Bootstrap Methods and their
           Application*, Cambridge University Press, 1997.
    """
    est = np.asarray(estimates, dtype=float)
    d = np.asarray(draws, dtype=float)
    basic = _intervals(est, d, level=level, method="basic")
    out = list(basic)
    rule = BASIC_RULE.format(scale=scale, resamples=res.resamples)
    use_log = EIGENVALUE_LOG_SCALE if log is None else bool(log)
    if res.scheme != "iid" and can_redraw(res):
        rule = STUDENTIZED_RULE.format(scale=scale, resamples=res.resamples, res=SE_RESOLUTION)
        cov = res.estimate
        floor = SE_RESOLUTION * (float(np.max(np.abs(est))) if est.size else 0.0)
        influence: dict[int, tuple[np.ndarray, float]] = {}
        for j in range(est.shape[0]):
            gap = min([abs(float(est[j] - est[k])) for k in (j - 1, j + 1) if 0 <= k < est.shape[0]],
                      default=np.inf)
            if gap <= floor:
                continue  # tied with a neighbour: not a simple eigenvalue, no gradient; the basic interval
            u = influence_values(stats_, eigenvalue_gradient(cov, j, scale=scale))
            influence[j] = (u, influence_sd(u, stats_.counts, ordered=True))
        # the resamples' own standard errors, drawn again chunk by chunk (never all at once)
        sd_draws = {j: np.empty(res.resamples) for j in influence}
        if influence:
            for b0, idx, blk in iter_drawn_blocks(res):
                for j, (u, _) in influence.items():
                    sd_draws[j][b0:b0 + idx.shape[0]] = resample_influence_sd(u, stats_.counts, idx, blk)
                del idx, blk
        for j, (u, se) in influence.items():
            iv = studentized_interval(float(est[j]), d[:, j], se, sd_draws[j], level=level,
                                      resolution=floor, log=use_log)
            if np.isfinite(iv.low) and np.isfinite(iv.high):
                out[j] = iv
    eig = [Interval(iv.estimate, max(iv.low, 0.0), iv.high, iv.level, iv.method, iv.resamples) for iv in out]
    return eig, rule


# --------------------------------------------------------------------------- the window


def _block_in_granules(stats_: GranuleStats, scheme: str | None, block_length: float | None) -> float | None:
    """The block length in granules (None: the automatic rule), as every window stream converts it."""
    if scheme != "iid" and block_length is not None:
        return max(block_length / max(stats_.rows_per_granule, 1), 1.0)
    return None


def draw_window(stats_: GranuleStats, *, options, seed_key: tuple) -> CovarianceResamples:
    """A window's resamples from its own stream ``window_rng(options.seed, *seed_key)`` (the one place).

    ``options`` needs ``resamples``, ``scheme``, ``block_length`` (rows) and
    ``seed``: the window task's :class:`ResamplingOptions` and the cross-window
    stage's options both qualify, so whoever draws a window with the same
    options gets the same resamples, bit for bit.
    """
    rng = window_rng(options.seed, *seed_key)
    return resample_covariances(stats_, resamples=int(options.resamples), rng=rng, scheme=options.scheme,
                                block_length=_block_in_granules(stats_, options.scheme, options.block_length),
                                seed=(options.seed, *seed_key))


def drawn_as(drawn: CovarianceResamples, options, seed_key: tuple, stats_: GranuleStats) -> bool:
    """True when ``drawn`` is what :func:`draw_window` gives for these options and this window."""
    block = _block_in_granules(stats_, options.scheme, options.block_length)
    return (drawn.seed == (options.seed, *seed_key) and drawn.resamples == int(options.resamples)
            and drawn.scheme == options.scheme and drawn.granules == stats_.k
            and (block is None or drawn.block_length == (float(min(max(round(block), 1), stats_.k))
                                                          if options.scheme == "moving" else float(block))))


@dataclass(frozen=True, slots=True, eq=False)
class DrawnGranules:
    """A window's granules with its resamples already drawn (:func:`draw_window`), and their decompositions.

    The window task draws a window once and hands the same resamples to the
    intervals (:func:`window_inference` reads :attr:`drawn` when it was drawn
    with the task's own options and stream, and draws afresh otherwise) and to
    the cross-window stability stage. ``on_scale``, ``eig`` (values, vectors)
    and ``inverse`` are the batched decompositions both read, computed once by
    :func:`drawn_granules` exactly as :func:`window_inference` computes them
    (``scale`` says on which scale; ``inverse`` is None when a resample is singular).
    """

    stats: GranuleStats
    drawn: CovarianceResamples
    scale: str | None = None
    on_scale: np.ndarray | None = None
    eig: tuple | None = None
    inverse: np.ndarray | None = None


def drawn_granules(stats_: GranuleStats, drawn: CovarianceResamples, scale: str) -> DrawnGranules:
    """:class:`DrawnGranules` with the decompositions of :func:`window_inference` on ``scale``."""
    covs = drawn.covariances
    on_scale = scale_stack(covs, "correlation" if scale == "correlation" else "as given")
    try:
        inverse = np.linalg.inv(covs)
    except np.linalg.LinAlgError:
        inverse = None
    return DrawnGranules(stats_, drawn, scale, on_scale, np.linalg.eigh(on_scale), inverse)


def window_inference(stats_: GranuleStats, *, names: Sequence[str], options: ResamplingOptions,
                     seed_key: tuple, scale: str, eps: float, ref: int, coranks: Sequence[int],
                     estimates: Mapping[str, Any], assumptions: Sequence[str], nobs: float,
                     diagonal: Callable | None = None) -> WindowInference:
    """Resample one window and compute every interval and corank support.

    Parameters
    ----------
    stats_ : GranuleStats
        The window's granules (analysed coordinates).
    names : sequence of str
    options : ResamplingOptions
    seed_key : tuple
        ``(dataset, plan, window index)``: with ``options.seed`` it names the stream.
    scale : str
        ``"correlation"`` (each resample on its own correlation scale) or ``"as given"``.
    eps : float
        Tolerance on that scale.
    ref : int
        The reference variable.
    coranks : sequence of int
        Coranks whose equal-noise coefficients and noise variances get intervals.
    estimates : mapping
        On the data: ``eigenvalues`` (analysis scale, ascending), ``basis`` (q -> (q, n)
        rows on the analysis scale), ``tstd`` (the analysis scale's divisors),
        ``elementary`` ((n, n) coefficients or None), ``equal_q``, ``bounded_q``,
        ``diagonal_q`` (None: undetermined), ``frisch_lower`` / ``frisch_upper`` (data units).
    assumptions : sequence of str
        The assumptions the window computes.
    nobs : float
        Rows of the window.
    diagonal : callable, optional
        ``diagonal(cov, warm) -> (q, certificates)``, one resample at a time; by default
        :func:`diagonal_coranks_of` takes the whole stack at once (the same results as
        :func:`diagonal_corank_of` per resample).

    Returns
    -------
    WindowInference
    """
    names = tuple(names)
    n = len(names)
    level = options.level
    res = pre = None
    if isinstance(stats_, DrawnGranules):
        pre, stats_, res = stats_, stats_.stats, stats_.drawn
        if not drawn_as(res, options, seed_key, stats_):
            pre = res = None
    if res is None:
        res = draw_window(stats_, options=options, seed_key=seed_key)
    covs = res.covariances
    if pre is not None and pre.scale == scale and pre.eig is not None:
        on_scale, (lam, vec) = pre.on_scale, pre.eig        # computed once, as here, by the task
    else:
        on_scale = scale_stack(covs, "correlation" if scale == "correlation" else "as given")
        lam, vec = np.linalg.eigh(on_scale)
    rows_b = res.rows
    if scale == "correlation":
        std_b = np.sqrt(np.diagonal(covs, axis1=1, axis2=2))
    else:
        std_b = np.ones((covs.shape[0], n))
    rules: dict[str, str] = {}

    est_lam = np.sort(np.asarray(estimates["eigenvalues"], dtype=float))
    eig, rules["eigenvalues"] = eigenvalue_intervals(stats_, res, est_lam[:n], lam[:, :n], scale=scale,
                                                     level=level)

    supports: dict[str, CorankSupport] = {}
    if "equal" in assumptions:
        serial = estimates.get("serial") if options.scheme != "iid" else None
        qs = equal_noise_corank_stack(lam, eps=eps, nobs=rows_b, level=options.test_level, serial=serial,
                                      directions=None if serial is None else vec / std_b[:, :, None])
        supports["equal"] = _support("equal", estimates.get("equal_q"), qs, n,
                                     EQUAL_RULE + f" Applied to each of {res.resamples} resamples.")
    if "bounded" in assumptions:
        b = bounded_support(est_lam, lam, eps=eps)
        share = list(b.chosen_share)
        share[n - 1] += share[n]          # the window reports at most n - 1 relations
        share[n] = 0.0
        supports["bounded"] = CorankSupport(
            assumption="bounded", estimate=estimates.get("bounded_q"), coranks=b.coranks,
            chosen_share=tuple(share), admissible_share=b.admissible_share, undetermined_share=0.0,
            resamples=b.resamples, rule=b.rule)

    # equal noise: reduced-form coefficients (data units) and sigma^2 per kept corank
    coefficients: dict[int, CoefficientIntervals] = {}
    targets: dict[int, tuple[str, ...]] = {}
    noise: dict[int, Interval] = {}
    bases = estimates.get("basis") or {}
    tstd = np.asarray(estimates.get("tstd", np.ones(n)), dtype=float)
    if "equal" in assumptions:
        noise_of: list[tuple[int, float, np.ndarray]] = []
        coef_est: list[float] = []
        coef_draws: list[np.ndarray] = []
        coef_of: list[tuple[int, list[tuple[int, int, int]]]] = []
        for q in coranks:
            basis = bases.get(q)
            if basis is None:
                continue
            est_data = orthonormal_rows(np.atleast_2d(basis) / tstd[None, :])
            tidx = [ref] if q == 1 else list(pivot_columns(est_data))
            est_red = _reduced_forms(est_data[None], tidx)[0]
            # resampled relation bases on the analysis scale, their reduced forms in data units
            draws = _reduced_forms_in_data_units(np.swapaxes(vec[:, :, :q], 1, 2), std_b, tidx)
            cells = [(i, t, k) for i, t in enumerate(tidx) for k in range(n) if k not in tidx]
            coef_est.extend(-est_red[i, k] for i, _, k in cells)
            coef_draws.extend(-draws[:, i, k] for i, _, k in cells)
            coef_of.append((q, cells))
            targets[q] = tuple(names[t] for t in tidx)
            noise_of.append((q, float(np.mean(est_lam[:q])), lam[:, :q].mean(axis=1)))
        # every corank's coefficients and noise variances in one batched quantile call (same bits as
        # one call per corank: each column's order statistics are its own)
        ests = coef_est + [e for _, e, _ in noise_of]
        if ests:
            rows = _interval_rows(ests, np.stack(coef_draws + [d for _, _, d in noise_of], axis=1),
                                  level=level, method="percentile")
            at = 0
            for q, cells in coef_of:
                coefficients[q] = _coefficient_intervals(names, [(t, k) for _, t, k in cells],
                                                         rows[at:at + len(cells)], level, "percentile")
                at += len(cells)
            noise.update((q, Interval(*row)) for (q, _, _), row in zip(noise_of, rows[at:]))
        rules["coefficients"] = (
            "Equal noise: each resample's relation subspace is solved for the same variables as the "
            "estimate (its reduced form, which does not depend on the basis chosen within the subspace) "
            "and read in data units; percentile intervals (Efron 1979).")
        rules["noise_variance"] = (f"Equal noise: sigma^2 is the mean of the q smallest eigenvalues on the {scale} "
                                   "scale (Tipping & Bishop 1999); percentile intervals.")

    elementary: Sequence[CoefficientInterval] = ()
    est_el = estimates.get("elementary")
    if est_el is not None:
        with np.errstate(all="ignore"):
            p = pre.inverse if pre is not None and pre.inverse is not None else _inv_stack(covs)
            d = np.diagonal(p, axis1=1, axis2=2)
            draws = -p / d[:, :, None]
        cells = [(j, k) for j in range(n) for k in range(n) if j != k]
        elementary = _coefficient_intervals(
            names, cells, _interval_rows([est_el[j, k] for j, k in cells],
                                         np.stack([draws[:, j, k] for j, k in cells], axis=1),
                                         level=level, method="percentile"), level, "percentile")
        rules["elementary"] = ("Elementary regressions: -P[j,k]/P[j,j] of each resample's inverse covariance "
                               "(data units); percentile intervals.")

    diag_noise: list[Interval] = []
    outer: list[OuterSet] = []
    if "diagonal" in assumptions:
        d_b = min(options.diagonal_resamples, res.resamples)
        q_hat = estimates.get("diagonal_q")
        if d_b > 0:
            # the default search on the whole stack at once (the same results as one call each)
            stacked = diagonal_coranks_of(on_scale[:d_b], eps=eps, seed=options.seed) if diagonal is None else None
            got, undet, shares = [], 0, []
            warm = None
            for i, s in enumerate(on_scale[:d_b]):
                try:
                    q, certs = stacked[i] if stacked is not None else diagonal(s, warm)
                except (ValueError, np.linalg.LinAlgError, ArithmeticError):
                    q, certs = None, {}      # a resample the search cannot take: undetermined
                warm = certs
                if q is None:
                    undet += 1
                else:
                    got.append(q)
                cert = certs.get(q_hat) if q_hat else None
                if cert is not None and cert.status == "certified" and cert.noise_share is not None:
                    shares.append(cert.noise_share)
            supports["diagonal"] = _support(
                "diagonal", q_hat, np.asarray(got, dtype=int), n,
                f"Diagonal noise (Frisch scheme): the largest corank with an existence certificate at the "
                f"tolerance (undetermined when a larger one is neither certified nor ruled out), searched "
                f"from one start on each of the first {d_b} of the {res.resamples} resamples.",
                undetermined=undet, total=d_b)
            est_share = estimates.get("diagonal_share")
            if est_share is not None and len(shares) >= 2:
                arr = np.asarray(shares, dtype=float)
                diag_noise = [interval(float(est_share[j]), arr[:, j], level=level, method="percentile")
                              for j in range(n)]
                rules["diagonal_noise"] = (
                    "Diagonal noise: each variable's noise share of its variance in the certificate of the "
                    "window's corank, over the diagonal-noise resamples that certified that corank; "
                    "percentile intervals (a set of solutions exists: these describe the certificate found).")
        lower, upper = estimates.get("frisch_lower"), estimates.get("frisch_upper")
        if lower is not None and upper is not None:
            with np.errstate(all="ignore"):
                lo_b, hi_b = _frisch_bounds_stack(covs, ref)
            for k in range(n):
                if k == ref:
                    continue
                low, high, c = imbens_manski_outer(float(lower[k]), float(upper[k]), lo_b[:, k], hi_b[:, k],
                                                   level=level)
                unb = float(np.mean(~(np.isfinite(lo_b[:, k]) & np.isfinite(hi_b[:, k]))))
                outer.append(OuterSet(names[k], float(lower[k]), float(upper[k]), low, high, level, c, unb,
                                      res.resamples))
            rules["outer_set"] = (
                f"Diagonal noise, one relation: each coefficient's identified set [lower, upper] (the hull of "
                f"the elementary regressions when they lie in one orthant) is widened to "
                f"[lower - c sd(lower), upper + c sd(upper)], the standard deviations over resamples, c solving "
                f"Phi(c + (upper - lower)/max sd) - Phi(-c) = {level:g} (Imbens & Manski 2004); a side stays "
                f"open when the set is unbounded in more than {100 * (1 - level) / 2:g}% of resamples.")

    return WindowInference(
        resamples=res.resamples, level=level, scheme=res.scheme,
        block_length_rows=float(res.block_length * res.rows_per_granule), block_rule=sys.intern(res.block_rule),
        rows_per_granule=res.rows_per_granule, granules=res.granules, seed=(options.seed, *seed_key),
        note=sys.intern(res.note), scale=scale, eigenvalues=tuple(eig), coranks=supports, coefficients=coefficients,
        targets=targets, elementary=elementary, noise=noise, diagonal_noise=tuple(diag_noise),
        outer=tuple(outer), rules={k: sys.intern(v) for k, v in rules.items()})
