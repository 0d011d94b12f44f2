"""The reference pages: how to read a single coefficient, the methods, the glossary.

Their text is Markdown written by relspan (:mod:`relspan.report.text`); no user text enters.
"""

from __future__ import annotations

from relspan.report.pages.addresses import HOME
from relspan.report.pages.publisher import Publisher
from relspan.report.text import GLOSSARY, INFERENCE_RULES, METHODS, REFERENCES, caution_body
from relspan.site.content import Page
from relspan.site.markdown import Raw

__all__ = ["caution_page", "methods_page", "glossary_page", "CAUTION_TITLE"]


#: the caution page's title, also its tab in the site navigation
CAUTION_TITLE = "Caution"


def caution_page() -> Page:
    body = Raw("How to read a single coefficient, and the cautions every result on this site carries.\n"
               + str(caution_body()))
    return Page("caution.html", CAUTION_TITLE, body, "caution",
                breadcrumbs=(HOME,), description="Why a single normalised coefficient can mean nothing.")


def methods_page(pub: Publisher) -> Page:
    from relspan.site.formulas import formula_image

    body = [Raw("Each method below states its assumption in one sentence, its formula, its limits and its "
                "published sources. Notation: S is a window's sample covariance, P its inverse, N the noise "
                "covariance, eps the tolerance, q the number of relations (corank), n the number of "
                "variables.\n")]
    for key, title, assumption, formulas, limits, refs in METHODS:
        body.append(Raw(f"## {title} {{#{key}}}\n"))
        body.append(Raw(f"**Assumption.** {assumption}\n"))
        for tex, words in formulas:
            img = formula_image(tex, alt=words)
            pub.add(img.file.path, img.file.data)
            body.append(Raw(f"{img.markdown}\n"))
        body.append(Raw(f"**Limits.** {limits}\n"))
        body.append(Raw("**References.**\n"))
        body.append(Raw("\n".join(f"- {REFERENCES[r]}" for r in refs) + "\n"))
    body.append(Raw("## How relspan decides\n"))
    body.append(Raw("".join(f"- {rule}\n" for rule in INFERENCE_RULES)))
    body.append(Raw("- Corank under known-shape noise: the largest q whose q-th smallest generalised eigenvalue "
                    "is at most eps divided by the largest noise share (no resampling support yet).\n- Bounded "
                    "noise also gives the Davis-Kahan angle bound on the subspace (a population bound; the "
                    "intervals above carry the sampling spread).\n- Corank under independent noise: the "
                    "largest corank with an existence certificate; \u201cundetermined\u201d when a larger one is "
                    "neither certified nor ruled out.\n- Change across windows: an angle counts as a change only "
                    "when it exceeds what resampling produces when nothing changes, all comparisons of a plan "
                    "judged together at the 5% level (max-T rule); undetermined windows are not compared.\n"
                    "- Breaks at unknown dates: the sup-type scan of the fit of one relation subspace against "
                    "separate ones before and after, with p-values from resampling under no change, at the 5% "
                    "level; further breaks one at a time in the segments between those found, each of the l + 1 "
                    "segments at 1 - 0.95^(1/(l + 1)) (Šidák), up to five.\n"
                    "- Windows are compared on one scale: each variable divided by its full-sample standard "
                    "deviation.\n"))
    return Page("methods.html", "Methods", "\n".join(body), "methods", breadcrumbs=(HOME,),
                description="The published methods relspan applies, their assumptions and references.")


def glossary_page() -> Page:
    """Every technical term of the site, one paragraph each, with the id pages link to (``#term-<anchor>``)."""
    items = "\n\n".join(f"**{e.term}**: {e.text}\n{{: #term-{e.anchor} .term-entry }}" for e in GLOSSARY)
    return Page("glossary.html", "Glossary", "The words used on this site, in plain language. The first use of "
                "each on a page links here.\n\n" + items + "\n",
                "glossary", breadcrumbs=(HOME,), description="Plain-language glossary.")
