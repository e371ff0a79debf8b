/* resonance.c: exact shape resonances as complex-energy (Siegert) poles.
 *
 * A resonance is an energy E = E_r - i Gamma/2 at which the solution of
 *   u'' = ((V_J(r) - E)/eps) u,   V_J = V + eps J(J+1)/r^2,
 * that is regular at the inner wall is purely outgoing beyond the barrier. The regular solution is
 * started at u = 0 deep inside the inner forbidden region (where the integral of kappa up to the inner
 * turning point is start_decay) and carried out by Numerov's method with complex E on a uniform grid to
 * the matching radius R. There it is joined to the outgoing Riccati-Hankel wave
 *   u_out(r) = h_J^+(k r),  k = sqrt((E - V(R))/eps)  (principal branch, Re k > 0),
 * which is the exact outgoing solution where V has reached its asymptote; taking k at the local
 * V(R) absorbs the residual tail to first order (the eikonal phase), its gradient term being of
 * relative size V'/(eps k^3) (negligible at R ~ 10-50 A for tails falling faster than 1/r^2).
 * R = min(r_match, 2/|Im k|), but at least 10 wavelengths beyond the outer turning point: an error of u
 * at R reads as an incoming amplitude amplified by exp(2 |Im k| R).
 * The matching function g(E) = W(u, h+)/W(u, h-) (discrete Wronskians at the last two grid points),
 * the ratio -c-/c+ of the incoming to the outgoing amplitude, vanishes at the pole; for narrow
 * resonances, where that ratio is ~1 except within ~Gamma of the pole, the zero of W(u, h+) itself is
 * sought. The secant method finds it, starting from a semiclassical estimate. The recurrence runs in
 * long double: the barrier amplifies its rounding by exp(theta), which in double precision limits widths
 * to ~1e-12 cm-1 (measured), in long double to ~1e-16.
 * Numerov's O(h^4) error is removed by Richardson extrapolation over grid strides 4, 2, 1; the error
 * estimate combines the change of the extrapolated pole between stride sets (4,2) and (2,1) with the
 * change when R is moved inwards (the outer matching error).
 * Riccati-Hankel functions by upward recurrence h_{l+1} = (2l+1)/z h_l - h_{l-1} (stable for the
 * dominant outgoing solution), h_0 = -i e^{iz}, h_1 = -(1 + i/z) e^{iz} (DLMF 10.47, 10.49).
 *
 * The barrier-matched rule (wkb_res_barrier_matched, quasibound.c's position for broad levels) is the same
 * shooting with the outer end moved in to R = r3 + a few A (r3 the outer turning point beyond the barrier)
 * and the Hankel wave replaced by the second-order outgoing WKB wave there: the difficult part (the well
 * and the barrier, where the semiclassical rule has a ~1e-4 rad phase error on light wells) is integrated
 * exactly, the slowly varying outside is WKB. Its error estimate: Richardson as above and the change when
 * joined at half the distance beyond r3.
 */
#include <complex.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include <gsl/gsl_math.h>

#include "wkb.h"

#define NARROW 1e-3 /* width/(E - D) below which the pole is sought as a zero of c- rather than of c-/c+ */

struct wkb_res {
    wkb_resonance_settings set;
    size_t capacity;
    double *f; /* (V_J - D)/eps on the fine grid */
};

wkb_resonance_settings wkb_resonance_default_settings(void)
{
    wkb_resonance_settings s;
    s.phase_step = 0.06;
    s.r_match = 50.0;
    s.r_match_alt = 0.7;
    s.start_decay = 36.0;
    s.max_points = 20000000;
    s.max_iter = 100;
    return s;
}

wkb_res *wkb_res_alloc(const wkb_resonance_settings *settings)
{
    wkb_res *w = calloc(1, sizeof *w);
    if (!w)
        return NULL;
    w->set = settings ? *settings : wkb_resonance_default_settings();
    if (!(w->set.phase_step > 0 && w->set.phase_step <= 0.5 && w->set.r_match > 0 && w->set.r_match_alt > 0.2 &&
          w->set.r_match_alt < 1 && w->set.start_decay >= 10 && w->set.max_points >= 1000 && w->set.max_iter >= 4)) {
        free(w);
        return NULL;
    }
    return w;
}

void wkb_res_free(wkb_res *w)
{
    if (!w)
        return;
    free(w->f);
    free(w);
}

/* h_l^+(z) e^{-iz} (sign = +1) or h_l^-(z) e^{+iz} (sign = -1) */
static double complex hankel_reduced(int l, double complex z, int sign)
{
    double complex hm = -sign * I, h = -(1 + sign * I / z);
    if (l == 0)
        return hm;
    for (int k = 1; k < l; k++) {
        const double complex hn = (2 * k + 1) / z * h - hm;
        hm = h;
        h = hn;
    }
    return h;
}

/* The second-order outgoing WKB wave q^(-1/2) exp(i int q dr) at the matching radius (the barrier-matched
   rule), with q^2 = W + U''/(4 eps W) + (5/16) U'^2/(eps W)^2, W = (E - U)/eps, U = V_J - D (the WKB
   series of u'/u to second order, including the amplitude term). Values of U, U', U'' at R, at R - stride h
   (strides 1, 2, 4) and at the Gauss-Legendre nodes of [R - stride h, R] for the phase across that step. */
#define JOIN_NODES 4
typedef struct {
    double U[3], dU[3], d2U[3];                                          /* at R - stride h */
    double Un[3][JOIN_NODES], dUn[3][JOIN_NODES], d2Un[3][JOIN_NODES], wn[3]; /* nodes; wn: half the step */
    double UR, dUR, d2UR;                                                /* at R */
    double lead;                                                         /* R - r3 */
} wkb_join;

typedef struct {
    const double *f;
    double r0, h, eps, VR; /* VR = V(R) - D without rotation, at the matching radius; energies are E - D */
    size_t n;                 /* index of the matching point on the fine grid */
    int l, narrow;
    const wkb_join *join;     /* NULL: Riccati-Hankel waves at R; else the second-order WKB wave */
} shooting;

static const double join_x[JOIN_NODES] = {-0.861136311594052575, -0.339981043584856265, 0.339981043584856265,
                                          0.861136311594052575};
static const double join_w[JOIN_NODES] = {0.347854845137453857, 0.652145154862546143, 0.652145154862546143,
                                          0.347854845137453857};

static int stride_index(size_t stride) { return stride == 1 ? 0 : stride == 2 ? 1 : 2; }

/* U = V_J - D, U' and U'' at r */
static void effective_values(const wkb_potential *pot, double er, double r, double *U, double *dU, double *d2U)
{
    wkb_pot_value pv;
    wkb_potential_eval(pot, r, &pv);
    const double c = er / (r * r);
    *U = c - pv.depth;
    *dU = pv.dV - 2 * c / r;
    *d2U = pv.d2V + 6 * c / (r * r);
}

/* U, U', U'' on the join points of matching index n (see wkb_join) */
static int join_setup(const wkb_potential *pot, double er, double r0, double h, size_t n, double r3, wkb_join *j)
{
    const double R = r0 + h * (double)n;
    j->lead = R - r3;
    effective_values(pot, er, R, &j->UR, &j->dUR, &j->d2UR);
    for (int s = 0; s < 3; s++) {
        const double step = h * (double)(1 << s), a = R - step;
        effective_values(pot, er, a, &j->U[s], &j->dU[s], &j->d2U[s]);
        j->wn[s] = 0.5 * step;
        for (int k = 0; k < JOIN_NODES; k++)
            effective_values(pot, er, a + 0.5 * step * (1 + join_x[k]), &j->Un[s][k], &j->dUn[s][k],
                             &j->d2Un[s][k]);
    }
    return isfinite(j->UR) && isfinite(j->dUR) && isfinite(j->d2UR) ? WKB_SUCCESS : WKB_ENUMERIC;
}

static double complex wkb_q(double complex e, double eps, double U, double dU, double d2U)
{
    const double complex W = (e - U) / eps;
    return csqrt(W + d2U / (4 * eps * W) + (5.0 / 16) * dU * dU / (eps * eps * W * W));
}

/* The outgoing (p) and incoming (m) WKB waves at R (N) and R - stride h (M), up to a constant factor:
   pN = exp(i k (R - r3)), pM = pN sqrt(q(R)/q(R - stride h)) exp(-i Phi), Phi = int q dr over the step, m
   with -i. The factor exp(+-i k (R - r3)), k at U(R), stands for the phase from r3 to R: it takes out the
   fast energy dependence of that phase, so that the matching function varies on the scale of the width
   (as the Hankel waves' exp(2ikR) does; without it the secant fails for joins many wavelengths out). */
static void join_waves(const wkb_join *j, double eps, size_t stride, double complex e, double complex *pN,
                       double complex *pM, double complex *mN, double complex *mM)
{
    const int s = stride_index(stride);
    double complex phase = 0;
    for (int k = 0; k < JOIN_NODES; k++)
        phase += join_w[k] * wkb_q(e, eps, j->Un[s][k], j->dUn[s][k], j->d2Un[s][k]);
    phase *= j->wn[s];
    const double complex amp = csqrt(wkb_q(e, eps, j->UR, j->dUR, j->d2UR) / wkb_q(e, eps, j->U[s], j->dU[s],
                                                                                       j->d2U[s]));
    const double complex lead = cexp(I * csqrt((e - j->UR) / eps) * j->lead);
    *pN = lead;
    *mN = 1 / lead;
    *pM = lead * amp * cexp(-I * phase);
    *mM = amp * cexp(I * phase) / lead;
}

static double complex match(const shooting *s, size_t stride, double complex E)
{
    /* the recurrence in extended precision: its accumulated rounding, amplified by exp(theta) through the
       barrier, otherwise limits widths to ~1e-12 cm-1 */
    const long double hs = s->h * (double)stride, h12 = hs * hs / 12;
    const long double complex Ee = (long double complex)E / s->eps;
    long double complex u0 = 0, u1 = 1e-30L;
    long double complex w0 = 1 - h12 * (s->f[0] - Ee), w1 = 1 - h12 * (s->f[stride] - Ee);
    for (size_t i = 2 * stride; i <= s->n; i += stride) {
        const long double complex w2 = 1 - h12 * (s->f[i] - Ee);
        const long double complex u2 = ((12 - 10 * w1) * u1 - w0 * u0) / w2;
        u0 = u1;
        u1 = u2;
        w0 = w1;
        w1 = w2;
    }
    double complex pN, pM, mN, mM, ref = 1;
    if (s->join) {
        join_waves(s->join, s->eps, stride, E, &pN, &pM, &mN, &mM);
    } else {
        const double R = s->r0 + s->h * (double)s->n;
        const double complex k = csqrt((E - s->VR) / s->eps);
        const double complex e = cexp(I * k * hs);
        pN = hankel_reduced(s->l, k * R, 1);
        pM = hankel_reduced(s->l, k * (R - hs), 1) / e;
        mN = hankel_reduced(s->l, k * R, -1);
        mM = hankel_reduced(s->l, k * (R - hs), -1) * e;
        ref = cexp(2 * I * k * R);
    }
    /* g = W(u, h+)/W(u, h-) = -c-/c+ for u = c+ h+ + c- h-: 1/S up to a phase, scale-free, with its
       poles at the conjugate energies (away from the search below the real axis) */
    if (s->narrow)
        return u1 * pM - u0 * pN; /* c- alone: near a narrow pole 1/S is ~1 except within ~Gamma of it */
    return ref * (u1 * pM - u0 * pN) / (u1 * mM - u0 * mN);
}

/* secant iteration on match(); 0 on convergence */
static int secant(const shooting *s, size_t stride, double complex E0, double complex E1, int max_iter,
                  double max_step, double complex *root, int *iterations)
{
    double complex g0 = match(s, stride, E0), g1 = match(s, stride, E1);
    double last_step = INFINITY;
    for (int it = 0; it < max_iter; it++) {
        if (!isfinite(creal(g1)) || !isfinite(cimag(g1)) || !isfinite(creal(g0)) || !isfinite(cimag(g0)))
            return WKB_ENUMERIC;
        if (g1 == g0)
            break;
        double complex step = -g1 * (E1 - E0) / (g1 - g0);
        if (cabs(step) > max_step) /* far from the pole g is not of its near-pole form: walk */
            step *= max_step / cabs(step);
        const double complex E2 = E1 + step;
        E0 = E1;
        g0 = g1;
        E1 = E2;
        g1 = match(s, stride, E1);
        (*iterations)++;
        /* to rounding level (the width can be 1e-13 of the energy), or until the steps stop shrinking
           once they are small (the noise floor of g) */
        const double dE = cabs(E1 - E0);
        if ((fabs(creal(E1 - E0)) <= 2e-16 * fabs(creal(E1)) && fabs(cimag(E1 - E0)) <= 2e-16 * fabs(creal(E1))) ||
            (dE < 1e-10 * cabs(E1) && dE >= last_step)) {
            *root = cabs(g1) < cabs(g0) ? E1 : E0;
            return WKB_SUCCESS;
        }
        last_step = dE;
    }
    *root = E1;
    return cabs(E1 - E0) <= 1e-12 * cabs(E1) ? WKB_SUCCESS : WKB_ENOCONV;
}

/* The pole with Richardson extrapolation over strides 4, 2, 1 at matching index n; step error into *err_h. */
static int pole_at(shooting *s, size_t n, double complex guess, double delta, int max_iter, double max_step,
                   double complex *pole, double complex *err_h, int *iterations)
{
    double complex E[3];
    const size_t strides[3] = {4, 2, 1};
    s->n = n;
    double complex g = guess;
    for (int k = 0; k < 3; k++) {
        int status = secant(s, strides[k], g, g + delta, max_iter, max_step, &E[k], iterations);
        if (status)
            return status;
        g = E[k];
        delta = 1e-3 * delta + 1e-12 * cabs(g); /* finer grids move the pole by O(h^4) only */
    }
    const double complex R21 = E[2] + (E[2] - E[1]) / 15, R42 = E[1] + (E[1] - E[0]) / 15;
    *pole = R21;
    /* after the h^4 term, the next is h^6: R42 carries 2^6 = 64 times the error of R21; /31 keeps a factor 2 */
    *err_h = (R21 - R42) / 31;
    return WKB_SUCCESS;
}

/* The start r0 of the regular solution: in from the well bottom past the inner turning point at the
   energy until the decay integral reaches start_decay (returned in *decay, less where r reaches 0.02 r_bottom). */
static double inner_start(const wkb_res *w, const wkb_potential *pot, double er, double eps, const wkb_barrier *bar,
                          double energy, double *decay)
{
    wkb_pot_value pv;
    double r = bar->r_bottom, acc = 0;
    const double dr = 2e-3 * bar->r_bottom;
    for (;;) {
        r -= dr;
        if (r <= 0.02 * bar->r_bottom)
            break;
        wkb_potential_eval(pot, r, &pv);
        const double kin = energy - (pv.V + er / (r * r));
        if (kin < 0)
            acc += sqrt(-kin / eps) * dr;
        if (acc >= w->set.start_decay)
            break;
    }
    *decay = acc;
    return GSL_MAX(r, 0.02 * bar->r_bottom);
}

/* The grid r0 + i h, i = 0..n (n a multiple of 4, h <= h_max, r0 + n h = R) and f = (V_J - D)/eps on it. */
static int fill_grid(wkb_res *w, const wkb_potential *pot, double er, double eps, double r0, double R, double h_max,
                     size_t *n_out, double *h_out, wkb_error *err)
{
    const size_t n = (size_t)ceil((R - r0) / h_max / 4) * 4;
    if (n + 1 > w->set.max_points)
        return wkb_fail(err, WKB_EINVAL, "the resonance grid would need %zu points, more than max_points=%zu", n + 1,
                        w->set.max_points);
    const double h = (R - r0) / (double)n;
    if (n + 1 > w->capacity) {
        double *f = realloc(w->f, (n + 1) * sizeof(double));
        if (!f)
            return wkb_fail(err, WKB_ENOMEM, "out of memory for a resonance grid of %zu points", n + 1);
        w->f = f;
        w->capacity = n + 1;
    }
    wkb_pot_value pv;
    for (size_t i = 0; i <= n; i++) {
        const double ri = r0 + h * (double)i;
        wkb_potential_eval(pot, ri, &pv);
        w->f[i] = (er / (ri * ri) - pv.depth) / eps; /* (V_J - D)/eps: energies are carried as E - D */
        if (!isfinite(w->f[i]))
            return wkb_fail(err, WKB_ENUMERIC, "the potential is not finite at r=%g A", ri);
    }
    *n_out = n;
    *h_out = h;
    return WKB_SUCCESS;
}

/* the pole and its error estimates into *out (pole_alt: the same pole at the second matching radius) */
static void pole_result(double complex pole, double complex pole_alt, double complex err_h, double D, double R,
                        size_t n, int iterations, const wkb_barrier *bar, wkb_resonance *out)
{
    out->energy = D + creal(pole);
    out->width = -2 * cimag(pole);
    out->energy_error = GSL_MAX(fabs(creal(err_h)), fabs(creal(pole - pole_alt))) + 4e-16 * fabs(creal(pole));
    /* + the rounding floor of the extended-precision recurrence (measured: widths reproduce to ~1e-18 |E - D|
       across steps and radii) */
    out->width_error = 2 * GSL_MAX(fabs(cimag(err_h)), fabs(cimag(pole - pole_alt))) + 5e-18 * fabs(creal(pole));
    /* a width below the secant's resolution (it stops at steps of 2e-16 |E - D| in Im E) is rounding: a
       negative one there (seen at theta >~ 40, true width ~1e-50) says its error is at least |width| */
    if (out->width < 0 && -out->width < 1e-15 * fabs(creal(pole)))
        out->width_error = GSL_MAX(out->width_error, -out->width);
    out->r_match = R;
    out->grid_points = n + 1;
    out->iterations = iterations;
    out->above_barrier = creal(pole) > bar->height;
}

int wkb_res_find(wkb_res *w, const wkb_potential *pot, double mu, int J, double energy_guess, double width_guess,
                 wkb_resonance *out, wkb_error *err)
{
    memset(out, 0, sizeof *out);
    if (!(isfinite(mu) && mu > 0))
        return wkb_fail(err, WKB_EINVAL, "reduced mass mu=%g is invalid: it must be a finite number > 0 (u)", mu);
    if (J < 0)
        return wkb_fail(err, WKB_EINVAL, "J=%d is invalid: J >= 0", J);
    if (!(isfinite(energy_guess) && isfinite(width_guess) && width_guess >= 0))
        return wkb_fail(err, WKB_EINVAL, "resonance guess E=%g, width=%g is invalid (finite, width >= 0)",
                        energy_guess, width_guess);
    const double eps = WKB_HBAR2_OVER_2U / mu, rot = (double)J * (J + 1), D = wkb_potential_asymptote(pot);
    wkb_barrier bar;
    int status = wkb_barrier_find(pot, mu, rot, 400, &bar, err);
    if (status)
        return status;
    if (!bar.found)
        return wkb_fail(err, WKB_ENOLEVEL, "J=%d: V_J has no barrier above the asymptote, so no resonance", J);
    if (!(energy_guess > D))
        return wkb_fail(err, WKB_EINVAL, "resonance guess E=%.12g cm-1 is not above the asymptote %.12g cm-1",
                        energy_guess, D);
    wkb_pot_value pv;
    const double er = eps * rot;
    double acc;
    const double r0 = inner_start(w, pot, er, eps, &bar, energy_guess, &acc);
    if (acc < 0.5 * w->set.start_decay)
        return wkb_fail(err, WKB_EINVAL,
                        "J=%d: the inner wall is too low for E=%.10g cm-1 (tunnelling integral %.3g inside the inner "
                        "turning point): u = 0 cannot be imposed there", J, energy_guess, acc);
    const double k_max = sqrt((energy_guess - bar.bottom) / eps);
    /* R: where the outgoing wave has not yet grown much over the incoming one (an error delta of u at R
       reads as an incoming amplitude delta exp(2 |Im k| R): |Im k| R <= 2 keeps the pole well conditioned),
       but beyond the outer turning point by several wavelengths */
    double r3 = bar.r_top;
    while (r3 < 1e4 * bar.r_top) {
        wkb_potential_eval(pot, r3, &pv);
        if (energy_guess - (pv.V + er / (r3 * r3)) > 0)
            break;
        r3 *= 1.01;
    }
    const double complex k_guess = csqrt((energy_guess - D - 0.5 * I * width_guess) / eps);
    const double R_floor = GSL_MAX(2 * bar.r_top, r3 + 10 * 2 * M_PI / creal(k_guess));
    const double R = GSL_MAX(R_floor, GSL_MIN(w->set.r_match, 2 / GSL_MAX(fabs(cimag(k_guess)), 1e-300)));
    /* broad resonances: the outgoing wave grows by up to e^2 over the matching radius, which amplifies the
       step error of the incoming part; half the step keeps them within 1e-6 cm-1 */
    const int narrow = width_guess < NARROW * (energy_guess - D);
    size_t n;
    double h;
    if ((status = fill_grid(w, pot, er, eps, r0, R, w->set.phase_step / k_max * (narrow ? 1.0 : 0.5), &n, &h, err)))
        return status;
    shooting s = {w->f, r0, h, eps, 0, n, J, narrow, NULL};
    wkb_potential_eval(pot, R, &pv);
    s.VR = -pv.depth;
    const double complex guess = (energy_guess - D) - 0.5 * I * width_guess;
    const double delta = GSL_MAX(0.1 * width_guess, 1e-6 * (energy_guess - D));
    double complex pole, pole_alt;
    double complex err_h, err_h2;
    int iterations = 0;
    /* steps of at most a fraction of the guessed width (or of E - D for narrow ones) */
    const double max_step = GSL_MAX(0.5 * width_guess, 1e-3 * (energy_guess - D));
    if ((status = pole_at(&s, n, guess, delta, w->set.max_iter, max_step, &pole, &err_h, &iterations)))
        return wkb_fail(err, status, "J=%d: the resonance near E=%.10g cm-1 did not converge", J, energy_guess);
    /* the outer matching error: the same at a smaller radius (index a multiple of 4) */
    {
        const double R2 = GSL_MAX(w->set.r_match_alt * R, GSL_MAX(1.5 * bar.r_top, r3 + 5 * 2 * M_PI / creal(k_guess)));
        size_t n2 = (size_t)((R2 - r0) / h / 4) * 4;
        wkb_potential_eval(pot, r0 + h * (double)n2, &pv);
        s.VR = -pv.depth;
        if ((status = pole_at(&s, n2, pole, 1e-3 * delta + 1e-9, w->set.max_iter, max_step, &pole_alt, &err_h2,
                              &iterations)))
            return wkb_fail(err, status, "J=%d: the resonance near E=%.10g cm-1 did not converge at R=%.4g A", J,
                            energy_guess, R2);
    }
    pole_result(pole, pole_alt, err_h, D, R, n, iterations, &bar, out);
    if (!(out->width > -3 * out->width_error))
        return wkb_fail(err, WKB_ENUMERIC, "J=%d: the pole near E=%.10g cm-1 has a negative width %.3g cm-1", J,
                        out->energy, out->width);
    return WKB_SUCCESS;
}

int wkb_res_barrier_matched(wkb_res *w, const wkb_potential *pot, double mu, double rot, const wkb_barrier *bar,
                            double r3, double energy_guess, double width_guess, double join_distance,
                            wkb_resonance *out, wkb_error *err)
{
    memset(out, 0, sizeof *out);
    if (!(isfinite(mu) && mu > 0 && isfinite(rot) && rot >= 0 && bar->found))
        return wkb_fail(err, WKB_EINVAL, "barrier-matched pole: mu=%g, J(J+1)=%g or the barrier are invalid", mu, rot);
    const double D = bar->asymptote;
    if (!(isfinite(energy_guess) && energy_guess > D && isfinite(width_guess) && width_guess >= 0 &&
          isfinite(r3) && r3 > bar->r_top && isfinite(join_distance) && join_distance > 0))
        return wkb_fail(err, WKB_EINVAL,
                        "barrier-matched pole: guess E=%.12g, width=%g, r3=%g, join distance %g are invalid (E above "
                        "the asymptote %.12g, width >= 0, r3 beyond the barrier top, distance > 0)",
                        energy_guess, width_guess, r3, join_distance, D);
    const double eps = WKB_HBAR2_OVER_2U / mu, er = eps * rot;
    double acc;
    const double r0 = inner_start(w, pot, er, eps, bar, energy_guess, &acc);
    if (acc < 0.5 * w->set.start_decay)
        return wkb_fail(err, WKB_EINVAL,
                        "J(J+1)=%g: the inner wall is too low for E=%.10g cm-1 (tunnelling integral %.3g): u = 0 "
                        "cannot be imposed there", rot, energy_guess, acc);
    const double k_max = sqrt((energy_guess - bar->bottom) / eps), R = r3 + join_distance;
    const int narrow = width_guess < NARROW * (energy_guess - D);
    size_t n;
    double h;
    int status;
    if ((status = fill_grid(w, pot, er, eps, r0, R, w->set.phase_step / k_max * (narrow ? 1.0 : 0.5), &n, &h, err)))
        return status;
    wkb_join join;
    if (join_setup(pot, er, r0, h, n, r3, &join))
        return wkb_fail(err, WKB_ENUMERIC, "the potential is not finite at r=%g A", R);
    shooting s = {w->f, r0, h, eps, 0, n, 0, narrow, &join};
    const double complex guess = (energy_guess - D) - 0.5 * I * width_guess;
    const double delta = GSL_MAX(0.1 * width_guess, 1e-6 * (energy_guess - D));
    const double max_step = GSL_MAX(0.5 * width_guess, 1e-3 * (energy_guess - D));
    double complex pole, pole_alt, err_h, err_h2;
    int iterations = 0;
    if ((status = pole_at(&s, n, guess, delta, w->set.max_iter, max_step, &pole, &err_h, &iterations)))
        return wkb_fail(err, status, "J(J+1)=%g: the barrier-matched pole near E=%.10g cm-1 did not converge", rot,
                        energy_guess);
    /* the join error: the same pole joined at half the distance beyond r3 (a larger WKB error, so the
       difference bounds the error at R) */
    const size_t n2 = (size_t)((r3 + 0.5 * join_distance - r0) / h / 4) * 4;
    if (join_setup(pot, er, r0, h, n2, r3, &join))
        return wkb_fail(err, WKB_ENUMERIC, "the potential is not finite at r=%g A", r0 + h * (double)n2);
    if ((status = pole_at(&s, n2, pole, 1e-3 * delta + 1e-9, w->set.max_iter, max_step, &pole_alt, &err_h2,
                          &iterations)))
        return wkb_fail(err, status, "J(J+1)=%g: the barrier-matched pole near E=%.10g cm-1 did not converge", rot,
                        energy_guess);
    pole_result(pole, pole_alt, err_h, D, R, n, iterations, bar, out);
    if (!(out->width > -3 * out->width_error))
        return wkb_fail(err, WKB_ENUMERIC, "the barrier-matched pole near E=%.10g cm-1 has a negative width %.3g cm-1",
                        out->energy, out->width);
    return WKB_SUCCESS;
}
