"""What the site layer is given: pages, files and navigation (the contract).

The report layer describes a site as a :class:`SiteContent`; the renderer
(:func:`relspan.site.render.render_site`) turns it into bytes. Nothing here
does I/O.

Conventions for ``Page.body_markdown``
--------------------------------------
* Internal links and images are written *site-root-absolute*:
  ``[caution](/caution.html)``, ``![map](/figures/trio/map.svg)``. The
  renderer rewrites each to a path relative to the page, so the site works
  under any sub-path, from a zip file and from ``file://``. Link to files,
  not folders (``/datasets/trio/index.html``, not ``/datasets/trio/``).
* The template prints ``Page.title`` as the page's ``<h1>``; start the body
  at ``##`` (a body that itself opens with an ``<h1>`` suppresses the
  template's).
* Raw HTML in Markdown passes through unchanged, so user-supplied text
  (titles, labels, summaries, column names) must go through
  :func:`relspan.site.markdown.escape_text` / ``escape_cell`` first.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

__all__ = ["SECTIONS", "Page", "SiteFile", "NavItem", "Term", "SiteContent"]

#: Allowed values of :attr:`Page.section`.
SECTIONS = ("home", "datasets", "dataset", "window", "claims", "caution", "methods", "glossary",
            "reproduce", "downloads")

_SEGMENT = re.compile(r"^[^/\\\x00-\x1f\x7f]+$")
# BCP 47 language tag, simplified (common practice: primary subtag + subtags).
_LANG = re.compile(r"^[A-Za-z]{2,8}(-[A-Za-z0-9]{1,8})*$")


def _check_site_path(path: str, what: str) -> None:
    """Raise ValueError unless ``path`` is a clean site-relative POSIX path."""
    if not isinstance(path, str) or not path:
        raise ValueError(f"{what} must be a non-empty site-relative path; got {path!r}.")
    if path.startswith("/") or "\\" in path:
        raise ValueError(f"{what} must be site-relative POSIX without a leading '/'; "
                         f"got {path!r}. Write e.g. 'datasets/trio/index.html'.")
    for seg in path.split("/"):
        if seg in ("", ".", "..") or not _SEGMENT.match(seg):
            raise ValueError(f"{what} has an empty, '.', '..' or control-character segment: "
                             f"{path!r}.")


def _check_link_pair(pair: object, what: str) -> None:
    if (not isinstance(pair, tuple) or len(pair) != 2
            or not all(isinstance(x, str) for x in pair)):
        raise ValueError(f"{what} must be a (title, site-relative path) pair of strings; "
                         f"got {pair!r}.")
    _check_site_path(pair[1], f"{what} path")


@dataclass(frozen=True, slots=True)
class Page:
    """One HTML page of the site.

    Parameters
    ----------
    path : str
        Site-relative POSIX path ending in ``.html``, e.g. ``"index.html"``
        or ``"datasets/trio/index.html"``.
    title : str
        Plain text (it is HTML-escaped by the template; do not Markdown-escape).
    body_markdown : str
        The page body in Markdown (tables, attr_list, footnotes, toc,
        md_in_html and fenced code are enabled). Internal links are written
        site-root-absolute (``/caution.html``).
    section : str
        One of :data:`SECTIONS`; selects the highlighted nav entry.
    breadcrumbs : tuple of (title, path)
        Trail from the home page down to (not including) this page.
    prev, next : (title, path) or None
        Neighbours in reading order (window pages).
    description : str
        Plain text for ``<meta name="description">``.
    """

    path: str
    title: str
    body_markdown: str
    section: str
    breadcrumbs: tuple[tuple[str, str], ...] = ()
    prev: tuple[str, str] | None = None
    next: tuple[str, str] | None = None
    description: str = ""

    def __post_init__(self) -> None:
        _check_site_path(self.path, "Page.path")
        if not self.path.endswith(".html"):
            raise ValueError(f"Page.path must end in '.html'; got {self.path!r}.")
        if not isinstance(self.title, str) or not self.title.strip():
            raise ValueError(f"Page.title of {self.path!r} must be non-empty text.")
        if not isinstance(self.body_markdown, str):
            raise ValueError(f"Page.body_markdown of {self.path!r} must be a str.")
        if self.section not in SECTIONS:
            raise ValueError(f"Page.section of {self.path!r} must be one of "
                             f"{', '.join(SECTIONS)}; got {self.section!r}.")
        if not isinstance(self.breadcrumbs, tuple):
            raise ValueError(f"Page.breadcrumbs of {self.path!r} must be a tuple.")
        for i, crumb in enumerate(self.breadcrumbs):
            _check_link_pair(crumb, f"Page.breadcrumbs[{i}] of {self.path!r}")
        for name in ("prev", "next"):
            value = getattr(self, name)
            if value is not None:
                _check_link_pair(value, f"Page.{name} of {self.path!r}")
        if not isinstance(self.description, str):
            raise ValueError(f"Page.description of {self.path!r} must be a str.")


@dataclass(frozen=True, slots=True)
class SiteFile:
    """A file copied into the site as-is (figure, CSV, JSON, ...)."""

    path: str
    data: bytes

    def __post_init__(self) -> None:
        _check_site_path(self.path, "SiteFile.path")
        if not isinstance(self.data, bytes):
            raise ValueError(f"SiteFile.data of {self.path!r} must be bytes; "
                             f"got {type(self.data).__name__}.")


@dataclass(frozen=True, slots=True)
class NavItem:
    """One entry of the site navigation; ``children`` nest one level or more."""

    title: str
    path: str
    children: tuple[NavItem, ...] = ()

    def __post_init__(self) -> None:
        if not isinstance(self.title, str) or not self.title.strip():
            raise ValueError(f"NavItem.title for {self.path!r} must be non-empty text.")
        _check_site_path(self.path, "NavItem.path")
        if not isinstance(self.children, tuple) or not all(
                isinstance(c, NavItem) for c in self.children):
            raise ValueError(f"NavItem.children of {self.path!r} must be a tuple of NavItem.")


_ANCHOR = re.compile(r"^[a-z0-9][a-z0-9-]*$")


@dataclass(frozen=True, slots=True)
class Term:
    """A glossary term: the renderer links its first use on every page to its entry.

    Parameters
    ----------
    anchor : str
        Fragment id of the entry on the glossary page (lower case, digits, hyphens).
    words : tuple of str
        The forms that count as a use, matched as whole words and case-insensitively
        (``("corank", "coranks")``).
    """

    anchor: str
    words: tuple[str, ...]

    def __post_init__(self) -> None:
        if not isinstance(self.anchor, str) or not _ANCHOR.match(self.anchor):
            raise ValueError(f"Term.anchor must be lower-case letters, digits and hyphens; got {self.anchor!r}.")
        if (not isinstance(self.words, tuple) or not self.words
                or not all(isinstance(w, str) and w.strip() for w in self.words)):
            raise ValueError(f"Term.words of {self.anchor!r} must be a non-empty tuple of words.")


@dataclass(frozen=True, slots=True)
class SiteContent:
    """Everything the renderer needs to produce the site.

    Parameters
    ----------
    title : str
        Site title (plain text), shown in the header and every ``<title>``.
    language : str
        BCP 47 language tag for ``<html lang>``, e.g. ``"en"``.
    pages : tuple of Page
        Must include ``index.html``.
    files : tuple of SiteFile
        Extra files; ``assets/`` and ``SHA256SUMS`` are reserved.
    nav : tuple of NavItem
        Top-level navigation (datasets, claims, caution, ...).
    footer : str
        Markdown shown at the foot of every page (links site-root-absolute).
    glossary : str
        Site-relative path of the glossary page ("" for none).
    terms : tuple of Term
        Glossary terms; the first use of each in a page's running text (outside
        headings, code and existing links) becomes a link to its entry on
        ``glossary``. The glossary page itself is left as written.
    archive : str
        Site-relative path of a zip file holding every other file of the site
        (the download-everything bundle), or "" for none.
    """

    title: str
    language: str
    pages: tuple[Page, ...]
    files: tuple[SiteFile, ...]
    nav: tuple[NavItem, ...]
    footer: str = ""
    glossary: str = ""
    terms: tuple[Term, ...] = ()
    archive: str = ""

    def __post_init__(self) -> None:
        if not isinstance(self.title, str) or not self.title.strip():
            raise ValueError("SiteContent.title must be non-empty text.")
        if not isinstance(self.language, str) or not _LANG.match(self.language):
            raise ValueError(f"SiteContent.language must be a BCP 47 tag such as 'en'; "
                             f"got {self.language!r}.")
        for name, kind in (("pages", Page), ("files", SiteFile), ("nav", NavItem)):
            value = getattr(self, name)
            if not isinstance(value, tuple) or not all(isinstance(v, kind) for v in value):
                raise ValueError(f"SiteContent.{name} must be a tuple of {kind.__name__}.")
        if not isinstance(self.footer, str):
            raise ValueError("SiteContent.footer must be a str.")
        if not isinstance(self.terms, tuple) or not all(isinstance(t, Term) for t in self.terms):
            raise ValueError("SiteContent.terms must be a tuple of Term.")
        if self.terms and not self.glossary:
            raise ValueError("SiteContent.terms need SiteContent.glossary, the page they link to.")
        for name in ("glossary", "archive"):
            value = getattr(self, name)
            if not isinstance(value, str):
                raise ValueError(f"SiteContent.{name} must be a str.")
            if value:
                _check_site_path(value, f"SiteContent.{name}")
        if self.archive and not self.archive.endswith(".zip"):
            raise ValueError(f"SiteContent.archive must end in '.zip'; got {self.archive!r}.")
