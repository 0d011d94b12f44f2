"""relspan.site: SiteContent in, a folder of bytes out.

Markdown to HTML (:mod:`.markdown`), one layout (``templates/base.html``), one
stylesheet (``assets/site.css``), formula images (:mod:`.formulas`), styled
blocks (:mod:`.blocks`), rendering with relative links and ``SHA256SUMS``
(:mod:`.render`), the atomic writer (:mod:`.writer`) and the link checker
(:mod:`.links`), and a local preview server (:mod:`.serve`).
"""

from __future__ import annotations

from relspan.site.blocks import CARD_KINDS, VERDICTS, badge, callout, card, cards, details, figure
from relspan.site.content import SECTIONS, NavItem, Page, SiteContent, SiteFile, Term
from relspan.site.formulas import FormulaImage, formula_image, formula_svg
from relspan.site.links import PROBLEM_KINDS, Problem, check_files, check_site
from relspan.site.markdown import (Heading, RenderedMarkdown, escape_cell, escape_text,
                                   render_markdown, slugify)
from relspan.site.render import (SUMS_NAME, relative_url, render_site, rewrite_links,
                                 sha256sums, source_date)
from relspan.site.writer import MARKER, check_output, write_site

__all__ = [
    "SECTIONS", "Page", "SiteFile", "NavItem", "SiteContent", "Term",
    "render_markdown", "RenderedMarkdown", "Heading", "escape_text", "escape_cell", "slugify",
    "CARD_KINDS", "VERDICTS", "card", "cards", "badge", "callout", "details", "figure",
    "formula_svg", "formula_image", "FormulaImage",
    "render_site", "relative_url", "rewrite_links", "sha256sums", "source_date", "SUMS_NAME",
    "write_site", "check_output", "MARKER", "serve_folder", "make_server",
    "check_site", "check_files", "Problem", "PROBLEM_KINDS",
]


def __getattr__(name: str):
    # the preview server (http.server, and with it ssl and email) is imported only when asked
    # for: a build never needs it
    if name in ("make_server", "serve_folder"):
        from relspan.site import serve

        return getattr(serve, name)
    raise AttributeError(f"module 'relspan.site' has no attribute {name!r}")
