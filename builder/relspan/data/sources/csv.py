"""CSV and TSV readers: pyarrow's streaming reader, and pandas' C reader as the reference.

Two engines read the same cells (see :data:`ENGINES`):

- :func:`pandas_chunks`, the reference: pandas' C reader on a
  :class:`~relspan.data.sources.detect.CheckedStream`, so the file is hashed and
  checked as UTF-8 in the same pass. Every field is tokenised, so a row with
  more fields than the header is caught.
- :func:`arrow_chunks`, the fast path: pyarrow's multi-threaded streaming
  reader, fed through :class:`HashingInput`, which hashes and checks as UTF-8
  the same bytes the parser reads (one read of the file). Whatever it may read differently from pandas raises
  :class:`FastPathDeclined` before a result exists, and the caller reads the
  file again with pandas.

Each engine is a generator of the :class:`~relspan.data.sources.reader.TableReader`
it serves: it yields :class:`~relspan.data.sources.cells.RawChunk` objects and,
when the file is read to the end, sets the reader's ``sha256`` and ``rows_read``.
"""

from __future__ import annotations

import csv
import io
import queue
import re
import threading
import weakref
from pathlib import Path
from typing import TYPE_CHECKING, Callable, Iterator

import numpy as np
import pandas as pd

from relspan.data.sources.cells import RawChunk, check_finite, numeric_block
from relspan.data.sources.detect import CheckedStream, TableSource, file_sha256, open_text
from relspan.errors import DataError

if TYPE_CHECKING:
    from relspan.data.sources.reader import TableReader

__all__ = ["ENGINES", "FastPathDeclined", "HashingInput", "arrow_available", "read_header", "text_head",
           "pandas_chunks", "arrow_chunks", "parser_error"]

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


def read_header(src: TableSource) -> tuple[str, ...]:
    """Column names of a CSV/TSV source (decompressed and transcoded as detected)."""
    path = src.path
    with open_text(src) as stream:
        try:
            head = pd.read_csv(io.BufferedReader(stream), sep=src.delimiter, header=None, nrows=1,
                               dtype=str, keep_default_na=False, na_filter=False,
                               skiprows=src.skip_lines, skip_blank_lines=True, engine="c",
                               encoding="utf-8")
        except pd.errors.EmptyDataError:
            raise DataError("has no header line (it holds only blank lines).", path=path,
                            fix="write the column names on the first line.") from None
        except (pd.errors.ParserError, ValueError, OverflowError, csv.Error) as err:
            raise parser_error(path, err) from None
    if head.shape[0] == 0:
        raise DataError("has no header line.", path=path,
                        fix="write the column names on the first line.")
    return tuple(str(v) for v in head.iloc[0].tolist())


def parser_error(path: str, err: Exception) -> DataError:
    text = " ".join(str(err).split())
    line = None
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


# --------------------------------------------------------------------------- pandas


def check_field_counts(src: TableSource) -> tuple[bool, int]:
    """Refuse rows whose fields do not line up with the header, naming the first one.

    pandas' C reader pads a short row with missing cells at its end and, when
    every row has one field more than the header, takes the first field as
    the row index (every column then shifts by one); neither can be seen after
    the read. This pass counts the fields of every row with the standard
    library's ``csv`` module (quotes and embedded newlines understood):

    * a row with exactly one extra field that is empty (a separator at the end
      of the line) is read as if the separator were not there;
    * a row with fewer fields than the header is refused (a value left out
      shifts the values after it into the wrong columns), unless the header's
      only surplus is an unnamed empty last column (a separator at the end of
      the header line);
    * any other extra field is refused.

    Only the pandas reader needs it: pyarrow's reader refuses both shapes
    itself and hands such files to pandas. Returns whether some row ends with
    a separator (the reader then makes room for one empty field more) and the
    number of lines up to the end of the header.
    """
    trailing, header_lines = False, 1
    width = len(src.header)
    header_trailing = width > 1 and (src.header[-1].strip() == "" or src.header[-1].startswith("Unnamed: "))
    # bytes that are not UTF-8 are located by the pandas pass (CheckedStream); here they only
    # need to be counted past
    with open_text(src) as stream:
        fh = io.TextIOWrapper(io.BufferedReader(stream, buffer_size=1 << 16), encoding="utf-8-sig",
                              errors="replace", newline="")
        for _ in range(src.skip_lines):  # e.g. a `sep=` line before the header
            fh.readline()
        reader = csv.reader(fh, delimiter=src.delimiter or ",")
        try:
            for row in reader:  # the header: the first line that is not blank
                if "".join(row).strip():
                    break
            header_lines = reader.line_num + src.skip_lines
            for row in reader:
                k = len(row)
                if k == width or (k <= 1 and not "".join(row).strip()):
                    continue
                if k == width + 1 and row[-1] == "":
                    trailing = True
                    continue
                if k == width - 1 and header_trailing:
                    continue
                line = reader.line_num
                if k < width:
                    raise DataError(
                        f"line {line} has {k} fields but the header has {width}: a value is left "
                        "out, so the values after it would land in the wrong columns.",
                        path=src.path, line=line, expected=str(width), got=str(k),
                        fix="add the missing value on that line (leave the cell empty between two "
                            "separators if it is unknown).")
                raise DataError(f"line {line} has {k} fields but the header has {width}.",
                                path=src.path, line=line, expected=str(width), got=str(k),
                                fix="remove the extra separators on that line, or quote fields "
                                    "that contain the separator.")
        except csv.Error:
            return False, header_lines  # NUL bytes, an open quote: pandas' reader names the problem
    return trailing, header_lines


def pandas_chunks(table: TableReader) -> Iterator[RawChunk]:
    """pandas' C reader, the reference: hashes and checks UTF-8 in the same pass."""
    src = table.source
    take = list(table.positions)
    nvar = len(table.columns)
    # Every field is tokenised (so a row with more fields than the header is an
    # error, which pandas skips silently when usecols is given); only the selected
    # columns are converted, checked and kept.
    dtype = {table.positions[-1]: str} if table.time_column is not None else None
    trailing, header_lines = check_field_counts(src)
    with open_text(src) as stream:
        # index_col=False: never take the first field as the row index (rows ending with a
        # separator would otherwise shift every column by one); with such rows, positional
        # names leave room for their empty last field
        shape = (dict(header=None, skiprows=header_lines, names=list(range(len(src.header) + 1)))
                 if trailing else dict(header=0, skiprows=src.skip_lines))
        reader_args = dict(sep=src.delimiter, **shape, dtype=dtype, decimal=src.decimal, index_col=False,
                           chunksize=table.chunk_rows, skip_blank_lines=True, engine="c",
                           encoding="utf-8", low_memory=False)
        try:
            reader = pd.read_csv(io.BufferedReader(stream, buffer_size=1 << 16),
                                 **reader_args)
        except pd.errors.EmptyDataError:
            raise DataError("has no header line.", path=src.path,
                            fix="write the column names on the first line.") from None
        except (pd.errors.ParserError, ValueError, OverflowError, csv.Error) as err:
            raise parser_error(src.path, err) from None
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
                    raise parser_error(src.path, err) from None
                m = frame.shape[0]
                rows = np.arange(row0 + 1, row0 + m + 1, dtype=np.int64)
                row0 += m
                sub = frame.iloc[:, take]
                values = numeric_block(sub.iloc[:, :nvar], table.columns, rows, path=src.path,
                                       decimal=src.decimal)
                times = None
                if table.time_column is not None:
                    times = sub.iloc[:, nvar].reset_index(drop=True)
                yield RawChunk(values, times, False, rows)
        stream.drain()
        # the checksum is of the file as published: a compressed file is hashed compressed
        table.sha256 = stream.sha.hexdigest() if src.compression is None else \
            file_sha256(src.resolved)
        table.rows_read = row0


# --------------------------------------------------------------------------- pyarrow


def arrow_chunks(table: TableReader) -> Iterator[RawChunk]:
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
    too) are taken from the very bytes the parser reads (:class:`HashingInput`):
    the file is read once.
    """
    import pyarrow as pa  # noqa: PLC0415 (optional dependency)
    import pyarrow.csv as pacsv  # noqa: PLC0415

    src = table.source
    nvar = len(table.columns)
    names = [f"c{i}" for i in range(len(src.header))]  # positional: header names may repeat
    take = [names[p] for p in table.positions]
    types = {names[p]: pa.float64() for p in table.positions[:nvar]}
    if table.time_column is not None:
        types[take[-1]] = pa.string()
    batches: _Prefetch | None = None
    reader = None
    try:
        source = HashingInput(src)
    except (pa.ArrowException, OSError) as err:
        raise FastPathDeclined(str(err)) from None
    loans = _Loans()
    try:
        try:
            reader = pacsv.open_csv(
                pa.PythonFile(loans.lend(_Handle(source, loans)), mode="r"),
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
        chunk_rows = table.chunk_rows

        def convert(batch):  # one chunk at a time, when its turn comes
            for a in range(0, batch.num_rows, chunk_rows):
                part = batch.slice(a, chunk_rows)
                values = np.empty((part.num_rows, nvar))
                nulls = np.empty(nvar, np.int64)
                for j in range(nvar):
                    col = part.column(j)
                    values[:, j] = col.to_numpy(zero_copy_only=False)
                    nulls[j] = col.null_count
                if not np.array_equal(np.isnan(values).sum(axis=0), nulls):
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
                check_finite(values, table.columns, rows, path=src.path)
                times = None
                if table.time_column is not None:
                    times = tcol.to_pandas()
                yield RawChunk(values, times, False, rows)
        sha = source.sha256()
    finally:
        if batches is not None:
            batches.stop()
            batches.join()
            batches.drop()
        reader = None  # noqa: F841 - the last reference on this side
        source.close()  # from here every read is the end, so pyarrow's read-ahead finishes at once
        loans.wait()
    table.sha256 = sha
    table.rows_read = row0


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

    def drop(self) -> None:
        """Let go of the reader (after :meth:`join`)."""
        self._reader = None


#: record batches parsed ahead of the one being reduced
_AHEAD = 3


class _Loans:
    """What pyarrow's reader holds of ours, and a wait until it has let go of all of it.

    pyarrow's streaming reader reads ahead on its own I/O threads, which call
    back into Python: each read, and the release of each object it got from
    Python (the file object, and every block of bytes, which it keeps while the
    parser works on it), under the interpreter lock. When the parser stops early
    (a cell it cannot read, so the slower reader takes over) those threads may
    still be at it; if the process ends meanwhile, a thread that asks for the
    lock during the interpreter's shutdown is torn down under C++ and the
    process aborts ("terminate called without an active exception", exit -6:
    seen in two CI runs; 26 of 60 runs of a bare pyarrow reader stopped at a
    ragged row on this machine; 3 of 40 runs when only the file object was
    awaited). Every object handed to pyarrow is counted here and uncounted when
    it is freed, which is the last call pyarrow makes into Python for it;
    :meth:`wait` returns once none is left.
    """

    #: seconds to wait for pyarrow's threads at most; past it the caller goes on
    LIMIT = 30.0

    def __init__(self) -> None:
        self._lock = threading.RLock()  # RLock: a release may run inside lend() on the same thread
        self._refs: dict = {}  # id -> weak reference (a Buffer is not hashable)
        self._none = threading.Event()
        self._none.set()

    def lend(self, obj):
        """Count ``obj`` (about to be handed to pyarrow) until it is freed; return it."""
        with self._lock:
            ref = weakref.ref(obj, self._returned)
            self._refs[id(ref)] = ref
            self._none.clear()
        return obj

    def _returned(self, ref) -> None:
        with self._lock:
            self._refs.pop(id(ref), None)
            if not self._refs:
                self._none.set()

    def wait(self, limit: float | None = None) -> bool:
        """Wait until pyarrow freed everything lent; whether it did within ``limit`` seconds."""
        return self._none.wait(self.LIMIT if limit is None else limit)


class _Handle:
    """The file-like view of a :class:`HashingInput` that pyarrow holds (reads only).

    Every block it returns is counted in ``loans`` (see :class:`_Loans`).
    """

    def __init__(self, source: "HashingInput", loans: _Loans) -> None:
        self._source = source
        self._loans = loans

    def read_buffer(self, nbytes: int):
        return self._loans.lend(self._source.read_buffer(nbytes))

    def read(self, nbytes: int = -1) -> bytes:
        return self._source.read(nbytes)

    @property
    def closed(self) -> bool:
        return self._source.closed

    def readable(self) -> bool:
        return True

    def seekable(self) -> bool:
        return False

    def close(self) -> None:
        self._source.close()


class HashingInput:
    """The file as pyarrow's streaming CSV reader reads it, hashed and checked on the way.

    pyarrow pulls the file through :meth:`read_buffer` (``pyarrow.PythonFile``
    calls it when it exists), one block at a time; each block is read by
    pyarrow's own file reader into an Arrow buffer (outside Python's heap),
    added to the SHA-256 and, unless it is ASCII, checked as UTF-8, and then
    handed to the parser unchanged. So the file is read once: the bytes that
    are parsed are the bytes that are hashed.

    Attributes
    ----------
    bytes_read : int
        Bytes handed to the parser so far.
    opens : int
        Times the file was opened (1).
    """

    def __init__(self, src: TableSource) -> None:
        import pyarrow as pa  # noqa: PLC0415 (optional dependency)

        self._file = pa.OSFile(str(src.resolved), "rb")
        self.opens = 1
        self._stream = CheckedStream(None, src.path)
        self.bytes_read = 0
        self._ended = False
        self.closed = False
        self._lock = threading.Lock()

    def read_buffer(self, nbytes: int):
        """The next ``nbytes`` bytes (fewer at the end) as a ``pyarrow.Buffer``."""
        with self._lock:  # close() never closes the file under a read
            return self._read_buffer(nbytes)

    def _read_buffer(self, nbytes: int):
        if self.closed:  # pyarrow's read-ahead after the reader gave up: the end, at once
            import pyarrow as pa  # noqa: PLC0415 (optional dependency)

            return pa.py_buffer(b"")
        buf = self._file.read_buffer(nbytes)
        size = buf.size
        if size == 0:
            if not self._ended:
                self._ended = True
                try:
                    self._stream.check(b"", True)  # a character cut off at the end of the file
                except DataError:
                    raise OSError("the file is not UTF-8 text") from None
            return buf
        self._stream.sha.update(buf)
        self.bytes_read += size
        if self._stream.mid_character or int(np.frombuffer(buf, np.uint8).max()) >= 0x80:
            try:  # ASCII is UTF-8: only other bytes are decoded
                self._stream.check(buf.to_pybytes(), False)
            except DataError:  # the reference reader re-reads the file and locates the byte
                raise OSError("the file is not UTF-8 text") from None
        return buf

    def read(self, nbytes: int = -1) -> bytes:
        return self.read_buffer(nbytes if nbytes is not None and nbytes >= 0 else 1 << 62).to_pybytes()

    def readable(self) -> bool:
        return True

    def seekable(self) -> bool:
        return False

    def close(self) -> None:
        if not self.closed:
            self.closed = True
            with self._lock:
                self._file.close()

    def sha256(self) -> str:
        """The SHA-256 of the whole file; only once it was read to the end."""
        if not self._ended:
            raise FastPathDeclined("the file was not read to its end")
        return self._stream.sha.hexdigest()


# --------------------------------------------------------------------------- head (relspan new)


def text_head(src: TableSource, nrows: int) -> tuple[pd.DataFrame, int]:
    """The first ``nrows`` rows (types inferred by pandas) and the number of data rows.

    The rows are counted in one streaming pass over the first column; only the
    head is kept in memory.
    """
    trailing, header_lines = check_field_counts(src)  # short rows refused, naming the line
    names = list(src.header)
    shape = (dict(header=None, skiprows=header_lines, names=names + ["\x00extra"]) if trailing
             else dict(skiprows=src.skip_lines))
    args = dict(sep=src.delimiter, decimal=src.decimal, index_col=False, skip_blank_lines=True,
                engine="c", encoding="utf-8", **shape)
    try:
        with open_text(src) as stream:
            head = pd.read_csv(io.BufferedReader(stream), nrows=nrows, **args)
        head = head.loc[:, [c for c in head.columns if c != "\x00extra"]]
        n = 0
        with open_text(src) as stream:
            with pd.read_csv(io.BufferedReader(stream), usecols=[0], dtype=str,
                             keep_default_na=False, chunksize=100_000, **args) as reader:
                for chunk in reader:
                    n += len(chunk)
    except pd.errors.EmptyDataError:
        raise DataError("has no header line.", path=src.path,
                        fix="write the column names on the first line.") from None
    except (pd.errors.ParserError, ValueError, OverflowError, csv.Error) as err:
        raise parser_error(src.path, err) from None
    return head, n
