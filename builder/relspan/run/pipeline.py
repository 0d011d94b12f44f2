"""Spec -> data -> window statistics -> analysis -> findings -> claim verdicts.

:func:`run_analysis` drives the stages for a whole spec. Each dataset is read
once (streaming, in :mod:`relspan.data`), reduced to block statistics, and
cut into the windows of its plans; the windows are independent tasks that run
on the executor the user chose (:mod:`relspan.run.executors`). A dataset's
whole result is cached by content (:mod:`relspan.run.cache`): the spec
sections it depends on, the SHA-256 of its input file and relspan's version.
"""

from __future__ import annotations

import dataclasses
import platform
import warnings
from dataclasses import dataclass
from pathlib import Path
from typing import Sequence

import numpy as np

from relspan import __version__
from relspan.assumptions import corank_preference
from relspan.analysis.moments import Moments
from relspan.analysis.results import AnalysisRun, DatasetResult, PlanResult
from relspan.analysis.stability import coefficient_swing, corank_sequence
from relspan.analysis.inference import FULL_SAMPLE_PLAN, diagonal_scope, resampling_options
from relspan.analysis.window import WindowAnalysis, WindowOptions, analyse_window, reference_index
from relspan.errors import OptionsError, RelspanWarning
from relspan.spec.model import DatasetSpec, Spec, WindowPlanSpec

__all__ = ["run_analysis", "analyse_prepared", "LazyExecutor", "open_cache"]


class LazyExecutor:
    """Opens the executor the user asked for on first use only (a cached rebuild needs none).

    With ``auto`` (no ``jobs`` given: the command line's default), each stage
    says how much work it expects (:meth:`expect`, estimated seconds in one
    process) and :meth:`get` runs it in this process below
    :data:`relspan.run.executors.POOL_ABOVE_S`, on a pool of every available
    core above it (opened once, kept for later stages). :attr:`decisions` lists
    each stage's choice with its reason, in words.
    """

    def __init__(self, jobs: int | None = None, scheduler: str | None = None, *, auto: bool = False) -> None:
        self.jobs, self.scheduler = jobs, scheduler
        self.auto = bool(auto) and scheduler is None and jobs is None
        self._cm = None
        self._ex = None
        self._expected: tuple[float, str] | None = None
        self.decisions: list[tuple[str, str]] = []

    def expect(self, work_s: float, stage: str) -> None:
        """The next :meth:`get` serves ``stage``, about ``work_s`` seconds of work in one process."""
        self._expected = (float(work_s), str(stage))

    def get(self):
        if self.auto:
            from relspan.run.executors import SerialExecutor, available_cores, choose_local

            work, stage = self._expected or (float("inf"), "tasks")
            self._expected = None
            if self._ex is not None:     # a pool is open already: later stages use it
                self.decisions.append((stage, f"on the {available_cores()} worker processes already started"))
                return self._ex
            workers, words = choose_local(work, available_cores())
            self.decisions.append((stage, words))
            if workers == 1:
                return SerialExecutor()
        if self._ex is None:
            from relspan.run.executors import open_executor

            self._cm = open_executor(self.jobs, self.scheduler)
            self._ex = self._cm.__enter__()
        return self._ex

    def close(self) -> None:
        if self._cm is not None:
            cm, self._cm, self._ex = self._cm, None, None
            cm.__exit__(None, None, None)

    def __enter__(self) -> "LazyExecutor":
        return self

    def __exit__(self, *exc) -> None:
        self.close()


_CODE_VERSION: str | None = None


def code_version() -> str:
    """relspan's version plus a SHA-256 of its own source files.

    Part of every cache key, so results computed by other code (an edited
    checkout, another release) are never reused. Computed once per process;
    it depends only on the installed files, so it is the same in every worker.
    """
    global _CODE_VERSION
    if _CODE_VERSION is None:
        import hashlib

        root = Path(__file__).resolve().parents[1]
        h = hashlib.sha256()
        for path in sorted(root.rglob("*")):
            if path.suffix in (".py", ".html", ".css", ".json") and "__pycache__" not in path.parts:
                h.update(path.relative_to(root).as_posix().encode())
                h.update(path.read_bytes())
        _CODE_VERSION = f"{__version__}+{h.hexdigest()[:16]}"
    return _CODE_VERSION


def environment() -> dict:
    """What a rebuild must match to give the same bytes (:func:`relspan.environment.portable_environment`)."""
    from relspan.environment import portable_environment

    return portable_environment()


def _window_options(ds: DatasetSpec, ref: int) -> WindowOptions:
    checks = ds.checks
    return WindowOptions(
        assumptions=tuple(checks.assumptions),
        absolute=checks.tolerance.absolute,
        relative=checks.tolerance.relative if checks.tolerance.absolute is None else None,
        ref=ref,
        coranks=tuple(checks.coranks) or tuple(range(1, len(ds.variables))),
        shape=ds.noise_shape,
        frisch_starts=checks.frisch_starts,
        seed=checks.seed,
    )


# Analysis functions name their own parameters; the spec key each one comes from.
_SPEC_KEYS = {"eps": "checks.tolerance", "starts": "checks.frisch_starts", "seed": "checks.seed",
              "ref": "checks.normalise_on"}


@dataclass(frozen=True, slots=True, eq=False)
class _GranuleSpan:
    """A window's granules as views into the dataset's granule table (no copy until the task runs).

    Items of every window are listed before the executor runs them; holding
    views keeps that list small, and each task pays for its own window only.
    :meth:`stats` gives what :meth:`PreparedDataset.granules_between` gives.
    """

    prepared_like: object
    lo: int
    hi: int

    @classmethod
    def of(cls, prepared, lo: int, hi: int) -> "_GranuleSpan":
        import types

        t = prepared.granules.table
        table = types.SimpleNamespace(counts=t.counts[lo:hi], means=t.means[lo:hi],
                                      comoments=t.comoments[lo:hi], origin=t.origin)
        like = _PreparedSlice(granules=_GranuleSlice(table=table,
                                                     rows_per_granule=prepared.granules.rows_per_granule),
                              scale=prepared.scale, shift=prepared.shift, time_column=prepared.time_column,
                              dataset_id=prepared.dataset_id)
        return cls(like, 0, hi - lo)

    def stats(self):
        from relspan.data.prepare import PreparedDataset

        return PreparedDataset.granules_between(self.prepared_like, self.lo, self.hi)


@dataclass(frozen=True, slots=True)
class _GranuleSlice:
    table: object
    rows_per_granule: int


@dataclass(frozen=True, slots=True)
class _PreparedSlice:
    granules: _GranuleSlice
    scale: object
    shift: object
    time_column: object
    dataset_id: str


def _analyse_task(item: tuple) -> tuple:
    """One window (top-level so process pools and Dask can pickle it).

    The window's resampling runs here, on the executor, from its own granules and
    its own random stream (``(seed, dataset, plan, window index)``), so the numbers
    do not depend on where or in which order windows run. Items are
    ``(moments, names, options, common_std, label[, granules, resampling, seed_key, ask][, elementary])``.
    With ``ask`` (:class:`relspan.run.cross_window.StabilityAsk`) the task also
    computes what the stability stage reads of the window
    (:class:`~relspan.run.cross_window.HandedDraws`) from the same resamples its
    intervals use when both stages draw with the same options (one draw), and
    returns ``(result, warnings, handed)``; otherwise ``(result, warnings)``.
    """
    moments, names, options, common_std, label, *rest = item
    ask = None
    if len(rest) >= 4:
        (granules, resampling, seed_key, ask), given = rest[:4], rest[4:]
    elif len(rest) == 3:
        (granules, resampling, seed_key), given = rest, ()
    else:  # without granules: no resampling
        (granules, resampling, seed_key), given = (None, None, ()), rest
    stats = None if granules is None else granules.stats()
    drawn = pre = None
    if ask is not None and stats is not None:
        from relspan.analysis.inference import draw_window, drawn_as, drawn_granules

        drawn = draw_window(stats, options=ask.opts, seed_key=ask.seed_key)
        if resampling is not None and resampling.enabled and drawn_as(drawn, resampling, seed_key, stats):
            # the intervals read the same resamples and decompositions
            scale = "as given" if options.absolute is not None else "correlation"
            stats = pre = drawn_granules(stats, drawn, scale)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", RelspanWarning)
        try:
            result = analyse_window(moments, names=names, options=options, common_std=common_std,
                                    label=label, elementary=given[0] if given else None,
                                    granules=stats, resampling=resampling, seed_key=seed_key)
        except OptionsError as exc:
            if exc.key not in _SPEC_KEYS:
                raise
            raise OptionsError(exc.message, key=_SPEC_KEYS[exc.key], fix=exc.fix) from exc
    raised = tuple(w.message for w in caught if isinstance(w.message, RelspanWarning))
    if drawn is None:
        return result, raised
    from relspan.run.cross_window import handed_draws

    return result, raised, handed_draws(drawn, result, ask.shape, pre)


def _with_elementary(items: list[tuple], names: tuple[str, ...]) -> list[tuple]:
    """Every window's elementary regressions in one batched call, attached to its task.

    :func:`~relspan.analysis.elementary.elementary_regressions_stack` gives each
    window the result of the one-window function (within the bound its tests
    state); a window whose moments cannot give a covariance is left to the task,
    which reports it as before.
    """
    from relspan.analysis import _dd
    from relspan.analysis.elementary import elementary_regressions_stack

    ok = [i for i, it in enumerate(items) if it[0].count > 1]
    if not ok:
        return items
    n = len(names)
    counts = np.array([items[i][0].count for i in ok], dtype=np.int64)
    means = np.array([items[i][0].mean for i in ok], dtype=float).reshape(len(ok), n)
    com = np.array([items[i][0].comoment for i in ok], dtype=float).reshape(len(ok), n, n)
    com_lo = np.array([np.zeros((n, n)) if items[i][0].comoment_lo is None else items[i][0].comoment_lo
                       for i in ok], dtype=float).reshape(len(ok), n, n)
    # Moments.covariance_parts, for all windows at once (the same elementwise arithmetic)
    hi, lo = _dd.dd_div_float(com, com_lo, (counts - 1).astype(float)[:, None, None])
    lo = 0.5 * (lo + lo.transpose(0, 2, 1))
    if not (np.all(np.isfinite(hi)) and np.all(np.isfinite(lo))):
        return items
    ers = elementary_regressions_stack(hi, names=names, counts=counts, means=means, cov_los=lo,
                                       labels=[items[i][4] for i in ok])
    out = list(items)
    for i, er in zip(ok, ers):
        out[i] = items[i] + (er,)
    return out


def _choose_examined(ds: DatasetSpec, full: WindowAnalysis) -> tuple[tuple[int, ...], str]:
    if ds.checks.coranks:
        qs = tuple(q for q in ds.checks.coranks if 1 <= q <= full.n - 1)
        return qs, "set in the spec (checks.coranks)"
    for record in corank_preference():
        q = full.coranks.get(record.id)
        if q is not None:
            word = record.adjective
            if q == 0:
                return (), f"no relation is supported by the full sample under the {word} assumption"
            return (q,), f"the corank the full sample supports under the {word} assumption"
    return (1,), "one relation, as the elementary regressions presuppose"


def _flats(analysis: WindowAnalysis, examined: Sequence[int]) -> dict:
    """The elementary-regression flat of one window for each examined corank (none when singular)."""
    return _plan_flats([analysis], examined)[0]


def _plan_flats(analyses: Sequence[WindowAnalysis], examined: Sequence[int]) -> tuple[dict, ...]:
    """:func:`_flats` of every window, computed together (one batched call per corank and reference
    variable: :func:`relspan.analysis.flat.elementary_flats`, the same numbers as window by window)."""
    from relspan.analysis.flat import elementary_flats

    out: list[dict] = [{} for _ in analyses]
    groups: dict[int, list[int]] = {}
    for i, a in enumerate(analyses):
        if not a.elementary.singular:
            groups.setdefault(a.ref, []).append(i)
    for q in examined:
        if q < 1:
            continue
        for ref, idx in groups.items():
            for i, flat in zip(idx, elementary_flats([analyses[i].elementary for i in idx], q=q, ref=ref)):
                out[i][q] = flat
    return tuple(out)


def _plan_summaries(ds: DatasetSpec, prepared, plan: WindowPlanSpec, windows: Sequence,
                    analyses: Sequence[WindowAnalysis], full: WindowAnalysis,
                    examined: Sequence[int], feed=None) -> PlanResult:
    from relspan.run.cross_window import plan_stability

    labels = [a.label for a in analyses]
    # each window at its own corank, judged against resampling (relspan.run.cross_window): computed
    # as the window tasks finished (the feed), or here, drawing each window, when some were not handed
    done = feed.result() if feed is not None else None
    stability, plausible = done if done is not None else plan_stability(prepared, ds, plan.id, analyses, full)
    swings: dict = {}
    for assumption in full.coefficients:
        vals = [a.coefficients.get(assumption) for a in analyses]
        if any(v is None for v in vals) or not vals:
            continue
        swings[assumption] = coefficient_swing(np.vstack(vals), labels=labels, names=full.names)
    coranks = corank_sequence({a: [w.coranks.get(a) for w in analyses] for a in full.coranks},
                              labels=labels, plausible=plausible)
    return PlanResult(plan=plan, windows=tuple(windows), analyses=tuple(analyses),
                      stability=stability, swings=swings, coranks=coranks,
                      flats=_plan_flats(analyses, examined))


def analyse_prepared(ds: DatasetSpec, prepared, plans: Sequence[WindowPlanSpec], *, executor=None,
                     progress=None, warn_sink: list | None = None, cache_key: str = "") -> DatasetResult:
    """Analyse one prepared dataset: full sample, every window, summaries, findings.

    Warnings raised in a window stay typed (:class:`~relspan.errors.RelspanWarning`);
    they are appended to ``warn_sink`` with the dataset and plan recorded.
    """
    from relspan.data.prepare import window_moments
    from relspan.run.executors import SerialExecutor, map_in_chunks

    names = tuple(prepared.variables)
    full_m: Moments = prepared.full
    common_std = full_m.std()
    ref = reference_index(full_m.covariance(), names, ds.checks.normalise_on)
    options = _window_options(ds, ref)
    resampling = resampling_options(ds)
    use = resampling.enabled and prepared.granules is not None

    def granules(plan_id, i, for_stability=False):
        if not (use or (for_stability and prepared.granules is not None)):
            return None
        if plan_id is None:
            return _GranuleSpan.of(prepared, 0, len(prepared.granules))
        w = prepared.plan(plan_id).windows[i]
        return _GranuleSpan.of(prepared, *prepared.granules.span(w.first_row - 1, w.last_row - 1))

    items = [(full_m, names, options, common_std, "full sample", granules(None, 0), resampling,
              (ds.id, FULL_SAMPLE_PLAN, 0), None)]
    spans = []
    for plan in plans:
        pairs = window_moments(prepared, plan.id)
        spans.append((plan, [w for w, _ in pairs], len(items), len(items) + len(pairs)))
        plan_resampling = diagonal_scope(resampling, plan.kind, len(pairs))
        asks = _stability_asks(ds, plan, len(pairs))
        items.extend((m, names, options, common_std, w.label, granules(plan.id, i, asks[i] is not None),
                      plan_resampling, (ds.id, plan.id, i), asks[i]) for i, (w, m) in enumerate(pairs))
    items = _with_elementary(items, names)
    executor = executor or SerialExecutor()
    feeds: dict[str, object] = {}
    span_of = [None] * len(items)
    for plan, _, a, b in spans:
        span_of[a:b] = [(plan, b - a)] * (b - a)
    full_of: list = []

    def consume(start: int, chunk: list) -> list:
        """Each window's handed draws go to its plan's stability feed as the window's chunk finishes."""
        from relspan.run.cross_window import PlanFeed

        out = []
        for k, r in enumerate(chunk):
            i = start + k
            if i == 0:
                full_of.append(r[0])
            elif len(r) > 2:
                plan, w = span_of[i]
                if plan.id not in feeds:
                    feeds[plan.id] = PlanFeed(ds, w, full_of[0])
                feeds[plan.id].add(r[0], r[2])
                r = r[:2]     # the draws are read: let them go
            out.append(r)
        return out

    # the stability feeds run here, with one BLAS thread as the window tasks (small products)
    from relspan.run.executors import one_blas_thread

    with one_blas_thread():
        results = map_in_chunks(executor, _analyse_task, items, progress=progress, consume=consume)
    sink = warn_sink if warn_sink is not None else []
    for i, (_, raised, *_h) in enumerate(results):  # say which dataset and plan a window belongs to
        plan_id = next((p.id for p, _, a, b in spans if a <= i < b), None)
        sink.extend(w.located(dataset=ds.id, plan=plan_id) for w in raised)
    analyses = [r[0] for r in results]
    del results
    # the cross-window stage runs here, with one BLAS thread as the window tasks (small products)
    with one_blas_thread():
        return _cross_window(ds, prepared, plans, analyses, spans, options, common_std, resampling, sink,
                             cache_key, feeds)


#: the window tasks hand their resampled bases to the stability stage, which reads them as the tasks
#: finish (:class:`relspan.run.cross_window.PlanFeed`); False: the stage draws every window again
#: itself (the same stream, the same bits; the path the tests compare the hand-over with)
HAND_OVER = True


def _stability_asks(ds: DatasetSpec, plan: WindowPlanSpec, windows: int) -> list:
    """Per window of a plan, the :class:`~relspan.run.cross_window.StabilityAsk` its task answers (or None).

    Every window is asked (the stage consumes the draws as tasks finish, so
    they are never all held); none when no assumption of the spec has a
    stability comparison, or when :data:`HAND_OVER` is off.
    """
    from relspan.run.cross_window import STABILITY_ASSUMPTIONS, StabilityAsk, plan_options

    if not HAND_OVER or not any(a in STABILITY_ASSUMPTIONS for a in ds.checks.assumptions):
        return [None] * windows
    opts = plan_options(ds, windows)
    shape = ds.noise_shape
    return [StabilityAsk(opts=opts, shape=shape, seed_key=(ds.id, plan.id, i)) for i in range(windows)]


def _cross_window(ds: DatasetSpec, prepared, plans, analyses, spans, options, common_std, resampling,
                  sink: list, cache_key: str, feeds: dict | None = None) -> DatasetResult:
    """Everything after the window tasks: stability, breaks, spread, trends, influence, findings."""
    from relspan.analysis.findings import dataset_findings, dataset_summary
    from relspan.analysis.identified import identified_quantities

    names = tuple(prepared.variables)
    full = analyses[0]
    examined, examined_from = _choose_examined(ds, full)
    threshold = float(ds.checks.max_angle_deg)
    feeds = feeds or {}
    plan_results = []
    for plan, wins, a, b in spans:
        plan_results.append(_plan_summaries(ds, prepared, plan, wins, analyses[a:b], full, examined,
                                            feeds.pop(plan.id, None)))
    plan_results = tuple(plan_results)
    from relspan.run.cross_window import dataset_breaks, full_sample_spread

    breaks = dataset_breaks(prepared, ds, full, plan_results)
    spread = full_sample_spread(prepared, ds, full)

    identified: dict = {}
    for q in examined:
        basis = full.bases.get("equal", {}).get(q)
        if basis is None:
            basis = next((b[q] for b in full.bases.values() if q in b), None)
        if basis is not None:
            # bases are on the common scale; identified quantities are read in data units
            identified[q] = identified_quantities(basis / common_std[None, :], names=names)
    from relspan.data.prepare import without_blocks

    labels = tuple(v.label for v in ds.variables)
    trends = _trends(ds, prepared, labels, sink)
    influence = _influence(ds, prepared, full, options, common_std, sink)
    findings = tuple(dataset_findings(full=full, plans=plan_results, examined=examined, identified=identified,
                                      labels=labels, trends=trends, influence=influence, spread=spread))
    summary = dataset_summary(full=full, plans=plan_results, examined=examined, identified=identified,
                              labels=labels, findings=findings, period=prepared.period, spread=spread)
    _check_findings(ds, findings, summary, full, sink)
    # the block statistics are not needed once the windows are assembled: do not keep them
    return DatasetResult(spec=ds, prepared=without_blocks(prepared), full=full, plans=plan_results,
                         examined=examined, examined_from=examined_from, findings=findings,
                         summary=summary, identified=identified, flat=_flats(full, examined), threshold_deg=threshold,
                         cache_key=cache_key, trends=trends, influence=influence, breaks=breaks,
                         sampling_spread=spread, resampling=resampling)


def _all_granules(prepared):
    """The dataset's granules in time order (analysed coordinates), or None when dropped."""
    if prepared.granules is None:
        return None
    return prepared.granules_between(0, int(prepared.granules.table.counts.shape[0]))


def _trends(ds: DatasetSpec, prepared, labels, sink: list):
    """Trend diagnostics of a time-ordered dataset (None without a time column or with too few rows).

    Raises a located :class:`~relspan.errors.TrendWarning` when the levels of two or more trending series
    are analysed (the spurious-regression caution of Granger & Newbold 1974).
    """
    from relspan.analysis.trends import dataset_trends
    from relspan.data.transforms import REASON_GAP
    from relspan.errors import TrendWarning

    if prepared.time_column is None:
        return None
    stats = _all_granules(prepared)
    if stats is None:
        return None
    gaps = sum(d.count for d in prepared.drops if d.reason == REASON_GAP)
    report = dataset_trends(stats, names=prepared.variables, labels=labels, transforms=prepared.transforms,
                            gaps=gaps)
    if report is not None and len(report.trending_levels) >= 2:
        from relspan.words import join_words

        sink.append(TrendWarning(
            f"the levels of {len(report.trending_levels)} trending series ({join_words(report.trending_levels)}) "
            "are analysed: relations among trending levels can appear without any real relation (Granger & "
            "Newbold 1974) unless the series are cointegrated, which is not tested. Fix: analyse differences "
            "or growth rates, or remove a straight-line trend (a variable's transform: diff, logdiff or detrend), "
            "or read these relations with that "
            "caution.", series=report.trending_levels).located(dataset=ds.id))
    return report


def _influence(ds: DatasetSpec, prepared, full, options, common_std, sink: list):
    """Leave-one-block-out and robust-covariance check of the full-sample counts (None when not possible).

    Re-decides with the analysis's own window function on the fast assumptions (independent noise is not
    re-run); raises a located :class:`~relspan.errors.InfluenceWarning` when one block or a few rows decide.
    """
    from relspan.analysis.findings.records import Tolerance
    from relspan.analysis.influence import influence_report
    from relspan.analysis.resample import window_rng
    from relspan.errors import InfluenceWarning

    stats = _all_granules(prepared)
    if stats is None:
        return None
    fast = tuple(a for a in options.assumptions if a in ("elementary", "equal", "shaped", "bounded"))
    opts = dataclasses.replace(options, assumptions=fast or ("elementary",))
    names = tuple(prepared.variables)

    def decide(count, mean, comoment):
        m = Moments(count=int(count), mean=np.asarray(mean), comoment=np.asarray(comoment))
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            # the full sample's granules give the equality test the full sample's serial dependence
            # (effective rows), as the full-sample count it is compared with had: without them a
            # recount would treat autocorrelated rows as independent and could differ for that alone
            return dict(analyse_window(m, names=names, options=opts, common_std=common_std,
                                       granules=stats).coranks)

    checked = tuple(a for a in fast if a != "elementary")
    if not checked:
        return None
    report = influence_report(stats, decide=decide, full=full.coranks, assumptions=checked,
                              rng=window_rng(int(ds.checks.seed), ds.id, "influence", 0),
                              tolerance=Tolerance.of(full))
    if report.driven:
        sink.append(InfluenceWarning(" ".join(f.headline for f in report.findings)).located(dataset=ds.id))
    return report


def _check_findings(ds: DatasetSpec, findings, summary, full, sink: list) -> None:
    """Run the findings-consistency rules; each conflict becomes a located warning in ``sink``."""
    from relspan.analysis.findings import consistency
    from relspan.errors import FindingsConflictWarning

    for c in consistency.check_consistency(findings, summary, coranks=full.coranks):
        sink.append(FindingsConflictWarning(
            f"two findings contradict each other or one overclaims (an internal error of relspan; please "
            f"report it): {c}", rule=c.rule, statements=(c.first, c.second)).located(dataset=ds.id))


def _dataset_key(spec: Spec, ds: DatasetSpec, plans: Sequence[WindowPlanSpec], sha: str) -> str:
    from relspan.run.cache import task_key

    def plain(obj):
        if dataclasses.is_dataclass(obj):
            return {f.name: plain(getattr(obj, f.name)) for f in dataclasses.fields(obj)
                    if f.name not in ("source_path", "line")}
        if isinstance(obj, (list, tuple)):
            return [plain(x) for x in obj]
        return obj

    return task_key(task="dataset", dataset=plain(ds), plans=plain(list(plans)), source_sha256=sha,
                    version=code_version())


def _cached_result(cache, spec: Spec, ds: DatasetSpec, plans) -> tuple[object | None, str]:
    """``(cached result or None, key)``; hashes the file first only when a result may be cached.

    A result may be cached when the cache remembers the file unchanged
    (:meth:`~relspan.run.cache.ResultCache.sha_hint`) under a hash for which an
    entry exists; the file is then hashed (one pass) and the entry looked up
    under the hash computed now. Otherwise nothing is hashed here (key ""):
    the data pass reads the file once and hashes it as it reads, and the
    entry is looked up under that hash before any analysis.
    """
    from relspan.data.sources import file_sha256

    hint = cache.sha_hint(ds.source_path)
    if hint is None or _dataset_key(spec, ds, plans, hint) not in cache:
        return None, ""
    key = _dataset_key(spec, ds, plans, file_sha256(ds.source_path))
    return cache.get(key), key


def _analysis_work(ds: DatasetSpec, counts: Sequence[tuple[WindowPlanSpec, int]]) -> float:
    """Estimated seconds in one process for a dataset's window tasks (to choose where they run).

    The full sample's task and each plan's windows, with the resamples each
    task draws: its intervals' (``checks.resampling.resamples``, capped for
    plans of many windows; diagonal-noise resamples only where they run) and
    the stability stage's draws it answers (:func:`_stability_asks`).
    """
    from relspan.analysis.inference import diagonal_scope, resampling_options
    from relspan.run.cross_window import STABILITY_ASSUMPTIONS, plan_options
    from relspan.run.executors import window_work

    n, assumptions = len(ds.variables), tuple(ds.checks.assumptions)
    opts = resampling_options(ds)
    diag = "diagonal" in assumptions
    stable = HAND_OVER and any(a in STABILITY_ASSUMPTIONS for a in assumptions)
    work = window_work(1, n, assumptions, frisch_starts=ds.checks.frisch_starts, resamples=opts.resamples,
                       diagonal_resamples=opts.diagonal_resamples if diag and opts.resamples else 0)
    for plan, windows in counts:
        if windows < 1:
            continue
        o = diagonal_scope(opts, plan.kind, windows)
        work += window_work(windows, n, assumptions, frisch_starts=ds.checks.frisch_starts,
                            resamples=o.resamples,
                            stability_resamples=plan_options(ds, windows).resamples if stable else 0,
                            diagonal_resamples=o.diagonal_resamples if diag and o.resamples else 0)
    return work


#: a dataset with more windows than this gets a note before its analysis (time and pages)
MANY_WINDOWS = 500


def _note_many_windows(ds: DatasetSpec, counts: Sequence[tuple[WindowPlanSpec, int]]) -> None:
    """Say up front when plans cut a dataset into very many windows (long analysis, many pages)."""
    from relspan.errors import RelspanNote

    total = sum(n for _, n in counts)
    if total <= MANY_WINDOWS:
        return
    parts = []
    for plan, n in sorted(counts, key=lambda pn: -pn[1]):
        if n > 1:
            shape = ""
            if plan.width is not None and plan.step is not None:
                shape = f" (width {plan.width.count} {plan.width.unit}, step {plan.step.count} {plan.step.unit})"
            parts.append(f"plan {plan.id!r}: {n:,} windows{shape}")
    warnings.warn(RelspanNote(
        f"dataset {ds.id!r} has {total:,} windows ({'; '.join(parts[:3])}); each is analysed under "
        f"every assumption and a build writes one page per window (about {total:,} pages), which "
        "takes long. A larger step gives fewer windows."), stacklevel=3)


def run_analysis(spec: Spec, *, jobs: int | None = None, scheduler: str | None = None,
                 use_cache: bool = True, cache_dir: Path | None = None, progress: bool | None = None,
                 executor: LazyExecutor | None = None, cache=None, write_cache: bool = True) -> AnalysisRun:
    """Analyse every dataset of ``spec`` and check its claims.

    Parameters
    ----------
    spec : Spec
        A validated spec (:func:`relspan.spec.load_spec`).
    jobs, scheduler
        Where window tasks run (:func:`relspan.run.executors.open_executor`);
        ignored when ``executor`` is given.
    use_cache : bool
        Read the result cache (``--no-cache`` sets False).
    cache_dir : Path, optional
        Cache folder (default ``.relspan-cache`` beside the spec).
    progress : bool, optional
        Progress bars on stderr (tqdm): True always, False never, None on a
        terminal or in a notebook only.
    executor : LazyExecutor, optional
        Shared with later stages (figures) so workers start once.
    cache : ResultCache, optional
        Shared with later stages; default: opened from ``cache_dir``.
    write_cache : bool
        Store new results.
    """
    from relspan.analysis.claims import evaluate_claims
    from relspan.data.prepare import prepare_dataset
    from relspan.data.sources.detect import check_file
    from relspan.run.progress import Progress

    if cache is None:
        cache = open_cache(spec, use_cache=use_cache, cache_dir=cache_dir, create=write_cache)
    own = executor is None
    lazy = executor or LazyExecutor(jobs, scheduler)
    results: list[DatasetResult] = []
    raised: list[RelspanWarning] = []
    try:
        for ds in spec.datasets:
            plans = spec.plans_for(ds)
            check_file(ds.source, ds.source_path)  # a missing, special or unreadable file is named
            cached, key = _cached_result(cache, spec, ds, plans)
            prepared = None
            if cached is None and not key:
                prepared = prepare_dataset(ds, plans)   # reads the file once, hashing it as it goes
                key = _dataset_key(spec, ds, plans, prepared.sha256)
                cache.remember_sha(ds.source_path, prepared.sha256)
                # an entry the hint did not know of (a project moved or sent without its hints)
                cached = cache.get(key) if key in cache else cache.count_miss()
            if cached is not None:
                result, cached_warnings = cached
                _note_many_windows(ds, [(p.plan, len(p.windows)) for p in result.plans])
                # the same analysis, bound to this spec's text (line numbers, paths may differ)
                results.append(dataclasses.replace(result, spec=ds))
                raised.extend(cached_warnings)
                continue
            if prepared is None:
                prepared = prepare_dataset(ds, plans)
            counts = [(p, len(prepared.plan(p.id).windows)) for p in plans]
            _note_many_windows(ds, counts)
            total = 1 + sum(n for _, n in counts)
            sink: list[RelspanWarning] = []
            lazy.expect(_analysis_work(ds, counts), f"analysis of {ds.id}")
            with Progress(f"analysis of {ds.id}", total, enabled=progress) as bar:
                ex = lazy.get()
                if lazy.decisions:
                    bar.note = lazy.decisions[-1][1].split(":")[0]
                result = analyse_prepared(ds, prepared, plans, executor=ex, progress=bar,
                                          warn_sink=sink, cache_key=key)
            if write_cache:
                cache.put(key, (result, tuple(sink)))
            results.append(result)
            raised.extend(sink)
    finally:
        if own:
            lazy.close()
    unique = tuple({str(w): w for w in raised}.values())  # one of each, in order of appearance
    for w in unique:
        warnings.warn(w, stacklevel=2)
    return AnalysisRun(spec=spec, datasets=tuple(results), verdicts=tuple(evaluate_claims(spec.claims, results)),
                       warnings=unique, environment=environment(), cache_hits=cache.hits,
                       cache_misses=cache.misses)


def open_cache(spec: Spec, *, use_cache: bool = True, cache_dir: Path | None = None, create: bool = True):
    """The result cache of a spec: ``.relspan-cache`` beside it, or ``cache_dir``, or disabled.

    ``create=False`` reads an existing folder only.
    """
    from relspan.run.cache import DEFAULT_CACHE_DIRNAME, ResultCache

    return ResultCache((cache_dir or spec.folder / DEFAULT_CACHE_DIRNAME) if use_cache else None,
                       create=create)
