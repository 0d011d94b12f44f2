"""Tests of relspan.site.formulas (matplotlib mathtext -> SVG)."""

from __future__ import annotations

import hashlib
import xml.etree.ElementTree as ET

import matplotlib
import pytest

from relspan.site import formula_image, formula_svg, render_markdown
from htmltools import parse

_SVG = "{http://www.w3.org/2000/svg}"


class TestFormulaSvg:
    def test_same_formula_gives_the_same_bytes(self):
        tex = r"\hat{\Sigma} = S - \mathrm{diag}(d_1, \ldots, d_n)"
        assert formula_svg(tex) == formula_svg(tex)

    def test_output_is_a_standalone_svg_with_glyph_paths_and_no_date(self):
        data = formula_svg(r"\frac{1}{P_{jj}} \geq d_j")
        root = ET.fromstring(data)
        assert root.tag == f"{_SVG}svg"
        assert root.findall(f".//{_SVG}path")  # glyphs as paths: no fonts needed
        assert not root.findall(f".//{_SVG}text")
        assert b"<dc:date>" not in data and b"matplotlib v" not in data.lower()

    def test_different_formulas_give_different_images(self):
        assert formula_svg("a + b") != formula_svg("a - b")

    def test_dollar_signs_are_optional(self):
        assert formula_svg("x^2") == formula_svg("$x^2$")

    def test_global_rcparams_are_left_untouched(self):
        before = dict(matplotlib.rcParams)
        formula_svg("y = x")
        assert dict(matplotlib.rcParams) == before

    def test_each_formula_is_parsed_once(self, monkeypatch):
        # the image is sized with the parse that draws it (measuring with a second parser at
        # another size parsed every formula twice)
        from matplotlib import _mathtext

        calls = []
        real = _mathtext.Parser.parse

        def counting(self, s, *args, **kwargs):
            calls.append(s)
            return real(self, s, *args, **kwargs)

        monkeypatch.setattr(_mathtext.Parser, "parse", counting)
        formula_svg(r"\sum_{j \leq k} \ln \lambda_j - q \ln \bar{\lambda}")  # not rendered by other tests
        assert len(calls) == 1

    def test_the_glyphs_lie_inside_the_image_with_its_padding(self):
        # the image box is the formula's measured box plus 1.5 pt on every side: the glyphs' group
        # starts 1.5 pt from the left, and its baseline sits the measured depth + 1.5 pt above the bottom
        import re

        from matplotlib.font_manager import FontProperties
        from matplotlib.textpath import TextToPath

        tex = r"\hat{\beta}_{jk} = -P_{jk}/P_{jj}"
        root = ET.fromstring(formula_svg(tex))
        w, h = (float(root.get(k).removesuffix("pt")) for k in ("width", "height"))
        with matplotlib.rc_context({"mathtext.fontset": "cm"}):
            tw, th, td = TextToPath().get_text_width_height_descent(f"${tex}$", FontProperties(size=14.0),
                                                                     ismath=True)
        assert w == pytest.approx(tw + 3.0, abs=0.01) and h == pytest.approx(th + 3.0, abs=0.01)
        group = next(g for g in root.iter(f"{_SVG}g") if "translate" in (g.get("transform") or ""))
        x, y = map(float, re.search(r"translate\(([-\d.]+) ([-\d.]+)\)", group.get("transform")).groups())
        assert x == pytest.approx(1.5, abs=0.01) and y == pytest.approx(h - td - 1.5, abs=0.01)

    @pytest.mark.parametrize("bad", [r"\frac{1", r"\begin{matrix} a \end{matrix}", ""])
    def test_unrenderable_formula_says_why_and_how_to_fix(self, bad):
        with pytest.raises(ValueError, match="(cannot be rendered|non-empty).*") as err:
            formula_svg(bad)
        assert "Fix" in str(err.value) or "non-empty" in str(err.value)


class TestFormulaImage:
    def test_file_name_is_the_hash_of_its_bytes(self):
        img = formula_image(r"\sin\theta \leq \epsilon / \lambda_{q+1}")
        digest = hashlib.sha256(img.file.data).hexdigest()[:16]
        assert img.file.path == f"formulas/f-{digest}.svg"
        assert img.file.data == formula_svg(r"\sin\theta \leq \epsilon / \lambda_{q+1}")

    def test_snippet_is_an_img_with_escaped_alt_and_size(self):
        img = formula_image("a < b", alt='a is "less" than b & <script>')
        els = parse(render_markdown("Text " + img.markdown + " more").html).elements
        assert [e.tag for e in els] == ["p", "img"]
        attrs = els[1].attrs
        assert attrs["alt"] == 'a is "less" than b & <script>'
        assert attrs["src"] == "/" + img.file.path and attrs["class"] == "formula"
        assert int(attrs["width"]) == img.width > 0 and int(attrs["height"]) == img.height > 0

    def test_alt_defaults_to_the_tex_source(self):
        assert 'alt="x_1"' in formula_image("x_1").markdown
