"""Markdown to HTML for the site, and escaping of user text.

Python-Markdown passes raw HTML through unchanged, so text never reaches
Markdown unescaped. Pages are composed with the helpers below, which escape
by default: a plain ``str`` (a title, a label, a finding's sentence) is
escaped when it is composed (:func:`escape_text` in running text,
:func:`escape_cell` in a table cell); only :class:`Raw` passes through.
``Raw`` is made by these helpers, or by report code around Markdown it
writes itself (its own headings, links to its own pages): the one named
raw path, easy to find by its name.

* :func:`md` fills a template (Markdown written in code) with arguments;
* :func:`link`, :func:`code`, :func:`table`, :func:`bullets`, :func:`inline`
  and :func:`cell` take text and escape it themselves;
* :func:`blocks <relspan.site.blocks>` (cards, callouts, figures) take
  ``Raw`` bodies and escape everything else.

Each call of :func:`render_markdown` uses a fresh ``markdown.Markdown``
instance, so no state (footnote counters, used ids) leaks between pages and
the output depends on the input text only.
"""

from __future__ import annotations

import html as _html
import re
import unicodedata
import xml.etree.ElementTree as etree
from dataclasses import dataclass

import markdown as _md
from markdown.extensions import Extension
from markdown.treeprocessors import Treeprocessor
from markdown.postprocessors import Postprocessor

__all__ = ["RESERVED_IDS", "Heading", "RenderedMarkdown", "render_markdown", "slugify", "escape_text",
           "escape_cell", "Raw", "inline", "cell", "md", "link", "code", "table", "bullets", "joined"]

#: Element ids the page layout uses itself (``<main id="main">``); headings never get them.
RESERVED_IDS = ("main",)

# Characters that would start HTML or an entity; replaced by entities.
_HTML_ENTITIES = {"&": "&amp;", "<": "&lt;", ">": "&gt;", '"': "&quot;", "'": "&#39;"}
# Characters Python-Markdown treats specially (its ESCAPED_CHARS with the
# tables extension, minus '>' which becomes an entity); backslash-escaped.
_MD_SPECIALS = frozenset("\\`*_{}[]()#+-.!|")
# Whitespace the browser collapses into one space, plus Unicode line breaks
# that Markdown or HTML might treat as line ends.
_WHITESPACE = re.compile(r"[ \t\n\r\f\v\u0085\u2028\u2029]+")
# C0/C1 controls (Python-Markdown uses \x02/\x03 internally as placeholders).
_CONTROLS = re.compile(r"[\x00-\x08\x0e-\x1f\x7f-\x84\x86-\x9f]")


def _normalise_plain(text: str) -> str:
    if not isinstance(text, str):
        raise TypeError(f"escape_text expects str; got {type(text).__name__}.")
    return _WHITESPACE.sub(" ", _CONTROLS.sub("", text))


def escape_text(text: str) -> str:
    """Markdown that renders as ``text`` literally, with no markup.

    HTML-significant characters (``& < > " '``) become entities and Markdown
    specials are backslash-escaped. Runs of whitespace (including line
    breaks) become one space, exactly as a browser would show them, so the
    result is always one line and safe inside headings, list items, link
    text and image alt text. Other Unicode spaces (no-break space, ...)
    become numeric entities so Markdown cannot strip them. Control
    characters are dropped.

    Parameters
    ----------
    text : str
        User-supplied plain text.

    Returns
    -------
    str
        Markdown source.

    Examples
    --------
    >>> escape_text('<b>"R&D"</b> *x*')
    '&lt;b&gt;&quot;R&amp;D&quot;&lt;/b&gt; \\\\*x\\\\*'
    """
    out = []
    prev = ""
    for ch in _normalise_plain(text):
        if ch == ":" and prev == "]":
            # "]:" would let the line read as a reference definition ("[id]: url"), which the
            # block parser finds before backslash escapes are applied; an entity breaks the match
            out.append("&#58;")
        elif ch in _HTML_ENTITIES:
            out.append(_HTML_ENTITIES[ch])
        elif ch in _MD_SPECIALS:
            out.append("\\" + ch)
        elif ch != " " and ch.isspace():
            out.append(f"&#{ord(ch)};")  # no-break and other Unicode spaces survive stripping
        else:
            out.append(ch)
        prev = ch
    return "".join(out)


def escape_cell(text: str) -> str:
    """Like :func:`escape_text`, for a cell of a Markdown pipe table.

    Pipes are escaped so they cannot split the cell, the result is one line,
    and leading/trailing spaces are trimmed (the table syntax trims them
    anyway).
    """
    return escape_text(text).strip(" ")


class Raw(str):
    """Markdown source that is already safe: composing it never escapes it again.

    Build one only around Markdown that relspan's own code writes (headings,
    emphasis, links to the site's pages) or through the helpers of this
    module; text from a spec, a data file or an analysis result stays a plain
    ``str`` and is escaped when composed.
    """

    __slots__ = ()

    def __add__(self, other):
        return Raw(str.__add__(self, _markdown_operand(other)))

    def __radd__(self, other):
        return Raw(str.__add__(_markdown_operand(other), self))


def _markdown_operand(other) -> str:
    """Only Markdown joins Markdown: ``Raw + str`` would lose track of what is escaped."""
    if isinstance(other, Raw):
        return other
    if isinstance(other, str):
        raise TypeError("Raw Markdown can only be joined with Raw: escape text with inline()/md(), "
                        "or mark Markdown written in code as Raw(...).")
    return NotImplemented


def inline(value: str) -> Raw:
    """``value`` as Markdown in running text: escaped (:func:`escape_text`) unless it is :class:`Raw`."""
    return value if isinstance(value, Raw) else Raw(escape_text(value))


def cell(value: str) -> Raw:
    """``value`` as a table cell: escaped (:func:`escape_cell`) unless it is :class:`Raw`."""
    return value if isinstance(value, Raw) else Raw(escape_cell(value))


def md(template: str, *args: str) -> Raw:
    """Fill the ``{}`` slots of ``template`` (Markdown written in code) with escaped arguments.

    Each argument is escaped by :func:`inline` unless it is :class:`Raw`;
    literal braces in the template are doubled, as in :meth:`str.format`.

    Examples
    --------
    >>> md("**{}** ({})", "a*b", link("page", "/p.html"))
    '**a\\*b** ([page](/p.html))'
    """
    return Raw(template.format(*(inline(a) for a in args)))


def link(label: str, href: str) -> Raw:
    """A link with escaped text; ``href`` is an address the site's own code built."""
    return Raw(f"[{inline(label)}]({href})")


def code(value: str) -> Raw:
    """``value`` as inline code, safe in paragraphs and table cells (no Markdown escapes shown)."""
    return Raw("<code>" + _html.escape(str(value), quote=True).replace("|", "&#124;") + "</code>")


def joined(parts, sep: str = "") -> Raw:
    """The parts, each escaped unless :class:`Raw`, joined by ``sep`` (Markdown written in code)."""
    return Raw(sep.join(inline(p) for p in parts))


def bullets(items) -> Raw:
    """A Markdown list, one item per element (each escaped unless :class:`Raw`)."""
    return Raw("\n".join(f"- {inline(i)}" for i in items))


def table(header, rows) -> Raw:
    """A Markdown pipe table; every cell is escaped by :func:`cell` unless it is :class:`Raw`."""
    head = "| " + " | ".join(cell(h) for h in header) + " |"
    sep = "|" + "|".join("---" for _ in header) + "|"
    body = ["| " + " | ".join(cell(c) for c in r) + " |" for r in rows]
    return Raw("\n".join([head, sep, *body]) + "\n")


def slugify(value: str, separator: str = "-") -> str:
    """Deterministic, Unicode-keeping heading id.

    Letters and digits of every script are kept (after NFKC normalisation
    and case folding to lower case); every other run of characters becomes
    one ``separator``. An empty result becomes ``"section"``. The toc
    extension de-duplicates repeated slugs by appending ``_1``, ``_2``, ...
    """
    value = unicodedata.normalize("NFKC", value).lower()
    value = re.sub(r"[^\w]+|_+", separator, value)
    value = value.strip(separator)
    return value or "section"


@dataclass(frozen=True, slots=True)
class Heading:
    """A heading found in a rendered page (for an on-page table of contents)."""

    level: int
    id: str
    text: str


@dataclass(frozen=True, slots=True)
class RenderedMarkdown:
    """HTML of one Markdown document and its headings in order."""

    html: str
    headings: tuple[Heading, ...]


class _TableWrapper(Treeprocessor):
    """Wrap every table in a focusable, labelled region that scrolls sideways.

    A wide table then scrolls inside its own box instead of widening the page,
    and keyboard users can scroll it (WCAG 2.1.1 Keyboard).
    """

    def run(self, root: etree.Element) -> None:
        count = 0
        for parent in list(root.iter()):
            for index, child in enumerate(list(parent)):
                if child.tag != "table":
                    continue
                if parent.tag == "div" and "table-scroll" in parent.get("class", ""):
                    continue
                count += 1
                wrapper = etree.Element("div", {
                    "class": "table-scroll", "tabindex": "0", "role": "region",
                    "aria-label": f"Table {count} (scrolls sideways when wide)"})
                wrapper.tail = child.tail
                child.tail = None
                parent.remove(child)
                wrapper.append(child)
                parent.insert(index, wrapper)


class _ReserveIds(Treeprocessor):
    """Hold the layout's own ids so toc never gives them to a heading."""

    def run(self, root: etree.Element) -> None:
        for ident in RESERVED_IDS:
            root.append(etree.Element("div", {"id": ident, "data-relspan-reserved": ""}))


class _ReleaseIds(Treeprocessor):
    def run(self, root: etree.Element) -> None:
        for el in [e for e in root if e.get("data-relspan-reserved") is not None]:
            root.remove(el)


class _FocusablePre(Postprocessor):
    """Make code blocks focusable regions, so keyboard users can scroll wide ones (WCAG 2.1.1)."""

    def run(self, text: str) -> str:
        return text.replace("<pre><code", '<pre tabindex="0" role="region" '
                                           'aria-label="Code block (scrolls sideways when wide)"><code')


class _SiteExtension(Extension):
    def extendMarkdown(self, md: _md.Markdown) -> None:  # noqa: N802 (API name)
        md.postprocessors.register(_FocusablePre(md), "relspan_focusable_pre", 5)
        # Run after inline processing (priority 20) and before prettify (10);
        # the toc ids are made at 5, between reserving and releasing ours.
        md.treeprocessors.register(_TableWrapper(md), "relspan_tables", 15)
        md.treeprocessors.register(_ReserveIds(md), "relspan_reserve_ids", 14)
        md.treeprocessors.register(_ReleaseIds(md), "relspan_release_ids", 4)


def _new_markdown() -> _md.Markdown:
    return _md.Markdown(
        extensions=["tables", "attr_list", "footnotes", "toc", "md_in_html", "fenced_code",
                    _SiteExtension()],
        extension_configs={"toc": {"slugify": slugify, "permalink": False},
                           "footnotes": {"BACKLINK_TITLE": "Back to reference %d"}},
        output_format="html",
    )


def _flatten(tokens: list[dict]) -> list[Heading]:
    out: list[Heading] = []
    for tok in tokens:
        out.append(Heading(level=int(tok["level"]), id=str(tok["id"]), text=_html.unescape(str(tok["name"]))))
        out.extend(_flatten(tok.get("children", [])))
    return out


def render_markdown(text: str) -> RenderedMarkdown:
    """Render one Markdown document with the site's extensions.

    Enabled: tables (each wrapped in a scrolling region), attr_list,
    footnotes, toc (ids from :func:`slugify`), md_in_html, fenced_code.
    A fresh ``Markdown`` instance is used per call.

    Parameters
    ----------
    text : str
        Markdown source; user text inside it must already be escaped.

    Returns
    -------
    RenderedMarkdown
    """
    md = _new_markdown()
    html = md.convert(text)
    headings = tuple(_flatten(getattr(md, "toc_tokens", [])))
    return RenderedMarkdown(html=html, headings=headings)
