/* well.h: the well workspace, private to orbit.c and quantize.c (not part of the public API). */
#ifndef WKBFIT_WELL_H
#define WKBFIT_WELL_H

#include "wkb.h"

#define MAX_EXTREMA 64

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
    double *gl_x, *gl_w;     /* Gauss-Legendre nodes and weights on [0, 1] */
    /* positive halves of the n-point and 2n-point rules on [-1, 1]: they integrate even functions on [0, 1] */
    double *even_x, *even_w, *even2_x, *even2_w;
    double dVdp[WKB_MAX_PARAMS];
    /* turning points of the last orbit: Newton starts there for the next one */
    double last_tp[2];
    int have_last_tp;
    /* level cache, used by quantize.c */
    double vD;
    int vD_status;
    wkb_error vD_err;
    size_t count, cache_size;
    double *cache_w, *cache_slope;
    char *cache_ok;
};

#endif
