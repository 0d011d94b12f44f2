"""The one driver of a run: spec -> analysis -> findings and verdicts -> pages + figures -> site.

:func:`check` and :func:`build` are what ``relspan check`` / ``relspan build``
and the Python face (:mod:`relspan.api`) call. The stages:

1. :func:`relspan.spec.load_spec` reads and validates the spec;
2. :func:`relspan.run.pipeline.run_analysis` analyses every dataset (window
   tasks on the executor, results cached by content) and builds the complete
   :class:`~relspan.analysis.results.AnalysisRun` (findings and verdicts included);
3. :func:`relspan.report.site_content.site_draft` lays out pages and figure jobs;
4. :func:`relspan.run.figures.draw_figures` draws the figures not in the cache;
5. :func:`relspan.site.render_site` and :func:`relspan.site.write_site` render
   HTML and swap the folder in atomically.
"""

from __future__ import annotations

import time
from dataclasses import dataclass
from pathlib import Path

from relspan.analysis.results import AnalysisRun
from relspan.errors import RelspanWarning
from relspan.run.cache import DEFAULT_CACHE_DIRNAME
from relspan.run.pipeline import LazyExecutor, open_cache, run_analysis

__all__ = ["Outcome", "check", "build", "where_tasks_run"]


@dataclass(frozen=True, slots=True, eq=False)
class Outcome:
    """What ``check`` or ``build`` did.

    Attributes
    ----------
    run : AnalysisRun
        The analysis of every dataset and the claim verdicts.
    out_dir : Path or None
        The site folder (``build`` only).
    seconds : float
        Wall-clock time of the whole call.
    """

    run: AnalysisRun
    out_dir: Path | None
    seconds: float

    @property
    def all_claims_hold(self) -> bool:
        return self.run.all_claims_hold

    @property
    def warnings(self) -> tuple[RelspanWarning, ...]:
        return self.run.warnings

    def verdict_table(self) -> str:
        """A short plain-text table of claim verdicts (what ``relspan check`` prints)."""
        rows = [("claim", "dataset", "plan", "verdict", "observed")]
        for v in self.run.verdicts:
            rows.append((v.claim.id, v.claim.dataset, v.claim.plan, v.word.upper(), v.observed))
        if len(rows) == 1:
            head = "no claims in the spec; analysis ran on {} dataset(s)".format(len(self.run.datasets))
            return head
        widths = [max(len(r[i]) for r in rows) for i in range(4)]
        lines = []
        for r in rows:
            lines.append("  ".join(r[i].ljust(widths[i]) for i in range(4)) + "  " + r[4])
        n_fail = sum(not v.holds for v in self.run.verdicts)
        lines.append(f"{len(self.run.verdicts) - n_fail} of {len(self.run.verdicts)} claim(s) hold"
                     + (f"; {n_fail} fail" if n_fail else "") + f" ({self.seconds:.1f} s)")
        return "\n".join(lines)


def _load(spec_path) -> object:
    from relspan.spec import load_spec

    return load_spec(spec_path)


def where_tasks_run(spec, jobs: int | None, scheduler: str | None) -> tuple[int | None, str | None]:
    """``(jobs, scheduler)`` to use: the caller's (command line) if it gave either, else the spec's ``run:``."""
    if jobs is not None or scheduler is not None:
        return jobs, scheduler
    run = getattr(spec, "run", None)
    if run is None:
        return None, None
    return run.jobs, run.scheduler


def check(spec_path, *, jobs: int | None = None, scheduler: str | None = None, use_cache: bool = True,
          cache_dir: Path | None = None, progress: bool = False) -> Outcome:
    """Validate a spec and its data, analyse, and evaluate the claims; write no site.

    An existing result cache is read; none is written or created (no cache
    folder appears where there was none).
    """

    t0 = time.perf_counter()
    spec = _load(spec_path)
    folder = Path(cache_dir) if cache_dir is not None else spec.folder / DEFAULT_CACHE_DIRNAME
    if use_cache and not folder.is_dir():
        # nothing to read; opening the cache would create its folder, and check writes nothing
        if folder.exists():
            from relspan.run.cache import ResultCache

            ResultCache(folder)  # the located error for a file where the folder should be
        use_cache = False
    jobs, scheduler = where_tasks_run(spec, jobs, scheduler)
    run = run_analysis(spec, jobs=jobs, scheduler=scheduler, use_cache=use_cache, cache_dir=cache_dir,
                       progress=progress, write_cache=False)
    return Outcome(run, None, time.perf_counter() - t0)


def build(spec_path, *, out=None, jobs: int | None = None, scheduler: str | None = None,
          use_cache: bool = True, cache_dir: Path | None = None, progress: bool = False) -> Outcome:
    """Analyse a spec and write its site atomically; returns the :class:`Outcome`.

    The output folder is ``out`` or the spec's ``site.out`` (relative to the
    spec). It must not be the spec's folder nor contain the data; an
    existing folder is replaced only when relspan wrote it.
    """
    from relspan.site import render_site, write_site

    t0 = time.perf_counter()
    spec = _load(spec_path)
    out_dir = Path(out) if out is not None else (spec.site.out_path or spec.folder / spec.site.out)
    protected = [spec.folder] + [ds.source_path for ds in spec.datasets]
    _precheck_output(out_dir, protected)  # before the (long) analysis, so a bad --out fails fast
    if use_cache:
        _precheck_cache(Path(cache_dir) if cache_dir is not None else spec.folder / DEFAULT_CACHE_DIRNAME,
                        out_dir)
    cache = open_cache(spec, use_cache=use_cache, cache_dir=cache_dir)
    jobs, scheduler = where_tasks_run(spec, jobs, scheduler)
    with LazyExecutor(jobs, scheduler) as executor:
        run = run_analysis(spec, progress=progress, executor=executor, cache=cache)
        content = _content_with_figures(run, executor, cache, progress)
    files = render_site(content)
    write_site(files, out_dir, protected=protected)
    cache.prune()  # entries of other environments, old formats, unused for a month
    return Outcome(run, out_dir, time.perf_counter() - t0)


def _content_with_figures(run, executor, cache, progress: bool):
    """Site content: the report lays out pages and figure jobs; the jobs are drawn here, on the
    executor (opened only when a figure is not cached)."""
    from relspan.report.site_content import site_draft
    from relspan.run.figures import draw_figures
    from relspan.run.progress import Progress

    draft = site_draft(run)
    # the total is set once the uncached figures are known
    with Progress("figures", 0, enabled=None if progress else False) as bar:
        rendered = draw_figures(draft.figure_jobs, draft.figure_format, executor=executor, cache=cache,
                                progress=bar)
    return draft.finish(rendered)


def _precheck_cache(cache_dir: Path, out_dir: Path) -> None:
    """The cache may not live inside the site folder: each build replaces that folder whole."""
    import os

    from relspan.errors import OutputError

    def real(p: Path) -> Path:
        return Path(os.path.realpath(os.path.abspath(p)))

    cache, out = real(cache_dir), real(out_dir)
    if cache == out or out in cache.parents:
        raise OutputError(
            f"the cache folder {cache_dir} is inside the site folder {out_dir}, which every build "
            "replaces as a whole.", path=str(cache_dir), key="--cache-dir",
            fix="point --cache-dir at a folder outside the site (the default is .relspan-cache "
                "beside the spec), or use --no-cache.")


def _precheck_output(out_dir: Path, protected) -> None:
    """The writer's own safety checks on the output folder, run before any work."""
    from relspan.site.writer import check_output

    check_output(out_dir, protected=protected)
