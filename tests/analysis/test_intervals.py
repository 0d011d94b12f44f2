"""Bootstrap intervals, reduced-form coefficient intervals, principal-angle stacks and the change rule
(analysis.intervals)."""

import numpy as np
import pytest

from relspan.analysis.intervals import (Interval, angle_change_test, basic_interval, bca_interval,
                                        coefficient_intervals, direct_rotation, elementary_coefficient_stack,
                                        largest_angle_stack, percentile_interval,
                                        relation_bases, stable_spread)
from relspan.analysis.resample import GranuleStats, resample_covariances
from relspan.analysis.stability import principal_angles
from relspan.errors import OptionsError
from tests.analysis.inference_sims import one_relation_cov, rows


class TestIntervalShapes:
    def test_percentile_and_basic_bounds(self):
        d = np.arange(1001.0)
        p = percentile_interval(400.0, d, level=0.9)
        assert (p.low, p.high) == pytest.approx((50.0, 950.0), abs=1e-9)
        assert p.method == "percentile" and p.resamples == 1001
        b = basic_interval(400.0, d, level=0.9)
        assert (b.low, b.high) == pytest.approx((-150.0, 750.0), abs=1e-9)
        assert set(p.to_dict()) == {"estimate", "low", "high", "level", "method", "resamples"}

    def test_bca_without_bias_or_skew_is_the_percentile_interval(self):
        d = np.linspace(-1, 1, 2001)
        jack = np.linspace(-1, 1, 50)
        a = bca_interval(0.0, d, level=0.9, jackknife=jack)
        p = percentile_interval(0.0, d, level=0.9)
        assert a.low == pytest.approx(p.low, abs=1e-3) and a.high == pytest.approx(p.high, abs=1e-3)

    def test_bad_level_is_refused(self):
        with pytest.raises(OptionsError, match="level must be in"):
            percentile_interval(0.0, [1, 2], level=90)


class TestAngles:
    def test_batched_angles_match_the_one_implementation(self):
        rng = np.random.default_rng(0)
        a = np.linalg.qr(rng.normal(size=(5, 2)))[0].T
        bs = rng.normal(size=(20, 2, 5))
        np.testing.assert_allclose(largest_angle_stack(a, bs), [principal_angles(a, b)[-1] for b in bs],
                                   rtol=1e-10, atol=1e-10)

    def test_direct_rotation_maps_one_subspace_onto_the_other(self):
        rng = np.random.default_rng(1)
        a = rng.normal(size=(2, 5))
        b = rng.normal(size=(2, 5))
        r = direct_rotation(b, a)
        np.testing.assert_allclose(r @ r.T, np.eye(5), atol=1e-12)
        assert principal_angles(a, b @ r.T)[-1] == pytest.approx(0.0, abs=1e-6)

    def test_coefficient_intervals_ignore_signs_and_rotations_within_the_span(self):
        rng = np.random.default_rng(2)
        a = np.linalg.qr(rng.normal(size=(4, 2)))[0].T
        rot = np.array([[0.0, -1.0], [1.0, 0.0]])
        got = coefficient_intervals(a, np.stack([rot @ a, -a, a]), targets=[0, 1], level=0.9)
        for iv in got.values():   # every draw is the estimate's reduced form, whatever the basis
            assert iv.low == pytest.approx(iv.estimate, abs=1e-12) and iv.high == pytest.approx(iv.estimate, abs=1e-12)


def test_elementary_coefficients_match_least_squares():
    # reference: numpy.linalg.lstsq (ordinary least squares with an intercept)
    x = rows(np.random.default_rng(3), one_relation_cov(0)[0], 200)
    c = elementary_coefficient_stack(np.cov(x.T)[None])[0]
    design = np.column_stack([np.ones(200), x[:, 1], x[:, 2]])
    beta = np.linalg.lstsq(design, x[:, 0], rcond=None)[0]
    np.testing.assert_allclose(c[0, 1:], beta[1:], rtol=1e-10)


class TestChangeRule:
    def _window(self, rng, theta, t=300):
        x = rows(rng, one_relation_cov(theta)[0], t)
        r = resample_covariances(GranuleStats.from_rows(x, ordered=False), resamples=199, rng=rng)
        w, v = np.linalg.eigh(r.estimate)
        return v[:, :1].T, relation_bases(r.eigh()[1], 1)

    def test_a_stable_relation_is_not_called_a_change_and_a_20_degree_turn_is(self):
        rng = np.random.default_rng(4)
        a, ra = self._window(rng, 0)
        b, rb = self._window(rng, 0)
        c, rc = self._window(rng, 20)
        same = angle_change_test(a, ra, b, rb, level=0.95)
        moved = angle_change_test(a, ra, c, rc, level=0.95)
        assert not same.change and same.p_value > 0.05
        assert moved.change and moved.p_value < 0.05 and moved.angle_deg > moved.threshold_deg
        assert stable_spread(a, ra) < moved.angle_deg

    def test_false_change_rate_on_stable_windows_is_near_the_level(self):
        # simulation: 60 pairs of windows with one fixed relation; at level 0.95 about 5% are called changes
        rng = np.random.default_rng(5)
        calls = 0
        for _ in range(60):
            a, ra = self._window(rng, 0, t=200)
            b, rb = self._window(rng, 0, t=200)
            calls += angle_change_test(a, ra, b, rb, level=0.95).change
        assert calls <= 8

    def test_different_dimensions_are_refused(self):
        with pytest.raises(OptionsError, match="differ in dimension"):
            angle_change_test(np.eye(3)[:1], np.eye(3)[None, :1], np.eye(3)[:2], np.eye(3)[None, :2])


def test_coefficient_intervals_use_the_estimate_targets():
    rng = np.random.default_rng(6)
    cov, a = one_relation_cov(0)
    x = rows(rng, cov, 400)
    r = resample_covariances(GranuleStats.from_rows(x, ordered=False), resamples=199, rng=rng)
    w, v = np.linalg.eigh(r.estimate)
    out = coefficient_intervals(v[:, :1].T, relation_bases(r.eigh()[1], 1), targets=[2], level=0.9)
    assert set(out) == {(0, 0), (0, 1)}
    assert isinstance(out[(0, 0)], Interval)
    assert out[(0, 0)].estimate == pytest.approx(-v[0, 0] / v[2, 0])
