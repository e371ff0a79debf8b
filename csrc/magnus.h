/* magnus.h: Magnus steps for the matched rule's end solutions (magnus.c), private to end_solution.c. */
#ifndef WKBFIT_MAGNUS_H
#define WKBFIT_MAGNUS_H

#include <stddef.h>
#include "well.h"

/* A solution of u'' = -F u, F = (E - V_J)/eps, at r: (u, du/dr), its energy derivative, the signed next
   step, the zeros of u passed so far and the potential evaluations spent. */
typedef struct {
    double r, u[2], uE[2], h;
    int zeros, want_E; /* want_E: carry the energy derivative (default 1) */
    size_t n_eval;
    /* tunnelling integral left to the turning point (0: none): the tolerance there is
       tol deep_safety exp(2 decay_left), at most tol_deep_max */
    double decay_left, deep_safety, tol_deep_max;
} wkb_magnus_state;

/* The state with Pruefer angle phi (u = R sin phi, u_rho = q R cos phi, rho = sigma r) at r, energy
   derivative 0, first step h0 (signed), no deep tolerance. */
void wkb_magnus_start(wkb_magnus_state *s, double r, double phi, double q, double sigma, double h0);
/* Steps from s->r to r_to with a local error of at most tol radians per step in the angle (scale
   q = (F^2 + q04)^(1/4)); GSL_SUCCESS or a GSL status. */
int wkb_magnus_run(const wkb_well *w, double binding, double r_to, double tol, double q04, wkb_magnus_state *s);
/* The Pruefer angle at s->r (scale q, direction sigma) continued through the zeros passed, and its energy
   derivative (q04 held). */
int wkb_magnus_angle(const wkb_well *w, double binding, double q04, double sigma, wkb_magnus_state *s,
                     double *phi, double *phi_E);

#endif
