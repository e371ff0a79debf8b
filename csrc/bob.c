/* bob.c: Born-Oppenheimer breakdown corrections for fits of several isotopologues.
 *
 * The form of Le Roy [R. J. Le Roy, J. Mol. Spectrosc. 194, 189 (1999); Le Roy & Huang,
 * J. Mol. Struct. (Theochem) 591, 175 (2002); from memory]: for isotopologue alpha with atom
 * masses M_A, M_B and the reference isotopologue (1),
 *   V_alpha(r) = V(r) + (dM_A/M_A) S_A(r) + (dM_B/M_B) S_B(r),   dM_X = M_X(alpha) - M_X(1),
 *   centrifugal term  hbar^2 J(J+1)/(2 mu_alpha r^2) [1 + (M_A(1)/M_A) R_A(r) + (M_B(1)/M_B) R_B(r)],
 *   S_X(r) = y u_inf + (1 - y) sum_i u_i y^i,  R_X(r) = y t_inf + (1 - y) sum_i t_i y^i,
 *   y = y_p(r; re) = (r^p - re^p)/(r^p + re^p).
 * A correction is a model descriptor that wraps the potential's own model (the first member of
 * wkb_bob_model is its wkb_model, so the level code sees an ordinary model): the parameters are
 * the base model's, then u_inf, u_0.. of A, of B, then t_inf, t_0.. of A, of B. Each
 * isotopologue and J has its own copy with its mass factors and J(J+1) hbar^2/(2 mu) set, owned
 * by the caller (no global state).
 */
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "wkb.h"

static const wkb_bob_model *bob_of(const wkb_potential *pot) { return (const wkb_bob_model *)pot->model; }

static void base_potential(const wkb_potential *pot, wkb_potential *base)
{
    *base = *pot;
    base->model = bob_of(pot)->base;
}

/* y, dy/dr, d2y/dr2 of y_p(r; re) and dy/d(re) */
static void bob_y(double r, double re, double p, double *y, double *dy, double *d2y, double *dyre)
{
    const double t = pow(re / r, p);
    *y = (1 - t) / (1 + t);
    const double one_minus_y2 = 4 * t / ((1 + t) * (1 + t));
    *dy = 0.5 * p / r * one_minus_y2;
    *d2y = -*dy * (1 + p * *y) / r;
    *dyre = -0.5 * p / re * one_minus_y2;
}

/* F = y c_inf + (1 - y) sum_i c_i y^i with dF/dy, d2F/dy2; c = (c_inf, c_0, .., c_(n-1)) */
static void bob_function(const double *c, int n, double y, double *F, double *F1, double *F2)
{
    double P = 0, P1 = 0, P2 = 0;
    for (int i = n - 1; i >= 0; i--) {
        P2 = P2 * y + 2 * P1;
        P1 = P1 * y + P;
        P = P * y + c[1 + i];
    }
    *F = y * c[0] + (1 - y) * P;
    *F1 = c[0] - P + (1 - y) * P1;
    *F2 = -2 * P1 + (1 - y) * P2;
}

/* the four functions' coefficient blocks: (offset into p, count of c_i) */
static void blocks(const wkb_bob_model *b, size_t *offset, int *count)
{
    size_t at = b->base->n_params;
    for (int f = 0; f < 4; f++) {
        offset[f] = at;
        count[f] = b->n_coef[f];
        at += b->n_coef[f] ? (size_t)b->n_coef[f] + 1 : 0;
    }
}

static int bob_check(const double *p, wkb_error *err)
{
    (void)p;
    (void)err;
    return WKB_SUCCESS; /* the base check runs in wkb_bob_potential_check (it needs the model) */
}

static void bob_eval(const wkb_potential *pot, double r, wkb_pot_value *out)
{
    const wkb_bob_model *b = bob_of(pot);
    wkb_potential base;
    base_potential(pot, &base);
    base.model->eval(&base, r, out);
    const double re = base.model->r_min(&base);
    double y, dy, d2y, dyre;
    bob_y(r, re, b->power, &y, &dy, &d2y, &dyre);
    size_t off[4];
    int cnt[4];
    blocks(b, off, cnt);
    const double ir2 = 1 / (r * r);
    for (int f = 0; f < 4; f++) {
        if (!cnt[f])
            continue;
        double F, F1, F2;
        bob_function(pot->p + off[f], cnt[f], y, &F, &F1, &F2);
        const double Fr = F1 * dy, Frr = F2 * dy * dy + F1 * d2y;
        const double *c = pot->p + off[f];
        if (f < 2) { /* adiabatic: factor * S(r); depth loses factor * (S(r) - u_inf) = (1 - y)(P - u_inf) */
            const double k = b->adiabatic[f];
            out->V += k * F;
            out->dV += k * Fr;
            out->d2V += k * Frr;
            out->depth -= k * (F - c[0]);
        } else { /* centrifugal: rot_eps factor R(r)/r^2 */
            const double k = b->centrifugal[f - 2] * b->rot_eps;
            out->V += k * F * ir2;
            out->dV += k * (Fr * ir2 - 2 * F * ir2 / r);
            out->d2V += k * (Frr * ir2 - 4 * Fr * ir2 / r + 6 * F * ir2 * ir2);
            out->depth -= k * F * ir2;
        }
    }
}

static void bob_param_derivs(const wkb_potential *pot, double r, double *dVdp)
{
    const wkb_bob_model *b = bob_of(pot);
    wkb_potential base;
    base_potential(pot, &base);
    const size_t nb = base.model->n_params;
    if (base.model->param_derivs)
        base.model->param_derivs(&base, r, dVdp);
    else
        memset(dVdp, 0, nb * sizeof *dVdp);
    for (size_t k = nb; k < pot->model->n_params; k++)
        dVdp[k] = 0;
    const double re = base.model->r_min(&base);
    double y, dy, d2y, dyre;
    bob_y(r, re, b->power, &y, &dy, &d2y, &dyre);
    size_t off[4];
    int cnt[4];
    blocks(b, off, cnt);
    for (int f = 0; f < 4; f++) {
        if (!cnt[f])
            continue;
        const double k = f < 2 ? b->adiabatic[f] : b->centrifugal[f - 2] * b->rot_eps / (r * r);
        double F, F1, F2;
        bob_function(pot->p + off[f], cnt[f], y, &F, &F1, &F2);
        dVdp[1] += k * F1 * dyre; /* y depends on re = p[1] */
        dVdp[off[f]] = k * y;
        double yi = 1;
        for (int i = 0; i < cnt[f]; i++) {
            dVdp[off[f] + 1 + i] = k * (1 - y) * yi;
            yi *= y;
        }
    }
}

static double bob_asymptote(const wkb_potential *pot)
{
    const wkb_bob_model *b = bob_of(pot);
    wkb_potential base;
    base_potential(pot, &base);
    size_t off[4];
    int cnt[4];
    blocks(b, off, cnt);
    double A = base.model->asymptote(&base);
    for (int f = 0; f < 2; f++)
        if (cnt[f])
            A += b->adiabatic[f] * pot->p[off[f]];
    return A;
}

static double bob_r_min(const wkb_potential *pot)
{
    wkb_potential base;
    base_potential(pot, &base);
    return base.model->r_min(&base);
}

static double bob_r_inner(const wkb_potential *pot)
{
    wkb_potential base;
    base_potential(pot, &base);
    return base.model->r_inner_scan(&base);
}

static double bob_tail(const wkb_potential *pot)
{
    wkb_potential base;
    base_potential(pot, &base);
    return base.model->tail_power(&base);
}

static const char *const function_names[4] = {"uA", "uB", "tA", "tB"};

int wkb_bob_model_init(wkb_bob_model *b, const wkb_model *base, const int *n_coef, double power, wkb_error *err)
{
    memset(b, 0, sizeof *b);
    if (!base || base == &wkb_model_pointwise || !base->r_min)
        return wkb_fail(err, WKB_EINVAL, "Born-Oppenheimer corrections need an analytic potential model with re");
    if (!(power >= 1 && power <= 64 && power == floor(power)))
        return wkb_fail(err, WKB_EINVAL, "the power p=%g of the correction functions must be a whole number 1..64",
                        power);
    size_t n = base->n_params;
    for (int f = 0; f < 4; f++) {
        if (n_coef[f] < 0 || n_coef[f] > 6)
            return wkb_fail(err, WKB_EINVAL, "correction function %s: %d coefficients is invalid (0..6)",
                            function_names[f], n_coef[f]);
        n += n_coef[f] ? (size_t)n_coef[f] + 1 : 0;
    }
    if (n > WKB_MAX_PARAMS)
        return wkb_fail(err, WKB_EINVAL, "%zu parameters with the corrections are more than the %d allowed", n,
                        WKB_MAX_PARAMS);
    b->base = base;
    b->power = power;
    memcpy(b->n_coef, n_coef, sizeof b->n_coef);
    for (size_t k = 0; k < base->n_params; k++)
        b->names[k] = base->param_names[k];
    size_t at = base->n_params;
    for (int f = 0; f < 4; f++) {
        if (!n_coef[f])
            continue;
        snprintf(b->name_buf[at], sizeof b->name_buf[at], "%s_inf", function_names[f]);
        b->names[at] = b->name_buf[at];
        at++;
        for (int i = 0; i < n_coef[f]; i++, at++) {
            snprintf(b->name_buf[at], sizeof b->name_buf[at], "%s%d", function_names[f], i);
            b->names[at] = b->name_buf[at];
        }
    }
    b->model.name = "born_oppenheimer";
    b->model.n_params = n;
    b->model.param_names = b->names;
    b->model.check = bob_check;
    b->model.eval = bob_eval;
    b->model.param_derivs = bob_param_derivs;
    b->model.asymptote = bob_asymptote;
    b->model.r_min = bob_r_min;
    b->model.r_inner_scan = bob_r_inner;
    b->model.tail_power = bob_tail;
    b->centrifugal[0] = b->centrifugal[1] = 1.0; /* the reference isotopologue: M(1)/M(1) */
    return WKB_SUCCESS;
}

void wkb_bob_model_variant(const wkb_bob_model *tmpl, wkb_bob_model *out, const double *adiabatic,
                           const double *centrifugal, double rot_eps)
{
    *out = *tmpl;
    out->model.param_names = tmpl->names; /* the template's names stay valid while it lives */
    out->adiabatic[0] = adiabatic[0], out->adiabatic[1] = adiabatic[1];
    out->centrifugal[0] = centrifugal[0], out->centrifugal[1] = centrifugal[1];
    out->rot_eps = rot_eps;
}

int wkb_bob_potential_check(const wkb_bob_model *b, const double *p, wkb_error *err)
{
    if (b->base->check)
        return b->base->check(p, err);
    return WKB_SUCCESS;
}
