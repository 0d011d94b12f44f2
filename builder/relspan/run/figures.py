"""Figure jobs: drawn on the run's executor, kept in its cache.

report/ describes each figure as a job (a figure function and its plain
arguments, :class:`relspan.report.pages.publisher.FigureJob`); this module draws the
jobs that are not cached, in this process or on the workers, and returns one
rendered tuple per job for the report to place.
"""

from __future__ import annotations

from typing import Sequence

from relspan.run.cache import task_key
from relspan.run.executors import SerialExecutor, map_in_chunks

__all__ = ["render_job", "draw_figures"]


def render_job(item: tuple) -> tuple | None:
    """Draw and render one figure job; top-level so process pools and Dask can run it.

    ``item`` is ``(fn, args, fmt)`` or ``(fn, args, fmt, also)``: ``also`` names further formats written
    from the same drawing (the figure is built and laid out once; each format costs one save).
    Returns ``(name, alt, description, image_bytes, csv_bytes, width_px, height_px, extra)`` with
    ``extra`` a tuple of ``(format, bytes)`` for ``also``, or None when the figure does not apply to
    these results. ``width_px`` and ``height_px`` are the size the site shows the figure at
    (``style.SHOWN_PX_PER_IN``).
    """
    from relspan.report.figures.render import render_figure, table_csv
    from relspan.report.figures.style import SHOWN_PX_PER_IN

    fn, args, fmt_, *rest = item
    also = tuple(rest[0]) if rest else ()
    fig = fn(*args)
    if fig is None:
        return None
    size = fig.figure.get_size_inches() * SHOWN_PX_PER_IN
    return (fig.name, fig.alt, fig.description, render_figure(fig, fmt_), table_csv(fig),
            int(round(size[0])), int(round(size[1])), tuple((f, render_figure(fig, f)) for f in also))


def draw_figures(jobs: Sequence, fmt: str, *, also: Sequence[str] = (), executor=None, cache=None,
                 progress=None) -> list:
    """Draw every job not found in ``cache``; returns one rendered tuple (or None) per job.

    ``fmt`` is the format the pages show; ``also`` the further formats written beside it for
    download (``site.figure_files: both``), from the same drawing.

    A job belongs to a dataset (``job.dataset_key``, the content key of its
    analysis); its figure is cached under that key, its identity and the
    format, so an unchanged rebuild draws nothing. ``executor`` may be a
    :class:`~relspan.run.pipeline.LazyExecutor`, opened only when a figure
    must be drawn.
    """
    from relspan.run.pipeline import code_version

    also = tuple(f for f in also if f != fmt)
    keys = [task_key(task="figure", dataset=job.dataset_key, ident=job.ident, fmt=fmt, also=also,
                     version=code_version())
            if cache is not None and job.dataset_key else None for job in jobs]
    missing = object()
    done: dict[int, object] = {}
    for i, key in enumerate(keys):
        if key is not None:
            hit = cache.get(key, missing)
            if hit is not missing:
                done[i] = hit
    todo = [i for i in range(len(jobs)) if i not in done]
    # figures that show the same content (a figure function's ``content_key``) are drawn once
    first: dict = {}
    same_as: dict[int, int] = {}
    for i in todo:
        ck = _content_key(jobs[i])
        if ck is not None and ck in first:
            same_as[i] = first[ck]
        elif ck is not None:
            first[ck] = i
    draw = [i for i in todo if i not in same_as]
    if draw:
        ex = executor.get() if hasattr(executor, "get") else executor
        if progress is not None and hasattr(progress, "total"):
            progress.total = len(draw)
        drawn = map_in_chunks(ex or SerialExecutor(), render_job,
                              [(jobs[i].fn, jobs[i].args, fmt, also) for i in draw], progress=progress)
        for i, rendered in zip(draw, drawn):
            done[i] = rendered
    for i, j in same_as.items():
        done[i] = _renamed(done[j], jobs[i])
    for i in todo:
        if keys[i] is not None:
            cache.put(keys[i], done[i])
    return [done[i] for i in range(len(jobs))]


def _content_key(job) -> str | None:
    """The figure function's digest of what the job shows (its name left out), or None."""
    fn = getattr(job.fn, "content_key", None)
    if fn is None:
        return None
    key = fn(*job.args)
    return None if key is None else f"{job.fn.__module__}.{job.fn.__qualname__}:{key}"


def _renamed(rendered, job):
    """A drawn figure under the file stem ``job`` asks for (the stem is the last argument)."""
    if rendered is None:
        return None
    name = job.args[-1] if job.args and isinstance(job.args[-1], str) else rendered[0]
    return (name,) + tuple(rendered[1:])
