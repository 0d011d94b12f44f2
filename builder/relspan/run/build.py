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

__all__ = ["Outcome", "check", "build", "where_tasks_run", "plan_workers", "main_module_is_unguarded"]


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
    where : str
        Where the window tasks ran, in words (with how to use more cores when
        they ran in this process).
    """

    run: AnalysisRun
    out_dir: Path | None
    seconds: float
    where: str = ""

    @property
    def all_claims_hold(self) -> bool:
        return self.run.all_claims_hold

    @property
    def warnings(self) -> tuple[RelspanWarning, ...]:
        return self.run.warnings

    def verdicts_frame(self):
        """Claim verdicts as a DataFrame: one row per claim (index: claim id)."""
        from relspan.frames import verdicts_frame

        return verdicts_frame(self.run.verdicts)

    def assumptions_frame(self, dataset: str | None = None):
        """Full-sample results of a dataset (default: the first), one row per noise assumption.

        Coefficients appear only where identified (one relation), normalised on the
        variable named in ``normalised_on``.
        """
        from relspan.frames import assumptions_frame

        return assumptions_frame(self._dataset(dataset).full)

    def windows_frame(self, dataset: str | None = None):
        """Every window of every plan of a dataset (default: the first), one row per assumption.

        See :func:`relspan.frames.windows_frame` for the columns.
        """
        from relspan.frames import windows_frame

        return windows_frame(self._dataset(dataset))

    def findings_frame(self, dataset: str | None = None):
        """The findings (the site's statements) of a dataset (default: the first)."""
        from relspan.frames import findings_frame

        return findings_frame(self._dataset(dataset).findings)

    def _dataset(self, dataset: str | None):
        if dataset is None:
            if not self.run.datasets:
                raise KeyError("the run has no datasets")
            return self.run.datasets[0]
        try:
            return self.run.dataset(dataset)
        except KeyError:
            ids = ", ".join(d.spec.id for d in self.run.datasets)
            raise KeyError(f"no dataset {dataset!r}; the datasets are {ids}") from None

    def _summary(self) -> list[str]:
        from relspan.frames import short

        run = self.run
        n_fail = sum(not v.holds for v in run.verdicts)
        what = "build" if self.out_dir is not None else "check"
        claims = (f"{len(run.verdicts) - n_fail} of {len(run.verdicts)} claim(s) hold"
                  if run.verdicts else "no claims")
        lines = [f"{what} of {short(run.spec.path.name, 60)}: {len(run.datasets)} dataset(s) "
                 f"({short(', '.join(d.spec.id for d in run.datasets), 80)}); {claims}; "
                 f"{len(run.warnings)} warning(s); {self.seconds:.1f} s"]
        if self.out_dir is not None:
            lines.append(f"site: {short(self.out_dir, 120)}")
        if self.where:
            lines.append(f"ran {short(self.where, 200)}")
        return lines

    def __repr__(self) -> str:
        return "<relspan Outcome: " + "; ".join(self._summary()) + ">"

    def _repr_html_(self) -> str:
        from relspan.frames import html_table

        head = "".join(f"<p>{__import__('html').escape(line)}</p>" for line in self._summary())
        rows = [(v.claim.id, v.claim.dataset, v.claim.plan, v.word, v.observed)
                for v in self.run.verdicts]
        table = html_table("Claim verdicts", ("claim", "dataset", "plan", "verdict", "observed"), rows,
                           more=" (outcome.verdicts_frame() has them all)") if rows else ""
        return f"<div>{head}{table}</div>"

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


#: how to use more cores from Python, said wherever relspan chose to stay in this process
MORE_CORES = ("to use more cores, pass jobs=N (or set run.jobs in the spec) from a script whose "
              "call sits under `if __name__ == \"__main__\":`, or run `relspan build SPEC --jobs N`")


def main_module_is_unguarded() -> bool:
    """Would local worker processes run the calling program again?

    Worker processes of a local pool start by importing the main program (the
    ``forkserver`` and ``spawn`` start methods do), so a script that calls
    relspan at its top level, outside an ``if __name__ == "__main__":`` block,
    would start pools from inside its own workers, and a program read from
    standard input cannot be imported at all. This looks at the main
    program's top-level line that led to this call: True when that line is
    outside such a block, or the program is standard input; False for
    interactive sessions and notebooks (no file), ``python -c`` and guarded
    calls.
    """
    import ast
    import sys

    main = sys.modules.get("__main__")
    path = getattr(main, "__file__", None)
    if main is None or path is None:
        return False   # interactive, notebook kernels, python -c: workers do not re-run anything
    if not Path(path).is_file():
        return True    # standard input ("<stdin>"): workers cannot import it
    frame = sys._getframe(1)
    line = None
    while frame is not None:
        if frame.f_code.co_name == "<module>" and frame.f_globals.get("__name__") == "__main__":
            line = frame.f_lineno
            break
        frame = frame.f_back
    if line is None:
        return False   # not called from the main program's top level (a thread, a callback)
    try:
        tree = ast.parse(Path(path).read_text(encoding="utf-8"))
    except (OSError, SyntaxError, UnicodeDecodeError, ValueError):
        return True
    for node in tree.body:
        if isinstance(node, ast.If) and _is_main_test(node.test):
            end = getattr(node, "end_lineno", node.lineno)
            if node.lineno <= line <= end:
                return False
    return True


def _is_main_test(test) -> bool:
    import ast

    if not (isinstance(test, ast.Compare) and len(test.ops) == 1 and isinstance(test.ops[0], ast.Eq)):
        return False
    sides = [test.left, test.comparators[0]]
    names = [s for s in sides if isinstance(s, ast.Name) and s.id == "__name__"]
    consts = [s for s in sides if isinstance(s, ast.Constant) and s.value == "__main__"]
    return len(names) == 1 and len(consts) == 1


#: plan_workers' words when the choice is made per stage, from the expected work
AUTO = "chosen from the amount of work"


def plan_workers(spec, jobs: int | None, scheduler: str | None, *,
                 default_jobs: int | None) -> tuple[int | None, str | None, str]:
    """Where the window tasks run: ``(jobs, scheduler, words)``.

    The caller's ``jobs``/``scheduler``, else the spec's ``run:`` section, else
    ``default_jobs`` (1 from Python: in this process; None from the command line:
    chosen per stage from the work it expects, ``(None, None, AUTO)``: in this
    process below :data:`relspan.run.executors.POOL_ABOVE_S` seconds, on every
    available core above). Local worker processes are not started from a main
    program that they would run again (:func:`main_module_is_unguarded`): the
    tasks then run in this process, with a :class:`RuntimeWarning` that says how
    to use more cores.
    """
    import warnings

    from relspan.run.executors import available_cores

    jobs, scheduler = where_tasks_run(spec, jobs, scheduler)
    if scheduler is not None:
        return jobs, scheduler, f"on the Dask cluster at {scheduler}"
    if jobs is None:
        jobs = default_jobs
    workers = available_cores() if jobs is None else jobs
    if jobs is None and not main_module_is_unguarded():
        return None, None, AUTO   # chosen per stage from the work it expects (LazyExecutor)
    if isinstance(workers, int) and not isinstance(workers, bool) and workers > 1 \
            and main_module_is_unguarded():
        warnings.warn(
            f"relspan runs the analysis in this process instead of {workers} worker processes: the "
            "calling program has no `if __name__ == \"__main__\":` block around this call (or is "
            "read from standard input), and worker processes would run it again. Results are the "
            f"same; {MORE_CORES}.", RuntimeWarning, stacklevel=3)
        return 1, None, f"in this process ({MORE_CORES})"
    if workers == 1:
        return 1, None, f"in this process ({MORE_CORES})"
    return jobs, None, f"on {workers} worker processes"


def check(spec_path, *, jobs: int | None = None, scheduler: str | None = None, use_cache: bool = True,
          cache_dir: Path | None = None, progress: bool | None = None,
          default_jobs: int | None = 1) -> Outcome:
    """Validate a spec and its data, analyse, and evaluate the claims; write no site.

    Results are read from and written to the result cache (``.relspan-cache``
    beside the spec, or ``cache_dir``) unless ``use_cache`` is False, so a
    ``build`` after a ``check`` of the same spec and data recomputes no dataset.

    Parameters
    ----------
    spec_path : str or Path
    jobs : int, optional
        Worker processes for the window tasks. Default: the spec's ``run.jobs``,
        else ``default_jobs``.
    scheduler : str, optional
        A Dask scheduler address (``tcp://host:port``).
    use_cache : bool
        Read the result cache beside the spec.
    cache_dir : Path, optional
    progress : bool, optional
        Show progress bars (tqdm): True always, False never, None (default) on a
        terminal or in a notebook only.
    default_jobs : int or None
        Workers when neither ``jobs`` nor the spec says: 1 (in this process, the
        Python default, safe in any script) or None (chosen from the amount of work, what
        the command line uses). A script without an ``if __name__ == "__main__":``
        block runs in this process whatever is asked (see :func:`plan_workers`).
    """

    t0 = time.perf_counter()
    spec = _load(spec_path)
    cache = open_cache(spec, use_cache=use_cache, cache_dir=cache_dir)
    jobs, scheduler, where = plan_workers(spec, jobs, scheduler, default_jobs=default_jobs)
    with LazyExecutor(jobs, scheduler, auto=where == AUTO) as executor:
        run = run_analysis(spec, progress=progress, executor=executor, cache=cache)
    return Outcome(run, None, time.perf_counter() - t0, _where(where, executor))


def _where(planned: str, executor: LazyExecutor) -> str:
    """Where the tasks ran, in words: the plan, or each stage's automatic choice and its reason.

    Stages with the same choice and reason are named together: "analysis of a and analysis of b in
    this process: about 2.3 s of work, below ...; figures on 2 worker processes: about 6 s ...".
    """
    from relspan.words import join_words

    if planned != AUTO:
        return planned
    if not executor.decisions:
        return "nowhere: every result came from the cache"
    stages: dict[str, list[str]] = {}
    for stage, words in executor.decisions:
        stages.setdefault(words, []).append(stage)
    return "; ".join(f"{join_words(list(dict.fromkeys(names)))} {words}" for words, names in stages.items())


def build(spec_path, *, out=None, jobs: int | None = None, scheduler: str | None = None,
          use_cache: bool = True, cache_dir: Path | None = None, progress: bool | None = None,
          default_jobs: int | None = 1) -> Outcome:
    """Analyse a spec and write its site atomically; returns the :class:`Outcome`.

    The output folder is ``out`` or the spec's ``site.out`` (relative to the
    spec). It must not be the spec's folder nor contain the data; an
    existing folder is replaced only when relspan wrote it. The other
    parameters are :func:`check`'s; from Python the work runs in this process
    unless ``jobs`` (or the spec's ``run.jobs``) asks for workers.
    """
    from relspan.environment import MACHINE_FILE, machine_json_bytes
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
    jobs, scheduler, where = plan_workers(spec, jobs, scheduler, default_jobs=default_jobs)
    with LazyExecutor(jobs, scheduler, auto=where == AUTO) as executor:
        run = run_analysis(spec, progress=progress, executor=executor, cache=cache)
        content = _content_with_figures(run, executor, cache, progress)
    files = render_site(content)
    files[MACHINE_FILE] = machine_json_bytes()  # machine-specific: outside SHA256SUMS on purpose
    write_site(files, out_dir, protected=protected)
    cache.prune()  # entries of other environments, old formats, unused for a month
    return Outcome(run, out_dir, time.perf_counter() - t0, _where(where, executor))


def _content_with_figures(run, executor, cache, progress: bool | None):
    """Site content: the report lays out pages and figure jobs; the jobs are drawn here, on the
    executor (opened only when a figure is not cached)."""
    from relspan.report.site_content import site_draft
    from relspan.run.figures import draw_figures
    from relspan.run.progress import Progress

    draft = site_draft(run)
    if hasattr(executor, "expect"):   # automatic choice: serial below the work a pool pays for
        from relspan.run.executors import FIGURE_S

        executor.expect(FIGURE_S * len(draft.figure_jobs), "figures")
    # the total is set once the uncached figures are known
    with Progress("figures", 0, enabled=progress) as bar:
        rendered = draw_figures(draft.figure_jobs, draft.figure_format, also=draft.figure_also,
                                executor=executor, cache=cache, progress=bar)
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
