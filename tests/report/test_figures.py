"""Tests of relspan.report figures: contract, numbers in words, tables, determinism, style."""

from __future__ import annotations

import contextlib

import hashlib
import itertools
import os
import subprocess
import sys
from pathlib import Path

import matplotlib
import numpy as np
import pandas as pd
import pytest
from matplotlib import pyplot as plt

from relspan.errors import OptionsError
from relspan.report import (
    ElementaryMapData, FigureResult, coefficient_swing, corank_evidence, corank_timeline,
    data_overview, elementary_map, frisch_intervals, render_figure, subspace_stability, table_csv,
    window_gallery,
)
from relspan.report.figures.style import PALETTE, SEQUENTIAL, styles_for
from relspan.words import angle_text, num

sys.path.insert(0, str(Path(__file__).parent))
import figure_inputs as fi  # noqa: E402

HERE = Path(__file__).parent


@pytest.fixture(scope="module")
def figs():
    return fi.build_all()


# --------------------------------------------------------------------------- contract

class TestContract:
    def test_every_figure_returns_a_figure_result_with_short_alt_and_a_table(self, figs):
        for key, res in figs.items():
            assert isinstance(res, FigureResult), key
            assert 0 < len(res.alt) <= 150, key
            assert len(res.description) > len(res.alt), key
            assert isinstance(res.table, pd.DataFrame) and len(res.table) > 0, key
            assert isinstance(res.figure, matplotlib.figure.Figure), key

    def test_no_figure_is_left_registered_in_pyplot(self, figs):
        assert plt.get_fignums() == []

    def test_rcparams_unchanged_after_building_and_rendering(self):
        before = dict(matplotlib.rcParams)
        res = subspace_stability(fi.ANGLES6, fi.LABELS6, fi.TO_FULL6, threshold_deg=10)
        render_figure(res, "svg")
        render_figure(res, "png")
        after = dict(matplotlib.rcParams)
        changed = {k for k in before if before[k] != after[k] and not (
            isinstance(before[k], float) and np.isnan(before[k]))}
        assert changed == set()

    def test_alt_longer_than_150_characters_is_refused(self, figs):
        res = figs["timeline"]
        with pytest.raises(OptionsError, match="at most 150"):
            FigureResult("x", res.figure, "a" * 151, "d", res.table)


# --------------------------------------------------------------------------- determinism

class TestDeterminism:
    @pytest.mark.parametrize("fmt", ["svg", "png"])
    def test_rendering_twice_gives_identical_bytes(self, figs, fmt):
        for key, res in figs.items():
            assert render_figure(res, fmt) == render_figure(res, fmt), key

    @pytest.mark.parametrize("fmt", ["svg", "png"])
    def test_a_save_draws_the_figure_once_and_leaves_no_layout_engine(self, fmt, monkeypatch):
        # the layout is fixed when the figure is built (one pass); a figure that still has a
        # layout engine (even the placeholder "none" leaves) is drawn twice by savefig, and
        # savefig would put a constrained engine back under the style's rcParams
        res = fi.build_all()["gallery"]
        assert res.figure.get_layout_engine() is None
        draws = []
        real = matplotlib.figure.Figure.draw
        monkeypatch.setattr(matplotlib.figure.Figure, "draw",
                            lambda self, renderer: (draws.append(1), real(self, renderer))[1])
        first = render_figure(res, fmt)
        assert len(draws) == 1
        assert res.figure.get_layout_engine() is None
        assert render_figure(res, fmt) == first and len(draws) == 2

    @pytest.mark.parametrize("fmt", ["svg", "png"])
    def test_a_save_works_out_each_axis_ticks_once_and_writes_the_same_bytes(self, fmt, monkeypatch):
        # drawing an axes asked each axis for its ticks again for its label's position (against
        # every sibling's tick labels) and for each spine's extent (the title's position)
        from matplotlib.axis import Axis

        res = fi.build_all()["gallery"]
        fresh = fi.build_all()["gallery"]
        runs = []
        real = Axis._update_ticks
        monkeypatch.setattr(Axis, "_update_ticks", lambda self: runs.append(self) or real(self))
        once = render_figure(res, fmt)
        per_axis = {id(a): runs.count(a) for a in runs}
        assert per_axis and max(per_axis.values()) == 1
        # the same bytes as a save that recomputes the ticks at every question
        monkeypatch.setattr("relspan.report.figures.render.ticks_once_per_geometry",
                            lambda fig: contextlib.nullcontext())
        assert render_figure(fresh, fmt) == once
        assert all("_update_ticks" not in vars(a) for ax in res.figure.axes for a in (ax.xaxis, ax.yaxis))

    def test_the_layout_pass_works_out_each_axis_ticks_once_per_geometry(self, monkeypatch):
        # measuring an axes for the constrained layout asked each axis for its ticks five or six
        # times per layout iteration; with the same limits and box the answer is the same
        from matplotlib.axis import Axis

        from relspan.report.figures.contract import settle
        from relspan.report.figures.style import new_figure, style_context

        with style_context():
            fig = new_figure(4.0)
            axes = [fig.add_subplot(2, 2, k) for k in range(1, 5)]
            for k, ax in enumerate(axes):
                ax.plot([0, 1, 2], [k, 2 * k, 0.5])
                ax.set_title(f"panel {k}", loc="left")
                ax.set_xlabel("x")
                ax.set_ylabel("y")
        runs = []
        real = Axis._update_ticks
        monkeypatch.setattr(Axis, "_update_ticks", lambda self: runs.append(self) or real(self))
        settle(fig)
        n_axis = 2 * len(axes)
        per_axis = {id(a): runs.count(a) for a in runs}
        assert len(per_axis) == n_axis and max(per_axis.values()) <= 3  # constrained layout: 2 iterations
        assert all("_update_ticks" not in vars(a) for ax in axes for a in (ax.xaxis, ax.yaxis))

    @pytest.mark.slow
    def test_bytes_do_not_depend_on_pythonhashseed(self, figs):
        here = {}
        for key, res in figs.items():
            for fmt in ("svg", "png"):
                here[(key, fmt)] = hashlib.sha256(render_figure(res, fmt)).hexdigest()
            here[(key, "csv")] = hashlib.sha256(table_csv(res)).hexdigest()
        procs = [subprocess.Popen([sys.executable, str(HERE / "figure_inputs.py")],
                                  env=dict(os.environ, PYTHONHASHSEED=seed), stdout=subprocess.PIPE,
                                  stderr=subprocess.PIPE, text=True)
                 for seed in ("1", "987654")]
        for proc in procs:
            out, err = proc.communicate(timeout=600)
            assert proc.returncode == 0, err
            there = {(k, f): h for k, f, h in (line.split() for line in out.splitlines())}
            assert there == here

    def test_svg_has_no_date_and_text_drawn_as_paths(self, figs):
        svg = render_figure(figs["frisch"], "svg").decode()
        assert "<dc:date>" not in svg
        assert "<text" not in svg  # svg.fonttype "path": no dependence on installed fonts

    def test_png_has_no_software_tag_and_is_760_px_wide(self, figs):
        png = render_figure(figs["stability"], "png")
        assert b"matplotlib" not in png.lower()
        width = int.from_bytes(png[16:20], "big")  # PNG IHDR width (PNG specification, ISO/IEC 15948)
        assert width == 760

    def test_table_csv_uses_newlines_and_fixed_float_format(self, figs):
        csv = table_csv(figs["frisch"]).decode()
        assert "\r" not in csv and csv.endswith("\n")
        assert csv.splitlines()[0] == "coefficient,lower,upper,lower_unbounded,upper_unbounded,point,status"
        assert "rail,-inf,1.4,True,False,0.8,unbounded below" in csv

    def test_unknown_format_is_refused_with_fix(self, figs):
        with pytest.raises(OptionsError, match="fmt must be 'svg' or 'png'") as err:
            render_figure(figs["frisch"], "pdf")
        assert err.value.fix


# --------------------------------------------------------------------------- palette

def _rgb(h):
    return np.array([int(h[i:i + 2], 16) / 255 for i in (1, 3, 5)])


def _luminance(c):
    # WCAG 2.1 relative luminance (sRGB transfer function from IEC 61966-2-1)
    c = np.where(c <= 0.04045, c / 12.92, ((c + 0.055) / 1.055) ** 2.4)
    return 0.2126 * c[0] + 0.7152 * c[1] + 0.0722 * c[2]


class TestPalette:
    def test_inks_are_at_least_8_lightness_units_apart(self):
        cs = pytest.importorskip("colorspacious")  # reference: colorspacious CIELab conversion
        lightness = sorted(cs.cspace_convert(_rgb(h), "sRGB1", "CIELab")[0] for h in PALETTE)
        assert min(np.diff(lightness)) >= 8.0

    def test_inks_have_3_to_1_contrast_on_white(self):
        # WCAG 2.1 success criterion 1.4.11 (non-text contrast): at least 3:1
        for h in PALETTE:
            assert 1.05 / (_luminance(_rgb(h)) + 0.05) >= 3.0, h

    @pytest.mark.parametrize("cvd", ["deuteranomaly", "protanomaly", "tritanomaly"])
    def test_inks_stay_apart_under_simulated_colour_vision_deficiency(self, cvd):
        # reference: colorspacious (Machado, Oliveira & Fernandes 2009 simulation), CAM02-UCS distances
        cs = pytest.importorskip("colorspacious")
        sim = {"name": "sRGB1+CVD", "cvd_type": cvd, "severity": 100}
        pts = [cs.cspace_convert(np.clip(cs.cspace_convert(_rgb(h), sim, "sRGB1"), 0, 1), "sRGB1", "CAM02-UCS")
               for h in PALETTE]
        assert min(np.linalg.norm(a - b) for a, b in itertools.combinations(pts, 2)) >= 10.0

    def test_sequential_colormap_lightness_falls_monotonically(self):
        cs = pytest.importorskip("colorspacious")
        rgb = SEQUENTIAL(np.linspace(0, 1, 64))[:, :3]
        lightness = cs.cspace_convert(rgb, "sRGB1", "CIELab")[:, 0]
        assert np.all(np.diff(lightness) < 0)

    def test_series_differ_in_marker_and_line_style_not_only_colour(self):
        st = styles_for(["equal", "elementary", "diagonal", "shaped", "bounded"])
        assert len({s.marker for s in st}) == 5
        assert len({str(s.linestyle) for s in st}) == 5

    def test_an_assumption_keeps_its_style_in_any_order(self):
        a = styles_for(["equal", "diagonal"])
        b = styles_for(["diagonal", "custom", "equal"])
        assert a[0] == b[2] and a[1] == b[0]


# --------------------------------------------------------------------------- data overview

class TestDataOverview:
    def test_standardised_values_match_scipy_zscore(self, figs):
        from scipy import stats  # reference: scipy.stats.zscore with ddof=1

        times, series, _ = fi.overview_inputs()
        tab = figs["overview"].table
        got = tab[(tab.layer == "series") & (tab.name == "Cargo handled")]["standardised"].to_numpy()
        np.testing.assert_allclose(got, stats.zscore(series["Cargo handled"], ddof=1), rtol=1e-12)

    def test_table_has_one_row_per_value_and_per_window(self, figs):
        times, series, windows = fi.overview_inputs()
        tab = figs["overview"].table
        assert (tab.layer == "series").sum() == 2 * times.size
        assert (tab.layer == "window").sum() == 1 + 9

    def test_overlapping_windows_go_on_separate_lines(self, figs):
        tab = figs["overview"].table
        rolling = tab[(tab.layer == "window") & (tab.name == "rolling")].reset_index(drop=True)
        # 4-year windows every year: each overlaps the next three, so four lines are needed
        assert rolling["lane"].max() == 4
        for i in range(len(rolling) - 1):
            assert rolling.loc[i, "lane"] != rolling.loc[i + 1, "lane"]

    def test_description_states_means_missing_values_and_window_counts(self, figs):
        times, series, _ = fi.overview_inputs()
        v = series["Cargo handled"]
        d = figs["overview"].description
        assert f"mean {num(v.mean())}, standard deviation {num(v.std(ddof=1))}" in d
        assert "1 missing value" in d
        assert "rolling: 9 windows" in d and "2000-01-01 to 2003-12-01" in d
        assert "(full: 1, rolling: 9)" in figs["overview"].alt

    def test_row_numbers_work_as_times(self):
        res = data_overview(np.arange(50), {"a": np.sin(np.arange(50.0))}, {"p": [(0, 24, "first"), (25, 49, "second")]})
        assert "50 rows" in res.alt
        assert "the first (first) from 0 to 24" in res.description

    def test_window_ending_before_it_starts_names_the_plan_and_window(self):
        with pytest.raises(OptionsError, match=r"windows\['p'\]\[0\] ends before it starts") as err:
            data_overview(np.arange(10), {"a": np.arange(10.0)}, {"p": [(5, 2, "w")]})
        assert err.value.fix

    def test_series_of_wrong_length_is_refused(self):
        with pytest.raises(OptionsError, match=r"series\['a'\] must have shape"):
            data_overview(np.arange(10), {"a": np.arange(9.0)})


# --------------------------------------------------------------------------- elementary map

class TestElementaryMap:
    def test_description_gives_each_point_and_the_rms_distance(self, figs):
        m = fi.map_data(fi.two_relation_data(1, 3), fi.NAMES3)
        res = figs["map3"]
        rms = float(np.sqrt(np.mean(m.distances ** 2)))
        assert f"RMS distance {num(rms)}" in res.alt
        for j, name in enumerate(fi.NAMES3):
            assert f"{name} alone noisy at ({num(m.points[j, 0])}, {num(m.points[j, 1])})" in res.description
        assert "fitted line" in res.description and "corank 2" in res.alt

    def test_point_labels_name_the_variable_treated_as_noisy(self, figs):
        texts = [t.get_text() for t in figs["map3"].figure.axes[0].texts]
        for name in fi.NAMES3:
            assert f"{name} alone noisy" in texts

    def test_table_rows_are_points_then_flat(self, figs):
        tab = figs["map3"].table
        assert list(tab["kind"]) == ["elementary regression"] * 3 + ["flat point", "flat direction 1"]
        assert list(tab.columns[2:4]) == ["coefficient on trucks", "coefficient on rail"]

    def test_large_n_projection_puts_the_flat_on_the_horizontal_axis(self, figs):
        res = figs["map5"]
        tab = res.table
        pts = tab[tab.kind == "elementary regression"]
        # the vertical axis is a unit direction orthogonal to the flat: |y| <= distance to the flat
        assert np.all(np.abs(pts.plot_y) <= pts.distance_to_flat + 1e-9)
        flat = tab[tab.kind == "flat point"]
        assert abs(float(flat.plot_y.iloc[0])) < 1e-12
        assert "2-D projection" in res.description and "main direction" in res.description

    def test_frisch_set_is_shaded_and_its_ranges_stated(self, figs):
        res = figs["map3q1"]
        p1 = fi.elementary_points(np.array([[1.0, 0.6, 0.5], [0.6, 1.0, 0.4], [0.5, 0.4, 1.0]]), 0)
        assert f"coefficient on trucks from {num(p1[:, 0].min())} to {num(p1[:, 0].max())}" in res.description
        assert any(p.get_hatch() for p in res.figure.axes[0].patches)
        assert (res.table.kind == "Frisch set vertex").sum() == 3
        assert "fitted point" in res.alt

    def test_two_variables_are_refused_with_a_pointer_to_intervals(self):
        with pytest.raises(OptionsError, match="at least 3 variables") as err:
            elementary_map(np.zeros((2, 1)), names=["a", "b"], ref="a", flat_point=[0.0],
                           flat_dirs=np.zeros((0, 1)), distances=[0.0, 0.0])
        assert "frisch_intervals" in err.value.fix

    def test_unknown_reference_variable_is_refused(self):
        with pytest.raises(OptionsError, match="ref must be one of names"):
            elementary_map(np.zeros((3, 2)), names=["a", "b", "c"], ref="z", flat_point=[0, 0],
                           flat_dirs=[[1, 0]], distances=[0, 0, 0])


class TestWindowGallery:
    def test_panels_share_axes_and_rms_range_is_stated(self, figs):
        res = figs["gallery"]
        axes = [a for a in res.figure.axes if a.get_visible()]
        assert len(axes) == 1 + 6  # the overlay of all windows, then one panel per window
        assert len({a.get_xlim() for a in axes}) == 1 and len({a.get_ylim() for a in axes}) == 1
        rms = [fi.map_data(fi.two_relation_data(3, 3, rows=600)[60 * k: 60 * k + 240], fi.NAMES3).rms
               for k in range(6)]
        assert f"ranges from {num(min(rms))} (" in res.description and f"to {num(max(rms))} (" in res.description

    @pytest.mark.parametrize("w, long_title", [(6, False), (9, False), (7, True)])
    def test_grid_is_laid_out_without_the_constrained_layout_and_every_text_stays_clear(
            self, w, long_title, monkeypatch):
        # the small multiples are placed on a fixed grid measured once; the rules are the
        # constrained layout's: panels of one size in aligned rows and columns, the overlay as wide
        # as the grid, no text outside the figure or on another text (a long title widens its column)
        from matplotlib import _constrained_layout
        from matplotlib.text import Text

        from relspan.report.figures.style import style_context

        def no_pass(*a, **k):
            raise AssertionError("constrained layout pass")

        monkeypatch.setattr(_constrained_layout, "do_constrained_layout", no_pass)
        data = fi.two_relation_data(3, 3, rows=600)
        ms = [fi.map_data(data[20 * k: 20 * k + 240], fi.NAMES3) for k in range(w)]
        labels = [f"w{k}" for k in range(w)]
        if long_title:  # wider than a panel: its column gets the room, the panels stay one size
            labels[1] = "the second window, with a label wider than its panel"
        res = window_gallery(ms, labels, reference=fi.map_data(data, fi.NAMES3))
        fig = res.figure
        panels = [a for a in fig.axes[1:] if a.get_visible()]
        boxes = [a.get_position() for a in panels]
        assert len({(round(b.width, 6), round(b.height, 6)) for b in boxes}) == 1
        top = fig.axes[0].get_position()
        assert top.x0 == pytest.approx(min(b.x0 for b in boxes)) and top.x1 == pytest.approx(max(b.x1 for b in boxes))
        with style_context():
            fig.canvas.draw()
            r = fig.canvas.get_renderer()
            # drawn texts: a tick beyond the axis limits keeps a label that is never drawn
            drawn = {id(t.label1) for a in fig.axes for axis in (a.xaxis, a.yaxis) for t in axis._update_ticks()}
            ticks = {id(t.label1) for a in fig.axes for axis in (a.xaxis, a.yaxis) for t in axis.get_major_ticks()}
            texts = [t.get_window_extent(r) for t in fig.findobj(Text) if t.get_visible() and t.get_text().strip()
                     and (id(t) in drawn or id(t) not in ticks) and (t.axes is None or t.axes.get_visible())]
            # what each axes draws (no tick label beyond the limits), and the figure's own labels
            inked = [a.get_tightbbox(r) for a in [fig.axes[0]] + panels]
            inked += [t.get_window_extent(r) for t in (fig._supxlabel, fig._supylabel)]
        wpx, hpx = fig.bbox.width, fig.bbox.height
        assert all(b.x0 >= 0 and b.y0 >= 0 and b.x1 <= wpx and b.y1 <= hpx for b in inked)
        for a, b in itertools.combinations(texts, 2):
            assert min(a.x1, b.x1) - max(a.x0, b.x0) <= 1.0 or min(a.y1, b.y1) - max(a.y0, b.y0) <= 1.0

    def test_table_has_every_window_and_the_reference(self, figs):
        tab = figs["gallery"].table
        assert list(dict.fromkeys(tab.window)) == ["full sample"] + fi.LABELS6
        assert (tab.kind == "elementary regression").sum() == 7 * 3

    def test_more_windows_than_panels_get_evenly_spaced_panels_and_all_are_in_the_overlay(self):
        ms = [fi.map_data(fi.two_relation_data(3, 3, rows=600)[10 * k: 10 * k + 240], fi.NAMES3)
              for k in range(31)]
        res = window_gallery(ms, [f"w{i}" for i in range(31)], max_panels=8)
        panels = [a for a in res.figure.axes[1:] if a.get_visible()]
        assert [a.get_title(loc="left") for a in panels][:1] == ["w0"] and panels[-1].get_title(loc="left") == "w30"
        assert len(panels) == 8
        assert "8 panels for 8 evenly spaced windows of 31" in res.description
        overlay = res.figure.axes[0]
        assert sum(1 for ln in overlay.lines if hasattr(ln, "get_xy1")) == 31
        assert list(dict.fromkeys(res.table.window)) == [f"w{i}" for i in range(31)]

    def test_mixed_reference_variables_are_refused(self):
        a = fi.map_data(fi.two_relation_data(1, 3), fi.NAMES3)
        b = ElementaryMapData(a.points, ("trucks", "cargo", "rail"), "trucks", a.flat_point, a.flat_dirs,
                              a.distances)
        with pytest.raises(OptionsError, match=r"maps\[1\]"):
            window_gallery([a, b], ["x", "y"])


# --------------------------------------------------------------------------- stability

class TestSubspaceStability:
    def test_alt_states_largest_angle_to_full_sample_and_threshold(self, figs):
        res = figs["stability"]
        assert res.alt.startswith("Largest angle between any window and the full sample: 3.2 degrees (threshold 10)")
        assert "12.5 degrees (1996-2005 and 2005-2014)" in res.description
        assert "1 pair of windows differ by more than the threshold" in res.description

    def test_values_are_written_in_cells_for_few_windows(self, figs):
        texts = [t.get_text() for t in figs["stability"].figure.axes[0].texts]
        assert texts.count("12.5") == 2 and texts.count("0.0") == 6

    def test_table_has_each_pair_once_and_each_window_to_full(self, figs):
        tab = figs["stability"].table
        assert (tab.kind == "between windows").sum() == 15
        assert (tab.kind == "to full sample").sum() == 6
        assert tab.above_threshold.sum() == 1

    def test_tiny_angles_keep_two_significant_digits(self):
        assert angle_text(0.031) == "0.031" and angle_text(3.24) == "3.2"

    def test_asymmetric_matrix_is_refused(self):
        a = fi.ANGLES6.copy()
        a[0, 1] = 5
        with pytest.raises(OptionsError, match=r"symmetric \(entry \[0, 1\]"):
            subspace_stability(a, fi.LABELS6, fi.TO_FULL6)

    def test_angles_above_90_degrees_are_refused(self):
        with pytest.raises(OptionsError, match="between 0 and 90"):
            subspace_stability(fi.ANGLES6, fi.LABELS6, fi.TO_FULL6 + 100)

    def test_times_put_windows_on_a_date_axis(self):
        times = np.array([f"{1994 + 3 * k}-07-01" for k in range(6)], dtype="datetime64[D]")
        res = subspace_stability(fi.ANGLES6, fi.LABELS6, fi.TO_FULL6, times=times)
        t = res.table[res.table.kind == "to full sample"]["time"]
        assert str(t.iloc[0].date()) == "1994-07-01"


class TestCoefficientSwing:
    def test_sign_flips_are_found_between_consecutive_windows(self, figs):
        tab = figs["swing"].table
        eq = tab[(tab.kind == "coefficient") & (tab.assumption == "equal")]
        assert list(eq.sign_flip_from_previous) == [False, False, True, False, True, False]
        dg = tab[(tab.kind == "coefficient") & (tab.assumption == "diagonal")]
        # NaN in window 2 is skipped: flips 0.10 -> -0.05 and -0.05 -> 0.09
        assert list(dg.sign_flip_from_previous) == [False, False, False, True, True, False]

    def test_words_give_flips_and_the_angle(self, figs):
        res = figs["swing"]
        assert "between 1993-2002 and 1996-2005 (0.3 to -0.12)" in res.description
        assert "Largest angle between any window and the full sample: 3.2 degrees (threshold 10)" in res.description
        assert "not pinned down" in res.description
        assert "sign flips under equal and diagonal" in res.alt
        texts = [t.get_text() for t in res.figure.axes[0].texts]
        assert texts.count("sign flip") == 3  # three distinct locations

    def test_coefficients_of_wrong_length_are_refused(self):
        with pytest.raises(OptionsError, match=r"coefficients\['equal'\] must have shape"):
            coefficient_swing(fi.LABELS6, {"equal": [1, 2]}, fi.TO_FULL6, 10, "c")


# --------------------------------------------------------------------------- corank

class TestCorankEvidence:
    def test_admissible_coranks_follow_the_eigenvalues_below_eps(self, figs):
        res = figs["evidence"]
        # Weyl's inequality: corank q possible iff the q-th smallest eigenvalue <= eps (handbook fact)
        assert "eps 0.05: corank up to 2; eps 0.002: corank up to 1" in res.alt
        assert "corank 3 would need the 3rd eigenvalue, 0.84, to be at most 0.05" in res.description
        thr = res.table[res.table.kind == "threshold"]
        assert list(thr.admissible_up_to) == [2, 1]
        assert list(res.table[res.table.kind == "eigenvalue"].value) == sorted(fi.EIGS)

    def test_zero_eigenvalue_is_drawn_on_the_edge_not_dropped(self):
        res = corank_evidence([1.0, 0.2, -1e-17], 0.05)
        assert "at or below zero" in res.description and "Eigenvalues 0, 0.2 and 1" in res.alt
        ax = res.figure.axes[0]
        assert any(l.get_marker() == "v" for l in ax.lines)

    def test_non_positive_eps_is_refused(self):
        with pytest.raises(OptionsError, match="eps must be a positive number"):
            corank_evidence(fi.EIGS, 0.0)


class TestCorankTimeline:
    def test_undetermined_cells_are_hatched_and_marked(self, figs):
        res = figs["timeline"]
        ax = res.figure.axes[0]
        assert sum(1 for p in ax.patches if p.get_hatch() == "xxx") == 2
        assert [t.get_text() for t in ax.texts].count("?") == 2
        tab = res.table
        assert (tab.status == "undetermined").sum() == 2 and tab.corank.isna().sum() == 2

    def test_words_count_coranks_and_name_undetermined_windows(self, figs):
        d = figs["timeline"].description
        assert "equal: corank 1 in 2 windows and corank 2 in 4 windows" in d
        assert "undetermined in 2 windows (1993-2002 and 1999-2008)" in d
        assert "diagonal 2 in 3 of 6, 2 undetermined" in figs["timeline"].alt

    def test_fractional_corank_is_refused(self):
        with pytest.raises(OptionsError, match=r"coranks\['equal'\]\[1\] must be a whole number"):
            corank_timeline(["a", "b"], {"equal": [1, 1.5]})


# --------------------------------------------------------------------------- Frisch intervals

class TestFrischIntervals:
    def test_unbounded_sides_are_said_marked_and_drawn_to_the_edge(self, figs):
        res = figs["frisch"]
        assert "rail: unbounded below, up to 1.4" in res.description
        assert "fuel: unbounded above, from -0.31" in res.description
        assert "do not lie in one orthant" in res.description
        tab = res.table
        assert list(tab.lower_unbounded) == [False, True, False]
        assert list(tab.upper_unbounded) == [False, False, True]
        ax = res.figure.axes[0]
        assert [t.get_text() for t in ax.texts].count("unbounded") == 2
        x0, x1 = ax.get_xlim()
        heads = [t.xy[0] for t in ax.texts if t.arrow_patch is not None]
        assert sorted(heads) == [x0, x1]  # the arrows reach the axis edges

    def test_zero_inside_a_range_means_the_sign_is_open(self, figs):
        assert "Zero lies inside the range for rail and fuel" in figs["frisch"].description

    def test_bounded_intervals_give_both_ends(self):
        res = frisch_intervals(["a", "b"], [0.21, 0.4], [0.37, 0.75])
        assert res.alt == "Frisch bounds: a 0.21 to 0.37; b 0.4 to 0.75."
        assert "every sign is pinned down" in res.description

    def test_lower_above_upper_is_refused(self):
        with pytest.raises(OptionsError, match=r"lower exceeds upper at index 0 \(a\)"):
            frisch_intervals(["a"], [1.0], [0.0])

    def test_nan_bound_is_refused(self):
        with pytest.raises(OptionsError, match="non-finite value at index 0"):
            frisch_intervals(["a"], [np.nan], [1.0])
