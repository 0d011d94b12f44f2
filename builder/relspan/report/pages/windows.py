"""One page per window: its plain opening, the assumptions side by side, its map and eigenvalues."""

from __future__ import annotations

from relspan.assumptions import assumption
from relspan.report.pages.addresses import HOME, dataset_path, plan_anchor, window_csv_base, window_path
from relspan.report.pages.dataset import NO_MAP, coefficient_cell
from relspan.report.pages.publisher import Publisher
from relspan.report.pages import uncertainty as U
from relspan.report.pages.tables import table
from relspan.report.text import CAUTION_LINK
from relspan.site import blocks
from relspan.site.content import Page
from relspan.site.markdown import Raw, md
from relspan.words import fmt

__all__ = ["window_pages"]


def window_pages(run, result, pub: Publisher) -> list[Page]:
    from relspan.report.figures import inputs as ff

    ds = result.spec
    pages = []
    q = result.examined[0] if result.examined else None
    for plan in result.plans:
        title = plan.plan.title or plan.plan.id
        readings = result.summary.windows[plan.plan.id]
        paths = [window_path(ds.id, plan.plan.id, i) for i in range(len(plan.analyses))]
        section = f"{dataset_path(ds.id)}#" + ("assumptions" if plan.plan.kind == "full"
                                               else plan_anchor(plan.plan.id))
        for i, (a, reading) in enumerate(zip(plan.analyses, readings)):
            base = window_csv_base(ds.id, plan.plan.id, i)
            body = [Raw("## In plain words {#summary}\n"), md("{}\n", reading.plain)]
            body.append(md("Part of \u201c{}\u201d, window {} of {}; [all windows of this plan]({}).\n",
                           title, str(i + 1), str(len(paths)), Raw("/" + section)))
            for note in a.notes:
                body.append(blocks.callout(note, title="Numerical note", kind="note"))
            body.append(Raw("## Noise assumptions {#assumptions}\n"))
            rows = [(assumption(r.assumption).title, U.corank_cell(a, r),
                     U.coefficient_cell_with_intervals(r, a, result.names, result.labels) or coefficient_cell(r))
                    for r in reading.rows]
            body.append(md("Coefficients in the equation for {} ({}):\n", result.labels[a.ref], CAUTION_LINK))
            body.append(table(("Noise assumption", "Relations (resampling support)", "Coefficients"), rows,
                              csv=(pub, base + "-assumptions.csv")))
            body.append(md("{}\n", U.resampling_sentence(a)))
            if q is not None and len(result.names) < 3:
                body.append(NO_MAP)
            elif q is not None:
                body.append(pub.figure(ff.map_figure, (result, a, plan.flats[i].get(q), q,
                                                          f"{ds.id}-{plan.plan.id}-w{i + 1:02d}-map"),
                                       f"figures/{ds.id}/{plan.plan.id}",
                                       Raw(f"The elementary regressions of this window. {CAUTION_LINK}."),
                                       ident=f"{plan.plan.id}/w{i}/map/{q}", dataset_key=result.cache_key))
            if a.equal is not None:
                ev = a.equal.eigenvalues
                scale = "correlation scale" if a.scale == "correlation" else "data units"
                body.append(Raw(f"Eigenvalues of this window ({scale}, smallest first) against the tolerance "
                                f"eps = {a.eps:g}; under bounded noise each one at or below eps is room for one "
                                "relation:\n"))
                erows = [tuple(fmt(v) + (" \u2264 eps" if v <= a.eps else "") for v in ev)]
                if a.inference is not None:
                    erows.append(tuple(U.interval_words(iv) for iv in a.inference.eigenvalues))
                body.append(table(("",) + tuple(f"\u03bb{j + 1}" for j in range(len(ev))),
                                  [(("estimate",) + erows[0])]
                                  + ([(f"{a.inference.level:.0%} interval",) + erows[1]] if len(erows) > 1 else []),
                                  csv=(pub, base + "-eigenvalues.csv")))
            prev = (plan.analyses[i - 1].label, paths[i - 1]) if i > 0 else None
            nxt = (plan.analyses[i + 1].label, paths[i + 1]) if i + 1 < len(paths) else None
            pages.append(Page(paths[i], f"{ds.title}: {a.label}", "\n".join(body), "window",
                              breadcrumbs=(HOME, (ds.title, dataset_path(ds.id)), (title, section)),
                              prev=prev, next=nxt, description=f"{ds.title}, window {a.label} of {title}."))
    return pages
