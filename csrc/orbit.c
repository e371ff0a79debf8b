/* orbit.c: one classical orbit in the well of V_J(r) = V(r) + eps*rot/r^2.
 *
 * The well analysis (minimum, extrema, detection of extra wells and barriers), the
 * turning points, and the phase integrals over one orbit: the action
 * I(E) = integral k dr with k = sqrt((E - V_J)/eps), the half period dI/dE, and orbit
 * averages <f> = integral f/k dr / integral 1/k dr (Bv, dV/dp).
 *
 * Quadrature: the orbit is cut at the minimum r_b. On [r1, r_b] the map r = r1 + (r_b - r1) s^2
 * removes the square-root end point. On [r_b, r2]: a compact orbit uses r = r2 - (r2 - r_b) s^2;
 * a long one under an inverse-power tail uses y = ln r, with y = y2 - L s^2 on the last piece
 * next to r2 and plain pieces between, so that orbits whose outer turning point lies hundreds
 * of r_e out (near dissociation) are integrated as accurately as compact ones; an exponential
 * tail is smooth in r itself and keeps linear pieces. At threshold (E = asymptote, J = 0) the
 * last piece maps [r_T, infinity) by t = (r_T/r)^q with q = (n-2)/2 for a -C_n/r^n tail, which
 * makes the integrand regular at t = 0. All pieces use Gauss-Legendre rules; in the s^2 maps
 * every integrand is even in s, so only the positive half of a symmetric rule is evaluated.
 * Accuracy (tests/test_wkb.py): ~1e-15 relative on the action, <= 1e-12 on period and Bv, on wells the
 * 32-node rule resolves; the level path (settings.check_nodes) checks that per well at set-up and doubles
 * the nodes where it does not (quadrature_rules.c; tests/test_quadrature_accuracy.py).
 * Energies near the asymptote are handled as binding energies b = D - E and the kinetic
 * term as depth(r) - b, so nothing cancels there.
 */
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include <gsl/gsl_math.h>

#include "wkb.h"
#include "well.h"

#define END_PIECE_LOG_LENGTH 1.0   /* length in ln r of the piece next to the outer turning point */
#define MIDDLE_PIECE_LOG_LENGTH 1.5
#define COMPACT_LOG_LENGTH 0.5 /* orbits with r2 < 1.65 r_b use a linear map on the outer side */
#define THRESHOLD_TAIL_LOG_START 3.0 /* the tail piece starts at r_b e^3 */
#define OUTER_SCALES 4.0 /* the last outer piece spans at most this many local lengths |V'/V''| at r2 */
/* the outer side of an orbit up to this many of those lengths (an exponential tail), or up to this many
   times the end piece's log length (an inverse-power tail), is one piece of the 2n-point half rule (n
   nodes) instead of a plain piece and that rule (2n nodes). The actions at every level of the test wells
   (Morse, EMO, Lennard-Jones, MLR; J = 0 and 20) moved by <= 3e-15 relative, their levels against the
   256-node rule by <= 1e-11 cm-1 (3 lengths or 3 times gave the same) */
#define OUTER_LONG_SCALES 2.0
#define POWER_LONG_FACTOR 2.0

wkb_settings wkb_default_settings(void)
{
    wkb_settings s;
    s.nodes = 32;
    s.check_nodes = 0;
    s.energy_tol = 1e-11;
    s.max_newton = 60;
    s.scan_points = 160;
    s.order = 1;
    s.ends = WKB_ENDS_MASLOV;
    s.match_fraction = WKB_MATCH_FRACTION;
    s.match_decay = 10;
    s.match_ode_tol = 1e-9;
    s.match_rule = 0;
    s.match_milne = 1;
    return s;
}

wkb_well *wkb_well_alloc(const wkb_settings *settings)
{
    wkb_well *w = calloc(1, sizeof *w);
    if (!w)
        return NULL;
    w->set = settings ? *settings : wkb_default_settings();
    if (w->set.nodes < 4 || w->set.nodes > 2000 || w->set.nodes % 2 || w->set.scan_points < 16 || w->set.max_newton < 1 ||
        (w->set.order != 1 && w->set.order != 2) || (w->set.ends != WKB_ENDS_MASLOV && w->set.ends != WKB_ENDS_MATCHED) ||
        !(w->set.match_fraction >= 0.05 && w->set.match_fraction <= 0.95) || !(w->set.match_decay >= 5) ||
        !(w->set.match_ode_tol > 0))
        goto fail;
    w->base_nodes = w->set.nodes;
    w->scan_r = malloc(w->set.scan_points * sizeof(double));
    w->scan_V = malloc(w->set.scan_points * sizeof(double));
    if (!w->scan_r || !w->scan_V || wkb_rules_make(w, 0))
        goto fail;
    wkb_rules_use(w, 0);
    return w;
fail:
    wkb_well_free(w);
    return NULL;
}

void wkb_well_free(wkb_well *w)
{
    if (!w)
        return;
    free(w->scan_r);
    free(w->scan_V);
    for (int k = 0; k < WKB_RULE_LEVELS; k++)
        free(w->rules[k].owned);
    free(w->cache_w);
    free(w->cache_slope);
    free(w->cache_ok);
    wkb_matched_free(w->matched);
    free(w);
}

/* V_J and its derivatives; depth becomes D - V_J. */
static void effective(const wkb_well *w, double r, wkb_pot_value *pv)
{
    wkb_potential_eval(&w->pot, r, pv);
    if (w->rot != 0) {
        const double ir = 1 / r, c = w->eps * w->rot * ir * ir;
        pv->V += c;
        pv->depth -= c;
        pv->dV -= 2 * c * ir;
        pv->d2V += 6 * c * ir * ir;
    }
}

/* The kinetic term E - V_J(r), in the form without cancellation for this energy. */
typedef struct {
    double E, b;
    int top_form;
} energy_point;

static double kinetic(const wkb_well *w, const energy_point *e, double r, wkb_pot_value *pv)
{
    effective(w, r, pv);
    return e->top_form ? pv->depth - e->b : e->E - pv->V;
}

/* Safeguarded Newton (bisection fallback) for a zero of g in [lo, hi], g(lo) g(hi) <= 0.
   mode 0: g = kinetic term (turning point); mode 1: g = dV_J/dr (minimum). */
static int solve_in_bracket(const wkb_well *w, const energy_point *e, int mode, double lo, double hi,
                            double *root)
{
    wkb_pot_value pv;
    double glo = mode ? (effective(w, lo, &pv), pv.dV) : kinetic(w, e, lo, &pv);
    double ghi = mode ? (effective(w, hi, &pv), pv.dV) : kinetic(w, e, hi, &pv);
    if (glo == 0) {
        *root = lo;
        return WKB_SUCCESS;
    }
    if (ghi == 0) {
        *root = hi;
        return WKB_SUCCESS;
    }
    if ((glo > 0) == (ghi > 0) || !isfinite(glo) || !isfinite(ghi))
        return WKB_ENUMERIC;
    const int rising = ghi > 0;
    double x = 0.5 * (lo + hi);
    for (int it = 0; it < 200; it++) {
        double g, dg;
        if (mode) {
            effective(w, x, &pv);
            g = pv.dV;
            dg = pv.d2V;
        } else {
            g = kinetic(w, e, x, &pv);
            dg = -pv.dV;
        }
        if (!isfinite(g))
            return WKB_ENUMERIC;
        if (g == 0) {
            *root = x;
            return WKB_SUCCESS;
        }
        if ((g > 0) == rising)
            hi = x;
        else
            lo = x;
        double xn = x - g / dg;
        if (!(xn > lo && xn < hi) || !isfinite(xn))
            xn = 0.5 * (lo + hi);
        const double dx = fabs(xn - x);
        x = xn;
        if (dx <= 4 * GSL_DBL_EPSILON * fabs(x) || hi - lo <= 4 * GSL_DBL_EPSILON * fabs(x)) {
            *root = x;
            return WKB_SUCCESS;
        }
    }
    *root = x;
    return WKB_SUCCESS; /* bracket has shrunk to rounding level in any case */
}

int wkb_well_set(wkb_well *w, const wkb_potential *pot, double mu, double rot, int maslov_in,
                 int maslov_out, wkb_error *err)
{
    w->ready = 0;
    wkb_rules_use(w, 0);
    w->quad_error = 0;
    w->have_last_tp = 0;
    w->vD_status = -1;
    w->v_th_status = -1;
    w->count = 0;
    w->requested_v_end = 0;
    if (!(isfinite(mu) && mu > 0))
        return wkb_fail(err, WKB_EINVAL, "reduced mass mu=%g is invalid: it must be a finite number > 0 (u)", mu);
    if (!(isfinite(rot) && rot >= 0))
        return wkb_fail(err, WKB_EINVAL, "rotational factor %g is invalid: J(J+1) must be finite and >= 0", rot);
    if ((maslov_in != 1 && maslov_in != 2) || (maslov_out != 1 && maslov_out != 2))
        return wkb_fail(err, WKB_EINVAL,
                        "Maslov indices (%d, %d) are invalid: each end is 1 (smooth turning point) or 2 (hard wall)",
                        maslov_in, maslov_out);
    w->pot = *pot;
    w->eps = WKB_HBAR2_OVER_2U / mu;
    w->rot = rot;
    w->phase = 0.25 * (maslov_in + maslov_out);
    w->top = wkb_potential_asymptote(pot);
    w->tail_power = pot->model->tail_power(pot);

    /* scan V_J on a logarithmic grid */
    const double r_hint = pot->model->r_min(pot);
    double r_lo = pot->model->r_inner_scan(pot), r_hi = 60 * r_hint;
    if (!(r_lo > 0 && r_hi > r_lo && isfinite(r_hi)))
        return wkb_fail(err, WKB_EINVAL, "cannot choose a range of r for this potential (%g .. %g A)", r_lo, r_hi);
    /* The scan must cover every r where V_J lies below the asymptote, or an inner well or
       barrier beyond a model's hint (an MLR turning over inside re) goes unseen and its levels
       come out silently wrong: step inwards until V_J reaches the asymptote (or r ~ 0). */
    {
        wkb_pot_value pv;
        effective(w, r_hint, &pv);
        /* a wall within 1e-8 of the depth below the asymptote (a Poeschl-Teller plateau) counts as reached */
        const double flat = 1e-8 * fabs(w->top - pv.V);
        for (int k = 0; k < 400 && r_lo > 1e-6 * r_hint; k++) {
            effective(w, r_lo, &pv);
            if (!(pv.V < w->top - flat))
                break;
            r_lo *= 0.9;
        }
    }
    const size_t n = w->set.scan_points;
    const double step = log(r_hi / r_lo) / (double)(n - 1);
    size_t imin = 0;
    /* the grid by a running product, restarted from exp every 16 points (an exp a point cost a
       quarter of the set-up of a cheap model); the grid's points need no more accuracy than that */
    const double ratio = exp(step);
    for (size_t i = 0; i < n; i++) {
        wkb_pot_value pv;
        w->scan_r[i] = i % 16 == 0 ? r_lo * exp(step * (double)i) : w->scan_r[i - 1] * ratio;
        effective(w, w->scan_r[i], &pv);
        if (!isfinite(pv.V))
            return wkb_fail(err, WKB_ENUMERIC, "the potential is not finite at r=%g A (V=%g)", w->scan_r[i], pv.V);
        w->scan_V[i] = pv.V;
        if (pv.V < w->scan_V[imin])
            imin = i;
    }
    w->n_scan = n;
    if (imin == 0 || imin == n - 1)
        return wkb_fail(err, WKB_ENOWELL,
                        "the potential has no well%s: V%s decreases monotonically towards %s r in %g..%g A",
                        rot > 0 ? " at this rotation" : "",
                        rot > 0 ? "(r) + J(J+1) hbar^2/(2 mu r^2)" : "(r)", imin == 0 ? "small" : "large", r_lo, r_hi);
    w->i_bottom = imin;
    {
        double rb;
        if (solve_in_bracket(w, NULL, 1, w->scan_r[imin - 1], w->scan_r[imin + 1], &rb))
            rb = w->scan_r[imin];
        wkb_pot_value pv;
        effective(w, rb, &pv);
        w->r_bottom = rb;
        w->bottom = pv.V;
    }
    {
        double inner_top = w->scan_V[0];
        for (size_t i = 1; i < imin; i++)
            inner_top = GSL_MAX(inner_top, w->scan_V[i]);
        w->bound_top = GSL_MIN(w->top, inner_top);
    }
    /* local extrema (for detecting extra wells and barriers) */
    /* Steps within a few rounding units are flat: on a tail at the asymptote, rounding noise
       would otherwise make spurious extrema there and refuse levels just below threshold (Morse
       curves with vD near an integer). An extremum is where the last non-flat step changes sign. */
    w->n_ext = 0;
    int last_sign = 0;
    for (size_t i = 1; i < n; i++) {
        const double d = w->scan_V[i] - w->scan_V[i - 1];
        const double tol = 16 * GSL_DBL_EPSILON * GSL_MAX(fabs(w->scan_V[i]), fabs(w->scan_V[i - 1]));
        const int sign = d > tol ? 1 : (d < -tol ? -1 : 0);
        if (sign == 0)
            continue;
        if (last_sign != 0 && sign != last_sign) {
            if (w->n_ext == MAX_EXTREMA)
                return wkb_fail(err, WKB_EINVAL, "the potential oscillates: more than %d extrema in %g..%g A",
                                MAX_EXTREMA, r_lo, r_hi);
            w->ext[w->n_ext++] = i - 1;
        }
        last_sign = sign;
    }
    w->ready = 1;
    if (w->set.check_nodes)
        wkb_rules_check(w);
    return WKB_SUCCESS;
}

double wkb_well_bottom(const wkb_well *w) { return w->bottom; }
double wkb_well_top(const wkb_well *w) { return w->top; }
size_t wkb_well_orbits(const wkb_well *w) { return w->n_orbits; }
double wkb_well_bound_top(const wkb_well *w) { return w->bound_top; }

/* Counts crossings of V_J = E over the scanned monotone segments and the tail beyond. */
static size_t count_crossings(const wkb_well *w, double E)
{
    size_t count = 0, prev = 0;
    for (size_t k = 0; k <= w->n_ext; k++) {
        const size_t idx = k < w->n_ext ? w->ext[k] : w->n_scan - 1;
        const double a = w->scan_V[prev], b = w->scan_V[idx];
        if (E > GSL_MIN(a, b) && E < GSL_MAX(a, b))
            count++;
        prev = idx;
    }
    /* from the end of the scan to the asymptote */
    {
        const double a = w->scan_V[w->n_scan - 1], b = w->top;
        if (E > GSL_MIN(a, b) && E < GSL_MAX(a, b))
            count++;
    }
    return count;
}

/* Nearest extremum index strictly left / right of the bottom (or the scan end). */
static size_t branch_end(const wkb_well *w, int right)
{
    size_t j = right ? w->n_scan - 1 : 0;
    for (size_t k = 0; k < w->n_ext; k++) {
        const size_t idx = w->ext[k];
        if (right && idx > w->i_bottom && idx < j)
            j = idx;
        if (!right && idx < w->i_bottom && idx > j)
            j = idx;
    }
    return j;
}

/* Halley steps (V'' comes with V') from the last orbit's turning point, kept inside the monotone
   branch (lo, hi); returns 1 on convergence. Consecutive orbits of a level search are close, so this
   usually takes 1-2 steps instead of a search over the scan. The error after a step s is ~ s^3/l^2
   (l = |V'/V''|, r/13 on a Lennard-Jones wall): below rounding once s <= WARM_STEP r, so no step is
   taken only to confirm (Newton to a step of 4 eps r took 3-4 evaluations a side). */
#define WARM_STEP 1e-7
static int warm_turning_point(const wkb_well *w, const energy_point *e, double r, double lo, double hi,
                              double *r_tp)
{
    wkb_pot_value pv;
    for (int it = 0; it < 8; it++) {
        const double g = kinetic(w, e, r, &pv);
        const double rn = r + 2 * g * pv.dV / (2 * pv.dV * pv.dV + g * pv.d2V); /* Halley, one division */
        if (!(rn > lo && rn < hi))
            return 0;
        const double dr = fabs(rn - r);
        r = rn;
        if (dr <= WARM_STEP * r) {
            *r_tp = r;
            return 1;
        }
    }
    return 0;
}

/* A cold start without a search: the stored scan (V_J at its points) brackets the turning point with no
   evaluation, and Halley steps from the chord between the two scan points (a few % of r apart) converge
   as a warm start does, in two or three evaluations instead of the ~15 of the evaluated bisection and
   solve_in_bracket. 0 where the scan cannot tell (the energy above the branch's last scan point, the
   minimum on the far side of a scan point) or Halley leaves the bracket: the caller then searches. */
static int scan_turning_point(const wkb_well *w, const energy_point *e, int right, size_t j, double *r_tp)
{
    if (!(e->E < w->scan_V[j]))
        return 0;
    size_t in = w->i_bottom, out = j; /* E > V at 'in' (the bottom side), E <= V at 'out' */
    while ((in > out ? in - out : out - in) > 1) {
        const size_t mid = (in + out) / 2;
        if (e->E > w->scan_V[mid])
            in = mid;
        else
            out = mid;
    }
    double r_in = w->scan_r[in], V_in = w->scan_V[in];
    if (in == w->i_bottom) {
        r_in = w->r_bottom;
        V_in = w->bottom;
        if ((right && r_in > w->scan_r[out]) || (!right && r_in < w->scan_r[out]))
            return 0;
    }
    const double g_in = e->E - V_in, g_out = e->E - w->scan_V[out], r_out = w->scan_r[out];
    if (!(g_in > 0 && g_out <= 0))
        return 0;
    const double guess = r_in + (r_out - r_in) * g_in / (g_in - g_out);
    return warm_turning_point(w, e, guess, GSL_MIN(r_in, r_out), GSL_MAX(r_in, r_out), r_tp);
}

static int find_turning_point(const wkb_well *w, const energy_point *e, int right, double *r_tp,
                              wkb_error *err)
{
    wkb_pot_value pv;
    const size_t j = branch_end(w, right);
    double lo, hi;
    if (w->have_last_tp) {
        const double branch_lo = right ? w->r_bottom : (j == 0 ? 0.0 : w->scan_r[j]);
        const double branch_hi = right ? (j == w->n_scan - 1 ? INFINITY : w->scan_r[j]) : w->r_bottom;
        if (warm_turning_point(w, e, w->last_tp[right], branch_lo, branch_hi, r_tp))
            return WKB_SUCCESS;
    }
    if (scan_turning_point(w, e, right, j, r_tp))
        return WKB_SUCCESS;
    if (kinetic(w, e, w->scan_r[j], &pv) <= 0) {
        /* bisection over the monotone branch between the bottom and scan point j */
        size_t in = w->i_bottom, out = j; /* kinetic > 0 at 'in' side (bottom), <= 0 at 'out' */
        while ((in > out ? in - out : out - in) > 1) {
            const size_t mid = (in + out) / 2;
            if (kinetic(w, e, w->scan_r[mid], &pv) > 0)
                in = mid;
            else
                out = mid;
        }
        double r_in = w->scan_r[in];
        if (in == w->i_bottom)
            r_in = w->r_bottom;
        if ((right && r_in > w->scan_r[out]) || (!right && r_in < w->scan_r[out]))
            r_in = w->scan_r[in];
        lo = GSL_MIN(r_in, w->scan_r[out]);
        hi = GSL_MAX(r_in, w->scan_r[out]);
    } else if (right && j == w->n_scan - 1) {
        double r = w->scan_r[j];
        int steps = 0; /* bounded even if r_bottom is not finite: 2^200 is far beyond any orbit */
        while (kinetic(w, e, r, &pv) > 0) {
            r *= 2;
            if (r > 1e12 * w->r_bottom || ++steps > 200)
                return wkb_fail(err, WKB_ENOLEVEL,
                                "no outer turning point at E=%.12g cm-1 (binding energy %.6g cm-1): "
                                "the orbit is not bound", e->E, e->b);
        }
        lo = r / 2;
        hi = r;
    } else if (!right && j == 0) {
        double r = w->scan_r[0];
        int steps = 0;
        while (kinetic(w, e, r, &pv) > 0) {
            r *= 0.5;
            if (r < 1e-9 * w->r_bottom || ++steps > 200)
                return wkb_fail(err, WKB_ENOWELL,
                                "no inner turning point at E=%.12g cm-1: the potential wall near r=0 is "
                                "lower than this energy", e->E);
        }
        lo = r;
        hi = 2 * r;
    } else {
        return wkb_fail(err, WKB_EMULTIWELL,
                        "E=%.12g cm-1 lies above the barrier at r=%.6g A (V=%.12g cm-1): more than two "
                        "turning points (a second well or a barrier in the classically allowed region)",
                        e->E, w->scan_r[j], w->scan_V[j]);
    }
    if (solve_in_bracket(w, e, 0, lo, hi, r_tp))
        return wkb_fail(err, WKB_ENUMERIC, "turning point search failed at E=%.12g cm-1 in %g..%g A", e->E,
                        lo, hi);
    return WKB_SUCCESS;
}

/* Sums over one orbit. The nodes are buffered and taken NODE_BLOCK at a time: first every potential
   evaluation of the block (an opaque call each), then the square roots and divisions, which then overlap
   instead of waiting behind the calls (~20 % of a Morse orbit). The sums are taken in node order as before. */
#define NODE_BLOCK 32
typedef struct {
    double action, inv_k, inv_k_r2, curvature;
    double dVdp[WKB_MAX_PARAMS];
    int want_period, want_dVdp;
    size_t n_buf;
    double buf_r[NODE_BLOCK], buf_w[NODE_BLOCK];
} sums;

static void flush_nodes(wkb_well *w, const energy_point *e, sums *s)
{
    const size_t n = s->n_buf;
    double kin[NODE_BLOCK], d2V[NODE_BLOCK];
    for (size_t i = 0; i < n; i++) {
        wkb_pot_value pv;
        kin[i] = kinetic(w, e, s->buf_r[i], &pv);
        d2V[i] = pv.d2V;
    }
    s->n_buf = 0;
    double action = s->action;
    if (!s->want_period) {
        for (size_t i = 0; i < n; i++)
            if (kin[i] > 0) /* (a node within rounding of a turning point: the integrands vanish or are integrable there) */
                action += s->buf_w[i] * sqrt(kin[i]);
        s->action = action;
        return;
    }
    double inv_k = s->inv_k, inv_k_r2 = s->inv_k_r2, curvature = s->curvature;
    for (size_t i = 0; i < n; i++) {
        if (!(kin[i] > 0))
            continue;
        const double r = s->buf_r[i], weight = s->buf_w[i], sk = sqrt(kin[i]);
        action += weight * sk;
        /* 1/sk and 1/r from one division (the divider, with the square root, bounds a node's time) */
        const double inv = 1 / (sk * r), f = weight * r * inv, ir = sk * inv;
        inv_k += f;
        inv_k_r2 += f * ir * ir;
        curvature += f * d2V[i];
        if (s->want_dVdp) {
            const size_t np = w->pot.model->n_params;
            w->pot.model->param_derivs(&w->pot, r, w->dVdp);
            for (size_t k = 0; k < np; k++)
                s->dVdp[k] += f * w->dVdp[k];
        }
    }
    s->action = action;
    s->inv_k = inv_k;
    s->inv_k_r2 = inv_k_r2;
    s->curvature = curvature;
}

static inline void add_node(wkb_well *w, const energy_point *e, double r, double weight, sums *s)
{
    s->buf_r[s->n_buf] = r;
    s->buf_w[s->n_buf] = weight;
    if (++s->n_buf == NODE_BLOCK)
        flush_nodes(w, e, s);
}

/* [r1, rb] with r = r1 + (rb - r1) s^2 */
static void piece_inner(wkb_well *w, const energy_point *e, double r1, double rb, sums *s)
{
    const double L = rb - r1;
    for (size_t i = 0; i < w->set.nodes / 2; i++) {
        const double x = w->even_x[i];
        add_node(w, e, r1 + L * x * x, w->even_w[i] * 2 * L * x, s);
    }
}

/* [rb, r2] with r = r2 - (r2 - rb) s^2, for compact orbits (saves an exp per node) */
static void piece_outer_linear(wkb_well *w, const energy_point *e, double rb, double r2, sums *s)
{
    const double L = r2 - rb;
    for (size_t i = 0; i < w->set.nodes / 2; i++) {
        const double x = w->even_x[i];
        add_node(w, e, r2 - L * x * x, w->even_w[i] * 2 * L * x, s);
    }
}

/* the same over a longer stretch, with the finer rule */
static void piece_outer_linear_long(wkb_well *w, const energy_point *e, double ra, double r2, sums *s)
{
    const double L = r2 - ra;
    for (size_t i = 0; i < w->set.nodes; i++) {
        const double x = w->even2_x[i];
        add_node(w, e, r2 - L * x * x, w->even2_w[i] * 2 * L * x, s);
    }
}

/* Number of pieces of at most max_length covering span; 0 when the span is empty. A NaN or
   infinite span, or one needing more than MAX_PIECES pieces, is refused (returns 1): the count
   would otherwise wrap in the size_t conversion and loop for ever with the GIL released. */
#define MAX_PIECES 100000
static int piece_count(double span, double max_length, size_t *m)
{
    *m = 0;
    if (!(span > 0))
        return isnan(span) ? 1 : 0;
    const double nd = ceil(span / max_length);
    if (!(nd <= MAX_PIECES))
        return 1;
    *m = (size_t)nd;
    return 0;
}

/* [ra, rb], plain in r, split into pieces no longer than max_length */
static int pieces_linear(wkb_well *w, const energy_point *e, double ra, double rb, double max_length, sums *s)
{
    size_t m;
    if (piece_count(rb - ra, max_length, &m))
        return 1;
    if (m == 0)
        return 0;
    const double h = (rb - ra) / (double)m;
    for (size_t k = 0; k < m; k++)
        for (size_t i = 0; i < w->set.nodes; i++)
            add_node(w, e, ra + h * ((double)k + w->gl_x[i]), w->gl_w[i] * h, s);
    return 0;
}

/* [exp(y2 - L), exp(y2)] with y = y2 - L s^2 (square-root end at s = 0) */
static void piece_outer_end(wkb_well *w, const energy_point *e, double y2, double L, sums *s)
{
    for (size_t i = 0; i < w->set.nodes; i++) {
        const double x = w->even2_x[i], r = exp(y2 - L * x * x);
        add_node(w, e, r, w->even2_w[i] * 2 * L * x * r, s);
    }
}

/* [exp(ya), exp(yb)], plain in y = ln r */
static void piece_log(wkb_well *w, const energy_point *e, double ya, double yb, sums *s)
{
    const double L = yb - ya;
    for (size_t i = 0; i < w->set.nodes; i++) {
        const double r = exp(ya + L * w->gl_x[i]);
        add_node(w, e, r, w->gl_w[i] * L * r, s);
    }
}

/* [rT, infinity) with t = (rT/r)^q */
static void piece_tail(wkb_well *w, const energy_point *e, double rT, double q, sums *s)
{
    for (size_t i = 0; i < w->set.nodes; i++) {
        const double t = w->gl_x[i], r = q == 1 ? rT / t : rT * pow(t, -1 / q);
        add_node(w, e, r, w->gl_w[i] * (r / (q * t)), s);
    }
}

/* splits [ya, yb] into plain log pieces of at most MIDDLE_PIECE_LOG_LENGTH */
static int pieces_log(wkb_well *w, const energy_point *e, double ya, double yb, sums *s)
{
    size_t m;
    if (piece_count(yb - ya, MIDDLE_PIECE_LOG_LENGTH, &m))
        return 1;
    for (size_t k = 0; k < m; k++)
        piece_log(w, e, ya + (yb - ya) * (double)k / (double)m, ya + (yb - ya) * (double)(k + 1) / (double)m, s);
    return 0;
}

/* ---- helpers shared with matched.c through well.h ---- */
void wkb_well_effective(const wkb_well *w, double r, wkb_pot_value *pv) { effective(w, r, pv); }

double wkb_well_kinetic(const wkb_well *w, double binding, double r, wkb_pot_value *pv)
{
    energy_point e;
    e.b = binding;
    e.E = w->top - binding;
    e.top_form = binding < e.E - w->bottom;
    return kinetic(w, &e, r, pv);
}

/* E inside the well and only two turning points there (single-well WKB applies) */
static int check_single_well(const wkb_well *w, double E, wkb_error *err)
{
    if (!(E > w->bottom))
        return wkb_fail(err, WKB_ENOWELL, "E=%.12g cm-1 is below the bottom of the well (%.12g cm-1)", E,
                        w->bottom);
    if (count_crossings(w, E) > 2)
        return wkb_fail(err, WKB_EMULTIWELL,
                        "at E=%.12g cm-1 the potential has more than two turning points (a second well or a "
                        "barrier in the classically allowed region); single-well WKB does not apply", E);
    return WKB_SUCCESS;
}

int wkb_well_turning_points(wkb_well *w, double binding, double *r1, double *r2, wkb_error *err)
{
    energy_point e;
    int status;
    e.b = binding;
    e.E = w->top - binding;
    e.top_form = binding < e.E - w->bottom;
    if (!(binding > 0) || !isfinite(binding))
        return wkb_fail(err, WKB_ENOLEVEL, "binding energy %.6g cm-1 is invalid: give a finite value > 0", binding);
    if ((status = check_single_well(w, e.E, err)))
        return status;
    if ((status = find_turning_point(w, &e, 0, r1, err)) || (status = find_turning_point(w, &e, 1, r2, err)))
        return status;
    return WKB_SUCCESS;
}

int wkb_well_crossing(const wkb_well *w, double binding, double lo, double hi, double *root)
{
    energy_point e;
    e.b = binding;
    e.E = w->top - binding;
    e.top_form = binding < e.E - w->bottom;
    return solve_in_bracket(w, &e, 0, lo, hi, root);
}

static int orbit_integrals(wkb_well *w, double binding, wkb_orbit *orbit, double *avg_dVdp, int action_only,
                           wkb_error *err);

int wkb_orbit_at(wkb_well *w, double binding, wkb_orbit *orbit, double *avg_dVdp, wkb_error *err)
{
    return orbit_integrals(w, binding, orbit, avg_dVdp, 0, err);
}

int wkb_orbit_action_at(wkb_well *w, double binding, wkb_orbit *orbit, wkb_error *err)
{
    return orbit_integrals(w, binding, orbit, NULL, 1, err);
}

/* the phase integrals of one orbit; action_only: the action and the turning points alone (the period,
   Bv and curvature sums, a third of the work a node, are skipped and left NaN) */
static int orbit_integrals(wkb_well *w, double binding, wkb_orbit *orbit, double *avg_dVdp, int action_only,
                           wkb_error *err)
{
    int status;
    w->n_orbits++;
    if (!w->ready)
        return wkb_fail(err, WKB_EINVAL, "the well has not been set up");
    energy_point e;
    e.b = binding;
    e.E = w->top - binding;
    e.top_form = binding < e.E - w->bottom;
    if (!(binding >= 0) || !isfinite(binding))
        return wkb_fail(err, WKB_ENOLEVEL,
                        "E=%.12g cm-1 is above the dissociation asymptote %.12g cm-1: no bound orbit", e.E, w->top);
    if ((status = check_single_well(w, e.E, err)))
        return status;

    const int infinite = binding == 0 && w->rot == 0;
    double r1, r2 = INFINITY;
    if ((status = find_turning_point(w, &e, 0, &r1, err)))
        return status;
    if (!infinite && (status = find_turning_point(w, &e, 1, &r2, err)))
        return status;
    if (!(r1 > 0) || !isfinite(r1) || (!infinite && (!(r2 > r1) || !isfinite(r2))))
        return wkb_fail(err, WKB_ENUMERIC,
                        "the turning points at E=%.12g cm-1 are not finite positive distances (%g, %g A): the "
                        "potential parameters are outside the range the quadrature can handle", e.E, r1, r2);
    int bad_span = 0;

    w->last_tp[0] = r1;
    if (!infinite) {
        w->last_tp[1] = r2;
        w->have_last_tp = 1;
    }
    const double rb = GSL_MIN(GSL_MAX(w->r_bottom, r1), r2);
    sums s;
    memset(&s, 0, sizeof s);
    s.want_period = !infinite && !action_only;
    s.want_dVdp = avg_dVdp != NULL && w->pot.model->param_derivs != NULL;
    piece_inner(w, &e, r1, rb, &s);
    const double yb = log(rb);
    if (infinite) {
        const double n = w->tail_power;
        if (n != 0 && !(n > 2))
            return wkb_fail(err, WKB_EINVAL,
                            "the tail -C_n/r^n with n=%g <= 2 binds infinitely many levels: no action at the "
                            "asymptote", n);
        const double q = n > 2 ? 0.5 * (n - 2) : 1.0;
        /* (an exponential tail's threshold orbit: one log piece is converged, vD within 3e-14 of the 256-node
           rule's on the Morse and EMO test wells; an inverse-power tail's needs two, one missed by 1e-11) */
        if (n == 0)
            piece_log(w, &e, yb, yb + THRESHOLD_TAIL_LOG_START, &s);
        else
            bad_span |= pieces_log(w, &e, yb, yb + THRESHOLD_TAIL_LOG_START, &s);
        piece_tail(w, &e, exp(yb + THRESHOLD_TAIL_LOG_START), q, &s);
    } else {
        /* the length over which the potential changes near r2, |V_J'/V_J''|: 1/a under an
           exponential tail, r/(n+1) under -C_n/r^n, the orbit's size near the bottom; pieces are
           kept within a few of these */
        wkb_pot_value pv;
        effective(w, r2, &pv);
        const double scale = OUTER_SCALES * fabs(pv.dV / pv.d2V);
        if (w->tail_power == 0) {
            /* an exponential tail is smooth on that scale in r itself: linear pieces save an exp per node */
            if (r2 - rb <= scale) {
                piece_outer_linear(w, &e, rb, r2, &s);
            } else if (r2 - rb <= OUTER_LONG_SCALES * scale) {
                piece_outer_linear_long(w, &e, rb, r2, &s);
            } else {
                bad_span |= pieces_linear(w, &e, rb, r2 - scale, 1.5 * scale, &s);
                piece_outer_linear_long(w, &e, r2 - scale, r2, &s);
            }
        } else {
            const double y2 = log(r2), Y = y2 - yb, L_end = GSL_MIN(END_PIECE_LOG_LENGTH, scale / r2);
            if (Y <= GSL_MIN(COMPACT_LOG_LENGTH, L_end)) {
                if (Y > 0)
                    piece_outer_linear(w, &e, rb, r2, &s);
            } else if (Y <= POWER_LONG_FACTOR * L_end) {
                piece_outer_end(w, &e, y2, Y, &s);
            } else {
                bad_span |= pieces_log(w, &e, yb, y2 - L_end, &s);
                piece_outer_end(w, &e, y2, L_end, &s);
            }
        }
    }

    flush_nodes(w, &e, &s);
    if (bad_span)
        return wkb_fail(err, WKB_ENUMERIC,
                        "the orbit at E=%.12g cm-1 (turning points %g, %g A) would need more than %d quadrature "
                        "pieces or has a non-finite length scale: the potential parameters are outside the range "
                        "the quadrature can handle", e.E, r1, r2, MAX_PIECES);
    const double se = sqrt(w->eps);
    orbit->energy = e.E;
    orbit->binding = binding;
    orbit->r_inner = r1;
    orbit->r_outer = r2;
    orbit->action = s.action / se;
    orbit->half_period = infinite ? INFINITY : (action_only ? NAN : s.inv_k / (2 * se));
    orbit->Bv = infinite ? 0 : (action_only ? NAN : w->eps * s.inv_k_r2 / s.inv_k);
    orbit->curvature_integral = infinite || action_only ? NAN : s.curvature;
    if (avg_dVdp) {
        const size_t np = w->pot.model->n_params;
        for (size_t k = 0; k < np; k++)
            avg_dVdp[k] = (s.want_dVdp && !infinite) ? s.dVdp[k] / s.inv_k : NAN;
    }
    if (!isfinite(orbit->action) || (!infinite && !action_only && !(orbit->half_period > 0)))
        return wkb_fail(err, WKB_ENUMERIC, "the phase integrals are not finite at E=%.12g cm-1", e.E);
    return WKB_SUCCESS;
}
