/* rkr.c: RKR inversion, from term values G(v) and rotational constants B(v) to the
 * classical turning points r1(v) < r2(v) of the potential (Rydberg 1931/1933, Klein 1932,
 * Rees 1947; physics.md section 5). With x = v + 1/2 and x' = v' + 1/2,
 *   f(v) = (r2 - r1)/2     = sqrt(C_u/mu) int_0^x dx' / sqrt(G(x) - G(x'))
 *   g(v) = (1/r1 - 1/r2)/2 = sqrt(mu/C_u) int_0^x B(x') dx' / sqrt(G(x) - G(x'))
 *   r2 = sqrt(f^2 + f/g) + f,  r1 = (f/g)/r2   (= sqrt(f^2 + f/g) - f without cancellation).
 * The square-root end point is removed by x' = x - w^2: dx'/sqrt(G(x) - G(x')) becomes
 * 2 dw / sqrt(D(w^2)) with D(t) = (G(x) - G(x - t))/t, a smooth positive polynomial in t
 * whose coefficients come from the Taylor coefficients of G at x (formed once per level),
 * so G(x) - G(x') is never formed as a difference of two rounded large numbers. The
 * integrals in w over [0, sqrt(x)] are done with GSL's fixed Gauss-Legendre rules.
 */
#include <float.h>
#include <math.h>

#include <gsl/gsl_errno.h>
#include <gsl/gsl_integration.h>

#include "wkb.h"

/* Grid for the check that G increases (and B stays positive) on [-1/2, v_max]: a pair of
   roots of dG/dv closer than 1/RKR_SCAN_STEPS of the range could slip through, but then the
   dip of G is also caught by the check D(t) > 0 at every quadrature node. */
#define RKR_SCAN_STEPS 4096

/* Gauss-Legendre sizes that GSL 2.7 tabulates to full precision (rules of other sizes it
   computes at allocation, measured accurate to only ~1e-11), each with the tabulated size
   (about 2/3 as many nodes) whose result gives the error estimate. */
static const size_t rkr_rules[][2] = {
    {32, 20}, {64, 32}, {96, 64}, {100, 64}, {128, 64}, {256, 128}, {512, 256}, {1024, 512},
};

/* c[0] + c[1] y + ... + c[n-1] y^(n-1) */
static double horner(const double *c, size_t n, double y)
{
    double s = 0.0;
    while (n-- > 0)
        s = s * y + c[n];
    return s;
}

/* dG/dx of G(x) = sum_k Gc[k] x^(k+1) */
static double G_slope(const double *Gc, size_t nG, double x)
{
    double s = 0.0;
    for (size_t k = nG; k-- > 0;)
        s = s * x + (double)(k + 1) * Gc[k];
    return s;
}

static int check_coefficients(const double *c, size_t n, const char *name, int power_offset,
                              const char *dunham, wkb_error *err)
{
    if (n < 1 || n > WKB_RKR_MAX_TERMS)
        return wkb_fail(err, WKB_EINVAL, "%s must hold 1 to %d coefficients, got %zu", name,
                        WKB_RKR_MAX_TERMS, n);
    for (size_t k = 0; k < n; k++)
        if (!isfinite(c[k]))
            return wkb_fail(err, WKB_EINVAL,
                            "%s[%zu] (Y_%zu%s, the coefficient of (v+1/2)^%zu) = %g is not a finite number",
                            name, k, k + power_offset, dunham, k + power_offset, c[k]);
    return WKB_SUCCESS;
}

/* Checks dG/dv > 0 and B > 0 on [0, x_max] (x = v + 1/2) on a grid; names where it fails. */
static int check_range(const double *Gc, size_t nG, const double *Bc, size_t nB, double x_max,
                       double v_asked, wkb_error *err)
{
    const double slope0 = G_slope(Gc, nG, 0.0);
    if (!(slope0 > 0))
        return wkb_fail(err, WKB_EINVAL,
                        "dG/dv = Y_10 = %g cm-1 at v = -1/2: G(v) must increase with v (Y_10, about "
                        "omega_e, must be > 0)", slope0);
    double x_prev = 0.0;
    for (int i = 0; i <= RKR_SCAN_STEPS; i++) {
        const double x = x_max * i / RKR_SCAN_STEPS;
        const double B = horner(Bc, nB, x);
        if (!(B > 0))
            return wkb_fail(err, WKB_EINVAL,
                            "B(v) = %g cm-1 at v = %.6g: the rotational constant must stay > 0 on "
                            "[-1/2, %g]", B, x - 0.5, v_asked);
        if (!(G_slope(Gc, nG, x) > 0)) {
            /* bisect for the point where G stops increasing, to name it */
            double lo = x_prev, hi = x;
            for (int it = 0; it < 100 && hi - lo > 1e-12 * (1 + hi); it++) {
                const double mid = 0.5 * (lo + hi);
                if (G_slope(Gc, nG, mid) > 0)
                    lo = mid;
                else
                    hi = mid;
            }
            return wkb_fail(err, WKB_EINVAL,
                            "v=%g is beyond the end of the increasing part of G(v): dG/dv = 0 at "
                            "v = %.8g; RKR needs G(v) increasing on [-1/2, v], so ask for v < %.8g",
                            v_asked, lo - 0.5, lo - 0.5);
        }
        x_prev = x;
    }
    return WKB_SUCCESS;
}

/* Klein's integrals S_f = int 2 dw/sqrt(D), S_g = int 2 B dw/sqrt(D) over w in [0, sqrt(x)]
   with one Gauss-Legendre table; d[0..nd-1] are the coefficients of D(t). */
static int klein_sums(const gsl_integration_glfixed_table *table, const double *d, size_t nd,
                      const double *Bc, size_t nB, double x, double v, double *Sf, double *Sg,
                      wkb_error *err)
{
    const double W = sqrt(x);
    double sf = 0.0, sg = 0.0;
    for (size_t i = 0; i < table->n; i++) {
        double w, weight;
        if (gsl_integration_glfixed_point(0.0, W, i, &w, &weight, table) != GSL_SUCCESS)
            return wkb_fail(err, WKB_ENUMERIC, "GSL could not return Gauss-Legendre node %zu", i);
        const double t = w * w;
        const double D = horner(d, nd, t);
        if (!(D > 0))
            return wkb_fail(err, WKB_EINVAL,
                            "G(v') >= G(v) at v' = %.8g below v = %g: G(v) must increase on [-1/2, v]",
                            v - t, v);
        const double h = 2.0 / sqrt(D);
        sf += weight * h;
        sg += weight * h * horner(Bc, nB, x - t);
    }
    *Sf = sf;
    *Sg = sg;
    return WKB_SUCCESS;
}

int wkb_rkr(const double *G_coef, size_t nG, const double *B_coef, size_t nB, double mu,
            const double *v, size_t n, size_t quadrature_points, double *energy, double *f,
            double *g, double *r_inner, double *r_outer, double *error, wkb_error *err)
{
    gsl_integration_glfixed_table *fine = NULL, *coarse = NULL;
    int status;
    double x_max = 0.0, v_max = -0.5;

    if (!(isfinite(mu) && mu > 0))
        return wkb_fail(err, WKB_EINVAL, "mu=%g is invalid: the reduced mass must be a finite number > 0 (u)", mu);
    if ((status = check_coefficients(G_coef, nG, "G_coefficients", 1, "0", err)) ||
        (status = check_coefficients(B_coef, nB, "B_coefficients", 0, "1", err)))
        return status;
    if (quadrature_points == 0)
        quadrature_points = WKB_RKR_DEFAULT_POINTS;
    size_t coarse_points = 0;
    for (size_t k = 0; k < sizeof rkr_rules / sizeof rkr_rules[0]; k++)
        if (rkr_rules[k][0] == quadrature_points)
            coarse_points = rkr_rules[k][1];
    if (!coarse_points)
        return wkb_fail(err, WKB_EINVAL,
                        "quadrature_points=%zu is invalid: use 32, 64, 96, 100, 128, 256, 512 or 1024 "
                        "(default %d)", quadrature_points, WKB_RKR_DEFAULT_POINTS);
    for (size_t i = 0; i < n; i++) {
        if (!(isfinite(v[i]) && v[i] > -0.5))
            return wkb_fail(err, WKB_EINVAL,
                            "v=%g is invalid: RKR turning points need a finite v > -1/2 (the minimum "
                            "itself, v = -1/2, is r = re)", v[i]);
        if (v[i] + 0.5 > x_max)
            x_max = v[i] + 0.5, v_max = v[i];
    }
    if (n == 0)
        return WKB_SUCCESS;
    if ((status = check_range(G_coef, nG, B_coef, nB, x_max, v_max, err)))
        return status;

    fine = gsl_integration_glfixed_table_alloc(quadrature_points);
    coarse = gsl_integration_glfixed_table_alloc(coarse_points);
    if (!fine || !coarse) {
        status = wkb_fail(err, WKB_ENOMEM, "no memory for the Gauss-Legendre tables");
        goto cleanup;
    }

    const double sqrt_eps = sqrt(WKB_HBAR2_OVER_2U / mu);
    for (size_t i = 0; i < n; i++) {
        const double x = v[i] + 0.5;
        /* Taylor coefficients e_j = G^(j)(x)/j! of G(x) = sum_{k>=1} c_k x^k, by repeated
           synthetic division (the Taylor shift); then G(x) - G(x - t) = sum_{j>=1} (-1)^(j+1) e_j t^j */
        double e[WKB_RKR_MAX_TERMS + 1], d[WKB_RKR_MAX_TERMS];
        e[0] = 0.0;
        for (size_t k = 0; k < nG; k++)
            e[k + 1] = G_coef[k];
        for (size_t j = 0; j < nG; j++)
            for (size_t k = nG; k-- > j;)
                e[k] += x * e[k + 1];
        for (size_t j = 1; j <= nG; j++)
            d[j - 1] = (j % 2 ? 1.0 : -1.0) * e[j];

        double Sf[2], Sg[2], r1[2], r2[2];
        const gsl_integration_glfixed_table *tables[2] = {fine, coarse};
        for (int q = 0; q < 2; q++) {
            if ((status = klein_sums(tables[q], d, nG, B_coef, nB, x, v[i], &Sf[q], &Sg[q], err)))
                goto cleanup;
            const double ff = sqrt_eps * Sf[q], gg = Sg[q] / sqrt_eps;
            if (!(ff > 0 && gg > 0 && isfinite(ff) && isfinite(gg))) {
                status = wkb_fail(err, WKB_ENUMERIC, "Klein integrals f=%g, g=%g at v=%g are not finite and > 0",
                                  ff, gg, v[i]);
                goto cleanup;
            }
            r2[q] = sqrt(ff * ff + ff / gg) + ff;
            r1[q] = (ff / gg) / r2[q];
            if (q == 0)
                f[i] = ff, g[i] = gg;
        }
        energy[i] = e[0];
        r_inner[i] = r1[0];
        r_outer[i] = r2[0];
        /* the coarse rule's change, with a floor for the rounding error of the sums */
        error[i] = fmax(fmax(fabs(r1[1] - r1[0]), fabs(r2[1] - r2[0])), 16 * DBL_EPSILON * r2[0]);
    }
    status = WKB_SUCCESS;
cleanup:
    if (coarse)
        gsl_integration_glfixed_table_free(coarse);
    if (fine)
        gsl_integration_glfixed_table_free(fine);
    return status;
}
