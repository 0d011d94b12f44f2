"""The Python face of relspan: load a spec, check it, build its site, analyse a DataFrame."""

from __future__ import annotations

import time
from dataclasses import dataclass
from pathlib import Path
from typing import Sequence

from relspan.errors import OptionsError

__all__ = ["Outcome", "check", "build", "analyse_frame", "FrameAnalysis"]


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

    run: object
    out_dir: Path | None
    seconds: float

    @property
    def all_claims_hold(self) -> bool:
        return self.run.all_claims_hold

    @property
    def warnings(self) -> tuple[str, ...]:
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
    from relspan.run.cache import DEFAULT_CACHE_DIRNAME
    from relspan.run.pipeline import run_analysis

    t0 = time.perf_counter()
    spec = _load(spec_path)
    folder = Path(cache_dir) if cache_dir is not None else spec.folder / DEFAULT_CACHE_DIRNAME
    if use_cache and not folder.is_dir():
        # nothing to read; opening the cache would create its folder, and check writes nothing
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
    from relspan.run.pipeline import run_analysis
    from relspan.site import render_site, write_site

    t0 = time.perf_counter()
    spec = _load(spec_path)
    out_dir = Path(out) if out is not None else (spec.site.out_path or spec.folder / spec.site.out)
    protected = [spec.folder] + [ds.source_path for ds in spec.datasets]
    _precheck_output(out_dir, protected)  # before the (long) analysis, so a bad --out fails fast
    from relspan.run.pipeline import LazyExecutor, open_cache

    cache = open_cache(spec, use_cache=use_cache, cache_dir=cache_dir)
    jobs, scheduler = where_tasks_run(spec, jobs, scheduler)
    with LazyExecutor(jobs, scheduler) as executor:
        run = run_analysis(spec, progress=progress, executor=executor, cache=cache)
        content = _content_with_figures(run, executor, cache, progress)
    files = render_site(content)
    write_site(files, out_dir, protected=protected)
    return Outcome(run, out_dir, time.perf_counter() - t0)


def _content_with_figures(run, executor, cache, progress: bool):
    """Site content; figures are drawn on the executor (opened only when one is not cached)."""
    from relspan.report.site_content import site_content
    from relspan.run.progress import Progress

    # the total is set once the pages are laid out and the uncached figures are known
    with Progress("figures", 0, enabled=None if progress else False) as bar:
        return site_content(run, executor=executor, cache=cache, progress=bar)


def _precheck_output(out_dir: Path, protected) -> None:
    """The writer's own safety checks on the output folder, run before any work."""
    from relspan.site.writer import check_output

    check_output(out_dir, protected=protected)


@dataclass(frozen=True, slots=True, eq=False)
class FrameAnalysis:
    """Analysis of a DataFrame (notebook use): the dataset result and table views.

    ``to_frame()`` gives one row per noise assumption for the full sample;
    ``windows_frame()`` one row per window and assumption; ``findings_frame()``
    the findings. In a notebook the object itself shows as the first table.
    """

    result: object

    def to_frame(self):
        import pandas as pd

        full = self.result.full
        rows = []
        for a, q in full.coranks.items():
            coef = full.coefficients.get(a)
            row = {"assumption": a, "corank": q}
            if coef is not None:
                for k, name in enumerate(full.names):
                    if k != full.ref:
                        row[f"coef[{name}]"] = coef[k]
            rows.append(row)
        return pd.DataFrame(rows).set_index("assumption")

    def windows_frame(self):
        import pandas as pd

        rows = []
        for plan in self.result.plans:
            for a in plan.analyses:
                for assumption, q in a.coranks.items():
                    rows.append({"plan": plan.plan.id, "window": a.label, "rows": a.count,
                                 "assumption": assumption, "corank": q})
        frame = pd.DataFrame(rows, columns=["plan", "window", "rows", "assumption", "corank"])
        # an undetermined corank is a missing value, not a float: keep whole numbers whole
        return frame.astype({"rows": "int64", "corank": "Int64"})

    def findings_frame(self):
        import pandas as pd

        return pd.DataFrame([{"kind": f.kind, "topic": f.topic, "headline": f.headline}
                             for f in self.result.findings])

    def _repr_html_(self) -> str:
        return self.to_frame()._repr_html_()

    def __repr__(self) -> str:
        return repr(self.to_frame())


def analyse_frame(df, *, columns: Sequence[str], time: str | None = None, labels: Sequence[str] | None = None,
                  transforms: Sequence[str] | None = None, rolling: int | None = None, step: int | None = None,
                  assumptions: Sequence[str] | None = None, relative_tolerance: float = 0.05,
                  normalise_on: str = "auto", coranks: Sequence[int] = (), max_angle_deg: float = 10.0
                  ) -> FrameAnalysis:
    """Run the whole analysis on a pandas DataFrame, without a spec file.

    Parameters
    ----------
    df : pandas.DataFrame
    columns : sequence of str
        Columns to analyse (numeric).
    time : str, optional
        Time column (parsed like a spec's ``time.column`` with ``format: auto``).
    rolling, step : int, optional
        A rolling window plan in rows, in addition to the full sample.
    assumptions, relative_tolerance, normalise_on, coranks, max_angle_deg
        As the spec's ``checks``.
    """
    from pathlib import Path as _P

    from relspan.data.prepare import prepare_frame
    from relspan.run.pipeline import analyse_prepared
    from relspan.spec.model import (ASSUMPTIONS, ChecksSpec, DatasetSpec, Span, TimeSpec, Tolerance,
                                    VariableSpec, WindowPlanSpec)

    columns = tuple(columns)
    missing = [c for c in columns if c not in df.columns]
    if missing:
        raise OptionsError(f"columns {missing} are not in the DataFrame; it has {list(df.columns)}.",
                           key="columns", fix="pass column names that exist.")
    labels = tuple(labels) if labels is not None else columns
    transforms = tuple(transforms) if transforms is not None else ("none",) * len(columns)
    plans = [WindowPlanSpec(id="full", kind="full", title="Full sample")]
    if rolling:
        plans.append(WindowPlanSpec(id="rolling", kind="rolling", title="Rolling",
                                    width=Span(int(rolling)), step=Span(int(step or max(1, rolling // 5)))))
    checks = ChecksSpec(assumptions=tuple(assumptions or ASSUMPTIONS),
                        tolerance=Tolerance(absolute=None, relative=relative_tolerance),
                        normalise_on=normalise_on, coranks=tuple(coranks), max_angle_deg=max_angle_deg)
    ds = DatasetSpec(id="frame", title="DataFrame", source="<DataFrame>", source_path=_P("."),
                     variables=tuple(VariableSpec(column=c, label=lab, transform=t)
                                     for c, lab, t in zip(columns, labels, transforms)),
                     time=TimeSpec(column=time) if time else None, checks=checks)
    prepared = prepare_frame(df, columns=columns, time=time, transforms=transforms, plans=plans,
                             labels=labels)
    return FrameAnalysis(analyse_prepared(ds, prepared, plans))
