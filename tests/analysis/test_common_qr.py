"""Small QRs through LAPACK directly: ``orthonormal_columns`` (the Q of NumPy's reduced QR) and
``pivot_columns`` (SciPy's pivots).

Reference: ``numpy.linalg.qr`` (LAPACK dgeqrf + dorgqr). NumPy and SciPy may link different OpenBLAS
builds, so the two are compared within a stated precision (1e-14), not bit for bit.
"""

from __future__ import annotations

import numpy as np
import pytest

from relspan.analysis._common import orthonormal_columns, orthonormal_rows


@pytest.mark.parametrize("shape", [(3, 1), (6, 2), (10, 4), (4, 4), (30, 7)])
def test_matches_numpy_qr(shape):
    rng = np.random.default_rng(shape[0] * 31 + shape[1])
    for scale in (1e-8, 1.0, 1e8):
        a = scale * rng.standard_normal(shape)
        q = orthonormal_columns(a)
        ref = np.linalg.qr(a)[0]
        assert q.shape == ref.shape
        np.testing.assert_allclose(q, ref, rtol=0, atol=1e-14)
        np.testing.assert_allclose(q.T @ q, np.eye(shape[1]), rtol=0, atol=1e-14)


def test_other_shapes_go_to_numpy():
    wide = np.arange(6.0).reshape(2, 3)
    np.testing.assert_array_equal(orthonormal_columns(wide), np.linalg.qr(wide)[0])
    assert orthonormal_columns(np.zeros((4, 0))).shape == (4, 0)
    stack = np.random.default_rng(0).standard_normal((5, 6, 2))
    np.testing.assert_array_equal(orthonormal_columns(stack), np.linalg.qr(stack)[0])


def test_orthonormal_rows_span_the_basis_with_fixed_signs():
    b = np.array([[1.0, -3.0, 0.5, 0.0], [0.0, 1.0, 1.0, -2.0]])
    rows = orthonormal_rows(b)
    np.testing.assert_allclose(rows @ rows.T, np.eye(2), atol=1e-15)
    proj = rows.T @ rows
    np.testing.assert_allclose(b @ proj, b, atol=1e-14)  # the same row space
    assert all(r[np.argmax(np.abs(r))] > 0 for r in rows)


def test_pivot_columns_are_scipys_qr_pivots():
    # reference: scipy.linalg.qr(..., pivoting=True) (reference library), on random bases and on
    # bases with tied or zero columns, where the pivot order is decided by ties
    import scipy.linalg as sla

    from relspan.analysis._common import pivot_columns

    rng = np.random.default_rng(17)
    for t in range(2000):
        q = int(rng.integers(1, 6))
        n = int(rng.integers(q + 1, 12))
        b = rng.standard_normal((q, n))
        if t % 4 == 1:
            b[:, rng.integers(0, n)] = b[:, rng.integers(0, n)]
        elif t % 4 == 2:
            b = np.round(b)
        elif t % 4 == 3:
            b[:, :2] = 0.0
        want = tuple(int(p) for p in sla.qr(b, mode="economic", pivoting=True)[2][:q])
        assert pivot_columns(b) == want
    with pytest.raises(ValueError):
        pivot_columns(np.array([[1.0, np.nan, 2.0]]))   # non-finite input: scipy's error, as before
