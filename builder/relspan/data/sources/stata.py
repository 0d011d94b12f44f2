"""Stata .dta reader (through pandas' StataReader; formats 104 to 119).

Only the selected variables are read, chunk by chunk. Numeric codes are kept
(value labels are not applied: a labelled variable is analysed as its codes),
Stata's missing values (``.``, ``.a`` to ``.z``) are missing cells, and a
variable with a Stata date format (``%td``, ``%tq``, ``%tm``, ...) is read as
typed datetimes. The SHA-256 is one streaming hash of the file after the read.
"""

from __future__ import annotations

from dataclasses import replace
from typing import TYPE_CHECKING, Iterator

import numpy as np
import pandas as pd

from relspan.data.sources.cells import RawChunk, numeric_block, time_text
from relspan.data.sources.detect import TableSource, file_sha256
from relspan.errors import DataError

if TYPE_CHECKING:
    from relspan.data.sources.reader import TableReader

__all__ = ["stata_source", "stata_chunks", "stata_head"]

_OPTIONS = dict(convert_categoricals=False, convert_missing=False, convert_dates=True,
                preserve_dtypes=False)


def _bad(src: TableSource, err: Exception) -> DataError:
    return DataError(f"is not a readable Stata .dta file ({' '.join(str(err).split())}).",
                     path=src.path, fix="save it again from Stata (save or export), or as CSV UTF-8.")


def stata_source(src: TableSource) -> TableSource:
    """The source with its variable names as the header."""
    try:
        with pd.read_stata(src.resolved, iterator=True, **_OPTIONS) as reader:
            names = tuple(reader.variable_labels().keys())
    except (ValueError, OSError, UnicodeDecodeError, EOFError, KeyError) as err:
        raise _bad(src, err) from None
    if not names:
        raise DataError("holds no variables.", path=src.path,
                        fix="point the source at the .dta file with the data.")
    return replace(src, header=names)


def _frames(src: TableSource, columns, chunk_rows: int):
    try:
        reader = pd.read_stata(src.resolved, chunksize=chunk_rows, columns=columns, **_OPTIONS)
    except (ValueError, OSError, UnicodeDecodeError, EOFError, KeyError) as err:
        raise _bad(src, err) from None
    with reader:
        while True:
            try:
                frame = next(reader)
            except StopIteration:
                return
            except (ValueError, OSError, UnicodeDecodeError, EOFError, KeyError) as err:
                raise _bad(src, err) from None
            if frame.shape[0] == 0:
                return
            yield frame


def stata_chunks(table: TableReader) -> Iterator[RawChunk]:
    """The selected variables, chunk by chunk; the file is hashed after the read."""
    src = table.source
    names = [src.header[p] for p in table.positions]
    nvar = len(table.columns)
    row0 = 0
    for frame in _frames(src, list(dict.fromkeys(names)), table.chunk_rows):
        frame = frame.loc[:, names]
        m = frame.shape[0]
        rows = np.arange(row0 + 1, row0 + m + 1, dtype=np.int64)
        row0 += m
        values = numeric_block(frame.iloc[:, :nvar], table.columns, rows, path=src.path)
        times, typed = None, False
        if table.time_column is not None:
            t = frame.iloc[:, nvar]
            if pd.api.types.is_datetime64_any_dtype(t.dtype):
                times, typed = t.to_numpy().astype("datetime64[s]"), True
            else:
                times = time_text(t)
        yield RawChunk(values, times, typed, rows)
    table.sha256 = file_sha256(src.resolved)
    table.rows_read = row0


def stata_head(src: TableSource, nrows: int) -> tuple[pd.DataFrame, int]:
    """The first ``nrows`` rows (all variables) and the number of observations."""
    try:
        with pd.read_stata(src.resolved, iterator=True, **_OPTIONS) as reader:
            head = reader.read(nrows)
            n = reader.nobs if hasattr(reader, "nobs") else None
    except (ValueError, OSError, UnicodeDecodeError, EOFError, KeyError) as err:
        raise _bad(src, err) from None
    if n is None:
        n = sum(f.shape[0] for f in _frames(src, None, 100_000))
    return head, int(n)
