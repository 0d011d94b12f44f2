"""Run layer: the pipeline (spec -> results), executors, the content-keyed cache, progress."""

from relspan.run.cache import ResultCache, task_key
from relspan.run.executors import SerialExecutor, map_in_chunks, open_executor
from relspan.run.pipeline import (AnalysisRun, DatasetResult, LazyExecutor, PlanResult, open_cache,
                                  run_analysis)
from relspan.run.progress import Progress

__all__ = ["run_analysis", "AnalysisRun", "DatasetResult", "PlanResult", "LazyExecutor", "open_cache",
           "open_executor", "map_in_chunks", "SerialExecutor", "ResultCache", "task_key", "Progress"]
