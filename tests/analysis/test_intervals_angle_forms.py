"""The closed forms for the largest principal angle between two-relation subspaces.

Reference: LAPACK's singular value decomposition through ``numpy.linalg.svd`` (the path every other
number of relations takes), on random pairs of subspaces from nearly equal to nearly orthogonal.
"""

from __future__ import annotations

import numpy as np
import pytest

from relspan.analysis.intervals import extreme_cos_sin, largest_angle_stack


def _pairs(rng, count, n, scale):
    a = rng.standard_normal((count, 2, n))
    b = a + scale * rng.standard_normal((count, 2, n))
    return a, b


def _svd_parts(a, b):
    qa = np.linalg.qr(np.swapaxes(a, 1, 2))[0]
    qb = np.linalg.qr(np.swapaxes(b, 1, 2))[0]
    m = np.swapaxes(qa, 1, 2) @ qb
    resid = qb - qa @ m
    return m, resid


@pytest.mark.parametrize("n", [3, 6, 10])
@pytest.mark.parametrize("scale", [1e-9, 1e-3, 0.3, 10.0, 1e6])
def test_two_relations_match_the_svd_to_a_few_units_in_the_last_place(n, scale):
    rng = np.random.default_rng(int(n * 1000 + np.log10(scale) * 7 + 100))
    m, resid = _svd_parts(*_pairs(rng, 4000, n, scale))
    cos, sin = extreme_cos_sin(m, resid)
    ref_cos = np.linalg.svd(m, compute_uv=False)[:, -1]
    ref_sin = np.linalg.svd(resid, compute_uv=False)[:, 0]
    np.testing.assert_allclose(cos, ref_cos, rtol=0, atol=8e-16)
    np.testing.assert_allclose(sin, ref_sin, rtol=8e-15, atol=0)  # relative: the sine of a tiny angle too


def test_orthogonal_and_identical_subspaces_give_90_and_0_degrees():
    e = np.eye(4)
    a = np.stack([e[:2], e[:2], e[:2]])
    b = np.stack([e[2:], e[:2], e[[1, 0]] * [[3.0], [-2.0]]])
    np.testing.assert_allclose(largest_angle_stack(a, b), [90.0, 0.0, 0.0], atol=1e-12)


def test_more_relations_keep_the_svd():
    rng = np.random.default_rng(3)
    a = rng.standard_normal((50, 3, 6))
    b = a + 0.1 * rng.standard_normal((50, 3, 6))
    qa = np.linalg.qr(np.swapaxes(a, 1, 2))[0]
    qb = np.linalg.qr(np.swapaxes(b, 1, 2))[0]
    m = np.swapaxes(qa, 1, 2) @ qb
    cos, sin = extreme_cos_sin(m, qb - qa @ m)
    assert np.array_equal(cos, np.linalg.svd(m, compute_uv=False)[:, -1])
    assert np.array_equal(sin, np.linalg.svd(qb - qa @ m, compute_uv=False)[:, 0])


@pytest.mark.parametrize("scale", [1e-9, 1e-3, 1.0, 1e3])
def test_gram_schmidt_pairs_span_what_the_householder_qr_spans(scale):
    from relspan.analysis.intervals import orth_columns_stack

    rng = np.random.default_rng(5)
    b = scale * rng.standard_normal((3000, 6, 2))
    b[:10, :, 1] = b[:10, :, 0] + 1e-6 * scale * rng.standard_normal((10, 6))  # nearly dependent, still >1e-8
    q = orth_columns_stack(b)
    ref = np.linalg.qr(b)[0]
    np.testing.assert_allclose(np.swapaxes(q, 1, 2) @ q, np.broadcast_to(np.eye(2), (3000, 2, 2)), atol=2e-15)
    proj, proj_ref = q @ np.swapaxes(q, 1, 2), ref @ np.swapaxes(ref, 1, 2)
    np.testing.assert_allclose(proj[10:], proj_ref[10:], atol=4e-15)
    np.testing.assert_allclose(proj[:10], proj_ref[:10], atol=1e-9)  # the pair's own conditioning (1e6)


def test_a_dependent_pair_sends_the_stack_to_numpy_qr():
    from relspan.analysis.intervals import orth_columns_stack

    b = np.random.default_rng(6).standard_normal((4, 5, 2))
    b[2, :, 1] = 3.0 * b[2, :, 0]
    np.testing.assert_array_equal(orth_columns_stack(b), np.linalg.qr(b)[0])
