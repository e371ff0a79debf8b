/* end_solution.c: the exact solution of the radial equation at one end of an orbit, for the matched rule
 * (matched.c; shared/design/physics.md section 12).
 *
 * From deep in the forbidden region, where the decaying solution is known, towards the well: a modified
 * Pruefer angle phi (u = R sin phi, u' = q R cos phi, q = (F^2 + q0^4)^(1/4), so that nothing has a pole
 * at the turning point) through the turning region, by Magnus steps on (u, u') (magnus.c; milne=2: the angle
 * integrated in ln r by rk8pd, the path before); then, over the allowed stretch
 * where WKB holds, the phase-amplitude (Milne) form u = A sin(theta), whose amplitude follows the
 * potential's scale instead of the wavelength; at the matching point b the phase psi of the second-order
 * WKB wave k^(-1/2) sin(psi), psi' = k + dk, is read off. Within one level's iteration (a reuse scope
 * opened by matched.c) each part is kept with its energy derivative (variational equations, no extra
 * potential evaluations) and reused at the nearby energies of the iteration.
 *
 * Coordinates: rho = r at the outer end, rho = -r at the inner end, so that each end's forbidden
 * region lies at large rho and one code serves both; t = -ln r (outer) or ln r (inner) increases
 * towards the well, so d phi/dt = -r d phi/d rho.
 */
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include <gsl/gsl_errno.h>
#include <gsl/gsl_math.h>
#include <gsl/gsl_odeiv2.h>

#include "wkb.h"
#include "well.h"
#include "magnus.h"

#define WALK_FIRST_STEP 0.01 /* first step of the walk into the forbidden region, in ln r */
#define WALK_MAX_STEP 0.25
#define WALK_MAX_STEPS 4000
/* the phase-amplitude stretch ends at the last of MILNE_SCAN points (in ln r, from b towards the turning
   point) where the second-order term is below MILNE_MAX_DK of k: further out its amplitude starts to
   oscillate and the stretch costs more steps than Pruefer (measured on the bench_matched wells, CPU time:
   1e-1 best at J = 0 by 3-10 %, 3e-2 by up to 5 % at J = 10; 2e-1 no better) */
#define MILNE_SCAN 48
#define MILNE_MAX_DK 1e-1
/* largest |y_E (E - E_k)| of a reused stretch; the neglected second-order term, ~ |y_E dE| dE/(2 (E - V))
   at the stretch's end, stays below ~3e-9 rad there (below the ODE's own 20 tolerances) */
#define REUSE_MAX 1e-4
/* and of a reused Pruefer solution |phi_E (E - E_k)|: its second-order term stays ~5e-10 rad (3e-5 rather
   than 1e-5 spares the light well's second full solve of its levels 0 and 2, 11 % of its cost; the levels
   moved by < 1e-7 cm-1, measured against the exact solver at 1e-10) */
#define REUSE_MAX_PRUEFER 3e-5
#define MILNE_MIN_LOG 0.05 /* shorter phase-amplitude stretches (in ln r) are not worth starting */
/* In the forbidden region the decaying solution is an attractor of the Pruefer angle: an error made where
   the tunnelling integral left to the turning point is D is damped by exp(-2 D) before it gets there, so
   the deep part is integrated at a looser tolerance, tol exp(2 D_k) DEEP_SAFETY (at most DEEP_TOL_MAX),
   beyond each of the points where the walk passed D_k. (The steps there are limited by the relaxation rate
   2 kappa, not by the solution, which is smooth, so a looser tolerance buys less than it seems: measured
   -5 % right-hand sides on the light bench_matched well, ~0 on the others.) */
/* The walk stops before match_decay where the start's own error, estimated as the next term of the WKB
   series of the decaying solution's log-derivative (~delta^3, delta = |kappa'|/kappa^2; the start carries
   the terms to delta^2), damped by exp(-2 D), is below START_ERROR rad, but not before START_MIN_DECAY */
#define START_ERROR 1e-11
#define START_MIN_DECAY 5.0
#define DEEP_STAGES 3
static const double deep_decay[DEEP_STAGES] = {7, 5, 3};
#define DEEP_SAFETY 0.1
#define DEEP_TOL_MAX 1e-5

typedef struct {
    const wkb_well *w;
    double binding, sigma, q04;
    size_t n_eval;
} rhs_ctx;

typedef struct {
    int ok;
    double binding, b, r_m, W0, N0, y[6]; /* y: L, N, theta at r_m and their energy derivatives */
    double tol; /* the tolerance it was integrated at */
} kept_stretch;

typedef struct {
    int ok;
    double binding, r_end, q04, y[2]; /* y: the Pruefer angle at r_end and its energy derivative */
    double tol; /* the tolerance it was integrated at */
} kept_pruefer;

struct wkb_matched {
    gsl_odeiv2_system sys, milne_sys;
    gsl_odeiv2_driver *drv, *milne_drv;
    rhs_ctx ctx;
    double tol; /* the drivers' absolute tolerance per step now (radians) */
    double rough; /* a looser tolerance for the outer end (0: none; wkb_end_set_rough) */
    int rough_stretch; /* ... for its phase-amplitude stretch too */
    /* within one level solve or one threshold number (reuse set): each end's phase-amplitude stretch
       (milne6: with its energy derivatives) and, with reuse 2, its Pruefer solution (pruefer2) are kept and
       reused at the nearby energies of the iteration, y(E) = y(E_k) + y_E (E - E_k) (the matching point
       then stays put) */
    gsl_odeiv2_system milne6_sys;
    gsl_odeiv2_driver *milne6_drv;
    int reuse;
    kept_stretch keep[2]; /* inner, outer end */
    gsl_odeiv2_system pruefer2_sys;
    gsl_odeiv2_driver *pruefer2_drv;
    kept_pruefer keep_p[2];
};

void wkb_matched_free(wkb_matched *m)
{
    if (!m)
        return;
    if (m->drv)
        gsl_odeiv2_driver_free(m->drv);
    if (m->milne_drv)
        gsl_odeiv2_driver_free(m->milne_drv);
    if (m->milne6_drv)
        gsl_odeiv2_driver_free(m->milne6_drv);
    if (m->pruefer2_drv)
        gsl_odeiv2_driver_free(m->pruefer2_drv);
    free(m);
}

static int pruefer_rhs(double t, const double y[], double f[], void *params)
{
    rhs_ctx *c = params;
    const double r = exp(-c->sigma * t), ieps = 1 / c->w->eps;
    wkb_pot_value pv;
    const double F = wkb_well_kinetic(c->w, c->binding, r, &pv) * ieps, Fr = -pv.dV * ieps;
    c->n_eval++;
    /* q = (F^2 + q0^4)^(1/4); q_rho/q = sigma F F_rho/(2 q^4) (two divisions: this runs ~1e3 times per end) */
    const double q4 = F * F + c->q04, q = sqrt(sqrt(q4)), iq = 1 / q, qq = 0.5 * c->sigma * F * Fr / q4;
    const double s = sin(y[0]), co = cos(y[0]);
    f[0] = -r * (q * co * co + F * iq * s * s + qq * s * co);
    return isfinite(f[0]) ? GSL_SUCCESS : GSL_EBADFUNC;
}

/* pruefer_rhs with the energy derivative of the angle in y[1] (F_E = 1/eps, q04 held). */
static int pruefer2_rhs(double t, const double y[], double f[], void *params)
{
    rhs_ctx *c = params;
    const double r = exp(-c->sigma * t), FE = 1 / c->w->eps;
    wkb_pot_value pv;
    const double F = wkb_well_kinetic(c->w, c->binding, r, &pv) * FE, Fr = -pv.dV * FE;
    c->n_eval++;
    /* 1/q = q^3/q^4: the division runs beside the square roots instead of after them */
    const double q4 = F * F + c->q04, iq4 = 1 / q4, q2 = sqrt(q4), q = sqrt(q2), iq = q * q2 * iq4;
    const double qq = 0.5 * c->sigma * F * Fr * iq4; /* q_rho/q */
    const double s = sin(y[0]), co = cos(y[0]), Fq = F * iq;
    f[0] = -r * (q * co * co + Fq * s * s + qq * s * co);
    /* q_E = F F_E/(2 q^3) = F F_E q/(2 q^4); (F/q)_E = F_E/q - F q_E/q^2 */
    const double q_E = 0.5 * F * FE * q * iq4, Fq_E = FE * iq - Fq * q_E * iq;
    const double qq_E = 0.5 * c->sigma * Fr * FE * (c->q04 - F * F) * iq4 * iq4;
    const double f_phi = -r * (2 * (Fq - q) * s * co + qq * (co * co - s * s));
    f[1] = f_phi * y[1] - r * (q_E * co * co + Fq_E * s * s + qq_E * s * co);
    return isfinite(f[0]) && isfinite(f[1]) ? GSL_SUCCESS : GSL_EBADFUNC;
}

/* The phase-amplitude (Milne) form of the radial equation in s = ln r: u = A sin(theta), theta_r = A^-2,
   A_rr + F A = A^-3, so that every solution u is c A sin(theta + theta0) with the same A. Written for
   y = (L, N, theta), L = ln A, N = A^2 A_r/A (both of order 1 and smooth, so one absolute tolerance
   serves all three): L_s = r W N, N_s = r (W (1 + N^2) - F/W), theta_s = r W, W = A^-2. Started
   from the second-order WKB wave where WKB holds, A (and W) follow the potential's scale instead of
   the wavelength: there is no oscillation to resolve. */
static int milne_rhs(double s, const double y[], double f[], void *params)
{
    rhs_ctx *c = params;
    const double r = exp(s), eps = c->w->eps;
    wkb_pot_value pv;
    const double F = wkb_well_kinetic(c->w, c->binding, r, &pv) / eps, W = exp(-2 * y[0]);
    c->n_eval++;
    f[0] = r * W * y[1];
    f[1] = r * (W * (1 + y[1] * y[1]) - F / W);
    f[2] = r * W;
    return isfinite(f[1]) ? GSL_SUCCESS : GSL_EBADFUNC;
}

/* milne_rhs with the energy derivatives (L_E, N_E, theta_E) in y[3..5] (F_E = 1/eps): the stretch's
   linear response, for reuse at nearby energies. */
static int milne6_rhs(double s, const double y[], double f[], void *params)
{
    rhs_ctx *c = params;
    const double r = exp(s), eps = c->w->eps;
    wkb_pot_value pv;
    const double F = wkb_well_kinetic(c->w, c->binding, r, &pv) / eps, W = exp(-2 * y[0]), N = y[1];
    c->n_eval++;
    f[0] = r * W * N;
    f[1] = r * (W * (1 + N * N) - F / W);
    f[2] = r * W;
    f[3] = r * W * (y[4] - 2 * N * y[3]);
    f[4] = r * (-2 * W * (1 + N * N) * y[3] + 2 * W * N * y[4] - 1 / (eps * W) - 2 * F * y[3] / W);
    f[5] = -2 * r * W * y[3];
    return isfinite(f[1]) && isfinite(f[4]) ? GSL_SUCCESS : GSL_EBADFUNC;
}

/* An rk8pd driver for sys (its fields set here) at tolerance tol per step, with per-component scales of
   the absolute error where scale is given; NULL when out of memory. */
static gsl_odeiv2_driver *new_driver(gsl_odeiv2_system *sys, int (*f)(double, const double[], double[], void *),
                                     size_t dim, void *params, double tol, const double *scale)
{
    sys->function = f;
    sys->jacobian = NULL;
    sys->dimension = dim;
    sys->params = params;
    gsl_odeiv2_driver *d = scale ? gsl_odeiv2_driver_alloc_scaled_new(sys, gsl_odeiv2_step_rk8pd, 1e-3, tol, 0.0, 1.0,
                                                                      0.0, scale)
                                 : gsl_odeiv2_driver_alloc_y_new(sys, gsl_odeiv2_step_rk8pd, 1e-3, tol, 0.0);
    if (d)
        gsl_odeiv2_driver_set_nmax(d, 200000);
    return d;
}

static int get_state(wkb_well *w, wkb_matched **out, wkb_error *err)
{
    if (w->matched) {
        *out = w->matched;
        return WKB_SUCCESS;
    }
    wkb_matched *m = calloc(1, sizeof *m);
    if (!m)
        return wkb_fail(err, WKB_ENOMEM, "out of memory for the matched-phase workspace");
    const double tol = w->set.match_ode_tol;
    /* the derivatives need only ~1e-6 relative: 1e3 tolerances (y_E (E - E_k) stays below REUSE_MAX) */
    static const double scale6[6] = {1, 1, 1, 1e3, 1e3, 1e3};
    /* phi_E is not step-controlled (it grows like the time spent near threshold): it follows phi's steps */
    static const double scale2[2] = {1, 1e12};
    m->drv = new_driver(&m->sys, pruefer_rhs, 1, &m->ctx, tol, NULL);
    m->milne_drv = new_driver(&m->milne_sys, milne_rhs, 3, &m->ctx, tol, NULL);
    m->milne6_drv = new_driver(&m->milne6_sys, milne6_rhs, 6, &m->ctx, tol, scale6);
    m->pruefer2_drv = new_driver(&m->pruefer2_sys, pruefer2_rhs, 2, &m->ctx, tol, scale2);
    if (!m->drv || !m->milne_drv || !m->milne6_drv || !m->pruefer2_drv) {
        wkb_matched_free(m);
        return wkb_fail(err, WKB_ENOMEM, "out of memory for the matched-phase ODE drivers");
    }
    m->tol = w->set.match_ode_tol;
    w->matched = m;
    *out = m;
    return WKB_SUCCESS;
}

/* The tolerance per step for the next phase integrations (see ODE_ENERGY_SHARE). */
int wkb_end_set_tol(wkb_well *w, double tol, wkb_error *err)
{
    wkb_matched *m = NULL;
    int status = get_state(w, &m, err);
    if (status)
        return status;
    if (tol != m->tol) {
        gsl_odeiv2_control_init(m->drv->c, tol, 0.0, 1.0, 0.0);
        gsl_odeiv2_control_init(m->milne_drv->c, tol, 0.0, 1.0, 0.0);
        gsl_odeiv2_control_init(m->milne6_drv->c, tol, 0.0, 1.0, 0.0);
        gsl_odeiv2_control_init(m->pruefer2_drv->c, tol, 0.0, 1.0, 0.0);
        m->tol = tol;
    }
    return WKB_SUCCESS;
}

/* Opens or closes (on = 0) a reuse scope: one level's iteration or one threshold number; on = 2 keeps the
   Pruefer solutions too (across the well, or behind a centrifugal barrier: ends that change little between
   iterations; at a J = 0 threshold the tail's phi_E is too large for reuse, and carrying it costs ~5 %). */
void wkb_end_reuse(wkb_well *w, int on)
{
    if (!w->matched)
        return;
    w->matched->reuse = w->set.match_milne ? on : 0;
    w->matched->rough = 0;
    w->matched->keep[0].ok = w->matched->keep[1].ok = 0;
    w->matched->keep_p[0].ok = w->matched->keep_p[1].ok = 0;
}

void wkb_end_set_rough(wkb_well *w, double tol, int stretch)
{
    if (!w->matched)
        return;
    w->matched->rough = w->set.match_milne == 1 ? tol : 0;
    w->matched->rough_stretch = stretch;
}

/* Second-order local wavenumber k + dk (1/angstrom) and k, dk/dr at r, for kinetic term kin > 0. */
static void local_wave(const wkb_well *w, double kin, const wkb_pot_value *pv, double *k, double *dkdr, double *q2)
{
    const double eps = w->eps;
    *k = sqrt(kin / eps);
    *dkdr = -pv->dV / (2 * eps * *k);
    const double dk = sqrt(eps) * (pv->d2V / (8 * kin * sqrt(kin)) + (5.0 / 32) * pv->dV * pv->dV / (kin * kin * sqrt(kin)));
    *q2 = *k + dk;
}

/* Where the phase-amplitude form stops being cheap (see MILNE_MAX_DK); b itself when the first point fails. */
static double milne_end(const wkb_well *w, double binding, double b, double r_turn, size_t *n_eval)
{
    const double eps = w->eps, step = log(r_turn / b) / MILNE_SCAN;
    double r_m = b;
    for (int i = 1; i < MILNE_SCAN; i++) {
        const double r = b * exp(step * i);
        wkb_pot_value pv;
        const double kin = wkb_well_kinetic(w, binding, r, &pv);
        (*n_eval)++;
        if (!(kin > 0) || eps * (fabs(pv.d2V) / (8 * kin * kin) + (5.0 / 32) * pv.dV * pv.dV / (kin * kin * kin)) > MILNE_MAX_DK)
            break;
        r_m = r;
    }
    return r_m;
}

/* The WKB series of the decaying solution's log-derivative in the forbidden region, z = u_rho/u =
   -kappa + y1 + y2 + ..., from the Riccati equation z_rho = kappa^2 - z^2 order by order:
   y1 = -kappa'/(2 kappa), y2 = (y1' + y1^2)/(2 kappa) = -kappa''/(4 kappa^2) + 3 kappa'^2/(8 kappa^3)
   (derivatives in rho; y_n ~ kappa delta^n, delta = |kappa'|/kappa^2). kin = E - V_J < 0 at the point of pv. */
static void decay_terms(double kin, const wkb_pot_value *pv, double sigma, double eps, double *y1, double *y2)
{
    const double kappa = sqrt(-kin / eps), dV = pv->dV / eps;
    const double kp = sigma * dV / (2 * kappa), kpp = pv->d2V / (2 * eps * kappa) - dV * dV / (4 * kappa * kappa * kappa);
    *y1 = -kp / (2 * kappa);
    *y2 = -kpp / (4 * kappa * kappa) + 3 * kp * kp / (8 * kappa * kappa * kappa);
}

int wkb_end_solution(wkb_well *w, double binding, int outer, double r_turn, double b, wkb_end_phase *out,
                     wkb_error *err)
{
    wkb_matched *m = NULL;
    int status = get_state(w, &m, err);
    if (status)
        return status;
    const double sigma = outer ? 1.0 : -1.0, eps = w->eps;
    /* this end's tolerance: the outer one may be looser for a first step (wkb_end_set_rough); a kept part
       is reused only when it was integrated at most at this tolerance */
    const double tol_end = outer && m->rough > m->tol ? m->rough : m->tol;
    const double tol_stretch = m->rough_stretch ? tol_end : m->tol;
    wkb_pot_value pv;
    /* walk into the forbidden region until integral kappa dr reaches match_decay */
    double r = r_turn, acc = 0, h = WALK_FIRST_STEP;
    double r_deep[DEEP_STAGES] = {0}; /* where the walk passed deep_decay[k] (0: it did not) */
    size_t n_walk = 0;
    int settled = 0; /* the walk stopped where the start is accurate enough */
    for (int i = 0; i < WALK_MAX_STEPS && acc < w->set.match_decay; i++) {
        const double rn = r * exp(sigma * h), rm = r * exp(0.5 * sigma * h);
        const double kin = wkb_well_kinetic(w, binding, rm, &pv);
        n_walk++;
        if (!isfinite(kin))
            break; /* the potential is not finite further in: start where it still is */
        if (kin < 0)
            acc += sqrt(-kin / eps) * fabs(rn - r);
        for (int k = 0; k < DEEP_STAGES; k++)
            if (!(r_deep[k] > 0) && acc >= deep_decay[k])
                r_deep[k] = rn; /* the far end of the step: at least D_k from the turning point */
        r = rn;
        if (w->set.match_milne && kin < 0 && acc >= START_MIN_DECAY) {
            /* delta at the midpoint is larger than at r (it falls off into the forbidden region) */
            double y1, y2;
            decay_terms(kin, &pv, sigma, eps, &y1, &y2);
            const double kappa = sqrt(-kin / eps);
            if ((settled = fabs(y1 * y2) / (kappa * kappa) * exp(-2 * acc) <= START_ERROR))
                break;
        }
        h = GSL_MIN(1.15 * h, WALK_MAX_STEP);
        if (!outer && r < 1e-6 * r_turn)
            break;
    }
    double kin = wkb_well_kinetic(w, binding, r, &pv);
    /* an inner wall of finite height (V finite at r = 0): the regular solution, u = 0 at r -> 0 */
    const int regular = !outer && !settled && acc < w->set.match_decay && isfinite(kin);
    while (!regular && !(isfinite(kin) && kin < 0) && fabs(log(r / r_turn)) > 1e-3) { /* step back to a finite point */
        r = r * exp(-0.5 * sigma * fabs(log(r / r_turn)) * 0.1);
        kin = wkb_well_kinetic(w, binding, r, &pv);
    }
    if (!regular && !(kin < 0))
        return wkb_fail(err, WKB_ENUMERIC, "no forbidden region found beyond the %s turning point r=%.8g A",
                        outer ? "outer" : "inner", r_turn);
    /* start: the decaying WKB solution kappa^(-1/2) exp(-integral kappa d rho) */
    wkb_pot_value pt;
    wkb_well_effective(w, r_turn, &pt);
    m->ctx.w = w;
    m->ctx.binding = binding;
    m->ctx.sigma = sigma;
    m->ctx.q04 = pow(fabs(pt.dV) / eps, 4.0 / 3.0);
    m->ctx.n_eval = 0;
    double y[1] = {M_PI}; /* u = 0 */
    if (!regular) {
        const double F = kin / eps, kappa = sqrt(-F), q = sqrt(sqrt(F * F + m->ctx.q04));
        double y1, y2;
        decay_terms(kin, &pv, sigma, eps, &y1, &y2);
        /* the earlier solve starts at match_decay from the first-order terms alone */
        const double z = -kappa + y1 + (w->set.match_milne ? y2 : 0);
        y[0] = M_PI_2 - atan(z / q);
    }
    /* the allowed stretch from b to r_m where WKB holds: the phase-amplitude form, started from the
       second-order WKB wave itself (W0 = q2, N0 from its derivative), kept or reused within an iteration */
    const double kb = wkb_well_kinetic(w, binding, b, &pv);
    double k, dkdr, q2;
    local_wave(w, kb, &pv, &k, &dkdr, &q2);
    size_t n_scan = 0;
    kept_stretch *kp_ = &m->keep[outer];
    double ym[6] = {0}, W0 = q2, N0 = 0, r_m = b;
    int reused = 0;
    if (m->reuse && kp_->ok && kp_->b == b && kp_->tol <= tol_stretch) {
        const double dE = -(binding - kp_->binding);
        const double change = fabs(dE) * GSL_MAX(fabs(kp_->y[3]), GSL_MAX(fabs(kp_->y[4]), fabs(kp_->y[5])));
        wkb_pot_value pr;
        if (change <= REUSE_MAX && wkb_well_kinetic(w, binding, kp_->r_m, &pr) > 0) {
            for (int i = 0; i < 3; i++)
                ym[i] = kp_->y[i] + kp_->y[i + 3] * dE;
            W0 = kp_->W0;
            N0 = kp_->N0;
            r_m = kp_->r_m;
            reused = 1;
        }
    }
    if (!reused && w->set.match_milne)
        r_m = milne_end(w, binding, b, r_turn, &n_scan);
    int milne = fabs(log(r_m / b)) >= MILNE_MIN_LOG;
    if (milne && !reused) {
        /* N = A^2 A_r/A = -W_r/(2 W^2) with W = q2 the second-order wavenumber (its derivative by a
           central difference): the closer the start is to the smooth amplitude, the smaller the
           oscillation left in A for the ODE to follow */
        const double h = 1e-4 * b;
        double kp, dkp, q2p, km, dkm, q2m;
        wkb_pot_value pp, pm;
        local_wave(w, wkb_well_kinetic(w, binding, b + h, &pp), &pp, &kp, &dkp, &q2p);
        local_wave(w, wkb_well_kinetic(w, binding, b - h, &pm), &pm, &km, &dkm, &q2m);
        n_scan += 2;
        N0 = -(q2p - q2m) / (2 * h) / (2 * q2 * q2);
        ym[0] = -0.5 * log(W0);
        ym[1] = N0;
        double s = log(b);
        gsl_odeiv2_driver *drv = m->reuse ? m->milne6_drv : m->milne_drv;
        gsl_odeiv2_driver_reset_hstart(drv, 1e-2 * GSL_SIGN(log(r_m) - s));
        if (tol_stretch != m->tol)
            gsl_odeiv2_control_init(drv->c, tol_stretch, 0.0, 1.0, 0.0);
        int gs = gsl_odeiv2_driver_apply(drv, &s, log(r_m), ym);
        if (tol_stretch != m->tol)
            gsl_odeiv2_control_init(drv->c, m->tol, 0.0, 1.0, 0.0);
        if (gs != GSL_SUCCESS || !isfinite(ym[0]) || !isfinite(ym[1]) || !isfinite(ym[2])) {
            /* the stretch failed (seen on an inner wall that reaches the asymptote only at r -> 0, where
               its amplitude overflows): the Pruefer solution alone, as without the stretch */
            milne = 0;
            kp_->ok = 0;
        } else if (m->reuse) {
            kp_->ok = 1;
            kp_->binding = binding;
            kp_->b = b;
            kp_->r_m = r_m;
            kp_->W0 = W0;
            kp_->N0 = N0;
            kp_->tol = tol_stretch;
            memcpy(kp_->y, ym, sizeof ym);
        }
    }
    const double r_end = milne ? r_m : b;
    kept_pruefer *kq = &m->keep_p[outer];
    const double dE = -(binding - kq->binding);
    /* the second-order term of a reuse is ~(phi_E dE)^2 / 2 where phi_EE ~ phi_E^2, but next to a J = 0
       threshold phi_EE ~ phi_E / (2 b): there the reuse must also keep phi_E dE^2 / (4 b) that small */
    const double b_min = GSL_MIN(binding, kq->binding);
    /* (the outer end only: the inner wall's phase is regular at the asymptote, its phi_EE ~ phi_E^2 as elsewhere;
       at the light bench_matched well's last level this spares a second inner solve) */
    const int threshold_ok = w->rot != 0 || !outer || (b_min > 0 && fabs(kq->y[1] * dE) * fabs(dE) / (4 * b_min) <=
                                             0.5 * REUSE_MAX_PRUEFER * REUSE_MAX_PRUEFER);
    if (m->reuse == 2 && kq->ok && kq->r_end == r_end && kq->tol <= tol_end && fabs(kq->y[1] * dE) <= REUSE_MAX_PRUEFER && threshold_ok) {
        /* the kept solution through the turning region, to first order in the energy change */
        m->ctx.q04 = kq->q04;
        y[0] = kq->y[0] + kq->y[1] * dE;
    } else if (w->set.match_milne == 1) {
        /* Magnus steps (magnus.c) from the start to r_end; the deep part at the looser tolerance the
           damping there allows, continuously in the tunnelling integral left (the walk's acc) */
        const double F0 = kin / eps;
        const double q0 = isfinite(F0) ? sqrt(sqrt(F0 * F0 + m->ctx.q04)) : 1.0;
        wkb_magnus_state ms;
        wkb_magnus_start(&ms, r, y[0], q0, sigma, -sigma * 1e-3 * r);
        ms.decay_left = regular ? 0 : acc;
        ms.deep_safety = DEEP_SAFETY;
        ms.tol_deep_max = DEEP_TOL_MAX;
        ms.want_E = m->reuse == 2;
        int gs = wkb_magnus_run(w, binding, r_end, tol_end, m->ctx.q04, &ms);
        double phi = NAN, phi_E = NAN;
        if (gs == GSL_SUCCESS)
            gs = wkb_magnus_angle(w, binding, m->ctx.q04, sigma, &ms, &phi, &phi_E);
        m->ctx.n_eval += ms.n_eval;
        if (gs != GSL_SUCCESS)
            return wkb_fail(err, WKB_ENUMERIC,
                            "the exact %s-end solution failed at binding energy %.6g cm-1 (Magnus steps, GSL "
                            "status %d)", outer ? "outer" : "inner", binding, gs);
        y[0] = phi;
        if (m->reuse == 2) {
            kq->ok = isfinite(phi_E);
            kq->binding = binding;
            kq->r_end = r_end;
            kq->q04 = m->ctx.q04;
            kq->tol = tol_end;
            kq->y[0] = phi;
            kq->y[1] = phi_E;
        }
    } else {
        double t = -sigma * log(r);
        const double t_end = -sigma * log(r_end);
        double y2[2] = {y[0], 0}; /* the start's own energy dependence is damped by exp(-2 match_decay) */
        gsl_odeiv2_driver *drv = m->reuse == 2 ? m->pruefer2_drv : m->drv;
        gsl_odeiv2_driver_reset_hstart(drv, 1e-3 * GSL_SIGN(t_end - t));
        int gs = GSL_SUCCESS;
        for (int k = 0; k < DEEP_STAGES && gs == GSL_SUCCESS && w->set.match_milne; k++) { /* the deep stages, loosest first (not in the earlier solve) */
            const double t_k = -sigma * log(r_deep[k]);
            if (!(r_deep[k] > 0) || !(t_k > t) || !(t_k < t_end))
                continue;
            const double tol_k = GSL_MIN(DEEP_TOL_MAX, m->tol * exp(2 * deep_decay[k]) * DEEP_SAFETY);
            if (!(tol_k > m->tol))
                continue;
            gsl_odeiv2_control_init(drv->c, tol_k, 0.0, 1.0, 0.0);
            gs = gsl_odeiv2_driver_apply(drv, &t, t_k, y2);
        }
        gsl_odeiv2_control_init(drv->c, m->tol, 0.0, 1.0, 0.0);
        if (gs == GSL_SUCCESS)
            gs = gsl_odeiv2_driver_apply(drv, &t, t_end, y2);
        if (gs != GSL_SUCCESS || !isfinite(y2[0]))
            return wkb_fail(err, WKB_ENUMERIC,
                            "the exact %s-end solution failed at binding energy %.6g cm-1 (GSL status %d)",
                            outer ? "outer" : "inner", binding, gs);
        y[0] = y2[0];
        if (m->reuse == 2) {
            kq->ok = isfinite(y2[1]);
            kq->binding = binding;
            kq->r_end = r_end;
            kq->q04 = m->ctx.q04;
            kq->tol = m->tol;
            kq->y[0] = y2[0];
            kq->y[1] = y2[1];
        }
    }
    double psi;
    if (milne) {
        /* the Pruefer solution at r_m in the phase-amplitude form (theta in rho, increasing like phi):
           cot theta = A^2 (u_rho/u - A_rho/A); then back along the stretch to b */
        const double km = wkb_well_kinetic(w, binding, r_m, &pv), Fm = km / eps, qm = sqrt(sqrt(Fm * Fm + m->ctx.q04));
        const double a2 = exp(2 * ym[0]), sp = sin(y[0]);
        double th = atan2(sp, a2 * qm * cos(y[0]) - sigma * ym[1] * sp), n = floor(y[0] / M_PI);
        if (th < 0)
            th += M_PI;
        const double off = th - (y[0] - n * M_PI); /* the same half-turn as phi: zeros of u coincide */
        if (off > M_PI_2)
            th -= M_PI;
        else if (off < -M_PI_2)
            th += M_PI;
        const double th_b = th + n * M_PI - sigma * ym[2];
        /* u_rho/u at b in the phase-amplitude form, then the WKB-wave phase there (as below) */
        const double zb = W0 / tan(th_b) + sigma * N0 * W0;
        psi = atan2(q2, zb + sigma * dkdr / (2 * k));
        psi += M_PI * round((th_b - psi) / M_PI);
    } else {
        /* join at b to k^(-1/2) sin(psi): u'/u = -k'/(2k) + q2 cot(psi) in rho */
        const double Fb = kb / eps, qb = sqrt(sqrt(Fb * Fb + m->ctx.q04));
        const double zb = qb * cos(y[0]) / sin(y[0]); /* u_rho/u */
        const double x = zb + sigma * dkdr / (2 * k);
        psi = atan2(q2, x); /* in (0, pi) */
        psi += M_PI * round((y[0] - psi) / M_PI);
    }
    out->psi = psi;
    out->r_match = b;
    out->r_turn = r_turn;
    out->evaluations = m->ctx.n_eval + n_walk + n_scan;
    out->action_to_turn = NAN;
    return WKB_SUCCESS;
}

int wkb_end_kept_match(const wkb_well *w, double *b)
{
    if (!w->matched || !w->matched->reuse || !w->matched->keep[1].ok)
        return 0;
    *b = w->matched->keep[1].b;
    return 1;
}
