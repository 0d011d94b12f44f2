"""The report pages of the demo, read as a reader and a reviewer would.

One build of ``specs/demo.yaml`` per module (no cache, one job) into a temporary folder; every test
reads the written site. Outside references are named beside each check.
"""

from __future__ import annotations

import dataclasses
import hashlib
import json
import re
from html.parser import HTMLParser
from pathlib import Path

import numpy as np
import pytest

ROOT = Path(__file__).resolve().parents[2]
SPEC = ROOT / "specs" / "demo.yaml"


@pytest.fixture(scope="module")
def site(tmp_path_factory):
    import warnings

    from relspan.api import build

    out = tmp_path_factory.mktemp("report") / "site"
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        outcome = build(SPEC, out=out, jobs=1, use_cache=False)
    return out, outcome.run


def _read(site_dir: Path, rel: str) -> str:
    return (site_dir / rel).read_text(encoding="utf-8")


def _main(html_text: str) -> str:
    """The page's own content (between <main> and </main>), without the shared header and footer."""
    start = html_text.index("<main")
    return html_text[start:html_text.index("</main>", start)]


def _text(fragment: str) -> str:
    import html as _html

    return " ".join(_html.unescape(re.sub(r"<[^>]+>", " ", fragment)).split())


def _pages(site_dir: Path) -> list[str]:
    return sorted(p.relative_to(site_dir).as_posix() for p in site_dir.rglob("*.html"))


def _resolve(page: str, href: str) -> str:
    """Site-relative path of a relative link found on ``page``."""
    import posixpath

    href = href.split("#", 1)[0]
    return posixpath.normpath(posixpath.join(posixpath.dirname(page), href))


class _Figures(HTMLParser):
    """Collects, per <figure class="fig">: the img alt, whether a Long description exists, its links."""

    def __init__(self):
        super().__init__()
        self.figures: list[dict] = []
        self._fig = None
        self._summary = False

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        if tag == "figure" and "fig" in (a.get("class") or "").split():
            self._fig = {"alt": None, "long": False, "links": [], "src": None, "thumb": False}
        elif self._fig is not None and tag == "img":
            self._fig["alt"], self._fig["src"] = a.get("alt"), a.get("src")
            self._fig["thumb"] = "thumb" in (a.get("class") or "").split()
        elif self._fig is not None and tag == "a" and a.get("href"):
            self._fig["links"].append(a["href"])
        elif self._fig is not None and tag == "summary":
            self._summary = True

    def handle_data(self, data):
        if self._fig is not None and self._summary and "Long description" in data:
            self._fig["long"] = True

    def handle_endtag(self, tag):
        if tag == "summary":
            self._summary = False
        if tag == "figure" and self._fig is not None:
            self.figures.append(self._fig)
            self._fig = None


# ----------------------------------------------------------------------------------- results JSON

def test_results_json_validates_against_the_shipped_schema(site):
    import jsonschema  # reference library: JSON Schema draft 2020-12 validator

    out, _ = site
    schema = json.loads(_read(out, "data/results.schema.json"))
    jsonschema.Draft202012Validator.check_schema(schema)
    jsonschema.Draft202012Validator(schema).validate(json.loads(_read(out, "data/results.json")))


def test_results_json_is_the_plain_encoding_of_the_results_document(site):
    # the site assembles data/results.json from the datasets' own files; it must be the same bytes
    # as encoding the whole document at once
    from relspan.report.pages.tables import json_bytes
    from relspan.report.site_content import results_document

    out, run = site
    assert (out / "data/results.json").read_bytes() == json_bytes(results_document(run))
    for result in run.datasets:
        part = json.loads(_read(out, f"data/{result.spec.id}/results.json"))
        assert part in json.loads(_read(out, "data/results.json"))["datasets"]


def test_results_json_assembly_matches_plain_encoding_for_nested_text_and_a_colliding_title():
    from types import SimpleNamespace

    from relspan.report.pages.tables import json_bytes
    from relspan.report.site_content import _results_json, results_document

    docs = [{"id": "a", "note": "two\nlines \u00e9", "plans": [{"x": [1.5, None, {"y": []}]}], "e": {}},
            {"id": "b", "nested": {"deep": [[1, 2], ["@relspan-dataset-0@"]]}}]
    for title in ("plain", "@relspan-dataset-1@"):
        run = SimpleNamespace(spec=SimpleNamespace(report=SimpleNamespace(title=title)), environment={"k": 1},
                              verdicts=[], datasets=[])
        texts = [json_bytes(d) for d in docs]
        assert _results_json(run, docs, texts) == json_bytes(results_document(run, docs))


def test_each_dataset_results_json_validates_against_the_dataset_definition(site):
    import jsonschema  # reference library

    out, run = site
    schema = json.loads(_read(out, "data/results.schema.json"))
    dataset_schema = dict(schema["$defs"]["dataset"], **{"$defs": schema["$defs"]})
    for r in run.datasets:
        jsonschema.Draft202012Validator(dataset_schema).validate(
            json.loads(_read(out, f"data/{r.spec.id}/results.json")))


def test_docs_results_names_every_top_level_and_dataset_key_of_the_schema():
    schema = json.loads((ROOT / "builder" / "relspan" / "report" / "results.schema.json").read_text(encoding="utf-8"))
    doc = (ROOT / "docs" / "results.md").read_text(encoding="utf-8")
    keys = list(schema["properties"]) + list(schema["$defs"]["dataset"]["properties"])
    missing = [k for k in keys if f"`{k}`" not in doc]
    assert not missing, f"docs/results.md does not document: {missing}"


def test_docs_results_names_every_field_of_the_intervals_and_corank_supports():
    schema = json.loads((ROOT / "builder" / "relspan" / "report" / "results.schema.json").read_text(encoding="utf-8"))
    doc = (ROOT / "docs" / "results.md").read_text(encoding="utf-8")
    keys = [k for d in ("inference", "interval", "coefficient_interval", "corank_support", "outer_set")
            for k in schema["$defs"][d]["properties"]] + list(schema["$defs"]["dataset"]["properties"]["resampling"]["properties"])
    missing = sorted({k for k in keys if f"`{k}`" not in doc})
    assert not missing, f"docs/results.md does not document: {missing}"


def test_shipped_schema_matches_the_source_schema(site):
    out, _ = site
    assert (out / "data/results.schema.json").read_bytes() == \
        (ROOT / "builder" / "relspan" / "report" / "results.schema.json").read_bytes()


# ------------------------------------------------------------------------------------ the numbers

def test_no_page_carries_a_placeholder_or_a_missing_number(site):
    out, _ = site
    for page in _pages(out):
        text = _text(_main(_read(out, page)))
        assert "@@relspan-figure-" not in text, page
        assert not re.search(r"\b(nan|None|NaN|inf)\b", text), (page, re.search(r".{40}\b(nan|None|NaN|inf)\b.{40}", text))


def test_dataset_page_carries_the_rows_period_and_checksum_of_its_file(site):
    out, run = site
    for r in run.datasets:
        text = _text(_main(_read(out, f"datasets/{r.spec.id}/index.html")))
        sha = hashlib.sha256(r.spec.source_path.read_bytes()).hexdigest()  # independent checksum
        assert sha in text
        assert f"Rows analysed {r.prepared.rows_used}" in text
        assert f"{r.prepared.period[0]} to {r.prepared.period[1]}" in text
        assert "Missing values" in text and "Transforms" in text


def test_home_page_quotes_the_bounded_noise_angle_of_the_results_json(site):
    out, _ = site
    results = json.loads(_read(out, "data/results.json"))
    home = _text(_main(_read(out, "index.html")))
    for ds in results["datasets"]:
        for q in ds["examined_coranks"]:
            entry = next(c for c in ds["full_sample"]["bounded"]["coranks"] if c["q"] == q)
            if not entry["vacuous"]:
                assert f"angle of {entry['angle_bound_deg']:.2g} degrees" in home, ds["id"]


def test_era_relations_differ_by_the_principal_angle_scipy_computes(site):
    from scipy.linalg import subspace_angles  # reference library: principal angles

    out, _ = site
    results = json.loads(_read(out, "data/results.json"))
    shift = next(d for d in results["datasets"] if d["id"] == "shift")
    eras = next(p for p in shift["plans"] if p["id"] == "eras")
    a, b = (np.asarray(w["bases_common_scale"]["equal"]["1"], dtype=float) for w in eras["windows"])
    angle = float(np.degrees(np.max(subspace_angles(a.T, b.T))))
    page = _text(_main(_read(out, "datasets/shift/index.html")))
    assert f"by an angle of up to {angle:.2g} degrees" in page
    # the generator's measured break angle on the common scale is 25.18 degrees (specs/data/truth.json)
    truth = json.loads((ROOT / "specs" / "data" / "truth.json").read_text(encoding="utf-8"))
    measured = truth["datasets"]["shift"]["design"]["measured_break_angle_deg"]["standardised_common"]
    assert abs(angle - measured) < 1.0


def test_trio_page_explains_why_independent_noise_finds_one_more_relation(site):
    out, run = site
    trio = next(r for r in run.datasets if r.spec.id == "trio")
    assert trio.full.coranks["equal"] == 2 and trio.full.coranks["diagonal"] == 3
    page = _text(_main(_read(out, "datasets/trio/index.html")))
    # the kelp harvest is generated independently of the harbour cycle (specs/generate_demo.py)
    assert "Kelp harvest" in page and "pure measurement error" in page
    # each count with its resampling support (issue 11: never a bare count)
    assert re.search(r"Equal noise finds two relations \(the count chosen in \d+% of 499 resamples\), "
                     r"independent noise three relations \(the count chosen in \d+% of 99 resamples\)", page)


# ------------------------------------------------------------------------------------ the figures

def test_every_figure_has_alt_text_a_long_description_and_a_data_csv_that_exists(site):
    out, _ = site
    seen = 0
    described = {}  # figure src -> pages showing it in full (long description and numbers)
    thumbs = []
    for page in _pages(out):
        parser = _Figures()
        parser.feed(_read(out, page))
        for fig in parser.figures:
            seen += 1
            assert fig["alt"] and len(fig["alt"]) > 20, (page, fig["src"])
            if fig["thumb"]:  # a small copy on the home page links to the page showing it in full
                thumbs.append((page, fig))
                continue
            described.setdefault(_resolve(page, fig["src"]), set()).add(page)
            assert fig["long"], (page, fig["src"])
            csvs = [h for h in fig["links"] if h.split("#")[0].endswith(".csv")]
            assert csvs, (page, fig["src"])
            for href in csvs:
                assert (out / _resolve(page, href)).is_file(), (page, href)
            assert (out / _resolve(page, fig["src"])).is_file(), (page, fig["src"])
    for page, fig in thumbs:
        targets = {_resolve(page, h) for h in fig["links"]}
        assert targets & described.get(_resolve(page, fig["src"]), set()), (page, fig["src"], fig["links"])
    assert seen > 20


def test_every_table_on_a_dataset_or_window_page_has_a_csv_that_exists(site):
    out, _ = site
    for page in _pages(out):
        if not page.startswith("datasets/"):
            continue
        main = _main(_read(out, page))
        n_tables = main.count("<table")
        links = re.findall(r'<p class="table-csv"><a href="([^"]+)"', main)
        assert len(links) == n_tables, page
        for href in links:
            assert (out / _resolve(page, href)).is_file(), (page, href)


# ---------------------------------------------------------------------------------- the cautions

def _shows_single_coefficient(main_html: str, run, page: str) -> bool:
    """A page shows a single coefficient when a table of it has a coefficient column, or it prints a
    finding that quotes one (Finding.single_coefficient)."""
    for header in re.findall(r"<thead>(.*?)</thead>", main_html, flags=re.S):
        if "coefficient" in _text(header).lower():
            return True
    text = _text(main_html)
    return any(f.single_coefficient and f.headline in text for r in run.datasets for f in r.findings)


def test_every_page_that_shows_a_single_coefficient_links_the_caution_page(site):
    out, run = site
    flagged = 0
    for page in _pages(out):
        if page == "caution.html":
            continue
        main = _main(_read(out, page))
        if _shows_single_coefficient(main, run, page):
            flagged += 1
            hrefs = re.findall(r'href="([^"]+)"', main)
            assert any(_resolve(page, h) == "caution.html" for h in hrefs), page
    assert flagged >= 1 + len(run.datasets)  # at least the home page and every dataset page


def test_caution_page_carries_the_usual_cautions(site):
    out, _ = site
    text = _text(_main(_read(out, "caution.html"))).lower()
    assert "association, not causation" in text
    assert "data quality" in text and "assumptions" in text
    assert "consult a qualified statistician" in text
    assert "institution's own review" in text


# ------------------------------------------------------------------------------------ the methods

#: inference modules (issue 11) whose results are not on the site yet; the integration step adds their
#: references to relspan.report.text.REFERENCES (and the methods page) and empties this set
_NOT_YET_ON_SITE: set[str] = set()


def _code_references() -> list[tuple[str, str]]:
    """(first author's surname, year) of every numbered reference in builder/relspan/analysis/**/*.py docstrings."""
    refs = set()
    for path in sorted((ROOT / "builder" / "relspan" / "analysis").rglob("*.py")):
        if path.name in _NOT_YET_ON_SITE:
            continue
        src = path.read_text(encoding="utf-8")
        for block in re.findall(r"\.\. \[\d+\]\s+(.*?)(?=\n\s*\.\. \[|\n\s*\n|\"\"\")", src, flags=re.S):
            block = " ".join(block.split())
            years = re.findall(r",\s*(1[89]\d\d|20\d\d)(?=[.,;\s(]|$)", block)
            if not years:
                continue
            words = []
            for tok in block.split(",")[0].split():
                if re.fullmatch(r"[A-ZÅÄÖ][a-z]?\.(-[A-Z]\.)?", tok):
                    continue  # an initial
                if tok == "and":
                    break
                words.append(tok)
            refs.add((" ".join(words), years[-1]))
    return sorted(refs)


def test_methods_page_cites_every_reference_the_analysis_code_cites():
    from relspan.report.text import REFERENCES

    refs = _code_references()
    assert len(refs) >= 20
    entries = list(REFERENCES.values())
    missing = [(name, year) for name, year in refs
               if not any(name in e and f"({year})" in e for e in entries)]
    assert not missing, missing


def test_methods_page_lists_every_reference_key_used(site):
    from relspan.report.text import METHODS, REFERENCES

    out, _ = site
    text = _text(_main(_read(out, "methods.html")))
    squeezed = re.sub(r"\s+", "", text)  # tags around italics leave spaces before punctuation
    for key in sorted({k for m in METHODS for k in m[5]}):
        assert re.sub(r"\s+", "", REFERENCES[key].replace("*", "")) in squeezed, key
    for name, year in (("Gini", "1921"), ("Boyd", "2004"), ("Stewart", "1990"), ("Koopmans", "1950"),
                       ("Tipping", "1999")):
        assert re.search(rf"{name}[^()]*\({year}\)", text), name


def test_methods_page_formulas_are_local_images_with_alt_text(site):
    out, _ = site
    main = _main(_read(out, "methods.html"))
    tags = re.findall(r"<img [^>]*>", main)
    imgs = [(re.search(r'src="([^"]+)"', t).group(1), re.search(r'alt="([^"]*)"', t).group(1)) for t in tags]
    assert len(imgs) >= 10
    for src, alt in imgs:
        assert not src.startswith(("http:", "https:", "//")) and alt
        assert (out / _resolve("methods.html", src)).is_file()


# ---------------------------------------------------------------------------------- home and pages

def _panel(main: str, ds_id: str) -> str:
    """One dataset's panel on the home page (from its heading to the next panel)."""
    start = main.index(f'id="ds-{ds_id}"')
    end = main.find('<div class="answer"', start)
    return main[start:end if end > 0 else len(main)]


def test_home_panel_says_each_datasets_answer_what_it_rests_on_and_what_is_left_open(site):
    from relspan.assumptions import assumption

    out, run = site
    main = _main(_read(out, "index.html"))
    for r in run.datasets:
        sm = r.summary
        panel = _text(_panel(main, r.spec.id))
        squash = lambda t: re.sub(r"([(])\s+", r"\1", re.sub(r"\s+([,.;:)])", r"\1", re.sub(r"\s+", " ", t)))  # noqa: E731 (links add spaces)
        assert squash(sm.pinned.text) in squash(panel), r.spec.id
        for a in sm.pinned.assumptions:
            assert assumption(a).name in panel, (r.spec.id, a)
        assert sm.pinned.tolerance.words in panel
        assert (sm.open.short or sm.open.text) in panel
        assert "sampling uncertainty" in panel  # the slot: an interval, or plainly "not computed"
        assert f"datasets/{r.spec.id}/index.html#" in _panel(main, r.spec.id)


def test_home_panel_shows_a_small_copy_of_a_figure_the_dataset_page_draws(site):
    out, run = site
    main = _main(_read(out, "index.html"))
    for r in run.datasets:
        srcs = re.findall(r'<img[^>]*src="([^"]+)"', _panel(main, r.spec.id))
        assert len(srcs) == 1, r.spec.id
        assert (out / _resolve("index.html", srcs[0])).is_file()
        assert srcs[0].split("/")[-1] in _read(out, f"datasets/{r.spec.id}/index.html")


def test_home_gives_the_fare_weights_before_and_after_2008_near_the_generators_truth(site):
    # specs/data/truth.json: the generator's recorded fare formula in each era (fares = 100 + b_fuel (fuel - 100)
    # + b_wages (wages - 100)); the panel quotes the equal-noise weights of each era's window
    out, run = site
    truth = json.loads((ROOT / "specs" / "data" / "truth.json").read_text())["datasets"]["shift"]
    panel = _text(_panel(_main(_read(out, "index.html")), "shift"))
    weights = re.findall(r"Ferry fares = ([\d.]+) × Fuel costs \+ ([\d.]+) × Crew wages", panel)
    assert len(weights) == 2, panel
    expected = [(0.60, 1.20), (0.15, 2.00)]  # the formula in truth.json's description
    assert "0.60 (fuel - 100) + 1.20 (wages - 100) before 2008Q1" in truth["description"]
    assert "0.15 (fuel - 100) + 2.00 (wages - 100) from 2008Q1" in truth["description"]
    for (fuel, wages), (t_fuel, t_wages) in zip(weights, expected):
        # recovery within 0.1 of the truth: 10% noise in every series, 72 quarters per era
        assert abs(float(fuel) - t_fuel) < 0.1 and abs(float(wages) - t_wages) < 0.1, (fuel, wages)
    assert "Old fare formula (1990-2007)" in panel and "New fare formula (2008-2025)" in panel


def test_home_names_the_claims_and_links_the_claims_page(site):
    out, run = site
    main = _main(_read(out, "index.html"))
    claims = main[main.index('id="claims"'):]
    for v in run.verdicts:
        assert v.claim.id in _text(claims)
        assert f'claims.html#claim-{v.claim.id}"' in claims


def test_home_carries_the_caution_once_and_links_it(site):
    out, _ = site
    page = _read(out, "index.html")
    assert _text(page).lower().count("association, not causation") == 1
    hrefs = re.findall(r'href="([^"]+)"', page)
    assert any(_resolve("index.html", h) == "caution.html" for h in hrefs)


def test_failing_claims_are_named_on_the_home_page_with_links_to_their_windows(site):
    from relspan.analysis.claims import ClaimVerdict
    from relspan.report.pages.home import home_page
    from relspan.report.pages.publisher import Publisher

    out, run = site
    shift = next(r for r in run.datasets if r.spec.id == "shift")
    rolling = next(p for p in shift.plans if p.plan.id == "rolling")
    labels = tuple(a.label for a in rolling.analyses)
    held = run.verdicts[0]
    claim = dataclasses.replace(held.claim, id="made-up-failing", dataset="shift", plan="rolling")
    few = ClaimVerdict(claim=claim, holds=False, observed="(a test verdict)", windows_failing=labels[1:3])
    page = home_page(dataclasses.replace(run, verdicts=(few,) + tuple(run.verdicts)), Publisher())
    assert "made-up-failing" in page.body_markdown and "fails" in page.body_markdown
    for i in (1, 2):
        assert f"/datasets/shift/rolling/window-{i + 1:02d}.html" in page.body_markdown
    many = dataclasses.replace(few, windows_failing=labels)
    page = home_page(dataclasses.replace(run, verdicts=(many,)), Publisher())
    assert f"Fails in {len(labels)} of {len(labels)} windows" in page.body_markdown
    assert "/datasets/shift/rolling/window-01.html" in page.body_markdown


def test_readers_checklist_anchors_exist_on_the_demo_home_page(site):
    out, _ = site
    checklist = (ROOT / "docs" / "readers-checklist.md").read_text(encoding="utf-8")
    from relspan.report.pages import READER_ANCHORS

    anchors = re.findall(r"`index\.html#([\w-]+)`", checklist)
    assert set(anchors) == set(READER_ANCHORS)
    for reader in ("Policy analyst", "Research group", "Replication reviewer"):
        assert reader in checklist
    ids = set(re.findall(r'id="([^"]+)"', _read(out, "index.html")))
    assert set(anchors) <= ids


class _TermUses(HTMLParser):
    """Running text of a page body in order, each piece with whether it sits inside a link (own reading of
    the rule: text in headings, code, navigation and definition terms is not running text)."""

    SKIP = {"h1", "h2", "h3", "h4", "h5", "h6", "code", "pre", "nav", "dt", "summary", "script", "style", "title"}

    def __init__(self):
        super().__init__(convert_charrefs=True)
        self.stack, self.pieces = [], []

    def handle_starttag(self, tag, attrs):
        if tag not in ("img", "br", "hr", "input", "meta", "link"):
            self.stack.append((tag, dict(attrs).get("href", "")))

    def handle_endtag(self, tag):
        while self.stack:
            if self.stack.pop()[0] == tag:
                break

    def handle_data(self, data):
        tags = [t for t, _ in self.stack]
        if not any(t in self.SKIP for t in tags):
            href = next((h for t, h in reversed(self.stack) if t == "a"), None)
            self.pieces.append((data, href))


def test_first_use_of_every_glossary_term_on_every_page_links_its_entry(site):
    from relspan.report.text import GLOSSARY

    out, _ = site
    checked = 0
    for page in _pages(out):
        if page == "glossary.html":
            continue
        parser = _TermUses()
        parser.feed(_main(_read(out, page)))
        for entry in GLOSSARY:
            pattern = re.compile(r"(?<![\w-])(" + "|".join(re.escape(w).replace(r"\ ", r"\s+")
                                                          for w in sorted(entry.words, key=len, reverse=True))
                                 + r")(?!\w)", re.IGNORECASE)
            # a use inside a longer term that contains it ("least squares" in "total least squares") belongs to
            # the longer term
            longer = [w for other in GLOSSARY if other is not entry for w in other.words
                      if any(re.search(rf"(?<![\w-]){re.escape(x)}(?!\w)", w, re.IGNORECASE) for x in entry.words)]
            inner = re.compile("|".join(re.escape(w).replace(r"\ ", r"\s+") for w in longer), re.IGNORECASE)

            def uses(text):
                return pattern.search(inner.sub(" ", text) if longer else text)

            first = next(((text, href) for text, href in parser.pieces if uses(text)), None)
            if first is None:
                continue
            checked += 1
            # the first use is a link to the entry, or sits inside another link (then it cannot carry its own)
            href = first[1]
            assert href is not None, (page, entry.term, first[0][:80])
            if "glossary.html" in href:
                assert href.endswith(f"#term-{entry.anchor}"), (page, entry.term, href)
    assert checked > 50


def test_glossary_has_an_entry_for_every_term_the_issue_names(site):
    from relspan.report.text import GLOSSARY

    out, _ = site
    words = {w for e in GLOSSARY for w in e.words}
    for term in ("corank", "eigenvalue", "orthant", "simplex", "flat", "rms distance", "condition number",
                 "undetermined", "equal noise", "independent noise", "bounded noise", "one variable alone noisy"):
        assert term in words, term
    page = _read(out, "glossary.html")
    for e in GLOSSARY:
        assert f'id="term-{e.anchor}"' in page


def test_one_word_for_undetermined_on_every_page(site):
    out, _ = site
    for page in _pages(out):
        assert "not settled" not in _text(_read(out, page)).lower(), page


def test_caution_tab_opens_a_page_with_the_same_title(site):
    out, _ = site
    home = _read(out, "index.html")
    tab = re.search(r'<a href="caution.html">([^<]+)</a>', home[home.index('class="site-nav"'):])
    h1 = re.search(r"<h1>([^<]+)</h1>", _read(out, "caution.html"))
    assert tab and h1 and tab.group(1) == h1.group(1)


def test_datasets_tab_opens_an_overview_of_every_dataset(site):
    out, run = site
    home = _read(out, "index.html")
    assert re.search(r'<a href="datasets/index.html">Datasets</a>', home)
    overview = _main(_read(out, "datasets/index.html"))
    for r in run.datasets:
        assert f'href="{r.spec.id}/index.html"' in overview and r.summary.pinned.short in _text(overview)


def test_window_pages_show_the_plans_timeline_and_compare_with_their_neighbours(site):
    out, run = site
    for r in run.datasets:
        for plan in r.plans:
            n = len(plan.analyses)
            if n < 2:
                continue
            for i in (0, n - 1):
                page = _read(out, f"datasets/{r.spec.id}/{plan.plan.id}/window-{i + 1:02d}.html")
                strip = page[page.index('class="timeline"'):]
                strip = strip[:strip.index("</nav>")]
                assert strip.count("<li>") == n and 'aria-current="page"' in strip
                main = _text(_main(page))
                assert "How it differs from its neighbours" in main
                assert ("Previous window" in main) == (i > 0) and ("Next window" in main) == (i + 1 < n)


def test_download_everything_zip_holds_every_other_file_with_the_same_bytes(site):
    import zipfile

    out, _ = site
    zpath = out / "demo-site.zip"
    with zipfile.ZipFile(zpath) as zf:
        names = zf.namelist()
        assert names == sorted(names)
        assert all(i.date_time == (1980, 1, 1, 0, 0, 0) for i in zf.infolist())
        files = sorted(p.relative_to(out).as_posix() for p in out.rglob("*") if p.is_file()
                       and p.name not in ("SHA256SUMS", "demo-site.zip", ".relspan-site", "build-machine.json"))
        assert names == [f"demo-site/{f}" for f in files]
        for f in files[::17]:
            assert zf.read(f"demo-site/{f}") == (out / f).read_bytes(), f
    assert "demo-site.zip" in (out / "SHA256SUMS").read_text()


def test_window_pages_link_their_previous_and_next_window(site):
    out, run = site
    for r in run.datasets:
        for plan in r.plans:
            n = len(plan.analyses)
            for i in range(n):
                html_text = _read(out, f"datasets/{r.spec.id}/{plan.plan.id}/window-{i + 1:02d}.html")
                if i > 0:
                    assert f'href="window-{i:02d}.html"' in html_text
                if i + 1 < n:
                    assert f'href="window-{i + 2:02d}.html"' in html_text


def test_reproduce_page_lists_inputs_with_checksums_and_nothing_that_changes_between_builds(site):
    out, run = site
    page = _read(out, "reproduce.html")
    text = _text(_main(page))
    assert hashlib.sha256(SPEC.read_bytes()).hexdigest() in text
    for r in run.datasets:
        assert hashlib.sha256(r.spec.source_path.read_bytes()).hexdigest() in text
    assert "relspan build demo.yaml" in text
    assert "follows the structure of the replication README template published by the Social Science Data Editors" in text
    for word in ("Where the data come from", "What a rerun needs", "How to rerun it", "Which program makes which output"):
        assert word in text
    assert str(out) not in page and str(ROOT) not in page and "/tmp/" not in page
    assert not re.search(r"\d+(\.\d+)? ?(s|seconds|ms)\b", text)
    assert not re.search(r"\b20\d\d-\d\d-\d\d\b", text)


def test_reproduce_page_patterns_cover_every_figure_file_the_site_holds(site):
    # the per-window maps live in figures/<id>/<plan>/: a pattern of the top folder alone missed them
    import fnmatch

    out, _ = site
    text = _text(_main(_read(out, "reproduce.html")))
    patterns = set(re.findall(r"figures/[\w<>./*-]+\*\.\w+", text))
    for f in sorted(p.relative_to(out).as_posix() for p in (out / "figures").rglob("*") if p.is_file()):
        parts = f.split("/")
        assert any(fnmatch.fnmatchcase(f, pat.replace("<plan>", parts[2] if len(parts) == 4 else "\0"))
                   and pat.count("/") == f.count("/") for pat in patterns), f


def test_downloads_page_links_every_dataset_table_csv(site):
    out, run = site
    page = _main(_read(out, "downloads.html"))
    for r in run.datasets:
        for csv in sorted((out / "data" / r.spec.id / "tables").glob("*.csv")):
            assert f"data/{r.spec.id}/tables/{csv.name}" in page, csv.name


def test_pages_statements_come_built_from_the_pipeline_with_what_they_rest_on(site):
    from relspan.assumptions import ASSUMPTION_IDS

    _, run = site
    for r in run.datasets:
        sm = r.summary
        assert sm.pinned.tolerance.eps == r.full.eps and sm.pinned.tolerance.scale == r.full.scale
        assert [row.assumption for row in sm.rows] == [a for a in ASSUMPTION_IDS if a in r.full.coranks]
        for plan in r.plans:
            assert len(sm.windows[plan.plan.id]) == len(plan.analyses) == len(plan.flats)
        stated = {(f.kind, f.topic) for card in sm.cards.values() for f in card}
        assert ("pinned_down", "corank") not in stated  # the pinned sentence states the corank itself
        assert all(f.assumptions or f.kind == "not_identified" or f.topic == "corank" for f in r.findings)


def test_side_by_side_csv_gives_no_coefficients_where_two_relations_hold(site):
    # the trio has two relations under equal noise: the pages refuse a single coefficient there,
    # and so must the download behind them
    import csv as _csv

    out, _ = site
    rows = list(_csv.DictReader((out / "data" / "trio" / "assumptions.csv").open(encoding="utf-8")))
    equal = next(r for r in rows if r["assumption"] == "equal")
    assert int(equal["corank"]) >= 2
    assert equal["coefficients"].startswith("not identified")
    assert all(v == "" for k, v in equal.items() if k.startswith("coef["))


def test_eigenvalue_captions_name_the_correlation_scale_they_are_on(site):
    out, run = site
    text = _text(_main(_read(out, "datasets/trio/index.html")))
    assert run.dataset("trio").full.scale == "correlation"
    assert "Eigenvalues of the full-sample correlation matrix" in text
    assert "Eigenvalues of the full-sample covariance" not in text


def test_results_json_labels_each_method_with_its_scale_and_gives_noise_variances_in_data_units(site):
    import numpy as np

    out, run = site
    doc = json.loads(_read(out, "data/trio/results.json"))["full_sample"]
    assert doc["scale"] == "correlation"
    for key in ("equal", "bounded", "diagonal"):
        assert doc[key]["scale"] == "correlation", key  # computed on the correlation matrix, not "as given"
    var = np.array(doc["variances_data_units"])
    # published numbers are rounded once (relspan.precision): the numbers of one array share one last
    # digit, set by its largest magnitude, so they agree within a few units of that digit
    def close(a, b, digits):
        a, b = np.asarray(a, dtype=float), np.asarray(b, dtype=float)
        np.testing.assert_allclose(a, b, rtol=0, atol=10.0 ** -(digits - 1) * np.abs(b).max())

    close(var, np.diag(run.dataset("trio").full.cov), 9)
    entry = doc["equal"]["coranks"][1]
    close(entry["noise_variances_data_units"], np.array(entry["noise_variances"]) * var, 8)
    cert = doc["diagonal"]["corank"]["certificates"][0]
    close(cert["noise_variances_data_units"], np.array(cert["noise_variances"]) * var, 3)


def test_dataset_page_shows_trends_effective_rows_and_influence(site):
    out, run = site
    text = _text(_main(_read(out, "datasets/trio/index.html")))
    assert "Trends and autocorrelation" in text and "effective rows of the 144 tested" in text
    assert "Single rows and blocks of rows" in text and "robust covariance (MCD" in text
def test_csv_downloads_name_each_assumption_by_its_one_readers_name(site):
    import csv as _csv

    from relspan.assumptions import assumption

    out, run = site
    for r in run.datasets:
        for name in ("assumptions.csv", "windows.csv"):
            rows = list(_csv.DictReader((out / "data" / r.spec.id / name).open(encoding="utf-8")))
            assert rows and all(row["noise_assumption"] == assumption(row["assumption"]).name for row in rows)


# ------------------------------------------------------------------- counts said with their support

#: a sentence that states a count of relations found (not a premise such as "if 2 relations hold",
#: "with two relations, any mix ...", nor the eigenvalue explanation "room for one relation")
_STATES_COUNT = re.compile(
    r"\b(no|one|two|three|four|five|six|\d+) (linear )?relations?\b(?= \(| ties?\b| among\b| hold| fits?\b"
    r"| admissible)|\b(equal|bounded|independent) noise: \d|\bfinds (no|one|two|three|four|five|six|\d+) "
    r"relations?", re.I)


#: a count's support in words: a share "of N resamples", why none was computed, or that resampling does
#: not confirm it (the wording of relspan.analysis.findings.support, spelt out here on purpose)
_SUPPORT = re.compile(r"\d+% of (its )?\d+ resamples|not computed|not confirmed")


def _sentences(fragment: str) -> list[str]:
    return re.split(r"(?<=[.!?])\s+(?=[A-Z\u201c])", _text(fragment))


def test_every_sentence_that_states_a_count_of_relations_states_its_resampling_support(site):
    # issue 11: "a corank is shown as a set with support, never a bare count"
    out, run = site
    claim_texts = [c.text for c in run.spec.claims if c.text]     # the authors' own words, re-checked
    pages = (["index.html", "datasets/index.html"]
             + [str(p.relative_to(out)) for p in sorted(out.glob("datasets/*/index.html"))]
             + [str(p.relative_to(out)) for p in sorted(out.glob("datasets/*/*/window-*.html"))])
    bare = []
    for rel in pages:
        main = _main(_read(out, rel))
        for text in claim_texts:
            main = main.replace(text, "")
        for sentence in _sentences(main):
            if _STATES_COUNT.search(sentence) and not sentence.startswith("If ") and not _SUPPORT.search(sentence):
                bare.append((rel, sentence[:200]))
    assert not bare, bare[:5]
    assert len(pages) > 20


def test_corank_claims_say_the_support_of_each_windows_count(site):
    _, run = site
    corank = [v for v in run.verdicts if v.claim.kind == "corank"]
    assert corank
    for v in corank:
        assert _SUPPORT.search(v.observed), v.observed


def test_a_weak_full_sample_count_says_likely_but_not_confirmed_by_resampling(site):
    # the demo's fares: the full-sample equal-noise count 0 is chosen in about half the resamples
    out, run = site
    shift = next(r for r in run.datasets if r.spec.id == "shift")
    share = shift.full.inference.coranks["equal"].support(shift.full.coranks["equal"])
    assert share < 0.8
    page = _text(_main(_read(out, "datasets/shift/index.html")))
    assert "Under equal noise the full sample gives no relations, likely but not confirmed by resampling" in page
    assert "Under equal noise the data give no single relation over the whole period" in page
