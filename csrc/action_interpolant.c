/* action_interpolant.c: all first-order levels of a well from an interpolant of the action.
 *
 * The action I (and the orbit average Bv) is a smooth function of w = b^alpha across the whole well
 * (b the binding energy, alpha as in quantize.c): analytic in E at the bottom, and near threshold a
 * series in w (LeRoy-Bernstein) for a pure -C_n/r^n tail. So 15 orbits at Chebyshev-Lobatto nodes in
 * w give I(w) to rounding, and every level is then a root of a polynomial, I(w_v) = pi (v + phase):
 * a few floating-point operations instead of one or two orbits. Where one series is not enough the
 * interval is bisected, within an orbit budget of a third of the levels.
 *
 * Accuracy (stated: INTERP_TOL + 4e-14 of the depth in energy, Bv to INTERP_BV_REL of its largest
 * value): a piece is accepted when its last two Chebyshev coefficients, turned into energy by the
 * largest dE/dI on the piece, are below that; then the highest and a middle level are checked
 * against direct orbits. The 8-node rule inside the 16-node one screens a piece first: where even 16
 * nodes cannot converge (an exponential tail makes Bv logarithmic near threshold; MLR and EMO tails
 * are not pure powers), it gives up after 7 orbits. Anything that fails declines, and the caller
 * solves the levels directly: rotating wells (the barrier top just above the asymptote is a
 * singularity close to w = 0) and wells of fewer than INTERP_MIN_LEVELS levels are not tried.
 * Turning points come from the potential at each level's energy (Newton from the previous level's),
 * not from the interpolant (they have a square-root end at the bottom).
 * [Chebyshev-Lobatto interpolation and the coefficient-tail test: L. N. Trefethen, Approximation
 * Theory and Approximation Practice (SIAM 2013), chapters 3 and 8, from memory.]
 */
#include <math.h>
#include <string.h>

#include <gsl/gsl_math.h>

#include "wkb.h"
#include "well.h"

#define INTERP_N 16            /* Lobatto intervals per piece: 17 nodes */
#define INTERP_MAX_PIECES 24
#define INTERP_MIN_LEVELS 40   /* below this a direct sweep (one to two orbits a level) is as cheap */
#define INTERP_CHECK_FACTOR 5  /* a check may be off by this many tolerances before the run declines */
#define INTERP_BV_REL 1e-9     /* relative accuracy asked of the Bv series */
#define INTERP_HOPELESS 1e3    /* the 8-node screen: give up where 16 nodes would still miss by this factor */
#define INTERP_TOL 1e-9        /* cm-1, plus the direct solver's 4e-14 of the depth: the stated accuracy */

typedef struct {
    double wa, wb;              /* w range, wa < wb (wb is the bottom side) */
    double Ia, Ib;              /* action at wa, wb */
    double c[INTERP_N + 1];     /* I(w) = sum c_j T_j(x), x = (2w - wa - wb)/(wb - wa) */
    double d[INTERP_N + 1];     /* dI/dx */
    double cb[INTERP_N + 1];    /* Bv */
    double err_E;               /* tail estimate in energy, cm-1 */
} piece;

typedef struct {
    double w, I, Bv, inv_dEdI; /* inv_dEdI: half_period (dI/dE); 0 where unknown (the ends) */
} node;

static double w_exponent_of(const wkb_well *w)
{
    const double n = w->tail_power;
    return n > 2 ? (n - 2) / (2 * n) : 0.5;
}

static double clenshaw(const double *c, int n, double x)
{
    double b1 = 0, b2 = 0;
    for (int j = n; j >= 1; j--) {
        const double t = 2 * x * b1 - b2 + c[j];
        b2 = b1;
        b1 = t;
    }
    return x * b1 - b2 + c[0];
}

/* coefficients of the interpolant through f_k at x_k = cos(pi k/N), k = 0..N (DCT-I); stride: f_k is
   f[k * stride] (stride 2 on the 16-node values gives the 8-node interpolant) */
static void lobatto_coefficients(const double *f, int N, int stride, double *c)
{
    double cs[2 * INTERP_N];
    for (int m = 0; m < 2 * N; m++)
        cs[m] = cos(M_PI * m / N);
    for (int j = 0; j <= N; j++) {
        double s = 0;
        for (int k = 0; k <= N; k++) {
            const double t = f[k * stride] * cs[j * k % (2 * N)];
            s += (k == 0 || k == N) ? 0.5 * t : t;
        }
        c[j] = 2 * s / N;
    }
    c[0] *= 0.5;
    c[N] *= 0.5;
}

static void derivative_coefficients(const double *c, double *d)
{
    const int N = INTERP_N;
    d[N] = 0;
    d[N - 1] = 2 * N * c[N];
    for (int j = N - 1; j >= 1; j--)
        d[j - 1] = d[j + 1] + 2 * j * c[j];
    d[0] *= 0.5;
}

/* an orbit at w as a node; nonzero if the orbit fails */
static int orbit_node(wkb_well *w, double alpha, double wv, node *nd, size_t *n_orbits)
{
    wkb_orbit o;
    wkb_error e;
    ++*n_orbits;
    if (wkb_orbit_at(w, pow(wv, 1 / alpha), &o, NULL, &e))
        return 1;
    nd->w = wv;
    nd->I = o.action;
    nd->Bv = o.Bv;
    nd->inv_dEdI = o.half_period;
    return 0;
}

/* Builds the piece between two end nodes: 0 built (p->err_E says how well), 1 an orbit failed, 2 hopeless.
   The even nodes alone are the 8-interval rule: where its tail promises no convergence at 16 either
   (geometric convergence squares the relative error when the degree doubles), the piece is given up
   after 7 orbits instead of 15. */
static int build_piece(wkb_well *w, double alpha, const node *a, const node *b, double tol, piece *p,
                       size_t *n_orbits)
{
    const int N = INTERP_N, H = INTERP_N / 2;
    double fI[INTERP_N + 1], fB[INTERP_N + 1], dEdI[INTERP_N + 1], max_dEdI = 0;
    p->wa = a->w;
    p->wb = b->w;
    p->Ia = a->I;
    p->Ib = b->I;
    for (int pass = 0; pass < 2; pass++) {
        for (int k = pass; k <= N; k += 2 - pass) {
            if (pass == 1 && k % 2 == 0)
                continue;
            const double x = cos(M_PI * k / N); /* k = 0: x = 1, the w_b end */
            node nd;
            if (k == 0) {
                nd = *b;
            } else if (k == N) {
                nd = *a;
            } else if (orbit_node(w, alpha, 0.5 * (a->w + b->w) + 0.5 * (b->w - a->w) * x, &nd, n_orbits)) {
                return 1;
            }
            fI[k] = nd.I;
            fB[k] = nd.Bv;
            dEdI[k] = nd.inv_dEdI > 0 ? 1 / nd.inv_dEdI : 0;
            max_dEdI = GSL_MAX(max_dEdI, dEdI[k]);
        }
        if (pass == 0) {
            double c8[INTERP_N / 2 + 1];
            lobatto_coefficients(fI, H, 2, c8);
            const double tail8 = fabs(c8[H - 1]) + fabs(c8[H]), scale = fabs(c8[0]) + fabs(c8[1]);
            if (tail8 * tail8 / scale * max_dEdI > INTERP_HOPELESS * tol)
                return 2;
            /* the same for Bv, which an exponential tail makes logarithmic in b near threshold */
            lobatto_coefficients(fB, H, 2, c8);
            const double tail8_B = fabs(c8[H - 1]) + fabs(c8[H]), scale_B = fabs(c8[0]) + fabs(c8[1]);
            if (tail8_B * tail8_B / scale_B > INTERP_HOPELESS * INTERP_BV_REL * scale_B)
                return 2;
        }
    }
    lobatto_coefficients(fI, N, 1, p->c);
    lobatto_coefficients(fB, N, 1, p->cb);
    derivative_coefficients(p->c, p->d);
    p->err_E = (fabs(p->c[N - 1]) + fabs(p->c[N])) * max_dEdI;
    double bmax = 0;
    for (int k = 0; k <= N; k++)
        bmax = GSL_MAX(bmax, fabs(fB[k]));
    if (fabs(p->cb[N - 1]) + fabs(p->cb[N]) > INTERP_BV_REL * bmax)
        p->err_E = INFINITY; /* Bv not yet resolved: refine too */
    return 0;
}

/* the node at the bottom of the well: zero action, the orbit collapsed onto r_bottom */
static void bottom_node(const wkb_well *w, double alpha, node *nd)
{
    nd->w = pow(w->top - w->bottom, alpha);
    nd->I = 0;
    nd->Bv = w->eps / (w->r_bottom * w->r_bottom);
    nd->inv_dEdI = 0;
}

/* x on piece p where I = target (I decreasing in w, so in x); x0 a first guess in (-1, 1) or NAN */
static double solve_on_piece(const piece *p, double target, double x0)
{
    /* from the guess (the previous level one step on) or the chord, then Newton in x, safeguarded by
       the bracket [-1, 1] */
    double x = x0, lo = -1, hi = 1;
    if (!(x > -1 && x < 1))
        x = -1 + 2 * (p->Ia - target) / (p->Ia - p->Ib);
    if (!(x > -1 && x < 1))
        x = 0;
    for (int it = 0; it < 50; it++) {
        const double F = clenshaw(p->c, INTERP_N, x) - target, dF = clenshaw(p->d, INTERP_N - 1, x);
        if (F > 0)
            lo = x; /* I too large: further towards the bottom (larger x) */
        else
            hi = x;
        double xn = dF < 0 ? x - F / dF : 0.5 * (lo + hi);
        if (!(xn > lo && xn < hi))
            xn = 0.5 * (lo + hi);
        const double dx = fabs(xn - x);
        x = xn;
        if (dx <= 1e-9) { /* quadratic convergence: one more Newton step reaches rounding */
            const double F1 = clenshaw(p->c, INTERP_N, x) - target, dF1 = clenshaw(p->d, INTERP_N - 1, x);
            if (dF1 < 0 && fabs(F1 / dF1) < 1e-8)
                x -= F1 / dF1;
            break;
        }
    }
    return x;
}

int wkb_interpolant_levels(wkb_well *w, wkb_level *levels, size_t n)
{
    if (w->set.order != 1 || w->set.ends != WKB_ENDS_MASLOV || w->low_wall || n < INTERP_MIN_LEVELS || w->rot != 0 ||
        w->pot.model == &wkb_model_pointwise || w->count_first != w->count || n > w->count)
        return 1;
    const double alpha = w_exponent_of(w), depth = w->top - w->bottom;
    const double tol = INTERP_TOL + 4e-14 * depth, floor_error = 1e-14 * depth;
    const size_t budget = n / 3; /* orbits: a direct sweep needs one to two per level */
    size_t n_orbits = 0;

    /* pieces, ordered by w; a stack of pending intervals (top end first) */
    piece pieces[INTERP_MAX_PIECES];
    node pending[INTERP_MAX_PIECES + 1];
    size_t n_pieces = 0, n_pending = 0;
    node top_node, lo_node;
    if (w->rot == 0 && isfinite(w->vD)) {
        /* the threshold orbit of prepare(): its action is pi (vD + phase); its period is infinite, so
           Bv = <eps/r^2> vanishes there */
        top_node.w = 0;
        top_node.I = M_PI * (w->vD + w->phase);
        top_node.Bv = 0;
        top_node.inv_dEdI = 0;
    } else if (orbit_node(w, alpha, pow(w->top - w->bound_top, alpha), &top_node, &n_orbits)) {
        return 1;
    }
    lo_node = top_node;
    bottom_node(w, alpha, &pending[n_pending++]);
    while (n_pending) {
        const node hi_node = pending[n_pending - 1];
        piece p;
        if (build_piece(w, alpha, &lo_node, &hi_node, tol, &p, &n_orbits) || n_orbits > budget)
            return 1;
        if (p.err_E <= tol) {
            if (n_pieces == INTERP_MAX_PIECES)
                return 1;
            pieces[n_pieces++] = p;
            lo_node = hi_node;
            n_pending--;
            continue;
        }
        if (n_pending + n_pieces >= INTERP_MAX_PIECES || n_orbits + 2 * INTERP_N > budget)
            return 1; /* two more pieces would not fit the budget: decline now */
        node mid;
        if (orbit_node(w, alpha, 0.5 * (lo_node.w + hi_node.w), &mid, &n_orbits))
            return 1;
        pending[n_pending++] = mid;
    }

    /* the levels, from the bottom piece up (v = 0 lies on the last piece) */
    size_t k = n_pieces - 1;
    double x_guess = NAN;
    for (size_t v = 0; v < n; v++) {
        const double target = M_PI * ((double)v + w->phase);
        while (k > 0 && target > pieces[k].Ia) {
            k--;
            x_guess = NAN;
        }
        const piece *p = &pieces[k];
        if (!(target <= p->Ia && target >= p->Ib))
            return 1; /* (rounding at the very top: let the direct solver decide) */
        const double x = solve_on_piece(p, target, x_guess), half = 0.5 * (p->wb - p->wa);
        const double wv = 0.5 * (p->wa + p->wb) + half * x, dIdx = clenshaw(p->d, INTERP_N - 1, x);
        x_guess = x + M_PI / dIdx; /* the next level, one quantum on */
        const double b = pow(wv, 1 / alpha), dIdw = dIdx / half;
        const double half_period = -dIdw * alpha * pow(b, alpha - 1); /* dI/dE = -dI/dw dw/db */
        wkb_level *L = &levels[v];
        memset(L, 0, sizeof *L);
        L->v = (double)v;
        L->binding = b;
        L->energy = w->top - b;
        L->error = p->err_E + floor_error;
        L->dEdv = M_PI / half_period;
        L->Bv = clenshaw(p->cb, INTERP_N, x);
        L->status = WKB_SUCCESS;
        L->rule = WKB_RULE_FIRST;
        if (!(half_period > 0) || !isfinite(L->Bv))
            return 1;
        wkb_error e;
        if (wkb_well_turning_points(w, b, &L->r_inner, &L->r_outer, &e))
            return 1;
        w->last_tp[0] = L->r_inner; /* Newton for the next level's turning points starts here */
        w->last_tp[1] = L->r_outer;
        w->have_last_tp = 1;
    }

    /* the check: the top and a middle level against direct orbits */
    const size_t checks[2] = {n - 1, n / 2};
    for (int c = 0; c < 2; c++) {
        wkb_level *L = &levels[checks[c]];
        wkb_orbit o;
        wkb_error e;
        if (wkb_orbit_at(w, L->binding, &o, NULL, &e))
            return 1;
        const double off = fabs(o.action - M_PI * (L->v + w->phase)) / o.half_period;
        if (!(off <= INTERP_CHECK_FACTOR * tol))
            return 1;
        L->error = GSL_MAX(L->error, off + floor_error);
    }
    /* accepted: the levels become the first guesses and brackets of later single-level calls (only
       now, so that a declined run leaves the direct sweep no inaccurate brackets) */
    for (size_t v = 0; v < n && v < w->cache_size; v++) {
        const double b = levels[v].binding, half_period = M_PI / levels[v].dEdv;
        w->cache_w[v] = pow(b, alpha);
        w->cache_slope[v] = -alpha / (half_period * pow(b, 1 - alpha)); /* dw/dI */
        w->cache_ok[v] = 1;
    }
    return 0;
}
