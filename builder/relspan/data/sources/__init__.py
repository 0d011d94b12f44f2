"""Read data files in chunks: CSV/TSV (plain or compressed, any encoding), Parquet (pyarrow),
Excel (openpyxl) and Stata .dta.

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

- :mod:`~relspan.data.sources.detect`: file checks, detection of the format,
  compression, encoding, separator and decimal mark (said in words), the
  checked text stream, header column lookup, SHA-256
- :mod:`~relspan.data.sources.cells`: cell checks (not a number, infinite,
  absurd magnitude) and the :class:`RawChunk` every engine yields
- :mod:`~relspan.data.sources.csv`: the CSV/TSV engines (pyarrow's streaming
  reader, pandas' C reader as the reference)
- :mod:`~relspan.data.sources.parquet`: the Parquet engine
- :mod:`~relspan.data.sources.excel`: the Excel engine (openpyxl, read-only)
- :mod:`~relspan.data.sources.stata`: the Stata .dta engine (pandas)
- :mod:`~relspan.data.sources.reader`: :func:`open_source` and
  :class:`TableReader`, the one place an engine is chosen
"""

from relspan.data.sources.cells import (MAX_MAGNITUDE, RawChunk, check_finite, numeric_block,
                                        time_text)
from relspan.data.sources.csv import ENGINES, FastPathDeclined, arrow_available
from relspan.data.sources.detect import FORMATS, TableSource, detect_source, file_sha256, select_columns
from relspan.data.sources.reader import TableReader, noted, open_source, read_head

__all__ = [
    "FORMATS",
    "MAX_MAGNITUDE",
    "RawChunk",
    "TableSource",
    "open_source",
    "detect_source",
    "read_head",
    "noted",
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
