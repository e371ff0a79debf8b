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

#define WKB_MAX_PARAMS 40

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

/* ------------------------------------------------------- models_extended.c */
/* EMO and MLR, one descriptor per number K = 1..8 of exponent coefficients beta_0..beta_(K-1)
   (named "emoK" and "mlrK"); r in angstrom, De and C_m/r^m in cm-1. Both have V(re) = 0 and the
   asymptote De; r_min is re. y_p(r; a) = (r^p - a^p)/(r^p + a^p).
   EMO [Lee et al., J. Mol. Spectrosc. 194, 197 (1999)]: parameters De, re, p, beta0..;
     V = De [1 - exp(-beta(r) (r - re))]^2, beta(r) = sum_i beta_i y_p(r; re)^i; exponential tail.
     Checks: De, re, beta0 > 0, sum_i beta_i > 0, p a whole number in 1..64.
   MLR [Le Roy & Henderson, Mol. Phys. 105, 663 (2007); Le Roy et al., J. Chem. Phys. 131, 204309
     (2009)]: parameters De, re, C6, C8, C10, p, q, r_ref, beta0..;
     V = De [1 - (u(r)/u(re)) exp(-beta(r) y_p(r; re))]^2 with the undamped u(r) = C6/r^6 + C8/r^8
     + C10/r^10, beta(r) = y_p(r; r_ref) beta_inf + [1 - y_p(r; r_ref)] sum_i beta_i y_q(r; r_ref)^i,
     beta_inf = ln(2 De/u(re)); De - V -> u(r) at large r (tail power 6).
     Checks: De, re, C6, r_ref > 0; C8, C10 >= 0; u(re) < 2 De; q a whole number in 1..64; p a
     whole number in 3..64 that exceeds the spread of the inverse powers (p >= 5 if C10 > 0). */
#define WKB_EMO_MAX_BETAS 8
#define WKB_MLR_MAX_BETAS 8 /* 8 + 8 parameters = WKB_MAX_PARAMS */
extern const wkb_model wkb_models_emo[WKB_EMO_MAX_BETAS]; /* [K-1]: "emoK" */
extern const wkb_model wkb_models_mlr[WKB_MLR_MAX_BETAS]; /* [K-1]: "mlrK" */
/* MLR with C3, C4, C6, C8, C10 and damping (damping.c), "mlrdK": parameters De, re, C3, C4, C6, C8,
   C10, p, q, r_ref, damping (0 none, 1 Tang-Toennies, 2 Douketis type), rho (the damping range:
   b in 1/angstrom for Tang-Toennies, the dimensionless rho for the Douketis form), s (Douketis
   power offset, -1 or -2), beta0..; u(r) = sum_m D_m(r) C_m/r^m; tail power the lowest m present.
   Checks: C_m >= 0, one > 0; p whole, 3..64, above m_last - m_first; u_LR(re) > 0, and < 2 De
   when undamped. */
extern const wkb_model wkb_models_mlrd[WKB_MLR_MAX_BETAS]; /* [K-1]: "mlrdK" */

/* ---------------------------------------------------------------- damping.c */
/* Damping functions D_m(r) of long-range terms C_m/r^m (r in angstrom):
   WKB_DAMPING_TANG_TOENNIES [Tang & Toennies, J. Chem. Phys. 80, 3726 (1984)]:
     D_m = 1 - exp(-x) sum_{k=0}^{m} x^k/k!, x = range * r, range = b in 1/angstrom;
   WKB_DAMPING_DOUKETIS [Douketis et al., J. Chem. Phys. 76, 3057 (1982), generalized by Le Roy
     et al., Mol. Phys. 109, 435 (2011)]: D_m = [1 - exp(-b(s) rho r/m - c(s) (rho r)^2/sqrt(m))]^(m+s),
     r in bohr, range = rho (dimensionless); s = -1 or -2 (other s: NaN).
   WKB_DAMPING_NONE: D = 1. out: D, dD/dr, d2D/dr2, dD/d(range). */
enum { WKB_DAMPING_NONE = 0, WKB_DAMPING_TANG_TOENNIES = 1, WKB_DAMPING_DOUKETIS = 2 };
typedef struct {
    double D, dD, d2D, dD_drange;
} wkb_damping;
void wkb_damping_eval(int kind, int m, int s, double range, double r, wkb_damping *out);
/* b(s), c(s) of the Douketis-type form (from memory); returns 0 for an s without constants. */
int wkb_douketis_constants(int s, double *b, double *c);

/* -------------------------------------------------------------------- bob.c */
/* Born-Oppenheimer breakdown corrections [Le Roy, J. Mol. Spectrosc. 194, 189 (1999); from
   memory]: a model descriptor wrapping an analytic base model; parameters: the base model's, then
   for each of the functions S_A, S_B (adiabatic) and R_A, R_B (centrifugal) with n_coef[f] > 0:
   c_inf, c_0 .. c_(n-1) of F = y c_inf + (1 - y) sum_i c_i y^i, y = y_p(r; re). V gains
   adiabatic[X] S_X(r) + rot_eps centrifugal[X] R_X(r)/r^2 with adiabatic[X] = dM_X/M_X(alpha),
   centrifugal[X] = M_X(1)/M_X(alpha), rot_eps = J(J+1) hbar^2/(2 mu_alpha). */
typedef struct {
    wkb_model model; /* first: the level code sees an ordinary model */
    const wkb_model *base;
    double power, adiabatic[2], centrifugal[2], rot_eps;
    int n_coef[4];
    const char *names[WKB_MAX_PARAMS];
    char name_buf[WKB_MAX_PARAMS][16];
} wkb_bob_model;
/* The template (reference isotopologue, no rotation): WKB_EINVAL for a bad base or counts. */
int wkb_bob_model_init(wkb_bob_model *b, const wkb_model *base, const int *n_coef, double power, wkb_error *err);
/* A copy of tmpl for one isotopologue and J (tmpl must outlive it). */
void wkb_bob_model_variant(const wkb_bob_model *tmpl, wkb_bob_model *out, const double *adiabatic,
                           const double *centrifugal, double rot_eps);
/* The base model's check on the base part of p. */
int wkb_bob_potential_check(const wkb_bob_model *b, const double *p, wkb_error *err);

/* ------------------------------------------------------------- pointwise.c */
/* Builds a point-wise potential from n >= 5 points r (angstrom, > 0, strictly
   increasing) and V (cm-1, any zero), all finite; the inputs are copied, not kept.
   Inside [r_0, r_{n-1}]: the not-a-knot cubic spline through the points. Outside: an
   exponential inner wall A + B exp(-C r) through the three innermost points (which must
   fall with r and curve upwards), and an outer tail D - C_n/r^n with C_n > 0. D
   (asymptote, cm-1) and n (tail_power, 0 < n <= 64) are used when not NaN; unknowns are
   fitted exactly to the outermost points (both: last three, one: last two), a fitted n
   must lie in [1, 20]. Joins are C2: over one interval outside the data range the
   continued end cubic is blended into the extrapolation with a quintic smoothstep.
   *out receives the curve (free with wkb_pointwise_free), immutable and safe to share
   between threads. Status: WKB_SUCCESS; WKB_EINVAL with a message naming the bad
   point or the failed fit (and what to give instead); WKB_ENOMEM; WKB_ENOCONV. */
int wkb_pointwise_alloc(const double *r, const double *V, size_t n, double asymptote,
                        double tail_power, wkb_pointwise **out, wkb_error *err);
/* Forms of the inner wall of a point-wise curve (continuation inside its first point r_0). */
enum { WKB_WALL_EXPONENTIAL = 0, /* A + B exp(-C (r - r_0)), C > 0 in 1/angstrom */
       WKB_WALL_INVERSE_POWER = 1 /* A + B (r_0/r)^C, C > 0 the power */ };
/* As wkb_pointwise_alloc, with the inner wall's form chosen (WKB_WALL_*); both forms pass through
   the three innermost points. WKB_EINVAL also for an unknown form. */
int wkb_pointwise_alloc_wall(const double *r, const double *V, size_t n, double asymptote,
                             double tail_power, int inner_wall, wkb_pointwise **out, wkb_error *err);
/* The inner wall: its form (WKB_WALL_*), A and B (cm-1) and C (rate in 1/angstrom, or power). */
void wkb_pointwise_wall(const wkb_pointwise *curve, int *form, double *A, double *B, double *C);
/* Frees a curve; accepts NULL. */
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
#define WKB_QUADRATURE_TOL 1e-10 /* cm-1: a well's rule is refined where the levels would move more (check_nodes) */
/* Tunables of the semiclassical calculation (GSL-style defaults function). */
typedef struct {
    size_t nodes;          /* Gauss-Legendre rule per quadrature piece (even; 32 and 64 are tabulated by GSL);
                              pieces that end at a turning point use its symmetric half, nodes/2 points */
    int check_nodes;       /* 1: each well set-up compares the rule with one of twice the nodes at a few energies and
                              doubles the nodes (up to 8x) where the levels would differ by more than
                              WKB_QUADRATURE_TOL; 0 (default): the rule as given */
    double energy_tol;     /* absolute tolerance on a level, cm-1 */
    int max_newton;        /* Newton iterations per level */
    size_t scan_points;    /* grid points for the well analysis */
    int order;             /* 1: first-order WKB; 2: with the second-order (Dunham) term */
    int ends;              /* WKB_ENDS_MASLOV: fixed end phases; WKB_ENDS_MATCHED: matched.c */
    double match_fraction; /* matched ends: join where E - V_J = match_fraction (E - V_min) (0.3..0.9) */
    double match_decay;    /* matched ends: the exact solution starts where integral kappa dr reaches this */
    double match_ode_tol;  /* matched ends: absolute tolerance of the phase ODE per step, radians */
    int match_rule;        /* matched ends: 0 chooses per level; WKB_RULE_MATCHED or WKB_RULE_ACROSS forces one */
    int match_milne;       /* matched ends: 1 (default) Magnus steps through the turning region (magnus.c), the allowed
                              stretch where WKB holds in phase-amplitude form, the tolerance per step from each
                              level's need; 2 the same with rk8pd through the turning region; 0 the earlier solve
                              (Pruefer all the way, match_ode_tol throughout); 2 and 0 are kept for comparison */
} wkb_settings;
enum wkb_ends { WKB_ENDS_MASLOV = 0, WKB_ENDS_MATCHED = 1 };
wkb_settings wkb_default_settings(void);

/* One classical orbit at energy E in the well. */
typedef struct {
    double energy;       /* E, in the potential's zero */
    double binding;      /* asymptote - E, with full relative precision near threshold */
    double r_inner, r_outer;
    double action;       /* integral k dr, k = sqrt((E - V_J)/eps), dimensionless */
    double half_period;  /* d(action)/dE = integral dr/(2 eps k), 1/cm-1 */
    double Bv;           /* orbit average of eps/r^2, cm-1 */
    double curvature_integral; /* K(E) = integral V_J''(r) dr / sqrt(E - V_J), for the second-order term */
} wkb_orbit;

/* One level. */
typedef struct {
    double v;            /* quantum number */
    double energy, binding, error; /* error: estimate of |E - E_converged| */
    double r_inner, r_outer;
    double dEdv;         /* pi / half_period: the local level spacing */
    double Bv;
    int status;
    int rule;            /* enum wkb_rule: the rule that produced the level */
} wkb_level;
/* first order; second order with fixed end phases; matched outer end (matched.c) */
enum wkb_rule { WKB_RULE_FIRST = 1, WKB_RULE_SECOND = 2, WKB_RULE_MATCHED = 3, WKB_RULE_ACROSS = 4 };
/* With matched ends, a well whose lowest level has (E2 - E1)^2/(dE/dv) above this (cm-1; the size of the
   fourth-order term when the WKB series behaves geometrically, common practice) is too quantal for
   second order (light molecules, shallow wells): its levels come from the exact phase integrated
   across the well (rule WKB_RULE_ACROSS). */
#define WKB_ACROSS_ESTIMATE 1e-3
/* ... and so is a well of at most this many levels (there every matching point lies within a wavelength
   or two of its turning point; second order can be exact by accident, as for Morse) */
#define WKB_ACROSS_MAX_LEVELS 12
/* ... and so are the last this many levels of a rotating well (J > 0; with matched ends) */
#define WKB_ACROSS_LAST 2
/* With matched ends, a level whose outer turning point is this far from linear uses the matched rule
   (the others keep second order, which is within 1e-4 cm-1 there and much cheaper): the larger of
   |V''| l/|V'| and l sqrt(|V'''|/|V'|) at r_outer, l = (eps/|V'|)^(1/3) the Airy length. At 1.0 (0.5
   before) the matched rule costs about half as much on the C6/C4/C3/C6+C8 test wells; the worst
   second-order level is then the third last of the C6 well, 2.8e-5 cm-1 off (1.2e-5 at 0.5); 2.0
   changed nothing more (measured). */
#define WKB_MATCH_NONLINEARITY 1.0
/* ... and for the last two levels at J = 0 this (second order misses 1e-6 cm-1 there on C6 and C4 tails
   at 1.0, and is exact for Morse, whose exponential tail keeps the measure below this) */
#define WKB_MATCH_NONLINEARITY_LAST 0.5
/* ... except for v below this: at the bottom of any well the Airy length is comparable to the orbit (the
   measure is then O(1) for a harmonic well, which second order treats well) and the matching point lies
   within a fraction of a wavelength of the turning point, where the matched rule is least accurate */
#define WKB_MATCH_MIN_V 2
/* The default matching level of the matched rule: E - V_J(b) = this fraction of E - V_min. The exact
   phase ODE costs less the closer b lies to the outer turning point (0.2: 1.3x fewer ODE steps near
   threshold, measured), but at 0.2 the last two levels of a light Morse well (HCl, mu = 0.98 u) are
   1.7e-5 and 8.9e-6 cm-1 off, 6.6e-6 and 8.7e-7 at 0.5, and at 0.1 the last C6 level 5e-10 (2e-5 of its
   binding energy): 0.5 is kept */
#define WKB_MATCH_FRACTION 0.5

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
/* Orbits (phase integrals) evaluated in this workspace since it was allocated. */
size_t wkb_well_orbits(const wkb_well *w);
/* Highest energy bound by the inner wall: min(asymptote, top of V_J inside the minimum). Below
   the asymptote for a wall that never rises to it (V(0) < De): levels are counted up to here. */
double wkb_well_bound_top(const wkb_well *w);

/* Action, half period, turning points and Bv at energy E (given as binding energy
   b = asymptote - E so that energies just below threshold keep their precision).
   avg_dVdp, if not NULL, receives the orbit averages of dV/dp_k (n_params values). */
int wkb_orbit_at(wkb_well *w, double binding, wkb_orbit *orbit, double *avg_dVdp,
                 wkb_error *err);

/* ---------------------------------------------------------------- quantize.c */
/* Non-integer quantum number at the asymptote: action(asymptote)/pi - maslov/4 (at the top of
   the inner wall instead, where that is lower than the asymptote).
   NaN (with success) when the well minimum lies above the asymptote. Cached per wkb_well_set. */
int wkb_v_dissociation(wkb_well *w, double *vD, wkb_error *err);
/* Number of bound levels (those with v < vD) and vD; either pointer may be NULL. */
int wkb_level_count(wkb_well *w, size_t *count, double *vD, wkb_error *err);
/* Announces (after wkb_well_set, before the first level) that only levels v < v_end will be asked for.
   With matched ends, when they all lie at least WKB_LAZY_THRESHOLD_MARGIN below the first-order count
   the quantum threshold number is not computed (its three threshold solves cost far more than a deep
   level): the count is then the first-order one, and wkb_threshold_deferred() says so. v_end = 0: no
   promise (the default). */
void wkb_well_request_below(wkb_well *w, size_t v_end);
int wkb_threshold_deferred(const wkb_well *w);
/* The margin: the matched count differs from the first-order one by less than one level (v_th within 1
   of vD: the threshold phase adds at most 1/(n-2) - 1/2 to the count), and the rule of a level depends
   on the count only for the last WKB_ACROSS_LAST levels; two more levels of safety. */
#define WKB_LAZY_THRESHOLD_MARGIN (WKB_ACROSS_LAST + 3)

/* Level with quantum number v (0, 1, ...). avg_dVdp as above, may be NULL: it then holds
   dE_v/dp_k, since for first-order WKB dE/dp = <dV/dp> over the orbit. Levels already solved
   since the last wkb_well_set seed the first guess, so asking in ascending v is fastest.
   Status: WKB_ENOLEVEL when v is not bound (the message names the last bound level). */
int wkb_level_at(wkb_well *w, int v, wkb_level *level, double *avg_dVdp, wkb_error *err);

/* wkb_level_at with a first guess: seed_binding (asymptote - E, cm-1; <= 0 or not finite: none) starts
   the Newton iteration of a first-order Maslov level (a fit's previous evaluation, or the same v at a
   neighbouring J) where the two levels below are not solved in this well, or always when strong (the
   caller expects it within ~1e-5 cm-1: better than their extrapolation). Other rules ignore it. The
   accuracy is that of wkb_level_at. */
int wkb_level_at_seeded(wkb_well *w, int v, double seed_binding, int strong, wkb_level *level,
                        double *avg_dVdp, wkb_error *err);

/* Every bound level, v = 0 .. count-1, into levels[capacity]; *count is the number
   of bound levels (may exceed capacity, then only capacity are filled). */
int wkb_all_levels(wkb_well *w, wkb_level *levels, size_t capacity, size_t *count,
                   double *vD, wkb_error *err);

/* ---------------------------------------------------------------- matched.c */
/* Matched end phases (shared/design/physics.md section 12): at each end the radial equation
   u'' = ((V_J - E)/eps) u is integrated exactly, in a modified Pruefer form u = R sin(phi),
   u' = q R cos(phi), q = (F^2 + q0^4)^(1/4), F = (E - V_J)/eps, q0 = (|V_J'(r_turn)|/eps)^(1/3),
   in x = ln r, from deep in the forbidden region (integral kappa dr = match_decay) to a matching point
   b with E - V_J(b) = match_fraction (E - V_min); there it is joined to the second-order WKB wave
   k^(-1/2) sin(psi), psi' = k + dk, dk = sqrt(eps)[V''/(8 w^(3/2)) + (5/32) V'^2/w^(5/2)], w = E - V_J.
   Quantization: integral_{b_in}^{b_out} (k + dk) dr = pi (v + 1) - psi_in - psi_out, psi_end the
   phase of the exact solution at b_end counted from its own forbidden region (3 pi/4 minus the
   action from b to the turning point at a linear turning point, so the rule reduces to v + 1/2).
   Selected with wkb_settings.ends = WKB_ENDS_MATCHED in wkb_level_at / wkb_all_levels.

   One end at binding energy b (cm-1): end = 0 inner, 1 outer; r_match > 0 is the matching
   point (angstrom), or <= 0 for the settings' fraction. Gives psi (radians, before the Airy
   matching correction that the quantization applies), the matching point, the turning point, the
   first-order action from the matching point to the turning point, and the count of potential
   evaluations. Status: WKB_EINVAL (bad end or r_match), those of the turning-point search, WKB_ENUMERIC. */
typedef struct {
    double psi, r_match, r_turn, action_to_turn;
    size_t evaluations;
} wkb_end_phase;
int wkb_matched_end_phase(wkb_well *w, double binding, int end, double r_match, wkb_end_phase *out,
                          wkb_error *err);
/* Continuous quantum number by the matched rule at binding energy b > 0 (cm-1): levels are the b
   where it is an integer. */
int wkb_matched_quantum_number(wkb_well *w, double binding, double *v, wkb_error *err);
/* The quantum threshold number v_th (the continuous quantum number at the asymptote, extrapolated
   from three tiny binding energies in kappa = sqrt(b/eps)); the matched rule binds the v < v_th.
   Cached per wkb_well_set. */
int wkb_threshold_number(wkb_well *w, double *v_th, wkb_error *err);

/* ---------------------------------------------------------------- radial.c */
/* The exact radial Schroedinger equation -eps u'' + [V(r) + eps J(J+1)/r^2] u = E u,
   eps = WKB_HBAR2_OVER_2U/mu, for the bound levels below the asymptote (true J(J+1), no
   Langer change; u = 0 at both ends of a grid that reaches far into both forbidden
   regions, or at r = 0 for a soft wall). Method: Numerov's method on a grid uniform in a
   mapped variable x(r) (Liouville transformation, exact Schwarzian term), in Johnson's
   renormalized form [J. Chem. Phys. 67, 4086 (1977)] whose pivots count the levels below E
   (v by node counting), Newton/Cooley energy corrections [Math. Comp. 15, 363 (1961)]
   safeguarded by the count, and Richardson (Romberg) extrapolation over the steps 4h, 2h, h.
   Details and formulas at the top of radial.c. */
typedef struct {
    double energy_tol;  /* target accuracy of every level, cm-1 (sets the step; default 1e-7) */
    double phase_step;  /* > 0: phase per fine-grid step, overriding energy_tol (<= 0.5) */
    double min_binding; /* the grid reaches far enough to converge a level bound by this
                           much, cm-1 (default 1e-7); weaker levels carry a larger error */
    double tail_decay;  /* integral of kappa dr kept in each forbidden region (default 25) */
    size_t max_points;  /* refuse grids of more points than this */
    int max_iter;       /* energy iterations per level and grid */
} wkb_radial_settings;
wkb_radial_settings wkb_radial_default_settings(void);

/* One exact level. */
typedef struct {
    int v;                 /* number of nodes */
    double energy;         /* E, in the potential's zero, cm-1 */
    double binding;        /* asymptote - E, with full relative precision, cm-1 */
    double error;          /* estimate of |E - E_converged| (extrapolation + truncation), cm-1 */
    double r_inner, r_outer; /* outermost classical turning points of V_J at E, angstrom */
    double dEdv;           /* classical vibrational quantum 2 pi eps / int dr/k at E, cm-1 */
    double Bv;             /* <v| eps/r^2 |v>, cm-1 */
    size_t grid_points;    /* fine-grid points spanned by the level */
} wkb_radial_level;

/* Workspace: allocate once (settings may be NULL for the defaults; NULL on bad settings or
   no memory), set for each (potential, mu, J), then ask for any levels; nothing is allocated
   per level. Free accepts NULL. */
typedef struct wkb_radial wkb_radial;
wkb_radial *wkb_radial_alloc(const wkb_radial_settings *settings);
void wkb_radial_free(wkb_radial *w);

/* Builds the grid for pot, reduced mass mu (u) and rot = J(J+1) >= 0, and counts the bound
   levels. Grows the grid arrays when this problem needs more points than any before.
   Status: WKB_EINVAL (bad mu, rot, potential, or grid above max_points), WKB_ENOWELL (V_J
   has no point below the asymptote), WKB_ENUMERIC (non-finite potential), WKB_ENOMEM. */
int wkb_radial_set(wkb_radial *w, const wkb_potential *pot, double mu, double rot, wkb_error *err);
/* Number of bound levels (v = 0 .. count-1) of the last set; 0 before a set. */
size_t wkb_radial_count(const wkb_radial *w);
/* Fine-grid points of the last set. */
size_t wkb_radial_grid_size(const wkb_radial *w);

/* Level v: energy, binding, error, turning points, dE/dv, Bv into *level (may be NULL);
   avg_dVdp (may be NULL) receives <v| dV/dp_k |v> = dE_v/dp_k for the model's n_params
   parameters. Results are cached until the next set; asking in ascending v is cheapest.
   Status: WKB_EINVAL (v < 0, no set), WKB_ENOLEVEL (v above the last bound level),
   WKB_ENOCONV, WKB_ENUMERIC. */
int wkb_radial_level_at(wkb_radial *w, int v, wkb_radial_level *level, double *avg_dVdp, wkb_error *err);
/* Levels v = 0 .. min(count, capacity)-1 into levels[]; *count = number of bound levels. */
int wkb_radial_all_levels(wkb_radial *w, wkb_radial_level *levels, size_t capacity, size_t *count,
                          wkb_error *err);
/* Normalized u(r) of level v (int u^2 dr = 1, u > 0 at the inner wall) on the fine grid:
   *r and *u point into the workspace (n values, u = 0 at both ends) and stay valid until
   the next call on w. Status as wkb_radial_level_at. */
int wkb_radial_wavefunction(wkb_radial *w, int v, const double **r, const double **u, size_t *n,
                            wkb_error *err);
/* Adapters with the signatures of wkb_level_source (fit.c): ctx is a wkb_radial*. */
int wkb_radial_source_set(void *ctx, const wkb_potential *pot, double mu, double rot, wkb_error *err);
int wkb_radial_source_level(void *ctx, int v, double *energy, double *dEdp, wkb_error *err);

/* ---------------------------------------------------------------- fit.c, fit_levels.c */
/* Weighted least-squares fits of a potential's parameters to measured levels: GSL's
   trust-region Levenberg-Marquardt (gsl_multifit_nlinear, trs_lm, More scaling, QR) on
   f_i = (calc_i - obs_i)/sigma_i with the analytic Jacobian dE_v/dp_k = <dV/dp_k>
   (Hellmann-Feynman applied to the quantization condition), or <v|dV/dp_k|v> for exact
   levels. Bounded parameters are fitted through smooth transforms: logistic for two
   bounds, lo + exp(u) or hi - exp(u) for one. The solver works in variables whitened by
   the SVD of the starting Jacobian (a fixed linear change of variables), and stops when
   the Gauss-Newton step promises no significant decrease of chi-square. */

/* What the observed energies are measured from. */
enum wkb_energy_zero {
    WKB_ZERO_MINIMUM = 0,   /* calc = E_v (term value in the potential's zero) */
    WKB_ZERO_ASYMPTOTE = 1, /* calc = asymptote - E_v (binding energy) */
    WKB_ZERO_LOWEST = 2     /* calc = E_v - E_(v=0,J=0) of the same reduced mass */
};

/* The levels of a fit: n rows, arrays not owned and never modified. energy and sigma
   may be NULL for a model evaluation without data. */
typedef struct {
    size_t n;
    const int *v;
    const double *rot;    /* J(J+1) */
    const double *mu;     /* reduced mass of the row's isotopologue, u */
    const double *energy; /* observed energy, cm-1, in the zero energy_zero */
    const double *sigma;  /* one-sigma uncertainty, cm-1, > 0 */
    int energy_zero;      /* enum wkb_energy_zero */
    /* per-row additive correction to calc (cm-1, in the data's zero; NULL for none): the
       semiclassical fit with exact corrections adds E_exact - E_wkb here, held fixed
       during one run (its parameter dependence is left out of the Jacobian) */
    const double *offset;
    /* optional, per level: the model to compute it with instead of the potential's own (a
       Born-Oppenheimer correction variant of it with the same parameters), or NULL */
    const wkb_model *const *level_model;
} wkb_fit_data;

/* A source of levels other than first-order WKB (such as the exact solver): prepared once
   per (potential, mu, J(J+1)), then asked for E_v and dE_v/dp_k in ascending v. */
typedef struct {
    void *ctx;
    int (*set)(void *ctx, const wkb_potential *pot, double mu, double rot, wkb_error *err);
    int (*level)(void *ctx, int v, double *energy, double *dEdp, wkb_error *err);
    /* optional (NULL: the source runs on one thread): a new context of the same kind, made from
       clone_arg when an evaluator is allocated (one per extra thread; NULL when out of memory), and
       its release */
    void *(*clone)(void *clone_arg);
    void *clone_arg;
    void (*release)(void *ctx);
} wkb_level_source;

/* Model evaluation workspace: the data grouped by (mu, J(J+1)) in ascending v, cut into one
   part per thread, each with its own WKB well workspace (source NULL) so that nothing is allocated
   per evaluation. An external source runs on one thread unless it can be cloned (one context
   per thread). Rotational ladders of many J are interpolated in J(J+1) (WKB_LADDER_NODES below). */
typedef struct wkb_fit_evaluator wkb_fit_evaluator;
#define WKB_FIT_MAX_THREADS 16
/* Below this many rows the default is one thread: whole first-order fits of two isotopologues on 2 cores
   (tests/benchmarks/bench_fit_threads.py, t(2)/t(1)) measured 1.11 at 30 rows, 0.98 at 100, 0.93 at 500;
   500 leaves a margin for a shared machine */
#define WKB_FIT_THREAD_MIN_ROWS 500
/* ... and for a cloneable external source (exact levels, ~0.1-1 ms each) */
#define WKB_FIT_THREAD_MIN_ROWS_SOURCE 20
/* Threads of the evaluators allocated from now on: n >= 1, or 0 for the default (the online CPUs,
   one below WKB_FIT_THREAD_MIN_ROWS rows; never more than the (mu, J(J+1)) groups or
   WKB_FIT_MAX_THREADS). Returns the previous setting. Process-wide; set it before starting fits. */
int wkb_set_fit_threads(int n);
/* The threads (parts) ev evaluates on. */
size_t wkb_fit_evaluator_threads(const wkb_fit_evaluator *ev);
wkb_fit_evaluator *wkb_fit_evaluator_alloc(const wkb_fit_data *data, const wkb_settings *levels,
                                           const wkb_level_source *source, wkb_error *err);
void wkb_fit_evaluator_free(wkb_fit_evaluator *ev);
/* calc[n] (cm-1, in the data's energy zero) and, if jac is not NULL, jac[n][n_params] =
   d calc_i / d p_k for every model parameter (jac NULL: levels only, without the parameter
   derivatives' cost; the evaluation after such a one starts without seeds from it). *bad_row (may be NULL) names the row being
   computed when a level fails. Status: that of the failing level (WKB_ENOLEVEL when the
   potential does not bind it), WKB_ENUMERIC for a non-finite result. */
int wkb_fit_evaluate(wkb_fit_evaluator *ev, const wkb_potential *pot, double *calc, double *jac,
                     size_t *bad_row, wkb_error *err);

/* Levels computed by ev so far (each E_v with its dE_v/dp counts once), and first-order orbits. */
size_t wkb_fit_evaluator_level_calculations(const wkb_fit_evaluator *ev);
size_t wkb_fit_evaluator_orbits(const wkb_fit_evaluator *ev);
/* Rotational ladders (rows of one mu, level model and v at >= WKB_LADDER_MIN_J distinct J(J+1)) of
   first-order Maslov levels are solved at WKB_LADDER_NODES Chebyshev nodes in J(J+1) and interpolated,
   checked at every evaluation (fit_ladders.c): energies to the level tolerance, dE/dp to
   WKB_LADDER_JAC_TOL relative. The ladders ev interpolates (0 once a check failed: rows solved directly). */
#define WKB_LADDER_NODES 13
#define WKB_LADDER_MIN_J 39
#define WKB_LADDER_JAC_TOL 1e-5
size_t wkb_fit_evaluator_interpolated_ladders(const wkb_fit_evaluator *ev);
/* Private switch (benchmarks, tests): 0 solves every row directly in the evaluators allocated from now
   on, 1 (the default) interpolates ladders. Process-wide; returns the previous setting. */
int wkb_set_fit_interpolation(int on);
/* WKB_SUCCESS when the data rows are valid (finite, positive sigma and mu, rot >= 0, v >= 0). */
int wkb_fit_check_data(const wkb_fit_data *d, wkb_error *err);
/* d(asymptote)/dp_k of the model, dA[n_params] (central differences). */
void wkb_asymptote_gradient(const wkb_potential *pot, double *dA);

/* Data rows as linear combinations of levels, for fits to mixed data (term values, line
   positions, binding energies, free term values of levels outside the model):
     calc_i = offset_i + coef_a_i E[level_a_i] + coef_b_i E[level_b_i]
              + coef_asymptote_i * asymptote(p) + coef_extra_i * extra[extra_i],
   E[] the term values (cm-1, above the minimum) of the fit's levels; level or extra index
   -1 for none. Only level_a, coef_a, observed and sigma are required (others NULL = none).
   The extras are n_extra linear parameters fitted with the potential (free term values,
   a fitted asymptote); their Jacobian columns are the constant coefficients. */
typedef struct {
    size_t n, n_extra;
    const int *level_a, *level_b, *extra;
    const double *coef_a, *coef_b, *coef_asymptote, *coef_extra, *offset;
    const double *observed, *sigma; /* cm-1 */
} wkb_fit_rows;

/* Which parameters vary, and their bounds (+-INFINITY for none); indexed like the model's
   parameters. A varied parameter must start strictly inside its bounds. */
typedef struct {
    int vary[WKB_MAX_PARAMS];
    double lower[WKB_MAX_PARAMS], upper[WKB_MAX_PARAMS];
} wkb_fit_spec;

typedef struct {
    size_t max_iterations; /* solver iterations (each one accepted step) */
    double xtol, gtol;     /* GSL's step and gradient tests (gsl_multifit_nlinear_test) */
    double decrease_tol;   /* converged only when the Gauss-Newton step promises a chi-square
                              decrease below decrease_tol * max(1, chi-square) */
    wkb_settings levels;
} wkb_fit_settings;
wkb_fit_settings wkb_fit_default_settings(void);

enum wkb_fit_stop { WKB_FIT_CONVERGED = 0, WKB_FIT_MAX_ITERATIONS = 1, WKB_FIT_NO_PROGRESS = 2 };
/* "converged", "max_iterations", "no_progress". */
const char *wkb_fit_stop_name(int stop);

typedef struct {
    double params[WKB_MAX_PARAMS]; /* the best (last accepted) point, all parameters */
    double chi_square;             /* sum of squared weighted residuals there */
    double predicted_decrease;     /* Gauss-Newton chi-square decrease still promised; -1 if singular */
    size_t iterations, n_eval, n_infeasible; /* solver iterations, model evaluations, rejected
                                                trial points outside the model's domain */
    size_t bad_row;                /* row that failed at the start ((size_t)-1 if none) */
    int stop;                      /* enum wkb_fit_stop */
    int test;                      /* why converged: 1 small step, 2 small gradient (GSL tests, used when
                                      J^T J is singular), 3 Newton decrement, 4 no decrease possible */
    int insensitive[WKB_MAX_PARAMS]; /* varied parameters held fixed because no level depends on
                                        them at the start (relative sensitivity below WKB_FIT_INSENSITIVE) */
    wkb_error last_infeasible;     /* why the last infeasible trial point was rejected */
    size_t n_level_calculations;   /* levels computed during the fit (all evaluations) */
    size_t n_orbits;               /* first-order WKB orbits evaluated during the fit (0 for another source) */
    size_t n_threads;              /* threads the levels were evaluated on (wkb_set_fit_threads) */
} wkb_fit_outcome;
/* ||d f/d ln p_k|| below this fraction of the largest: the levels do not depend on p_k */
#define WKB_FIT_INSENSITIVE 1e-9

/* Fits start's parameters to data. calc[n] and jac[n][n_params] (caller-owned) receive the
   model and its derivatives at the returned point; source NULL for first-order WKB levels.
   Returns WKB_SUCCESS whenever a best point exists, converged or not (see out->stop).
   Status: WKB_EINVAL (no data, bad v/mu/sigma, bounds, fewer levels than varied
   parameters, no varied parameter the levels depend on); the status of a level the
   starting potential cannot compute (WKB_ENOLEVEL, WKB_ENOWELL, ...; out->bad_row names
   the row); WKB_ENUMERIC (GSL failure); WKB_ENOMEM. */
int wkb_fit_run(const wkb_potential *start, const wkb_fit_data *data, const wkb_fit_spec *spec,
                const wkb_fit_settings *settings, const wkb_level_source *source,
                wkb_fit_outcome *out, double *calc, double *jac, wkb_error *err);

/* The fit of wkb_fit_run to rows (wkb_fit_rows) over distinct levels (energy_zero minimum;
   each level is computed once per evaluation whatever the number of rows using it).
   extra[n_extra]: out, the fitted extras (closed-form weighted means for the potential: the
   solver works on the problem projected onto the potential's parameters, see fit.c; the values
   passed in are not used). calc[n_rows], jac[n_rows][n_params + n_extra].
   out->bad_row names the failing LEVEL at the start. Status as wkb_fit_run. */
int wkb_fit_run_rows(const wkb_potential *start, const wkb_fit_data *levels, const wkb_fit_rows *rows,
                     const wkb_fit_spec *spec, double *extra, const wkb_fit_settings *settings,
                     const wkb_level_source *source, wkb_fit_outcome *out, double *calc, double *jac,
                     wkb_error *err);

/* Every bound level of (pot, mu, J(J+1) = rot) with its parameter gradient, for
   predictions: energy[capacity], dEdp[capacity][n_params]; *count = number of bound levels
   (only min(count, capacity) are filled). Levels from source (asked in ascending v until
   WKB_ENOLEVEL), or first-order WKB when source is NULL. vD and dvDdp[n_params] (may be
   NULL) are always the WKB quantum number at dissociation and its gradient (central
   differences of the action at the asymptote; NaN where a perturbed potential is invalid). */
int wkb_fit_levels(const wkb_potential *pot, double mu, double rot, const wkb_settings *settings,
                   const wkb_level_source *source, size_t capacity, double *energy, double *dEdp,
                   size_t *count, double *vD, double *dvDdp, wkb_error *err);

/* ---------------------------------------------------------------- tall_qr.c */
/* Householder QR of the row-major n x p matrix A (n >= p >= 1) on the calling thread (the fits' tall
   Jacobians: no threaded BLAS): R[p][p] upper triangular (A = Q R); with b (n values, may be NULL),
   qtb[p] = the first p entries of Q^T b and *rest = the sum of squares of the others. */
int wkb_tall_qr(size_t n, size_t p, const double *A, const double *b, double *R, double *qtb, double *rest,
                wkb_error *err);

/* ---------------------------------------------------------------- replica_fit.c */
/* Per-level corrections to first-order WKB levels, linear in the parameters:
   E_v(p) = E_wkb,v(p) + shift[i] + slope[i] . (p - p0), for the level i of (mu, rot, v); table sorted
   by (mu, rot, v) without repeats. A level above its (mu, rot) group's last entry uses that entry; a
   group without entries gets no correction. slope[n][n_params] may be NULL (frozen corrections). */
typedef struct {
    size_t n;
    const double *mu, *rot;
    const int *v;
    const double *shift, *slope, *p0;
} wkb_level_shifts;

typedef struct {
    int status;                /* of the fit (wkb_fit_run's); the replica failed when not WKB_SUCCESS */
    int stop;                  /* enum wkb_fit_stop */
    int insensitive;           /* some varied parameter was held fixed (no row depends on it) */
    int pred_status;           /* of the predictions */
    double chi_square, vD, asymptote;
    size_t iterations, n_rows, pred_count;
    size_t extrapolated_fit, extrapolated_pred; /* levels corrected with a neighbour's entry */
    wkb_error error;
} wkb_replica_outcome;

/* n_rep fits of wkb_fit_run from start (spec, settings as there) to data's rows (v, rot, mu, sigma,
   energy_zero; energy and offset unused) with replica r's energies energy[r][n] and row counts
   count[r][n] (NULL: every row once; a row drawn c times has sigma/sqrt(c), c = 0 leaves it out),
   levels corrected by shifts (NULL: plain first-order WKB). params[r][n_params] receive the fitted
   point; with n_pred_v > 0, pred_energy[r][n_pred_v] the corrected levels v = pred_v[] at
   (pred_mu, J = 0) (NaN where not bound), outcome pred_count the number of bound corrected levels
   there (every level below the highest bound one counts as bound), vD the first-order one.
   Per-replica statuses in outcomes[n_rep].
   Status: WKB_EINVAL (bad table or arrays), WKB_ENOMEM; otherwise WKB_SUCCESS. */
int wkb_fit_replicas(const wkb_potential *start, const wkb_fit_data *data, const wkb_fit_spec *spec,
                     const wkb_fit_settings *settings, const wkb_level_shifts *shifts, size_t n_rep,
                     const double *energy, const double *count, double pred_mu, const int *pred_v,
                     size_t n_pred_v, wkb_replica_outcome *outcomes, double *params, double *pred_energy,
                     wkb_error *err);

/* ---------------------------------------------------------------- rkr.c */
#define WKB_RKR_MAX_TERMS 32       /* coefficients per Dunham expansion */
#define WKB_RKR_DEFAULT_POINTS 100 /* Gauss-Legendre nodes per integral */

/* First-order RKR turning points (Rydberg, Klein, Rees; physics.md section 5) from Dunham
   expansions in x = v + 1/2, measured from the potential minimum (Y_00 left out):
     G(v) = sum_{k=1}^{nG} G_coef[k-1] x^k   (G_coef = Y_10, Y_20, ...; cm-1)
     B(v) = sum_{k=0}^{nB-1} B_coef[k] x^k   (B_coef = Y_01, Y_11, ...; cm-1).
   mu: reduced mass, u. For each of the n values v[i] (> -1/2): energy = G(v) (cm-1), the
   Klein integrals f = (r2 - r1)/2 (angstrom) and g = (1/r1 - 1/r2)/2 (1/angstrom), the
   turning points r_inner < r_outer (angstrom) and error, a conservative estimate of their
   quadrature error (largest change against a rule of about 2/3 as many nodes, angstrom).
   The integrals use v' = v - w^2 and Gauss-Legendre in w with quadrature_points nodes
   (a size GSL tabulates: 32, 64, 96, 100, 128, 256, 512, 1024; 0 for
   WKB_RKR_DEFAULT_POINTS); G(v) - G(v') is formed from the Taylor
   coefficients of G at v, free of cancellation. Nothing is allocated per level.
   Status: WKB_EINVAL (mu not finite and > 0; no, too many or non-finite coefficients;
   v not finite or <= -1/2; dG/dv <= 0 or B <= 0 somewhere on [-1/2, max v], with the v
   where it happens in the message; bad quadrature_points); WKB_ENOMEM; WKB_ENUMERIC. */
int wkb_rkr(const double *G_coef, size_t nG, const double *B_coef, size_t nB, double mu,
            const double *v, size_t n, size_t quadrature_points, double *energy, double *f,
            double *g, double *r_inner, double *r_outer, double *error, wkb_error *err);

/* ------------------------------------------------------------ quasibound.c */
/* Levels trapped behind a barrier of V_J = V + eps*rot/r^2 (shape resonances), semiclassically:
   positions from the inner-well rule between r1 and r2 (first or second order, physics.md 2, 10),
   FWHM Gamma = (dE/dv / 2 pi) T(theta), theta = integral_{r2}^{r3} sqrt((V_J - E)/eps) dr. */
enum wkb_width_form {
    WKB_WIDTH_UNIFORM = 0, /* T = ln(1 + exp(-2 theta)) (uniform form, physics.md 10) */
    WKB_WIDTH_KEMBLE = 1   /* T = 1/(1 + exp(2 theta)) (Kemble, Phys. Rev. 48, 549 (1935)) */
};
/* The barrier-penetration factor T(theta) of the given form. */
double wkb_transmission(double theta, int width_form);

typedef struct {
    size_t nodes;       /* Gauss-Legendre points per quadrature piece (positive half of a 2*nodes rule) */
    size_t scan_points; /* log grid for the barrier search */
    double energy_tol;  /* cm-1 */
    int max_iter;
    int order;          /* position rule: 1 first order, 2 with the second-order term (falls back to 1) */
    int width_form;     /* enum wkb_width_form */
    int barrier_phase;  /* order 2: add the barrier-phase remainder (wkb_barrier_phase_remainder) */
    int width_phase;    /* width spacing pi/(dI/dE - dphi/dE / 2) instead of pi/(dI/dE) */
    int complex_position; /* order 2 with barrier phase: the position as the real part of the complex root of
                             the rule with the barrier's decay term (quasibound.c); 0: the real-energy root */
    double barrier_match_theta; /* levels with theta below this: position and width from the barrier-matched
                                   pole (wkb_res_barrier_matched); 0: never */
    double join_distance;       /* A beyond r3 where the barrier-matched rule joins the outgoing WKB wave */
} wkb_qb_settings;
wkb_qb_settings wkb_qb_default_settings(void);

/* The barrier of V_J outside the well: found = 0 when V_J has no maximum above the asymptote. */
typedef struct {
    int found;
    double asymptote;          /* D, cm-1 */
    double r_bottom, bottom;   /* the well minimum of V_J */
    double r_top, top, height; /* the barrier maximum: r, V_J, V_J - D */
} wkb_barrier;
/* Scans V_J on scan_points log-spaced points from the model's inner scan point to 200 r_min.
   Status: WKB_EINVAL (bad mu, rot), WKB_ENUMERIC (a non-finite potential). */
int wkb_barrier_find(const wkb_potential *pot, double mu, double rot, size_t scan_points, wkb_barrier *bar,
                     wkb_error *err);

/* The phase integrals at E = D + e, 0 < e < height. */
typedef struct {
    double energy, r1, r2, r3;
    double action;             /* integral_{r1}^{r2} k dr */
    double half_period;        /* d(action)/dE, 1/cm-1 */
    double Bv;                 /* inner-well average of eps/r^2 */
    double curvature_integral; /* integral_{r1}^{r2} V_J''/sqrt(E - V_J) dr */
    double theta;              /* barrier penetration integral */
    double dtheta_dE;          /* its energy derivative, 1/cm-1 (negative) */
} wkb_qb_orbit_values;
/* phi(-theta/pi) + pi/(24 theta): the parabolic-barrier phase of physics.md 10 less its leading term. */
double wkb_barrier_phase_remainder(double theta);
/* d phi/d e at e = -theta/pi: Re psi(1/2 + i e) - ln|e|. */
double wkb_barrier_phase_slope(double theta);

typedef struct {
    int v, order;              /* order: the position rule that converged (1 or 2) */
    int complex_root;          /* 1: the position is the real part of the complex root (complex_position) */
    int barrier_matched;       /* 1: position, width and error from the barrier-matched pole */
    double energy, above_asymptote; /* E and E - D, cm-1 */
    double width, theta, dEdv, Bv, error; /* width: FWHM cm-1; error: numerical error of E */
    double dtheta_dE, width_spacing; /* width_spacing: the level spacing in the width formula, cm-1 */
    double r1, r2, r3;
} wkb_qb_level;

typedef struct {
    wkb_barrier barrier;
    double v_first, v_top;     /* first-order quantum numbers at the asymptote and at the barrier top */
    size_t n_first_order_fallback; /* levels where the second-order rule found no root */
    size_t n_barrier_match_fallback; /* levels meant for the barrier-matched rule where it failed */
} wkb_qb_range;

typedef struct wkb_qb wkb_qb;
wkb_qb *wkb_qb_alloc(const wkb_qb_settings *settings); /* NULL on bad settings or no memory */
void wkb_qb_free(wkb_qb *q);
int wkb_qb_set(wkb_qb *q, const wkb_potential *pot, double mu, double rot, wkb_error *err);
const wkb_barrier *wkb_qb_barrier(const wkb_qb *q);
/* Status: WKB_ENOLEVEL (no barrier), WKB_EINVAL (e outside (0, height)), WKB_ENUMERIC. */
int wkb_qb_orbit(wkb_qb *q, double e, wkb_qb_orbit_values *o, wkb_error *err);
/* The range (and the number of levels in it) without solving for them. */
int wkb_qb_count(wkb_qb *q, size_t *count, wkb_qb_range *range, wkb_error *err);
/* Every level with D < E < V_b (v = ceil(v_first) .. ceil(v_top)-1) into levels[capacity];
   *count may exceed capacity. No barrier: *count = 0, success. */
int wkb_qb_levels(wkb_qb *q, wkb_qb_level *levels, size_t capacity, size_t *count, wkb_qb_range *range,
                  wkb_error *err);

/* ------------------------------------------------------------- resonance.c */
/* Exact resonances: complex-energy poles E_r - i Gamma/2 of the outgoing-wave problem (details at the
   top of resonance.c). */
typedef struct {
    double phase_step;  /* k_max * h on the finest grid */
    double r_match;     /* largest matching radius R, A (R = min(r_match, 2/|Im k|), at least 10 wavelengths
                           beyond the outer turning point) */
    double r_match_alt; /* second radius, as a fraction of R, for the outer error estimate */
    double start_decay; /* integral of kappa from the start point to the inner turning point */
    size_t max_points;
    int max_iter;       /* secant iterations per grid */
} wkb_resonance_settings;
wkb_resonance_settings wkb_resonance_default_settings(void);

typedef struct {
    double energy, width;             /* E_r and FWHM Gamma, cm-1 */
    double energy_error, width_error; /* estimates, cm-1 */
    double r_match;
    size_t grid_points;
    int iterations, above_barrier;
} wkb_resonance;

typedef struct wkb_res wkb_res;
wkb_res *wkb_res_alloc(const wkb_resonance_settings *settings); /* NULL on bad settings or no memory */
void wkb_res_free(wkb_res *w);
/* The pole nearest the guess (E, FWHM in cm-1) for integer J. Status: WKB_EINVAL, WKB_ENOLEVEL (no
   barrier), WKB_ENOCONV, WKB_ENUMERIC, WKB_ENOMEM. */
int wkb_res_find(wkb_res *w, const wkb_potential *pot, double mu, int J, double energy_guess, double width_guess,
                 wkb_resonance *out, wkb_error *err);
/* The barrier-matched pole (quasibound.c's rule for broad levels): the same regular solution from inside the
   inner wall through the barrier, joined at R = r3 + join_distance (r3 the outer turning point beyond the
   barrier, A) to the second-order outgoing WKB wave instead of the exact outgoing wave far out; any
   rot = J(J+1) >= 0, bar from wkb_barrier_find at that rot. energy_error, width_error: the Richardson step
   error and the change when joined at r3 + join_distance/2. Status as wkb_res_find. */
int wkb_res_barrier_matched(wkb_res *w, const wkb_potential *pot, double mu, double rot, const wkb_barrier *bar,
                            double r3, double energy_guess, double width_guess, double join_distance,
                            wkb_resonance *out, wkb_error *err);

#endif
