"""relspan.data: the only place data files are read.

One streaming pass turns a table into mergeable block statistics; each
window of each plan is a merge of whole blocks.

- :mod:`~relspan.data.sources`: CSV/TSV/Parquet in chunks (detect, cells, csv, parquet, reader)
- :mod:`~relspan.data.timeindex`: the time column (years, quarters, months, dates)
- :mod:`~relspan.data.transforms`: log, diff, logdiff, demean, standardise; missing values
- :mod:`~relspan.data.windows`: window plans -> windows; the block grid
- :mod:`~relspan.data.blocks`: block statistics and window assembly
- :mod:`~relspan.data.prepare`: :func:`prepare_dataset`, :func:`prepare_frame`
"""

from relspan.data.blocks import BlockTable, assemble
from relspan.data.prepare import (Overview, PlanWindows, PreparedDataset, prepare_dataset,
                                  prepare_frame, window_moments)
from relspan.data.timeindex import TimeFormat
from relspan.data.transforms import Drop
from relspan.data.windows import Window

__all__ = [
    "BlockTable",
    "Drop",
    "Overview",
    "PlanWindows",
    "PreparedDataset",
    "TimeFormat",
    "Window",
    "assemble",
    "prepare_dataset",
    "prepare_frame",
    "window_moments",
]
