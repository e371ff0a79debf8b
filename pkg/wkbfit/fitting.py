"""Weighted least-squares fits of a potential to measured levels, with uncertainties and predictions.

`fit(potential, observed, mu=None, ...)` adjusts the potential's parameters so that its levels
reproduce the observed ones within their uncertainties and returns a `FitResult` (fit_result.py). The
Levenberg-Marquardt iterations run in C (GSL's trust-region solver, csrc/fit.c) with the
analytic Jacobian dE_v/dp = <dV/dp> (the orbit average, for first-order WKB). Python only
prepares the data and analyses the result (covariance, correlations, reports, predictions).

Units: energies cm-1, distances angstrom, masses u.
"""
import math

import numpy as np

from . import _core, _validate
from . import potentials as _potentials
from .observed import ObservedLevels, read_levels
from .lines import ObservedLines, ObservedWidths
from .design import build_design
from .checks import check_data
from .born_oppenheimer import BornOppenheimerCorrection
from . import corrected as _corrected
from . import method_error as _method_error
from . import width_fit as _width_fit
from .potentials import Potential

__all__ = ["fit", "FitResult", "Parameter", "Prediction", "FitWarning"]

_ENERGY_ZERO_CODES = {"minimum": 0, "asymptote": 1, "lowest": 2}
#: fit methods: "corrected" (the default: WKB iterations with exact per-level corrections), "wkb", "exact"
FIT_METHODS = ("corrected", "wkb", "exact")


# the result objects live in fit_result.py; these names stay importable from here
from .fit_result import _METHOD_CODES, _level_code, FitWarning, Parameter, FitResult, Prediction  # noqa: F401


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
    # the exact rows of any method's check after the fit come from the same evaluator
    ev = _corrected.RowEvaluator(run_rows, model, curve, lv, lrot, lmu, rows, bob is None, omega)
    try:
        if method == "corrected":
            # WKB iterations with per-row exact corrections on the row engine (corrected.run_corrected_rows)
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
    _method_error.attach_rows(result, design, ev, out)
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
    mu_rows = np.full(len(obs), next(iter(masses.values())), dtype=float) if len(masses) == 1 else \
        np.array([masses[label] for label in obs.isotopologue], dtype=float)
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
    if not (math.isfinite(out["chi_square"]) and np.isfinite(out["params"]).all() and np.isfinite(out["calc"]).all()):
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
    lower = np.full(len(names), -np.inf)
    upper = np.full(len(names), np.inf)
    by_name = {n: (None, None) for n in names}
    if bounds is None:
        return lower, upper, by_name
    values = potential.params
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
            "treats a level as quasibound when the data give its width (read_widths), put it above the asymptote "
            "(a term value above it), or reach it by a line (read_lines); give it so, or leave it out "
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
