"""The dataset page's diagnostics: trends (with the spurious-regression caution) and the influence of single rows.

Renders :class:`~relspan.analysis.trends.TrendReport` and
:class:`~relspan.analysis.influence.InfluenceReport` as stored on the
dataset's result; recomputes nothing.
"""

from __future__ import annotations

from relspan.report.pages.addresses import csv_path
from relspan.report.pages.tables import table
from relspan.site import blocks
from relspan.site.markdown import Raw, md
from relspan.words import fmt

__all__ = ["trend_caution", "trend_section", "influence_section", "effective_rows_text"]


def effective_rows_text(result) -> str:
    """"about 23 of 144 rows" beside T (or "" when not judged)."""
    tr = getattr(result, "trends", None)
    if tr is None:
        return ""
    return (f"about {fmt(tr.effective_rows, 2)} effective rows of the {tr.rows} tested, under the lag-1 "
            "autocorrelation of the series (smallest pair)")


def trend_caution(result) -> str:
    """The spurious-regression caution (Granger & Newbold 1974) as a callout, or ""."""
    tr = getattr(result, "trends", None)
    if tr is None or not tr.spurious_caution:
        return ""
    return blocks.callout(md("{} ([trends](#trends))", tr.caution), title="Trending series")


def trend_section(result, pub) -> str:
    tr = getattr(result, "trends", None)
    out = [Raw("## Trends and autocorrelation {#trends}\n")]
    if tr is None:
        why = ("the data have no time column, so the rows have no order to test"
               if result.prepared.time_column is None else "too few rows in time order to test")
        out.append(md("Trends cannot be judged here: {}.\n", why))
        return Raw("\n".join(out))
    verdicts = {s.verdict for s in tr.series}
    if tr.spurious_caution:
        out.append(md("{}\n", tr.caution))
    elif "trending" in verdicts:
        out.append(Raw("One analysed series trends; the spurious-regression caution applies only when two or more "
                       "do, and none other does here.\n"))
    elif verdicts == {"stationary"}:
        out.append(Raw(f"No analysed series trends: every one is judged stationary at {tr.alpha:g} (ADF rejects a "
                       "unit root and KPSS does not reject level stationarity).\n"))
    else:
        out.append(Raw("No two analysed series are judged trending; for some the two tests disagree, so their "
                       "trend cannot be judged.\n"))
    if tr.effective_rows < tr.rows:
        out.append(md("Neighbouring rows are alike, so they carry less information than their number suggests: {}. "
                      "A test or interval that treated these rows as independent would overstate the evidence.\n",
                      effective_rows_text(result)))
    else:
        out.append(md("Effective rows: {}.\n", effective_rows_text(result)))
    rows = [(s.name, s.verdict, fmt(s.adf_p_value, 2), fmt(s.kpss_p_value, 2), fmt(s.lag1, 2),
             fmt(s.effective_rows, 2)) for s in tr.series]
    out.append(table(("Series", "Verdict", "ADF p-value (null: unit root)",
                      "KPSS p-value (null: level-stationary; read from a table, 0.01 to 0.1)",
                      "Lag-1 autocorrelation", "Effective rows (this series' mean)"), rows,
                     csv=(pub, csv_path(result.spec.id, "trends"))))
    out.append(md("\nSeries tested: {}. Rule: {}\n", tr.source, tr.rule))
    return Raw("\n".join(out))


def influence_section(result) -> str:
    inf = getattr(result, "influence", None)
    out = [Raw("## Single rows and blocks of rows {#influence}\n")]
    if inf is None:
        out.append(Raw("The influence of single rows cannot be judged here.\n"))
        return Raw("\n".join(out))
    out.append(md("{}\n", inf.sentence))
    out.append(md("Rule: {} Flagged rows are unusual, not necessarily wrong; look at them before dropping "
                  "any.\n", inf.rule))
    return Raw("\n".join(out))
