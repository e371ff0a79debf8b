/* fit_levels.c: the levels of a fit and their parameter derivatives.
 *
 * The row evaluator (fit_rows.h) solves every row it is given; the fits' evaluator (wkb_fit_evaluator,
 * fit_ladders.c) gives it the data rows, or the Chebyshev nodes of the rotational ladders it interpolates.
 * The evaluator gives, at one parameter point, every data row's level energy and dE/dp (first-order
 * WKB, dE_v/dp_k the orbit average of dV/dp_k, or an external level source such as the exact solver).
 * The data are visited grouped by (reduced mass, J(J+1)), in ascending v, so that each well
 * workspace is set once per evaluation. Each first-order level starts its Newton iteration from
 * its own value at the evaluator's previous evaluation carried linearly to the new parameters,
 * E + sum_k dE/dp_k dp_k (the error is second order in the step, so that late Levenberg-Marquardt
 * iterations need one orbit per level), corrected by the miss of that linear guess at the rows
 * solved just before it in the same well (extrapolated in v) or at the same v of the previous J(J+1)
 * (the miss is smooth: it lets early, large steps start as close); at the first evaluation, from the
 * same v at the previous J(J+1) of that reduced mass, E' + B_v' (x - x'); else from the neighbouring
 * v (quantize.c).
 * Everything is allocated with the evaluator; nothing is allocated per level or per evaluation.
 * Threads: the sorted rows are cut into contiguous parts, one per thread, each with its own well
 * workspace; a cut falls between reduced masses where that balances the parts, else between two
 * J(J+1) groups (the neighbour-J seed across such a cut is dropped: the first J of the later part
 * starts unseeded at the first evaluation, so its levels agree to the Newton tolerance, not bitwise).
 * An external level source (the exact solver) gets one context per thread when it can be cloned.
 * wkb_fit_levels: every bound level of one well with its gradient, and vD with its gradient (the
 * predictions of a fitted potential).
 */
#define _POSIX_C_SOURCE 200809L /* sysconf(_SC_NPROCESSORS_ONLN) */
#include <math.h>
#include <pthread.h>
#include <stdlib.h>
#include <unistd.h>
#include <string.h>

#include <gsl/gsl_math.h>

#include "wkb.h"
#include "fit_rows.h"

/* ------------------------------------------------------------------ the evaluator */

/* One thread's share of an evaluation: the sorted rows [lo, hi), its own well, its outcome. */
typedef struct {
    wkb_row_evaluator *ev;
    size_t lo, hi;
    wkb_well *well;
    wkb_level_source source; /* an external source: the evaluator's, or a clone of it (owned) */
    int owns_source;
    size_t n_level_calculations; /* levels computed by this part since the evaluator was made */
    /* the evaluation running */
    const wkb_potential *pot;
    const double *dA;
    double *calc, *jac;
    size_t bad_row;
    int status;
    wkb_error err;
} fit_part;

struct wkb_row_evaluator {
    size_t n;
    const wkb_fit_data *data;
    size_t *order;  /* row indices sorted by (mu, rot, v) */
    const wkb_level_source *source; /* NULL: first-order WKB levels */
    fit_part part[WKB_FIT_MAX_THREADS];
    size_t n_parts;
    /* seeds (WKB only), per sorted row s: the level energy, B_v and dE/dp (np each) of the last
       evaluation that succeeded (seed_*, at seed_p) and of the one running (cur_*); prev_j[s]: the
       sorted row of the same (mu, model, v) at the previous J(J+1), or -1 */
    double *seed_E, *seed_dE, *cur_E, *cur_Bv, *cur_dE;
    double seed_p[WKB_MAX_PARAMS];
    size_t seed_np; /* parameters per row in seed_dE, cur_dE (allocated at the first evaluation) */
    int have_seed;
    long *prev_j;
};

/* wkb_set_fit_threads: the core's one process-wide setting (a thread budget, like a pool's size),
   read once per evaluator; atomic so that a fit running on another thread reads it race-free */
static int fit_threads_setting = 0;

int wkb_set_fit_threads(int n)
{
    return __atomic_exchange_n(&fit_threads_setting, n < 0 ? 0 : GSL_MIN(n, WKB_FIT_MAX_THREADS), __ATOMIC_SEQ_CST);
}

size_t wkb_rows_level_calculations(const wkb_row_evaluator *ev)
{
    size_t n = 0;
    for (size_t k = 0; ev && k < ev->n_parts; k++)
        n += ev->part[k].n_level_calculations;
    return n;
}

size_t wkb_rows_orbits(const wkb_row_evaluator *ev)
{
    size_t n = 0;
    for (size_t k = 0; ev && k < ev->n_parts; k++)
        n += ev->part[k].well ? wkb_well_orbits(ev->part[k].well) : 0;
    return n;
}

size_t wkb_rows_threads(const wkb_row_evaluator *ev)
{
    return ev ? ev->n_parts : 0;
}

/* Sort key order: reduced mass, then rotation, then v. */
static int row_before(const wkb_fit_data *d, size_t a, size_t b)
{
    if (d->mu[a] != d->mu[b])
        return d->mu[a] < d->mu[b];
    if (d->rot[a] != d->rot[b])
        return d->rot[a] < d->rot[b];
    return d->v[a] < d->v[b];
}

/* Stable bottom-up merge sort of idx[n] by before(d, a, b) (scratch[n] is work space); the rows' and the
   ladders' orders (fit_ladders.c) both use it. */
void wkb_rows_sort(const wkb_fit_data *d, size_t *idx, size_t *scratch, size_t n,
                   int (*before)(const wkb_fit_data *, size_t, size_t))
{
    for (size_t width = 1; width < n; width *= 2) {
        for (size_t lo = 0; lo < n; lo += 2 * width) {
            const size_t mid = GSL_MIN(lo + width, n), hi = GSL_MIN(lo + 2 * width, n);
            size_t i = lo, j = mid, k = lo;
            while (i < mid && j < hi)
                scratch[k++] = before(d, idx[j], idx[i]) ? idx[j++] : idx[i++];
            while (i < mid)
                scratch[k++] = idx[i++];
            while (j < hi)
                scratch[k++] = idx[j++];
        }
        memcpy(idx, scratch, n * sizeof *idx);
    }
}

/* A data row's value (and its derivatives in row, when not NULL) from its level E and dE/dp, by the energy
   zero: E itself (the minimum), asym - E (below the asymptote, dA its derivatives) or E - ref_E (above the
   reference level). The row evaluator and the ladder interpolation (fit_ladders.c) both use it. */
double wkb_rows_value(int energy_zero, double E, const double *dE, double asym, const double *dA, double ref_E,
                      const double *ref_dE, size_t np, double *row)
{
    switch (energy_zero) {
    case WKB_ZERO_MINIMUM:
        if (row)
            memcpy(row, dE, np * sizeof *row);
        return E;
    case WKB_ZERO_ASYMPTOTE:
        for (size_t k = 0; row && k < np; k++)
            row[k] = dA[k] - dE[k];
        return asym - E;
    default: /* WKB_ZERO_LOWEST */
        for (size_t k = 0; row && k < np; k++)
            row[k] = dE[k] - ref_dE[k];
        return E - ref_E;
    }
}

int wkb_fit_check_data(const wkb_fit_data *d, wkb_error *err)
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
        if (d->offset && !isfinite(d->offset[i]))
            return wkb_fail(err, WKB_EINVAL, "row %zu: correction %g is not finite", i + 1, d->offset[i]);
        if (d->sigma && !(isfinite(d->sigma[i]) && d->sigma[i] > 0))
            return wkb_fail(err, WKB_EINVAL, "row %zu: uncertainty %g is invalid: it must be > 0", i + 1,
                            d->sigma[i]);
    }
    return WKB_SUCCESS;
}

/* The seed arrays and prev_j (rows sorted by mu, rot, v: the previous row of the same v and model in
   the same mu block is the last one seen, kept per v in a table); non-zero when out of memory. */
static int set_prev_j(wkb_row_evaluator *ev)
{
    const wkb_fit_data *d = ev->data;
    const size_t n = ev->n;
    int v_max = 0;
    for (size_t i = 0; i < n; i++)
        v_max = GSL_MAX(v_max, d->v[i]);
    long *last = malloc(((size_t)v_max + 1) * sizeof *last);
    ev->prev_j = malloc(n * sizeof *ev->prev_j);
    ev->seed_E = malloc(n * sizeof(double));
    ev->cur_E = malloc(n * sizeof(double));
    ev->cur_Bv = malloc(n * sizeof(double));
    if (!last || !ev->prev_j || !ev->seed_E || !ev->cur_E || !ev->cur_Bv) {
        free(last);
        return 1;
    }
    for (int v = 0; v <= v_max; v++)
        last[v] = -1;
    for (size_t s = 0; s < n; s++) {
        const size_t i = ev->order[s];
        if (s > 0) {
            const size_t h = ev->order[s - 1];
            if (d->mu[h] != d->mu[i])
                for (int v = 0; v <= v_max; v++)
                    last[v] = -1;
        }
        const long p = last[d->v[i]];
        const int same_model = p >= 0 && (!d->level_model || d->level_model[ev->order[p]] == d->level_model[i]);
        ev->prev_j[s] = p >= 0 && same_model && d->rot[ev->order[p]] < d->rot[i] ? p : -1;
        last[d->v[i]] = (long)s;
    }
    free(last);
    return 0;
}

/* Sorted row s (> 0) begins another (mu, J(J+1), model) group. */
static int starts_group(const wkb_row_evaluator *ev, size_t s)
{
    const wkb_fit_data *d = ev->data;
    const size_t a = ev->order[s - 1], b = ev->order[s];
    return d->mu[a] != d->mu[b] || d->rot[a] != d->rot[b] ||
           (d->level_model && d->level_model[a] != d->level_model[b]);
}

/* The threads wanted: the setting, or the online CPUs when it is 0; one for an external level source
   (one workspace) and below WKB_FIT_THREAD_MIN_ROWS rows, where starting threads costs more than it saves. */
static size_t threads_wanted(const wkb_row_evaluator *ev)
{
    long n = __atomic_load_n(&fit_threads_setting, __ATOMIC_SEQ_CST);
    const size_t min_rows = ev->source ? WKB_FIT_THREAD_MIN_ROWS_SOURCE : WKB_FIT_THREAD_MIN_ROWS;
    if (n == 0) {
        /* (small evaluators and single groups, made per call by the corrected fits, skip the CPU count) */
        size_t s = 1;
        while (s < ev->n && !starts_group(ev, s))
            s++;
        n = ev->n < min_rows || s == ev->n ? 1 : sysconf(_SC_NPROCESSORS_ONLN);
    }
    if ((ev->source && !(ev->source->clone && ev->source->release)) || n < 1)
        n = 1;
    return (size_t)GSL_MIN(n, WKB_FIT_MAX_THREADS);
}

/* Cuts the sorted rows into at most `want` contiguous parts near k n / want: at the nearest change of
   reduced mass when it is within n / (4 want) of that, else at the nearest change of (mu, J(J+1)) group
   (the cut rows' neighbour-J seeds are dropped). Fewer parts when the groups run out. */
static void split_rows(wkb_row_evaluator *ev, size_t want)
{
    const size_t n = ev->n;
    size_t parts = 1, lo = 0;
    ev->part[0].lo = 0;
    for (size_t k = 1; k < want; k++) {
        const double ideal = (double)k * n / want, slack = n / (4.0 * want);
        long best_mu = -1, best_group = -1;
        for (size_t s = lo + 1; s < n; s++) {
            if (!starts_group(ev, s))
                continue;
            if (best_group < 0 || fabs(s - ideal) < fabs(best_group - ideal))
                best_group = (long)s;
            if (ev->data->mu[ev->order[s]] != ev->data->mu[ev->order[s - 1]] &&
                (best_mu < 0 || fabs(s - ideal) < fabs(best_mu - ideal)))
                best_mu = (long)s;
        }
        const long cut = best_mu >= 0 && fabs(best_mu - ideal) <= slack ? best_mu : best_group;
        if (cut < 0)
            break;
        ev->part[parts - 1].hi = (size_t)cut;
        ev->part[parts].lo = lo = (size_t)cut;
        parts++;
    }
    ev->part[parts - 1].hi = n;
    ev->n_parts = parts;
    for (size_t k = 0; ev->prev_j && k < parts; k++)
        for (size_t s = ev->part[k].lo; s < ev->part[k].hi; s++)
            if (ev->prev_j[s] >= 0 && (size_t)ev->prev_j[s] < ev->part[k].lo)
                ev->prev_j[s] = -1; /* a seed from another thread's rows */
}

wkb_row_evaluator *wkb_rows_alloc(const wkb_fit_data *data, const wkb_settings *levels,
                                           const wkb_level_source *source, wkb_error *err)
{
    wkb_row_evaluator *ev = NULL;
    size_t *scratch = NULL;
    if (wkb_fit_check_data(data, err))
        return NULL;
    if (!(ev = calloc(1, sizeof *ev)))
        goto nomem;
    ev->n = data->n;
    ev->data = data;
    ev->source = source;
    if (!(ev->order = malloc(data->n * sizeof *ev->order)) || !(scratch = malloc(data->n * sizeof *scratch)))
        goto nomem;
    for (size_t i = 0; i < data->n; i++)
        ev->order[i] = i;
    wkb_rows_sort(data, ev->order, scratch, data->n, row_before);
    free(scratch);
    scratch = NULL;
    if (!source && set_prev_j(ev))
        goto nomem;
    split_rows(ev, threads_wanted(ev));
    for (size_t k = 0; k < ev->n_parts; k++) {
        fit_part *part = &ev->part[k];
        part->ev = ev;
        if (!source && !(part->well = wkb_well_alloc(levels))) {
            wkb_fail(err, WKB_EINVAL, "invalid level settings (or out of memory) for the WKB workspace");
            goto fail;
        }
        if (source) {
            part->source = *source;
            if (k > 0) {
                if (!(part->source.ctx = source->clone(source->clone_arg)))
                    goto nomem;
                part->owns_source = 1;
            }
        }
    }
    return ev;
nomem:
    wkb_fail(err, WKB_ENOMEM, "out of memory for a fit of %zu levels", data->n);
fail:
    free(scratch);
    wkb_rows_free(ev);
    return NULL;
}

void wkb_rows_free(wkb_row_evaluator *ev)
{
    if (!ev)
        return;
    for (size_t k = 0; k < ev->n_parts; k++) {
        wkb_well_free(ev->part[k].well);
        if (ev->part[k].owns_source)
            ev->part[k].source.release(ev->part[k].source.ctx);
    }
    free(ev->order);
    free(ev->seed_E);
    free(ev->seed_dE);
    free(ev->cur_E);
    free(ev->cur_Bv);
    free(ev->cur_dE);
    free(ev->prev_j);
    free(ev);
}

/* d(asymptote)/dp_k by central differences (exact for the models, whose asymptote is
   linear in their parameters); the perturbed potential needs no validity check because
   only model->asymptote is called. */
void wkb_asymptote_gradient(const wkb_potential *pot, double *dA)
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

/* One level of the current well (WKB) or of the external source; Bv may be NULL. */
static int level_of(fit_part *part, int v, double seed_E, int strong, double *energy, double *Bv, double *dEdp,
                    wkb_error *err)
{
    const wkb_row_evaluator *ev = part->ev;
    part->n_level_calculations++;
    if (ev->source)
        return part->source.level(part->source.ctx, v, energy, dEdp, err);
    wkb_level level;
    int status = wkb_level_at_seeded(part->well, v, wkb_well_top(part->well) - seed_E, strong, &level, dEdp, err);
    if (status)
        return status;
    *energy = level.energy;
    if (Bv)
        *Bv = level.Bv;
    return WKB_SUCCESS;
}

/* The linear change of sorted row s's level since the last evaluation, sum_k dE/dp_k (p_k - seed_p_k). */
static double seed_change(const wkb_row_evaluator *ev, const wkb_potential *pot, size_t s)
{
    const size_t np = pot->model->n_params;
    double change = 0;
    for (size_t k = 0; k < np; k++)
        change += ev->seed_dE[s * np + k] * (pot->p[k] - ev->seed_p[k]);
    return change;
}

/* How far the linear guess of sorted row s (solved already in this evaluation) was from its level. */
static double seed_miss(const wkb_row_evaluator *ev, const wkb_potential *pot, size_t s)
{
    return ev->cur_E[s] - (ev->seed_E[s] + seed_change(ev, pot, s));
}

/* The polynomial through (x[i], y[i]), i < n (n = 1..3, distinct x), at x0. */
static double lagrange_at(double x0, const double *x, const double *y, size_t n)
{
    double sum = 0;
    for (size_t i = 0; i < n; i++) {
        double term = y[i];
        for (size_t j = 0; j < n; j++)
            if (j != i)
                term *= (x0 - x[j]) / (x[i] - x[j]);
        sum += term;
    }
    return sum;
}

/* The first guess of sorted row s (NAN: none), see the file comment; *strong when it is to be taken
   over the neighbours' extrapolation.
   With a previous evaluation: its level moved linearly, seed_E + dE/dp (p - seed_p). Where rows solved
   before it in this evaluation by this part (rows lo..s-1) tell how far that linear guess misses, the
   miss is added, extrapolated linearly in v along the well (rows s-1, s-2), else taken from the same v
   at the previous J: the miss varies slowly along a well and with J, and the guess so corrected is
   strong. Measured on the first step of the 50-level fits of tests/benchmarks/bench_fit.py: the linear
   guess alone misses levels v = 2..10 by 0.1-0.5 cm-1 (two orbits each), the corrected one by 5e-4 (one
   orbit); orbits of the whole fits 290, 214, 308 -> 274, 211, 280.
   Without such rows: the linear guess, strong when the level moved by less than SEED_STRONG_CHANGE
   cm-1 (a larger move is left to the neighbours' extrapolation where it exists). Measured in orbits per
   level and evaluation: 1e-3 to 1 cost the same on the 20 000-level Lennard-Jones fit (1.10-1.12;
   1.15-1.18 unseeded), 1 the fewest on the 500-level MLR scan fit (1.49-1.63; 2.1-2.3 unseeded,
   1.45-1.64 always seeded). */
#define SEED_STRONG_CHANGE 1.0
static double seed_of(const wkb_row_evaluator *ev, const wkb_potential *pot, size_t lo, size_t s, int *strong)
{
    *strong = 0;
    if (ev->source)
        return NAN;
    if (ev->have_seed) {
        const double change = seed_change(ev, pot, s), linear = ev->seed_E[s] + change;
        double miss = NAN;
        if (s >= lo + 1 && !starts_group(ev, s)) {
            /* the misses of up to three rows before it in the well, through a polynomial in v */
            double xv[3], m[3];
            size_t k = 0;
            for (; k < 3 && s >= lo + k + 1 && (k == 0 || !starts_group(ev, s - k)); k++) {
                xv[k] = ev->data->v[ev->order[s - k - 1]];
                m[k] = seed_miss(ev, pot, s - k - 1);
                if (k && xv[k] == xv[k - 1])
                    break; /* (the same v twice: no slope) */
            }
            miss = lagrange_at(ev->data->v[ev->order[s]], xv, m, k);
        } else if (ev->prev_j[s] >= (long)lo) {
            miss = seed_miss(ev, pot, (size_t)ev->prev_j[s]);
        }
        if (isfinite(miss)) {
            *strong = 1;
            return linear + miss;
        }
        *strong = fabs(change) <= SEED_STRONG_CHANGE;
        return linear;
    }
    const long p = ev->prev_j[s];
    if (p >= 0 && isfinite(ev->cur_Bv[p]))
        return ev->cur_E[p] + ev->cur_Bv[p] * (ev->data->rot[ev->order[s]] - ev->data->rot[ev->order[p]]);
    return NAN;
}

static int set_well(fit_part *part, const wkb_potential *pot, double mu, double rot, wkb_error *err)
{
    const wkb_row_evaluator *ev = part->ev;
    if (ev->source)
        return part->source.set(part->source.ctx, pot, mu, rot, err);
    return wkb_well_set(part->well, pot, mu, rot, 1, 1, err);
}

/* The rows of one part (a thread's body: pure C, no shared writes outside its rows); the outcome in
   part->status, part->err, part->bad_row (the row being computed when a level failed). */
static void *evaluate_part(void *arg)
{
    fit_part *part = arg;
    wkb_row_evaluator *ev = part->ev;
    const wkb_fit_data *d = ev->data;
    const wkb_potential *pot = part->pot;
    const size_t np = pot->model->n_params;
    const double asym = wkb_potential_asymptote(pot), *dA = part->dA;
    double dE[WKB_MAX_PARAMS], ref_dE[WKB_MAX_PARAMS], ref_E = 0;
    double cur_mu = NAN, cur_rot = NAN, ref_mu = NAN;
    const wkb_model *cur_model = NULL;
    double *calc = part->calc, *jac = part->jac;
    /* without a Jacobian wanted, levels only: the exact solver's <v|dV/dp|v> costs about three times
       its level, the orbit averages of dV/dp a part of each orbit (such an evaluation then leaves no
       seeds for the next one, which need dE/dp: see wkb_rows_evaluate) */
    const int want_dE = jac != NULL;
    wkb_error *err = &part->err;
    int status = WKB_SUCCESS;

    for (size_t s = part->lo; s < part->hi; s++) {
        const size_t i = ev->order[s];
        const double mu = d->mu[i], rot = d->rot[i];
        part->bad_row = i;
        if (d->energy_zero == WKB_ZERO_LOWEST && mu != ref_mu) {
            /* the data zero of this isotopologue: its level v=0, J=0 */
            if ((status = set_well(part, pot, mu, 0.0, err)))
                break;
            cur_mu = mu, cur_rot = 0.0, cur_model = NULL;
            if ((status = level_of(part, 0, NAN, 0, &ref_E, NULL, want_dE ? ref_dE : NULL, err)))
                break;
            ref_mu = mu;
        }
        /* a level with a model of its own (Born-Oppenheimer correction variant) */
        const wkb_model *lm = d->level_model ? d->level_model[i] : NULL;
        if (mu != cur_mu || rot != cur_rot || lm != cur_model) {
            wkb_potential variant = *pot;
            if (lm)
                variant.model = lm;
            if ((status = set_well(part, &variant, mu, rot, err)))
                break;
            cur_mu = mu, cur_rot = rot, cur_model = lm;
        }
        double E, Bv = NAN;
        int strong;
        const double seed = seed_of(ev, pot, part->lo, s, &strong);
        if ((status = level_of(part, d->v[i], seed, strong, &E, &Bv, want_dE ? dE : NULL, err)))
            break;
        if (!ev->source) {
            ev->cur_E[s] = E;
            ev->cur_Bv[s] = Bv;
            if (np && want_dE)
                memcpy(ev->cur_dE + s * np, dE, np * sizeof *dE);
        }
        double *row = jac ? jac + i * np : NULL;
        calc[i] = wkb_rows_value(d->energy_zero, E, dE, asym, dA, ref_E, ref_dE, np, row);
        if (d->offset)
            calc[i] += d->offset[i]; /* fixed per-row correction (see wkb_fit_data) */
        if (!isfinite(calc[i])) {
            status = wkb_fail(err, WKB_ENUMERIC, "the calculated energy of row %zu is not finite", i + 1);
            break;
        }
        for (size_t k = 0; row && k < np; k++)
            if (!isfinite(row[k])) {
                status = wkb_fail(err, WKB_ENUMERIC, "the derivative of row %zu with respect to %s is not finite",
                                  i + 1, pot->model->param_names[k]);
                break;
            }
        if (status)
            break;
    }
    part->status = status;
    return NULL;
}

int wkb_rows_evaluate(wkb_row_evaluator *ev, const wkb_potential *pot, double *calc, double *jac, size_t *bad_row,
                     wkb_error *err)
{
    const wkb_fit_data *d = ev->data;
    const size_t np = pot->model->n_params;
    double dA[WKB_MAX_PARAMS] = {0};
    pthread_t thread[WKB_FIT_MAX_THREADS];
    int started[WKB_FIT_MAX_THREADS] = {0};

    if (d->energy_zero == WKB_ZERO_ASYMPTOTE)
        wkb_asymptote_gradient(pot, dA);
    if (!ev->source && ev->seed_np != np) {
        /* the seeds' derivatives, np per row (a new model: no seeds) */
        double *a = realloc(ev->seed_dE, (ev->n * np + 1) * sizeof(double));
        if (a)
            ev->seed_dE = a;
        double *b = realloc(ev->cur_dE, (ev->n * np + 1) * sizeof(double));
        if (b)
            ev->cur_dE = b;
        if (!a || !b)
            return wkb_fail(err, WKB_ENOMEM, "out of memory for the seeds of %zu levels", ev->n);
        ev->seed_np = np;
        ev->have_seed = 0;
    }
    for (size_t k = 0; k < ev->n_parts; k++) {
        fit_part *part = &ev->part[k];
        part->pot = pot, part->dA = dA, part->calc = calc, part->jac = jac;
        part->status = WKB_SUCCESS, part->bad_row = 0;
        part->err = (wkb_error){0};
    }
    /* parts 1.. on their own threads (a part whose thread cannot start runs here, after part 0) */
    for (size_t k = 1; k < ev->n_parts; k++)
        started[k] = !pthread_create(&thread[k], NULL, evaluate_part, &ev->part[k]);
    evaluate_part(&ev->part[0]);
    for (size_t k = 1; k < ev->n_parts; k++) {
        if (started[k])
            pthread_join(thread[k], NULL);
        else
            evaluate_part(&ev->part[k]);
    }
    /* the first failure in the sorted order, as a single thread would have met it */
    for (size_t k = 0; k < ev->n_parts; k++) {
        const fit_part *part = &ev->part[k];
        if (part->status) {
            if (bad_row)
                *bad_row = part->bad_row;
            if (err)
                *err = part->err;
            return part->status;
        }
    }
    if (!ev->source && jac) {
        /* this evaluation seeds the next one */
        double *t = ev->seed_E;
        ev->seed_E = ev->cur_E, ev->cur_E = t;
        t = ev->seed_dE;
        ev->seed_dE = ev->cur_dE, ev->cur_dE = t;
        memcpy(ev->seed_p, pot->p, np * sizeof *pot->p);
        ev->have_seed = 1;
    } else if (!ev->source) {
        ev->have_seed = 0; /* (levels without dE/dp: the next evaluation is seeded from neighbouring J) */
    }
    return WKB_SUCCESS;
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
