"""Read data files in chunks: CSV/TSV always, Parquet when pyarrow is installed.

This is the only module that opens data files. A :class:`TableReader` keeps
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
"""

from __future__ import annotations

import codecs
import csv
import difflib
import hashlib
import io
import queue
import threading
from dataclasses import dataclass
from pathlib import Path
from typing import Callable, Iterator, Sequence

import numpy as np
import pandas as pd

from relspan.errors import DataError, DependencyError

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
]

#: CSV readers: ``auto`` (pyarrow's streaming reader when pyarrow is installed, else
#: pandas), ``pyarrow`` (only that one; a file it cannot take exactly raises
#: :class:`FastPathDeclined`) and ``pandas`` (the reference reader)
ENGINES = ("auto", "pyarrow", "pandas")

#: bytes of CSV text pyarrow parses per block (one block is one batch of rows; memory
#: stays proportional to it and to the few blocks read ahead)
ARROW_BLOCK_BYTES = 1 << 21

#: cells pandas' C reader reads as missing by default (pandas.read_csv, na_values); the
#: pyarrow reader is given the same list so both readers agree cell for cell
try:
    from pandas._libs.parsers import STR_NA_VALUES as _PANDAS_NA  # noqa: PLC0415
    _NA_VALUES = sorted(_PANDAS_NA)
except ImportError:  # pragma: no cover - pandas moved it
    _NA_VALUES = ["", "#N/A", "#N/A N/A", "#NA", "-1.#IND", "-1.#QNAN", "-NaN", "-nan",
                  "1.#IND", "1.#QNAN", "<NA>", "N/A", "NA", "NULL", "NaN", "None", "n/a",
                  "nan", "null"]


class FastPathDeclined(Exception):
    """The pyarrow reader met something it may read differently from pandas.

    Raised only by ``engine="pyarrow"``; :func:`relspan.data.prepare.prepare_dataset`
    then reads the file again with pandas, which gives the reference result or the
    located error message. It is never shown to users.
    """


def arrow_available() -> bool:
    """Whether pyarrow's CSV reader can be imported."""
    try:
        import pyarrow.csv  # noqa: F401, PLC0415 (optional dependency)
    except ImportError:
        return False
    return True

#: values of ``datasets[i].format``
FORMATS = ("auto", "csv", "tsv", "parquet")

#: larger magnitudes are refused: their squares (about 1e300) come close to the
#: largest double (about 1.8e308, IEEE 754 binary64), and co-moments would overflow
MAX_MAGNITUDE = 1e150

_BOM = codecs.BOM_UTF8
_FIX_UTF8 = "save the file as UTF-8 (most spreadsheet programs offer 'CSV UTF-8')."


@dataclass(frozen=True, slots=True)
class RawChunk:
    """One chunk of selected columns, as read.

    Attributes
    ----------
    values : (m, n) float ndarray
        Variables in the order asked for; NaN marks an empty cell.
    times : Series, ndarray or None
        The time column: text (a pandas string Series, or an object array
        of str/None) or datetime64 (typed Parquet columns); None without a
        time column.
    times_typed : bool
        True when ``times`` is datetime64 already.
    rows : (m,) int64 ndarray
        1-based data row numbers.
    """

    values: np.ndarray
    times: pd.Series | np.ndarray | None
    times_typed: bool
    rows: np.ndarray


@dataclass(frozen=True, slots=True)
class TableSource:
    """An opened (not yet read) table: where it is, its format and its header.

    Attributes
    ----------
    path : str
        The file as written in the spec (used in every message).
    resolved : Path
        The file on disk.
    format : str
        ``"csv"``, ``"tsv"`` or ``"parquet"`` (``"csv"`` also covers other
        delimiters, see ``delimiter``).
    delimiter : str or None
        Field separator of a text file.
    header : tuple of str
        Column names in file order.
    """

    path: str
    resolved: Path
    format: str
    delimiter: str | None
    header: tuple[str, ...]


def file_sha256(path: Path, *, block: int = 1 << 20) -> str:
    """SHA-256 of a file, read in blocks of ``block`` bytes (memory stays flat)."""
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        while True:
            data = fh.read(block)
            if not data:
                break
            h.update(data)
    return h.hexdigest()


class _CheckedStream(io.RawIOBase):
    """A binary file that hashes, checks UTF-8 and drops a leading BOM as it is read."""

    def __init__(self, fh, path: str) -> None:
        super().__init__()
        self._fh = fh
        self._path = path
        self.sha = hashlib.sha256()
        self._dec = codecs.getincrementaldecoder("utf-8")("strict")
        self._offset = 0          # bytes of the file passed through so far
        self._newlines = 0        # newlines in those bytes
        self._pending = b""       # bytes handed on to the reader but not yet returned
        self._started = False
        self._eof = False

    def readable(self) -> bool:
        return True

    def _fail(self, data: bytes, start: int) -> None:
        pos = self._offset + start
        line = self._newlines + data[:max(start, 0)].count(b"\n") + 1
        bad = data[start:start + 4] if start >= 0 else b""
        raise DataError(
            f"is not UTF-8 text: the byte at offset {pos} (line {line}) is "
            f"0x{bad[:1].hex() if bad else '??'}, which UTF-8 does not allow there.",
            path=self._path, line=line, got=bad.hex(), fix=_FIX_UTF8)

    def _check(self, data: bytes, final: bool) -> None:
        held = len(self._dec.getstate()[0])
        try:
            self._dec.decode(data, final)
        except UnicodeDecodeError as err:
            self._fail(data, err.start - held)

    def readinto(self, buf) -> int:
        if not self._pending:
            if self._eof:
                return 0
            data = self._fh.read(max(len(buf), 1 << 16))
            if not data:
                self._check(b"", True)
                self._eof = True
                return 0
            self.sha.update(data)
            self._check(data, False)
            self._offset += len(data)
            self._newlines += data.count(b"\n")
            if not self._started:
                self._started = True
                if data.startswith(_BOM):
                    data = data[len(_BOM):]
            self._pending = data
            if not data:
                return self.readinto(buf)
        n = min(len(buf), len(self._pending))
        buf[:n] = self._pending[:n]
        self._pending = self._pending[n:]
        return n

    def drain(self) -> None:
        """Hash (and check) whatever the reader has not asked for yet."""
        self._pending = b""
        while not self._eof:
            data = self._fh.read(1 << 20)
            if not data:
                self._check(b"", True)
                self._eof = True
                break
            self.sha.update(data)
            self._check(data, False)
            self._offset += len(data)
            self._newlines += data.count(b"\n")


def _check_file(path: str, resolved: Path) -> None:
    if not resolved.exists():
        raise DataError("does not exist.", path=path,
                        fix="check the dataset's source: it is read relative to the spec's folder.")
    if resolved.is_dir():
        raise DataError("is a folder, not a data file.", path=path,
                        fix="point the dataset's source at a CSV, TSV or Parquet file inside it.")
    try:
        with open(resolved, "rb"):
            pass
    except OSError as err:
        raise DataError(f"cannot be opened ({err.strerror or err}).", path=path,
                        fix="check that the file is readable by you.") from None
    if resolved.stat().st_size == 0:
        raise DataError("is empty (0 bytes).", path=path,
                        fix="write a header line and data rows into it, or point at the right file.")


def _sniff_delimiter(first_line: bytes) -> str:
    counts = {d: first_line.count(d.encode()) for d in ("\t", ",", ";", "|")}
    best = max(counts, key=lambda d: counts[d])
    return best if counts[best] > 0 else ","


def _detect(path: str, resolved: Path, fmt: str) -> tuple[str, str | None]:
    if fmt not in FORMATS:
        raise DataError(f"format {fmt!r} is not one of {', '.join(FORMATS)}.", path=path,
                        key="format", got=fmt, fix="set format to auto, csv, tsv or parquet.")
    ext = resolved.suffix.lower()
    if fmt == "csv":
        return "csv", ","
    if fmt == "tsv":
        return "tsv", "\t"
    if fmt == "parquet":
        return "parquet", None
    if ext == ".csv":
        return "csv", ","
    if ext in (".tsv", ".tab"):
        return "tsv", "\t"
    if ext in (".parquet", ".pq"):
        return "parquet", None
    with open(resolved, "rb") as fh:
        head = fh.read(1 << 16)
    if head.startswith(b"PAR1"):
        return "parquet", None
    first = head.split(b"\n", 1)[0]
    delim = _sniff_delimiter(first)
    return ("tsv" if delim == "\t" else "csv"), delim


def _read_header(path: str, resolved: Path, delimiter: str) -> tuple[str, ...]:
    with open(resolved, "rb") as fh:
        stream = _CheckedStream(fh, path)
        try:
            head = pd.read_csv(io.BufferedReader(stream), sep=delimiter, header=None, nrows=1,
                               dtype=str, keep_default_na=False, na_filter=False,
                               skip_blank_lines=True, engine="c", encoding="utf-8")
        except pd.errors.EmptyDataError:
            raise DataError("has no header line (it holds only blank lines).", path=path,
                            fix="write the column names on the first line.") from None
        except (pd.errors.ParserError, ValueError, OverflowError, csv.Error) as err:
            raise _parser_error(path, err) from None
    if head.shape[0] == 0:
        raise DataError("has no header line.", path=path,
                        fix="write the column names on the first line.")
    return tuple(str(v) for v in head.iloc[0].tolist())


def _parser_error(path: str, err: Exception) -> DataError:
    text = " ".join(str(err).split())
    line = None
    import re

    m = re.search(r"Expected (\d+) fields in line (\d+), saw (\d+)", text)
    if m:
        line = int(m.group(2))
        return DataError(f"line {line} has {m.group(3)} fields but the header has {m.group(1)}.",
                         path=path, line=line,
                         fix="remove the extra separators on that line, or quote fields "
                             "that contain the separator.")
    m = re.search(r"line (\d+)", text)
    if m:
        line = int(m.group(1))
    return DataError(f"cannot be read as a table: {text}", path=path, line=line,
                     fix="check the file's separators and quotes near that place.")


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
    _check_file(path, resolved)
    kind, delim = _detect(path, resolved, fmt)
    if kind == "parquet":
        pq = _pyarrow(path)
        try:
            names = tuple(pq.ParquetFile(resolved).schema_arrow.names)
        except Exception as err:  # pyarrow raises ArrowInvalid, OSError, ... for non-Parquet bytes
            raise DataError(f"is not a readable Parquet file ({' '.join(str(err).split())}).",
                            path=path, fix="write the file again with a Parquet writer, "
                                           "or set format: csv if it is text.") from None
        return TableSource(path, resolved, "parquet", None, names)
    header = _read_header(path, resolved, delim)
    return TableSource(path, resolved, kind, delim, header)


def _pyarrow(path: str):
    try:
        import pyarrow.parquet as pq  # noqa: PLC0415 (optional dependency)
    except ImportError:
        raise DependencyError(
            "reading Parquet files needs the optional package pyarrow, which is not installed.",
            path=path, fix="pip install relspan[parquet]  (or convert the file to CSV).") from None
    return pq


def _select(src: TableSource, columns: Sequence[str], keys: Sequence[str]) -> list[int]:
    positions: list[int] = []
    for col, key in zip(columns, keys):
        hits = [i for i, h in enumerate(src.header) if h == col]
        if not hits:
            shown = ", ".join(repr(h) for h in src.header[:30])
            if len(src.header) > 30:
                shown += f", ... ({len(src.header)} in all)"
            near = difflib.get_close_matches(col, src.header, n=1, cutoff=0.6)
            if not near:
                lowered = {h.strip().lower(): h for h in src.header}
                if col.strip().lower() in lowered:
                    near = [lowered[col.strip().lower()]]
            hint = f" Did you mean {near[0]!r}?" if near else ""
            raise DataError(
                f"has no column {col!r}. Its columns are: {shown}.{hint}", path=src.path,
                column=col, key=key, got=col,
                fix=(f"change {key} to {near[0]!r}." if near else
                     f"change {key} to one of the columns above."))
        if len(hits) > 1:
            where = " and ".join(str(i + 1) for i in hits)
            raise DataError(
                f"has more than one column named {col!r} (columns {where} of the header), so "
                "relspan cannot tell which one to use.", path=src.path, column=col, key=key,
                fix="rename the duplicated columns in the header so each name is unique.")
        positions.append(hits[0])
    return positions


def numeric_block(frame: pd.DataFrame, names: Sequence[str], rows: np.ndarray, *,
                  path: str | None) -> np.ndarray:
    """Turn selected columns of a chunk into a float matrix, checking every cell.

    Parameters
    ----------
    frame : DataFrame
        The chunk; columns in the order of ``names``.
    names : sequence of str
        Column names (for messages).
    rows : (m,) int array
        1-based data row numbers of the chunk.
    path : str or None
        The file (for messages).

    Raises
    ------
    DataError
        A cell that is not a number (file, column, first bad row and value),
        an infinite value, or a magnitude above :data:`MAX_MAGNITUDE`.
    """
    m = frame.shape[0]
    out = np.empty((m, len(names)), dtype=float)
    for j, name in enumerate(names):
        s = frame.iloc[:, j]
        if pd.api.types.is_bool_dtype(s.dtype):
            conv = pd.Series(np.full(m, np.nan))
            bad = s.notna().to_numpy()
        elif pd.api.types.is_numeric_dtype(s.dtype):
            conv = s
            bad = None
        else:
            obj = s.astype(object)
            conv = pd.to_numeric(obj.where(~obj.map(lambda v: isinstance(v, bool)), "x"),
                                 errors="coerce") if m else pd.Series([], dtype=float)
            bad = (conv.isna() & s.notna()).to_numpy(dtype=bool)
        if bad is not None and bad.any():
            i = int(np.flatnonzero(bad)[0])
            value = s.iloc[i]
            shown = repr(str(value)) if len(str(value)) <= 40 else repr(str(value)[:40] + "...")
            raise DataError(
                f"column {name!r}, row {int(rows[i])}: {shown} is not a number.", path=path,
                column=name, row=int(rows[i]), got=str(value),
                fix="correct or empty that cell (empty cells are missing values; use a dot as "
                    "the decimal mark and no thousands separators).")
        out[:, j] = pd.Series(conv).to_numpy(dtype=float, na_value=np.nan)
    check_finite(out, names, rows, path=path)
    return out


def check_finite(values: np.ndarray, names: Sequence[str], rows: np.ndarray, *,
                 path: str | None) -> None:
    """Refuse infinities and magnitudes above :data:`MAX_MAGNITUDE` (NaN is a missing cell).

    Parameters
    ----------
    values : (m, n) float ndarray
        One chunk, columns in the order of ``names``.
    names : sequence of str
        Column names (for messages).
    rows : (m,) int array
        1-based data row numbers.
    path : str or None
        The file (for messages).

    Raises
    ------
    DataError
        Naming the column, the first offending row and the value.
    """
    with np.errstate(invalid="ignore"):
        ok = np.abs(values) <= MAX_MAGNITUDE  # False for inf, huge values and NaN
    suspect = ~ok & ~np.isnan(values)
    if not suspect.any():
        return
    for j, name in enumerate(names):
        col = values[:, j]
        finite = np.isfinite(col)
        weird = ~finite & ~np.isnan(col)
        if weird.any():
            i = int(np.flatnonzero(weird)[0])
            raise DataError(
                f"column {name!r}, row {int(rows[i])}: the value is {'-' if col[i] < 0 else '+'}"
                "infinity; relspan needs finite numbers.", path=path, column=name,
                row=int(rows[i]), got=str(col[i]),
                fix="replace the infinite value by the measured number, or empty the cell to "
                    "mark it missing.")
        big = finite & (np.abs(np.where(finite, col, 0.0)) > MAX_MAGNITUDE)
        if big.any():
            i = int(np.flatnonzero(big)[0])
            raise DataError(
                f"column {name!r}, row {int(rows[i])}: {col[i]:.3g} is too large in magnitude "
                f"(above {MAX_MAGNITUDE:.0e}): its square would overflow double precision.",
                path=path, column=name, row=int(rows[i]), got=repr(col[i]),
                fix="rescale the column (e.g. to thousands or millions of its unit), or correct "
                    "the cell if it is a typing error.")


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
        self._positions = _select(source, wanted, keys)
        self.sha256: str | None = None
        self.rows_read = 0
        self.engine = engine if engine != "auto" else ("pyarrow" if arrow_available() else "pandas")

    def chunks(self) -> Iterator[RawChunk]:
        """Yield :class:`RawChunk` objects until the table is read."""
        if self.source.format == "parquet":
            yield from self._parquet_chunks()
        elif self.engine == "pyarrow":
            yield from self._arrow_text_chunks()
        else:
            yield from self._text_chunks()

    # -- text -----------------------------------------------------------------
    def _text_chunks(self) -> Iterator[RawChunk]:
        src = self.source
        take = list(self._positions)
        nvar = len(self.columns)
        # Every field is tokenised (so a row with more fields than the header is an
        # error, which pandas skips silently when usecols is given); only the selected
        # columns are converted, checked and kept.
        dtype = {self._positions[-1]: str} if self.time_column is not None else None
        with open(src.resolved, "rb") as fh:
            stream = _CheckedStream(fh, src.path)
            reader_args = dict(sep=src.delimiter, header=0, dtype=dtype,
                               chunksize=self.chunk_rows, skip_blank_lines=True, engine="c",
                               encoding="utf-8", low_memory=False)
            try:
                reader = pd.read_csv(io.BufferedReader(stream, buffer_size=1 << 16),
                                     **reader_args)
            except pd.errors.EmptyDataError:
                raise DataError("has no header line.", path=src.path,
                                fix="write the column names on the first line.") from None
            except (pd.errors.ParserError, ValueError, OverflowError, csv.Error) as err:
                raise _parser_error(src.path, err) from None
            row0 = 0
            with reader:
                while True:
                    try:
                        frame = next(reader)
                    except StopIteration:
                        break
                    except pd.errors.EmptyDataError:
                        break
                    except (pd.errors.ParserError, ValueError, OverflowError, csv.Error) as err:
                        raise _parser_error(src.path, err) from None
                    m = frame.shape[0]
                    rows = np.arange(row0 + 1, row0 + m + 1, dtype=np.int64)
                    row0 += m
                    sub = frame.iloc[:, take]
                    values = numeric_block(sub.iloc[:, :nvar], self.columns, rows, path=src.path)
                    times = None
                    if self.time_column is not None:
                        times = sub.iloc[:, nvar].reset_index(drop=True)
                    yield RawChunk(values, times, False, rows)
            stream.drain()
            self.sha256 = stream.sha.hexdigest()
            self.rows_read = row0

    # -- text, through pyarrow ---------------------------------------------------
    def _arrow_text_chunks(self) -> Iterator[RawChunk]:
        """pyarrow's streaming CSV reader: multi-threaded block parsing, same cells as pandas.

        Only what both readers read identically is accepted: numeric columns
        are parsed as float64 (pyarrow and pandas' C reader both round decimal
        text correctly, so the doubles are equal), the missing-cell markers
        are pandas' list, and the time column is text. Anything else pyarrow
        refuses or might read differently (a row with the wrong number of
        fields, text in a numeric column, NaN written out, a header line not
        first, non-UTF-8 bytes anywhere) raises :class:`FastPathDeclined`
        before a result exists, and the caller reads the file with pandas.
        The SHA-256 and the UTF-8 check of the whole file (unselected columns
        too) run in a thread beside the parser.
        """
        import pyarrow as pa  # noqa: PLC0415 (optional dependency)
        import pyarrow.csv as pacsv  # noqa: PLC0415

        src = self.source
        nvar = len(self.columns)
        names = [f"c{i}" for i in range(len(src.header))]  # positional: header names may repeat
        take = [names[p] for p in self._positions]
        types = {names[p]: pa.float64() for p in self._positions[:nvar]}
        if self.time_column is not None:
            types[take[-1]] = pa.string()
        hasher = _Hasher(src)
        hasher.start()
        batches: _Prefetch | None = None
        try:
            try:
                reader = pacsv.open_csv(
                    src.resolved,
                    read_options=pacsv.ReadOptions(column_names=names, skip_rows=1,
                                                   block_size=ARROW_BLOCK_BYTES, use_threads=True),
                    parse_options=pacsv.ParseOptions(delimiter=src.delimiter or ","),
                    convert_options=pacsv.ConvertOptions(
                        column_types=types, include_columns=take, null_values=_NA_VALUES,
                        strings_can_be_null=True, quoted_strings_can_be_null=True,
                        check_utf8=True))
            except (pa.ArrowException, OSError, ValueError) as err:
                raise FastPathDeclined(str(err)) from None
            row0 = 0
            chunk_rows = self.chunk_rows

            def convert(batch):  # one chunk at a time, when its turn comes
                for a in range(0, batch.num_rows, chunk_rows):
                    part = batch.slice(a, chunk_rows)
                    values = np.empty((part.num_rows, nvar))
                    for j in range(nvar):
                        col = part.column(j)
                        values[:, j] = col.to_numpy(zero_copy_only=False)
                        if col.null_count != int(np.isnan(values[:, j]).sum()):
                            raise FastPathDeclined("a numeric cell reads as NaN")
                    yield values, (part.column(nvar) if nvar < part.num_columns else None)

            # only parsing runs ahead (pyarrow's threads, a few batches queued); each batch is
            # converted to float chunks here when its turn comes, so memory stays bounded
            batches = _Prefetch(reader, (pa.ArrowException, OSError, ValueError), lambda b: b)
            batches.start()
            for batch in batches:
                for values, tcol in convert(batch):
                    m = values.shape[0]
                    rows = np.arange(row0 + 1, row0 + m + 1, dtype=np.int64)
                    row0 += m
                    check_finite(values, self.columns, rows, path=src.path)
                    times = None
                    if self.time_column is not None:
                        times = tcol.to_pandas()
                    yield RawChunk(values, times, False, rows)
            sha = hasher.result()
        finally:
            hasher.stop()
            if batches is not None:
                batches.stop()
        self.sha256 = sha
        self.rows_read = row0

    # -- parquet ----------------------------------------------------------------
    def _parquet_chunks(self) -> Iterator[RawChunk]:
        src = self.source
        pq = _pyarrow(src.path)
        names = [src.header[p] for p in self._positions]
        nvar = len(self.columns)
        try:
            pf = pq.ParquetFile(src.resolved)
            batches = pf.iter_batches(batch_size=self.chunk_rows, columns=list(dict.fromkeys(names)))
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
            values = numeric_block(frame.iloc[:, :nvar], self.columns, rows, path=src.path)
            times, typed = None, False
            if self.time_column is not None:
                t = frame.iloc[:, nvar]
                if pd.api.types.is_datetime64_any_dtype(t.dtype):
                    times, typed = t.to_numpy(), True
                    if getattr(t.dt, "tz", None) is not None:
                        times = t.dt.tz_convert("UTC").dt.tz_localize(None).to_numpy()
                    times = times.astype("datetime64[s]")
                else:
                    times = _time_text(t)
            yield RawChunk(values, times, typed, rows)
        self.sha256 = file_sha256(src.resolved)
        self.rows_read = row0


class _Prefetch(threading.Thread):
    """Read the next record batches in a thread while the caller works on the last one.

    pyarrow parses with the GIL released, so the parsing of block ``k + 1``
    overlaps the block statistics of block ``k``. At most :data:`_AHEAD`
    batches wait in the queue (memory stays bounded). A reader error is
    raised in the caller as :class:`FastPathDeclined`.
    """

    def __init__(self, reader, errors: tuple, convert: Callable) -> None:
        super().__init__(name="relspan-csv-reader", daemon=True)
        self._reader = reader
        self._convert = convert
        self._errors = errors
        self._queue: queue.Queue = queue.Queue(maxsize=_AHEAD)
        self._halt = threading.Event()

    def _put(self, item) -> bool:
        while not self._halt.is_set():
            try:
                self._queue.put(item, timeout=0.1)
                return True
            except queue.Full:
                continue
        return False

    def run(self) -> None:
        while not self._halt.is_set():
            try:
                batch = self._convert(self._reader.read_next_batch())
            except StopIteration:
                self._put(("end", None))
                return
            except FastPathDeclined as err:
                self._put(("error", str(err)))
                return
            except self._errors as err:
                self._put(("error", str(err)))
                return
            except BaseException as err:  # noqa: BLE001 - handed to the caller
                self._put(("error", f"{type(err).__name__}: {err}"))
                return
            if not self._put(("batch", batch)):
                return

    def __iter__(self):
        while True:
            kind, item = self._queue.get()
            if kind == "end":
                return
            if kind == "error":
                raise FastPathDeclined(item)
            yield item

    def stop(self) -> None:
        self._halt.set()


#: record batches parsed ahead of the one being reduced
_AHEAD = 3


class _Hasher(threading.Thread):
    """SHA-256 and UTF-8 check of a whole file, in a thread beside the CSV parser.

    ``hashlib`` and the file reads release the GIL on large buffers, so on a
    machine with a spare core this costs little wall time.
    """

    def __init__(self, src: TableSource) -> None:
        super().__init__(name="relspan-sha256", daemon=True)
        self._src = src
        self._halt = threading.Event()
        self._sha: str | None = None
        self._failed = False

    def run(self) -> None:
        try:
            with open(self._src.resolved, "rb") as fh:
                stream = _CheckedStream(fh, self._src.path)
                while not self._halt.is_set():
                    data = fh.read(1 << 20)
                    if not data:
                        stream._check(b"", True)
                        break
                    stream.sha.update(data)
                    if not data.isascii() or stream._dec.getstate()[0]:
                        stream._check(data, False)  # ASCII is UTF-8: only other bytes are decoded
                self._sha = stream.sha.hexdigest()
        except Exception:  # noqa: BLE001 - reported as a declined fast path, pandas re-reads
            self._failed = True

    def result(self) -> str:
        self.join()
        if self._failed or self._sha is None:
            raise FastPathDeclined("the file is not UTF-8 text or could not be hashed")
        return self._sha

    def stop(self) -> None:
        self._halt.set()


def _time_text(t: pd.Series) -> np.ndarray:
    """Time cells as text; whole-number floats (years stored as float) lose their '.0'."""
    if pd.api.types.is_float_dtype(t.dtype):
        arr = t.to_numpy(dtype=float, na_value=np.nan)
        whole = np.isfinite(arr) & (arr == np.round(arr))
        return np.array([None if np.isnan(v) else (str(int(v)) if w else repr(v))
                         for v, w in zip(arr, whole)], dtype=object)
    return t.astype(object).where(t.notna(), None).map(
        lambda v: v if v is None else str(v)).to_numpy(dtype=object)
