/* damping.c: damping functions D_m(r) of the long-range terms C_m/r^m, for the MLR model.
 *
 * Tang-Toennies [K. T. Tang and J. P. Toennies, J. Chem. Phys. 80, 3726 (1984)]:
 *   D_m(r) = 1 - exp(-x) sum_{k=0}^{m} x^k/k!,  x = b r,
 * b (1/angstrom) the range parameter; D_m -> 1 at large r and D_m ~ x^(m+1)/(m+1)! at small r.
 * Written as the tail exp(-x) sum_{k>m} x^k/k! where the difference would cancel (x < m+1).
 *
 * Douketis type, generalized for MLR [Douketis, Scoles, Marchetti, Zen and Thakkar, J. Chem.
 * Phys. 76, 3057 (1982); Le Roy, Haugen, Tao and Li, Mol. Phys. 109, 435 (2011)]:
 *   D_m(r) = [1 - exp(-b(s) rho r/m - c(s) (rho r)^2/sqrt(m))]^(m+s),  r in bohr,
 * rho dimensionless (1 for two hydrogen atoms), so that D_m ~ r^(m+s) at small r and u_LR ~ r^s.
 * The constants b(s), c(s) are from memory of the 2011 paper (s = -1: 3.30, 0.423; s = -2:
 * 3.69, 0.378) and could not be checked against it here; tests check the form and its limits.
 */
#include <math.h>

#include "model_power.h"
#include "wkb.h"

/* bohr radius in angstrom (CODATA 2018) */
#define BOHR 0.529177210903

int wkb_douketis_constants(int s, double *b, double *c)
{
    switch (s) {
    case -1: *b = 3.30; *c = 0.423; return 1; /* (from memory) */
    case -2: *b = 3.69; *c = 0.378; return 1; /* (from memory) */
    default: return 0;
    }
}

/* D, dD/dr, d2D/dr2 and dD/d(range) of one damping function at r (angstrom). */
void wkb_damping_eval(int kind, int m, int s, double range, double r, wkb_damping *out)
{
    if (kind == WKB_DAMPING_TANG_TOENNIES) {
        const double x = range * r, e = exp(-x);
        /* x^m/m! */
        double term = 1, head = 1;
        for (int k = 1; k <= m; k++) {
            term *= x / k;
            head += term;
        }
        const double xm = term; /* x^m/m! */
        double D;
        if (x < m + 1) {
            /* tail sum_{k>m} x^k/k!: terms fall at least by x/(m+2) < 1 */
            double t = xm, tail = 0;
            for (int k = m + 1; k < m + 200; k++) {
                t *= x / k;
                tail += t;
                if (t < 1e-17 * tail)
                    break;
            }
            D = e * tail;
        } else {
            D = 1 - e * head;
        }
        const double dDdx = e * xm, d2Ddx2 = m > 0 ? e * xm * (m / x - 1) : -e;
        out->D = D;
        out->dD = range * dDdx;
        out->d2D = range * range * d2Ddx2;
        out->dD_drange = r * dDdx;
        return;
    }
    if (kind == WKB_DAMPING_DOUKETIS) {
        double b, c;
        if (!wkb_douketis_constants(s, &b, &c)) {
            out->D = NAN, out->dD = NAN, out->d2D = NAN, out->dD_drange = NAN;
            return;
        }
        const double n = m + s, rb = r / BOHR, sm = sqrt((double)m);
        const double g = b * range * rb / m + c * range * range * rb * rb / sm;
        const double g1 = (b * range / m + 2 * c * range * range * rb / sm) / BOHR; /* dg/dr */
        const double g2 = 2 * c * range * range / (sm * BOHR * BOHR);
        const double g_rho = b * rb / m + 2 * c * range * rb * rb / sm;
        const double e = exp(-g), w = -expm1(-g); /* 1 - exp(-g) without cancellation */
        /* n = m + s >= 1 is a whole number: powers by repeated multiplication (model_power.h), which
           differ from pow() only by rounding, at a fraction of its cost */
        const double wn2 = n >= 2 ? power(w, n - 2) : 1 / w, wn1 = n >= 2 ? wn2 * w : 1;
        out->D = wn1 * w;
        out->dD = n * wn1 * e * g1;
        out->d2D = n * (n - 1) * wn2 * e * e * g1 * g1 + n * wn1 * e * (g2 - g1 * g1);
        out->dD_drange = n * wn1 * e * g_rho;
        return;
    }
    out->D = 1, out->dD = 0, out->d2D = 0, out->dD_drange = 0;
}
