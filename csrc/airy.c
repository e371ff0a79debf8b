/* airy.c: Airy functions for the turning-point connection of WKB.
 *
 * Two things live here: GSL's Airy functions with their error estimates (the reference
 * values), and the large-|z| asymptotic expansions of Ai truncated after a chosen number
 * of terms (the forms from which the smooth turning point's pi/4 end phase follows).
 * Pure functions of their arguments: no allocation, no global state.
 */
#include <math.h>

#include <gsl/gsl_errno.h>
#include <gsl/gsl_math.h>
#include <gsl/gsl_sf_airy.h>

#include "wkb.h"

/* One GSL Airy evaluation: underflow is a valid result (the value is 0 or subnormal),
   every other non-success status is a failure naming the function and z. */
static int airy_call(int (*f)(double, gsl_mode_t, gsl_sf_result *), const char *name, double z,
                     double *val, double *val_err, wkb_error *err)
{
    gsl_sf_result r = {0.0, 0.0};
    const int gsl_status = f(z, GSL_PREC_DOUBLE, &r);
    if (gsl_status != GSL_SUCCESS && gsl_status != GSL_EUNDRFLW)
        return wkb_fail(err, WKB_ENUMERIC, "GSL %s(z=%.16g) failed: %s", name, z, gsl_strerror(gsl_status));
    if (!isfinite(r.val) || !isfinite(r.err))
        return wkb_fail(err, WKB_ENUMERIC, "GSL %s(z=%.16g) returned a non-finite value", name, z);
    *val = r.val;
    *val_err = r.err;
    return WKB_SUCCESS;
}

int wkb_airy(double z, wkb_airy_values *out, wkb_error *err)
{
    int status;
    if (!(z >= WKB_AIRY_Z_MIN && z <= WKB_AIRY_Z_MAX)) /* also rejects NaN */
        return wkb_fail(err, WKB_EINVAL,
                        "z=%.16g is outside the range of the Airy functions, %g <= z <= %g (Bi overflows "
                        "above it; the phase of the oscillations is lost below it)",
                        z, WKB_AIRY_Z_MIN, WKB_AIRY_Z_MAX);
    if ((status = airy_call(gsl_sf_airy_Ai_e, "airy_Ai", z, &out->Ai, &out->Ai_err, err)) ||
        (status = airy_call(gsl_sf_airy_Ai_deriv_e, "airy_Ai_deriv", z, &out->dAi, &out->dAi_err, err)) ||
        (status = airy_call(gsl_sf_airy_Bi_e, "airy_Bi", z, &out->Bi, &out->Bi_err, err)) ||
        (status = airy_call(gsl_sf_airy_Bi_deriv_e, "airy_Bi_deriv", z, &out->dBi, &out->dBi_err, err)))
        return status;
    return WKB_SUCCESS;
}

/* c_k/c_(k-1) for c_k = Gamma(3k+1/2)/(54^k k! Gamma(k+1/2)), k >= 1: the term ratio
   (6k-5)(6k-3)(6k-1)/(216 k (2k-1)) builds c_k without overflowing Gammas (c_1 = 5/72). */
static double coefficient_ratio(int k)
{
    return (6.0 * k - 5.0) * (6.0 * k - 3.0) * (6.0 * k - 1.0) / (216.0 * k * (2.0 * k - 1.0));
}

int wkb_airy_asymptotic(double z, int terms, double *ai, wkb_error *err)
{
    if (!isfinite(z) || z == 0.0 || z < WKB_AIRY_Z_MIN)
        return wkb_fail(err, WKB_EINVAL,
                        "z=%.16g is invalid for the asymptotic Airy forms: z must be finite, nonzero and "
                        ">= %g (they are meant for |z| >> 1)",
                        z, WKB_AIRY_Z_MIN);
    if (terms < 1 || terms > WKB_AIRY_MAX_TERMS)
        return wkb_fail(err, WKB_EINVAL, "terms=%d is invalid: the number of series terms must be 1..%d", terms,
                        WKB_AIRY_MAX_TERMS);

    const double x = fabs(z);
    const double zeta = (2.0 / 3.0) * x * sqrt(x);
    const double prefactor = 1.0 / (sqrt(M_PI) * sqrt(sqrt(x))); /* pi^(-1/2) |z|^(-1/4) */
    double c = 1.0, zeta_power = 1.0, result;

    if (z > 0.0) {
        /* A&S 10.4.59 (DLMF 9.7.5): sum_k (-1)^k c_k zeta^(-k). */
        double sum = 0.0, sign = 1.0;
        for (int k = 0; k < terms; k++) {
            if (k > 0) {
                c *= coefficient_ratio(k);
                zeta_power /= zeta;
                sign = -sign;
            }
            sum += sign * c * zeta_power;
        }
        result = 0.5 * prefactor * exp(-zeta) * sum; /* exp underflows to 0 where Ai does */
    } else {
        /* A&S 10.4.60 (DLMF 9.7.9): the even c_k go with sin(zeta + pi/4), the odd ones with
           cos(zeta + pi/4); the signs alternate within each sum. 'terms' counts c_0..c_(terms-1). */
        double even = 0.0, odd = 0.0;
        for (int k = 0; k < terms; k++) {
            if (k > 0) {
                c *= coefficient_ratio(k);
                zeta_power /= zeta;
            }
            const double sign = ((k / 2) % 2 == 0) ? 1.0 : -1.0;
            if (k % 2 == 0)
                even += sign * c * zeta_power;
            else
                odd += sign * c * zeta_power;
        }
        /* sin(zeta + pi/4) = (sin zeta + cos zeta)/sqrt 2, without rounding zeta + pi/4. */
        const double s = sin(zeta), co = cos(zeta);
        result = prefactor * ((s + co) * even - (co - s) * odd) / M_SQRT2;
    }
    if (!isfinite(result))
        return wkb_fail(err, WKB_EINVAL,
                        "the %d-term asymptotic Airy series overflows at z=%.16g: use fewer terms or a larger |z|",
                        terms, z);
    *ai = result;
    return WKB_SUCCESS;
}
