/* fit.c: weighted least-squares fits of a potential's parameters to measured levels.
 *
 * The Levenberg-Marquardt iterations are GSL's trust-region solver (gsl_multifit_nlinear,
 * trust region "lm", More scaling, QR) on the residuals f_i = (calc_i - obs_i)/sigma_i with
 * the analytic Jacobian: for first-order WKB, dE_v/dp_k is the orbit average of dV/dp_k
 * (the derivative of the quantization condition, as given by wkb_level_at).
 *
 * Bounds: GSL has none, so a bounded parameter p is fitted through an unbounded u:
 *   both bounds   p = lo + (hi - lo) / (1 + exp(-u))     (logistic)
 *   lower only    p = lo + exp(u)
 *   upper only    p = hi - exp(u)
 * Smooth and monotone, so the minimum in u is the minimum in p wherever it lies inside the
 * bounds. Trial points that leave the model's own domain (a parameter check fails, a level
 * is no longer bound, the well disappears) get huge residuals, so the trust region rejects
 * them and shrinks; the user's starting point must be valid.
 *
 * The solver does not see u itself but y with u = u0 + V S^-1 y, from the SVD J0 = U S V^T of
 * the weighted Jacobian at the start: the columns start orthonormal, so the Levenberg-
 * Marquardt damping (GSL starts it at 1e-3 of the largest diagonal of J^T J and lowers it by
 * at most 3x per step) no longer crawls along strongly correlated directions such as the
 * two Lennard-Jones exponents. A linear change of variables moves no minimum.
 *
 * Convergence: the Gauss-Newton model promises a chi-square decrease g^T (J^T J)^-1 g
 * (g = J^T f) below decrease_tol * max(1, chi2), i.e. the remaining parameter change is a
 * tiny fraction of a standard deviation. GSL's step and gradient tests are used only when
 * J^T J is singular.
 *
 * The levels and their parameter derivatives come from the evaluator (fit_levels.c).
 * Everything is allocated once per fit; nothing is allocated per level or per iteration.
 */
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include <gsl/gsl_blas.h>
#include <gsl/gsl_errno.h>
#include <gsl/gsl_linalg.h>
#include <gsl/gsl_math.h>
#include <gsl/gsl_matrix.h>
#include <gsl/gsl_multifit_nlinear.h>
#include <gsl/gsl_vector.h>

#include "wkb.h"

/* residual given to a trial point outside the model's domain: any value above the current
   ||f|| makes GSL reject the step */
#define INFEASIBLE_RESIDUAL 1e30

wkb_fit_settings wkb_fit_default_settings(void)
{
    wkb_fit_settings s;
    s.max_iterations = 200;
    s.xtol = 1e-12;
    s.gtol = 1e-14;
    s.decrease_tol = 1e-10;
    s.levels = wkb_default_settings();
    s.levels.check_nodes = 1; /* the quadrature rule refined per well where it is not converged, as levels() does */
    return s;
}

const char *wkb_fit_stop_name(int stop)
{
    switch (stop) {
    case WKB_FIT_CONVERGED: return "converged";
    case WKB_FIT_MAX_ITERATIONS: return "max_iterations";
    case WKB_FIT_NO_PROGRESS: return "no_progress";
    default: return "unknown";
    }
}

/* ------------------------------------------------------------------ transforms */

static double to_internal(double p, double lo, double hi)
{
    const int has_lo = isfinite(lo), has_hi = isfinite(hi);
    if (has_lo && has_hi)
        return log((p - lo) / (hi - p));
    if (has_lo)
        return log(p - lo);
    if (has_hi)
        return log(hi - p);
    return p;
}

/* p(u) and dp/du */
static double to_external(double u, double lo, double hi, double *dpdu)
{
    const int has_lo = isfinite(lo), has_hi = isfinite(hi);
    if (has_lo && has_hi) {
        /* logistic written so that exp never overflows */
        const double e = exp(-fabs(u)), s = u >= 0 ? 1 / (1 + e) : e / (1 + e);
        *dpdu = (hi - lo) * s * (1 - s);
        return lo + (hi - lo) * s;
    }
    if (has_lo) {
        const double e = exp(u);
        *dpdu = e;
        return lo + e;
    }
    if (has_hi) {
        const double e = exp(u);
        *dpdu = -e;
        return hi - e;
    }
    *dpdu = 1;
    return u;
}

/* ------------------------------------------------------------------ the fit */

/* The engine fits rows that are linear combinations of levels (wkb_fit_rows): the distinct
   levels are computed once per evaluation, whatever the number of rows that use them. The
   extra linear parameters (free term values of levels outside the model, a fitted asymptote)
   enter the rows with constant coefficients, at most one per row, so for given potential
   parameters p their best values are closed-form weighted means,
     x_e(p) = sum_{i in e} w_i c_i (obs_i - calc0_i(p)) / sum_{i in e} w_i c_i^2,  w = 1/sigma^2,
   and the solver works on the projected problem in p alone (variable projection; Golub &
   Pereyra, SIAM J. Numer. Anal. 10, 413 (1973)) with the exact total derivative
     d calc_i/dp = J_i - c_i sum_{j in e} w_j c_j J_j / sum_{j in e} w_j c_j^2.
   The minimum is that of the joint problem; the extras cost neither a level calculation nor a
   solver variable. The output Jacobian holds the partial derivatives (potential parameters,
   then the constant extra columns), from which the caller forms the joint covariance. */
typedef struct {
    wkb_fit_evaluator *ev;
    const wkb_fit_data *levels;
    const wkb_fit_rows *rows;
    const wkb_potential *start;
    const wkb_fit_spec *spec;
    size_t n, nl, nv, np, ne, ncol; /* rows, levels, solver variables (varied potential parameters),
                                       model parameters, extras, output Jacobian columns */
    size_t var[WKB_MAX_PARAMS];
    double dpdu[WKB_MAX_PARAMS];
    /* solver variables y: u = u0 + T y, T = V S^-1 from the SVD of the weighted Jacobian at the
       start, so that the solver starts with orthonormal columns */
    double u0[WKB_MAX_PARAMS], T[WKB_MAX_PARAMS][WKB_MAX_PARAMS];
    double *extra_den;            /* sum w c^2 of each extra (constant) */
    double *extra_mean;           /* ne x np: sum w c J / den, the projection of the Jacobian */
    double *level_E, *level_dE;   /* the levels of the last evaluation and dE/dp */
    /* cache of the last evaluation: x, calc, partial jac (ncol per row), extras */
    double *cache_x, *cache_calc, *cache_jac, *cache_extra;
    int cache_valid;
    /* the last accepted point (where GSL asked for the Jacobian) */
    double *best_calc, *best_jac, *best_extra;
    double best_p[WKB_MAX_PARAMS];
    size_t n_infeasible, n_eval;
    wkb_error last_infeasible;
} fit_context;

/* Parameters p from the internal vector x (NULL: the start); writes dp/du into ctx->dpdu. */
static void params_from_x(fit_context *c, const gsl_vector *x, double *p)
{
    memcpy(p, c->start->p, c->np * sizeof *p);
    for (size_t j = 0; j < c->nv; j++) {
        const size_t k = c->var[j];
        double u = c->u0[j];
        for (size_t l = 0; x && l < c->nv; l++)
            u += c->T[j][l] * gsl_vector_get(x, l);
        p[k] = to_external(u, c->spec->lower[k], c->spec->upper[k], &c->dpdu[j]);
    }
}

/* The rows from the levels with every extra at 0: calc[n] and jac[n][ncol] (model parameters,
   then the extras' constant columns). */
static void combine_rows(const fit_context *c, const wkb_potential *pot, double *calc, double *jac)
{
    const wkb_fit_rows *R = c->rows;
    const size_t np = c->np;
    double dA[WKB_MAX_PARAMS] = {0}, asym = wkb_potential_asymptote(pot);
    int any_asym = 0;
    for (size_t i = 0; i < c->n; i++)
        any_asym |= R->coef_asymptote && R->coef_asymptote[i] != 0;
    if (any_asym)
        wkb_asymptote_gradient(pot, dA);
    for (size_t i = 0; i < c->n; i++) {
        const int a = R->level_a[i], b = R->level_b ? R->level_b[i] : -1, e = R->extra ? R->extra[i] : -1;
        const double ca = R->coef_a[i], cb = R->coef_b ? R->coef_b[i] : 0;
        const double cA = R->coef_asymptote ? R->coef_asymptote[i] : 0;
        double value = R->offset ? R->offset[i] : 0;
        if (a >= 0)
            value += ca * c->level_E[a];
        if (b >= 0)
            value += cb * c->level_E[b];
        if (cA != 0)
            value += cA * asym;
        calc[i] = value;
        double *row = jac + i * c->ncol;
        memset(row, 0, c->ncol * sizeof *row);
        for (size_t k = 0; k < np; k++) {
            double d = cA * dA[k];
            if (a >= 0)
                d += ca * c->level_dE[a * np + k];
            if (b >= 0)
                d += cb * c->level_dE[b * np + k];
            row[k] = d;
        }
        if (e >= 0)
            row[np + e] = R->coef_extra[i];
    }
}

/* The best extras for the rows in calc (extras at 0), added into calc; into extra[ne]. */
static void solve_extras(const fit_context *c, double *calc, double *extra)
{
    const wkb_fit_rows *R = c->rows;
    if (!c->ne)
        return;
    for (size_t e = 0; e < c->ne; e++)
        extra[e] = 0;
    for (size_t i = 0; i < c->n; i++) {
        const int e = R->extra ? R->extra[i] : -1;
        if (e < 0)
            continue;
        const double ce = R->coef_extra[i], w = 1 / (R->sigma[i] * R->sigma[i]);
        extra[e] += w * ce * (R->observed[i] - calc[i]);
    }
    for (size_t e = 0; e < c->ne; e++)
        extra[e] /= c->extra_den[e];
    for (size_t i = 0; i < c->n; i++) {
        const int e = R->extra ? R->extra[i] : -1;
        if (e >= 0)
            calc[i] += R->coef_extra[i] * extra[e];
    }
}

/* extra_mean[e][k] = sum_{i in e} w c J_ik / den_e from the partial Jacobian jac. */
static void project_means(const fit_context *c, const double *jac)
{
    const wkb_fit_rows *R = c->rows;
    if (!c->ne)
        return;
    memset(c->extra_mean, 0, c->ne * c->np * sizeof *c->extra_mean);
    for (size_t i = 0; i < c->n; i++) {
        const int e = R->extra ? R->extra[i] : -1;
        if (e < 0)
            continue;
        const double f = R->coef_extra[i] / (R->sigma[i] * R->sigma[i] * c->extra_den[e]);
        for (size_t k = 0; k < c->np; k++)
            c->extra_mean[e * c->np + k] += f * jac[i * c->ncol + k];
    }
}

/* Evaluates calc (extras at their best) and the partial jac at x into the cache. Returns
   WKB_SUCCESS, a model-domain status (the point is infeasible), or WKB_ENOMEM. */
static int evaluate_at(fit_context *c, const gsl_vector *x)
{
    double p[WKB_MAX_PARAMS];
    wkb_potential pot;
    wkb_error err = {0};
    params_from_x(c, x, p);
    for (size_t j = 0; j < c->nv; j++)
        c->cache_x[j] = gsl_vector_get(x, j);
    c->cache_valid = 0;
    c->n_eval++;
    int status = wkb_potential_init(&pot, c->start->model, p, c->start->curve, &err);
    if (!status && strcmp(pot.model->name, "born_oppenheimer") == 0)
        status = wkb_bob_potential_check((const wkb_bob_model *)pot.model, p, &err);
    if (!status)
        status = wkb_fit_evaluate(c->ev, &pot, c->level_E, c->level_dE, NULL, &err);
    if (status) {
        c->n_infeasible++;
        c->last_infeasible = err;
        return status;
    }
    combine_rows(c, &pot, c->cache_calc, c->cache_jac);
    solve_extras(c, c->cache_calc, c->cache_extra);
    for (size_t i = 0; i < c->n; i++)
        if (!isfinite(c->cache_calc[i])) {
            c->n_infeasible++;
            wkb_fail(&c->last_infeasible, WKB_ENUMERIC, "the calculated value of row %zu is not finite", i + 1);
            return WKB_ENUMERIC;
        }
    c->cache_valid = 1;
    return WKB_SUCCESS;
}

static int cache_matches(const fit_context *c, const gsl_vector *x)
{
    if (!c->cache_valid)
        return 0;
    for (size_t j = 0; j < c->nv; j++)
        if (c->cache_x[j] != gsl_vector_get(x, j))
            return 0;
    return 1;
}

static int residual_f(const gsl_vector *x, void *params, gsl_vector *f)
{
    fit_context *c = params;
    int status = cache_matches(c, x) ? WKB_SUCCESS : evaluate_at(c, x);
    if (status == WKB_ENOMEM)
        return GSL_ENOMEM;
    for (size_t i = 0; i < c->n; i++)
        gsl_vector_set(f, i, status ? INFEASIBLE_RESIDUAL
                                    : (c->cache_calc[i] - c->rows->observed[i]) / c->rows->sigma[i]);
    return GSL_SUCCESS;
}

/* d f_i / d u_j of row i of the projected problem (dpdu and extra_mean current) into du[nv]. */
static void row_du(const fit_context *c, size_t i, const double *row, double *du)
{
    const double s = c->rows->sigma[i];
    const int e = c->rows->extra ? c->rows->extra[i] : -1;
    const double ce = e >= 0 ? c->rows->coef_extra[i] : 0;
    for (size_t j = 0; j < c->nv; j++) {
        const size_t k = c->var[j];
        const double d = e >= 0 ? row[k] - ce * c->extra_mean[e * c->np + k] : row[k];
        du[j] = d * c->dpdu[j] / s;
    }
}

static int residual_df(const gsl_vector *x, void *params, gsl_matrix *J)
{
    fit_context *c = params;
    if (!cache_matches(c, x) && evaluate_at(c, x))
        return GSL_EDOM; /* GSL asks for J only at accepted (feasible) points */
    double p[WKB_MAX_PARAMS], du[WKB_MAX_PARAMS];
    params_from_x(c, x, p); /* refreshes dpdu */
    project_means(c, c->cache_jac);
    for (size_t i = 0; i < c->n; i++) {
        row_du(c, i, c->cache_jac + i * c->ncol, du);
        for (size_t l = 0; l < c->nv; l++) {
            double sum = 0;
            for (size_t j = 0; j < c->nv; j++)
                sum += du[j] * c->T[j][l];
            gsl_matrix_set(J, i, l, sum);
        }
    }
    /* GSL evaluates the Jacobian exactly at each accepted point: remember it */
    memcpy(c->best_calc, c->cache_calc, c->n * sizeof *c->best_calc);
    memcpy(c->best_jac, c->cache_jac, c->n * c->ncol * sizeof *c->best_jac);
    memcpy(c->best_extra, c->cache_extra, c->ne * sizeof *c->best_extra);
    memcpy(c->best_p, p, c->np * sizeof *p);
    return GSL_SUCCESS;
}

/* Gauss-Newton predicted decrease of chi-square, g^T (J^T J)^-1 g with g = J^T f, at the
   current point of the solver; -1 when J^T J is singular. N is nv x nv work space. */
static double predicted_decrease(const gsl_multifit_nlinear_workspace *w, gsl_matrix *N, gsl_vector *g,
                                 gsl_vector *t)
{
    const gsl_matrix *J = gsl_multifit_nlinear_jac(w);
    const gsl_vector *f = gsl_multifit_nlinear_residual(w);
    double dec;
    if (gsl_blas_dgemv(CblasTrans, 1.0, J, f, 0.0, g) != GSL_SUCCESS ||
        gsl_blas_dgemm(CblasTrans, CblasNoTrans, 1.0, J, J, 0.0, N) != GSL_SUCCESS)
        return -1;
    /* scale to unit diagonal so that parameter units do not matter */
    for (size_t j = 0; j < N->size1; j++) {
        const double djj = gsl_matrix_get(N, j, j);
        if (!(djj > 0))
            return -1;
        gsl_vector_set(t, j, 1 / sqrt(djj));
    }
    for (size_t a = 0; a < N->size1; a++) {
        for (size_t b = 0; b < N->size2; b++)
            gsl_matrix_set(N, a, b, gsl_matrix_get(N, a, b) * gsl_vector_get(t, a) * gsl_vector_get(t, b));
        gsl_vector_set(g, a, gsl_vector_get(g, a) * gsl_vector_get(t, a));
    }
    if (gsl_linalg_cholesky_decomp1(N) != GSL_SUCCESS)
        return -1;
    if (gsl_vector_memcpy(t, g) != GSL_SUCCESS || gsl_linalg_cholesky_svx(N, t) != GSL_SUCCESS ||
        gsl_blas_ddot(g, t, &dec) != GSL_SUCCESS)
        return -1;
    return dec;
}

/* T = V S^-1 from the SVD of the weighted Jacobian d f/d u at the start (in the cache):
   a fixed linear change of variables that leaves the minimum unchanged but gives the
   Levenberg-Marquardt damping equal footing in every direction, so that strongly
   correlated parameters (such as the Lennard-Jones exponents) need no long crawl while
   the damping decreases. Singular values are floored at 1e-10 of the largest. */
static int whitening(fit_context *c, wkb_error *err)
{
    const size_t nv = c->nv;
    gsl_matrix *A = gsl_matrix_alloc(c->n, nv), *V = gsl_matrix_alloc(nv, nv);
    gsl_vector *S = gsl_vector_alloc(nv), *work = gsl_vector_alloc(nv);
    double du[WKB_MAX_PARAMS];
    int status = WKB_SUCCESS;
    if (!A || !V || !S || !work) {
        status = wkb_fail(err, WKB_ENOMEM, "out of memory for the fit's change of variables");
        goto cleanup;
    }
    for (size_t j = 0; j < nv; j++) {
        const size_t k = c->var[j];
        to_external(c->u0[j], c->spec->lower[k], c->spec->upper[k], &c->dpdu[j]);
    }
    project_means(c, c->cache_jac);
    for (size_t i = 0; i < c->n; i++) {
        row_du(c, i, c->cache_jac + i * c->ncol, du);
        for (size_t j = 0; j < nv; j++)
            gsl_matrix_set(A, i, j, du[j]);
    }
    if (gsl_linalg_SV_decomp(A, V, S, work) != GSL_SUCCESS) {
        status = wkb_fail(err, WKB_ENUMERIC, "the singular value decomposition of the starting Jacobian failed");
        goto cleanup;
    }
    const double smax = gsl_vector_get(S, 0);
    if (!(smax > 0) || !isfinite(smax)) {
        status = wkb_fail(err, WKB_ENUMERIC, "the starting Jacobian is zero or not finite");
        goto cleanup;
    }
    for (size_t j = 0; j < nv; j++)
        for (size_t l = 0; l < nv; l++)
            c->T[j][l] = gsl_matrix_get(V, j, l) / GSL_MAX(gsl_vector_get(S, l), 1e-10 * smax);
cleanup:
    gsl_matrix_free(A);
    gsl_matrix_free(V);
    gsl_vector_free(S);
    gsl_vector_free(work);
    return status;
}

static int check_spec(const wkb_potential *start, const wkb_fit_spec *spec, size_t n, size_t n_extra, size_t *var,
                      size_t *nv, wkb_error *err)
{
    const wkb_model *m = start->model;
    *nv = 0;
    for (size_t k = 0; k < m->n_params; k++) {
        const double lo = spec->lower[k], hi = spec->upper[k], p = start->p[k];
        if (!spec->vary[k])
            continue;
        if (isnan(lo) || isnan(hi) || lo == INFINITY || hi == -INFINITY || !(lo < hi))
            return wkb_fail(err, WKB_EINVAL, "bounds (%g, %g) of parameter %s are invalid: they need lower < upper",
                            lo, hi, m->param_names[k]);
        if (!(p > lo && p < hi))
            return wkb_fail(err, WKB_EINVAL,
                            "the starting value %s=%.10g is not strictly inside its bounds (%g, %g)",
                            m->param_names[k], p, lo, hi);
        {
            /* a bound far beyond the value (1e300 against 5000) leaves p = hi - exp(u) to round-off (the
               transform resolves p only to ~1e-16 of the bounds), and hi - lo can overflow: the transform
               must give the start back to 1e-8 of itself (of the bounds' span for a start at 0) */
            double dpdu;
            const double u = to_internal(p, lo, hi), back = to_external(u, lo, hi, &dpdu);
            const double scale = p != 0 ? fabs(p) : (isfinite(lo) && isfinite(hi) ? 1e-4 * (hi - lo) : 0);
            if (!isfinite(u) || !isfinite(back) || !isfinite(dpdu) || dpdu == 0 ||
                !(fabs(back - p) <= 1e-8 * scale))
                return wkb_fail(err, WKB_EINVAL,
                                "bounds (%g, %g) of parameter %s are too far from its starting value %.10g for the "
                                "bounded-parameter transform to resolve it (round-off): give bounds nearer the "
                                "value, or none", lo, hi, m->param_names[k], p);
        }
        var[(*nv)++] = k;
    }
    if (*nv == 0 && n_extra == 0)
        return wkb_fail(err, WKB_EINVAL, "no parameter is varied: nothing to fit");
    if (n < *nv + n_extra)
        return wkb_fail(err, WKB_EINVAL, "%zu data rows cannot determine %zu varied parameters", n, *nv + n_extra);
    return WKB_SUCCESS;
}

static int check_rows(const wkb_fit_rows *R, size_t n_levels, wkb_error *err)
{
    if (!R || R->n == 0)
        return wkb_fail(err, WKB_EINVAL, "no data rows to fit");
    if (!R->level_a || !R->coef_a || !R->observed || !R->sigma)
        return wkb_fail(err, WKB_EINVAL, "the data rows need level_a, coef_a, observed and sigma");
    for (size_t i = 0; i < R->n; i++) {
        const int idx[2] = {R->level_a[i], R->level_b ? R->level_b[i] : -1};
        for (int k = 0; k < 2; k++)
            if (idx[k] < -1 || idx[k] >= (int)n_levels)
                return wkb_fail(err, WKB_EINVAL, "row %zu: level index %d is invalid (0..%zu, or -1 for none)",
                                i + 1, idx[k], n_levels - 1);
        const int e = R->extra ? R->extra[i] : -1;
        if (e < -1 || e >= (int)R->n_extra)
            return wkb_fail(err, WKB_EINVAL, "row %zu: extra parameter index %d is invalid", i + 1, e);
        if (!isfinite(R->observed[i]))
            return wkb_fail(err, WKB_EINVAL, "row %zu: observed value %g is not finite", i + 1, R->observed[i]);
        if (!(isfinite(R->sigma[i]) && R->sigma[i] > 0))
            return wkb_fail(err, WKB_EINVAL, "row %zu: uncertainty %g is invalid: it must be > 0", i + 1,
                            R->sigma[i]);
    }
    for (size_t e = 0; e < R->n_extra; e++) {
        int used = 0;
        for (size_t i = 0; i < R->n && !used; i++)
            used = R->extra && R->extra[i] == (int)e && R->coef_extra && R->coef_extra[i] != 0;
        if (!used)
            return wkb_fail(err, WKB_EINVAL, "extra parameter %zu enters no data row", e);
    }
    return WKB_SUCCESS;
}

int wkb_fit_run_rows(const wkb_potential *start, const wkb_fit_data *levels, const wkb_fit_rows *rows,
                     const wkb_fit_spec *spec, double *extra, const wkb_fit_settings *settings,
                     const wkb_level_source *source, wkb_fit_outcome *out, double *calc, double *jac,
                     wkb_error *err)
{
    fit_context c;
    gsl_multifit_nlinear_workspace *w = NULL;
    gsl_vector *x = NULL, *g = NULL, *t = NULL;
    gsl_matrix *N = NULL;
    int status;

    memset(&c, 0, sizeof c);
    memset(out, 0, sizeof *out);
    out->bad_row = (size_t)-1;
    if ((status = wkb_fit_check_data(levels, err)) || (status = check_rows(rows, levels->n, err)))
        return status;
    if (levels->energy_zero != WKB_ZERO_MINIMUM)
        return wkb_fail(err, WKB_EINVAL, "the levels of a row fit are term values above the minimum");
    if ((status = check_spec(start, spec, rows->n, rows->n_extra, c.var, &c.nv, err)))
        return status;
    c.levels = levels;
    c.rows = rows;
    c.start = start;
    c.spec = spec;
    c.n = rows->n;
    c.nl = levels->n;
    c.np = start->model->n_params;
    c.ne = rows->n_extra;
    c.ncol = c.np + c.ne;

    status = WKB_ENOMEM;
    if (!(c.ev = wkb_fit_evaluator_alloc(levels, &settings->levels, source, err))) {
        status = err ? err->status : WKB_ENOMEM;
        goto cleanup;
    }
    c.extra_den = calloc(c.ne + 1, sizeof(double));
    c.extra_mean = malloc((c.ne * c.np + 1) * sizeof(double));
    c.cache_extra = malloc((c.ne + 1) * sizeof(double));
    c.best_extra = malloc((c.ne + 1) * sizeof(double));
    c.level_E = malloc(c.nl * sizeof(double));
    c.level_dE = malloc(c.nl * c.np * sizeof(double));
    c.cache_x = malloc((c.nv + 1) * sizeof(double));
    c.cache_calc = malloc(c.n * sizeof(double));
    c.cache_jac = malloc(c.n * c.ncol * sizeof(double));
    c.best_calc = calc;
    c.best_jac = jac;
    if (!c.extra_den || !c.extra_mean || !c.cache_extra || !c.best_extra || !c.level_E || !c.level_dE ||
        !c.cache_x || !c.cache_calc || !c.cache_jac) {
        wkb_fail(err, WKB_ENOMEM, "out of memory for a fit of %zu rows and %zu levels", c.n, c.nl);
        goto cleanup;
    }
    for (size_t i = 0; rows->extra && i < c.n; i++)
        if (rows->extra[i] >= 0)
            c.extra_den[rows->extra[i]] += rows->coef_extra[i] * rows->coef_extra[i] / (rows->sigma[i] * rows->sigma[i]);

    /* the starting point must be valid: say clearly why it is not (bad_row names the level) */
    if ((status = wkb_fit_evaluate(c.ev, start, c.level_E, c.level_dE, &out->bad_row, err)))
        goto cleanup;
    out->bad_row = (size_t)-1;
    combine_rows(&c, start, c.cache_calc, c.cache_jac);
    solve_extras(&c, c.cache_calc, c.cache_extra);
    /* a varied parameter that no row depends on (J=0 levels of a Morse well and re) would
       only feed rounding noise to the solver, which then wanders along it: hold it fixed
       (judged on the projected rows: what the extras absorb carries no information) */
    {
        double sens[WKB_MAX_PARAMS], column[WKB_MAX_PARAMS], top = 0, du[WKB_MAX_PARAMS];
        size_t kept = 0;
        for (size_t j = 0; j < c.nv; j++)
            c.dpdu[j] = 1;
        project_means(&c, c.cache_jac);
        for (size_t j = 0; j < c.nv; j++)
            column[j] = 0;
        for (size_t i = 0; i < c.n; i++) {
            row_du(&c, i, c.cache_jac + i * c.ncol, du);
            for (size_t j = 0; j < c.nv; j++)
                column[j] += du[j] * du[j];
        }
        for (size_t j = 0; j < c.nv; j++) {
            column[j] = sqrt(column[j]);
            sens[j] = column[j] * fabs(start->p[c.var[j]]);
            top = GSL_MAX(top, sens[j]);
        }
        for (size_t j = 0; j < c.nv; j++) {
            /* a parameter starting at 0 has no scale of its own: keep it unless no row depends on it */
            const int at_zero = start->p[c.var[j]] == 0;
            if (at_zero ? column[j] > 0 : sens[j] > WKB_FIT_INSENSITIVE * top)
                c.var[kept++] = c.var[j];
            else
                out->insensitive[c.var[j]] = 1;
        }
        if (kept == 0) {
            status = wkb_fail(err, WKB_EINVAL, "no level depends on any varied parameter: nothing can be fitted");
            goto cleanup;
        }
        c.nv = kept;
    }
    x = gsl_vector_alloc(c.nv);
    g = gsl_vector_alloc(c.nv);
    t = gsl_vector_alloc(c.nv);
    N = gsl_matrix_alloc(c.nv, c.nv);
    if (!x || !g || !t || !N) {
        status = wkb_fail(err, WKB_ENOMEM, "out of memory for a fit of %zu rows", c.n);
        goto cleanup;
    }
    for (size_t j = 0; j < c.nv; j++) {
        const size_t k = c.var[j];
        c.u0[j] = to_internal(start->p[k], spec->lower[k], spec->upper[k]);
        gsl_vector_set(x, j, 0.0);
    }
    if ((status = whitening(&c, err)))
        goto cleanup;
    /* the start is the first accepted point until GSL accepts another */
    memcpy(c.best_p, start->p, c.np * sizeof(double));
    memcpy(c.best_extra, c.cache_extra, c.ne * sizeof(double));
    memcpy(c.best_calc, c.cache_calc, c.n * sizeof(double));
    memcpy(c.best_jac, c.cache_jac, c.n * c.ncol * sizeof(double));
    {
        /* GSL starts with the residuals at x = 0: where that maps back to the start bit for bit (no bounds,
           or a round trip through a bound's transform without rounding) they are the start's evaluation
           above, cached, not a second evaluation of every level (1/4 of a short first-order fit) */
        double p0[WKB_MAX_PARAMS];
        int same = 1;
        params_from_x(&c, x, p0);
        for (size_t k = 0; k < c.np; k++)
            same = same && p0[k] == start->p[k];
        for (size_t i = 0; same && i < c.n; i++)
            same = isfinite(c.cache_calc[i]); /* (else evaluate_at's verdict: an infeasible start) */
        for (size_t j = 0; same && j < c.nv; j++)
            c.cache_x[j] = 0.0;
        c.cache_valid = same;
    }

    {
        gsl_multifit_nlinear_parameters fp = gsl_multifit_nlinear_default_parameters();
        fp.trs = gsl_multifit_nlinear_trs_lm;
        fp.scale = gsl_multifit_nlinear_scale_more;
        fp.solver = gsl_multifit_nlinear_solver_qr;
        if (!(w = gsl_multifit_nlinear_alloc(gsl_multifit_nlinear_trust, &fp, c.n, c.nv))) {
            status = wkb_fail(err, WKB_ENOMEM, "cannot allocate the GSL least-squares workspace");
            goto cleanup;
        }
    }
    gsl_multifit_nlinear_fdf fdf;
    memset(&fdf, 0, sizeof fdf);
    fdf.f = residual_f;
    fdf.df = residual_df;
    fdf.fvv = NULL;
    fdf.n = c.n;
    fdf.p = c.nv;
    fdf.params = &c;
    if ((status = gsl_multifit_nlinear_init(x, &fdf, w)) != GSL_SUCCESS) {
        status = wkb_fail(err, WKB_ENUMERIC, "the least-squares solver could not start: %s", gsl_strerror(status));
        goto cleanup;
    }

    out->stop = WKB_FIT_MAX_ITERATIONS;
    size_t iter;
    for (iter = 0; iter < settings->max_iterations; iter++) {
        int gs = gsl_multifit_nlinear_iterate(w);
        if (gs == GSL_ENOPROG) {
            out->stop = WKB_FIT_NO_PROGRESS;
            break;
        }
        if (gs == GSL_ENOMEM) {
            status = wkb_fail(err, WKB_ENOMEM, "out of memory during the fit");
            goto cleanup;
        }
        if (gs != GSL_SUCCESS) {
            status = wkb_fail(err, WKB_ENUMERIC, "the least-squares iteration failed: %s", gsl_strerror(gs));
            goto cleanup;
        }
        /* converged when the Gauss-Newton step (the Newton decrement) promises no significant
           decrease of chi-square; GSL's step/gradient tests serve when J^T J is singular */
        const double fn = gsl_blas_dnrm2(gsl_multifit_nlinear_residual(w));
        const double dec = predicted_decrease(w, N, g, t);
        int info;
        if (dec >= 0 && dec <= settings->decrease_tol * GSL_MAX(1.0, fn * fn)) {
            out->stop = WKB_FIT_CONVERGED;
            out->test = 3;
            iter++;
            break;
        }
        if (dec < 0 && gsl_multifit_nlinear_test(settings->xtol, settings->gtol, 0.0, &info, w) == GSL_SUCCESS) {
            out->stop = WKB_FIT_CONVERGED;
            out->test = info;
            iter++;
            break;
        }
    }
    out->iterations = iter;
    {
        const double fn = gsl_blas_dnrm2(gsl_multifit_nlinear_residual(w));
        out->chi_square = fn * fn;
        out->predicted_decrease = predicted_decrease(w, N, g, t);
        if (out->stop == WKB_FIT_NO_PROGRESS && out->predicted_decrease >= 0 &&
            out->predicted_decrease <= 1e3 * settings->decrease_tol * GSL_MAX(1.0, out->chi_square)) {
            /* no step could lower chi-square further, and the linear model agrees that none
               can do so by more than the rounding noise of the levels */
            out->stop = WKB_FIT_CONVERGED;
            out->test = 4;
        }
    }
    memcpy(out->params, c.best_p, c.np * sizeof(double));
    if (c.ne)
        memcpy(extra, c.best_extra, c.ne * sizeof(double));
    out->n_eval = c.n_eval;
    out->n_infeasible = c.n_infeasible;
    out->n_level_calculations = wkb_fit_evaluator_level_calculations(c.ev);
    out->n_orbits = wkb_fit_evaluator_orbits(c.ev);
    out->n_threads = wkb_fit_evaluator_threads(c.ev);
    if (c.n_infeasible)
        out->last_infeasible = c.last_infeasible;
    status = WKB_SUCCESS;
cleanup:
    gsl_multifit_nlinear_free(w);
    gsl_vector_free(x);
    gsl_vector_free(g);
    gsl_vector_free(t);
    gsl_matrix_free(N);
    free(c.extra_den);
    free(c.extra_mean);
    free(c.cache_extra);
    free(c.best_extra);
    free(c.level_E);
    free(c.level_dE);
    free(c.cache_x);
    free(c.cache_calc);
    free(c.cache_jac);
    wkb_fit_evaluator_free(c.ev);
    return status;
}

/* The term-value fit of wkb_fit_run as a row fit: the data rows are the levels (energy zero
   minimum), plus one level v=0, J=0 per reduced mass for the zero "lowest". */
int wkb_fit_run(const wkb_potential *start, const wkb_fit_data *data, const wkb_fit_spec *spec,
                const wkb_fit_settings *settings, const wkb_level_source *source,
                wkb_fit_outcome *out, double *calc, double *jac, wkb_error *err)
{
    const size_t n = data ? data->n : 0;
    int *v = NULL, *la = NULL, *lb = NULL;
    double *rot = NULL, *mu = NULL, *ca = NULL, *cb = NULL, *cA = NULL;
    int status;
    memset(out, 0, sizeof *out);
    out->bad_row = (size_t)-1;
    if ((status = wkb_fit_check_data(data, err)))
        return status;
    if (!data->energy || !data->sigma)
        return wkb_fail(err, WKB_EINVAL, "a fit needs observed energies and uncertainties");
    v = malloc(2 * n * sizeof *v);
    rot = malloc(2 * n * sizeof *rot);
    mu = malloc(2 * n * sizeof *mu);
    la = malloc(n * sizeof *la);
    lb = malloc(n * sizeof *lb);
    ca = malloc(n * sizeof *ca);
    cb = malloc(n * sizeof *cb);
    cA = malloc(n * sizeof *cA);
    if (!v || !rot || !mu || !la || !lb || !ca || !cb || !cA) {
        status = wkb_fail(err, WKB_ENOMEM, "out of memory for a fit of %zu levels", n);
        goto cleanup;
    }
    size_t nl = n;
    for (size_t i = 0; i < n; i++) {
        v[i] = data->v[i];
        rot[i] = data->rot[i];
        mu[i] = data->mu[i];
        la[i] = (int)i;
        ca[i] = data->energy_zero == WKB_ZERO_ASYMPTOTE ? -1.0 : 1.0;
        cA[i] = data->energy_zero == WKB_ZERO_ASYMPTOTE ? 1.0 : 0.0;
        lb[i] = -1;
        cb[i] = 0;
        if (data->energy_zero == WKB_ZERO_LOWEST) {
            size_t r = n;
            for (; r < nl && mu[r] != mu[i]; r++)
                ;
            if (r == nl) {
                v[nl] = 0, rot[nl] = 0.0, mu[nl] = mu[i];
                nl++;
            }
            lb[i] = (int)r;
            cb[i] = -1.0;
        }
    }
    wkb_fit_data levels = {nl, v, rot, mu, NULL, NULL, WKB_ZERO_MINIMUM};
    wkb_fit_rows rows;
    memset(&rows, 0, sizeof rows);
    rows.n = n;
    rows.level_a = la, rows.coef_a = ca, rows.level_b = lb, rows.coef_b = cb, rows.coef_asymptote = cA;
    rows.observed = data->energy;
    rows.sigma = data->sigma;
    rows.offset = data->offset; /* the corrected fit's fixed per-row corrections */
    status = wkb_fit_run_rows(start, &levels, &rows, spec, NULL, settings, source, out, calc, jac, err);
    if (status && out->bad_row != (size_t)-1 && out->bad_row >= n) {
        /* a reference level failed: name the first row that needs it */
        for (size_t i = 0; i < n; i++)
            if (lb[i] == (int)out->bad_row) {
                out->bad_row = i;
                break;
            }
    }
cleanup:
    free(v);
    free(rot);
    free(mu);
    free(la);
    free(lb);
    free(ca);
    free(cb);
    free(cA);
    return status;
}
