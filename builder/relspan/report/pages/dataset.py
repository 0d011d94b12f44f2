"""A dataset's page: the plain summary, the data, the assumptions side by side, windows, claims."""

from __future__ import annotations

from relspan.analysis.findings.support import count_support, count_with_support
from relspan.assumptions import ASSUMPTION_IDS, assumption
from relspan.report.pages.addresses import HOME, csv_path, dataset_path, plan_anchor, window_path
from relspan.report.pages.claims import claims_table
from relspan.report.pages.diagnostics import effective_rows_text, influence_section, trend_caution, trend_section
from relspan.report.pages.publisher import Publisher
from relspan.report.pages import uncertainty as U
from relspan.report.pages.tables import table
from relspan.report.text import ASSUMPTION_PLAIN, CAUTION_LINK, USUAL_CAUTIONS
from relspan.site import blocks
from relspan.site.content import Page
from relspan.site.markdown import Raw, bullets, code, joined, link, md
from relspan.words import cap, count, digits_for, fmt, fmt_range, join_words

__all__ = ["dataset_page", "coefficient_cell", "NO_MAP"]

#: said where a map of the elementary regressions would be, for a dataset of two variables
NO_MAP = Raw("No map of the elementary regressions is shown: a map needs at least three variables. With "
             "two, the two elementary regressions are just two slopes (each variable regressed on the "
             "other), given with the results under the one-variable-noisy assumption.\n")


def coefficient_cell(row) -> Raw:
    """The coefficients of an :class:`~relspan.analysis.findings.AssumptionRow` as one table cell."""
    if row.intervals:
        return joined((md("{}: {}", lab, fmt_range(lo, hi)) for lab, lo, hi in row.intervals), "; ")
    if row.points:
        return joined((md("{}: {}", lab, fmt(v)) for lab, v in row.points), "; ")
    return md("{}", row.coefficients_note)


def _data_summary(result, pub: Publisher) -> str:
    p = result.prepared
    ds = result.spec
    rows = [("Source file", code(ds.source)),
            ("Rows read", str(p.rows_read)),
            ("Rows analysed", str(p.rows_used))]
    eff = effective_rows_text(result)
    if eff:
        rows.append(("Effective rows", md("{} ([trends](#trends))", eff)))
    if p.period:
        rows.append(("Period", f"{p.period[0]} to {p.period[1]}"))
    if p.rows_outside_range:
        rows.append(("Rows outside the date range", str(p.rows_outside_range)))
    policy = {"drop": "rows with a missing value are dropped",
              "fail": "a missing value stops the build"}.get(ds.missing, ds.missing)
    missing = sum(d.count for d in p.drops if d.reason == "missing value")
    rows.append(("Missing values", f"{missing} row(s) dropped ({policy})"))
    for d in p.drops:
        if d.reason != "missing value":
            rows.append((f"Rows dropped: {d.reason}", str(d.count)))
    transformed = sorted({t for t in p.transforms if t != "none"})
    rows.append(("Transforms", ", ".join(transformed) if transformed else "none (series as published)"))
    rows.append(("SHA-256 of the file", Raw(f"`{p.sha256}`")))
    out = table(("Item", "Value"), rows, csv=(pub, csv_path(ds.id, "data-summary")))
    vrows = [(v.label, code(v.column), v.unit or "\u2014", t, fmt(v.noise_share) if v.noise_share is not None
              else "\u2014") for v, t in zip(ds.variables, p.transforms)]
    out += Raw("\n") + table(("Variable", "Column", "Unit", "Transform", "Noise share"), vrows,
                        csv=(pub, csv_path(ds.id, "variables")))
    if not any(v.noise_share is not None for v in ds.variables):
        out += Raw("\nNoise share: not given in the spec (needed only for the known-noise-shape check).\n")
    return out


def _side_by_side(result, pub: Publisher) -> str:
    labels = result.labels
    full = result.full
    rows = [(assumption(r.assumption).title, U.corank_cell(full, r), r.relations,
             U.coefficient_cell_with_intervals(r, full, result.names, labels) or coefficient_cell(r), r.identified)
            for r in result.summary.rows]
    header = ("Noise assumption", "Relations (resampling support)", "The relations found",
              md("Coefficients, equation for {}", labels[result.full.ref]), "What is identified")
    return table(header, rows, csv=(pub, csv_path(result.spec.id, "assumptions-side-by-side")))


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
            out.append(md("One relation: the data pin down its direction, and so each coefficient once the "
                          "equation is written for {} (under each noise assumption; see above).\n", targets[0]))
        else:
            out.append(md("{}: the data pin down the relations as a set. A single coefficient of one relation is "
                          "not identified, because any mix of the relations is again a relation. What is "
                          "identified is a **reduced form**: {} written through the other variables.\n",
                          Raw(cap(count(q, "relation"))), join_words(targets)))
        others = [k for k, nm in enumerate(names) if nm not in ident.targets]
        inf = result.full.inference
        same_targets = inf is not None and inf.targets.get(q) == tuple(ident.targets)

        def value(i, t, k):
            v = fmt(-ident.reduced_form[i, k])
            iv = inf.coefficient(q, t, names[k]) if same_targets else None
            return v if iv is None else f"{v} ({U.interval_words(iv)})"

        rows = [tuple([lab[t]] + [value(i, t, k) for k in others]) for i, t in enumerate(ident.targets)]
        out.append(Raw(f"Reduced form (deviations from the means, data units; condition number of this choice "
                       f"of variables {fmt(ident.reduced_condition)}, where values near 1 mean a well-posed "
                       "choice"
                       + (f"; in brackets the {result.full.inference.level:.0%} interval under equal noise"
                          if result.full.inference is not None else "") + "):\n"))
        out.append(table(("Equation for",) + tuple(lab[names[k]] for k in others), rows,
                         csv=(pub, csv_path(result.spec.id, f"reduced-form-q{q}"))))
        basis_rows = [tuple([f"relation {i + 1}"] + [fmt(v) for v in ident.basis[i]]) for i in range(q)]
        st_rows = [("reduced form" if st.form == "reduced" else "single relation", lab.get(st.relation, st.relation),
                    lab.get(st.variable, st.variable), fmt(st.value) if st.identified else "\u2014", st.kind, st.why)
                   for st in ident.statuses]
        out.append(Raw("\n") + blocks.details(
            "Technical detail: a basis of the relations, and which coefficients are identified",
            md("{}\n\nOrthonormal basis of the relations (rows; data units):\n\n", ident.summary)
            + table(("",) + tuple(lab[nm] for nm in names), basis_rows,
                    csv=(pub, csv_path(result.spec.id, f"relation-basis-q{q}")))
            + Raw("\n")
            + table(("Form", "Equation for", "Coefficient of", "Value", "Status", "Why"), st_rows,
                    csv=(pub, csv_path(result.spec.id, f"identified-q{q}")))))
    if not out:
        if result.summary.windowed:
            none = count_with_support(count_support(result.full, "equal", 0))
            out.append(md("Under equal noise the full sample gives {}, so nothing is identified for the whole "
                          "period. The windows below do support one: see how it differs between them.\n", none))
        else:
            out.append(Raw("No relation was found, so nothing is identified beyond the absence of a relation.\n"))
    return Raw("\n".join(out))


def _window_relations_table(result, plan, pub: Publisher) -> str:
    """Each window's own relation (equal noise), for plans whose windows support one but the full sample not."""
    if plan.plan.id not in result.summary.relation_track:
        return ""
    ref = result.full.ref
    labels = result.labels
    ks = [k for k in range(len(result.names)) if k != ref]
    rows = []
    for a, reading in zip(plan.analyses, result.summary.windows[plan.plan.id]):
        turn = reading.angle_to_previous_deg
        rows.append((a.label, str(a.count)) + tuple(fmt(a.coefficient("equal", ref, k)) for k in ks)
                    + ("\u2014" if turn is None else fmt(turn) + "\u00b0",))
    header = (("Window", "Rows") + tuple(md("Coefficient of {}", labels[k]) for k in ks)
              + ("Angle to the previous window",))
    return (md("The relation in each window under equal noise, written as an equation for {} ({}); the angle "
               "says how far it turned from the previous window (0\u00b0: the same relation):\n\n",
               labels[ref], CAUTION_LINK)
            + table(header, rows, csv=(pub, csv_path(result.spec.id, f"{plan.plan.id}-relations"))))


def _plan_section(result, plan, pub: Publisher, folder: str) -> str:
    from relspan.report.figures import inputs as ff

    title = plan.plan.title or plan.plan.id
    out = [md("### {} {{#{}}}\n", title, Raw(plan_anchor(plan.plan.id)))]
    n = len(plan.analyses)
    links = joined((link(a.label, "/" + window_path(result.spec.id, plan.plan.id, i))
                    for i, a in enumerate(plan.analyses)), ", ")
    out.append(md("{} window(s), each with its own page: {}.\n", str(n), links))
    for sentence in result.summary.plans.get(plan.plan.id, ()):
        out.append(md("**In plain words:** {}\n", sentence))
    q = result.examined[0] if result.examined else None
    key, pid = result.cache_key, plan.plan.id
    if q is None:
        out.append(_window_relations_table(result, plan, pub))
    if q is not None:
        out.append(pub.figure(ff.gallery_figure, (result, plan, q), folder,
                              Raw("The elementary-regression map in every window, on shared axes: if the line "
                                  "stays while the points move, the relations are stable even though single "
                                  "coefficients are not."), ident=f"{pid}/gallery/{q}", dataset_key=key))
        out.append(pub.figure(ff.stability_figure, (result, plan, "equal", q), folder,
                              Raw("Angles between the windows' relations (left) and each window's angle to the "
                                  "full sample (right); 0\u00b0 means the same relations."),
                              ident=f"{pid}/angles/{q}", dataset_key=key))
        out.append(pub.figure(ff.swing_figure, (result, plan, q), folder,
                              Raw(f"A single coefficient per window under each noise assumption, above the "
                                  f"angle of the relations. {CAUTION_LINK}."), ident=f"{pid}/swing/{q}",
                              dataset_key=key))
    out.append(pub.figure(ff.timeline_figure, (result, plan), folder,
                          Raw("The number of relations in each window under each noise assumption."),
                          ident=f"{pid}/coranks", dataset_key=key))
    swing = plan.swings.get("elementary")
    if swing is not None and n >= 2:
        ref = result.full.ref
        rows = [(result.labels[k], fmt(swing.minimum[k], digits_for(swing.minimum[k], swing.maximum[k])),
                 fmt(swing.maximum[k], digits_for(swing.minimum[k], swing.maximum[k])), str(int(swing.sign_changes[k])))
                for k in range(len(result.names)) if k != ref]
        out.append(md("Least-squares coefficients in the equation for {} across the windows ({}):\n",
                      result.labels[ref], CAUTION_LINK))
        out.append(table(("Coefficient of", "Smallest", "Largest", "Sign changes"), rows,
                         csv=(pub, csv_path(result.spec.id, f"{pid}-least-squares-range"))))
    return Raw("\n".join(o for o in out if o))


def _break_section(result) -> str:
    """"Breaks at unknown dates": what the scan of the whole sample found, with its rule (renders results)."""
    breaks = getattr(result, "breaks", {}) or {}
    if not breaks:
        return ""
    out = [Raw("### Breaks at unknown dates {#break}\n")]
    moving = [p for p in result.plans if any(st.stable is False for st in p.stability.values())]
    def same(scan) -> tuple:  # equal and bounded noise share one scan (one object before caching, two after)
        return (scan.q, scan.statistic, scan.critical_value, scan.split_row, scan.angle_deg)

    def p_words(p: float, resamples: int) -> str:
        if p <= 1.0 / (1 + resamples) + 1e-12:
            return f"p = {fmt(p)}: none of the {resamples} resamples reached it"
        return f"p = {fmt(p)}"

    seen: dict[tuple, list[str]] = {}
    for a, br in breaks.items():
        if br.scan is not None:
            seen.setdefault(same(br.scan), []).append(a)
    shown: set[tuple] = set()
    for a, br in breaks.items():
        name = assumption(a).name
        if br.scan is None:
            out.append(md("- Under {}: {}\n", name, br.reason))
            continue
        if same(br.scan) in shown:
            continue
        shown.add(same(br.scan))
        names = join_words([assumption(x).name for x in seen[same(br.scan)]])
        sc = br.scan
        rel = "relations" if sc.q == 1 else f"subspaces of {count(sc.q, 'relation')}"
        level = f"{1 - sc.level:.0%}"
        listed = br.dated()
        if sc.found and listed:
            extra = ""
            if result.full.coranks.get(a) == 0:
                extra += (" A relation that changes at a date is consistent with the full sample, which "
                          "mixes the periods, showing none.")
            if not moving:
                extra += (" The window comparisons above show no change at their level; the scan pools "
                          "every row on each side of a date, so it can find a change that windows, each "
                          "shorter, do not.")
            out.append(md("- Under {} (at {}: {}): **{}** at the {} level: one relation subspace for the "
                          "whole sample fits worse than separate ones before and after a date by more than "
                          "sampling explains (fit statistic {} against a critical value of {} from resampling "
                          "with no change; {}).{}\n",
                          names, count(sc.q, "relation"), br.q_from,
                          "a break" if len(listed) == 1 else count(len(listed), "break"), level,
                          fmt(sc.statistic), fmt(sc.critical_value), p_words(sc.p_value, sc.resamples), extra))
            for b, date, lo, hi in listed:
                how = ("found by the whole-sample test" if b.step == 1 else
                       md("found by the scan of rows {} to {}, a segment the other breaks leave, at the {} level: "
                          "statistic {} against {}; {}", f"{b.segment[0] + 1:,}", f"{b.segment[1]:,}",
                          f"{1 - b.level:.1%}", fmt(b.statistic), fmt(b.critical_value),
                          p_words(b.p_value, sc.resamples)))
                out.append(md("    - From {} on, with a {} interval from {} to {} (resampling each side); the "
                              "estimated {} before and after differ by {}\u00b0 on the common scale ({}).\n",
                              date, f"{sc.level:.0%}", lo, hi, rel, fmt(b.angle_deg), how))
            out.append(md("    - {}\n", _further_words(sc, len(listed))))
        else:
            extra = (" This does not show that nothing changes: a small or gradual change can escape the scan."
                     if not moving else " The window comparisons above do show change; the scan, which "
                     "tests the whole sample for sharp breaks, does not confirm one at this "
                     "level. Both can hold: a gradual drift, or a break too small for the scan.")
            out.append(md("- Under {} (at {}: {}): **no break found** at the {} level: one relation subspace "
                          "fits both sides of every candidate date within what sampling explains (fit "
                          "statistic {} against a critical value of {}; {}).{}\n",
                          names, count(sc.q, "relation"), br.q_from, level, fmt(sc.statistic),
                          fmt(sc.critical_value), p_words(sc.p_value, sc.resamples), extra))
    rule = next((b.scan.rule for b in breaks.values() if b.scan is not None), None)
    if rule:
        out.append(md("**Rule.** {} (See [the methods](/methods.html#breaks).)\n", rule))
    return Raw("\n".join(out))


def _further_words(sc, found: int) -> str:
    """What the search for further breaks concluded (renders ``scan.segments``)."""
    if sc.max_breaks <= 1:
        return "Only one break was looked for."
    segs = len(sc.segments)
    if sc.segment_level != sc.segment_level:       # NaN: stopped at the most breaks looked for
        return (f"The search stops at {sc.max_breaks} breaks, so whether the segments hold more is not "
                "judged.")
    if (1.0 - sc.segment_level) * (sc.resamples + 1) < 1.0:
        return (f"Whether there is a further break cannot be judged with {sc.resamples} resamples: the smallest "
                f"p-value they can show is above the {1 - sc.segment_level:.1%} each segment is tested at.")
    untested = sum(1 for _, _, p in sc.segments if p != p)
    tested = segs - untested
    short = (f"shorter than twice the {sc.min_segment_rows:,} rows a candidate date must leave on each side, "
             "so a further break there cannot be judged")
    if tested == 0:
        return f"Whether there is a further break cannot be judged: each of the {count(segs, 'segment')} is {short}."
    leave = "break leaves" if found == 1 else "breaks leave"
    which = (f"each of the {count(segs, 'segment')} the {leave}" if not untested
             else f"{count(tested, 'segment')} of the {count(segs, 'segment').split(' ', 1)[0]} the {leave}")
    verb = "were" if untested and tested > 1 else "was"
    words = (f"No further break: {which} {verb} scanned the same way, at the {1 - sc.segment_level:.1%} level each "
             f"(Šidák: {1 - sc.level:.0%} shared among {segs}), and none shows one")
    if untested:
        words += f"; the other {'one is' if untested == 1 else f'{untested} are'} {short}"
    return words + "."


def _single_coefficient_note() -> str:
    return blocks.callout(Raw(f"Some statements on this page quote a single coefficient. {CAUTION_LINK} "
                              "before using one."), title="Single coefficients")


def _numerical_notes(result) -> str:
    """A caution listing the windows whose numbers are fragile (ill conditioned, singular)."""
    items = [md("Full sample: {} ([details](#assumptions))", n) for n in result.full.notes]
    for plan in result.plans:
        for i, a in enumerate(plan.analyses):
            for n in a.notes:
                items.append(md("{} ({}): {}", link(a.label, "/" + window_path(result.spec.id, plan.plan.id, i)),
                                plan.plan.title or plan.plan.id, n))
    if not items:
        return ""
    shown = items[:12]
    if len(items) > 12:
        shown.append(Raw(f"\u2026 and {len(items) - 12} more; each window page lists its own."))
    return blocks.callout(Raw("Some numbers on this page come from windows where the computation is fragile "
                              "(the data nearly satisfy an exact relation, so small changes in the data move the "
                              "results a lot). Read those windows' numbers with extra care.\n\n") + bullets(shown),
                          title="Numerical warnings")


def _summary_list(sm) -> list:
    label = "Pinned down" if sm.pinned.settled else "Not confirmed by resampling"   # weak support says less
    out = [md("- **{}.** {} ([evidence](#{}))", label, sm.pinned.text, Raw(sm.pinned.evidence)),
           md("- **Left open.** {} ([evidence](#{}))", sm.open.text, Raw(sm.open.evidence))]
    if sm.depends is not None:
        out.append(md("- **Depends on the noise assumption.** {} ([evidence](#{}))", sm.depends.text,
                      Raw(sm.depends.evidence)))
    if sm.unstable is not None:
        out.append(md("- **Changes across time.** {} ([evidence](#{}))", sm.unstable.text,
                      Raw(sm.unstable.evidence)))
    return out


def dataset_page(run, result, pub: Publisher) -> Page:
    from relspan.report.figures import inputs as ff

    ds = result.spec
    folder = f"figures/{ds.id}"
    full = result.full
    sm = result.summary
    body = [Raw("## In plain words {#summary}\n")]
    if ds.description:
        body.append(md("{}\n", ds.description))
    body += _summary_list(sm)
    body.append(Raw(""))
    if sm.single_coefficient or any(f.single_coefficient for f in result.findings):
        body.append(_single_coefficient_note())
    body.append(_numerical_notes(result))
    body.append(trend_caution(result))
    body.append(blocks.details(
        "Every finding, one line each",
        bullets(md("**{}:** {} ([evidence](#{}))", f.kind_words, f.headline, Raw(f.evidence))
                for f in result.findings) if result.findings else "No findings."))
    body.append(Raw("## The data {#data}\n"))
    body.append(_data_summary(result, pub))
    key = result.cache_key
    body.append(pub.figure(ff.overview_figure, (result,), folder,
                           Raw("The analysed series, each standardised (0 is its average, 1 is one standard "
                               "deviation), with the windows of each plan below."),
                           ident="overview", dataset_key=key))
    body.append(trend_section(result, pub))
    body.append(Raw("## The noise assumptions side by side {#assumptions}\n"))
    body.append(Raw(f"Each row answers the same question under a different assumption about the measurement "
                    f"error. Full sample, {full.count} rows; tolerance: {sm.pinned.tolerance.words}. "
                    f"{CAUTION_LINK}.\n"))
    if sm.depends is not None:
        body.append(blocks.callout(sm.depends.text, title="Why the rows differ", kind="note"))
    body.append(_side_by_side(result, pub))
    body.append(blocks.details("What each noise assumption means",
                               bullets(md("**{}**: {}", v[0], v[1])
                                       for k, v in ASSUMPTION_PLAIN.items() if k in full.coranks)))
    body.append(Raw("## How many relations {#corank}\n"))
    body.append(md("**In plain words:** {}\n", sm.pinned.text))
    counts = "; ".join(f"{assumption(a).title.lower()}: " + ("undetermined" if full.coranks[a] is None
                                                             else str(full.coranks[a]))
                       + f" ({U.support_words(full, a)})"
                       for a in ASSUMPTION_IDS if a in full.coranks and a != "elementary")
    line = f"Relations in the full sample \u2014 {counts}."
    if full.equal is not None:
        ev = full.equal.eigenvalues
        where = ("of the full-sample correlation matrix (each variable divided by its standard deviation)"
                 if full.scale == "correlation" else "of the full-sample covariance (the data's units)")
        line += (f" The smallest eigenvalues {where} are {', '.join(fmt(v) for v in ev[:min(3, len(ev))])} "
                 f"against the tolerance {full.eps:g} on the same scale; under bounded noise each one at or below "
                 "it is room for one relation, while under equal noise the count is how many of the smallest are "
                 "equal (by a test; see Methods).")
    line += " " + U.resampling_sentence(full)
    body.append(md("{}\n", line))
    body.append(md("Relations examined in the rest of this page: {} ({}).\n",
                   Raw(", ".join(str(q) for q in result.examined) or "none"), result.examined_from))
    body.append(pub.figure(ff.spectrum_figure, (result, full, f"{ds.id}-spectrum"), folder,
                           Raw(("Eigenvalues of the full-sample correlation matrix" if full.scale == "correlation"
                                else "Eigenvalues of the full-sample covariance (the data's units)")
                               + " (how much the data vary in each independent direction) against the tolerance: "
                               "under bounded noise every eigenvalue below the line is room for one more relation"
                               + ("; bars are resampling intervals." if full.inference is not None else ".")),
                           ident="spectrum", dataset_key=key))
    if full.diagonal is not None:
        body.append(blocks.details("Independent noise (Frisch scheme): the corank search",
                                   getattr(sm, "diagonal_search", "") or full.diagonal.corank.summary))
    body.append(influence_section(result))
    body.append(Raw("## What the data identify {#identified}\n"))
    body.append(_identified_section(result, pub))
    body.append(Raw(f"\n{CAUTION_LINK}.\n"))
    if result.examined and result.examined[0] == 1 and full.frisch_lower is not None:
        body.append(Raw("## Bounds under independent noise {#frisch}\n"))
        body.append(md("If each series has its own measurement error of unknown size, every coefficient is known "
                       "only as a range. {}. {}.\n", cap(full.diagonal.q1.reason), CAUTION_LINK))
        body.append(pub.figure(ff.frisch_figure, (result, full, f"{ds.id}-frisch"), folder,
                               Raw("Range of each coefficient over every independent-noise explanation of the "
                                   f"data. {CAUTION_LINK}."), ident="frisch", dataset_key=key))
    q = result.examined[0] if result.examined else None
    if q is not None:
        body.append(Raw("## The elementary regressions {#map}\n"))
        if len(result.names) < 3:
            body.append(NO_MAP)
        else:
            body.append(pub.figure(ff.map_figure, (result, full, result.flat.get(q), q, f"{ds.id}-map"), folder,
                                   Raw("Each point is the least-squares relation that treats one variable as "
                                       "the only noisy one. Their spread shows how much the answer depends on "
                                       f"that choice. {CAUTION_LINK}."), ident=f"map/{q}", dataset_key=key))
    body.append(Raw("## Across windows {#stability}\n"))
    body.append(Raw("Each plan cuts the data into windows of time and repeats the analysis in each, to see "
                    "whether the answer holds over time.\n"))
    for plan in result.plans:
        if plan.plan.kind == "full":
            continue
        body.append(_plan_section(result, plan, pub, folder))
    body.append(_break_section(result))
    verdicts = [v for v in run.verdicts if v.claim.dataset == ds.id]
    body.append(Raw("## Claims about this dataset {#claims}\n"))
    body.append(claims_table(verdicts, pub, csv_path(ds.id, "claims")) if verdicts
                else Raw("The spec makes no claim about this dataset.\n"))
    body.append(Raw("## Downloads {#downloads}\n"))
    body.append(Raw(f"- [All results for this dataset (JSON)](/data/{ds.id}/results.json)\n"
                    f"- [Full sample, every assumption, full precision (CSV)](/data/{ds.id}/assumptions.csv)\n"
                    f"- [Every window, every assumption, full precision (CSV)](/data/{ds.id}/windows.csv)\n"
                    f"- Every table on this page: the CSV link under it.\n"))
    body.append(blocks.callout(USUAL_CAUTIONS, title="Read with care"))
    return Page(dataset_path(ds.id), ds.title, "\n".join(body), "dataset", breadcrumbs=(HOME,),
                description=f"What the data of {ds.title} pin down and leave open.")
