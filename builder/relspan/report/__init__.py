"""relspan.report: figures (and, later, Markdown pages) built from analysis results."""

from relspan.report.figures import (
    ElementaryMapData, FigureResult, coefficient_swing, corank_evidence, corank_timeline,
    data_overview, elementary_map, frisch_intervals, render_figure, subspace_stability, table_csv,
    window_gallery,
)

__all__ = [
    # figures (builder/relspan/report/figures/)
    "FigureResult", "render_figure", "table_csv", "ElementaryMapData", "data_overview",
    "elementary_map", "window_gallery", "subspace_stability", "coefficient_swing",
    "corank_evidence", "corank_timeline", "frisch_intervals",
]
