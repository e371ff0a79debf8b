"""Weighted least-squares fits of a potential to measured levels, with uncertainties and predictions.

`fit(potential, observed, mu=None, ...)` adjusts the potential's parameters so that its levels
reproduce the observed ones within their uncertainties and returns a `FitResult`. The
Levenberg-Marquardt iterations run in C (GSL's trust-region solver, csrc/fit.c) with the
analytic Jacobian dE_v/dp = <dV/dp> (the orbit average, for first-order WKB). Python only
prepares the data and analyses the result (covariance, correlations, reports, predictions).

Units: energies cm-1, distances angstrom, masses u.
"""
import json
import math
import os
import warnings

import numpy as np

from . import _core, _validate
from . import potentials as _potentials
from .masses import as_reduced_mass, parse_isotopologue, reduced_mass
from .observed import read_levels
from . import reports as _reports
from .reports import _frozen, _atomic_write
from .potentials import Potential

__all__ = ["fit", "FitResult", "Parameter", "Prediction", "FitWarning"]

_ENERGY_ZERO_CODES = {"minimum": 0, "asymptote": 1, "lowest": 2}
_METHOD_CODES = {"wkb": 0, "exact": 1}


#: singular values of the column-normalised weighted Jacobian below this fraction of the
#: largest mean the normal matrix is numerically singular: the level energies carry about
#: 1e-11 cm-1 of numerical noise, so smaller directions are noise, not information
_RCOND_SINGULAR = 1e-8
#: a parameter whose relative sensitivity ||d chi/d ln p|| is below this fraction of the
#: largest one does not influence the calculated levels at all
_SENSITIVITY_ZERO = 1e-9



class FitWarning(UserWarning):
    """A fit ended without convergence, or some parameter is not determined by the data."""


class Parameter:
    """One parameter of a fit.

    value: fitted (or fixed) value; uncertainty: one standard deviation, or None when it is
    fixed or not determined (then `note` says why); vary: whether it was fitted; bounds:
    (lower, upper), None for an open side; initial: the starting value; determined: False
    when the data do not determine it; note: plain-language remarks.
    """

    __slots__ = ("name", "value", "uncertainty", "vary", "bounds", "initial", "determined", "note")

    def __init__(self, name, value, uncertainty=None, vary=True, bounds=(None, None), initial=None,
                 determined=True, note=""):
        self.name = name
        self.value = float(value)
        self.uncertainty = None if uncertainty is None else float(uncertainty)
        self.vary = bool(vary)
        self.bounds = (None if bounds[0] is None else float(bounds[0]),
                       None if bounds[1] is None else float(bounds[1]))
        self.initial = self.value if initial is None else float(initial)
        self.determined = bool(determined)
        self.note = note

    def to_dict(self):
        return {k: getattr(self, k) for k in self.__slots__}

    def __repr__(self):
        if self.uncertainty is not None:
            unc = "+/- %.4g" % self.uncertainty
        else:
            unc = "(fixed)" if not self.vary else "(uncertainty not determined)"
        return "<Parameter %s = %.10g %s%s>" % (self.name, self.value, unc, "; " + self.note if self.note else "")


# ------------------------------------------------------------------------------ fit
def fit(potential, observed, mu=None, *, method="wkb", vary=None, bounds=None, scale_uncertainties=True,
        max_iterations=200):
    """Fit the parameters of `potential` to measured levels by weighted least squares.

    potential: a wkbfit potential object (Morse, LennardJones, ...); its parameter values are
        the starting point, and it is not changed (the result holds a new, fitted one).
    observed: an ObservedLevels, or anything `read_levels` accepts (CSV path, DataFrame, dict);
        its `energy_zero` says what the energies are measured from:
        "minimum"   calc = E_v, the term value above the potential minimum;
        "asymptote" calc = asymptote - E_v, the binding energy;
        "lowest"    calc = E_v - E_(v=0,J=0) of the same isotopologue. The fit uses the
                    differences from the model's own lowest level rather than one fitted
                    offset per isotopologue: the data define their zero as that level, which
                    the potential predicts without any extra parameter, so an offset would
                    only add a parameter per isotopologue, strongly correlated with De, and
                    throw away the information the zero-point energy carries. The rows v=0,
                    J=0 themselves (energy 0 by definition) are shown but not fitted.
    mu: None (reduced masses from the isotopologue labels and the mass table), a number (one
        isotopologue), or a dict label -> reduced mass in u.
    method: "wkb" (first-order WKB levels; the default) or "exact" (levels of the radial
        Schroedinger equation, with the Jacobian <v|dV/dp|v> from the exact wavefunctions;
        every iteration uses exact levels, about 20-30 times slower than WKB).
    vary: None (every parameter except the class's `fixed_by_default`, e.g. the Lennard-Jones
        exponents), a dict name -> bool overriding those defaults, or a list of the names to vary.
    bounds: dict name -> (lower, upper), None for an open side. A bounded parameter is fitted
        through a smooth monotone transform (logistic between two bounds, exponential beyond
        one), and must start strictly inside its bounds.
    scale_uncertainties: multiply the covariance by the reduced chi-square chi2/dof, i.e. the
        uncertainties by the dimensionless standard error (default True). Common practice in
        spectroscopic fits: the quoted uncertainties then reflect the actual scatter of the
        residuals, including model shortcomings (a WKB model, a too simple potential form) and
        mis-stated measurement uncertainties. With False the uncertainties follow from the
        stated measurement uncertainties alone. Both covariances are kept in the result.
    max_iterations: accepted Levenberg-Marquardt steps at most; a fit that stops there returns
        its best point with status "max_iterations" and a warning.

    Returns a FitResult. Raises ValueError for bad input (naming the bad value), including
    fewer levels than varied parameters and a starting potential that does not bind a level
    the data ask for.
    """
    if not isinstance(potential, Potential):
        raise ValueError("potential must be a wkbfit potential object (Morse, LennardJones, ...); got %r"
                         % (potential,))
    names = list(potential.param_names)
    if not names:
        raise ValueError("%r has no adjustable parameters: nothing to fit" % (potential,))
    obs = read_levels(observed)
    if method not in ("wkb", "exact"):
        raise ValueError("method=%r is not known; use 'wkb' (first-order WKB levels) or 'exact'" % (method,))
    if not isinstance(scale_uncertainties, (bool, np.bool_)):
        raise ValueError("scale_uncertainties=%r must be True or False" % (scale_uncertainties,))
    max_iterations = _validate.integer(max_iterations, "max_iterations", 1, 10 ** 7,
                                       "a positive integer (at most 10^7)")
    if max_iterations < 1:
        raise ValueError("max_iterations=%r must be a positive integer" % (max_iterations,))

    vary_flags = _vary_flags(potential, vary)
    lower, upper, bounds_by_name = _bounds(potential, bounds, vary_flags)
    masses = obs.masses_by_isotopologue(mu)
    mu_rows = np.array([masses[label] for label in obs.isotopologue], dtype=float)
    rot = (obs.J * (obs.J + 1)).astype(float)
    zero = obs.energy_zero
    if zero not in _ENERGY_ZERO_CODES:
        raise ValueError("energy_zero=%r of the data is not known; use one of %s" % (zero, list(_ENERGY_ZERO_CODES)))
    # rows v=0, J=0 define the zero of "lowest" data: calc is 0 by definition, so they carry no information
    fitted = np.ones(len(obs), dtype=bool)
    if zero == "lowest":
        fitted &= ~((obs.v == 0) & (obs.J == 0))
    rows = np.nonzero(fitted)[0]
    n_vary = int(sum(vary_flags))
    if n_vary == 0:
        raise ValueError("no parameter is varied (vary=%r): nothing to fit" % (vary,))
    if len(rows) < n_vary:
        raise ValueError("%d fitted level%s cannot determine %d varied parameters (%s)%s; fix some parameters "
                         "(vary=...) or add levels" % (
                             len(rows), "" if len(rows) == 1 else "s", n_vary,
                             ", ".join(n for n, f in zip(names, vary_flags) if f),
                             " (the v=0, J=0 rows define the zero of energy_zero='lowest' data and are not fitted)"
                             if len(rows) < len(obs) else ""))

    model, params0, curve = potential._core_args()
    try:
        out = _core.fit_run(model, params0, curve, obs.v[rows], rot[rows], mu_rows[rows], obs.energy[rows],
                            obs.uncertainty[rows], _ENERGY_ZERO_CODES[zero], np.asarray(vary_flags, dtype=np.intc),
                            lower, upper, max_iterations, method=_METHOD_CODES[method])
    except ValueError as err:
        if len(err.args) == 2 and isinstance(err.args[1], int):
            raise ValueError(_start_failure_message(err.args[0], obs, rows[err.args[1]], potential)) from None
        raise
    if not (np.isfinite(out["chi_square"]) and np.all(np.isfinite(out["params"])) and np.all(np.isfinite(out["calc"]))):
        # a "converged" fit with an infinite chi-square is no answer: refuse it
        raise ValueError("the fit ended with a non-finite chi-square (%r) or parameters %s: the data cannot be "
                         "described from this start (check the energies, uncertainties and energy_zero, or start "
                         "closer)" % (float(out["chi_square"]), dict(zip(names, out["params"].tolist()))))

    calc = np.zeros(len(obs))
    calc[rows] = out["calc"]
    jac = np.zeros((len(obs), len(names)))
    jac[rows] = out["jacobian"]
    fitted_potential = type(potential)(**dict(zip(names, out["params"].tolist()))) \
        if not isinstance(potential, _potentials.PointwisePotential) else potential
    result = FitResult._build(
        potential=fitted_potential, initial_potential=potential, observed=obs, masses=masses, method=method,
        vary_flags=vary_flags, bounds_by_name=bounds_by_name, calculated=calc, jacobian=jac, fitted_rows=fitted,
        chi_square=float(out["chi_square"]), scale_uncertainties=bool(scale_uncertainties),
        iterations=int(out["iterations"]), n_evaluations=int(out["n_eval"]), stop=out["stop"],
        stop_test=int(out["test"]), predicted_decrease=float(out["predicted_decrease"]),
        n_infeasible=int(out["n_infeasible"]), last_infeasible=out["last_infeasible"],
        max_iterations=max_iterations, insensitive=[n for n, f in zip(names, out["insensitive"]) if f])
    result._warn()
    return result


def _vary_flags(potential, vary):
    names = list(potential.param_names)
    default = [n not in getattr(potential, "fixed_by_default", ()) for n in names]
    if vary is None:
        return default
    if isinstance(vary, dict):
        flags = dict(zip(names, default))
        for name, flag in vary.items():
            if name not in names:
                raise ValueError("vary names %r, which is not a parameter of %s (%s)"
                                 % (name, type(potential).__name__, ", ".join(names)))
            if not isinstance(flag, (bool, np.bool_)):
                raise ValueError("vary[%r]=%r must be True or False" % (name, flag))
            flags[name] = bool(flag)
        return [flags[n] for n in names]
    if isinstance(vary, str):
        vary = [vary]
    try:
        chosen = list(vary)
    except TypeError:
        raise ValueError("vary=%r must be None, a dict name -> bool, or a list of parameter names" % (vary,)) from None
    for name in chosen:
        if name not in names:
            raise ValueError("vary names %r, which is not a parameter of %s (%s)"
                             % (name, type(potential).__name__, ", ".join(names)))
    return [n in chosen for n in names]


def _bounds(potential, bounds, vary_flags):
    names = list(potential.param_names)
    values = potential.params
    lower = np.full(len(names), -np.inf)
    upper = np.full(len(names), np.inf)
    by_name = {n: (None, None) for n in names}
    if bounds is None:
        return lower, upper, by_name
    if not isinstance(bounds, dict):
        raise ValueError("bounds=%r must be a dict name -> (lower, upper), None for an open side" % (bounds,))
    for name, pair in bounds.items():
        if name not in names:
            raise ValueError("bounds names %r, which is not a parameter of %s (%s)"
                             % (name, type(potential).__name__, ", ".join(names)))
        try:
            lo, hi = pair
        except (TypeError, ValueError):
            raise ValueError("bounds[%r]=%r must be a pair (lower, upper), None for an open side" % (name, pair)) \
                from None
        side = []
        for what, x in (("lower", lo), ("upper", hi)):
            if x is None:
                side.append(None)
                continue
            try:
                xf = float(x)
            except (TypeError, ValueError):
                raise ValueError("bounds[%r]: %s bound %r is not a number" % (name, what, x)) from None
            if math.isnan(xf):
                raise ValueError("bounds[%r]: %s bound is NaN; use None for an open side" % (name, what))
            side.append(None if math.isinf(xf) else xf)
        lo, hi = side
        if lo is not None and hi is not None and not lo < hi:
            raise ValueError("bounds[%r]=(%r, %r) is invalid: the lower bound must be below the upper" % (name, lo, hi))
        k = names.index(name)
        p = values[name]
        if vary_flags[k] and ((lo is not None and not p > lo) or (hi is not None and not p < hi)):
            raise ValueError("the starting value %s=%.10g is not strictly inside its bounds (%s, %s); start inside "
                             "them" % (name, p, lo, hi))
        lower[k] = -np.inf if lo is None else lo
        upper[k] = np.inf if hi is None else hi
        by_name[name] = (lo, hi)
    return lower, upper, by_name


def _row_description(obs, i):
    label = obs.isotopologue[i]
    return "data row %d (%sv=%d, J=%d)" % (i + 1, "isotopologue %s, " % label if label is not None else "",
                                           obs.v[i], obs.J[i])


def _start_failure_message(message, obs, i, potential):
    text = "the starting potential %r cannot compute %s: %s" % (potential, _row_description(obs, i), message)
    if "not bound" in message or "last bound level" in message or "binds no levels" in message:
        text += ("; every level of the data must be bound by the starting potential: start from a deeper or "
                 "wider well (larger De, or a smaller a / larger re), e.g. from a Birge-Sponer estimate of De")
    return text


# ------------------------------------------------------------------------------ result
class FitResult:
    """The outcome of `fit`.

    Attributes (all documented numbers; nothing needs parsing from the report):
      params: dict name -> Parameter (value, uncertainty, vary, bounds, initial, determined, note)
      var_names: names of the varied parameters, the order of `covariance` and `correlation`
      covariance: (len(var_names),)*2 array, scaled by chi2/dof if `scale_uncertainties`;
          rows/columns of parameters the data do not determine are NaN (their Parameter says why)
      covariance_unscaled: the same from the stated measurement uncertainties alone
      correlation: correlation matrix in the same order (NaN for undetermined parameters)
      observed: the ObservedLevels fitted; calculated: the model in the data's energy zero
      residuals: observed - calculated (cm-1); normalized_residuals: residuals / uncertainty
      fitted_rows: bool array, False for rows not fitted (v=0, J=0 of energy_zero="lowest" data)
      jacobian: d calculated / d p for every parameter (rows x all parameters)
      chi_square, dof, standard_error (dimensionless, sqrt(chi2/dof); None when dof = 0)
      iterations, n_evaluations, status ("converged", "max_iterations", "no_progress"),
      success (status == "converged"), message
      potential: the fitted potential; initial_potential; masses: label -> reduced mass (u)
      method, energy_zero, scale_uncertainties, undetermined (names)
    """

    # -- construction -------------------------------------------------------------------
    @classmethod
    def _build(cls, *, potential, initial_potential, observed, masses, method, vary_flags, bounds_by_name,
               calculated, jacobian, fitted_rows, chi_square, scale_uncertainties, iterations, n_evaluations,
               stop, stop_test, predicted_decrease, n_infeasible, last_infeasible, max_iterations,
               insensitive=()):
        self = cls.__new__(cls)
        names = list(potential.param_names)
        self.potential = potential
        self.initial_potential = initial_potential
        self.observed = observed
        self.masses = dict(masses)
        self.method = method
        self.energy_zero = observed.energy_zero
        self.scale_uncertainties = scale_uncertainties
        self.calculated = _frozen(np.asarray(calculated, dtype=float))
        self.jacobian = _frozen(np.asarray(jacobian, dtype=float))
        self.fitted_rows = _frozen(np.asarray(fitted_rows, dtype=bool))
        self.residuals = _frozen(observed.energy - self.calculated)
        self.normalized_residuals = _frozen(self.residuals / observed.uncertainty)
        self.var_names = [n for n, f in zip(names, vary_flags) if f]
        self.chi_square = float(chi_square)
        n_fit = int(np.count_nonzero(self.fitted_rows))
        self.dof = n_fit - len(self.var_names)
        self.standard_error = math.sqrt(self.chi_square / self.dof) if self.dof > 0 else None
        self.iterations = iterations
        self.n_evaluations = n_evaluations
        self.n_infeasible = n_infeasible
        self.predicted_decrease = predicted_decrease
        self.status = stop
        self.message = _stop_message(stop, stop_test, iterations, max_iterations, predicted_decrease, n_infeasible,
                                     last_infeasible)
        self._analyse(names, vary_flags, bounds_by_name, insensitive)
        return self

    def _analyse(self, names, vary_flags, bounds_by_name, insensitive=()):
        """Covariance, correlations, and why any parameter is not determined."""
        values = self.potential.params
        initial = self.initial_potential.params
        var_idx = [names.index(n) for n in self.var_names]
        rows = self.fitted_rows
        Jw = self.jacobian[rows][:, var_idx] / self.observed.uncertainty[rows][:, None]
        nv = len(var_idx)
        reasons = {}

        # 1. parameters at a bound
        for j, name in enumerate(self.var_names):
            lo, hi = bounds_by_name[name]
            p, p0 = values[name], initial[name]
            for b, side in ((lo, "lower"), (hi, "upper")):
                if b is not None and abs(p - b) <= 1e-6 * max(abs(p0 - b), 1e-300):
                    reasons[name] = ("at its %s bound %.10g: the data push it beyond the bound, so no uncertainty "
                                     "can be given (free the bound or fix the parameter)" % (side, b))
        # 2. parameters the levels do not depend on
        scale = np.array([max(abs(values[n]), abs(initial[n]), 1e-300) for n in self.var_names])
        sens = np.linalg.norm(Jw, axis=0) * scale
        top = float(np.max(sens)) if nv else 0.0
        for j, name in enumerate(self.var_names):
            if name not in reasons and (name in insensitive or not sens[j] > _SENSITIVITY_ZERO * top):
                reasons[name] = ("not determined: the calculated levels do not depend on it (for instance, J=0 "
                                 "levels of a Morse potential do not depend on re); it stays at its initial value")
        # 3. combinations the data do not separate (numerically singular normal matrix)
        cond = None
        for _ in range(nv):
            keep = [j for j, n in enumerate(self.var_names) if n not in reasons]
            if not keep:
                break
            A = Jw[:, keep]
            A = A / np.linalg.norm(A, axis=0)
            _, s, vt = np.linalg.svd(A, full_matrices=False)
            cond = float(s[0] / s[-1]) if s[-1] > 0 else math.inf
            small = s < _RCOND_SINGULAR * s[0]
            if not np.any(small):
                break
            vec = vt[np.argmin(s)]
            involved = [self.var_names[keep[j]] for j in np.nonzero(np.abs(vec) > 0.1)[0]]
            text = ("not determined: the data fix only a combination of %s (the normal matrix is numerically "
                    "singular, scaled condition number %.3g); fix one of them or add levels that separate them"
                    % (", ".join(involved), cond))
            for name in involved:
                reasons[name] = text
        self.condition_number = cond

        det = [j for j, n in enumerate(self.var_names) if n not in reasons]
        cov_u = np.full((nv, nv), np.nan)
        if det:
            A = Jw[:, det]
            norms = np.linalg.norm(A, axis=0)
            An = A / norms
            inv = np.linalg.inv(An.T @ An)
            sub = inv / np.outer(norms, norms)
            cov_u[np.ix_(det, det)] = sub
        factor = self.chi_square / self.dof if (self.scale_uncertainties and self.dof > 0) else 1.0
        self.covariance_scale = factor
        self.covariance_unscaled = _frozen(cov_u)
        self.covariance = _frozen(cov_u * factor)
        sd = np.sqrt(np.diag(self.covariance))
        with np.errstate(invalid="ignore", divide="ignore"):
            self.correlation = _frozen(self.covariance / np.outer(sd, sd))
        self.undetermined = [n for n in self.var_names if n in reasons]

        self.params = {}
        for k, name in enumerate(names):
            lo, hi = bounds_by_name[name]
            note, unc, determined = "", None, True
            if not vary_flags[k]:
                note = "fixed"
            elif name in reasons:
                note, determined = reasons[name], False
            else:
                j = self.var_names.index(name)
                unc = float(sd[j])
                dist = min(abs(values[name] - b) for b in (lo, hi) if b is not None) \
                    if (lo is not None or hi is not None) else math.inf
                if dist < unc:
                    note = ("within one standard deviation of its bound: the (Gaussian) uncertainty is only "
                            "approximate there")
            self.params[name] = Parameter(name, values[name], unc, vary_flags[k], (lo, hi), initial[name],
                                          determined, note)
        if self.dof == 0:
            self.dof_note = ("no degrees of freedom (as many fitted levels as varied parameters): the dimensionless "
                             "standard error is not defined and the uncertainties are not scaled")
        else:
            self.dof_note = ""

    def _warn(self):
        if self.status != "converged":
            warnings.warn("the fit did not converge: %s; the result holds the best point reached" % self.message,
                          FitWarning, stacklevel=3)
        for name in self.undetermined:
            warnings.warn("parameter %s: %s" % (name, self.params[name].note), FitWarning, stacklevel=3)
        if self.dof_note:
            warnings.warn(self.dof_note, FitWarning, stacklevel=3)

    # -- simple views -------------------------------------------------------------------
    @property
    def success(self):
        return self.status == "converged"

    @property
    def values(self):
        """Parameter values by name (a new dict)."""
        return {n: p.value for n, p in self.params.items()}

    @property
    def uncertainties(self):
        """One-sigma uncertainties by name (None for fixed or undetermined parameters)."""
        return {n: p.uncertainty for n, p in self.params.items()}

    def __repr__(self):
        return "<FitResult %s: %s, %d levels, chi2=%.6g, dof=%d, %s>" % (
            type(self.potential).__name__, self.status, len(self.observed), self.chi_square, self.dof,
            ", ".join("%s=%.8g" % (n, p.value) for n, p in self.params.items()))

    def _sorted_correlations(self):
        pairs = []
        for a in range(len(self.var_names)):
            for b in range(a + 1, len(self.var_names)):
                r = self.correlation[a, b]
                if np.isfinite(r):
                    pairs.append((self.var_names[a], self.var_names[b], float(r)))
        return sorted(pairs, key=lambda t: -abs(t[2]))

    # -- predictions --------------------------------------------------------------------
    def _resolve_mu(self, isotopologue, mu):
        if isotopologue is not None and mu is not None:
            raise ValueError("give either isotopologue=%r or mu=%r, not both" % (isotopologue, mu))
        if mu is not None:
            return as_reduced_mass(mu), None
        if isotopologue is not None:
            if not isinstance(isotopologue, str):
                raise _validate.ArgumentTypeError("isotopologue=%r must be a label such as '7Li133Cs'"
                                                  % (isotopologue,))
            if isotopologue in self.masses:
                return self.masses[isotopologue], isotopologue
            try:
                return reduced_mass(*parse_isotopologue(isotopologue)), isotopologue
            except ValueError as err:
                raise ValueError("isotopologue %r: %s; or give its reduced mass, mu=... (u)" % (isotopologue, err)) \
                    from None
        if len(self.masses) == 1:
            label, m = next(iter(self.masses.items()))
            return m, label
        raise ValueError("the fit holds several isotopologues (%s): say which with isotopologue=... or give mu=... (u)"
                         % ", ".join(repr(k) for k in self.masses))

    def _gradient_covariance(self):
        """(indices of the varied determined parameters, their covariance)."""
        names = list(self.potential.param_names)
        det = [j for j, n in enumerate(self.var_names) if n not in self.undetermined]
        idx = [names.index(self.var_names[j]) for j in det]
        return idx, self.covariance[np.ix_(det, det)]

    def _propagate(self, grads):
        """One-sigma uncertainties of quantities with parameter gradients grads (rows)."""
        idx, cov = self._gradient_covariance()
        g = grads[:, idx]
        var = np.einsum("ij,jk,ik->i", g, cov, g)
        sigma = np.sqrt(np.maximum(var, 0.0))
        return sigma

    def _asymptote_gradient(self):
        names = list(self.potential.param_names)
        grad = np.zeros(len(names))
        base = self.potential.params
        for k, name in enumerate(names):
            if name not in self.var_names:
                continue
            h = 1e-6 * max(abs(base[name]), 1e-300)
            vals = []
            for step in (h, -h):
                try:
                    vals.append(self.potential.with_params(**{name: base[name] + step}).asymptote)
                except ValueError:
                    vals.append(None)
            if None not in vals:
                grad[k] = (vals[0] - vals[1]) / (2 * h)
        return grad

    def predict(self, isotopologue=None, mu=None, J=0):
        """Every bound level of the fitted potential with propagated one-sigma uncertainties.

        isotopologue: a label (its fitted reduced mass, or one from the mass table); mu: a
        reduced mass in u (or a pair of isotopes); with neither, the fit's only isotopologue.
        J: rotational quantum number (integer >= 0).
        Uncertainties come from the covariance and the Jacobian dE/dp (linear propagation).
        Returns a Prediction: levels, binding energies, spacings dG(v+1/2), D0, vD and the
        number of bound levels, each with its uncertainty.
        """
        mass, label = self._resolve_mu(isotopologue, mu)
        J = _validate.integer(J, "J", 0, _validate.MAX_QUANTUM_NUMBER, "an integer >= 0")
        model, params, curve = self.potential._core_args()
        code = _METHOD_CODES[self.method]
        res = _core.fit_levels(model, params, curve, mass, float(J * (J + 1)), code)
        E, G = res["energy"], res["jacobian"]
        asym, dA = res["asymptote"], self._asymptote_gradient()
        if J == 0:
            E00, G00 = (E[0], G[0]) if len(E) else (math.nan, np.full(len(dA), math.nan))
        else:
            r0 = _core.fit_levels(model, params, curve, mass, 0.0, code)
            E00, G00 = (r0["energy"][0], r0["jacobian"][0]) if len(r0["energy"]) else \
                (math.nan, np.full(len(dA), math.nan))
        notes = []
        if self.undetermined:
            notes.append("uncertainties leave out the undetermined parameter%s %s (held at their values)" % (
                "s" if len(self.undetermined) > 1 else "", ", ".join(self.undetermined)))
        if self.method == "wkb":
            notes.append("levels are first-order WKB levels of the fitted potential")
        else:
            notes.append("levels are exact levels of the fitted potential (radial Schroedinger equation); vD and "
                         "its uncertainty are semiclassical (first-order WKB)")
        e_unc = self._propagate(G)
        b_unc = self._propagate(dA[None, :] - G)
        if len(E) > 1:
            spacing = np.diff(E)
            s_unc = self._propagate(np.diff(G, axis=0))
        else:
            spacing, s_unc = np.zeros(0), np.zeros(0)
        D0 = asym - E00
        D0_unc = float(self._propagate((dA - G00)[None, :])[0]) if np.isfinite(D0) else math.nan
        vD = res["vD"]
        dvD = res["dvD_dp"]
        if np.all(np.isfinite(dvD[self._gradient_covariance()[0]])):
            vD_unc = float(self._propagate(dvD[None, :])[0])
        else:
            vD_unc = math.nan
            notes.append("the uncertainty of vD could not be computed (a perturbed potential is invalid)")
        return Prediction(E, e_unc, asym - E, b_unc, spacing, s_unc, J=J, mu=mass, isotopologue=label,
                          D0=D0, D0_uncertainty=D0_unc, vD=vD, vD_uncertainty=vD_unc, potential=self.potential,
                          method=self.method, notes=notes)

    # -- reports ------------------------------------------------------------------------
    def report(self):
        """A plain-text report: parameters, correlations, statistics and the residual table."""
        return _reports.fit_report_text(self)

    def __str__(self):
        return self.report()

    def _repr_html_(self):
        return _reports.fit_report_html(self)

    # -- JSON -------------------------------------------------------------------------
    def to_dict(self):
        """The whole result as plain JSON-ready data (NaN and infinities as None)."""
        return _reports.fit_result_to_dict(self)

    def to_json(self, indent=1):
        return json.dumps(self.to_dict(), indent=indent, allow_nan=False)

    def save_json(self, path):
        """Write the result as JSON to path, replacing any file there atomically."""
        _atomic_write(path, self.to_json() + "\n")

    @classmethod
    def load_json(cls, source):
        """A FitResult from a path written by save_json (or a JSON string)."""
        if isinstance(source, (str, os.PathLike)) and not str(source).lstrip().startswith("{"):
            try:
                with open(source, encoding="utf-8-sig") as fh:
                    data = json.load(fh)
            except OSError as err:
                raise ValueError("cannot read fit result %r: %s" % (os.fspath(source), err.strerror or err)) from None
            except (json.JSONDecodeError, UnicodeDecodeError, RecursionError) as err:
                raise ValueError("%r is not valid JSON: %s" % (os.fspath(source), err)) from None
        elif isinstance(source, (str, bytes, bytearray)):
            try:
                data = json.loads(source)
            except (json.JSONDecodeError, UnicodeDecodeError, RecursionError) as err:
                raise ValueError("the text is not valid JSON: %s" % err) from None
        else:
            raise ValueError("source must be a path or a JSON string; got %s" % type(source).__name__)
        return cls.from_dict(data)

    @classmethod
    def from_dict(cls, data):
        return _reports.fit_result_from_dict(cls, data)

# ------------------------------------------------------------------------------ predictions
class Prediction:
    """Predicted bound levels of one isotopologue (or mass) and J, with one-sigma uncertainties.

    Arrays (one entry per bound level, v = 0 .. n_bound-1): v, energy (term value above the
    potential minimum), energy_uncertainty, binding_energy (asymptote - E),
    binding_uncertainty, spacing (dG(v+1/2) = E(v+1) - E(v); one fewer entry) and
    spacing_uncertainty. Scalars: D0 (asymptote minus the lowest level v=0, J=0) and
    D0_uncertainty, vD (the non-integer quantum number at dissociation) and vD_uncertainty,
    n_bound and n_bound_range (the counts for vD -+ one standard deviation).
    """

    def __init__(self, energy, energy_uncertainty, binding_energy, binding_uncertainty, spacing, spacing_uncertainty,
                 *, J, mu, isotopologue, D0, D0_uncertainty, vD, vD_uncertainty, potential, method, notes=()):
        n = len(energy)
        self.v = _frozen(np.arange(n))
        self.energy = _frozen(np.asarray(energy, dtype=float))
        self.energy_uncertainty = _frozen(np.asarray(energy_uncertainty, dtype=float))
        self.binding_energy = _frozen(np.asarray(binding_energy, dtype=float))
        self.binding_uncertainty = _frozen(np.asarray(binding_uncertainty, dtype=float))
        self.spacing = _frozen(np.asarray(spacing, dtype=float))
        self.spacing_uncertainty = _frozen(np.asarray(spacing_uncertainty, dtype=float))
        self.J, self.mu, self.isotopologue = J, float(mu), isotopologue
        self.D0, self.D0_uncertainty = float(D0), float(D0_uncertainty)
        self.vD, self.vD_uncertainty = float(vD), float(vD_uncertainty)
        self.n_bound = n
        if math.isfinite(self.vD) and math.isfinite(self.vD_uncertainty):
            self.n_bound_range = (max(0, math.ceil(self.vD - self.vD_uncertainty)),
                                  max(0, math.ceil(self.vD + self.vD_uncertainty)))
        else:
            self.n_bound_range = (n, n)
        self.potential, self.method = potential, method
        self.notes = list(notes)

    def __len__(self):
        return self.n_bound

    def to_dict(self):
        sp = np.append(self.spacing, np.nan)
        spu = np.append(self.spacing_uncertainty, np.nan)
        return {"v": self.v.tolist(), "J": [self.J] * self.n_bound, "energy": self.energy.tolist(),
                "energy_uncertainty": self.energy_uncertainty.tolist(),
                "binding_energy": self.binding_energy.tolist(),
                "binding_uncertainty": self.binding_uncertainty.tolist(),
                "spacing": sp.tolist(), "spacing_uncertainty": spu.tolist()}

    def to_dataframe(self):
        """Levels as a pandas DataFrame; spacing of the last level is NaN (no level above it)."""
        import pandas as pd
        return pd.DataFrame(self.to_dict())

    def summary(self):
        lo, hi = self.n_bound_range
        return ("D0 = %.6f +/- %.6f cm-1 (asymptote minus v=0, J=0); vD = %.5f +/- %.5f; bound levels %d%s" % (
            self.D0, self.D0_uncertainty, self.vD, self.vD_uncertainty, self.n_bound,
            " (%d to %d within one standard deviation of vD)" % (lo, hi) if (lo, hi) != (self.n_bound,) * 2 else ""))

    def to_text(self, last=None):
        """A plain-text table; last=N shows only the N levels nearest dissociation."""
        return _reports.prediction_text(self, last)

    def __str__(self):
        return self.to_text()

    def __repr__(self):
        return "<Prediction: %d bound levels, mu=%.8g u, J=%d, D0=%.6g, vD=%.5g>" % (
            self.n_bound, self.mu, self.J, self.D0, self.vD)

    def _repr_html_(self):
        return _reports.prediction_html(self)

# ------------------------------------------------------------------------------ helpers
def _stop_message(stop, test, iterations, max_iterations, decrease, n_infeasible, last_infeasible):
    if stop == "converged":
        if test == 3:
            text = ("converged after %d iterations: the Gauss-Newton step promises a chi-square decrease of only "
                    "%.2g" % (iterations, max(decrease, 0.0)))
        elif test == 4:
            text = ("converged after %d iterations: no step lowers chi-square further, and the Gauss-Newton step "
                    "promises a decrease of only %.2g (the rounding level of the levels)" % (iterations, decrease))
        else:
            text = ("converged after %d iterations: the %s (the normal matrix is singular, so the Gauss-Newton "
                    "test does not apply)" % (iterations, "last step was negligible" if test == 1
                                              else "gradient vanished"))
    elif stop == "max_iterations":
        text = ("stopped at the iteration limit (%d) before converging; the Gauss-Newton step still promises a "
                "chi-square decrease of %.3g; raise max_iterations or start closer" % (max_iterations, decrease))
    else:
        text = ("stopped after %d iterations: no step lowered chi-square although the linear model promises a "
                "decrease of %.3g (the model may be too noisy or the start too far)" % (iterations, decrease))
    if n_infeasible and stop != "converged":
        text += "; %d trial points left the model's domain (last: %s)" % (n_infeasible, last_infeasible)
    return text
