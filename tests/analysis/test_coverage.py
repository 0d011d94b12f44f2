"""Coverage of nominal 90% bootstrap intervals by simulation (datasets of known structure).

The measured table is recorded in docs/inference.md (rerun: benchmarks/inference_checks.py coverage).
"""

import pytest

from tests.analysis.inference_sims import coverage


def test_iid_rows_intervals_cover_the_truth_85_to_95_percent():
    # simulation: 200 datasets of 2 x 400 iid Gaussian rows, 199 resamples each; the pipeline's intervals
    # and the studentised ones from the same resamples, plain and on the log scale (measured 0.90/0.86/0.89,
    # studentised 0.89/0.895/0.88, log 0.89 (eigenvalue) and 0.87 (angle))
    got = coverage(rho=0.0, t=400, datasets=200, studentized=True)
    for name, share in got.items():
        assert 0.85 <= share <= 0.95, (name, got)


@pytest.mark.slow
def test_ar1_rows_intervals_cover_the_truth():
    # simulation: 200 datasets of 2 x 800 AR(1) rows (coefficient 0.5), stationary bootstrap with the
    # automatic block length. The smallest eigenvalue's interval is the pipeline's blockwise studentised
    # one (measured here 0.875; with 3000 datasets of this design the basic interval it replaced covered
    # 0.856 and the studentised one 0.869, docs/inference.md). Measured here: coefficient 0.88, angle 0.855.
    got = coverage(rho=0.5, t=800, datasets=200, seed=7)
    assert 0.85 <= got["coefficient"] <= 0.95, got
    assert 0.85 <= got["angle"] <= 0.95, got
    assert 0.85 <= got["eigenvalue"] <= 0.95, got


@pytest.mark.slow
def test_ar1_rows_studentized_intervals_cover_the_truth_85_to_95_percent():
    # simulation: 200 datasets of 2 x 400 AR(1) rows (coefficient 0.5); blockwise studentised intervals
    # (Goetze & Kuensch 1996) from the same stationary-bootstrap resamples. Measured here 0.905/0.88/0.87
    # (the pipeline's intervals on the same resamples: 0.88/0.865/0.83)
    got = coverage(rho=0.5, t=400, datasets=200, seed=31, studentized=True)
    for name in ("eigenvalue (studentized)", "coefficient (studentized)", "angle (studentized)"):
        assert 0.85 <= got[name] <= 0.95, (name, got)


@pytest.mark.slow
def test_iid_rows_coverage_with_more_datasets():
    got = coverage(rho=0.0, t=400, datasets=500, seed=11)
    for name, share in got.items():
        assert 0.86 <= share <= 0.94, (name, got)


@pytest.mark.slow
def test_ar1_rows_pipeline_eigenvalue_intervals_pooled_over_four_cells_reach_nominal_within_monte_carlo():
    # simulation: four AR(1) 0.5 cells (T = 400 seeds 2024, 31; T = 800 seeds 7, 32; the seeds of the
    # earlier 400-dataset table in docs/inference.md), 200 datasets each, the pipeline's eigenvalue interval (blockwise studentised). Pooled over 800
    # datasets the share must be within 3 Monte Carlo standard errors of 0.90 (sqrt(0.09 / 800) = 0.0106).
    # Measured: 0.881 (0.92 / 0.905 / 0.875 / 0.825); the basic interval it replaced: 0.859.
    cells = [(400, 2024), (400, 31), (800, 7), (800, 32)]
    shares = [coverage(rho=0.5, t=t, datasets=200, seed=s)["eigenvalue"] for t, s in cells]
    pooled = sum(shares) / len(shares)
    assert 0.90 - 3 * (0.09 / 800) ** 0.5 <= pooled <= 0.95, shares
