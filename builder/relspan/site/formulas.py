"""Formulas as small deterministic SVG images (matplotlib mathtext; no TeX, no network).

mathtext understands a large subset of TeX math (sub/superscripts, fractions,
Greek letters, operators, accents) but not environments such as matrices.
Glyphs are stored as paths, so the image needs no fonts on the reader's
machine. Same formula, same bytes: the SVG hash salt is fixed and the date
and creator metadata are left out, all inside ``matplotlib.rc_context`` so
global settings are never changed.
"""

from __future__ import annotations

import hashlib
import html
import io
import re
from dataclasses import dataclass

from relspan.site.content import SiteFile

__all__ = ["formula_svg", "FormulaImage", "formula_image"]

_PT_TO_PX = 96.0 / 72.0  # CSS: 1pt = 4/3 px (CSS Values and Units, absolute lengths)
_PAD_PT = 1.5
_RC = {
    "svg.hashsalt": "relspan-formula",
    "svg.fonttype": "path",
    "mathtext.fontset": "cm",
    "text.color": "#111111",
    "figure.facecolor": "none",
    "savefig.facecolor": "none",
    "savefig.edgecolor": "none",
}


def _as_mathtext(tex: str) -> str:
    if not isinstance(tex, str) or not tex.strip():
        raise ValueError("formula_svg needs a non-empty TeX math string such as r'y = \\beta x'.")
    tex = tex.strip()
    return tex if "$" in tex else f"${tex}$"


def _render(tex: str, fontsize: float) -> tuple[bytes, float, float]:
    """SVG bytes plus width and height in points.

    The formula is parsed once: the image is sized with the parse that draws it. The SVG renderer
    lays mathtext out with its own text-to-path converter (a parse at its reference size, scaled);
    that converter is made here, measures the formula, and is handed to the renderer, whose layout
    and drawing then reuse the same parse (matplotlib caches parses per parser). Measuring with a
    separate parser at the formula's own size, as before, parsed every formula twice.
    """
    from matplotlib import rc_context
    from matplotlib.backends.backend_svg import RendererSVG
    from matplotlib.figure import Figure
    from matplotlib.font_manager import FontProperties
    from matplotlib.textpath import TextToPath

    text = _as_mathtext(tex)
    with rc_context(_RC):
        prop = FontProperties(size=fontsize)
        to_path = TextToPath()
        try:
            width, height, depth = to_path.get_text_width_height_descent(text, prop, ismath=True)
        except ValueError as err:
            first = str(err).strip().splitlines()
            detail = " ".join(line.strip() for line in first if line.strip())
            raise ValueError(
                f"formula {tex!r} cannot be rendered by matplotlib mathtext ({detail}). "
                "Fix: use plain TeX math without environments (no matrices, no \\begin).") from None
        w = width + 2 * _PAD_PT
        h = height + 2 * _PAD_PT
        fig = Figure(figsize=(w / 72.0, h / 72.0), dpi=72)
        fig.text(_PAD_PT / w, (_PAD_PT + depth) / h, text, fontproperties=prop)
        buf = io.StringIO()
        # what ``savefig(format="svg")`` does for a figure with nothing rasterised, with the
        # renderer's text-to-path converter replaced by the one that measured the formula
        renderer = RendererSVG(w, h, buf, image_dpi=72,
                               metadata={"Date": None, "Creator": None, "Format": None, "Type": None})
        renderer._text2path = to_path
        fig.draw(renderer)
        renderer.finalize()
    data = buf.getvalue().encode("utf-8")
    # matplotlib writes a generator comment that names its version; drop it so the
    # bytes depend on the formula and glyph paths only.
    data = re.sub(rb"<!-- Created with matplotlib[^>]*-->\n?", b"", data)
    return data, w, h


def formula_svg(tex: str, *, fontsize: float = 14.0) -> bytes:
    """Render a TeX math formula to SVG bytes with matplotlib mathtext.

    Parameters
    ----------
    tex : str
        Math such as ``r"\\hat{\\Sigma} = S - \\mathrm{diag}(d)"``; ``$`` signs
        are added when missing.
    fontsize : float
        Font size in points.

    Returns
    -------
    bytes
        A standalone SVG document; identical for identical input.

    Raises
    ------
    ValueError
        If mathtext cannot parse the formula (the message says why and how to
        fix it).
    """
    return _render(tex, fontsize)[0]


@dataclass(frozen=True, slots=True)
class FormulaImage:
    """A rendered formula ready to place on a page.

    Attributes
    ----------
    file : SiteFile
        The SVG under a content-hashed name, e.g. ``formulas/f-3a9c....svg``.
    markdown : str
        Inline HTML ``<img>`` (site-root-absolute ``src``, escaped ``alt``,
        intrinsic ``width``/``height`` in CSS px) to paste into Markdown.
    width, height : int
        Intrinsic size in CSS pixels.
    """

    file: SiteFile
    markdown: str
    width: int
    height: int


def formula_image(tex: str, *, alt: str | None = None, folder: str = "formulas",
                  fontsize: float = 14.0) -> FormulaImage:
    """Render ``tex`` and return the SiteFile plus the snippet that shows it.

    Parameters
    ----------
    tex : str
        TeX math, see :func:`formula_svg`.
    alt : str, optional
        Plain-text alternative read by screen readers (escaped here). Prefer
        words ("y equals beta times x"); defaults to the TeX source.
    folder : str
        Site folder for formula images.
    fontsize : float
        Font size in points.
    """
    data, w, h = _render(tex, fontsize)
    digest = hashlib.sha256(data).hexdigest()[:16]
    path = f"{folder.strip('/')}/f-{digest}.svg"
    width = max(1, round(w * _PT_TO_PX))
    height = max(1, round(h * _PT_TO_PX))
    alt_text = tex.strip() if alt is None else alt
    snippet = (f'<img class="formula" src="/{html.escape(path, quote=True)}" '
               f'alt="{html.escape(alt_text, quote=True)}" width="{width}" height="{height}">')
    return FormulaImage(file=SiteFile(path=path, data=data), markdown=snippet,
                        width=width, height=height)
