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
from .observed import ObservedLevels, read_levels
from .lines import ObservedLines, ObservedWidths
from .design import build_design
from .checks import check_data
from .born_oppenheimer import BornOppenheimerCorrection
from . import reports as _reports
from . import corrected as _corrected
from . import method_error as _method_error
from . import width_fit as _width_fit
from .reports import _frozen, _atomic_write
from .potentials import Potential
from ._warn import warn as _warn

__all__ = ["fit", "FitResult", "Parameter", "Prediction", "FitWarning"]

_ENERGY_ZERO_CODES = {"minimum": 0, "asymptote": 1, "lowest": 2}
_METHOD_CODES = {"wkb": 0, "exact": 1}
#: fit methods: "corrected" (the default: WKB iterations with exact per-level corrections), "wkb", "exact"
FIT_METHODS = ("corrected", "wkb", "exact")


def _level_code(method):
    """Level source of a method's predictions: exact levels unless plain first-order WKB."""
    return _METHOD_CODES["wkb" if method == "wkb" else "exact"]


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
def fit(potential, observed, mu=None, *, method="corrected", vary=None, bounds=None, scale_uncertainties=True,
        max_iterations=200, omega=0, born_oppenheimer=None):
    """Fit the parameters of `potential` to measured levels by weighted least squares.

    potential: a wkbfit potential object (Morse, LennardJones, ...); its parameter values are
        the starting point, and it is not changed (the result holds a new, fitted one).
    observed: the data: one data object or a list of them, fitted together: ObservedLevels
        (read_levels: term values or binding energies; anything read_levels accepts is read
        with its defaults) and ObservedLines (read_lines: line positions, with free term
        values for levels of states that are not modelled). The distinct levels of all data
        are computed once per model evaluation; see design.py. An ObservedLevels'
        `energy_zero` says what its energies are measured from:
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
    method: "corrected" (the default): exact-levels quality at semiclassical cost. Levenberg-
        Marquardt iterations on first-order WKB levels plus per-level corrections E_exact - E_wkb,
        held fixed during a run and refreshed by one exact evaluation until the exact problem's
        Gauss-Newton step is below 1e-3 standard deviation (wkbfit.corrected); parameters,
        uncertainties and residuals are those of the exact-levels fit. `refreshes` counts the
        exact evaluations. Every data kind uses it: one set of term values or binding energies
        (corrected.run_corrected), and line positions, several data sets, free term values, fitted
        asymptotes, Omega and Born-Oppenheimer terms (per-row corrections, then chord Gauss-Newton
        steps of the exact problem: corrected.run_corrected_rows).
        "wkb": first-order WKB levels only (fast; biased where WKB is not exact, which the
        method-error check after the fit detects and warns about).
        "exact": levels of the radial Schroedinger equation in every iteration, with the Jacobian
        <v|dV/dp|v> from the exact wavefunctions (about 20-30 times slower than WKB).
        After every fit each level's method error is compared with its uncertainty
        (`method_error`, `method_error_flagged`); levels with method error > 0.1 sigma are named
        in a warning and in the report.
    vary: None (every parameter except the class's `fixed_by_default`, e.g. the Lennard-Jones
        exponents), a dict name -> bool overriding those defaults, or a list of the names to vary.
    bounds: dict name -> (lower, upper), None for an open side. A bounded parameter is fitted
        through a smooth monotone transform (logistic between two bounds, exponential beyond
        one), and must start strictly inside its bounds.
    scale_uncertainties: multiply the covariance by the reduced chi-square chi2/dof, i.e. the
        uncertainties by the sqrt of reduced chi-square (default True). Common practice in
        spectroscopic fits: the quoted uncertainties then reflect the actual scatter of the
        residuals, including model shortcomings (a WKB model, a too simple potential form) and
        mis-stated measurement uncertainties. With False the uncertainties follow from the
        stated measurement uncertainties alone. Both covariances are kept in the result.
    max_iterations: accepted Levenberg-Marquardt steps at most; a fit that stops there returns
        its best point with status "max_iterations" and a warning.
    born_oppenheimer: None, or a BornOppenheimerCorrection (born_oppenheimer.py): mass-scaled
        adiabatic and non-adiabatic centrifugal correction functions for multi-isotopologue
        data, whose coefficients (uA0, ..., tA0, ...) are fitted with the potential and appear
        in `params`; the fitted potential is that of the reference isotopologue.
    omega: the electronic angular momentum (Omega, or Lambda) of the fitted state, a whole
        number >= 0: the centrifugal term is hbar^2 [J(J+1) - Omega^2]/(2 mu r^2), every level
        needs J >= Omega, and energy_zero="lowest" means v=0, J=Omega.

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
    items = list(observed) if isinstance(observed, (list, tuple)) else [observed]
    if not items:
        raise ValueError("no data: give one data object (read_levels, read_lines) or a list of them")
    datasets = [_as_data(x) for x in items]
    if method not in FIT_METHODS:
        raise ValueError("method=%r is not known; use 'corrected' (the default: WKB with exact corrections), 'wkb' "
                         "(first-order WKB levels) or 'exact'" % (method,))
    if not isinstance(scale_uncertainties, (bool, np.bool_)):
        raise ValueError("scale_uncertainties=%r must be True or False" % (scale_uncertainties,))
    max_iterations = _validate.integer(max_iterations, "max_iterations", 1, 10 ** 7,
                                       "a positive integer (at most 10^7)")
    if max_iterations < 1:
        raise ValueError("max_iterations=%r must be a positive integer" % (max_iterations,))

    bob = born_oppenheimer
    if bob is not None and not isinstance(bob, BornOppenheimerCorrection):
        raise ValueError("born_oppenheimer=%r must be None or a BornOppenheimerCorrection" % (bob,))
    if bob is not None and isinstance(potential, _potentials.PointwisePotential):
        raise ValueError("Born-Oppenheimer corrections need an analytic potential model, not a PointwisePotential")
    bob_names = list(bob.param_names) if bob is not None else []
    vary_flags = _vary_flags(potential, vary, bob_names, bob.fixed_by_default if bob is not None else ())
    lower, upper, bounds_by_name = _bounds(potential, bounds, vary_flags[:len(names)])
    if bob is not None:
        lower = np.concatenate([lower, np.full(len(bob_names), -np.inf)])
        upper = np.concatenate([upper, np.full(len(bob_names), np.inf)])
        bounds_by_name.update({n: (None, None) for n in bob_names})
    omega = _omega(omega)
    if _width_fit.applies(datasets, potential, lambda: _masses(datasets, mu)):
        # widths or quasibound positions: one least-squares problem with quasibound levels (width_fit.py)
        if len(datasets) > 1:
            check_data(datasets, stacklevel=2)
        result = _width_fit.fit_with_quasibound(
            potential, datasets, _masses(datasets, mu), method=method, vary_flags=vary_flags, lower=lower,
            upper=upper, bounds_by_name=bounds_by_name, scale_uncertainties=scale_uncertainties,
            max_iterations=max_iterations, omega=omega, born_oppenheimer=bob)
        result._warn()  # here, so that the warnings name the caller's line
        return result
    design = build_design(datasets, omega)
    masses = _masses(datasets, mu)
    n_vary = int(sum(vary_flags)) + len(design.extra_names)
    if int(sum(vary_flags)) == 0:
        raise ValueError("no parameter is varied (vary=%r): nothing to fit" % (vary,))
    n_rows = design.n_rows
    if n_rows < n_vary:
        what = "level" if all(isinstance(x, ObservedLevels) for x in datasets) else "data row"
        raise ValueError("%d fitted %s%s cannot determine %d varied parameters (%s)%s; fix some parameters "
                         "(vary=...) or add data" % (
                             n_rows, what, "" if n_rows == 1 else "s", n_vary,
                             ", ".join([n for n, f in zip(names, vary_flags) if f] + design.extra_names),
                             " (the v=0, J=0 rows define the zero of energy_zero='lowest' data and are not fitted)"
                             if n_rows < sum(len(x) for x in datasets) else ""))
    if len(datasets) > 1:
        check_data(datasets, stacklevel=2)

    model, params0, curve = potential._core_args()
    if _term_values_only(datasets, bob, omega, design):
        # one set of term values or binding energies: the engine of the corrected default fit
        return _fit_levels_engine(potential, datasets[0], masses, method, vary_flags, lower, upper,
                                  bounds_by_name, scale_uncertainties, max_iterations, names, int(sum(vary_flags)),
                                  design)
    lv, lrot, lmu, rows = design.arrays(masses, omega)
    bob_kwargs = {}
    if bob is not None:
        if bob.reference not in masses:
            raise ValueError("the reference isotopologue %r of the Born-Oppenheimer correction is not among the data's "
                             "isotopologues (%s)" % (bob.reference, ", ".join(repr(k) for k in masses)))
        var, ad, na, rot_eps = bob.variants(design.level_keys, masses, omega)
        params0 = np.concatenate([params0, bob.start])
        bob_kwargs = dict(bob_counts=np.array(bob.counts, dtype=np.intc), bob_power=float(bob.p), level_variant=var,
                          variant_adiabatic=ad, variant_centrifugal=na, variant_rot_eps=rot_eps)
    extra_start = np.array(design.extra_start, dtype=float)
    vary_c = np.asarray(vary_flags, dtype=np.intc)

    def run_rows(p, extra, offset, code, iterations):
        return _core.fit_run_rows(model, params0 if p is None else p, curve, lv, lrot, lmu, rows["level_a"],
                                  rows["coef_a"], rows["level_b"], rows["coef_b"], rows["coef_asymptote"],
                                  rows["extra_index"], rows["coef_extra"], rows["offset"] + offset, rows["observed"],
                                  rows["sigma"], extra_start if extra is None else extra, vary_c, lower, upper,
                                  max_iterations if iterations < 0 else iterations, method=code, **bob_kwargs)
    try:
        if method == "corrected":
            # WKB iterations with per-row exact corrections on the row engine (corrected.run_corrected_rows)
            ev = _corrected.RowEvaluator(run_rows, model, curve, lv, lrot, lmu, rows, bob is None, omega)
            out = _corrected.run_corrected_rows(ev, len(params0), vary_flags, -1)
        else:
            out = run_rows(None, None, 0.0, _METHOD_CODES[method], -1)
    except ValueError as err:
        if len(err.args) == 2 and isinstance(err.args[1], int):
            raise ValueError(_start_failure_message(err.args[0], design, err.args[1], potential)) from None
        raise

    fitted_potential = type(potential)(**dict(zip(names, out["params"][:len(names)].tolist()))) \
        if not isinstance(potential, _potentials.PointwisePotential) else potential
    np_ = len(names) + len(bob_names)
    calc_rows, jac_rows = out["calc"], out["jacobian"]
    # per data row, data set after data set (rows not fitted: calc 0, zero Jacobian)
    n_all = sum(len(b.rows) for b in design.blocks)
    calc = np.zeros(n_all)
    jac = np.zeros((n_all, np_ + len(design.extra_names)))
    fitted = np.zeros(n_all, dtype=bool)
    sigma = np.zeros(n_all)
    observed_values = np.zeros(n_all)
    start = 0
    for block in design.blocks:
        k = len(block.rows)
        sel = block.rows >= 0
        idx = np.arange(start, start + k)
        calc[idx[sel]] = calc_rows[block.rows[sel]]
        jac[idx[sel]] = jac_rows[block.rows[sel]]
        fitted[idx] = sel
        sigma[idx] = _data_sigma(block.data)
        observed_values[idx] = _data_values(block.data)
        block.start = start
        start += k
    result = FitResult._build(
        potential=fitted_potential, initial_potential=potential, observed=datasets[0] if len(datasets) == 1
        else list(datasets), masses=masses, method=method,
        vary_flags=vary_flags, bounds_by_name=bounds_by_name, calculated=calc, jacobian=jac[:, :np_], fitted_rows=fitted,
        chi_square=float(out["chi_square"]), scale_uncertainties=bool(scale_uncertainties),
        iterations=int(out["iterations"]), n_evaluations=int(out["n_eval"]), stop=out["stop"],
        stop_test=int(out["test"]), predicted_decrease=float(out["predicted_decrease"]),
        n_infeasible=int(out["n_infeasible"]), last_infeasible=out["last_infeasible"],
        max_iterations=max_iterations, insensitive=[n for n, f in zip(names, out["insensitive"]) if f],
        observed_values=observed_values, sigma=sigma, design=design, extra_values=out["extra"],
        jacobian_extra=jac[:, np_:], n_level_calculations=int(out["n_level_calculations"]), omega=omega,
        correction=bob, correction_values=out["params"][len(names):].tolist())
    result.refreshes = int(out.get("refreshes", 0))
    result.refresh_history = list(out.get("history", ()))
    result.start_notes = []
    if method == "corrected" and not out["converged_refreshes"]:
        result.status = "max_iterations"
        result.message = ("the exact corrections did not become self-consistent in %d refreshes (last exact "
                          "Gauss-Newton step %.3g standard deviations)"
                          % (result.refreshes, result.refresh_history[-1]["step_sd"]))
    result.fit_options = {"method": method, "vary": list(result.var_names),
                          "bounds": {n: b for n, b in bounds_by_name.items() if b != (None, None)},
                          "scale_uncertainties": bool(scale_uncertainties), "max_iterations": max_iterations,
                          "omega": omega, "born_oppenheimer": bob}
    result._warn()
    return result


def _term_values_only(datasets, bob, omega, design):
    """True for one plain set of term values or binding energies (below the potential's own
    asymptote): the data the corrected fit's refresh loop (corrected.py) runs on."""
    if len(datasets) != 1 or type(datasets[0]) is not ObservedLevels or bob is not None or omega:
        return False
    obs = datasets[0]
    return not design.extra_names and getattr(obs, "asymptote", None) is None


def _fit_levels_engine(potential, obs, masses, method, vary_flags, lower, upper, bounds_by_name,
                       scale_uncertainties, max_iterations, names, n_vary, design):
    """fit() for one ObservedLevels: corrected (default), wkb or exact, with the method-error check."""
    for block in design.blocks:  # one data set: its rows are the result's rows
        block.start = 0
    mu_rows = np.array([masses[label] for label in obs.isotopologue], dtype=float)
    rot = (obs.J * (obs.J + 1)).astype(float)
    zero = obs.energy_zero
    # rows v=0, J=0 define the zero of "lowest" data: calc is 0 by definition, so they carry no information
    fitted = np.ones(len(obs), dtype=bool)
    if zero == "lowest":
        fitted &= ~((obs.v == 0) & (obs.J == 0))
    rows = np.nonzero(fitted)[0]
    model, params0, curve = potential._core_args()
    args = dict(model=model, params=params0, curve=curve, v=obs.v[rows], rot=rot[rows], mu=mu_rows[rows],
                energy=obs.energy[rows], sigma=obs.uncertainty[rows], energy_zero=_ENERGY_ZERO_CODES[zero],
                vary=np.asarray(vary_flags, dtype=np.intc), lower=lower, upper=upper, max_iterations=max_iterations)
    if method == "corrected":
        run = _corrected.run_corrected
    else:
        def run(a):
            return _core.fit_run(method=_METHOD_CODES[method], **a)
    try:
        out, start_notes = _corrected.run_with_unbound_rows(run, args, n_vary)
    except _corrected._Unreachable as err:
        raise ValueError(_unreachable_message(err, obs, rows, potential, mu_rows)) from None
    except ValueError as err:
        if len(err.args) == 2 and isinstance(err.args[1], int):
            i = rows[err.args[1]]
            raise ValueError(_start_failure_message_levels(err.args[0], obs, i, potential, mu_rows[i])) from None
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
        max_iterations=max_iterations, insensitive=[n for n, f in zip(names, out["insensitive"]) if f],
        design=design)
    result.refreshes = int(out.get("refreshes", 0))
    result.refresh_history = list(out.get("history", ()))
    result.start_notes = start_notes
    if method == "corrected" and not out["converged_refreshes"]:
        result.status = "max_iterations"
        result.message = ("the exact corrections did not become self-consistent in %d refreshes (last exact "
                          "Gauss-Newton step %.3g standard deviations)"
                          % (result.refreshes, result.refresh_history[-1]["step_sd"]))
    final_args = dict(args, params=out["params"])
    _method_error.attach(result, rows, out, final_args)
    # how this fit was made, so that replicas and scans refit exactly the same way
    result.fit_options = {"method": method, "vary": list(result.var_names),
                          "bounds": {n: b for n, b in bounds_by_name.items() if b != (None, None)},
                          "scale_uncertainties": bool(scale_uncertainties), "max_iterations": max_iterations}
    result._warn()
    return result


def _as_data(item):
    if isinstance(item, (ObservedLevels, ObservedLines, ObservedWidths)):
        return item
    return read_levels(item)


def _data_values(data):
    if isinstance(data, ObservedLines):
        return data.wavenumber
    if isinstance(data, ObservedWidths):
        return data.width
    return data.energy


def _data_sigma(data):
    return data.uncertainty


def _omega(omega):
    try:
        value = float(omega)
    except (TypeError, ValueError):
        raise ValueError("omega=%r must be a whole number >= 0 (the electronic angular momentum Omega or Lambda "
                         "of the state)" % (omega,)) from None
    if not (math.isfinite(value) and value == int(value) and value >= 0):
        raise ValueError("omega=%r must be a whole number >= 0 (the electronic angular momentum Omega or Lambda of "
                         "the state; half-integer Omega is not supported)" % (omega,))
    return int(value)


def _masses(datasets, mu):
    """Reduced mass of every isotopologue label of every data set."""
    labels = []
    for d in datasets:
        for label in d.isotopologues if hasattr(d, "isotopologues") else [None]:
            if label not in labels:
                labels.append(label)
    if isinstance(mu, dict):
        unknown = [k for k in mu if k not in labels]
        if unknown:
            raise ValueError("mu gives a reduced mass for %s, which is not an isotopologue of the data (%s)" % (
                ", ".join(repr(k) for k in unknown), ", ".join("unnamed" if l is None else repr(l) for l in labels)))
    elif mu is not None and len(labels) > 1:
        raise ValueError("a single reduced mass mu=%r was given but the data hold %d isotopologues; give a dict "
                         "label -> reduced mass, or mu=None to take the masses from the labels" % (mu, len(labels)))
    out = {}
    for d in datasets:
        own = d.isotopologues
        sub = {k: v for k, v in mu.items() if k in own} if isinstance(mu, dict) else mu
        out.update(d.masses_by_isotopologue(sub))
    return out


def _vary_flags(potential, vary, extra_names=(), extra_fixed=()):
    names = list(potential.param_names) + list(extra_names)
    fixed = tuple(getattr(potential, "fixed_by_default", ())) + tuple(extra_fixed)
    default = [n not in fixed for n in names]
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


def _unreachable_message(err, obs, rows, potential, mu_rows=None):
    missing = [int(rows[i]) for i in np.nonzero(~err.bound)[0]]
    # a datum that is a quasibound level of the start: say so instead of advising a deeper well
    for i in missing if mu_rows is not None else ():
        if obs.J[i] > 0:
            note = _quasibound_note(potential, float(mu_rows[i]), int(obs.v[i]), int(obs.J[i]))
            if note:
                return "the starting potential %r does not bind %s: %s" % (potential, _row_description(obs, i),
                                                                            note)
    shown = ", ".join("v=%d%s" % (obs.v[i], " J=%d" % obs.J[i] if obs.J[i] else "") for i in missing[:8])
    more = " and %d more" % (len(missing) - 8) if len(missing) > 8 else ""
    if err.at_start:
        return ("the starting potential %r binds only %d of the data's levels, fewer than the varied parameters; "
                "unbound: %s%s. Start from a deeper or wider well (larger De, or a smaller a / larger re, e.g. "
                "De from a Birge-Sponer or LeRoy-Bernstein estimate of the data)" % (
                    potential, err.n_bound, shown, more))
    if err.stop != "converged":
        return ("the data's levels %s%s are not bound by the starting potential %r, and the fit of the %d bound "
                "levels stopped before converging (%s) at a potential that does not bind them either: start closer "
                "to the data (a deeper well, larger De, with the other parameters near their expected values)"
                % (shown, more, potential, err.n_bound, err.stop))
    return ("the data's levels %s%s stay unbound: fitting the %d bound levels from %r leads to a potential that "
            "does not bind them. The model cannot reach these levels from this start: start from a deeper well "
            "(larger De), check their v assignment, or leave them out" % (shown, more, err.n_bound, potential))


def _quasibound_note(potential, mu, v, J):
    """Why a datum above the last bound level cannot be fitted, if it is quasibound; None otherwise."""
    from .quasibound import quasibound_columns
    try:
        cols, barriers, _ = quasibound_columns(potential, mu, [int(J)])
    except (ValueError, RuntimeError):
        return None
    hit = np.nonzero(cols["v"] == v)[0]
    if not len(hit):
        return None
    k = int(hit[0])
    return ("v=%d, J=%d is a quasibound level of the starting potential (%.4f cm-1 above the asymptote, behind "
            "the barrier of V + J(J+1) hbar^2/(2 mu r^2), whose top lies %.4f cm-1 above it; width %.3g cm-1): a fit "
            "treats a level as quasibound when the data put it above the asymptote (a term value above it, or a "
            "negative binding energy) or give its width (read_widths); give it so, or leave it out "
            "(levels(..., quasibound=True) computes positions and widths)" % (v, J, -cols["binding_energy"][k], barriers[int(J)]["height"], cols["width"][k]))


def _start_failure_message_levels(message, obs, i, potential, mu=None):
    text = "the starting potential %r cannot compute %s: %s" % (potential, _row_description(obs, i), message)
    note = None
    if mu is not None and obs.J[i] > 0 and ("not bound" in message or "last bound level" in message or
                                           "binds no levels" in message):
        note = _quasibound_note(potential, float(mu), int(obs.v[i]), int(obs.J[i]))
    if note:
        text += "; " + note
    elif "not bound" in message or "last bound level" in message or "binds no levels" in message:
        text += ("; every level of the data must be bound by the starting potential: start from a deeper or "
                 "wider well (larger De, or a smaller a / larger re), e.g. from a Birge-Sponer estimate of De")
    return text


def _start_failure_message(message, design, level, potential):
    label, v, J = design.level_keys[level]
    users = [o for o, r in zip(design.row_origin, range(design.n_rows))
             if level in (design.cols["level_a"][r], design.cols["level_b"][r])]
    lev = "%sv=%d, J=%d" % ("isotopologue %s, " % label if label is not None else "", v, J)
    if users:
        b, i = users[0]
        where = ("data set %d, row %d" % (b + 1, i + 1)) if len(design.blocks) > 1 else "data row %d" % (i + 1)
        text = "the starting potential %r cannot compute %s (%s): %s" % (potential, where, lev, message)
    else:
        text = "the starting potential %r cannot compute the level %s: %s" % (potential, lev, message)
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
      chi_square, dof, sqrt_reduced_chi_square (sqrt(chi2/dof), dimensionless; None when dof = 0;
        also readable as `standard_error`, its earlier name)
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
               insensitive=(), observed_values=None, sigma=None, design=None, extra_values=(), jacobian_extra=None,
               n_level_calculations=None, omega=0, correction=None, correction_values=()):
        self = cls.__new__(cls)
        #: the Born-Oppenheimer correction fitted with the potential (None), and its coefficients
        self.correction = correction
        corr_names = list(correction.param_names) if correction is not None else []
        self._correction_values = dict(zip(corr_names, [float(x) for x in correction_values]))
        self._correction_initial = dict(zip(corr_names, correction.start)) if correction is not None else {}
        names = list(potential.param_names) + corr_names
        self.potential = potential
        self.initial_potential = initial_potential
        self.observed = observed
        self.data = list(observed) if isinstance(observed, list) else [observed]
        self.masses = dict(masses)
        self.method = method
        self.omega = omega
        first = self.data[0]
        self.energy_zero = getattr(first, "energy_zero", None) if len(self.data) == 1 else None
        if observed_values is None:
            observed_values, sigma = observed.energy, observed.uncertainty
        self._observed_values = _frozen(np.asarray(observed_values, dtype=float))
        self._sigma = _frozen(np.asarray(sigma, dtype=float))
        self.n_level_calculations = n_level_calculations
        self.blocks = design.blocks if design is not None else []
        self.n_levels = len(design.level_keys) if design is not None else None
        extra_names = list(design.extra_names) if design is not None else []
        self.extra_names = extra_names
        self._extra_values = np.asarray(extra_values, dtype=float)
        self.jacobian_extra = _frozen(np.zeros((len(self._sigma), 0)) if jacobian_extra is None
                                      else np.asarray(jacobian_extra, dtype=float))
        self.scale_uncertainties = scale_uncertainties
        self.calculated = _frozen(np.asarray(calculated, dtype=float))
        self.jacobian = _frozen(np.asarray(jacobian, dtype=float))
        self.fitted_rows = _frozen(np.asarray(fitted_rows, dtype=bool))
        self.residuals = _frozen(np.where(self.fitted_rows, self._observed_values - self.calculated,
                                          self._observed_values - self.calculated))
        self.normalized_residuals = _frozen(self.residuals / self._sigma)
        self.var_names = [n for n, f in zip(names, vary_flags) if f]
        self.chi_square = float(chi_square)
        n_fit = int(np.count_nonzero(self.fitted_rows))
        self.dof = n_fit - len(self.var_names) - len(extra_names)
        self.sqrt_reduced_chi_square = math.sqrt(self.chi_square / self.dof) if self.dof > 0 else None
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
        """Covariance, correlations, and why any parameter is not determined. The extra
        parameters (free term values, fitted asymptotes) take part in the covariance; the
        potential's block of it is `covariance`, the extras are in `free_parameters`."""
        extra_names = self.extra_names
        values = dict(self.potential.params, **self._correction_values,
                      **dict(zip(extra_names, self._extra_values.tolist())))
        initial = dict(self.initial_potential.params, **self._correction_initial,
                       **dict(zip(extra_names, self._extra_values.tolist())))
        bounds_by_name = dict(bounds_by_name, **{n: (None, None) for n in extra_names})
        pot_var = list(self.var_names)
        all_var = pot_var + extra_names
        var_idx = [names.index(n) for n in pot_var]
        rows = self.fitted_rows
        Jall = np.hstack([self.jacobian[:, var_idx], self.jacobian_extra])
        Jw = Jall[rows] / self._sigma[rows][:, None]
        self.var_names = all_var
        nv = len(all_var)
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
            # singular values and vectors of A are those of R from A = QR (cheaper for many rows)
            _, s, vt = np.linalg.svd(np.linalg.qr(A, mode="r") if A.shape[0] > 2 * A.shape[1] else A,
                                     full_matrices=False)
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
        #: free term values and fitted asymptotes: name -> Parameter (value in cm-1)
        self.free_parameters = {}
        for name in extra_names:
            j = self.var_names.index(name)
            det = name not in reasons
            self.free_parameters[name] = Parameter(name, values[name], float(sd[j]) if det else None, True,
                                                   (None, None), None, det, reasons.get(name, ""))
        # the potential's block: var_names, covariance and correlation keep their meaning
        npv = len(pot_var)
        self.covariance_full = self.covariance
        self.covariance_full_names = list(all_var)
        self.covariance = _frozen(np.array(self.covariance[:npv, :npv]))
        self.covariance_unscaled = _frozen(np.array(self.covariance_unscaled[:npv, :npv]))
        self.correlation = _frozen(np.array(self.correlation[:npv, :npv]))
        self.var_names = pot_var
        self.undetermined_free = [n for n in self.undetermined if n in extra_names]
        self.undetermined = [n for n in self.undetermined if n not in extra_names]
        if self.dof == 0:
            self.dof_note = ("no degrees of freedom (as many fitted levels as varied parameters): the sqrt of "
                             "reduced chi-square is not defined and the uncertainties are not scaled")
        else:
            self.dof_note = ""

    def _warn(self):
        if getattr(self, "start_notes", ()):
            warnings.warn("the starting potential did not bind every level: " + "; ".join(self.start_notes),
                          FitWarning, stacklevel=3)
        if getattr(self, "method_error_warning", ""):
            warnings.warn(self.method_error_warning, FitWarning, stacklevel=3)
        if self.status != "converged":
            _warn("the fit did not converge: %s; the result holds the best point reached" % self.message,
                  FitWarning)
        for name in self.undetermined:
            _warn("parameter %s: %s" % (name, self.params[name].note), FitWarning)
        if self.dof_note:
            _warn(self.dof_note, FitWarning)

    # -- simple views -------------------------------------------------------------------
    @property
    def standard_error(self):
        """The earlier name of `sqrt_reduced_chi_square` (kept for code written against it)."""
        return self.sqrt_reduced_chi_square

    @standard_error.setter
    def standard_error(self, value):  # code written against the earlier name may still assign it
        self.sqrt_reduced_chi_square = value

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

    def to_dataframe(self):
        """The residual table as a pandas DataFrame: isotopologue, v, J, observed, uncertainty,
        calculated, residual (cm-1), normalized_residual (residual/uncertainty), fitted."""
        return _reports.residual_dataframe(self)

    def parameters_dataframe(self):
        """The parameters as a pandas DataFrame indexed by name (value, uncertainty, unit, ...)."""
        return _reports.parameter_dataframe(self)

    def plot(self, ax=None, **options):
        """The normalised residuals (`wkbfit.plots.residuals`)."""
        from . import plots
        return plots.residuals(self, ax=ax, **options)

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
        # the potential's parameters only (correction coefficients do not change the reference levels)
        det = [j for j, n in enumerate(self.var_names) if n not in self.undetermined and n in names]
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

    def predict(self, isotopologue=None, mu=None, J=0, *, order=None, ends=None, quasibound=False):
        """Every bound level of the fitted potential, up to the last, with propagated one-sigma uncertainties.

        isotopologue: a label (its fitted reduced mass, or one from the mass table); mu: a
        reduced mass in u (or a pair of isotopes); with neither, the fit's only isotopologue.
        J: rotational quantum number (integer >= 0).
        order, ends: a semiclassical level rule for the predicted energies as in `levels` (for example
        order=2, ends="matched"); by default the fit's own accurate levels: exact levels (methods
        "corrected" and "exact"), first-order WKB levels for a "wkb" fit.
        quasibound: also predict the quasibound levels behind the barrier of V_J (pred.quasibound, a
        QuasiboundPrediction: positions, FWHM widths, lifetimes, with uncertainties): exact resonance
        poles for accurate fits (each standard deviation costs one exact resonance search per
        principal axis of the covariance, ~0.1-1 s), the semiclassical rule for a "wkb" fit.
        Returns a Prediction: levels, binding energies, spacings dG(v+1/2), D0, the quantum threshold
        number v_th (levels v < v_th are bound; matched rule), vD (the quantum number at dissociation of
        the accurate levels: v_th + 1/(2(n-2)) at J = 0 for a -C_n/r^n tail, physics.md 4c; first-order
        WKB for a "wkb" fit; `vD_first_order` always) and the number of bound levels with its range
        `n_bound_range` for v_th -+ one sd, each with its uncertainty. Uncertainties: linear propagation
        of the covariance with analytic gradients (levels, D0), or central differences of the accurate
        quantity one sd along each principal axis of the covariance (v_th, vD, quasibound levels); each
        level's method error (`method_error`) in quadrature. See wkbfit.predictions.
        """
        from .predictions import predict
        return predict(self, isotopologue, mu, J, order=order, ends=ends, quasibound=quasibound)

    # -- replicas -----------------------------------------------------------------------
    def bootstrap(self, n=1000, seed=1, kind="monte-carlo", executor=None, **options):
        """Refit n bootstrap or Monte-Carlo replicas of the data with this fit's own settings.

        kind: "monte-carlo" (default; calculated levels plus noise of the stated uncertainties,
        scaled like the covariance) or "resample" (levels drawn with replacement); seed: replica
        i uses numpy.random.default_rng([seed, i]), the same on every executor; executor: None or
        "threads" (all cores), "serial", a dask.distributed.Client or a scheduler address.
        Options: progress, isotopologue, n_top_levels (see wkbfit.replicas.bootstrap).
        Returns a ReplicaResult (.std[name], .samples, .n_failed, .failures, a summary table).
        """
        from .replicas import bootstrap
        return bootstrap(self, n=n, seed=seed, kind=kind, executor=executor, **options)

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
        from ._optional import pandas
        pd = pandas()
        return pd.DataFrame(self.to_dict())

    def summary(self):
        lo, hi = self.n_bound_range
        v_th = getattr(self, "v_th", None)
        return ("D0 = %.6f +/- %.6f cm-1 (asymptote minus v=0, J=0); vD = %.5f +/- %.5f%s; bound levels %d%s" % (
            self.D0, self.D0_uncertainty, self.vD, self.vD_uncertainty,
            "; v_th = %.5f +/- %.5f" % (v_th, self.v_th_uncertainty) if v_th is not None else "", self.n_bound,
            " (%d to %d within one standard deviation of vD)" % (lo, hi) if (lo, hi) != (self.n_bound,) * 2 else ""))

    def to_text(self, last=None):
        """A plain-text table; last=N shows only the N levels nearest dissociation. Quasibound levels
        (predict(..., quasibound=True)) follow in their own table."""
        text = _reports.prediction_text(self, last)
        if getattr(self, "quasibound", None) is not None and len(self.quasibound):
            text += "\n\n" + self.quasibound.to_text()
        return text

    def __str__(self):
        return self.to_text()

    def __repr__(self):
        return "<Prediction: %d bound levels, mu=%.8g u, J=%d, D0=%.6g, vD=%.5g>" % (
            self.n_bound, self.mu, self.J, self.D0, self.vD)

    def _repr_html_(self):
        return _reports.prediction_html(self)

    def plot(self, ax=None, **options):
        """The near-dissociation plot of these levels (`wkbfit.plots.near_dissociation`)."""
        from . import plots
        return plots.near_dissociation(self, ax=ax, **options)

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
