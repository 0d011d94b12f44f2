"""Assemble the whole site (pages, figures, downloads, navigation) from an analysis run."""

from __future__ import annotations

import dataclasses
import io
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from relspan import __version__
from relspan.analysis.results import jsonable
from relspan.assumptions import ASSUMPTION_IDS, assumption
from relspan.environment import constraints_text
from relspan.precision import canonical_document, canonical_frame, precision_table
from relspan.report import pages as P
from relspan.report.pages.reference import CAUTION_TITLE
from relspan.report.text import glossary_terms
from relspan.site.content import NavItem, Page, SiteContent
from relspan.spec.schema import FIGURE_FORMATS

__all__ = ["site_draft", "SiteDraft", "results_document", "dataset_document", "RESULTS_SCHEMA_VERSION",
           "RESULTS_SCHEMA_PATH"]

#: version of the results JSON layout documented in docs/results.md
RESULTS_SCHEMA_VERSION = 1

#: JSON Schema (draft 2020-12) of data/results.json, shipped with the site as data/results.schema.json
RESULTS_SCHEMA_PATH = Path(__file__).with_name("results.schema.json")


def _csv(df: pd.DataFrame, context: tuple = ()) -> bytes:
    """CSV download; every float column rounded to its published precision (relspan.precision)."""
    buf = io.StringIO()
    canonical_frame(df, context=context).to_csv(buf, index=False, lineterminator="\n", float_format="%.10g")
    return buf.getvalue().encode("utf-8")


def dataset_document(result) -> dict:
    """Everything computed for one dataset (data/<id>/results.json; layout: docs/results.md)."""
    plans = []
    for plan in result.plans:
        plans.append({
            "id": plan.plan.id,
            "kind": plan.plan.kind,
            "title": plan.plan.title,
            "windows": [dict(a.to_dict(), rows=w.rows, first_time=w.first_time, last_time=w.last_time)
                        for a, w in zip(plan.analyses, plan.windows)],
            "stability": [s.to_dict() for _, s in sorted(plan.stability.items())],
            "coefficient_swings": {a: s.to_dict() for a, s in sorted(plan.swings.items())},
            "coranks": plan.coranks.to_dict(),
        })
    p = result.prepared
    read_as = getattr(p, "read_as", "")
    return canonical_document(jsonable({
        "id": result.spec.id,
        "title": result.spec.title,
        "source": result.spec.source,
        "source_sha256": p.sha256,
        # how a file other than plain UTF-8 CSV/TSV was read (what was detected); absent otherwise
        **({"source_read_as": read_as} if read_as else {}),
        "variables": [{"column": v.column, "label": v.label, "unit": v.unit, "transform": t,
                       "noise_share": v.noise_share} for v, t in zip(result.spec.variables, p.transforms)],
        "rows_read": p.rows_read,
        "rows_used": p.rows_used,
        "period": list(p.period) if p.period else None,
        "examined_coranks": list(result.examined),
        "resampling": result.resampling.to_dict(),
        "examined_from": result.examined_from,
        "full_sample": result.full.to_dict(),
        "identified": {str(q): i.to_dict() for q, i in sorted(result.identified.items())},
        "plans": plans,
        "breaks": [b.to_dict() for _, b in sorted(getattr(result, "breaks", {}).items())],
        "sampling_spread": [sp.to_dict() for _, sp in sorted(getattr(result, "sampling_spread", {}).items())],
        "findings": [f.to_dict() for f in result.findings],
        "trends": None if getattr(result, "trends", None) is None else result.trends.to_dict(),
        "influence": None if getattr(result, "influence", None) is None else result.influence.to_dict(),
    }))


def results_document(run, datasets: list[dict] | None = None) -> dict:
    """Everything the run computed, as one JSON-ready dict (layout: docs/results.md).

    ``datasets``: the :func:`dataset_document` of each of ``run.datasets`` when the caller has
    them already (the site publishes each one on its own too); made here otherwise.
    """
    return {
        "schema": RESULTS_SCHEMA_VERSION,
        "relspan": __version__,
        "title": run.spec.report.title,
        "environment": run.environment,
        "precision": precision_table(),
        "datasets": [dataset_document(r) for r in run.datasets] if datasets is None else list(datasets),
        "claims": canonical_document(jsonable([v.to_dict() for v in run.verdicts]), ("claims",)),
    }


def _results_json(run, documents: list[dict], texts: list[bytes]) -> bytes:
    """``json_bytes(results_document(run, documents))``, with each dataset's part taken from its own
    file's text (``texts``, that dataset's ``json_bytes``) instead of encoded a second time.

    ``json_bytes`` indents by one space per level and escapes every line break inside strings, so
    a dataset's text nested in the ``datasets`` list (level 2) is its own text with each line after
    the first indented by two more spaces.
    """
    marks = [f"@relspan-dataset-{i}@" for i in range(len(documents))]
    outer = P.json_bytes(results_document(run, marks)).decode()
    tokens = [f'"{mark}"' for mark in marks]
    if any(outer.count(token) != 1 for token in tokens):  # a text of the run equals a mark
        return P.json_bytes(results_document(run, documents))
    for token, text in zip(tokens, texts):
        outer = outer.replace(token, text.decode().rstrip("\n").replace("\n", "\n  "))
    return outer.encode()


def _assumptions_csv(result) -> bytes:
    """The full sample side by side: coefficients only where the pages show them (one rule,
    :func:`relspan.frames.coefficient_status`: none when two or more relations hold)."""
    from relspan.frames import coefficient_status

    full = result.full
    rows = []
    for a in ASSUMPTION_IDS:
        if a not in full.coranks:
            continue
        status, values = coefficient_status(full, a)
        rows.append({"assumption": a, "noise_assumption": assumption(a).name, "corank": full.coranks[a],
                     "normalise_on": full.names[full.ref],
                     "coefficients": status, **values})
    return _csv(pd.DataFrame(rows))


def _windows_csv(result) -> bytes:
    rows = []
    for plan in result.plans:
        angles = {}
        for a, s in plan.stability.items():
            for lab, q, ang in zip(plan.labels, s.dims, s.to_reference_deg):
                angles[(lab, a, q)] = ang
        for an, w in zip(plan.analyses, plan.windows):
            for a in ASSUMPTION_IDS:
                if a not in an.coranks:
                    continue
                row = {"plan": plan.plan.id, "window": an.label, "rows": w.rows,
                       "first_time": w.first_time, "last_time": w.last_time, "assumption": a,
                       "noise_assumption": assumption(a).name, "corank": an.coranks[a]}
                for q in result.examined:
                    row[f"angle_to_full_deg[q={q}]"] = angles.get((an.label, a, q), np.nan)
                for k, name in enumerate(an.names):
                    if k != an.ref:
                        row[f"coef[{name}]"] = an.coefficient(a, an.ref, k) if a != "diagonal" else np.nan
                rows.append(row)
    return _csv(pd.DataFrame(rows))


def _claims_csv(run) -> bytes:
    rows = [{"id": v.claim.id, "dataset": v.claim.dataset, "plan": v.claim.plan, "kind": v.claim.kind,
             "holds": v.holds, "text": v.claim.text, "observed": v.observed} for v in run.verdicts]
    return _csv(pd.DataFrame(rows, columns=["id", "dataset", "plan", "kind", "holds", "text", "observed"]))


def _findings_csv(run) -> bytes:
    rows = [{"dataset": r.spec.id, "kind": f.kind, "topic": f.topic, "plan": f.plan, "headline": f.headline,
             "detail": f.detail} for r in run.datasets for f in r.findings]
    return _csv(pd.DataFrame(rows, columns=["dataset", "kind", "topic", "plan", "headline", "detail"]))


@dataclass(frozen=True, slots=True)
class SiteDraft:
    """The site laid out, with each figure still a job to draw.

    ``figure_jobs`` go to the driver (:func:`relspan.run.figures.draw_figures`);
    :meth:`finish` takes what it drew and returns the finished content.
    """

    content: SiteContent
    figure_jobs: tuple
    figure_format: str
    _publisher: P.Publisher
    #: further formats written beside each figure for download (``site.figure_files: both``)
    figure_also: tuple = ()

    def finish(self, rendered) -> SiteContent:
        """The content with every figure in place (``rendered[i]`` for ``figure_jobs[i]``)."""
        pages = self._publisher.fill(list(self.content.pages), rendered)
        return dataclasses.replace(self.content, pages=tuple(pages), files=self._publisher.site_files())


def site_draft(run) -> SiteDraft:
    """Lay out the site of a whole run: pages, downloads, navigation and figure jobs."""
    spec = run.spec
    also = tuple(f for f in FIGURE_FORMATS if f != spec.site.figures) if spec.site.figure_files == "both" else ()
    pub = P.Publisher(fmt=spec.site.figures, also=also)
    archive = f"{spec.path.stem}-site.zip"
    pages: list[Page] = [P.home_page(run, pub, archive), P.datasets_page(run)]
    documents, texts = [], []
    for result in run.datasets:
        pages.append(P.dataset_page(run, result, pub))
        pages.extend(P.window_pages(run, result, pub))
        documents.append(dataset_document(result))
        texts.append(P.json_bytes(documents[-1]))
        pub.add(f"data/{result.spec.id}/results.json", texts[-1])
        pub.add(f"data/{result.spec.id}/assumptions.csv", _assumptions_csv(result))
        pub.add(f"data/{result.spec.id}/windows.csv", _windows_csv(result))
    pub.add("data/results.json", _results_json(run, documents, texts))
    pub.add("data/claims.csv", _claims_csv(run))
    pub.add("data/findings.csv", _findings_csv(run))
    spec_link = pub.add(f"data/{spec.path.name}", spec.text.encode("utf-8"))
    pub.add("data/results.schema.json", RESULTS_SCHEMA_PATH.read_bytes())
    pub.add("data/constraints.txt", constraints_text(run.environment).encode("utf-8"))
    pages += [P.claims_page(run, pub), P.caution_page(), P.methods_page(pub), P.glossary_page()]
    pages += [P.reproduce_page(run, pub, spec_link), P.downloads_page(run, pub)]
    nav = (
        NavItem("Home", "index.html"),
        NavItem("Datasets", P.DATASETS_PATH,
                tuple(NavItem(r.spec.title, P.dataset_path(r.spec.id)) for r in run.datasets)),
        NavItem("Claims", "claims.html"),
        NavItem(CAUTION_TITLE, "caution.html"),
        NavItem("Methods", "methods.html"),
        NavItem("Glossary", "glossary.html"),
        NavItem("Reproduce", "reproduce.html"),
        NavItem("Downloads", "downloads.html"),
    )
    footer = (f"relspan {__version__} made these pages from the spec and data listed under "
              "[Reproduce](/reproduce.html); every number is under [Downloads](/downloads.html).")
    content = SiteContent(title=spec.report.title, language=spec.site.language, pages=tuple(pages),
                          files=(), nav=nav, footer=footer, glossary="glossary.html", terms=glossary_terms(),
                          archive=archive)
    return SiteDraft(content, tuple(pub.jobs), pub.fmt, pub, pub.also)


