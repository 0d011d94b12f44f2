"""The one interpreter: analysis results -> typed statements for the report.

* :mod:`.records`: the statement types (:class:`Finding`, :class:`Statement`,
  :class:`DatasetSummary`, :class:`AssumptionRow`, :class:`WindowReading`,
  :class:`Tolerance`) and the kinds' vocabulary;
* :mod:`.statements`: :func:`dataset_findings`, the findings of one dataset;
* :mod:`.summary`: :func:`dataset_summary`, the plain summary and the
  statements of each page section, built from the results and the findings;
* :mod:`.consistency`: :func:`check_consistency`, the rules no two findings of
  one dataset may break (run by the driver on every analysis);
* :mod:`.support`: a count of relations in words with its resampling support
  (:data:`~.support.SETTLED_SHARE`: below it a count is "likely but not
  confirmed by resampling").

Both are built once, by the driver (:func:`relspan.run.pipeline.analyse_prepared`),
and stored on :class:`~relspan.analysis.results.DatasetResult`. Every sentence
the site prints about the data comes from here, with the assumptions, the
tolerance and the numbers it rests on.
"""

from relspan.analysis.findings.records import (CARD_OF_KIND, FINDING_KINDS, KIND_WORDS, AssumptionRow,
                                               DatasetSummary, Finding, Statement, Tolerance, WindowReading)
from relspan.analysis.findings.consistency import Conflict, check_consistency
from relspan.analysis.findings.statements import dataset_findings
from relspan.analysis.findings.summary import assumption_rows, dataset_summary, why_assumptions_differ

__all__ = ["Finding", "Statement", "Tolerance", "AssumptionRow", "WindowReading", "DatasetSummary",
           "FINDING_KINDS", "CARD_OF_KIND", "KIND_WORDS", "dataset_findings", "dataset_summary",
           "assumption_rows", "why_assumptions_differ", "Conflict", "check_consistency"]
