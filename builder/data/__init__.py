"""builder.data: the only place data files are read.

One streaming pass turns a table into mergeable block statistics; each
window of each plan is a merge of whole blocks.

- :mod:`~builder.data.sources`: CSV/TSV/Parquet in chunks, cell checks, SHA-256
- :mod:`~builder.data.timeindex`: the time column (years, quarters, months, dates)
- :mod:`~builder.data.transforms`: log, diff, logdiff, demean, standardise; missing values
- :mod:`~builder.data.windows`: window plans -> windows; the block grid
- :mod:`~builder.data.blocks`: block statistics and window assembly
- :mod:`~builder.data.prepare`: :func:`prepare_dataset`, :func:`prepare_frame`
"""

from builder.data.blocks import BlockTable, assemble
from builder.data.prepare import (Overview, PlanWindows, PreparedDataset, prepare_dataset,
                                  prepare_frame, window_moments)
from builder.data.timeindex import TimeFormat
from builder.data.transforms import Drop
from builder.data.windows import Window

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
