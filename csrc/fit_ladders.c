/* fit_ladders.c: the fit's level evaluator (wkb_fit_evaluator), with rotational ladders interpolated
 * in J(J+1).
 *
 * A ladder is the rows of one (reduced mass, level model, v) at many J. A first-order level and its
 * dE/dp are smooth (analytic) in x = J(J+1) over the bound range, so where a ladder has at least
 * WKB_LADDER_MIN_J distinct x values its levels are computed only at WKB_LADDER_NODES
 * Chebyshev-Lobatto nodes of its range [x_min, x_max] (the ends are data values: those rows are node
 * levels themselves) and every row of it is the barycentric interpolant of the node values. Ladders of
 * one reduced mass with the same range share their nodes, hence their wells: the 20 000-level benchmark
 * fit (8 isotopologues, v = 0..24, J = 0..99) solves 13 wells of 25 levels per isotopologue per
 * evaluation instead of 100.
 * Accuracy, checked at every evaluation: twice the last two Chebyshev coefficients of the node values
 * estimate the interpolation error (the series converges geometrically); the energies' must be below the level solve's own tolerance
 * (energy_tol + 4e-14 |E|), each dE/dp_k's below WKB_LADDER_JAC_TOL of its largest node value. Measured
 * on the benchmark's wells (LJ (12,6), 4000 cm-1, mu 20 u): 13 nodes reproduce every directly solved
 * level of J = 0..99 to 2e-12 cm-1 (the levels' rounding) and dE/dp to 8e-7 relative (the directly
 * solved derivatives' own scatter: the same for 9 to 33 nodes). A ladder that fails its check (levels
 * that bend fast next to the last bound J) has its rows solved directly from then on: the plan is made
 * again without it and the evaluation repeated; with no ladder left, the row evaluator runs on the data
 * itself (fit_levels.c: the path before the interpolation, bit for bit). So does an evaluation where a
 * node level fails (bad_row and the message are then those of the direct solve). The node levels and the
 * rows of short ladders (solved directly) form one task list for the row evaluator (its seeds, threads
 * and well sharing); energy zeros, per-row corrections and the checks of finiteness are applied here to
 * the assembled rows.
 * Only first-order Maslov levels of the analytic models are interpolated: an external source (the exact
 * solver), other rules and the point-wise curve (its cubic pieces make the levels only piecewise smooth in
 * J(J+1)) run on the data.
 */
#include <math.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include <gsl/gsl_math.h>

#include "wkb.h"
#include "fit_rows.h"

/* wkb_set_fit_interpolation: process-wide, read once per evaluator (as wkb_set_fit_threads) */
static int interpolation_setting = 1;

int wkb_set_fit_interpolation(int on)
{
    return __atomic_exchange_n(&interpolation_setting, on ? 1 : 0, __ATOMIC_SEQ_CST);
}

struct wkb_fit_evaluator {
    const wkb_fit_data *data;
    wkb_settings levels;
    const wkb_level_source *source;
    wkb_row_evaluator *direct; /* the rows solved directly (made when needed) */
    /* the interpolation (active while every check passed) */
    int active;
    wkb_row_evaluator *nodes; /* over tasks */
    wkb_fit_data tasks;       /* node levels, short ladders' rows, the v=0, J=0 references; zero: minimum */
    int *task_v;
    double *task_rot, *task_mu;
    const wkb_model **task_model;
    size_t n_tasks, n_ladders;
    size_t *ladder_base; /* first of each ladder's WKB_LADDER_NODES consecutive node tasks */
    long *row_task;      /* per row: its own task, or -1 - L (interpolated in ladder L) */
    long *row_slot;      /* per interpolated row: its weights' slot in row_weight (else -1) */
    long *row_ref;       /* per row (zero "lowest"): the task of its reference level */
    double *row_weight;  /* per slot: WKB_LADDER_NODES barycentric weights */
    char *rejected;      /* per row: its ladder failed the check (solved directly from then on) */
    double cheb_next[WKB_LADDER_NODES]; /* cos(pi j (N-2)/(N-1)): the next-to-last coefficient */
    double *task_E, *task_dE;
    size_t task_np;
    size_t retired_levels, retired_orbits; /* the counts of node evaluators replaced by a new plan */
};

/* ------------------------------------------------------------------ the plan */

/* Ladder order: reduced mass, level model, v, then J(J+1). */
static int ladder_before(const wkb_fit_data *d, size_t a, size_t b)
{
    if (d->mu[a] != d->mu[b])
        return d->mu[a] < d->mu[b];
    const wkb_model *ma = d->level_model ? d->level_model[a] : NULL, *mb = d->level_model ? d->level_model[b] : NULL;
    if (ma != mb)
        return (uintptr_t)ma < (uintptr_t)mb;
    if (d->v[a] != d->v[b])
        return d->v[a] < d->v[b];
    return d->rot[a] < d->rot[b];
}

static int same_ladder(const wkb_fit_data *d, size_t a, size_t b)
{
    return d->mu[a] == d->mu[b] && d->v[a] == d->v[b] &&
           (!d->level_model || d->level_model[a] == d->level_model[b]);
}

/* Node j of [lo, hi]: hi at j = 0, lo at j = N - 1 (exactly), the centre exactly when N is odd. */
static double node_x(double lo, double hi, size_t j)
{
    const size_t N = WKB_LADDER_NODES;
    if (j == 0)
        return hi;
    if (j == N - 1)
        return lo;
    if (2 * j == N - 1)
        return 0.5 * (lo + hi);
    return 0.5 * (lo + hi) + 0.5 * (hi - lo) * cos(M_PI * (double)j / (double)(N - 1));
}

/* The barycentric weights of the Chebyshev-Lobatto interpolant through the nodes xs at x (w_j = (-1)^j,
   halved at the ends; Berrut & Trefethen, SIAM Review 46, 501 (2004)), normalised to sum 1; at a node,
   that node's value. */
static void weights_at(const double *xs, double x, double *out)
{
    const size_t N = WKB_LADDER_NODES;
    double sum = 0;
    for (size_t j = 0; j < N; j++) {
        if (x == xs[j]) {
            for (size_t k = 0; k < N; k++)
                out[k] = k == j;
            return;
        }
        const double w = (j % 2 ? -1.0 : 1.0) * (j == 0 || j == N - 1 ? 0.5 : 1.0);
        out[j] = w / (x - xs[j]);
        sum += out[j];
    }
    const double scale = 1 / sum;
    for (size_t j = 0; j < N; j++)
        out[j] *= scale;
}

static int grow_tasks(wkb_fit_evaluator *ev, size_t cap)
{
    int *v = realloc(ev->task_v, cap * sizeof *v);
    if (v)
        ev->task_v = v;
    double *rot = realloc(ev->task_rot, cap * sizeof *rot);
    if (rot)
        ev->task_rot = rot;
    double *mu = realloc(ev->task_mu, cap * sizeof *mu);
    if (mu)
        ev->task_mu = mu;
    const wkb_model **m = realloc(ev->task_model, cap * sizeof *m);
    if (m)
        ev->task_model = m;
    return !(v && rot && mu && m);
}

static size_t add_task(wkb_fit_evaluator *ev, int v, double rot, double mu, const wkb_model *model)
{
    const size_t t = ev->n_tasks++;
    ev->task_v[t] = v, ev->task_rot[t] = rot, ev->task_mu[t] = mu, ev->task_model[t] = model;
    return t;
}

/* The ladders worth interpolating (not rejected), their node tasks and the rows' weights; ev->active when
   there is one. Non-zero when out of memory. */
static int make_plan(wkb_fit_evaluator *ev)
{
    const wkb_fit_data *d = ev->data;
    const size_t n = d->n, N = WKB_LADDER_NODES;
    size_t *idx = malloc(n * sizeof *idx), *scratch = malloc(n * sizeof *scratch);
    int status = 1;
    ev->active = 0;
    ev->n_tasks = ev->n_ladders = 0;
    free(ev->ladder_base);
    free(ev->row_weight);
    ev->ladder_base = NULL, ev->row_weight = NULL;
    if (!ev->row_task) {
        ev->row_task = malloc(n * sizeof *ev->row_task);
        ev->row_slot = malloc(n * sizeof *ev->row_slot);
        ev->row_ref = malloc(n * sizeof *ev->row_ref);
        ev->rejected = calloc(n, 1);
    }
    if (!idx || !scratch || !ev->row_task || !ev->row_slot || !ev->row_ref || !ev->rejected)
        goto done;
    for (size_t i = 0; i < n; i++)
        idx[i] = i;
    wkb_rows_sort(d, idx, scratch, n, ladder_before);
    /* count the ladders that qualify (and their rows) first */
    size_t n_ladders = 0, n_interp = 0, n_mu = 0;
    for (size_t a = 0, b; a < n; a = b) {
        size_t distinct = 1;
        for (b = a + 1; b < n && same_ladder(d, idx[a], idx[b]); b++)
            distinct += d->rot[idx[b]] != d->rot[idx[b - 1]];
        if (distinct >= WKB_LADDER_MIN_J && !ev->rejected[idx[a]]) {
            n_ladders++;
            n_interp += b - a;
        }
        if (a == 0 || d->mu[idx[a]] != d->mu[idx[a - 1]])
            n_mu++;
    }
    status = 0;
    if (n_ladders == 0)
        goto done; /* nothing to interpolate: the rows are solved directly */
    status = 1;
    const size_t cap = (n - n_interp) + n_ladders * N + n_mu;
    ev->ladder_base = malloc(n_ladders * sizeof *ev->ladder_base);
    ev->row_weight = malloc((n_interp + 1) * N * sizeof *ev->row_weight);
    if (!ev->ladder_base || !ev->row_weight || grow_tasks(ev, cap))
        goto done;
    size_t used = 0;
    long ref = -1;
    for (size_t a = 0, b; a < n; a = b) {
        const size_t i0 = idx[a];
        if (d->energy_zero == WKB_ZERO_LOWEST && (a == 0 || d->mu[i0] != d->mu[idx[a - 1]]))
            ref = (long)add_task(ev, 0, 0.0, d->mu[i0], NULL); /* this reduced mass's v=0, J=0 (data zero) */
        size_t distinct = 1;
        for (b = a + 1; b < n && same_ladder(d, i0, idx[b]); b++)
            distinct += d->rot[idx[b]] != d->rot[idx[b - 1]];
        const wkb_model *model = d->level_model ? d->level_model[i0] : NULL;
        if (distinct >= WKB_LADDER_MIN_J && !ev->rejected[i0]) {
            const double lo = d->rot[idx[a]], hi = d->rot[idx[b - 1]];
            const size_t L = ev->n_ladders++;
            ev->ladder_base[L] = ev->n_tasks;
            double xs[WKB_LADDER_NODES];
            for (size_t j = 0; j < N; j++)
                add_task(ev, d->v[i0], xs[j] = node_x(lo, hi, j), d->mu[i0], model);
            for (size_t s = a; s < b; s++) {
                const size_t i = idx[s];
                ev->row_task[i] = -1 - (long)L;
                ev->row_slot[i] = (long)used;
                weights_at(xs, d->rot[i], ev->row_weight + used * N);
                used++;
                ev->row_ref[i] = ref;
            }
        } else {
            for (size_t s = a; s < b; s++) {
                const size_t i = idx[s];
                ev->row_task[i] = (long)add_task(ev, d->v[i], d->rot[i], d->mu[i], model);
                ev->row_slot[i] = -1;
                ev->row_ref[i] = ref;
            }
        }
    }
    ev->tasks = (wkb_fit_data){.n = ev->n_tasks, .v = ev->task_v, .rot = ev->task_rot, .mu = ev->task_mu,
                               .energy_zero = WKB_ZERO_MINIMUM,
                               .level_model = d->level_model ? ev->task_model : NULL};
    for (size_t j = 0; j < N; j++)
        ev->cheb_next[j] = cos(M_PI * (double)j * (double)(N - 2) / (double)(N - 1));
    ev->active = 1;
    status = 0;
done:
    free(idx);
    free(scratch);
    return status;
}

/* ------------------------------------------------------------------ the evaluator */

wkb_fit_evaluator *wkb_fit_evaluator_alloc(const wkb_fit_data *data, const wkb_settings *levels,
                                           const wkb_level_source *source, wkb_error *err)
{
    wkb_fit_evaluator *ev;
    if (wkb_fit_check_data(data, err))
        return NULL;
    if (!(ev = calloc(1, sizeof *ev)))
        goto nomem;
    ev->data = data;
    ev->levels = *levels;
    ev->source = source;
    /* first-order Maslov levels only (the rule whose levels are smooth in J(J+1) by construction) */
    if (!source && levels->order == 1 && levels->ends == WKB_ENDS_MASLOV &&
        __atomic_load_n(&interpolation_setting, __ATOMIC_SEQ_CST) && make_plan(ev))
        goto nomem;
    if (ev->active) {
        if (!(ev->nodes = wkb_rows_alloc(&ev->tasks, levels, NULL, err)))
            goto fail;
    } else if (!(ev->direct = wkb_rows_alloc(data, levels, source, err))) {
        goto fail;
    }
    return ev;
nomem:
    wkb_fail(err, WKB_ENOMEM, "out of memory for a fit of %zu levels", data->n);
fail:
    wkb_fit_evaluator_free(ev);
    return NULL;
}

void wkb_fit_evaluator_free(wkb_fit_evaluator *ev)
{
    if (!ev)
        return;
    wkb_rows_free(ev->direct);
    wkb_rows_free(ev->nodes);
    free(ev->task_v);
    free(ev->task_rot);
    free(ev->task_mu);
    free(ev->task_model);
    free(ev->ladder_base);
    free(ev->row_task);
    free(ev->row_slot);
    free(ev->row_ref);
    free(ev->row_weight);
    free(ev->rejected);
    free(ev->task_E);
    free(ev->task_dE);
    free(ev);
}

size_t wkb_fit_evaluator_level_calculations(const wkb_fit_evaluator *ev)
{
    return ev ? ev->retired_levels + wkb_rows_level_calculations(ev->direct) + wkb_rows_level_calculations(ev->nodes)
              : 0;
}

size_t wkb_fit_evaluator_orbits(const wkb_fit_evaluator *ev)
{
    return ev ? ev->retired_orbits + wkb_rows_orbits(ev->direct) + wkb_rows_orbits(ev->nodes) : 0;
}

size_t wkb_fit_evaluator_threads(const wkb_fit_evaluator *ev)
{
    return ev ? GSL_MAX(wkb_rows_threads(ev->direct), wkb_rows_threads(ev->nodes)) : 0;
}

size_t wkb_fit_evaluator_interpolated_ladders(const wkb_fit_evaluator *ev)
{
    return ev && ev->active ? ev->n_ladders : 0;
}

/* |a_{N-2}| + |a_{N-1}| of the Chebyshev series through the node values f_j = f[j * stride] (a_k =
   2/(N-1) sum'' f_j cos(pi j k/(N-1)), the first and last terms halved, a_{N-1} halved again). */
static double chebyshev_tail(const wkb_fit_evaluator *ev, const double *f, size_t stride)
{
    const size_t N = WKB_LADDER_NODES;
    double last = 0, next = 0;
    for (size_t j = 0; j < N; j++) {
        const double h = j == 0 || j == N - 1 ? 0.5 : 1.0, fj = h * f[j * stride];
        last += j % 2 ? -fj : fj;
        next += fj * ev->cheb_next[j];
    }
    return (fabs(last) + 2 * fabs(next)) / (double)(N - 1);
}

/* The ladders whose nodes fail the accuracy check (see the file comment): their rows are marked rejected;
   returns how many. */
static size_t reject_inaccurate(wkb_fit_evaluator *ev, size_t np, int with_dE)
{
    const size_t N = WKB_LADDER_NODES;
    size_t bad = 0;
    for (size_t L = 0; L < ev->n_ladders; L++) {
        const size_t t0 = ev->ladder_base[L];
        double top = 0;
        for (size_t j = 0; j < N; j++)
            top = GSL_MAX(top, fabs(ev->task_E[t0 + j]));
        int ok = 2 * chebyshev_tail(ev, ev->task_E + t0, 1) <= ev->levels.energy_tol + 4e-14 * top;
        for (size_t k = 0; ok && with_dE && k < np; k++) {
            double scale = 0;
            for (size_t j = 0; j < N; j++)
                scale = GSL_MAX(scale, fabs(ev->task_dE[(t0 + j) * np + k]));
            ok = 2 * chebyshev_tail(ev, ev->task_dE + t0 * np + k, np) <= WKB_LADDER_JAC_TOL * scale;
        }
        if (ok)
            continue;
        bad++;
        for (size_t i = 0; i < ev->data->n; i++)
            if (ev->row_task[i] == -1 - (long)L)
                ev->rejected[i] = 1;
    }
    return bad;
}

/* A new plan without the rejected ladders, and its row evaluator; non-zero when out of memory. */
static int replan(wkb_fit_evaluator *ev, wkb_error *err)
{
    ev->retired_levels += wkb_rows_level_calculations(ev->nodes);
    ev->retired_orbits += wkb_rows_orbits(ev->nodes);
    wkb_rows_free(ev->nodes);
    ev->nodes = NULL;
    free(ev->task_E);
    free(ev->task_dE);
    ev->task_E = ev->task_dE = NULL;
    ev->task_np = 0;
    if (make_plan(ev))
        return wkb_fail(err, WKB_ENOMEM, "out of memory for a fit of %zu levels", ev->data->n);
    if (ev->active && !(ev->nodes = wkb_rows_alloc(&ev->tasks, &ev->levels, NULL, err))) {
        ev->active = 0;
        return err && err->status ? err->status : WKB_ENOMEM;
    }
    return WKB_SUCCESS;
}

/* The rows from the task levels: interpolated or copied, then in the data's energy zero with the
   per-row corrections (as the row evaluator does for the rows it solves). */
static int assemble(const wkb_fit_evaluator *ev, const wkb_potential *pot, double *calc, double *jac,
                    size_t *bad_row, wkb_error *err)
{
    const wkb_fit_data *d = ev->data;
    const size_t np = pot->model->n_params, N = WKB_LADDER_NODES;
    double dA[WKB_MAX_PARAMS] = {0};
    const double asym = wkb_potential_asymptote(pot);
    if (d->energy_zero == WKB_ZERO_ASYMPTOTE)
        wkb_asymptote_gradient(pot, dA);
    for (size_t i = 0; i < d->n; i++) {
        double E, dE[WKB_MAX_PARAMS];
        const long t = ev->row_task[i];
        if (t >= 0) {
            E = ev->task_E[t];
            for (size_t k = 0; jac && k < np; k++)
                dE[k] = ev->task_dE[(size_t)t * np + k];
        } else {
            const size_t t0 = ev->ladder_base[-1 - t];
            const double *w = ev->row_weight + (size_t)ev->row_slot[i] * N;
            E = 0;
            for (size_t j = 0; j < N; j++)
                E += w[j] * ev->task_E[t0 + j];
            for (size_t k = 0; jac && k < np; k++) {
                double s = 0;
                for (size_t j = 0; j < N; j++)
                    s += w[j] * ev->task_dE[(t0 + j) * np + k];
                dE[k] = s;
            }
        }
        double *row = jac ? jac + i * np : NULL;
        const int lowest = d->energy_zero == WKB_ZERO_LOWEST;
        const size_t r = lowest ? (size_t)ev->row_ref[i] : 0; /* the task of the reference level */
        calc[i] = wkb_rows_value(d->energy_zero, E, dE, asym, dA, lowest ? ev->task_E[r] : 0,
                                 lowest ? ev->task_dE + r * np : NULL, np, row);
        if (d->offset)
            calc[i] += d->offset[i];
        int finite = isfinite(calc[i]);
        for (size_t k = 0; row && k < np; k++)
            finite = finite && isfinite(row[k]);
        if (!finite) {
            if (bad_row)
                *bad_row = i;
            if (!isfinite(calc[i]))
                return wkb_fail(err, WKB_ENUMERIC, "the calculated energy of row %zu is not finite", i + 1);
            for (size_t k = 0; k < np; k++)
                if (!isfinite(row[k]))
                    return wkb_fail(err, WKB_ENUMERIC, "the derivative of row %zu with respect to %s is not finite",
                                    i + 1, pot->model->param_names[k]);
        }
    }
    return WKB_SUCCESS;
}

int wkb_fit_evaluate(wkb_fit_evaluator *ev, const wkb_potential *pot, double *calc, double *jac, size_t *bad_row,
                     wkb_error *err)
{
    const size_t np = pot->model->n_params;
    if (ev->active && pot->model == &wkb_model_pointwise)
        ev->active = 0; /* a spline's levels are only piecewise smooth in J(J+1): the tail check would not bound them */
    while (ev->active) {
        if (jac && ev->task_np != np) {
            double *a = realloc(ev->task_dE, (ev->n_tasks * np + 1) * sizeof *a);
            if (!a)
                return wkb_fail(err, WKB_ENOMEM, "out of memory for the node levels of %zu ladders", ev->n_ladders);
            ev->task_dE = a;
            ev->task_np = np;
        }
        if (!ev->task_E && !(ev->task_E = malloc(ev->n_tasks * sizeof *ev->task_E)))
            return wkb_fail(err, WKB_ENOMEM, "out of memory for the node levels of %zu ladders", ev->n_ladders);
        wkb_error e2 = {0};
        size_t bad = 0;
        int status = wkb_rows_evaluate(ev->nodes, pot, ev->task_E, jac ? ev->task_dE : NULL, &bad, &e2);
        if (status == WKB_ENOMEM) {
            if (err)
                *err = e2;
            return status;
        }
        if (status)
            break; /* a level failed: this evaluation solves the rows directly, so that the failure names the
                      data row and its level */
        if (!reject_inaccurate(ev, np, jac != NULL))
            return assemble(ev, pot, calc, jac, bad_row, err);
        /* some ladders are not smooth enough for the nodes: their rows are solved directly from now on */
        if ((status = replan(ev, err)))
            return status;
    }
    if (!ev->direct && !(ev->direct = wkb_rows_alloc(ev->data, &ev->levels, ev->source, err)))
        return err && err->status ? err->status : WKB_ENOMEM;
    return wkb_rows_evaluate(ev->direct, pot, calc, jac, bad_row, err);
}
