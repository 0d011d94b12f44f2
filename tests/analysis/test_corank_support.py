"""Coranks as sets with resampling support (relspan.analysis.corank_support)."""

import numpy as np
import pytest

from relspan.analysis.corank_support import bounded_support, diagonal_support, equal_noise_support
from relspan.analysis.resample import GranuleStats, resample_covariances
from relspan.errors import OptionsError


def _two_relations(seed=0, t=1500):
    rng = np.random.default_rng(seed)
    f = rng.normal(size=(t, 3)) @ rng.normal(size=(3, 5))
    f /= f.std(axis=0)
    return f + np.sqrt(0.07) * rng.normal(size=(t, 5))


def test_equal_noise_support_concentrates_on_the_true_corank():
    x = _two_relations()
    r = resample_covariances(GranuleStats.from_rows(x, ordered=False), resamples=199,
                             rng=np.random.default_rng(1))
    s = equal_noise_support(np.linalg.eigvalsh(r.estimate), r.eigh()[0], nobs=x.shape[0])
    assert s.estimate == 2
    assert s.support(2) > 0.8
    assert sum(s.chosen_share) == pytest.approx(1.0)
    assert s.as_text().startswith("2: in ")
    assert s.to_dict()["assumption"] == "equal"


def test_bounded_support_counts_admissible_coranks_by_weyl():
    est = np.array([0.01, 0.04, 0.5])
    lam = np.array([[0.01, 0.04, 0.5], [0.02, 0.06, 0.4], [0.01, 0.03, 0.6], [0.06, 0.07, 0.5]])
    s = bounded_support(est, lam, eps=0.05)
    assert s.estimate == 2
    assert s.chosen_share == (0.25, 0.25, 0.5, 0.0)
    assert s.admissible_share == (1.0, 0.75, 0.5, 0.0)
    assert "not that they are shown to hold" in s.rule
    with pytest.raises(OptionsError, match="eps must be positive"):
        bounded_support(est, lam, eps=0)


def test_diagonal_support_runs_the_callable_on_a_reduced_number_with_warm_starts():
    covs = np.stack([np.eye(3) * (1 + i) for i in range(10)])
    seen = []

    def analyse(cov, warm):
        seen.append(warm)
        return (None if cov[0, 0] > 4 else 1), cov[0, 0]

    s = diagonal_support(1, covs, analyse, resamples=6)
    assert s.resamples == 6 and seen[0] is None and seen[1] == 1.0
    assert s.support(1) == pytest.approx(4 / 6) and s.undetermined_share == pytest.approx(2 / 6)
    assert "undetermined: 33%" in s.as_text()
