"""What a data file is, before any row is read: file checks, format, encoding, header lookup.

- :func:`check_file`: the file exists, is not a folder, can be opened, is not empty.
- :func:`detect_format`: CSV, TSV or Parquet, from ``datasets[i].format``, the
  extension, or the first bytes (Parquet's magic number, else the separator that
  occurs most on the first line).
- :class:`CheckedStream`: a binary stream that checks UTF-8, drops a leading BOM
  and hashes the bytes as a text reader pulls them.
- :func:`select_columns`: the header positions of the columns a spec asks for
  (a missing column names the nearest one; a repeated name is refused).
- :func:`file_sha256`: one streaming hash of a file.
"""

from __future__ import annotations

import codecs
import difflib
import hashlib
import io
from dataclasses import dataclass
from pathlib import Path
from typing import Sequence

from relspan.errors import DataError
from relspan.spec.schema import DATASET_FORMATS

__all__ = ["FORMATS", "FIX_UTF8", "TableSource", "CheckedStream", "check_file", "special_file",
           "detect_format",
           "select_columns", "file_sha256"]

#: values of ``datasets[i].format`` (the schema's list)
FORMATS = DATASET_FORMATS

_BOM = codecs.BOM_UTF8
FIX_UTF8 = "save the file as UTF-8 (most spreadsheet programs offer 'CSV UTF-8')."


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


class CheckedStream(io.RawIOBase):
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
            path=self._path, line=line, got=bad.hex(), fix=FIX_UTF8)

    def check(self, data: bytes, final: bool) -> None:
        """Decode ``data`` as the next bytes of the file; a bad byte is a located DataError."""
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
                self.check(b"", True)
                self._eof = True
                return 0
            self.sha.update(data)
            self.check(data, False)
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

    @property
    def mid_character(self) -> bool:
        """Whether the bytes checked so far end inside a multi-byte character."""
        return bool(self._dec.getstate()[0])

    def drain(self) -> None:
        """Hash (and check) whatever the reader has not asked for yet."""
        self._pending = b""
        while not self._eof:
            data = self._fh.read(1 << 20)
            if not data:
                self.check(b"", True)
                self._eof = True
                break
            self.sha.update(data)
            self.check(data, False)
            self._offset += len(data)
            self._newlines += data.count(b"\n")


#: folders of the operating system's own files: their sizes are not their contents and some
#: never end (/dev/zero), so nothing under them is read as data or as a spec
SYSTEM_FOLDERS = ("/proc", "/sys", "/dev")


def special_file(resolved: Path) -> str | None:
    """Why ``resolved`` is not an ordinary file to read (None when it is one).

    Checked with ``stat`` before the file is opened: opening a named pipe
    blocks until someone writes to it, and a device like /dev/zero never ends.
    """
    import os
    import stat as st

    real = os.path.realpath(resolved)
    for folder in SYSTEM_FOLDERS:
        if real == folder or real.startswith(folder + "/"):
            return f"is a special file of the operating system (under {folder}), not a data file"
    try:
        mode = os.stat(real).st_mode
    except OSError:
        return None  # reported by the caller's own open
    if st.S_ISREG(mode) or st.S_ISDIR(mode):
        return None
    kind = ("a named pipe (FIFO)" if st.S_ISFIFO(mode) else "a device" if st.S_ISCHR(mode) or
            st.S_ISBLK(mode) else "a socket" if st.S_ISSOCK(mode) else "not an ordinary file")
    return f"is {kind}, not an ordinary file; reading it could wait forever"


def check_file(path: str, resolved: Path) -> None:
    why = special_file(resolved)
    if why is not None:
        raise DataError(f"{why}.", path=path,
                        fix="save the data to an ordinary file and point the dataset's source at it.")
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


def detect_format(path: str, resolved: Path, fmt: str) -> tuple[str, str | None]:
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


def select_columns(src: TableSource, columns: Sequence[str], keys: Sequence[str]) -> list[int]:
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
