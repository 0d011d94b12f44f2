"""Escaping end to end: user text in every field of a spec stays text, on every page and download.

One spec puts script tags, quotes, entities, event attributes, Markdown
(emphasis, links, headings, tables, lists), Jinja-like braces, dollar signs
(matplotlib mathtext) and Unicode (Greek, CJK, emoji, right-to-left) into the
title, summary, authors, licence, citation, notes, dataset title and
description, window plan titles and period labels, variable labels and units,
claim texts and the data's column names. The built site is parsed with
``html.parser`` (pages) and ``xml.etree`` (SVG figures), the downloads with
``json`` and ``csv``: no element, attribute or link may come from user text,
and the text must appear literally.
"""

from __future__ import annotations

import csv
import io
import json
import re
import xml.etree.ElementTree as ET
from html.parser import HTMLParser
from pathlib import Path

import numpy as np
import pytest
import yaml

from corpus.harness import FAST, run_cli

#: one line of hostile text; every marker word starts with "zq" so that it occurs nowhere else
ONE = ("# zqheading <script>alert(1)</script> \"quotes\" 'single' &amp; "
       "<img src=x onerror=alert(1)> **zqbold** [zqlink](http://zq.example) | zqpipe | "
       "Ωμέγα 数据 🚢 שלום عربي $5 & $\\frac{1}{0}$ {{ zqbrace }} {% zqblock %} `zqcode` <!-- zqcomment -->")
#: several lines: Markdown block syntax only works at the start of a line
MULTI = ("First line " + ONE + "\n# zqheading2\n\n| zqa | zqb |\n|---|---|\n| 1 | 2 |\n\n- zqitem\n\n"
         "<div onclick=alert(1)>zqdiv</div>\n\n    zqindented code")
MARKERS = ("zqheading", "zqheading2", "zqbold", "zqlink", "zqpipe", "zqa", "zqb", "zqitem", "zqdiv",
           "zqcode", "zqcomment", "zqbrace", "zqblock", "zqindented code")
COLUMNS = ("<script>alert(1)</script>", "\"quotes\" & 'single' <b>", "数据 🚢 שלום")


def _spec() -> dict:
    return {
        "relspan": 1,
        "report": {"title": "T " + ONE, "summary": "S " + MULTI, "authors": ["A " + ONE, "B <b>x</b>"],
                   "licence": "L " + ONE, "cite": "C " + MULTI},
        "datasets": [{
            "id": "d", "title": "D " + ONE, "description": "X " + MULTI, "source": "data/d.csv",
            "time": {"column": "year", "format": "year"},
            "variables": [{"column": c, "label": f"V{i} " + ONE, "unit": f"U{i} " + ONE}
                          for i, c in enumerate(COLUMNS)]}],
        "windows": [{"id": "full", "kind": "full", "title": "W " + ONE},
                    {"id": "roll", "kind": "rolling", "title": "R " + ONE, "width": 20, "step": 20},
                    {"id": "eras", "kind": "periods", "title": "E " + ONE,
                     "periods": [{"label": "P " + ONE, "from": "1980-01-01", "to": "1999-12-31"}]}],
        "checks": {"assumptions": ["elementary", "equal", "diagonal"]},
        "claims": [{"id": "c1", "kind": "corank", "text": "K " + MULTI, "dataset": "d", "plan": "full",
                    "assumption": "equal", "equals": 1}],
        "site": {"out": "_site", "notes": "N " + MULTI},
    }


def _csv_text() -> str:
    rng = np.random.default_rng(7)
    x, y = rng.normal(10, 1, 40), rng.normal(10, 1, 40)
    z = x - y + 0.2 * rng.normal(size=40)
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(["year", *COLUMNS])
    for t in range(40):
        w.writerow([1980 + t, f"{x[t]:.4f}", f"{y[t]:.4f}", f"{z[t]:.4f}"])
    return buf.getvalue()


@pytest.fixture(scope="module")
def hostile_site(tmp_path_factory) -> Path:
    project = tmp_path_factory.mktemp("hostile")
    (project / "data").mkdir()
    (project / "data" / "d.csv").write_text(_csv_text(), encoding="utf-8")
    (project / "spec.yaml").write_text(yaml.safe_dump(_spec(), allow_unicode=True, sort_keys=False),
                                       encoding="utf-8")
    result = run_cli("build", "spec.yaml", *FAST, cwd=project)
    assert result.returncode == 0, result.stderr
    assert "Traceback" not in result.stderr
    return project / "_site"


class _Page(HTMLParser):
    """Tags with attributes, and text chunks with the tag they sit in."""

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.tags: list[tuple[str, list[tuple[str, str | None]]]] = []
        self.texts: list[tuple[str, str]] = []
        self.stack: list[str] = []

    def handle_starttag(self, tag, attrs):
        self.tags.append((tag, attrs))
        if tag not in ("meta", "link", "img", "br", "hr", "input", "col", "source", "wbr"):
            self.stack.append(tag)

    def handle_startendtag(self, tag, attrs):
        self.tags.append((tag, attrs))

    def handle_endtag(self, tag):
        if tag in self.stack:
            while self.stack and self.stack.pop() != tag:
                pass

    def handle_data(self, data):
        self.texts.append((self.stack[-1] if self.stack else "", data))

    def handle_comment(self, data):
        self.tags.append(("!--", [("comment", data)]))


def _parse(path: Path) -> _Page:
    page = _Page()
    page.feed(path.read_text(encoding="utf-8"))
    page.close()
    return page


def _flat(text: str) -> str:
    return " ".join(text.split())


def _pages(site: Path) -> list[Path]:
    return sorted(site.rglob("*.html"))


def _link_is_internal(value: str) -> bool:
    if value == "data:,":  # the empty favicon every page carries
        return True
    return not re.match(r"^[a-zA-Z][a-zA-Z0-9+.-]*:", value) and not value.startswith("//")


def test_hostile_site_has_pages_to_check(hostile_site):
    names = {p.relative_to(hostile_site).as_posix() for p in _pages(hostile_site)}
    assert {"index.html", "claims.html", "datasets/d/index.html"} <= names
    assert len(names) >= 8


def test_no_script_element_event_attribute_or_outside_link_on_any_page(hostile_site):
    for path in _pages(hostile_site):
        page = _parse(path)
        for tag, attrs in page.tags:
            where = f"{path.relative_to(hostile_site)}: <{tag} {attrs}>"
            assert tag not in ("script", "iframe", "object", "embed", "form", "base", "b"), where
            for name, value in attrs:
                assert not name.startswith("on"), where
                if name in ("href", "src", "action", "formaction", "srcset", "poster"):
                    assert value is not None and _link_is_internal(value), where
                    assert "zq" not in value, where
                assert not (value or "").lstrip().lower().startswith("javascript:"), where
            if tag == "img":  # only the site's own figure files
                target = (path.parent / dict(attrs)["src"]).resolve()
                assert target.is_file() and hostile_site.resolve() in target.parents, where
                assert target.suffix in (".svg", ".png"), where
            if tag == "!--":
                assert "zq" not in attrs[0][1], where


def test_markdown_in_user_text_makes_no_element(hostile_site):
    for path in _pages(hostile_site):
        for tag, text in _parse(path).texts:
            assert text.strip() not in MARKERS, f"{path.relative_to(hostile_site)}: <{tag}>{text}"


def test_every_user_field_appears_literally_in_the_pages(hostile_site):
    spec = _spec()
    shown = " ".join(_flat(t) for p in _pages(hostile_site) for _, t in _parse(p).texts)
    shown = _flat(shown)
    ds = spec["datasets"][0]
    fields = {"title": spec["report"]["title"], "author": spec["report"]["authors"][0],
              "author 2": spec["report"]["authors"][1], "licence": spec["report"]["licence"],
              "dataset title": ds["title"], "plan title": spec["windows"][1]["title"],
              "period label": spec["windows"][2]["periods"][0]["label"]}
    for i, v in enumerate(ds["variables"]):
        fields[f"label {i}"] = v["label"]
        fields[f"unit {i}"] = v["unit"]
        fields[f"column {i}"] = v["column"]
    multi = {"summary": spec["report"]["summary"], "cite": spec["report"]["cite"],
             "description": ds["description"], "claim text": spec["claims"][0]["text"],
             "notes": spec["site"]["notes"]}
    for name, text in multi.items():
        for k, line in enumerate(text.split("\n")):
            if line.strip():
                fields[f"{name} line {k + 1}"] = line
    missing = [name for name, text in fields.items() if _flat(text) not in shown]
    assert missing == []


def test_title_is_the_literal_text_of_every_pages_title_element(hostile_site):
    title = _flat(_spec()["report"]["title"])
    for path in _pages(hostile_site):
        page = _parse(path)
        heads = [_flat(t) for tag, t in page.texts if tag == "title"]
        assert heads and title in heads[0], path


def test_figures_hold_no_script_event_attribute_or_outside_link(hostile_site):
    svgs = sorted(hostile_site.rglob("*.svg"))
    assert svgs
    for path in svgs:
        root = ET.parse(path).getroot()
        for el in root.iter():
            tag = el.tag.rsplit("}", 1)[-1]
            assert tag not in ("script", "foreignObject", "iframe", "a"), path
            for name, value in el.attrib.items():
                local = name.rsplit("}", 1)[-1]
                assert not local.startswith("on"), (path, name)
                if local == "href":
                    assert value.startswith(("#", "data:image/png;base64,")), (path, value[:40])


def _strings(node):
    if isinstance(node, str):
        yield node
    elif isinstance(node, dict):
        for k, v in node.items():
            yield k
            yield from _strings(v)
    elif isinstance(node, list):
        for v in node:
            yield from _strings(v)


def test_json_download_holds_user_text_as_plain_strings(hostile_site):
    data = json.loads((hostile_site / "data" / "results.json").read_text(encoding="utf-8"))
    strings = set(_strings(data))
    spec = _spec()
    assert spec["report"]["title"] in strings
    for v in spec["datasets"][0]["variables"]:
        assert v["column"] in strings
        assert v["label"] in strings
    assert spec["claims"][0]["text"] in strings
    assert not any("&lt;" in s or "&amp;amp;" in s or "&#" in s for s in strings)


def test_csv_downloads_hold_column_names_and_labels_as_exact_cells(hostile_site):
    cells = set()
    for path in sorted((hostile_site / "data").rglob("*.csv")):
        with open(path, newline="", encoding="utf-8") as fh:
            for row in csv.reader(fh):
                cells.update(row)
    assert not any("&lt;" in c or "&amp;amp;" in c for c in cells)
    for v in _spec()["datasets"][0]["variables"]:
        assert v["column"] in cells or v["label"] in cells, v["column"]
    assert _spec()["claims"][0]["text"] in cells


def test_spec_download_round_trips_to_the_same_spec(hostile_site):
    copy = hostile_site / "data" / "spec.yaml"
    assert yaml.safe_load(copy.read_text(encoding="utf-8")) == _spec()
