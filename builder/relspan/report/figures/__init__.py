"""Figures of relspan: plain arrays in; figure, alt text, long description and data table out.

Every figure function takes numpy arrays, label sequences and the small
dataclasses of :mod:`.maps` (never analysis objects) and returns a
:class:`~.contract.FigureResult`; :func:`~.render.render_figure` turns it into
deterministic SVG/PNG bytes and :func:`~.render.table_csv` writes its table.

* :mod:`.contract` (the result type and its checks), :mod:`.style` (palette,
  fonts, series styles), :mod:`.render` (bytes and CSV), :mod:`.checks`
  (argument checks), :mod:`.labels` (label placement), :mod:`.geometry`
  (the drawing plane of a map);
* the figures: :func:`data_overview` (:mod:`.overview`),
  :func:`frisch_intervals` (:mod:`.intervals`), :func:`corank_evidence` and
  :func:`corank_timeline` (:mod:`.corank`), :func:`elementary_map` and
  :func:`window_gallery` (:mod:`.maps`), :func:`subspace_stability` and
  :func:`coefficient_swing` (:mod:`.windows`);
* :mod:`.inputs`: results -> figure arguments, one function per figure job.

Numbers in alt texts and descriptions are written by :mod:`relspan.words`.
"""

from relspan.report.figures.contract import FigureResult
from relspan.report.figures.corank import corank_evidence, corank_timeline
from relspan.report.figures.intervals import frisch_intervals
from relspan.report.figures.maps import ElementaryMapData, elementary_map, window_gallery
from relspan.report.figures.overview import data_overview
from relspan.report.figures.render import render_figure, table_csv
from relspan.report.figures.windows import coefficient_swing, subspace_stability

__all__ = ["FigureResult", "render_figure", "table_csv", "data_overview", "ElementaryMapData",
           "elementary_map", "window_gallery", "subspace_stability", "coefficient_swing",
           "corank_evidence", "corank_timeline", "frisch_intervals"]
