/* fit_rows.h: the row evaluator of fit_levels.c (every data row's level solved directly, seeded,
   threaded), private to fit_levels.c and fit_ladders.c; the public evaluator (wkb_fit_evaluator,
   fit_ladders.c) runs it on the data or on the nodes of its J(J+1) interpolation. Same contracts as
   the wkb_fit_evaluator functions in wkb.h. */
#ifndef WKBFIT_FIT_ROWS_H
#define WKBFIT_FIT_ROWS_H

#include "wkb.h"

typedef struct wkb_row_evaluator wkb_row_evaluator;
wkb_row_evaluator *wkb_rows_alloc(const wkb_fit_data *data, const wkb_settings *levels,
                                  const wkb_level_source *source, wkb_error *err);
void wkb_rows_free(wkb_row_evaluator *ev);
int wkb_rows_evaluate(wkb_row_evaluator *ev, const wkb_potential *pot, double *calc, double *jac, size_t *bad_row,
                      wkb_error *err);
size_t wkb_rows_level_calculations(const wkb_row_evaluator *ev);
size_t wkb_rows_orbits(const wkb_row_evaluator *ev);
size_t wkb_rows_threads(const wkb_row_evaluator *ev);
/* stable merge sort of idx[n] by before(d, a, b); scratch[n] is work space */
void wkb_rows_sort(const wkb_fit_data *d, size_t *idx, size_t *scratch, size_t n,
                   int (*before)(const wkb_fit_data *, size_t, size_t));

/* a data row's value and derivatives from its level by the energy zero (fit_levels.c) */
double wkb_rows_value(int energy_zero, double E, const double *dE, double asym, const double *dA, double ref_E,
                      const double *ref_dE, size_t np, double *row);

#endif
