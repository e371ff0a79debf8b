/* model_power.h: private to the analytic model files (potential.c, models_extended.c). */
#ifndef WKBFIT_MODEL_POWER_H
#define WKBFIT_MODEL_POWER_H

#include <math.h>

/* s^k by repeated squaring (exact to rounding in the products), for a caller that has checked k */
static inline double power_unsigned(double s, unsigned k)
{
    double result = 1;
    while (k) {
        if (k & 1)
            result *= s;
        s *= s;
        k >>= 1;
    }
    return result;
}

/* s^e, exact and fast (repeated squaring) for the small integer exponents that the models use. */
static inline double power(double s, double e)
{
    if (e == floor(e) && e >= 0 && e <= 64)
        return power_unsigned(s, (unsigned)e);
    return pow(s, e);
}

#endif
