/* radial.c: exact bound levels of the radial Schroedinger equation
 *
 *     -eps u''(r) + [V(r) + eps J(J+1)/r^2] u(r) = E u(r),   eps = hbar^2/(2 mu),
 *
 * with the true centrifugal term, u = 0 at both ends, every level below the asymptote.
 *
 * Method
 * - Grid: a mapped variable x(r) with dx/dr = K(r) = [A/(1 + (rho/rho1)^2) + A2]/rho,
 *   rho = r + r_s, chosen per (potential, mu, J) so that K(r) follows the largest local
 *   wavenumber sqrt((asymptote - V_J)/eps) across the well (a phase step h per grid
 *   point) and falls off as A2/rho in the tail, where the last levels decay over
 *   thousands of angstrom. The closed-form x(r) is inverted by Newton's method, so the
 *   grid is exactly uniform in x.
 * - Liouville transformation to the uniform grid: u = w / sqrt(K) turns the equation into
 *   w''(x) = [(V_J - E)/eps + S(r)] / K^2 w with S = K''/(2K) - (3/4)(K'/K)^2 (the
 *   Schwarzian term), so Numerov's method applies unchanged.
 * - Numerov's method [B. Numerov (1924); see J. M. Blatt, J. Comput. Phys. 1, 382 (1967)]
 *   in Johnson's renormalized form [B. R. Johnson, J. Chem. Phys. 67, 4086 (1977)]: the
 *   three-term recurrence F_{i+1} + F_{i-1} = U_i F_i with F = (1 - T) w, T = h^2 Q/12,
 *   U = (2 + 10 T)/(1 - T) is a symmetric tridiagonal problem whose pivots count the
 *   levels below E (Sylvester's law of inertia / Sturm's theorem). Integrating outward
 *   to the outer turning point m and inward from the far end gives the twisted pivot
 *   gamma_m = U_m - F_{m-1}/F_m - G_{m+1}/G_m; the count is exact for the discrete
 *   problem, so v is identified by node counting.
 * - Energy correction: Newton's step on the discrete eigenvalue,
 *   dE = gamma_m F_m^2 / (12 s^2 sum_i wt_i (F_i/(1 - T_i))^2), which is Cooley's
 *   correction [J. W. Cooley, Math. Comp. 15, 363 (1961)] written for the renormalized
 *   recurrence; it converges quadratically and is safeguarded by the node-count bracket.
 * - Accuracy: the level is found on the grids of steps 4h, 2h and h (every 4th, 2nd and
 *   every point of one grid); Numerov's eigenvalue error is c4 h^4 + c6 h^6 + ..., so
 *   Richardson extrapolation (Romberg's table) removes h^4 and h^6. The reported error is
 *   the last Romberg correction, or the whole h^4 correction when the three grids are not
 *   in the asymptotic regime, plus the truncation of the forbidden regions.
 * - Expectation values <f> = sum wt w^2 f / sum wt w^2 are exactly the derivatives of the
 *   discrete eigenvalue with respect to a perturbation f of V (discrete Hellmann-Feynman),
 *   extrapolated like the energies: Bv = <eps/r^2>, and <dV/dp_k> for fits.
 *
 * Energies are handled as binding energies b = asymptote - E, and the coefficient of the
 * equation as (b - depth_J(r))/eps with depth = asymptote - V from the model, so that
 * levels bound by 1e-4 cm-1 keep their full relative precision.
 */
#include <float.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include <gsl/gsl_errno.h>
#include <gsl/gsl_integration.h>

#include "radial.h"

/* ---------------------------------------------------------------- settings */

wkb_radial_settings wkb_radial_default_settings(void)
{
    wkb_radial_settings s;
    s.energy_tol = 1e-7;
    s.phase_step = 0;
    s.min_binding = 1e-7;
    s.tail_decay = 25;
    s.max_points = 2000000;
    s.max_iter = 200;
    return s;
}

static int check_settings(const wkb_radial_settings *s, wkb_error *err)
{
    if (!(s->energy_tol > 0 && isfinite(s->energy_tol)))
        return wkb_fail(err, WKB_EINVAL, "energy_tol=%g is invalid: give a tolerance > 0 in cm-1",
                        s->energy_tol);
    if (!(s->phase_step >= 0 && s->phase_step <= 0.5))
        return wkb_fail(err, WKB_EINVAL,
                        "phase_step=%g is invalid: give 0 (chosen from energy_tol) or a step in (0, 0.5]",
                        s->phase_step);
    if (!(s->min_binding > 0 && isfinite(s->min_binding)))
        return wkb_fail(err, WKB_EINVAL, "min_binding=%g is invalid: give a binding energy > 0 in cm-1",
                        s->min_binding);
    if (!(s->tail_decay >= 5 && s->tail_decay <= 200))
        return wkb_fail(err, WKB_EINVAL, "tail_decay=%g is invalid: give a value in [5, 200]",
                        s->tail_decay);
    if (s->max_points < 1000)
        return wkb_fail(err, WKB_EINVAL, "max_points=%zu is invalid: give at least 1000", s->max_points);
    if (s->max_iter < 10)
        return wkb_fail(err, WKB_EINVAL, "max_iter=%d is invalid: give at least 10", s->max_iter);
    return WKB_SUCCESS;
}

/* ---------------------------------------------------------------- workspace */

wkb_radial *wkb_radial_alloc(const wkb_radial_settings *settings)
{
    wkb_radial *w = calloc(1, sizeof *w);
    if (!w)
        return NULL;
    w->set = settings ? *settings : wkb_radial_default_settings();
    if (check_settings(&w->set, NULL)) {
        free(w);
        return NULL;
    }
    w->gl = gsl_integration_glfixed_table_alloc(RADIAL_GL_NODES);
    w->scan_r = malloc(RADIAL_SCAN_MAX * sizeof(double));
    w->scan_k = malloc(RADIAL_SCAN_MAX * sizeof(double));
    if (!w->gl || !w->scan_r || !w->scan_k) {
        wkb_radial_free(w);
        return NULL;
    }
    w->wf_v = -1;
    return w;
}

static void free_grid(wkb_radial *w)
{
    free(w->r);
    free(w->qt);
    free(w->wt);
    free(w->pmax);
    free(w->smax);
    free(w->F);
    w->r = w->qt = w->wt = w->pmax = w->smax = w->F = NULL;
    w->cap = 0;
}

void wkb_radial_free(wkb_radial *w)
{
    if (!w)
        return;
    free_grid(w);
    free(w->cache);
    free(w->cache_dvdp);
    free(w->cache_has_dvdp);
    free(w->scan_r);
    free(w->scan_k);
    if (w->gl)
        gsl_integration_glfixed_table_free(w->gl);
    free(w);
}

/* Grows the grid arrays to hold n points (only when a set() needs more than before). */
int radial_reserve_grid(wkb_radial *w, size_t n, wkb_error *err)
{
    if (n <= w->cap)
        return WKB_SUCCESS;
    free_grid(w);
    w->r = malloc(n * sizeof(double));
    w->qt = malloc(n * sizeof(double));
    w->wt = malloc(n * sizeof(double));
    w->pmax = malloc(n * sizeof(double));
    w->smax = malloc(n * sizeof(double));
    w->F = malloc(n * sizeof(double));
    if (!w->r || !w->qt || !w->wt || !w->pmax || !w->smax || !w->F) {
        free_grid(w);
        return wkb_fail(err, WKB_ENOMEM, "out of memory for a radial grid of %zu points", n);
    }
    w->cap = n;
    return WKB_SUCCESS;
}

static int reserve_cache(wkb_radial *w, size_t levels, size_t n_params, wkb_error *err)
{
    if (levels < 1)
        levels = 1;
    if (levels > w->cache_cap) {
        free(w->cache);
        free(w->cache_has_dvdp);
        w->cache = malloc(levels * sizeof *w->cache);
        w->cache_has_dvdp = malloc(levels * sizeof *w->cache_has_dvdp);
        w->cache_cap = levels;
        if (!w->cache || !w->cache_has_dvdp) {
            free(w->cache);
            free(w->cache_has_dvdp);
            w->cache = NULL;
            w->cache_has_dvdp = NULL;
            w->cache_cap = 0;
            return wkb_fail(err, WKB_ENOMEM, "out of memory for %zu levels", levels);
        }
    }
    const size_t need = levels * (n_params ? n_params : 1);
    if (need > w->dvdp_cap) {
        free(w->cache_dvdp);
        w->cache_dvdp = malloc(need * sizeof(double));
        w->dvdp_cap = w->cache_dvdp ? need : 0;
        if (!w->cache_dvdp)
            return wkb_fail(err, WKB_ENOMEM, "out of memory for %zu levels", levels);
    }
    memset(w->cache, 0, levels * sizeof *w->cache);
    memset(w->cache_has_dvdp, 0, levels * sizeof *w->cache_has_dvdp);
    return WKB_SUCCESS;
}

/* ---------------------------------------------------------------- one sweep */

typedef struct {
    size_t is, m, ie; /* Dirichlet ends and matching point, multiples of 4 */
    size_t ia, ib;    /* first and last classically allowed fine-grid points */
    double decay_in, decay_out; /* integral of kappa dx covered beyond the turning points */
    double b;         /* the binding energy it was found for; NaN when not set */
} radial_range;

typedef struct {
    long count;     /* discrete levels below E */
    double db;      /* Newton correction to the binding energy */
    double scale;   /* factor on the inward solution to join the outward one at m */
    double norm;    /* sum wt w^2 */
} radial_sweep;

/* Walks from grid point start into the forbidden region (dir -1 inward, +1 outward), summing
   kappa dx until the tail target or the recurrence cap is reached; returns the last point
   reached and the sum in *decay. */
static size_t forbidden_walk(const wkb_radial *w, double b, size_t start, int dir, double *decay)
{
    double acc = 0;
    size_t j = start;
    while (dir < 0 ? j > 0 : j + 1 < w->n) {
        const size_t i = dir < 0 ? j - 1 : j + 1;
        const double T = w->qt[i] + b * w->wt[i];
        if (!(16 * T < RADIAL_T_CAP))
            break;
        acc += T > 0 ? sqrt(12 * T) : 0;
        j = i;
        if (acc >= w->set.tail_decay)
            break;
    }
    *decay = acc;
    return j;
}

static int find_range(const wkb_radial *w, double b, radial_range *rg, wkb_error *err)
{
    const size_t n = w->n;
    if (!(w->pmax[n - 1] > b))
        return wkb_fail(err, WKB_ENOLEVEL, "binding energy %g cm-1 is below the bottom of the well", b);
    size_t lo = 0, hi = n - 1; /* first i with pmax[i] > b */
    while (lo < hi) {
        const size_t mid = lo + (hi - lo) / 2;
        if (w->pmax[mid] > b)
            hi = mid;
        else
            lo = mid + 1;
    }
    rg->ia = lo;
    lo = 0;
    hi = n - 1; /* last i with smax[i] > b */
    while (lo < hi) {
        const size_t mid = lo + (hi - lo + 1) / 2;
        if (w->smax[mid] > b)
            lo = mid;
        else
            hi = mid - 1;
    }
    rg->ib = lo;

    double acc;
    size_t j = forbidden_walk(w, b, rg->ia, -1, &acc);
    rg->decay_in = j == 0 && w->r[0] == 0 ? HUGE_VAL : acc; /* r = 0 is the true boundary */
    rg->is = j == 0 ? 0 : ((j - 1 + 3) / 4) * 4;
    j = forbidden_walk(w, b, rg->ib, +1, &rg->decay_out);
    rg->ie = ((j + 1) / 4) * 4;
    if (rg->ie > n - 1)
        rg->ie = n - 1;

    size_t m = (rg->ib / 4) * 4;
    if (m < rg->is + 4)
        m = rg->is + 4;
    if (m + 4 > rg->ie)
        m = rg->ie >= 4 ? rg->ie - 4 : 0;
    rg->m = m;
    rg->b = b;
    if (rg->ie < rg->is + 8)
        return wkb_fail(err, WKB_EINVAL,
                        "the exact solver's radial grid is too coarse for binding energy %g cm-1 (J(J+1)=%g): the "
                        "potential has structure finer than the grid chosen for it (a narrow well or barrier); "
                        "it is outside the range the exact solver handles", b, w->rot);
    return WKB_SUCCESS;
}

/* A potential with structure the grid does not resolve is an input the solver cannot treat (a
   ValueError for the caller), not a numerical accident. */
#define RADIAL_UNRESOLVED                                                                                   \
    "the exact solver's Numerov step is too large at r=%g A (T=%g, binding energy %g cm-1): the potential "  \
    "has a barrier or second well there that the grid chosen for it does not resolve; it is outside the "    \
    "range the exact solver handles"

/* Outward from is to m and inward from ie to m on the grid of stride st at binding b. */
static int sweep(wkb_radial *w, double b, const radial_range *rg, size_t st, radial_sweep *out,
                 wkb_error *err)
{
    const double s2 = (double)(st * st);
    const double *qt = w->qt, *wt = w->wt;
    double *F = w->F;
    const size_t is = rg->is, m = rg->m, ie = rg->ie;
    long count = 0;

    double f_prev = 0, f = 1, S_out = 0;
    F[is] = 0;
    F[is + st] = 1;
    for (size_t i = is + st; i < m; i += st) {
        const double T = s2 * (qt[i] + b * wt[i]);
        if (!(T < 0.99))
            return wkb_fail(err, WKB_EINVAL, RADIAL_UNRESOLVED, w->r[i], T, b);
        const double inv = 1 / (1 - T), U = 12 * inv - 10;
        const double wi = f * inv;
        S_out += wt[i] * wi * wi;
        const double fn = U * f - f_prev;
        if ((fn < 0) != (f < 0))
            count++;
        F[i + st] = fn;
        f_prev = f;
        f = fn;
        if (fabs(f) > RADIAL_BIG) {
            for (size_t k = is + st; k <= i + st; k += st)
                F[k] /= RADIAL_BIG;
            f /= RADIAL_BIG;
            f_prev /= RADIAL_BIG;
            S_out /= RADIAL_BIG * RADIAL_BIG;
        }
    }
    const double Fm = f, Fm_prev = f_prev;
    const double Tm = s2 * (qt[m] + b * wt[m]), inv_m = 1 / (1 - Tm), Um = 12 * inv_m - 10;

    double g_next = 0, g = 1, S_in = 0;
    F[ie] = 0;
    for (size_t i = ie - st; i > m; i -= st) {
        F[i] = g;
        const double T = s2 * (qt[i] + b * wt[i]);
        if (!(T < 0.99))
            return wkb_fail(err, WKB_EINVAL, RADIAL_UNRESOLVED, w->r[i], T, b);
        const double inv = 1 / (1 - T), U = 12 * inv - 10;
        const double wi = g * inv;
        S_in += wt[i] * wi * wi;
        const double gn = U * g - g_next;
        if ((gn < 0) != (g < 0))
            count++;
        g_next = g;
        g = gn;
        if (fabs(g) > RADIAL_BIG) {
            for (size_t k = i; k <= ie - st; k += st)
                F[k] /= RADIAL_BIG;
            g /= RADIAL_BIG;
            g_next /= RADIAL_BIG;
            S_in /= RADIAL_BIG * RADIAL_BIG;
        }
    }
    if (Fm == 0 || g == 0) {
        /* the matching point sits on a node: no Newton step, count as a node */
        out->count = count + 1;
        out->db = NAN;
        out->scale = 0;
        out->norm = NAN;
        return WKB_SUCCESS;
    }
    const double gamma = Um - Fm_prev / Fm - g_next / g;
    if (gamma < 0)
        count++;
    const double scale = Fm / g;
    const double wm = Fm * inv_m;
    const double norm = S_out + wt[m] * wm * wm + S_in * scale * scale;
    out->count = count;
    out->scale = scale;
    out->norm = norm;
    /* dE = gamma F_m^2 / (12 s^2 norm); b = asymptote - E */
    out->db = -gamma * Fm * Fm / (12 * s2 * norm);
    if (!isfinite(out->db))
        out->db = NAN;
    return WKB_SUCCESS;
}

/* ---------------------------------------------------------------- one level on one grid */

/* Finds the discrete level v on the grid of stride st, b in (b_lo, b_hi) with
   count(b_hi) <= v < count(b_lo); *b holds the guess and receives the level. On return
   *rg and the sweep state (F, *sw) belong to the last sweep. */
static int solve_grid(wkb_radial *w, int v, size_t st, double *b, double b_lo, double b_hi, radial_range *rg,
                      radial_sweep *sw, wkb_error *err)
{
    const double tol = fmax(1e-3 * w->set.energy_tol, 8 * DBL_EPSILON * w->depth_max);
    double x = *b;
    if (!(x > b_lo && x < b_hi))
        x = 0.5 * (b_lo + b_hi);
    int status;
    for (int it = 0; it < w->set.max_iter; it++) {
        /* the range only needs the decay lengths roughly: keep it while b moves little */
        if (!(fabs(x - rg->b) <= 1e-3 * x) && (status = find_range(w, x, rg, err)))
            return status;
        if ((status = sweep(w, x, rg, st, sw, err)))
            return status;
        if (sw->count <= v)
            b_hi = x;
        else
            b_lo = x;
        const int near = sw->count == v || sw->count == v + 1;
        if (near && isfinite(sw->db)) {
            const double next = x + sw->db;
            if (fabs(sw->db) <= tol) {
                *b = next;
                return WKB_SUCCESS;
            }
            if (next > b_lo && next < b_hi) {
                x = next;
                continue;
            }
        }
        if (b_hi - b_lo <= tol) {
            *b = 0.5 * (b_lo + b_hi);
            if ((status = find_range(w, *b, rg, err)) || (status = sweep(w, *b, rg, st, sw, err)))
                return status;
            return WKB_SUCCESS;
        }
        if (b_lo <= 0)
            x = 0.25 * b_hi;
        else if (b_hi > 4 * b_lo)
            x = sqrt(b_lo * b_hi);
        else
            x = 0.5 * (b_lo + b_hi);
    }
    return wkb_fail(err, WKB_ENOCONV, "level v=%d did not converge in %d iterations (J(J+1)=%g)", v,
                    w->set.max_iter, w->rot);
}

/* Sums over the solution of the last sweep: norm, <eps/r^2> and <dV/dp_k>. When store is
   set, F becomes the normalized u(r) on the grid (fine grid only). */
static void expectations(wkb_radial *w, const radial_range *rg, const radial_sweep *sw, double b, size_t st,
                         double *Bv, double *dvdp, int store)
{
    const double s2 = (double)(st * st);
    const size_t np = w->pot.model->n_params;
    double sum = 0, sumB = 0, sumP[WKB_MAX_PARAMS] = {0}, d[WKB_MAX_PARAMS];
    for (size_t i = rg->is + st; i < rg->ie; i += st) {
        const double f = i > rg->m ? w->F[i] * sw->scale : w->F[i];
        const double T = s2 * (w->qt[i] + b * w->wt[i]);
        const double wi = f / (1 - T);
        const double weight = w->wt[i] * wi * wi;
        const double r = w->r[i];
        sum += weight;
        sumB += weight * w->eps / (r * r);
        if (dvdp && np > 0) {
            w->pot.model->param_derivs(&w->pot, r, d);
            for (size_t k = 0; k < np; k++)
                sumP[k] += weight * d[k];
        }
        if (store)
            w->F[i] = wi; /* w(x); scaled below */
    }
    *Bv = sumB / sum;
    if (dvdp)
        for (size_t k = 0; k < np; k++)
            dvdp[k] = sumP[k] / sum;
    if (store) {
        /* u = w / sqrt(K), int u^2 dr = h sum w^2/K^2 = (12 eps/h) sum wt w^2 */
        const double c = 1 / sqrt(12 * w->eps / w->h * sum);
        const double h2 = w->h * w->h / 12;
        for (size_t i = rg->is + 1; i < rg->ie; i++) {
            const double K = sqrt(h2 / (w->eps * w->wt[i]));
            w->F[i] *= c / sqrt(K);
        }
        w->F[rg->is] = 0;
        w->F[rg->ie] = 0;
    }
}

/* ---------------------------------------------------------------- set */

int wkb_radial_set(wkb_radial *w, const wkb_potential *pot, double mu, double rot, wkb_error *err)
{
    int status;
    w->ready = 0;
    w->wf_v = -1;
    if (!pot || !pot->model)
        return wkb_fail(err, WKB_EINVAL, "no potential given");
    if (!(mu > 0) || !isfinite(mu))
        return wkb_fail(err, WKB_EINVAL, "reduced mass mu=%g u is invalid: it must be a finite number > 0", mu);
    if (!(rot >= 0) || !isfinite(rot))
        return wkb_fail(err, WKB_EINVAL, "J(J+1)=%g is invalid: it must be a finite number >= 0", rot);
    w->pot = *pot;
    w->mu = mu;
    w->eps = WKB_HBAR2_OVER_2U / mu;
    w->rot = rot;
    w->asymptote = wkb_potential_asymptote(pot);
    if (!isfinite(w->asymptote))
        return wkb_fail(err, WKB_EINVAL, "the potential has no finite asymptote (%g)", w->asymptote);
    if ((status = radial_build_grid(w, err)))
        return status;

    /* Levels below the asymptote: the node count at b -> 0+ on the fine and coarse grids. */
    radial_range rg;
    radial_sweep sw;
    const double b0 = 0.0;
    if ((status = find_range(w, b0, &rg, err)) || (status = sweep(w, b0, &rg, 1, &sw, err)))
        return status;
    w->n_bound = (size_t)sw.count;
    if ((status = sweep(w, b0, &rg, 4, &sw, err)))
        return status;
    w->n_bound_coarse = (size_t)sw.count;
    const size_t np = pot->model->n_params;
    if ((status = reserve_cache(w, w->n_bound, np, err)))
        return status;
    w->ready = 1;
    return WKB_SUCCESS;
}

size_t wkb_radial_count(const wkb_radial *w)
{
    return w->ready ? w->n_bound : 0;
}

size_t wkb_radial_grid_size(const wkb_radial *w)
{
    return w->ready ? w->n : 0;
}

/* ---------------------------------------------------------------- levels */

/* A guess and a bracket for level v from the levels already solved. */
static void initial_guess(const wkb_radial *w, int v, double *guess, double *b_lo, double *b_hi)
{
    const radial_cache_entry *c = w->cache;
    *b_hi = w->depth_max * (1 + 1e-9) + 1e-300;
    *b_lo = 0;
    for (int k = v - 1; k >= 0; k--)
        if (c[k].solved) {
            *b_hi = c[k].b4;
            break;
        }
    for (size_t k = (size_t)v + 1; k < w->n_bound; k++)
        if (c[k].solved) {
            *b_lo = c[k].b4;
            break;
        }
    if (v >= 2 && c[v - 1].solved && c[v - 2].solved) {
        double d1 = c[v - 2].b4 - c[v - 1].b4, d0 = d1;
        if (v >= 3 && c[v - 3].solved)
            d0 = c[v - 3].b4 - c[v - 2].b4;
        double d = d0 > 0 ? d1 * d1 / d0 : d1; /* spacings shrink roughly geometrically */
        if (d > d1)
            d = d1;
        *guess = c[v - 1].b4 - d;
        if (*guess <= *b_lo)
            *guess = 0.5 * (c[v - 1].b4 + *b_lo);
    } else if (v == 1 && c[0].solved && w->omega > 0) {
        *guess = c[0].b4 - w->omega;
    } else if (v == 0 && w->omega > 0) {
        *guess = w->depth_max - 0.5 * w->omega;
    } else {
        /* a Morse-like interpolation between the bottom and the asymptote */
        const double t = 1 - (v + 0.5) / ((double)w->n_bound + 0.5);
        *guess = w->depth_max * t * t;
    }
    if (!(*guess > *b_lo && *guess < *b_hi))
        *guess = 0.5 * (*b_lo + *b_hi);
}

/* Classical turning point between r[i] and r[i+1] where depth_J = b (Illinois method). */
static double turning_point(const wkb_radial *w, size_t i, double b)
{
    double a = w->r[i], c = w->r[i + 1];
    double fa = (a > 0 ? radial_depth(w, a) : w->pmax[0]) - b, fc = radial_depth(w, c) - b;
    if (!(fa * fc < 0))
        return fabs(fa) < fabs(fc) ? a : c;
    int side = 0;
    double x = a;
    for (int it = 0; it < 100; it++) {
        x = (a * fc - c * fa) / (fc - fa);
        const double fx = radial_depth(w, x) - b;
        if (fx == 0 || fabs(c - a) <= 4 * DBL_EPSILON * fabs(x))
            break;
        if ((fx < 0) == (fc < 0)) {
            c = x;
            fc = fx;
            if (side == -1)
                fa /= 2;
            side = -1;
        } else {
            a = x;
            fa = fx;
            if (side == 1)
                fc /= 2;
            side = 1;
        }
    }
    return x;
}

/* dE/dv = 2 pi eps / integral dr/k over the allowed part of [r1, r2] (the classical
   vibrational quantum at the level energy), Gauss-Legendre in t with r = c + d sin t. */
static double classical_spacing(const wkb_radial *w, double b, double r1, double r2)
{
    const double c = 0.5 * (r1 + r2), d = 0.5 * (r2 - r1);
    double sum = 0;
    for (size_t k = 0; k < RADIAL_GL_NODES; k++) {
        double t, wk;
        if (gsl_integration_glfixed_point(-M_PI / 2, M_PI / 2, k, &t, &wk, w->gl) != GSL_SUCCESS)
            return NAN;
        const double r = c + d * sin(t);
        const double kin = radial_depth(w, r) - b;
        if (kin > 0)
            sum += wk * d * cos(t) / sqrt(kin / w->eps);
    }
    return sum > 0 ? 2 * M_PI * w->eps / sum : NAN;
}

/* Solves level v on the three grids, fills the cache entry; dvdp (may be NULL) receives
   the extrapolated <dV/dp_k>; keeps the fine-grid wavefunction in F when keep_wf. */
static int solve_level(wkb_radial *w, int v, double *dvdp, int keep_wf, wkb_error *err)
{
    radial_cache_entry *c = &w->cache[v];
    const size_t np = w->pot.model->n_params;
    double guess, b_lo, b_hi;
    radial_range rg;
    radial_sweep sw;
    int status;
    rg.b = NAN;
    initial_guess(w, v, &guess, &b_lo, &b_hi);

    double bs[3], Bvs[3], P[3][WKB_MAX_PARAMS];
    const size_t strides[3] = {4, 2, 1};
    size_t points = 0;
    for (int g = 0; g < 3; g++) {
        const size_t st = strides[g];
        double b = guess;
        if (g == 0 && (size_t)v >= w->n_bound_coarse) {
            /* the coarse grid does not bind this level: search on the medium grid first */
            double b2 = guess;
            if ((status = solve_grid(w, v, 2, &b2, b_lo, b_hi, &rg, &sw, err)))
                return status;
            b = b2;
            /* on the coarse grid the level lies above the asymptote: extrapolate instead */
            bs[0] = NAN;
            Bvs[0] = NAN;
            guess = b2;
            continue;
        }
        double lo = g == 0 ? b_lo : 0, hi = g == 0 ? b_hi : w->depth_max * (1 + 1e-9) + 1e-300;
        if (g > 0) {
            /* neighbours on the coarse grid bracket the level on every grid */
            if (v > 0 && w->cache[v - 1].solved)
                hi = w->cache[v - 1].b4;
            if ((size_t)v + 1 < w->n_bound && w->cache[v + 1].solved)
                lo = w->cache[v + 1].b4;
        }
        if ((status = solve_grid(w, v, st, &b, lo, hi, &rg, &sw, err)))
            return status;
        bs[g] = b;
        if (g == 0)
            c->b4 = b;
        expectations(w, &rg, &sw, b, st, &Bvs[g], dvdp ? P[g] : NULL, g == 2 && keep_wf);
        points = (rg.ie - rg.is) / st;
        if (g == 0)
            guess = b;
        else if (g == 1 && isfinite(bs[0]))
            guess = b + (b - bs[0]) / 16;
        else
            guess = b;
    }
    if (!isfinite(bs[0]))
        c->b4 = bs[1];
    c->b2 = bs[1];
    c->b1 = bs[2];

    /* Romberg: E(h) = E + c4 h^4 + c6 h^6 + ... */
    double best, error;
    const double A = bs[2] + (bs[2] - bs[1]) / 15;
    /* round-off: Numerov's T carries relative errors DBL_EPSILON, amplified as 1/h^2 */
    const double floor_err = DBL_EPSILON * (w->depth_max / (w->h * w->h) + 4 * fabs(w->asymptote));
    if (isfinite(bs[0])) {
        const double B = bs[1] + (bs[1] - bs[0]) / 15;
        const double d21 = bs[2] - bs[1], d42 = bs[1] - bs[0];
        const double ratio = d21 != 0 ? d42 / d21 : HUGE_VAL;
        best = A + (A - B) / 63;
        if (ratio > 11 && ratio < 22)
            error = 2 * fabs(A - B) / 63; /* twice the h^6 term of A: a bound on the h^8 rest */
        else
            error = fabs(d21); /* not in the asymptotic regime: the whole h^4 step */
    } else {
        best = A;
        error = fabs(bs[2] - bs[1]);
    }
    /* Extrapolate the expectation values like the energies. */
    double Bv;
    if (isfinite(Bvs[0])) {
        const double a = Bvs[2] + (Bvs[2] - Bvs[1]) / 15, bb = Bvs[1] + (Bvs[1] - Bvs[0]) / 15;
        Bv = a + (a - bb) / 63;
    } else {
        Bv = Bvs[2] + (Bvs[2] - Bvs[1]) / 15;
    }
    if (dvdp)
        for (size_t k = 0; k < np; k++) {
            if (isfinite(Bvs[0])) {
                const double a = P[2][k] + (P[2][k] - P[1][k]) / 15, bb = P[1][k] + (P[1][k] - P[0][k]) / 15;
                dvdp[k] = a + (a - bb) / 63;
            } else {
                dvdp[k] = P[2][k] + (P[2][k] - P[1][k]) / 15;
            }
        }

    /* Turning points and the classical spacing at the level energy. */
    radial_range fr;
    if ((status = find_range(w, best > 0 ? best : bs[2], &fr, err)))
        return status;
    const double bt = best > 0 ? best : bs[2];
    const double r1 = fr.ia == 0 ? w->r[0] : turning_point(w, fr.ia - 1, bt);
    const double r2 = fr.ib + 1 >= w->n ? w->r[w->n - 1] : turning_point(w, fr.ib, bt);
    const double dEdv = classical_spacing(w, bt, r1, r2);
    /* The forbidden regions are cut where the solution has decayed by exp(-decay). */
    const double decay = fmin(fr.decay_in, fr.decay_out);
    if (isfinite(dEdv) && decay < 40)
        error += dEdv * exp(-2 * decay);
    error += floor_err;

    wkb_radial_level *L = &c->level;
    L->v = v;
    L->binding = best;
    L->energy = w->asymptote - best;
    L->error = error;
    L->r_inner = r1;
    L->r_outer = r2;
    L->dEdv = dEdv;
    L->Bv = Bv;
    L->grid_points = points;
    c->solved = 1;
    if (dvdp && np > 0) {
        memcpy(w->cache_dvdp + (size_t)v * np, dvdp, np * sizeof(double));
        w->cache_has_dvdp[v] = 1;
    }
    if (keep_wf) {
        w->wf_v = v;
        w->wf_is = rg.is;
        w->wf_ie = rg.ie;
    } else if (w->wf_v >= 0) {
        w->wf_v = -1; /* F was overwritten */
    }
    return WKB_SUCCESS;
}

static int check_level(const wkb_radial *w, int v, wkb_error *err)
{
    if (!w->ready)
        return wkb_fail(err, WKB_EINVAL, "the radial workspace has no potential: call wkb_radial_set first");
    if (v < 0)
        return wkb_fail(err, WKB_EINVAL, "v=%d is invalid: vibrational quantum numbers are >= 0", v);
    if ((size_t)v >= w->n_bound) {
        if (w->n_bound == 0)
            return wkb_fail(err, WKB_ENOLEVEL,
                            "v=%d is not bound: this potential binds no level at J(J+1)=%g", v, w->rot);
        return wkb_fail(err, WKB_ENOLEVEL,
                        "v=%d is above the last bound level (v=%zu) of this potential at J(J+1)=%g", v,
                        w->n_bound - 1, w->rot);
    }
    return WKB_SUCCESS;
}

int wkb_radial_level_at(wkb_radial *w, int v, wkb_radial_level *level, double *avg_dVdp, wkb_error *err)
{
    int status;
    if ((status = check_level(w, v, err)))
        return status;
    const size_t np = w->pot.model->n_params;
    radial_cache_entry *c = &w->cache[v];
    if (!c->solved || (avg_dVdp && np > 0 && !w->cache_has_dvdp[v])) {
        /* solve the levels below first: they bracket this one and cost little */
        if (avg_dVdp == NULL || np == 0) {
            if ((status = solve_level(w, v, NULL, 0, err)))
                return status;
        } else {
            if ((status = solve_level(w, v, avg_dVdp, 0, err)))
                return status;
        }
    }
    if (level)
        *level = c->level;
    if (avg_dVdp && np > 0)
        memcpy(avg_dVdp, w->cache_dvdp + (size_t)v * np, np * sizeof(double));
    return WKB_SUCCESS;
}

int wkb_radial_all_levels(wkb_radial *w, wkb_radial_level *levels, size_t capacity, size_t *count,
                          wkb_error *err)
{
    if (!w->ready)
        return wkb_fail(err, WKB_EINVAL, "the radial workspace has no potential: call wkb_radial_set first");
    if (count)
        *count = w->n_bound;
    for (size_t v = 0; v < w->n_bound && v < capacity; v++) {
        int status = wkb_radial_level_at(w, (int)v, &levels[v], NULL, err);
        if (status)
            return status;
    }
    return WKB_SUCCESS;
}

int wkb_radial_wavefunction(wkb_radial *w, int v, const double **r, const double **u, size_t *n,
                            wkb_error *err)
{
    int status;
    if ((status = check_level(w, v, err)))
        return status;
    if (w->wf_v != v) {
        const size_t np = w->pot.model->n_params;
        double scratch[WKB_MAX_PARAMS];
        const int had = w->cache_has_dvdp[v];
        if ((status = solve_level(w, v, had && np ? scratch : NULL, 1, err)))
            return status;
    }
    *r = w->r + w->wf_is;
    *u = w->F + w->wf_is;
    *n = w->wf_ie - w->wf_is + 1;
    return WKB_SUCCESS;
}

/* ---------------------------------------------------------------- level-source adapters */

int wkb_radial_source_set(void *ctx, const wkb_potential *pot, double mu, double rot, wkb_error *err)
{
    return wkb_radial_set((wkb_radial *)ctx, pot, mu, rot, err);
}

int wkb_radial_source_level(void *ctx, int v, double *energy, double *dEdp, wkb_error *err)
{
    wkb_radial_level L;
    int status = wkb_radial_level_at((wkb_radial *)ctx, v, &L, dEdp, err);
    if (status == WKB_SUCCESS && energy)
        *energy = L.energy;
    return status;
}
