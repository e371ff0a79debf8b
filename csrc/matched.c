/* matched.c: quantization with matched end phases (shared/design/physics.md section 12).
 *
 * At each end of the orbit the phase psi is read off an exact solution of the radial equation through
 * the turning region (end_solution.c), joined at a matching point b in the allowed region to the
 * second-order WKB wave k^(-1/2) sin(psi), psi' = k + dk. Between the two matching points the interior
 * is second-order WKB, integrated directly (no turning point lies there, so the second-order term needs
 * no finite part). Near a -C_n/r^n asymptote this gives the threshold phase pi/2 + pi/(n-2) instead of
 * pi/2, and in a region of fast-changing curvature the phase of the true solution; at a linear turning
 * point it reduces to the Airy value pi/2 (A&S 10.4.60) to within the fourth-order term.
 *
 * Rules served (chosen per level in quantize.c): the matched rule proper (outer end exact, inner side
 * second-order WKB up to the outer matching point with the one-sided second-order term), and the
 * exact phase across the well (both exact solutions meet at the bottom; no WKB left). Each level's
 * iteration opens a reuse scope in end_solution.c, and sets the ODE tolerance the level needs.
 */
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include <gsl/gsl_errno.h>
#include <gsl/gsl_math.h>
#include "wkb.h"
#include "well.h"

#define MIDDLE_LOG_PIECE 0.5 /* Gauss-Legendre pieces of the interior, in ln r */
/* The phase ODE's tolerance per step follows what the level needs: its accumulated error (~20 tolerances,
   measured) times dE/dv / pi stays at ODE_ENERGY_SHARE cm-1 (100x below the 1e-6 cm-1 held for the last
   levels), between the settings' match_ode_tol and ODE_TOL_MAX; a tighter tolerance costs steps
   (rk8pd: tol^(-1/8)) and buys nothing the rule keeps. */
#define ODE_ENERGY_SHARE 1e-8
#define ODE_TOL_MAX 1e-7
#define ODE_TOL_THRESHOLD 1e-7 /* for v_th: 20 tol / pi ~ 6e-7 in v */
#define ROUGH_TOL 1e-5 /* a first evaluation's outer end, far from the level (wkb_matched_solve) */

/* The tolerance per step for a level with spacing dE/dv (cm-1; not positive: unknown). */
static double level_tol(const wkb_well *w, double dEdv)
{
    const double floor = w->set.match_ode_tol;
    if (!(dEdv > 0) || !w->set.match_milne)
        return floor;
    return GSL_MAX(floor, GSL_MIN(ODE_TOL_MAX, M_PI * ODE_ENERGY_SHARE / (20 * dEdv)));
}

/* Binding energy of the matching level E - f (E - V_min). */
static double match_binding(const wkb_well *w, double binding)
{
    const double E = w->top - binding;
    return binding + w->set.match_fraction * (E - w->bottom);
}
/* Matching points and turning points at binding energy b. */
static int match_points(wkb_well *w, double binding, double *r1, double *r2, double *b_in, double *b_out,
                        wkb_error *err)
{
    int status = wkb_well_turning_points(w, binding, r1, r2, err);
    if (status)
        return status;
    const double bm = match_binding(w, binding), rb = GSL_MIN(GSL_MAX(w->r_bottom, *r1), *r2);
    if (wkb_well_crossing(w, bm, *r1, rb, b_in) || wkb_well_crossing(w, bm, rb, *r2, b_out))
        return wkb_fail(err, WKB_ENUMERIC, "no matching points found at binding energy %.6g cm-1", binding);
    return WKB_SUCCESS;
}

/* First-order action |integral_b^r_turn k dr| (r = r_turn - (r_turn - b) s^2 removes the square-root end). */
static double action_to_turn(const wkb_well *w, double binding, double b, double r_turn)
{
    double sum = 0;
    const double L = r_turn - b;
    for (size_t i = 0; i < w->set.nodes; i++) {
        const double s = w->even2_x[i], r = r_turn - L * s * s;
        wkb_pot_value pv;
        const double kin = wkb_well_kinetic(w, binding, r, &pv);
        if (kin > 0)
            sum += w->even2_w[i] * 2 * L * s * sqrt(kin / w->eps);
    }
    return fabs(sum);
}

/* The error of the matching itself at a linear turning point: the phase psi that the matching formula
   reads off the exact Airy solution Ai(-z) at the point with action zeta from the turning point, minus
   the second-order WKB phase 3 pi/4 - zeta + 5/(72 zeta) there (A&S 10.4.60 with its first correction
   term c_1 = 5/72). It falls off as zeta^-3; subtracting it makes the rule exact to second order at a
   linear turning point (a comparison-equation correction, with the Airy coordinate set by the action). */
static int airy_matching_error(double zeta, double *delta, wkb_error *err)
{
    if (zeta > 2e3) { /* below 1e-11 rad */
        *delta = 0;
        return WKB_SUCCESS;
    }
    const double z = pow(1.5 * zeta, 2.0 / 3.0);
    wkb_airy_values a;
    int status = wkb_airy(-z, &a, err);
    if (status)
        return status;
    const double q2 = sqrt(z) + (5.0 / 32) * pow(z, -2.5);
    /* cot psi = (Ai'/Ai - 1/(4z))/q2 */
    double psi = atan2(q2 * a.Ai, a.dAi - a.Ai / (4 * z));
    const double ref = 0.75 * M_PI - zeta + 5.0 / (72 * zeta);
    psi += 2 * M_PI * round((ref - psi) / (2 * M_PI));
    psi += M_PI * round((ref - psi) / M_PI);
    *delta = psi - ref;
    return WKB_SUCCESS;
}

int wkb_matched_end_phase(wkb_well *w, double binding, int end, double r_match, wkb_end_phase *out,
                          wkb_error *err)
{
    double r1, r2, b_in, b_out;
    if (!w->ready)
        return wkb_fail(err, WKB_EINVAL, "the well has not been set up");
    if (end != 0 && end != 1)
        return wkb_fail(err, WKB_EINVAL, "end=%d is invalid: 0 (inner) or 1 (outer)", end);
    int status = match_points(w, binding, &r1, &r2, &b_in, &b_out, err);
    if (status)
        return status;
    double b = end ? b_out : b_in;
    if (r_match > 0) {
        wkb_pot_value pv;
        if (!(wkb_well_kinetic(w, binding, r_match, &pv) > 0) || (end && r_match < w->r_bottom) ||
            (!end && r_match > w->r_bottom))
            return wkb_fail(err, WKB_EINVAL,
                            "r_match=%.8g A is invalid: it must lie in the allowed region between the bottom "
                            "(%.8g A) and the %s turning point (%.8g A)", r_match, w->r_bottom,
                            end ? "outer" : "inner", end ? r2 : r1);
        b = r_match;
    }
    if ((status = wkb_end_set_tol(w, w->set.match_ode_tol, err)) || (status = wkb_end_solution(w, binding, end, end ? r2 : r1, b, out, err)))
        return status;
    out->action_to_turn = action_to_turn(w, binding, b, end ? r2 : r1);
    return WKB_SUCCESS;
}

/* Inner turning point at binding energy b (which may lie above the asymptote), near r_guess. */
static int inner_turn(const wkb_well *w, double binding, double r_guess, double *r1)
{
    wkb_pot_value pv;
    double lo = r_guess;
    for (int i = 0; i < 200 && !(wkb_well_kinetic(w, binding, lo, &pv) < 0); i++)
        lo *= 0.98;
    return wkb_well_crossing(w, binding, lo, w->r_bottom, r1);
}

/* integral_{r1}^{b} of k dr and of V_J''/sqrt(E - V_J) dr: r = r1 + (rb - r1) s^2 up to the bottom,
   plain pieces in ln r beyond it. */
static void inner_integrals(const wkb_well *w, double binding, double r1, double b, double *action, double *curv)
{
    const double rb = GSL_MIN(w->r_bottom, b), L = rb - r1, eps = w->eps;
    double A = 0, K = 0;
    wkb_pot_value pv;
    for (size_t i = 0; i < w->set.nodes; i++) {
        const double s = w->even2_x[i], r = r1 + L * s * s, wt = w->even2_w[i] * 2 * L * s;
        const double kin = wkb_well_kinetic(w, binding, r, &pv);
        if (kin > 0) {
            A += wt * sqrt(kin / eps);
            K += wt * pv.d2V / sqrt(kin);
        }
    }
    if (b > rb) {
        const double ya = log(rb), yb = log(b);
        const size_t m = (size_t)ceil((yb - ya) / MIDDLE_LOG_PIECE);
        for (size_t p = 0; p < m; p++) {
            const double y0 = ya + (yb - ya) * (double)p / (double)m, Ly = (yb - ya) / (double)m;
            for (size_t i = 0; i < w->set.nodes; i++) {
                const double r = exp(y0 + Ly * w->gl_x[i]), wt = w->gl_w[i] * Ly * r;
                const double kin = wkb_well_kinetic(w, binding, r, &pv);
                A += wt * sqrt(kin / eps);
                K += wt * pv.d2V / sqrt(kin);
            }
        }
    }
    *action = A;
    *curv = K;
}

/* Inner side in second-order WKB up to the matching point b: pi/4 + integral_{r1}^{b} k dr + D2_in(b),
   D2_in(b) = -(sqrt(eps)/24) d/dE integral_{r1}^{b} V''/sqrt(E - V) dr + (5/48) sqrt(eps) V'(b)/(E - V(b))^(3/2)
   (physics.md section 12: the one-sided second-order term; d/dE at fixed b by a five-point difference). */
static int inner_phase(const wkb_well *w, double binding, double r1, double b, double *phase, size_t *n_eval)
{
    const double E = w->top - binding, h = 2e-3 * (E - w->bottom), se = sqrt(w->eps);
    double A, K, Kh[4];
    inner_integrals(w, binding, r1, b, &A, &K);
    const double off[4] = {2 * h, h, -h, -2 * h}; /* binding offsets: E - 2h .. E + 2h */
    for (int k = 0; k < 4; k++) {
        double r1k, Ak;
        if (inner_turn(w, binding + off[k], r1, &r1k))
            return WKB_ENUMERIC;
        inner_integrals(w, binding + off[k], r1k, b, &Ak, &Kh[k]);
    }
    const double dKdE = (Kh[0] - 8 * Kh[1] + 8 * Kh[2] - Kh[3]) / (12 * h);
    wkb_pot_value pv;
    const double kin = wkb_well_kinetic(w, binding, b, &pv);
    *phase = M_PI_4 + A - (se / 24) * dKdE + (5.0 / 48) * se * pv.dV / (kin * sqrt(kin));
    *n_eval += 5 * (w->set.nodes + (b > w->r_bottom ? w->set.nodes * (size_t)ceil(log(b / w->r_bottom) / MIDDLE_LOG_PIECE) : 0));
    return isfinite(*phase) ? WKB_SUCCESS : WKB_ENUMERIC;
}

/* Continuous quantum number at binding energy b, and the evaluation count: the inner side in
   second-order WKB (a steep repulsive wall is a linear turning point), the outer end matched. */
static int quantum_number(wkb_well *w, double binding, double *v, size_t *n_eval, int across, wkb_error *err)
{
    double r1, r2, b_in, b_out, phase_in;
    wkb_end_phase pout;
    int status;
    if (across) {
        /* exact across the whole well: both exact solutions meet at the bottom, where the same WKB
           parametrization of both makes the rule exact up to the ODE tolerance */
        wkb_end_phase pin;
        if ((status = wkb_well_turning_points(w, binding, &r1, &r2, err)))
            return status;
        const double b = GSL_MIN(GSL_MAX(w->r_bottom, r1), r2);
        if ((status = wkb_end_solution(w, binding, 0, r1, b, &pin, err)) || (status = wkb_end_solution(w, binding, 1, r2, b, &pout, err)))
            return status;
        *v = 1 - (pin.psi + pout.psi) / M_PI;
        if (n_eval)
            *n_eval += pin.evaluations + pout.evaluations;
        return isfinite(*v) ? WKB_SUCCESS : wkb_fail(err, WKB_ENUMERIC, "the exact phase is not finite at "
                                                     "binding energy %.6g cm-1", binding);
    }
    status = match_points(w, binding, &r1, &r2, &b_in, &b_out, err);
    if (status)
        return status;
    wkb_end_kept_match(w, &b_out); /* within an iteration: the kept stretch's matching point */
    if ((status = wkb_end_solution(w, binding, 1, r2, b_out, &pout, err)))
        return status;
    double delta;
    if ((status = airy_matching_error(action_to_turn(w, binding, b_out, r2), &delta, err)))
        return status;
    pout.psi -= delta;
    size_t n = pout.evaluations + w->set.nodes;
    if (inner_phase(w, binding, r1, b_out, &phase_in, &n))
        return wkb_fail(err, WKB_ENUMERIC, "the inner second-order phase is not finite at binding energy %.6g cm-1",
                        binding);
    *v = (phase_in - pout.psi) / M_PI;
    if (n_eval)
        *n_eval += n;
    return isfinite(*v) ? WKB_SUCCESS : wkb_fail(err, WKB_ENUMERIC, "the matched phase is not finite at "
                                                 "binding energy %.6g cm-1", binding);
}

int wkb_matched_quantum_number(wkb_well *w, double binding, double *v, wkb_error *err)
{
    if (!w->ready)
        return wkb_fail(err, WKB_EINVAL, "the well has not been set up");
    int status = wkb_end_set_tol(w, w->set.match_ode_tol, err);
    return status ? status : quantum_number(w, binding, v, NULL, 0, err);
}

/* At J = 0 under a -C_n/r^n tail: beta = (C_n/eps)^(1/(n-2)) (physics.md 4b), with C_n read off the
   curve far out, where its tail term dominates (at 1e3 and 2e3 times r_bottom, agreeing to 1e-4, or no answer: 0; a
   relative error d in C_n moves the single-solve v_th by ~d bbar kappa/(pi (n-2)), ~4e-9 at d = 1e-4). */
static double tail_beta(const wkb_well *w)
{
    const double n = w->tail_power;
    if (w->rot != 0 || !(n > 2) || !isfinite(n))
        return 0;
    wkb_pot_value pv;
    const double R = 1e3 * w->r_bottom;
    const double C1 = wkb_well_kinetic(w, 0, R, &pv) * pow(R, n); /* (asymptote - V) R^n */
    const double C2 = wkb_well_kinetic(w, 0, 2 * R, &pv) * pow(2 * R, n);
    if (!(C2 > 0) || !isfinite(C2) || !(fabs(C2 - C1) <= 1e-4 * C2))
        return 0;
    return pow(C2 / w->eps, 1 / (n - 2));
}

/* The smallest binding of the three-point extrapolation (n <= 3, or C_n unknown): b_max, or 1e-6 of the
   tail's crossover energy E_beta = eps/beta^2 (kappa beta = 1e-3; physics.md 4c (iii)) when that is
   smaller. Below E_beta the quantum number follows v_th - bbar kappa/pi + ...; at and above it the
   extrapolation fails (a C3 tail at mu = 10 u has E_beta ~ 1e-9 cm-1, and 1e-13 of the depth, 0.16 E_beta,
   put v_th 0.061 low; n = 3 also carries a kappa ln kappa term, which the quadratic leaves: ~4e-5 here,
   measured against the threshold law). The single solve of n > 3 sits at kappa beta = 1e-3 too: its kappa^2
   term is then <= ~9e-7 (measured), and smaller kappa only adds the far tail's ODE error. */
static double threshold_binding(const wkb_well *w, double b_max, double beta)
{
    if (!(beta > 0))
        return b_max;
    return GSL_MIN(b_max, 1e-6 * w->eps / (beta * beta));
}

int wkb_threshold_number(wkb_well *w, double *v_th, wkb_error *err)
{
    if (!w->ready)
        return wkb_fail(err, WKB_EINVAL, "the well has not been set up");
    if (w->v_th_status >= 0) {
        *v_th = w->v_th;
        return w->v_th_status ? wkb_fail(err, w->v_th_status, "no threshold number for this well") : WKB_SUCCESS;
    }
    w->v_th = w->v_th_slope = NAN;
    /* no well, or an inner wall lower than the asymptote: no threshold of bound levels */
    if (!(w->bottom < w->bound_top) || w->bound_top < w->top - 1e-6 * (w->top - w->bottom)) {
        w->v_th_status = WKB_SUCCESS;
        *v_th = NAN;
        return WKB_SUCCESS;
    }
    /* v(kappa) = v_th - c1 kappa + c2 kappa^2 + ...: otherwise three bindings with kappa in ratio 1:2:3,
       far below the tail's crossover energy eps/beta^2 (threshold_binding); quadratic extrapolation */
    const double depth = w->bound_top - w->bottom;
    const double beta = tail_beta(w), n = w->tail_power;
    /* n > 3: one solve, v_th = v(kappa) + bbar kappa/pi, with the universal threshold length
       bbar = pi beta nu^(2 nu)/(Gamma(nu) Gamma(1 + nu)), nu = 1/(n-2) (physics.md 4b, 4c (ii)) */
    const int single = beta > 0 && n > 3 + 1e-9 && !(w->top - w->bound_top > 0);
    const double b0 = single ? 1e-6 * w->eps / (beta * beta) : (w->top - w->bound_top) + threshold_binding(w, 1e-13 * depth, beta);
    double vk[3];
    int ts = wkb_end_set_tol(w, w->set.match_milne ? GSL_MAX(w->set.match_ode_tol, ODE_TOL_THRESHOLD) : w->set.match_ode_tol, err);
    if (ts) {
        w->v_th_status = ts;
        return ts;
    }
    /* one solve keeps nothing (the drivers without energy derivatives are cheaper), three reuse */
    wkb_end_reuse(w, single ? 0 : (w->across || w->rot > 0 ? 2 : 1));
    for (int k = 0; k < (single ? 1 : 3); k++) {
        int status = quantum_number(w, b0 * (k + 1) * (k + 1), &vk[k], NULL, w->across, err);
        if (status) {
            wkb_end_reuse(w, 0);
            w->v_th_status = status;
            return status;
        }
    }
    wkb_end_reuse(w, 0);
    if (single) {
        const double nu = 1 / (n - 2), bbar = M_PI * beta * pow(nu, 2 * nu) / (tgamma(nu) * tgamma(1 + nu));
        w->v_th = vk[0] + bbar * sqrt(b0 / w->eps) / M_PI;
        w->v_th_slope = -bbar / (M_PI * sqrt(w->eps));
    } else {
        w->v_th = 3 * vk[0] - 3 * vk[1] + vk[2];
        const double q = 0.5 * (vk[2] - 2 * vk[1] + vk[0]);
        w->v_th_slope = -(3 * q - (vk[1] - vk[0])) / sqrt(b0);
    }
    /* behind a centrifugal barrier the turning points near the asymptote are ordinary ones and v_th stays
       within a few hundredths of vD (measured); an extrapolation that lands more than 1/2 away has failed
       (seen at the J where the last level crosses the asymptote): the first-order count is kept */
    if (w->rot > 0 && isfinite(w->vD) && fabs(w->v_th - w->vD) > 0.5)
        w->v_th = w->vD;
    w->v_th_status = WKB_SUCCESS;
    *v_th = w->v_th;
    return WKB_SUCCESS;
}

void wkb_matched_note_defect(wkb_well *w, size_t v, double binding, double defect)
{
    const double n = w->tail_power, alpha = n > 2 ? (n - 2) / (2 * n) : 0.5;
    if (w->defect_n && v != w->defect_next_v)
        w->defect_n = 0;
    if (!isfinite(defect) || !(binding > 0))
        return;
    if (w->defect_n == WKB_DEFECT_NODES) {
        memmove(w->defect_x, w->defect_x + 1, (WKB_DEFECT_NODES - 1) * sizeof(double));
        memmove(w->defect_D, w->defect_D + 1, (WKB_DEFECT_NODES - 1) * sizeof(double));
        w->defect_n--;
    }
    w->defect_x[w->defect_n] = pow(binding, alpha);
    w->defect_D[w->defect_n] = defect;
    w->defect_n++;
    w->defect_next_v = v + 1;
}

/* The defect of level v at x = b^alpha: the polynomial through the recorded levels when they are v's
   predecessors; NAN when nothing is known. (The threshold value vD - v_th does not help: the defect
   changes too quickly over the last levels for one polynomial in x.) */
static double defect_at(const wkb_well *w, size_t v, double x)
{
    double xs[WKB_DEFECT_NODES], ys[WKB_DEFECT_NODES];
    size_t m = 0;
    if (w->defect_n && v == w->defect_next_v)
        for (size_t i = 0; i < w->defect_n; i++, m++) {
            xs[m] = w->defect_x[i];
            ys[m] = w->defect_D[i];
        }
    if (!m)
        return NAN;
    for (size_t k = 1; k < m; k++) /* Neville */
        for (size_t i = m - 1; i >= k; i--)
            ys[i] = ((x - xs[i - k]) * ys[i] - (x - xs[i]) * ys[i - 1]) / (xs[i] - xs[i - k]);
    return ys[m - 1];
}

/* d/dx of the defect polynomial of defect_at at x (NAN when it is not known): it corrects the first-order
   slope of the quantum number, d v_matched/dx = d v_1/dx - dD/dx, so that the secant's first step lands
   closer and a level more often needs two phase evaluations instead of three. */
static double defect_slope_at(const wkb_well *w, size_t v, double x)
{
    if (!w->defect_n || v != w->defect_next_v || w->defect_n < 2)
        return NAN;
    const size_t m = w->defect_n;
    const double *xs = w->defect_x, *ys = w->defect_D;
    /* Newton form p(x) = y0 + d01 (x - x0) + d012 (x - x0)(x - x1) */
    const double d01 = (ys[1] - ys[0]) / (xs[1] - xs[0]);
    if (m == 2)
        return d01;
    const double d12 = (ys[2] - ys[1]) / (xs[2] - xs[1]), d012 = (d12 - d01) / (xs[2] - xs[0]);
    return d01 + d012 * ((x - xs[0]) + (x - xs[1]));
}

/* The last level at J = 0 (v < v_th <= v + 1): the binding where the threshold expansion
   v(s) = v_th + v_th_slope s + c2 s^2 + c3 s^3, s = sqrt(b), through the two levels before it, equals v,
   and there dv/db; NAN when those levels are not known. It starts the last level about 10x closer than
   the extrapolated defect (measured on C6 and C6+C8 tails). */
static double threshold_start(const wkb_well *w, size_t v, double alpha, double *dvdb)
{
    if (w->rot != 0 || w->v_th_status != WKB_SUCCESS || !isfinite(w->v_th) || !isfinite(w->v_th_slope) ||
        !((double)v < w->v_th && w->v_th <= (double)v + 1) || w->defect_n < 2 || v != w->defect_next_v)
        return NAN;
    const size_t i1 = w->defect_n - 1, i2 = w->defect_n - 2; /* levels v - 1, v - 2 */
    const double s1 = sqrt(pow(w->defect_x[i1], 1 / alpha)), s2 = sqrt(pow(w->defect_x[i2], 1 / alpha));
    const double r1 = ((double)v - 1 - w->v_th - w->v_th_slope * s1) / (s1 * s1);
    const double r2 = ((double)v - 2 - w->v_th - w->v_th_slope * s2) / (s2 * s2);
    const double c3 = (r2 - r1) / (s2 - s1), c2 = r1 - c3 * s1; /* (v - v_th - slope s)/s^2 = c2 + c3 s */
    double lo = 0, hi = s1;
    for (int it = 0; it < 100; it++) { /* v(s) falls from v_th to v - 1 on [0, s1] */
        const double s = 0.5 * (lo + hi), vs = w->v_th + s * (w->v_th_slope + s * (c2 + c3 * s));
        if (vs > (double)v)
            lo = s;
        else
            hi = s;
    }
    const double s = 0.5 * (lo + hi);
    *dvdb = (w->v_th_slope + s * (2 * c2 + 3 * c3 * s)) / (2 * s);
    return s > 0 && s < s1 && *dvdb < 0 ? s * s : NAN;
}

/* The root of the quadratic in G through the three of the n points (x_i, G_i) with the smallest |G|
   (inverse interpolation, Neville); NAN when two of them share a G. */
static double inverse_root(const double *xs, const double *Gs, size_t n)
{
    size_t pick[3], m = 0;
    for (size_t k = 0; k < 3 && k < n; k++) { /* selection of the three smallest |G| */
        size_t best = n;
        for (size_t i = 0; i < n; i++) {
            int used = 0;
            for (size_t j = 0; j < m; j++)
                used |= pick[j] == i;
            if (!used && (best == n || fabs(Gs[i]) < fabs(Gs[best])))
                best = i;
        }
        pick[m++] = best;
    }
    if (m < 2)
        return NAN;
    double g[3], y[3];
    for (size_t i = 0; i < m; i++) {
        g[i] = Gs[pick[i]];
        y[i] = xs[pick[i]];
    }
    for (size_t k = 1; k < m; k++)
        for (size_t i = m - 1; i >= k; i--) {
            if (g[i] == g[i - k])
                return NAN;
            y[i] = ((0 - g[i - k]) * y[i] - (0 - g[i]) * y[i - 1]) / (g[i] - g[i - k]);
        }
    return y[m - 1];
}

/* Level v by the matched rule: safeguarded secant in x = b^alpha (b the binding energy), started
   from the first-order level in *level when it converged, shifted to where the first-order quantum
   number exceeds v by the interpolated defect (defect_at; a few first-order orbits): the start is then
   within ~1e-5 of the level in v and two phase evaluations suffice. */
int wkb_matched_solve(wkb_well *w, size_t v, int across, int second_start, wkb_level *level, wkb_error *err)
{
    const double n = w->tail_power, alpha = n > 2 ? (n - 2) / (2 * n) : 0.5;
    const double depth = w->top - w->bottom, b_min = w->top - w->bound_top;
    /* no point in iterating below a quarter of the phase ODE's own error, 20 tol/(dI/dE) (see below) */
    const double ode_tol = level_tol(w, level->status == WKB_SUCCESS ? level->dEdv : NAN);
    const double ode_floor = level->status == WKB_SUCCESS && level->dEdv > 0 ? 5 * ode_tol * level->dEdv / M_PI : 0;
    int ts = wkb_end_set_tol(w, ode_tol, err);
    if (ts)
        return ts;
    const double tol = w->set.energy_tol + 4e-14 * depth + ode_floor;
    double x, slope;
    double dvdb = NAN;
    const double b_th = second_start ? NAN : threshold_start(w, v, alpha, &dvdb);
    const int at_threshold = isfinite(b_th) && b_th > b_min;
    /* the iteration variable x = b^ai: the tail's exponent (the quantum number is nearly linear in it
       over the well), but sqrt(b) for the last level at J = 0, which lies below the crossover to the
       quantum threshold law v_th - v ~ sqrt(b) (measured: 5 phase evaluations -> 3 on a C4 tail) */
    const double ai = at_threshold ? 0.5 : alpha;
    double lo = pow(b_min, ai), hi = pow(depth, ai); /* G(lo) > 0 (threshold side), G(hi) < 0 */
    if (at_threshold) {
        x = pow(b_th, ai);
        slope = M_PI * dvdb * pow(b_th, 1 - ai) / ai;
    } else if (level->status == WKB_SUCCESS && level->binding > b_min) {
        double b0 = level->binding, spacing = level->dEdv;
        /* a first-order start (not a second-order one): shifted by the defect */
        for (int k = 0; k < 3 && !second_start; k++) { /* v1(b) - v = D(b) by Newton on the first-order action */
            const double D = defect_at(w, v, pow(b0, alpha));
            if (!isfinite(D))
                break;
            double v1 = (double)v;
            if (k > 0) {
                wkb_orbit o;
                if (wkb_orbit_at(w, b0, &o, NULL, NULL))
                    break;
                v1 = o.action / M_PI - w->phase;
                spacing = M_PI / o.half_period;
            }
            const double bd = b0 + (v1 - (double)v - D) * spacing;
            if (!(bd > b_min && bd < depth))
                break;
            const double change = fabs(bd - b0);
            b0 = bd;
            if (change < 1e-7 * spacing)
                break;
        }
        x = pow(b0, alpha);
        slope = -(M_PI / spacing) * pow(b0, 1 - alpha) / alpha;
        const double dD = second_start ? NAN : defect_slope_at(w, v, x);
        if (isfinite(dD) && slope - M_PI * dD < 0)
            slope -= M_PI * dD;
    } else {
        x = NAN;
        slope = NAN;
    }
    if (!(x > lo && x < hi))
        x = lo + 0.01 * (hi - lo);
    double x_prev = NAN, G_prev = NAN, b = pow(x, 1 / ai), db = INFINITY, db_prev = NAN;
    /* the last level at J = 0: G is known at the asymptote (pi (v_th - v)) and, nearly, at level v - 1
       (-pi); inverse interpolation through the three known points closest to the root steps better
       than the secant where G(sqrt b) is curved (the last level lies above the crossover on some tails) */
    double node_x[64], node_G[64];
    size_t n_nodes = 0;
    if (at_threshold) {
        node_x[n_nodes] = 0;
        node_G[n_nodes++] = M_PI * (w->v_th - (double)v);
        node_x[n_nodes] = pow(pow(w->defect_x[w->defect_n - 1], 1 / alpha), ai);
        node_G[n_nodes++] = -M_PI;
    }
    size_t n_eval = 0;
    int converged = 0;
    /* measured (bench_matched, mu = 0.5 u): 5 % less C-core time at J = 0, none at J = 10 or in the other
       wells' last levels behind a barrier, so only there */
    const int probe = across && w->rot == 0;
    /* the last two levels of a quantal well at J = 0 start from their second-order levels 1e-4 and 3e-3 off
       in v (the light bench_matched well), beyond the range where the kept outer solution is reused
       (~1e-5): the first phase evaluation (and its probe) takes the outer end at a looser tolerance, which
       only has to place the next step well within that range (seen: 1e-7 - 2e-6 rad off at 1e-5); the last
       level's phase-amplitude stretch too, as its next step moves too far for its reuse (measured: 21 %
       fewer potential evaluations for the two levels, 3723 -> 2936; the levels moved < 1e-9 cm-1) */
    int rough = across && w->rot == 0 && second_start && v + 2 >= w->count && w->set.match_milne == 1 &&
                ROUGH_TOL > ode_tol;
    wkb_end_reuse(w, across || w->rot > 0 ? 2 : 1);
    wkb_end_set_rough(w, rough ? ROUGH_TOL : 0, v + 1 >= w->count);
    for (int it = 0; it < 60; it++) {
        b = pow(x, 1 / ai);
        double vq;
        int status = quantum_number(w, b, &vq, &n_eval, across, err);
        if (status == WKB_ENOWELL || status == WKB_ENOLEVEL) { /* stepped out of the well: shrink towards the bracket */
            if (b > 0.5 * depth)
                hi = x;
            else
                lo = x;
            x = 0.5 * (lo + hi);
            db_prev = NAN;
            continue;
        }
        if (status) {
            wkb_end_reuse(w, 0);
            return status;
        }
        const double G = M_PI * (vq - (double)v);
        if (rough) {
            /* a loose phase brackets nothing (seen: a start already within its error, whose wrong sign
               collapsed the bracket onto itself, 1.4e-6 cm-1 off) */
        } else if (G > 0)
            lo = x;
        else
            hi = x;
        if (isfinite(G_prev) && x != x_prev) {
            slope = (G - G_prev) / (x - x_prev);
        } else if (probe && w->set.match_milne) {
            /* the first step: the slope of G itself, from a probe 1e-7 b away, where every part of both
               end solutions is reused (linear in the energy change, all else exact), instead of the
               first-order slope */
            const double xp = x * (1 + 1e-7 / ai);
            double vp;
            int ps = quantum_number(w, pow(xp, 1 / ai), &vp, &n_eval, across, err);
            if (ps == WKB_SUCCESS) {
                const double sp = (M_PI * (vp - (double)v) - G) / (xp - x);
                if (sp < 0)
                    slope = sp;
            } else if (ps != WKB_ENOWELL && ps != WKB_ENOLEVEL) {
                wkb_end_reuse(w, 0);
                return ps;
            }
        }
        double xn = (isfinite(slope) && slope < 0) ? x - G / slope : NAN;
        if (n_nodes && n_nodes < 64) {
            node_x[n_nodes] = x;
            node_G[n_nodes++] = G;
            const double xi = inverse_root(node_x, node_G, n_nodes);
            if (xi > lo && xi < hi)
                xn = xi;
        }
        int secant = 1;
        /* a step below the resolution of x (G ~ 1e-16 at the root) lands on the bracket end x itself: that
           is convergence, not a reason to bisect (seen on an MLR at J = 20: 10 more full solves) */
        if (!(xn > lo && xn < hi) && xn != x) {
            xn = 0.5 * (lo + hi);
            secant = 0;
        }
        x_prev = x;
        G_prev = G;
        const double bn = pow(xn, 1 / ai);
        db = fabs(bn - b);
        x = xn;
        /* the secant converges superlinearly: the error left after this step is below
           step^2 / previous step, which assumes only linear convergence (measured 4-5000x below it on C6
           and C6+C8 tails; twice it is kept as the bound) */
        const double predicted = secant && isfinite(db_prev) && db_prev > 0 ? 2 * db * db / db_prev : INFINITY;
        if (rough) {
            /* no convergence on a loose phase, nor a secant through it: the next evaluation, at the level's
               tolerance, takes its first slope from a probe again */
            rough = 0;
            wkb_end_set_rough(w, 0, 0);
            db_prev = x_prev = G_prev = NAN;
            continue;
        }
        if (db <= tol || predicted <= tol || hi - lo <= 1e-15 * hi) {
            b = bn;
            db = GSL_MIN(db, predicted);
            converged = 1;
            break;
        }
        db_prev = secant ? db : NAN;
    }
    wkb_end_reuse(w, 0);
    if (!converged)
        return wkb_fail(err, WKB_ENOCONV, "the matched level v=%zu did not converge (last change %.3g cm-1)", v, db);
    wkb_orbit o;
    int status = wkb_orbit_at(w, b, &o, NULL, err);
    if (status)
        return status;
    wkb_matched_note_defect(w, v, b, o.action / M_PI - w->phase - (double)v);
    level->v = (double)v;
    level->binding = b;
    level->energy = w->top - b;
    /* the phase ODE's local tolerance, accumulated over its steps (20 tolerances: measured errors stay below), through dE = dphase / (dI/dE) */
    level->error = db + 20 * ode_tol / o.half_period;
    level->r_inner = o.r_inner;
    level->r_outer = o.r_outer;
    level->dEdv = M_PI / o.half_period;
    level->Bv = o.Bv;
    level->status = WKB_SUCCESS;
    return WKB_SUCCESS;
}
