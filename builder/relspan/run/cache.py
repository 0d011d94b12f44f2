"""A content-keyed cache of task results, so an unchanged rebuild is near-instant.

A task's key is the SHA-256 of a canonical JSON text of everything its result
depends on (the spec section as a dict, the input file's SHA-256, the relspan
version, the task name, ...). Equal inputs give equal keys in any process and
under any hash seed: dicts are sorted by key, floats written as their shortest
round-trip text, tuples and lists both become JSON arrays, paths their POSIX
text, sets are sorted, numpy values become Python values (arrays: dtype, shape
and the SHA-256 of their bytes).

Entries are data, never pickles: a result is encoded by
:mod:`relspan.run.codec` into a JSON document (classes named and looked up in
an allow-list) plus plain numpy arrays, and stored as one uncompressed ``.npz``
file read back with ``allow_pickle=False``. Long sequences (a plan's windows)
are written and read back segment by segment (:func:`_write_entry`,
:func:`_decode`), so neither side ever holds a whole result as one document.
Nothing in a cache folder can run code, whatever its content; an entry that is missing, truncated, forged or
names a class outside the allow-list is a miss (with a one-line note), never
an error.

Entries live under a folder named after the **computing environment**: the
versions of every library that touches numbers or figures (numpy, scipy,
pandas, matplotlib, pyarrow, ...), Python, and the maths library
with its CPU kernel (threadpoolctl: internal_api, version, architecture).
The full key of an entry is therefore (environment, task key). A cache made
under other versions or another kernel is not reused (a one-line note says
so). Pruning (:meth:`ResultCache.prune`, run after a successful build)
deletes the entries of other environments, old-format (pickle) files,
entries not used for :data:`PRUNE_AFTER_DAYS` days and stale temporary files.
"""

from __future__ import annotations

import contextlib
import dataclasses
import gc
import hashlib
import json
import math
import os
import io
import re
import shutil
import tempfile
import time
import zipfile
import warnings
from enum import Enum
from pathlib import Path, PurePath
from threading import Lock
from typing import Any

import numpy as np

from ..errors import OutputError, RelspanNote, RelspanWarning
from . import codec

__all__ = ["task_key", "canonical_json", "ResultCache", "CacheStats", "DEFAULT_CACHE_DIRNAME",
           "KEY_FORMAT", "ENTRY_FORMAT", "cache_environment", "environment_id", "PRUNE_AFTER_DAYS"]

#: folder name the pipeline uses next to the spec unless told otherwise
DEFAULT_CACHE_DIRNAME = ".relspan-cache"

#: changes whenever the canonical form changes, so old keys can never collide with new ones
KEY_FORMAT = "relspan-task-key/1"

#: the entry format (header ``format`` field); entries of any other format are ignored
ENTRY_FORMAT = "relspan-cache-entry/4"

#: entries of this environment not read or written for this many days are pruned
PRUNE_AFTER_DAYS = 30

#: temporary files (``.tmp-*.part``) older than this many seconds are left-overs of a killed build
STALE_TEMP_SECONDS = 3600

#: libraries whose versions can change a number or a figure (absent ones are recorded as absent)
NUMERIC_LIBRARIES = ("numpy", "scipy", "pandas", "matplotlib", "pyarrow",
                     "contourpy", "fonttools", "pillow", "kiwisolver",
                     # also touch numbers or figures: mathtext parsing (pyparsing), colour cycles
                     # (cycler), date parsing (python-dateutil, tzdata), Excel and Stata cells
                     # (openpyxl), pandas' optional accelerators (bottleneck, numexpr) and the BLAS
                     # probe itself (threadpoolctl); statsmodels is no longer used at run time
                     # (relspan.analysis.unitroot computes the trend tests)
                     "pyparsing", "cycler", "python-dateutil", "tzdata", "openpyxl",
                     "bottleneck", "numexpr", "threadpoolctl")

_ENV_PREFIX = "env-"
_ENV_FILE = "ENVIRONMENT.json"
_ENTRY_RE = re.compile(r"^[0-9a-f]{64}\.npz$")
_ARRAY_RE = re.compile(r"^[pq][0-9]{1,9}\.npy$")
_SEGMENTS_MEMBER = "s.npy"
#: bytes of segment text or arrays kept in memory before they spill to an unnamed temporary file
_SPOOL_BYTES = 8 << 20
_TAG = "\x00"  # prefix of the keys that mark non-JSON values; user dict keys may not start with it
_README = """\
This folder is relspan's result cache.

Each file holds the result of one analysis task, named by a SHA-256 hash of
everything the result depends on (the spec section, the data file's SHA-256,
the relspan version). When an input changes, its key changes and the task runs
again; old entries are simply no longer used.

Entries are plain data (JSON and numpy arrays in .npz files, read without
pickle), kept in one sub-folder per computing environment (library versions
and the maths library's CPU kernel, see ENVIRONMENT.json in each); entries made
under another environment are not reused and a build deletes them.

It is safe to delete this folder at any time: the next build recomputes what
it needs (and takes longer).
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


def _check_key(key: str) -> str:
    if not (isinstance(key, str) and len(key) == 64 and all(c in "0123456789abcdef" for c in key)):
        raise ValueError(f"cache keys are 64 lower-case hex digits from task_key(); got {key!r}")
    return key


_ENVIRONMENT: dict | None = None


def _blas_info() -> list[dict]:
    """The maths libraries loaded in this process and the CPU kernel each chose."""
    import scipy.linalg  # noqa: F401 - loads SciPy's own BLAS so it is listed too

    try:
        from threadpoolctl import threadpool_info
    except ImportError:
        # without threadpoolctl: numpy's build record, and the kernel override if set
        cfg = {}
        try:
            cfg = np.show_config(mode="dicts").get("Build Dependencies", {}).get("blas", {})
        except Exception:  # noqa: BLE001 - older numpy has no dict mode
            pass
        return [{"internal_api": str(cfg.get("name", "unknown")), "version": str(cfg.get("version", "")),
                 "architecture": os.environ.get("OPENBLAS_CORETYPE", "unknown (threadpoolctl absent)")}]
    blas = [info for info in threadpool_info() if info.get("user_api") == "blas"]
    # NumPy's and SciPy's own copies (wheels ship them in numpy.libs / scipy.libs / scipy_openblas*):
    # other packages a process happens to have imported (a solver, a test run) may load further
    # copies, which must not change the key. A system-wide BLAS (no such path) is kept as loaded.
    own = [info for info in blas if any(part in str(info.get("filepath", "")).replace("\\", "/")
                                        for part in ("/numpy", "/scipy"))]
    libs = [{"internal_api": str(info.get("internal_api")), "version": str(info.get("version")),
             "architecture": str(info.get("architecture"))} for info in (own or blas)]
    unique = {json.dumps(d, sort_keys=True): d for d in libs}
    return [unique[k] for k in sorted(unique)]


def cache_environment() -> dict:
    """What a cached number or figure depends on besides its inputs and relspan's code.

    Python's version, the version of every library in :data:`NUMERIC_LIBRARIES`
    (``"absent"`` when not installed) and every maths library loaded with the
    CPU kernel it chose (threadpoolctl's ``internal_api``, ``version``,
    ``architecture``). Computed once per process.
    """
    global _ENVIRONMENT
    if _ENVIRONMENT is None:
        import platform
        from importlib import metadata

        versions = {}
        for name in NUMERIC_LIBRARIES:
            try:
                versions[name] = metadata.version(name)
            except metadata.PackageNotFoundError:
                versions[name] = "absent"
        _ENVIRONMENT = {"python": platform.python_version(), "machine": platform.machine(),
                        "libraries": versions, "blas": _blas_info(),
                        # the entry layout too, so entries of an older layout sit in another
                        # environment's folder: noted once, not reused, pruned after a build
                        "codec": f"{codec.FORMAT}; {ENTRY_FORMAT}"}
    return _ENVIRONMENT


def environment_id(env: dict | None = None) -> str:
    """16 hex digits naming an environment (the cache's sub-folder is ``env-<id>``)."""
    env = cache_environment() if env is None else env
    return hashlib.sha256(_dumps(env).encode("utf-8")).hexdigest()[:16]


def _difference(old: dict, new: dict) -> str:
    """The first few differences between two environments, in words."""
    out = []
    if not isinstance(old, dict):
        return "an unreadable environment record"
    for k in ("python", "machine"):
        if old.get(k) != new.get(k):
            out.append(f"{k} {old.get(k)} (now {new.get(k)})")
    ol, nl = old.get("libraries") or {}, new.get("libraries") or {}
    for k in nl:
        if isinstance(ol, dict) and ol.get(k) != nl[k]:
            out.append(f"{k} {ol.get(k, 'absent')} (now {nl[k]})")
    if old.get("blas") != new.get("blas"):
        def word(libs):
            try:
                return ", ".join(f"{b['internal_api']} {b['version']} {b['architecture']}" for b in libs)
            except Exception:  # noqa: BLE001 - a damaged record
                return "?"
        out.append(f"maths library {word(old.get('blas'))} (now {word(new.get('blas'))})")
    if old.get("codec") != new.get("codec"):
        out.append("an older or newer cache entry format")
    return "; ".join(out[:3]) + ("; ..." if len(out) > 3 else "") if out else "another environment"


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


def _note(text: str) -> None:
    warnings.warn(RelspanNote(text), stacklevel=3)


#: file of :meth:`ResultCache.sha_hint` (JSON: resolved path -> size, mtime, inode, SHA-256)
_HINTS_FILE = "file-hashes.json"
#: files remembered at most (the most recent)
_HINTS_MAX = 256


class ResultCache:
    """Task results on disk, keyed by :func:`task_key` within the computing environment.

    Parameters
    ----------
    folder : Path or None
        Where entries live (created, with a README.txt, if missing).
        ``None`` is the disabled cache (``--no-cache``): every lookup misses
        and nothing is written.
    create : bool
        Create the folder (False: only read an existing cache).

    Raises
    ------
    OutputError
        The folder cannot be created or is not a folder.

    Notes
    -----
    Opening a folder that holds entries of another environment, or files
    of an older format, issues one :class:`~relspan.errors.RelspanNote` each;
    an entry that cannot be read as relspan data issues one note per cache.
    """

    def __init__(self, folder: Path | str | None, *, create: bool = True) -> None:
        self._lock = Lock()
        self._stats = CacheStats()
        self._warned = False
        self._noted_corrupt = False
        self._folder = None if folder is None else Path(folder)
        self._env = cache_environment()
        self._env_id = environment_id(self._env)
        if self._folder is not None:
            if create:
                self._prepare()
            self._survey()

    def _prepare(self) -> None:
        folder = self._folder
        assert folder is not None
        try:
            exists = folder.exists()
        except OSError as exc:
            raise OutputError(
                f"cannot use the cache folder {folder} ({exc.strerror or exc}).", path=str(folder),
                key="--cache-dir", fix="point the cache elsewhere (--cache-dir), or use --no-cache.") from None
        if exists and not folder.is_dir():
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

    def _survey(self) -> None:
        """One note for entries made elsewhere, one for files of an older format."""
        folder = self._folder
        assert folder is not None
        try:
            children = list(folder.iterdir()) if folder.is_dir() else []
        except OSError:
            return
        others = [c for c in children if c.name.startswith(_ENV_PREFIX) and c.is_dir()
                  and c.name != _ENV_PREFIX + self._env_id]
        if others:
            try:
                old = json.loads((others[0] / _ENV_FILE).read_text(encoding="utf-8"))
            except (OSError, ValueError):
                old = None
            _note(f"{folder}: results cached in another computing environment (other library "
                  f"versions, maths-library kernel or cache format: {_difference(old, self._env)}) "
                  "are not reused; they are recomputed, and a build deletes them.")
        legacy = [c for c in children if len(c.name) == 2 and c.is_dir()]
        legacy += [c for c in children if c.is_file() and c.suffix in (".pkl", ".pickle")]
        if legacy:
            _note(f"{folder}: files of an older cache format (Python pickles) are ignored and never "
                  "loaded; a build deletes them.")

    @property
    def folder(self) -> Path | None:
        return self._folder

    @property
    def environment_folder(self) -> Path | None:
        """Where this environment's entries live."""
        return None if self._folder is None else self._folder / (_ENV_PREFIX + self._env_id)

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
        """File of entry ``key`` in this environment (``None`` for the disabled cache)."""
        _check_key(key)
        if self._folder is None:
            return None
        return self._folder / (_ENV_PREFIX + self._env_id) / key[:2] / f"{key}.npz"

    def get(self, key: str, default: Any = None) -> Any:
        """The stored value for ``key``, or ``default`` on a miss.

        Pass a sentinel as ``default`` when ``None`` is a valid result.
        """
        path = self.path_for(key)
        if path is None:
            self._count(misses=1)
            return default
        try:
            fh = open(path, "rb")
        except OSError:
            self._count(misses=1)
            return default
        try:
            with fh:
                value = _decode(fh, key, self._env_id)
        except codec.CodecError as err:
            self._count(misses=1, corrupt=1)
            with self._lock:
                first, self._noted_corrupt = not self._noted_corrupt, True
            if first:
                _note(f"{path}: not a valid relspan cache entry ({err}); ignored, the result is "
                      "recomputed.")
            return default
        try:
            os.utime(path)  # last use, for pruning
        except OSError:
            pass
        self._count(hits=1)
        return value

    def count_miss(self) -> None:
        """Count a lookup known to miss without reading (no entry can exist for it)."""
        self._count(misses=1)

    def __contains__(self, key: str) -> bool:
        path = self.path_for(key)
        return path is not None and path.is_file()

    def put(self, key: str, value: Any) -> bool:
        """Store ``value`` under ``key``; returns whether it was stored.

        A value the codec cannot store raises :class:`~relspan.run.codec.CodecError`
        (a programming error); a disk that refuses the write (full, read-only) only
        warns once and counts a write error, since a build can go on without its cache.
        """
        path = self.path_for(key)
        if path is None:
            return False
        try:
            env_folder = path.parent.parent
            env_folder.mkdir(exist_ok=True)
            if not (env_folder / _ENV_FILE).exists():
                self._write_atomic(env_folder / _ENV_FILE,
                                   json.dumps(self._env, indent=2, sort_keys=True).encode("utf-8"))
            path.parent.mkdir(exist_ok=True)
            self._write_atomic(path, lambda fh: _write_entry(fh, value, key, self._env_id, path.parent))
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

    # -- which files were hashed to what: a hint that saves a hashing pass on a first build

    def _hints_path(self) -> Path | None:
        return None if self._folder is None else self._folder / _HINTS_FILE

    def _read_hints(self) -> dict:
        path = self._hints_path()
        try:
            data = json.loads(path.read_text(encoding="utf-8")) if path is not None else {}
        except (OSError, ValueError):
            return {}
        return data if isinstance(data, dict) else {}

    @staticmethod
    def _stat_of(path: Path) -> list[int] | None:
        try:
            st = os.stat(path)
        except OSError:
            return None
        return [int(st.st_size), int(st.st_mtime_ns), int(st.st_ino)]

    def sha_hint(self, path: Path) -> str | None:
        """The SHA-256 this file had when it was last read, if its size, time and inode are unchanged.

        Only a hint for choosing the order of work: a run that finds a cached
        result for the hinted hash still hashes the file and looks the result
        up under the hash it computed. With no hint (a first build, a changed
        file, no cache) the file is read once, hashed as it is read, and its
        result stored under that hash: one pass over the file either way.
        """
        if self._folder is None:
            return None
        entry = self._read_hints().get(str(Path(path).resolve()))
        if not (isinstance(entry, dict) and entry.get("stat") == self._stat_of(path)):
            return None
        sha = entry.get("sha256")
        return sha if isinstance(sha, str) and len(sha) == 64 and all(c in "0123456789abcdef" for c in sha) \
            else None

    def remember_sha(self, path: Path, sha: str) -> None:
        """Record the SHA-256 read from ``path`` (for :meth:`sha_hint`); a failed write is ignored."""
        target = self._hints_path()
        st = self._stat_of(path)
        if target is None or st is None or not target.parent.is_dir():
            return
        hints = self._read_hints()
        hints[str(Path(path).resolve())] = {"stat": st, "sha256": str(sha)}
        if len(hints) > _HINTS_MAX:
            hints = dict(list(hints.items())[-_HINTS_MAX:])
        try:
            self._write_atomic(target, json.dumps(hints, indent=1, sort_keys=True).encode("utf-8"))
        except OSError:
            pass

    def prune(self, *, now: float | None = None) -> int:
        """Delete what no build of this environment will read again; returns the files removed.

        The rule: every ``env-*`` folder of another environment; files of the
        old pickle format (two-hex-digit folders at the top, ``*.pkl``); this
        environment's entries not read or written for :data:`PRUNE_AFTER_DAYS`
        days; temporary files older than :data:`STALE_TEMP_SECONDS`. Only
        names relspan writes are touched; anything else in the folder stays.
        """
        folder = self._folder
        if folder is None or not folder.is_dir():
            return 0
        now = time.time() if now is None else now
        removed = 0

        def unlink(p: Path) -> None:
            nonlocal removed
            try:
                p.unlink()
                removed += 1
            except OSError:
                pass

        def rmdir(p: Path) -> None:
            try:
                p.rmdir()
            except OSError:
                pass

        own = _ENV_PREFIX + self._env_id
        hexdir = re.compile(r"^[0-9a-f]{2}$")
        for child in list(folder.iterdir()):
            if child.is_symlink():
                continue
            if child.is_dir() and child.name.startswith(_ENV_PREFIX) and child.name != own:
                for sub in list(child.iterdir()):
                    if sub.is_dir() and not sub.is_symlink() and hexdir.match(sub.name):
                        for f in list(sub.iterdir()):
                            if _ENTRY_RE.match(f.name) or f.name.startswith(".tmp-"):
                                unlink(f)
                        rmdir(sub)
                    elif sub.name == _ENV_FILE or sub.name.startswith(".tmp-"):
                        unlink(sub)
                rmdir(child)
            elif child.is_dir() and hexdir.match(child.name):  # the old pickle layout
                for f in list(child.iterdir()):
                    if f.suffix == ".pkl" or f.name.startswith(".tmp-"):
                        unlink(f)
                rmdir(child)
            elif child.is_file() and (child.suffix == ".pkl" or child.name.startswith(".tmp-")):
                if child.suffix == ".pkl" or now - child.stat().st_mtime > STALE_TEMP_SECONDS:
                    unlink(child)
        mine = folder / own
        if mine.is_dir():
            limit = now - PRUNE_AFTER_DAYS * 86400
            for sub in list(mine.iterdir()):
                if not (sub.is_dir() and not sub.is_symlink() and hexdir.match(sub.name)):
                    continue
                for f in list(sub.iterdir()):
                    try:
                        age_ref = f.stat().st_mtime
                    except OSError:
                        continue
                    if _ENTRY_RE.match(f.name) and age_ref < limit:
                        unlink(f)
                    elif f.name.startswith(".tmp-") and now - age_ref > STALE_TEMP_SECONDS:
                        unlink(f)
                rmdir(sub)  # only when empty
        return removed

    @staticmethod
    def _write_atomic(path: Path, data) -> None:
        """Write ``data`` (bytes, or a function that writes into the open file) as ``path``, whole or not at all."""
        fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=".tmp-", suffix=".part")
        try:
            with os.fdopen(fd, "wb") as fh:
                if callable(data):
                    data(fh)
                else:
                    fh.write(data)
            os.replace(tmp, path)
        except BaseException:
            try:
                os.unlink(tmp)
            except OSError:
                pass
            raise


def _pack(arrays: list[np.ndarray]) -> tuple[list[list], list[np.ndarray]]:
    """The codec's arrays as one flat array per dtype, and where each one lies in its pack.

    A run of many windows holds tens of thousands of small arrays; written as one zip member
    each, numpy's reader looked every member up in a list (``NpzFile.__getitem__``), so reading
    45,190 of them took longer than computing them (12.2 s against about 8 s for a 1,000-window
    check; docs/performance.md). Packed, an entry has a few members whatever its size.
    """
    groups: dict[str, list[np.ndarray]] = {}
    order: list[str] = []
    where: list[list] = []
    sizes: dict[str, int] = {}
    for a in arrays:
        code = a.dtype.str
        if code not in groups:
            groups[code], sizes[code] = [], 0
            order.append(code)
        where.append([order.index(code), sizes[code], list(a.shape)])
        groups[code].append(a.ravel(order="C"))
        sizes[code] += a.size
    packs = [np.concatenate(groups[c]) if groups[c] else np.empty(0, dtype=c) for c in order]
    return where, packs


def _unpack(where: Any, packs: list[np.ndarray]) -> list[np.ndarray]:
    """The arrays :func:`_pack` packed; CodecError for any place outside its pack."""
    if not isinstance(where, list):
        raise codec.CodecError("a malformed header")
    out = []
    for item in where:
        if not (isinstance(item, list) and len(item) == 3 and type(item[0]) is int
                and type(item[1]) is int and isinstance(item[2], list)
                and all(type(d) is int and d >= 0 for d in item[2]) and len(item[2]) <= 32):
            raise codec.CodecError("a malformed array place")
        j, off, shape = item
        if not 0 <= j < len(packs):
            raise codec.CodecError("an array in no pack")
        size = math.prod(shape)
        flat = packs[j]
        if off < 0 or off + size > flat.size:
            raise codec.CodecError("an array beyond its pack")
        out.append(flat[off:off + size].reshape(shape).copy())
    return out


def _json_bytes(doc: Any) -> bytes:
    """An entry's JSON as UTF-8 (text left unescaped: ``json.loads`` reads it in about half the
    time of ``\\u`` escapes; a lone surrogate from a file's text is kept by ``surrogatepass``)."""
    return json.dumps(doc, sort_keys=True, separators=(",", ":"), allow_nan=False,
                      ensure_ascii=False).encode("utf-8", "surrogatepass")


@contextlib.contextmanager
def _no_collections():
    """The cyclic garbage collector paused while an entry is written or read.

    Both build trees of new objects (documents, results) that hold no reference cycles; the
    collector's full passes over the growing result took about half of reading a 2,000-window
    entry (docs/performance.md, section 11). It is re-enabled as it was found.
    """
    was = gc.isenabled()
    gc.disable()
    try:
        yield
    finally:
        if was:
            gc.enable()


class _SegmentSpill:
    """The segments of one entry as they are encoded: their JSON texts and their arrays, by dtype.

    Each goes to a spooled temporary file (memory up to :data:`_SPOOL_BYTES`, then an unnamed
    file in ``folder``); :meth:`write_members` copies them into the entry's zip in pieces.
    A segment's arrays are written in order, so a reader takes them in order: a place is
    ``[pack, shape]``, with no offset to check.
    """

    def __init__(self, folder: Path | None) -> None:
        self.folder = folder
        self.text = self._spool()
        self.lengths: list[int] = []
        self.codes: list[str] = []
        self.packs: list = []
        self.sizes: list[int] = []
        self.seen: dict[int, tuple[np.dtype, int]] = {}   # id(dtype) -> (dtype, pack)

    def _spool(self):
        return tempfile.SpooledTemporaryFile(max_size=_SPOOL_BYTES, dir=self.folder, prefix=".tmp-",
                                             suffix=".part")

    def _pack_of(self, dt: np.dtype) -> int:
        """The pack of arrays of dtype ``dt`` (by its ``str``), opened on first use."""
        code = dt.str
        try:
            j = self.codes.index(code)
        except ValueError:
            j = len(self.codes)
            self.codes.append(code)
            self.packs.append(self._spool())
            self.sizes.append(0)
        self.seen[id(dt)] = (dt, j)     # the dtype object is kept, so its id is not reused
        return j

    def __call__(self, doc: Any, arrays: list[np.ndarray]) -> int:
        places = []
        pieces: dict[int, list[bytes]] = {}
        seen = self.seen
        sizes = self.sizes
        for a in arrays:
            dt = a.dtype
            got = seen.get(id(dt))
            if got is not None and got[0] is dt:
                j = got[1]
            else:
                j = self._pack_of(dt)
            places.append([j, list(a.shape)])
            pieces.setdefault(j, []).append(a.tobytes())
            sizes[j] += a.size
        for j, parts in pieces.items():   # one write per pack and segment (a spooled write costs ~5 us)
            self.packs[j].write(b"".join(parts))
        raw = _json_bytes({"a": places, "v": doc})
        self.text.write(raw)
        self.lengths.append(len(raw))
        return len(self.lengths) - 1

    def write_members(self, zf: zipfile.ZipFile) -> None:
        members = [(f"q{j}.npy", np.dtype(c), n, f) for j, (c, n, f) in
                   enumerate(zip(self.codes, self.sizes, self.packs))]
        if self.lengths:
            members.insert(0, (_SEGMENTS_MEMBER, np.dtype(np.uint8), sum(self.lengths), self.text))
        for name, dtype, count, spool in members:
            spool.seek(0)
            with zf.open(name, "w", force_zip64=True) as out:
                np.lib.format.write_array_header_1_0(out, {"descr": np.lib.format.dtype_to_descr(dtype),
                                                           "fortran_order": False, "shape": (count,)})
                shutil.copyfileobj(spool, out, 1 << 20)

    def close(self) -> None:
        for f in [self.text, *self.packs]:
            f.close()


@_no_collections()
def _write_entry(fh, value: Any, key: str, env_id: str, spill_dir: Path | None = None) -> None:
    """Write ``value`` as the entry ``key`` into the open binary file ``fh``.

    The long sequences of ``value`` are encoded segment by segment into spooled temporary
    files (:class:`_SegmentSpill`) as the codec reaches them; only the rest of the document
    (the header) and its arrays are held in memory. Members: ``header.npy`` (the JSON
    header as bytes), ``p<j>.npy`` (the header's arrays, one pack per dtype), ``s.npy``
    (the segments' JSON texts, one after another) and ``q<j>.npy`` (their arrays).
    For a plan of 20,000 windows this holds a few MB at a time where one document, its
    JSON text and the file's bytes took about 2.5 GB (docs/performance.md, section 11).
    """
    spill = _SegmentSpill(spill_dir)
    try:
        doc, arrays = codec.encode(value, segment=spill)
        where, packs = _pack(arrays)
        del arrays
        header = {"format": ENTRY_FORMAT, "key": key, "environment": env_id, "arrays": where,
                  "packs": len(packs), "segments": spill.lengths, "segment_packs": len(spill.codes),
                  "value": doc}
        raw = _json_bytes(header)
        del header, doc, where
        # stored, not compressed: no member can expand beyond the file
        with zipfile.ZipFile(fh, "w", zipfile.ZIP_STORED, allowZip64=True) as zf:
            members = [("header.npy", np.frombuffer(raw, dtype=np.uint8))]
            members += [(f"p{j}.npy", a) for j, a in enumerate(packs)]
            for name, a in members:
                with zf.open(name, "w", force_zip64=True) as out:
                    np.lib.format.write_array(out, a, allow_pickle=False)
            spill.write_members(zf)
    finally:
        spill.close()


def _encode(value: Any, key: str, env_id: str) -> bytes:
    """The bytes of the entry ``key`` holding ``value`` (what :meth:`ResultCache.put` writes)."""
    buf = io.BytesIO()
    _write_entry(buf, value, key, env_id)
    return buf.getvalue()


def _npy_stream(zf: zipfile.ZipFile, name: str):
    """``(open member, dtype, items)`` of a one-dimensional plain array member, read as a stream."""
    fh = zf.open(name)
    try:
        version = np.lib.format.read_magic(fh)
        if version == (1, 0):
            shape, fortran, dtype = np.lib.format.read_array_header_1_0(fh)
        elif version == (2, 0):
            shape, fortran, dtype = np.lib.format.read_array_header_2_0(fh)
        else:
            raise codec.CodecError(f"an array member of npy version {version}")
        if len(shape) != 1 or dtype.hasobject or dtype.fields is not None or dtype.kind not in "biufcmMSU":
            raise codec.CodecError("a malformed pack")
    except BaseException:
        fh.close()
        raise
    return fh, dtype, shape[0]


class _SegmentReader:
    """The segments of an entry, read in the order written: each segment's text and its arrays."""

    def __init__(self) -> None:
        self.lengths: list[int] = []
        self.streams: list = []
        self.text = None
        self.packs: list = []
        self.next = 0

    def open(self, zf: zipfile.ZipFile, lengths: Any, n_packs: Any, names: set) -> None:
        if not (isinstance(lengths, list) and all(type(x) is int and x >= 0 for x in lengths)) \
                or type(n_packs) is not int or not 0 <= n_packs <= len(names):
            raise codec.CodecError("a malformed header")
        self.lengths = lengths
        if lengths:
            self.text, dtype, count = _npy_stream(zf, _SEGMENTS_MEMBER)
            self.streams.append(self.text)
            if dtype != np.uint8 or count != sum(lengths):
                raise codec.CodecError("segments of the wrong size")
        for j in range(n_packs):
            stream = _npy_stream(zf, f"q{j}.npy")
            self.streams.append(stream[0])
            self.packs.append(stream)

    def __call__(self, number: int) -> tuple[Any, list[np.ndarray]]:
        if number != self.next or number >= len(self.lengths):
            raise codec.CodecError("segments out of order")
        self.next += 1
        n = self.lengths[number]
        raw = self.text.read(n)
        if len(raw) != n:
            raise codec.CodecError("a truncated segment")
        seg = json.loads(raw.decode("utf-8", "surrogatepass"))
        if not (isinstance(seg, dict) and isinstance(seg.get("a"), list) and "v" in seg):
            raise codec.CodecError("a malformed segment")
        places = seg["a"]
        packs = self.packs
        n_packs = len(packs)
        need = [0] * n_packs
        sizes = []
        for item in places:   # [pack, shape] each, checked before anything is read
            if type(item) is not list or len(item) != 2:
                raise codec.CodecError("a malformed array place")
            j, shape = item
            if type(j) is not int or not 0 <= j < n_packs or type(shape) is not list or len(shape) > 32:
                raise codec.CodecError("a malformed array place")
            size = 1
            for dim in shape:
                if type(dim) is not int or dim < 0:
                    raise codec.CodecError("a malformed array place")
                size *= dim
            need[j] += size
            sizes.append(size)
        # one read per pack and segment; each array is copied out (owning its memory, as before)
        flats = []
        for j, (fh, dtype, _count) in enumerate(packs):
            size = need[j] * dtype.itemsize
            raw_pack = fh.read(size) if size else b""
            if len(raw_pack) != size:
                raise codec.CodecError("an array beyond its pack")
            flats.append(np.frombuffer(raw_pack, dtype=dtype))
        at = [0] * n_packs
        arrays = []
        for (j, shape), size in zip(places, sizes):
            off = at[j]
            arrays.append(flats[j][off:off + size].reshape(shape).copy())
            at[j] = off + size
        return seg["v"], arrays

    def finish(self) -> None:
        """Every segment read and every byte of every member used (the last read checks the CRC)."""
        if self.next != len(self.lengths) or any(fh.read(1) for fh in self.streams):
            raise codec.CodecError("segments or arrays left unread")

    def close(self) -> None:
        for fh in self.streams:
            fh.close()


@_no_collections()
def _decode(source, key: str, env_id: str) -> Any:
    """The value stored in ``source`` (the entry's bytes or its open file); CodecError for
    anything that is not our own entry."""
    if isinstance(source, (bytes, bytearray)):
        source = io.BytesIO(source)
    reader = _SegmentReader()
    try:
        size = source.seek(0, 2)
        source.seek(0)
        with zipfile.ZipFile(source) as zf:
            infos = zf.infolist()
            total = 0
            names = set()
            for info in infos:
                if info.compress_type != zipfile.ZIP_STORED:
                    raise codec.CodecError("a compressed member (relspan stores entries uncompressed)")
                if info.filename not in ("header.npy", _SEGMENTS_MEMBER) and not _ARRAY_RE.match(info.filename):
                    raise codec.CodecError(f"an unexpected member {info.filename!r}")
                total += info.file_size
                names.add(info.filename)
            if total > size:
                raise codec.CodecError("members larger than the file")
            with zf.open("header.npy") as fh:
                raw = np.lib.format.read_array(fh, allow_pickle=False)
            if raw.dtype != np.uint8 or raw.ndim != 1:
                raise codec.CodecError("a malformed header")
            header = json.loads(raw.tobytes().decode("utf-8", "surrogatepass"))
            del raw
            if not isinstance(header, dict) or header.get("format") != ENTRY_FORMAT:
                raise codec.CodecError("another entry format")
            if header.get("key") != key:
                raise codec.CodecError("the entry belongs to another key")
            if header.get("environment") != env_id:
                raise codec.CodecError("the entry was made in another environment")
            n = header.get("packs")
            if type(n) is not int or not 0 <= n <= len(infos):
                raise codec.CodecError("a malformed header")
            packs = []
            for j in range(n):
                with zf.open(f"p{j}.npy") as fh:
                    packs.append(np.lib.format.read_array(fh, allow_pickle=False))
            if any(p.ndim != 1 or p.dtype.hasobject for p in packs):
                raise codec.CodecError("a malformed pack")
            arrays = _unpack(header.get("arrays"), packs)
            del packs
            reader.open(zf, header.get("segments"), header.get("segment_packs"), names)
            value = codec.decode(header["value"], arrays, segments=reader)
            reader.finish()
            return value
    except codec.CodecError:
        raise
    except (zipfile.BadZipFile, ValueError, KeyError, OSError, EOFError, UnicodeDecodeError,
            RecursionError, NotImplementedError) as err:
        raise codec.CodecError(f"{type(err).__name__}: {' '.join(str(err).split())[:120]}") from None
    finally:
        reader.close()
