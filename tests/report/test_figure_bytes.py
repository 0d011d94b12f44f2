"""SVG bytes that do not depend on the maths library's last bits or on the matplotlib version.

Two CPU kernels of OpenBLAS (e.g. Haswell and SkylakeX) give the same results up to the last
bits; the figures must not show those bits (plotted data rounded to FIGURE_DIGITS significant
digits, relspan.report.figures.snap). The demo-wide check under two kernels is the build
comparison in benchmarks/bench_figures.py --kernels.
"""

from __future__ import annotations

import dataclasses

import matplotlib
import numpy as np
import pytest

from relspan.report import elementary_map, render_figure, window_gallery
from relspan.report.figures.snap import FIGURE_DIGITS, round_sig

import figure_inputs as fi  # noqa: E402


def _jitter(m, rng, rel):
    """The same map with every number moved by about ``rel`` relative (last-bits noise of another kernel)."""
    def j(a):
        return None if a is None else a * (1.0 + rel * rng.standard_normal(np.shape(a)))
    return dataclasses.replace(m, points=j(m.points), flat_point=j(m.flat_point), flat_dirs=j(m.flat_dirs),
                               distances=np.abs(j(m.distances)),
                               simplex=j(m.simplex) if m.simplex is not None else None)


def _map_svg(m):
    return render_figure(elementary_map(m.points, names=m.names, ref=m.ref, flat_point=m.flat_point,
                                        flat_dirs=m.flat_dirs, distances=m.distances, simplex=m.simplex))


@pytest.mark.parametrize("n", [3, 5])
def test_map_svg_bytes_do_not_change_with_last_bit_noise(n):
    names = fi.NAMES3 if n == 3 else fi.NAMES5
    m = fi.map_data(fi.two_relation_data(7, n), names)
    rng = np.random.default_rng(11)
    assert _map_svg(m) == _map_svg(_jitter(m, rng, 1e-11))


def test_gallery_svg_bytes_do_not_change_with_last_bit_noise():
    gal = [fi.map_data(fi.two_relation_data(3, 3, rows=600)[60 * k: 60 * k + 240], fi.NAMES3) for k in range(6)]
    ref = fi.map_data(fi.two_relation_data(3, 3, rows=600), fi.NAMES3)
    rng = np.random.default_rng(12)
    a = render_figure(window_gallery(gal, fi.LABELS6, reference=ref))
    b = render_figure(window_gallery([_jitter(m, rng, 1e-11) for m in gal], fi.LABELS6,
                                     reference=_jitter(ref, rng, 1e-11)))
    assert a == b


def test_no_svg_names_the_matplotlib_version():
    for name, fig in fi.build_all().items():
        svg = render_figure(fig)
        assert matplotlib.__version__.encode() not in svg, name
        assert b"Matplotlib v" not in svg, name
        assert b"<dc:date>" not in svg, name


def test_round_sig_keeps_the_stated_digits_and_never_writes_minus_zero():
    x = round_sig([123456.789, -0.000123456789, -1e-20, 0.0, np.inf], FIGURE_DIGITS, zero_below=1e-12)
    assert x[0] == 123457.0 and x[1] == -0.000123457
    assert x[2] == 0.0 and not np.signbit(x[2])
    assert x[3] == 0.0 and np.isinf(x[4])


def test_map_with_equal_scales_keeps_its_clip_path_ids_under_last_bit_noise():
    # equal scales: the axes box follows the limits' ratio, which carries the noise unless rounded
    x = fi.two_relation_data(21, 3, rows=400, noise=0.05)
    m = fi.map_data(x, fi.NAMES3)
    rng = np.random.default_rng(13)
    for _ in range(3):
        assert _map_svg(m) == _map_svg(_jitter(m, rng, 1e-11))


def test_overview_has_one_panel_per_series_titled_with_label_and_unit():
    from relspan.report import data_overview

    times, series, windows = fi.overview_inputs()
    res = data_overview(times, series, windows, units={"Cargo handled": "kt", "Truck trips": "thousand"})
    titles = [a.get_title(loc="left") for a in res.figure.axes]
    assert titles[:2] == ["Cargo handled (kt)", "Truck trips (thousand)"]
    assert len(res.figure.axes) == 2 + 1  # two series panels, then the window strip
    assert "one panel each" in res.alt and "each in its own units" in res.description


def test_dollar_signs_in_labels_and_units_are_drawn_literally_in_the_overview_panels():
    from relspan.report import data_overview

    times, series, windows = fi.overview_inputs()
    series = {"Cost $5 & $x": series["Cargo handled"], "Truck trips": series["Truck trips"]}
    res = data_overview(times, series, windows, units={"Cost $5 & $x": "$ per t"})
    assert render_figure(res).startswith(b"<?xml")


def test_snapping_small_multiples_with_shared_limits_recomputes_no_ticks(monkeypatch):
    # the small multiples of a gallery share their limits: setting an unchanged limit on each of
    # them, or asking every axis for its tick labels, ran every sibling's locator and formatter again
    from matplotlib.axis import Axis
    from matplotlib.figure import Figure

    from relspan.report.figures.snap import snap_figure

    fig = Figure()
    first = fig.add_subplot(3, 3, 1)
    axes = [first] + [fig.add_subplot(3, 3, k, sharex=first, sharey=first) for k in range(2, 10)]
    for k, ax in enumerate(axes):
        ax.plot([0.0, 1.0], [0.0, 0.1 * k])
    first.set_xlim(-0.5, 1.5)
    first.set_ylim(-1.0, 2.0)
    calls = []
    real = Axis._update_ticks
    monkeypatch.setattr(Axis, "_update_ticks", lambda self: calls.append(self) or real(self))
    snap_figure(fig)
    assert calls == []
    assert axes[-1].get_xlim() == pytest.approx((-0.5, 1.5), abs=1e-12)
