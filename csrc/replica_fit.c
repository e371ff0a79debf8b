/* replica_fit.c: many refits of one set of levels in one call (bootstrap and Monte-Carlo replicas).
 *
 * Every replica is a fit of wkb_fit_run (the existing Levenberg-Marquardt driver, unchanged) from
 * the same start, to its own energies (and, for case resampling, its own row counts), with the
 * levels of a "shifted" source: first-order WKB levels plus a per-level exact correction that is
 * linear in the parameters,
 *     E_v(p) = E_wkb,v(p) + shift_v + slope_v . (p - p0),
 * with shift_v = E_exact,v - E_wkb,v at the central fit p0 and slope_v its finite-difference
 * derivative (both made by the caller, replicas.py). The Jacobian gets slope_v too, so each
 * replica's minimum is the minimum of the linearised problem. The same source gives the
 * replica's predictions at one reduced mass and J = 0: the number of bound corrected levels and
 * the levels asked for (see predict below).
 *
 * A replica depends only on its own data: the results never depend on how the caller splits the
 * replicas into calls. Nothing here touches Python; the caller releases the GIL around a call.
 */
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "wkb.h"

typedef struct {
    const wkb_level_shifts *tab;
    wkb_well *well;
    size_t lo, hi;               /* the entries of the current (mu, rot) group: [lo, hi) */
    size_t np;
    double dp[WKB_MAX_PARAMS];   /* p - p0 */
    double asymptote;
    size_t *extrapolated;        /* levels above their group's table (its top entry's shift used) */
} shifted_source;

/* First entry whose (mu, rot) is not below (mu, rot): the table is sorted by (mu, rot, v). */
static size_t group_start(const wkb_level_shifts *t, double mu, double rot)
{
    size_t lo = 0, hi = t->n;
    while (lo < hi) {
        const size_t m = lo + (hi - lo) / 2;
        if (t->mu[m] < mu || (t->mu[m] == mu && t->rot[m] < rot))
            lo = m + 1;
        else
            hi = m;
    }
    return lo;
}

static int shifted_set(void *ctx, const wkb_potential *pot, double mu, double rot, wkb_error *err)
{
    shifted_source *s = ctx;
    const wkb_level_shifts *t = s->tab;
    s->np = pot->model->n_params;
    for (size_t k = 0; k < s->np; k++)
        s->dp[k] = pot->p[k] - t->p0[k];
    s->asymptote = wkb_potential_asymptote(pot);
    s->lo = s->hi = group_start(t, mu, rot);
    while (s->hi < t->n && t->mu[s->hi] == mu && t->rot[s->hi] == rot)
        s->hi++;
    return wkb_well_set(s->well, pot, mu, rot, 1, 1, err);
}

static int shifted_level(void *ctx, int v, double *energy, double *dEdp, wkb_error *err)
{
    shifted_source *s = ctx;
    const wkb_level_shifts *t = s->tab;
    wkb_level level;
    double grad[WKB_MAX_PARAMS];
    int status = wkb_level_at(s->well, v, &level, grad, err);
    if (status)
        return status;
    double E = level.energy;
    int beyond = 0;
    if (s->hi > s->lo) {
        /* the entry of v, else the nearest one below it (levels above the table use its top one) */
        size_t e = s->lo;
        for (size_t i = s->lo; i < s->hi && t->v[i] <= v; i++)
            e = i;
        beyond = v > t->v[s->hi - 1];
        E += t->shift[e];
        if (t->slope) {
            const double *row = t->slope + e * s->np;
            for (size_t k = 0; k < s->np; k++) {
                E += row[k] * s->dp[k];
                grad[k] += row[k];
            }
        }
    } else {
        beyond = 1; /* a group without any correction: plain first-order WKB */
    }
    if (!(E < s->asymptote))
        return wkb_fail(err, WKB_ENOLEVEL, "level v=%d is not bound once its exact correction is added", v);
    if (beyond && s->extrapolated)
        (*s->extrapolated)++;
    *energy = E;
    if (dEdp)
        memcpy(dEdp, grad, s->np * sizeof *grad);
    return WKB_SUCCESS;
}

/* The predictions of one replica at (mu, J = 0): the corrected levels want[n_want] (NaN for those
   not bound), the number of bound corrected levels and the first-order vD. Only the top levels and
   those asked for are computed: the count is one more than the highest first-order level whose
   corrected energy lies below the asymptote, every level under it being bound (the corrections
   are far smaller than the binding energies there). */
static int predict(shifted_source *s, const wkb_potential *pot, double mu, const int *want, size_t n_want,
                   double *E, size_t *count, double *vD, wkb_error *err)
{
    int status = shifted_set(s, pot, mu, 0.0, err);
    size_t n = 0;
    if (status || (status = wkb_level_count(s->well, &n, vD, err)))
        return status;
    const double top = wkb_well_top(s->well);
    if (wkb_well_bound_top(s->well) < top - 1e-6 * (top - wkb_well_bottom(s->well)))
        *vD = NAN; /* an inner wall lower than the asymptote: no action at dissociation (as wkb_fit_levels) */
    for (; n > 0; n--) {
        double e;
        wkb_error e2 = {0};
        status = shifted_level(s, (int)(n - 1), &e, NULL, &e2);
        if (status == WKB_SUCCESS)
            break;
        if (status != WKB_ENOLEVEL) {
            if (err)
                *err = e2;
            return status;
        }
    }
    *count = n;
    for (size_t k = 0; k < n_want; k++) {
        E[k] = NAN;
        if (want[k] >= 0 && (size_t)want[k] < n && (status = shifted_level(s, want[k], &E[k], NULL, err)))
            return status;
    }
    return WKB_SUCCESS;
}

static int check_shifts(const wkb_level_shifts *t, size_t np, wkb_error *err)
{
    if (!t->mu || !t->rot || !t->v || !t->shift || !t->p0)
        return wkb_fail(err, WKB_EINVAL, "the level corrections need mu, rot, v, shift and p0");
    for (size_t i = 0; i < t->n; i++) {
        if (!isfinite(t->shift[i]))
            return wkb_fail(err, WKB_EINVAL, "the correction of table entry %zu is not finite", i + 1);
        for (size_t k = 0; t->slope && k < np; k++)
            if (!isfinite(t->slope[i * np + k]))
                return wkb_fail(err, WKB_EINVAL, "the correction slope of table entry %zu is not finite", i + 1);
        if (i && (t->mu[i] < t->mu[i - 1] || (t->mu[i] == t->mu[i - 1] && (t->rot[i] < t->rot[i - 1] ||
                                              (t->rot[i] == t->rot[i - 1] && t->v[i] <= t->v[i - 1])))))
            return wkb_fail(err, WKB_EINVAL, "the level corrections must be sorted by (mu, rot, v) without repeats "
                            "(entry %zu)", i + 1);
    }
    return WKB_SUCCESS;
}

int wkb_fit_replicas(const wkb_potential *start, const wkb_fit_data *data, const wkb_fit_spec *spec,
                     const wkb_fit_settings *settings, const wkb_level_shifts *shifts, size_t n_rep,
                     const double *energy, const double *count, double pred_mu, const int *pred_v,
                     size_t n_pred_v, wkb_replica_outcome *outcomes, double *params, double *pred_energy,
                     wkb_error *err)
{
    const size_t n = data->n, np = start->model->n_params;
    int *v = NULL;
    double *rot = NULL, *mu = NULL, *E = NULL, *sigma = NULL, *calc = NULL, *jac = NULL;
    shifted_source ctx;
    wkb_level_source source = {&ctx, shifted_set, shifted_level};
    int status = WKB_SUCCESS;

    memset(&ctx, 0, sizeof ctx);
    if (n == 0 || !data->v || !data->rot || !data->mu || !data->sigma || !energy)
        return wkb_fail(err, WKB_EINVAL, "replica fits need levels (v, rot, mu, sigma) and the replicas' energies");
    if (shifts && (status = check_shifts(shifts, np, err)))
        return status;
    static const wkb_level_shifts none = {0, NULL, NULL, NULL, NULL, NULL, NULL};
    static const double zero_p[WKB_MAX_PARAMS] = {0};
    wkb_level_shifts empty = none;
    empty.p0 = zero_p;
    ctx.tab = shifts ? shifts : &empty;
    v = malloc(n * sizeof *v);
    rot = malloc(n * sizeof *rot);
    mu = malloc(n * sizeof *mu);
    E = malloc(n * sizeof *E);
    sigma = malloc(n * sizeof *sigma);
    calc = malloc(n * sizeof *calc);
    jac = malloc(n * np * sizeof *jac);
    ctx.well = wkb_well_alloc(&settings->levels);
    if (!v || !rot || !mu || !E || !sigma || !calc || !jac || !ctx.well) {
        status = wkb_fail(err, WKB_ENOMEM, "out of memory for replica fits of %zu levels", n);
        goto cleanup;
    }
    for (size_t r = 0; r < n_rep; r++) {
        wkb_replica_outcome *o = outcomes + r;
        memset(o, 0, sizeof *o);
        o->vD = o->asymptote = NAN;
        for (size_t k = 0; k < n_pred_v; k++)
            pred_energy[r * n_pred_v + k] = NAN;
        /* the replica's rows: those drawn at least once, each weighted by its count */
        size_t m = 0;
        for (size_t i = 0; i < n; i++) {
            const double c = count ? count[r * n + i] : 1.0;
            if (!(c > 0))
                continue;
            v[m] = data->v[i], rot[m] = data->rot[i], mu[m] = data->mu[i];
            E[m] = energy[r * n + i];
            sigma[m] = data->sigma[i] / sqrt(c);
            m++;
        }
        wkb_fit_data d = {m, v, rot, mu, E, sigma, data->energy_zero, NULL, NULL};
        wkb_fit_outcome out;
        size_t extrapolated = 0;
        ctx.extrapolated = &extrapolated;
        o->status = wkb_fit_run(start, &d, spec, settings, &source, &out, calc, jac, &o->error);
        memcpy(params + r * np, out.params, np * sizeof *params);
        o->stop = out.stop;
        o->chi_square = out.chi_square;
        o->iterations = out.iterations;
        o->n_rows = m;
        for (size_t k = 0; k < np; k++)
            o->insensitive |= out.insensitive[k];
        o->extrapolated_fit = extrapolated;
        if (o->status || !n_pred_v)
            continue;
        /* predictions at pred_mu, J = 0, with the same corrections */
        wkb_potential q;
        extrapolated = 0;
        int st = wkb_potential_init(&q, start->model, out.params, start->curve, &o->error);
        o->asymptote = st ? NAN : wkb_potential_asymptote(&q);
        if (!st)
            st = predict(&ctx, &q, pred_mu, pred_v, n_pred_v, pred_energy + r * n_pred_v, &o->pred_count, &o->vD,
                         &o->error);
        o->pred_status = st;
        o->extrapolated_pred = extrapolated;
    }
cleanup:
    wkb_well_free(ctx.well);
    free(v);
    free(rot);
    free(mu);
    free(E);
    free(sigma);
    free(calc);
    free(jac);
    return status;
}
