"""The demo built end to end in a temporary folder: content, accessibility basics, determinism, cache.

The numbers on the pages are checked against an independent analysis of the
same spec (:func:`relspan.run.pipeline.run_analysis`, serial, no cache),
formatted here by this test, not by the report code. Builds run as separate
processes (``python -m relspan build``) so hash seeds and executors really
differ between them.

Outside references: JSON Schema validation with the ``jsonschema`` reference
library (Draft 2020-12); SHA-256 from :mod:`hashlib`; the demo data are the
invented ones made by specs/generate_demo.py.
"""

from __future__ import annotations

import hashlib
import html
import json
import os
import posixpath
import re
import shutil
import subprocess
import sys
from html.parser import HTMLParser
from pathlib import Path

import numpy as np
import pytest

ROOT = Path(__file__).resolve().parents[1]
SPECS = ROOT / "specs"
RESULTS_SCHEMA = ROOT / "builder" / "relspan" / "report" / "results.schema.json"
MARKER = ".relspan-site"

pytestmark = pytest.mark.slow  # four cold builds of the demo (about a minute each on 2 cores)


# ----------------------------------------------------------------- helpers


def copy_specs(folder: Path) -> Path:
    """specs/ without its result cache into ``folder``; returns the demo spec there."""
    shutil.copytree(SPECS, folder, ignore=shutil.ignore_patterns(".relspan-cache", "__pycache__"))
    return folder / "demo.yaml"


def build(spec: Path, out: Path, *extra: str, hashseed: str = "0") -> subprocess.CompletedProcess:
    env = {**os.environ, "PYTHONHASHSEED": hashseed}
    env.pop("RELSPAN_DEBUG", None)
    done = subprocess.run([sys.executable, "-m", "relspan", "build", str(spec), "--out", str(out), "-q",
                           *extra], cwd=spec.parent, env=env, capture_output=True, text=True, timeout=1800)
    assert done.returncode == 0, done.stderr
    return done


def digests(site: Path) -> dict[str, str]:
    return {p.relative_to(site).as_posix(): hashlib.sha256(p.read_bytes()).hexdigest()
            for p in sorted(site.rglob("*")) if p.is_file()}


def differing(a: dict[str, str], b: dict[str, str]) -> list[str]:
    """Files whose bytes differ, the machine record left out: it records the process that built the site
    (the maths libraries loaded, every installed package) and is never byte-compared (outside SHA256SUMS)."""
    return sorted(k for k in set(a) | set(b) if a.get(k) != b.get(k) and k != "build-machine.json")


def cache_entries(cache: Path) -> set[str]:
    return {p.relative_to(cache).as_posix() for p in cache.rglob("*.npz")}


def pages(site: Path) -> list[Path]:
    return sorted(site.rglob("*.html"))


def spellings(x: float, digits: tuple[int, ...] = (3,)) -> set[str]:
    """How a number may be written on a page: ``digits`` significant digits, either minus sign."""
    if np.isinf(x):
        return {"unbounded"}
    out = set()
    for d in digits:
        text = f"{x:.{d}g}"
        out |= {text, text.replace("-", "\u2212")}
    return out


class _Page(HTMLParser):
    """The parts of a page these tests read: lang, title, main's text and links, figures, tables."""

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.lang = None
        self.title = ""
        self.main_text: list[str] = []
        self.main_links: list[str] = []
        self.imgs: list[dict] = []
        self.figures: list[dict] = []
        self.tables: list[list[list[str]]] = []
        self._in = {"title": 0, "main": 0, "details": 0}
        self._figure = None
        self._cell = None
        self._row = None

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        if tag == "html":
            self.lang = a.get("lang")
        if tag in self._in:
            self._in[tag] += 1
        if tag == "a" and self._in["main"]:
            self.main_links.append(a.get("href") or "")
        if tag == "img":
            self.imgs.append(a)
            if self._figure is not None:
                self._figure["imgs"].append(a)
        if tag == "figure":
            self._figure = {"imgs": [], "details": [], "links": []}
        if tag == "details" and self._figure is not None:
            self._figure["details"].append("")
        if tag == "a" and self._figure is not None:
            self._figure["links"].append(a.get("href") or "")
        if tag == "table":
            self.tables.append([])
        if tag == "tr" and self.tables:
            self._row = []
            self.tables[-1].append(self._row)
        if tag in ("td", "th") and self._row is not None:
            self._cell = []

    def handle_endtag(self, tag):
        if tag in self._in:
            self._in[tag] = max(0, self._in[tag] - 1)
        if tag == "figure" and self._figure is not None:
            self.figures.append(self._figure)
            self._figure = None
        if tag in ("td", "th") and self._cell is not None and self._row is not None:
            self._row.append(" ".join("".join(self._cell).split()))
            self._cell = None
        if tag == "tr":
            self._row = None

    def handle_data(self, data):
        if self._in["title"]:
            self.title += data
        if self._in["main"]:
            self.main_text.append(data)
        if self._in["details"] and self._figure is not None and self._figure["details"]:
            self._figure["details"][-1] += data
        if self._cell is not None:
            self._cell.append(data)


def parse(path: Path) -> _Page:
    p = _Page()
    p.feed(path.read_text(encoding="utf-8"))
    p.close()
    return p


def text_of(path: Path) -> str:
    """The page as readers see it (tags dropped, entities decoded, spaces collapsed)."""
    raw = re.sub(r"<(script|style)\b.*?</\1>", " ", path.read_text(encoding="utf-8"), flags=re.S)
    return " ".join(html.unescape(re.sub(r"<[^>]+>", " ", raw)).split())


# ----------------------------------------------------------------- fixtures


@pytest.fixture(scope="module")
def tree(tmp_path_factory) -> Path:
    return copy_specs(tmp_path_factory.mktemp("e2e") / "specs")


@pytest.fixture(scope="module")
def site_a(tree) -> tuple[Path, Path]:
    """Cold build A: hash seed 1, serial, a fresh cache folder (filled by this build)."""
    out, cache = tree.parent.parent / "site-a", tree.parent.parent / "cache"
    build(tree, out, "--jobs", "1", "--cache-dir", str(cache), hashseed="1")
    return out, cache


@pytest.fixture(scope="module")
def site_b(tree) -> Path:
    """Cold build B: another hash seed, serial, no cache."""
    out = tree.parent.parent / "site-b"
    build(tree, out, "--jobs", "1", "--no-cache", hashseed="2718")
    return out


@pytest.fixture(scope="module")
def site_c(tree) -> Path:
    """Cold build C: two worker processes, no cache."""
    out = tree.parent.parent / "site-c"
    build(tree, out, "--jobs", "2", "--no-cache", hashseed="1")
    return out


@pytest.fixture(scope="module")
def fresh_run(tree):
    """The numbers the pages must show, from an independent serial analysis."""
    from relspan.run.pipeline import run_analysis
    from relspan.spec import load_spec

    return run_analysis(load_spec(tree), jobs=1, use_cache=False, progress=False)


# ------------------------------------------------------------ the numbers


def _side_by_side(page: _Page, names: list[str]) -> tuple[int, dict[str, list[str]]]:
    """The table of noise assumptions: (index of its corank column, rows by first cell)."""
    for table in page.tables:
        rows = {row[0]: row for row in table[1:] if row}
        if not table or not set(names) & set(rows):
            continue
        header = [cell.lower() for cell in table[0]]
        col = next((i for i, cell in enumerate(header) if "corank" in cell), None)
        if col is None:
            col = next((i for i, cell in enumerate(header) if cell.startswith("relations")), None)
        if col is not None:
            return col, rows
    raise AssertionError("no table of noise assumptions with a corank column on the dataset page")


def test_dataset_pages_show_the_full_sample_corank_of_every_assumption(site_a, fresh_run):
    from relspan.report.text import ASSUMPTION_PLAIN

    site, _ = site_a
    names = [v[0] for v in ASSUMPTION_PLAIN.values()]
    for result in fresh_run.datasets:
        page = parse(site / "datasets" / result.spec.id / "index.html")
        col, by_name = _side_by_side(page, names)
        for assumption, q in result.full.coranks.items():
            # the cell is "<count> (<resampling support>)": the count is the first token
            cell = by_name[ASSUMPTION_PLAIN[assumption][0]][col]
            shown = cell.split()[0]
            if assumption == "elementary":
                assert shown == "1", (result.spec.id, cell)  # one relation per regression
            else:
                assert shown == ("undetermined" if q is None else str(q)), (result.spec.id, assumption, cell)
                # its support in brackets right after it, never a bare count
                assert cell[len(shown):].lstrip().startswith("("), (result.spec.id, assumption, cell)
                if result.full.inference is not None and assumption in result.full.inference.coranks:
                    assert "resamples" in cell, (result.spec.id, assumption, cell)


def test_pages_show_the_largest_window_angle_of_every_stable_plan(site_a, fresh_run):
    site, _ = site_a
    claims = text_of(site / "claims.html")
    seen = 0
    for result in fresh_run.datasets:
        page = text_of(site / "datasets" / result.spec.id / "index.html")
        for plan in result.plans:
            for q in result.examined:
                stab = plan.stability.get("equal")
                if stab is None or len(plan.analyses) < 2 or stab.reference_dim != q:
                    continue
                forms = spellings(stab.max_to_reference_deg, digits=(2, 3))
                assert any(f"{f} degrees" in page for f in forms), (result.spec.id, plan.plan.id, forms)
                seen += 1
    assert seen >= 4  # trio and accounts, rolling and growing
    # the claim compares the windows with each other (not with the full sample)
    trio_angle = fresh_run.dataset("trio").plan("rolling").stability["equal"].max_pairwise_deg
    assert any(f"{f} degrees" in claims for f in spellings(trio_angle))


def test_accounts_page_shows_the_frisch_interval_of_every_weight(site_a, fresh_run):
    site, _ = site_a
    accounts = fresh_run.dataset("accounts")
    full = accounts.full
    page = text_of(site / "datasets" / "accounts" / "index.html")
    for k, label in enumerate(accounts.labels):
        if k == full.ref:
            continue
        lo, hi = full.frisch_lower[k], full.frisch_upper[k]
        assert np.isfinite(lo) and np.isfinite(hi)
        forms = {form.format(lo=a, hi=b) for a in spellings(lo) for b in spellings(hi)
                 for form in ("[{lo}, {hi}]", "{lo} to {hi}", "from {lo} to {hi}", "between {lo} and {hi}")}
        assert any(f"{label}: {form}" in page or f"{label} {form}" in page for form in forms), \
            (label, sorted(forms))


def test_results_json_carries_the_same_numbers(site_a, fresh_run):
    site, _ = site_a
    data = json.loads((site / "data" / "results.json").read_text(encoding="utf-8"))
    assert [d["id"] for d in data["datasets"]] == [d.spec.id for d in fresh_run.datasets]
    for entry, result in zip(data["datasets"], fresh_run.datasets):
        assert entry["full_sample"]["coranks"] == dict(result.full.coranks)
    assert [c["holds"] for c in data["claims"]] == [v.holds for v in fresh_run.verdicts]


def test_results_json_validates_against_its_documented_schema(site_a):
    if not RESULTS_SCHEMA.is_file():
        pytest.skip(f"{RESULTS_SCHEMA.relative_to(ROOT)} does not exist yet (the report stage "
                    "documents results.json in docs/results.md and ships its JSON Schema there)")
    jsonschema = pytest.importorskip("jsonschema")  # reference library
    site, _ = site_a
    schema = json.loads(RESULTS_SCHEMA.read_text(encoding="utf-8"))
    jsonschema.Draft202012Validator.check_schema(schema)
    data = json.loads((site / "data" / "results.json").read_text(encoding="utf-8"))
    jsonschema.Draft202012Validator(schema).validate(data)


# ---------------------------------------------------- pages and figures


def test_every_page_has_a_language_and_a_title(site_a):
    site, _ = site_a
    for path in pages(site):
        page = parse(path)
        assert page.lang, path.relative_to(site)
        assert page.title.strip(), path.relative_to(site)


def _links_to_caution(rel: str, hrefs: list[str]) -> bool:
    targets = {posixpath.normpath(posixpath.join(posixpath.dirname(rel), href.split("#")[0]))
               for href in hrefs if href and not href.startswith("#")}
    return "caution.html" in targets


def test_every_page_links_the_caution_page(site_a):
    site, _ = site_a
    for path in pages(site):
        rel = path.relative_to(site).as_posix()
        hrefs = re.findall(r'href="([^"]*)"', path.read_text(encoding="utf-8"))
        assert rel == "caution.html" or _links_to_caution(rel, hrefs), rel


def test_every_result_page_that_shows_coefficients_links_the_caution_page_from_its_content(site_a):
    """Home, claims and dataset pages: the link sits in the content, not only in the menu or footer."""
    site, _ = site_a
    checked = 0
    for path in pages(site):
        rel = path.relative_to(site).as_posix()
        if rel not in ("index.html", "claims.html") and not rel.startswith("datasets/"):
            continue
        page = parse(path)
        if "coefficient" not in " ".join(page.main_text).lower():
            continue
        assert _links_to_caution(rel, page.main_links), rel
        checked += 1
    assert checked >= 4  # the home page and the three dataset pages at least


def test_every_image_has_alt_text_and_every_figure_a_long_description_and_its_csv(site_a):
    site, _ = site_a
    figures = 0
    for path in pages(site):
        rel = path.relative_to(site)
        page = parse(path)
        for img in page.imgs:
            assert (img.get("alt") or "").strip(), (rel, img.get("src"))
        for fig in page.figures:
            if not fig["imgs"]:
                continue
            figures += 1
            src = fig["imgs"][0].get("src")
            if "thumb" in (fig["imgs"][0].get("class") or "").split():
                # a home-page thumbnail links to the dataset page, where the same figure has its
                # long description and numbers (tests/report/test_pages.py checks that page)
                assert any("datasets/" in h for h in fig["links"]), (rel, src)
                continue
            assert fig["details"] and all(d.strip() for d in fig["details"]), (rel, src)
            csvs = [h for h in fig["links"] if h.split("#")[0].endswith(".csv")]
            assert csvs, (rel, src)
            for href in csvs:
                assert (path.parent / href).resolve().is_file(), (rel, href)
    assert figures >= 20


def test_site_has_no_placeholder_text(site_a):
    site, _ = site_a
    for path in pages(site):
        text = text_of(path)
        for bad in ("TODO", "TBD", "lorem ipsum", "{{", "}}", "nan%", " NaN ", "None None"):
            assert bad.lower() not in text.lower(), (path.relative_to(site), bad)


# ----------------------------------------------------------- determinism


def test_sha256sums_lists_every_file_with_its_digest(site_a):
    site, _ = site_a
    listed = {}
    for line in (site / "SHA256SUMS").read_text(encoding="utf-8").splitlines():
        digest, name = line.split("  ", 1)
        listed[name] = digest
    files = digests(site)
    expected = {k: v for k, v in files.items() if k not in ("SHA256SUMS", MARKER, "build-machine.json")}
    assert listed == expected, differing(listed, expected)


def test_two_builds_with_different_hash_seeds_give_identical_bytes(site_a, site_b):
    a, b = digests(site_a[0]), digests(site_b)
    assert not differing(a, b), differing(a, b)


def test_serial_and_two_process_builds_give_identical_bytes(site_a, site_c):
    a, c = digests(site_a[0]), digests(site_c)
    assert not differing(a, c), differing(a, c)


# ------------------------------------------------------------------ cache


def test_a_second_build_is_served_from_the_cache_and_byte_identical(site_a, tree):
    import relspan

    site, cache = site_a
    entries = cache_entries(cache)
    assert entries, "the cold build stored nothing in its cache"
    out = tree.parent.parent / "site-warm"
    outcome = relspan.build(tree, out=out, jobs=1, cache_dir=cache)
    assert (outcome.run.cache_hits, outcome.run.cache_misses) == (3, 0)
    assert cache_entries(cache) == entries  # no figure was drawn again either
    assert not differing(digests(site), digests(out))


def test_changing_one_csv_recomputes_only_that_dataset(site_a, tree, tmp_path):
    import relspan

    site, cache = site_a
    changed = copy_specs(tmp_path / "specs")
    csv = changed.parent / "data" / "accounts.csv"
    lines = csv.read_text(encoding="utf-8").splitlines()
    cells = lines[10].split(",")
    cells[1] = f"{float(cells[1]) + 0.5:.3f}"  # one output value, half an index point higher
    lines[10] = ",".join(cells)
    csv.write_text("\n".join(lines) + "\n", encoding="utf-8")

    before = relspan.check(tree, jobs=1, cache_dir=cache)
    entries = cache_entries(cache)
    out = tmp_path / "site-changed"
    outcome = relspan.build(changed, out=out, jobs=1, cache_dir=cache)
    assert (outcome.run.cache_hits, outcome.run.cache_misses) == (2, 1)
    for ds in ("trio", "shift"):
        assert outcome.run.dataset(ds).cache_key == before.run.dataset(ds).cache_key
    assert outcome.run.dataset("accounts").cache_key != before.run.dataset("accounts").cache_key
    assert cache_entries(cache) > entries  # the accounts result and its figures were stored

    changed_files = differing(digests(site), digests(out))
    assert any(f.startswith("datasets/accounts/") for f in changed_files)
    assert any(f.startswith("figures/accounts/") for f in changed_files)
    for f in changed_files:
        assert not f.startswith(("datasets/trio/", "datasets/shift/", "figures/trio/", "figures/shift/",
                                 "data/trio/", "data/shift/")), f
