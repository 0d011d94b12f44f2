"""Read data files in chunks: CSV/TSV always, Parquet when pyarrow is installed.

This is the only package that opens data files. A :class:`TableReader` keeps
only the selected columns, chunk by chunk (CSV rows are still tokenised in
full, so that a row with more fields than the header is caught; Parquet reads
only the selected columns), turns each chunk into a float matrix (NaN for
empty cells) plus the raw time column, and checks every selected cell on the
way: text that is not a number, infinities and magnitudes whose
squares would overflow are errors that name the file, the column, the row and
the value. The SHA-256 of the file's bytes is computed while the file is read
(CSV) or by one streaming hash (Parquet).

Row numbers in messages are 1-based data rows: the header is not counted and
neither are blank lines (which are skipped, as is common practice for CSV).

One module per concern:

- :mod:`~relspan.data.sources.detect`: file checks, format detection, UTF-8 and
  BOM checks, header column lookup, SHA-256
- :mod:`~relspan.data.sources.cells`: cell checks (not a number, infinite,
  absurd magnitude) and the :class:`RawChunk` every engine yields
- :mod:`~relspan.data.sources.csv`: the CSV/TSV engines (pyarrow's streaming
  reader, pandas' C reader as the reference)
- :mod:`~relspan.data.sources.parquet`: the Parquet engine
- :mod:`~relspan.data.sources.reader`: :func:`open_source` and
  :class:`TableReader`, the one place an engine is chosen
"""

from relspan.data.sources.cells import (MAX_MAGNITUDE, RawChunk, check_finite, numeric_block,
                                        time_text)
from relspan.data.sources.csv import ENGINES, FastPathDeclined, arrow_available
from relspan.data.sources.detect import FORMATS, TableSource, file_sha256, select_columns
from relspan.data.sources.reader import TableReader, open_source

__all__ = [
    "FORMATS",
    "MAX_MAGNITUDE",
    "RawChunk",
    "TableSource",
    "open_source",
    "TableReader",
    "numeric_block",
    "file_sha256",
    "check_finite",
    "ENGINES",
    "FastPathDeclined",
    "arrow_available",
    "select_columns",
    "time_text",
]
