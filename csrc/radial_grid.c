/* radial_grid.c: the mapped grid of the exact radial solver (radial.c describes the method): the map
 * x(r) with dx/dr = K(r) following the local wavenumber across the well and A2/rho in the tail, its
 * inversion, the scan of the well that chooses it, and the grid's E-independent Numerov terms.
 */
#include <float.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include <gsl/gsl_errno.h>

#include "radial.h"

/* ---------------------------------------------------------------- the map */

/* x(rho), measured from rho = rho1. */
static double map_x(const radial_map *m, double rho)
{
    const double s = rho / m->rho1;
    return m->A * (log(s) - log1p(s * s) / RADIAL_MAP_Q) + m->A2 * log(s);
}

/* K = dx/dr and the Schwarzian term S = K''/(2K) - (3/4)(K'/K)^2 at rho. */
static void map_k(const radial_map *m, double rho, double *K, double *S)
{
    const double q = RADIAL_MAP_Q, t = (rho / m->rho1) * (rho / m->rho1), opt = 1 + t;
    const double P = m->A / opt + m->A2;
    const double P1 = -m->A * q * t / (rho * opt * opt);
    const double P2 = -(m->A * q * t / (rho * rho * opt * opt)) * ((q - 1) - 2 * q * t / opt);
    const double k = P / rho;
    const double k1 = P1 / rho - P / (rho * rho);
    const double k2 = P2 / rho - 2 * P1 / (rho * rho) + 2 * P / (rho * rho * rho);
    *K = k;
    if (S)
        *S = k2 / (2 * k) - 0.75 * (k1 / k) * (k1 / k);
}

/* rho with x(rho) = x, by Newton's method from rho0 (x is increasing and concave in ln rho). */
static double map_rho(const radial_map *m, double x, double rho0)
{
    double rho = rho0;
    for (int it = 0; it < 100; it++) {
        double K;
        map_k(m, rho, &K, NULL);
        double step = (x - map_x(m, rho)) / K;
        /* never move below half or beyond twice the current rho in one step */
        if (step < -0.5 * rho)
            step = -0.5 * rho;
        if (step > rho)
            step = rho;
        rho += step;
        /* quadratic convergence: after a step below 1e-9 rho the error is below round-off */
        if (fabs(step) <= 1e-9 * rho)
            break;
    }
    return rho;
}

/* ---------------------------------------------------------------- well analysis */

/* depth_J(r) = asymptote - V(r) - eps J(J+1)/r^2, without cancellation near the asymptote. */
double radial_depth(const wkb_radial *w, double r)
{
    wkb_pot_value pv;
    wkb_potential_eval(&w->pot, r, &pv);
    if (w->rot > 0)
        return pv.depth - w->eps * w->rot / (r * r);
    return pv.depth;
}

/* Smallest N = (x(end) - x(start))/h over the map parameters, with K >= k(r) on the scan. */
static void choose_map(wkb_radial *w, const double *rs_scan, const double *kk, size_t ns, double r_start,
                       double r_end, double h)
{
    const double rb = w->r_bottom;
    double best_N = HUGE_VAL;
    radial_map best = {0};
    for (int a = 0; a < 12; a++) {
        const double rs = rb * 0.02 * pow(2.0, a * 0.75); /* 0.02 .. 6 r_bottom */
        for (int c = 0; c < 16; c++) {
            const double rho1 = (rb + rs) * pow(1.25, c); /* 1 .. 28 (r_bottom + rs) */
            radial_map m = {0, w->set.tail_decay, rho1, rs};
            double A = 0;
            for (size_t k = 0; k < ns; k += 4) { /* K varies slowly on the scan */
                if (kk[k] <= 0)
                    continue;
                const double rho = rs_scan[k] + rs, t = (rho / rho1) * (rho / rho1);
                const double need = (kk[k] * rho - m.A2) * (1 + t);
                if (need > A)
                    A = need;
            }
            m.A = A;
            const double N = (map_x(&m, r_end + rs) - map_x(&m, r_start + rs)) / h;
            if (N < best_N) {
                best_N = N;
                best = m;
            }
        }
    }
    w->map = best;
}

/* The phase step h for energy_tol: the reported error (twice the h^6 term of the
   two-grid extrapolation) was measured as about 7e-5 depth h^6 on Morse and
   Lennard-Jones wells of 30-65 levels (the true error of the Romberg value is 10-50 times
   smaller); h = (energy_tol / (1e-4 depth))^(1/6). */
static double choose_step(const wkb_radial *w)
{
    if (w->set.phase_step > 0)
        return w->set.phase_step;
    double h = pow(w->set.energy_tol / (1e-4 * w->depth_max), 1.0 / 6.0);
    if (h > 0.3)
        h = 0.3;
    if (h < 0.01)
        h = 0.01;
    return h;
}

int radial_build_grid(wkb_radial *w, wkb_error *err)
{
    const wkb_model *model = w->pot.model;
    double *rs_scan = w->scan_r, *kk = w->scan_k;
    int status = WKB_SUCCESS;

    double r_lo = model->r_inner_scan(&w->pot);
    const double r_hint = model->r_min(&w->pot);
    if (!(r_lo > 0) || !isfinite(r_lo) || !(r_hint > r_lo) || !isfinite(r_hint))
        return wkb_fail(err, WKB_EINVAL, "the potential gives no usable scan range (r_inner_scan=%g, r_min=%g A)",
                        r_lo, r_hint);

    /* The scan must start where V_J is at or above the asymptote, or an inner well beyond a
       model's hint (an MLR turning over inside re) is cut off: step inwards until it is. */
    {
        const double flat = 1e-8 * fabs(radial_depth(w, r_hint));
        for (int k = 0; k < 400 && r_lo > 1e-6 * r_hint && radial_depth(w, r_lo) > flat; k++)
            r_lo *= 0.9;
    }
    /* Geometric scan from the inner wall outward until the threshold tail is left behind. */
    const double b_floor = w->set.min_binding;
    size_t ns = 0, kmax = 0;
    double dmax = -HUGE_VAL;
    {
        double r = r_lo;
        while (ns < RADIAL_SCAN_MAX) {
            const double d = radial_depth(w, r);
            if (isnan(d)) {
                status = wkb_fail(err, WKB_EINVAL, "the potential is not a number at r=%g A", r);
                goto cleanup;
            }
            rs_scan[ns] = r;
            kk[ns] = d; /* depth for now */
            if (d > dmax) {
                dmax = d;
                kmax = ns;
            }
            ns++;
            if (r > 3 * r_hint && d < b_floor && ns > 10)
                break;
            r *= RADIAL_SCAN_RATIO;
        }
        if (ns == RADIAL_SCAN_MAX) {
            status = wkb_fail(err, WKB_EINVAL,
                              "the potential stays more than min_binding=%g cm-1 below its asymptote out to "
                              "r=%g A: the tail is too long-ranged for a bound-state grid",
                              b_floor, rs_scan[ns - 1]);
            goto cleanup;
        }
    }
    if (!(dmax > 0)) {
        status = wkb_fail(err, WKB_ENOWELL,
                          "the effective potential (J(J+1)=%g) has no well below its asymptote %.10g cm-1: "
                          "no bound levels", w->rot, w->asymptote);
        goto cleanup;
    }
    /* Refine the minimum by golden-section search between the scan neighbours. */
    {
        double a = rs_scan[kmax > 0 ? kmax - 1 : 0], c = rs_scan[kmax + 1 < ns ? kmax + 1 : ns - 1];
        const double g = 0.5 * (3 - sqrt(5.0));
        double x1 = a + g * (c - a), x2 = c - g * (c - a);
        double f1 = radial_depth(w, x1), f2 = radial_depth(w, x2);
        for (int it = 0; it < 60; it++) {
            if (f1 > f2) {
                c = x2;
                x2 = x1;
                f2 = f1;
                x1 = a + g * (c - a);
                f1 = radial_depth(w, x1);
            } else {
                a = x1;
                x1 = x2;
                f1 = f2;
                x2 = c - g * (c - a);
                f2 = radial_depth(w, x2);
            }
        }
        const double rb = 0.5 * (a + c), db = radial_depth(w, rb);
        w->r_bottom = db > dmax ? rb : rs_scan[kmax];
        w->depth_max = db > dmax ? db : dmax;
        wkb_pot_value pv;
        wkb_potential_eval(&w->pot, w->r_bottom, &pv);
        const double rb2 = w->r_bottom * w->r_bottom;
        const double curv = pv.d2V + 6 * w->eps * w->rot / (rb2 * rb2);
        w->omega = curv > 0 ? 2 * sqrt(w->eps * curv) : 0;
    }

    /* Inner start: walk in from the threshold turning point until the threshold solution
       has decayed by 1.5 tail_decay; a soft wall (still allowed at r_lo) starts at r = 0. */
    double r_start = 0;
    {
        size_t k = kmax;
        while (k > 0 && kk[k] > 0)
            k--;
        if (kk[k] > 0) {
            r_start = 0;
        } else {
            double acc = 0;
            while (k > 0 && acc < 1.5 * w->set.tail_decay) {
                const double ka = sqrt(fmax(-kk[k], 0) / w->eps), kb = sqrt(fmax(-kk[k - 1], 0) / w->eps);
                acc += 0.5 * (ka + kb) * (rs_scan[k] - rs_scan[k - 1]);
                k--;
            }
            r_start = acc >= 1.5 * w->set.tail_decay ? rs_scan[k] : (kk[0] < 0 ? rs_scan[0] : 0);
        }
    }
    /* Outer end: the outermost point where depth_J > min_binding, plus the decay length. */
    double r_end;
    {
        size_t k = ns - 1;
        while (k > kmax && kk[k] < b_floor)
            k--;
        const double kappa = sqrt(b_floor / w->eps);
        r_end = rs_scan[k] + 1.5 * w->set.tail_decay / kappa;
    }
    /* Local threshold wavenumber on the scan, for the map. */
    for (size_t k = 0; k < ns; k++)
        kk[k] = kk[k] > 0 ? sqrt(kk[k] / w->eps) : 0;

    const double h0 = choose_step(w);
    choose_map(w, rs_scan, kk, ns, r_start, r_end, h0);
    {
        const radial_map *m = &w->map;
        const double x0 = map_x(m, r_start + m->rs), x1 = map_x(m, r_end + m->rs);
        double nd = ceil((x1 - x0) / h0 / 4) * 4 + 1;
        if (nd < 101)
            nd = 101;
        if (!isfinite(x0) || !isfinite(x1) || !(x1 > x0) || !isfinite(h0) || !(h0 > 0)) {
            /* a NaN size would pass the limit check below and wrap in the conversion */
            status = wkb_fail(err, WKB_EINVAL,
                              "the radial grid cannot be sized (range %g..%g A, step %g): the reduced mass or "
                              "the potential parameters are outside the range the exact solver can handle",
                              r_start, r_end, h0);
            goto cleanup;
        }
        if (!(nd <= (double)w->set.max_points)) {
            status = wkb_fail(err, WKB_EINVAL,
                              "the radial grid would need %.0f points (more than the limit max_grid_points=%zu): the "
                              "well is very deep for this mass, or tolerance/min_binding are very small; ask for "
                              "less, or raise max_grid_points",
                              nd, w->set.max_points);
            goto cleanup;
        }
        const size_t n = (size_t)nd;
        if ((status = radial_reserve_grid(w, n, err)))
            goto cleanup;
        w->n = n;
        w->h = (x1 - x0) / (double)(n - 1);
        const double h2 = w->h * w->h / 12;
        double rho = r_start + m->rs, rho_prev = 0;
        double running = -HUGE_VAL;
        for (size_t i = 0; i < n; i++) {
            if (i > 0) {
                double guess;
                if (i > 1) {
                    guess = rho * (rho / rho_prev); /* the map is close to logarithmic */
                } else {
                    double K;
                    map_k(m, rho, &K, NULL);
                    guess = rho + w->h / K;
                }
                rho_prev = rho;
                rho = map_rho(m, x0 + (double)i * w->h, guess);
            }
            const double r = i == 0 ? r_start : (i == n - 1 ? r_end : rho - m->rs);
            double K, S;
            map_k(m, r + m->rs, &K, &S);
            double d;
            if (r > 0) {
                d = radial_depth(w, r);
            } else {
                wkb_pot_value pv;
                wkb_potential_eval(&w->pot, 0.0, &pv);
                d = w->rot > 0 ? -HUGE_VAL : pv.depth;
            }
            if (isnan(d) || (r > 0 && !isfinite(d))) {
                /* caused by the potential given (e.g. no repulsive wall down to r = 0): an input error */
                status = wkb_fail(err, WKB_EINVAL, "the potential is not finite at r=%g A, inside the range the "
                                  "exact solver must cover (the classically allowed region reaches it)", r);
                goto cleanup;
            }
            w->r[i] = r;
            w->qt[i] = h2 * (S - d / w->eps) / (K * K);
            w->wt[i] = h2 / (w->eps * K * K);
            w->F[i] = d;
            if (d > running)
                running = d;
            w->pmax[i] = running;
        }
        running = -HUGE_VAL;
        for (size_t i = n; i-- > 0;) {
            if (w->F[i] > running)
                running = w->F[i];
            w->smax[i] = running;
        }
    }
cleanup:
    return status;
}

