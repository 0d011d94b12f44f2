"""The entry points: :func:`open_source` and :class:`TableReader`.

This is the one place where a reader engine is chosen: :func:`open_source`
checks the file, detects its format and reads its header;
:meth:`TableReader.chunks` hands the reading to the engine for that format
(:mod:`~relspan.data.sources.csv`, :mod:`~relspan.data.sources.parquet`). An
engine is a generator function of the reader: it yields
:class:`~relspan.data.sources.cells.RawChunk` objects (cells already checked by
:mod:`~relspan.data.sources.cells`) and, at the end, sets ``reader.sha256`` and
``reader.rows_read``.
"""

from __future__ import annotations

from pathlib import Path
from typing import Iterator, Sequence

from relspan.data.sources.cells import RawChunk
from relspan.data.sources.csv import (ENGINES, arrow_available, arrow_chunks, pandas_chunks,
                                      read_header)
from relspan.data.sources.detect import TableSource, check_file, detect_format, select_columns
from relspan.data.sources.parquet import parquet_chunks, parquet_header

__all__ = ["open_source", "TableReader"]


def open_source(path: str, resolved: Path, fmt: str = "auto") -> TableSource:
    """Check that a data file exists and is a table, and read its header.

    Parameters
    ----------
    path : str
        The file as written in the spec (used in messages).
    resolved : Path
        Where it is on disk.
    fmt : str
        ``auto`` (decide by extension: .csv, .tsv/.tab, .txt, .parquet/.pq;
        other names are sniffed), ``csv``, ``tsv`` or ``parquet``.

    Raises
    ------
    DataError
        Missing file, folder, empty file, no header, bytes that are not
        UTF-8, a file Parquet cannot read.
    DependencyError
        A Parquet file without pyarrow installed.
    """
    resolved = Path(resolved)
    check_file(path, resolved)
    kind, delim = detect_format(path, resolved, fmt)
    if kind == "parquet":
        return TableSource(path, resolved, "parquet", None, parquet_header(path, resolved))
    header = read_header(path, resolved, delim)
    return TableSource(path, resolved, kind, delim, header)


class TableReader:
    """Stream selected columns of a table in chunks.

    Parameters
    ----------
    source : TableSource
        From :func:`open_source`.
    columns : sequence of str
        Variable columns, in the order wanted.
    time_column : str or None
        The time column (read as text, or as datetime64 when Parquet types it).
    chunk_rows : int
        Rows per chunk (memory is proportional to it).
    keys : sequence of str, optional
        Spec keys of ``columns`` (for messages), e.g. ``variables[0].column``.
    engine : str
        CSV engine, one of :data:`~relspan.data.sources.csv.ENGINES` (Parquet
        files have one engine and ignore it).

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
        self.positions = select_columns(source, wanted, keys)
        self.sha256: str | None = None
        self.rows_read = 0
        self.engine = engine if engine != "auto" else ("pyarrow" if arrow_available() else "pandas")

    def chunks(self) -> Iterator[RawChunk]:
        """Yield :class:`RawChunk` objects until the table is read."""
        if self.source.format == "parquet":
            yield from parquet_chunks(self)
        elif self.engine == "pyarrow":
            yield from arrow_chunks(self)
        else:
            yield from pandas_chunks(self)
