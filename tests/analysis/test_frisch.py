"""Tests of relspan.analysis.frisch (diagonal noise: the Frisch scheme), one class per module's function.

Every check against the outside world names its source beside it. Known
structures are built here from seeded generators and must come back.
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
from hypothesis import assume, given, settings
from hypothesis import strategies as st

from relspan.analysis.frisch import (
    FrischResult,
    frisch_analysis,
    frisch_identification,
    frisch_max_corank,
    frisch_q1,
    ledermann_corank,
    minimum_trace,
    one_orthant,
    solution_spread,
    triad,
)
from relspan.analysis.frisch.spread import _principal_angles_deg
from relspan.errors import DataError, OptionsError


# --------------------------------------------------------------------------
# helpers
# --------------------------------------------------------------------------

def factor_cov(n: int, q: int, seed: int, noise=(0.2, 1.0)):
    """L L^T + D with L (n x (n-q)): corank q exactly; returns (S, d, L)."""
    rng = np.random.default_rng(seed)
    lo = rng.standard_normal((n, n - q))
    d = rng.uniform(*noise, n)
    return lo @ lo.T + np.diag(d), d, lo


def sample_cov(n: int, rows: int, seed: int) -> np.ndarray:
    rng = np.random.default_rng(seed)
    x = rng.standard_normal((rows, n)) @ rng.uniform(0.5, 2.0, (n, n))
    return np.cov(x.T)


def one_orthant_cov(n: int, seed: int):
    """S whose inverse is elementwise positive after a random signing."""
    rng = np.random.default_rng(seed)
    b = rng.uniform(0.1, 1.0, (n, n))
    p_pos = b @ b.T + np.diag(rng.uniform(0.5, 2.0, n))
    sig = rng.choice([-1.0, 1.0], n)
    sig[0] = 1.0
    p = sig[:, None] * p_pos * sig[None, :]
    return np.linalg.inv(p), sig


def non_orthant_cov(n: int = 3) -> np.ndarray:
    """The first seeded sample covariance whose elementary regressions span orthants."""
    for seed in range(100):
        s = sample_cov(n, 10, seed)
        p = np.linalg.inv(s)
        if p[0, 1] * p[1, 2] * p[2, 0] < -1e-3 * np.prod(np.diag(p)):
            return s
    raise AssertionError("no seed gave a covariance outside one orthant")


def decomposition_from_relation(s: np.ndarray, a: np.ndarray):
    """The unique D with (S - D) a = 0 (d_j = (S a)_j / a_j) and min eig of S - D."""
    d = (s @ a) / a
    return d, float(np.linalg.eigvalsh(s - np.diag(d))[0])


def orthonormal_cols(a_rows: np.ndarray) -> np.ndarray:
    q, _ = np.linalg.qr(np.asarray(a_rows).T)
    return q


# --------------------------------------------------------------------------
# one orthant
# --------------------------------------------------------------------------

class TestOneOrthant:
    def test_signature_makes_precision_elementwise_positive(self):
        s, sig = one_orthant_cov(5, seed=1)
        res = one_orthant(s)
        assert res.holds and not res.failing
        sg = np.array(res.signature, dtype=float)
        p = np.linalg.inv(s)
        assert np.all(sg[:, None] * p * sg[None, :] > 0)
        assert np.array_equal(sg, sig)

    def test_failing_triple_is_named_with_negative_product(self):
        s = non_orthant_cov()
        res = one_orthant(s, names=["a", "b", "c"])
        assert not res.holds
        assert res.failing[0].variables == ("a", "b", "c")
        p = np.linalg.inv(s)
        dp = np.sqrt(np.diag(p))
        expected = p[0, 1] * p[1, 2] * p[2, 0] / np.prod(dp) ** 2
        assert res.failing[0].product == pytest.approx(expected)
        assert "(a, b, c)" in res.reason

    def test_singular_covariance_is_reported_not_raised(self):
        rng = np.random.default_rng(0)
        x = rng.standard_normal((50, 2))
        x = np.column_stack([x, x[:, 0] + x[:, 1]])
        res = one_orthant(np.cov(x.T))
        assert res.singular and not res.holds


# --------------------------------------------------------------------------
# q = 1: the simplex of elementary regressions
# --------------------------------------------------------------------------

class TestSingleRelationSet:
    @settings(max_examples=200, deadline=None)
    @given(sxx=st.floats(0.1, 10.0), syy=st.floats(0.1, 10.0),
           rho=st.floats(0.05, 0.95), negative=st.booleans(), t=st.floats(-0.5, 1.5))
    def test_two_variable_slopes_between_the_two_regressions_and_no_others(
            self, sxx, syy, rho, negative, t):
        # textbook bound (Gini 1921; Frisch 1934): the slope of y on x admits
        # non-negative noise variances iff it lies between b_yx and 1/b_xy.
        sxy = (-1.0 if negative else 1.0) * rho * math.sqrt(sxx * syy)
        s = np.array([[sxx, sxy], [sxy, syy]])
        b_yx, inv_b_xy = sxy / sxx, syy / sxy
        assume(min(abs(t), abs(t - 1.0)) > 1e-3)
        beta = b_yx + t * (inv_b_xy - b_yx)
        d, lam_min = decomposition_from_relation(s, np.array([-beta, 1.0]))
        valid = bool(np.all(d >= 0) and lam_min >= -1e-12 * np.trace(s))
        assert valid == (0.0 <= t <= 1.0)
        iv = frisch_q1(s, names=["x", "y"], ref="y").interval("x", "y")
        lo, hi = sorted([b_yx, inv_b_xy])
        # relation y + a_x x = 0 has slope -a_x
        assert -iv.high == pytest.approx(lo, rel=1e-9)
        assert -iv.low == pytest.approx(hi, rel=1e-9)

    @pytest.mark.parametrize("seed", range(6))
    def test_frisch_simplex_contains_every_convex_combination_of_elementary_regressions(self, seed):
        # theorem (Reiersøl 1941; Klepper & Leamer 1984): in one orthant, every
        # convex combination of elementary regressions is a valid decomposition.
        n = 3 + seed % 4
        s, _ = one_orthant_cov(n, seed)
        k = seed % n
        res = frisch_q1(s, ref=k)
        assert res.status == "bounded" and res.bounded
        v = res.vertices(k)
        rng = np.random.default_rng(100 + seed)
        for lam in rng.dirichlet(np.ones(n), size=40):
            b = lam @ v
            d, lam_min = decomposition_from_relation(s, b)
            assert np.all(d >= -1e-10 * np.max(np.diag(s)))
            assert lam_min >= -1e-9 * np.max(np.diag(s))
            for i in range(n):
                if i != k:
                    iv = res.interval(res.names[i], res.names[k])
                    assert iv.low - 1e-12 <= b[i] <= iv.high + 1e-12

    @pytest.mark.parametrize("seed", range(6))
    def test_relations_beyond_a_vertex_of_the_simplex_admit_no_decomposition(self, seed):
        # theorem (Klepper & Leamer 1984): the set is exactly the hull.
        n = 3 + seed % 4
        s, _ = one_orthant_cov(n, seed)
        k = 0
        v = frisch_q1(s, ref=k).vertices(k)
        centre = v.mean(axis=0)
        for j in range(n):
            b = v[j] + 0.2 * (v[j] - centre)
            d, lam_min = decomposition_from_relation(s, b)
            assert np.any(d < 0) or lam_min < -1e-9

    def test_intervals_are_vertex_minima_and_maxima_for_every_normalisation(self):
        s, _ = one_orthant_cov(4, seed=7)
        res = frisch_q1(s, names=list("abcd"))
        assert len(res.intervals) == 4 * 3
        for k in range(4):
            v = res.vertices(k)
            for i in range(4):
                if i != k:
                    iv = res.interval("abcd"[i], "abcd"[k])
                    assert (iv.low, iv.high) == (v[:, i].min(), v[:, i].max())

    def test_elementary_regressions_are_rows_of_the_inverse_with_unit_diagonal(self):
        # handbook formula: OLS of x_j on the others has coefficients -P_jk / P_jj.
        s = sample_cov(4, 40, seed=3)
        res = frisch_q1(s)
        p = np.linalg.inv(s)
        np.testing.assert_allclose(res.elementary, p / np.diag(p)[:, None], rtol=1e-12)
        np.testing.assert_allclose(np.diag(res.elementary), 1.0)

    def test_outside_one_orthant_the_set_is_unbounded_and_reported_so(self):
        s = non_orthant_cov()
        res = frisch_q1(s, names=["a", "b", "c"], ref="c")
        assert res.status == "unbounded" and not res.bounded
        assert all(iv.low == -math.inf and iv.high == math.inf for iv in res.intervals)
        assert "(a, b, c)" in res.reason
        # JSON carries no infinity: ends become null beside bounded: false
        d = res.to_dict()
        assert d["intervals"][0]["low"] is None and d["intervals"][0]["bounded"] is False

    def test_unbounded_set_really_holds_relations_far_beyond_the_elementary_ones(self):
        # Boundary points D = t* U (S - D PSD and singular) are single relations;
        # sweeping U shows coefficients far outside the elementary regressions.
        s = non_orthant_cov()
        res = frisch_q1(s, ref=2)
        vmax = np.abs(res.vertices(2)[:, :2]).max()
        li = np.linalg.inv(np.linalg.cholesky(s))
        rng = np.random.default_rng(0)
        best = 0.0
        for u in rng.uniform(0, 1, (3000, 3)) ** 3:       # weight near the faces d_j = 0
            t = 1.0 / np.linalg.eigvalsh(li @ np.diag(u) @ li.T)[-1]
            _, vec = np.linalg.eigh(s - t * np.diag(u))
            best = max(best, float(np.abs(vec[:2, 0] / vec[2, 0]).max()))
        assert best > 50 * vmax

    def test_single_exact_relation_is_a_point(self):
        rng = np.random.default_rng(0)
        x = rng.standard_normal((60, 2))
        x = np.column_stack([x, 2.0 * x[:, 0] - x[:, 1]])
        res = frisch_q1(np.cov(x.T), ref=2)
        assert res.status == "exact"
        iv0, iv1 = res.intervals
        # relation 2 x1 - x2 - x3 = 0 normalised on x3: (-2, 1, 1)
        assert iv0.low == pytest.approx(-2.0) and iv0.high == pytest.approx(-2.0)
        assert iv1.low == pytest.approx(1.0)


# --------------------------------------------------------------------------
# three variables: the triad
# --------------------------------------------------------------------------

class TestTriad:
    def test_spearman_formula_recovers_a_constructed_one_factor_covariance(self):
        # published formula (Spearman 1904): loading_i^2 = s_ij s_ik / s_jk.
        lo = np.array([0.9, -0.7, 0.5])
        psi = np.array([0.3, 0.4, 0.5])
        res = triad(np.outer(lo, lo) + np.diag(psi))
        assert res.feasible and res.sign_condition and not res.heywood
        np.testing.assert_allclose(res.loadings, lo, rtol=1e-12)
        np.testing.assert_allclose(res.noise_variances, psi, rtol=1e-12)
        np.testing.assert_allclose(res.relations @ lo, 0.0, atol=1e-12)

    def test_triad_agrees_with_scikit_learn_factor_analysis(self):
        # reference library: scikit-learn FactorAnalysis(n_components=1); with
        # three variables the one-factor ML fit is exact, so both must agree.
        from sklearn.decomposition import FactorAnalysis

        rng = np.random.default_rng(0)
        lo, psi = np.array([0.9, 0.7, 0.5]), np.array([0.3, 0.4, 0.5])
        x = rng.standard_normal((20000, 1)) * lo + rng.standard_normal((20000, 3)) * np.sqrt(psi)
        fa = FactorAnalysis(n_components=1, tol=1e-12, max_iter=100000,
                            svd_method="lapack").fit(x)
        res = triad(np.cov(x.T, ddof=0))          # sklearn divides by n_samples
        np.testing.assert_allclose(np.abs(res.loadings), np.abs(fa.components_[0]), atol=1e-5)
        np.testing.assert_allclose(res.noise_variances, fa.noise_variance_, atol=1e-5)

    def test_heywood_case_names_the_variable_needing_negative_noise(self):
        # s12 s13 / s23 = 0.8 * 0.8 / 0.3 > s11 = 1: variable a is a Heywood case.
        s = np.array([[1.0, 0.8, 0.8], [0.8, 1.0, 0.3], [0.8, 0.3, 1.0]])
        res = triad(s, names=["a", "b", "c"])
        assert res.sign_condition and not res.feasible
        assert res.heywood == ("a",)
        assert res.noise_variances[0] < 0
        assert "Heywood" in res.reason and "a" in res.reason

    def test_negative_covariance_product_rules_out_one_factor(self):
        s = np.array([[1.0, 0.5, 0.4], [0.5, 1.0, -0.3], [0.4, -0.3, 1.0]])
        res = triad(s)
        assert not res.sign_condition and not res.feasible and res.loadings is None

    @pytest.mark.parametrize("seed", range(40))
    def test_exactly_one_of_one_orthant_and_rank_one_holds(self, seed):
        # theorem for n = 3 (Frisch 1934; Klepper & Leamer 1984), generic S.
        s = sample_cov(3, 8, seed)
        assert one_orthant(s).holds != triad(s).feasible

    def test_triad_needs_three_variables(self):
        with pytest.raises(OptionsError, match="exactly 3 variables") as e:
            triad(np.eye(4))
        assert e.value.key == "cov"


# --------------------------------------------------------------------------
# minimum trace
# --------------------------------------------------------------------------

class TestMinimumTrace:
    @pytest.mark.filterwarnings("ignore:Solution may be inaccurate")
    @pytest.mark.parametrize("n", range(3, 9))
    def test_minimum_trace_matches_cvxpy_optimum_and_is_feasible(self, n):
        # reference library: cvxpy SDP (CLARABEL), max sum d s.t. S - diag(d) PSD, d >= 0;
        # tolerances tightened (CLARABEL's defaults leave ~1e-8 absolute gaps,
        # too loose for optima near 0.005).
        cp = pytest.importorskip("cvxpy")
        for seed in range(3):
            s = sample_cov(n, n + 5, seed=10 * n + seed)
            ours = minimum_trace(s)
            dv = cp.Variable(n)
            prob = cp.Problem(cp.Maximize(cp.sum(dv)), [s - cp.diag(dv) >> 0, dv >= 0])
            prob.solve(solver="CLARABEL", tol_gap_abs=1e-10, tol_gap_rel=1e-10, tol_feas=1e-10)
            assert ours.value == pytest.approx(prob.value, rel=1e-5)
            assert np.all(ours.noise_variances >= 0)
            assert ours.min_eigenvalue >= -1e-10 * np.max(np.diag(s))

    @pytest.mark.filterwarnings("ignore:Solution may be inaccurate")
    def test_weighted_trace_matches_cvxpy(self):
        # reference library: cvxpy SDP (CLARABEL) for weights of both signs.
        cp = pytest.importorskip("cvxpy")
        s = sample_cov(5, 12, seed=2)
        w = np.array([1.0, 0.2, -0.5, 2.0, 0.0])
        ours = minimum_trace(s, weights=w)
        dv = cp.Variable(5)
        prob = cp.Problem(cp.Maximize(w @ dv), [s - cp.diag(dv) >> 0, dv >= 0])
        prob.solve(solver="CLARABEL", tol_gap_abs=1e-10, tol_gap_rel=1e-10, tol_feas=1e-10)
        assert ours.value == pytest.approx(prob.value, rel=1e-5)

    def test_noise_never_exceeds_the_elementary_bound(self):
        s = sample_cov(6, 20, seed=5)
        d = minimum_trace(s).noise_variances
        assert np.all(d <= 1.0 / np.diag(np.linalg.inv(s)) * (1 + 1e-9))


# --------------------------------------------------------------------------
# maximal corank
# --------------------------------------------------------------------------

class TestMaxCorank:
    @pytest.mark.parametrize("n,q", [(3, 2), (5, 3), (6, 3), (8, 5), (8, 4), (4, 2)])
    def test_factor_structure_is_certified_at_its_true_corank(self, n, q):
        s, d, lo = factor_cov(n, q, seed=n * 10 + q)
        res = frisch_max_corank(s, eps=1e-6)
        assert res.max_certified >= q
        c = res.certificate(q)
        assert c.status == "certified" and c.e_norm <= 1e-6
        assert all(v >= 0 for v in c.noise_variances)

    @pytest.mark.parametrize("n,q", [(5, 3), (6, 3), (8, 5)])
    def test_identified_factor_structure_recovers_noise_and_relations(self, n, q):
        s, d, lo = factor_cov(n, q, seed=n * 10 + q)
        assert frisch_identification(n, q).count_met
        c = frisch_max_corank(s, eps=1e-6).certificate(q)
        np.testing.assert_allclose(c.noise_variances, d, rtol=1e-5, atol=1e-7)
        true_rel = np.linalg.svd(lo.T)[2][n - q:]           # null space of L^T
        ang = _principal_angles_deg(orthonormal_cols(true_rel), c.relations.T)
        assert ang.max() < 1e-3

    @pytest.mark.parametrize("n", [4, 5, 6, 7, 8])
    def test_random_covariances_are_not_certified_above_ledermann_bound(self, n):
        # Ledermann (1937); Shapiro (1982): exact coranks above n - ceil(phi(n))
        # have probability zero for sample covariances.
        for seed in range(3):
            res = frisch_max_corank(sample_cov(n, 3 * n, seed), eps=1e-8)
            assert res.max_certified <= ledermann_corank(n)

    def test_ledermann_corank_values(self):
        # phi(n) = (2n + 1 - sqrt(8n + 1)) / 2 (Ledermann 1937), computed by hand:
        # n=3: phi=1 -> 2; n=4: 1.63 -> 2; n=6: 3 -> 3; n=8: 4.47 -> 3.
        assert [ledermann_corank(n) for n in (3, 4, 6, 8)] == [2, 2, 3, 3]

    def test_impossibility_certificate_fires_on_well_conditioned_covariance(self):
        rng = np.random.default_rng(11)
        x = rng.standard_normal((400, 6))
        s = np.cov(x.T)
        eps = 1e-6
        res = frisch_max_corank(s, eps=eps)
        c = res.certificate(5)
        assert c.status == "ruled out"
        # recompute the certificate numbers independently
        sd = np.sqrt(np.diag(s))
        r = s / np.outer(sd, sd)
        rb = 1.0 / np.diag(np.linalg.inv(r + eps * np.eye(6)))
        lam_q = np.linalg.eigvalsh(r - np.diag(rb))[4]
        assert c.bound_eigenvalue == pytest.approx(lam_q, rel=1e-10)
        assert lam_q > eps
        assert res.min_ruled_out is not None and res.min_ruled_out <= 5

    @pytest.mark.parametrize("seed", range(5))
    def test_true_corank_is_never_ruled_out(self, seed):
        n, q = 6, 2 + seed % 3
        s, _, _ = factor_cov(n, q, seed)
        res = frisch_max_corank(s, eps=1e-6, starts=4, seed=seed)
        assert all(c.status != "ruled out" for c in res.certificates if c.q <= q)

    def test_certificates_hold_when_rechecked(self):
        s, _, _ = factor_cov(6, 3, seed=2)
        res = frisch_max_corank(s, eps=1e-6)
        sd = np.sqrt(np.diag(s))
        for c in res.certificates:
            if c.status == "certified":
                d_r = np.array(c.noise_variances) / sd ** 2
                lam = np.linalg.eigvalsh(s / np.outer(sd, sd) - np.diag(d_r))
                assert np.all(d_r >= 0)
                assert max(abs(lam[c.q - 1]), -min(lam[0], 0)) <= 1e-6

    def test_statuses_are_invariant_under_rescaling_variables(self):
        # the Frisch scheme is equivariant under diagonal scaling (common practice)
        s, _, _ = factor_cov(5, 3, seed=3)
        c = np.array([1.0, 10.0, 0.1, 3.0, 1e3])
        a = frisch_max_corank(s, eps=1e-6)
        b = frisch_max_corank(c[:, None] * s * c[None, :], eps=1e-6)
        assert [x.status for x in a.certificates] == [x.status for x in b.certificates]
        ca, cb = a.certificate(3), b.certificate(3)
        np.testing.assert_allclose(cb.noise_variances, np.array(ca.noise_variances) * c ** 2,
                                   rtol=1e-6)
        rel_b_back = orthonormal_cols(cb.relations * c[None, :])
        assert _principal_angles_deg(ca.relations.T, rel_b_back).max() < 1e-4

    def test_same_seed_gives_identical_results(self):
        s = sample_cov(6, 18, seed=9)
        a = frisch_max_corank(s, eps=1e-6, seed=3).to_dict()
        b = frisch_max_corank(s, eps=1e-6, seed=3).to_dict()
        assert json.dumps(a, sort_keys=True) == json.dumps(b, sort_keys=True)

    def test_singular_covariance_certifies_its_exact_relation(self):
        rng = np.random.default_rng(0)
        x = rng.standard_normal((80, 3))
        x = np.column_stack([x, x @ np.array([1.0, -1.0, 0.5])])
        res = frisch_max_corank(np.cov(x.T), eps=1e-6)
        assert res.certificate(1).status == "certified"


# --------------------------------------------------------------------------
# identification and the spread of a family
# --------------------------------------------------------------------------

class TestIdentification:
    @pytest.mark.parametrize("n,q,met", [(3, 2, True), (4, 2, False), (4, 3, True),
                                         (2, 1, False), (6, 3, True), (8, 3, False)])
    def test_parameter_count(self, n, q, met):
        # count q(q+1) >= 2n (Ledermann 1937 style count; common practice)
        res = frisch_identification(n, q)
        assert res.count_met is met
        assert res.parameters == q * (q + 1) and res.required == 2 * n

    def test_corank_outside_range_is_rejected(self):
        with pytest.raises(OptionsError, match="1..n-1"):
            frisch_identification(4, 4)


class TestSolutionSpread:
    def test_four_variables_two_relations_form_a_continuum(self):
        s, _, _ = factor_cov(4, 2, seed=42)
        res = solution_spread(s, 2, 1e-6)
        assert not res.identification.count_met
        assert res.distinct > 1
        assert res.max_angle_deg > 0.5
        # every member is a corank-2 solution (rechecked independently)
        sd = np.sqrt(np.diag(s))
        r = s / np.outer(sd, sd)
        for d in res.member_noise:
            lam = np.linalg.eigvalsh(r - np.diag(d / sd ** 2))
            assert np.all(d >= 0) and lam[1] <= 1e-6 and lam[0] >= -1e-9
        assert res.representative.shape == (2, 4)
        assert len(res.angles_to_representative_deg) == res.members
        assert "not pinned down" in res.summary

    def test_spread_matches_an_independent_trace_of_the_family(self):
        # Independent construction: for n = 4, q = 2 the family is a curve. Fix
        # d_1 on a grid; each 3x3 minor with rows (1, j, k), columns (1, j, l)
        # vanishes at rank 2 and is linear in d_j, giving d_2, d_3, d_4; keep the
        # PSD, non-negative points. Our sampled spread must not exceed that
        # curve's spread and should cover most of it.
        s, _, _ = factor_cov(4, 2, seed=42)
        sd = np.sqrt(np.diag(s))
        r = s / np.outer(sd, sd)
        bound = 1.0 / np.diag(np.linalg.inv(r))
        bases = []
        for d1 in np.linspace(0.0, bound[0], 2001):
            d = [d1]
            for j in (1, 2, 3):
                k, m = [x for x in (1, 2, 3) if x != j]
                rows, cols = [0, j, k], [0, j, m]

                def minor(dj, j=j, rows=rows, cols=cols, d1=d1):
                    mat = r.copy()
                    mat[0, 0] -= d1
                    mat[j, j] -= dj
                    return np.linalg.det(mat[np.ix_(rows, cols)])

                a0 = minor(0.0)
                d.append(-a0 / (minor(1.0) - a0))
            d = np.array(d)
            lam, vec = np.linalg.eigh(r - np.diag(d))
            if np.all(d >= 0) and lam[0] >= -1e-9 and lam[1] <= 1e-7:
                bases.append(np.linalg.qr(vec[:, :2] / sd[:, None])[0])
        assert len(bases) > 100
        traced = max(_principal_angles_deg(bases[0], b)[-1] for b in bases)
        traced = max(traced, max(_principal_angles_deg(bases[-1], b)[-1] for b in bases))
        ours = solution_spread(s, 2, 1e-6).max_angle_deg
        assert ours <= traced + 0.05
        assert ours >= 0.8 * traced

    def test_identified_case_has_no_spread(self):
        s, _, _ = factor_cov(5, 3, seed=1)
        res = solution_spread(s, 3, 1e-6)
        assert res.distinct == 1
        assert res.max_angle_deg < 1e-3

    def test_principal_angles_are_zero_for_equal_subspaces_and_exact_for_small_ones(self):
        # small-angle accuracy: atan2 of sines and cosines (Björck & Golub 1973)
        rng = np.random.default_rng(0)
        qa = np.linalg.qr(rng.standard_normal((5, 2)))[0]
        assert np.all(_principal_angles_deg(qa, qa) < 1e-12)
        theta = 1e-9
        qb = qa.copy()
        perp = np.linalg.qr(np.column_stack([qa, rng.standard_normal(5)]))[0][:, 2]
        qb[:, 0] = math.cos(theta) * qa[:, 0] + math.sin(theta) * perp
        ang = _principal_angles_deg(qa, qb)
        assert ang[-1] == pytest.approx(math.degrees(theta), rel=1e-5)


# --------------------------------------------------------------------------
# the whole analysis
# --------------------------------------------------------------------------

class TestFrischAnalysis:
    def test_three_variables_include_the_triad_and_no_spread(self):
        s, _, _ = factor_cov(3, 2, seed=5)
        res = frisch_analysis(s, names=["a", "b", "c"], eps=1e-6)
        assert isinstance(res, FrischResult)
        assert res.triad is not None and res.triad.feasible
        assert res.corank.max_certified == 2 and res.spread is None
        assert res.identification.count_met

    def test_continuum_is_reported_with_its_spread(self):
        s, _, _ = factor_cov(4, 2, seed=42)
        res = frisch_analysis(s, eps=1e-6)
        assert res.corank.max_certified == 2
        assert res.spread is not None and res.spread.max_angle_deg > 0.5
        assert "degrees apart" in res.summary

    def test_result_is_json_ready_and_tabular(self):
        res = frisch_analysis(sample_cov(4, 15, seed=1), eps=1e-4, starts=3)
        text = json.dumps(res.to_dict(), allow_nan=False, sort_keys=True)
        assert '"corank"' in text
        frame = res.to_frame()
        assert list(frame["q"]) == [1, 2, 3]
        assert set(frame["status"]) <= {"certified", "ruled out", "undetermined"}
        assert res.q1.to_frame().shape[0] == 12

    def test_summary_warns_when_count_is_within_ledermann_bound(self):
        res = frisch_analysis(sample_cov(6, 18, seed=2), eps=1e-6)
        assert res.corank.max_certified <= res.corank.ledermann
        assert "sampling noise alone" in res.summary


# --------------------------------------------------------------------------
# bad input
# --------------------------------------------------------------------------

class TestBadInput:
    # The rule (relspan.errors): a malformed argument raises OptionsError naming the
    # function's own parameter; a constant variable (a property of the data) raises DataError.
    def test_non_square_matrix(self):
        with pytest.raises(OptionsError, match=r"cov must be a square \(n, n\) matrix; got shape \(2, 3\)") as e:
            frisch_analysis(np.ones((2, 3)), eps=1e-3)
        assert e.value.fix

    def test_missing_value(self):
        s = np.eye(3)
        s[1, 2] = s[2, 1] = np.nan
        with pytest.raises(OptionsError, match=r"NaN or infinite entries \(first at \(2, 3\)"):
            frisch_max_corank(s, eps=1e-3)

    def test_asymmetric_matrix(self):
        s = np.array([[1.0, 0.3], [0.4, 1.0]])
        with pytest.raises(OptionsError, match="not symmetric"):
            frisch_q1(s)

    def test_constant_variable(self):
        with pytest.raises(DataError, match="variable 2 has variance 0"):
            one_orthant(np.diag([1.0, 0.0, 2.0]))

    def test_indefinite_matrix(self):
        s = np.array([[1.0, 0.9, 0.9], [0.9, 1.0, -0.9], [0.9, -0.9, 1.0]])
        with pytest.raises(OptionsError, match="not positive semidefinite"):
            frisch_analysis(s, eps=1e-3)

    @pytest.mark.parametrize("eps", [0.0, -1.0, float("inf"), float("nan"), "small", True])
    def test_bad_tolerance(self, eps):
        with pytest.raises(OptionsError, match=r"eps .* must be a finite number > 0") as e:
            frisch_max_corank(np.eye(3), eps=eps)
        assert e.value.key == "eps"

    def test_tolerance_above_one_is_a_valid_tolerance(self):
        # an absolute tolerance converted to the correlation scale can exceed 1
        assert frisch_max_corank(np.eye(3), eps=1.5).max_certified == 2

    def test_impossibility_tolerance_below_existence_tolerance_is_refused(self):
        with pytest.raises(OptionsError, match="eps_impossible .* must be at least eps") as e:
            frisch_max_corank(np.eye(3), eps=0.1, eps_impossible=0.05)
        assert e.value.key == "eps_impossible"

    def test_bad_starts(self):
        with pytest.raises(OptionsError, match="starts must be a whole number >= 1") as e:
            frisch_max_corank(np.eye(3), eps=1e-3, starts=0)
        assert e.value.key == "starts"

    def test_bad_names(self):
        with pytest.raises(OptionsError, match="names has 2 entries but cov has 3 variables"):
            frisch_q1(np.eye(3), names=["a", "b"])
        with pytest.raises(OptionsError, match="repeated: a"):
            frisch_q1(np.eye(3), names=["a", "a", "b"])

    def test_bad_reference_variable(self):
        with pytest.raises(OptionsError, match=r"ref 'z' is not one of the variables") as e:
            frisch_q1(np.eye(3) + 0.1, ref="z")
        assert e.value.key == "ref"
