/* well.h: the well workspace, private to orbit.c, quantize.c and the matched rule (matched.c,
   end_solution.c); not part of the public API. */
#ifndef WKBFIT_WELL_H
#define WKBFIT_WELL_H

#include "wkb.h"

#define MAX_EXTREMA 64
#define WKB_RULE_LEVELS 4 /* node counts n, 2n, 4n, 8n */

typedef struct wkb_matched wkb_matched; /* end_solution.c */
#define WKB_DEFECT_NODES 3

struct wkb_well {
    wkb_settings set;
    wkb_potential pot;
    int ready;
    double eps, rot, phase; /* phase = (maslov_in + maslov_out)/4 */
    double top, bottom, r_bottom;
    /* highest energy still confined: the asymptote, or the top of the inner wall where that is lower
       (a Morse curve with a re < ln 2, a Poeschl-Teller well) */
    double bound_top;
    double tail_power;
    size_t n_scan, i_bottom;
    double *scan_r, *scan_V;
    size_t n_ext;
    size_t ext[MAX_EXTREMA]; /* indices of local extrema of the scan, increasing */
    const double *gl_x, *gl_w; /* Gauss-Legendre nodes and weights on [0, 1] */
    /* positive halves of the n-point and 2n-point rules on [-1, 1]: they integrate even functions on [0, 1] */
    const double *even_x, *even_w, *even2_x, *even2_w;
    /* the rules above point into one of these: the requested node count (base), or 2, 4, 8 times it where
       wkb_well_set found the base rule not converged in this well (settings.check_nodes; made when first
       needed, one block each). quad_error: twice the last difference of the check, added to the levels' error, cm-1. */
    struct {
        const double *gl_x, *gl_w, *even_x, *even_w, *even2_x, *even2_w;
        double *owned; /* the block they point into when this well made it (else a shared one) */
    } rules[WKB_RULE_LEVELS];
    size_t base_nodes;
    double quad_error;
    double dVdp[WKB_MAX_PARAMS];
    /* turning points of the last orbit: Newton starts there for the next one */
    double last_tp[2];
    int have_last_tp;
    /* first guess of the next first-order level from outside (wkb_level_at_seeded), > 0 when set;
       strong: taken even where the neighbours' extrapolation is available */
    double seed_binding;
    int seed_strong;
    size_t n_orbits; /* orbits evaluated since allocation (wkb_well_orbits) */
    /* level cache, used by quantize.c */
    double vD;
    int vD_status;
    wkb_error vD_err;
    size_t count, cache_size;
    double *cache_w, *cache_slope;
    char *cache_ok;
    /* matched-end state (matched.c) */
    wkb_matched *matched;
    double v_th, v_th_slope; /* slope: d v / d sqrt(b) at the asymptote (J = 0) */
    int v_th_status;
    size_t count_first;
    /* inner wall lower than the asymptote: no threshold to match to; the levels (up to the wall top) are
       second order with fixed phases */
    int low_wall;
    int across; /* matched ends in a well too quantal for second order: exact phase across the well */
    /* the phase defect D = v1(E_v) - v (first-order quantum number at the level minus v) of the last
       DEFECT_NODES levels solved in order, in x = b^alpha: they extrapolate the start of the next matched
       level (matched.c) */
    double defect_x[WKB_DEFECT_NODES], defect_D[WKB_DEFECT_NODES];
    size_t defect_n, defect_next_v;
    /* quantize.c: levels v < requested_v_end only (0: any; reset by wkb_well_set); threshold_deferred:
       prepare skipped the threshold number for that reason */
    size_t requested_v_end;
    int threshold_deferred;
    /* the first- and second-order level v = 0 that prepare solved to judge the well (reused by the
       first request for v = 0 without parameter derivatives); status of each, -1 when not solved */
    wkb_level prep_first0, prep_second0;
    int prep_first0_status, prep_second0_status;
};

/* orbit.c helpers for matched.c: V_J and its derivatives (depth = D - V_J); the kinetic term
   E - V_J at binding energy b in its cancellation-free form; both turning points at b; a root of the
   kinetic term at b inside [lo, hi] (which must bracket one). */
void wkb_well_effective(const wkb_well *w, double r, wkb_pot_value *pv);
double wkb_well_kinetic(const wkb_well *w, double binding, double r, wkb_pot_value *pv);
int wkb_well_turning_points(wkb_well *w, double binding, double *r1, double *r2, wkb_error *err);
int wkb_well_crossing(const wkb_well *w, double binding, double lo, double hi, double *root);

/* end_solution.c: the exact end solutions of the matched rule; their per-well state (NULL until first
   used). wkb_end_solution: the phase psi at the matching point b of the solution decaying beyond the
   turning point r_turn (outer = 1: r > r_turn, 0: r < r_turn); wkb_end_set_tol: the ODE tolerance per
   step (radians) for the next solutions; wkb_end_reuse: opens (1; 2 keeps the Pruefer parts too) or
   closes (0) a reuse scope, in which each end's solution is kept with its energy derivative and reused at
   nearby energies; wkb_end_kept_match: 1 and the kept outer matching point, when there is one to reuse;
   wkb_end_set_rough: a looser tolerance (0: none) for the outer end's solution through the turning region
   (stretch: and its phase-amplitude stretch) from now on, whose kept parts are then reused only at that
   tolerance (a first step from a start known to be far off). */
void wkb_matched_free(wkb_matched *m);
int wkb_end_solution(wkb_well *w, double binding, int outer, double r_turn, double b, wkb_end_phase *out,
                     wkb_error *err);
int wkb_end_set_tol(wkb_well *w, double tol, wkb_error *err);
void wkb_end_reuse(wkb_well *w, int on);
int wkb_end_kept_match(const wkb_well *w, double *b);
void wkb_end_set_rough(wkb_well *w, double tol, int stretch);

/* matched.c */
/* matched level v (started from level->binding if level->status == WKB_SUCCESS, else from a guess;
   second_start: that is the second-order level, else the first-order one); across: exact phase
   integration across the whole well instead (both ends meet at the bottom) */
int wkb_matched_solve(wkb_well *w, size_t v, int across, int second_start, wkb_level *level, wkb_error *err);
/* records the defect of level v at binding b (levels solved out of order clear the record) */
void wkb_matched_note_defect(wkb_well *w, size_t v, double binding, double defect);

/* orbit.c: the action (and turning points) of the orbit at binding energy b alone, without the period,
   Bv and curvature sums (NaN in orbit): a check of a level found otherwise */
int wkb_orbit_action_at(wkb_well *w, double binding, wkb_orbit *orbit, wkb_error *err);

/* quadrature_rules.c: makes the rule of base_nodes << level nodes (0 made, 1 out of memory), switches the
   orbit integrals to it, and checks the rule of a well just set up (settings.check_nodes) */
int wkb_rules_make(wkb_well *w, int level);
void wkb_rules_use(wkb_well *w, int level);
void wkb_rules_check(wkb_well *w);

/* action_interpolant.c: levels 0..*done-1 of the n of a first-order well with fixed phases from an
   interpolant of the action (the caller solves levels *done..n-1 directly, seeded by these); 0 when done,
   nonzero when it declines (*done = 0: the caller then solves every level directly) */
int wkb_interpolant_levels(wkb_well *w, wkb_level *levels, size_t n, size_t *done);

#endif
