/* quantize.c: levels from first-order WKB quantization I(E) = pi (v + (m_in + m_out)/4),
 * m = 1 at a smooth turning point and 2 at a hard wall (the Maslov indices).
 *
 * Each level is found by a safeguarded Newton iteration in w = b^alpha, b = asymptote - E,
 * alpha = (n-2)/(2n) for a -C_n/r^n tail and 1/2 for an exponential one: near threshold
 * I(E) ~ I(D) - c b^alpha (the LeRoy-Bernstein form), so the iteration function is nearly
 * linear in w (exactly linear for Morse). The first guess for level v comes from the levels
 * already solved in this well (cubic Hermite extrapolation of w against I), so a sweep over
 * all levels needs about two orbit evaluations per level.
 */
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include <gsl/gsl_math.h>

#include "wkb.h"
#include "well.h"

#define MAX_LEVELS 100000000
#define CACHE_LIMIT 1000000 /* solved levels remembered for first guesses */
/* relative binding-energy step of the last Newton iteration beyond which a level's period, Bv and <dV/dp>
   come from an orbit at its own energy. Measured against orbits at the level energies (EMO, Lennard-Jones,
   Morse wells, J = 0 and 20): without it up to 3e-5 relative in Bv and 7e-5 in dE/dv (the last EMO level);
   with 1e-6 <= 3e-7 and 6e-7 at no extra orbit in the fit benchmarks (1e-7: 3e-8, ~5 % more orbits) */
#define PROPERTY_STEP 1e-6

static double w_exponent(const wkb_well *w)
{
    const double n = w->tail_power;
    return n > 2 ? (n - 2) / (2 * n) : 0.5;
}

/* w = b^alpha and back, by sqrt, cbrt and products for the common exponents (an exponential or a
   -C_6/r^6 tail): pow cost as much as a tenth of an orbit per level in a direct sweep */
static double w_of_binding(double b, double alpha)
{
    return alpha == 0.5 ? sqrt(b) : (alpha == 1.0 / 3 ? cbrt(b) : pow(b, alpha));
}

static double binding_of_w(double wv, double alpha)
{
    return alpha == 0.5 ? wv * wv : (alpha == 1.0 / 3 ? wv * wv * wv : pow(wv, 1 / alpha));
}

/* db/dw = b^(1 - alpha)/alpha at w */
static double binding_slope(double wv, double alpha)
{
    return alpha == 0.5 ? 2 * wv : (alpha == 1.0 / 3 ? 3 * wv * wv : pow(wv, 1 / alpha - 1) / alpha);
}

static int solve_first_order(wkb_well *w, size_t v, wkb_level *level, double *avg_dVdp, wkb_error *err);
static int second_order_level(wkb_well *w, size_t v, wkb_level *level, double *avg_dVdp, wkb_error *err);

/* Computes vD and the number of bound levels once per well set-up; sizes the level cache. */
static int prepare(wkb_well *w, wkb_error *err)
{
    if (w->vD_status >= 0) {
        if (w->vD_status && err)
            *err = w->vD_err;
        return w->vD_status;
    }
    if (!w->ready)
        return wkb_fail(err, WKB_EINVAL, "the well has not been set up");
    w->count = 0;
    w->vD = NAN;
    w->vD_err.status = 0;
    w->vD_err.message[0] = 0;
    if (w->bottom < w->bound_top) {
        wkb_orbit o;
        int status = wkb_orbit_at(w, w->top - w->bound_top, &o, NULL, &w->vD_err);
        if (status) {
            w->vD_status = status;
            if (err)
                *err = w->vD_err;
            return status;
        }
        w->vD = o.action / M_PI - w->phase;
        if (w->vD > MAX_LEVELS) {
            w->vD_status = wkb_fail(&w->vD_err, WKB_EINVAL,
                                    "this well binds %.6g levels, more than the %d supported", w->vD, MAX_LEVELS);
            if (err)
                *err = w->vD_err;
            return w->vD_status;
        }
        w->count = w->vD > 0 ? (size_t)ceil(w->vD) : 0;
    }
    w->count_first = w->count;
    w->across = 0;
    w->defect_n = 0;
    w->threshold_deferred = 0;
    w->prep_first0_status = w->prep_second0_status = -1;
    /* the matched rule may bind one level more than the first-order rule */
    const size_t want = GSL_MIN(w->count + (w->set.ends == WKB_ENDS_MATCHED ? 2 : 0), CACHE_LIMIT);
    if (want > w->cache_size) {
        double *cw = realloc(w->cache_w, want * sizeof(double));
        if (cw)
            w->cache_w = cw;
        double *cs = realloc(w->cache_slope, want * sizeof(double));
        if (cs)
            w->cache_slope = cs;
        char *ok = realloc(w->cache_ok, want);
        if (ok)
            w->cache_ok = ok;
        if (!cw || !cs || !ok)
            return wkb_fail(err, WKB_ENOMEM, "out of memory for %zu levels", want);
        w->cache_size = want;
    }
    if (w->cache_size)
        memset(w->cache_ok, 0, w->cache_size);
    w->vD_status = WKB_SUCCESS;
    w->low_wall = w->bound_top < w->top - 1e-6 * (w->top - w->bottom);
    if (w->set.ends == WKB_ENDS_MATCHED && w->low_wall)
        return WKB_SUCCESS;
    if (w->set.ends == WKB_ENDS_MATCHED && w->count > 0) {
        /* is second order good enough in this well? judged on its lowest level */
        wkb_level l1, l2;
        wkb_error e2;
        const int order = w->set.order;
        w->set.order = 1;
        int s1 = solve_first_order(w, 0, &l1, NULL, &e2);
        w->set.order = order;
        l2 = l1;
        int s2 = -1;
        /* a point-wise curve too: the second-order term needs V'' smoother than a cubic spline's */
        if (w->count <= WKB_ACROSS_MAX_LEVELS || w->pot.model == &wkb_model_pointwise ||
            (!s1 && ((s2 = second_order_level(w, 0, &l2, NULL, &e2)) ||
                     (l2.energy - l1.energy) * (l2.energy - l1.energy) / l2.dEdv > WKB_ACROSS_ESTIMATE)))
            w->across = 1;
        if (s1 == WKB_SUCCESS && s2 == WKB_SUCCESS) { /* kept for a request of v = 0 (solve_level) */
            w->prep_first0 = l1;
            w->prep_second0 = l2;
            w->prep_first0_status = w->prep_second0_status = WKB_SUCCESS;
        }
    }
    if (w->set.ends == WKB_ENDS_MATCHED && w->bottom < w->bound_top && w->requested_v_end > 0 &&
        w->requested_v_end + WKB_LAZY_THRESHOLD_MARGIN <= w->count_first) {
        w->threshold_deferred = 1; /* only deep levels wanted: the first-order count bounds them */
    } else if (w->set.ends == WKB_ENDS_MATCHED && w->bottom < w->bound_top) {
        /* the matched rule binds the levels below its own threshold number, not below vD */
        double v_th;
        int status = wkb_threshold_number(w, &v_th, &w->vD_err);
        if (status) {
            w->vD_status = status;
            if (err)
                *err = w->vD_err;
            return status;
        }
        w->count = v_th > 0 ? (size_t)ceil(v_th) : 0;
        if (w->count > w->cache_size)
            w->count = w->cache_size; /* (cannot happen: v_th < vD + 1) */
    }
    return WKB_SUCCESS;
}

int wkb_level_count(wkb_well *w, size_t *count, double *vD, wkb_error *err)
{
    int status = prepare(w, err);
    if (status)
        return status;
    if (count)
        *count = w->count;
    if (vD)
        *vD = w->vD;
    return WKB_SUCCESS;
}

void wkb_well_request_below(wkb_well *w, size_t v_end)
{
    w->requested_v_end = v_end;
}

int wkb_threshold_deferred(const wkb_well *w)
{
    return w->threshold_deferred;
}

int wkb_v_dissociation(wkb_well *w, double *vD, wkb_error *err)
{
    return wkb_level_count(w, NULL, vD, err);
}

/* First guess for w of level v from solved neighbours, else from the straight line in w
   between the bottom (I = 0) and the asymptote (I = pi (vD + phase)). */
static int cached(const wkb_well *w, size_t v)
{
    return v < w->cache_size && w->cache_ok[v];
}

static double first_guess(const wkb_well *w, size_t v, double w_bottom)
{
    const double h = M_PI;
    if (v >= 4 && cached(w, v - 1) && cached(w, v - 2) && cached(w, v - 3) && cached(w, v - 4)) {
        /* Hermite of degree 7 through the four levels below, one step on: O(h^8), which leaves the levels
           next to an MLR threshold (where the quintic's needs a second orbit) within the tolerance after one */
        const double *cw = w->cache_w + v - 4, *cs = w->cache_slope + v - 4; /* cw[3]: level v - 1 */
        return (47 * cw[0] + 192 * cw[1] - 108 * cw[2] - 128 * cw[3]) / 3 +
               h * (4 * cs[0] + 48 * cs[1] + 72 * cs[2] + 16 * cs[3]);
    }
    if (v >= 3 && cached(w, v - 1) && cached(w, v - 2) && cached(w, v - 3)) {
        /* quintic Hermite through the three levels below, one step on: its error, O(h^6), leaves most
           levels of a smooth well (MLR, EMO) within the tolerance after one orbit, where the cubic's needs two */
        return 10 * w->cache_w[v - 3] + 9 * w->cache_w[v - 2] - 18 * w->cache_w[v - 1] +
               h * (3 * w->cache_slope[v - 3] + 18 * w->cache_slope[v - 2] + 9 * w->cache_slope[v - 1]);
    }
    if (v >= 2 && cached(w, v - 1) && cached(w, v - 2)) {
        /* cubic Hermite through (I_{v-2}, w, dw/dI) and (I_{v-1}, ...), evaluated one step on */
        return 5 * w->cache_w[v - 2] + 2 * h * w->cache_slope[v - 2] - 4 * w->cache_w[v - 1] +
               4 * h * w->cache_slope[v - 1];
    }
    if (v >= 1 && cached(w, v - 1))
        return w->cache_w[v - 1] + h * w->cache_slope[v - 1];
    if (cached(w, v + 1))
        return w->cache_w[v + 1] - h * w->cache_slope[v + 1];
    const double I_top = M_PI * (w->vD + w->phase);
    return w_bottom * (1 - M_PI * ((double)v + w->phase) / I_top);
}

static int second_order_level(wkb_well *w, size_t v, wkb_level *level, double *avg_dVdp, wkb_error *err);

/* How far the turning point r is from linear on the scale of the Airy length (WKB_MATCH_NONLINEARITY). */
static double nonlinearity(const wkb_well *w, double r)
{
    wkb_pot_value p0, pa, pb;
    wkb_well_effective(w, r, &p0);
    const double h = 1e-4 * r;
    wkb_well_effective(w, r + h, &pa);
    wkb_well_effective(w, r - h, &pb);
    const double g = fabs(p0.dV), ell = cbrt(w->eps / g), d3 = (pa.d2V - pb.d2V) / (2 * h);
    return GSL_MAX(fabs(p0.d2V) * ell / g, sqrt(fabs(d3) / g) * ell);
}

/* With matched ends: the first-order level (where that rule binds it) starts either the second-order
   solve (nearly linear outer turning point) or the matched solve (threshold or fast-changing region,
   or where the second-order term finds no root). */
static int solve_level(wkb_well *w, size_t v, wkb_level *level, double *avg_dVdp, wkb_error *err)
{
    if (w->set.ends != WKB_ENDS_MATCHED || w->low_wall)
        return solve_first_order(w, v, level, avg_dVdp, err);
    memset(level, 0, sizeof *level);
    level->status = WKB_ENOCONV;
    wkb_level second_start_level; /* a second-order level judged not good enough: kept as the start */
    int have_second = 0;
    if (v < w->count_first) {
        /* level 0 without derivatives: prepare has solved it already, at first order and (where the
           well is not too quantal) at second order */
        const int reuse0 = v == 0 && !avg_dVdp && w->prep_first0_status == WKB_SUCCESS;
        int status = WKB_SUCCESS;
        if (reuse0) {
            *level = w->prep_first0;
        } else {
            const int order = w->set.order;
            w->set.order = 1;
            status = solve_first_order(w, v, level, avg_dVdp, err);
            w->set.order = order;
        }
        if (status && status != WKB_ENOCONV)
            return status;
        const int last = v + WKB_ACROSS_LAST >= w->count;
        if (!status && !w->across && (w->rot == 0 || !last) && !w->set.match_rule &&
            (v < WKB_MATCH_MIN_V ||
             nonlinearity(w, level->r_outer) <= (last ? WKB_MATCH_NONLINEARITY_LAST : WKB_MATCH_NONLINEARITY))) {
            wkb_level second = *level;
            wkb_error e2;
            int s2;
            if (reuse0 && w->prep_second0_status == WKB_SUCCESS) {
                second = w->prep_second0;
                s2 = WKB_SUCCESS;
            } else {
                s2 = second_order_level(w, v, &second, avg_dVdp, &e2);
            }
            if (s2 == WKB_SUCCESS &&
                (second.energy - level->energy) * (second.energy - level->energy) / second.dEdv <= WKB_ACROSS_ESTIMATE) {
                if (second.dEdv > 0)
                    wkb_matched_note_defect(w, v, second.binding, (level->binding - second.binding) / second.dEdv);
                *level = second;
                level->rule = WKB_RULE_SECOND;
                return level->status = WKB_SUCCESS;
            }
            if (s2 == WKB_SUCCESS) {
                second_start_level = second;
                have_second = 1;
            }
        }
    }
    /* a well too quantal for second order: its second-order level still starts the exact-phase solve
       closer (~1e-5 in v, measured at mu = 0.5 u) than the extrapolated defect (~1e-3) */
    int second_start = 0;
    /* ... and so does it for the last two levels behind a centrifugal barrier (2e-6 - 1.2e-5 in v on the
       bench_matched wells at J = 10, the defect 2e-5 - 2e-4) and for the matched levels near threshold but
       the last one at J = 0 (C3 tail: 5e-7 - 7e-5 against 5e-4 - 7e-3; C6: 1.8e-4 against 2.3e-3): their
       later phase evaluations then reuse more of the end solutions (issue 7). The last level at J = 0
       starts from the threshold expansion instead (second order finds no root there or is 2e-2 off). */
    const int across_last = w->rot > 0 && v + WKB_ACROSS_LAST >= w->count;
    const int threshold_last = w->rot == 0 && v + 1 >= w->count;
    if (!w->set.match_rule && level->status == WKB_SUCCESS && (w->across || across_last || !threshold_last)) {
        wkb_level second = *level;
        wkb_error e2;
        if (have_second) {
            *level = second_start_level;
            second_start = 1;
        } else if (second_order_level(w, v, &second, NULL, &e2) == WKB_SUCCESS) {
            *level = second;
            second_start = 1;
        }
    }
    /* the last two levels behind a centrifugal barrier (J > 0): the exact phase across the well, so that
       the inner second-order error, which matters there (they lie well below threshold, where the
       spacing is still finite), goes too; at J = 0 the last levels lie at threshold, where the matched
       rule is exact to ~1e-11 cm-1 */
    const int across = w->set.match_rule ? w->set.match_rule == WKB_RULE_ACROSS
                                         : (w->across || across_last);
    level->rule = across ? WKB_RULE_ACROSS : WKB_RULE_MATCHED;
    return level->status = wkb_matched_solve(w, v, across, second_start, level, err);
}

static int solve_first_order(wkb_well *w, size_t v, wkb_level *level, double *avg_dVdp, wkb_error *err)
{
    const double alpha = w_exponent(w);
    const double target = M_PI * ((double)v + w->phase);
    const double w_bottom = w_of_binding(w->top - w->bottom, alpha);
    const double tol = w->set.energy_tol + 4e-14 * (w->top - w->bottom);
    const double floor_error = 1e-14 * (w->top - w->bottom); /* from the action's relative accuracy */
    /* F(lo) > 0 (threshold side), F(hi) < 0 (bottom side) */
    double lo = w_of_binding(w->top - w->bound_top, alpha), hi = w_bottom;
    if (v >= 1 && cached(w, v - 1))
        hi = GSL_MIN(hi, w->cache_w[v - 1]);
    if (cached(w, v + 1))
        lo = GSL_MAX(lo, w->cache_w[v + 1]);
    double wg = first_guess(w, v, w_bottom);
    if (w->seed_binding > 0 && (w->seed_strong || !(v >= 2 && cached(w, v - 1) && cached(w, v - 2)))) {
        const double ws = w_of_binding(w->seed_binding, alpha);
        if (ws > lo && ws < hi)
            wg = ws;
    }
    if (!(wg > lo && wg < hi))
        wg = 0.5 * (lo + hi);

    /* F''(w), first from the neighbouring levels, then from the iterates: it predicts the error
       left after a Newton step, (F''/2F') dw^2, so that a level whose first step already lands
       within the tolerance needs no further orbit */
    double curvature = NAN;
    if (v >= 2 && cached(w, v - 1) && cached(w, v - 2))
        curvature = (1 / w->cache_slope[v - 1] - 1 / w->cache_slope[v - 2]) / (w->cache_w[v - 1] - w->cache_w[v - 2]);
    wkb_orbit o = {0};
    double b = binding_of_w(wg, alpha), bn = b, dE = INFINITY, slope = NAN, error = INFINITY;
    double prev_w = NAN, prev_dF = NAN;
    int converged = 0;
    for (int it = 0; it < w->set.max_newton; it++) {
        b = binding_of_w(wg, alpha);
        int status = wkb_orbit_at(w, b, &o, avg_dVdp, err);
        if (status)
            return status;
        const double F = o.action - target;
        const double dFdw = -o.half_period * binding_slope(wg, alpha);
        slope = 1 / dFdw;
        if (it > 0 && fabs(wg - prev_w) > 1e-6 * wg) {
            curvature = (dFdw - prev_dF) / (wg - prev_w);
        } else if (it == 0 && v == 1 && !isfinite(curvature) && cached(w, 0) && wg != w->cache_w[0]) {
            /* the secant to level 0's slope, as the neighbours' F'' above for v >= 2 */
            curvature = (dFdw - 1 / w->cache_slope[0]) / (wg - w->cache_w[0]);
        }
        prev_w = wg;
        prev_dF = dFdw;
        if (F > 0)
            lo = wg;
        else
            hi = wg;
        double wn = wg - F / dFdw;
        int newton = 1;
        if (!(wn >= lo && wn <= hi)) { /* Newton left the bracket: bisect */
            wn = 0.5 * (lo + hi);
            newton = 0;
        }
        bn = binding_of_w(wn, alpha);
        dE = fabs(bn - b);
        const double db_dw = binding_slope(wn, alpha);
        const double predicted = fabs(curvature / (2 * dFdw)) * (wn - wg) * (wn - wg) * db_dw;
        /* dw/dI at the new iterate, carried from the orbit's by F'': the extrapolation of the next levels
           weighs the slopes heavily, and the orbit's own is one Newton step off */
        if (isfinite(curvature) && fabs(curvature * (wn - wg)) < 0.1 * fabs(dFdw))
            slope = 1 / (dFdw + curvature * (wn - wg));
        wg = wn;
        if (dE <= tol) {
            converged = 1;
            error = dE + floor_error;
            break;
        }
        if (newton && 10 * predicted <= tol) {
            converged = 1;
            error = 10 * predicted + floor_error;
            break;
        }
    }
    level->v = (double)v;
    level->binding = bn;
    level->energy = w->top - bn;
    level->error = converged ? error : dE;
    if (converged && bn != b) {
        /* the last orbit was one Newton step away. Its period, Bv and <dV/dp> change with the binding
           energy on the scale of b itself (near threshold), by ~|bn - b|/b relative: where that exceeds
           PROPERTY_STEP, one orbit at the level's own energy gives them (the energy stays); else the
           turning points of that energy (Newton from those of the orbit, a few potential evaluations) */
        wkb_orbit on;
        wkb_error e_tp;
        double r1, r2, dvdp[WKB_MAX_PARAMS];
        if (fabs(bn - b) > PROPERTY_STEP * bn && wkb_orbit_at(w, bn, &on, avg_dVdp ? dvdp : NULL, &e_tp) == WKB_SUCCESS) {
            o = on;
            if (avg_dVdp)
                memcpy(avg_dVdp, dvdp, w->pot.model->n_params * sizeof *dvdp);
        } else if (wkb_well_turning_points(w, bn, &r1, &r2, &e_tp) == WKB_SUCCESS) {
            o.r_inner = r1;
            o.r_outer = r2;
        }
    }
    level->r_inner = o.r_inner;
    level->r_outer = o.r_outer;
    level->dEdv = M_PI / o.half_period;
    level->Bv = o.Bv;
    level->status = converged ? WKB_SUCCESS : WKB_ENOCONV;
    level->rule = WKB_RULE_FIRST;
    if (converged && v < w->cache_size) {
        w->cache_w[v] = wg;
        w->cache_slope[v] = slope;
        w->cache_ok[v] = 1;
    }
    if (converged && w->set.order == 2) {
        level->rule = WKB_RULE_SECOND;
        return level->status = second_order_level(w, v, level, avg_dVdp, err);
    }
    if (!converged) {
        wkb_fail(err, WKB_ENOCONV, "level v=%zu did not converge in %d iterations (last change %.3g cm-1)", v,
                 w->set.max_newton, dE);
    }
    return level->status;
}

/* Second-order (Dunham) quantization, started from the first-order level:
     I(E) - (sqrt(eps)/24) dK/dE = pi (v + phase),  K(E) = integral V_J''(r) dr / sqrt(E - V_J)
   [Dunham, Phys. Rev. 41, 713 (1932); this integrated-by-parts form and its coefficient are derived in
   shared/design/physics.md section 2]. dK/dE is a five-point central difference with a step of 1% of the
   level spacing, kept inside the well; the three-point difference bounds its error. The same five values
   give d2K/dE2 and d3K/dE3, which carry dK/dE to the Newton iterates within the stencil (+-2h): those need
   one orbit each (the action) instead of a new stencil; the last Taylor term bounds that error. The term
   is not valid close to dissociation, where the outer turning point stops being linear. */
static int second_order_level(wkb_well *w, size_t v, wkb_level *level, double *avg_dVdp, wkb_error *err)
{
    const double target = M_PI * ((double)v + w->phase);
    const double coef = sqrt(w->eps) / 24;
    const double b_min = w->top - w->bound_top, depth = w->top - w->bottom;
    const double tol = w->set.energy_tol + 4e-14 * depth;
    double b = level->binding, dE = INFINITY, fd_error = 0, taylor_error = 0;
    wkb_orbit o = {0};
    int status, converged = 0;
    for (int it = 0; it < 30 && !converged; it++) {
        if ((status = wkb_orbit_at(w, b, &o, avg_dVdp, err)))
            return status;
        const double spacing = M_PI / o.half_period;
        const double h = GSL_MIN(0.01 * spacing, 0.2 * GSL_MIN(b - b_min, depth - b));
        double K[4];
        const double offsets[4] = {2 * h, h, -h, -2 * h}; /* in binding energy: E - 2h, E - h, E + h, E + 2h */
        for (int k = 0; k < 4; k++) {
            wkb_orbit ok;
            if ((status = wkb_orbit_at(w, b + offsets[k], &ok, NULL, err)))
                return status;
            K[k] = ok.curvature_integral;
        }
        const double K0 = o.curvature_integral;
        const double dK5 = (K[0] - 8 * K[1] + 8 * K[2] - K[3]) / (12 * h);
        const double dK3 = (K[2] - K[1]) / (2 * h);
        const double d2K = (-K[0] + 16 * K[1] - 30 * K0 + 16 * K[2] - K[3]) / (12 * h * h);
        const double d3K = (-K[0] + 2 * K[1] - 2 * K[2] + K[3]) / (2 * h * h * h);
        fd_error = coef * fabs(dK5 - dK3) / o.half_period;
        const double F = o.action - coef * dK5 - target;
        double bn = b + F / o.half_period;
        bn = GSL_MAX(GSL_MIN(bn, depth), b_min);
        dE = fabs(bn - b);
        taylor_error = 0;
        converged = dE <= tol + fd_error;
        /* Newton on the action alone, dK/dE carried by its Taylor series about b */
        const double T0 = o.half_period;
        const int stencil_ok = isfinite(dK5) && isfinite(d2K) && isfinite(d3K) && isfinite(fd_error) && h > 0;
        for (int j = 0; j < 4 && stencil_ok && !converged && fabs(bn - b) <= 2 * h; j++) {
            wkb_orbit on;
            if ((status = wkb_orbit_at(w, bn, &on, avg_dVdp, err)))
                return status;
            const double e = b - bn; /* energy offset from the stencil's centre */
            const double dK = dK5 + d2K * e + 0.5 * d3K * e * e;
            taylor_error = coef * fabs(0.5 * d3K * e * e) / on.half_period;
            const double Fn = on.action - coef * dK - target;
            double bn2 = GSL_MAX(GSL_MIN(bn + Fn / on.half_period, depth), b_min);
            const double step = fabs(bn2 - bn);
            /* the error left after this Newton step: (I''/2I') step^2, I'' from the two half periods */
            const double d2I = e != 0 ? (on.half_period - T0) / e : 0;
            const double predicted = fabs(d2I / (2 * on.half_period)) * step * step;
            o = on;
            b = bn;
            bn = bn2;
            dE = step;
            if (!isfinite(taylor_error) || !isfinite(step))
                break;
            if (step <= tol + fd_error + taylor_error || 10 * predicted <= tol) {
                dE = step <= tol + fd_error + taylor_error ? step : 10 * predicted;
                converged = 1;
            }
        }
        b = bn;
    }
    level->binding = b;
    level->energy = w->top - b;
    level->error += dE + fd_error + taylor_error;
    level->r_inner = o.r_inner;
    level->r_outer = o.r_outer;
    level->dEdv = M_PI / o.half_period;
    level->Bv = o.Bv;
    if (!converged)
        return wkb_fail(err, WKB_ENOCONV, "the second-order level v=%zu did not converge (last change %.3g cm-1)",
                        v, dE);
    return WKB_SUCCESS;
}

static int check_v(const wkb_well *w, long v, wkb_error *err)
{
    if (v < 0)
        return wkb_fail(err, WKB_EINVAL, "v=%ld is invalid: vibrational quantum numbers are >= 0", v);
    if ((size_t)v >= w->count) {
        if (w->count == 0)
            return wkb_fail(err, WKB_ENOLEVEL,
                            "v=%ld is not bound: this potential binds no levels for this mass and rotation%s", v,
                            isnan(w->vD) ? " (the well minimum is above the asymptote)" : "");
        return wkb_fail(err, WKB_ENOLEVEL,
                        "v=%ld is above the last bound level (v=%zu) of this potential: it binds %zu levels "
                        "(vD = %.6f)%s", v, w->count - 1, w->count, w->vD,
                        w->bound_top < w->top ? "; levels are counted up to the top of the inner wall, which "
                                                "is lower than the asymptote" : "");
    }
    return WKB_SUCCESS;
}

int wkb_level_at(wkb_well *w, int v, wkb_level *level, double *avg_dVdp, wkb_error *err)
{
    int status = prepare(w, err);
    if (status)
        return status;
    if ((status = check_v(w, v, err)))
        return status;
    if (!(status = solve_level(w, (size_t)v, level, avg_dVdp, err)))
        level->error += w->quad_error;
    return status;
}

int wkb_level_at_seeded(wkb_well *w, int v, double seed_binding, int strong, wkb_level *level,
                        double *avg_dVdp, wkb_error *err)
{
    int status = prepare(w, err);
    if (status)
        return status;
    if ((status = check_v(w, v, err)))
        return status;
    if (w->set.ends == WKB_ENDS_MATCHED && !w->low_wall) {
        if (!(status = solve_level(w, (size_t)v, level, avg_dVdp, err)))
            level->error += w->quad_error;
        return status;
    }
    w->seed_binding = isfinite(seed_binding) && seed_binding > 0 ? seed_binding : 0;
    w->seed_strong = strong;
    status = solve_first_order(w, (size_t)v, level, avg_dVdp, err);
    if (!status)
        level->error += w->quad_error;
    w->seed_binding = 0;
    w->seed_strong = 0;
    return status;
}

int wkb_all_levels(wkb_well *w, wkb_level *levels, size_t capacity, size_t *count, double *vD, wkb_error *err)
{
    int status = prepare(w, err);
    if (status)
        return status;
    *count = w->count;
    if (vD)
        *vD = w->vD;
    const size_t n = GSL_MIN(capacity, w->count);
    size_t done = 0; /* a few orbits instead of one or two per level (action_interpolant.c) */
    if (w->set.order == 1 && w->set.ends == WKB_ENDS_MASLOV && wkb_interpolant_levels(w, levels, n, &done))
        done = 0;
    /* first order with fixed phases in a well with one minimum: the first orbit of level v starts its
       turning points from their cubic extrapolation over the four levels below (equally spaced in the
       action), one or two Halley steps a side, instead of from the level below's (three or four) */
    const int extrapolate_tp = w->set.order == 1 && w->set.ends == WKB_ENDS_MASLOV && w->n_ext == 1;
    for (size_t v = done; v < n; v++) {
        if (extrapolate_tp && v >= 4) {
            const wkb_level *L = levels + v;
            w->last_tp[0] = 4 * (L[-1].r_inner + L[-3].r_inner) - 6 * L[-2].r_inner - L[-4].r_inner;
            w->last_tp[1] = 4 * (L[-1].r_outer + L[-3].r_outer) - 6 * L[-2].r_outer - L[-4].r_outer;
            w->have_last_tp = w->last_tp[0] > 0 && w->last_tp[0] < w->r_bottom && w->last_tp[1] > w->r_bottom;
        }
        if ((status = solve_level(w, v, &levels[v], NULL, err)))
            return status;
    }
    for (size_t v = 0; v < n; v++)
        levels[v].error += w->quad_error; /* what the finest rule may miss (0 where a rule converged) */
    return WKB_SUCCESS;
}
