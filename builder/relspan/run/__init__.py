"""Run layer, the one driver: build/check (build.py), the analysis pipeline, figure jobs, executors,
the content-keyed cache, progress."""

from relspan.run.build import Outcome, build, check
from relspan.run.cache import ResultCache, task_key
from relspan.run.executors import SerialExecutor, map_in_chunks, open_executor
from relspan.run.figures import draw_figures
from relspan.run.pipeline import LazyExecutor, open_cache, run_analysis
from relspan.run.progress import Progress

__all__ = ["check", "build", "Outcome", "run_analysis", "draw_figures", "LazyExecutor", "open_cache",
           "open_executor", "map_in_chunks", "SerialExecutor", "ResultCache", "task_key", "Progress"]
