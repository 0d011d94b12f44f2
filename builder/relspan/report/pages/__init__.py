"""Markdown pages of the site, each a function of the analysis run and its findings.

Every page opens with the plain summary and puts the technical detail below.
Every sentence about the data comes from :mod:`relspan.analysis.findings`
(``result.findings``, ``result.summary``); pages lay them out and never
recompute a number. Markdown is composed with the helpers of
:mod:`relspan.site.markdown`, which escape text unless it is ``Raw``. Every
place that shows a single coefficient links the caution page.

* :mod:`.addresses`: the URL scheme;
* :mod:`.publisher`: files of the site and the figure jobs;
* :mod:`.tables`: Markdown tables and their CSV downloads;
* :mod:`.home`, :mod:`.overview` (the datasets overview), :mod:`.dataset`, :mod:`.windows`, :mod:`.claims`,
  :mod:`.reference` (caution, methods, glossary), :mod:`.reproduce`
  (reproduce, downloads): one module per page family.

Numbers and counts are written by :mod:`relspan.words`.
"""

from relspan.report.pages.addresses import HOME, csv_path, dataset_path, window_path
from relspan.report.pages.claims import claims_page
from relspan.report.pages.dataset import dataset_page
from relspan.report.pages.home import READER_ANCHORS, home_page
from relspan.report.pages.overview import DATASETS_PATH, datasets_page
from relspan.report.pages.publisher import FigureJob, Publisher
from relspan.report.pages.reference import caution_page, glossary_page, methods_page
from relspan.report.pages.reproduce import downloads_page, reproduce_page
from relspan.report.pages.tables import json_bytes, plain_cell, table_csv_bytes
from relspan.report.pages.windows import window_pages

__all__ = ["Publisher", "FigureJob", "home_page", "dataset_page", "window_pages", "claims_page",
           "caution_page", "methods_page", "glossary_page", "reproduce_page", "downloads_page", "HOME",
           "dataset_path", "window_path", "csv_path", "plain_cell", "table_csv_bytes", "json_bytes", "datasets_page", "DATASETS_PATH", "READER_ANCHORS"]
