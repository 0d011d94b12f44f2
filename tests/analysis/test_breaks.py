"""Break in the relation subspace at an unknown date (relspan.analysis.breaks)."""

import numpy as np
import pytest

from relspan.analysis.breaks import subspace_break_scan
from relspan.analysis.resample import GranuleStats
from relspan.errors import OptionsError
from tests.analysis.inference_sims import one_relation_cov, rows


def _series(rng, turn, t=300, at=0.5):
    k = int(t * at)
    return np.vstack([rows(rng, one_relation_cov(0.0, 0.1)[0], k), rows(rng, one_relation_cov(turn, 0.1)[0], t - k)])


def test_a_20_degree_break_is_found_near_its_date():
    rng = np.random.default_rng(0)
    res = subspace_break_scan(GranuleStats.from_rows(_series(rng, 20, at=0.6), ordered=False), q=1, rng=rng,
                              resamples=99)
    assert res.found and res.p_value <= 0.05
    assert res.split_interval[0] <= 180 <= res.split_interval[1]
    assert 10 < res.angle_deg < 30
    assert res.to_dict()["trim"] == 0.15


def test_candidate_dates_respect_the_trimming():
    rng = np.random.default_rng(1)
    res = subspace_break_scan(GranuleStats.from_rows(_series(rng, 0), ordered=False), q=1, rng=rng, resamples=19)
    assert 45 <= res.split_row <= 255


def test_q_out_of_range_is_refused():
    with pytest.raises(OptionsError, match="q must be"):
        subspace_break_scan(GranuleStats.from_rows(np.random.default_rng(0).normal(size=(50, 3))), q=3,
                            rng=np.random.default_rng(0))


@pytest.mark.slow
def test_power_and_false_alarms_by_simulation():
    # simulation: 40 series of 300 rows with a 20-degree turn at mid-sample, 40 without; 99 resamples each
    rng = np.random.default_rng(2024)
    found = alarms = 0
    for _ in range(40):
        found += subspace_break_scan(GranuleStats.from_rows(_series(rng, 20), ordered=False), q=1, rng=rng,
                                     resamples=99).found
        alarms += subspace_break_scan(GranuleStats.from_rows(_series(rng, 0), ordered=False), q=1, rng=rng,
                                      resamples=99).found
    assert found / 40 >= 0.90
    assert alarms / 40 <= 0.10


# ------------------------------------------------------------------ the fit statistic and its null


def test_statistic_is_t_log_of_common_over_separate_misfit_at_the_most_likely_date():
    # the module's formula written out with numpy.linalg.eigvalsh on the rows themselves (no granule
    # merges): S = sum of the q smallest eigenvalues of the co-moment matrix about each side's mean
    rng = np.random.default_rng(3)
    x = _series(rng, 20, at=0.4)
    res = subspace_break_scan(GranuleStats.from_rows(x, ordered=False), q=1, rng=rng, resamples=19)
    s = res.split_row

    def misfit(part):
        d = part - part.mean(axis=0)
        return float(np.linalg.eigvalsh(d.T @ d)[0])

    before, after = x[:s] - x[:s].mean(axis=0), x[s:] - x[s:].mean(axis=0)
    common = float(np.linalg.eigvalsh(before.T @ before + after.T @ after)[0])
    expected = len(x) * np.log(common / (misfit(x[:s]) + misfit(x[s:])))
    assert res.statistic == pytest.approx(expected, rel=1e-9)


def test_statistic_and_angle_do_not_depend_on_the_units_of_the_variables():
    # scale="correlation": one common scale, each variable divided by its whole-sample sd
    rng = np.random.default_rng(4)
    x = _series(rng, 20)
    a = subspace_break_scan(GranuleStats.from_rows(x, ordered=False), q=1, rng=np.random.default_rng(0),
                            scale="correlation", resamples=19)
    b = subspace_break_scan(GranuleStats.from_rows(x * [1000.0, 0.01, 7.0], ordered=False), q=1,
                            rng=np.random.default_rng(0), scale="correlation", resamples=19)
    assert b.statistic == pytest.approx(a.statistic, rel=1e-7)
    assert b.angle_deg == pytest.approx(a.angle_deg, abs=1e-6)
    assert b.split_row == a.split_row


def test_the_resampled_sample_has_one_relation_subspace_and_keeps_each_sides_misfit():
    from relspan.analysis.breaks import _null_units, _parts, _sides

    rng = np.random.default_rng(5)
    x = _series(rng, 30)
    st = GranuleStats.from_rows(x, ordered=False)
    c, m, cm = st.counts, st.means, st.comoments
    m0, cm0, v0, vb, va = _null_units(c, m, cm, 150, 1)
    def ang(u, v):  # degrees, from the sine (Bjorck & Golub 1973): arccos loses small angles
        u, v = u[:, 0], v[:, 0]
        return float(np.degrees(np.arcsin(min(1.0, np.linalg.norm(v - u * (u @ v))))))

    assert ang(vb, va) > 20.0                       # the observed sides differ by the break
    for mm, cc in ((m, cm), (m0, cm0)):
        g, cd = _parts(c, mm, cc)
        _, _, cb, ca = _sides(c, g, cd, np.arange(len(c))[None], np.array([150]))
        if mm is m0:
            turned = (np.linalg.eigh(cb[0, 0])[1][:, :1], np.linalg.eigh(ca[0, 0])[1][:, :1])
            assert ang(*turned) < 1e-6              # after turning: one subspace on both sides
            assert ang(turned[0], v0) < 1e-6
            assert np.allclose(np.linalg.eigvalsh(cb[0, 0]), eig_b) and np.allclose(np.linalg.eigvalsh(ca[0, 0]), eig_a)
            assert np.allclose(mm[:150].mean(axis=0), mm[150:].mean(axis=0))  # one level throughout
        else:
            eig_b, eig_a = np.linalg.eigvalsh(cb[0, 0]), np.linalg.eigvalsh(ca[0, 0])


# ------------------------------------------------------------------ the demo's known structure


@pytest.fixture(scope="module")
def demo_run():
    from pathlib import Path

    from relspan.run.pipeline import run_analysis
    from relspan.spec import load_spec

    spec = Path(__file__).resolve().parents[2] / "specs" / "demo.yaml"
    return run_analysis(load_spec(spec), jobs=1, use_cache=False, progress=False)


@pytest.fixture(scope="module")
def demo_breaks(demo_run):
    return {d.spec.id: d.breaks for d in demo_run.datasets}


def test_the_demo_shift_break_is_found_with_2008_inside_its_interval(demo_breaks):
    import json
    from pathlib import Path

    # specs/data/truth.json: the fare formula changes from 2008Q1 (specs/generate_demo.py), about 25
    # degrees on the common scale as the generator measured it
    truth = json.loads((Path(__file__).resolve().parents[2] / "specs" / "data" / "truth.json")
                       .read_text(encoding="utf-8"))["datasets"]["shift"]
    for a in ("equal", "bounded"):
        br = demo_breaks["shift"][a]
        assert br.status == "break", (a, br.to_dict())
        assert br.date_low <= truth["break"]["quarter"] <= br.date_high   # quarters sort as text
        assert br.scan.split_interval[0] <= truth["break"]["row"] <= br.scan.split_interval[1]
        measured = truth["design"]["measured_break_angle_deg"]["standardised_common"]
        assert abs(br.scan.angle_deg - measured) < 3.0


@pytest.mark.parametrize("dataset", ["trio", "accounts"])
def test_the_stable_demo_datasets_show_no_break(demo_breaks, dataset):
    # specs/generate_demo.py: the trio's relations and the accounts' identity hold throughout
    for a, br in demo_breaks[dataset].items():
        if a in ("equal", "bounded"):
            assert br.status == "no break", (dataset, a, br.to_dict())


def test_long_run_ratio_of_an_ar1_series_is_one_plus_rho_over_one_minus_rho():
    from scipy.signal import lfilter

    from relspan.analysis.breaks import long_run_ratio

    # handbook formula: an AR(1) series with coefficient rho has long-run variance sigma^2 / (1 - rho)^2
    # and variance sigma^2 / (1 - rho^2), ratio (1 + rho) / (1 - rho) = 3 for rho = 0.5
    rng = np.random.default_rng(6)
    e = rng.normal(size=(20000, 2))
    x = lfilter([1.0], [1.0, -0.5], e, axis=0)
    assert long_run_ratio(x) == pytest.approx(3.0, rel=0.15)
    assert long_run_ratio(e) == pytest.approx(1.0, abs=0.1)      # independent: about 1 (never below)
    assert long_run_ratio(np.c_[x[:, 0], 2.0 * x[:, 0]]) == pytest.approx(3.0, rel=0.15)  # collinear series


def test_prewhitened_long_run_ratio_recovers_the_ar1_formula():
    from scipy.signal import lfilter

    from relspan.analysis.breaks import prewhitened_long_run_ratio

    # handbook formula: AR(1) with coefficient rho has long-run over plain variance (1 + rho) / (1 - rho);
    # the product of two independent AR(1) series with coefficient rho is AR(1)-like with rho^2
    # (Isserlis), ratio (1 + rho^2) / (1 - rho^2) = 5/3 for rho = 0.5
    rng = np.random.default_rng(7)
    e = rng.normal(size=(20000, 2))
    x = lfilter([1.0], [1.0, -0.5], e, axis=0)
    assert prewhitened_long_run_ratio(x) == pytest.approx(3.0, rel=0.1)
    assert prewhitened_long_run_ratio(x[:, :1] * x[:, 1:]) == pytest.approx(5.0 / 3.0, rel=0.1)
    assert prewhitened_long_run_ratio(e) == pytest.approx(1.0, abs=0.1)


def test_prewhitening_captures_more_of_a_geometric_dependence_than_the_lag_window_alone():
    # 300 units, the case where the flat-top window keeps few lags: averaged over 40 product series the
    # prewhitened estimate is nearer the true 5/3 (docs/inference.md: 1.40 against 1.55 on the scan's scores)
    from scipy.signal import lfilter

    from relspan.analysis.breaks import long_run_ratio, prewhitened_long_run_ratio

    rng = np.random.default_rng(8)
    plain, white = [], []
    for _ in range(40):
        x = lfilter([1.0], [1.0, -0.5], rng.normal(size=(300, 2)), axis=0)
        z = x[:, :1] * x[:, 1:]
        plain.append(long_run_ratio(z))
        white.append(prewhitened_long_run_ratio(z))
    assert abs(np.mean(white) - 5 / 3) < abs(np.mean(plain) - 5 / 3)
    assert np.mean(white) == pytest.approx(5 / 3, rel=0.1)


def _turns(rng, t, rho, at, turn=20.0):
    """benchmarks/break_scan_checks.simulate: the relation turned by ``turn`` at each share in ``at``."""
    from benchmarks.break_scan_checks import simulate

    return simulate(rng, t, rho, at, turn)


def test_false_alarms_on_autocorrelated_stable_rows_stay_near_the_level():
    # simulation (CI-sized; 200 per cell in benchmarks/break_scan_checks.py, docs/inference.md): 40 stable
    # series of 300 AR(1) rows, coefficient 0.5 in every series, time-ordered, 99 resamples, 5% level.
    # Measured on these 40: 1 alarm; 3 with the flat-top ratio alone, 7 without a dependence correction
    rng = np.random.default_rng(31)
    alarms = sum(subspace_break_scan(GranuleStats.from_rows(_turns(rng, 300, 0.5, ())[0]), q=1, rng=rng,
                                     resamples=99).found for _ in range(40))
    assert alarms <= 4


def test_false_alarms_on_strongly_autocorrelated_stable_rows_stay_near_the_level():
    # simulation (CI-sized): 30 stable series of 300 AR(1) rows, coefficient 0.8, 99 resamples, 5% level.
    # Measured on these 30: 1 alarm; 5 with the flat-top ratio alone (the previous rule), 25 without a
    # dependence correction
    rng = np.random.default_rng(31)
    alarms = sum(subspace_break_scan(GranuleStats.from_rows(_turns(rng, 300, 0.8, ())[0]), q=1, rng=rng,
                                     resamples=99).found for _ in range(30))
    assert alarms <= 3


def test_a_20_degree_break_in_autocorrelated_rows_is_found_once():
    # simulation: 20 series of 300 AR(1) rows (0.5), relation turned at mid-sample; found in every one,
    # a second break in at most 2, the true date inside the interval in at least 17 (95% intervals)
    rng = np.random.default_rng(32)
    found = extra = inside = 0
    for _ in range(20):
        x, cuts = _turns(rng, 300, 0.5, (0.5,))
        res = subspace_break_scan(GranuleStats.from_rows(x), q=1, rng=rng, resamples=99)
        found += res.found
        extra += len(res.dates) > 1
        inside += any(b.split_interval[0] <= cuts[0] <= b.split_interval[1] for b in res.dates)
    assert found == 20 and extra <= 2 and inside >= 17


def test_two_breaks_are_found_one_at_a_time_each_date_inside_its_interval():
    # the relation turned twice (rows 100 and 200 of 300, 20 each time: 14.1 degrees between the
    # relation vectors of neighbouring regimes, one_relation_cov)
    rng = np.random.default_rng(33)
    x, cuts = _turns(rng, 300, 0.0, (1 / 3, 2 / 3))
    res = subspace_break_scan(GranuleStats.from_rows(x), q=1, rng=rng, resamples=199)
    assert [b.step for b in sorted(res.dates, key=lambda b: b.step)] == [1, 2]
    assert [b.split_row for b in res.dates] == sorted(b.split_row for b in res.dates)   # time order
    for b, c in zip(res.dates, cuts):
        assert b.split_interval[0] <= c <= b.split_interval[1]
        assert 8.0 < b.angle_deg < 22.0
    second = next(b for b in res.dates if b.step == 2)
    assert second.level == pytest.approx(0.95 ** 0.5)                 # Sidak: two segments share 5%
    assert second.critical_value > res.critical_value * 0.8 and second.p_value <= 1 - 0.95 ** 0.5
    assert len(res.segments) == 3 and res.segment_level == pytest.approx(0.95 ** (1 / 3))
    assert res.to_dict()["dates"][0]["split_interval"] == list(res.dates[0].split_interval)


def test_one_break_only_when_asked():
    rng = np.random.default_rng(33)
    x, _ = _turns(rng, 300, 0.0, (1 / 3, 2 / 3))
    res = subspace_break_scan(GranuleStats.from_rows(x), q=1, rng=rng, resamples=99, max_breaks=1)
    assert res.found and len(res.dates) == 1 and res.further_tests == 0
    assert res.segment_level != res.segment_level        # NaN: the search stopped at its most breaks


def test_segments_shorter_than_twice_the_trim_are_not_tested():
    # a break at 20% of the rows leaves a first segment of 60 rows: no date in it leaves 45 (15% of 300)
    # rows on each side, so it is not tested and its p-value is NaN
    rng = np.random.default_rng(34)
    x, _ = _turns(rng, 300, 0.0, (0.2,), turn=40.0)
    res = subspace_break_scan(GranuleStats.from_rows(x), q=1, rng=rng, resamples=99)
    assert res.found and res.min_segment_rows == 45
    first = res.segments[0]
    assert first[1] - first[0] < 90 and first[2] != first[2]


def test_a_stable_sample_reports_its_one_segment_and_no_dates():
    rng = np.random.default_rng(35)
    res = subspace_break_scan(GranuleStats.from_rows(_turns(rng, 300, 0.0, ())[0]), q=1, rng=rng, resamples=99)
    assert not res.found and res.dates == () and res.further_tests == 0
    assert res.segments == ((0, 300, res.p_value),) and res.segment_level == 0.95


def test_the_demo_shift_lists_its_one_break_with_its_date_and_interval(demo_breaks):
    br = demo_breaks["shift"]["equal"]
    assert len(br.scan.dates) == 1 and br.dates == ((br.date, br.date_low, br.date_high),)
    d = br.to_dict()["dates"][0]
    assert (d["date"], d["split_row"], d["step"]) == (br.date, br.scan.split_row, 1)


def test_the_dataset_page_never_says_no_break_when_a_break_is_reported(demo_run):
    from relspan.report.pages.dataset import _break_section

    shift = next(d for d in demo_run.datasets if d.spec.id == "shift")
    text = str(_break_section(shift)).replace("\\", "")     # Markdown escapes off
    assert "**a break**" in text and "no break found" not in text.lower()
    assert "No further break" in text and "2.5% level each" in text
    trio = next(d for d in demo_run.datasets if d.spec.id == "trio")
    assert "**a break" not in str(_break_section(trio))


def test_too_few_resamples_for_a_further_test_is_said_not_read_as_no_break():
    # 19 resamples reach p = 0.05 (the whole-sample level) but not the 2.5% a segment is tested at
    from relspan.report.pages.dataset import _further_words

    rng = np.random.default_rng(33)
    x, _ = _turns(rng, 300, 0.0, (1 / 3, 2 / 3))
    res = subspace_break_scan(GranuleStats.from_rows(x), q=1, rng=rng, resamples=19)
    assert res.found and len(res.dates) == 1
    assert "cannot be judged with 19 resamples" in _further_words(res, 1)


def test_window_figures_draw_one_dashed_line_per_break():
    from relspan.report.figures.windows import subspace_stability

    w = 6
    a = np.abs(np.subtract.outer(np.arange(w), np.arange(w))) * 2.0
    fig = subspace_stability(a, [f"w{i}" for i in range(w)], np.arange(w) * 1.5, threshold_deg=5.0,
                             break_at=[1.5, 3.5], break_label=["break from 2001 (scan)", "break from 2004 (scan)"])
    assert "Dashed vertical lines: break from 2001 (scan) and break from 2004 (scan)." in fig.description
    dashed = [ln for ax in fig.figure.axes for ln in ax.get_lines() if ln.get_linestyle() not in ("-", "None")]
    assert sorted({float(ln.get_xdata()[0]) for ln in dashed if len(set(ln.get_xdata())) == 1}) == [1.5, 3.5]
