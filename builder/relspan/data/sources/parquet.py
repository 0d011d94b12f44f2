"""Parquet reader (needs the optional package pyarrow).

:func:`parquet_header` reads the column names from the file's schema;
:func:`parquet_chunks` reads only the selected columns, batch by batch, through
the same cell checks as the text readers; a typed timestamp column stays
datetime64 (to the second); a time zone is dropped, keeping the local wall time
(a value stamped 2020-03-01 00:00+02:00 is March 2020, not February in UTC). The SHA-256 is one streaming hash of the
file after the read.
"""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING, Iterator

import numpy as np
import pandas as pd

from relspan.data.sources.cells import RawChunk, numeric_block, time_text
from relspan.data.sources.detect import file_sha256
from relspan.errors import DataError, DependencyError

if TYPE_CHECKING:
    from relspan.data.sources.reader import TableReader

__all__ = ["pyarrow_parquet", "parquet_header", "parquet_chunks"]


def pyarrow_parquet(path: str):
    try:
        import pyarrow.parquet as pq  # noqa: PLC0415 (optional dependency)
    except ImportError:
        raise DependencyError(
            "reading Parquet files needs the optional package pyarrow, which is not installed.",
            path=path, fix="pip install relspan[parquet]  (or convert the file to CSV).") from None
    return pq


def parquet_header(path: str, resolved: Path) -> tuple[str, ...]:
    """Column names of a Parquet file, from its schema (no rows are read)."""
    pq = pyarrow_parquet(path)
    try:
        names = tuple(pq.ParquetFile(resolved).schema_arrow.names)
    except Exception as err:  # pyarrow raises ArrowInvalid, OSError, ... for non-Parquet bytes
        raise DataError(f"is not a readable Parquet file ({' '.join(str(err).split())}).",
                        path=path, fix="write the file again with a Parquet writer, "
                                       "or set format: csv if it is text.") from None
    return names


def parquet_chunks(table: TableReader) -> Iterator[RawChunk]:
    """The selected columns, batch by batch; the file is hashed after the read."""
    src = table.source
    pq = pyarrow_parquet(src.path)
    names = [src.header[p] for p in table.positions]
    nvar = len(table.columns)
    try:
        pf = pq.ParquetFile(src.resolved)
        batches = pf.iter_batches(batch_size=table.chunk_rows, columns=list(dict.fromkeys(names)))
    except Exception as err:  # pyarrow's own error types for unreadable files
        raise DataError(f"is not a readable Parquet file ({' '.join(str(err).split())}).",
                        path=src.path, fix="write the file again with a Parquet writer.") from None
    row0 = 0
    while True:
        try:
            batch = next(batches)
        except StopIteration:
            break
        except Exception as err:  # pyarrow's own error types for damaged row groups
            raise DataError(f"has a damaged part near row {row0 + 1} "
                            f"({' '.join(str(err).split())}).", path=src.path, row=row0 + 1,
                            fix="write the file again with a Parquet writer.") from None
        frame = batch.to_pandas(date_as_object=False)
        frame = frame[names] if len(set(names)) == len(names) else frame.loc[:, names]
        m = frame.shape[0]
        rows = np.arange(row0 + 1, row0 + m + 1, dtype=np.int64)
        row0 += m
        values = numeric_block(frame.iloc[:, :nvar], table.columns, rows, path=src.path)
        times, typed = None, False
        if table.time_column is not None:
            t = frame.iloc[:, nvar]
            if pd.api.types.is_datetime64_any_dtype(t.dtype):
                times, typed = t.to_numpy(), True
                if getattr(t.dt, "tz", None) is not None:
                    # the wall time the data were stamped with: periods are read in local time
                    times = t.dt.tz_localize(None).to_numpy()
                times = times.astype("datetime64[s]")
            else:
                times = time_text(t)
        yield RawChunk(values, times, typed, rows)
    table.sha256 = file_sha256(src.resolved)
    table.rows_read = row0
