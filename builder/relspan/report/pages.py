"""Markdown pages of the site, each a function of the analysis run.

Every page opens with the plain summary and puts the technical detail below.
User-supplied text (titles, labels, summaries, column names, claim texts) only
reaches Markdown through :func:`~relspan.site.markdown.escape_text` or
:func:`~relspan.site.markdown.escape_cell`. Every place that shows a single
coefficient links the caution page.
"""

from __future__ import annotations

import csv as csv_module
import html
import io
import json
import re
from dataclasses import dataclass, field
from typing import Sequence

import numpy as np

from relspan.analysis.findings import CARD_OF_KIND
from relspan.assumptions import ASSUMPTION_IDS, assumption
from relspan.report.text import (ASSUMPTION_PLAIN, CAUTION_LINK, GLOSSARY, METHODS, REFERENCES,
                                 USUAL_CAUTIONS, caution_body)
from relspan.site import blocks
from relspan.site.content import Page, SiteFile
from relspan.site.markdown import escape_cell, escape_text

__all__ = ["Publisher", "home_page", "dataset_page", "window_pages", "claims_page", "caution_page",
           "methods_page", "glossary_page", "reproduce_page", "downloads_page", "dataset_path",
           "window_path", "fmt", "PlainSummary", "plain_summary", "why_assumptions_differ", "plain_cell",
           "table_csv_bytes"]

HOME = ("Home", "index.html")
#: assumptions in display order (the one table, relspan.assumptions)
ORDER = ASSUMPTION_IDS


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


#: said where a map of the elementary regressions would be, for a dataset of two variables
_NO_MAP = ("No map of the elementary regressions is shown: a map needs at least three variables. With "
           "two, the two elementary regressions are just two slopes (each variable regressed on the "
           "other), given with the results under the one-variable-noisy assumption.\n")


@dataclass
class Publisher:
    """Collects the files of the site (figures, their data CSVs, downloads).

    Figures are registered as jobs (descriptions: a function and its plain
    arguments) and placed in the page as a token; the driver draws them
    (:mod:`relspan.run.figures`, on an executor, with a cache) and
    :meth:`fill` puts the finished Markdown in place of each token.
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

    def fill(self, pages: list, rendered: Sequence) -> list:
        """``pages`` with each figure token replaced by its finished Markdown.

        ``rendered[i]`` is what the driver drew for ``self.jobs[i]``
        (:func:`relspan.run.figures.draw_figures`), or None when the figure
        does not apply; the figure files are added to the site here.
        """
        import dataclasses

        snippets = {job.token: self._markdown(job, done) for job, done in zip(self.jobs, rendered)}
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


def _table(header, rows, *, csv: tuple | None = None) -> str:
    """A Markdown pipe table of safe Markdown cells.

    With ``csv=(publisher, path)`` the same table (as shown, in plain text) is
    also written to ``path`` as CSV and linked under the table, so every table
    on the site can be downloaded.
    """
    head = "| " + " | ".join(header) + " |"
    sep = "|" + "|".join("---" for _ in header) + "|"
    body = ["| " + " | ".join(r) + " |" for r in rows]
    out = "\n".join([head, sep, *body]) + "\n"
    if csv is not None:
        pub, path = csv
        link = pub.add(path, table_csv_bytes(header, rows))
        out += f"\n<p class=\"table-csv\" markdown=\"1\">[This table as CSV]({link})</p>\n"
    return out


_TAG = re.compile(r"<[^>]+>")
_MD_LINK = re.compile(r"\[([^\]]*)\]\([^)]*\)")
_MD_ESCAPE = re.compile(r"\\(.)")


def plain_cell(markdown_cell: str) -> str:
    """The text a reader sees in a table cell (links, code marks, tags and escapes removed)."""
    text = _TAG.sub("", markdown_cell)
    text = _MD_LINK.sub(r"\1", text)
    text = text.replace("`", "")
    text = _MD_ESCAPE.sub(r"\1", text)
    text = html.unescape(text).replace("\u2212", "-")
    return " ".join(text.split())


def table_csv_bytes(header, rows) -> bytes:
    """CSV (UTF-8, LF line ends) of a table given as Markdown cells."""
    buf = io.StringIO()
    w = csv_module.writer(buf, lineterminator="\n")
    w.writerow([plain_cell(h) for h in header])
    for r in rows:
        w.writerow([plain_cell(c) for c in r])
    return buf.getvalue().encode("utf-8")


def _code(text: str) -> str:
    """User text as inline code, safe in paragraphs and table cells (no Markdown escapes shown)."""
    return "<code>" + html.escape(str(text), quote=True).replace("|", "&#124;") + "</code>"


def _assumption_name(a: str) -> str:
    return assumption(a).title


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
    pinned_short, open_short : str
        The same in a few words, for the home page's first screen.
    covers : tuple of (kind, topic)
        Findings these sentences already state (cards do not repeat them).
    unstable : str
        What changes across windows of time, in plain words ("" when nothing does).
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
    pinned_short: str = ""
    open_short: str = ""
    covers: tuple = ()
    unstable: str = ""


def _window_relation_change(plan, q: int, assumption: str = "equal"):
    """Largest angle (degrees) between the windows' corank-q relations, or None when not every window has one."""
    from relspan.analysis.stability import principal_angles

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
    windowed = _windowed_relations(result) if q is None else []
    if windowed:
        windowed.sort(key=lambda t: (t[0].plan.kind != "periods", -(t[2] or 0.0)))
    covers = [("pinned_down", "corank")]
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
        covers += [("pinned_down", "subspace")] if entry is not None else []
        covers += [("stable", "stability")] if stab and len(steady) == len(stab) else []
        pinned_short = f"{_count(q, 'relation')} among the {series}"
        if stab:
            pinned_short += (", steady across time windows" if len(steady) == len(stab)
                             else ", but moving across time windows")
        if q >= 2:
            ident = result.identified.get(q)
            targets = ([labels[result.names.index(t)] for t in ident.targets] if ident is not None else [])
            open_ = (f"No single weight of one series in \u201cthe\u201d equation: with {_count(q, 'relation')}, "
                     "any mix of them is also a relation, so such a weight is a choice, not a finding.")
            if targets:
                open_ += (f" What is fixed is {_names_list(targets)} written through the other "
                          f"series.")
            open_short = "the weight of any single series (only the relations as a set are fixed)"
            covers += [("not_identified", "coefficient"), ("pinned_down", "reduced_form")]
            single = True
        elif full.frisch_lower is not None:
            ks = [k for k in range(n) if k != full.ref]
            lo, hi = full.frisch_lower, full.frisch_upper
            if all(np.isfinite(lo[k]) and np.isfinite(hi[k]) for k in ks):
                ranges = _names_list([f"{labels[k]} {fmt(lo[k])} to {fmt(hi[k])}" for k in ks])
                open_ = (f"The exact weights, if each series has its own error of unknown size: the data only "
                         f"give ranges in the equation for {labels[full.ref]} ({ranges}).")
                ev["open"] = "frisch"
                open_short = "the exact weights: only ranges, if each series has its own error"
                covers += [("set_only", "coefficient")]
            else:
                open_short = "the weights: unbounded if each series has its own error"
                open_ = (f"The weights in the equation for {labels[full.ref]}, if each series has its own error "
                         "of unknown size: they are then not bounded at all.")
            single = True
        else:
            open_ = ("The exact weights depend on the noise assumption; see the assumptions side by side.")
            open_short = "the exact weights (they depend on the noise assumption)"
            single = True
    else:
        period = (f" over the whole period ({result.prepared.period[0]} to {result.prepared.period[1]})"
                  if result.prepared.period else " over all the rows together")
        if windowed:
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
            pinned_short = f"{_count(qq, 'relation')} within each time window"
            open_short = "a single relation for the whole period" + (
                f": it differs between windows by up to {change:.2g} degrees" if change is not None else "")
        else:
            pinned = (f"No linear relation ties the {series} together at the stated tolerance: each "
                      "combination of them varies more than the noise allows.")
            open_ = "Nothing further can be identified without a relation."
            pinned_short = f"no relation among the {series}"
            open_short = "nothing further without a relation"
    depends = why_assumptions_differ(result)
    if depends:
        covers.append(("depends", "corank"))
    else:
        flips = [f for f in result.findings if f.kind == "depends" and f.topic == "coefficient"]
        if flips and q is not None and q >= 2:
            depends = ("The signs of single weights differ between methods. With several relations this is "
                       "expected: each method picks a different mix of the same relations.")
            single = True
        elif flips:
            depends = flips[0].headline
            single = True
    unstable = ""
    swings = [f for f in result.findings if f.kind == "unstable" and f.topic == "coefficient"]
    moving = [f for f in result.findings if f.kind == "unstable" and f.topic == "stability"]
    if swings and stab and not moving:
        worst = max(st.max_to_reference_deg for _, st in stab)
        unstable = (f"Single weights swing between windows of time, some even change sign, while the "
                    f"relations as a set stay within {worst:.2g} degrees. With several relations this is "
                    "expected and is no evidence that the relation changed." if q and q >= 2 else
                    f"Single weights swing between windows of time while the relation stays within "
                    f"{worst:.2g} degrees.")
        ev["unstable"] = swings[0].evidence
        single = True
    elif moving:
        unstable = "The relations move between windows of time by more than the stated threshold."
        ev["unstable"] = moving[0].evidence
    elif q is None and windowed and windowed[0][2] is not None:
        plan, _, change = windowed[0]
        unstable = (f"The relation itself changes over time: between the windows of \u201c"
                    f"{plan.plan.title or plan.plan.id}\u201d it turns by an angle of up to {change:.2g} degrees.")
        ev["unstable"] = f"plan-{plan.plan.id}"
    return PlainSummary(pinned, open_, depends, ev, single, _cap(pinned_short), _cap(open_short),
                        tuple(covers), unstable)


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
    summaries = {r.spec.id: plain_summary(r) for r in run.datasets}
    # first screen: what each dataset pins down and leaves open, in a few words
    glance = []
    for result in run.datasets:
        ds = result.spec
        sm = summaries[ds.id]
        page = "/" + dataset_path(ds.id)
        glance.append(f"- **[{escape_text(ds.title)}]({page})** \u2014 *Pinned down:* "
                      f"{escape_text(sm.pinned_short)}. *Left open:* {escape_text(sm.open_short)}. "
                      f"[Details](#ds-{ds.id})")
    if glance:
        parts.append("In short, for each dataset:\n\n" + "\n".join(glance) + "\n")
    n_fail = sum(not v.holds for v in run.verdicts)
    if run.verdicts:
        parts.append(f"**Claims re-checked on this build:** {len(run.verdicts) - n_fail} of "
                     f"{len(run.verdicts)} hold" + (f", {n_fail} fail" if n_fail else "") +
                     " ([details](/claims.html)).\n")
    if meta.summary:
        parts.append("## About these data {#about-data}\n")
        parts.append(escape_text(meta.summary) + "\n")
    for result in run.datasets:
        ds = result.spec
        sm = summaries[ds.id]
        page = "/" + dataset_path(ds.id)
        parts.append(f"## {escape_text(ds.title)} {{#ds-{ds.id}}}\n")
        if ds.description:
            parts.append(escape_text(ds.description) + "\n")
        groups = {"pinned": [], "open": [], "depends": [], "unstable": []}
        for f in result.findings:
            if (f.kind, f.topic) not in sm.covers:
                groups[CARD_OF_KIND[f.kind]].append(f)
        lead = {"pinned": (sm.pinned, sm.evidence["pinned"]), "open": (sm.open, sm.evidence["open"]),
                "depends": (sm.depends, sm.evidence["depends"]),
                "unstable": (sm.unstable, sm.evidence.get("unstable", "stability"))}
        snippets = []
        for card in ("pinned", "open", "depends", "unstable"):
            items = groups[card]
            text, anchor = lead[card]
            lines = []
            if text:
                lines.append(f"{escape_text(text)} [Evidence]({page}#{anchor})\n")
            if items:
                lines.append("\n".join(f"- {escape_text(f.headline)} [Evidence]({page}#{f.evidence})"
                                       for f in items[:3]))
                if len(items) > 3:
                    lines.append(f"- \u2026 and {len(items) - 3} more on [the dataset page]({page}).")
            if not lines:
                lines.append({"pinned": "Nothing is pinned down at the stated tolerance.",
                              "open": "Nothing found that the data leave open.",
                              "depends": "No finding here changes with the noise assumption.",
                              "unstable": "Nothing found that changes across the windows checked."}[card])
            body = "\n".join(lines)
            if any(f.single_coefficient for f in items) or (card != "pinned" and text
                                                             and sm.single_coefficient):
                body += f"\n\n{CAUTION_LINK}."
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

def _csv_path(ds_id: str, name: str) -> str:
    return f"data/{ds_id}/tables/{name}.csv"


def _data_summary(result, pub: Publisher) -> str:
    p = result.prepared
    ds = result.spec
    rows = [("Source file", _code(ds.source)),
            ("Rows read", str(p.rows_read)),
            ("Rows analysed", str(p.rows_used))]
    if p.period:
        rows.append(("Period", escape_cell(f"{p.period[0]} to {p.period[1]}")))
    if p.rows_outside_range:
        rows.append(("Rows outside the date range", str(p.rows_outside_range)))
    policy = {"drop": "rows with a missing value are dropped",
              "fail": "a missing value stops the build"}.get(ds.missing, ds.missing)
    missing = sum(d.count for d in p.drops if d.reason == "missing value")
    rows.append(("Missing values", escape_cell(f"{missing} row(s) dropped ({policy})")))
    for d in p.drops:
        if d.reason != "missing value":
            rows.append((escape_cell(f"Rows dropped: {d.reason}"), str(d.count)))
    transformed = sorted({t for t in p.transforms if t != "none"})
    rows.append(("Transforms", escape_cell(", ".join(transformed) if transformed else "none (series as published)")))
    rows.append(("SHA-256 of the file", f"`{p.sha256}`"))
    out = _table(("Item", "Value"), rows, csv=(pub, _csv_path(ds.id, "data-summary")))
    vrows = []
    for v, t in zip(ds.variables, p.transforms):
        vrows.append((escape_cell(v.label), _code(v.column), escape_cell(v.unit or "\u2014"),
                      escape_cell(t), fmt(v.noise_share) if v.noise_share is not None else "\u2014"))
    out += "\n" + _table(("Variable", "Column", "Unit", "Transform", "Noise share"), vrows,
                         csv=(pub, _csv_path(ds.id, "variables")))
    if not any(v.noise_share is not None for v in ds.variables):
        out += "\nNoise share: not given in the spec (needed only for the known-noise-shape check).\n"
    return out


def _side_by_side(result, pub: Publisher) -> str:
    full = result.full
    ref = full.ref
    labels = result.labels
    rows = []
    for a in ORDER:
        if a not in full.coranks:
            continue
        corank = full.coranks[a]
        q = 1 if a == "elementary" else corank
        if a == "elementary":
            cor_text = "1 (assumed)"
        else:
            cor_text = "undetermined" if corank is None else str(corank)
        if a == "elementary":
            subspace = f"{full.n} different answers, one per noisy variable"
        elif q is None:
            subspace = "not settled at this tolerance"
        elif q == 0:
            subspace = "no relation at this tolerance"
        elif a == "bounded" and full.bounded is not None:
            entry = next((c for c in full.bounded.coranks if c.q == q), None)
            subspace = (f"within {fmt(entry.angle_bound_deg)}\u00b0 of the equal-noise answer"
                        if entry is not None and not entry.vacuous else "not bounded (noise as large as the gap)")
        elif a == "diagonal" and full.diagonal is not None:
            fr = full.diagonal
            if q >= 2 and q * (q + 1) < 2 * full.n:
                subspace = "a family of answers, not one"
                if fr.spread is not None and fr.spread.q == q and fr.spread.max_angle_deg is not None:
                    subspace += f" (members differ by up to {fmt(fr.spread.max_angle_deg)}\u00b0)"
            elif q == 1:
                subspace = "a set of answers (every mix of the elementary regressions)" if (
                    fr.q1.status == "bounded") else "an unbounded set of answers"
            else:
                subspace = "one answer (enough equations to fix it)"
        else:
            subspace = "one answer"
        if q == 1 and a == "diagonal" and full.frisch_lower is not None:
            ks = [k for k in range(full.n) if k != ref]
            coefs = "; ".join(f"{escape_cell(labels[k])}: {fmt(full.frisch_lower[k])} to "
                              f"{fmt(full.frisch_upper[k])}" for k in ks)
        elif q == 1 and a in full.coefficients:
            c = full.coefficients[a]
            coefs = "; ".join(f"{escape_cell(labels[k])}: {fmt(c[k])}" for k in range(full.n) if k != ref)
        elif q is not None and q >= 2:
            coefs = f"none: with {q} relations a single equation is not fixed"
        else:
            coefs = "\u2014"
        if a == "elementary":
            ident = "a point, but only because the assumption fixes which variable is noisy"
        elif q is None:
            ident = "not settled"
        elif q == 0:
            ident = "nothing (no relation)"
        elif q >= 2:
            ident = f"the {q} relations as a set; no single coefficient"
        elif a == "diagonal":
            bounded = full.frisch_lower is not None and np.all(np.isfinite(np.delete(full.frisch_lower, ref)))
            ident = "a range for each coefficient" if bounded else "no bounds on the coefficients"
        elif a == "bounded":
            ident = "the relation, to within the angle shown"
        else:
            ident = "each coefficient, as a point"
        rows.append((escape_cell(_assumption_name(a)), cor_text, subspace, coefs, ident))
    header = ("Noise assumption", "Relations", "The relations found",
              f"Coefficients, equation for {escape_cell(labels[ref])}", "What is identified")
    return _table(header, rows, csv=(pub, _csv_path(result.spec.id, "assumptions-side-by-side")))


def _identified_section(result, pub: Publisher) -> str:
    out = []
    lab = dict(zip(result.names, result.labels))
    names = list(result.names)
    for q in result.examined:
        ident = result.identified.get(q)
        if ident is None:
            continue
        targets = [lab[t] for t in ident.targets]
        if q == 1:
            out.append(f"One relation: the data pin down its direction, and so each coefficient once the "
                       f"equation is written for {escape_text(targets[0])} (under each noise assumption; see "
                       "above).\n")
        else:
            out.append(f"{_cap(_count(q, 'relation'))}: the data pin down the relations as a set. A single "
                       "coefficient of one relation is not identified, because any mix of the relations is "
                       f"again a relation. What is identified is a **reduced form**: "
                       f"{escape_text(_names_list(targets))} written through the other variables.\n")
        others = [k for k, nm in enumerate(names) if nm not in ident.targets]
        rows = []
        for i, t in enumerate(ident.targets):
            cells = [escape_cell(lab[t])]
            for k in others:
                cells.append(fmt(-ident.reduced_form[i, k]))
            rows.append(tuple(cells))
        out.append(f"Reduced form (deviations from the means, data units; condition number of this choice "
                   f"of variables {fmt(ident.reduced_condition)}, where values near 1 mean a well-posed "
                   "choice):\n")
        out.append(_table(("Equation for",) + tuple(escape_cell(lab[names[k]]) for k in others), rows,
                          csv=(pub, _csv_path(result.spec.id, f"reduced-form-q{q}"))))
        basis_rows = [tuple([f"relation {i + 1}"] + [fmt(v) for v in ident.basis[i]]) for i in range(q)]
        st_rows = []
        for st in ident.statuses:
            form = "reduced form" if st.form == "reduced" else "single relation"
            st_rows.append((form, escape_cell(lab.get(st.relation, st.relation)),
                            escape_cell(lab.get(st.variable, st.variable)),
                            fmt(st.value) if st.identified else "\u2014", escape_cell(st.kind),
                            escape_cell(st.why)))
        out.append("\n" + blocks.details(
            "Technical detail: a basis of the relations, and which coefficients are identified",
            escape_text(ident.summary) + "\n\nOrthonormal basis of the relations (rows; data units):\n\n"
            + _table(("",) + tuple(escape_cell(lab[nm]) for nm in names), basis_rows,
                     csv=(pub, _csv_path(result.spec.id, f"relation-basis-q{q}")))
            + "\n"
            + _table(("Form", "Equation for", "Coefficient of", "Value", "Status", "Why"), st_rows,
                     csv=(pub, _csv_path(result.spec.id, f"identified-q{q}")))))
    if not out:
        windowed = _windowed_relations(result)
        if windowed:
            out.append("The full sample supports no relation, so nothing is identified for the whole period. "
                       "The windows below do support one: see how it differs between them.\n")
        else:
            out.append("No relation was found, so nothing is identified beyond the absence of a relation.\n")
    return "\n".join(out)


def _window_relations_table(result, plan, pub: Publisher) -> str:
    """Each window's own relation (equal noise), for plans whose windows support one but the full sample not."""
    seq = plan.coranks.coranks.get("equal") or ()
    if not seq or any(c != 1 for c in seq):
        return ""
    from relspan.analysis.stability import principal_angles

    ref = result.full.ref
    labels = result.labels
    ks = [k for k in range(len(result.names)) if k != ref]
    rows = []
    prev = None
    for a in plan.analyses:
        basis = a.bases.get("equal", {}).get(1)
        ang = fmt(float(np.max(principal_angles(prev, basis)))) + "\u00b0" if (
            prev is not None and basis is not None) else "\u2014"
        rows.append((escape_cell(a.label), str(a.count))
                    + tuple(fmt(a.coefficient("equal", ref, k)) for k in ks) + (ang,))
        prev = basis
    header = (("Window", "Rows") + tuple(f"Coefficient of {escape_cell(labels[k])}" for k in ks)
              + ("Angle to the previous window",))
    return (f"The relation in each window under equal noise, written as an equation for "
            f"{escape_text(labels[ref])} ({CAUTION_LINK}); the angle says how far it turned from the "
            "previous window (0\u00b0: the same relation):\n\n"
            + _table(header, rows, csv=(pub, _csv_path(result.spec.id, f"{plan.plan.id}-relations"))))


def _plan_section(result, plan, pub: Publisher, folder: str) -> str:
    title = plan.plan.title or plan.plan.id
    out = [f"### {escape_text(title)} {{#plan-{plan.plan.id}}}\n"]
    n = len(plan.analyses)
    links = ", ".join(f"[{escape_text(a.label)}](/{window_path(result.spec.id, plan.plan.id, i)})"
                      for i, a in enumerate(plan.analyses))
    out.append(f"{n} window(s), each with its own page: {links}.\n")
    for q in result.examined:
        stab = plan.stability.get(("equal", q))
        if stab is not None and n >= 2:
            what = "relation" if q == 1 else "set of relations"
            worst = stab.max_to_reference_deg
            word = "stays" if stab.stable else "moves"
            out.append(f"**In plain words:** under equal noise the {what} {word} within an angle of "
                       f"{fmt(worst)}\u00b0 of the full sample's in every window (threshold "
                       f"{fmt(stab.threshold_deg)}\u00b0). " + escape_text(stab.verdict) + "\n")
    from relspan.report import figures_for as ff

    q = result.examined[0] if result.examined else None
    key, pid = result.cache_key, plan.plan.id
    if q is None:
        table = _window_relations_table(result, plan, pub)
        if table:
            out.append(table)
    if q is not None:
        out.append(pub.figure(ff.gallery_figure, (result, plan, q), folder,
                              "The elementary-regression map in every window, on shared axes: if the line "
                              "stays while the points move, the relations are stable even though single "
                              "coefficients are not.", ident=f"{pid}/gallery/{q}", dataset_key=key))
        out.append(pub.figure(ff.stability_figure, (result, plan, "equal", q), folder,
                              "Angles between the windows' relations (left) and each window's angle to the "
                              "full sample (right); 0\u00b0 means the same relations.", ident=f"{pid}/angles/{q}",
                              dataset_key=key))
        out.append(pub.figure(ff.swing_figure, (result, plan, q), folder,
                              f"A single coefficient per window under each noise assumption, above the "
                              f"angle of the relations. {CAUTION_LINK}.", ident=f"{pid}/swing/{q}",
                              dataset_key=key))
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
        out.append(_table(("Coefficient of", "Smallest", "Largest", "Sign changes"), rows,
                          csv=(pub, _csv_path(result.spec.id, f"{pid}-least-squares-range"))))
    return "\n".join(o for o in out if o)


def _claims_table(verdicts, pub: Publisher, path: str) -> str:
    rows = []
    for v in verdicts:
        c = v.claim
        rows.append((blocks.badge(v.word), _code(c.id), escape_cell(c.text or c.kind),
                     escape_cell(v.observed)))
    return _table(("Verdict", "Claim", "Statement", "What the data show"), rows, csv=(pub, path))


def _single_coefficient_note() -> str:
    return blocks.callout(f"Some statements on this page quote a single coefficient. {CAUTION_LINK} "
                          "before using one.", title="Single coefficients")


def _numerical_notes(result) -> str:
    """A caution listing the windows whose numbers are fragile (ill conditioned, singular)."""
    items = []
    if result.full.notes:
        items += [f"- Full sample: {escape_text(n)} ([details](#assumptions))" for n in result.full.notes]
    for plan in result.plans:
        for i, a in enumerate(plan.analyses):
            for n in a.notes:
                items.append(f"- [{escape_text(a.label)}](/{window_path(result.spec.id, plan.plan.id, i)}) "
                             f"({escape_text(plan.plan.title or plan.plan.id)}): {escape_text(n)}")
    if not items:
        return ""
    shown = items[:12]
    if len(items) > 12:
        shown.append(f"- \u2026 and {len(items) - 12} more; each window page lists its own.")
    return blocks.callout("Some numbers on this page come from windows where the computation is fragile "
                          "(the data nearly satisfy an exact relation, so small changes in the data move the "
                          "results a lot). Read those windows' numbers with extra care.\n\n" + "\n".join(shown),
                          title="Numerical warnings")


def dataset_page(run, result, pub: Publisher) -> Page:
    from relspan.report import figures_for as ff

    ds = result.spec
    folder = f"figures/{ds.id}"
    full = result.full
    sm = plain_summary(result)
    body = []
    body.append("## In plain words {#summary}\n")
    if ds.description:
        body.append(escape_text(ds.description) + "\n")
    body.append(f"- **Pinned down.** {escape_text(sm.pinned)} ([evidence](#{sm.evidence['pinned']}))")
    body.append(f"- **Left open.** {escape_text(sm.open)} ([evidence](#{sm.evidence['open']}))")
    if sm.depends:
        body.append(f"- **Depends on the noise assumption.** {escape_text(sm.depends)} "
                    f"([evidence](#{sm.evidence['depends']}))")
    if sm.unstable:
        body.append(f"- **Changes across time.** {escape_text(sm.unstable)} "
                    f"([evidence](#{sm.evidence['unstable']}))")
    body.append("")
    if sm.single_coefficient or any(f.single_coefficient for f in result.findings):
        body.append(_single_coefficient_note())
    body.append(_numerical_notes(result))
    body.append(blocks.details(
        "Every finding, one line each",
        "\n".join(f"- **{escape_text(_kind_words(f.kind))}:** {escape_text(f.headline)} "
                  f"([evidence](#{f.evidence}))" for f in result.findings) or "No findings."))
    body.append("## The data {#data}\n")
    body.append(_data_summary(result, pub))
    key = result.cache_key
    body.append(pub.figure(ff.overview_figure, (result,), folder,
                           "The analysed series, each standardised (0 is its average, 1 is one standard "
                           "deviation), with the windows of each plan below.",
                           ident="overview", dataset_key=key))
    body.append("## The noise assumptions side by side {#assumptions}\n")
    body.append(f"Each row answers the same question under a different assumption about the measurement "
                f"error. Full sample, {full.count} rows; tolerance: {_eps_words(full)}. {CAUTION_LINK}.\n")
    if sm.depends:
        body.append(blocks.callout(escape_text(sm.depends), title="Why the rows differ", kind="note"))
    body.append(_side_by_side(result, pub))
    body.append(blocks.details("What each noise assumption means",
                               "\n".join(f"- **{escape_text(v[0])}**: {escape_text(v[1])}"
                                         for k, v in ASSUMPTION_PLAIN.items() if k in full.coranks)))
    body.append("## How many relations {#corank}\n")
    body.append(f"**In plain words:** {escape_text(sm.pinned)}\n")
    counts = "; ".join(f"{_assumption_name(a).lower()}: " + ("not settled" if full.coranks[a] is None
                                                            else str(full.coranks[a]))
                       for a in ORDER if a in full.coranks and a != "elementary")
    line = f"Relations in the full sample \u2014 {counts}."
    if full.equal is not None:
        ev = full.equal.eigenvalues
        line += (f" The smallest eigenvalues are {', '.join(fmt(v) for v in ev[:min(3, len(ev))])} against the "
                 f"tolerance {full.eps:g}; each one at or below it is room for one relation.")
    body.append(escape_text(line) + "\n")
    body.append(f"Relations examined in the rest of this page: "
                f"{', '.join(str(q) for q in result.examined) or 'none'} "
                f"({escape_text(result.examined_from)}).\n")
    body.append(pub.figure(ff.spectrum_figure, (result, full, f"{ds.id}-spectrum"), folder,
                           "Eigenvalues of the full-sample covariance (how much the data vary in each "
                           "independent direction) against the tolerance: every eigenvalue below the line is "
                           "room for one more relation.", ident="spectrum", dataset_key=key))
    if full.diagonal is not None:
        body.append(blocks.details("Independent noise (Frisch scheme): the corank search",
                                   escape_text(full.diagonal.corank.summary)))
    body.append("## What the data identify {#identified}\n")
    body.append(_identified_section(result, pub))
    body.append(f"\n{CAUTION_LINK}.\n")
    if result.examined and result.examined[0] == 1 and full.frisch_lower is not None:
        body.append("## Bounds under independent noise {#frisch}\n")
        body.append("If each series has its own measurement error of unknown size, every coefficient is known "
                    "only as a range. " + escape_text(_cap(full.diagonal.q1.reason)) + f". {CAUTION_LINK}.\n")
        body.append(pub.figure(ff.frisch_figure, (result, full, f"{ds.id}-frisch"), folder,
                               "Range of each coefficient over every independent-noise explanation of the "
                               f"data. {CAUTION_LINK}.", ident="frisch", dataset_key=key))
    q = result.examined[0] if result.examined else None
    if q is not None:
        body.append("## The elementary regressions {#map}\n")
        if len(result.names) < 3:
            body.append(_NO_MAP)
        else:
            body.append(pub.figure(ff.map_figure, (result, full, q, f"{ds.id}-map"), folder,
                                   "Each point is the least-squares relation that treats one variable as "
                                   "the only noisy one. Their spread shows how much the answer depends on "
                                   f"that choice. {CAUTION_LINK}.", ident=f"map/{q}", dataset_key=key))
    body.append("## Across windows {#stability}\n")
    body.append("Each plan cuts the data into windows of time and repeats the analysis in each, to see "
                "whether the answer holds over time.\n")
    for plan in result.plans:
        if plan.plan.kind == "full":
            continue
        body.append(_plan_section(result, plan, pub, folder))
    verdicts = [v for v in run.verdicts if v.claim.dataset == ds.id]
    body.append("## Claims about this dataset {#claims}\n")
    body.append(_claims_table(verdicts, pub, _csv_path(ds.id, "claims")) if verdicts
                else "The spec makes no claim about this dataset.\n")
    body.append("## Downloads {#downloads}\n")
    body.append(f"- [All results for this dataset (JSON)](/data/{ds.id}/results.json)\n"
                f"- [Full sample, every assumption, full precision (CSV)](/data/{ds.id}/assumptions.csv)\n"
                f"- [Every window, every assumption, full precision (CSV)](/data/{ds.id}/windows.csv)\n"
                f"- Every table on this page: the CSV link under it.\n")
    body.append(blocks.callout(USUAL_CAUTIONS, title="Read with care"))
    return Page(dataset_path(ds.id), ds.title, "\n".join(body), "dataset", breadcrumbs=(HOME,),
                description=f"What the data of {ds.title} pin down and leave open.")


def _kind_words(kind: str) -> str:
    return {"pinned_down": "Pinned down", "stable": "Stable", "set_only": "Known only as a set",
            "not_identified": "Not identified", "no_relation": "No relation", "depends": "Depends on the "
            "noise assumption", "unstable": "Unstable across windows"}[kind]


def _window_plain(result, plan, i: int, a, w) -> str:
    """The plain opening of one window page."""
    q = result.examined[0] if result.examined else None
    words = []
    for key in ("equal", "shaped", "bounded", "diagonal"):
        if key in a.coranks:
            c = a.coranks[key]
            words.append(f"{_assumption_name(key).lower()}: "
                         + ("not settled" if c is None else _count(c, "relation")))
    span = f"{w.first_time} to {w.last_time}, " if w.first_time is not None else ""
    text = f"This window covers {span}{w.rows} rows. Relations found \u2014 " + "; ".join(words) + "."
    if q is not None and ("equal", q) in plan.stability:
        ang = plan.stability[("equal", q)].to_reference_deg[i]
        what = "relation" if q == 1 else "set of relations"
        text += (f" Under equal noise its {what} is {fmt(ang)}\u00b0 from the full sample's (0\u00b0: the same; "
                 f"the stability threshold is {fmt(plan.stability[('equal', q)].threshold_deg)}\u00b0).")
    return text


def window_pages(run, result, pub: Publisher) -> list[Page]:
    from relspan.report import figures_for as ff

    ds = result.spec
    pages = []
    q = result.examined[0] if result.examined else None
    for plan in result.plans:
        title = plan.plan.title or plan.plan.id
        paths = [window_path(ds.id, plan.plan.id, i) for i in range(len(plan.analyses))]
        section = f"{dataset_path(ds.id)}#" + ("assumptions" if plan.plan.kind == "full" else f"plan-{plan.plan.id}")
        for i, (a, w) in enumerate(zip(plan.analyses, plan.windows)):
            base = f"data/{ds.id}/tables/{plan.plan.id}/window-{i + 1:02d}"
            body = ["## In plain words {#summary}\n", escape_text(_window_plain(result, plan, i, a, w)) + "\n"]
            body.append(f"Part of \u201c{escape_text(title)}\u201d, window {i + 1} of {len(paths)}; "
                        f"[all windows of this plan](/{section}).\n")
            for note in a.notes:
                body.append(blocks.callout(escape_text(note), title="Numerical note", kind="note"))
            body.append("## Noise assumptions {#assumptions}\n")
            rows = []
            ref = a.ref
            for key in ORDER:
                if key not in a.coranks:
                    continue
                c = a.coranks[key]
                qk = 1 if key == "elementary" else c
                if qk == 1 and key == "diagonal" and a.frisch_lower is not None:
                    coefs = "; ".join(f"{escape_cell(result.labels[k])}: {fmt(a.frisch_lower[k])} to "
                                      f"{fmt(a.frisch_upper[k])}" for k in range(a.n) if k != ref)
                elif qk == 1 and key in a.coefficients:
                    coefs = "; ".join(f"{escape_cell(result.labels[k])}: {fmt(a.coefficients[key][k])}"
                                      for k in range(a.n) if k != ref)
                elif qk is not None and qk >= 2:
                    coefs = f"none: with {qk} relations a single equation is not fixed"
                else:
                    coefs = "\u2014"
                rows.append((escape_cell(_assumption_name(key)),
                             "1 (assumed)" if key == "elementary" else ("undetermined" if c is None else str(c)),
                             coefs))
            body.append(f"Coefficients in the equation for {escape_text(result.labels[ref])} "
                        f"({CAUTION_LINK}):\n")
            body.append(_table(("Noise assumption", "Relations", "Coefficients"), rows,
                               csv=(pub, base + "-assumptions.csv")))
            if q is not None and len(result.names) < 3:
                body.append(_NO_MAP)
            elif q is not None:
                body.append(pub.figure(ff.map_figure, (result, a, q, f"{ds.id}-{plan.plan.id}-w{i + 1:02d}-map"),
                                       f"figures/{ds.id}/{plan.plan.id}",
                                       f"The elementary regressions of this window. {CAUTION_LINK}.",
                                       ident=f"{plan.plan.id}/w{i}/map/{q}", dataset_key=result.cache_key))
            if a.equal is not None:
                ev = a.equal.eigenvalues
                scale = "correlation scale" if a.scale == "correlation" else "data units"
                body.append(f"Eigenvalues of this window ({scale}, smallest first) against the tolerance "
                            f"eps = {a.eps:g}; each one at or below eps is room for one relation:\n")
                body.append(_table(tuple(f"\u03bb{j + 1}" for j in range(len(ev))),
                                   [tuple(fmt(v) + (" \u2264 eps" if v <= a.eps else "") for v in ev)],
                                   csv=(pub, base + "-eigenvalues.csv")))
            prev = (plan.analyses[i - 1].label, paths[i - 1]) if i > 0 else None
            nxt = (plan.analyses[i + 1].label, paths[i + 1]) if i + 1 < len(paths) else None
            pages.append(Page(paths[i], f"{ds.title}: {a.label}", "\n".join(body), "window",
                              breadcrumbs=(HOME, (ds.title, dataset_path(ds.id)),
                                           (title, section)),
                              prev=prev, next=nxt,
                              description=f"{ds.title}, window {a.label} of {title}."))
    return pages


# --------------------------------------------------------------------------------- the other pages

def claims_page(run, pub: Publisher) -> Page:
    body = []
    if not run.verdicts:
        body.append("The spec makes no claims. Claims are statements the authors make about the data "
                    "(for example, \u201ctwo relations hold in every ten-year window\u201d) that every "
                    "build checks again.\n")
    else:
        n_fail = sum(not v.holds for v in run.verdicts)
        body.append(f"{len(run.verdicts) - n_fail} of {len(run.verdicts)} claim(s) hold on this build"
                    + (f"; **{n_fail} fail**." if n_fail else ".") + "\n")
        body.append(_claims_table(run.verdicts, pub, "data/tables/claims.csv"))
        for v in run.verdicts:
            c = v.claim
            body.append(f"## {escape_text(c.id)} {{#claim-{c.id}}}\n")
            body.append(f"{blocks.badge(v.word)} {escape_text(c.text or c.kind)}\n")
            body.append(f"- Dataset: [{escape_text(c.dataset)}](/{dataset_path(c.dataset)}#claims); window "
                        f"plan: {_code(c.plan)}; kind: {_code(c.kind)}.\n- What the data show: "
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
    from relspan.site.formulas import formula_image

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
    items = "\n".join(f"- **{term}**: {text}" for term, text in GLOSSARY)
    return Page("glossary.html", "Glossary", "The words used on this site, in plain language.\n\n" + items + "\n",
                "glossary", breadcrumbs=(HOME,), description="Plain-language glossary.")


def _sha256(data: bytes) -> str:
    import hashlib

    return hashlib.sha256(data).hexdigest()


def _outputs(run, pub: Publisher) -> list[tuple[str, str, str]]:
    """(what, program, output file) rows for the replication README, from the files registered so far."""
    spec_name = run.spec.path.name
    build = f"relspan build {spec_name}"
    rows = []
    for r in run.datasets:
        ds = r.spec
        title = f"Dataset {ds.id}"
        tables = sorted(p for p in pub.files if p.startswith(f"data/{ds.id}/tables/") and p.count("/") == 3)
        for path in tables:
            rows.append((f"{title}: table \u201c{path.rsplit('/', 1)[1][:-4]}\u201d", build, path))
        if any(p.startswith(f"data/{ds.id}/tables/") and p.count("/") == 4 for p in pub.files):
            rows.append((f"{title}: tables of each window page", build, f"data/{ds.id}/tables/<plan>/window-NN-*.csv"))
        rows.append((f"{title}: every figure (image and its data)", build,
                     f"figures/{ds.id}/*.{pub.fmt} and figures/{ds.id}/*.csv"))
        rows.append((f"{title}: all results", build, f"data/{ds.id}/results.json"))
        rows.append((f"{title}: full sample and windows, full precision", build,
                     f"data/{ds.id}/assumptions.csv, data/{ds.id}/windows.csv"))
    rows.append(("All results in one file", build, "data/results.json"))
    rows.append(("Claim verdicts", f"relspan check {spec_name}", "data/claims.csv"))
    rows.append(("Findings in plain words", build, "data/findings.csv"))
    return rows


def reproduce_page(run, pub: Publisher, spec_download: str) -> Page:
    spec = run.spec
    spec_bytes = spec.text.encode("utf-8")
    rows = [(f"{_code(spec.path.name)} (the spec)", f"`{_sha256(spec_bytes)}`")]
    rows += [(_code(ds.source), f"`{r.prepared.sha256}`") for ds, r in zip(spec.datasets, run.datasets)]
    env_rows = [(escape_cell(k), escape_cell(v)) for k, v in sorted(run.environment.items())]
    seeds = sorted({ds.checks.seed for ds in spec.datasets})
    spec_name = escape_text(spec.path.name)
    body = [
        "## In plain words {#summary}\n",
        "Everything on this site is computed from the spec and the data files below. With the same "
        "inputs and the same package versions, a rebuild produces the same bytes: compare the "
        "`SHA256SUMS` file at the site's root. Nothing on this page changes between two builds of the "
        "same inputs.\n",
        "## The one command {#command}\n",
        "In the folder that holds the spec:\n",
        f"```\nrelspan build {spec.path.name}\n```\n",
        f"`relspan check {spec.path.name}` re-checks the claims without writing the site.\n",
        "## Inputs {#inputs}\n",
        _table(("File", "SHA-256"), rows, csv=(pub, "data/tables/inputs.csv")),
        _read_as_lines(spec, run),
        f"\nThe spec as used: [{spec_name}]({spec_download}).\n",
        f"Seed of the independent-noise search (checks.seed): {', '.join(str(s) for s in seeds)}.\n",
        "## Software {#software}\n",
        _table(("Package", "Version"), env_rows, csv=(pub, "data/tables/software.csv")),
        "\n## For a replication package README {#readme}\n",
        "A section ready to paste, in the structure commonly used for replication packages "
        "(data availability, computational requirements, instructions, and a list mapping each table "
        "and figure to the program and output file):\n",
        "```markdown\n" + _replication_readme(run, pub) + "```\n",
        blocks.callout(USUAL_CAUTIONS, title="Read with care"),
    ]
    return Page("reproduce.html", "Reproduce", "\n".join(body), "reproduce", breadcrumbs=(HOME,),
                description="Inputs, versions and the one command that rebuilds this site.")


def _read_as_lines(spec, run) -> str:
    """How each file other than plain UTF-8 CSV was read ("" when all were plain)."""
    lines = [f"- {_code(ds.source)}: read as {escape_text(r.prepared.read_as)}."
             for ds, r in zip(spec.datasets, run.datasets) if getattr(r.prepared, "read_as", "")]
    if not lines:
        return ""
    return ("\nHow the files were read (the checksums above are of the files as published; a "
            "compressed file is hashed compressed):\n\n" + "\n".join(lines) + "\n")


def _replication_readme(run, pub: Publisher) -> str:
    spec = run.spec
    env = run.environment
    lines = ["## Data availability and provenance", ""]
    lines.append(f"- `{spec.path.name}`: the analysis spec, SHA-256 {_sha256(spec.text.encode('utf-8'))}.")
    for ds, r in zip(spec.datasets, run.datasets):
        period = f", {r.prepared.period[0]} to {r.prepared.period[1]}" if r.prepared.period else ""
        lines.append(f"- `{ds.source}`: {ds.title} ({r.prepared.rows_read} rows{period}), "
                     f"SHA-256 {r.prepared.sha256}.")
    if spec.report.licence:
        lines.append(f"- Licence of the data and report: {spec.report.licence}.")
    lines += ["", "## Computational requirements", "",
              f"- Software: Python {env.get('python', '')}, relspan {env.get('relspan', '')}, "
              + ", ".join(f"{k} {v}" for k, v in sorted(env.items()) if k not in ('python', 'relspan')) + ".",
              "- Hardware: a plain CPU machine; no GPU and no network access are needed.",
              f"- Randomness: the independent-noise search uses seed "
              f"{', '.join(str(s) for s in sorted({d.checks.seed for d in spec.datasets}))} (checks.seed).",
              "", "## Instructions to replicators", "",
              f"1. Install relspan {env.get('relspan', '')} and the versions above (for example with pip).",
              f"2. In the folder holding `{spec.path.name}`, run `relspan build {spec.path.name}`; it writes "
              f"the site to `{spec.site.out}`.",
              "3. Compare the `SHA256SUMS` file of the new site with the published one.", "",
              "## List of tables, figures and programs", "",
              "| Output | Program | File |", "|---|---|---|"]
    for what, program, path in _outputs(run, pub):
        lines.append(f"| {what} | {program} | {path} |")
    return "\n".join(lines).replace("`", "'") + "\n"


def downloads_page(run, pub: Publisher) -> Page:
    body = ["## In plain words {#summary}\n",
            "Every number on this site, to download. The JSON files follow a documented schema "
            "([results.schema.json](/data/results.schema.json), JSON Schema draft 2020-12); keys are sorted "
            "and the bytes are the same on every build of the same inputs. Every table on a page also has "
            "its own CSV link underneath it.\n",
            "## The whole report {#all}\n",
            "- [All results (JSON)](/data/results.json)",
            "- [Schema of the results (JSON Schema)](/data/results.schema.json)",
            "- [Claim verdicts (CSV)](/data/claims.csv)",
            "- [Findings in plain words (CSV)](/data/findings.csv)", ""]
    for r in run.datasets:
        ds = r.spec
        body.append(f"## {escape_text(ds.title)} {{#dl-{ds.id}}}\n")
        body.append(f"- [Results (JSON)](/data/{ds.id}/results.json)\n"
                    f"- [Full sample, every assumption (CSV)](/data/{ds.id}/assumptions.csv)\n"
                    f"- [Every window, every assumption (CSV)](/data/{ds.id}/windows.csv)")
        for path in sorted(p for p in pub.files if p.startswith(f"data/{ds.id}/tables/") and p.count("/") == 3):
            body.append(f"- [Table: {escape_text(path.rsplit('/', 1)[1][:-4])} (CSV)](/{path})")
        body.append(f"- Each figure's data: the CSV link under the figure on "
                    f"[the dataset page](/{dataset_path(ds.id)}); each window's tables on its window page.\n")
    return Page("downloads.html", "Downloads", "\n".join(body), "downloads", breadcrumbs=(HOME,),
                description="Every table and result as CSV and JSON.")


def json_bytes(obj) -> bytes:
    """Deterministic JSON: sorted keys, UTF-8, newline at the end."""
    return (json.dumps(obj, sort_keys=True, ensure_ascii=False, indent=1, allow_nan=False) + "\n").encode()
