"""A pure-Python link and asset checker for a built site (no network, no browser).

Every ``href``/``src`` (and ``srcset``, ``poster``, ...) of every HTML page
must be relative and resolve to a file inside the site; ``#fragment`` links
must name an ``id`` that exists in the target page. Absolute URLs to other
hosts and root-absolute paths (``/x.html``, which break under a sub-path and
from ``file://``) are reported. Stylesheets are checked for ``url(...)`` and
``@import`` targets, SVG files for references to other hosts.
"""

from __future__ import annotations

import posixpath
import re
from collections.abc import Mapping
from dataclasses import dataclass
from html.parser import HTMLParser
from pathlib import Path
from urllib.parse import unquote, urlsplit

__all__ = ["Problem", "check_site", "check_files", "PROBLEM_KINDS"]

#: Every kind of problem the checker reports.
PROBLEM_KINDS = ("missing-target", "missing-fragment", "external-url", "root-absolute",
                 "folder-link", "outside-site", "script-url", "duplicate-id", "unreadable")

_SCANNED_SUFFIXES = frozenset({".html", ".htm", ".css", ".svg"})
_URL_ATTRS = frozenset({"href", "src", "poster", "data", "action", "cite", "formaction",
                        "xlink:href", "background", "longdesc", "manifest"})
_SCHEME = re.compile(r"^[A-Za-z][A-Za-z0-9+.-]*:")
_CSS_URL = re.compile(r"""url\(\s*(?P<q>['"]?)(?P<u>[^'")]*)(?P=q)\s*\)|@import\s+(?P<q2>['"])(?P<u2>[^'"]+)(?P=q2)""")
_SVG_EXTERNAL = re.compile(rb"""(?:xlink:)?href\s*=\s*["']\s*(?P<u>(?:[a-zA-Z][a-zA-Z0-9+.-]*:|//)[^"']*)["']""")


@dataclass(frozen=True, slots=True, order=True)
class Problem:
    """One broken or unsafe reference.

    Attributes
    ----------
    file : str
        Site-relative path of the file holding the reference.
    line : int
        1-based line of the tag (0 when not known).
    kind : str
        One of :data:`PROBLEM_KINDS`.
    target : str
        The reference as written.
    message : str
        What is wrong and how to fix it.
    """

    file: str
    line: int
    kind: str
    target: str
    message: str

    def __str__(self) -> str:
        return f"{self.file}:{self.line}: {self.kind}: {self.target!r}: {self.message}"


class _PageScan(HTMLParser):
    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.refs: list[tuple[int, str, str]] = []  # (line, attribute, value)
        self.ids: list[tuple[int, str]] = []
        self.styles: list[tuple[int, str]] = []
        self._in_style = False

    def _visit(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        line = self.getpos()[0]
        for key, value in attrs:
            if value is None:
                continue
            if key in _URL_ATTRS:
                self.refs.append((line, key, value.strip()))
            elif key in ("srcset", "imagesrcset"):
                for item in value.split(","):
                    url = item.strip().split(" ")[0]
                    if url:
                        self.refs.append((line, key, url))
            elif key == "id" or (key == "name" and tag == "a"):
                self.ids.append((line, value))
            elif key == "style":
                self.styles.append((line, value))
        if tag == "style":
            self._in_style = True

    def handle_starttag(self, tag, attrs):  # noqa: D102 (HTMLParser API)
        self._visit(tag, attrs)

    def handle_startendtag(self, tag, attrs):  # noqa: D102
        self._visit(tag, attrs)

    def handle_endtag(self, tag):  # noqa: D102
        if tag == "style":
            self._in_style = False

    def handle_data(self, data):  # noqa: D102
        if self._in_style:
            self.styles.append((self.getpos()[0], data))


def _scan_html(text: str) -> _PageScan:
    scan = _PageScan()
    scan.feed(text)
    scan.close()
    return scan


def _classify(file: str, line: int, value: str, files: Mapping[str, bytes],
              folders: set[str], ids: Mapping[str, set[str]], out: list[Problem]) -> None:
    if value == "" or value.startswith("data:"):
        return
    if value.startswith("#"):
        target_path, fragment = file, unquote(value[1:])
    else:
        if value.lower().startswith(("javascript:", "vbscript:")):
            out.append(Problem(file, line, "script-url", value,
                               "script URLs are not allowed; link to a file of the site."))
            return
        if value.startswith("//") or _SCHEME.match(value):
            out.append(Problem(file, line, "external-url", value,
                               "the site must work offline: copy the resource into the "
                               "site and link to it relatively, or show the address as text."))
            return
        if value.startswith("/"):
            out.append(Problem(file, line, "root-absolute", value,
                               "root-absolute paths break under a sub-path and from file://; "
                               "use a path relative to this page."))
            return
        parts = urlsplit(value)
        path = unquote(parts.path)
        fragment = unquote(parts.fragment)
        if path == "":
            target_path = file
        else:
            base = posixpath.dirname(file)
            joined = posixpath.normpath(posixpath.join(base, path))
            if joined == ".." or joined.startswith("../") or joined.startswith("/"):
                out.append(Problem(file, line, "outside-site", value,
                                   "the link leaves the site folder; keep every target "
                                   "inside it."))
                return
            if path.endswith("/") or (joined not in files and joined in folders):
                out.append(Problem(file, line, "folder-link", value,
                                   "links to folders do not open from file://; link to "
                                   "the folder's index.html."))
                return
            if joined not in files:
                out.append(Problem(file, line, "missing-target", value,
                                   f"no file {joined!r} in the site."))
                return
            target_path = joined
    if fragment and target_path.endswith((".html", ".htm")):
        if fragment not in ids.get(target_path, set()):
            out.append(Problem(file, line, "missing-fragment", value,
                               f"{target_path!r} has no element with id {fragment!r}."))


def _check_css_text(file: str, line: int, text: str, files: Mapping[str, bytes],
                    folders: set[str], ids: Mapping[str, set[str]],
                    out: list[Problem]) -> None:
    for match in _CSS_URL.finditer(text):
        url = (match.group("u") or match.group("u2") or "").strip()
        if url and not url.startswith("#"):
            _classify(file, line + text.count("\n", 0, match.start()), url, files, folders,
                      ids, out)


def check_files(files: Mapping[str, bytes]) -> list[Problem]:
    """Check an in-memory site (path -> bytes), e.g. the output of ``render_site``.

    Returns
    -------
    list of Problem
        Sorted by file, line, kind and target; empty when the site is clean.
    """
    out: list[Problem] = []
    folders = {posixpath.dirname(p) for p in files}
    for folder in list(folders):
        while folder:
            folders.add(folder)
            folder = posixpath.dirname(folder)
    scans: dict[str, _PageScan] = {}
    ids: dict[str, set[str]] = {}
    for path in sorted(files):
        if path.endswith((".html", ".htm")):
            try:
                text = files[path].decode("utf-8")
            except UnicodeDecodeError as err:
                out.append(Problem(path, 0, "unreadable", "",
                                   f"not valid UTF-8 ({err.reason} at byte {err.start})."))
                continue
            scan = _scan_html(text)
            scans[path] = scan
            seen: dict[str, int] = {}
            for line, ident in scan.ids:
                if ident in seen:
                    out.append(Problem(path, line, "duplicate-id", "#" + ident,
                                       f"id {ident!r} is already used on line {seen[ident]}."))
                else:
                    seen[ident] = line
            ids[path] = set(seen)
    for path, scan in scans.items():
        for line, attr, value in scan.refs:
            _classify(path, line, value, files, folders, ids, out)
        for line, style in scan.styles:
            _check_css_text(path, line, style, files, folders, ids, out)
    for path in sorted(files):
        if path.endswith(".css"):
            text = files[path].decode("utf-8", errors="replace")
            _check_css_text(path, 1, text, files, folders, ids, out)
        elif path.endswith(".svg"):
            data = files[path]
            for match in _SVG_EXTERNAL.finditer(data):
                url = match.group("u").decode("utf-8", errors="replace")
                line = data.count(b"\n", 0, match.start()) + 1
                kind = "script-url" if url.lower().startswith("javascript:") else "external-url"
                if not url.startswith("data:"):
                    out.append(Problem(path, line, kind, url,
                                       "images must not reference other hosts or scripts."))
    return sorted(out)


def check_site(folder: Path | str) -> list[Problem]:
    """Check every HTML, CSS and SVG file under ``folder``.

    Parameters
    ----------
    folder : path
        A built site.

    Returns
    -------
    list of Problem
        Empty when every internal reference resolves and nothing points
        outside the site.
    """
    root = Path(folder)
    files: dict[str, bytes] = {}
    for item in sorted(root.rglob("*")):
        if item.is_file():
            # Only pages, stylesheets and SVGs are read; other files just need to exist.
            wanted = item.suffix.lower() in _SCANNED_SUFFIXES
            files[item.relative_to(root).as_posix()] = item.read_bytes() if wanted else b""
    return check_files(files)
