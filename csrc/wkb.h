/* wkb.h: the public C API of the wkbfit numerical core.
 *
 * Units everywhere: energies in cm-1, distances in angstrom, masses in u.
 * Every fallible function returns a status (WKB_SUCCESS = 0) and, on failure,
 * writes a human-readable message into a caller-owned wkb_error.
 * Nothing here includes Python; module.c is the only binding.
 * The declarations are grouped by the file that defines them.
 */
#ifndef WKBFIT_WKB_H
#define WKBFIT_WKB_H

#include <stddef.h>

/* hbar^2/(2 u) in cm-1 angstrom^2, CODATA 2022 (h, c exact; u = 1.66053906892e-27 kg). */
#define WKB_HBAR2_OVER_2U 16.85762916809

#define WKB_MAX_PARAMS 16

/* ---------------------------------------------------------------- status.c */
enum wkb_status {
    WKB_SUCCESS = 0,
    WKB_EINVAL = 1,     /* an argument is out of its valid range */
    WKB_ENOWELL = 2,    /* no classically allowed well at this energy */
    WKB_EMULTIWELL = 3, /* more than two turning points: a second well or a barrier */
    WKB_ENOLEVEL = 4,   /* the requested level is not bound */
    WKB_ENOCONV = 5,    /* an iteration did not converge */
    WKB_ENOMEM = 6,     /* out of memory */
    WKB_ENUMERIC = 7,   /* a non-finite number appeared */
    WKB_NSTATUS = 8
};

typedef struct {
    int status;
    char message[320];
} wkb_error;

/* Short name of a status code ("ENOWELL", ...); "unknown" for codes out of range. */
const char *wkb_status_name(int status);
/* Records status and a printf-style message in err (may be NULL); returns status. */
int wkb_fail(wkb_error *err, int status, const char *fmt, ...);
/* Turns GSL's abort-on-error handler off; safe to call more than once. */
void wkb_init_library(void);

/* ------------------------------------------------------------- potential.c */
typedef struct wkb_pointwise wkb_pointwise;
typedef struct wkb_potential wkb_potential;

/* The potential and its derivatives at one r. depth = asymptote - V(r), computed in a
   form that keeps its relative precision where V approaches the asymptote. */
typedef struct {
    double V, dV, d2V, depth;
} wkb_pot_value;

/* A model: a const descriptor, one per potential form (the GSL "type" pattern). */
typedef struct wkb_model {
    const char *name;
    size_t n_params;
    const char *const *param_names;
    /* Checks parameter values; writes a message naming the bad one. */
    int (*check)(const double *p, wkb_error *err);
    void (*eval)(const wkb_potential *pot, double r, wkb_pot_value *out);
    /* dV/dp_k at r for every parameter, into dVdp[n_params]. */
    void (*param_derivs)(const wkb_potential *pot, double r, double *dVdp);
    /* Dissociation asymptote, position of the minimum (a hint), and the inner end of
       the region worth scanning (where V is already far above the asymptote). */
    double (*asymptote)(const wkb_potential *pot);
    double (*r_min)(const wkb_potential *pot);
    double (*r_inner_scan)(const wkb_potential *pot);
    /* Power n of the -C_n/r^n approach to the asymptote; 0 for an exponential tail. */
    double (*tail_power)(const wkb_potential *pot);
} wkb_model;

struct wkb_potential {
    const wkb_model *model;
    double p[WKB_MAX_PARAMS];
    const wkb_pointwise *curve; /* for the point-wise model only; not owned */
};

extern const wkb_model wkb_model_morse;         /* De, re, a */
extern const wkb_model wkb_model_lennard_jones; /* De, re, n, m */
extern const wkb_model wkb_model_poschl_teller; /* De, re, a: V = De tanh^2(a (r - re)) */
extern const wkb_model wkb_model_pointwise;     /* no parameters; needs a curve */

/* NULL-terminated table of all models, and lookup by name (NULL if unknown). */
extern const wkb_model *const wkb_models[];
const wkb_model *wkb_model_by_name(const char *name);

/* Fills pot after checking p (n_params values) and, for the point-wise model, curve. */
int wkb_potential_init(wkb_potential *pot, const wkb_model *model, const double *p,
                       const wkb_pointwise *curve, wkb_error *err);
static inline void wkb_potential_eval(const wkb_potential *pot, double r, wkb_pot_value *out)
{
    pot->model->eval(pot, r, out);
}
static inline double wkb_potential_asymptote(const wkb_potential *pot)
{
    return pot->model->asymptote(pot);
}

/* ------------------------------------------------------------- pointwise.c */
/* Builds a point-wise potential from n points (r strictly increasing, all finite):
   a cubic spline inside, an exponential inner wall A + B exp(-C r) through the three
   innermost points, and an outer tail D - C_n/r^n; D (asymptote) and n (tail_power)
   are used when finite and fitted to the outermost points otherwise. Joins are
   continuous to the second derivative. */
int wkb_pointwise_alloc(const double *r, const double *V, size_t n, double asymptote,
                        double tail_power, wkb_pointwise **out, wkb_error *err);
void wkb_pointwise_free(wkb_pointwise *curve);
/* The fitted or given tail: asymptote D, power n, coefficient C_n (V = D - C_n/r^n). */
void wkb_pointwise_tail(const wkb_pointwise *curve, double *asymptote, double *power,
                        double *coefficient);

/* ----------------------------------------------------------------- airy.c */
/* Domain of wkb_airy: Bi overflows double precision just above z = 104.3, and below
   z = -1e6 the phase (2/3)|z|^(3/2) of the oscillations is no longer resolved. */
#define WKB_AIRY_Z_MIN (-1.0e6)
#define WKB_AIRY_Z_MAX 104.0
#define WKB_AIRY_MAX_TERMS 50

/* Ai, Ai', Bi, Bi' at one z with GSL's absolute error estimates (*_err). */
typedef struct {
    double Ai, dAi, Bi, dBi;
    double Ai_err, dAi_err, Bi_err, dBi_err;
} wkb_airy_values;

/* The Airy functions and their derivatives at z (dimensionless), from GSL
   (gsl_sf_airy_Ai_e, _Ai_deriv_e, _Bi_e, _Bi_deriv_e with GSL_PREC_DOUBLE).
   An underflow of Ai or Ai' at large z is a valid result (0 or subnormal).
   Status: WKB_EINVAL if z is NaN or outside [WKB_AIRY_Z_MIN, WKB_AIRY_Z_MAX];
   WKB_ENUMERIC if GSL reports any other error. */
int wkb_airy(double z, wkb_airy_values *out, wkb_error *err);

/* Ai(z) from its large-|z| asymptotic expansion truncated after 'terms' coefficients
   c_0..c_(terms-1), c_k = Gamma(3k+1/2)/(54^k k! Gamma(k+1/2)), zeta = (2/3)|z|^(3/2):
     z > 0: Ai(z) ~ (1/2) pi^(-1/2) z^(-1/4) e^(-zeta) sum_k (-1)^k c_k zeta^(-k)
            (Abramowitz & Stegun 10.4.59, DLMF 9.7.5);
     z < 0: Ai(z) ~ pi^(-1/2) |z|^(-1/4) [sin(zeta + pi/4) sum_k (-1)^k c_2k zeta^(-2k)
                                        - cos(zeta + pi/4) sum_k (-1)^k c_(2k+1) zeta^(-2k-1)]
            (A&S 10.4.60, DLMF 9.7.9), the source of the pi/4 turning-point phase.
   Status: WKB_EINVAL if z is NaN, 0 or below WKB_AIRY_Z_MIN, if terms is outside
   1..WKB_AIRY_MAX_TERMS, or if the truncated series overflows (too many terms for a small |z|). */
int wkb_airy_asymptotic(double z, int terms, double *ai, wkb_error *err);

/* ---------------------------------------------------------------- orbit.c */
/* Tunables of the semiclassical calculation (GSL-style defaults function). */
typedef struct {
    size_t nodes;          /* Gauss-Legendre nodes per quadrature piece */
    double energy_tol;     /* absolute tolerance on a level, cm-1 */
    int max_newton;        /* Newton iterations per level */
    size_t scan_points;    /* grid points for the well analysis */
} wkb_settings;
wkb_settings wkb_default_settings(void);

/* One classical orbit at energy E in the well. */
typedef struct {
    double energy;       /* E, in the potential's zero */
    double binding;      /* asymptote - E, with full relative precision near threshold */
    double r_inner, r_outer;
    double action;       /* integral k dr, k = sqrt((E - V_J)/eps), dimensionless */
    double half_period;  /* d(action)/dE = integral dr/(2 eps k), 1/cm-1 */
    double Bv;           /* orbit average of eps/r^2, cm-1 */
} wkb_orbit;

/* One level. */
typedef struct {
    double v;            /* quantum number */
    double energy, binding, error; /* error: estimate of |E - E_converged| */
    double r_inner, r_outer;
    double dEdv;         /* pi / half_period: the local level spacing */
    double Bv;
    int status;
} wkb_level;

/* A workspace for one (potential, mass, rotation) combination: allocate once, set,
   then compute any number of orbits and levels without further allocation. */
typedef struct wkb_well wkb_well;
wkb_well *wkb_well_alloc(const wkb_settings *settings);
void wkb_well_free(wkb_well *w);

/* Prepares the well of V(r) + eps*rot/r^2 for reduced mass mu (u); rot is J(J+1), or
   (J+1/2)^2 for the Langer form. maslov_in, maslov_out are 1 (smooth turning point)
   or 2 (hard wall). Finds the minimum, scans for extra wells and barriers. */
int wkb_well_set(wkb_well *w, const wkb_potential *pot, double mu, double rot,
                 int maslov_in, int maslov_out, wkb_error *err);

/* Energy of the effective-potential minimum and the asymptote (cm-1). */
double wkb_well_bottom(const wkb_well *w);
double wkb_well_top(const wkb_well *w);

/* Action, half period, turning points and Bv at energy E (given as binding energy
   b = asymptote - E so that energies just below threshold keep their precision).
   avg_dVdp, if not NULL, receives the orbit averages of dV/dp_k (n_params values). */
int wkb_orbit_at(wkb_well *w, double binding, wkb_orbit *orbit, double *avg_dVdp,
                 wkb_error *err);

/* ---------------------------------------------------------------- quantize.c */
/* Non-integer quantum number at the asymptote: action(asymptote)/pi - maslov/4.
   NaN (with success) when the well minimum lies above the asymptote. Cached per wkb_well_set. */
int wkb_v_dissociation(wkb_well *w, double *vD, wkb_error *err);
/* Number of bound levels (those with v < vD) and vD; either pointer may be NULL. */
int wkb_level_count(wkb_well *w, size_t *count, double *vD, wkb_error *err);

/* Level with quantum number v (0, 1, ...). avg_dVdp as above, may be NULL: it then holds
   dE_v/dp_k, since for first-order WKB dE/dp = <dV/dp> over the orbit. Levels already solved
   since the last wkb_well_set seed the first guess, so asking in ascending v is fastest.
   Status: WKB_ENOLEVEL when v is not bound (the message names the last bound level). */
int wkb_level_at(wkb_well *w, int v, wkb_level *level, double *avg_dVdp, wkb_error *err);

/* Every bound level, v = 0 .. count-1, into levels[capacity]; *count is the number
   of bound levels (may exceed capacity, then only capacity are filled). */
int wkb_all_levels(wkb_well *w, wkb_level *levels, size_t capacity, size_t *count,
                   double *vD, wkb_error *err);

#endif
