"""The claims page and the claims table of a dataset page (verdicts come from analysis/claims)."""

from __future__ import annotations

from relspan.report.pages.addresses import HOME, dataset_path, window_path
from relspan.report.pages.publisher import Publisher
from relspan.report.pages.tables import table
from relspan.report.text import CAUTION_LINK
from relspan.site import blocks
from relspan.site.content import Page
from relspan.site.markdown import Raw, code, joined, link, md
from relspan.words import plural

__all__ = ["claims_page", "claims_table", "failing_window_links"]


def failing_window_links(run, verdict) -> list:
    """Links to the pages of the windows where a claim does not hold (plain labels where no page exists)."""
    result = next((r for r in run.datasets if r.spec.id == verdict.claim.dataset), None)
    plan = next((p for p in result.plans if p.plan.id == verdict.claim.plan), None) if result else None
    index = {a.label: i for i, a in enumerate(plan.analyses)} if plan else {}
    out = []
    for label in verdict.windows_failing:
        if label in index:
            out.append(link(label, "/" + window_path(verdict.claim.dataset, verdict.claim.plan, index[label])))
        else:
            out.append(md("{}", label))
    return out


def claims_table(verdicts, pub: Publisher, path: str) -> Raw:
    rows = [(blocks.badge(v.word), code(v.claim.id), v.claim.text or v.claim.kind, v.observed) for v in verdicts]
    return table(("Verdict", "Claim", "Statement", "What the data show"), rows, csv=(pub, path))


def claims_page(run, pub: Publisher) -> Page:
    body = []
    if not run.verdicts:
        body.append(Raw("The spec makes no claims. Claims are statements the authors make about the data "
                        "(for example, \u201ctwo relations hold in every ten-year window\u201d) that every "
                        "build checks again.\n"))
    else:
        n_fail = sum(not v.holds for v in run.verdicts)
        body.append(Raw(f"{len(run.verdicts) - n_fail} of {plural(len(run.verdicts), 'claim')} hold on this build"
                        + (f"; **{n_fail} fail**." if n_fail else ".") + "\n"))
        body.append(claims_table(run.verdicts, pub, "data/tables/claims.csv"))
        for v in sorted(run.verdicts, key=lambda v: v.holds):
            c = v.claim
            body.append(md("## {} {{#claim-{}}}\n", c.id, Raw(c.id)))
            body.append(md("{} {}\n", blocks.badge(v.word), c.text or c.kind))
            body.append(md("- Dataset: {}; window plan: {}; kind: {}.\n- What the data show: {}",
                           link(c.dataset, f"/{dataset_path(c.dataset)}#claims"), code(c.plan), code(c.kind),
                           v.observed))
            if v.windows_failing:
                body.append(md("- Windows where it does not hold: {}.", joined(failing_window_links(run, v), ", ")))
            if c.kind in ("sign_stable", "coefficient_bounded"):
                body.append(Raw(f"- {CAUTION_LINK}."))
            body.append(Raw(""))
    return Page("claims.html", "Claims", "\n".join(body), "claims", breadcrumbs=(HOME,),
                description="The authors' claims and whether the data support them.")
