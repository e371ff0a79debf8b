/* tall_qr.c: Householder QR of the fits' tall-skinny matrices (n rows of levels >> p parameters) on
 * the calling thread.
 *
 * Why not numpy: its OpenBLAS runs matrix-vector products and least squares on a 20 000 x 2 matrix on
 * worker threads that keep spinning after the call, and they take the core the fit's level evaluator
 * (fit_levels.c) needs next (measured on the 20 000-level benchmark fit on 2 cores: 0.65 of the time
 * with OPENBLAS_NUM_THREADS=1). Limiting BLAS threads would change the user's whole process; GSL's
 * CBLAS is single-threaded, and QR costs 2 n p^2 flops, well below a millisecond here.
 * With R and Q^T b the caller finishes least squares, covariances and SVDs on p x p matrices.
 */
#include <string.h>

#include <gsl/gsl_linalg.h>
#include <gsl/gsl_matrix.h>
#include <gsl/gsl_vector.h>

#include "wkb.h"

int wkb_tall_qr(size_t n, size_t p, const double *A, const double *b, double *R, double *qtb, double *rest,
                wkb_error *err)
{
    if (p == 0 || n < p)
        return wkb_fail(err, WKB_EINVAL, "QR of a %zu x %zu matrix: it needs at least as many rows as columns "
                        "(and one column)", n, p);
    gsl_matrix *Q = gsl_matrix_alloc(n, p);
    gsl_vector *tau = gsl_vector_alloc(p), *y = b ? gsl_vector_alloc(n) : NULL;
    int status = WKB_SUCCESS;
    if (!Q || !tau || (b && !y)) {
        status = wkb_fail(err, WKB_ENOMEM, "out of memory for the QR of a %zu x %zu matrix", n, p);
        goto cleanup;
    }
    memcpy(Q->data, A, n * p * sizeof(double)); /* (gsl_matrix_alloc: tda == p, rows contiguous) */
    if (gsl_linalg_QR_decomp(Q, tau) != GSL_SUCCESS) {
        status = wkb_fail(err, WKB_ENUMERIC, "the QR decomposition of a %zu x %zu matrix failed", n, p);
        goto cleanup;
    }
    for (size_t i = 0; i < p; i++)
        for (size_t j = 0; j < p; j++)
            R[i * p + j] = j >= i ? gsl_matrix_get(Q, i, j) : 0.0;
    if (b) {
        memcpy(y->data, b, n * sizeof(double));
        if (gsl_linalg_QR_QTvec(Q, tau, y) != GSL_SUCCESS) {
            status = wkb_fail(err, WKB_ENUMERIC, "Q^T b of a %zu x %zu QR failed", n, p);
            goto cleanup;
        }
        memcpy(qtb, y->data, p * sizeof(double));
        double s = 0;
        for (size_t i = p; i < n; i++)
            s += y->data[i] * y->data[i];
        *rest = s; /* |b - A x|^2 at the least-squares x (full column rank) */
    }
cleanup:
    gsl_vector_free(y);
    gsl_vector_free(tau);
    gsl_matrix_free(Q);
    return status;
}
