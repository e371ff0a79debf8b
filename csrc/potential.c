/* potential.c: the analytic potential models and the model table.
 *
 * Every built-in analytic model has its minimum V(re) = 0 and its asymptote at +De,
 * so energies are term values above the minimum. Each model gives V, dV/dr, d2V/dr2,
 * the binding depth De - V(r) in a form without cancellation near the asymptote,
 * and dV/dp for each parameter, all analytically.
 */
#include <math.h>
#include <string.h>

#include <gsl/gsl_math.h>

#include "model_power.h" /* power(s, e): exact small integer powers, shared with models_extended.c */
#include "wkb.h"

extern const wkb_model wkb_model_pointwise; /* defined in pointwise.c */

static int check_positive(const char *model, const char *name, double value, wkb_error *err)
{
    if (!(isfinite(value) && value > 0))
        return wkb_fail(err, WKB_EINVAL, "%s parameter %s=%g is invalid: it must be a finite number > 0",
                        model, name, value);
    return WKB_SUCCESS;
}

static double param0(const wkb_potential *pot) { return pot->p[0]; }
static double param1(const wkb_potential *pot) { return pot->p[1]; }
static double no_tail_power(const wkb_potential *pot) { return 0.0; }

/* ---- Morse: V = De (1 - x)^2, x = exp(-a (r - re)) [Morse, Phys. Rev. 34, 57 (1929)] ---- */
static const char *const morse_names[] = {"De", "re", "a"};

static int morse_check(const double *p, wkb_error *err)
{
    int s;
    if ((s = check_positive("Morse", "De", p[0], err)) || (s = check_positive("Morse", "re", p[1], err)) ||
        (s = check_positive("Morse", "a", p[2], err)))
        return s;
    return WKB_SUCCESS;
}

static void morse_eval(const wkb_potential *pot, double r, wkb_pot_value *out)
{
    const double De = pot->p[0], re = pot->p[1], a = pot->p[2];
    const double x = exp(-a * (r - re));
    out->V = De * (1 - x) * (1 - x);
    out->dV = 2 * De * a * x * (1 - x);
    out->d2V = 2 * De * a * a * x * (2 * x - 1);
    out->depth = De * x * (2 - x);
}

static void morse_param_derivs(const wkb_potential *pot, double r, double *dVdp)
{
    const double De = pot->p[0], re = pot->p[1], a = pot->p[2];
    const double x = exp(-a * (r - re));
    dVdp[0] = (1 - x) * (1 - x);
    dVdp[1] = -2 * De * a * x * (1 - x);
    dVdp[2] = 2 * De * (r - re) * x * (1 - x);
}

static double morse_inner_scan(const wkb_potential *pot)
{
    /* where V = 1e4 De (x = 101), but never at or below r = 0 */
    const double re = pot->p[1], a = pot->p[2];
    return GSL_MAX(re - log(101.0) / a, 1e-3 * re);
}

const wkb_model wkb_model_morse = {
    "morse", 3, morse_names, morse_check, morse_eval, morse_param_derivs,
    param0, param1, morse_inner_scan, no_tail_power,
};

/* ---- Lennard-Jones (n, m): V = De + De/(n-m) [m s^n - n s^m], s = re/r ---- */
static const char *const lj_names[] = {"De", "re", "n", "m"};

static int lj_check(const double *p, wkb_error *err)
{
    int s;
    if ((s = check_positive("LennardJones", "De", p[0], err)) ||
        (s = check_positive("LennardJones", "re", p[1], err)))
        return s;
    if (!(isfinite(p[3]) && p[3] > 2))
        return wkb_fail(err, WKB_EINVAL,
                        "LennardJones exponent m=%g is invalid: the attractive tail -1/r^m must fall "
                        "faster than 1/r^2 (m > 2) for a finite number of bound levels", p[3]);
    if (!(isfinite(p[2]) && p[2] > p[3]))
        return wkb_fail(err, WKB_EINVAL,
                        "LennardJones exponent n=%g is invalid: the repulsive exponent must be finite "
                        "and larger than m=%g", p[2], p[3]);
    return WKB_SUCCESS;
}

/* Integer exponents (the fixed (12, 6) case) take repeated products, exact; others one log and two exp
   instead of two pow (pow was a third of a varied-exponent fit's time): exp(e log s) differs from pow by a
   few ulp (|e log s| of them at most), and the log is shared with d/dn, d/dm */
static int lj_integer_exponents(double n, double m)
{
    return m == floor(m) && n == floor(n) && m >= 0 && n <= 64;
}

static void lj_eval(const wkb_potential *pot, double r, wkb_pot_value *out)
{
    const double De = pot->p[0], re = pot->p[1], n = pot->p[2], m = pot->p[3];
    const double ir = 1 / r, s = re * ir;
    double sn, sm;
    if (lj_integer_exponents(n, m)) {
        sm = power_unsigned(s, (unsigned)m);
        sn = n == 2 * m ? sm * sm : power_unsigned(s, (unsigned)n);
    } else {
        const double ls = log(s);
        sm = exp(m * ls);
        sn = exp(n * ls);
    }
    const double c = De / (n - m);
    out->V = c * ((n - m) + m * sn - n * sm);
    out->depth = c * (n * sm - m * sn);
    out->dV = -c * n * m * (sn - sm) * ir;
    out->d2V = c * n * m * ((n + 1) * sn - (m + 1) * sm) * ir * ir;
}

static void lj_param_derivs(const wkb_potential *pot, double r, double *dVdp)
{
    const double De = pot->p[0], re = pot->p[1], n = pot->p[2], m = pot->p[3];
    const double s = re / r, ls = log(s), g = n - m;
    const int integer = lj_integer_exponents(n, m);
    const double sn = integer ? power_unsigned(s, (unsigned)n) : exp(n * ls);
    const double sm = integer ? power_unsigned(s, (unsigned)m) : exp(m * ls);
    const double f = m * sn - n * sm;
    dVdp[0] = 1 + f / g;
    dVdp[1] = De * n * m * (sn - sm) / (g * re);
    dVdp[2] = De * ((m * sn * ls - sm) * g - f) / (g * g);
    dVdp[3] = De * ((sn - n * sm * ls) * g + f) / (g * g);
}

static double lj_inner_scan(const wkb_potential *pot)
{
    /* where the repulsive term alone is about 1e4 De */
    const double re = pot->p[1], n = pot->p[2], m = pot->p[3];
    return re * pow(1e4 * (n - m) / m, -1.0 / n);
}

static double lj_tail_power(const wkb_potential *pot) { return pot->p[3]; }

const wkb_model wkb_model_lennard_jones = {
    "lennard_jones", 4, lj_names, lj_check, lj_eval, lj_param_derivs,
    param0, param1, lj_inner_scan, lj_tail_power,
};

/* ---- Poeschl-Teller (hyperbolic): V = De tanh^2(a (r - re)) = De - De sech^2(a (r - re)).
   A test well with closed-form WKB and exact levels on the full line. ---- */
static const char *const pt_names[] = {"De", "re", "a"};

static int pt_check(const double *p, wkb_error *err)
{
    int s;
    if ((s = check_positive("PoschlTeller", "De", p[0], err)) ||
        (s = check_positive("PoschlTeller", "re", p[1], err)) ||
        (s = check_positive("PoschlTeller", "a", p[2], err)))
        return s;
    return WKB_SUCCESS;
}

static void pt_eval(const wkb_potential *pot, double r, wkb_pot_value *out)
{
    const double De = pot->p[0], re = pot->p[1], a = pot->p[2];
    const double z = a * (r - re), t = tanh(z), ch = cosh(z), sech2 = 1 / (ch * ch);
    out->V = De * t * t;
    out->depth = De * sech2;
    out->dV = 2 * De * a * t * sech2;
    out->d2V = 2 * De * a * a * sech2 * (sech2 - 2 * t * t);
}

static void pt_param_derivs(const wkb_potential *pot, double r, double *dVdp)
{
    const double De = pot->p[0], re = pot->p[1], a = pot->p[2];
    const double z = a * (r - re), t = tanh(z), ch = cosh(z), sech2 = 1 / (ch * ch);
    dVdp[0] = t * t;
    dVdp[1] = -2 * De * a * t * sech2;
    dVdp[2] = 2 * De * (r - re) * t * sech2;
}

static double pt_inner_scan(const wkb_potential *pot)
{
    const double re = pot->p[1], a = pot->p[2];
    /* tanh^2(12) = 1 - 1.5e-10: still below the asymptote in double precision */
    return GSL_MAX(re - 12 / a, 1e-3 * re);
}

const wkb_model wkb_model_poschl_teller = {
    "poschl_teller", 3, pt_names, pt_check, pt_eval, pt_param_derivs,
    param0, param1, pt_inner_scan, no_tail_power,
};

/* ---- the table ---- */
const wkb_model *const wkb_models[] = {
    &wkb_model_morse, &wkb_model_lennard_jones, &wkb_model_poschl_teller, &wkb_model_pointwise,
    /* models_extended.c: EMO and MLR with K = 1..8 exponent coefficients */
    &wkb_models_emo[0], &wkb_models_emo[1], &wkb_models_emo[2], &wkb_models_emo[3],
    &wkb_models_emo[4], &wkb_models_emo[5], &wkb_models_emo[6], &wkb_models_emo[7],
    &wkb_models_mlr[0], &wkb_models_mlr[1], &wkb_models_mlr[2], &wkb_models_mlr[3],
    &wkb_models_mlr[4], &wkb_models_mlr[5], &wkb_models_mlr[6], &wkb_models_mlr[7],
    &wkb_models_mlrd[0], &wkb_models_mlrd[1], &wkb_models_mlrd[2], &wkb_models_mlrd[3],
    &wkb_models_mlrd[4], &wkb_models_mlrd[5], &wkb_models_mlrd[6], &wkb_models_mlrd[7],
    NULL,
};

const wkb_model *wkb_model_by_name(const char *name)
{
    for (size_t i = 0; wkb_models[i]; i++)
        if (strcmp(wkb_models[i]->name, name) == 0)
            return wkb_models[i];
    return NULL;
}

int wkb_potential_init(wkb_potential *pot, const wkb_model *model, const double *p,
                       const wkb_pointwise *curve, wkb_error *err)
{
    memset(pot, 0, sizeof *pot);
    if (!model)
        return wkb_fail(err, WKB_EINVAL, "no potential model given");
    if (model->n_params > WKB_MAX_PARAMS)
        return wkb_fail(err, WKB_EINVAL, "model %s has too many parameters", model->name);
    if (model == &wkb_model_pointwise && !curve)
        return wkb_fail(err, WKB_EINVAL, "the point-wise model needs its curve");
    for (size_t i = 0; i < model->n_params; i++) {
        if (!isfinite(p[i]))
            return wkb_fail(err, WKB_EINVAL, "%s parameter %s=%g is not a finite number", model->name,
                            model->param_names[i], p[i]);
        pot->p[i] = p[i];
    }
    if (model->check) {
        int s = model->check(pot->p, err);
        if (s)
            return s;
    }
    pot->model = model;
    pot->curve = curve;
    return WKB_SUCCESS;
}
