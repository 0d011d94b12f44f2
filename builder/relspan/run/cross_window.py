"""The cross-window stage: resampled relation bases per window, calibrated stability, the break scan.

Runs inside :func:`relspan.run.pipeline.analyse_prepared` while the dataset's
granules are still held: the stability of each plan as its window tasks finish
(:class:`PlanFeed`, fed the bases each task hands over), the rest after every
window is analysed. Every random
draw comes from a stream named by ``(seed, dataset, plan, window)``
(:func:`relspan.analysis.resample.window_rng`), so the numbers do not depend on
``--jobs``, the executor or the order windows were analysed in.

One helper, :func:`window_resamples`, builds a window's resampled covariances;
everything here that needs a window's sampling spread goes through it.
"""

from __future__ import annotations

import dataclasses

from dataclasses import dataclass
from typing import Mapping, Sequence

import numpy as np

from relspan.analysis import resample
from relspan.analysis.breaks import DatasetBreak, subspace_break_scan
from relspan.analysis.intervals import orth_columns_stack
from relspan.analysis.stability import (TEST_LEVEL, SamplingSpread, StabilityStream, SubspaceStability,
                                        compare_windows, sampling_spread)

__all__ = ["ResamplingOptions", "window_resamples", "resampled_bases", "plausible_coranks", "StabilityAsk",
           "HandedDraws", "handed_draws", "PlanFeed",
           "plan_stability", "dataset_breaks", "full_sample_spread", "STABILITY_ASSUMPTIONS", "BREAK_PLAN",
           "FULL_PLAN"]

#: assumptions whose relation basis is a single estimate that resampling can follow; under
#: diagonal noise the answer is a set or family of subspaces and one member is no answer
STABILITY_ASSUMPTIONS = ("elementary", "equal", "shaped", "bounded")
#: the stream name of the full sample's own resamples (not a plan's window)
FULL_PLAN = "full sample"
#: the stream name of the break scan (it resamples the whole sample, not a window of a plan)
BREAK_PLAN = "break scan"


@dataclass(frozen=True, slots=True)
class ResamplingOptions:
    """How many resamples, at which interval level, and from which seed.

    ``test_level`` is the quantile decisions use (a change, a break): 0.95.
    """

    resamples: int
    level: float
    seed: int
    test_level: float = TEST_LEVEL
    #: the spec's scheme (``auto`` already resolved) and block length in rows (None: automatic)
    scheme: str | None = None
    block_length: float | None = None


def _resampling_options(ds) -> ResamplingOptions:
    """Resamples, interval level and seed for ``ds``, from the spec's ``checks.resampling``.

    Read through :func:`relspan.analysis.inference.resampling_options` (one
    reading of the spec). Decisions about change and breaks always rest on
    resampling: with ``resamples: 0`` (no intervals) this stage still draws the
    default 499.
    """
    from relspan.analysis.inference import resampling_options

    r = resampling_options(ds)
    return ResamplingOptions(resamples=int(r.resamples or resample.DEFAULT_RESAMPLES), level=float(r.level),
                             seed=int(r.seed), scheme=r.scheme, block_length=r.block_length)


def plan_options(ds, windows: int) -> ResamplingOptions:
    """The stability stage's resampling options for a plan of ``windows`` windows of ``ds``."""
    return _for_plan(_resampling_options(ds), windows)


def _for_plan(opts: ResamplingOptions, windows: int) -> ResamplingOptions:
    """The options for a plan of ``windows`` windows: the window tasks' cap for very many windows
    (:data:`relspan.analysis.inference.MANY_WINDOWS_RULE`), so that both stages draw the same resamples."""
    from relspan.analysis.inference import MANY_WINDOWS, MANY_WINDOWS_RESAMPLES

    if windows > MANY_WINDOWS and opts.resamples > MANY_WINDOWS_RESAMPLES:
        return dataclasses.replace(opts, resamples=MANY_WINDOWS_RESAMPLES)
    return opts


def window_resamples(prepared, ds, plan_id: str | None, index: int, opts: ResamplingOptions
                     ) -> resample.CovarianceResamples:
    """The resampled covariances of window ``index`` of plan ``plan_id`` (analysed coordinates).

    Granules from ``prepared.window_granules``; the stream is
    ``window_rng(seed, dataset, plan, index)``: the same draws whoever asks
    (:func:`relspan.analysis.inference.draw_window`, the one place a window is
    drawn). ``plan_id=None`` resamples the whole sample (stream
    :data:`FULL_PLAN`, index 0).
    """
    from relspan.analysis.inference import draw_window

    if plan_id is None:
        stats = prepared.granules_between(0, len(prepared.granules))
        plan_id, index = FULL_PLAN, 0
    else:
        stats = prepared.window_granules(plan_id, index)
    return draw_window(stats, options=opts, seed_key=(ds.id, plan_id, int(index)))


@dataclass(frozen=True, slots=True)
class StabilityAsk:
    """What the stability stage will read of one window, sent with the window's task.

    The task draws the window's resamples with these options and stream
    (``seed_key`` = ``(dataset, plan, window index)``), the same resamples the
    stage would draw, and hands over :class:`HandedDraws`.
    """

    opts: ResamplingOptions
    shape: tuple | None
    seed_key: tuple


@dataclass(frozen=True, slots=True, eq=False)
class HandedDraws:
    """One window's resampled relation bases at its own corank, and its plausible coranks.

    ``bases[assumption]``: ``(B, q, n)`` on the common scale, as
    :func:`resampled_bases` gives them (equal and bounded noise at the same
    corank share one array); ``plausible[assumption]``: as
    :func:`plausible_coranks`.
    """

    resamples: int
    bases: Mapping[str, np.ndarray]
    plausible: Mapping[str, frozenset | None]

    @property
    def nbytes(self) -> int:
        return sum(b.nbytes for b in {id(b): b for b in self.bases.values()}.values())


def handed_draws(cr: resample.CovarianceResamples, analysis, shape=None, pre=None) -> HandedDraws:
    """What :func:`plan_stability` reads of one window, from its resamples ``cr`` (computed as there).

    ``pre`` (:class:`relspan.analysis.inference.DrawnGranules` of ``cr``): its
    eigenvectors and inverses are reused where they are the same arithmetic as
    here (the same scale; on the correlation scale, no variance below 1e-300).
    """
    d = _Draws(cr, analysis, shape)
    if pre is not None and pre.drawn is cr:
        covs = cr.covariances
        if pre.eig is not None and pre.scale == analysis.scale and (
                analysis.scale != "correlation" or bool(np.all(np.diagonal(covs, axis1=1, axis2=2) >= 1e-300))):
            d._memo["eig"] = pre.eig
        if pre.inverse is not None:
            d._memo["inverse"] = pre.inverse
    bases = {}
    for a in STABILITY_ASSUMPTIONS:
        own = _own_basis(analysis, a)
        if own is not None and a in analysis.coranks:
            bases[a] = d.bases(a, int(own.shape[0]))
    plausible = {a: d.plausible(a) for a in ("equal", "bounded", "shaped") if a in analysis.coranks}
    return HandedDraws(resamples=cr.resamples, bases=bases, plausible=plausible)


def _analysed(covs: np.ndarray, scale: str) -> tuple[np.ndarray, np.ndarray]:
    """Each resample on the window's analysis scale, and the standard deviations used."""
    if scale == "correlation":
        d = np.sqrt(np.clip(np.diagonal(covs, axis1=1, axis2=2), 1e-300, None))
        return covs / (d[:, :, None] * d[:, None, :]), d
    return covs, np.ones(covs.shape[:2])


def _shape_weights(shape, tstd: np.ndarray) -> np.ndarray:
    w = np.asarray(shape, dtype=float)[None, :] / tstd**2
    return w / w.mean(axis=1, keepdims=True)


def _common_rows(rows_data: np.ndarray, common_std: np.ndarray) -> np.ndarray:
    """(B, q, n) rows in data units -> orthonormal rows on the common scale.

    Only their span is read (every consumer takes principal angles), so two rows are
    orthonormalised by :func:`relspan.analysis.intervals.orth_columns_stack`.
    """
    b = rows_data * common_std[None, None, :]
    return np.swapaxes(orth_columns_stack(np.swapaxes(b, 1, 2)), 1, 2)


def resampled_bases(cr: resample.CovarianceResamples, analysis, assumption: str, q: int,
                    shape=None) -> np.ndarray:
    """Resampled relation bases ``(B, q, n)`` on the common scale, computed as the window's own are.

    equal, bounded: the q smallest eigenvectors of each resample on the
    window's analysis scale; shaped: of the whitened generalised problem;
    elementary: row ``ref`` of the inverse covariance.
    """
    return _Draws(cr, analysis, shape).bases(assumption, q)


class _Draws:
    """What one window's resamples give each assumption, each batched decomposition computed once.

    equal and bounded noise read the same eigenvectors (the q smallest of each
    resample on the window's analysis scale), so one batched ``eigh`` serves
    both; the arithmetic of each quantity is that of computing it alone, so
    the bits do not depend on which assumptions ask.
    """

    __slots__ = ("cr", "analysis", "shape", "_memo")

    def __init__(self, cr: resample.CovarianceResamples, analysis, shape=None) -> None:
        self.cr, self.analysis, self.shape = cr, analysis, shape
        self._memo: dict = {}

    def _get(self, key, make):
        if key not in self._memo:
            self._memo[key] = make()
        return self._memo[key]

    def _analysed(self):
        return self._get("analysed", lambda: _analysed(self.cr.covariances, self.analysis.scale))

    def _weights(self):
        return self._get("weights", lambda: _shape_weights(self.shape, self._analysed()[1]))

    def _shaped(self):
        def make():
            mat, _ = self._analysed()
            sw = np.sqrt(self._weights())
            return mat / (sw[:, :, None] * sw[:, None, :]), sw
        return self._get("shaped", make)

    def _eig(self, assumption: str) -> tuple[np.ndarray, np.ndarray]:
        """Eigenvalues and eigenvectors of every resample (one batched ``eigh``; the corank rule reads
        the values, the bases the vectors, so the values are those of the decomposition the window's
        own rule uses, and no second decomposition is made)."""
        if assumption == "shaped":
            return self._get("eig shaped", lambda: np.linalg.eigh(self._shaped()[0]))
        return self._get("eig", lambda: np.linalg.eigh(self._analysed()[0]))

    def _vectors(self, assumption: str) -> np.ndarray:
        return self._eig(assumption)[1]

    def bases(self, assumption: str, q: int) -> np.ndarray:
        """:func:`resampled_bases` of ``assumption`` at corank ``q``."""
        analysis = self.analysis
        if assumption == "elementary":
            def inverse():
                covs = self.cr.covariances
                try:
                    return np.linalg.inv(covs)
                except np.linalg.LinAlgError:  # a resample without full rank (e.g. few distinct granules)
                    return np.linalg.pinv(covs, hermitian=True)
            inv = self._get("inverse", inverse)
            rows = inv[:, analysis.ref, :][:, None, :]
            return _common_rows(rows, analysis.common_std)
        def make():
            _, tstd = self._analysed()
            if assumption == "shaped":
                vec = self._vectors("shaped")[:, :, :q] / self._shaped()[1][:, :, None]
            else:
                vec = self._vectors(assumption)[:, :, :q]
            rows = np.swapaxes(vec, 1, 2) / tstd[:, None, :]
            return _common_rows(rows, analysis.common_std)
        # equal and bounded noise at one corank read the same eigenvectors: one array serves both
        return self._get(("bases", "shaped" if assumption == "shaped" else "eig", q), make)

    def plausible(self, assumption: str, share: float = 1.0 - TEST_LEVEL) -> frozenset[int] | None:
        """:func:`plausible_coranks` of ``assumption``."""
        if assumption not in ("equal", "bounded", "shaped"):
            return None
        analysis = self.analysis
        eps = analysis.eps
        if assumption == "shaped":
            lam = self._eig("shaped")[0]
            limit = eps / self._weights().max(axis=1)
        else:
            lam = self._eig(assumption)[0]
            limit = np.full(lam.shape[0], eps)
        n = lam.shape[1]
        # the window's rule (relspan.analysis.window._corank_by_eigenvalues) on every resample at once
        qs = np.minimum(np.count_nonzero(lam <= limit[:, None], axis=1), n - 1)
        counts = np.bincount(qs, minlength=n)
        out = {int(q) for q in np.flatnonzero(counts >= share * qs.shape[0])}
        own = analysis.coranks.get(assumption)
        if own is not None:
            out.add(int(own))
        return frozenset(out)


def plausible_coranks(cr: resample.CovarianceResamples, analysis, assumption: str, shape=None,
                      share: float = 1.0 - TEST_LEVEL) -> frozenset[int] | None:
    """Coranks the window's own rule picks in at least ``share`` of its resamples (and its own corank).

    The rule applied to each resample is the window's: count the eigenvalues
    at most the tolerance (equal, bounded) or the tolerance over the largest
    shape weight (shaped). None for assumptions without such a rule.
    """
    return _Draws(cr, analysis, shape).plausible(assumption, share)


def _own_basis(analysis, assumption: str):
    q = analysis.coranks.get(assumption)
    if q is None or q < 1:
        return None
    return analysis.bases.get(assumption, {}).get(q)


#: bytes of resampled bases kept for the assumptions compared later (a window's resamples are drawn
#: once for all of them); beyond it a window is drawn again when asked (the same stream, the same bits)
KEEP_BYTES = 256 * 2**20


def plan_stability(prepared, ds, plan_id: str, analyses: Sequence, full, *,
                   opts: ResamplingOptions | None = None, handed: Sequence[HandedDraws | None] | None = None
                   ) -> tuple[dict[str, SubspaceStability], dict[str, tuple]]:
    """Calibrated stability of each assumption over one plan, and each window's plausible coranks.

    Returns ``(stability, plausible)``: ``stability[assumption]`` (assumptions
    with a single relation basis, see :data:`STABILITY_ASSUMPTIONS`) and
    ``plausible[assumption]``: per window, the set of coranks with resampling
    support (None where the assumption has no per-resample rule).

    Each window's resamples are drawn and decomposed once for every
    assumption: ``handed[i]`` (:class:`HandedDraws`, from window i's task,
    which drew them with :func:`plan_options` and the same stream) is read
    when given; otherwise the window is drawn here, the bases the assumptions
    compared later will ask for are kept (up to :data:`KEEP_BYTES`), and the
    plausible coranks of every assumption are read at the same time.
    """
    opts = _for_plan(opts or _resampling_options(ds), len(analyses))
    handed = list(handed) if handed is not None else [None] * len(analyses)
    handed = [h if h is not None and h.resamples == opts.resamples else None for h in handed]
    shape = ds.noise_shape
    labels = [a.label for a in analyses]
    wanted = [a for a in STABILITY_ASSUMPTIONS if a in full.coranks and a in full.bases]
    if len(analyses) < 1 or not wanted:
        return {}, {}
    ruled = [a for a in wanted if a in ("equal", "bounded", "shaped")]
    plaus: dict[str, dict[int, frozenset | None]] = {a: {} for a in ruled}
    own = {a: [_own_basis(w, a) for w in analyses] for a in wanted}
    later: list[str] = list(wanted)       # assumptions whose comparison has not finished
    kept: dict[tuple[str, int], np.ndarray] = {}
    kept_bytes = sum(h.nbytes for h in handed if h is not None)   # one budget for handed and kept bases
    held: dict[int, _Draws] = {}

    def draws_of(i: int) -> _Draws:
        """Window i's resamples (the last window asked for is held: windows come in order)."""
        if i not in held:
            held.clear()
            held[i] = _Draws(window_resamples(prepared, ds, plan_id, i, opts), analyses[i], shape)
        return held[i]

    def resampled(a: str, i: int) -> np.ndarray:
        nonlocal kept_bytes
        got = kept.get((a, i))
        if got is None and handed[i] is not None:
            got = handed[i].bases.get(a)
        if got is not None:
            return got
        d = draws_of(i)
        for b in ruled:
            if i not in plaus[b]:
                plaus[b][i] = d.plausible(b)
        for b in later:
            if b != a and own[b][i] is not None and (b, i) not in kept and kept_bytes < KEEP_BYTES:
                kept[(b, i)] = d.bases(b, int(own[b][i].shape[0]))
                kept_bytes += kept[(b, i)].nbytes
        return d.bases(a, int(own[a][i].shape[0]))

    out: dict[str, SubspaceStability] = {}
    for a in wanted:
        out[a] = compare_windows(own[a], labels=labels, resampled=lambda i, a=a: resampled(a, i),
                                 reference=_own_basis(full, a), coranks=[w.coranks.get(a) for w in analyses],
                                 assumption=a, level=opts.test_level)
        later.remove(a)
        for key in [k for k in kept if k[0] == a]:
            kept_bytes -= kept.pop(key).nbytes
    # windows not compared (no basis under any assumption) still get their plausible coranks
    for a in ruled:
        for i in range(len(analyses)):
            if i not in plaus[a]:
                plaus[a][i] = (handed[i].plausible.get(a) if handed[i] is not None else
                               draws_of(i).plausible(a))
    plausible = {a: tuple(plaus[a].get(i) for i in range(len(analyses))) for a in ruled}
    return out, plausible


class PlanFeed:
    """:func:`plan_stability` of one plan, computed as the plan's window tasks finish.

    Each window's task hands over its resampled bases (:class:`HandedDraws`);
    :meth:`add` passes them to one :class:`~relspan.analysis.stability.StabilityStream`
    per assumption, keeps the window's plausible coranks, and lets the bases go.
    So every window is handed over, none is drawn again, and the stage holds at
    most a few hundred windows' draws whatever the plan's size. :meth:`result`
    gives what :func:`plan_stability` gives from the same windows (the same
    comparisons in the same batches: the same bits), or None when some window
    came without its draws (the stage then draws them itself).
    """

    __slots__ = ("opts", "windows", "added", "wanted", "ruled", "streams", "plaus", "complete")

    def __init__(self, ds, windows: int, full, *, opts: ResamplingOptions | None = None) -> None:
        self.opts = _for_plan(opts or _resampling_options(ds), windows)
        self.windows, self.added = int(windows), 0
        self.wanted = [a for a in STABILITY_ASSUMPTIONS if a in full.coranks and a in full.bases]
        self.ruled = [a for a in self.wanted if a in ("equal", "bounded", "shaped")]
        self.streams = {a: StabilityStream(windows, reference=_own_basis(full, a), assumption=a,
                                           level=self.opts.test_level) for a in self.wanted}
        self.plaus: dict[str, list] = {a: [] for a in self.ruled}
        self.complete = windows >= 1

    def add(self, analysis, handed: HandedDraws | None) -> None:
        """The plan's next window (in order): its analysis and what its task handed over."""
        self.added += 1
        if not self.complete:
            return
        if handed is None or handed.resamples != self.opts.resamples:
            self.complete = False
            self.streams.clear()
            return
        for a in self.wanted:
            own = _own_basis(analysis, a)
            draws = handed.bases.get(a)
            if own is not None and draws is None:
                self.complete = False
                self.streams.clear()
                return
            self.streams[a].add(own, analysis.coranks.get(a), draws, label=analysis.label)
        for a in self.ruled:
            self.plaus[a].append(handed.plausible.get(a))

    def result(self) -> tuple[dict[str, SubspaceStability], dict[str, tuple]] | None:
        """``(stability, plausible)`` as :func:`plan_stability` returns them; None if a window was not handed over."""
        if not self.complete or self.added != self.windows:
            return None
        if not self.wanted:
            return {}, {}
        return ({a: self.streams[a].finish() for a in self.wanted},
                {a: tuple(self.plaus[a]) for a in self.ruled})


def _row_time(prepared, row1: int) -> str:
    """The time (or row number) of analysed row ``row1`` (1-based), in the data's notation."""
    pos = prepared.overview.positions
    if prepared.time_column is not None and "time_label" in pos.columns and len(pos):
        k = int(np.searchsorted(pos["last_row"].to_numpy(), row1, side="left"))
        k = min(max(k, 0), len(pos) - 1)
        return str(pos["time_label"].iloc[k])
    return f"row {row1}"


def _scan_corank(full, plans, assumption: str) -> tuple[int | None, str]:
    q = full.coranks.get(assumption)
    if q is not None and q >= 1:
        return int(q), "the full sample's corank"
    seen = [w.coranks.get(assumption) for p in plans for w in p.analyses]
    seen = [c for c in seen if c is not None and c >= 1]
    if not seen:
        why = ("the full sample's corank is undetermined" if q is None else "the full sample shows no relation")
        return None, f"{why}, and no window shows one"
    vals, counts = np.unique(seen, return_counts=True)
    return int(vals[np.argmax(counts)]), ("the corank most windows show, as the full sample shows none"
                                          if q == 0 else "the corank most windows show, as the full "
                                          "sample's own is undetermined")


#: assumptions whose relation subspace is the q smallest eigenvectors: the scan follows these
_SCANNED = ("equal", "bounded")


def dataset_breaks(prepared, ds, full, plans, *, opts: ResamplingOptions | None = None
                   ) -> dict[str, DatasetBreak]:
    """Scan the whole sample for breaks of each assumption's relation subspace (one, then one at a time).

    equal and bounded noise share their subspace (the q smallest
    eigenvectors), so one scan serves both when their q agree. Assumptions
    the scan does not follow get a :class:`DatasetBreak` saying why.
    """
    opts = opts or _resampling_options(ds)
    out: dict[str, DatasetBreak] = {}
    done: dict[int, object] = {}
    ordered = prepared.time_column is not None
    for a in full.coranks:
        if a == "elementary":
            continue
        if a not in _SCANNED:
            why = ("under independent noise the answer is a set or family of subspaces, not one subspace "
                   "to follow" if a == "diagonal" else
                   "the scan follows the smallest eigenvectors, not the known-shape solution")
            out[a] = DatasetBreak(assumption=a, q=None, q_from="", scan=None, reason=f"Not scanned: {why}.")
            continue
        q, q_from = _scan_corank(full, plans, a)
        if not ordered:
            out[a] = DatasetBreak(assumption=a, q=q, q_from=q_from, scan=None,
                                  reason="Not scanned: the rows have no time order (no time column).")
            continue
        if q is None:
            out[a] = DatasetBreak(assumption=a, q=None, q_from=q_from, scan=None,
                                  reason=f"Cannot be judged: {q_from}.")
            continue
        if (1.0 - opts.test_level) * (opts.resamples + 1) < 1.0:
            out[a] = DatasetBreak(assumption=a, q=q, q_from=q_from, scan=None,
                                  reason=f"Cannot be judged: with {opts.resamples} resamples the smallest p-value "
                                  f"the scan can show, 1/{opts.resamples + 1}, is above "
                                  f"{1.0 - opts.test_level:.0%}.")
            continue
        if q not in done:
            stats = prepared.granules_between(0, len(prepared.granules))
            rng = resample.window_rng(opts.seed, ds.id, BREAK_PLAN, q)
            try:
                done[q] = subspace_break_scan(stats, q=q, rng=rng, scale=full.scale,
                                              resamples=opts.resamples, level=opts.test_level)
            except Exception as exc:  # too few rows for the trimmed scan: say so, do not fail the build
                from relspan.errors import OptionsError
                if not isinstance(exc, OptionsError):
                    raise
                done[q] = exc
        scan = done[q]
        if not hasattr(scan, "found"):
            out[a] = DatasetBreak(assumption=a, q=q, q_from=q_from, scan=None,
                                  reason=f"Cannot be judged: {scan.message if hasattr(scan, 'message') else scan}")
            continue
        lo, hi = scan.split_interval
        dates = tuple((_row_time(prepared, b.split_row + 1), _row_time(prepared, b.split_interval[0] + 1),
                       _row_time(prepared, b.split_interval[1] + 1)) for b in scan.dates)
        out[a] = DatasetBreak(assumption=a, q=q, q_from=q_from, scan=scan, reason="",
                              date=_row_time(prepared, scan.split_row + 1),
                              date_low=_row_time(prepared, lo + 1), date_high=_row_time(prepared, hi + 1),
                              dates=dates)
    return out


def full_sample_spread(prepared, ds, full, *, opts: ResamplingOptions | None = None
                       ) -> dict[str, SamplingSpread]:
    """The bootstrap spread of the full sample's relation subspace (equal and bounded noise).

    Shown beside the bounded-noise angle bound, which treats the sample
    covariance as the population's: this is what sampling adds.
    """
    opts = opts or _resampling_options(ds)
    out: dict[str, SamplingSpread] = {}
    cr = None
    for a in ("equal", "bounded"):
        basis = _own_basis(full, a)
        if basis is None:
            continue
        cr = cr or window_resamples(prepared, ds, None, 0, opts)
        draws = resampled_bases(cr, full, a, int(basis.shape[0]), ds.noise_shape)
        out[a] = sampling_spread(basis, draws, assumption=a, level=opts.level)
    return out
