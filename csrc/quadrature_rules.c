/* quadrature_rules.c: the Gauss-Legendre rules of the orbit integrals (orbit.c) and the per-well check
 * that the rule in use is converged (settings.check_nodes).
 *
 * A well's rules: the n-point rule on [0, 1] and the positive halves of the n- and 2n-point rules on
 * [-1, 1] (the s^2 maps make every orbit integrand even in s), for the requested node count and its
 * doublings; the default count's are computed once per process and shared read-only.
 */
#include <math.h>
#include <pthread.h>
#include <stdlib.h>
#include <string.h>

#include <gsl/gsl_errno.h>
#include <gsl/gsl_integration.h>
#include <gsl/gsl_math.h>

#include "wkb.h"
#include "well.h"

/* P_n(x) and P_n'(x) by the three-term recurrence; (1 - x)(1 + x) keeps P_n' accurate next to x = 1 */
static void legendre_value(size_t n, double x, double *p, double *dp)
{
    double p0 = 1, p1 = x;
    for (size_t k = 2; k <= n; k++) {
        const double p2 = ((double)(2 * k - 1) * x * p1 - (double)(k - 1) * p0) / (double)k;
        p0 = p1;
        p1 = p2;
    }
    *p = p1;
    *dp = n == 1 ? 1 : (double)n * (p0 - x * p1) / ((1 - x) * (1 + x));
}

/* GSL's rules for node counts it has no precomputed table for (all but 2..20, 32, 64, 96, 100, 128, 256,
   512, 1024) carry weights only ~1e-10 accurate (their sum is off by 3e-10 at 192 or 320 nodes): the
   levels of a 96-node rule (its 192-node half rule) were 1e-6 cm-1 off while 64 and 128 agreed to 1e-11.
   Newton steps on P_n from GSL's nodes, by the three-term recurrence, give nodes and weights to rounding
   (tests/test_quadrature_accuracy.py). The precomputed tables are used as they are. */
static int legendre_rule_polish(gsl_integration_glfixed_table *t)
{
    const size_t n = t->n, m = (n + 1) / 2; /* t->x[0..m-1]: the nodes >= 0, t->w: their weights */
    for (size_t i = 0; i < m; i++) {
        double x = t->x[i], p, dp;
        for (int it = 0; it < 20; it++) {
            legendre_value(n, x, &p, &dp);
            const double dx = p / dp;
            x -= dx;
            if (fabs(dx) <= 1e-17)
                break;
        }
        legendre_value(n, x, &p, &dp);
        const double wt = 2 / ((1 - x) * (1 + x) * dp * dp);
        if (!isfinite(wt) || !(x >= 0 && x < 1))
            return GSL_EFAILED;
        t->x[i] = x;
        t->w[i] = wt;
    }
    return GSL_SUCCESS;
}

/* In s with r - r_turn ~ s^2, every orbit integrand is an even function of s, so the n-point rule on
   [-1, 1] needs only its n/2 positive nodes: twice the accuracy per evaluation of a rule on [0, 1]. */
static int even_half_rule(size_t n, double *x, double *wt)
{
    gsl_integration_glfixed_table *table = gsl_integration_glfixed_table_alloc(n);
    int status = table ? GSL_SUCCESS : GSL_ENOMEM;
    if (table && !table->precomputed)
        status = legendre_rule_polish(table);
    for (size_t i = 0, k = 0; i < n && !status; i++) {
        double xi, wi;
        status = gsl_integration_glfixed_point(-1.0, 1.0, i, &xi, &wi, table);
        if (!status && xi > 0 && k < n / 2) {
            x[k] = xi;
            wt[k++] = wi;
        }
    }
    if (table)
        gsl_integration_glfixed_table_free(table);
    return status;
}

/* The rules of the default node count and of its doublings (wkb_well_set may need them), computed once
   per process and shared read-only by every well (a well set-up is a few microseconds; making or copying
   them cost a fraction of that per well). */
#define DEFAULT_NODES 32
#define DEFAULT_RULES_SIZE (5 * DEFAULT_NODES * ((1 << WKB_RULE_LEVELS) - 1))
static struct {
    double data[DEFAULT_RULES_SIZE];
    int status; /* 0 made, nonzero: computing them failed (each well then computes its own) */
} default_rules;
static pthread_once_t default_rules_once = PTHREAD_ONCE_INIT;

static int gauss_legendre_unit(size_t n, double *x, double *wt);

/* one rule of n nodes laid out in a block of 5 n: the n-point rule on [0, 1], then the positive halves
   of the n- and 2n-point rules on [-1, 1] */
static int fill_rules(size_t n, double *block)
{
    return gauss_legendre_unit(n, block, block + n) || even_half_rule(n, block + 2 * n, block + 2 * n + n / 2) ||
           even_half_rule(2 * n, block + 3 * n, block + 4 * n);
}

static void make_default_rules(void)
{
    double *block = default_rules.data;
    for (int k = 0; k < WKB_RULE_LEVELS && !default_rules.status; k++) {
        default_rules.status = fill_rules((size_t)DEFAULT_NODES << k, block);
        block += 5 * (DEFAULT_NODES << k);
    }
}

/* the n-point Gauss-Legendre rule on [0, 1] */
static int gauss_legendre_unit(size_t n, double *x, double *wt)
{
    gsl_integration_glfixed_table *table = gsl_integration_glfixed_table_alloc(n);
    int status = table ? GSL_SUCCESS : GSL_ENOMEM;
    if (table && !table->precomputed)
        status = legendre_rule_polish(table);
    for (size_t i = 0; i < n && !status; i++)
        status = gsl_integration_glfixed_point(0.0, 1.0, i, &x[i], &wt[i], table);
    if (table)
        gsl_integration_glfixed_table_free(table);
    return status;
}

/* Makes the rule with base_nodes << level nodes (once per well; the default counts are shared). */
int wkb_rules_make(wkb_well *w, int level)
{
    if (w->rules[level].gl_x)
        return 0;
    const size_t n = w->base_nodes << level;
    double *block = NULL;
    if (w->base_nodes == DEFAULT_NODES && !pthread_once(&default_rules_once, make_default_rules) &&
        !default_rules.status) {
        block = default_rules.data + 5 * DEFAULT_NODES * ((1 << level) - 1);
    } else {
        if (!(block = w->rules[level].owned = malloc(5 * n * sizeof(double))) || fill_rules(n, block))
            return 1;
    }
    w->rules[level].gl_x = block;
    w->rules[level].gl_w = block + n;
    w->rules[level].even_x = block + 2 * n;
    w->rules[level].even_w = block + 2 * n + n / 2;
    w->rules[level].even2_x = block + 3 * n;
    w->rules[level].even2_w = block + 4 * n;
    return 0;
}

/* the orbit integrals use the rule of this level from now on (made already) */
void wkb_rules_use(wkb_well *w, int level)
{
    w->set.nodes = w->base_nodes << level;
    w->gl_x = w->rules[level].gl_x;
    w->gl_w = w->rules[level].gl_w;
    w->even_x = w->rules[level].even_x;
    w->even_w = w->rules[level].even_w;
    w->even2_x = w->rules[level].even2_x;
    w->even2_w = w->rules[level].even2_w;
}

/* The quadrature check of a well set-up (settings.check_nodes). The Gauss rule converges geometrically on
   the smooth pieces, but at a rate set by the potential: 32 nodes give 1e-12 cm-1 on a Morse or LJ well and
   5e-6 cm-1 on a deep MLR whose inner wall the inner piece resolves poorly (tests/test_quadrature_accuracy.py).
   The action is compared with the rule of twice the nodes at a few energies; where the levels would move by
   more than WKB_QUADRATURE_TOL the nodes are doubled (up to 8x) until the next doubling agrees; twice the
   last difference and a floor are added to every level's error (quad_error). A point-wise
   curve converges only algebraically (its cubic pieces): levels.py bounds its error by the 64-node rule. */
/* The pieces' layout changes with the energy (the outer piece reaches its length limit, a piece is added),
   and the 32-node rule loses a little in narrow bands next to those switches, which one check energy does not
   see: up to 4e-14 of the depth on the test wells (Morse, LJ, J = 0 and 20). Every level's error carries
   this floor with a margin. */
#define QUADRATURE_FLOOR 1e-13
#define CHECK_FRACTIONS 1
static const double check_fraction[CHECK_FRACTIONS] = {0.8}; /* (E - bottom) / depth */

void wkb_rules_check(wkb_well *w)
{
    if (w->pot.model == &wkb_model_pointwise || !(w->bottom < w->bound_top))
        return;
    const size_t n_orbits = w->n_orbits;
    const double depth = w->bound_top - w->bottom;
    /* the tolerance, above the levels' rounding (1e-14 of the depth, 16 units of it) */
    const double tol = GSL_MAX(WKB_QUADRATURE_TOL, 16e-14 * depth);
    double b[CHECK_FRACTIONS], coarse[CHECK_FRACTIONS], fine[CHECK_FRACTIONS] = {0}, slope[CHECK_FRACTIONS];
    wkb_orbit o;
    for (int k = 0; k < CHECK_FRACTIONS; k++) {
        const double rise = check_fraction[k] * depth;
        b[k] = w->top - (w->bottom + rise);
        if (wkb_orbit_action_at(w, b[k], &o, NULL))
            goto done; /* the level search reports what fails there */
        coarse[k] = o.action;
        /* dI/dE, which turns an action error into a level's: I(E) is convex in a well whose period grows
           with E, so dI/dE >= I/(E - bottom) and the level error is at most dI (E - bottom)/I */
        slope[k] = o.action / rise;
    }
    int level = 0;
    double worst = 0;
    while (level + 1 < WKB_RULE_LEVELS) {
        if (wkb_rules_make(w, level + 1))
            break; /* out of memory: keep the rule in use */
        wkb_rules_use(w, level + 1);
        worst = 0;
        for (int k = 0; k < CHECK_FRACTIONS; k++) {
            if (wkb_orbit_action_at(w, b[k], &o, NULL)) {
                worst = INFINITY;
                break;
            }
            fine[k] = o.action;
            worst = GSL_MAX(worst, fabs(fine[k] - coarse[k]) / slope[k]);
        }
        if (!(worst > tol)) {
            wkb_rules_use(w, level); /* the rule in use agrees with twice its nodes */
            w->quad_error = 2 * worst + QUADRATURE_FLOOR * depth;
            goto done;
        }
        if (!isfinite(worst))
            break;
        level++;
        memcpy(coarse, fine, sizeof coarse);
    }
    /* the finest rule still differs from the one before it (or failed): keep the finest that worked,
       its remaining error bounded by the last difference */
    wkb_rules_use(w, level);
    w->quad_error = (isfinite(worst) ? 2 * worst : 0) + QUADRATURE_FLOOR * depth;
done:
    w->n_orbits = n_orbits; /* the count is of the orbits of the level searches */
    w->have_last_tp = 0;
}
