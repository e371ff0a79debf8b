/* radial.h: the exact radial solver's workspace, private to radial.c (levels) and radial_grid.c (the
   mapped grid); the method is described in radial.c. */
#ifndef WKBFIT_RADIAL_H
#define WKBFIT_RADIAL_H

#include <gsl/gsl_integration.h>

#include "wkb.h"

/* Largest Numerov T = h^2 Q/12 allowed on the coarsest (4h) grid: beyond T = 1 the
   renormalized recurrence changes character, and well below it the forbidden region is
   already deep. */
#define RADIAL_T_CAP 0.5
/* Steps of the geometric scan that locates the well. */
#define RADIAL_SCAN_RATIO 1.005
#define RADIAL_SCAN_MAX 20000
/* Gauss-Legendre nodes for the classical level spacing dE/dv. */
#define RADIAL_GL_NODES 96
/* Rescaling threshold of the unnormalized recurrence (through long barriers). */
#define RADIAL_BIG 1e150
/* Map shape: the well part of K falls as rho^-(1 + RADIAL_MAP_Q) beyond rho1. */
#define RADIAL_MAP_Q 2.0

typedef struct {
    double A, A2, rho1, rs; /* K(r) = [A/(1 + (rho/rho1)^q) + A2]/rho, rho = r + rs */
} radial_map;

typedef struct {
    int solved;
    double b4, b2, b1;    /* discrete eigenvalues (binding energies) on the 4h, 2h, h grids */
    wkb_radial_level level;
} radial_cache_entry;

struct wkb_radial {
    wkb_radial_settings set;
    gsl_integration_glfixed_table *gl;

    /* grid arrays, capacity cap */
    size_t cap;
    double *r;    /* r_i, angstrom */
    double *qt;   /* (h^2/12) [S - depth_J/eps] / K^2 : the E-independent part of T */
    double *wt;   /* (h^2/12) / (eps K^2)            : T = s^2 (qt + b wt) on stride s */
    double *pmax; /* max_{j <= i} depth_J(r_j): first classically allowed point, by bisection */
    double *smax; /* max_{j >= i} depth_J(r_j): last classically allowed point */
    double *F;    /* the recurrence solution; then the wavefunction */
    size_t n;     /* points in use, n - 1 divisible by 4 */
    double h;     /* step in x */
    radial_map map;

    /* problem */
    int ready;
    wkb_potential pot;
    double mu, eps, rot, asymptote;
    double depth_max;  /* asymptote - min V_J */
    double r_bottom, omega; /* position of the minimum, harmonic quantum there */
    size_t n_bound;    /* levels below the asymptote on the fine grid */
    size_t n_bound_coarse;

    /* scratch for the well scan, allocated with the workspace */
    double *scan_r, *scan_k;

    /* per-level cache for this (potential, mu, J) */
    size_t cache_cap, dvdp_cap;
    radial_cache_entry *cache;
    double *cache_dvdp; /* cache_cap x n_params, filled when asked for */
    int *cache_has_dvdp;

    /* the wavefunction held in F */
    int wf_v;
    size_t wf_is, wf_ie;
};

/* asymptote - V_J(r), the depth below the asymptote with the centrifugal term */
double radial_depth(const wkb_radial *w, double r);
/* The mapped grid of the current (potential, mu, J): map, step, points, n_bound (radial_grid.c). */
int radial_build_grid(wkb_radial *w, wkb_error *err);
/* Grid arrays for n points (radial.c). */
int radial_reserve_grid(wkb_radial *w, size_t n, wkb_error *err);

#endif
