"""The datasets overview: every dataset in a few lines, with its windows plans and its answer in short."""

from __future__ import annotations

from relspan.report.pages.addresses import HOME, dataset_path, plan_anchor, window_path
from relspan.site.content import Page
from relspan.site.markdown import Raw, joined, link, md
from relspan.words import plural

__all__ = ["datasets_page", "DATASETS_PATH"]

#: the overview's address
DATASETS_PATH = "datasets/index.html"


def _variables(result) -> Raw:
    return joined((md("{} ({})", v.label, v.unit) if v.unit else md("{}", v.label)
                   for v in result.spec.variables), ", ")


def datasets_page(run) -> Page:
    body = [Raw(f"{plural(len(run.datasets), 'dataset')}. Each says what the data pin down and leave open, in "
                "short; the dataset's page gives the evidence.\n")]
    for r in run.datasets:
        ds, sm, p = r.spec, r.summary, r.prepared
        page = "/" + dataset_path(ds.id)
        body.append(md("## {} {{#{}}}\n", link(ds.title, page), Raw(ds.id)))
        facts = [md("{} rows", str(p.rows_used))]
        if p.period:
            facts.append(md("{} to {}", str(p.period[0]), str(p.period[1])))
        facts.append(md("variables: {}", _variables(r)))
        body.append(md("{}.\n", joined(facts, "; ")))
        body.append(md("- *{}:* {}. [Evidence]({})",
                       "Pinned down" if sm.pinned.settled else "Not confirmed by resampling",
                       sm.pinned.short or sm.pinned.text,
                       Raw(f"{page}#{sm.pinned.evidence or 'corank'}")))
        body.append(md("- *Left open:* {}. [Evidence]({})\n", sm.open.short or sm.open.text,
                       Raw(f"{page}#{sm.open.evidence or 'identified'}")))
        plans = []
        for plan in r.plans:
            n = len(plan.analyses)
            first = link(plan.analyses[0].label, "/" + window_path(ds.id, plan.plan.id, 0)) if n else Raw("")
            anchor = "assumptions" if plan.plan.kind == "full" else plan_anchor(plan.plan.id)
            plans.append(md("- {}: {}, the first {}", link(plan.plan.title or plan.plan.id, f"{page}#{anchor}"),
                            plural(n, "window"), first) if n > 1 else
                         md("- {}: one window, {}", link(plan.plan.title or plan.plan.id, f"{page}#{anchor}"), first))
        body.append(Raw("Window plans:\n\n" + "\n".join(plans) + "\n"))
    return Page(DATASETS_PATH, "Datasets", "\n".join(body), "datasets", breadcrumbs=(HOME,),
                description="Every dataset of this report in a few lines.")
