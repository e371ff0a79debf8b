"""The result of a fit: FitResult (parameters, covariance, predictions, replicas, renderings by
reports.py), Prediction, Parameter and FitWarning. fitting.fit builds it; fitting re-exports these names."""
import json
import math
import os
import numpy as np

from . import _tall, _validate
from .masses import as_reduced_mass, parse_isotopologue, reduced_mass
from . import reports as _reports
from . import result_json as _result_json
from .reports import _frozen, _atomic_write
from ._warn import warn as _warn


_METHOD_CODES = {"wkb": 0, "exact": 1}

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



def _well_conditioned(Jw, keep, norms=None):
    """(the matrix whose singular values are those of the column-normalised Jw[:, keep], inv(R^T R), the
    column norms) when every column is kept and the normal matrix is certainly far from singular (its
    smallest singular value at least 100 * _RCOND_SINGULAR of the largest, from the trace bound); None
    otherwise (then the SVD decides). The same arrays, by the same operations, as the SVD path computes.
    Jw column-major (then its column norms, `norms` if given, are those of its column selections)."""
    nv = Jw.shape[1]
    if len(keep) != nv or nv == 0 or len(Jw) < nv:
        return None
    if norms is None:
        norms = np.linalg.norm(Jw[:, keep], axis=0)
    An = Jw / norms
    R = _tall.qr_r(An)[0]
    try:
        inv = np.linalg.inv(R.T @ R)
    except np.linalg.LinAlgError:
        return None
    trace = float(inv.diagonal().sum())
    # s_min^2 >= 1/trace and s_max^2 <= sum s_i^2 = nv (unit columns): s_min/s_max >= 1/sqrt(trace * nv)
    if not (math.isfinite(trace) and trace > 0 and trace * nv <= (0.01 / _RCOND_SINGULAR) ** 2):
        return None
    return (R if An.shape[0] > 2 * nv else An), inv, norms


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
        self.residuals = _frozen(self._observed_values - self.calculated)
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
        # (column-major, as the column selections below copy it: the column norms round alike everywhere)
        Jall = np.asfortranarray(np.hstack([self.jacobian[:, var_idx], self.jacobian_extra])) \
            if self.jacobian_extra.shape[1] else self.jacobian[:, var_idx]
        Jw = np.asfortranarray(Jall[rows] / self._sigma[rows][:, None]) if not rows.all() \
            else np.asfortranarray(Jall / self._sigma[:, None])
        column_norms = np.linalg.norm(Jw, axis=0)
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
        sens = column_norms * scale
        top = float(sens.max()) if nv else 0.0
        for j, name in enumerate(self.var_names):
            if name not in reasons and (name in insensitive or not sens[j] > _SENSITIVITY_ZERO * top):
                reasons[name] = ("not determined: the calculated levels do not depend on it (for instance, J=0 "
                                 "levels of a Morse potential do not depend on re); it stays at its initial value")
        # 3. combinations the data do not separate (numerically singular normal matrix). The normal matrix of
        # the determined parameters is inverted anyway for the covariance; its trace bounds the singular values
        # (s_min^2 >= 1 / trace(inv(R^T R)), sum s_i^2 = the number of unit columns), so a well-conditioned fit
        # skips the SVD and computes the condition number only when it is read (`condition_number`).
        cond = None
        quick = _well_conditioned(Jw, [j for j, n in enumerate(self.var_names) if n not in reasons], column_norms)
        if quick is not None:
            self._condition_source = quick[0]
        for _ in range(nv if quick is None else 0):
            keep = [j for j, n in enumerate(self.var_names) if n not in reasons]
            if not keep:
                break
            A = Jw[:, keep]
            A = A / np.linalg.norm(A, axis=0)
            # singular values and vectors of A are those of R from A = QR (cheaper for many rows)
            # (the QR in C on one thread: numpy's threaded BLAS spins after tall calls, _tall.py)
            _, s, vt = np.linalg.svd(_tall.qr_r(A)[0] if A.shape[0] > 2 * A.shape[1] else A, full_matrices=False)
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
        if quick is None:
            self.condition_number = cond

        det = [j for j, n in enumerate(self.var_names) if n not in reasons]
        if quick is not None:  # every parameter determined: the inverse is the one computed above
            cov_u = quick[1] / np.outer(quick[2], quick[2])
        else:
            cov_u = np.full((nv, nv), np.nan)
        if det and quick is None:
            A = Jw[:, det]
            norms = np.linalg.norm(A, axis=0)
            An = A / norms
            R = _tall.qr_r(An)[0] if len(An) >= len(det) else None  # A^T A = R^T R
            inv = np.linalg.inv(R.T @ R if R is not None else An.T @ An)
            sub = inv / np.outer(norms, norms)
            cov_u[np.ix_(det, det)] = sub
        factor = self.chi_square / self.dof if (self.scale_uncertainties and self.dof > 0) else 1.0
        self.covariance_scale = factor
        self.covariance_unscaled = _frozen(cov_u)
        self.covariance = _frozen(cov_u * factor)
        sd = np.sqrt(self.covariance.diagonal())
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
        if npv < nv:  # (without extras the blocks are the whole, read-only matrices)
            self.covariance = _frozen(self.covariance[:npv, :npv])  # (_frozen copies)
            self.covariance_unscaled = _frozen(self.covariance_unscaled[:npv, :npv])
            self.correlation = _frozen(self.correlation[:npv, :npv])
        self.var_names = pot_var
        self.undetermined_free = [n for n in self.undetermined if n in extra_names]
        self.undetermined = [n for n in self.undetermined if n not in extra_names]
        if self.dof == 0:
            self.dof_note = ("no degrees of freedom (as many fitted levels as varied parameters): the sqrt of "
                             "reduced chi-square is not defined and the uncertainties are not scaled")
        else:
            self.dof_note = ""

    def _warn(self):
        # every warning names the user's line, however deep in the package the fit ended
        if getattr(self, "start_notes", ()):
            _warn("the starting potential did not bind every level: " + "; ".join(self.start_notes), FitWarning)
        if getattr(self, "method_error_warning", ""):
            _warn(self.method_error_warning, FitWarning)
        if self.status != "converged":
            _warn("the fit did not converge: %s; the result holds the best point reached" % self.message,
                  FitWarning)
        for name in self.undetermined:
            _warn("parameter %s: %s" % (name, self.params[name].note), FitWarning)
        if self.dof_note:
            _warn(self.dof_note, FitWarning)

    # -- simple views -------------------------------------------------------------------
    @property
    def condition_number(self):
        """The scaled condition number s_max/s_min of the weighted Jacobian of the determined parameters
        (columns normalised; None when nothing is determined); computed on first reading where the fit
        did not need its SVD."""
        try:
            return self.__dict__["_condition_number"]
        except KeyError:
            pass
        source = self.__dict__.pop("_condition_source", None)
        cond = None
        if source is not None:
            s = np.linalg.svd(source, full_matrices=False)[1]  # (the same LAPACK driver as the fit's SVD)
            cond = float(s[0] / s[-1]) if s[-1] > 0 else math.inf
        self.__dict__["_condition_number"] = cond
        return cond

    @condition_number.setter
    def condition_number(self, value):
        self.__dict__.pop("_condition_source", None)
        self.__dict__["_condition_number"] = value

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
        Options: progress, isotopologue, n_top_levels, refit ("linearised", the default where the
        fit allows it, or "full"), check_tolerance (see wkbfit.replicas.bootstrap).
        Returns a ReplicaResult (.std[name], .samples, .n_failed, .failures, .method_check, a
        summary table).
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
        return _result_json.fit_result_to_dict(self)

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
        return _result_json.fit_result_from_dict(cls, data)

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
