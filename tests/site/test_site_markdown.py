"""Tests of relspan.site.markdown: escaping of user text, slugs, fresh instances."""

from __future__ import annotations

import re

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from relspan.site.markdown import escape_cell, escape_text, render_markdown, slugify
from htmltools import element_text, parse, squash

# Characters that mean something to Markdown or HTML, plus whitespace,
# control characters Python-Markdown uses internally, and non-ASCII letters.
_NASTY = list("<>&\"'\\`*_{}[]()#+-.!|~^=:;/%@ \t\n\r\x00\x02\x03\x0b\u2028")
_TEXT = st.text(alphabet=st.one_of(st.sampled_from(_NASTY + list("aZ9Üß数😀")),
                                   st.characters(blacklist_categories=("Cs",))),
                max_size=60)


def _expected(s: str) -> str:
    s = re.sub(r"[\x00-\x08\x0e-\x1f\x7f-\x84\x86-\x9f]", "", s)
    return squash(re.sub(r"[\t\n\r\f\v\u0085\u2028\u2029]", " ", s))


def _only_tags(html: str) -> set[str]:
    return {el.tag for el in parse(html).elements}


class TestEscapeText:
    @settings(max_examples=300, deadline=None)
    @given(_TEXT)
    def test_paragraph_shows_the_text_literally_and_adds_no_element(self, s):
        html = render_markdown("Before " + escape_text(s) + " after").html
        assert _only_tags(html) == {"p"}
        assert squash("".join(parse(html).texts)) == squash("Before " + _expected(s) + " after")

    @settings(max_examples=200, deadline=None)
    @given(_TEXT.filter(lambda s: _expected(s) != ""))
    def test_heading_shows_the_text_literally(self, s):
        html = render_markdown("## " + escape_text(s)).html
        els = parse(html).elements
        assert [e.tag for e in els] == ["h2"]
        assert element_text(els[0]) == _expected(s)

    @settings(max_examples=200, deadline=None)
    @given(_TEXT.filter(lambda s: _expected(s) != ""))
    def test_link_text_and_image_alt_keep_the_text(self, s):
        html = render_markdown(f"[{escape_text(s)}](/a.html) ![{escape_text(s)}](/b.svg)").html
        els = parse(html).elements
        assert [e.tag for e in els] == ["p", "a", "img"]
        assert element_text(els[1]) == _expected(s)
        assert squash(els[2].attrs["alt"] or "") == _expected(s)
        assert els[1].attrs == {"href": "/a.html"}

    @pytest.mark.parametrize("s", ["]:", "a]: b", "[x]: /y"])
    def test_text_that_looks_like_a_reference_definition_stays_text(self, s):
        # "[\\]:](/a.html)" was read as the definition of a link reference "\\" (found by hypothesis)
        html = render_markdown(f"[{escape_text(s)}](/a.html) ![{escape_text(s)}](/b.svg)").html
        els = parse(html).elements
        assert [e.tag for e in els] == ["p", "a", "img"]
        assert element_text(els[1]) == s and els[2].attrs["alt"] == s
        assert squash("".join(parse(render_markdown(escape_text(s)).html).texts)) == s

    def test_script_and_event_handler_become_text(self):
        s = '<script>alert("x")</script><img src=x onerror=alert(1)> & &amp;'
        html = render_markdown(escape_text(s)).html
        assert _only_tags(html) == {"p"}
        assert "<script" not in html and "<img" not in html
        assert squash("".join(parse(html).texts)) == s

    def test_markdown_syntax_is_not_interpreted(self):
        s = "# h *b* _i_ `c` [l](javascript:x) ![i](y) {#id .c} 1. 2) - + > | \\"
        html = render_markdown(escape_text(s)).html
        assert _only_tags(html) == {"p"}
        assert squash("".join(parse(html).texts)) == s

    def test_line_breaks_collapse_to_one_line(self):
        assert "\n" not in escape_text("a\n\n# b\r\n    c")
        assert escape_text("a\n\n  b") == "a b"


class TestEscapeCell:
    @settings(max_examples=200, deadline=None)
    @given(st.lists(_TEXT, min_size=2, max_size=2))
    def test_cells_keep_their_text_and_the_table_its_shape(self, cells):
        md = ("| h1 | h2 |\n|---|---|\n| " + " | ".join(escape_cell(c) for c in cells)
              + " |\n")
        doc = parse(render_markdown(md).html)
        tds = [e for e in doc.elements if e.tag == "td"]
        assert len(tds) == 2
        assert [element_text(td) for td in tds] == [_expected(c) for c in cells]
        assert {e.tag for e in doc.elements} <= {"div", "table", "thead", "tbody", "tr", "th",
                                                 "td"}


class TestSlugify:
    def test_keeps_letters_of_every_script(self):
        assert slugify("Ölçüm der Daten — 数据 2") == "ölçüm-der-daten-数据-2"

    def test_punctuation_runs_become_one_separator_and_empty_gets_a_name(self):
        assert slugify("  a -- b?!  ") == "a-b"
        assert slugify("***") == "section"

    def test_duplicate_headings_get_distinct_stable_ids(self):
        md = "## Über\n\ntext\n\n## Über\n\n## Über\n"
        first = render_markdown(md)
        assert [h.id for h in first.headings] == ["über", "über_1", "über_2"]
        assert render_markdown(md).html == first.html

    def test_headings_never_take_the_layouts_own_ids(self):
        out = render_markdown("## Main\n\n## Main\n")
        assert [h.id for h in out.headings] == ["main_1", "main_2"]
        assert "data-relspan-reserved" not in out.html

    def test_heading_text_is_plain_text(self):
        out = render_markdown("## A &amp; B <i>x</i>")
        assert out.headings[0].text == "A & B x"


class TestRenderMarkdown:
    def test_each_call_starts_fresh_so_footnotes_restart(self):
        md = "Text[^a].\n\n[^a]: Note.\n"
        assert render_markdown(md).html == render_markdown(md).html
        assert 'id="fn:a"' in render_markdown(md).html

    def test_tables_scroll_in_a_focusable_labelled_region(self):
        html = render_markdown("| a | b |\n|---|---|\n| 1 | 2 |\n").html
        div = [e for e in parse(html).elements if e.tag == "div"][0]
        assert div.attrs["class"] == "table-scroll"
        assert div.attrs["tabindex"] == "0" and div.attrs["role"] == "region"
        assert div.attrs["aria-label"].startswith("Table 1")

    def test_attr_list_and_md_in_html_are_enabled(self):
        html = render_markdown('## T {#custom}\n\n<div class="x" markdown="1">\n*e*\n</div>\n').html
        assert 'id="custom"' in html and "<em>e</em>" in html

    @pytest.mark.parametrize("bad", [None, 3, b"x"])
    def test_escape_text_rejects_non_text(self, bad):
        with pytest.raises(TypeError, match="expects str"):
            escape_text(bad)


# ------------------------------------------------------------------ escaping by default (Raw)

def test_composed_plain_text_is_escaped_and_only_raw_passes_through():
    from relspan.site.markdown import Raw, bullets, link, md, table

    hostile = "<script>x</script> *b* [l](u) | p"
    out = md("**{}** and {}", hostile, Raw("*kept*"))
    assert "<script>" not in out and "&lt;script&gt;" in out and "*kept*" in out
    assert render_markdown(out).html.count("<em>") == 1  # only the Raw emphasis
    assert "<script>" not in table(("h",), [(hostile,)]) and "\\|" in table(("h",), [(hostile,)])
    assert "<script>" not in bullets([hostile]) and "<script>" not in link(hostile, "/a.html")


def test_raw_markdown_refuses_to_join_plain_text():
    from relspan.site.markdown import Raw

    assert isinstance(Raw("a") + Raw("b"), Raw)
    with pytest.raises(TypeError, match="only be joined with Raw"):
        Raw("a") + "<b>"
    with pytest.raises(TypeError, match="only be joined with Raw"):
        "<b>" + Raw("a")


def test_blocks_escape_a_plain_text_body():
    from relspan.site import blocks
    from relspan.site.markdown import Raw

    assert "&lt;i&gt;" in blocks.callout("<i>x</i>") and "<i>x</i>" in blocks.callout(Raw("<i>x</i>"))
