"""Least squares with tall-skinny matrices (n data rows >> p parameters) off numpy's threaded BLAS.

numpy's OpenBLAS runs products and least squares of a 20 000 x 2 Jacobian on worker threads that keep
spinning after the call and take the core the fit's C level evaluator needs next (measured on the
20 000-level benchmark fit, tests/benchmarks/bench_large_fit.py, 2 cores). So the n-row work is done
here without BLAS: the QR in C on one thread (csrc/tall_qr.c, GSL), products as einsum loops; only
p x p matrices (R) reach numpy.linalg, whose BLAS stays on one thread at such sizes.
Results equal numpy's (lstsq, inv of the normal matrix) to rounding.
"""
import numpy as np

from . import _core

__all__ = ["qr_r", "lstsq", "lstsq_and_inverse", "normal_inverse", "matvec", "sumsq"]


def qr_r(A, b=None):
    """(R, qtb, rest) of A = Q R (p x p upper triangular R; with b: qtb = (Q^T b)[:p] and rest =
    |(Q^T b)[p:]|^2, else None). A: n x p with n >= p >= 1."""
    return _core.tall_qr(np.asarray(A, dtype=float), None if b is None else np.asarray(b, dtype=float))


def _solve_r(R, qtb, n):
    """The minimum-norm least-squares solution from R and (Q^T b)[:p], singular values below
    eps * max(n, p) * the largest dropped, as numpy.linalg.lstsq(A, b, rcond=None)."""
    U, s, Vt = np.linalg.svd(R)
    cutoff = np.finfo(float).eps * max(n, R.shape[0]) * (s[0] if len(s) else 0.0)
    inv_s = np.zeros_like(s)
    inv_s[s > cutoff] = 1.0 / s[s > cutoff]
    return Vt.T @ (inv_s * (U.T @ qtb))


def lstsq(A, b):
    """numpy.linalg.lstsq(A, b, rcond=None)[0] for a tall A (n x p, n >= p)."""
    A = np.asarray(A, dtype=float)
    if A.shape[1] == 0:
        return np.zeros(0)
    R, qtb, _ = qr_r(A, b)
    return _solve_r(R, qtb, A.shape[0])


def lstsq_and_inverse(A, b):
    """(numpy.linalg.lstsq(A, b, rcond=None)[0], inv(A^T A)) for a tall A (n x p, n >= p >= 1) from one QR."""
    R, qtb, _ = qr_r(A, b)
    return _solve_r(R, qtb, len(b)), normal_inverse(R)


def normal_inverse(R):
    """inv(A^T A) from the R of A = Q R (pinv when the normal matrix is exactly singular), as
    numpy.linalg.inv(A.T @ A) with a pinv fallback."""
    N = R.T @ R
    try:
        return np.linalg.inv(N)
    except np.linalg.LinAlgError:
        return np.linalg.pinv(N)


def matvec(M, x):
    """M @ x for a tall M without BLAS."""
    return np.einsum("ij,j->i", np.asarray(M, dtype=float), np.asarray(x, dtype=float))


def sumsq(r):
    """r @ r without BLAS (OpenBLAS threads the dot product of long vectors)."""
    r = np.asarray(r, dtype=float)
    return float(np.einsum("i,i->", r, r))
