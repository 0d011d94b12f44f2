"""A small synthetic SiteContent for the site tests (invented content, no real data).

It has nested pages (home, a dataset index, two datasets, window pages with
prev/next, claims, caution, methods, glossary, reproduce, downloads), a
figure SVG, tables, a formula, footnotes, duplicate Unicode headings, and
user text full of ``<script>``, quotes, ampersands, Markdown and Unicode that
must come out literally. ``build_sample_content(n_windows=...)`` scales the
number of window pages (used to size the browser suite).
"""

from __future__ import annotations

import json

from relspan.site import blocks
from relspan.site.content import NavItem, Page, SiteContent, SiteFile
from relspan.site.formulas import formula_image
from relspan.site.markdown import Raw, escape_cell, escape_text

#: Hostile user text: every line must render literally and execute nothing.
EVIL_TITLE = ('Fish & "Chips" <script>window.__relspanInjected=1</script> '
              "<img src=x onerror=\"window.__relspanInjected=2\"> 'quoted' *bold* _em_")
EVIL_LABEL = ("`code` [link](javascript:window.__relspanInjected=3) # no heading | pipe "
              "\\ back {#id .cls} ![i](x.png) &amp; &lt;b&gt;")
EVIL_UNICODE = "Ünïcødé — Ölçüm 数据 «ελληνικά» 😀"
EVIL_COLUMN = '<b onmouseover="window.__relspanInjected=4">cargo</b> | kt & "t"'
EVIL_TEXTS = (EVIL_TITLE, EVIL_LABEL, EVIL_UNICODE, EVIL_COLUMN)

SITE_TITLE = "Sample site: Tidewater & <Uplands>"

FIGURE_SVG = (
    b'<?xml version="1.0" encoding="utf-8"?>\n'
    b'<svg xmlns="http://www.w3.org/2000/svg" width="320" height="160" viewBox="0 0 320 160">\n'
    b"<title>Three invented series</title>\n"
    b'<rect width="320" height="160" fill="#ffffff"/>\n'
    b'<polyline points="10,150 80,110 150,120 220,60 310,20" fill="none" stroke="#1f4e79" '
    b'stroke-width="3"/>\n'
    b'<polyline points="10,140 80,130 150,90 220,80 310,50" fill="none" stroke="#a3262a" '
    b'stroke-width="3" stroke-dasharray="6 4"/>\n'
    b"</svg>\n")


def _table(columns: list[str], rows: list[list[str]]) -> str:
    head = "| " + " | ".join(escape_cell(c) for c in columns) + " |"
    rule = "|" + "|".join(["---"] * len(columns)) + "|"
    body = ["| " + " | ".join(escape_cell(v) for v in row) + " |" for row in rows]
    return Raw("\n".join([head, rule, *body]) + "\n")


def _window_path(dataset: str, i: int) -> str:
    return f"datasets/{dataset}/windows/w-{i:03d}.html"


def build_sample_content(n_windows: int = 3) -> SiteContent:
    """The synthetic site; ``n_windows`` window pages for the first dataset."""
    formula = formula_image(r"\hat{\Sigma} = S - \mathrm{diag}(d_1, \ldots, d_n)",
                            alt="Sigma hat equals S minus the diagonal matrix of d one to d n")
    home_crumb = ("Home", "index.html")
    ds_crumb = ("Datasets", "datasets/index.html")
    trio_title = f"Trio: {EVIL_TITLE}"
    trio_crumb = (trio_title, "datasets/trio/index.html")

    home = Page(
        path="index.html", title=SITE_TITLE, section="home",
        description=f"What the invented data pin down. {EVIL_TITLE}",
        body_markdown=(
            Raw(f"{escape_text(EVIL_TITLE)}\n\n{escape_text(EVIL_UNICODE)}\n")
            + blocks.cards(
                blocks.card("pinned", EVIL_TITLE,
                            Raw("Two relations hold. See [the trio](/datasets/trio/index.html).")),
                blocks.card("open", EVIL_UNICODE, "The third direction is left open."),
                blocks.card("depends", "Noise shape",
                            "The corank depends on the noise assumption."),
                blocks.card("unstable", EVIL_LABEL,
                            Raw("Coefficients move across windows; [read the caution first]"
                                "(/caution.html).")))
            + blocks.figure("/figures/trio/map.svg", f"Two lines rising; {EVIL_TITLE}",
                            Raw(f"Figure 1: {escape_text(EVIL_LABEL)}"),
                            long_description_markdown="The solid line rises from 0 to 14; "
                                                      "the dashed one from 1 to 11.",
                            width=320, height=160)
            + Raw("\n## Status\n\nClaim checked: ") + blocks.badge("holds") + Raw("\n")))

    datasets = Page(
        path="datasets/index.html", title="Datasets", section="dataset",
        breadcrumbs=(home_crumb,),
        body_markdown=(f"- [{escape_text(trio_title)}](/datasets/trio/index.html)\n"
                       f"- [{escape_text(EVIL_UNICODE)}](/datasets/zweite-reihe/index.html)\n"))

    windows = [f"Window {i}: {1990 + i}\u2013{1999 + i}" for i in range(1, n_windows + 1)]
    window_list = "\n".join(f"- [{escape_text(t)}](/{_window_path('trio', i)})"
                            for i, t in enumerate(windows, start=1))
    trio = Page(
        path="datasets/trio/index.html", title=trio_title, section="dataset",
        breadcrumbs=(home_crumb, ds_crumb),
        description="Invented three-series dataset.",
        body_markdown=(
            Raw("## Overview\n\n"
                f"Summary: {escape_text(EVIL_TITLE)} {escape_text(EVIL_LABEL)}[^src]\n\n")
            + blocks.callout(Raw("Single coefficients can mislead; [read why](/caution.html#why)."))
            + Raw("## Results side by side\n\n")
            + _table(["Assumption", EVIL_COLUMN, EVIL_UNICODE],
                     [["equal", "0.50", EVIL_LABEL], ["diagonal", "[0.4, 0.6]", EVIL_TITLE]])
            + Raw("\n## Formula\n\nThe noise-free part is " + formula.markdown + ".\n\n"
                  "## Windows\n\n" + window_list + "\n\n"
                  "## Ünïcødé heading\n\nFirst.\n\n## Ünïcødé heading\n\nSecond (same words).\n\n")
            + blocks.details("All numbers", Raw("Download [the CSV](/downloads/trio/results.csv) "
                                                "or [the JSON](/downloads/trio/results.json)."))
            + Raw("\nBack to [the overview](#overview) or [the top](/datasets/trio/index.html).\n\n"
                  "[^src]: Invented for the tests.\n")))

    window_pages = []
    for i, title in enumerate(windows, start=1):
        prev = (windows[i - 2], _window_path("trio", i - 1)) if i > 1 else None
        nxt = (windows[i], _window_path("trio", i + 1)) if i < n_windows else None
        window_pages.append(Page(
            path=_window_path("trio", i), title=title, section="window",
            breadcrumbs=(home_crumb, ds_crumb, trio_crumb), prev=prev, next=nxt,
            body_markdown=(Raw(f"## In this window\n\n{escape_text(EVIL_LABEL)}\n\n")
                           + blocks.figure("/figures/trio/map.svg", "Two lines rising",
                                           "Same figure, window view.", width=320, height=160)
                           + Raw("\nSee [the results table](/datasets/trio/index.html"
                                 "#results-side-by-side).\n"))))

    zweite = Page(
        path="datasets/zweite-reihe/index.html", title=EVIL_UNICODE, section="dataset",
        breadcrumbs=(home_crumb, ds_crumb),
        body_markdown=f"## Überblick\n\n{escape_text(EVIL_UNICODE)}\n")

    claims = Page(
        path="claims.html", title="Claims", section="claims", breadcrumbs=(home_crumb,),
        body_markdown=(_table(["Claim", "Verdict"],
                              [[EVIL_TITLE, "holds"], [EVIL_UNICODE, "fails"]])
                       + Raw("\nVerdicts: ") + blocks.badge("holds") + Raw(" ") + blocks.badge("fails")
                       + Raw(" ") + blocks.badge("warning") + Raw("\n")))
    caution = Page(
        path="caution.html", title="Reading single coefficients", section="caution",
        breadcrumbs=(home_crumb,),
        body_markdown=("## Why {#why}\n\nAny vector of a relation subspace is a relation.\n\n"
                       "The data describe association, not causation.\n"))
    methods = Page(
        path="methods.html", title="Methods", section="methods", breadcrumbs=(home_crumb,),
        body_markdown=("## Noise-free part\n\n" + formula.markdown + "\n\n"
                       "## Equal noise\n\nTotal least squares.\n\n"
                       "## Diagonal noise\n\nThe Frisch scheme.\n"))
    glossary = Page(
        path="glossary.html", title="Glossary", section="glossary", breadcrumbs=(home_crumb,),
        body_markdown="## Corank\n\nThe number of independent exact relations.\n")
    reproduce = Page(
        path="reproduce.html", title="Reproduce", section="reproduce", breadcrumbs=(home_crumb,),
        body_markdown=("## The one command\n\n```\nrelspan build specs/sample.yaml\n```\n\n"
                       "Checksum of the data: `" + "0123456789abcdef" * 4 + "`\n"))
    downloads = Page(
        path="downloads.html", title="Downloads", section="downloads",
        breadcrumbs=(home_crumb,),
        body_markdown=("- [results.csv](/downloads/trio/results.csv)\n"
                       "- [results.json](/downloads/trio/results.json)\n"))

    csv = ("assumption,value\nequal,0.50\n" + '"' + EVIL_TITLE.replace('"', '""') + '",1\n')
    files = (
        SiteFile("figures/trio/map.svg", FIGURE_SVG),
        SiteFile("downloads/trio/results.csv", csv.encode("utf-8")),
        SiteFile("downloads/trio/results.json",
                 json.dumps({"title": EVIL_TITLE, "value": 0.5}, sort_keys=True,
                            ensure_ascii=False).encode("utf-8")),
        formula.file,
    )
    nav = (
        NavItem("Datasets", "datasets/index.html", children=(
            NavItem(trio_title, "datasets/trio/index.html"),
            NavItem(EVIL_UNICODE, "datasets/zweite-reihe/index.html"))),
        NavItem("Claims", "claims.html"),
        NavItem("Caution", "caution.html"),
        NavItem("Methods", "methods.html"),
        NavItem("Glossary", "glossary.html"),
        NavItem("Reproduce", "reproduce.html"),
        NavItem("Downloads", "downloads.html"),
    )
    return SiteContent(
        title=SITE_TITLE, language="en",
        pages=(home, datasets, trio, *window_pages, zweite, claims, caution, methods, glossary,
               reproduce, downloads),
        files=files, nav=nav,
        footer="Invented sample data. [How to reproduce](/reproduce.html).")
