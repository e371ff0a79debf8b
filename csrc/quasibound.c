/* quasibound.c: levels trapped behind a barrier of V_J(r) = V(r) + eps*rot/r^2 (shape resonances).
 *
 * Barrier: the first local maximum of V_J outside the first local minimum out from the inner wall (the
 * well); levels between the asymptote D (or the well bottom, where a high J lifts it above D) and the
 * barrier top V_b are quasibound. At energy E in (D, V_b) V_J has three turning points r1 < r2 < r3: the
 * inner well [r1, r2] and the barrier [r2, r3]. Levels that would lie above V_b are not trapped and are
 * not returned (wkb_qb_range gives the quantum number v_top at the barrier top).
 *
 * Position: the inner-well rule, first order I(E) = pi (v + 1/2), or second order
 *   I(E) - (sqrt(eps)/24) dK/dE = pi (v + 1/2) + rem(theta)/2,
 *   K(E) = integral_{r1}^{r2} V_J''/sqrt(E - V_J) dr
 * (Dunham; physics.md sections 2 and 10), dK/dE by a five-point difference, where rem is the part of the
 * parabolic-barrier phase that the second-order term does not already hold (wkb_barrier_phase_remainder;
 * barrier_phase = 0 leaves it out). For theta < 8 the position is the real part of the complex root of
 * that rule with the barrier's decay term (i/4) ln(1 + exp(-2 theta)) added (complex_position; see
 * complex_position() below), which is the pole the exact resonance is.
 * Barrier-matched (theta < barrier_match_theta, 8 by default): that root seeds the pole of the radial
 * equation integrated exactly from inside the inner wall through the barrier and joined beyond r3 to the
 * second-order outgoing WKB wave (wkb_res_barrier_matched in resonance.c), which gives the position, the
 * width and the error instead: on a light well the inner-well rule has a ~1e-4 rad phase error on the
 * barrier side (up to 8e-3 cm-1 at theta 1-2), the barrier-matched pole is within 1e-6 cm-1 of the exact one.
 * Width (FWHM): Gamma = (s / 2 pi) T(theta) with the barrier penetration integral
 *   theta = integral_{r2}^{r3} sqrt((V_J - E)/eps) dr,
 * the spacing s = pi/(dI/dE - dphi/dE / 2) (phi the parabolic-barrier phase; s = dE/dv = pi/(dI/dE) with
 * width_phase = 0), and either the uniform form T = ln(1 + exp(-2 theta)) (the default) or the
 * Kemble form T = 1/(1 + exp(2 theta)) (physics.md 10; Kemble, Phys. Rev. 48, 549 (1935)).
 *
 * Quadrature: every integral is split at an extremum (the well minimum, the barrier maximum) and each
 * piece mapped with r - r_turn ~ s^2 from its turning point, which makes sqrt and 1/sqrt end points
 * regular; the barrier piece beyond the maximum uses y = ln r (r3 can lie far out just above D).
 * Gauss-Legendre, even halves as in orbit.c. Energies are carried as e = E - D and the kinetic term is
 * formed as e + depth_J(r), so nothing cancels near the asymptote.
 */
#include <complex.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include <gsl/gsl_integration.h>
#include <gsl/gsl_math.h>
#include <gsl/gsl_sf_gamma.h>
#include <gsl/gsl_sf_psi.h>

#include "wkb.h"

/* theta below which levels take the barrier-matched rule by default: there the complex root misses the
   position targets on a light well (up to 8e-3 cm-1 at theta 1-2), above it the complex root is within
   3.2e-4 cm-1 on every test well at a third of the cost (tests/test_quasibound.py, measured) */
#define BARRIER_MATCH_THETA 8.0
/* its Numerov step k_max h: 0.1 keeps positions within ~2e-7 cm-1 on the test wells (measured; 0.06, the
   exact poles' step, gives ~3e-8 at 1.45x the cost) */
#define BARRIER_MATCH_STEP 0.1

struct wkb_qb {
    wkb_qb_settings set;
    wkb_potential pot;
    double mu, eps, rot, D;
    wkb_barrier bar;
    int ready;
    wkb_res *res; /* the barrier-matched rule's workspace (NULL when it is off) */
    double *x, *wt; /* positive half of the 2*nodes-point rule on [-1, 1] (nodes points) */
};

wkb_qb_settings wkb_qb_default_settings(void)
{
    wkb_qb_settings s;
    s.nodes = 64;
    s.scan_points = 400;
    s.energy_tol = 1e-11;
    s.max_iter = 60;
    s.order = 2;
    s.width_form = WKB_WIDTH_UNIFORM;
    s.barrier_phase = 1;
    s.width_phase = 1;
    s.complex_position = 1;
    s.barrier_match_theta = BARRIER_MATCH_THETA;
    s.join_distance = 4.0;
    return s;
}

wkb_qb *wkb_qb_alloc(const wkb_qb_settings *settings)
{
    wkb_qb *q = calloc(1, sizeof *q);
    gsl_integration_glfixed_table *table = NULL;
    if (!q)
        return NULL;
    q->set = settings ? *settings : wkb_qb_default_settings();
    if (q->set.nodes < 8 || q->set.nodes > 2000 || q->set.scan_points < 32 || q->set.max_iter < 1 ||
        (q->set.order != 1 && q->set.order != 2) ||
        (q->set.width_form != WKB_WIDTH_UNIFORM && q->set.width_form != WKB_WIDTH_KEMBLE) ||
        !(q->set.barrier_match_theta >= 0) || !(isfinite(q->set.join_distance) && q->set.join_distance > 0))
        goto fail;
    if (q->set.barrier_match_theta > 0) {
        wkb_resonance_settings rs = wkb_resonance_default_settings();
        rs.phase_step = BARRIER_MATCH_STEP;
        if (!(q->res = wkb_res_alloc(&rs)))
            goto fail;
    }
    q->x = malloc(q->set.nodes * sizeof(double));
    q->wt = malloc(q->set.nodes * sizeof(double));
    table = gsl_integration_glfixed_table_alloc(2 * q->set.nodes);
    if (!q->x || !q->wt || !table)
        goto fail;
    for (size_t i = 0, k = 0; i < 2 * q->set.nodes; i++) {
        double xi, wi;
        if (gsl_integration_glfixed_point(-1.0, 1.0, i, &xi, &wi, table))
            goto fail;
        if (xi > 0 && k < q->set.nodes) {
            q->x[k] = xi;
            q->wt[k++] = wi;
        }
    }
    gsl_integration_glfixed_table_free(table);
    return q;
fail:
    if (table)
        gsl_integration_glfixed_table_free(table);
    wkb_qb_free(q);
    return NULL;
}

void wkb_qb_free(wkb_qb *q)
{
    if (!q)
        return;
    free(q->x);
    free(q->wt);
    wkb_res_free(q->res);
    free(q);
}

/* V_J: value, derivatives and depth_J = D - V_J */
static void effective(const wkb_potential *pot, double eps_rot, double r, wkb_pot_value *pv)
{
    wkb_potential_eval(pot, r, pv);
    const double ir = 1 / r, c = eps_rot * ir * ir;
    pv->V += c;
    pv->depth -= c;
    pv->dV -= 2 * c * ir;
    pv->d2V += 6 * c * ir * ir;
}

/* Bisection/Newton for a zero of g in [lo, hi] with a sign change; mode 0: g = e + depth_J
   (a turning point at e = E - D), mode 1: g = dV_J/dr (an extremum). */
static int root_in(const wkb_potential *pot, double eps_rot, int mode, double e, double lo, double hi,
                   double *root)
{
    wkb_pot_value pv;
#define G(r) (effective(pot, eps_rot, (r), &pv), mode ? pv.dV : e + pv.depth)
    double glo = G(lo), ghi = G(hi);
    if (!isfinite(glo) || !isfinite(ghi) || (glo > 0) == (ghi > 0)) {
        if (glo == 0 || ghi == 0) {
            *root = glo == 0 ? lo : hi;
            return WKB_SUCCESS;
        }
        return WKB_ENUMERIC;
    }
    const int rising = ghi > 0;
    double x = 0.5 * (lo + hi);
    for (int it = 0; it < 300; it++) {
        const double g = G(x), dg = mode ? pv.d2V : -pv.dV;
        if (!isfinite(g))
            return WKB_ENUMERIC;
        if (g == 0)
            break;
        if ((g > 0) == rising)
            hi = x;
        else
            lo = x;
        double xn = x - g / dg;
        if (!(xn > lo && xn < hi))
            xn = 0.5 * (lo + hi);
        const double dx = fabs(xn - x);
        x = xn;
        if (dx <= 4 * GSL_DBL_EPSILON * fabs(x) || hi - lo <= 4 * GSL_DBL_EPSILON * fabs(x))
            break;
    }
#undef G
    *root = x;
    return WKB_SUCCESS;
}

int wkb_barrier_find(const wkb_potential *pot, double mu, double rot, size_t scan_points, wkb_barrier *bar,
                     wkb_error *err)
{
    memset(bar, 0, sizeof *bar);
    if (!(isfinite(mu) && mu > 0))
        return wkb_fail(err, WKB_EINVAL, "reduced mass mu=%g is invalid: it must be a finite number > 0 (u)", mu);
    if (!(isfinite(rot) && rot >= 0))
        return wkb_fail(err, WKB_EINVAL, "rotational factor %g is invalid: J(J+1) must be finite and >= 0", rot);
    if (scan_points < 32)
        return wkb_fail(err, WKB_EINVAL, "scan_points=%zu is too small (>= 32)", scan_points);
    const double eps_rot = WKB_HBAR2_OVER_2U / mu * rot;
    const double r_lo = pot->model->r_inner_scan(pot), r_hi = 200 * pot->model->r_min(pot);
    bar->asymptote = wkb_potential_asymptote(pot);
    if (!(r_lo > 0 && r_hi > r_lo && isfinite(r_hi)))
        return wkb_fail(err, WKB_EINVAL, "cannot choose a range of r for this potential (%g .. %g A)", r_lo, r_hi);
    const double step = log(r_hi / r_lo) / (double)(scan_points - 1);
    /* the first local minimum out from the inner wall (the well, whose bottom may lie above the asymptote
       at high J), then the first maximum outside it */
    double V_prev = NAN, r_prev = r_lo, r_min = NAN;
    size_t i_min = 0;
    wkb_pot_value pv;
    for (size_t i = 0; i < scan_points; i++) {
        const double r = r_lo * exp(step * (double)i);
        effective(pot, eps_rot, r, &pv);
        if (!isfinite(pv.V))
            return wkb_fail(err, WKB_ENUMERIC, "the potential is not finite at r=%g A (V=%g)", r, pv.V);
        if (i > 0 && pv.V > V_prev) {
            i_min = i - 1;
            r_min = r_prev;
            break;
        }
        V_prev = pv.V;
        r_prev = r;
    }
    if (i_min == 0)
        return WKB_SUCCESS; /* no well: nothing is trapped */
    {
        const double a = r_min * exp(-step), b = r_min * exp(step);
        double rb;
        if (root_in(pot, eps_rot, 1, 0, a, b, &rb))
            rb = r_min;
        effective(pot, eps_rot, rb, &pv);
        bar->r_bottom = rb;
        bar->bottom = pv.V;
    }
    V_prev = NAN;
    r_prev = r_min;
    for (size_t i = i_min; i < scan_points; i++) {
        const double r = r_lo * exp(step * (double)i);
        effective(pot, eps_rot, r, &pv);
        if (i > i_min + 1 && pv.V < V_prev) {
            /* V_J fell: the maximum lies in (r_prev / e^step, r) */
            double rm;
            if (root_in(pot, eps_rot, 1, 0, r_prev * exp(-step), r, &rm))
                rm = r_prev;
            effective(pot, eps_rot, rm, &pv);
            if (pv.V > bar->asymptote && -pv.depth > 0) {
                bar->found = 1;
                bar->r_top = rm;
                bar->top = pv.V;
                bar->height = -pv.depth; /* V_b - D without cancellation */
            }
            break;
        }
        V_prev = pv.V;
        r_prev = r;
    }
    return WKB_SUCCESS;
}

int wkb_qb_set(wkb_qb *q, const wkb_potential *pot, double mu, double rot, wkb_error *err)
{
    q->ready = 0;
    int status = wkb_barrier_find(pot, mu, rot, q->set.scan_points, &q->bar, err);
    if (status)
        return status;
    q->pot = *pot;
    q->mu = mu;
    q->eps = WKB_HBAR2_OVER_2U / mu;
    q->rot = rot;
    q->D = q->bar.asymptote;
    q->ready = 1;
    return WKB_SUCCESS;
}

const wkb_barrier *wkb_qb_barrier(const wkb_qb *q) { return &q->bar; }

/* Turning points r1 < r2 < r3 at e = E - D in (0, height): r1 on the inner wall, r2 and r3 on
   either side of the barrier maximum. */
static int turning_points(const wkb_qb *q, double e, double *r1, double *r2, double *r3, wkb_error *err)
{
    const double er = q->eps * q->rot;
    wkb_pot_value pv;
    double lo = q->bar.r_bottom;
    for (int k = 0;; k++) {
        lo *= 0.9;
        effective(&q->pot, er, lo, &pv);
        if (e + pv.depth < 0)
            break;
        if (k > 400)
            return wkb_fail(err, WKB_ENOWELL, "no inner turning point at E-D=%.12g cm-1: the inner wall is lower",
                            e);
    }
    if (root_in(&q->pot, er, 0, e, lo, q->bar.r_bottom, r1) ||
        root_in(&q->pot, er, 0, e, q->bar.r_bottom, q->bar.r_top, r2))
        return wkb_fail(err, WKB_ENUMERIC, "turning point search failed at E-D=%.12g cm-1", e);
    double hi = q->bar.r_top;
    for (int k = 0;; k++) {
        hi *= 1.5;
        effective(&q->pot, er, hi, &pv);
        if (e + pv.depth > 0)
            break;
        if (k > 200 || !isfinite(pv.V))
            return wkb_fail(err, WKB_ENUMERIC, "no outer turning point beyond the barrier at E-D=%.12g cm-1", e);
    }
    if (root_in(&q->pot, er, 0, e, q->bar.r_top, hi, r3))
        return wkb_fail(err, WKB_ENUMERIC, "turning point search failed at E-D=%.12g cm-1", e);
    return WKB_SUCCESS;
}

typedef struct {
    double action, inv_k, inv_k_r2, curvature; /* integrals of sqrt(kin), 1/sqrt(kin), ... */
} well_sums;

/* One piece r = r_t + (r_far - r_t) s^2, s in [0, 1]: the turning point at s = 0. */
static void well_piece(const wkb_qb *q, double e, double r_t, double r_far, well_sums *s)
{
    const double L = r_far - r_t, er = q->eps * q->rot;
    wkb_pot_value pv;
    for (size_t i = 0; i < q->set.nodes; i++) {
        const double x = q->x[i], r = r_t + L * x * x, wgt = q->wt[i] * 2 * fabs(L) * x;
        effective(&q->pot, er, r, &pv);
        const double kin = e + pv.depth;
        if (!(kin > 0))
            continue;
        const double sk = sqrt(kin), f = wgt / sk;
        s->action += wgt * sk;
        s->inv_k += f;
        s->inv_k_r2 += f / (r * r);
        s->curvature += f * pv.d2V;
    }
}

/* theta piece from the turning point r_t: r = r_t + (r_far - r_t) s^2 (log_map 0) or
   ln r = ln r_t + (ln r_far - ln r_t) s^2 (log_map 1); adds integral sqrt(V_J - E) and 1/sqrt(V_J - E) */
static void barrier_piece(const wkb_qb *q, double e, double r_t, double r_far, int log_map, double *sum,
                          double *inv_sum)
{
    const double yt = log_map ? log(r_t) : r_t, L = (log_map ? log(r_far) : r_far) - yt, er = q->eps * q->rot;
    wkb_pot_value pv;
    for (size_t i = 0; i < q->set.nodes; i++) {
        const double x = q->x[i], y = yt + L * x * x, r = log_map ? exp(y) : y;
        const double wgt = q->wt[i] * 2 * fabs(L) * x * (log_map ? r : 1);
        effective(&q->pot, er, r, &pv);
        const double kap = -(e + pv.depth);
        if (kap > 0) {
            const double sk = sqrt(kap);
            *sum += wgt * sk;
            *inv_sum += wgt / sk;
        }
    }
}

int wkb_qb_orbit(wkb_qb *q, double e, wkb_qb_orbit_values *o, wkb_error *err)
{
    if (!q->ready)
        return wkb_fail(err, WKB_EINVAL, "the quasibound workspace has not been set up");
    if (!q->bar.found)
        return wkb_fail(err, WKB_ENOLEVEL, "V_J has no barrier above the asymptote: no quasibound levels");
    if (!(e > 0 && e < q->bar.height))
        return wkb_fail(err, WKB_EINVAL,
                        "E-D=%.12g cm-1 is outside the quasibound range (0, %.12g) cm-1 between the asymptote and "
                        "the barrier top", e, q->bar.height);
    int status = turning_points(q, e, &o->r1, &o->r2, &o->r3, err);
    if (status)
        return status;
    well_sums s = {0};
    const double rb = GSL_MIN(GSL_MAX(q->bar.r_bottom, o->r1), o->r2);
    well_piece(q, e, o->r1, rb, &s);
    well_piece(q, e, o->r2, rb, &s);
    const double rm = GSL_MIN(GSL_MAX(q->bar.r_top, o->r2), o->r3);
    /* the inner side of the barrier in r (short), the outer side in ln r */
    {
        double sum = 0, inv_sum = 0;
        barrier_piece(q, e, o->r2, rm, 0, &sum, &inv_sum);
        barrier_piece(q, e, o->r3, rm, 1, &sum, &inv_sum);
        o->theta = sum / sqrt(q->eps);
        o->dtheta_dE = -inv_sum / (2 * sqrt(q->eps));
    }
    const double se = sqrt(q->eps);
    o->energy = q->D + e;
    o->action = s.action / se;
    o->half_period = s.inv_k / (2 * se);
    o->Bv = q->eps * s.inv_k_r2 / s.inv_k;
    o->curvature_integral = s.curvature;
    if (!isfinite(o->action) || !isfinite(o->theta) || !(o->half_period > 0))
        return wkb_fail(err, WKB_ENUMERIC, "the phase integrals are not finite at E-D=%.12g cm-1", e);
    return WKB_SUCCESS;
}

double wkb_transmission(double theta, int width_form)
{
    if (width_form == WKB_WIDTH_KEMBLE)
        return theta > 0 ? exp(-2 * theta) / (1 + exp(-2 * theta)) : 1 / (1 + exp(2 * theta));
    return log1p(exp(-2 * theta));
}

/* The parabolic-barrier connection phase phi(e) = arg Gamma(1/2 + i e) - e ln|e| + e at e = -theta/pi
   (physics.md 10), minus its leading large-theta term -pi/(24 theta). The second-order term already
   carries that leading term (Stirling's series with B_2(1/2) = -1/12); what remains starts as
   -7 pi^3/(2880 theta^3) (B_4(1/2) = 7/240). Used as I - D2 = pi (v + 1/2) + remainder/2: verified
   against exact resonance positions (tests/test_quasibound.py), where it cuts the second-order error
   5-20x for theta >= 2. */
double wkb_barrier_phase_remainder(double theta)
{
    if (!(theta > 0))
        return NAN;
    if (theta > 20) {
        const double y = theta / M_PI, y2 = y * y;
        return -(7.0 / 2880) / (y * y2) - (31.0 / 40320) / (y * y2 * y2);
    }
    const double e = -theta / M_PI;
    gsl_sf_result lnr, arg;
    if (gsl_sf_lngamma_complex_e(0.5, e, &lnr, &arg))
        return NAN;
    const double lead = -M_PI / (24 * theta);
    double phi = arg.val - e * log(fabs(e)) + e;
    phi -= 2 * M_PI * round((phi - lead) / (2 * M_PI)); /* GSL gives arg modulo 2 pi */
    return phi - lead;
}

/* d phi/d e = Re psi(1/2 + i e) - ln|e| at e = -theta/pi (phi as above). */
double wkb_barrier_phase_slope(double theta)
{
    if (!(theta > 0))
        return NAN;
    const double e = -theta / M_PI;
    gsl_sf_result re, im;
    if (gsl_sf_complex_psi_e(0.5, e, &re, &im))
        return NAN;
    return re.val - log(fabs(e));
}

static double range_start(const wkb_qb *q);

/* Quantization function F(e) = I - (second-order term) - pi (v + 1/2) and its slope dI/dE. */
static int rule(wkb_qb *q, double e, int order, double target, double *F, double *slope, double *fd_error,
                wkb_qb_orbit_values *o, wkb_error *err)
{
    int status = wkb_qb_orbit(q, e, o, err);
    if (status)
        return status;
    *F = o->action - target;
    *slope = o->half_period;
    *fd_error = 0;
    if (order == 2) {
        /* step: 1% of the level spacing, kept inside (0, height) */
        double h = 0.01 * M_PI / o->half_period;
        h = GSL_MIN(h, 0.2 * GSL_MIN(e - range_start(q), q->bar.height - e));
        double K[4];
        const double off[4] = {-2, -1, 1, 2};
        for (int k = 0; k < 4; k++) {
            wkb_qb_orbit_values ok;
            if ((status = wkb_qb_orbit(q, e + off[k] * h, &ok, err)))
                return status;
            K[k] = ok.curvature_integral;
        }
        const double coef = sqrt(q->eps) / 24;
        const double dK5 = (K[0] - 8 * K[1] + 8 * K[2] - K[3]) / (12 * h);
        const double dK3 = (K[2] - K[1]) / (2 * h);
        *F -= coef * dK5;
        *fd_error = coef * fabs(dK5 - dK3) / o->half_period;
        if (q->set.barrier_phase) {
            const double rem = wkb_barrier_phase_remainder(o->theta);
            if (!isfinite(rem))
                return wkb_fail(err, WKB_ENUMERIC, "the barrier phase is not finite at theta=%g", o->theta);
            *F -= 0.5 * rem;
        }
    }
    return WKB_SUCCESS;
}

/* The complex rule. A level decaying through the barrier is a pole E - i Gamma/2 of the outgoing-wave
   problem; with the parabolic connection (modulus and phase of the barrier's reflection amplitude as one
   analytic function of E) the rule becomes
     G(E) = F(E) + (i/4) ln(1 + exp(-2 theta(E))) = 0,   F the real-energy rule of rule() (order 2),
   whose imaginary part alone gives the uniform width formula. Its root lies off the real axis, and the
   real part differs from the real-energy root of F by terms of order Gamma dtheta/dE T and Gamma^2 F''/F'
   (up to ~0.1 cm-1 at theta ~ 1 on the test curves). F and theta are analytic in E: they are continued to
   complex E by the polynomial through their values on a real stencil e0 + H k, k = -m..m. */
static double complex stencil_poly(const double *f, int m, double complex z)
{
    double complex sum = 0;
    for (int j = -m; j <= m; j++) {
        double complex l = 1;
        for (int k = -m; k <= m; k++)
            if (k != j)
                l *= (z - k) / (double)(j - k);
        sum += f[j + m] * l;
    }
    return sum;
}

static double complex complex_rule(const double *F, const double *T, int m, double complex z)
{
    return stencil_poly(F, m, z) + 0.25 * _Complex_I * clog(1 + cexp(-2 * stencil_poly(T, m, z)));
}

/* Secant in the complex plane from z = 0 and z1; 0 on success (the root within the stencil). */
static int complex_rule_root(const double *F, const double *T, int m, double complex z1, double complex *root)
{
    double complex z0 = 0, g0 = complex_rule(F, T, m, z0), g1 = complex_rule(F, T, m, z1);
    for (int it = 0; it < 60; it++) {
        if (g1 == g0)
            return 1;
        const double complex z2 = z1 - g1 * (z1 - z0) / (g1 - g0);
        z0 = z1;
        g0 = g1;
        z1 = z2;
        if (!isfinite(creal(z1)) || !isfinite(cimag(z1)) || cabs(z1) > m)
            return 1;
        g1 = complex_rule(F, T, m, z1);
        if (cabs(z1 - z0) < 1e-12 * (1 + cabs(z1))) {
            *root = z1;
            return 0;
        }
    }
    return 1;
}

/* The real part of the complex rule's root near the real root e0 (width and spacing there, cm-1): 0 and
   *e_pos, *e_err (the change from the 5-point to the 7-point continuation) on success; 1 where the stencil
   does not fit between the ends of the range (close to the barrier top) or the root is not found. */
static int complex_position(wkb_qb *q, double target, double e0, double width, double spacing, double *e_pos,
                            double *e_err)
{
    enum { M = 3 };
    /* the stencil spans about the width (at least 0.2 % of the spacing, to stay above the rounding of F),
       which keeps the root within one stencil step of the real axis */
    const double room = GSL_MIN(e0 - range_start(q), q->bar.height - e0) / (M + 0.5);
    const double H = GSL_MIN(GSL_MIN(GSL_MAX(width, 0.002 * spacing), 0.05 * spacing), room);
    if (!(H > 0) || 0.5 * width > 1.5 * H)
        return 1;
    double F[2 * M + 1], T[2 * M + 1];
    for (int k = -M; k <= M; k++) {
        double f, slope, fd;
        wkb_qb_orbit_values o;
        wkb_error e2 = {0};
        if (rule(q, e0 + k * H, 2, target, &f, &slope, &fd, &o, &e2))
            return 1;
        F[k + M] = f;
        T[k + M] = o.theta;
    }
    const double complex guess = -0.5 * _Complex_I * width / H;
    double complex z7, z5;
    if (complex_rule_root(F, T, M, guess, &z7) || complex_rule_root(F + 1, T + 1, M - 1, guess, &z5))
        return 1;
    *e_pos = e0 + H * creal(z7);
    *e_err = H * cabs(z7 - z5);
    return 0;
}

/* Solves the rule for quantum number v in (0, height) by safeguarded Newton; 0 on success. */
static int solve(wkb_qb *q, int v, int order, double e_lo, double e_hi, double e0, wkb_qb_level *lev,
                 wkb_error *err)
{
    const double target = M_PI * (v + 0.5);
    double e = e0, F = 0, slope = 1, fd = 0, e_prev = NAN, F_prev = NAN;
    wkb_qb_orbit_values o;
    int status;
    for (int it = 0; it < q->set.max_iter; it++) {
        if ((status = rule(q, e, order, target, &F, &slope, &fd, &o, err)))
            return status;
        if (F > 0)
            e_hi = GSL_MIN(e_hi, e);
        else
            e_lo = GSL_MAX(e_lo, e);
        /* the secant slope also holds the energy dependence of the second-order and barrier terms, which
           dI/dE alone leaves out (Newton with dI/dE converges only linearly at order 2) */
        if (it > 0 && e != e_prev) {
            const double sec = (F - F_prev) / (e - e_prev);
            if (isfinite(sec) && sec > 0.1 * slope && sec < 10 * slope)
                slope = sec;
        }
        e_prev = e;
        F_prev = F;
        double en = e - F / slope;
        if (!(en > e_lo && en < e_hi))
            en = 0.5 * (e_lo + e_hi);
        const double de = fabs(en - e);
        e = en;
        if (de <= q->set.energy_tol || e_hi - e_lo <= q->set.energy_tol) {
            if ((status = rule(q, e, order, target, &F, &slope, &fd, &o, err)))
                return status;
            if (fabs(F / slope) > 1e3 * q->set.energy_tol + 1e-9 * fabs(e))
                break; /* converged onto a bracket end, not a root */
            lev->v = v;
            lev->energy = o.energy;
            lev->above_asymptote = e;
            lev->r1 = o.r1;
            lev->r2 = o.r2;
            lev->r3 = o.r3;
            lev->theta = o.theta;
            lev->dtheta_dE = o.dtheta_dE;
            lev->dEdv = M_PI / o.half_period;
            lev->Bv = o.Bv;
            {
                /* the width's level spacing: pi / (dI/dE - (1/2) dphi/dE), phi the parabolic-barrier phase
                   (chosen by test against exact widths: within 2.5 % for theta >= 1 on the test curves,
                   where the classical pi/(dI/dE) is up to 9 % high) */
                double spacing = lev->dEdv;
                if (q->set.width_phase) {
                    const double dphi = wkb_barrier_phase_slope(o.theta) * (-1 / M_PI) * o.dtheta_dE;
                    const double denom = o.half_period - 0.5 * dphi;
                    if (isfinite(denom) && denom > 0)
                        spacing = M_PI / denom;
                }
                lev->width_spacing = spacing;
                lev->width = spacing / (2 * M_PI) * wkb_transmission(o.theta, q->set.width_form);
            }
            lev->error = GSL_MAX(de, fd) + 1e-15 * fabs(o.energy);
            lev->order = order;
            lev->complex_root = 0;
            lev->barrier_matched = 0;
            /* theta >= 8: the decay moves the position by less than ~Gamma^2/spacing, below 1e-12 cm-1 */
            if (order == 2 && q->set.barrier_phase && q->set.complex_position && o.theta < 8) {
                double e_pos, e_err;
                if (!complex_position(q, target, e, lev->width, lev->dEdv, &e_pos, &e_err)) {
                    lev->energy = q->D + e_pos; /* the other columns stay at the real root */
                    lev->above_asymptote = e_pos;
                    lev->error = GSL_MAX(lev->error, e_err);
                    lev->complex_root = 1;
                }
            }
            return WKB_SUCCESS;
        }
    }
    return wkb_fail(err, WKB_ENOCONV, "the order-%d quasibound level v=%d did not converge (E-D=%.6g cm-1)", order,
                    v, e);
}

/* The barrier-matched rule: the pole of the exact radial equation from inside the inner wall through the
   barrier, joined beyond r3 to the second-order outgoing WKB wave (resonance.c), seeded by the level's
   position and width. The join lies join_distance beyond r3, and at least three asymptotic wavelengths
   (a slowly varying wave: the join error falls fast with the distance, ~d^-3.5 measured). It replaces the
   position and error, and the width where the pole resolves it (width > 10 x its error; narrower ones,
   theta >~ 15, keep the barrier-penetration width, which is right there); 1 (the level unchanged) where
   the pole is not found or lands more than a quarter spacing away (another level). */
static int barrier_matched(wkb_qb *q, wkb_qb_level *lev)
{
    wkb_resonance res;
    wkb_error err = {0};
    const double wavelength = 2 * M_PI * sqrt(q->eps / lev->above_asymptote);
    const double d = GSL_MAX(q->set.join_distance, 3 * wavelength);
    if (wkb_res_barrier_matched(q->res, &q->pot, q->mu, q->rot, &q->bar, lev->r3, lev->energy, lev->width, d, &res,
                                &err) ||
        !(fabs(res.energy - lev->energy) < 0.25 * lev->dEdv) || !(res.energy > q->D && res.energy < q->bar.top))
        return 1;
    lev->energy = res.energy;
    lev->above_asymptote = res.energy - q->D;
    if (res.width > 10 * res.width_error)
        lev->width = res.width;
    lev->error = res.energy_error;
    lev->barrier_matched = 1;
    return 0;
}

/* lowest e = E - D of the quasibound range: just above the asymptote, or the bottom of a well that lies
   above it (high J) */
static double range_start(const wkb_qb *q)
{
    const double H = q->bar.height, above = q->bar.bottom - q->D;
    return above > 0 ? above + 1e-9 * (H - above) : 1e-9 * H;
}

int wkb_qb_count(wkb_qb *q, size_t *count, wkb_qb_range *range, wkb_error *err)
{
    *count = 0;
    memset(range, 0, sizeof *range);
    range->v_first = range->v_top = NAN;
    if (!q->ready)
        return wkb_fail(err, WKB_EINVAL, "the quasibound workspace has not been set up");
    range->barrier = q->bar;
    if (!q->bar.found)
        return WKB_SUCCESS;
    /* first-order quantum numbers at the asymptote (or the well bottom, where that is higher) and at the
       barrier top: the ends of the range */
    const double H = q->bar.height, e_min = range_start(q), e_max = H * (1 - 1e-9);
    wkb_qb_orbit_values o;
    int status;
    if ((status = wkb_qb_orbit(q, e_min, &o, err)))
        return status;
    const double v_first = o.action / M_PI - 0.5;
    if ((status = wkb_qb_orbit(q, e_max, &o, err)))
        return status;
    const double v_top = o.action / M_PI - 0.5;
    range->v_first = v_first;
    range->v_top = v_top;
    const int v0 = (int)ceil(v_first), v1 = (int)ceil(v_top); /* v0 .. v1-1 lie in the range */
    *count = v1 > v0 ? (size_t)(v1 - v0) : 0;
    return WKB_SUCCESS;
}

int wkb_qb_levels(wkb_qb *q, wkb_qb_level *levels, size_t capacity, size_t *count, wkb_qb_range *range,
                  wkb_error *err)
{
    int status = wkb_qb_count(q, count, range, err);
    if (status || !*count)
        return status;
    const double H = q->bar.height, e_min = range_start(q), e_max = H * (1 - 1e-9);
    const int v0 = (int)ceil(range->v_first), v1 = (int)ceil(range->v_top);
    size_t n = 0;
    for (int v = v0; v < v1; v++) {
        wkb_qb_level lev;
        memset(&lev, 0, sizeof lev);
        /* first order: bracketed by the ends of the range */
        status = solve(q, v, 1, e_min, e_max, 0.5 * (e_min + e_max), &lev, err);
        if (status)
            return status;
        if (q->set.order == 2) {
            wkb_qb_level lev2;
            wkb_error err2 = {0};
            const double h = 0.5 * lev.dEdv;
            if (!solve(q, v, 2, GSL_MAX(e_min, lev.above_asymptote - h), GSL_MIN(e_max, lev.above_asymptote + h),
                       lev.above_asymptote, &lev2, &err2))
                lev = lev2;
            else
                range->n_first_order_fallback++;
            if (q->res && lev.theta < q->set.barrier_match_theta && barrier_matched(q, &lev))
                range->n_barrier_match_fallback++;
        }
        if (n < capacity)
            levels[n] = lev;
        n++;
    }
    *count = n;
    return WKB_SUCCESS;
}
