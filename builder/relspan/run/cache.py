"""A content-keyed cache of task results, so an unchanged rebuild is near-instant.

A task's key is the SHA-256 of a canonical JSON text of everything its result
depends on (the spec section as a dict, the input file's SHA-256, the relspan
version, the task name, ...). Equal inputs give equal keys in any process and
under any hash seed: dicts are sorted by key, floats written as their shortest
round-trip text, tuples and lists both become JSON arrays, paths their POSIX
text, sets are sorted, numpy values become Python values (arrays: dtype, shape
and the SHA-256 of their bytes).

Entries are pickles (protocol 5) behind a small header holding the key and the
SHA-256 of the pickle, written to a temporary file and moved into place with
``os.replace``, so a reader never sees half an entry. An entry that is
missing, truncated, corrupt or cannot be unpickled is a miss, never an error.
"""

from __future__ import annotations

import dataclasses
import hashlib
import json
import math
import os
import pickle
import tempfile
import warnings
from enum import Enum
from pathlib import Path, PurePath
from threading import Lock
from typing import Any

import numpy as np

from ..errors import OutputError, RelspanWarning

__all__ = ["task_key", "canonical_json", "ResultCache", "CacheStats", "DEFAULT_CACHE_DIRNAME",
           "KEY_FORMAT"]

#: folder name the pipeline uses next to the spec unless told otherwise
DEFAULT_CACHE_DIRNAME = ".relspan-cache"

#: changes whenever the canonical form changes, so old keys can never collide with new ones
KEY_FORMAT = "relspan-task-key/1"

_MAGIC = b"RSPC\x01\n"
_TAG = "\x00"  # prefix of the keys that mark non-JSON values; user dict keys may not start with it
_README = """\
This folder is relspan's result cache.

Each file holds the result of one analysis task, named by a SHA-256 hash of
everything the result depends on (the spec section, the data file's SHA-256,
the relspan version). When an input changes, its key changes and the task runs
again; old entries are simply no longer used.

It is safe to delete this folder at any time: the next build recomputes what
it needs (and takes longer). Only trust a cache folder you created yourself:
the entries are Python pickles, which run code when they are read.
"""


def _normal(value: Any) -> Any:
    """Turn ``value`` into JSON-ready data with one spelling per value."""
    if value is None or isinstance(value, (bool, str)):
        return value
    if isinstance(value, np.generic):
        return _normal(value.item())
    if isinstance(value, int):
        return value
    if isinstance(value, float):
        if math.isnan(value):
            return {_TAG + "float": "nan"}
        if math.isinf(value):
            return {_TAG + "float": "inf" if value > 0 else "-inf"}
        if value == 0.0:
            value = 0.0  # -0.0 == 0.0
        return {_TAG + "float": repr(value)}
    if isinstance(value, Enum):
        return {_TAG + "enum": [type(value).__qualname__, _normal(value.value)]}
    if isinstance(value, PurePath):
        return {_TAG + "path": value.as_posix()}
    if isinstance(value, (bytes, bytearray, memoryview)):
        return {_TAG + "bytes": bytes(value).hex()}
    if isinstance(value, np.ndarray):
        a = np.ascontiguousarray(value)
        if a.dtype.byteorder == ">":
            a = a.astype(a.dtype.newbyteorder("<"))
        if a.dtype == object:
            return {_TAG + "objects": [list(a.shape), [_normal(v) for v in a.ravel().tolist()]]}
        return {_TAG + "array": [a.dtype.str, list(a.shape), hashlib.sha256(a.tobytes()).hexdigest()]}
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        fields = {f.name: _normal(getattr(value, f.name)) for f in dataclasses.fields(value)}
        return {_TAG + "dataclass": [type(value).__qualname__, fields]}
    if isinstance(value, dict):
        if all(isinstance(k, str) for k in value):
            for k in value:
                if k.startswith(_TAG):
                    raise ValueError(f"task_key: dict key {k!r} may not start with a NUL character")
            return {k: _normal(v) for k, v in value.items()}
        pairs = [[_normal(k), _normal(v)] for k, v in value.items()]
        pairs.sort(key=lambda kv: _dumps(kv[0]))
        return {_TAG + "dict": pairs}
    if isinstance(value, (list, tuple)):
        return [_normal(v) for v in value]
    if isinstance(value, (set, frozenset)):
        return {_TAG + "set": sorted((_normal(v) for v in value), key=_dumps)}
    raise TypeError(
        f"task_key cannot use a value of type {type(value).__name__}: pass plain data "
        "(dict, list, tuple, str, int, float, bool, None, Path, numpy arrays or dataclasses)")


def _dumps(data: Any) -> str:
    return json.dumps(data, sort_keys=True, separators=(",", ":"), ensure_ascii=False,
                      allow_nan=False)


def canonical_json(**parts: Any) -> str:
    """The canonical JSON text :func:`task_key` hashes (useful for debugging keys)."""
    return _dumps({"format": KEY_FORMAT, "parts": _normal(parts)})


def task_key(**parts: Any) -> str:
    """SHA-256 (64 hex digits) of the canonical JSON of ``parts``.

    Parameters
    ----------
    **parts
        Everything the task's result depends on, e.g. ``spec=<section as dict>,
        data_sha256=..., version=relspan.__version__, task="frisch"``.

    Notes
    -----
    ``1`` and ``1.0`` give different keys (a task may treat them differently;
    a needless miss is harmless, a false hit is not); ``0.0`` and ``-0.0``
    give the same key, as do a tuple and a list with equal items.

    Examples
    --------
    >>> task_key(task="t", width=40) == task_key(width=40, task="t")
    True
    """
    return hashlib.sha256(canonical_json(**parts).encode("utf-8")).hexdigest()


@dataclasses.dataclass(frozen=True, slots=True)
class CacheStats:
    """Counts of one cache's use since it was opened.

    ``hits`` and ``misses`` count :meth:`ResultCache.get` calls; ``corrupt``
    the misses caused by an unreadable entry; ``writes`` the entries stored;
    ``write_errors`` the entries that could not be stored.
    """

    hits: int = 0
    misses: int = 0
    corrupt: int = 0
    writes: int = 0
    write_errors: int = 0

    @property
    def lookups(self) -> int:
        return self.hits + self.misses


def _check_key(key: str) -> str:
    if not (isinstance(key, str) and len(key) == 64 and all(c in "0123456789abcdef" for c in key)):
        raise ValueError(f"cache keys are 64 lower-case hex digits from task_key(); got {key!r}")
    return key


class ResultCache:
    """Task results on disk, keyed by :func:`task_key`.

    Parameters
    ----------
    folder : Path or None
        Where entries live (created, with a README.txt, if missing).
        ``None`` is the disabled cache (``--no-cache``): every lookup misses
        and nothing is written.

    Raises
    ------
    OutputError
        The folder cannot be created or is not a folder.
    """

    def __init__(self, folder: Path | str | None) -> None:
        self._lock = Lock()
        self._stats = CacheStats()
        self._warned = False
        self._folder = None if folder is None else Path(folder)
        if self._folder is not None:
            self._prepare()

    def _prepare(self) -> None:
        folder = self._folder
        assert folder is not None
        if folder.exists() and not folder.is_dir():
            raise OutputError(
                f"the cache folder {folder} exists but is not a folder.", path=str(folder),
                fix="remove or rename that file, point the cache elsewhere, or use --no-cache.")
        try:
            folder.mkdir(parents=True, exist_ok=True)
            readme = folder / "README.txt"
            if not readme.exists():
                self._write_atomic(readme, _README.encode("utf-8"))
        except OSError as exc:
            raise OutputError(
                f"cannot create the cache folder {folder} ({exc.strerror or exc}).",
                path=str(folder),
                fix="make the folder's parent writable, point the cache elsewhere, or use --no-cache.",
            ) from None

    @property
    def folder(self) -> Path | None:
        return self._folder

    @property
    def enabled(self) -> bool:
        return self._folder is not None

    @property
    def stats(self) -> CacheStats:
        with self._lock:
            return self._stats

    @property
    def hits(self) -> int:
        return self.stats.hits

    @property
    def misses(self) -> int:
        return self.stats.misses

    def _count(self, **inc: int) -> None:
        with self._lock:
            self._stats = dataclasses.replace(
                self._stats, **{k: getattr(self._stats, k) + v for k, v in inc.items()})

    def path_for(self, key: str) -> Path | None:
        """File of entry ``key`` (``None`` for the disabled cache)."""
        _check_key(key)
        if self._folder is None:
            return None
        return self._folder / key[:2] / f"{key}.pkl"

    def get(self, key: str, default: Any = None) -> Any:
        """The stored value for ``key``, or ``default`` on a miss.

        Pass a sentinel as ``default`` when ``None`` is a valid result.
        """
        path = self.path_for(key)
        if path is None:
            self._count(misses=1)
            return default
        try:
            blob = path.read_bytes()
        except OSError:
            self._count(misses=1)
            return default
        value, ok = _decode(blob, key)
        if not ok:
            self._count(misses=1, corrupt=1)
            return default
        self._count(hits=1)
        return value

    def __contains__(self, key: str) -> bool:
        path = self.path_for(key)
        return path is not None and path.is_file()

    def put(self, key: str, value: Any) -> bool:
        """Store ``value`` under ``key``; returns whether it was stored.

        A value that cannot be pickled raises (a programming error); a disk
        that refuses the write (full, read-only) only warns once and counts a
        write error, since a build can go on without its cache.
        """
        path = self.path_for(key)
        if path is None:
            return False
        payload = pickle.dumps(value, protocol=5)
        blob = _MAGIC + key.encode("ascii") + hashlib.sha256(payload).digest() + payload
        try:
            path.parent.mkdir(exist_ok=True)
            self._write_atomic(path, blob)
        except OSError as exc:
            self._count(write_errors=1)
            with self._lock:
                first, self._warned = not self._warned, True
            if first:
                warnings.warn(RelspanWarning(
                    f"{self._folder}: could not store a result in the cache "
                    f"({exc.strerror or exc}); the build goes on, but the next one will "
                    "recompute it. Free disk space or use --no-cache."), stacklevel=2)
            return False
        self._count(writes=1)
        return True

    @staticmethod
    def _write_atomic(path: Path, data: bytes) -> None:
        fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=".tmp-", suffix=".part")
        try:
            with os.fdopen(fd, "wb") as fh:
                fh.write(data)
            os.replace(tmp, path)
        except BaseException:
            try:
                os.unlink(tmp)
            except OSError:
                pass
            raise


def _decode(blob: bytes, key: str) -> tuple[Any, bool]:
    head = len(_MAGIC) + 64 + 32
    if len(blob) < head or not blob.startswith(_MAGIC):
        return None, False
    if blob[len(_MAGIC):len(_MAGIC) + 64] != key.encode("ascii"):
        return None, False
    payload = blob[head:]
    if hashlib.sha256(payload).digest() != blob[len(_MAGIC) + 64:head]:
        return None, False
    try:
        return pickle.loads(payload), True
    except Exception:  # a class that moved or changed since the entry was written
        return None, False
