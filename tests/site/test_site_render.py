"""Tests of relspan.site.render on the synthetic sample site."""

from __future__ import annotations

import dataclasses
import hashlib
import json
import shutil
import subprocess

import pytest

from relspan.errors import OptionsError
from relspan.site import (Page, SiteContent, check_files, relative_url, render_site,
                          rewrite_links, source_date, write_site)
from htmltools import element_text, parse, squash, visible_text
from sample_content import (EVIL_COLUMN, EVIL_LABEL, EVIL_TEXTS, EVIL_TITLE, EVIL_UNICODE,
                            SITE_TITLE, build_sample_content)

# Every element the layout, Markdown and blocks may produce; anything else is injected.
_ALLOWED_TAGS = {
    "html", "head", "meta", "title", "link", "body", "a", "header", "div", "p", "nav", "ul",
    "ol", "li", "span", "main", "h1", "h2", "h3", "footer", "strong", "em", "code", "pre",
    "table", "thead", "tbody", "tr", "th", "td", "figure", "figcaption", "img", "details",
    "summary", "aside", "article", "sup", "hr", "time",
}


@pytest.fixture(scope="module")
def site() -> dict[str, bytes]:
    return render_site(build_sample_content())


def _pages(site):
    return {p: b.decode("utf-8") for p, b in site.items() if p.endswith(".html")}


class TestEscaping:
    def test_no_page_holds_an_injected_element_or_attribute(self, site):
        for path, html in _pages(site).items():
            doc = parse(html)
            tags = {e.tag for e in doc.elements}
            assert tags <= _ALLOWED_TAGS, (path, tags - _ALLOWED_TAGS)
            for el in doc.elements:
                for key, value in el.attrs.items():
                    assert not key.startswith("on"), (path, el.tag, key)
                    assert "javascript:" not in (value or "").lower(), (path, el.tag, key)
                if el.tag == "img":
                    assert set(el.attrs) <= {"src", "alt", "width", "height", "class"}

    def test_user_text_is_shown_literally(self, site):
        pages = _pages(site)
        home = visible_text(pages["index.html"])
        for text in (EVIL_TITLE, EVIL_UNICODE, EVIL_LABEL):
            assert squash(text) in home
        trio = visible_text(pages["datasets/trio/index.html"])
        assert squash(EVIL_LABEL) in trio
        ths = [element_text(e) for e in parse(pages["datasets/trio/index.html"]).elements
               if e.tag == "th"]
        assert ths == ["Assumption", squash(EVIL_COLUMN), EVIL_UNICODE]

    def test_titles_and_descriptions_are_escaped_once(self, site):
        doc = parse(_pages(site)["datasets/trio/index.html"])
        title = [e for e in doc.elements if e.tag == "title"][0]
        assert element_text(title) == f"Trio: {squash(EVIL_TITLE)} \u2013 {SITE_TITLE}"
        home = parse(_pages(site)["index.html"])
        meta = [e for e in home.elements if e.tag == "meta" and e.attrs.get("name") ==
                "description"][0]
        assert meta.attrs["content"] == f"What the invented data pin down. {EVIL_TITLE}"

    def test_downloads_keep_user_text_byte_for_byte(self, site):
        assert json.loads(site["downloads/trio/results.json"])["title"] == EVIL_TITLE


class TestLinks:
    def test_built_sample_site_has_no_link_problems(self, site):
        assert check_files(site) == []

    def test_nested_pages_link_relative_to_themselves(self, site):
        win = parse(_pages(site)["datasets/trio/windows/w-002.html"])
        css = [e.attrs["href"] for e in win.elements if e.tag == "link"
               and e.attrs.get("rel") == "stylesheet"]
        assert css == ["../../../assets/site.css"]
        hrefs = {e.attrs["href"] for e in win.elements if e.tag in ("a", "link")}
        assert "../index.html#results-side-by-side" in hrefs
        assert {"w-001.html", "w-003.html", "../../../caution.html"} <= hrefs
        for page, html in _pages(site).items():
            for el in parse(html).elements:
                for key in ("href", "src"):
                    value = el.attrs.get(key) or ""
                    assert not (value.startswith("/") or "://" in value), (page, value)

    @pytest.mark.parametrize("target, page, expected", [
        ("/caution.html", "index.html", "caution.html"),
        ("/caution.html", "datasets/trio/index.html", "../../caution.html"),
        ("/", "datasets/trio/index.html", "../../index.html"),
        ("/datasets/trio/", "index.html", "datasets/trio/index.html"),
        ("/datasets/trio/index.html#x", "datasets/trio/index.html", "#x"),
        ("/datasets/trio/index.html", "datasets/trio/index.html", "index.html"),
        ("/a.csv?v=1#f", "d/e.html", "../a.csv?v=1#f"),
        ("/datasets/other/index.html", "datasets/trio/index.html", "../other/index.html"),
    ])
    def test_relative_url(self, target, page, expected):
        assert relative_url(target, page) == expected

    def test_rewrite_leaves_every_other_byte_alone(self):
        html = ('<p a="1">x</p>\n<a class="k" href="/b/c.html#f">t</a> <img src="//h/x">'
                '<img src="/i.svg" alt="a &amp; b"/>\n')
        out = rewrite_links(html, "b/d.html")
        assert out == ('<p a="1">x</p>\n<a class="k" href="c.html#f">t</a> <img src="//h/x">'
                       '<img src="../i.svg" alt="a &amp; b" />\n')


class TestLayout:
    def test_every_page_has_language_title_description_icon_and_skip_link(self, site):
        for path, html in _pages(site).items():
            doc = parse(html)
            tags = [e.tag for e in doc.elements]
            assert doc.elements[0].attrs.get("lang") == "en"
            assert tags.count("title") == 1 and tags.count("main") == 1
            assert tags.count("h1") == 1, path
            assert any(e.tag == "meta" and e.attrs.get("name") == "description"
                       and e.attrs.get("content") for e in doc.elements)
            assert any(e.tag == "link" and e.attrs.get("rel") == "icon"
                       and e.attrs.get("href") == "data:," for e in doc.elements)
            first_link = [e for e in doc.elements if e.tag == "a"][0]
            assert first_link.attrs["href"] == "#main"
            assert "<script" not in html

    def test_nav_marks_the_current_page_and_opens_its_branch(self, site):
        html = _pages(site)["claims.html"]
        nav = html[html.index('<nav class="site-nav"'):html.index("</nav>")]
        current = [e for e in parse(nav).elements if e.attrs.get("aria-current") == "page"]
        assert [(element_text(e), e.attrs["href"]) for e in current] == [("Claims",
                                                                          "claims.html")]
        win = _pages(site)["datasets/trio/windows/w-001.html"]
        assert 'class="nav-open"' in win and 'class="nav-row nav-row-2"' in win
        assert "nav-row-2" not in _pages(site)["claims.html"]
        row2 = win[win.index("nav-row-2"):]
        assert row2.index("Trio:") < row2.index("</ul>")  # the dataset's siblings, then done

    def test_window_pages_name_prev_and_next_in_the_head_not_in_a_pager(self, site):
        pages = _pages(site)
        first = parse(pages["datasets/trio/windows/w-001.html"]).elements
        rels = {e.attrs.get("rel"): e.attrs["href"] for e in first if e.tag == "link"
                and e.attrs.get("rel") in ("prev", "next")}
        assert rels == {"next": "w-002.html"}
        last = parse(pages["datasets/trio/windows/w-003.html"]).elements
        assert {e.attrs.get("rel") for e in last if e.tag == "link"
                and e.attrs.get("rel") in ("prev", "next")} == {"prev"}
        assert not any(e.attrs.get("rel") in ("prev", "next") for e in first if e.tag == "a")

    def test_trail_names_what_the_page_belongs_to_without_the_home_page(self, site):
        doc = parse(_pages(site)["datasets/trio/windows/w-002.html"])
        trail = [e for e in doc.elements if e.tag == "p" and e.attrs.get("class") == "trail"]
        text = element_text(trail[0])
        assert text.startswith("Part of Datasets") and "Trio:" in text and "Home" not in text
        assert not [e for e in doc.elements if e.attrs.get("aria-label") == "Breadcrumb"]

    def test_every_page_carries_the_standing_cautions(self, site):
        for path, html in _pages(site).items():
            text = visible_text(html)
            assert "association, not causation" in text
            assert "qualified statistician" in text and "institution" in text
            assert "noise assumptions" in text

    def test_long_pages_get_a_jump_strip_of_their_sections(self, site):
        trio = _pages(site)["datasets/trio/index.html"]
        assert 'aria-label="Sections of this page"' in trio
        assert 'href="#ünïcødé-heading_1"' in trio
        assert 'aria-label="Sections of this page"' not in _pages(site)["glossary.html"]
        assert "On this page" not in trio

    def test_a_body_with_its_own_h1_replaces_the_title_heading(self):
        content = build_sample_content()
        pages = tuple(dataclasses.replace(p, body_markdown="# Own heading\n\ntext")
                      if p.path == "glossary.html" else p for p in content.pages)
        out = render_site(dataclasses.replace(content, pages=pages))
        h1 = [e for e in parse(out["glossary.html"].decode()).elements if e.tag == "h1"]
        assert [element_text(e) for e in h1] == ["Own heading"]


class TestChecksums:
    def test_sums_cover_every_other_file_in_sorted_order(self, site):
        lines = site["SHA256SUMS"].decode().splitlines()
        paths = [line.split("  ", 1)[1] for line in lines]
        assert paths == sorted(p for p in site if p != "SHA256SUMS")
        for line in lines:
            digest, path = line.split("  ", 1)
            assert digest == hashlib.sha256(site[path]).hexdigest()

    @pytest.mark.skipif(shutil.which("sha256sum") is None, reason="coreutils sha256sum missing")
    def test_sums_verify_with_coreutils_sha256sum(self, site, tmp_path):
        # reference: GNU coreutils `sha256sum -c` (the format the file claims to follow)
        out = write_site(site, tmp_path / "out")
        run = subprocess.run(["sha256sum", "--check", "--strict", "--quiet", "SHA256SUMS"],
                             cwd=out, capture_output=True, text=True)
        assert run.returncode == 0, run.stdout + run.stderr


class TestBuildDate:
    def test_no_date_unless_one_is_given(self, site):
        assert all("Built on" not in h for h in _pages(site).values())
        dated = render_site(build_sample_content(), build_date="2026-01-01")
        assert '<time datetime="2026-01-01">' in dated["index.html"].decode()

    def test_source_date_epoch_gives_the_utc_day(self):
        # 1767225600 s = 2026-01-01T00:00:00Z (check: `date -u -d @1767225600`)
        assert source_date({"SOURCE_DATE_EPOCH": "1767225600"}) == "2026-01-01"
        assert source_date({"SOURCE_DATE_EPOCH": "1767225599"}) == "2025-12-31"
        assert source_date({}) is None

    def test_bad_source_date_epoch_names_the_variable_and_the_fix(self):
        with pytest.raises(OptionsError, match="SOURCE_DATE_EPOCH must be a whole number") as e:
            source_date({"SOURCE_DATE_EPOCH": "yesterday"})
        assert "Fix:" in str(e.value)


class TestContentErrors:
    def _content(self, **changes) -> SiteContent:
        return dataclasses.replace(build_sample_content(), **changes)

    def test_missing_home_page_is_refused(self):
        content = build_sample_content()
        with pytest.raises(ValueError, match="needs a home page"):
            render_site(dataclasses.replace(
                content, pages=tuple(p for p in content.pages if p.path != "index.html")))

    def test_duplicate_path_is_refused(self):
        content = build_sample_content()
        with pytest.raises(ValueError, match="used twice"):
            render_site(dataclasses.replace(content, pages=content.pages + content.pages[:1]))

    def test_reserved_path_is_refused(self):
        content = build_sample_content()
        page = Page(path="assets/x.html", title="x", body_markdown="", section="methods")
        with pytest.raises(ValueError, match="reserved"):
            render_site(dataclasses.replace(content, pages=content.pages + (page,)))

    def test_file_and_folder_clash_is_refused(self):
        content = build_sample_content()
        page = Page(path="claims.html/x.html", title="x", body_markdown="", section="methods")
        with pytest.raises(ValueError, match="is a file but"):
            render_site(dataclasses.replace(content, pages=content.pages + (page,)))

    @pytest.mark.parametrize("kwargs, match", [
        ({"path": "/index.html"}, "leading '/'"),
        ({"path": "a/../b.html"}, "'..'"),
        ({"path": "a.md"}, "end in '.html'"),
        ({"section": "blog"}, "must be one of"),
        ({"prev": ("t",)}, "pair of strings"),
    ])
    def test_page_fields_are_validated(self, kwargs, match):
        base = {"path": "a.html", "title": "A", "body_markdown": "", "section": "methods"}
        with pytest.raises(ValueError, match=match):
            Page(**{**base, **kwargs})


def test_evil_texts_are_really_hostile():
    # Guard against the fixture losing its teeth.
    joined = "".join(EVIL_TEXTS)
    for needle in ("<script>", "onerror=", '"', "'", "&", "*", "|", "[", "数", "😀"):
        assert needle in joined
