"""The reproduce page (inputs, versions, the one command, a replication README) and the downloads page."""

from __future__ import annotations

import hashlib

from relspan.report.pages.addresses import HOME, dataset_path
from relspan.report.pages.publisher import Publisher
from relspan.report.pages.tables import table
from relspan.report.text import USUAL_CAUTIONS
from relspan.site import blocks
from relspan.site.content import Page
from relspan.site.markdown import Raw, code, joined, link, md

__all__ = ["reproduce_page", "downloads_page"]


def _sha256(data: bytes) -> str:
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
                     ", ".join(f"figures/{ds.id}/*.{f}" for f in (pub.fmt,) + pub.also)
                     + f" and figures/{ds.id}/*.csv"))
        # figures are still jobs when this page is laid out: their folders say where they will be
        if any(job.folder.startswith(f"figures/{ds.id}/") for job in pub.jobs):
            rows.append((f"{title}: figures of each window page (image and its data)", build,
                         ", ".join(f"figures/{ds.id}/<plan>/*.{f}" for f in (pub.fmt,) + pub.also)
                         + f" and figures/{ds.id}/<plan>/*.csv"))
        rows.append((f"{title}: all results", build, f"data/{ds.id}/results.json"))
        rows.append((f"{title}: full sample and windows, full precision", build,
                     f"data/{ds.id}/assumptions.csv, data/{ds.id}/windows.csv"))
    rows.append(("All results in one file", build, "data/results.json"))
    rows.append(("Claim verdicts", f"relspan check {spec_name}", "data/claims.csv"))
    rows.append(("Findings in plain words", build, "data/findings.csv"))
    return rows


def _replication_readme(run, pub: Publisher) -> str:
    """The README section, as the text of a fenced code block (shown literally, never rendered)."""
    spec = run.spec
    env = run.environment
    lines = ["## Where the data come from, and who may use them", ""]
    lines.append(f"- `{spec.path.name}`: the analysis spec, SHA-256 {_sha256(spec.text.encode('utf-8'))}.")
    for ds, r in zip(spec.datasets, run.datasets):
        period = f", {r.prepared.period[0]} to {r.prepared.period[1]}" if r.prepared.period else ""
        lines.append(f"- `{ds.source}`: {ds.title} ({r.prepared.rows_read} rows{period}), "
                     f"SHA-256 {r.prepared.sha256}.")
    if spec.report.licence:
        lines.append(f"- Licence of the data and report: {spec.report.licence}.")
    dists = env.get("distributions", {})
    lines += ["", "## What a rerun needs", "",
              f"- Software: Python {env.get('python', '')} on {env.get('os', '')} {env.get('architecture', '')}, "
              f"relspan {env.get('relspan', '')}, "
              + ", ".join(f"{k} {v}" for k, v in sorted(dists.items()))
              + " (pinned in the site's data/constraints.txt).",
              "- Hardware: a plain CPU machine; no GPU and no network access are needed.",
              f"- Randomness: the independent-noise search uses seed "
              f"{', '.join(str(s) for s in sorted({d.checks.seed for d in spec.datasets}))} (checks.seed).",
              "", "## How to rerun it", "",
              f"1. Install relspan {env.get('relspan', '')} with the pinned versions: "
              f"`pip install -c constraints.txt relspan=={env.get('relspan', '')}`.",
              f"2. In the folder holding `{spec.path.name}`, run `relspan verify SITE` (SITE: the published "
              "site's folder); it re-runs the analysis and compares every number and verdict.",
              f"3. Or rebuild with `relspan build {spec.path.name}` and compare the `SHA256SUMS` file of the "
              "new site with the published one (same bytes in the pinned environment).", "",
              "## Which program makes which output", "",
              "| Output | Program | File |", "|---|---|---|"]
    for what, program, path in _outputs(run, pub):
        lines.append(f"| {what} | {program} | {path} |")
    return "\n".join(lines).replace("`", "'") + "\n"


def _software_rows(env: dict) -> list[tuple[str, str]]:
    rows = [("Python", f"{env.get('python', '')} ({env.get('implementation', '')})"),
            ("Operating system, processor architecture", f"{env.get('os', '')}, {env.get('architecture', '')}"),
            ("relspan", env.get("relspan", ""))]
    rows += [(f"maths library of {b['used_by']}: {b.get('library', '')}" if b.get("used_by")
          else f"maths library: {b.get('library', '')}", b.get("version", "")) for b in env.get("blas", [])]
    rows += sorted(env.get("distributions", {}).items())
    return rows


def _precision_rows() -> list[tuple[str, str, str]]:
    from relspan.precision import CLOSED_FORM, ITERATIVE, UNPUBLISHED

    rows = [(p.name.replace("_", " "), str(p.digits), p.basis) for p in (CLOSED_FORM, ITERATIVE)]
    rows.append(("not published: " + ", ".join(f"{a}.{b}" for a, b in sorted(UNPUBLISHED)), "none",
                 "one arbitrary member of a set of equally valid diagonal-noise answers (its digits depend on "
                 "the maths library's CPU kernel; no statement rests on which member was chosen), and the "
                 "solver's step counts"))
    return rows


def reproduce_page(run, pub: Publisher, spec_download: str) -> Page:
    from relspan.environment import MACHINE_FILE

    spec = run.spec
    spec_bytes = spec.text.encode("utf-8")
    rows = [(md("{} (the spec)", code(spec.path.name)), Raw(f"`{_sha256(spec_bytes)}`"))]
    rows += [(code(ds.source), Raw(f"`{r.prepared.sha256}`")) for ds, r in zip(spec.datasets, run.datasets)]
    seeds = sorted({ds.checks.seed for ds in spec.datasets})
    version = run.environment.get("relspan", "")
    body = [
        Raw("## In plain words {#summary}\n"),
        Raw("Everything on this site is computed from the spec and the data files listed below. Two promises "
            "are made, and `relspan verify` checks both:\n"),
        Raw("- **The same bytes in the pinned environment.** With the same inputs and the package versions "
            "listed under Software (pinned in [data/constraints.txt](/data/constraints.txt)), a rebuild "
            "writes the same files: compare the `SHA256SUMS` file at the site's root. relspan's own tests "
            "build its demo under two CPU kernels of the maths library (OpenBLAS Haswell and SkylakeX) "
            "and require the same bytes; other processors are expected, not proven, to agree.\n"
            "- **The same numbers, within their stated precision, anywhere.** Other machines or other "
            "package versions can change the last bits of a computation. Every published number is "
            "therefore rounded to the precision its method supports (see Precision below); a rebuild "
            "elsewhere should agree within one unit in the last published digit, with the same claim "
            "verdicts and the same text. A difference larger than that is a real difference and "
            "`relspan verify` names it.\n"),
        Raw("## The commands {#command}\n"),
        Raw("In the folder that holds the spec, with relspan installed from the pinned versions:\n"),
        # the spec's file name as typed in a shell (a fenced block shows it literally)
        Raw(f"```\npip install -c constraints.txt relspan=={version}\nrelspan verify SITE\n"
            f"relspan build {spec.path.name}\n```\n"),
        Raw("`relspan verify SITE` (SITE is the folder of this site) checks the SHA-256 of every input, "
            "re-runs the analysis from the spec and data this site names, compares every number in "
            "`data/results.json` within its stated precision and every claim verdict, and prints a "
            "replication report (identical, within precision or different, per dataset and claim) with a "
            "one-line verdict; it exits with 0 when everything agrees, 1 when something differs (named), "
            "2 when an input is missing or unreadable. "
            f"`relspan check {spec.path.name}` re-checks the claims without writing a site; "
            f"`relspan build {spec.path.name}` writes a new site.\n"),
        Raw("## Inputs {#inputs}\n"),
        table(("File", "SHA-256"), rows, csv=(pub, "data/tables/inputs.csv")),
        _read_as_lines(spec, run),
        md("\nThe spec as used: {}.\n", link(spec.path.name, spec_download)),
        Raw(f"Seed of the independent-noise search (checks.seed): {', '.join(str(s) for s in seeds)}.\n"),
        Raw("## Software {#software}\n"),
        Raw("The environment a rebuild must match for the same bytes: Python, the operating-system family, "
            "the maths library and every package relspan needs at run time (its dependencies and theirs). "
            "The same list, as a pip constraints file: [data/constraints.txt](/data/constraints.txt).\n"),
        table(("Package", "Version"), _software_rows(run.environment), csv=(pub, "data/tables/software.csv")),
        Raw(f"\nWhat differs from machine to machine (the processor model, the CPU kernel the maths library "
            f"chose, the operating-system release, every installed package including optional and test "
            f"tools) is recorded in `{MACHINE_FILE}` at the site's root. That file is deliberately left out "
            "of `SHA256SUMS`, of the freshness comparison and of `relspan verify`, so that two machines can "
            "write the same site.\n"),
        Raw("## Precision {#precision}\n"),
        Raw("Each number in the JSON and CSV downloads keeps the significant digits below; the numbers of "
            "one array (a matrix, a vector, a list across windows) share one last digit, set by the "
            "array's largest magnitude, so round-off around zero is written as 0. Two builds agree within "
            "precision when every number differs by at most one unit in that last digit.\n"),
        table(("Quantities", "Significant digits", "What the precision rests on"), _precision_rows(),
              csv=(pub, "data/tables/precision.csv")),
        Raw("\n## For a replication package README {#readme}\n"),
        Raw("A section ready to paste into a replication package. It follows the structure of the "
            "replication README template published by the Social Science Data Editors (data availability, "
            "computational requirements, instructions to replicators, and a list mapping each table and "
            "figure to its program and output file), with headings in relspan's own words:\n"),
        Raw("```markdown\n" + _replication_readme(run, pub) + "```\n"),
        blocks.callout(USUAL_CAUTIONS, title="Read with care"),
    ]
    return Page("reproduce.html", "Reproduce", "\n".join(body), "reproduce", breadcrumbs=(HOME,),
                description="Inputs, versions, precision and the commands that check and rebuild this site.")


def downloads_page(run, pub: Publisher) -> Page:
    body = [Raw("## In plain words {#summary}\n"),
            Raw("Every number on this site, to download. The JSON files follow a documented schema "
                "([results.schema.json](/data/results.schema.json), JSON Schema draft 2020-12); keys are sorted "
                "and the bytes are the same on every build of the same inputs. Every table on a page also has "
                "its own CSV link underneath it.\n"),
            Raw("## The whole report {#all}\n"),
            Raw(f"- [Every file of this site in one zip](/{run.spec.path.stem}-site.zip): pages, figures, "
                "tables and the spec; it opens from a folder with no network"),
            Raw("- [All results (JSON)](/data/results.json)"),
            Raw("- [Schema of the results (JSON Schema)](/data/results.schema.json)"),
            Raw("- [Claim verdicts (CSV)](/data/claims.csv)"),
            Raw("- [Findings in plain words (CSV)](/data/findings.csv)"), Raw("")]
    for r in run.datasets:
        ds = r.spec
        body.append(md("## {} {{#dl-{}}}\n", ds.title, Raw(ds.id)))
        body.append(Raw(f"- [Results (JSON)](/data/{ds.id}/results.json)\n"
                        f"- [Full sample, every assumption (CSV)](/data/{ds.id}/assumptions.csv)\n"
                        f"- [Every window, every assumption (CSV)](/data/{ds.id}/windows.csv)"))
        for path in sorted(p for p in pub.files if p.startswith(f"data/{ds.id}/tables/") and p.count("/") == 3):
            body.append(md("- {}", link(f"Table: {path.rsplit('/', 1)[1][:-4]} (CSV)", "/" + path)))
        body.append(Raw(f"- Each figure's data: the CSV link under the figure on "
                        f"[the dataset page](/{dataset_path(ds.id)}); each window's tables on its window page.\n"))
    return Page("downloads.html", "Downloads", "\n".join(body), "downloads", breadcrumbs=(HOME,),
                description="Every table and result as CSV and JSON.")


def _read_as_lines(spec, run):
    """How each file other than plain UTF-8 CSV was read (nothing when all were plain)."""
    lines = [md("- {}: read as {}.", code(ds.source), r.prepared.read_as)
             for ds, r in zip(spec.datasets, run.datasets) if getattr(r.prepared, "read_as", "")]
    if not lines:
        return Raw("")
    return joined([Raw("\nHow the files were read (the checksums above are of the files as published; a "
                       "compressed file is hashed compressed):\n\n")] + [joined([line, Raw("\n")]) for line in lines])
