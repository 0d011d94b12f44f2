"""SiteContent -> the bytes of every file of the site.

:func:`render_site` is a pure function: the same content gives the same bytes
(no clock, no absolute paths, no dependence on the hash seed). A build date
is shown only when the caller passes one (see :func:`source_date`, which
reads ``SOURCE_DATE_EPOCH``).

Links: templates and Markdown write internal targets site-root-absolute
(``/caution.html``); :func:`relative_url` rewrites every such ``href``/``src``
into a path relative to the page, so the folder works under any sub-path, in
a zip file and from ``file://``.
"""

from __future__ import annotations

import datetime as _dt
import hashlib
import io
import os
import posixpath
import re
import zipfile
from collections.abc import Mapping
from html import escape as _html_escape
from html.parser import HTMLParser
from importlib import resources
from urllib.parse import urlsplit, urlunsplit

import jinja2
import markupsafe

from relspan.errors import OptionsError
from relspan.site.content import NavItem, Page, SiteContent, Term
from relspan.site.markdown import render_markdown

__all__ = ["render_site", "relative_url", "rewrite_links", "link_terms", "zip_bytes", "sha256sums",
           "source_date", "ASSET_DIR", "SUMS_NAME", "RESERVED_NAMES", "CSP", "TERM_SKIP_TAGS"]

#: Folder of the site holding the stylesheet (and any other packaged asset).
ASSET_DIR = "assets"
#: Checksum file at the site root (``sha256sum -c SHA256SUMS`` verifies the site).
SUMS_NAME = "SHA256SUMS"
#: Names at the site root that content may not use.
RESERVED_NAMES = (SUMS_NAME, ".relspan-site")
#: Content-Security-Policy for every page: nothing but our own files, no scripts.
CSP = ("default-src 'none'; img-src 'self' data:; style-src 'self' 'unsafe-inline'; "
       "font-src 'self'; base-uri 'none'; form-action 'none'")

#: Attributes that hold one URL (rewritten when root-absolute).
_URL_ATTRS = frozenset({"href", "src", "poster", "data", "action", "cite", "xlink:href"})
_TOC_MIN_HEADINGS = 3


# --------------------------------------------------------------------- links

def relative_url(target: str, from_page: str) -> str:
    """Rewrite a site-root-absolute URL as a path relative to ``from_page``.

    Parameters
    ----------
    target : str
        ``/path[?query][#fragment]``; ``/`` and paths ending in ``/`` mean the
        folder's ``index.html`` (needed for ``file://``).
    from_page : str
        Site-relative path of the page holding the link.

    Returns
    -------
    str
        Relative URL; a link to a fragment of the same page becomes ``#id``.

    Examples
    --------
    >>> relative_url("/caution.html", "datasets/trio/index.html")
    '../../caution.html'
    >>> relative_url("/datasets/trio/index.html#claims", "datasets/trio/index.html")
    '#claims'
    """
    parts = urlsplit(target)
    path = parts.path.lstrip("/")
    if path == "" or path.endswith("/"):
        path += "index.html"
    if path == from_page and parts.fragment and not parts.query:
        return "#" + parts.fragment
    start = posixpath.dirname(from_page) or "."
    rel = posixpath.relpath(path, start)
    return urlunsplit(("", "", rel, parts.query, parts.fragment))


def _is_root_absolute(value: str) -> bool:
    return value.startswith("/") and not value.startswith("//")


class _LinkRewriter(HTMLParser):
    def __init__(self, page_path: str) -> None:
        super().__init__(convert_charrefs=True)
        self.page_path = page_path
        self.edits: list[tuple[int, int, int, str]] = []  # (line, col, length, new)

    def _visit(self, tag: str, attrs: list[tuple[str, str | None]], closed: bool) -> None:
        if not any(k in _URL_ATTRS and v is not None and _is_root_absolute(v)
                   for k, v in attrs):
            return
        raw = self.get_starttag_text() or ""
        pieces = [f"<{tag}"]
        for key, value in attrs:
            if value is None:
                pieces.append(f" {key}")
                continue
            if key in _URL_ATTRS and _is_root_absolute(value):
                value = relative_url(value, self.page_path)
            pieces.append(f' {key}="{_html_escape(value, quote=True)}"')
        pieces.append(" />" if closed else ">")
        line, col = self.getpos()
        self.edits.append((line, col, len(raw), "".join(pieces)))

    def handle_starttag(self, tag, attrs):  # noqa: D102 (HTMLParser API)
        self._visit(tag, attrs, closed=False)

    def handle_startendtag(self, tag, attrs):  # noqa: D102
        self._visit(tag, attrs, closed=True)


def rewrite_links(html: str, page_path: str) -> str:
    """Rewrite every root-absolute ``href``/``src`` (and similar) in ``html``.

    Only start tags that carry such an attribute are regenerated; all other
    bytes are left exactly as they were.
    """
    parser = _LinkRewriter(page_path)
    parser.feed(html)
    parser.close()
    if not parser.edits:
        return html
    line_starts = [0]
    for match in re.finditer("\n", html):
        line_starts.append(match.end())
    out: list[str] = []
    pos = 0
    for line, col, length, new in parser.edits:
        start = line_starts[line - 1] + col
        out.append(html[pos:start])
        out.append(new)
        pos = start + length
    out.append(html[pos:])
    return "".join(out)


# ------------------------------------------------------------- glossary terms

#: elements whose text never gets a glossary link: headings, existing links, code, and
#: anything not read as running text
TERM_SKIP_TAGS = frozenset({"a", "h1", "h2", "h3", "h4", "h5", "h6", "code", "pre", "kbd", "samp",
                            "script", "style", "svg", "button", "label", "title", "dt", "nav", "summary"})
_VOID = frozenset({"area", "base", "br", "col", "embed", "hr", "img", "input", "link", "meta",
                   "source", "track", "wbr"})


def _term_pattern(terms: tuple[Term, ...]) -> tuple[re.Pattern, dict[str, str]]:
    owner: dict[str, str] = {}
    for t in terms:
        for w in t.words:
            owner.setdefault(w.lower(), t.anchor)
    words = sorted(owner, key=lambda w: (-len(w), w))  # longest first: "elementary regression" before "regression"
    body = "|".join(re.escape(w).replace(r"\ ", r"\s+") for w in words)
    return re.compile(rf"(?<![\w-])({body})(?!\w)", re.IGNORECASE), owner


class _TextFinder(HTMLParser):
    """Positions of the running-text segments of an HTML fragment (outside :data:`TERM_SKIP_TAGS`)."""

    def __init__(self) -> None:
        super().__init__(convert_charrefs=False)
        self.stack: list[str] = []
        self.segments: list[tuple[int, int, str]] = []  # (line, col, raw text)

    def handle_starttag(self, tag, attrs):  # noqa: D102 (HTMLParser API)
        if tag not in _VOID:
            self.stack.append(tag)

    def handle_endtag(self, tag):  # noqa: D102
        if tag in self.stack:
            while self.stack and self.stack.pop() != tag:
                pass

    def handle_data(self, data):  # noqa: D102
        if data.strip() and not any(t in TERM_SKIP_TAGS for t in self.stack):
            line, col = self.getpos()
            self.segments.append((line, col, data))


def link_terms(html: str, terms: tuple[Term, ...], glossary: str) -> str:
    """Link the first use of each glossary term in ``html`` (a page body) to its entry.

    A use is a whole-word, case-insensitive match of one of the term's words in running
    text: text inside headings, links, code and the other :data:`TERM_SKIP_TAGS` does not
    count. Each term is linked once per page, at its first use; nothing else changes.
    """
    if not terms:
        return html
    pattern, owner = _term_pattern(terms)
    finder = _TextFinder()
    finder.feed(html)
    finder.close()
    line_starts = [0] + [m.end() for m in re.finditer("\n", html)]
    done: set[str] = set()
    edits: list[tuple[int, int, str]] = []
    for line, col, text in finder.segments:
        start = line_starts[line - 1] + col
        for m in pattern.finditer(text):
            anchor = owner[" ".join(m.group(1).lower().split())]
            if anchor in done:
                continue
            done.add(anchor)
            a = (f'<a class="term" href="/{glossary}#term-{anchor}">{m.group(1)}</a>')
            edits.append((start + m.start(), start + m.end(), a))
        if len(done) == len({t.anchor for t in terms}):
            break
    out, pos = [], 0
    for lo, hi, new in sorted(edits):
        out += [html[pos:lo], new]
        pos = hi
    out.append(html[pos:])
    return "".join(out)


# ---------------------------------------------------------------- the bundle

#: the timestamp of every member of the download-everything zip (the earliest a zip can hold)
_ZIP_TIME = (1980, 1, 1, 0, 0, 0)


def zip_bytes(files: Mapping[str, bytes], folder: str) -> bytes:
    """The files as one zip, every member under ``folder/``: same files, same bytes.

    Members are sorted by name, stored uncompressed (deflate output depends on the zlib
    build; stored bytes do not), stamped 1980-01-01 00:00 with mode 0644 and a Unix
    origin, and carry no comment or extra fields.
    """
    buf = io.BytesIO()
    with zipfile.ZipFile(buf, "w", compression=zipfile.ZIP_STORED, allowZip64=True) as zf:
        for path in sorted(files):
            info = zipfile.ZipInfo(f"{folder}/{path}", date_time=_ZIP_TIME)
            info.compress_type = zipfile.ZIP_STORED
            info.create_system = 3
            info.external_attr = 0o100644 << 16
            zf.writestr(info, files[path])
    return buf.getvalue()


# ------------------------------------------------------------------ checksums

def sha256sums(files: Mapping[str, bytes]) -> bytes:
    """``sha256sum`` text-format listing of ``files``, sorted by path."""
    lines = [f"{hashlib.sha256(files[p]).hexdigest()}  {p}\n" for p in sorted(files)]
    return "".join(lines).encode("utf-8")


def source_date(environ: Mapping[str, str] | None = None) -> str | None:
    """The build date from ``SOURCE_DATE_EPOCH`` as ``YYYY-MM-DD`` (UTC), or None.

    ``SOURCE_DATE_EPOCH`` is the reproducible-builds.org convention: seconds
    since 1970-01-01 UTC.

    Raises
    ------
    OptionsError
        If the variable is set but is not a whole, non-negative number.
    """
    env = os.environ if environ is None else environ
    raw = env.get("SOURCE_DATE_EPOCH")
    if raw is None or raw.strip() == "":
        return None
    text = raw.strip()
    if not text.isdigit():
        raise OptionsError(
            f"SOURCE_DATE_EPOCH must be a whole number of seconds since 1970-01-01 UTC; "
            f"got {raw!r}.", key="SOURCE_DATE_EPOCH",
            fix="set it to e.g. the last commit's time (git log -1 --format=%ct) or unset it.")
    try:
        stamp = _dt.datetime.fromtimestamp(int(text), tz=_dt.timezone.utc)
    except (OverflowError, OSError, ValueError):
        raise OptionsError(f"SOURCE_DATE_EPOCH is out of range; got {raw!r}.",
                           key="SOURCE_DATE_EPOCH",
                           fix="use seconds since 1970-01-01 UTC, e.g. 1767225600.") from None
    return stamp.strftime("%Y-%m-%d")


# ------------------------------------------------------------------ rendering

#: characters HTML does not allow in text (C0 controls but tab, newline and carriage return; DEL;
#: C1 controls; lone surrogates): dropped from every value a template prints
_NOT_IN_HTML = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f\x7f-\x9f\ud800-\udfff]")


def _drop_controls(value):
    """Jinja ``finalize``: every printed value loses the characters HTML does not allow."""
    if isinstance(value, str) and _NOT_IN_HTML.search(value):
        cleaned = _NOT_IN_HTML.sub("", value)
        return markupsafe.Markup(cleaned) if isinstance(value, markupsafe.Markup) else cleaned
    return value


def _environment() -> jinja2.Environment:
    return jinja2.Environment(
        loader=jinja2.PackageLoader("relspan.site", "templates"),
        autoescape=True,
        undefined=jinja2.StrictUndefined,
        keep_trailing_newline=True,
        finalize=_drop_controls,
    )


def _assets() -> dict[str, bytes]:
    out: dict[str, bytes] = {}
    folder = resources.files("relspan.site").joinpath("assets")
    for entry in sorted(folder.iterdir(), key=lambda e: e.name):
        if entry.is_file() and not entry.name.startswith("."):
            out[f"{ASSET_DIR}/{entry.name}"] = entry.read_bytes()
    return out


def _nav_rows(items: tuple[NavItem, ...], current: str, ancestors: set[str]) -> list[dict]:
    """Navigation as rows: the top level, then the children of the open entry, and so on.

    An entry is *current* when it is this page and *open* when this page lies
    below it (by breadcrumbs or by nesting); only open branches show a row.
    """
    def holds(item: NavItem) -> bool:
        return (item.path == current or item.path in ancestors
                or any(holds(c) for c in item.children))

    rows: list[dict] = []
    level, label = items, ""
    while level:
        row = []
        nxt: tuple[NavItem, ...] = ()
        for item in level:
            state = "current" if item.path == current else ("open" if holds(item) else "")
            row.append({"title": item.title, "path": item.path, "state": state})
            if state and item.children and not nxt:
                nxt, nxt_label = item.children, item.title
        rows.append({"entries": row, "label": label})
        if not nxt:
            break
        level, label = nxt, nxt_label
    return rows


def _check_layout(content: SiteContent, assets: Mapping[str, bytes]) -> None:
    """Raise ValueError on duplicate paths, reserved names and file/folder clashes."""
    seen: dict[str, str] = {}
    for what, path in ([("page", p.path) for p in content.pages]
                       + [("file", f.path) for f in content.files]):
        if path in seen:
            raise ValueError(f"site path {path!r} is used twice ({seen[path]} and {what}).")
        if path in RESERVED_NAMES or path.split("/")[0] == ASSET_DIR:
            raise ValueError(f"site path {path!r} is reserved for the renderer "
                             f"({', '.join(RESERVED_NAMES)}, {ASSET_DIR}/); choose another.")
        seen[path] = what
    if "index.html" not in seen or seen["index.html"] != "page":
        raise ValueError("the site needs a home page: a Page with path 'index.html'.")
    all_paths = set(seen) | set(assets)
    for path in all_paths:
        parts = path.split("/")
        for i in range(1, len(parts)):
            folder = "/".join(parts[:i])
            if folder in all_paths:
                raise ValueError(f"site path {folder!r} is a file but {path!r} needs it "
                                 "to be a folder.")


def _head_title(page: Page, site_title: str) -> str:
    return site_title if page.title == site_title else f"{page.title} \u2013 {site_title}"


def _render_page(env: jinja2.Environment, content: SiteContent, page: Page,
                 footer_html: str, caution_path: str | None, build_date: str | None) -> bytes:
    rendered = render_markdown(page.body_markdown)
    body = rendered.html
    if content.terms and page.path != content.glossary:
        body = link_terms(body, content.terms, content.glossary)
    show_title = not body.lstrip().startswith("<h1")
    h2 = [h for h in rendered.headings if h.level == 2]
    # the home page is read as panels and the datasets overview repeats the menu's second row: no strip
    toc = h2 if len(h2) >= _TOC_MIN_HEADINGS and page.section not in ("home", "datasets") else []
    ancestors = {path for _, path in page.breadcrumbs}
    # the trail names what the page belongs to; the home page is the site title's link
    trail = [(t, p) for t, p in page.breadcrumbs if p != "index.html"]
    description = page.description.strip() or f"{page.title}: {content.title}"
    html = env.get_template("base.html").render(
        language=content.language,
        csp=CSP,
        head_title=_head_title(page, content.title),
        description=" ".join(description.split()),
        site_title=content.title,
        page=page,
        nav=_nav_rows(content.nav, page.path, ancestors) if content.nav else [],
        trail=trail,
        archive=content.archive,
        show_title=show_title,
        toc=toc,
        body=body,
        footer=footer_html,
        caution_path=caution_path if caution_path != page.path else None,
        build_date=build_date,
    )
    return rewrite_links(html, page.path).encode("utf-8")


def render_site(content: SiteContent, *, build_date: str | None = None) -> dict[str, bytes]:
    """Render every page to HTML and collect every file of the site.

    Parameters
    ----------
    content : SiteContent
        Pages, files and navigation.
    build_date : str, optional
        ``YYYY-MM-DD`` shown in the footer (e.g. from :func:`source_date`);
        none is shown by default, so the output depends on ``content`` only.

    Returns
    -------
    dict of str to bytes
        Site-relative POSIX path -> file bytes, including ``assets/site.css``
        and ``SHA256SUMS`` (covering every other file), in sorted path order.

    Raises
    ------
    ValueError
        If two pages or files share a path, a reserved path is used, a path is
        both a file and a folder, or there is no ``index.html`` page.
    """
    if build_date is not None and not re.fullmatch(r"\d{4}-\d{2}-\d{2}", build_date):
        raise ValueError(f"build_date must look like 2026-01-31; got {build_date!r}.")
    assets = _assets()
    _check_layout(content, assets)
    env = _environment()
    caution = next((p.path for p in content.pages if p.section == "caution"), None)
    footer_md = render_markdown(content.footer).html if content.footer.strip() else ""
    out: dict[str, bytes] = dict(assets)
    for f in content.files:
        out[f.path] = f.data
    for page in content.pages:
        out[page.path] = _render_page(env, content, page, footer_md, caution, build_date)
    if content.archive:
        if content.archive in out:
            raise ValueError(f"site path {content.archive!r} is used twice (archive and page or file).")
        folder = re.sub(r"\.zip$", "", posixpath.basename(content.archive))
        out[content.archive] = zip_bytes(out, folder)
    out = {path: out[path] for path in sorted(out)}
    out[SUMS_NAME] = sha256sums(out)
    return out
