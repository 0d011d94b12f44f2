"""The home page: per dataset what the data pin down and leave open, then the four cards."""

from __future__ import annotations

from relspan.report.pages.addresses import dataset_path
from relspan.report.text import CAUTION_LINK, USUAL_CAUTIONS
from relspan.site import blocks
from relspan.site.content import Page
from relspan.site.markdown import Raw, bullets, joined, link, md

__all__ = ["home_page"]

_CARD_HEADINGS = {
    "pinned": "What the data fix",
    "open": "What they leave open",
    "depends": "What changes with the noise assumption",
    "unstable": "What changes across windows",
}

#: said on a card with nothing to report
_EMPTY_CARD = {
    "pinned": "Nothing is pinned down at the stated tolerance.",
    "open": "Nothing found that the data leave open.",
    "depends": "No finding here changes with the noise assumption.",
    "unstable": "Nothing found that changes across the windows checked.",
}


def _card(kind: str, summary, page: str) -> str:
    """One card: the summary's sentence for it, then up to three more findings of its kind."""
    lead = {"pinned": summary.pinned, "open": summary.open, "depends": summary.depends,
            "unstable": summary.unstable}[kind]
    items = summary.cards[kind]
    lines = []
    if lead is not None and lead.text:
        anchor = lead.evidence or ("stability" if kind == "unstable" else "assumptions")
        lines.append(md("{} [Evidence]({})\n", lead.text, Raw(f"{page}#{anchor}")))
    if items:
        lines.append(bullets(md("{} [Evidence]({})", f.headline, Raw(f"{page}#{f.evidence}"))
                             for f in items[:3]))
        if len(items) > 3:
            lines.append(md("- \u2026 and {} more on [the dataset page]({}).", str(len(items) - 3), Raw(page)))
    if not lines:
        lines.append(_EMPTY_CARD[kind])
    body = joined(lines, "\n")
    if any(f.single_coefficient for f in items) or (kind != "pinned" and lead is not None and lead.text
                                                    and summary.single_coefficient):
        body += Raw(f"\n\n{CAUTION_LINK}.")
    return blocks.card(kind, _CARD_HEADINGS[kind], body)


def home_page(run) -> Page:
    spec = run.spec
    meta = spec.report
    parts = []
    glance = []
    for result in run.datasets:
        ds, sm = result.spec, result.summary
        page = "/" + dataset_path(ds.id)
        glance.append(md("- **{}** \u2014 *Pinned down:* {}. *Left open:* {}. [Details](#ds-{})",
                         link(ds.title, page), sm.pinned.short, sm.open.short, Raw(ds.id)))
    if glance:
        parts.append(Raw("In short, for each dataset:\n\n" + "\n".join(glance) + "\n"))
    n_fail = sum(not v.holds for v in run.verdicts)
    if run.verdicts:
        parts.append(Raw(f"**Claims re-checked on this build:** {len(run.verdicts) - n_fail} of "
                         f"{len(run.verdicts)} hold" + (f", {n_fail} fail" if n_fail else "") +
                         " ([details](/claims.html)).\n"))
    if meta.summary:
        parts.append(Raw("## About these data {#about-data}\n"))
        parts.append(md("{}\n", meta.summary))
    for result in run.datasets:
        ds, sm = result.spec, result.summary
        page = "/" + dataset_path(ds.id)
        parts.append(md("## {} {{#ds-{}}}\n", ds.title, Raw(ds.id)))
        if ds.description:
            parts.append(md("{}\n", ds.description))
        parts.append(blocks.cards(*(_card(kind, sm, page) for kind in ("pinned", "open", "depends", "unstable"))))
        parts.append(md("[All results for {}]({})\n", ds.title, Raw(page)))
    if spec.site.notes:
        parts.append(blocks.callout(spec.site.notes, title="Note from the authors", kind="note"))
    parts.append(blocks.callout(USUAL_CAUTIONS + Raw(f"\n\n{CAUTION_LINK}."), title="Read with care"))
    authors = joined(meta.authors, ", ")
    if authors or meta.cite or meta.licence:
        parts.append(Raw("## About this report {#about}\n"))
        if authors:
            parts.append(md("Authors: {}.\n", authors))
        if meta.licence:
            parts.append(md("Licence: {}.\n", meta.licence))
        if meta.cite:
            parts.append(md("How to cite: {}\n", meta.cite))
        parts.append(Raw("Rebuild it yourself: see [Reproduce](/reproduce.html).\n"))
    return Page("index.html", meta.title, "\n".join(parts), "home",
                description=meta.summary[:300] if meta.summary else meta.title)
