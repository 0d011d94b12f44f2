"""One page per window: where it sits (timeline strip), what it says, how it differs from its neighbours,
then the assumptions side by side, its map and eigenvalues."""

from __future__ import annotations

import html

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

__all__ = ["window_pages", "timeline_strip"]


def timeline_strip(plan_title: str, labels, paths, current: int) -> Raw:
    """Every window of a plan as one cell in time order, the current one marked (not a link)."""
    cells = []
    for i, (label, path) in enumerate(zip(labels, paths)):
        text = html.escape(label)
        if i == current:
            cells.append(f'<li><span class="here" aria-current="page">{text}</span></li>')
        else:
            cells.append(f'<li><a href="/{html.escape(path)}">{text}</a></li>')
    return Raw(f'<nav class="timeline" aria-label="Windows of {html.escape(plan_title)}">\n'
               f'<p class="timeline-label">{len(labels)} windows of \u201c{html.escape(plan_title)}\u201d, '
               f'in time order; this one is marked.</p>\n<ol>{"".join(cells)}</ol>\n</nav>\n')


def _counts(reading) -> dict:
    return {r.assumption: r.corank_words for r in reading.rows if r.assumption != "elementary"}


def _with_support(reading) -> dict:
    """Each assumption's count with its resampling support in brackets, when there is one."""
    return {r.assumption: (f"{r.corank_words} ({r.support})" if r.support else r.corank_words)
            for r in reading.rows if r.assumption != "elementary"}


def _neighbour_line(which: str, label: str, path: str, here, there, angle) -> Raw:
    """How this window differs from one neighbour: relations per assumption (with their resampling
    support), and the turn of the relation."""
    mine, theirs = _counts(here), _counts(there)
    said_here, said_there = _with_support(here), _with_support(there)
    changed = [f"{assumption(a).name}: {said_here[a]} here, {said_there[a]} there" for a in mine
               if a in theirs and theirs[a] != mine[a]]
    counts = (md("the number of relations differs ({})", "; ".join(changed)) if changed
              else Raw("the same number of relations under every noise assumption"))
    turn = (md("; under {} the relations are {} degrees apart (largest principal angle, no sampling interval "
               "computed)", assumption("equal").name, fmt(angle, 2)) if angle is not None else Raw(""))
    return md("- {} window, [{}](/{}): {}{}.", which, label, Raw(path), counts, turn)


def _pair_angle(plan, q, labels, i, j):
    """The largest principal angle between windows i and j under equal noise (as the analysis stored it)."""
    if q is None:
        return None
    st = plan.stability.get("equal")
    if st is None or q not in tuple(getattr(st, "dims", ()) or ()):
        return None
    pairwise = getattr(st, "pairwise_deg", None)
    if pairwise is None or tuple(getattr(st, "labels", ())) != tuple(labels):
        return None
    value = float(pairwise[i][j])
    return value if value == value else None


def window_pages(run, result, pub: Publisher) -> list[Page]:
    from relspan.report.figures import inputs as ff

    ds = result.spec
    pages = []
    q = result.examined[0] if result.examined else None
    for plan in result.plans:
        title = plan.plan.title or plan.plan.id
        readings = result.summary.windows[plan.plan.id]
        paths = [window_path(ds.id, plan.plan.id, i) for i in range(len(plan.analyses))]
        labels = [a.label for a in plan.analyses]
        section = f"{dataset_path(ds.id)}#" + ("assumptions" if plan.plan.kind == "full"
                                               else plan_anchor(plan.plan.id))
        for i, (a, reading) in enumerate(zip(plan.analyses, readings)):
            base = window_csv_base(ds.id, plan.plan.id, i)
            body = []
            if len(paths) > 1:
                body.append(timeline_strip(title, labels, paths, i))
            body += [Raw("## What this window says {#summary}\n"), md("{}\n", reading.plain)]
            if len(paths) > 1:
                body.append(Raw("## How it differs from its neighbours {#neighbours}\n"))
                lines = []
                if i > 0:
                    angle = (reading.angle_to_previous_deg if reading.angle_to_previous_deg is not None
                             else _pair_angle(plan, q, labels, i, i - 1))
                    lines.append(_neighbour_line("Previous", labels[i - 1], paths[i - 1], reading, readings[i - 1],
                                                 angle))
                if i + 1 < len(paths):
                    nxt = readings[i + 1]
                    angle = (nxt.angle_to_previous_deg if nxt.angle_to_previous_deg is not None
                             else _pair_angle(plan, q, labels, i, i + 1))
                    lines.append(_neighbour_line("Next", labels[i + 1], paths[i + 1], reading, nxt, angle))
                body.append(Raw("\n".join(lines) + "\n"))
                body.append(md("All windows of this plan side by side: [\u201c{}\u201d on the dataset page]({}).\n",
                               title, Raw("/" + section)))
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
            elif q is not None and not ff.has_window_maps(result, plan, q):
                where = (md("the panel titled \u201c{}\u201d", str(plan.labels[i])) if ff.has_gallery_panel(plan, i)
                         else Raw("the figure's table"))
                body.append(md("This window is drawn with every other window of the plan in one frame in "
                               "[the plan's section]({}): the overlay at the top, and {}. A plan of more than "
                               "{} windows has no map per window.\n", Raw("/" + section), where,
                               str(ff.WINDOW_MAP_CAP)))
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
            prev = (labels[i - 1], paths[i - 1]) if i > 0 else None
            nxt = (labels[i + 1], paths[i + 1]) if i + 1 < len(paths) else None
            pages.append(Page(paths[i], f"{ds.title}: {a.label}", "\n".join(body), "window",
                              breadcrumbs=(HOME, (ds.title, dataset_path(ds.id)), (title, section)),
                              prev=prev, next=nxt, description=f"{ds.title}, window {a.label} of {title}."))
    return pages
