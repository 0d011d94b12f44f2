"""Glossary first-use links (relspan.site.render.link_terms) and the download-everything zip (zip_bytes)."""

from __future__ import annotations

import dataclasses
import io
import zipfile

import pytest

from relspan.site import Term, render_site
from relspan.site.render import link_terms, zip_bytes
from sample_content import build_sample_content

TERMS = (Term("corank", ("corank", "coranks")), Term("elementary-regression", ("elementary regression",
                                                                                "elementary regressions")),
         Term("regression", ("regression",)), Term("rms-distance", ("rms distance",)))


class TestLinkTerms:
    def test_only_the_first_use_of_a_term_is_linked(self):
        out = link_terms("<p>The corank is 2. A corank of 2 again.</p>", TERMS, "glossary.html")
        assert out == ('<p>The <a class="term" href="/glossary.html#term-corank">corank</a> is 2. '
                       "A corank of 2 again.</p>")

    def test_headings_links_and_code_do_not_count_as_uses(self):
        html = ('<h2>Corank</h2><p><a href="/x.html">corank</a> <code>corank</code></p>'
                "<p>Coranks differ.</p>")
        out = link_terms(html, TERMS, "glossary.html")
        assert out.startswith('<h2>Corank</h2><p><a href="/x.html">corank</a> <code>corank</code></p>')
        assert out.endswith('<p><a class="term" href="/glossary.html#term-corank">Coranks</a> differ.</p>')

    def test_the_longest_form_wins_and_case_and_line_breaks_are_kept(self):
        out = link_terms("<p>Elementary\nregressions and one regression; RMS distance.</p>", TERMS, "g.html")
        assert '<a class="term" href="/g.html#term-elementary-regression">Elementary\nregressions</a>' in out
        assert '<a class="term" href="/g.html#term-regression">regression</a>' in out
        assert '<a class="term" href="/g.html#term-rms-distance">RMS distance</a>' in out

    def test_no_link_inside_a_summary_or_navigation(self):
        # a link inside <summary> nests one interactive element in another (axe-core: nested-interactive)
        html = "<details><summary>The corank search</summary><p>Its corank.</p></details>"
        out = link_terms(html, TERMS, "g.html")
        assert out == ('<details><summary>The corank search</summary><p>Its '
                       '<a class="term" href="/g.html#term-corank">corank</a>.</p></details>')
        assert link_terms("<nav><p>corank</p></nav>", TERMS, "g.html") == "<nav><p>corank</p></nav>"

    def test_parts_of_words_and_entities_are_left_alone(self):
        html = "<p>subcorank &amp; corank&#39;s</p>"
        out = link_terms(html, TERMS, "g.html")
        assert out == '<p>subcorank &amp; <a class="term" href="/g.html#term-corank">corank</a>&#39;s</p>'

    def test_rendered_site_links_terms_except_on_the_glossary_page(self):
        content = build_sample_content()
        glossary = next(p.path for p in content.pages if p.section == "glossary")
        pages = tuple(dataclasses.replace(p, body_markdown=str(p.body_markdown) + "\n\nThe corank here.\n")
                      for p in content.pages)
        site = render_site(dataclasses.replace(content, pages=pages, glossary=glossary, terms=TERMS[:1]))
        assert 'class="term"' not in site[glossary].decode()
        linked = [p.path for p in pages if 'class="term"' in site[p.path].decode()]
        assert len(linked) == len(pages) - 1

    def test_terms_need_a_glossary_page(self):
        with pytest.raises(ValueError, match="need SiteContent.glossary"):
            dataclasses.replace(build_sample_content(), terms=TERMS)


class TestZip:
    def test_same_files_give_the_same_bytes_in_any_order(self):
        files = {"b.txt": b"2", "a/c.txt": b"3", "a.txt": b"1"}
        one = zip_bytes(files, "site")
        assert one == zip_bytes(dict(reversed(list(files.items()))), "site")
        with zipfile.ZipFile(io.BytesIO(one)) as zf:
            assert zf.namelist() == ["site/a.txt", "site/a/c.txt", "site/b.txt"]
            assert {i.date_time for i in zf.infolist()} == {(1980, 1, 1, 0, 0, 0)}
            assert {i.compress_type for i in zf.infolist()} == {zipfile.ZIP_STORED}
            assert zf.read("site/a/c.txt") == b"3"

    def test_rendered_site_zip_holds_every_other_file_and_the_checksums_cover_it(self):
        content = dataclasses.replace(build_sample_content(), archive="everything.zip")
        site = render_site(content)
        with zipfile.ZipFile(io.BytesIO(site["everything.zip"])) as zf:
            names = zf.namelist()
            assert names == [f"everything/{p}" for p in sorted(site) if p not in ("everything.zip", "SHA256SUMS")]
            assert all(zf.read(n) == site[n.split("/", 1)[1]] for n in names)
        assert b"  everything.zip\n" in site["SHA256SUMS"]
        assert render_site(content)["everything.zip"] == site["everything.zip"]

    def test_archive_path_must_be_a_zip(self):
        with pytest.raises(ValueError, match="must end in '.zip'"):
            dataclasses.replace(build_sample_content(), archive="everything.tar")
