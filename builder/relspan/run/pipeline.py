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
from relspan.analysis.stability import coefficient_swing, corank_sequence, subspace_stability
from relspan.analysis.inference import FULL_SAMPLE_PLAN, diagonal_scope, resampling_options
from relspan.analysis.window import WindowAnalysis, WindowOptions, analyse_window, reference_index
from relspan.errors import OptionsError, RelspanWarning
from relspan.spec.model import DatasetSpec, Spec, WindowPlanSpec

__all__ = ["run_analysis", "analyse_prepared", "LazyExecutor", "open_cache"]


class LazyExecutor:
    """Opens the executor the user asked for on first use only (a cached rebuild needs none)."""

    def __init__(self, jobs: int | None = None, scheduler: str | None = None) -> None:
        self.jobs, self.scheduler = jobs, scheduler
        self._cm = None
        self._ex = None

    def get(self):
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
    """Versions that a reader needs to rebuild the same bytes."""
    import jinja2
    import markdown
    import matplotlib
    import pandas
    import scipy
    import yaml

    return {
        "python": platform.python_version(),
        "relspan": __version__,
        "numpy": np.__version__,
        "scipy": scipy.__version__,
        "pandas": pandas.__version__,
        "matplotlib": matplotlib.__version__,
        "markdown": markdown.__version__,
        "pyyaml": yaml.__version__,
        "jinja2": jinja2.__version__,
    }


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


def _analyse_task(item: tuple) -> tuple[WindowAnalysis, tuple[RelspanWarning, ...]]:
    """One window (top-level so process pools and Dask can pickle it).

    The window's resampling runs here, on the executor, from its own granules and
    its own random stream (``(seed, dataset, plan, window index)``), so the numbers
    do not depend on where or in which order windows run.
    """
    moments, names, options, common_std, label, *rest = item
    granules, resampling, seed_key = rest or (None, None, ())  # without granules: no resampling
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", RelspanWarning)
        try:
            result = analyse_window(moments, names=names, options=options, common_std=common_std,
                                    label=label, granules=None if granules is None else granules.stats(),
                                    resampling=resampling,
                                    seed_key=seed_key)
        except OptionsError as exc:
            if exc.key not in _SPEC_KEYS:
                raise
            raise OptionsError(exc.message, key=_SPEC_KEYS[exc.key], fix=exc.fix) from exc
    raised = tuple(w.message for w in caught if isinstance(w.message, RelspanWarning))
    return result, raised


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
    from relspan.analysis.flat import elementary_flat

    if analysis.elementary.singular:
        return {}
    return {q: elementary_flat(analysis.elementary, q=q, ref=analysis.ref) for q in examined if q >= 1}


def _plan_summaries(plan: WindowPlanSpec, windows: Sequence, analyses: Sequence[WindowAnalysis],
                    full: WindowAnalysis, examined: Sequence[int], threshold: float) -> PlanResult:
    labels = [a.label for a in analyses]
    stability: dict = {}
    for q in examined:
        for assumption in full.bases:
            ref_basis = full.bases[assumption].get(q)
            bases = [a.bases.get(assumption, {}).get(q) for a in analyses]
            if ref_basis is None or any(b is None for b in bases) or not bases:
                continue
            stability[(assumption, q)] = subspace_stability(bases, labels=labels, reference=ref_basis,
                                                            threshold_deg=threshold)
    swings: dict = {}
    for assumption in full.coefficients:
        vals = [a.coefficients.get(assumption) for a in analyses]
        if any(v is None for v in vals) or not vals:
            continue
        swings[assumption] = coefficient_swing(np.vstack(vals), labels=labels, names=full.names)
    coranks = corank_sequence({a: [w.coranks.get(a) for w in analyses] for a in full.coranks},
                              labels=labels)
    return PlanResult(plan=plan, windows=tuple(windows), analyses=tuple(analyses),
                      stability=stability, swings=swings, coranks=coranks,
                      flats=tuple(_flats(a, examined) for a in analyses))


def analyse_prepared(ds: DatasetSpec, prepared, plans: Sequence[WindowPlanSpec], *, executor=None,
                     progress=None, warn_sink: list | None = None, cache_key: str = "") -> DatasetResult:
    """Analyse one prepared dataset: full sample, every window, summaries, findings.

    Warnings raised in a window stay typed (:class:`~relspan.errors.RelspanWarning`);
    they are appended to ``warn_sink`` with the dataset and plan recorded.
    """
    from relspan.analysis.findings import dataset_findings, dataset_summary
    from relspan.analysis.identified import identified_quantities
    from relspan.data.prepare import window_moments
    from relspan.run.executors import SerialExecutor, map_in_chunks

    names = tuple(prepared.variables)
    full_m: Moments = prepared.full
    common_std = full_m.std()
    ref = reference_index(full_m.covariance(), names, ds.checks.normalise_on)
    options = _window_options(ds, ref)
    resampling = resampling_options(ds)
    use = resampling.enabled and prepared.granules is not None

    def granules(plan_id, i):
        if not use:
            return None
        if plan_id is None:
            return _GranuleSpan.of(prepared, 0, len(prepared.granules))
        w = prepared.plan(plan_id).windows[i]
        return _GranuleSpan.of(prepared, *prepared.granules.span(w.first_row - 1, w.last_row - 1))

    items = [(full_m, names, options, common_std, "full sample", granules(None, 0), resampling,
              (ds.id, FULL_SAMPLE_PLAN, 0))]
    spans = []
    for plan in plans:
        pairs = window_moments(prepared, plan.id)
        spans.append((plan, [w for w, _ in pairs], len(items), len(items) + len(pairs)))
        plan_resampling = diagonal_scope(resampling, plan.kind, len(pairs))
        items.extend((m, names, options, common_std, w.label, granules(plan.id, i), plan_resampling,
                      (ds.id, plan.id, i)) for i, (w, m) in enumerate(pairs))
    executor = executor or SerialExecutor()
    results = map_in_chunks(executor, _analyse_task, items, progress=progress)
    sink = warn_sink if warn_sink is not None else []
    for i, (_, raised) in enumerate(results):  # say which dataset and plan a window belongs to
        plan_id = next((p.id for p, _, a, b in spans if a <= i < b), None)
        sink.extend(w.located(dataset=ds.id, plan=plan_id) for w in raised)
    analyses = [r for r, _ in results]
    full = analyses[0]
    examined, examined_from = _choose_examined(ds, full)
    threshold = float(ds.checks.max_angle_deg)
    plan_results = tuple(_plan_summaries(plan, wins, analyses[a:b], full, examined, threshold)
                         for plan, wins, a, b in spans)

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
    findings = tuple(dataset_findings(full=full, plans=plan_results, examined=examined, identified=identified,
                                      labels=labels))
    summary = dataset_summary(full=full, plans=plan_results, examined=examined, identified=identified,
                              labels=labels, findings=findings, period=prepared.period)
    # the block statistics are not needed once the windows are assembled: do not keep them
    return DatasetResult(spec=ds, prepared=without_blocks(prepared), full=full, plans=plan_results,
                         examined=examined, examined_from=examined_from, findings=findings,
                         summary=summary, identified=identified, flat=_flats(full, examined), threshold_deg=threshold, cache_key=cache_key,
                         resampling=resampling)


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
        Store new results (``relspan check`` only reads the cache).
    """
    from relspan.analysis.claims import evaluate_claims
    from relspan.data.prepare import prepare_dataset
    from relspan.data.sources import file_sha256
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
            key = _dataset_key(spec, ds, plans, file_sha256(ds.source_path))
            cached = cache.get(key)
            if cached is not None:
                result, cached_warnings = cached
                _note_many_windows(ds, [(p.plan, len(p.windows)) for p in result.plans])
                # the same analysis, bound to this spec's text (line numbers, paths may differ)
                results.append(dataclasses.replace(result, spec=ds))
                raised.extend(cached_warnings)
                continue
            prepared = prepare_dataset(ds, plans)
            counts = [(p, len(prepared.plan(p.id).windows)) for p in plans]
            _note_many_windows(ds, counts)
            total = 1 + sum(n for _, n in counts)
            sink: list[RelspanWarning] = []
            with Progress(f"analysis of {ds.id}", total, enabled=progress) as bar:
                result = analyse_prepared(ds, prepared, plans, executor=lazy.get(), progress=bar,
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

    ``create=False`` reads an existing folder only (``relspan check`` writes nothing).
    """
    from relspan.run.cache import DEFAULT_CACHE_DIRNAME, ResultCache

    return ResultCache((cache_dir or spec.folder / DEFAULT_CACHE_DIRNAME) if use_cache else None,
                       create=create)
