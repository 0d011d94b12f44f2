"""The entry points: :func:`open_source` and :class:`TableReader`.

This is the one place where a reader engine is chosen: :func:`open_source`
checks the file, detects how to read it (:func:`~relspan.data.sources.detect.detect_source`)
and reads its header; :meth:`TableReader.chunks` hands the reading to the
engine for that format (:mod:`~relspan.data.sources.csv`,
:mod:`~relspan.data.sources.parquet`, :mod:`~relspan.data.sources.excel`,
:mod:`~relspan.data.sources.stata`). An engine is a generator function of the
reader: it yields :class:`~relspan.data.sources.cells.RawChunk` objects (cells
already checked by :mod:`~relspan.data.sources.cells`) and, at the end, sets
``reader.sha256`` and ``reader.rows_read``.

A :class:`~relspan.errors.DataError` met while reading a file that is not
plain UTF-8 CSV says how the file was read (what was detected), so a message
about a cell or a line can be checked against the reading that produced it.
"""

from __future__ import annotations

import contextlib
from pathlib import Path
from typing import Iterator, Sequence

import pandas as pd

from relspan.data.sources.cells import RawChunk
from relspan.data.sources.csv import (ENGINES, arrow_available, arrow_chunks, pandas_chunks,
                                      read_header)
from relspan.data.sources.detect import TableSource, check_file, detect_source, select_columns
from relspan.errors import DataError

__all__ = ["open_source", "TableReader", "read_head", "noted"]


@contextlib.contextmanager
def noted(src: TableSource | None):
    """Add how the file was read to a DataError raised inside (once)."""
    try:
        yield
    except DataError as err:
        note = src.read_as_note if src is not None else ""
        if note and note not in err.message:
            err.message = err.message + note
            err.args = (err.message,)
        raise


def open_source(path: str, resolved: Path, fmt: str = "auto", *, separator: str = "auto",
                decimal: str = "auto", encoding: str = "auto",
                sheet: str | int | None = None) -> TableSource:
    """Check that a data file exists and is a table, detect how to read it, and read its header.

    Parameters
    ----------
    path : str
        The file as written in the spec (used in messages).
    resolved : Path
        Where it is on disk.
    fmt : str
        ``auto`` (decide by the file's first bytes, then its extension),
        ``csv``, ``tsv``, ``parquet``, ``excel`` or ``stata``.
    separator, decimal, encoding : str
        For text files; ``auto`` detects them (see
        :func:`~relspan.data.sources.detect.detect_source`).
    sheet : str or int, optional
        Excel: the sheet's name or 0-based position (default: the first).

    Raises
    ------
    DataError
        Missing file, folder, empty file, no header, bytes that are not
        text in the encoding, a file its format's reader cannot read.
    DependencyError
        A Parquet file without pyarrow, an Excel workbook without openpyxl.
    """
    resolved = Path(resolved)
    check_file(path, resolved)
    src = detect_source(path, resolved, fmt, separator=separator, decimal=decimal,
                        encoding=encoding, sheet=sheet)
    with noted(src):
        if src.format == "parquet":
            from relspan.data.sources.parquet import parquet_header

            return src.with_header(parquet_header(path, resolved))
        if src.format == "excel":
            from relspan.data.sources.excel import excel_source

            return excel_source(src)
        if src.format == "stata":
            from relspan.data.sources.stata import stata_source

            return stata_source(src)
        return src.with_header(read_header(src))


def read_head(src: TableSource, nrows: int) -> tuple[pd.DataFrame, int]:
    """The first ``nrows`` data rows of every column (types inferred) and the number of data rows.

    For ``relspan new``: only the head is kept in memory; the rows are counted
    in one streaming pass (Parquet and Stata: from the file's metadata or a
    pass over one column).
    """
    with noted(src):
        if src.format == "excel":
            from relspan.data.sources.excel import excel_head

            return excel_head(src, nrows)
        if src.format == "stata":
            from relspan.data.sources.stata import stata_head

            return stata_head(src, nrows)
        if src.format == "parquet":
            from relspan.data.sources.parquet import pyarrow_parquet

            pq = pyarrow_parquet(src.path)
            pf = pq.ParquetFile(src.resolved)
            n = pf.metadata.num_rows
            batch = next(pf.iter_batches(batch_size=max(nrows, 1)), None)
            head = batch.to_pandas() if batch is not None else pd.DataFrame(columns=src.header)
            return head.iloc[:nrows], int(n)
        from relspan.data.sources.csv import text_head

        return text_head(src, nrows)


class TableReader:
    """Stream selected columns of a table in chunks.

    Parameters
    ----------
    source : TableSource
        From :func:`open_source`.
    columns : sequence of str
        Variable columns, in the order wanted.
    time_column : str or None
        The time column (read as text, or as datetime64 when the format types it:
        Parquet timestamps, Excel dates, Stata date formats).
    chunk_rows : int
        Rows per chunk (memory is proportional to it).
    keys : sequence of str, optional
        Spec keys of ``columns`` (for messages), e.g. ``variables[0].column``.
    engine : str
        CSV engine, one of :data:`~relspan.data.sources.csv.ENGINES` (other
        formats have one engine and ignore it; text that is not plain UTF-8
        CSV is always read by pandas).

    Attributes
    ----------
    positions : list of int
        Header positions of ``columns`` (then of the time column), which the
        engines read.

    Notes
    -----
    Iterate :meth:`chunks` to the end; then :attr:`sha256` and
    :attr:`rows_read` hold the file's hash and number of data rows.
    """

    def __init__(self, source: TableSource, columns: Sequence[str], *, time_column: str | None,
                 chunk_rows: int = 16384, keys: Sequence[str] | None = None,
                 engine: str = "pandas") -> None:
        if engine not in ENGINES:
            raise ValueError(f"engine must be one of {ENGINES}; got {engine!r}")
        if chunk_rows < 1:
            raise ValueError("chunk_rows must be at least 1")
        self.source = source
        self.columns = tuple(columns)
        self.time_column = time_column
        self.chunk_rows = int(chunk_rows)
        keys = list(keys) if keys is not None else [f"variables[{j}].column"
                                                     for j in range(len(self.columns))]
        wanted = list(self.columns)
        if time_column is not None:
            wanted.append(time_column)
            keys.append("time.column")
        with noted(source):
            self.positions = select_columns(source, wanted, keys)
        self.sha256: str | None = None
        self.rows_read = 0
        self.engine = engine if engine != "auto" else ("pyarrow" if arrow_available() else "pandas")
        if not source.plain:
            self.engine = "pandas"

    def chunks(self) -> Iterator[RawChunk]:
        """Yield :class:`RawChunk` objects until the table is read."""
        fmt = self.source.format
        with noted(self.source):
            if fmt == "parquet":
                from relspan.data.sources.parquet import parquet_chunks

                yield from parquet_chunks(self)
            elif fmt == "excel":
                from relspan.data.sources.excel import excel_chunks

                yield from excel_chunks(self)
            elif fmt == "stata":
                from relspan.data.sources.stata import stata_chunks

                yield from stata_chunks(self)
            elif self.engine == "pyarrow":
                yield from arrow_chunks(self)
            else:
                yield from pandas_chunks(self)
