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

    Returns ``(name, alt, description, image_bytes, csv_bytes, width_px, height_px)`` or None
    when the figure does not apply to these results.
    """
    from relspan.report.figures.render import render_figure, table_csv

    fn, args, fmt_ = item
    fig = fn(*args)
    if fig is None:
        return None
    size = fig.figure.get_size_inches() * 96
    return (fig.name, fig.alt, fig.description, render_figure(fig, fmt_), table_csv(fig),
            int(round(size[0])), int(round(size[1])))


def draw_figures(jobs: Sequence, fmt: str, *, executor=None, cache=None, progress=None) -> list:
    """Draw every job not found in ``cache``; returns one rendered tuple (or None) per job.

    A job belongs to a dataset (``job.dataset_key``, the content key of its
    analysis); its figure is cached under that key, its identity and the
    format, so an unchanged rebuild draws nothing. ``executor`` may be a
    :class:`~relspan.run.pipeline.LazyExecutor`, opened only when a figure
    must be drawn.
    """
    from relspan.run.pipeline import code_version

    keys = [task_key(task="figure", dataset=job.dataset_key, ident=job.ident, fmt=fmt, version=code_version())
            if cache is not None and job.dataset_key else None for job in jobs]
    missing = object()
    done: dict[int, object] = {}
    for i, key in enumerate(keys):
        if key is not None:
            hit = cache.get(key, missing)
            if hit is not missing:
                done[i] = hit
    todo = [i for i in range(len(jobs)) if i not in done]
    if todo:
        ex = executor.get() if hasattr(executor, "get") else executor
        if progress is not None and hasattr(progress, "total"):
            progress.total = len(todo)
        drawn = map_in_chunks(ex or SerialExecutor(), render_job,
                              [(jobs[i].fn, jobs[i].args, fmt) for i in todo], progress=progress)
        for i, rendered in zip(todo, drawn):
            done[i] = rendered
            if keys[i] is not None:
                cache.put(keys[i], rendered)
    return [done[i] for i in range(len(jobs))]
