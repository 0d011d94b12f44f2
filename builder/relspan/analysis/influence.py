"""Influence: does a single row, or a single block of rows, decide a finding?

Two checks side by side on the full sample, each answering with the corank
the analysis would report without the rows in question:

* **Leave one block out.** The rows (granules, in time order) are cut into
  ``B`` contiguous blocks (at most :data:`MAX_BLOCKS`); each block is left
  out in turn and the window is analysed again from the merge of the
  remaining granules (no re-read). A count that changes when one block is
  left out rests on that block.
* **Robust covariance.** The Minimum Covariance Determinant estimator
  (Rousseeuw 1984), computed by FAST-MCD (Rousseeuw & Van Driessen 1999):
  the ``h = floor((T + n + 1) / 2)`` rows whose covariance has the smallest
  determinant, found from random ``(n + 1)``-row starts improved by
  concentration steps (above :data:`MCD_NESTED_ABOVE` rows the starts run in
  random subsets of the rows, then merged: the paper's nested extension);
  the raw estimate is made consistent at the normal model and reweighted
  (rows with squared robust distance above the 97.5% chi-square quantile
  get weight 0). Rows beyond that quantile are *flagged*;
  the count is computed again from the robust covariance and from the rows
  without the flagged ones. It needs single rows (granules of one row); for
  larger datasets, whose granules pool several rows, it is not run and the
  report says so.

Stated rule: a count **rests on one block** when leaving out that block alone
changes it; it **rests on a single row** when dropping the most outlying
flagged row alone changes it; it **rests on a few rows** when dropping the
flagged rows (at most :data:`FEW_ROWS_SHARE` of the rows) changes it. Either is said beside the
finding; neither is evidence that the flagged rows are errors.

References
----------
.. [1] P. J. Rousseeuw, "Least median of squares regression", Journal of the
       American Statistical Association 79(388), 871-880, 1984.
.. [2] P. J. Rousseeuw and K. Van Driessen, "A fast algorithm for the minimum
       covariance determinant estimator", Technometrics 41(3), 212-223, 1999.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Callable, Mapping, Sequence

import numpy as np

from relspan.analysis._common import jsonable
from relspan.analysis._dist import chi2_ppf
from relspan.errors import OptionsError

__all__ = ["McdResult", "fast_mcd", "InfluenceReport", "influence_report", "MAX_BLOCKS", "FEW_ROWS_SHARE",
           "MCD_MAX_ROWS", "MCD_NESTED_ABOVE", "MCD_SUBSET_ROWS", "MCD_SUBSETS"]

#: most blocks the rows are cut into for leave-one-block-out
MAX_BLOCKS = 20
#: "a few rows": at most this share of the rows may be flagged for the few-rows rule
FEW_ROWS_SHARE = 0.05
#: the robust fit runs on at most this many rows (single-row granules only)
MCD_MAX_ROWS = 20000
#: above this many rows FAST-MCD starts in random subsets and merges them (Rousseeuw & Van Driessen 1999,
#: section 3.3; the paper's suggested sizes, recalled from memory: 600 rows, subsets of 300, at most 5)
MCD_NESTED_ABOVE = 600
#: rows of each random subset of the nested FAST-MCD
MCD_SUBSET_ROWS = 300
#: most random subsets of the nested FAST-MCD (their rows pooled form the merged set)
MCD_SUBSETS = 5
#: chi-square quantile beyond which a row is flagged (and gets weight 0 in the reweighting)
FLAG_QUANTILE = 0.975


@dataclass(frozen=True, slots=True)
class McdResult:
    """The Minimum Covariance Determinant estimate of a set of rows.

    Attributes
    ----------
    raw_location, raw_covariance : ndarray
        Mean and covariance of the best ``h``-subset (covariance made
        consistent at the normal model: times ``median(d^2) / chi2_n.ppf(0.5)``).
    location, covariance : ndarray
        Reweighted estimate: mean and covariance (ddof 1) of the rows not flagged.
    support : (T,) bool ndarray
        The best ``h``-subset.
    distances : (T,) ndarray
        Squared robust (Mahalanobis) distances under the reweighted estimate.
    flagged : (T,) bool ndarray
        Squared raw robust distance above the 97.5% chi-square quantile.
    h : int
    determinant : float
        Determinant of the best subset's (unscaled) covariance.
    """

    raw_location: np.ndarray
    raw_covariance: np.ndarray
    location: np.ndarray
    covariance: np.ndarray
    support: np.ndarray
    distances: np.ndarray
    flagged: np.ndarray
    h: int
    determinant: float


def _mean_cov(x: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    m = x.mean(axis=0)
    d = x - m
    return m, (d.T @ d) / x.shape[0]


def _sq_dist(x: np.ndarray, m: np.ndarray, c: np.ndarray) -> np.ndarray | None:
    try:
        chol = np.linalg.cholesky(c)
    except np.linalg.LinAlgError:
        return None
    z = np.linalg.solve(chol, (x - m).T)
    return np.sum(z * z, axis=0)


def _c_steps(x: np.ndarray, idx: np.ndarray, h: int, steps: int) -> tuple[float, np.ndarray]:
    """Concentration steps from subset ``idx``; returns (log det, subset)."""
    logdet = np.inf
    for _ in range(steps):
        m, c = _mean_cov(x[idx])
        sign, ld = np.linalg.slogdet(c)
        if sign <= 0:
            return -np.inf, idx  # an exact fit: h rows on a hyperplane (determinant 0)
        d = _sq_dist(x, m, c)
        if d is None:
            return -np.inf, idx
        new = np.sort(np.argpartition(d, h - 1)[:h])
        if ld >= logdet - 1e-12 and np.array_equal(new, idx):
            return ld, idx
        logdet, idx = ld, new
    m, c = _mean_cov(x[idx])
    sign, ld = np.linalg.slogdet(c)
    return (ld if sign > 0 else -np.inf), idx


def _random_starts(x: np.ndarray, h: int, starts: int, rng: np.random.Generator) -> list:
    """FAST-MCD's first stage on rows ``x``: random ``(n + 1)``-row starts, each widened to the ``h``
    nearest rows and given two concentration steps; returns the trials ``(log det, subset)``.

    The starts are drawn as :func:`_random_starts_one_by_one` draws them and computed together
    (stacked means, covariances, factorisations and distances, :data:`_STACK_VALUES` values at a
    time); each start's arithmetic is that of computing it alone, so the trials are the same
    (tests compare them bit for bit). Where a drawn start is singular, the paper's rule draws
    more rows for it, which changes every later draw: then the starts are redrawn one by one.
    """
    t, n = x.shape
    starts = int(starts)
    if starts <= 0:
        return []
    state = rng.bit_generator.state
    idx = np.array([rng.choice(t, size=n + 1, replace=False) for _ in range(starts)])
    m, c = _mean_cov_many(x[idx])
    if bool(np.any(np.linalg.matrix_rank(c) < n)):
        rng.bit_generator.state = state
        return _random_starts_one_by_one(x, h, starts, rng)
    trials: list = []
    per = max(1, _STACK_VALUES // max(1, n * t))
    for lo in range(0, starts, per):
        sl = slice(lo, lo + per)
        d = _sq_dist_many(x, m[sl], c[sl] + 1e-300 * np.eye(n))
        ok = [i for i, di in enumerate(d) if di is not None]
        if not ok:
            continue
        sub = np.sort(np.argpartition(np.array([d[i] for i in ok]), h - 1, axis=1)[:, :h], axis=1)
        trials += _c_steps_many(x, sub, h, 2)
    return trials


def _random_starts_one_by_one(x: np.ndarray, h: int, starts: int, rng: np.random.Generator) -> list:
    """:func:`_random_starts` start by start, drawing more rows for a singular start (the paper's rule)."""
    t, n = x.shape
    trials = []
    for _ in range(int(starts)):
        idx = rng.choice(t, size=n + 1, replace=False)
        m, c = _mean_cov(x[idx])
        extra = 0
        while np.linalg.matrix_rank(c) < n and n + 1 + extra < t:  # singular start: add rows (the paper's rule)
            extra += 1
            idx = rng.choice(t, size=n + 1 + extra, replace=False)
            m, c = _mean_cov(x[idx])
        d = _sq_dist(x, m, c + 1e-300 * np.eye(n))
        if d is None:
            continue
        sub = np.sort(np.argpartition(d, h - 1)[:h])
        trials.append(_c_steps(x, sub, h, 2))
    return trials


#: most values (starts x rows x variables) of distances computed at once by the stacked starts
_STACK_VALUES = 1 << 21


def _mean_cov_many(xs: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """:func:`_mean_cov` of each ``xs[b]`` (``(B, k, n)``), stacked."""
    m = xs.mean(axis=1)
    d = xs - m[:, None, :]
    return m, (np.swapaxes(d, 1, 2) @ d) / xs.shape[1]


def _sq_dist_many(x: np.ndarray, m: np.ndarray, c: np.ndarray) -> list:
    """:func:`_sq_dist` of the rows ``x`` for each mean ``m[b]`` and covariance ``c[b]`` (None where
    ``c[b]`` has no Cholesky factor)."""
    try:
        chol = np.linalg.cholesky(c)
    except np.linalg.LinAlgError:  # some covariance is not positive definite: each on its own
        return [_sq_dist(x, m[b], c[b]) for b in range(m.shape[0])]
    z = np.linalg.solve(chol, np.swapaxes(x[None] - m[:, None, :], 1, 2))
    return list(np.sum(z * z, axis=1))


def _c_steps_many(x: np.ndarray, idx: np.ndarray, h: int, steps: int) -> list:
    """:func:`_c_steps` from each subset ``idx[b]`` (``(B, h)``), stacked; returns the trials in order."""
    out: list = [None] * idx.shape[0]
    logdet = np.full(idx.shape[0], np.inf)
    idx = idx.copy()
    act = np.arange(idx.shape[0])
    for _ in range(steps):
        if not act.size:
            break
        m, c = _mean_cov_many(x[idx[act]])
        sign, ld = np.linalg.slogdet(c)
        for j in np.flatnonzero(sign <= 0):  # an exact fit: h rows on a hyperplane (determinant 0)
            out[act[j]] = (-np.inf, idx[act[j]])
        good = np.flatnonzero(sign > 0)
        d = _sq_dist_many(x, m[good], c[good]) if good.size else []
        keep, rows = [], []
        for j, dj in zip(good, d):
            if dj is None:
                out[act[j]] = (-np.inf, idx[act[j]])
            else:
                keep.append(j)
                rows.append(dj)
        if not keep:
            act = act[:0]
            break
        keep = np.array(keep)
        new = np.sort(np.argpartition(np.array(rows), h - 1, axis=1)[:, :h], axis=1)
        b = act[keep]
        done = (ld[keep] >= logdet[b] - 1e-12) & np.all(new == idx[b], axis=1)
        for j in np.flatnonzero(done):
            out[b[j]] = (ld[keep[j]], idx[b[j]])
        moving = ~done
        logdet[b[moving]] = ld[keep[moving]]
        idx[b[moving]] = new[moving]
        act = b[moving]
    if act.size:
        _, c = _mean_cov_many(x[idx[act]])
        sign, ld = np.linalg.slogdet(c)
        for j, b in enumerate(act):
            out[b] = ((ld[j] if sign[j] > 0 else -np.inf), idx[b])
    return out


def _best(trials: list, keep: int) -> list:
    """Up to ``keep`` trials of smallest log determinant, each subset once, from the ``3 keep`` smallest."""
    out, seen = [], set()
    for ld, sub in sorted(trials, key=lambda r: r[0])[: 3 * keep]:
        key = sub.tobytes()
        if key not in seen:
            seen.add(key)
            out.append((ld, sub))
            if len(out) >= keep:
                break
    return out


def _carried(x: np.ndarray, fit_rows: np.ndarray, h: int, steps: int) -> tuple[float, np.ndarray] | None:
    """A fit (the mean and covariance of ``fit_rows``) carried to rows ``x``: the ``h`` rows of ``x``
    nearest to it, then ``steps`` concentration steps; None when the fit's covariance is singular."""
    m, c = _mean_cov(fit_rows)
    d = _sq_dist(x, m, c)
    if d is None:
        return None
    return _c_steps(x, np.sort(np.argpartition(d, h - 1)[:h]), h, steps)


def _nested(x: np.ndarray, h: int, starts: int, keep: int,
            rng: np.random.Generator) -> tuple[float, np.ndarray] | None:
    """FAST-MCD for many rows (the nested extension of Rousseeuw & Van Driessen 1999, section 3.3).

    Up to :data:`MCD_SUBSETS` disjoint random subsets of :data:`MCD_SUBSET_ROWS` rows (fewer rows,
    partitioning a random order of all of them, below ``MCD_SUBSETS * MCD_SUBSET_ROWS``); in each,
    ``starts / subsets`` random starts with two concentration steps at ``h_sub = ceil(rows_sub h / T)``,
    the ``keep`` best kept; the subsets pooled into the merged set, where every kept fit gets two
    concentration steps at ``h_merged = ceil(rows_merged h / T)``; the ``keep`` best of those iterated
    to convergence on all rows. Returns ``(log det, subset)``, or None when a subset or the merged
    set holds an exact fit (a singular covariance: h rows on a hyperplane), for the caller to run
    the plain algorithm, which reports exact fits as it always did.
    """
    t = x.shape[0]
    k = min(MCD_SUBSETS, t // MCD_SUBSET_ROWS)
    size = t // k if t < MCD_SUBSETS * MCD_SUBSET_ROWS else MCD_SUBSET_ROWS  # below: a partition of the rows
    order = rng.permutation(t)[: k * size]
    merged_rows = np.sort(order)
    xm = x[merged_rows]
    hm = int(np.ceil(merged_rows.size * h / t))
    carried = []
    for part in order.reshape(k, size):
        part = np.sort(part)
        xs = x[part]
        found = _best(_random_starts(xs, int(np.ceil(size * h / t)), starts // k, rng), keep)
        for ld, sub in found:
            r = _carried(xm, xs[sub], hm, 2) if np.isfinite(ld) else None
            if r is None or not np.isfinite(r[0]):
                return None  # an exact fit (h rows on a hyperplane) somewhere: the plain algorithm decides
            carried.append(r)
    if not carried:
        return None
    best_ld, best = np.inf, None
    for ld, sub in _best(carried, keep):
        r = _carried(x, xm[sub], h, 100)
        if r is not None and r[0] < best_ld:
            best_ld, best = r
    return None if best is None else (best_ld, best)


def fast_mcd(x, *, rng: np.random.Generator, starts: int = 500, keep: int = 10,
             h: int | None = None) -> McdResult:
    """The Minimum Covariance Determinant estimate by FAST-MCD.

    Up to :data:`MCD_NESTED_ABOVE` rows, every random start runs on all rows; above it the starts
    run in random subsets of the rows first and are merged (the algorithm's nested extension for
    large datasets, section 3.3 of [2]; see :func:`_nested`), which keeps the cost of the starts
    independent of the number of rows. Where a subset or the merged set holds an exact fit, and for
    ``n >= MCD_SUBSET_ROWS / 4`` variables (too many for subsets of that size), the plain algorithm
    runs.

    Parameters
    ----------
    x : (T, n) array_like
        Rows (finite), T > n + 1.
    rng : numpy.random.Generator
        Draws the random starts (pass a seeded generator).
    starts : int
        Random ``(n + 1)``-row starts, each followed by two concentration steps.
    keep : int
        The best starts iterated to convergence (and, above :data:`MCD_NESTED_ABOVE` rows, kept from
        each subset and from the merged set).
    h : int, optional
        Subset size; default ``floor((T + n + 1) / 2)`` (the highest breakdown point).

    Returns
    -------
    McdResult

    References
    ----------
    .. [1] P. J. Rousseeuw, JASA 79(388), 871-880, 1984.
    .. [2] P. J. Rousseeuw and K. Van Driessen, Technometrics 41(3), 212-223, 1999.
    """
    x = np.asarray(x, dtype=float)
    if x.ndim != 2 or not np.all(np.isfinite(x)):
        raise OptionsError("x must be a finite (T, n) array.", key="x", fix="Pass the rows as a 2-D float array.")
    t, n = x.shape
    if t <= n + 1:
        raise OptionsError(f"fast_mcd needs more than n + 1 = {n + 1} rows; got {t}.", key="x",
                           fix="Pass more rows.")
    h = int(h if h is not None else (t + n + 1) // 2)
    nested = t > MCD_NESTED_ABOVE and 4 * n < MCD_SUBSET_ROWS
    found = _nested(x, h, starts, max(1, keep), rng) if nested else None
    if found is not None:
        best_ld, best = found
    else:
        trials = _random_starts(x, h, starts, rng)
        if not trials:
            trials.append(_c_steps(x, np.arange(h), h, 2))
        best_ld, best = np.inf, None
        for ld, sub in _best(trials, max(1, keep)):
            ld2, sub2 = _c_steps(x, sub, h, 100)
            if ld2 < best_ld:
                best_ld, best = ld2, sub2
    support = np.zeros(t, dtype=bool)
    support[best] = True
    m_raw, c_raw = _mean_cov(x[best])
    d_raw = _sq_dist(x, m_raw, c_raw)
    if d_raw is None:  # exact fit: h rows on a hyperplane; no distances to scale by
        d_raw = np.zeros(t)
        factor = 1.0
    else:
        factor = float(np.median(d_raw) / chi2_ppf(0.5, n))
    c_raw = c_raw * factor
    d_raw = d_raw / factor if factor > 0 else d_raw
    cut = chi2_ppf(FLAG_QUANTILE, n)
    flagged = d_raw > cut
    keep_rows = ~flagged
    m_rw = x[keep_rows].mean(axis=0)
    c_rw = np.cov(x[keep_rows], rowvar=False, ddof=1).reshape(n, n)
    d_rw = _sq_dist(x, m_rw, c_rw)
    return McdResult(raw_location=m_raw, raw_covariance=c_raw, location=m_rw, covariance=c_rw,
                     support=support, distances=d_rw if d_rw is not None else d_raw, flagged=flagged, h=h,
                     determinant=float(np.exp(best_ld)) if np.isfinite(best_ld) else 0.0)


@dataclass(frozen=True, slots=True)
class InfluenceReport:
    """Whether one block of rows, or a few rows, decide the full-sample counts.

    Attributes
    ----------
    assumptions : tuple of str
        The assumptions re-checked (the fast ones: independent noise is not re-run).
    full : mapping str -> int or None
        The full-sample count under each of them.
    blocks : tuple of (first_row, last_row, coranks)
        Each block left out (1-based positions among the analysed rows) and the counts without it.
    changed_blocks : tuple of (first_row, last_row, coranks)
        The blocks whose omission changes a count.
    robust : str
        How the robust check ran, or why it did not ("" when it ran).
    robust_coranks, without_flagged : mapping or None
        Counts from the reweighted MCD covariance and from the rows without the flagged ones.
    flagged_rows : tuple of int
        1-based positions (among the analysed rows) of the flagged rows.
    rows : int
    rule : str
        The stated rule.
    sentence : str
        One plain sentence for the dataset page (always given).
    findings : tuple of Finding
        The "influence" findings (empty when no single block or few rows decide a count).
    """

    assumptions: tuple[str, ...]
    full: Mapping[str, int | None]
    blocks: tuple
    changed_blocks: tuple
    robust: str
    robust_coranks: Mapping[str, int | None] | None
    without_flagged: Mapping[str, int | None] | None
    flagged_rows: tuple[int, ...]
    rows: int
    rule: str
    sentence: str
    findings: tuple = field(default=())

    @property
    def driven(self) -> bool:
        return bool(self.findings)

    def to_dict(self) -> dict:
        return jsonable({
            "assumptions": list(self.assumptions), "full": dict(self.full),
            "blocks": [{"first_row": a, "last_row": b, "coranks": dict(c)} for a, b, c in self.blocks],
            "changed_blocks": [{"first_row": a, "last_row": b, "coranks": dict(c)} for a, b, c in self.changed_blocks],
            "robust": self.robust or "FAST-MCD, reweighted at the 97.5% chi-square quantile",
            "robust_coranks": None if self.robust_coranks is None else dict(self.robust_coranks),
            "without_flagged": None if self.without_flagged is None else dict(self.without_flagged),
            "flagged_rows": list(self.flagged_rows), "rows": self.rows, "rule": self.rule,
            "sentence": self.sentence, "driven": self.driven,
        })


RULE = ("A count rests on one block when leaving out that block alone (one of up to 20 contiguous blocks of "
        "rows) changes it; on a single row when dropping the most outlying row of a robust fit (MCD) alone "
        "changes it; on a few rows when dropping the rows the robust fit (MCD) flags as "
        f"outlying (squared robust distance above the {100 * FLAG_QUANTILE:g}% chi-square quantile; at most "
        f"{100 * FEW_ROWS_SHARE:g}% of the rows) changes it. Independent noise is not re-run.")


def _changed(full: Mapping, other: Mapping | None, assumptions) -> dict:
    if other is None:
        return {}
    return {a: other.get(a) for a in assumptions if other.get(a) != full.get(a)}


def influence_report(stats, *, decide: Callable, full: Mapping[str, int | None], assumptions: Sequence[str],
                     rng: np.random.Generator, tolerance=None, max_blocks: int = MAX_BLOCKS) -> InfluenceReport:
    """Leave-one-block-out and the robust covariance, side by side, for the full-sample counts.

    Parameters
    ----------
    stats : GranuleStats
        The full sample's granules in time (row) order, analysed coordinates.
    decide : callable
        ``decide(count, mean, comoment) -> {assumption: corank}``: the analysis's own decision on a
        set of moments (the driver passes :func:`relspan.analysis.window.analyse_window`).
    full : mapping
        The full-sample count under each assumption.
    assumptions : sequence of str
        The assumptions to re-check.
    rng : numpy.random.Generator
        For the random starts of FAST-MCD.
    tolerance : Tolerance, optional
        Named in the sentences.
    max_blocks : int
    """
    from relspan.analysis.findings.records import Finding
    from relspan.analysis.resample import merge_weighted
    from relspan.assumptions import assumption as _assumption
    from relspan.words import cap, join_words

    assumptions = tuple(a for a in assumptions if a in full)
    full = {a: full[a] for a in assumptions}
    counts = np.asarray(stats.counts, dtype=float)
    k, n = stats.means.shape
    rows = int(counts.sum())
    g = int(stats.rows_per_granule)
    cum = np.concatenate([[0], np.cumsum(counts)]).astype(int)
    nb = int(min(max_blocks, k // max(n + 2, 5)))
    blocks, changed = [], []
    if nb >= 5:
        edges = np.linspace(0, k, nb + 1).round().astype(int)
        w = np.ones((nb, k))
        for b in range(nb):
            w[b, edges[b]:edges[b + 1]] = 0.0
        tot, means, cms = merge_weighted(counts, stats.means, stats.comoments, w)
        for b in range(nb):
            c = decide(int(tot[b]), means[b], cms[b])
            entry = (int(cum[edges[b]] + 1), int(cum[edges[b + 1]]), {a: c.get(a) for a in assumptions})
            blocks.append(entry)
            if _changed(full, entry[2], assumptions):
                changed.append(entry)
    robust, robust_c, without, flagged_rows, single_row = "", None, None, (), None
    if g != 1:
        robust = (f"not run: the rows are pooled into granules of {g} rows for this dataset's size, and a "
                  "robust fit needs single rows")
    elif k > MCD_MAX_ROWS:
        robust = f"not run: more than {MCD_MAX_ROWS} rows"
    elif k <= 2 * (n + 1):
        robust = "not run: too few rows"
    else:
        x = stats.means
        mcd = fast_mcd(x, rng=rng)
        cov = mcd.covariance
        robust_c = {a: decide(k, mcd.location, cov * (k - 1)).get(a) for a in assumptions}
        fl = np.flatnonzero(mcd.flagged)
        fl = fl[np.argsort(-mcd.distances[fl], kind="stable")]  # most outlying first
        flagged_rows = tuple(int(i) + 1 for i in fl)

        def without_rows(drop) -> dict:
            w = np.ones((1, k))
            w[0, drop] = 0.0
            tot, means, cms = merge_weighted(counts, stats.means, stats.comoments, w)
            c = decide(int(tot[0]), means[0], cms[0])
            return {a: c.get(a) for a in assumptions}

        if fl.size:
            single = without_rows(fl[:1])
            if _changed(full, single, assumptions):
                without, single_row = single, int(fl[0]) + 1
            elif fl.size <= FEW_ROWS_SHARE * k:
                without = without_rows(fl)
    tol = f" at {tolerance.short}" if tolerance is not None else ""

    def words(c: Mapping) -> str:
        return "; ".join(f"{_assumption(a).name} {('undetermined' if q is None else q)}" for a, q in c.items())

    def becomes(diff: Mapping) -> str:
        def q(v):
            return "undetermined" if v is None else str(v)
        return "; ".join(f"{_assumption(a).name}: {q(full[a])} becomes {q(v)}" for a, v in diff.items())

    findings = []
    if changed:
        first, last, c = changed[0]
        diff = _changed(full, c, assumptions)
        if len(changed) == 1:
            head = (f"The full-sample count rests on one block of rows{tol}: leaving out analysed rows {first} to "
                    f"{last} alone changes it ({becomes(diff)}).")
        else:
            head = (f"The full-sample count is fragile{tol}: leaving out any one of {len(changed)} of the "
                    f"{len(blocks)} blocks of rows changes it (for example analysed rows {first} to {last}: "
                    f"{becomes(diff)}).")
        findings.append(Finding(
            "influence", "corank", head,
            RULE, {"first_row": first, "last_row": last, "without": diff, "blocks": len(blocks),
                   "changed_blocks": len(changed)}, "influence", assumptions=tuple(diff), tolerance=tolerance))
    diff_w = _changed(full, without, assumptions)
    if diff_w and single_row is not None:
        findings.append(Finding(
            "influence", "corank",
            f"The full-sample count rests on a single row{tol}: dropping analysed row {single_row} alone, the row "
            f"a robust fit (MCD) finds most outlying, changes it ({becomes(diff_w)}); the robust covariance gives "
            f"{words(robust_c)}.",
            RULE, {"row": single_row, "without": diff_w, "robust": robust_c}, "influence",
            assumptions=tuple(diff_w), tolerance=tolerance))
    elif diff_w:
        shown = join_words([str(r) for r in flagged_rows[:5]]) + (" and more" if len(flagged_rows) > 5 else "")
        findings.append(Finding(
            "influence", "corank",
            f"The full-sample count rests on {len(flagged_rows)} of {rows} rows{tol}: dropping the rows a robust "
            f"fit (MCD) flags as outlying (analysed rows {shown}) changes it ({becomes(diff_w)}); the robust "
            f"covariance gives {words(robust_c)}.",
            RULE, {"flagged_rows": list(flagged_rows), "without": diff_w, "robust": robust_c}, "influence",
            assumptions=tuple(diff_w), tolerance=tolerance))
    if findings:
        sentence = " ".join(f.headline for f in findings)
    else:
        parts = []
        if blocks:
            parts.append(f"leaving out any one of {len(blocks)} blocks of rows changes no count{tol}")
        if robust_c is not None:
            flags = (f"{len(flagged_rows)} of {rows} rows flagged as outlying (about "
                     f"{100 * (1 - FLAG_QUANTILE):g}% are expected by chance when rows are normal)" if flagged_rows
                     else "no row flagged as outlying")
            if flagged_rows and without is None:
                flags += f"; more than {100 * FEW_ROWS_SHARE:g}% of the rows, so not a few rows"
            same = robust_c == dict(full)
            parts.append(f"a robust covariance (MCD, fitted to the most concentrated half of the rows and "
                         f"reweighted) gives {'the same counts' if same else words(robust_c)}"
                         + ("" if same else f" (all rows: {words(full)})") + f", with {flags}")
            if not same and without is None and flagged_rows:
                parts.append(f"the robust covariance sets the {len(flagged_rows)} flagged rows aside together, so "
                             "that difference reflects many rows at once (for example a period unlike the rest), "
                             "not a single row or block")
        sentence = (cap("; ".join(parts)) + ".") if parts else "The influence of single rows cannot be judged: too few rows."
    if robust:
        sentence += f" Robust check {robust}."
    return InfluenceReport(assumptions=assumptions, full=full, blocks=tuple(blocks), changed_blocks=tuple(changed),
                           robust=robust, robust_coranks=robust_c, without_flagged=without,
                           flagged_rows=flagged_rows, rows=rows, rule=RULE, sentence=sentence,
                           findings=tuple(findings))
