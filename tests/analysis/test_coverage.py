"""Coverage of nominal 90% bootstrap intervals by simulation (datasets of known structure).

The measured table is recorded in docs/inference.md (rerun: see there).
"""

import pytest

from tests.analysis.inference_sims import coverage


def test_iid_rows_intervals_cover_the_truth_85_to_95_percent():
    # simulation: 200 datasets of 2 x 400 iid Gaussian rows, 199 resamples each
    got = coverage(rho=0.0, t=400, datasets=200)
    for name, share in got.items():
        assert 0.85 <= share <= 0.95, (name, got)


@pytest.mark.slow
def test_ar1_rows_intervals_cover_the_truth():
    # simulation: 200 datasets of 2 x 800 AR(1) rows (coefficient 0.5), stationary bootstrap with the
    # automatic block length. The smallest eigenvalue is known to fall short of 90% here (measured 0.82-0.89
    # over seeds, docs/inference.md): the block bootstrap underestimates its spread at this length.
    got = coverage(rho=0.5, t=800, datasets=200, seed=7)
    assert 0.85 <= got["coefficient"] <= 0.95, got
    assert 0.85 <= got["angle"] <= 0.95, got
    assert 0.80 <= got["eigenvalue"] <= 0.95, got


@pytest.mark.slow
def test_iid_rows_coverage_with_more_datasets():
    got = coverage(rho=0.0, t=400, datasets=500, seed=11)
    for name, share in got.items():
        assert 0.86 <= share <= 0.94, (name, got)
