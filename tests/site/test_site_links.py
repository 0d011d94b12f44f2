"""Tests of relspan.site.links: the checker finds what breaks offline sites."""

from __future__ import annotations

import pytest

from relspan.site import check_files, check_site, render_site, write_site
from sample_content import build_sample_content


def _page(body: str, head: str = "") -> bytes:
    return (f'<!DOCTYPE html><html lang="en"><head>{head}</head><body>\n{body}\n'
            f"</body></html>").encode()


def _kinds(files) -> list[tuple[str, str, str]]:
    return [(p.file, p.kind, p.target) for p in check_files(files)]


class TestCheckFiles:
    def test_clean_pages_have_no_problems(self):
        files = {"index.html": _page('<a href="a/b.html#x">b</a><img src="f.svg" alt="">'),
                 "a/b.html": _page('<h2 id="x">X</h2><a href="../index.html">up</a>'),
                 "f.svg": b"<svg xmlns='http://www.w3.org/2000/svg'/>"}
        assert check_files(files) == []

    def test_missing_file_is_reported_with_its_line(self):
        problems = check_files({"index.html": _page('<a href="nope.html">x</a>')})
        assert [(p.kind, p.target, p.line) for p in problems] == [
            ("missing-target", "nope.html", 2)]
        assert "no file 'nope.html'" in str(problems[0])

    def test_missing_fragment_in_this_and_other_pages(self):
        files = {"index.html": _page('<a href="#gone">x</a><a href="o.html#also">y</a>'),
                 "o.html": _page('<p id="here">')}
        assert _kinds(files) == [("index.html", "missing-fragment", "#gone"),
                                 ("index.html", "missing-fragment", "o.html#also")]

    @pytest.mark.parametrize("url", ["https://example.org/x.css", "//cdn.example/x.js",
                                     "http://127.0.0.1/x", "mailto:a@b.c"])
    def test_urls_to_other_hosts_are_reported(self, url):
        files = {"index.html": _page(f'<a href="{url}">x</a>',
                                     head=f'<link rel="stylesheet" href="{url}">')}
        assert [k for _, k, _ in _kinds(files)] == ["external-url", "external-url"]

    def test_root_absolute_folder_outside_and_script_links_are_reported(self):
        files = {"a/index.html": _page('<a href="/a/index.html">1</a><a href="../a/">2</a>'
                                       '<a href="../../x.html">3</a>'
                                       '<a href="javascript:alert(1)">4</a>'
                                       '<a href="b">5</a>'),
                 "a/b/index.html": _page("")}
        assert sorted(k for _, k, _ in _kinds(files)) == [
            "folder-link", "folder-link", "outside-site", "root-absolute", "script-url"]

    def test_srcset_css_urls_and_inline_styles_are_checked(self):
        files = {"index.html": _page('<img src="a.png" srcset="a.png 1x, b.png 2x" alt="">'
                                     '<p style="background:url(gone.png)">'),
                 "a.png": b"", "s.css": b"@import 'missing.css';\nx{background:url(a.png)}"}
        assert _kinds(files) == [("index.html", "missing-target", "b.png"),
                                 ("index.html", "missing-target", "gone.png"),
                                 ("s.css", "missing-target", "missing.css")]

    def test_percent_encoded_names_resolve(self):
        files = {"index.html": _page('<a href="d%C3%BC%20x.csv">x</a>'), "dü x.csv": b""}
        assert check_files(files) == []

    def test_svg_referencing_another_host_is_reported(self):
        svg = b'<svg xmlns="http://www.w3.org/2000/svg"><image href="https://e.org/a.png"/></svg>'
        assert _kinds({"f.svg": svg}) == [("f.svg", "external-url", "https://e.org/a.png")]

    def test_duplicate_ids_are_reported(self):
        assert _kinds({"index.html": _page('<p id="a"></p><p id="a"></p>')}) == [
            ("index.html", "duplicate-id", "#a")]


class TestCheckSite:
    def test_rendered_and_written_sample_site_is_clean(self, tmp_path):
        out = write_site(render_site(build_sample_content()), tmp_path / "site")
        assert check_site(out) == []

    def test_a_deleted_figure_is_found_on_every_page_that_shows_it(self, tmp_path):
        out = write_site(render_site(build_sample_content()), tmp_path / "site")
        (out / "figures" / "trio" / "map.svg").unlink()
        problems = check_site(out)
        assert {p.kind for p in problems} == {"missing-target"}
        assert {p.file for p in problems} == {
            "index.html", "datasets/trio/windows/w-001.html", "datasets/trio/windows/w-002.html",
            "datasets/trio/windows/w-003.html"}
