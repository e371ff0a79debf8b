/* action_interpolant.c: all first-order levels of a well from an interpolant of the action.
 *
 * The action I (and the orbit average Bv) is a smooth function of w = b^alpha across the well (b the
 * binding energy, alpha as in quantize.c): analytic in E at the bottom, and near threshold a series in
 * w (LeRoy-Bernstein) for a pure -C_n/r^n tail. So 9 or 17 orbits at Chebyshev-Lobatto nodes in w give
 * I(w) to rounding on a piece of the well, and every level there is a root of a polynomial,
 * I(w_v) = pi (v + phase): a few floating-point operations instead of about one orbit.
 * Pieces: one piece across the whole well is tried over a pure power tail (Lennard-Jones converges).
 * Where the threshold end is singular (Bv ~ 1/ln^2 b under an exponential tail; MLR and EMO tails
 * that are not pure powers) the highest piece is split at INTERP_TOP_SPLIT of its w range from the
 * top, so that the pieces shrink geometrically towards w = 0, until the highest holds at most
 * INTERP_DIRECT_LEVELS levels: those few are left to the direct solver (quantize.c), which starts
 * them from the interpolated levels below (about one orbit each). Other pieces that fail are halved.
 * All within an orbit budget of half the levels; a piece that would exceed it declines the run.
 *
 * Accuracy (stated: INTERP_TOL + 4e-14 of the depth in energy, Bv to INTERP_BV_REL of its largest
 * value): a piece is accepted when its last two Chebyshev coefficients, turned into energy by the
 * largest dE/dI on the piece, are below that, first with the 8-interval rule (its even nodes), else
 * with the 16-interval one; then the highest and a middle interpolated level are checked against
 * direct orbits. Where the 8-interval tail promises no convergence at 16 either, the piece is split
 * after 7 orbits. Anything that fails declines, and the caller solves the levels directly: rotating
 * wells, point-wise curves and wells of fewer than INTERP_MIN_LEVELS levels are not tried.
 * Turning points come from the potential at each level's energy (Newton from their extrapolation
 * over the levels below), not from the interpolant (they have a square-root end at the bottom).
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
#define INTERP_MIN_LEVELS 40   /* below this a direct sweep (about one orbit a level) is as cheap */
#define INTERP_TOP_SPLIT 0.33   /* a highest piece is split at this fraction of its w range from the top */
#define INTERP_DIRECT_LEVELS 12 /* a highest piece that fails with at most this many levels: direct */
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
    int degree;                 /* INTERP_N, or INTERP_N / 2 where that has converged */
    int tried;                  /* the highest degree built (INTERP_N / 2 where the screen gave up) */
} piece;

typedef struct {
    double w, I, Bv, inv_dEdI; /* inv_dEdI: half_period (dI/dE); 0 where unknown (the ends) */
} node;

static double w_exponent_of(const wkb_well *w)
{
    const double n = w->tail_power;
    return n > 2 ? (n - 2) / (2 * n) : 0.5;
}

/* coefficients of the interpolant through f_k at x_k = cos(pi k/N), k = 0..N (DCT-I); stride: f_k is
   f[k * stride] (stride 2 on the 16-node values gives the 8-node interpolant) */
/* cos(pi m / INTERP_N), m = 0 .. 2 INTERP_N - 1: the nodes and the DCT-I (computing them each time cost
   as much as an orbit per piece) */
static const double cos_table[2 * INTERP_N] = {
    1.0, 0.9807852804032304, 0.9238795325112867, 0.8314696123025452,
    0.7071067811865476, 0.5555702330196023, 0.38268343236508984, 0.19509032201612833,
    6.123233995736766e-17, -0.1950903220161282, -0.3826834323650897, -0.555570233019602,
    -0.7071067811865475, -0.8314696123025453, -0.9238795325112867, -0.9807852804032304,
    -1.0, -0.9807852804032304, -0.9238795325112868, -0.8314696123025455,
    -0.7071067811865477, -0.5555702330196022, -0.38268343236509034, -0.19509032201612866,
    -1.8369701987210297e-16, 0.1950903220161283, 0.38268343236509, 0.5555702330196018,
    0.7071067811865474, 0.8314696123025452, 0.9238795325112865, 0.9807852804032303};

static void lobatto_coefficients(const double *f, int N, int stride, double *c)
{
    const int scale = INTERP_N / N; /* N = INTERP_N or INTERP_N / 2 */
    for (int j = 0; j <= N; j++) {
        double s = 0;
        for (int k = 0; k <= N; k++) {
            const double t = f[k * stride] * cos_table[((j * k) & (2 * N - 1)) * scale]; /* 2N: a power of 2 */
            s += (k == 0 || k == N) ? 0.5 * t : t;
        }
        c[j] = 2 * s / N;
    }
    c[0] *= 0.5;
    c[N] *= 0.5;
}

static void derivative_coefficients(const double *c, int N, double *d)
{
    d[N] = 0;
    d[N - 1] = 2 * N * c[N];
    for (int j = N - 1; j >= 1; j--)
        d[j - 1] = d[j + 1] + 2 * j * c[j];
    d[0] *= 0.5;
}

/* b = w^(1/alpha), by multiplication for the common exponents (a -C_6/r^6 or an exponential tail) */
static double binding_of(double wv, double alpha)
{
    if (alpha == 0.5)
        return wv * wv;
    if (alpha == 1.0 / 3)
        return wv * wv * wv;
    return pow(wv, 1 / alpha);
}

/* an orbit at w as a node; nonzero if the orbit fails */
static int orbit_node(wkb_well *w, double alpha, double wv, node *nd, size_t *n_orbits)
{
    wkb_orbit o;
    wkb_error e;
    ++*n_orbits;
    if (wkb_orbit_at(w, binding_of(wv, alpha), &o, NULL, &e))
        return 1;
    nd->w = wv;
    nd->I = o.action;
    nd->Bv = o.Bv;
    nd->inv_dEdI = o.half_period;
    return 0;
}

/* the last two Chebyshev coefficients of the interpolant through f at the N + 1 nodes (stride apart) */
static double coefficient_tail(const double *f, int N, int stride, double *c)
{
    lobatto_coefficients(f, N, stride, c);
    return fabs(c[N - 1]) + fabs(c[N]);
}

/* Builds the piece between two end nodes: 0 built (p->err_E says how well; INFINITY: refine it), 1 an
   orbit failed. The even nodes alone are the 8-interval rule: where it has converged already (a Morse
   well, whose action is linear in w, a short piece), the piece is kept at that degree after 7 orbits;
   where its tail promises no convergence at 16 either (geometric convergence squares the relative error
   when the degree doubles), the piece is refined after 7 orbits instead of 15. */
static int build_piece(wkb_well *w, double alpha, const node *a, const node *b, double tol, int top, piece *p,
                       size_t *n_orbits)
{
    const int N = INTERP_N, H = INTERP_N / 2;
    double fI[INTERP_N + 1], fB[INTERP_N + 1], max_dEdI = 0, bmax = 0;
    memset(p, 0, sizeof *p);
    p->wa = a->w;
    p->wb = b->w;
    p->Ia = a->I;
    p->Ib = b->I;
    for (int pass = 0; pass < 2; pass++) {
        for (int k = pass; k <= N; k += 2) {
            const double x = cos_table[k]; /* cos(pi k/N); k = 0: x = 1, the w_b end */
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
            max_dEdI = GSL_MAX(max_dEdI, nd.inv_dEdI > 0 ? 1 / nd.inv_dEdI : 0);
            bmax = GSL_MAX(bmax, fabs(nd.Bv));
        }
        const int degree = pass == 0 ? H : N, stride = pass == 0 ? 2 : 1;
        p->tried = degree;
        double cI[INTERP_N + 1], cB[INTERP_N + 1];
        const double tail_I = coefficient_tail(fI, degree, stride, cI) * max_dEdI;
        const double tail_B = coefficient_tail(fB, degree, stride, cB);
        if (tail_I <= tol && tail_B <= INTERP_BV_REL * bmax) { /* converged at this degree */
            p->degree = degree;
            memcpy(p->c, cI, (size_t)(degree + 1) * sizeof(double));
            memcpy(p->cb, cB, (size_t)(degree + 1) * sizeof(double));
            derivative_coefficients(p->c, degree, p->d);
            p->err_E = tail_I;
            return 0;
        }
        /* the 8-node screen: hopeless at 16 too (for a piece reaching the threshold, unless 16 nodes are
           predicted to converge: splitting it is cheap there, as its top part goes to the direct solver) */
        const double scale_I = (fabs(cI[0]) + fabs(cI[1])) * max_dEdI, scale_B = fabs(cB[0]) + fabs(cB[1]);
        const double hopeless = top ? 1 : INTERP_HOPELESS;
        if (pass == 0 && (tail_I * tail_I / scale_I > hopeless * tol ||
                          tail_B * tail_B / scale_B > hopeless * INTERP_BV_REL * bmax))
            break;
    }
    p->err_E = INFINITY;
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

/* the interpolant and its derivative at x together: two Clenshaw recurrences interleaved (d[degree] = 0) */
static void clenshaw_both(const piece *p, double x, double *f, double *df)
{
    double b1 = 0, b2 = 0, e1 = 0, e2 = 0;
    for (int j = p->degree; j >= 1; j--) {
        const double t = 2 * x * b1 - b2 + p->c[j], u = 2 * x * e1 - e2 + p->d[j];
        b2 = b1;
        b1 = t;
        e2 = e1;
        e1 = u;
    }
    *f = x * b1 - b2 + p->c[0];
    *df = x * e1 - e2 + p->d[0];
}

/* Bv of the count levels L of piece p, each holding its x in its Bv field: four Clenshaw recurrences at
   a time, interleaved (one alone waits on its own additions); 1 if one is not finite */
static int piece_bv(const piece *p, wkb_level *L, size_t count)
{
    for (size_t i = 0; i < count; i += 4) {
        const size_t lanes = GSL_MIN(4, count - i);
        double x[4], b1[4] = {0, 0, 0, 0}, b2[4] = {0, 0, 0, 0};
        for (size_t l = 0; l < 4; l++)
            x[l] = L[i + (l < lanes ? l : 0)].Bv;
        for (int j = p->degree; j >= 1; j--)
            for (int l = 0; l < 4; l++) {
                const double t = 2 * x[l] * b1[l] - b2[l] + p->cb[j]; /* Clenshaw: b_j = 2x b_{j+1} - b_{j+2} + c_j */
                b2[l] = b1[l];
                b1[l] = t;
            }
        for (size_t l = 0; l < lanes; l++) {
            L[i + l].Bv = x[l] * b1[l] - b2[l] + p->cb[0];
            if (!isfinite(L[i + l].Bv))
                return 1;
        }
    }
    return 0;
}

/* x on piece p where I = target (I decreasing in w, so in x); x0 a first guess in (-1, 1) or NAN;
   *dIdx receives dI/dx there */
static double solve_on_piece(const piece *p, double target, double x0, double *dIdx)
{
    /* from the guess (extrapolated from the levels below) or the chord, then Newton in x, safeguarded by
       the bracket [-1, 1]. Quadratic convergence: once a step is below 1e-7 the next would be below
       rounding, so that step is the last. */
    double x = x0, lo = -1, hi = 1, dF = NAN;
    if (!(x > -1 && x < 1))
        x = -1 + 2 * (p->Ia - target) / (p->Ia - p->Ib);
    if (!(x > -1 && x < 1))
        x = 0;
    for (int it = 0; it < 50; it++) {
        double F;
        clenshaw_both(p, x, &F, &dF);
        F -= target;
        if (F > 0)
            lo = x; /* I too large: further towards the bottom (larger x) */
        else
            hi = x;
        const double step = dF < 0 ? -F / dF : NAN;
        double xn = x + step;
        const int newton = xn > lo && xn < hi;
        if (!newton)
            xn = 0.5 * (lo + hi);
        x = xn;
        if (newton && fabs(step) <= 1e-7)
            break;
        if (hi - lo <= 1e-15)
            break;
    }
    *dIdx = dF;
    return x;
}

/* one turning point at binding energy b by Halley's method (V'' comes with V') from the guess r inside
   (lo, hi); 0 if it fails. The error after a step of size s is ~ s^3/l^2 (l ~ |V'/V''|, r/13 on a
   Lennard-Jones wall): once s <= TP_STEP r that is below rounding, so no step is taken only to confirm
   convergence. (Newton, quadratic, needed a third evaluation a side for guesses off by > ~3e-5 r.) */
#define TP_STEP 1e-6
static int polish(const wkb_well *w, double b, double r, double lo, double hi, double *root)
{
    for (int it = 0; it < 6; it++) {
        wkb_pot_value pv;
        const double g = wkb_well_kinetic(w, b, r, &pv), s = 2 * g * pv.dV / (2 * pv.dV * pv.dV + g * pv.d2V);
        r += s;
        if (!(r > lo && r < hi))
            return 0;
        if (fabs(s) <= TP_STEP * r) {
            *root = r;
            return 1;
        }
    }
    return 0;
}

/* the turning points of level L (v >= 4, at binding energy b, in a well with one minimum and no barrier)
   by Halley steps from their cubic extrapolation over the four levels below (equally spaced in the
   action): one or two potential evaluations a side (3.1 a level on the Lennard-Jones test well, 2.6 on
   the Morse one; 4.7 and 4.2 by Newton from the quadratic) instead of the search of
   wkb_well_turning_points.
   0 if either fails (the caller then searches). */
static int polished_turning_points(const wkb_well *w, double b, wkb_level *L)
{
    const double g1 = 4 * (L[-1].r_inner + L[-3].r_inner) - 6 * L[-2].r_inner - L[-4].r_inner;
    const double g2 = 4 * (L[-1].r_outer + L[-3].r_outer) - 6 * L[-2].r_outer - L[-4].r_outer;
    double r1 = 0, r2 = 0;
    if (!polish(w, b, g1, 0, w->r_bottom, &r1) || !polish(w, b, g2, w->r_bottom, INFINITY, &r2))
        return 0;
    L->r_inner = r1;
    L->r_outer = r2;
    return 1;
}

int wkb_interpolant_levels(wkb_well *w, wkb_level *levels, size_t n, size_t *done)
{
    *done = 0;
    if (w->set.order != 1 || w->set.ends != WKB_ENDS_MASLOV || w->low_wall || n < INTERP_MIN_LEVELS || w->rot != 0 ||
        w->pot.model == &wkb_model_pointwise || w->count_first != w->count || n > w->count)
        return 1;
    const double alpha = w_exponent_of(w), depth = w->top - w->bottom;
    const double tol = INTERP_TOL + 4e-14 * depth, floor_error = 1e-14 * depth;
    const size_t budget = n / 2; /* orbits: a direct sweep needs about one per level */
    size_t n_orbits = 0, n_pieces = 0;

    /* pieces, ordered by w; a stack of pending intervals (top end first). The levels above I_direct (the
       top of the highest piece) are left to the direct solver: next to the threshold (a logarithmic Bv
       under an exponential tail, a tail that is not a pure power, the barrier of a rotating well just
       above the asymptote) no series converges, and there a few levels cost fewer orbits directly. */
    piece pieces[INTERP_MAX_PIECES];
    node pending[INTERP_MAX_PIECES + 1];
    size_t n_pending = 0;
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
    /* w = 0 is a singular point of an exponential tail's Bv and of a rotating well's action (the barrier
       top lies just above): the highest piece is not tried but halved (towards the threshold the pieces
       shrink geometrically) until it holds few enough levels to solve them directly. Over a pure
       -C_n/r^n tail one piece may span the whole well; once a highest piece failed, later ones are halved
       too. */
    int split_top = w->tail_power == 0 || w->rot != 0, direct_top = 0;
    while (n_pending) {
        const node hi_node = pending[n_pending - 1];
        const int top = n_pieces == 0 && !direct_top;
        if (top && (lo_node.I - hi_node.I) / M_PI <= INTERP_DIRECT_LEVELS && split_top) {
            lo_node = hi_node; /* the highest piece, with few levels: direct */
            n_pending--;
            direct_top = 1;
            continue;
        }
        piece p;
        p.err_E = INFINITY;
        if (!(top && split_top) && (n_orbits + INTERP_N > budget ||
                                    build_piece(w, alpha, &lo_node, &hi_node, tol, top, &p, &n_orbits)))
            return 1;
        split_top |= top;
        if (p.err_E <= tol) {
            if (n_pieces == INTERP_MAX_PIECES)
                return 1;
            pieces[n_pieces++] = p;
            lo_node = hi_node;
            n_pending--;
            continue;
        }
        if (n_pending + n_pieces >= INTERP_MAX_PIECES || n_orbits + INTERP_N / 2 > budget)
            return 1; /* another piece would not fit the budget: decline now */
        /* a piece of fewer levels than the INTERP_N - 1 orbits of its full build failed: its halves (and
           the pieces below, which hold the rest of the well) would cost more orbits than they hold levels,
           so the direct sweep is cheaper. Decline before spending them (the deep MLR test well: 16 orbits
           of the 64-node rule saved) */
        if (!top && p.tried == INTERP_N && (lo_node.I - hi_node.I) / M_PI < INTERP_N)
            return 1;
        node mid;
        const double split = top ? INTERP_TOP_SPLIT : 0.5;
        if (orbit_node(w, alpha, lo_node.w + split * (hi_node.w - lo_node.w), &mid, &n_orbits))
            return 1;
        pending[n_pending++] = mid;
    }
    if (n_pieces == 0)
        return 1;
    const double I_direct = pieces[0].Ia; /* (the top of the well where no level is direct) */

    /* the levels, from the bottom piece up (v = 0 lies on the last piece) */
    size_t k = n_pieces - 1, m = 0;
    double x_guess = NAN, x_prev[3] = {NAN, NAN, NAN};
    size_t n_on_piece = 0, first_on_piece = 0; /* Bv of a piece's levels once it is done (piece_bv) */
    for (size_t v = 0; v < n; v++) {
        const double target = M_PI * ((double)v + w->phase);
        if (target >= I_direct)
            break;
        if (k > 0 && target > pieces[k].Ia) {
            if (piece_bv(&pieces[k], levels + first_on_piece, v - first_on_piece))
                return 1;
            first_on_piece = v;
        }
        while (k > 0 && target > pieces[k].Ia) {
            k--;
            x_guess = NAN;
            n_on_piece = 0;
        }
        const piece *p = &pieces[k];
        if (!(target <= p->Ia && target >= p->Ib))
            return 1;
        double dIdx;
        const double x = solve_on_piece(p, target, x_guess, &dIdx), half = 0.5 * (p->wb - p->wa);
        const double wv = 0.5 * (p->wa + p->wb) + half * x;
        /* the next level, one quantum on: cubic through the last four on this piece (then one Newton step
           on the piece is mostly the last), else quadratic or linear */
        x_guess = n_on_piece >= 3 ? 4 * (x + x_prev[1]) - 6 * x_prev[0] - x_prev[2]
                  : (n_on_piece == 2 ? 3 * (x - x_prev[0]) + x_prev[1] : x + M_PI / dIdx);
        x_prev[2] = x_prev[1];
        x_prev[1] = x_prev[0];
        x_prev[0] = x;
        n_on_piece++;
        const double b = binding_of(wv, alpha), dIdw = dIdx / half;
        const double half_period = -dIdw * alpha * wv / b; /* dI/dE = -dI/dw dw/db, dw/db = alpha w/b */
        wkb_level *L = &levels[v];
        memset(L, 0, sizeof *L);
        L->v = (double)v;
        L->binding = b;
        L->energy = w->top - b;
        L->error = p->err_E + floor_error;
        L->dEdv = M_PI / half_period;
        L->Bv = x; /* Bv(x) by piece_bv */
        L->status = WKB_SUCCESS;
        L->rule = WKB_RULE_FIRST;
        if (!(half_period > 0))
            return 1;
        wkb_error e;
        if (!(v >= 4 && w->n_ext == 1 && polished_turning_points(w, b, levels + v)) &&
            wkb_well_turning_points(w, b, &L->r_inner, &L->r_outer, &e))
            return 1;
        w->last_tp[0] = L->r_inner; /* Newton for the next level's turning points starts here */
        w->last_tp[1] = L->r_outer;
        w->have_last_tp = 1;
        if (v < w->cache_size) { /* w and dw/dI of the level, valid (cache_ok) only once accepted */
            w->cache_w[v] = wv;
            w->cache_slope[v] = 1 / dIdw;
        }
        m = v + 1;
    }
    if (m < 2 || piece_bv(&pieces[k], levels + first_on_piece, m - first_on_piece))
        return 1;

    /* the check: the highest interpolated and a middle level against direct orbits */
    const size_t checks[2] = {m - 1, m / 2};
    for (int c = 0; c < 2; c++) {
        wkb_level *L = &levels[checks[c]];
        wkb_orbit o;
        wkb_error e;
        if (wkb_orbit_action_at(w, L->binding, &o, &e)) /* (its period: the interpolant's, to ~1e-6) */
            return 1;
        const double off = fabs(o.action - M_PI * (L->v + w->phase)) * L->dEdv / M_PI;
        if (!(off <= INTERP_CHECK_FACTOR * tol))
            return 1;
        L->error = GSL_MAX(L->error, off + floor_error);
    }
    /* accepted: the levels become the first guesses and brackets of later single-level calls and of the
       direct levels above I_direct (only now, so that a declined run leaves the direct sweep no
       inaccurate brackets) */
    for (size_t v = 0; v < m && v < w->cache_size; v++)
        w->cache_ok[v] = 1;
    *done = m;
    return 0;
}
