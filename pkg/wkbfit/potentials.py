"""Potential-energy curves of a diatomic molecule: thin Python objects over the C models.

Units: r in angstrom, energies in cm-1. The analytic models have their minimum V(re) = 0
and their asymptote at +De, so level energies are term values above the minimum.
"""
import math
import re

import numpy as np

from . import _core, _validate

#: model name -> parameter names, from the core's model table (read once)
MODEL_PARAMETERS = _core.models()

__all__ = ["Potential", "Morse", "LennardJones", "PoschlTeller", "PointwisePotential", "EMO", "MLR", "damping_range"]


def _as_r(r):
    """r as a float array (a copy is never needed: the core does not write to it)."""
    arr = _validate.real_array(r, "r", "a distance in angstrom or an array of them", finite=False)
    if not np.all(np.isfinite(arr)):
        raise ValueError("r must contain only finite distances (angstrom); got non-finite values")
    if np.any(arr <= 0):
        raise ValueError("r must be > 0 angstrom; got min(r) = %g" % float(np.min(arr)))
    return arr


#: the range the solvers scan, in units of re, where every model's V must be finite (computed once:
#: a fit builds a potential per result)
_WORKING_RANGE_GRID = np.geomspace(0.02, 60.0, 64)


class Potential:
    """Base class: a named model of the C core with named parameters.

    Subclasses set `model` (the core's model name). Instances are immutable values:
    `with_params(...)` returns a changed copy.
    """

    model = None
    #: parameters that `fit` keeps fixed unless asked otherwise
    fixed_by_default = ()

    def __init__(self, **params):
        names = self.param_names
        missing = [n for n in names if n not in params]
        extra = [n for n in params if n not in names]
        if missing or extra:
            raise ValueError("%s takes parameters %s; missing %s, unknown %s"
                             % (type(self).__name__, ", ".join(names), missing or "none", extra or "none"))
        values = []
        for n in names:
            if not _validate.is_real_number(params[n]):
                raise _validate.ArgumentTypeError("%s parameter %s=%r is not a number: give a finite real number"
                                % (type(self).__name__, n, params[n]))
            try:
                values.append(float(params[n]))
            except (TypeError, ValueError, OverflowError):
                raise ValueError("%s parameter %s=%r is not a number" % (type(self).__name__, n, params[n])) from None
        self._params = np.array(values, dtype=float)
        self._params.setflags(write=False)
        # the core checks the values and raises ValueError naming the bad one; with re inside its working range
        # the same call gives V over the range the solvers scan (one core call, not two, per potential)
        re_value = float(self._params[names.index("re")]) if "re" in names else math.nan
        in_range = self.RE_RANGE[0] <= re_value <= self.RE_RANGE[1]
        r = re_value * _WORKING_RANGE_GRID if in_range else np.empty(0)
        vals = _core.potential_values(self.model, self._params, r, self._curve())
        self._check_working_range(vals if in_range else None)

    #: working range of the analytic models' re (angstrom) and De (cm-1): far beyond any molecule,
    #: but inside the range where the solvers' length and energy scales stay finite
    RE_RANGE = (1e-3, 1e4)
    DE_MAX = 1e9

    def _check_working_range(self, vals=None):
        """vals: the core's values on p["re"] * _WORKING_RANGE_GRID when already computed."""
        p = dict(zip(self.param_names, self._params.tolist()))
        owner = type(self).__name__
        if "re" in p and not self.RE_RANGE[0] <= p["re"] <= self.RE_RANGE[1]:
            raise ValueError("%s parameter re=%r A is outside the working range %g..%g A"
                             % (owner, p["re"], self.RE_RANGE[0], self.RE_RANGE[1]))
        if "De" in p and not p["De"] <= self.DE_MAX:
            raise ValueError("%s parameter De=%r cm-1 is outside the working range (at most %g cm-1)"
                             % (owner, p["De"], self.DE_MAX))
        if "re" in p:
            # V must be finite over the range the solvers scan (a few percent of re to 60 re)
            r = p["re"] * _WORKING_RANGE_GRID
            if vals is None:
                vals = _core.potential_values(self.model, self._params, r, self._curve())
            # (a finite sum of squares proves every value finite: 1/3 of the elementwise test's cost, which
            # still decides whenever the sum is not finite)
            if math.isfinite(vals[0] @ vals[0] + vals[1] @ vals[1] + vals[3] @ vals[3]):
                return
            bad = ~(np.isfinite(vals[0]) & np.isfinite(vals[1]) & np.isfinite(vals[3]))
            if np.any(bad & (r >= 0.5 * p["re"])):
                k = int(np.flatnonzero(bad & (r >= 0.5 * p["re"]))[0])
                raise ValueError("%s with %s gives a non-finite V at r=%.6g A: the parameters are outside the "
                                 "range this model can be evaluated in" % (owner, self._param_text(), r[k]))

    def _param_text(self):
        return ", ".join("%s=%.10g" % kv for kv in zip(self.param_names, self._params.tolist()))

    # -- description -------------------------------------------------------------------
    @property
    def param_names(self):
        return MODEL_PARAMETERS[self.model]

    @property
    def params(self):
        """Parameter values by name (a new dict)."""
        return dict(zip(self.param_names, self._params.tolist()))

    def __getattr__(self, name):
        if name.startswith("_"):
            raise AttributeError(name)
        params = self.__dict__.get("_params")
        if params is not None and name in self.param_names:
            return float(params[self.param_names.index(name)])
        raise AttributeError("%s has no attribute %r" % (type(self).__name__, name))

    def with_params(self, **changes):
        """A copy with some parameters changed."""
        p = self.params
        p.update(changes)
        return type(self)(**p)

    def __repr__(self):
        return "%s(%s)" % (type(self).__name__, ", ".join("%s=%.10g" % kv for kv in self.params.items()))

    def _curve(self):
        return None

    def _core_args(self):
        """(model name, parameter array, curve) as the core's functions take them."""
        return self.model, self._params, self._curve()

    # -- evaluation --------------------------------------------------------------------
    @property
    def asymptote(self):
        """The dissociation limit, in this potential's energy zero (cm-1)."""
        return float(self.params["De"])

    def __call__(self, r):
        """V(r) in cm-1 for r in angstrom (scalar or array)."""
        arr = _as_r(r)
        V = _core.potential_values(self.model, self._params, arr.ravel(), self._curve())[0]
        _outside_domain(self, arr.ravel(), V)
        return float(V[0]) if arr.ndim == 0 else V.reshape(arr.shape)

    def derivatives(self, r):
        """(V, dV/dr, d2V/dr2) at r (1-D arrays)."""
        rr = np.atleast_1d(_as_r(r))
        V, dV, d2V, _ = _core.potential_values(self.model, self._params, rr, self._curve())
        for x in (V, dV, d2V):
            _outside_domain(self, rr.ravel(), x.ravel())
        return V, dV, d2V

    def binding_depth(self, r):
        """asymptote - V(r), computed without cancellation where V nears the asymptote."""
        rr = np.atleast_1d(_as_r(r))
        d = _core.potential_values(self.model, self._params, rr, self._curve())[3]
        _outside_domain(self, rr.ravel(), d.ravel())
        return d

    def plot(self, mu=None, ax=None, **options):
        """The curve, with its levels for mu (reduced mass(es); see `wkbfit.plots.potential`)."""
        from . import plots
        return plots.potential(self, mu, ax=ax, **options)

    def param_derivatives(self, r):
        """Array (len(r), n_params) of dV/dp for each parameter, in `param_names` order."""
        rr = np.atleast_1d(_as_r(r))
        out = _core.param_derivatives(self.model, self._params, rr, self._curve())
        _outside_domain(self, np.repeat(rr.ravel(), out.shape[1]) if out.ndim == 2 else rr.ravel(), out.ravel())
        return out


def _outside_domain(potential, r, values):
    """Refuses non-finite values (r far outside where the model can be evaluated) by naming r."""
    bad = ~np.isfinite(values)
    if np.any(bad):
        k = int(np.flatnonzero(bad)[0])
        raise ValueError("%r cannot be evaluated at r=%.6g A (the result is not finite): r is outside its domain; "
                         "give r where V stays finite" % (potential, r[k]))


class Morse(Potential):
    """Morse potential V = De (1 - exp(-a (r - re)))^2 [Morse, Phys. Rev. 34, 57 (1929)].

    De in cm-1, re in angstrom, a in 1/angstrom.
    """

    model = "morse"

    def __init__(self, De, re, a):
        super().__init__(De=De, re=re, a=a)


class LennardJones(Potential):
    """Lennard-Jones (n, m) potential with minimum 0 at re and asymptote De:

    V = De + De/(n - m) [m (re/r)^n - n (re/r)^m], n > m > 2.
    """

    model = "lennard_jones"
    fixed_by_default = ("n", "m")

    def __init__(self, De, re, n=12, m=6):
        super().__init__(De=De, re=re, n=n, m=m)


class PoschlTeller(Potential):
    """Hyperbolic Poeschl-Teller well V = De tanh^2(a (r - re)) = De - De sech^2(a (r - re)).

    Mainly a test case: its exact and first-order WKB levels have closed forms.
    """

    model = "poschl_teller"

    def __init__(self, De, re, a):
        super().__init__(De=De, re=re, a=a)


class PointwisePotential(Potential):
    """A potential known at points (r in angstrom, V in cm-1, in the user's own energy zero).

    Between the points: a cubic spline through every point (not-a-knot ends). Outside them the
    curve is continued by formulas, which are guesses, not data (levels that reach there are
    reported by an ExtrapolationWarning):

    inner_wall: how the curve goes on inside the first point, passing through the three innermost
        points (which must fall with r and curve upwards):
        "exponential"    A + B exp(-C (r - r_0)), a Born-Mayer-like wall (the default);
        "inverse_power"  A + B (r_0/r)^k, softer at small r.
    outer_tail: how it goes on beyond the last point: "inverse_power", D - C_n/r^n, the long-range
        form (the only one so far). The asymptote D and the power n are used when given
        (asymptote=..., tail_power=...) and otherwise solved for from the outermost points (both
        unknown: the last three; one: the last two); `tail` reports the result, `wall` the wall.

    Each continuation is joined to the spline with matching value, slope and curvature: over one
    interval beyond the end point (inside: r[1] - r[0], at most r[0]/2; outside: r[-1] - r[-2]) the
    extended end cubic fades into the formula with a quintic smoothstep weight.

    At least 5 points are needed; r must be > 0 and strictly increasing. The arrays given are copied.
    """

    model = "pointwise"
    #: the forms of the inner wall, by name (their codes in the core)
    INNER_WALLS = ("exponential", "inverse_power")
    OUTER_TAILS = ("inverse_power",)

    def __init__(self, r, V, asymptote=None, tail_power=None, *, inner_wall="exponential",
                 outer_tail="inverse_power"):
        r = _validate.real_array(r, "r", "arrays of numbers (distances in angstrom)", finite=False)
        V = _validate.real_array(V, "V", "arrays of numbers (energies in cm-1)", finite=False)
        if r.ndim != 1 or V.ndim != 1 or r.shape != V.shape:
            raise ValueError("r and V must be 1-D arrays of the same length; got shapes %s and %s"
                             % (r.shape, V.shape))
        for name, val in (("asymptote", asymptote), ("tail_power", tail_power)):
            if val is not None:
                _validate.real(val, name, "a finite number or None (to fit it)")
        if inner_wall not in self.INNER_WALLS:
            raise ValueError("inner_wall=%r is not known; use one of %s" % (inner_wall, ", ".join(
                repr(w) for w in self.INNER_WALLS)))
        if outer_tail not in self.OUTER_TAILS:
            raise ValueError("outer_tail=%r is not known; use %s" % (outer_tail, ", ".join(
                repr(t) for t in self.OUTER_TAILS)))
        # the working range of the analytic models' De: energies beyond it only make unbounded work
        finite_V = np.abs(V[np.isfinite(V)])  # non-finite values are named by the core's check
        for name, val in (("V", np.max(finite_V) if finite_V.size else 0.0),
                          ("asymptote", 0.0 if asymptote is None else abs(float(asymptote)))):
            if val > Potential.DE_MAX:
                raise ValueError("%s reaches %.6g cm-1 in magnitude, outside the working range (at most %g cm-1)"
                                 % (name, val, Potential.DE_MAX))
        try:
            self._curve_capsule, D, n, Cn, wall = _core.pointwise_build(
                r, V, math.nan if asymptote is None else float(asymptote),
                math.nan if tail_power is None else float(tail_power), self.INNER_WALLS.index(inner_wall))
        except RuntimeError as exc:
            # a numerical failure caused by the points given: the user can fix it, so a ValueError
            raise ValueError("the points do not define a usable curve: %s" % exc) from None
        r.setflags(write=False)
        V.setflags(write=False)
        self.r, self.V = r, V
        self.tail = {"form": outer_tail, "asymptote": D, "tail_power": n, "tail_coefficient": Cn,
                     "asymptote_fitted": asymptote is None, "tail_power_fitted": tail_power is None}
        _, A, B, C = wall
        self.wall = {"form": inner_wall, "offset": A, "height": B,
                     ("power" if inner_wall == "inverse_power" else "rate"): C}
        super().__init__()

    def _curve(self):
        return self._curve_capsule

    @property
    def asymptote(self):
        return float(self.tail["asymptote"])

    def with_params(self, **changes):
        if changes:
            raise ValueError("a PointwisePotential has no adjustable parameters")
        return self

    def __repr__(self):
        return "PointwisePotential(%d points, r=%.4g..%.4g A, asymptote=%.10g%s, tail_power=%.6g%s)" % (
            len(self.r), self.r[0], self.r[-1], self.tail["asymptote"],
            " (fitted)" if self.tail["asymptote_fitted"] else "", self.tail["tail_power"],
            " (fitted)" if self.tail["tail_power_fitted"] else "")


# -- EMO and MLR: the core has one model per number of exponent coefficients ("emo1".."emo8", "mlr1"..) --
_MAX_BETAS = 8


def _exponent_coefficients(owner, betas, keywords):
    """The beta_i as a list of floats, from `betas` (a sequence, or one number for beta0 alone) or
    from keywords beta0, beta1, ... (as `with_params` and `fit` pass them)."""
    unknown = sorted(k for k in keywords if not re.fullmatch(r"beta[0-9]+", k))
    if unknown:
        raise ValueError("%s got unknown parameter%s %s" % (owner, "s" if len(unknown) > 1 else "", ", ".join(unknown)))
    if keywords:
        if betas is not None:
            raise ValueError("%s: give the coefficients either as betas=[...] or as beta0=..., beta1=..., not both"
                             % owner)
        names = ["beta%d" % i for i in range(len(keywords))]
        if sorted(keywords) != sorted(names):
            raise ValueError("%s: coefficients given as keywords must be beta0..beta%d without gaps; got %s"
                             % (owner, len(keywords) - 1, ", ".join(sorted(keywords))))
        betas = [keywords[n] for n in names]
    if betas is None:
        raise ValueError("%s needs betas: a sequence of 1 to %d exponent coefficients beta0, beta1, ..."
                         % (owner, _MAX_BETAS))
    values = _validate.real_array(betas, "%s: betas" % owner, "a sequence of 1 to %d finite numbers" % _MAX_BETAS,
                                  finite=False)  # a copy: the caller's sequence is not kept
    values = values.reshape(1) if values.ndim == 0 else values
    if values.ndim != 1 or not 1 <= len(values) <= _MAX_BETAS:
        raise ValueError("%s betas=%r must be a sequence of 1 to %d numbers; got shape %s"
                         % (owner, betas, _MAX_BETAS, values.shape))
    return values.tolist()


class EMO(Potential):
    """Expanded Morse oscillator [Lee, Seto, Hirao, Bernath & Le Roy, J. Mol. Spectrosc. 194, 197 (1999)]:

    V = De [1 - exp(-beta(r) (r - re))]^2,  beta(r) = sum_i beta_i y(r)^i,  y = (r^p - re^p)/(r^p + re^p).

    De in cm-1, re in angstrom, betas (1 to 8 coefficients beta0, beta1, ...) in 1/angstrom, p a whole
    number (1..64; fixed in fits by default). One coefficient gives the Morse potential with a = beta0.
    Needs beta0 > 0 and sum(betas) > 0 (the exponent at large r), so that V rises at re and tends to De.
    The tail is exponential, not the physical inverse-power one.
    """

    model = "emo"  # the family; each object uses the core's model "emoK" for its K coefficients
    fixed_by_default = ("p",)

    def __init__(self, De, re, betas=None, p=3, **coefficients):
        values = _exponent_coefficients("EMO", betas, coefficients)
        self.model = "emo%d" % len(values)
        super().__init__(De=De, re=re, p=p, **{"beta%d" % i: b for i, b in enumerate(values)})

    @property
    def betas(self):
        """The exponent coefficients (beta0, beta1, ...) in 1/angstrom."""
        return tuple(self._params[3:].tolist())


#: damping forms of the MLR long-range terms, by name, with the core's code
DAMPING_FORMS = {None: 0, "none": 0, "tang-toennies": 1, "douketis": 2}
_DAMPING_NAMES = {0: None, 1: "tang-toennies", 2: "douketis"}
#: bohr radius in angstrom (CODATA 2018)
BOHR = 0.529177210903
#: default damping range rho for each form, for two hydrogen atoms (the reference of both scalings):
#: Tang-Toennies b = sqrt(2 I_A) + sqrt(2 I_B) (I in hartree, b in 1/bohr; the decay of the exchange
#: repulsion) = 2/bohr; Douketis type rho = 1 (Douketis et al. 1982; Le Roy et al. 2011)
DEFAULT_DAMPING_RANGE = {1: 2.0 / BOHR, 2: 1.0}
#: first ionization energies in eV (from memory of the NIST Atomic Spectra Database values)
IONIZATION_ENERGY_EV = {"H": 13.598434, "He": 24.587389, "Li": 5.391715, "Be": 9.322699, "Na": 5.139076,
                        "Mg": 7.646235, "K": 4.340663, "Ca": 6.113155, "Rb": 4.177128, "Sr": 5.694867,
                        "Cs": 3.893905, "Ba": 5.211664, "Ne": 21.564540, "Ar": 15.759610, "Kr": 13.999605,
                        "Xe": 12.129842}


def damping_range(damping, atom_a, atom_b):
    """The damping range rho of an MLR for the pair of atoms (element symbols or isotopes, '7Li').

    "tang-toennies": b = sqrt(2 I_A) + sqrt(2 I_B) in 1/bohr, returned in 1/angstrom (the
        exponent of the exchange repulsion between the atoms);
    "douketis": rho_AB = 2 rho_A rho_B/(rho_A + rho_B), rho_X = (I_X/I_H)^(2/3) (Le Roy et al.,
        Mol. Phys. 109, 435 (2011), from memory).
    I are first ionization energies (IONIZATION_ENERGY_EV, from memory of NIST values).
    """
    code = _damping_code(damping)
    if code == 0:
        raise ValueError("damping_range needs a damping form, 'tang-toennies' or 'douketis'")
    energies = []
    for atom in (atom_a, atom_b):
        symbol = re.sub(r"^[0-9]+", "", str(atom).strip())
        if symbol not in IONIZATION_ENERGY_EV:
            raise ValueError("no ionization energy for %r; known: %s (or give rho=... yourself)" % (
                atom, ", ".join(IONIZATION_ENERGY_EV)))
        energies.append(IONIZATION_ENERGY_EV[symbol])
    hartree_ev = 27.211386245988
    if code == 1:
        return sum(math.sqrt(2 * e / hartree_ev) for e in energies) / BOHR
    ra, rb = ((e / IONIZATION_ENERGY_EV["H"]) ** (2.0 / 3.0) for e in energies)
    return 2 * ra * rb / (ra + rb)


def _damping_code(damping):
    if isinstance(damping, str) or damping is None:
        key = damping.strip().lower() if isinstance(damping, str) else None
        if key not in DAMPING_FORMS:
            raise ValueError("damping=%r is not known; use None, 'tang-toennies' or 'douketis'" % (damping,))
        return DAMPING_FORMS[key]
    try:
        code = float(damping)
    except (TypeError, ValueError):
        raise ValueError("damping=%r is not known; use None, 'tang-toennies' or 'douketis'" % (damping,)) from None
    if code not in (0, 1, 2):
        raise ValueError("damping=%r is not known; use None, 'tang-toennies' or 'douketis'" % (damping,))
    return int(code)


class MLR(Potential):
    """Morse/long-range potential [Le Roy & Henderson, Mol. Phys. 105, 663 (2007); Le Roy et al.,
    J. Chem. Phys. 131, 204309 (2009)]:

    V = De [1 - (u(r)/u(re)) exp(-beta(r) y_p(r; re))]^2,  u(r) = C6/r^6 + C8/r^8 + C10/r^10,
    beta(r) = y_p(r; r_ref) beta_inf + [1 - y_p(r; r_ref)] sum_i beta_i y_q(r; r_ref)^i,
    beta_inf = ln(2 De/u(re)),  y_p(r; a) = (r^p - a^p)/(r^p + a^p),

    so that De - V -> u(r) at large r. De in cm-1; re, r_ref in angstrom; C_m in cm-1 angstrom^m
    (C6 > 0; C8, C10 >= 0, 0 leaves the term out; u(re) < 2 De); betas: 1 to 8 coefficients
    (dimensionless). p and q are whole numbers; p must exceed 2 and the spread of the inverse
    powers (p >= 5 with C10 > 0), since V = De - u(r) + O(C6 r^-(6+p)). r_ref: the reference
    distance of the y variables, a distance in angstrom or the string "re" (the default), which takes
    the re given here; it is a parameter of its own and does not follow re when re changes later
    (in a fit or with_params). r_ref=None still means "re" but is deprecated.
    Long range with C3, C4 and damping (keywords C3, C4, damping, rho, s): u(r) = sum_m D_m(r) C_m/r^m
    over m = 3, 4, 6, 8, 10 (C3, C4 in cm-1 angstrom^3, ^4; >= 0), with damping functions D_m:
      damping=None             D_m = 1 (undamped; then u(re) < 2 De is required);
      damping="tang-toennies"  D_m = 1 - exp(-rho r) sum_{k=0}^{m} (rho r)^k/k! [Tang & Toennies,
                               J. Chem. Phys. 80, 3726 (1984)]; rho = b in 1/angstrom;
      damping="douketis"       D_m = [1 - exp(-b(s) rho r/m - c(s) (rho r)^2/sqrt(m))]^(m+s), r in bohr
                               [Douketis et al., J. Chem. Phys. 76, 3057 (1982), generalized by Le Roy
                               et al., Mol. Phys. 109, 435 (2011)]; s = -1 (default) or -2; b(s), c(s)
                               are recalled from memory (3.30, 0.423 for s = -1; 3.69, 0.378 for -2).
    rho=None takes the documented default for two hydrogen atoms (DEFAULT_DAMPING_RANGE: 2/bohr =
    3.78/angstrom for Tang-Toennies, the exponent sqrt(2 I_A) + sqrt(2 I_B) of the exchange repulsion;
    1 for the Douketis form, the reference of its scaling). For other atoms use
    `damping_range(damping, "Li", "Cs")` (from the atoms' ionization energies); heavier atoms damp
    further out. With damping, u_LR(re) may exceed 2 De (beta_inf < 0 is allowed).

    Fixed in fits by default: p, q, r_ref, the long-range coefficients C3..C10 and the damping
    (damping, rho, s) (common practice holds them at theoretical values; vary them with vary=...;
    every one has an analytic dV/dp).
    """

    model = "mlr"  # the family; each object uses the core's model "mlrK" (or "mlrdK") for K coefficients
    fixed_by_default = ("C3", "C4", "C6", "C8", "C10", "p", "q", "r_ref", "damping", "rho", "s")

    def __init__(self, De, re, C6, betas=None, C8=0.0, C10=0.0, p=5, q=3, r_ref="re", *, C3=0.0, C4=0.0,
                 damping=None, rho=None, s=-1, **coefficients):
        values = _exponent_coefficients("MLR", betas, coefficients)
        code = _damping_code(damping)
        betas_kw = {"beta%d" % i: b for i, b in enumerate(values)}
        if r_ref is None:
            from ._warn import warn
            warn('MLR(r_ref=None) is deprecated: write r_ref="re" for the reference distance at re, or give a '
                 'distance in angstrom', DeprecationWarning)
            r_ref = "re"
        if isinstance(r_ref, str):
            if r_ref != "re":
                raise ValueError('MLR r_ref=%r is not valid: give a distance in angstrom or the string "re"' % (r_ref,))
            r_ref = re
        if code == 0 and float(C3) == 0 and float(C4) == 0:
            self.model = "mlr%d" % len(values)
            super().__init__(De=De, re=re, C6=C6, C8=C8, C10=C10, p=p, q=q, r_ref=r_ref, **betas_kw)
            self.fixed_by_default = tuple(n for n in MLR.fixed_by_default if n in self.param_names)
            return
        if rho is None:
            rho = DEFAULT_DAMPING_RANGE.get(code, 1.0)
        self.model = "mlrd%d" % len(values)
        super().__init__(De=De, re=re, C3=C3, C4=C4, C6=C6, C8=C8, C10=C10, p=p, q=q, r_ref=r_ref, damping=code,
                         rho=rho, s=s, **betas_kw)

    @property
    def damping(self):
        """The damping form: None, "tang-toennies" or "douketis"."""
        if self.model.startswith("mlrd"):
            return _DAMPING_NAMES[int(self._params[10])]
        return None

    def __getattr__(self, name):
        # C3, C4 of an undamped MLR without them are 0; rho, s are not defined there
        if name in ("C3", "C4") and not self.__dict__.get("model", "").startswith("mlrd"):
            return 0.0
        return super().__getattr__(name)

    @property
    def betas(self):
        """The exponent coefficients (beta0, beta1, ...), dimensionless."""
        return tuple(self._params[13 if self.model.startswith("mlrd") else 8:].tolist())
