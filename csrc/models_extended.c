/* models_extended.c: the expanded Morse oscillator (EMO) and the Morse/long-range (MLR) models.
 *
 * Both have V(re) = 0 and the asymptote +De, like the models of potential.c, and give V, dV/dr,
 * d2V/dr2, the depth De - V without cancellation near the asymptote and analytic dV/dp for every
 * parameter. The number of exponent coefficients beta_i is fixed per descriptor, so each model has
 * one descriptor per count K = 1..8: "emoK" and "mlrK" (the binding checks parameter counts by name).
 *
 * Radial variable (both models): y_p(r; a) = (r^p - a^p)/(r^p + a^p), from -1 at r = 0 to +1 at
 * r = infinity.
 * EMO [Lee, Seto, Hirao, Bernath & Le Roy, J. Mol. Spectrosc. 194, 197 (1999)]:
 *   V = De [1 - exp(-beta(r) (r - re))]^2, beta(r) = sum_i beta_i y_p(r; re)^i.
 * MLR [Le Roy & Henderson, Mol. Phys. 105, 663 (2007); Le Roy et al., J. Chem. Phys. 131, 204309 (2009)]:
 *   V = De [1 - (u(r)/u(re)) exp(-beta(r) y_p(r; re))]^2, u(r) = C6/r^6 + C8/r^8 + C10/r^10 (undamped),
 *   beta(r) = y_p(r; r_ref) beta_inf + [1 - y_p(r; r_ref)] sum_i beta_i y_q(r; r_ref)^i,
 *   beta_inf = ln(2 De/u(re)), so that De - V -> u(r) as r -> infinity.
 */
#include <math.h>
#include <stdio.h>
#include <string.h>

#include <gsl/gsl_math.h>

#include "model_power.h"
#include "wkb.h"

/* ---- shared pieces ---- */

/* y_p(r; a) and what its uses need, with 1 - y and 1 - y^2 formed without cancellation at large r
   (through (a/r)^p) and no overflow of r^p. dy/dr = (p/2r)(1 - y^2), d2y/dr2 = -(dy/dr)(1 + p y)/r. */
typedef struct {
    double y, one_minus_y, one_minus_y2, dy, d2y;
} radial_variable;

static void radial_variable_at(double r, double a, double p, radial_variable *out)
{
    if (r > a) {
        const double t = power(a / r, p);
        out->y = (1 - t) / (1 + t);
        out->one_minus_y = 2 * t / (1 + t);
        out->one_minus_y2 = 4 * t / ((1 + t) * (1 + t));
    } else {
        const double s = power(r / a, p);
        out->y = (s - 1) / (s + 1);
        out->one_minus_y = 2 / (1 + s);
        out->one_minus_y2 = 4 * s / ((1 + s) * (1 + s));
    }
    out->dy = 0.5 * p / r * out->one_minus_y2;
    out->d2y = -out->dy * (1 + p * out->y) / r;
}

/* dy/da and dy/dp of y_p(r; a); log_ratio = ln(r/a), shared by the variables about one center. */
static double radial_variable_d_center(const radial_variable *v, double a, double p)
{
    return -0.5 * p / a * v->one_minus_y2;
}
static double radial_variable_d_power(const radial_variable *v, double log_ratio)
{
    return 0.5 * v->one_minus_y2 * log_ratio;
}

/* S = sum_i c_i y^i, S1 = dS/dy, S2 = d2S/dy2 for n coefficients (Horner). */
static void polynomial(const double *c, size_t n, double y, double *S, double *S1, double *S2)
{
    double s = 0, s1 = 0, s2 = 0;
    for (size_t i = n; i-- > 0;) {
        s2 = s2 * y + 2 * s1;
        s1 = s1 * y + s;
        s = s * y + c[i];
    }
    *S = s;
    *S1 = s1;
    *S2 = s2;
}

static int check_positive(const char *model, const char *name, double value, wkb_error *err)
{
    if (!(value > 0))
        return wkb_fail(err, WKB_EINVAL, "%s parameter %s=%g is invalid: it must be > 0", model, name, value);
    return WKB_SUCCESS;
}

static int check_integer(const char *model, const char *name, double value, double lowest, const char *why,
                         wkb_error *err)
{
    if (!(value == floor(value) && value >= lowest && value <= 64))
        return wkb_fail(err, WKB_EINVAL, "%s parameter %s=%.17g is invalid: it must be a whole number from %g to 64%s",
                        model, name, value, lowest, why);
    return WKB_SUCCESS;
}

/* Storage private to each thread (the build is C99, where _Thread_local is not yet standard). */
#if defined(__STDC_VERSION__) && __STDC_VERSION__ >= 201112L
#define THREAD_LOCAL _Thread_local
#elif defined(_MSC_VER)
#define THREAD_LOCAL __declspec(thread)
#else
#define THREAD_LOCAL __thread
#endif

static double param0(const wkb_potential *pot) { return pot->p[0]; }
static double param1(const wkb_potential *pot) { return pot->p[1]; }

/* The inner end of the scan: step in from re by 2% of re until V reaches 1e4 De, or stop at the top
   of an inner turnover (possible with large high-order beta_i), but not below 0.04 re. */
static double inner_wall(const wkb_potential *pot)
{
    const double De = pot->p[0], re = pot->p[1];
    double r_prev = re, V_prev = 0;
    for (int k = 1; k <= 48; k++) {
        const double r = re * (1 - 0.02 * k);
        wkb_pot_value pv;
        pot->model->eval(pot, r, &pv);
        if (!(pv.V > V_prev))
            return r_prev;
        if (pv.V >= 1e4 * De)
            return r;
        r_prev = r;
        V_prev = pv.V;
    }
    return r_prev;
}

/* ---- EMO: p = (De, re, p, beta_0 .. beta_(K-1)) ---- */
#define EMO_LEADING 3 /* parameters before the beta_i */

static const char *const emo_names[EMO_LEADING + WKB_EMO_MAX_BETAS] = {
    "De", "re", "p", "beta0", "beta1", "beta2", "beta3", "beta4", "beta5", "beta6", "beta7",
};

static int emo_check(const double *p, size_t n_betas, wkb_error *err)
{
    int s;
    if ((s = check_positive("EMO", "De", p[0], err)) || (s = check_positive("EMO", "re", p[1], err)) ||
        (s = check_integer("EMO", "p", p[2], 1, "", err)))
        return s;
    if (!(p[3] > 0))
        return wkb_fail(err, WKB_EINVAL,
                        "EMO parameter beta0=%g is invalid: it must be > 0 (the curvature at re is 2 De beta0^2)", p[3]);
    double beta_far = 0;
    for (size_t i = 0; i < n_betas; i++)
        beta_far += p[EMO_LEADING + i];
    if (!(beta_far > 0))
        return wkb_fail(err, WKB_EINVAL,
                        "EMO coefficients are invalid: their sum (beta at large r) is %g, but it must be > 0 for "
                        "V to approach De from below", beta_far);
    return WKB_SUCCESS;
}

/* phi = beta(r) (r - re) with its r-derivatives; the rest of the evaluation is Morse's with phi for a (r - re). */
typedef struct {
    radial_variable y;
    double beta, beta1, phi, dphi, d2phi;
} emo_terms;

static void emo_terms_at(const wkb_potential *pot, double r, emo_terms *t)
{
    const double re = pot->p[1], p = pot->p[2];
    const size_t n = pot->model->n_params - EMO_LEADING;
    double B2;
    radial_variable_at(r, re, p, &t->y);
    polynomial(pot->p + EMO_LEADING, n, t->y.y, &t->beta, &t->beta1, &B2);
    const double d = r - re, dy = t->y.dy;
    t->phi = t->beta * d;
    t->dphi = t->beta + t->beta1 * dy * d;
    t->d2phi = 2 * t->beta1 * dy + (B2 * dy * dy + t->beta1 * t->y.d2y) * d;
}

static void emo_eval(const wkb_potential *pot, double r, wkb_pot_value *out)
{
    const double De = pot->p[0];
    emo_terms t;
    emo_terms_at(pot, r, &t);
    const double x = exp(-t.phi), dphi = t.dphi;
    /* same operation order as the Morse model, so that one coefficient reproduces it exactly */
    out->V = De * (1 - x) * (1 - x);
    out->dV = 2 * De * dphi * x * (1 - x);
    out->d2V = 2 * De * dphi * dphi * x * (2 * x - 1) + 2 * De * t.d2phi * x * (1 - x);
    out->depth = De * x * (2 - x);
}

static void emo_param_derivs(const wkb_potential *pot, double r, double *dVdp)
{
    const double De = pot->p[0], re = pot->p[1], p = pot->p[2];
    const size_t n = pot->model->n_params - EMO_LEADING;
    emo_terms t;
    emo_terms_at(pot, r, &t);
    const double x = exp(-t.phi), d = r - re;
    const double dV_dphi = 2 * De * x * (1 - x);
    dVdp[0] = (1 - x) * (1 - x);
    dVdp[1] = dV_dphi * (-t.beta + d * t.beta1 * radial_variable_d_center(&t.y, re, p));
    dVdp[2] = dV_dphi * d * t.beta1 * radial_variable_d_power(&t.y, log(r / re));
    double yi = 1;
    for (size_t i = 0; i < n; i++) {
        dVdp[EMO_LEADING + i] = dV_dphi * d * yi;
        yi *= t.y.y;
    }
}

static double exponential_tail(const wkb_potential *pot) { return 0.0; }

#define EMO_CHECK(K)                                                                                           \
    static int emo_check_##K(const double *p, wkb_error *err) { return emo_check(p, K, err); }
EMO_CHECK(1)
EMO_CHECK(2)
EMO_CHECK(3)
EMO_CHECK(4)
EMO_CHECK(5)
EMO_CHECK(6)
EMO_CHECK(7)
EMO_CHECK(8)
#undef EMO_CHECK

#define EMO_ENTRY(K)                                                                                           \
    {"emo" #K, EMO_LEADING + K, emo_names, emo_check_##K, emo_eval, emo_param_derivs,                        \
     param0, param1, inner_wall, exponential_tail}
const wkb_model wkb_models_emo[WKB_EMO_MAX_BETAS] = {
    EMO_ENTRY(1), EMO_ENTRY(2), EMO_ENTRY(3), EMO_ENTRY(4), EMO_ENTRY(5), EMO_ENTRY(6), EMO_ENTRY(7), EMO_ENTRY(8),
};
#undef EMO_ENTRY

/* ---- MLR: p = (De, re, C6, C8, C10, p, q, r_ref, beta_0 .. beta_(K-1)) ---- */
#define MLR_LEADING 8

static const char *const mlr_names[MLR_LEADING + WKB_MLR_MAX_BETAS] = {
    "De", "re", "C6", "C8", "C10", "p", "q", "r_ref",
    "beta0", "beta1", "beta2", "beta3", "beta4", "beta5", "beta6", "beta7",
};

/* u(r) = C6/r^6 + C8/r^8 + C10/r^10 and its r-derivatives. */
typedef struct {
    double u, du, d2u;
} long_range;

static void long_range_at(const double *p, double r, long_range *out)
{
    const double ir = 1 / r, ir2 = ir * ir, ir6 = ir2 * ir2 * ir2;
    const double t6 = p[2] * ir6, t8 = p[3] * ir6 * ir2, t10 = p[4] * ir6 * ir2 * ir2;
    out->u = t6 + t8 + t10;
    out->du = -(6 * t6 + 8 * t8 + 10 * t10) * ir;
    out->d2u = (42 * t6 + 72 * t8 + 110 * t10) * ir2;
}

static int mlr_check(const double *p, wkb_error *err)
{
    int s;
    if ((s = check_positive("MLR", "De", p[0], err)) || (s = check_positive("MLR", "re", p[1], err)) ||
        (s = check_positive("MLR", "C6", p[2], err)) || (s = check_positive("MLR", "r_ref", p[7], err)))
        return s;
    if (!(p[3] >= 0))
        return wkb_fail(err, WKB_EINVAL, "MLR parameter C8=%g is invalid: it must be >= 0 (0 leaves it out)", p[3]);
    if (!(p[4] >= 0))
        return wkb_fail(err, WKB_EINVAL, "MLR parameter C10=%g is invalid: it must be >= 0 (0 leaves it out)", p[4]);
    /* V -> De - u + O(C6 r^-(6+p)): the last inverse power must fall off slower than the error term */
    const double spread = p[4] > 0 ? 4 : p[3] > 0 ? 2 : 0;
    const double p_lowest = GSL_MAX(3.0, spread + 1);
    const char *why = spread > 2 ? " (with C10 > 0, p must exceed the spread 10 - 6 of the inverse powers)"
                                 : " (p must exceed 2, and the spread m_last - 6 of the inverse powers)";
    if ((s = check_integer("MLR", "p", p[5], p_lowest, why, err)) || (s = check_integer("MLR", "q", p[6], 1, "", err)))
        return s;
    long_range lr;
    long_range_at(p, p[1], &lr);
    if (!(lr.u < 2 * p[0]))
        return wkb_fail(err, WKB_EINVAL,
                        "MLR parameters are invalid: u_LR(re) = C6/re^6 + C8/re^8 + C10/re^10 = %g must be below "
                        "2 De = %g, so that beta_inf = ln(2 De/u_LR(re)) is positive", lr.u, 2 * p[0]);
    return WKB_SUCCESS;
}

/* The parts of an MLR evaluation that do not depend on r: u(re) with its derivatives and
   beta_inf = ln(2 De/u(re)). They are computed once per parameter set and kept per thread, not in
   the potential: fits write pot->p directly and several threads may share one potential. Each
   thread keeps the last values of the parameters these parts depend on, and a comparison of them
   decides per evaluation whether the parts still hold (values, not the potential's address, so a
   new potential at a reused address or a p[] written in place is always seen). The parts are
   made by the same operations as without the cache, so results are bit-identical. */
#define MLR_FIXED_KEY 5 /* De, re, C6, C8, C10 = p[0..4] */
typedef struct {
    int valid;
    double key[MLR_FIXED_KEY];
    long_range at_re;
    double beta_inf;
    double dC_over_u[3]; /* re^-m/u(re), m = 6, 8, 10: du(re)/dC_m over u(re), for dV/dC_m */
} mlr_fixed_parts;

static const mlr_fixed_parts *mlr_fixed_parts_of(const double *p)
{
    static THREAD_LOCAL mlr_fixed_parts cache;
    if (!cache.valid || memcmp(cache.key, p, sizeof cache.key) != 0) {
        memcpy(cache.key, p, sizeof cache.key);
        long_range_at(p, p[1], &cache.at_re);
        cache.beta_inf = log(2 * p[0] / cache.at_re.u);
        for (int k = 0; k < 3; k++)
            cache.dC_over_u[k] = power(1 / p[1], 6 + 2 * k) / cache.at_re.u;
        cache.valid = 1;
    }
    return &cache;
}

/* V = De (1 - x)^2 with x = exp(L), L = ln(u(r)/u(re)) - phi, phi = beta(r) y_p(r; re). */
typedef struct {
    long_range at_r, at_re;
    radial_variable eq, ref_p, ref_q;
    double beta_inf, S, S1, beta, phi, x, dL, d2L;
} mlr_terms;

/* The three radial variables of an MLR exponent: y_p about re, y_p and y_q about r_ref; with
   r_ref = re (the common choice) and q = p they are one variable, computed once. */
static void mlr_radial_variables_at(double r, double re, double r_ref, double pw, double qw, radial_variable *eq,
                                    radial_variable *ref_p, radial_variable *ref_q)
{
    radial_variable_at(r, re, pw, eq);
    if (r_ref == re)
        *ref_p = *eq;
    else
        radial_variable_at(r, r_ref, pw, ref_p);
    if (qw == pw && r_ref == re)
        *ref_q = *eq;
    else
        radial_variable_at(r, r_ref, qw, ref_q);
}

static void mlr_terms_at(const wkb_potential *pot, double r, mlr_terms *t)
{
    const double *p = pot->p;
    const double re = p[1], pw = p[5], qw = p[6], r_ref = p[7];
    const size_t n = pot->model->n_params - MLR_LEADING;
    double S2;
    const mlr_fixed_parts *fixed = mlr_fixed_parts_of(p);
    long_range_at(p, r, &t->at_r);
    t->at_re = fixed->at_re;
    mlr_radial_variables_at(r, re, r_ref, pw, qw, &t->eq, &t->ref_p, &t->ref_q);
    polynomial(p + MLR_LEADING, n, t->ref_q.y, &t->S, &t->S1, &S2);
    t->beta_inf = fixed->beta_inf;
    const radial_variable *e = &t->eq, *a = &t->ref_p, *b = &t->ref_q;
    const double gap = t->beta_inf - t->S; /* d beta / d y_p^ref */
    t->beta = a->y * t->beta_inf + a->one_minus_y * t->S;
    const double dbeta = a->dy * gap + a->one_minus_y * t->S1 * b->dy;
    const double d2beta = a->d2y * gap - 2 * a->dy * t->S1 * b->dy +
                          a->one_minus_y * (S2 * b->dy * b->dy + t->S1 * b->d2y);
    t->phi = t->beta * e->y;
    const double dphi = dbeta * e->y + t->beta * e->dy;
    const double d2phi = d2beta * e->y + 2 * dbeta * e->dy + t->beta * e->d2y;
    const double g = t->at_r.du / t->at_r.u;
    t->x = t->at_r.u / t->at_re.u * exp(-t->phi);
    t->dL = g - dphi;
    t->d2L = t->at_r.d2u / t->at_r.u - g * g - d2phi;
}

static void mlr_eval(const wkb_potential *pot, double r, wkb_pot_value *out)
{
    const double De = pot->p[0];
    mlr_terms t;
    mlr_terms_at(pot, r, &t);
    const double x = t.x;
    out->V = De * (1 - x) * (1 - x);
    out->dV = -2 * De * (1 - x) * x * t.dL;
    out->d2V = 2 * De * x * (x * t.dL * t.dL - (1 - x) * (t.d2L + t.dL * t.dL));
    out->depth = De * x * (2 - x); /* -> u(r) - u(r)^2/(4 De) at large r, no cancellation */
}

static void mlr_param_derivs(const wkb_potential *pot, double r, double *dVdp)
{
    const double *p = pot->p;
    const double De = p[0], re = p[1], pw = p[5], qw = p[6], r_ref = p[7];
    const size_t n = pot->model->n_params - MLR_LEADING;
    mlr_terms t;
    mlr_terms_at(pot, r, &t);
    const radial_variable *e = &t.eq, *a = &t.ref_p, *b = &t.ref_q;
    const double x = t.x, dV_dL = -2 * De * (1 - x) * x;
    const double gap = t.beta_inf - t.S;
    /* 1 - y_p^ref y_p^eq without cancellation at large r */
    const double one_minus_yy = a->one_minus_y + a->y * e->one_minus_y;
    const double ue = t.at_re.u, ir = 1 / r;
    const double *dC_over_ue = mlr_fixed_parts_of(p)->dC_over_u;

    dVdp[0] = (1 - x) * (1 - x) + dV_dL * (-a->y * e->y / De);
    dVdp[1] = dV_dL * (-t.at_re.du / ue * one_minus_yy - t.beta * radial_variable_d_center(e, re, pw));
    /* C_m enters ln u(r), ln u(re) and beta_inf */
    for (int k = 0; k < 3; k++) {
        const double m = 6 + 2 * k;
        dVdp[2 + k] = dV_dL * (power(ir, m) / t.at_r.u - dC_over_ue[k] * one_minus_yy);
    }
    const double log_ref = log(r / r_ref), log_eq = r_ref == re ? log_ref : log(r / re);
    const double dbeta_dp = radial_variable_d_power(a, log_ref) * gap;
    dVdp[5] = dV_dL * -(dbeta_dp * e->y + t.beta * radial_variable_d_power(e, log_eq));
    dVdp[6] = dV_dL * -(a->one_minus_y * t.S1 * radial_variable_d_power(b, log_ref) * e->y);
    const double dbeta_dref = radial_variable_d_center(a, r_ref, pw) * gap +
                              a->one_minus_y * t.S1 * radial_variable_d_center(b, r_ref, qw);
    dVdp[7] = dV_dL * -(dbeta_dref * e->y);
    double yi = 1;
    for (size_t i = 0; i < n; i++) {
        dVdp[MLR_LEADING + i] = dV_dL * -(a->one_minus_y * yi * e->y);
        yi *= b->y;
    }
}

static double sixth_power_tail(const wkb_potential *pot) { return 6.0; }

#define MLR_ENTRY(K)                                                                                           \
    {"mlr" #K, MLR_LEADING + K, mlr_names, mlr_check, mlr_eval, mlr_param_derivs,                            \
     param0, param1, inner_wall, sixth_power_tail}
const wkb_model wkb_models_mlr[WKB_MLR_MAX_BETAS] = {
    MLR_ENTRY(1), MLR_ENTRY(2), MLR_ENTRY(3), MLR_ENTRY(4), MLR_ENTRY(5), MLR_ENTRY(6), MLR_ENTRY(7), MLR_ENTRY(8),
};
#undef MLR_ENTRY

/* ---- MLR with C3..C10 and damping: p = (De, re, C3, C4, C6, C8, C10, p, q, r_ref, damping, range, s,
   beta_0 .. beta_(K-1)); u(r) = sum_m D_m(r) C_m/r^m over m = 3, 4, 6, 8, 10 (damping.c). The
   exponent function and the parameter derivatives are those of the undamped MLR, with u, du/dr and
   du/dp of the damped sum. damping: 0 none, 1 Tang-Toennies, 2 Douketis type; range its range
   parameter; s the power offset of the Douketis form (-1 or -2; unused otherwise). ---- */
#define MLRD_LEADING 13
#define MLRD_TERMS 5
static const int mlrd_powers[MLRD_TERMS] = {3, 4, 6, 8, 10};

static const char *const mlrd_names[MLRD_LEADING + WKB_MLR_MAX_BETAS] = {
    "De", "re", "C3", "C4", "C6", "C8", "C10", "p", "q", "r_ref", "damping", "rho", "s",
    "beta0", "beta1", "beta2", "beta3", "beta4", "beta5", "beta6", "beta7",
};

/* u(r), its r-derivatives and du/dC_m (m = 3, 4, 6, 8, 10), du/d(range). */
typedef struct {
    double u, du, d2u, dC[MLRD_TERMS], drange;
} damped_long_range;

/* with want_dC = 0 the terms with C_m = 0 are skipped and their dC[k] left unset (a value of V
   needs no damping function of an absent term) */
static void damped_long_range_at(const double *p, double r, int want_dC, damped_long_range *out)
{
    const int kind = (int)p[10], s = (int)p[12];
    const double range = p[11];
    out->u = out->du = out->d2u = out->drange = 0;
    for (int k = 0; k < MLRD_TERMS; k++) {
        const double C = p[2 + k];
        if (C == 0 && !want_dC)
            continue;
        const int m = mlrd_powers[k];
        const double irm = power(1 / r, m);
        wkb_damping d;
        wkb_damping_eval(kind, m, s, range, r, &d);
        out->dC[k] = d.D * irm;
        if (C == 0)
            continue;
        out->u += C * d.D * irm;
        out->du += C * (d.dD - m * d.D / r) * irm;
        out->d2u += C * (d.d2D - 2 * m * d.dD / r + m * (m + 1) * d.D / (r * r)) * irm;
        out->drange += C * d.dD_drange * irm;
    }
}

static int mlrd_check(const double *p, wkb_error *err)
{
    int s;
    if ((s = check_positive("MLR", "De", p[0], err)) || (s = check_positive("MLR", "re", p[1], err)) ||
        (s = check_positive("MLR", "r_ref", p[9], err)))
        return s;
    int first = 0, last = 0;
    for (int k = 0; k < MLRD_TERMS; k++) {
        if (!(p[2 + k] >= 0) || !isfinite(p[2 + k]))
            return wkb_fail(err, WKB_EINVAL, "MLR parameter %s=%g is invalid: it must be >= 0 (0 leaves it out)",
                            mlrd_names[2 + k], p[2 + k]);
        if (p[2 + k] > 0) {
            if (!first)
                first = mlrd_powers[k];
            last = mlrd_powers[k];
        }
    }
    if (!first)
        return wkb_fail(err, WKB_EINVAL, "MLR parameters are invalid: at least one of C3, C4, C6, C8, C10 must be > 0");
    const int kind = (int)p[10];
    if (!(p[10] == kind && kind >= WKB_DAMPING_NONE && kind <= WKB_DAMPING_DOUKETIS))
        return wkb_fail(err, WKB_EINVAL, "MLR parameter damping=%g is invalid: 0 none, 1 Tang-Toennies, 2 Douketis",
                        p[10]);
    if (kind != WKB_DAMPING_NONE && !(p[11] > 0 && isfinite(p[11])))
        return wkb_fail(err, WKB_EINVAL, "MLR parameter rho=%g (the damping range) is invalid: it must be > 0", p[11]);
    double b, c;
    if (kind == WKB_DAMPING_DOUKETIS && !(p[12] == floor(p[12]) && wkb_douketis_constants((int)p[12], &b, &c)))
        return wkb_fail(err, WKB_EINVAL, "MLR parameter s=%g is invalid for Douketis-type damping: use -1 or -2",
                        p[12]);
    if (kind == WKB_DAMPING_DOUKETIS && first + p[12] < 1)
        return wkb_fail(err, WKB_EINVAL, "MLR parameters are invalid: Douketis-type damping with s=%g needs m + s >= 1 "
                        "for the lowest power m=%d", p[12], first);
    const double spread = last - first;
    char why[160];
    snprintf(why, sizeof why, " (p must exceed 2 and the spread %d - %d of the inverse powers)", last, first);
    if ((s = check_integer("MLR", "p", p[7], GSL_MAX(3.0, spread + 1), why, err)) ||
        (s = check_integer("MLR", "q", p[8], 1, "", err)))
        return s;
    damped_long_range lr;
    damped_long_range_at(p, p[1], 1, &lr);
    if (!(lr.u > 0) || !isfinite(lr.u))
        return wkb_fail(err, WKB_EINVAL, "MLR parameters are invalid: u_LR(re) = %g must be a finite number > 0", lr.u);
    /* undamped, as the MLR without damping: u_LR(re) < 2 De keeps beta_inf > 0; with damping the
       form needs only u_LR(re) > 0 (beta_inf = ln(2 De/u_LR(re)) may then be negative) */
    if (kind == WKB_DAMPING_NONE && !(lr.u < 2 * p[0]))
        return wkb_fail(err, WKB_EINVAL,
                        "MLR parameters are invalid: the undamped u_LR(re) = %g must be below 2 De = %g, so that "
                        "beta_inf = ln(2 De/u_LR(re)) is positive; damping (damping='tang-toennies' or 'douketis') "
                        "lifts this limit", lr.u, 2 * p[0]);
    return WKB_SUCCESS;
}

/* The r-independent parts of the damped MLR, kept per thread as those of the undamped one
   (mlr_fixed_parts_of): u(re) with du/dC_m and du/d(range) at re, and beta_inf. They depend on
   De, re, C3..C10 (p[0..6]) and damping, range, s (p[10..12]). */
#define MLRD_KEY_HEAD 7
#define MLRD_KEY_TAIL 3
typedef struct {
    int valid;
    double head[MLRD_KEY_HEAD], tail[MLRD_KEY_TAIL];
    damped_long_range at_re;
    double beta_inf;
} mlrd_fixed_parts;

static const mlrd_fixed_parts *mlrd_fixed_parts_of(const double *p)
{
    static THREAD_LOCAL mlrd_fixed_parts cache;
    if (!cache.valid || memcmp(cache.head, p, sizeof cache.head) != 0 ||
        memcmp(cache.tail, p + 10, sizeof cache.tail) != 0) {
        memcpy(cache.head, p, sizeof cache.head);
        memcpy(cache.tail, p + 10, sizeof cache.tail);
        damped_long_range_at(p, p[1], 1, &cache.at_re);
        cache.beta_inf = log(2 * p[0] / cache.at_re.u);
        cache.valid = 1;
    }
    return &cache;
}

typedef struct {
    damped_long_range at_r, at_re;
    radial_variable eq, ref_p, ref_q;
    double beta_inf, S, S1, beta, phi, x, dL, d2L;
} mlrd_terms;

/* want_dC: whether t->at_r.dC is needed (the parameter derivatives) */
static void mlrd_terms_at(const wkb_potential *pot, double r, int want_dC, mlrd_terms *t)
{
    const double *p = pot->p;
    const double re = p[1], pw = p[7], qw = p[8], r_ref = p[9];
    const size_t n = pot->model->n_params - MLRD_LEADING;
    double S2;
    const mlrd_fixed_parts *fixed = mlrd_fixed_parts_of(p);
    damped_long_range_at(p, r, want_dC, &t->at_r);
    t->at_re = fixed->at_re;
    mlr_radial_variables_at(r, re, r_ref, pw, qw, &t->eq, &t->ref_p, &t->ref_q);
    polynomial(p + MLRD_LEADING, n, t->ref_q.y, &t->S, &t->S1, &S2);
    t->beta_inf = fixed->beta_inf;
    const radial_variable *e = &t->eq, *a = &t->ref_p, *b = &t->ref_q;
    const double gap = t->beta_inf - t->S;
    t->beta = a->y * t->beta_inf + a->one_minus_y * t->S;
    const double dbeta = a->dy * gap + a->one_minus_y * t->S1 * b->dy;
    const double d2beta = a->d2y * gap - 2 * a->dy * t->S1 * b->dy +
                          a->one_minus_y * (S2 * b->dy * b->dy + t->S1 * b->d2y);
    t->phi = t->beta * e->y;
    const double dphi = dbeta * e->y + t->beta * e->dy;
    const double d2phi = d2beta * e->y + 2 * dbeta * e->dy + t->beta * e->d2y;
    const double g = t->at_r.du / t->at_r.u;
    t->x = t->at_r.u / t->at_re.u * exp(-t->phi);
    t->dL = g - dphi;
    t->d2L = t->at_r.d2u / t->at_r.u - g * g - d2phi;
}

static void mlrd_eval(const wkb_potential *pot, double r, wkb_pot_value *out)
{
    const double De = pot->p[0];
    mlrd_terms t;
    mlrd_terms_at(pot, r, 0, &t);
    const double x = t.x;
    out->V = De * (1 - x) * (1 - x);
    out->dV = -2 * De * (1 - x) * x * t.dL;
    out->d2V = 2 * De * x * (x * t.dL * t.dL - (1 - x) * (t.d2L + t.dL * t.dL));
    out->depth = De * x * (2 - x);
}

static void mlrd_param_derivs(const wkb_potential *pot, double r, double *dVdp)
{
    const double *p = pot->p;
    const double De = p[0], re = p[1], pw = p[7], qw = p[8], r_ref = p[9];
    const size_t n = pot->model->n_params - MLRD_LEADING;
    mlrd_terms t;
    mlrd_terms_at(pot, r, 1, &t);
    const radial_variable *e = &t.eq, *a = &t.ref_p, *b = &t.ref_q;
    const double x = t.x, dV_dL = -2 * De * (1 - x) * x;
    const double gap = t.beta_inf - t.S;
    const double one_minus_yy = a->one_minus_y + a->y * e->one_minus_y;
    const double ue = t.at_re.u;

    dVdp[0] = (1 - x) * (1 - x) + dV_dL * (-a->y * e->y / De);
    dVdp[1] = dV_dL * (-t.at_re.du / ue * one_minus_yy - t.beta * radial_variable_d_center(e, re, pw));
    /* C_m and the damping range enter ln u(r), ln u(re) and beta_inf */
    for (int k = 0; k < MLRD_TERMS; k++)
        dVdp[2 + k] = dV_dL * (t.at_r.dC[k] / t.at_r.u - t.at_re.dC[k] / ue * one_minus_yy);
    const double log_ref = log(r / r_ref), log_eq = r_ref == re ? log_ref : log(r / re);
    const double dbeta_dp = radial_variable_d_power(a, log_ref) * gap;
    dVdp[7] = dV_dL * -(dbeta_dp * e->y + t.beta * radial_variable_d_power(e, log_eq));
    dVdp[8] = dV_dL * -(a->one_minus_y * t.S1 * radial_variable_d_power(b, log_ref) * e->y);
    const double dbeta_dref = radial_variable_d_center(a, r_ref, pw) * gap +
                              a->one_minus_y * t.S1 * radial_variable_d_center(b, r_ref, qw);
    dVdp[9] = dV_dL * -(dbeta_dref * e->y);
    dVdp[10] = 0; /* the damping form is a choice, not a continuous parameter */
    dVdp[11] = dV_dL * (t.at_r.drange / t.at_r.u - t.at_re.drange / ue * one_minus_yy);
    dVdp[12] = 0;
    double yi = 1;
    for (size_t i = 0; i < n; i++) {
        dVdp[MLRD_LEADING + i] = dV_dL * -(a->one_minus_y * yi * e->y);
        yi *= b->y;
    }
}

/* the lowest inverse power present */
static double mlrd_tail_power(const wkb_potential *pot)
{
    for (int k = 0; k < MLRD_TERMS; k++)
        if (pot->p[2 + k] > 0)
            return mlrd_powers[k];
    return 6.0;
}

#define MLRD_ENTRY(K)                                                                                          \
    {"mlrd" #K, MLRD_LEADING + K, mlrd_names, mlrd_check, mlrd_eval, mlrd_param_derivs,                      \
     param0, param1, inner_wall, mlrd_tail_power}
const wkb_model wkb_models_mlrd[WKB_MLR_MAX_BETAS] = {
    MLRD_ENTRY(1), MLRD_ENTRY(2), MLRD_ENTRY(3), MLRD_ENTRY(4), MLRD_ENTRY(5), MLRD_ENTRY(6), MLRD_ENTRY(7),
    MLRD_ENTRY(8),
};
#undef MLRD_ENTRY
