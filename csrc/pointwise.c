/* pointwise.c: the point-wise potential (spline inside, fitted extrapolations outside).
   PLACEHOLDER: being written; the descriptor exists so the model table links. */
#include <math.h>
#include <stdlib.h>

#include "wkb.h"

struct wkb_pointwise {
    double D, n, Cn;
};

static void pw_eval(const wkb_potential *pot, double r, wkb_pot_value *out)
{
    out->V = out->dV = out->d2V = out->depth = NAN;
}
static double pw_asymptote(const wkb_potential *pot) { return pot->curve->D; }
static double pw_zero(const wkb_potential *pot) { return 0; }

const wkb_model wkb_model_pointwise = {
    "pointwise", 0, NULL, NULL, pw_eval, NULL, pw_asymptote, pw_zero, pw_zero, pw_zero,
};

int wkb_pointwise_alloc(const double *r, const double *V, size_t n, double asymptote,
                        double tail_power, wkb_pointwise **out, wkb_error *err)
{
    *out = NULL;
    return wkb_fail(err, WKB_EINVAL, "point-wise potentials are not implemented yet");
}

void wkb_pointwise_free(wkb_pointwise *curve) { free(curve); }

void wkb_pointwise_tail(const wkb_pointwise *curve, double *asymptote, double *power,
                        double *coefficient)
{
    *asymptote = curve->D;
    *power = curve->n;
    *coefficient = curve->Cn;
}
