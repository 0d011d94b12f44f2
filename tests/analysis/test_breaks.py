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
def demo_breaks():
    from pathlib import Path

    from relspan.run.pipeline import run_analysis
    from relspan.spec import load_spec

    spec = Path(__file__).resolve().parents[2] / "specs" / "demo.yaml"
    run = run_analysis(load_spec(spec), jobs=1, use_cache=False, progress=False)
    return {d.spec.id: d.breaks for d in run.datasets}


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
