"""Excel workbook reader (.xlsx/.xlsm; needs the optional package openpyxl).

The workbook is opened read-only (openpyxl streams the sheet's XML, so memory
does not grow with the rows) with the values last computed for formula cells.
The header is the first non-empty row of the sheet (the first sheet unless
``datasets[i].sheet`` names one, by name or 0-based position); empty rows are
skipped, as blank lines are in CSV, so row numbers in messages are data rows
with the header not counted. Cells keep their types: numbers stay numbers,
dates stay dates (a time column of dates is read as typed datetimes), text
goes through the same cell checks as CSV. The SHA-256 is one streaming hash of
the file after the read.
"""

from __future__ import annotations

import datetime as _dt
from dataclasses import replace
from typing import TYPE_CHECKING, Iterator

import numpy as np
import pandas as pd

from relspan.data.sources.cells import RawChunk, numeric_block
from relspan.data.sources.detect import TableSource, file_sha256
from relspan.errors import DataError, DependencyError

if TYPE_CHECKING:
    from relspan.data.sources.reader import TableReader

__all__ = ["excel_source", "excel_chunks", "excel_head"]


def _openpyxl(path: str):
    try:
        import openpyxl  # noqa: PLC0415 (optional dependency)
    except ImportError:
        raise DependencyError(
            "reading Excel workbooks needs the optional package openpyxl, which is not installed.",
            path=path, fix="pip install 'relspan[excel]'  (or save the sheet as CSV UTF-8).") from None
    return openpyxl


def _open_book(src: TableSource):
    openpyxl = _openpyxl(src.path)
    try:
        return openpyxl.load_workbook(src.resolved, read_only=True, data_only=True)
    except Exception as err:  # openpyxl raises zipfile, KeyError, InvalidFileException, ...
        raise DataError(f"is not a readable Excel workbook ({' '.join(str(err).split())}).",
                        path=src.path, fix="save it again from a spreadsheet program as .xlsx, "
                                           "or as CSV UTF-8.") from None


def _sheet(book, src: TableSource):
    sheets = book.sheetnames
    want = src.sheet
    if want is None:
        return book[sheets[0]]
    if isinstance(want, int) or (isinstance(want, str) and want.isdigit() and want not in sheets):
        k = int(want)
        if not 0 <= k < len(sheets):
            raise DataError(f"has {len(sheets)} sheet(s) ({', '.join(map(repr, sheets))}); sheet "
                            f"{k} (counted from 0) does not exist.", path=src.path, key="sheet",
                            got=str(want), fix="set sheet to one of those names, or to a position "
                                               f"from 0 to {len(sheets) - 1}.")
        return book[sheets[k]]
    if want not in sheets:
        import difflib

        near = difflib.get_close_matches(str(want), sheets, n=1)
        hint = f" Did you mean {near[0]!r}?" if near else ""
        raise DataError(f"has no sheet {want!r}; its sheets are {', '.join(map(repr, sheets))}.{hint}",
                        path=src.path, key="sheet", got=str(want),
                        fix="set sheet to one of those names (or a position counted from 0).")
    return book[want]


def _empty(row) -> bool:
    return all(v is None or (isinstance(v, str) and not v.strip()) for v in row)


def _rows(src: TableSource):
    """(book, sheet title, header, iterator of data rows)."""
    book = _open_book(src)
    ws = _sheet(book, src)
    it = ws.iter_rows(values_only=True)
    for row in it:
        if not _empty(row):
            header = tuple("" if v is None else str(v) for v in row)
            break
    else:
        book.close()
        raise DataError(f"sheet {ws.title!r} is empty: it has no header row.", path=src.path,
                        fix="write the column names in the sheet's first row, or set sheet.")
    while header and header[-1] == "":  # trailing empty header cells (formatting) are not columns
        header = header[:-1]
    return book, ws.title, header, it


def excel_source(src: TableSource) -> TableSource:
    """The source with its header and the sheet read named in ``read_as``."""
    book, title, header, _ = _rows(src)
    book.close()
    return replace(src, header=header, sheet=title, read_as=f"{src.read_as}, sheet {title!r}")


def _time_values(col: pd.Series) -> tuple[np.ndarray, bool]:
    """Typed datetime64[s] when every cell is a date or empty; else text."""
    vals = col.tolist()
    present = [v for v in vals if v is not None]
    if present and all(isinstance(v, (_dt.datetime, _dt.date)) for v in present):
        return pd.to_datetime(pd.Series(vals, dtype=object)).to_numpy().astype("datetime64[s]"), True

    def text(v):
        if v is None or (isinstance(v, str) and not v.strip()):
            return None
        if isinstance(v, float) and v.is_integer():
            return str(int(v))
        if isinstance(v, (_dt.datetime, _dt.date)):
            return v.isoformat()
        return str(v)

    return np.array([text(v) for v in vals], dtype=object), False


def excel_chunks(table: TableReader) -> Iterator[RawChunk]:
    """The selected columns, chunk by chunk; the file is hashed after the read."""
    src = table.source
    nvar = len(table.columns)
    width = len(src.header)
    book, _, _, it = _rows(src)
    row0 = 0
    try:
        while True:
            batch = []
            for row in it:
                if _empty(row):
                    continue
                row = tuple(row[:width]) + (None,) * max(0, width - len(row))
                batch.append([row[p] for p in table.positions])
                if len(batch) >= table.chunk_rows:
                    break
            if not batch:
                break
            frame = pd.DataFrame(batch, dtype=object)
            m = frame.shape[0]
            rows = np.arange(row0 + 1, row0 + m + 1, dtype=np.int64)
            row0 += m
            values = numeric_block(frame.iloc[:, :nvar], table.columns, rows, path=src.path)
            times, typed = None, False
            if table.time_column is not None:
                times, typed = _time_values(frame.iloc[:, nvar])
            yield RawChunk(values, times, typed, rows)
    finally:
        book.close()
    table.sha256 = file_sha256(src.resolved)
    table.rows_read = row0


def excel_head(src: TableSource, nrows: int) -> tuple[pd.DataFrame, int]:
    """The first ``nrows`` data rows as a DataFrame (types inferred) and the number of data rows."""
    book, _, header, it = _rows(src)
    head, n = [], 0
    try:
        for row in it:
            if _empty(row):
                continue
            n += 1
            if n <= nrows:
                row = tuple(row[:len(header)]) + (None,) * max(0, len(header) - len(row))
                head.append(row)
    finally:
        book.close()
    frame = pd.DataFrame(head, columns=list(header), dtype=object).infer_objects()
    return frame, n
