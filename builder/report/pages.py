"""Markdown pages of the site, each a function of the analysis run.

Every page opens with the plain summary and puts the technical detail below.
User-supplied text (titles, labels, summaries, column names, claim texts) only
reaches Markdown through :func:`~builder.site.markdown.escape_text` or
:func:`~builder.site.markdown.escape_cell`. Every place that shows a single
coefficient links the caution page.
"""

from __future__ import annotations

import json
from dataclasses import dataclass, field

import numpy as np

from builder.analysis.findings import CARD_OF_KIND
from builder.report.figure_base import render_figure, table_csv
from builder.report.text import (ASSUMPTION_PLAIN, CAUTION_LINK, GLOSSARY, METHODS, REFERENCES,
                                 USUAL_CAUTIONS, caution_body)
from builder.site import blocks
from builder.site.content import Page, SiteFile
from builder.site.markdown import escape_cell, escape_text

__all__ = ["Publisher", "home_page", "dataset_page", "window_pages", "claims_page", "caution_page",
           "methods_page", "glossary_page", "reproduce_page", "downloads_page", "dataset_path",
           "window_path", "fmt"]

HOME = ("Home", "index.html")
ORDER = ("elementary", "equal", "shaped", "bounded", "diagonal")


def fmt(x, digits: int = 3) -> str:
    """A number for a page: 3 significant digits; infinities say "unbounded"."""
    if x is None:
        return "\u2014"
    x = float(x)
    if np.isnan(x):
        return "\u2014"
    if np.isinf(x):
        return "unbounded"
    if x == 0:
        return "0"
    return f"{x:.{digits}g}".replace("-", "\u2212")


def dataset_path(ds_id: str) -> str:
    return f"datasets/{ds_id}/index.html"


def window_path(ds_id: str, plan_id: str, i: int) -> str:
    return f"datasets/{ds_id}/{plan_id}/window-{i + 1:02d}.html"


@dataclass(frozen=True, slots=True)
class FigureJob:
    """A figure to draw later (possibly in another process): ``fn(*args)`` -> FigureResult or None."""

    token: str
    fn: object
    args: tuple
    folder: str
    caption_markdown: str
    ident: str
    dataset_key: str


def render_job(item: tuple) -> tuple | None:
    """Draw and render one figure job; top-level so process pools and Dask can run it.

    Returns ``(name, alt, description, image_bytes, csv_bytes, width_px, height_px)`` or None
    when the figure does not apply to these results.
    """
    fn, args, fmt_ = item
    fig = fn(*args)
    if fig is None:
        return None
    size = fig.figure.get_size_inches() * 96
    return (fig.name, fig.alt, fig.description, render_figure(fig, fmt_), table_csv(fig),
            int(round(size[0])), int(round(size[1])))


@dataclass
class Publisher:
    """Collects the files of the site (figures, their data CSVs, downloads).

    Figures are registered as jobs and placed in the page as a token;
    :meth:`resolve` draws them all at once (on an executor, with a cache)
    and puts the finished Markdown in place of each token.
    """

    fmt: str = "svg"
    files: dict = field(default_factory=dict)
    jobs: list = field(default_factory=list)

    def add(self, path: str, data: bytes) -> str:
        self.files[path] = data
        return "/" + path

    def figure(self, fn, args: tuple, folder: str, caption_markdown: str = "", *, ident: str,
               dataset_key: str = "") -> str:
        """Register ``fn(*args)`` as a figure of ``folder``; returns its placeholder block."""
        token = f"@@relspan-figure-{len(self.jobs):05d}@@"
        self.jobs.append(FigureJob(token, fn, tuple(args), folder, caption_markdown, ident, dataset_key))
        return f"\n\n{token}\n\n"

    def _markdown(self, job: FigureJob, rendered) -> str:
        if rendered is None:
            return ""
        name, alt, description, image, csv_bytes, width, height = rendered
        img = self.add(f"{job.folder}/{name}.{self.fmt}", image)
        csv = self.add(f"{job.folder}/{name}.csv", csv_bytes)
        long = (escape_text(description) +
                f"\n\nThe numbers behind this figure: [{escape_text(name)}.csv]({csv}).")
        return blocks.figure(img, alt, job.caption_markdown, long_description_markdown=long,
                             width=width, height=height)

    def resolve(self, pages: list, *, executor=None, cache=None, progress=None) -> list:
        """Draw every registered figure and return ``pages`` with their tokens replaced."""
        import dataclasses

        from builder import __version__
        from builder.run.executors import SerialExecutor, map_in_chunks

        keys = []
        for job in self.jobs:
            if cache is not None and job.dataset_key:
                from builder.run.cache import task_key

                keys.append(task_key(task="figure", dataset=job.dataset_key, ident=job.ident,
                                     fmt=self.fmt, version=__version__))
            else:
                keys.append(None)
        missing = object()
        done = {}
        for i, key in enumerate(keys):
            if key is not None:
                hit = cache.get(key, missing)
                if hit is not missing:
                    done[i] = hit
        todo = [i for i in range(len(self.jobs)) if i not in done]
        items = [(self.jobs[i].fn, self.jobs[i].args, self.fmt) for i in todo]
        if items:
            ex = executor.get() if hasattr(executor, "get") else executor  # a LazyExecutor opens here
            if progress is not None and hasattr(progress, "total"):
                progress.total = len(items)
            results = map_in_chunks(ex or SerialExecutor(), render_job, items, progress=progress)
        else:
            results = []
        for i, rendered in zip(todo, results):
            done[i] = rendered
            if keys[i] is not None:
                cache.put(keys[i], rendered)
        snippets = {job.token: self._markdown(job, done[i]) for i, job in enumerate(self.jobs)}
        out = []
        for page in pages:
            body = page.body_markdown
            if "@@relspan-figure-" in body:
                for token, md in snippets.items():
                    if token in body:
                        body = body.replace(f"\n\n{token}\n\n", md or "\n\n")
                page = dataclasses.replace(page, body_markdown=body)
            out.append(page)
        return out

    def site_files(self) -> tuple[SiteFile, ...]:
        return tuple(SiteFile(p, d) for p, d in sorted(self.files.items()))


def _table(header, rows) -> str:
    head = "| " + " | ".join(header) + " |"
    sep = "|" + "|".join("---" for _ in header) + "|"
    body = ["| " + " | ".join(r) + " |" for r in rows]
    return "\n".join([head, sep, *body]) + "\n"


def _assumption_name(a: str) -> str:
    return ASSUMPTION_PLAIN[a][0]


def _eps_words(analysis) -> str:
    if analysis.scale == "correlation":
        return f"noise up to {100 * analysis.eps:g}% of each variable's variance"
    return f"noise of spectral norm up to {analysis.eps:g} in the data's units"


# ------------------------------------------------------------------------------------ plain summary

#: a noise share at or above this is read as "almost all of the variable's variance is noise"
PURE_NOISE_SHARE = 0.9

_NUMBER_WORDS = {0: "no", 1: "one", 2: "two", 3: "three", 4: "four", 5: "five", 6: "six"}


def _count(k: int, noun: str) -> str:
    """"two relations", "one relation" (numbers above six as digits)."""
    word = _NUMBER_WORDS.get(int(k), str(int(k)))
    plural = noun if noun.endswith("s") else noun + "s"
    return f"{word} {noun if int(k) == 1 else plural}"


def _cap(text: str) -> str:
    return text[:1].upper() + text[1:]


def _names_list(items) -> str:
    items = list(items)
    if len(items) <= 1:
        return "".join(items)
    return ", ".join(items[:-1]) + " and " + items[-1]


@dataclass(frozen=True, slots=True)
class PlainSummary:
    """What a non-technical reader should take from one dataset, in three plain sentences.

    Attributes
    ----------
    pinned : str
        What the data pin down (with its number).
    open : str
        What they leave open.
    depends : str
        What changes with the noise assumption, and why ("" when nothing does).
    evidence : dict
        ``{"pinned"|"open"|"depends": fragment id}`` on the dataset page.
    single_coefficient : bool
        True when a sentence quotes a single coefficient (link the caution page).
    """

    pinned: str
    open: str
    depends: str
    evidence: dict
    single_coefficient: bool = False


def _window_relation_change(plan, q: int, assumption: str = "equal"):
    """Largest angle (degrees) between the windows' corank-q relations, or None when not every window has one."""
    from builder.analysis.stability import principal_angles

    bases = [a.bases.get(assumption, {}).get(q) for a in plan.analyses]
    if len(bases) < 2 or any(b is None for b in bases):
        return None
    worst = 0.0
    for i in range(len(bases)):
        for j in range(i + 1, len(bases)):
            worst = max(worst, float(np.max(principal_angles(bases[i], bases[j]))))
    return worst


def _windowed_relations(result):
    """Plans (not the full sample) in which every window supports the same corank >= 1 under equal noise.

    Returns a list of ``(plan, q, largest angle between windows in degrees)``.
    """
    out = []
    for plan in result.plans:
        if plan.plan.kind == "full" or not plan.analyses:
            continue
        seq = plan.coranks.coranks.get("equal")
        if not seq or any(c is None for c in seq) or len(set(seq)) != 1 or seq[0] < 1:
            continue
        out.append((plan, int(seq[0]), _window_relation_change(plan, int(seq[0]))))
    return out


def why_assumptions_differ(result) -> str:
    """Plain words on why the independent-noise corank differs from the equal-noise one ("" if it does not)."""
    full = result.full
    eq, dg = full.coranks.get("equal"), full.coranks.get("diagonal")
    labels = result.labels
    if eq is None or dg is None or eq == dg or full.diagonal is None:
        return ""
    corank = full.diagonal.corank
    allowed = (f"at most {100 * full.eps:g}% of each series' variance" if full.scale == "correlation"
               else f"noise of size at most {full.eps:g} in the data's units")
    cert = next((c for c in corank.certificates if c.q == dg and c.status == "certified"), None)
    rel = lambda k: _count(k, "relation")  # noqa: E731
    if dg > eq:
        shares = np.asarray(cert.noise_share, dtype=float) if cert is not None and cert.noise_share else None
        if shares is not None and np.any(shares >= PURE_NOISE_SHARE):
            pure = [k for k in range(full.n) if shares[k] >= PURE_NOISE_SHARE]
            who = _names_list([f"{labels[k]} ({100 * shares[k]:.0f}% of its variance)" for k in pure])
            text = (f"Equal noise finds {rel(eq)}, independent noise {rel(dg)}. This is not a contradiction: "
                    f"when each series may have its own error of any size, {who} can be declared almost "
                    f"pure measurement error, because {'it is' if len(pure) == 1 else 'they are'} nearly "
                    "unrelated to the other series. A series that is all noise counts as one more relation "
                    "(\u201cit stays at its average\u201d), which says nothing about how the other series are "
                    "tied together.")
        else:
            most = int(np.argmax(shares)) if shares is not None else None
            extra = (f" (here up to {100 * shares[most]:.0f}% of the variance of {labels[most]})"
                     if most is not None else "")
            text = (f"Equal noise finds {rel(eq)}, independent noise {rel(dg)}. Independent noise of unknown "
                    f"size is the looser assumption: it lets each series carry its own error{extra}, while "
                    f"the equal-noise check allows {allowed}. Extra relations "
                    "found this way are weak evidence.")
        if dg <= corank.ledermann:
            text += (f" With only {_count(full.n, 'series')}, up to {rel(corank.ledermann)} of this kind can appear from "
                     "chance variation alone.")
        return text
    return (f"Equal noise finds {rel(eq)}, independent noise only {rel(dg)}: the independent-noise check "
            "could not fit the larger number with non-negative error variances within the tolerance.")


def plain_summary(result) -> PlainSummary:
    """The three plain sentences of a dataset (pinned down, left open, depends on the assumption).

    Built from the results alone (no dataset-specific wording), so any spec gets them.
    """
    full = result.full
    labels = result.labels
    n = full.n
    q = result.examined[0] if result.examined else None
    series = _count(n, "series")
    stab = []
    for plan in result.plans:
        if plan.plan.kind == "full" or len(plan.analyses) < 2 or q is None:
            continue
        st = plan.stability.get(("equal", q))
        if st is not None and st.max_to_reference_deg is not None:
            stab.append((plan, st))
    single = False
    ev = {"pinned": "corank", "open": "identified", "depends": "assumptions"}
    if q is not None and q >= 1:
        what = "relation" if q == 1 else "relations"
        pinned = f"{_cap(_count(q, 'relation'))} tie{'s' if q == 1 else ''} the {series} together"
        entry = None
        if full.bounded is not None:
            entry = next((c for c in full.bounded.coranks if c.q == q and not c.vacuous), None)
        bits = []
        if entry is not None:
            bits.append(f"the {what} {'is' if q == 1 else 'are'} fixed to within an angle of "
                        f"{entry.angle_bound_deg:.2g} degrees, whatever form the noise takes")
        steady = [st for _, st in stab if st.stable]
        if stab and len(steady) == len(stab):
            worst = max(st.max_to_reference_deg for st in steady)
            bits.append(f"{'it moves' if q == 1 else 'they move'} at most {worst:.2g} degrees between "
                        "windows of time")
        elif stab:
            worst = max(st.max_to_reference_deg for _, st in stab)
            bits.append(f"but {'it moves' if q == 1 else 'they move'} by up to {worst:.2g} degrees between "
                        "windows of time")
        pinned += (": " + "; ".join(bits) if bits else "") + "."
        if q >= 2:
            ident = result.identified.get(q)
            targets = ([labels[result.names.index(t)] for t in ident.targets] if ident is not None else [])
            open_ = (f"No single weight of one series in \u201cthe\u201d equation: with {_count(q, 'relation')}, "
                     "any mix of them is also a relation, so such a weight is a choice, not a finding.")
            if targets:
                open_ += (f" What is fixed is {_names_list(targets)} written through the other "
                          f"series.")
            single = True
        elif full.frisch_lower is not None:
            ks = [k for k in range(n) if k != full.ref]
            lo, hi = full.frisch_lower, full.frisch_upper
            if all(np.isfinite(lo[k]) and np.isfinite(hi[k]) for k in ks):
                ranges = _names_list([f"{labels[k]} {fmt(lo[k])} to {fmt(hi[k])}" for k in ks])
                open_ = (f"The exact weights, if each series has its own error of unknown size: the data only "
                         f"give ranges in the equation for {labels[full.ref]} ({ranges}).")
                ev["open"] = "frisch"
            else:
                open_ = (f"The weights in the equation for {labels[full.ref]}, if each series has its own error "
                         "of unknown size: they are then not bounded at all.")
            single = True
        else:
            open_ = ("The exact weights depend on the noise assumption; see the assumptions side by side.")
            single = True
    else:
        windowed = _windowed_relations(result)
        period = (f" over the whole period ({result.prepared.period[0]} to {result.prepared.period[1]})"
                  if result.prepared.period else " over all the rows together")
        if windowed:
            windowed.sort(key=lambda t: (t[0].plan.kind != "periods", -(t[2] or 0.0)))
            plan, qq, change = windowed[0]
            titles = _names_list([f"\u201c{p.plan.title or p.plan.id}\u201d" for p, _, _ in windowed])
            pinned = (f"Within each window of {titles}, {_count(qq, 'relation')} "
                      f"tie{'s' if qq == 1 else ''} the {series} together.")
            open_ = f"No single relation fits{period}"
            if change is not None:
                open_ += (f": the relation differs between the windows of \u201c{plan.plan.title or plan.plan.id}"
                          f"\u201d by an angle of up to {change:.2g} degrees, the pattern a change of relation "
                          "over time leaves in the data.")
            else:
                open_ += "."
            ev["pinned"] = f"plan-{plan.plan.id}"
            ev["open"] = f"plan-{plan.plan.id}"
        else:
            pinned = (f"No linear relation ties the {series} together at the stated tolerance: each "
                      "combination of them varies more than the noise allows.")
            open_ = "Nothing further can be identified without a relation."
    depends = why_assumptions_differ(result)
    if not depends:
        flips = [f for f in result.findings if f.kind == "depends" and f.topic == "coefficient"]
        if flips and q is not None and q >= 2:
            depends = ("The signs of single weights differ between methods. With several relations this is "
                       "expected: each method picks a different mix of the same relations.")
            single = True
        elif flips:
            depends = flips[0].headline
            single = True
    return PlainSummary(pinned, open_, depends, ev, single)


# --------------------------------------------------------------------------------------------- home

_CARD_HEADINGS = {
    "pinned": "What the data fix",
    "open": "What they leave open",
    "depends": "What changes with the noise assumption",
    "unstable": "What changes across windows",
}


def home_page(run) -> Page:
    spec = run.spec
    meta = spec.report
    parts = []
    if meta.summary:
        parts.append(escape_text(meta.summary) + "\n")
    n_fail = sum(not v.holds for v in run.verdicts)
    if run.verdicts:
        parts.append(f"**Claims re-checked on this build:** {len(run.verdicts) - n_fail} of "
                     f"{len(run.verdicts)} hold" + (f", {n_fail} fail" if n_fail else "") +
                     " ([details](/claims.html)).\n")
    for result in run.datasets:
        ds = result.spec
        page = "/" + dataset_path(ds.id)
        parts.append(f"## {escape_text(ds.title)} {{#ds-{ds.id}}}\n")
        if ds.description:
            parts.append(escape_text(ds.description) + "\n")
        groups = {"pinned": [], "open": [], "depends": [], "unstable": []}
        for f in result.findings:
            groups[CARD_OF_KIND[f.kind]].append(f)
        snippets = []
        for card in ("pinned", "open", "depends", "unstable"):
            items = groups[card]
            if items:
                body = "\n".join(f"- {escape_text(f.headline)} [Evidence]({page}#{f.evidence})"
                                 for f in items[:4])
                if len(items) > 4:
                    body += f"\n- \u2026 and {len(items) - 4} more on [the dataset page]({page})."
                if any(f.single_coefficient for f in items):
                    body += f"\n\n{CAUTION_LINK}."
            else:
                body = {"pinned": "Nothing is pinned down at the stated tolerance.",
                        "open": "Nothing found that the data leave open.",
                        "depends": "No finding here changes with the noise assumption.",
                        "unstable": "Nothing found that changes across the windows checked."}[card]
            snippets.append(blocks.card(card, _CARD_HEADINGS[card], body))
        parts.append(blocks.cards(*snippets))
        parts.append(f"[All results for {escape_text(ds.title)}]({page})\n")
    if spec.site.notes:
        parts.append(blocks.callout(escape_text(spec.site.notes), title="Note from the authors", kind="note"))
    parts.append(blocks.callout(USUAL_CAUTIONS + f"\n\n{CAUTION_LINK}.", title="Read with care"))
    authors = ", ".join(escape_text(a) for a in meta.authors)
    if authors or meta.cite or meta.licence:
        parts.append("## About this report {#about}\n")
        if authors:
            parts.append(f"Authors: {authors}.\n")
        if meta.licence:
            parts.append(f"Licence: {escape_text(meta.licence)}.\n")
        if meta.cite:
            parts.append(f"How to cite: {escape_text(meta.cite)}\n")
        parts.append("Rebuild it yourself: see [Reproduce](/reproduce.html).\n")
    return Page("index.html", meta.title, "\n".join(parts), "home",
                description=meta.summary[:300] if meta.summary else meta.title)


# ------------------------------------------------------------------------------------------ dataset

def _data_summary(result) -> str:
    p = result.prepared
    ds = result.spec
    rows = [("Source file", escape_cell(ds.source)),
            ("Rows read", str(p.rows_read)),
            ("Rows analysed", str(p.rows_used))]
    if p.rows_outside_range:
        rows.append(("Rows outside the date range", str(p.rows_outside_range)))
    for d in p.drops:
        rows.append((escape_cell(f"Rows dropped: {d.reason}"), str(d.count)))
    if p.period:
        rows.append(("Period", escape_cell(f"{p.period[0]} to {p.period[1]}")))
    rows.append(("SHA-256 of the file", f"`{p.sha256}`"))
    out = _table(("Item", "Value"), rows)
    vrows = []
    for v, t in zip(ds.variables, p.transforms):
        vrows.append((escape_cell(v.label), f"`{escape_cell(v.column)}`", escape_cell(v.unit or "\u2014"),
                      escape_cell(t), fmt(v.noise_share) if v.noise_share is not None else "\u2014"))
    out += "\n" + _table(("Variable", "Column", "Unit", "Transform", "Noise share"), vrows)
    return out


def _side_by_side(result) -> str:
    full = result.full
    ref = full.ref
    labels = result.labels
    q = result.examined[0] if result.examined else None
    rows = []
    for a in ORDER:
        if a not in full.coranks:
            continue
        corank = full.coranks[a]
        if a == "elementary":
            cor_text = "1 (assumed)"
        else:
            cor_text = "undetermined" if corank is None else str(corank)
        if a == "elementary":
            subspace = f"{len(full.names)} different relations, one per noisy variable"
        elif a == "bounded" and full.bounded is not None and q is not None:
            entry = next((c for c in full.bounded.coranks if c.q == q), None)
            subspace = (f"within {fmt(entry.angle_bound_deg)}\u00b0 of the equal-noise subspace (q = {q})"
                        if entry is not None else f"corank {q} not admissible")
        elif a == "diagonal" and full.diagonal is not None:
            fr = full.diagonal
            if fr.spread is not None and fr.spread.max_angle_deg is not None:
                subspace = (f"a family (q = {fr.spread.q}); members differ by up to "
                            f"{fmt(fr.spread.max_angle_deg)}\u00b0")
            else:
                subspace = escape_cell(fr.corank.summary.split(". ")[0])
        elif q is not None and q in full.bases.get(a, {}):
            subspace = f"one point estimate (q = {q})"
        else:
            subspace = "\u2014"
        if a == "diagonal" and full.frisch_lower is not None:
            ks = [k for k in range(full.n) if k != ref]
            coefs = "; ".join(f"{escape_cell(labels[k])}: [{fmt(full.frisch_lower[k])}, "
                              f"{fmt(full.frisch_upper[k])}]" for k in ks)
        elif a in full.coefficients:
            c = full.coefficients[a]
            coefs = "; ".join(f"{escape_cell(labels[k])}: {fmt(c[k])}" for k in range(full.n) if k != ref)
        else:
            coefs = "\u2014"
        if a == "elementary":
            ident = "a point, but only because the assumption fixes which variable is noisy"
        elif q is None:
            ident = "no relation to identify"
        elif q >= 2:
            ident = f"the {q}-dimensional subspace; no single coefficient"
        elif a == "diagonal":
            ident = "intervals (bounded)" if (full.frisch_lower is not None and np.all(
                np.isfinite(np.delete(full.frisch_lower, ref)))) else "not bounded"
        else:
            ident = "each coefficient, as a point"
        rows.append((escape_cell(_assumption_name(a)), cor_text, subspace, coefs, ident))
    table = _table(("Noise assumption", "Relations (corank)", "Relation subspace",
                    f"Coefficients in the equation for {escape_cell(labels[ref])}", "What is identified"),
                   rows)
    return table


def _identified_section(result) -> str:
    out = []
    for q in result.examined:
        ident = result.identified.get(q)
        if ident is None:
            continue
        out.append(escape_text(ident.summary) + "\n")
        names = list(result.names)
        lab = dict(zip(result.names, result.labels))
        others = [k for k, nm in enumerate(names) if nm not in ident.targets]
        rows = []
        for i, t in enumerate(ident.targets):
            cells = [escape_cell(lab[t])]
            for k in others:
                cells.append(fmt(-ident.reduced_form[i, k]))
            rows.append(tuple(cells))
        out.append(f"Reduced form (each of {', '.join(escape_text(lab[t]) for t in ident.targets)} written "
                   f"through the other variables, about the means; condition number of this choice "
                   f"{fmt(ident.reduced_condition)}):\n")
        out.append(_table(("Equation for",) + tuple(escape_cell(lab[names[k]]) for k in others), rows))
        basis_rows = [tuple([f"relation {i + 1}"] + [fmt(v) for v in ident.basis[i]]) for i in range(q)]
        out.append("\nOrthonormal basis of the relation subspace (data units, rows):\n")
        out.append(_table(("",) + tuple(escape_cell(lab[nm]) for nm in names), basis_rows))
        st_rows = []
        for st in ident.statuses:
            form = "reduced form" if st.form == "reduced" else "single relation"
            st_rows.append((form, escape_cell(lab.get(st.relation, st.relation)),
                            escape_cell(lab.get(st.variable, st.variable)),
                            fmt(st.value) if st.identified else "\u2014", escape_cell(st.kind),
                            escape_cell(st.why)))
        out.append("\n" + blocks.details(
            "Which coefficients are identified, and why",
            _table(("Form", "Equation for", "Coefficient of", "Value", "Status", "Why"), st_rows)))
    if not out:
        out.append("No relation was examined, so nothing is identified beyond the absence of a relation.\n")
    return "\n".join(out)


def _plan_section(result, plan, pub: Publisher, folder: str) -> str:
    title = plan.plan.title or plan.plan.id
    out = [f"### {escape_text(title)} {{#plan-{plan.plan.id}}}\n"]
    n = len(plan.analyses)
    links = ", ".join(f"[{escape_text(a.label)}](/{window_path(result.spec.id, plan.plan.id, i)})"
                      for i, a in enumerate(plan.analyses))
    out.append(f"{n} window(s): {links}.\n")
    for q in result.examined:
        stab = plan.stability.get(("equal", q))
        if stab is not None and n >= 2:
            out.append(escape_text(stab.verdict) + "\n")
    from builder.report import figures_for as ff

    q = result.examined[0] if result.examined else None
    key, pid = result.cache_key, plan.plan.id
    if q is not None:
        out.append(pub.figure(ff.gallery_figure, (result, plan, q), folder,
                              "The elementary-regression map in every window, on shared axes: if the flat "
                              "stays while the points move, the relations are stable even though single "
                              "coefficients are not.", ident=f"{pid}/gallery/{q}", dataset_key=key))
        out.append(pub.figure(ff.stability_figure, (result, plan, "equal", q), folder,
                              "Principal angles between the windows' relation subspaces (left) and each "
                              "window's angle to the full sample (right).", ident=f"{pid}/angles/{q}",
                              dataset_key=key))
        out.append(pub.figure(ff.swing_figure, (result, plan, q), folder,
                              f"A single coefficient per window under each noise assumption, above the "
                              f"subspace angle. {CAUTION_LINK}.", ident=f"{pid}/swing/{q}", dataset_key=key))
    out.append(pub.figure(ff.timeline_figure, (result, plan), folder,
                          "The number of relations in each window under each noise assumption.",
                          ident=f"{pid}/coranks", dataset_key=key))
    swing = plan.swings.get("elementary")
    if swing is not None and n >= 2:
        ref = result.full.ref
        rows = []
        for k in range(len(result.names)):
            if k == ref:
                continue
            rows.append((escape_cell(result.labels[k]), fmt(swing.minimum[k]), fmt(swing.maximum[k]),
                         str(int(swing.sign_changes[k]))))
        out.append(f"Least-squares coefficients in the equation for {escape_text(result.labels[ref])} across "
                   f"the windows ({CAUTION_LINK}):\n")
        out.append(_table(("Coefficient of", "Smallest", "Largest", "Sign changes"), rows))
    return "\n".join(o for o in out if o)


def _claims_table(verdicts) -> str:
    rows = []
    for v in verdicts:
        c = v.claim
        rows.append((blocks.badge(v.word), f"`{escape_cell(c.id)}`", escape_cell(c.text or c.kind),
                     escape_cell(v.observed)))
    return _table(("Verdict", "Claim", "Statement", "What the data show"), rows)


def dataset_page(run, result, pub: Publisher) -> Page:
    from builder.report import figures_for as ff

    ds = result.spec
    folder = f"figures/{ds.id}"
    full = result.full
    body = []
    body.append("## In plain words {#summary}\n")
    if ds.description:
        body.append(escape_text(ds.description) + "\n")
    for f in result.findings:
        body.append(f"- **{escape_text(_kind_words(f.kind))}:** {escape_text(f.headline)} "
                    f"([evidence](#{f.evidence}))")
    body.append("")
    if any(f.single_coefficient for f in result.findings):
        body.append(blocks.callout(f"Some statements above quote a single coefficient. {CAUTION_LINK} "
                                   "before using one.", title="Single coefficients"))
    body.append("## The data {#data}\n")
    body.append(_data_summary(result))
    key = result.cache_key
    body.append(pub.figure(ff.overview_figure, (result,), folder,
                           "The analysed series, each standardised, with the windows of each plan below.",
                           ident="overview", dataset_key=key))
    body.append("## The noise assumptions side by side {#assumptions}\n")
    body.append(f"Full sample, {full.count} rows. Tolerance: {_eps_words(full)}. {CAUTION_LINK}.\n")
    body.append(_side_by_side(result))
    body.append(blocks.details("What each noise assumption means",
                               "\n".join(f"- **{escape_text(v[0])}**: {escape_text(v[1])}"
                                         for k, v in ASSUMPTION_PLAIN.items() if k in full.coranks)))
    body.append("## How many relations {#corank}\n")
    body.append(f"Relations examined: {', '.join(str(q) for q in result.examined) or 'none'} "
                f"({escape_text(result.examined_from)}).\n")
    body.append(pub.figure(ff.spectrum_figure, (result, full, f"{ds.id}-spectrum"), folder,
                           "Eigenvalues of the full-sample covariance against the tolerance: every "
                           "eigenvalue below the line is room for one more relation.", ident="spectrum",
                           dataset_key=key))
    if full.diagonal is not None:
        body.append(blocks.details("Independent noise (Frisch scheme): the corank search",
                                   escape_text(full.diagonal.corank.summary)))
    body.append("## What the data identify {#identified}\n")
    body.append(_identified_section(result))
    body.append(f"\n{CAUTION_LINK}.\n")
    if result.examined and result.examined[0] == 1 and full.frisch_lower is not None:
        body.append("## Bounds under independent noise {#frisch}\n")
        body.append(escape_text(full.diagonal.q1.reason) + f" {CAUTION_LINK}.\n")
        body.append(pub.figure(ff.frisch_figure, (result, full, f"{ds.id}-frisch"), folder,
                               "Range of each coefficient over every independent-noise explanation of the "
                               f"data. {CAUTION_LINK}.", ident="frisch", dataset_key=key))
    q = result.examined[0] if result.examined else None
    if q is not None:
        body.append("## The elementary regressions {#map}\n")
        body.append(pub.figure(ff.map_figure, (result, full, q, f"{ds.id}-map"), folder,
                               "Each point is the least-squares relation that treats one variable as the "
                               "only noisy one. Their spread shows how much the answer depends on that "
                               f"choice. {CAUTION_LINK}.", ident=f"map/{q}", dataset_key=key))
    body.append("## Across windows {#stability}\n")
    for plan in result.plans:
        if plan.plan.kind == "full":
            continue
        body.append(_plan_section(result, plan, pub, folder))
    verdicts = [v for v in run.verdicts if v.claim.dataset == ds.id]
    body.append("## Claims about this dataset {#claims}\n")
    body.append(_claims_table(verdicts) if verdicts else "The spec makes no claim about this dataset.\n")
    body.append("## Downloads {#downloads}\n")
    body.append(f"- [All results for this dataset (JSON)](/data/{ds.id}/results.json)\n"
                f"- [Full sample, every assumption (CSV)](/data/{ds.id}/assumptions.csv)\n"
                f"- [Every window, every assumption (CSV)](/data/{ds.id}/windows.csv)\n")
    body.append(blocks.callout(USUAL_CAUTIONS, title="Read with care"))
    return Page(dataset_path(ds.id), ds.title, "\n".join(body), "dataset", breadcrumbs=(HOME,),
                description=f"What the data of {ds.title} pin down and leave open.")


def _kind_words(kind: str) -> str:
    return {"pinned_down": "Pinned down", "stable": "Stable", "set_only": "Known only as a set",
            "not_identified": "Not identified", "no_relation": "No relation", "depends": "Depends on the "
            "noise assumption", "unstable": "Unstable across windows"}[kind]


def window_pages(run, result, pub: Publisher) -> list[Page]:
    from builder.report import figures_for as ff

    ds = result.spec
    pages = []
    q = result.examined[0] if result.examined else None
    for plan in result.plans:
        title = plan.plan.title or plan.plan.id
        paths = [window_path(ds.id, plan.plan.id, i) for i in range(len(plan.analyses))]
        for i, (a, w) in enumerate(zip(plan.analyses, plan.windows)):
            body = ["## In plain words {#summary}\n"]
            cor = {k: v for k, v in a.coranks.items() if k != "elementary"}
            known = sorted({v for v in cor.values() if v is not None})
            if known:
                body.append(f"In this window ({w.rows} rows) the data support "
                            f"{' to '.join(str(k) for k in (known[0], known[-1]) if True) if len(known) > 1 else known[0]}"
                            f" relation(s), depending on the noise assumption.\n")
            if q is not None and ("equal", q) in plan.stability and len(plan.analyses) >= 1:
                ang = plan.stability[("equal", q)].to_reference_deg[i]
                body.append(f"Its relation subspace (corank {q}, equal noise) is {fmt(ang)}\u00b0 from the "
                            f"full sample's.\n")
            for note in a.notes:
                body.append(blocks.callout(escape_text(note), title="Numerical note", kind="note"))
            body.append("## Noise assumptions {#assumptions}\n")
            rows = []
            ref = a.ref
            for key in ORDER:
                if key not in a.coranks:
                    continue
                c = a.coranks[key]
                if key == "diagonal" and a.frisch_lower is not None:
                    coefs = "; ".join(f"{escape_cell(result.labels[k])}: [{fmt(a.frisch_lower[k])}, "
                                      f"{fmt(a.frisch_upper[k])}]" for k in range(a.n) if k != ref)
                elif key in a.coefficients:
                    coefs = "; ".join(f"{escape_cell(result.labels[k])}: {fmt(a.coefficients[key][k])}"
                                      for k in range(a.n) if k != ref)
                else:
                    coefs = "\u2014"
                rows.append((escape_cell(_assumption_name(key)),
                             "1 (assumed)" if key == "elementary" else ("undetermined" if c is None else str(c)),
                             coefs))
            body.append(f"Coefficients in the equation for {escape_text(result.labels[ref])} "
                        f"({CAUTION_LINK}):\n")
            body.append(_table(("Noise assumption", "Relations", "Coefficients"), rows))
            if q is not None:
                body.append(pub.figure(ff.map_figure, (result, a, q, f"{ds.id}-{plan.plan.id}-w{i + 1:02d}-map"),
                                       f"figures/{ds.id}/{plan.plan.id}",
                                       f"The elementary regressions of this window. {CAUTION_LINK}.",
                                       ident=f"{plan.plan.id}/w{i}/map/{q}", dataset_key=result.cache_key))
            if a.equal is not None:
                ev = a.equal.eigenvalues
                body.append(f"Eigenvalues of this window ({'correlation scale' if a.scale == 'correlation' else 'data units'}"
                            f", smallest first) against the tolerance eps = {a.eps:g}:\n")
                body.append(_table(tuple(f"\u03bb{j + 1}" for j in range(len(ev))),
                                   [tuple(fmt(v) + (" \u2264 eps" if v <= a.eps else "") for v in ev)]))
            prev = (plan.analyses[i - 1].label, paths[i - 1]) if i > 0 else None
            nxt = (plan.analyses[i + 1].label, paths[i + 1]) if i + 1 < len(paths) else None
            pages.append(Page(paths[i], f"{ds.title}: {a.label}", "\n".join(body), "window",
                              breadcrumbs=(HOME, (ds.title, dataset_path(ds.id)),
                                           (title, dataset_path(ds.id))),
                              prev=prev, next=nxt,
                              description=f"{ds.title}, window {a.label} of {title}."))
    return pages


# --------------------------------------------------------------------------------- the other pages

def claims_page(run) -> Page:
    body = []
    if not run.verdicts:
        body.append("The spec makes no claims. Claims are statements the authors make about the data "
                    "(for example, \u201ctwo relations hold in every ten-year window\u201d) that every "
                    "build checks again.\n")
    else:
        n_fail = sum(not v.holds for v in run.verdicts)
        body.append(f"{len(run.verdicts) - n_fail} of {len(run.verdicts)} claim(s) hold on this build"
                    + (f"; **{n_fail} fail**." if n_fail else ".") + "\n")
        body.append(_claims_table(run.verdicts))
        for v in run.verdicts:
            c = v.claim
            body.append(f"## {escape_text(c.id)} {{#claim-{c.id}}}\n")
            body.append(f"{blocks.badge(v.word)} {escape_text(c.text or c.kind)}\n")
            body.append(f"- Dataset: [{escape_text(c.dataset)}](/{dataset_path(c.dataset)}#claims); window "
                        f"plan: `{escape_text(c.plan)}`; kind: `{c.kind}`.\n- What the data show: "
                        f"{escape_text(v.observed)}")
            if v.windows_failing:
                body.append(f"- Windows where it does not hold: "
                            f"{escape_text(', '.join(v.windows_failing))}.")
            if c.kind in ("sign_stable", "coefficient_bounded"):
                body.append(f"- {CAUTION_LINK}.")
            body.append("")
    body.append(blocks.callout(USUAL_CAUTIONS, title="Read with care"))
    return Page("claims.html", "Claims", "\n".join(body), "claims", breadcrumbs=(HOME,),
                description="The authors' claims and whether the data support them.")


def caution_page() -> Page:
    return Page("caution.html", "How to read a single coefficient", caution_body(), "caution",
                breadcrumbs=(HOME,), description="Why a single normalised coefficient can mean nothing.")


def methods_page(pub: Publisher) -> Page:
    from builder.site.formulas import formula_image

    body = ["Each method below states its assumption in one sentence, its formula, its limits and its "
            "published sources. Notation: S is a window's sample covariance, P its inverse, N the noise "
            "covariance, eps the tolerance, q the number of relations (corank), n the number of "
            "variables.\n"]
    for key, title, assumption, formulas, limits, refs in METHODS:
        body.append(f"## {title} {{#{key}}}\n")
        body.append(f"**Assumption.** {assumption}\n")
        for tex, words in formulas:
            img = formula_image(tex, alt=words)
            pub.add(img.file.path, img.file.data)
            body.append(f"{img.markdown}\n")
        body.append(f"**Limits.** {limits}\n")
        body.append("**References.**\n")
        body.append("\n".join(f"- {REFERENCES[r]}" for r in refs) + "\n")
    body.append("## How relspan decides\n")
    body.append("- Corank under equal or known-shape noise: the largest q whose q-th smallest eigenvalue is at "
                "most eps (on the analysed scale).\n- Corank under bounded noise: the same test (Weyl), with "
                "the Davis-Kahan angle bound on the subspace.\n- Corank under independent noise: the largest "
                "corank with an existence certificate; \u201cundetermined\u201d when a larger one is neither "
                "certified nor ruled out.\n- Stability: a window plan is stable when every window's relation "
                "subspace is within the stated angle (checks.max_angle_deg) of the full sample's.\n"
                "- Windows are compared on one scale: each variable divided by its full-sample standard "
                "deviation.\n")
    return Page("methods.html", "Methods", "\n".join(body), "methods", breadcrumbs=(HOME,),
                description="The published methods relspan applies, their assumptions and references.")


def glossary_page() -> Page:
    body = "\n".join(f"{term}\n:   {text}\n" for term, text in GLOSSARY)
    items = "\n".join(f"- **{term}**: {text}" for term, text in GLOSSARY)
    del body
    return Page("glossary.html", "Glossary", "The words used on this site, in plain language.\n\n" + items + "\n",
                "glossary", breadcrumbs=(HOME,), description="Plain-language glossary.")


def reproduce_page(run, pub: Publisher, spec_download: str) -> Page:
    spec = run.spec
    rows = [(escape_cell(ds.source), f"`{r.prepared.sha256}`") for ds, r in zip(spec.datasets, run.datasets)]
    env_rows = [(escape_cell(k), escape_cell(v)) for k, v in sorted(run.environment.items())]
    seeds = sorted({ds.checks.seed for ds in spec.datasets})
    spec_name = escape_text(spec.path.name)
    body = [
        "Everything on this site is computed from the spec and the data files below. With the same "
        "inputs and the same package versions, a rebuild produces the same bytes (compare the "
        "`SHA256SUMS` file at the site's root).\n",
        "## The one command\n",
        f"```\nrelspan build {spec.path.name}\n```\n",
        "## Inputs\n",
        _table(("Data file", "SHA-256"), rows),
        f"\nThe spec as used: [{spec_name}]({spec_download}).\n",
        f"Seed of the independent-noise search: {', '.join(str(s) for s in seeds)}.\n",
        "## Software\n",
        _table(("Package", "Version"), env_rows),
        "\n## For a replication package README\n",
        "A section ready to paste, following the common structure of replication-package READMEs "
        "(data availability, computational requirements, instructions, outputs):\n",
        "```markdown\n" + _replication_readme(run) + "```\n",
        blocks.callout(USUAL_CAUTIONS, title="Read with care"),
    ]
    return Page("reproduce.html", "Reproduce", "\n".join(body), "reproduce", breadcrumbs=(HOME,),
                description="Inputs, versions and the one command that rebuilds this site.")


def _replication_readme(run) -> str:
    spec = run.spec
    lines = ["## Data availability", ""]
    for ds, r in zip(spec.datasets, run.datasets):
        lines.append(f"- `{ds.source}` ({r.prepared.rows_read} rows), SHA-256 {r.prepared.sha256}.")
    if spec.report.licence:
        lines.append(f"- Licence: {spec.report.licence}.")
    lines += ["", "## Computational requirements", "",
              f"- Python {run.environment.get('python', '')}; relspan {run.environment.get('relspan', '')}; "
              + ", ".join(f"{k} {v}" for k, v in sorted(run.environment.items())
                          if k not in ('python', 'relspan')) + ".",
              "- A plain CPU machine; no network access is needed.", "",
              "## Instructions", "",
              "1. `pip install relspan` (the version above).",
              f"2. `relspan build {spec.path.name}` writes the site; `relspan check {spec.path.name}` "
              "re-checks the claims.", "",
              "## Outputs", "",
              "| Output | Program | File |", "|---|---|---|"]
    for ds in spec.datasets:
        lines.append(f"| Results for {ds.id} | relspan build | data/{ds.id}/results.json |")
    lines.append("| Claim verdicts | relspan check | data/claims.csv |")
    return "\n".join(lines).replace("`", "'") + "\n"


def downloads_page(run) -> Page:
    body = ["Every number on this site, to download. The JSON files follow the schema documented with "
            "relspan (docs/results.md); keys are sorted and the bytes are stable across builds.\n",
            "- [All results (JSON)](/data/results.json)",
            "- [Claim verdicts (CSV)](/data/claims.csv)",
            "- [Findings (CSV)](/data/findings.csv)", ""]
    for r in run.datasets:
        ds = r.spec
        body.append(f"## {escape_text(ds.title)}\n")
        body.append(f"- [Results (JSON)](/data/{ds.id}/results.json)\n"
                    f"- [Full sample, every assumption (CSV)](/data/{ds.id}/assumptions.csv)\n"
                    f"- [Every window, every assumption (CSV)](/data/{ds.id}/windows.csv)\n"
                    f"- Each figure's data: the CSV link under the figure on "
                    f"[the dataset page](/{dataset_path(ds.id)}).\n")
    return Page("downloads.html", "Downloads", "\n".join(body), "downloads", breadcrumbs=(HOME,),
                description="Every table and result as CSV and JSON.")


def json_bytes(obj) -> bytes:
    """Deterministic JSON: sorted keys, UTF-8, newline at the end."""
    return (json.dumps(obj, sort_keys=True, ensure_ascii=False, indent=1, allow_nan=False) + "\n").encode()
