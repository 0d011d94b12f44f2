"""Write a rendered site to disk atomically and safely.

The new site is written into a hidden temporary folder beside the target
(``.<name>.relspan-tmp-<random>``), every file and folder is fsynced, and the
folder is then swapped in: on Linux with one atomic ``renameat2(RENAME_EXCHANGE)``,
elsewhere by renaming the old site away and the new one in. A build that
fails or is killed before the swap leaves the previous site byte-identical;
its temporary folder is removed by the next build.

Safety rules:

* A marker file (:data:`MARKER`) marks folders relspan created. An existing,
  non-empty folder without it is never replaced or deleted.
* The output folder may not be, or contain, any ``protected`` path (the
  spec's folder, the data files).
* Only hidden folders with our prefix *and* our marker are ever cleaned up,
  and not while the process that made them is still running.
"""

from __future__ import annotations

import ctypes
import ctypes.util
import errno
import os
import secrets
import shutil
import socket
import sys
from collections.abc import Callable, Mapping, Sequence
from pathlib import Path

from relspan.errors import OutputError

__all__ = ["MARKER", "write_site", "check_output"]

#: Marker file at the root of every folder relspan writes.
MARKER = ".relspan-site"
_MARKER_TEXT = ("This folder was written by relspan. relspan replaces it on the next "
                "build; do not keep other files here.\n")
_TMP_TAG = ".relspan-tmp-"
_OLD_TAG = ".relspan-old-"


# ------------------------------------------------------------------ helpers

def _fsync_dir(path: Path) -> None:
    try:
        fd = os.open(path, os.O_RDONLY | getattr(os, "O_DIRECTORY", 0))
    except OSError:
        return  # platforms without directory fds (Windows)
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)


def _has_marker(folder: Path) -> bool:
    return (folder / MARKER).is_file()


def _is_empty_dir(folder: Path) -> bool:
    with os.scandir(folder) as it:
        return next(it, None) is None


def _is_within(child: Path, parent: Path) -> bool:
    return child == parent or parent in child.parents


def _marker_text_for_tmp() -> str:
    return f"{_MARKER_TEXT}building pid={os.getpid()} host={socket.gethostname()}\n"


def _owner_alive(folder: Path) -> bool:
    """True when the folder's marker names a process on this host still running."""
    try:
        text = (folder / MARKER).read_text(encoding="utf-8", errors="replace")
    except OSError:
        return False
    pid = host = None
    for token in text.split():
        if token.startswith("pid="):
            pid = token[4:]
        elif token.startswith("host="):
            host = token[5:]
    if pid is None or not pid.isdigit() or host != socket.gethostname():
        return False
    if int(pid) == os.getpid():
        return False
    try:
        os.kill(int(pid), 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True
    except OSError:
        return False
    return True


class _path_errors:
    """Turn the operating system's complaints about a path into a located OutputError."""

    def __init__(self, shown) -> None:
        self.shown = str(shown)

    def __enter__(self) -> None:
        return None

    def __exit__(self, exc_type, exc, tb) -> bool:
        if exc is None or isinstance(exc, OutputError):
            return False
        if isinstance(exc, RuntimeError) and "Symlink loop" in str(exc):
            why = "its symbolic links form a loop"
        elif isinstance(exc, OSError) and exc.errno == errno.ENAMETOOLONG:
            why = "a name in the path is too long (the filesystem allows 255 bytes per name)"
        elif isinstance(exc, OSError) and exc.errno == errno.ELOOP:
            why = "its symbolic links form a loop"
        elif isinstance(exc, OSError):
            why = exc.strerror or str(exc)
        else:
            return False
        raise OutputError(f"cannot use {self.shown!r} as the site folder: {why}.", path=self.shown,
                          fix="choose another output folder (site.out in the spec, or --out).") from None


def _validate_files(files: Mapping[str, bytes]) -> None:
    paths = set(files)
    for path, data in files.items():
        if not isinstance(path, str) or not path or path.startswith("/") or "\\" in path:
            raise OutputError(f"cannot write site file {path!r}: paths must be relative POSIX "
                              "paths such as 'datasets/a/index.html'.",
                              fix="fix the page or file path given to the renderer.")
        segments = path.split("/")
        if any(s in ("", ".", "..") or "\x00" in s for s in segments):
            raise OutputError(f"cannot write site file {path!r}: empty, '.' or '..' segment.",
                              fix="fix the page or file path given to the renderer.")
        if path == MARKER:
            raise OutputError(f"cannot write site file {path!r}: the name is reserved for "
                              "relspan's marker.", fix="rename that file.")
        if not isinstance(data, bytes):
            raise OutputError(f"cannot write site file {path!r}: content must be bytes, "
                              f"got {type(data).__name__}.", fix="encode text as UTF-8.")
        for i in range(1, len(segments)):
            if "/".join(segments[:i]) in paths:
                raise OutputError(f"cannot write site file {path!r}: "
                                  f"{'/'.join(segments[:i])!r} is also a file.",
                                  fix="give the file and the folder different names.")


def _check_target(out: Path, protected: Sequence[Path]) -> None:
    for item in protected:
        prot = Path(os.path.abspath(os.path.realpath(item)))
        if _is_within(prot, out):
            what = "is" if prot == out else "contains"
            raise OutputError(
                f"refusing to write the site to {out}: that folder {what} {prot}, which the "
                "site is built from and must not be replaced.", path=str(out),
                fix="choose an output folder of its own, e.g. a new '_site' folder beside "
                    "the spec (site.out in the spec, or --out).")
    if out.is_symlink():
        raise OutputError(f"refusing to write the site to {out}: it is a symbolic link.",
                          path=str(out), fix="point the output at the real folder instead.")
    if out.exists() and not out.is_dir():
        raise OutputError(f"cannot write the site to {out}: a file of that name exists.",
                          path=str(out), fix="remove the file or choose another output folder.")
    if out.is_dir() and not _has_marker(out) and not _is_empty_dir(out):
        raise OutputError(
            f"refusing to replace {out}: the folder is not empty and was not made by "
            f"relspan (it has no {MARKER} file).", path=str(out),
            fix="choose a new or empty output folder, or move the folder's contents away.")


def _stale_folders(parent: Path, name: str) -> list[Path]:
    out = []
    try:
        entries = sorted(os.scandir(parent), key=lambda e: e.name)
    except OSError:
        return out
    for entry in entries:
        if entry.name.startswith(f".{name}{_TMP_TAG}") or entry.name.startswith(
                f".{name}{_OLD_TAG}"):
            if entry.is_dir(follow_symlinks=False):
                out.append(Path(entry.path))
    return out


def _clean_stale(parent: Path, name: str, out: Path) -> None:
    """Remove leftovers of killed builds; restore a site lost mid-swap."""
    for folder in _stale_folders(parent, name):
        try:
            marked = _has_marker(folder)
            if not marked and not _is_empty_dir(folder):
                continue  # not ours beyond doubt: leave it
            if marked and _owner_alive(folder):
                continue  # another build is writing it right now
            if folder.name.startswith(f".{name}{_OLD_TAG}") and marked and not out.exists():
                os.rename(folder, out)  # killed between the two renames: put it back
                continue
            _remove_tree(folder)
        except OSError:
            continue  # best effort; never fail a build over leftovers


def _remove_tree(path: Path) -> None:
    """Remove a folder relspan made, even where a user took away write permission (mode 555).

    A failed removal makes the entry's folder writable for its owner and tries
    again once; what still cannot be removed is left (best effort, never an error).
    """
    import stat

    def again(func, p, _exc) -> None:
        try:
            for folder in {os.path.dirname(p), p if os.path.isdir(p) and not os.path.islink(p) else None}:
                if folder:
                    os.chmod(folder, stat.S_IMODE(os.lstat(folder).st_mode) | stat.S_IRWXU)
            func(p)
        except OSError:
            pass

    if sys.version_info >= (3, 12):
        shutil.rmtree(path, onexc=again)
    else:
        shutil.rmtree(path, onerror=again)


def _load_renameat2() -> Callable[[str, str], bool] | None:
    if not sys.platform.startswith("linux"):
        return None
    try:
        libc = ctypes.CDLL(ctypes.util.find_library("c") or "libc.so.6", use_errno=True)
        fn = libc.renameat2
    except (OSError, AttributeError):
        return None
    fn.argtypes = [ctypes.c_int, ctypes.c_char_p, ctypes.c_int, ctypes.c_char_p, ctypes.c_uint]
    fn.restype = ctypes.c_int
    at_fdcwd, rename_exchange = -100, 2  # <fcntl.h> AT_FDCWD, <linux/fs.h> RENAME_EXCHANGE

    def exchange(a: str, b: str) -> bool:
        if fn(at_fdcwd, os.fsencode(a), at_fdcwd, os.fsencode(b), rename_exchange) == 0:
            return True
        err = ctypes.get_errno()
        if err in (errno.EINVAL, errno.ENOSYS, errno.ENOTSUP, errno.EOPNOTSUPP):
            return False  # filesystem or kernel without the flag: fall back
        raise OSError(err, os.strerror(err), a)

    return exchange


def _swap_in(tmp: Path, out: Path, parent: Path, name: str) -> None:
    if not out.exists():
        os.rename(tmp, out)
        _fsync_dir(parent)
        return
    exchange = _load_renameat2()
    if exchange is not None and exchange(str(tmp), str(out)):
        _fsync_dir(parent)
        _remove_tree(tmp)  # tmp now holds the old site
        return
    old = parent / f".{name}{_OLD_TAG}{secrets.token_hex(4)}"
    os.rename(out, old)
    os.rename(tmp, out)
    _fsync_dir(parent)
    _remove_tree(old)


def _make_tmp(parent: Path, name: str) -> Path:
    for _ in range(100):
        tmp = parent / f".{name}{_TMP_TAG}{secrets.token_hex(4)}"
        try:
            os.mkdir(tmp)  # honours the umask, unlike mkdtemp's 0700
        except FileExistsError:
            continue
        except OSError as err:
            raise OutputError(f"cannot write the site into {parent}: {err.strerror or err}.",
                              path=str(parent), fix="choose an output folder you may write to "
                                                    "(site.out in the spec, or --out).") from None
        return tmp
    raise OutputError(f"could not create a temporary folder in {parent}.", path=str(parent),
                      fix="remove old '.*.relspan-tmp-*' folders there.")


# --------------------------------------------------------------------- API

def check_output(out_dir: Path | str, *, protected: Sequence[Path | str] = ()) -> Path:
    """Run the writer's safety checks on ``out_dir`` without writing anything.

    Lets a caller fail fast on a bad output folder before a long analysis.
    Returns the absolute folder; raises :class:`OutputError` like
    :func:`write_site`.
    """
    out = Path(os.path.abspath(out_dir))
    if out.parent == out:
        raise OutputError(f"refusing to write the site to the filesystem root {out}.",
                          path=str(out), fix="choose an output folder of its own.")
    with _path_errors(out_dir):
        if out.parent.exists():
            out = out.parent.resolve(strict=False) / out.name
        _check_target(out, [Path(p) for p in protected])
        parent = out.parent
        while not parent.exists() and parent.parent != parent:
            parent = parent.parent
        if not os.access(parent, os.W_OK | os.X_OK):
            raise OutputError(f"cannot write the site to {out}: {parent} is not writable.",
                              path=str(out_dir), fix="choose an output folder you may write to, "
                                                     "or make that folder writable.")
    return out


def write_site(files: Mapping[str, bytes], out_dir: Path | str, *,
               protected: Sequence[Path | str] = (),
               _after_each_file: Callable[[str], None] | None = None) -> Path:
    """Atomically replace ``out_dir`` with a folder holding exactly ``files``.

    Parameters
    ----------
    files : mapping of str to bytes
        Site-relative POSIX path -> content (e.g. from ``render_site``).
    out_dir : path
        The site folder. Created if missing (with its parents); replaced if
        it was made by relspan (has the marker) or is empty.
    protected : sequence of paths
        Paths the output may not equal or contain (spec folder, data files).
    _after_each_file : callable, optional
        Test hook called with each path after it is written and synced.

    Returns
    -------
    Path
        The absolute output folder.

    Raises
    ------
    OutputError
        If the folder is protected, not ours, a file or a symlink, a path is
        invalid, or the disk refuses the write. Nothing is left half-written.
    """
    _validate_files(files)
    out = Path(os.path.abspath(out_dir))
    if out.parent == out:
        raise OutputError(f"refusing to write the site to the filesystem root {out}.",
                          path=str(out), fix="choose an output folder of its own.")
    with _path_errors(out_dir):
        out = out.parent.resolve() / out.name
        _check_target(out, [Path(p) for p in protected])
    parent, name = out.parent, out.name
    try:
        parent.mkdir(parents=True, exist_ok=True)
    except OSError as err:
        raise OutputError(f"cannot create the folder {parent}: {err.strerror}.",
                          path=str(parent), fix="check the path and its permissions.") from None
    _clean_stale(parent, name, out)
    _check_target(out, [Path(p) for p in protected])  # a restore may have changed things
    tmp = _make_tmp(parent, name)
    try:
        with open(tmp / MARKER, "x", encoding="utf-8") as fh:
            fh.write(_marker_text_for_tmp())
            fh.flush()
            os.fsync(fh.fileno())
        made: set[Path] = {tmp}
        for rel in sorted(files):
            target = tmp.joinpath(*rel.split("/"))
            folder = target.parent
            if folder not in made:
                folder.mkdir(parents=True, exist_ok=True)
                made.update([folder, *folder.parents])
            with open(target, "xb") as fh:
                fh.write(files[rel])
                fh.flush()
                os.fsync(fh.fileno())
            if _after_each_file is not None:
                _after_each_file(rel)
        with open(tmp / MARKER, "w", encoding="utf-8") as fh:
            fh.write(_MARKER_TEXT)
            fh.flush()
            os.fsync(fh.fileno())
        for folder in sorted(made, key=lambda p: len(p.parts), reverse=True):
            if _is_within(folder, tmp):
                _fsync_dir(folder)
        _swap_in(tmp, out, parent, name)
    except OSError as err:
        shutil.rmtree(tmp, ignore_errors=True)
        raise OutputError(
            f"could not write the site to {out}: {err.strerror or err} "
            f"({err.filename or 'while swapping folders'}). The previous site, if any, is "
            "unchanged.", path=str(out),
            fix="check free disk space and permissions, then build again.") from None
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        raise
    return out
