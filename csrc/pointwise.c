/* pointwise.c: the point-wise potential, a curve known at points (r_i, V_i).
 *
 * Inside the data range [r_0, r_{N-1}] the curve is a cubic spline with not-a-knot end
 * conditions (third derivative continuous at r_1 and r_{N-2}); its error is O(h^4) up to
 * the end intervals, where a natural spline (V'' = 0, GSL's cspline) is only O(h^2) on a
 * steep wall. Outside the data range:
 *   inner wall  X(r) = A + B exp(-C (r - r_0)) through the three innermost points,
 *   outer tail  T(r) = D - C_n / r^n through the outermost point(s) (see fit_tail).
 * The joins are C2 by blending over one interval outside the data range,
 *   V = (1 - w) S + w X,  w = 10 t^3 - 15 t^4 + 6 t^5 (w, w', w'' = 0 at t = 0; w = 1,
 *   w' = w'' = 0 at t = 1), t = distance from the end point / blend width,
 * with S the end cubic of the spline continued. So inside the data range the curve is the
 * pure spline (it interpolates every point), and beyond one interval it is the pure
 * extrapolation (depth = C_n/r^n exactly in the tail). Blending inside the first and last
 * data intervals instead (X through the end points) was tried: it replaces the O(h^4)
 * spline there by the O(h^3) three-point fits, and its maximum error on a sampled Morse
 * curve was 3-9 times larger.
 * r_min is the lowest point refined by a root of dV/dr; r_inner_scan is where the wall
 * is 1e3 well depths above the minimum (never below 1e-3 r_0, for walls that saturate).
 * The curve is immutable after wkb_pointwise_alloc: evaluation has no mutable state.
 */
#include <float.h>
#include <math.h>
#include <stdlib.h>

#include <gsl/gsl_errno.h>
#include <gsl/gsl_interp.h>
#include <gsl/gsl_roots.h>

#include "wkb.h"

/* Fewest points: three for the wall fit, three for the tail fit, and the not-a-knot
   spline needs at least four; five keeps the wall and tail fits apart but one point. */
#define PW_MIN_POINTS 5
/* Range accepted for a fitted tail power: physical long-range tails have n = 1 (ions) to
   about 10; beyond 20 the outer points are not in the long-range region. */
#define PW_MIN_FITTED_POWER 1.0
#define PW_MAX_FITTED_POWER 20.0
/* Range accepted for a given tail power. */
#define PW_MAX_GIVEN_POWER 64.0
/* r_inner_scan: where the wall is this many well depths above the minimum. */
#define PW_SCAN_DEPTHS 1e3
/* exp() arguments are capped here so that the wall stays finite for r -> 0. */
#define PW_MAX_EXP 700.0

struct wkb_pointwise {
    size_t n;
    double *r, *V, *M;      /* points and spline second derivatives M_i = S''(r_i) */
    int wall_form;          /* WKB_WALL_EXPONENTIAL or WKB_WALL_INVERSE_POWER */
    double wall_A, wall_B, wall_C, wall_width; /* C: the rate (1/A) or the power */
    double D, power, Cn, tail_width;
    double r_min, V_min, r_scan;
};

/* ---------------------------------------------------------------- evaluation */

typedef struct {
    double V, dV, d2V;
} pw_val;

/* Cubic piece of interval i (r_i..r_{i+1}), also used continued outside that interval. */
static pw_val spline_piece(const wkb_pointwise *c, size_t i, double x)
{
    const double h = c->r[i + 1] - c->r[i];
    const double a = (c->r[i + 1] - x) / h, b = (x - c->r[i]) / h;
    const double Mi = c->M[i], Mj = c->M[i + 1];
    pw_val s;
    s.V = a * c->V[i] + b * c->V[i + 1] + ((a * a * a - a) * Mi + (b * b * b - b) * Mj) * h * h / 6;
    s.dV = (c->V[i + 1] - c->V[i]) / h + (-(3 * a * a - 1) * Mi + (3 * b * b - 1) * Mj) * h / 6;
    s.d2V = a * Mi + b * Mj;
    return s;
}

static pw_val wall_value(const wkb_pointwise *c, double x)
{
    const double C = c->wall_C;
    if (c->wall_form == WKB_WALL_INVERSE_POWER) { /* A + B (r_0/r)^C */
        const double e = exp(GSL_MIN(C * log(c->r[0] / x), PW_MAX_EXP)) * c->wall_B;
        pw_val w = {c->wall_A + e, -C * e / x, C * (C + 1) * e / (x * x)};
        return w;
    }
    const double e = exp(GSL_MIN(-C * (x - c->r[0]), PW_MAX_EXP)) * c->wall_B;
    pw_val w = {c->wall_A + e, -C * e, C * C * e};
    return w;
}

/* Tail D - C_n/r^n; *depth receives C_n/r^n. */
static pw_val tail_value(const wkb_pointwise *c, double x, double *depth)
{
    const double n = c->power, u = c->Cn * pow(x, -n);
    pw_val t = {c->D - u, n * u / x, -n * (n + 1) * u / (x * x)};
    *depth = u;
    return t;
}

/* Quintic smoothstep w(t) and its first two derivatives in t, for t in [0, 1]. */
static void smoothstep(double t, double *w, double *dw, double *d2w)
{
    const double s = 1 - t;
    *w = t * t * t * (10 - 15 * t + 6 * t * t);
    *dw = 30 * t * t * s * s;
    *d2w = 60 * t * s * (1 - 2 * t);
}

/* (1 - w) S + w X with w = w(t), t = (x - x_join)/width * dir; C2 in x. */
static void blend(pw_val S, pw_val X, double depth_S, double depth_X, double t, double dtdx,
                  wkb_pot_value *out)
{
    double w, dw, d2w;
    smoothstep(t, &w, &dw, &d2w);
    const double wx = dw * dtdx, wxx = d2w * dtdx * dtdx, diff = X.V - S.V;
    out->V = (1 - w) * S.V + w * X.V;
    out->dV = (1 - w) * S.dV + w * X.dV + wx * diff;
    out->d2V = (1 - w) * S.d2V + w * X.d2V + 2 * wx * (X.dV - S.dV) + wxx * diff;
    out->depth = (1 - w) * depth_S + w * depth_X;
}

static void curve_eval(const wkb_pointwise *c, double x, wkb_pot_value *out)
{
    const size_t last = c->n - 1;
    if (!(x > 0)) { /* outside the domain r > 0 (or NaN) */
        out->V = out->dV = out->d2V = out->depth = NAN;
        return;
    }
    if (x < c->r[0]) {
        const double t = (c->r[0] - x) / c->wall_width;
        pw_val X = wall_value(c, x);
        if (t >= 1) {
            out->V = X.V, out->dV = X.dV, out->d2V = X.d2V, out->depth = c->D - X.V;
        } else {
            pw_val S = spline_piece(c, 0, x);
            blend(S, X, c->D - S.V, c->D - X.V, t, -1 / c->wall_width, out);
        }
        return;
    }
    if (x > c->r[last]) {
        const double t = (x - c->r[last]) / c->tail_width;
        double depth_T;
        pw_val T = tail_value(c, x, &depth_T);
        if (t >= 1) {
            out->V = T.V, out->dV = T.dV, out->d2V = T.d2V, out->depth = depth_T;
        } else {
            pw_val S = spline_piece(c, last - 1, x);
            blend(S, T, c->D - S.V, depth_T, t, 1 / c->tail_width, out);
        }
        return;
    }
    pw_val S = spline_piece(c, gsl_interp_bsearch(c->r, x, 0, last), x);
    out->V = S.V, out->dV = S.dV, out->d2V = S.d2V, out->depth = c->D - S.V;
}

static void pw_eval(const wkb_potential *pot, double r, wkb_pot_value *out)
{
    curve_eval(pot->curve, r, out);
}
static double pw_asymptote(const wkb_potential *pot) { return pot->curve->D; }
static double pw_r_min(const wkb_potential *pot) { return pot->curve->r_min; }
static double pw_r_inner_scan(const wkb_potential *pot) { return pot->curve->r_scan; }
static double pw_tail_power(const wkb_potential *pot) { return pot->curve->power; }

const wkb_model wkb_model_pointwise = {
    "pointwise", 0, NULL, NULL, pw_eval, NULL, pw_asymptote, pw_r_min, pw_r_inner_scan, pw_tail_power,
};

/* ---------------------------------------------------------------- construction */

/* ln(e^x - 1) without overflow for large x. */
static double log_expm1(double x)
{
    return x > 30 ? x + log1p(-exp(-x)) : log(expm1(x));
}

/* The ratio equation shared by both fits: ln[(e^x - 1)/(1 - e^(-k x))] = ln q, x > 0.
   Wall: x = C h_0, k = h_1/h_0. Tail: x = n ln(r_b/r_a), k = ln(r_c/r_b)/ln(r_b/r_a).
   The left side rises monotonically from ln(1/k) (x -> 0) to infinity. */
typedef struct {
    double k, log_q;
} ratio_eq;

static double ratio_residual(double x, void *params)
{
    const ratio_eq *e = params;
    return log_expm1(x) - log(-expm1(-e->k * x)) - e->log_q;
}

#define RATIO_X_LO 1e-9
#define RATIO_X_HI PW_MAX_EXP

/* Solves the ratio equation for x in [RATIO_X_LO, RATIO_X_HI] with Brent's method.
   Returns WKB_SUCCESS, or WKB_EINVAL with *side = -1 (root below the range) or +1 (above). */
static int solve_ratio(gsl_root_fsolver *solver, double q, double k, double *x, int *side)
{
    ratio_eq e = {k, log(q)};
    gsl_function f = {ratio_residual, &e};
    const double f_lo = ratio_residual(RATIO_X_LO, &e), f_hi = ratio_residual(RATIO_X_HI, &e);
    *side = 0;
    if (!(f_lo < 0)) {
        *side = -1;
        return WKB_EINVAL;
    }
    if (!(f_hi > 0)) {
        *side = 1;
        return WKB_EINVAL;
    }
    if (gsl_root_fsolver_set(solver, &f, RATIO_X_LO, RATIO_X_HI) != GSL_SUCCESS)
        return WKB_ENOCONV;
    for (int it = 0; it < 300; it++) {
        if (gsl_root_fsolver_iterate(solver) != GSL_SUCCESS)
            return WKB_ENOCONV;
        const double lo = gsl_root_fsolver_x_lower(solver), hi = gsl_root_fsolver_x_upper(solver);
        *x = gsl_root_fsolver_root(solver);
        if (gsl_root_test_interval(lo, hi, 0, 4 * DBL_EPSILON) == GSL_SUCCESS || hi - lo <= 0)
            return WKB_SUCCESS;
    }
    return WKB_ENOCONV;
}

static int check_points(const double *r, const double *V, size_t n, wkb_error *err)
{
    if (n < PW_MIN_POINTS)
        return wkb_fail(err, WKB_EINVAL,
                        "a point-wise potential needs at least %d points (r, V); got %zu", PW_MIN_POINTS, n);
    for (size_t i = 0; i < n; i++) {
        if (!isfinite(r[i]))
            return wkb_fail(err, WKB_EINVAL, "r[%zu]=%g is not a finite distance (angstrom)", i, r[i]);
        if (!isfinite(V[i]))
            return wkb_fail(err, WKB_EINVAL, "V[%zu]=%g (at r=%.10g A) is not a finite energy (cm-1)", i,
                            V[i], r[i]);
        if (r[i] <= 0)
            return wkb_fail(err, WKB_EINVAL, "r[%zu]=%g A is invalid: distances must be > 0", i, r[i]);
        if (i > 0 && r[i] == r[i - 1])
            return wkb_fail(err, WKB_EINVAL,
                            "r[%zu] = r[%zu] = %.10g A is duplicated: each distance may appear only once "
                            "(drop or average the repeated points)", i - 1, i, r[i]);
        if (i > 0 && r[i] < r[i - 1])
            return wkb_fail(err, WKB_EINVAL,
                            "r must be strictly increasing: r[%zu]=%.10g A is followed by the smaller "
                            "r[%zu]=%.10g A (sort the points by r)", i - 1, r[i - 1], i, r[i]);
    }
    return WKB_SUCCESS;
}

/* Not-a-knot spline: solves the tridiagonal system for M_1..M_{n-2} (Thomas algorithm;
   the rows are diagonally dominant), then M_0 and M_{n-1} from the not-a-knot conditions
   (M_1 - M_0)/h_0 = (M_2 - M_1)/h_1 and its mirror at the other end. */
static int spline_setup(wkb_pointwise *c, double *scratch, wkb_error *err)
{
    const size_t n = c->n, m = n - 2; /* unknowns M_1..M_{n-2}, index j = i - 1 */
    const double *r = c->r, *V = c->V;
    double *cp = scratch, *dp = scratch + m;
    for (size_t j = 0; j < m; j++) {
        const size_t i = j + 1;
        const double ha = r[i] - r[i - 1], hb = r[i + 1] - r[i];
        double sub = ha, diag = 2 * (ha + hb), sup = hb;
        const double rhs = 6 * ((V[i + 1] - V[i]) / hb - (V[i] - V[i - 1]) / ha);
        if (i == 1) { /* M_0 eliminated */
            diag = (ha + hb) * (ha + 2 * hb) / hb;
            sup = (hb - ha) * (hb + ha) / hb;
            sub = 0;
        }
        if (i == n - 2) { /* M_{n-1} eliminated */
            diag = (ha + hb) * (2 * ha + hb) / ha; /* n >= 5: never also row 1 */
            sub = (ha - hb) * (ha + hb) / ha;
            sup = 0;
        }
        const double denom = diag - (j > 0 ? sub * cp[j - 1] : 0);
        if (!(fabs(denom) > 0) || !isfinite(denom))
            return wkb_fail(err, WKB_ENUMERIC, "the spline system is singular at r[%zu]=%g", i, r[i]);
        cp[j] = sup / denom;
        dp[j] = (rhs - (j > 0 ? sub * dp[j - 1] : 0)) / denom;
    }
    for (size_t j = m - 1; j-- > 0;)
        dp[j] -= cp[j] * dp[j + 1];
    for (size_t j = 0; j < m; j++)
        c->M[j + 1] = dp[j];
    {
        const double h0 = r[1] - r[0], h1 = r[2] - r[1];
        c->M[0] = c->M[1] - h0 * (c->M[2] - c->M[1]) / h1;
        const double ha = r[n - 2] - r[n - 3], hb = r[n - 1] - r[n - 2];
        c->M[n - 1] = c->M[n - 2] + hb * (c->M[n - 2] - c->M[n - 3]) / ha;
    }
    for (size_t i = 0; i < n; i++)
        if (!isfinite(c->M[i]))
            return wkb_fail(err, WKB_ENUMERIC, "the spline through the points is not finite near r[%zu]=%g",
                            i, r[i]);
    return WKB_SUCCESS;
}

/* Wall through the three innermost points: A + B exp(-C (r - r_0)), or A + B (r_0/r)^C. Both lead to
   the ratio equation: exponential x = C h_0, k = h_1/h_0; inverse power x = C ln(r_1/r_0),
   k = ln(r_2/r_1)/ln(r_1/r_0); then B = (V_0 - V_1)/(1 - e^-x) and A = V_0 - B in both. */
static int fit_wall(wkb_pointwise *c, gsl_root_fsolver *solver, wkb_error *err)
{
    const double *r = c->r, *V = c->V;
    const int power = c->wall_form == WKB_WALL_INVERSE_POWER;
    const double h0 = power ? log(r[1] / r[0]) : r[1] - r[0], h1 = power ? log(r[2] / r[1]) : r[2] - r[1];
    const char *form = power ? "inverse-power wall A + B/r^k" : "exponential wall A + B exp(-C r)";
    double x;
    int side, s;
    if (!(V[0] > V[1] && V[1] > V[2]))
        return wkb_fail(err, WKB_EINVAL,
                        "the inner wall does not rise: V must fall with r over the three innermost points, "
                        "but V=%.10g, %.10g, %.10g cm-1 at r=%.10g, %.10g, %.10g A; no %s fits (start the "
                        "points on the repulsive wall)", V[0], V[1], V[2], r[0], r[1], r[2], form);
    const double q = (V[0] - V[1]) / (V[1] - V[2]);
    s = solve_ratio(solver, q, h1 / h0, &x, &side);
    if (s == WKB_EINVAL && side < 0)
        return wkb_fail(err, WKB_EINVAL,
                        "the inner wall does not curve upwards enough: V=%.10g, %.10g, %.10g cm-1 at r=%.10g, "
                        "%.10g, %.10g A, so no %s with a positive %s fits (check these points%s)",
                        V[0], V[1], V[2], r[0], r[1], r[2], form, power ? "power k" : "rate C",
                        power ? ", or use the exponential wall" : "");
    if (s == WKB_EINVAL)
        return wkb_fail(err, WKB_EINVAL,
                        "the inner wall is too steep to fit an %s: V=%.10g, %.10g, %.10g cm-1 at "
                        "r=%.10g, %.10g, %.10g A", form, V[0], V[1], V[2], r[0], r[1], r[2]);
    if (s)
        return wkb_fail(err, s, "the fit of the inner %s did not converge", form);
    c->wall_C = x / h0;
    c->wall_B = (V[0] - V[1]) / (-expm1(-x));
    c->wall_A = V[0] - c->wall_B;
    /* blend over one interval, but never reaching r = 0 */
    c->wall_width = GSL_MIN(h0, 0.5 * r[0]);
    return WKB_SUCCESS;
}

/* Tail D - C_n/r^n. Unknowns among (D, n) are fitted exactly to the outermost points:
   none unknown: the last point; one: the last two; both: the last three. */
static int fit_tail(wkb_pointwise *c, gsl_root_fsolver *solver, double D_given, double n_given,
                    wkb_error *err)
{
    const size_t N = c->n;
    const double ra = c->r[N - 3], rb = c->r[N - 2], rc = c->r[N - 1];
    const double Va = c->V[N - 3], Vb = c->V[N - 2], Vc = c->V[N - 1];
    const int fit_D = isnan(D_given), fit_n = isnan(n_given);
    double D = D_given, n = n_given, Cn;
    const double lc = log(rc / rb);

    if (!fit_D && !isfinite(D_given))
        return wkb_fail(err, WKB_EINVAL, "asymptote=%g is invalid: give a finite energy (cm-1), or none to fit it",
                        D_given);
    if (!fit_n && !(isfinite(n_given) && n_given > 0 && n_given <= PW_MAX_GIVEN_POWER))
        return wkb_fail(err, WKB_EINVAL,
                        "tail_power=%g is invalid: the power n of the tail D - C_n/r^n must be a number in "
                        "(0, %g], e.g. 6 for a van der Waals tail, or none to fit it", n_given,
                        PW_MAX_GIVEN_POWER);
    if ((fit_D || fit_n) && !(Vc > Vb && (!(fit_D && fit_n) || Vb > Va)))
        return wkb_fail(err, WKB_EINVAL,
                        "cannot fit the tail D - C_n/r^n: the outermost points do not rise towards an "
                        "asymptote (V=%.10g, %.10g, %.10g cm-1 at r=%.10g, %.10g, %.10g A); give "
                        "asymptote=... and tail_power=...", Va, Vb, Vc, ra, rb, rc);
    if (!fit_D && !(Vc < D))
        return wkb_fail(err, WKB_EINVAL,
                        "the outermost point V[%zu]=%.10g cm-1 (r=%.10g A) is not below the given "
                        "asymptote=%.10g cm-1: the tail D - C_n/r^n with C_n > 0 needs V < D there",
                        N - 1, Vc, rc, D);

    if (fit_D && fit_n) {
        const double la = log(rb / ra);
        double x;
        int side;
        const int s = solve_ratio(solver, (Vb - Va) / (Vc - Vb), lc / la, &x, &side);
        if (s == WKB_EINVAL)
            return wkb_fail(err, WKB_EINVAL,
                            "cannot fit the tail D - C_n/r^n through the outermost three points (V=%.10g, "
                            "%.10g, %.10g cm-1 at r=%.10g, %.10g, %.10g A): %s; give asymptote=... and/or "
                            "tail_power=..., or add points further out", Va, Vb, Vc, ra, rb, rc,
                            side < 0 ? "they do not bend over towards an asymptote (no power n > 0 fits)"
                                     : "they would need a power n far above any physical one");
        if (s)
            return wkb_fail(err, s, "the tail fit D - C_n/r^n did not converge; give asymptote=... and/or "
                                    "tail_power=...");
        n = x / la;
    } else if (fit_n) {
        n = log((D - Vb) / (D - Vc)) / lc;
    }
    if (fit_n && !(n >= PW_MIN_FITTED_POWER && n <= PW_MAX_FITTED_POWER))
        return wkb_fail(err, WKB_EINVAL,
                        "the fitted tail power n=%.6g is not physical (accepted: %g to %g); the outermost "
                        "points are probably not in the long-range region: give tail_power=... (e.g. 6)%s",
                        n, PW_MIN_FITTED_POWER, PW_MAX_FITTED_POWER, fit_D ? " and/or asymptote=..." : "");
    if (fit_D) {
        /* C_n = (Vc - Vb)/(rb^-n - rc^-n), D = Vc + C_n rc^-n, written without overflow */
        const double g = -expm1(-n * lc); /* 1 - (rb/rc)^n */
        Cn = (Vc - Vb) * pow(rb, n) / g;
        D = Vc + (Vc - Vb) * exp(-n * lc) / g;
    } else {
        Cn = (D - Vc) * pow(rc, n);
    }
    if (!(isfinite(Cn) && Cn > 0 && isfinite(D)))
        return wkb_fail(err, WKB_EINVAL,
                        "the tail fit gives a non-physical coefficient C_n=%g (D=%g, n=%g); give "
                        "asymptote=... and tail_power=...", Cn, D, n);
    c->D = D;
    c->power = n;
    c->Cn = Cn;
    c->tail_width = rc - rb;
    return WKB_SUCCESS;
}

static double curve_slope(double x, void *params)
{
    wkb_pot_value v;
    curve_eval(params, x, &v);
    return v.dV;
}

/* Minimum of the curve: the lowest point, refined by a root of dV/dr in the neighbouring
   intervals when dV/dr changes sign there. */
static int find_minimum(wkb_pointwise *c, gsl_root_fsolver *solver, wkb_error *err)
{
    const size_t N = c->n;
    size_t k = 0;
    for (size_t i = 1; i < N; i++)
        if (c->V[i] < c->V[k])
            k = i;
    const double lo = c->r[k > 0 ? k - 1 : 0];
    const double hi = k + 1 < N ? c->r[k + 1] : c->r[N - 1] + c->tail_width;
    c->r_min = c->r[k];
    if (curve_slope(lo, c) < 0 && curve_slope(hi, c) > 0) {
        gsl_function f = {curve_slope, c};
        if (gsl_root_fsolver_set(solver, &f, lo, hi) != GSL_SUCCESS)
            return wkb_fail(err, WKB_ENOCONV, "could not search the minimum of the point-wise curve");
        for (int it = 0; it < 200; it++) {
            if (gsl_root_fsolver_iterate(solver) != GSL_SUCCESS)
                return wkb_fail(err, WKB_ENOCONV, "the search for the minimum of the curve failed");
            c->r_min = gsl_root_fsolver_root(solver);
            if (gsl_root_test_interval(gsl_root_fsolver_x_lower(solver), gsl_root_fsolver_x_upper(solver), 0,
                                       4 * DBL_EPSILON) == GSL_SUCCESS)
                break;
        }
    }
    wkb_pot_value v;
    curve_eval(c, c->r_min, &v);
    c->V_min = v.V;
    return WKB_SUCCESS;
}

/* Inner scan radius: where the wall is PW_SCAN_DEPTHS well depths above the minimum
   (the wall's own rise V_0 - V_min stands in for the depth when there is no well). */
static void find_inner_scan(wkb_pointwise *c)
{
    double scale = c->D - c->V_min;
    if (!(scale > 0))
        scale = c->V[0] - c->V_min;
    const double target = c->V_min + PW_SCAN_DEPTHS * scale;
    double r = c->r[0];
    if (target > c->V[0]) {
        const double ln_ratio = log((target - c->wall_A) / c->wall_B); /* > 0 */
        r = c->wall_form == WKB_WALL_INVERSE_POWER ? c->r[0] * exp(-ln_ratio / c->wall_C)
                                                   : c->r[0] - ln_ratio / c->wall_C;
    }
    c->r_scan = GSL_MAX(r, 1e-3 * c->r[0]);
}

int wkb_pointwise_alloc(const double *r, const double *V, size_t n, double asymptote,
                        double tail_power, wkb_pointwise **out, wkb_error *err)
{
    return wkb_pointwise_alloc_wall(r, V, n, asymptote, tail_power, WKB_WALL_EXPONENTIAL, out, err);
}

int wkb_pointwise_alloc_wall(const double *r, const double *V, size_t n, double asymptote,
                             double tail_power, int inner_wall, wkb_pointwise **out, wkb_error *err)
{
    wkb_pointwise *c = NULL;
    double *scratch = NULL;
    gsl_root_fsolver *solver = NULL;
    int status;

    *out = NULL;
    if ((status = check_points(r, V, n, err)))
        return status;
    if (inner_wall != WKB_WALL_EXPONENTIAL && inner_wall != WKB_WALL_INVERSE_POWER)
        return wkb_fail(err, WKB_EINVAL, "inner wall form %d is not known: use %d (exponential) or %d "
                        "(inverse power)", inner_wall, WKB_WALL_EXPONENTIAL, WKB_WALL_INVERSE_POWER);
    if (!(c = calloc(1, sizeof *c)) || !(c->r = malloc(n * sizeof(double))) ||
        !(c->V = malloc(n * sizeof(double))) || !(c->M = malloc(n * sizeof(double))) ||
        !(scratch = malloc(2 * n * sizeof(double))) ||
        !(solver = gsl_root_fsolver_alloc(gsl_root_fsolver_brent))) {
        status = wkb_fail(err, WKB_ENOMEM, "out of memory for a point-wise potential of %zu points", n);
        goto cleanup;
    }
    c->n = n;
    c->wall_form = inner_wall;
    for (size_t i = 0; i < n; i++)
        c->r[i] = r[i], c->V[i] = V[i];
    if ((status = spline_setup(c, scratch, err)) || (status = fit_wall(c, solver, err)) ||
        (status = fit_tail(c, solver, asymptote, tail_power, err)) || (status = find_minimum(c, solver, err)))
        goto cleanup;
    find_inner_scan(c);
    *out = c;
    c = NULL;
    status = WKB_SUCCESS;
cleanup:
    gsl_root_fsolver_free(solver);
    free(scratch);
    wkb_pointwise_free(c);
    return status;
}

void wkb_pointwise_free(wkb_pointwise *curve)
{
    if (!curve)
        return;
    free(curve->r);
    free(curve->V);
    free(curve->M);
    free(curve);
}

void wkb_pointwise_tail(const wkb_pointwise *curve, double *asymptote, double *power,
                        double *coefficient)
{
    *asymptote = curve->D;
    *power = curve->power;
    *coefficient = curve->Cn;
}

void wkb_pointwise_wall(const wkb_pointwise *curve, int *form, double *A, double *B, double *C)
{
    *form = curve->wall_form;
    *A = curve->wall_A;
    *B = curve->wall_B;
    *C = curve->wall_C;
}
