"""The home page: per dataset the answer in the data's own words, one small figure, the claims.

Read in half a minute by someone who will not open another page: each dataset gets one panel with
the summary's answer (:attr:`DatasetSummary.pinned`), what it rests on (noise assumptions and
tolerance), the weights where the data fix them (one relation: under equal noise, per named period
when the plan has periods), what is left open, the sampling uncertainty (a slot: an interval when the
statement carries one, else a plain "not computed"), and a small copy of an existing figure. Below:
the claims, failing ones named with links to the windows where they fail; the readers' first
questions with where each is answered. The caution is the footer's (once, linked).
"""

from __future__ import annotations

import html as _html

from relspan.assumptions import assumption
from relspan.report.pages.addresses import dataset_path, window_path
from relspan.report.pages.claims import failing_window_links
from relspan.report.text import CAUTION_LINK
from relspan.site import blocks
from relspan.site.content import Page
from relspan.site.markdown import Raw, joined, link, md
from relspan.words import fmt

__all__ = ["home_page", "READER_ANCHORS"]

#: ids on the status row's items (anchors the readers' checklist points to)
_STATUS_IDS = {"Rebuild": ' id="rebuild"'}

#: the readers' first questions (docs/readers-checklist.md): anchor on the home page -> who asks
READER_ANCHORS = {
    "answers": "policy analyst: what do the data say, and how sure is it?",
    "claims": "research group: do our stated claims still hold, and where do they fail?",
    "rebuild": "replication reviewer: what went in, and how do I rebuild it to the same bytes?",
}


def _rests_on(statement) -> str:
    """What a summary statement rests on: its noise assumptions and tolerance, in the one vocabulary."""
    names = [assumption(a).name for a in statement.assumptions]
    parts = []
    if names:
        parts.append(", ".join(names[:-1]) + (" and " if len(names) > 1 else "") + names[-1])
    if statement.tolerance is not None:
        parts.append("tolerance: " + statement.tolerance.words)
    return "; ".join(parts)


def _interval_words(statement) -> str | None:
    """The sampling interval a statement carries (``numbers['low'/'high'/'level']``), or None."""
    nums = statement.numbers or {}
    low, high, level = nums.get("low"), nums.get("high"), nums.get("level")
    if low is None or high is None:
        return None
    what = f"{fmt(100 * level, 2)}% resampling interval" if level is not None else "resampling interval"
    return f"{what}: {fmt(low)} to {fmt(high)}"


def _equation(ref_label: str, points) -> Raw:
    terms = joined((md("{} \u00d7 {}", fmt(v), lab) for lab, v in points), " + ")
    return md("{} = {} + constant", ref_label, terms)


def _units_words(result) -> str:
    units = {v.unit for v in result.spec.variables}
    if len(units) == 1 and next(iter(units)):
        return f"all series in {next(iter(units))}"
    return "each weight in units of the first series per unit of its own"


def _weights(result) -> list:
    """The weights the data fix: per named period, else for the full sample (equal noise, one relation)."""
    ds = result.spec
    ref_label = result.labels[result.full.ref]
    lines = []
    for plan in result.plans:
        if plan.plan.kind != "periods" or plan.plan.id not in result.summary.relation_track:
            continue
        for i, (a, reading) in enumerate(zip(plan.analyses, result.summary.windows[plan.plan.id])):
            row = next((r for r in reading.rows if r.assumption == "equal" and r.points), None)
            if row is not None:
                lines.append(md("- {}: {}", link(a.label, "/" + window_path(ds.id, plan.plan.id, i)),
                                _equation(ref_label, row.points)))
        if lines:
            return [md("Weights per period, {} ({}):", assumption("equal").name, _units_words(result)),
                    Raw("\n".join(lines))]
    row = next((r for r in result.summary.rows if r.assumption == "equal" and r.points), None)
    if row is None:
        return []
    return [md("Weights, full sample, {} ({}):", assumption("equal").name, _units_words(result)),
            md("- {}", _equation(ref_label, row.points))]


def _panel(result, figure: str) -> str:
    ds, sm = result.spec, result.summary
    page = "/" + dataset_path(ds.id)
    parts = [md("## {} {{#ds-{}}}\n", ds.title, Raw(ds.id)),
             md("{} [Evidence]({})\n", sm.pinned.text, Raw(f"{page}#{sm.pinned.evidence or 'corank'}"))]
    rests = _rests_on(sm.pinned)
    interval = _interval_words(sm.pinned)
    inf = result.full.inference
    if interval:
        uncertainty = md("sampling uncertainty: {}", interval)
    elif inf is not None and any(r.get("resamples") for r in (sm.pinned.numbers or {}).get("support", ())):
        # the sentence gives its resamples
        uncertainty = md("sampling uncertainty: {} bootstrap ([supports]({}))", f"{inf.level:.0%}",
                         Raw(f"{page}#corank"))
    elif inf is not None:
        uncertainty = md("sampling uncertainty: {} bootstrap, {} resamples ([supports]({}))",
                         f"{inf.level:.0%}", str(inf.resamples), Raw(f"{page}#corank"))
    else:
        uncertainty = Raw("sampling uncertainty not computed in this build (resampling is off)")
    parts.append(md("*Rests on:* {}{}.\n", Raw(rests + "; " if rests else ""), uncertainty) if rests
                 else md("*Rests on:* {}.\n", uncertainty))
    weights = _weights(result)
    if weights:
        parts.append(joined(weights, "\n\n") + Raw("\n"))
    parts.append(md("*Left open:* {}. [Evidence]({})\n", sm.open.short or sm.open.text,
                    Raw(f"{page}#{sm.open.evidence or 'identified'}")))
    parts.append(figure)
    parts.append(md("[All results]({}){}\n", Raw(page),
                    Raw(f" \u00b7 {CAUTION_LINK}") if weights else Raw("")))
    return Raw('<div class="answer" markdown="1">\n\n' + "\n".join(parts) + "\n\n</div>")


#: a failing claim names at most this many windows on the home page (the claims page lists all)
_MAX_NAMED = 4


def _where(run, verdict) -> Raw:
    """Where a failing claim fails: every window when few, else how many, the first and the last."""
    where = failing_window_links(run, verdict)
    if not where:
        return Raw("")
    if len(where) <= _MAX_NAMED:
        return md(" Fails in: {}.", joined(where, ", "))
    result = next(r for r in run.datasets if r.spec.id == verdict.claim.dataset)
    plan = next(p for p in result.plans if p.plan.id == verdict.claim.plan)
    return md(" Fails in {} of {} windows, from {} to {} ([each one](/claims.html#claim-{})).", str(len(where)),
              str(len(plan.analyses)), where[0], where[-1], Raw(verdict.claim.id))


def _claims_block(run) -> str:
    verdicts = run.verdicts
    if not verdicts:
        return Raw("The spec states no claims to re-check.\n")
    failing = [v for v in verdicts if not v.holds]
    held = len(verdicts) - len(failing)
    held_links = [link(v.claim.id, f"/claims.html#claim-{v.claim.id}") for v in verdicts if v.holds]
    out = [md("{} of {} hold on this build{}{}. [All claims](/claims.html)\n", str(held), str(len(verdicts)),
              Raw(f"; **{len(failing)} fail**" if failing else ""),
              md(": {} {}", blocks.badge("holds"), joined(held_links, ", ")) if held_links else Raw(""))]
    items = []
    for v in failing:
        items.append(md("- {} {}: {}{}", blocks.badge(v.word), link(v.claim.id, f"/claims.html#claim-{v.claim.id}"),
                        v.claim.text or v.claim.kind, _where(run, v)))
    if items:
        out.append(Raw("\n".join(items) + "\n"))
    return joined(out, "\n")


def home_page(run, pub, archive: str = "") -> Page:
    """The home page (``pub`` places a small copy of each dataset's headline figure; ``archive`` is the
    site-relative path of the download-everything zip, if any)."""
    spec = run.spec
    meta = spec.report
    body = []
    n_fail = sum(not v.holds for v in run.verdicts)
    status = [("Datasets", str(len(run.datasets)), "/datasets/index.html")]
    if run.verdicts:
        status.append(("Claims", f"{len(run.verdicts) - n_fail} of {len(run.verdicts)} hold"
                       + (f", {n_fail} fail" if n_fail else ""), "#claims"))
    status.append(("Rebuild", "inputs, versions, one command", "/reproduce.html#command"))
    if archive:
        status.append(("Download", "every file (zip)", "/" + archive))
    body.append(Raw('<dl class="status-row">'
                    + "".join(f'<div{_STATUS_IDS.get(k, "")}><dt>{k}</dt><dd><a href="{_html.escape(href)}">'
                              f'{_html.escape(v)}</a></dd></div>' for k, v, href in status)
                    + "</dl>\n"))
    panels = [_panel(r, pub.thumbnail(r)) for r in run.datasets]
    body.append(Raw('<div class="answers" id="answers" markdown="1">\n\n' + "\n\n".join(panels) + "\n\n</div>\n"))
    body.append(md("## Claims re-checked {{#claims}}\n"))
    body.append(_claims_block(run))
    about = []
    if meta.summary:
        about.append(md("{}\n", meta.summary))
    if spec.site.notes:
        about.append(md("**Note from the authors.** {}\n", spec.site.notes))
    authors = joined(meta.authors, ", ")
    if authors:
        about.append(md("Authors: {}.\n", authors))
    if meta.licence:
        about.append(md("Licence: {}.\n", meta.licence))
    if meta.cite:
        about.append(md("How to cite: {}\n", meta.cite))
    if about:
        body.append(blocks.details("About these data and this report", joined(about, "\n")))
    return Page("index.html", meta.title, "\n".join(body), "home",
                description=meta.summary[:300] if meta.summary else meta.title)
