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
