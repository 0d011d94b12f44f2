"""Interval bars in the eigenvalue and Frisch figures: drawn, tabled and described."""

from __future__ import annotations

import numpy as np
import pytest

from relspan.report.figures.corank import corank_evidence
from relspan.report.figures.intervals import frisch_intervals


def test_eigenvalue_figure_draws_and_tables_each_interval():
    fig = corank_evidence([0.01, 0.02, 1.5], 0.05, intervals=([0.0, 0.012, 1.2], [0.02, 0.03, 1.8]), level=0.9)
    t = fig.table[fig.table["kind"] == "eigenvalue"]
    assert list(t["low"]) == [0.0, 0.012, 1.2] and list(t["high"]) == [0.02, 0.03, 1.8]
    assert "90% interval from resampling" in fig.description
    assert any("interval" in (h.get_label() or "") for h in fig.figure.axes[0].collections)


def test_eigenvalue_figure_without_intervals_keeps_its_table():
    fig = corank_evidence([0.01, 0.02, 1.5], 0.05)
    assert "low" not in fig.table.columns and "resampling" not in fig.description


def test_intervals_need_a_level():
    with pytest.raises(Exception, match="level"):
        corank_evidence([0.01, 1.5], 0.05, intervals=([0.0, 1.0], [0.1, 2.0]))


def test_frisch_figure_draws_the_outer_set_behind_each_range():
    fig = frisch_intervals(["a", "b"], [0.4, -np.inf], [0.6, 1.0], outer=([0.35, -np.inf], [0.66, 1.1]),
                           outer_level=0.9)
    assert list(fig.table["outer_low"])[0] == 0.35 and np.isneginf(fig.table["outer_low"][1])
    assert "90% outer confidence set" in fig.description and "b unbounded to 1.1" in fig.description
    labels = [l.get_label() for l in fig.figure.axes[0].lines]
    assert "90% outer confidence set" in labels


def test_corank_timeline_writes_each_windows_support_and_names_the_lowest():
    from relspan.report.figures.corank import corank_timeline

    fig = corank_timeline(["w1", "w2", "w3"], {"equal": [2, 2, 1], "diagonal": [3, 3, None]},
                          support={"equal": [0.96, 0.7, 0.55], "diagonal": [None, None, None]})
    assert list(fig.table["support"])[:3] == [0.96, 0.7, 0.55]
    assert "lowest 55% (w3)" in fig.description
    assert "no resampling support computed" in fig.description
    texts = [t.get_text() for t in fig.figure.axes[0].texts]
    assert "96%" in texts and "70%" in texts
