"""What a data file is, before any row is read: file checks, format, encoding, header lookup.

- :func:`check_file`: the file exists, is not a folder, can be opened, is not empty.
- :func:`detect_source`: what the file holds and how to read it, from the spec's
  keys (``format``, ``separator``, ``decimal``, ``encoding``, ``sheet``) and,
  where they say ``auto``, from the file's content: magic numbers first
  (Parquet, Excel, Stata, gzip, bzip2, xz, zip, whatever the file is called),
  then for text the byte-order mark or the pattern of NUL bytes (UTF-16),
  a ``sep=`` first line, the separator that splits every sampled line into the
  same number of fields, and the decimal mark the numbers use. What was
  detected is said in words (:attr:`TableSource.read_as`) in error messages and
  on the reproduce page.
- :func:`open_text`: the text of a file as a UTF-8 byte stream for a CSV
  reader, decompressed and transcoded on the fly (streaming; nothing is held
  but a buffer).
- :class:`CheckedStream`: a binary stream that checks the encoding, drops a
  leading BOM and hashes the bytes as a text reader pulls them.
- :func:`select_columns`: the header positions of the columns a spec asks for
  (a missing column names the nearest one; a repeated name is refused).
- :func:`file_sha256`: one streaming hash of a file (of its bytes as
  published: a compressed file is hashed compressed).
"""

from __future__ import annotations

import bz2
import codecs
import contextlib
import difflib
import gzip
import hashlib
import io
import lzma
import re
import zipfile
from dataclasses import dataclass
from pathlib import Path
from typing import Iterator, Sequence

from relspan.errors import DataError
from relspan.spec.schema import DATASET_FORMATS

__all__ = ["FORMATS", "FIX_UTF8", "TableSource", "CheckedStream", "check_file", "special_file",
           "detect_source", "open_text", "select_columns", "file_sha256", "SEPARATORS", "DECIMALS"]

#: values of ``datasets[i].format`` (the schema's list)
FORMATS = DATASET_FORMATS
#: separators ``separator: auto`` chooses among (the common ones; any single character may be set)
SEPARATORS = (",", ";", "\t", "|")
#: decimal marks
DECIMALS = (".", ",")

_BOM = codecs.BOM_UTF8
FIX_UTF8 = ("save the file as UTF-8 (most spreadsheet programs offer 'CSV UTF-8'), or set the "
            "dataset's encoding (e.g. encoding: cp1252 for Windows Western, latin-1 for ISO 8859-1).")

#: bytes sampled to detect the format, encoding, separator and decimal mark
SAMPLE_BYTES = 1 << 16

#: first bytes of container and compression formats: Parquet ("PAR1"), gzip (RFC 1952),
#: bzip2 ("BZh"), xz (its stream header), zip (PKZIP local file header), the OLE2 compound
#: file of legacy .xls workbooks, and Stata 117+ (an XML-like "<stata_dta>" tag)
_PARQUET = b"PAR1"
_COMPRESSIONS = ((b"\x1f\x8b", "gzip"), (b"BZh", "bz2"), (b"\xfd7zXZ\x00", "xz"),
                 (b"PK\x03\x04", "zip"))
_OLE2 = b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1"
_STATA_NEW = b"<stata_dta>"
#: Stata 104-116 files start with the format number, the byte order (1 or 2) and file type 1
_STATA_OLD_VERSIONS = range(104, 117)

_COMPRESSION_WORDS = {"gzip": "gzip-compressed", "bz2": "bzip2-compressed",
                      "xz": "xz-compressed", "zip": "zip-compressed"}
_SEP_WORDS = {",": "comma", ";": "semicolon", "\t": "tab", "|": "vertical bar", " ": "space"}


@dataclass(frozen=True, slots=True)
class TableSource:
    """An opened (not yet read) table: where it is, how it is read and its header.

    Attributes
    ----------
    path : str
        The file as written in the spec (used in every message).
    resolved : Path
        The file on disk.
    format : str
        ``"csv"``, ``"tsv"``, ``"parquet"``, ``"excel"`` or ``"stata"``
        (``"csv"`` also covers other separators, see ``delimiter``).
    delimiter : str or None
        Field separator of a text file.
    header : tuple of str
        Column names in file order.
    compression : str or None
        ``"gzip"``, ``"bz2"``, ``"xz"`` or ``"zip"`` for a compressed text file.
    encoding : str
        Python codec name of a text file (``"utf-8"`` also when a UTF-8 BOM is present).
    decimal : str
        Decimal mark of a text file, ``"."`` or ``","``.
    skip_lines : int
        Lines before the header (1 for an Excel-style ``sep=;`` first line).
    sheet : str, int or None
        The worksheet to read (Excel): a name, a 0-based position, or None for the first.
    read_as : str
        How the file is read, in words (e.g. ``gzip-compressed CSV text, UTF-16 with a
        byte-order mark, separator ';', decimal mark ','``), naming what was detected.
    plain : bool
        UTF-8 (or ASCII) CSV/TSV, uncompressed, decimal point, no ``sep=`` line: the
        text that both CSV engines read identically (the only input of the fast path).
    """

    path: str
    resolved: Path
    format: str
    delimiter: str | None
    header: tuple[str, ...]
    compression: str | None = None
    encoding: str = "utf-8"
    decimal: str = "."
    skip_lines: int = 0
    sheet: str | int | None = None
    read_as: str = ""
    plain: bool = True

    @property
    def read_as_note(self) -> str:
        """`` (read as ...)`` for a message, or "" for plain CSV/TSV."""
        return "" if self.plain or not self.read_as else f" (File read as {self.read_as}.)"

    def with_header(self, header: Sequence[str]) -> "TableSource":
        from dataclasses import replace

        return replace(self, header=tuple(header))


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
    """A binary file that hashes, checks its encoding and drops a leading BOM as it is read.

    UTF-8 text passes through unchanged (only checked); text in another
    ``encoding`` is decoded strictly and handed on as UTF-8, so the CSV reader
    always reads UTF-8. ``sha`` hashes the bytes read from ``fh`` (for a
    compressed file, the decompressed bytes: its checksum is taken from the file
    itself, see :func:`file_sha256`).
    """

    def __init__(self, fh, path: str, encoding: str = "utf-8") -> None:
        super().__init__()
        self._fh = fh
        self._path = path
        self.sha = hashlib.sha256()
        self._encoding = codecs.lookup(encoding).name
        self._utf8 = self._encoding == "utf-8"
        self._dec = codecs.getincrementaldecoder(self._encoding)("strict")
        self._offset = 0          # bytes of the file passed through so far
        self._newlines = 0        # newlines in those bytes (in the decoded text, when transcoding)
        self._pending = b""       # bytes handed on to the reader but not yet returned
        self._started = False
        self._eof = False

    def readable(self) -> bool:
        return True

    def _fail(self, data: bytes, start: int) -> None:
        pos = self._offset + max(start, 0)
        if self._utf8:
            line = self._newlines + data[:max(start, 0)].count(b"\n") + 1
        else:
            line = self._newlines + 1
        bad = data[start:start + 4] if start >= 0 else b""
        name = "UTF-8" if self._utf8 else _ENCODING_WORDS.get(self._encoding, self._encoding)
        raise DataError(
            f"is not {name} text: the byte at offset {pos} (line {line}) is "
            f"0x{bad[:1].hex() if bad else '??'}, which {name} does not allow there.",
            path=self._path, line=line, got=bad.hex(),
            fix=FIX_UTF8 if self._utf8 else "set the dataset's encoding to the one the file was "
                                            "saved in, or save the file as UTF-8.")

    def check(self, data: bytes, final: bool) -> str:
        """Decode ``data`` as the next bytes of the file; a bad byte is a located DataError."""
        held = len(self._dec.getstate()[0])
        try:
            return self._dec.decode(data, final)
        except UnicodeDecodeError as err:
            self._fail(data, err.start - held)
            raise  # pragma: no cover - _fail raises

    def _next(self, size: int) -> bytes | None:
        """The next bytes for the reader (UTF-8), or None at the end of the file."""
        data = self._fh.read(size)
        if not data:
            tail = self.check(b"", True)
            self._eof = True
            return None if self._utf8 or not tail else tail.encode("utf-8")
        self.sha.update(data)
        text = self.check(data, False)
        self._offset += len(data)
        if self._utf8:
            self._newlines += data.count(b"\n")
            if not self._started:
                self._started = True
                if data.startswith(_BOM):
                    data = data[len(_BOM):]
            return data
        self._newlines += text.count("\n")
        if not self._started and text:
            self._started = True
            if text.startswith("\ufeff"):
                text = text[1:]
        return text.encode("utf-8")

    def readinto(self, buf) -> int:
        while not self._pending:
            if self._eof:
                return 0
            data = self._next(max(len(buf), 1 << 16))
            if data is None:
                return 0
            self._pending = data
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
                        fix="point the dataset's source at a CSV, TSV, Parquet, Excel or Stata "
                            "file inside it.")
    try:
        with open(resolved, "rb"):
            pass
    except OSError as err:
        raise DataError(f"cannot be opened ({err.strerror or err}).", path=path,
                        fix="check that the file is readable by you.") from None
    if resolved.stat().st_size == 0:
        raise DataError("is empty (0 bytes).", path=path,
                        fix="write a header line and data rows into it, or point at the right file.")


# --------------------------------------------------------------------------- compression


def _zip_member(path: str, zf: zipfile.ZipFile) -> zipfile.ZipInfo:
    members = [m for m in zf.infolist() if not m.is_dir() and not m.filename.startswith("__MACOSX/")]
    if len(members) != 1:
        names = ", ".join(m.filename for m in members[:5]) or "none"
        raise DataError(f"is a zip archive with {len(members)} files ({names}); relspan reads a "
                        "zip archive that holds exactly one data file.", path=path,
                        fix="zip the data file alone, or unpack it and point the source at it.")
    return members[0]


@contextlib.contextmanager
def open_decompressed(path: str, resolved: Path, compression: str | None) -> Iterator:
    """The file's bytes, decompressed on the fly (a binary file object)."""
    try:
        if compression is None:
            with open(resolved, "rb") as fh:
                yield fh
        elif compression == "gzip":
            with gzip.open(resolved, "rb") as fh:
                yield _Decompressing(fh, path, compression)
        elif compression == "bz2":
            with bz2.open(resolved, "rb") as fh:
                yield _Decompressing(fh, path, compression)
        elif compression == "xz":
            with lzma.open(resolved, "rb") as fh:
                yield _Decompressing(fh, path, compression)
        elif compression == "zip":
            with zipfile.ZipFile(resolved) as zf:
                with zf.open(_zip_member(path, zf)) as fh:
                    yield _Decompressing(fh, path, compression)
        else:  # pragma: no cover - detect_source gives only the names above
            raise ValueError(compression)
    except zipfile.BadZipFile as err:
        raise DataError(f"is not a readable zip archive ({err}).", path=path,
                        fix="write the archive again, or unpack it.") from None


class _Decompressing(io.RawIOBase):
    """Turns a decompressor's errors (a truncated or damaged file) into a located DataError."""

    def __init__(self, fh, path: str, compression: str) -> None:
        super().__init__()
        self._fh, self._path, self._compression = fh, path, compression
        self._done = 0

    def readable(self) -> bool:
        return True

    def read(self, size: int = -1) -> bytes:
        try:
            data = self._fh.read(size)
        except (EOFError, OSError, lzma.LZMAError, zipfile.BadZipFile, ValueError) as err:
            raise DataError(
                f"is {_COMPRESSION_WORDS[self._compression]} but cannot be decompressed after "
                f"{self._done} bytes of text ({' '.join(str(err).split()) or type(err).__name__}): "
                "the file is damaged or was cut short.", path=self._path,
                fix="copy or download the file again.") from None
        self._done += len(data)
        return data

    def readinto(self, buf) -> int:
        data = self.read(len(buf))
        buf[:len(data)] = data
        return len(data)


# --------------------------------------------------------------------------- detection


_ENCODING_WORDS = {"utf-8": "UTF-8", "utf-16": "UTF-16", "utf-16-le": "UTF-16 (little-endian)",
                   "utf-16-be": "UTF-16 (big-endian)", "utf-32": "UTF-32",
                   "utf-32-le": "UTF-32 (little-endian)", "utf-32-be": "UTF-32 (big-endian)",
                   "latin-1": "Latin-1 (ISO 8859-1)", "iso8859-1": "Latin-1 (ISO 8859-1)",
                   "cp1252": "Windows-1252"}

#: byte-order marks, longest first (UTF-32's little-endian mark starts with UTF-16's)
_BOMS = ((codecs.BOM_UTF32_LE, "utf-32"), (codecs.BOM_UTF32_BE, "utf-32"),
         (codecs.BOM_UTF8, "utf-8"), (codecs.BOM_UTF16_LE, "utf-16"), (codecs.BOM_UTF16_BE, "utf-16"))

_SEP_LINE = re.compile(r'^"?sep=(.)"?\s*$', re.IGNORECASE)
_DECIMAL_COMMA = re.compile(r"^[+-]?\d+,\d+(?:[eE][+-]?\d+)?$")
_DECIMAL_POINT = re.compile(r"^[+-]?\d*\.\d+(?:[eE][+-]?\d+)?$")


def _magic(head: bytes) -> str | None:
    """What the first bytes say the file is: a container or compression format, or None."""
    if head.startswith(_PARQUET):
        return "parquet"
    if head.startswith(_OLE2):
        return "xls"
    if head.startswith(_STATA_NEW):
        return "stata"
    if len(head) >= 4 and head[0] in _STATA_OLD_VERSIONS and head[1] in (1, 2) and head[2] == 1 \
            and head[3] == 0:
        return "stata"
    for magic, name in _COMPRESSIONS:
        if head.startswith(magic):
            return name
    return None


def _is_workbook(resolved: Path) -> bool:
    try:
        with zipfile.ZipFile(resolved) as zf:
            names = set(zf.namelist())
    except (zipfile.BadZipFile, OSError):
        return False
    return "xl/workbook.xml" in names or any(n.startswith("xl/") for n in names)


def _sniff_encoding(sample: bytes) -> tuple[str, bool, str]:
    """``(codec, bom, how)`` for a text sample: BOM, then NUL pattern (UTF-16), else UTF-8."""
    for bom, name in _BOMS:
        if sample.startswith(bom):
            return name, True, "byte-order mark"
    probe = sample[:4096]
    if len(probe) >= 4:
        even = probe[0::2].count(0)
        odd = probe[1::2].count(0)
        half = len(probe) // 2
        if odd >= 0.4 * half and even == 0:
            return "utf-16-le", False, "NUL bytes between the characters"
        if even >= 0.4 * half and odd == 0:
            return "utf-16-be", False, "NUL bytes between the characters"
    return "utf-8", False, ""


def _split_fields(line: str, sep: str) -> list[str]:
    """Fields of one line (double quotes respected; good enough for a sample)."""
    out, cur, quoted = [], [], False
    for ch in line:
        if ch == '"':
            quoted = not quoted
        elif ch == sep and not quoted:
            out.append("".join(cur))
            cur = []
        else:
            cur.append(ch)
    out.append("".join(cur))
    return out


def _sniff_separator(lines: Sequence[str], fallback: str) -> str:
    """The candidate that splits every sampled line into the same number (> 1) of fields."""
    best, best_fields = None, 1
    for sep in SEPARATORS:
        counts = {len(_split_fields(line, sep)) for line in lines}
        if len(counts) == 1:
            n = counts.pop()
            if n > best_fields:
                best, best_fields = sep, n
    if best is not None:
        return best
    # ragged sample: the separator most frequent on the header line (errors then say which line)
    first = lines[0] if lines else ""
    counts = {sep: len(_split_fields(first, sep)) - 1 for sep in SEPARATORS}
    top = max(counts, key=lambda k: counts[k])
    return top if counts[top] > 0 else fallback


def _sniff_decimal(lines: Sequence[str], sep: str) -> str:
    """``","`` when the sampled numbers use decimal commas and none a decimal point."""
    if sep == ",":
        return "."
    comma = point = 0
    for line in lines[1:]:
        for cell in _split_fields(line, sep):
            cell = cell.strip()
            if _DECIMAL_COMMA.match(cell):
                comma += 1
            elif _DECIMAL_POINT.match(cell):
                point += 1
    return "," if comma and not point else "."


def _sep_word(sep: str) -> str:
    return f"{_SEP_WORDS[sep]} ({sep!r})" if sep in _SEP_WORDS else repr(sep)


def detect_source(path: str, resolved: Path, fmt: str = "auto", *, separator: str = "auto",
                  decimal: str = "auto", encoding: str = "auto",
                  sheet: str | int | None = None) -> TableSource:
    """How to read a data file: the spec's keys, and the file's content where they say ``auto``.

    Returns a :class:`TableSource` without a header (the engine reads it).

    Raises
    ------
    DataError
        An unknown format, separator, decimal mark or encoding; a legacy
        ``.xls`` workbook; a zip archive that does not hold exactly one file.
    """
    if fmt not in FORMATS:
        raise DataError(f"format {fmt!r} is not one of {', '.join(FORMATS)}.", path=path,
                        key="format", got=fmt, fix=f"set format to one of {', '.join(FORMATS)}.")
    with open(resolved, "rb") as fh:
        head = fh.read(SAMPLE_BYTES)
    magic = _magic(head)
    ext = resolved.suffix.lower()
    said: list[str] = []      # what was detected rather than set, for the words

    if magic == "xls" and fmt in ("auto", "excel"):
        raise DataError("is a legacy Excel workbook (.xls, the binary format of Excel 97-2003); "
                        "relspan reads .xlsx workbooks.", path=path, got="xls",
                        fix="open it in a spreadsheet program and save it as .xlsx, or as CSV UTF-8.")
    kind = fmt
    compression = None
    if fmt == "auto":
        if magic == "parquet":
            kind = "parquet"
        elif magic == "stata":
            kind = "stata"
        elif magic == "zip" and _is_workbook(resolved):
            kind = "excel"
        elif magic in ("gzip", "bz2", "xz", "zip"):
            kind, compression = "text", magic
        elif ext in (".parquet", ".pq"):
            kind = "parquet"
        elif ext in (".xlsx", ".xlsm"):
            kind = "excel"
        elif ext == ".dta":
            kind = "stata"
        else:
            kind = "text"
        expected = {".parquet": "parquet", ".pq": "parquet", ".xlsx": "excel", ".xlsm": "excel",
                    ".dta": "stata", ".csv": "text", ".tsv": "text", ".tab": "text",
                    ".txt": "text"}.get(ext)
        if magic is not None and expected is not None and expected != kind:
            said.append("format")
    elif fmt in ("csv", "tsv"):
        kind = "text"
        if magic in ("gzip", "bz2", "xz") or (magic == "zip" and not _is_workbook(resolved)):
            compression = magic
            said.append("compression")
    if kind in ("parquet", "excel", "stata"):
        words = {"parquet": "Parquet", "excel": "an Excel workbook",
                 "stata": _stata_words(head)}[kind]
        read_as = words + (" (detected from its first bytes)" if said else "")
        return TableSource(path, resolved, kind, None, (), sheet=sheet,
                           read_as=read_as, plain=kind == "parquet" and not said)
    if compression:
        if fmt == "auto":
            said.append("compression")
        with open_decompressed(path, resolved, compression) as fh:
            sample = fh.read(SAMPLE_BYTES)
    else:
        sample = head

    # encoding
    bom = False
    if encoding == "auto":
        enc, bom, how = _sniff_encoding(sample)
        if enc != "utf-8" or bom:
            said.append("encoding")
    else:
        try:
            enc = codecs.lookup(encoding).name
        except LookupError:
            raise DataError(f"encoding {encoding!r} is not an encoding Python knows.", path=path,
                            key="encoding", got=encoding,
                            fix="use a codec name such as utf-8, utf-16, cp1252 or latin-1, or auto."
                            ) from None
        bom = any(sample.startswith(b) for b, n in _BOMS if codecs.lookup(n).name == enc
                  or (n == "utf-16" and enc.startswith("utf-16")))
    text = sample.decode(enc, errors="replace")
    if len(sample) == SAMPLE_BYTES:  # the last line may be cut: leave it out
        text = text.rsplit("\n", 1)[0]
    text = text.lstrip("\ufeff")
    lines = [ln.rstrip("\r") for ln in text.split("\n")]
    lines = [ln for ln in lines if ln.strip()]

    # an Excel-style "sep=;" first line names the separator
    skip = 0
    sep_from_line = None
    if lines and _SEP_LINE.match(lines[0]):
        sep_from_line = _SEP_LINE.match(lines[0]).group(1)
        skip = 1
        lines = lines[1:]
    sample_lines = lines[:50]
    if separator != "auto":
        sep = "\t" if separator in ("\\t", "tab") else separator
        if len(sep) != 1 or sep in ('"', "\n", "\r"):
            raise DataError(f"separator {separator!r} is not a single character other than a "
                            "quote or a line break.", path=path, key="separator", got=separator,
                            fix="set separator to one character such as ',', ';', '\\t' or '|', "
                                "or to auto.")
    elif sep_from_line is not None:
        sep = sep_from_line
        said.append("separator (from a 'sep=' first line)")
    elif fmt == "tsv":
        sep = "\t"
    else:
        fallback = "\t" if ext in (".tsv", ".tab") else ","
        sep = _sniff_separator(sample_lines, fallback)
        if sep != ("\t" if ext in (".tsv", ".tab") else ","):
            said.append("separator")
    if decimal == "auto":
        dec = _sniff_decimal(sample_lines, sep)
        if dec != ".":
            said.append("decimal mark")
    elif decimal in DECIMALS:
        dec = decimal
    else:
        raise DataError(f"decimal {decimal!r} is not '.' or ','.", path=path, key="decimal",
                        got=decimal, fix="set decimal to '.', ',' or auto.")
    if dec == sep:
        raise DataError(f"the decimal mark and the separator are both {sep!r}.", path=path,
                        key="decimal", fix="set separator and decimal to different characters.")
    kind = "tsv" if sep == "\t" else "csv"
    parts = []
    name = "tab-separated text" if kind == "tsv" else "CSV text"
    parts.append(f"{_COMPRESSION_WORDS[compression]} {name}" if compression else name)
    enc_words = _ENCODING_WORDS.get(enc, enc)
    parts.append(f"{enc_words} with a byte-order mark" if bom else enc_words)
    parts.append(f"separator {_sep_word(sep)}" + (" from a 'sep=' first line" if skip else ""))
    parts.append(f"decimal mark {dec!r}")
    read_as = ", ".join(parts)
    if said:
        read_as += "; detected: " + ", ".join(s.split(" (")[0] for s in said)
    plain = compression is None and enc == "utf-8" and dec == "." and skip == 0
    return TableSource(path, resolved, kind, sep, (), compression=compression,
                       encoding=enc, decimal=dec, skip_lines=skip, read_as=read_as, plain=plain)


def _stata_words(head: bytes) -> str:
    m = re.search(rb"<release>(\d+)</release>", head[:200])
    if m:
        return f"a Stata .dta file (format {int(m.group(1))})"
    if head and head[0] in _STATA_OLD_VERSIONS:
        return f"a Stata .dta file (format {head[0]})"
    return "a Stata .dta file"


@contextlib.contextmanager
def open_text(src: TableSource) -> Iterator[CheckedStream]:
    """A text source as a :class:`CheckedStream` of UTF-8 bytes (decompressed, transcoded)."""
    with open_decompressed(src.path, src.resolved, src.compression) as fh:
        yield CheckedStream(fh, src.path, src.encoding)


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
