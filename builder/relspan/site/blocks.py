"""Markdown snippets for the site's styled blocks (cards, badges, callouts, figures).

Report code builds pages from these so that the markup matches the
stylesheet (``builder/relspan/site/assets/site.css``) and user text is always escaped.
Arguments named ``*_markdown`` are escaped here unless they are
:class:`~relspan.site.markdown.Raw` (Markdown built by the helpers of
:mod:`relspan.site.markdown`); arguments named ``label``, ``alt``,
``summary`` or ``heading`` are plain text and are always escaped.

Every snippet starts and ends on its own line with blank lines around it, so
it can be concatenated with other Markdown blocks.
"""

from __future__ import annotations

import html

from relspan.site.markdown import Raw, escape_text, inline

__all__ = ["CARD_KINDS", "VERDICTS", "card", "cards", "badge", "callout", "figure", "details"]

#: Home-page card kinds and the words shown on each card (never colour alone).
CARD_KINDS = {
    "pinned": "Pinned down",
    "open": "Left open",
    "depends": "Depends on your noise assumption",
    "unstable": "Unstable across windows",
}

#: Claim verdicts, the symbol shown before the word, and the word.
VERDICTS = {
    "holds": ("\u2713", "holds"),     # check mark
    "fails": ("\u2717", "fails"),     # ballot x
    "warning": ("!", "warning"),
    "cannot be judged": ("?", "cannot be judged"),
}

_CALLOUT_KINDS = ("caution", "note")


def _attr(text: str) -> str:
    return html.escape(text, quote=True)


def _block(text: str) -> Raw:
    return Raw("\n\n" + text.strip("\n") + "\n\n")


def card(kind: str, heading: str, body_markdown: str) -> str:
    """One home-page card.

    Parameters
    ----------
    kind : {"pinned", "open", "depends", "unstable"}
        Which finding the card reports; the kind's words from
        :data:`CARD_KINDS` are printed as the card's label.
    heading : str
        Plain text (escaped here), e.g. the dataset's title.
    body_markdown : str
        Safe Markdown for the card body.
    """
    if kind not in CARD_KINDS:
        raise ValueError(f"card kind must be one of {', '.join(CARD_KINDS)}; got {kind!r}.")
    return _block(
        f'<article class="card card-{kind}" markdown="1">\n'
        f'<p class="card-label">{_attr(CARD_KINDS[kind])}</p>\n\n'
        f"### {escape_text(heading)}\n\n"
        f"{inline(body_markdown).strip()}\n\n"
        f"</article>")


def cards(*snippets: str) -> str:
    """A responsive grid holding :func:`card` snippets."""
    inner = "\n".join(inline(s).strip("\n") + "\n" for s in snippets)
    return _block(f'<div class="cards" markdown="1">\n\n{inner}\n</div>')


def badge(verdict: str) -> str:
    """Inline verdict badge: a symbol and a word, so it never relies on colour.

    Returns inline HTML (usable in paragraphs and table cells).
    """
    if verdict not in VERDICTS:
        raise ValueError(f"verdict must be one of {', '.join(VERDICTS)}; got {verdict!r}.")
    symbol, word = VERDICTS[verdict]
    return Raw(f'<span class="badge badge-{verdict.replace(" ", "-")}"><span class="badge-symbol" '
               f'aria-hidden="true">{_attr(symbol)}</span> {_attr(word)}</span>')


def callout(body_markdown: str, *, title: str = "Caution", kind: str = "caution") -> str:
    """A boxed note; ``kind="caution"`` for interpretation warnings.

    The title (plain text) is printed as words, so the box is not signalled
    by colour alone.
    """
    if kind not in _CALLOUT_KINDS:
        raise ValueError(f"callout kind must be one of {', '.join(_CALLOUT_KINDS)}; "
                         f"got {kind!r}.")
    return _block(
        f'<aside class="callout callout-{kind}" markdown="1">\n'
        f'<p class="callout-title">{_attr(title)}</p>\n\n'
        f"{inline(body_markdown).strip()}\n\n"
        f"</aside>")


def details(summary: str, body_markdown: str) -> str:
    """A collapsed block (``<details>``) whose summary is plain text."""
    return _block(
        f'<details class="more" markdown="1">\n'
        f"<summary>{_attr(summary)}</summary>\n\n"
        f"{inline(body_markdown).strip()}\n\n"
        f"</details>")


def figure(src: str, alt: str, caption_markdown: str = "", *,
           long_description_markdown: str = "", width: int | None = None,
           height: int | None = None, css_class: str = "", link_image: bool = False) -> str:
    """A figure with caption and an optional long description in ``<details>``.

    Parameters
    ----------
    src : str
        Site-root-absolute image path, e.g. ``/figures/trio/map.svg``.
    alt : str
        Plain-text alternative (escaped here); say what the figure shows.
    caption_markdown : str
        Safe Markdown for the visible caption.
    long_description_markdown : str
        Safe Markdown describing the figure fully (values, trends), shown in a
        collapsed "Long description" block for readers who cannot see it.
    width, height : int, optional
        Intrinsic size in CSS pixels (avoids layout shift).
    css_class : str
        Extra class for the ``<img>``.
    link_image : bool
        Wrap the image in a link to its own file, so a reader can open it alone at full size
        (and a keyboard reaches the frame it scrolls in on narrow screens, site.css).
    """
    if not src.startswith("/") or src.startswith("//"):
        raise ValueError(f"figure src must be site-root-absolute like '/figures/a.svg'; "
                         f"got {src!r}.")
    size = ""
    if width is not None:
        size += f' width="{int(width)}"'
    if height is not None:
        size += f' height="{int(height)}"'
    cls = f' class="{_attr(css_class)}"' if css_class else ""
    image = f'<img src="{_attr(src)}" alt="{_attr(alt)}"{size}{cls}>'
    if link_image:
        image = f'<a class="fig-open" href="{_attr(src)}">{image}</a>'
    parts = [f'<figure class="fig" markdown="1">', image]
    if caption_markdown.strip():
        parts.append(f'<figcaption markdown="1">\n\n{inline(caption_markdown).strip()}\n\n</figcaption>')
    if long_description_markdown.strip():
        parts.append(details("Long description", inline(long_description_markdown)).strip("\n"))
    parts.append("</figure>")
    return _block("\n".join(parts))
