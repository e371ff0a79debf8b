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
 * The data are visited grouped by (reduced mass, J(J+1)), in ascending v, so that each well
 * workspace is set once per evaluation and each level starts from its neighbour. Everything
 * is allocated once per fit; nothing is allocated per level or per iteration.
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

/* ------------------------------------------------------------------ the evaluator */

struct wkb_fit_evaluator {
    size_t n;
    const wkb_fit_data *data;
    size_t *order;  /* row indices sorted by (mu, rot, v) */
    wkb_well *well;
    const wkb_level_source *source; /* NULL: first-order WKB levels */
};

/* Sort key order: reduced mass, then rotation, then v. */
static int row_before(const wkb_fit_data *d, size_t a, size_t b)
{
    if (d->mu[a] != d->mu[b])
        return d->mu[a] < d->mu[b];
    if (d->rot[a] != d->rot[b])
        return d->rot[a] < d->rot[b];
    return d->v[a] < d->v[b];
}

/* Stable bottom-up merge sort of idx[n] (scratch[n] is work space). */
static void sort_rows(const wkb_fit_data *d, size_t *idx, size_t *scratch, size_t n)
{
    for (size_t width = 1; width < n; width *= 2) {
        for (size_t lo = 0; lo < n; lo += 2 * width) {
            const size_t mid = GSL_MIN(lo + width, n), hi = GSL_MIN(lo + 2 * width, n);
            size_t i = lo, j = mid, k = lo;
            while (i < mid && j < hi)
                scratch[k++] = row_before(d, idx[j], idx[i]) ? idx[j++] : idx[i++];
            while (i < mid)
                scratch[k++] = idx[i++];
            while (j < hi)
                scratch[k++] = idx[j++];
        }
        memcpy(idx, scratch, n * sizeof *idx);
    }
}

static int check_data(const wkb_fit_data *d, wkb_error *err)
{
    if (!d || d->n == 0)
        return wkb_fail(err, WKB_EINVAL, "no levels to fit");
    if (d->energy_zero < WKB_ZERO_MINIMUM || d->energy_zero > WKB_ZERO_LOWEST)
        return wkb_fail(err, WKB_EINVAL, "energy zero code %d is invalid (0 minimum, 1 asymptote, 2 lowest)",
                        d->energy_zero);
    for (size_t i = 0; i < d->n; i++) {
        if (d->v[i] < 0)
            return wkb_fail(err, WKB_EINVAL, "row %zu: v=%d is invalid: quantum numbers are >= 0", i + 1, d->v[i]);
        if (!(isfinite(d->rot[i]) && d->rot[i] >= 0))
            return wkb_fail(err, WKB_EINVAL, "row %zu: J(J+1)=%g is invalid", i + 1, d->rot[i]);
        if (!(isfinite(d->mu[i]) && d->mu[i] > 0))
            return wkb_fail(err, WKB_EINVAL, "row %zu: reduced mass %g u is invalid", i + 1, d->mu[i]);
        if (d->energy && !isfinite(d->energy[i]))
            return wkb_fail(err, WKB_EINVAL, "row %zu: energy %g is not finite", i + 1, d->energy[i]);
        if (d->sigma && !(isfinite(d->sigma[i]) && d->sigma[i] > 0))
            return wkb_fail(err, WKB_EINVAL, "row %zu: uncertainty %g is invalid: it must be > 0", i + 1,
                            d->sigma[i]);
    }
    return WKB_SUCCESS;
}

wkb_fit_evaluator *wkb_fit_evaluator_alloc(const wkb_fit_data *data, const wkb_settings *levels,
                                           const wkb_level_source *source, wkb_error *err)
{
    wkb_fit_evaluator *ev = NULL;
    size_t *scratch = NULL;
    if (check_data(data, err))
        return NULL;
    if (!(ev = calloc(1, sizeof *ev)))
        goto nomem;
    ev->n = data->n;
    ev->data = data;
    ev->source = source;
    if (!(ev->order = malloc(data->n * sizeof *ev->order)) || !(scratch = malloc(data->n * sizeof *scratch)))
        goto nomem;
    if (!source && !(ev->well = wkb_well_alloc(levels))) {
        wkb_fail(err, WKB_EINVAL, "invalid level settings (or out of memory) for the WKB workspace");
        goto fail;
    }
    for (size_t i = 0; i < data->n; i++)
        ev->order[i] = i;
    sort_rows(data, ev->order, scratch, data->n);
    free(scratch);
    return ev;
nomem:
    wkb_fail(err, WKB_ENOMEM, "out of memory for a fit of %zu levels", data->n);
fail:
    free(scratch);
    wkb_fit_evaluator_free(ev);
    return NULL;
}

void wkb_fit_evaluator_free(wkb_fit_evaluator *ev)
{
    if (!ev)
        return;
    wkb_well_free(ev->well);
    free(ev->order);
    free(ev);
}

/* d(asymptote)/dp_k by central differences (exact for the models, whose asymptote is
   linear in their parameters); the perturbed potential needs no validity check because
   only model->asymptote is called. */
static void asymptote_gradient(const wkb_potential *pot, double *dA)
{
    const size_t np = pot->model->n_params;
    wkb_potential q = *pot;
    for (size_t k = 0; k < np; k++) {
        const double p = pot->p[k], h = 1e-4 * (fabs(p) > 0 ? fabs(p) : 1.0);
        q.p[k] = p + h;
        const double up = q.model->asymptote(&q);
        q.p[k] = p - h;
        const double down = q.model->asymptote(&q);
        q.p[k] = p;
        dA[k] = (up - down) / (2 * h);
    }
}

/* One level of the current well (WKB) or of the external source. */
static int level_of(wkb_fit_evaluator *ev, int v, double *energy, double *dEdp, wkb_error *err)
{
    if (ev->source)
        return ev->source->level(ev->source->ctx, v, energy, dEdp, err);
    wkb_level level;
    int status = wkb_level_at(ev->well, v, &level, dEdp, err);
    if (status)
        return status;
    *energy = level.energy;
    return WKB_SUCCESS;
}

static int set_well(wkb_fit_evaluator *ev, const wkb_potential *pot, double mu, double rot, wkb_error *err)
{
    if (ev->source)
        return ev->source->set(ev->source->ctx, pot, mu, rot, err);
    return wkb_well_set(ev->well, pot, mu, rot, 1, 1, err);
}

int wkb_fit_evaluate(wkb_fit_evaluator *ev, const wkb_potential *pot, double *calc, double *jac, size_t *bad_row,
                     wkb_error *err)
{
    const wkb_fit_data *d = ev->data;
    const size_t np = pot->model->n_params;
    double dA[WKB_MAX_PARAMS], dE[WKB_MAX_PARAMS], ref_dE[WKB_MAX_PARAMS];
    double ref_E = 0, asym = wkb_potential_asymptote(pot);
    double cur_mu = NAN, cur_rot = NAN, ref_mu = NAN;
    int status;

    if (d->energy_zero == WKB_ZERO_ASYMPTOTE)
        asymptote_gradient(pot, dA);
    for (size_t s = 0; s < ev->n; s++) {
        const size_t i = ev->order[s];
        const double mu = d->mu[i], rot = d->rot[i];
        if (bad_row)
            *bad_row = i;
        if (d->energy_zero == WKB_ZERO_LOWEST && mu != ref_mu) {
            /* the data zero of this isotopologue: its level v=0, J=0 */
            if ((status = set_well(ev, pot, mu, 0.0, err)))
                return status;
            cur_mu = mu, cur_rot = 0.0;
            if ((status = level_of(ev, 0, &ref_E, ref_dE, err)))
                return status;
            ref_mu = mu;
        }
        if (mu != cur_mu || rot != cur_rot) {
            if ((status = set_well(ev, pot, mu, rot, err)))
                return status;
            cur_mu = mu, cur_rot = rot;
        }
        double E;
        if ((status = level_of(ev, d->v[i], &E, dE, err)))
            return status;
        double *row = jac ? jac + i * np : NULL;
        switch (d->energy_zero) {
        case WKB_ZERO_MINIMUM:
            calc[i] = E;
            if (row)
                memcpy(row, dE, np * sizeof *row);
            break;
        case WKB_ZERO_ASYMPTOTE:
            calc[i] = asym - E;
            if (row)
                for (size_t k = 0; k < np; k++)
                    row[k] = dA[k] - dE[k];
            break;
        default: /* WKB_ZERO_LOWEST */
            calc[i] = E - ref_E;
            if (row)
                for (size_t k = 0; k < np; k++)
                    row[k] = dE[k] - ref_dE[k];
            break;
        }
        if (!isfinite(calc[i]))
            return wkb_fail(err, WKB_ENUMERIC, "the calculated energy of row %zu is not finite", i + 1);
        if (row)
            for (size_t k = 0; k < np; k++)
                if (!isfinite(row[k]))
                    return wkb_fail(err, WKB_ENUMERIC, "the derivative of row %zu with respect to %s is not finite",
                                    i + 1, pot->model->param_names[k]);
    }
    return WKB_SUCCESS;
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

typedef struct {
    wkb_fit_evaluator *ev;
    const wkb_fit_data *data;
    const wkb_potential *start;
    const wkb_fit_spec *spec;
    size_t n, nv, np;
    size_t var[WKB_MAX_PARAMS];
    double dpdu[WKB_MAX_PARAMS];
    /* solver variables y: u = u0 + T y, T = V S^-1 from the SVD of the weighted Jacobian at
       the start, so that the solver starts with orthonormal Jacobian columns */
    double u0[WKB_MAX_PARAMS], T[WKB_MAX_PARAMS][WKB_MAX_PARAMS];
    /* cache of the last evaluation: x, calc, jac (np per row) */
    double *cache_x, *cache_calc, *cache_jac;
    int cache_valid;
    /* the last accepted point (where GSL asked for the Jacobian) */
    double *best_calc, *best_jac;
    double best_p[WKB_MAX_PARAMS];
    size_t n_infeasible, n_eval;
    wkb_error last_infeasible;
} fit_context;

/* Parameters p from the internal vector x; writes dp/du into ctx->dpdu. */
static void params_from_x(fit_context *c, const gsl_vector *x, double *p)
{
    memcpy(p, c->start->p, c->np * sizeof *p);
    for (size_t j = 0; j < c->nv; j++) {
        const size_t k = c->var[j];
        double u = c->u0[j];
        for (size_t l = 0; l < c->nv; l++)
            u += c->T[j][l] * gsl_vector_get(x, l);
        p[k] = to_external(u, c->spec->lower[k], c->spec->upper[k], &c->dpdu[j]);
    }
}

/* Evaluates calc and jac (with respect to p) at x into the cache. Returns WKB_SUCCESS,
   a model-domain status (the point is infeasible), or WKB_ENOMEM. */
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
    if (!status)
        status = wkb_fit_evaluate(c->ev, &pot, c->cache_calc, c->cache_jac, NULL, &err);
    if (status) {
        c->n_infeasible++;
        c->last_infeasible = err;
        return status;
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
    int status = evaluate_at(c, x);
    if (status == WKB_ENOMEM)
        return GSL_ENOMEM;
    for (size_t i = 0; i < c->n; i++)
        gsl_vector_set(f, i, status ? INFEASIBLE_RESIDUAL
                                    : (c->cache_calc[i] - c->data->energy[i]) / c->data->sigma[i]);
    return GSL_SUCCESS;
}

static int residual_df(const gsl_vector *x, void *params, gsl_matrix *J)
{
    fit_context *c = params;
    if (!cache_matches(c, x) && evaluate_at(c, x))
        return GSL_EDOM; /* GSL asks for J only at accepted (feasible) points */
    double p[WKB_MAX_PARAMS];
    params_from_x(c, x, p); /* refreshes dpdu */
    for (size_t i = 0; i < c->n; i++) {
        const double *row = c->cache_jac + i * c->np;
        double du[WKB_MAX_PARAMS]; /* d f_i / d u_j */
        for (size_t j = 0; j < c->nv; j++)
            du[j] = row[c->var[j]] * c->dpdu[j] / c->data->sigma[i];
        for (size_t l = 0; l < c->nv; l++) {
            double sum = 0;
            for (size_t j = 0; j < c->nv; j++)
                sum += du[j] * c->T[j][l];
            gsl_matrix_set(J, i, l, sum);
        }
    }
    /* GSL evaluates the Jacobian exactly at each accepted point: remember it */
    memcpy(c->best_calc, c->cache_calc, c->n * sizeof *c->best_calc);
    memcpy(c->best_jac, c->cache_jac, c->n * c->np * sizeof *c->best_jac);
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
    int status = WKB_SUCCESS;
    if (!A || !V || !S || !work) {
        status = wkb_fail(err, WKB_ENOMEM, "out of memory for the fit's change of variables");
        goto cleanup;
    }
    for (size_t j = 0; j < nv; j++) {
        const size_t k = c->var[j];
        double dpdu;
        to_external(c->u0[j], c->spec->lower[k], c->spec->upper[k], &dpdu);
        for (size_t i = 0; i < c->n; i++)
            gsl_matrix_set(A, i, j, c->cache_jac[i * c->np + k] * dpdu / c->data->sigma[i]);
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

static int check_spec(const wkb_potential *start, const wkb_fit_spec *spec, size_t n, size_t *var, size_t *nv,
                      wkb_error *err)
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
        var[(*nv)++] = k;
    }
    if (*nv == 0)
        return wkb_fail(err, WKB_EINVAL, "no parameter is varied: nothing to fit");
    if (n < *nv)
        return wkb_fail(err, WKB_EINVAL, "%zu levels cannot determine %zu varied parameters", n, *nv);
    return WKB_SUCCESS;
}

int wkb_fit_run(const wkb_potential *start, const wkb_fit_data *data, const wkb_fit_spec *spec,
                const wkb_fit_settings *settings, const wkb_level_source *source,
                wkb_fit_outcome *out, double *calc, double *jac, wkb_error *err)
{
    fit_context c;
    gsl_multifit_nlinear_workspace *w = NULL;
    gsl_vector *x = NULL, *g = NULL, *t = NULL;
    gsl_matrix *N = NULL;
    int status;

    memset(&c, 0, sizeof c);
    memset(out, 0, sizeof *out);
    out->bad_row = (size_t)-1;
    if ((status = check_data(data, err)))
        return status;
    if (!data->energy || !data->sigma)
        return wkb_fail(err, WKB_EINVAL, "a fit needs observed energies and uncertainties");
    if ((status = check_spec(start, spec, data->n, c.var, &c.nv, err)))
        return status;
    c.data = data;
    c.start = start;
    c.spec = spec;
    c.n = data->n;
    c.np = start->model->n_params;

    status = WKB_ENOMEM;
    if (!(c.ev = wkb_fit_evaluator_alloc(data, &settings->levels, source, err))) {
        status = err ? err->status : WKB_ENOMEM;
        goto cleanup;
    }
    c.cache_x = malloc(c.nv * sizeof(double));
    c.cache_calc = malloc(c.n * sizeof(double));
    c.cache_jac = malloc(c.n * c.np * sizeof(double));
    c.best_calc = calc;
    c.best_jac = jac;
    if (!c.cache_x || !c.cache_calc || !c.cache_jac) {
        wkb_fail(err, WKB_ENOMEM, "out of memory for a fit of %zu levels", c.n);
        goto cleanup;
    }

    /* the starting point must be valid: say clearly why it is not */
    if ((status = wkb_fit_evaluate(c.ev, start, c.cache_calc, c.cache_jac, &out->bad_row, err)))
        goto cleanup;
    out->bad_row = (size_t)-1;
    /* a varied parameter that no level depends on (J=0 levels of a Morse well and re) would
       only feed rounding noise to the solver, which then wanders along it: hold it fixed */
    {
        double sens[WKB_MAX_PARAMS], column[WKB_MAX_PARAMS], top = 0;
        size_t kept = 0;
        for (size_t j = 0; j < c.nv; j++) {
            const size_t k = c.var[j];
            double s2 = 0;
            for (size_t i = 0; i < c.n; i++) {
                const double q = c.cache_jac[i * c.np + k] / data->sigma[i];
                s2 += q * q;
            }
            column[j] = sqrt(s2);
            sens[j] = column[j] * fabs(start->p[k]);
            top = GSL_MAX(top, sens[j]);
        }
        for (size_t j = 0; j < c.nv; j++) {
            /* a parameter starting at 0 has no scale of its own: keep it unless no level depends on it */
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
        status = wkb_fail(err, WKB_ENOMEM, "out of memory for a fit of %zu levels", c.n);
        goto cleanup;
    }
    for (size_t j = 0; j < c.nv; j++) {
        const size_t k = c.var[j];
        c.u0[j] = to_internal(start->p[k], spec->lower[k], spec->upper[k]);
        gsl_vector_set(x, j, 0.0);
    }
    if ((status = whitening(&c, err)))
        goto cleanup;

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
    out->n_eval = c.n_eval;
    out->n_infeasible = c.n_infeasible;
    if (c.n_infeasible)
        out->last_infeasible = c.last_infeasible;
    status = WKB_SUCCESS;
cleanup:
    gsl_multifit_nlinear_free(w);
    gsl_vector_free(x);
    gsl_vector_free(g);
    gsl_vector_free(t);
    gsl_matrix_free(N);
    free(c.cache_x);
    free(c.cache_calc);
    free(c.cache_jac);
    wkb_fit_evaluator_free(c.ev);
    return status;
}

/* ------------------------------------------------------------------ predictions */

int wkb_fit_levels(const wkb_potential *pot, double mu, double rot, const wkb_settings *settings,
                   const wkb_level_source *source, size_t capacity, double *energy, double *dEdp,
                   size_t *count, double *vD, double *dvDdp, wkb_error *err)
{
    wkb_well *w = wkb_well_alloc(settings);
    const size_t np = pot->model->n_params;
    int status;
    if (!w)
        return wkb_fail(err, WKB_ENOMEM, "cannot allocate a WKB workspace");
    if ((status = wkb_well_set(w, pot, mu, rot, 1, 1, err)) || (status = wkb_level_count(w, count, vD, err)))
        goto cleanup;
    if (vD && wkb_well_bound_top(w) < wkb_well_top(w) - 1e-6 * (wkb_well_top(w) - wkb_well_bottom(w)))
        *vD = NAN; /* an inner wall lower than the asymptote: no action at dissociation */
    if (source) {
        /* levels of the other source, counted by asking until one is not bound */
        if ((status = source->set(source->ctx, pot, mu, rot, err)))
            goto cleanup;
        size_t v = 0;
        for (;; v++) {
            double E, grad[WKB_MAX_PARAMS];
            wkb_error e2 = {0};
            status = source->level(source->ctx, (int)v, &E, grad, &e2);
            if (status == WKB_ENOLEVEL)
                break;
            if (status) {
                if (err)
                    *err = e2;
                goto cleanup;
            }
            if (v < capacity) {
                energy[v] = E;
                memcpy(dEdp + v * np, grad, np * sizeof *grad);
            }
        }
        *count = v;
    } else {
        for (size_t v = 0; v < GSL_MIN(*count, capacity); v++) {
            wkb_level level;
            if ((status = wkb_level_at(w, (int)v, &level, dEdp + v * np, err)))
                goto cleanup;
            energy[v] = level.energy;
        }
    }
    /* dvD/dp by central differences of the action at the asymptote */
    for (size_t k = 0; k < np && dvDdp; k++) {
        wkb_potential q;
        double vals[2];
        const double h = 1e-6 * (fabs(pot->p[k]) > 0 ? fabs(pot->p[k]) : 1.0);
        dvDdp[k] = NAN;
        int ok = 1;
        for (int side = 0; side < 2 && ok; side++) {
            double p[WKB_MAX_PARAMS];
            memcpy(p, pot->p, np * sizeof *p);
            p[k] += side ? -h : h;
            wkb_error e2 = {0};
            ok = !wkb_potential_init(&q, pot->model, p, pot->curve, &e2) &&
                 !wkb_well_set(w, &q, mu, rot, 1, 1, &e2) && !wkb_v_dissociation(w, &vals[side], &e2) &&
                 isfinite(vals[side]);
        }
        if (ok)
            dvDdp[k] = (vals[0] - vals[1]) / (2 * h);
    }
    status = WKB_SUCCESS;
cleanup:
    wkb_well_free(w);
    return status;
}
