"""The JSON form of fit results: FitResult <-> a dict of plain numbers and lists, checked on loading
(shapes, types, finiteness), so that a damaged or tampered file is refused with a clear message."""
import math

import numpy as np

from . import potentials as _potentials
from .observed import read_levels
from .potentials import Potential
from .reports import STATISTIC_KEY, _METHOD_FLAG, _frozen, _single_levels

#: the key the same number had in files written before (read, never written)
_OLD_STATISTIC_KEY = "standard_error"

FORMAT = "wkbfit-fit-result"
#: 2: the statistic's key is sqrt_reduced_chi_square (1: standard_error) and potential.model names the family
FORMAT_VERSION = 2
_READABLE_VERSIONS = (1, 2)


def _data_set_dict(result, block):
    """One data set of a fit: its kind, unit, columns and residuals in its own unit."""
    d = block.data
    f = block.factor
    sl = slice(block.start, block.start + len(d))
    if d.kind == "levels":
        columns = {"v": d.v.tolist(), "J": d.J.tolist(), "energy": (d.energy / f).tolist(),
                   "uncertainty": (d.uncertainty / f).tolist(), "isotopologue": list(d.isotopologue)}
        extra = {"energy_zero": d.energy_zero, "asymptote": d.asymptote, "fit_asymptote": d.fit_asymptote}
    elif d.kind == "widths":
        columns = d.to_dict()
        columns["width"] = (d.width / f).tolist()
        columns["uncertainty"] = (d.uncertainty / f).tolist()
        columns["isotopologue"] = list(d.isotopologue)
        extra = {}
    else:
        columns = d.to_dict()
        columns["wavenumber"] = (d.wavenumber / f).tolist()
        columns["uncertainty"] = (d.uncertainty / f).tolist()
        columns["isotopologue"] = list(d.isotopologue)
        extra = {}
    return dict({"kind": block.kind, "unit": block.unit, "source": d.source, "columns": columns,
                 "default_uncertainty": d.default_uncertainty,
                 "calculated": (result.calculated[sl] / f).tolist(), "residuals": (result.residuals[sl] / f).tolist(),
                 "normalized_residuals": result.normalized_residuals[sl].tolist(),
                 "fitted": result.fitted_rows[sl].tolist(), "start": block.start}, **extra)


def _data_set_from_dict(item):
    from .lines import ObservedLines
    from .observed import ObservedLevels
    c = item["columns"]
    from .units import CM1_PER_UNIT
    f = CM1_PER_UNIT[item["unit"]]
    labels = [x for x in c.get("isotopologue", [None] * len(c["uncertainty"]))]
    if item["kind"] in ("term values", "binding energies"):
        d = ObservedLevels(c["v"], c["J"], np.array(c["energy"], dtype=float) * f,
                           np.array(c["uncertainty"], dtype=float) * f, labels, item["energy_zero"], item["source"],
                           unit=item["unit"], asymptote=item["asymptote"], fit_asymptote=item["fit_asymptote"],
                           default_uncertainty=item["default_uncertainty"])
    elif item["kind"] == "widths":
        from .lines import ObservedWidths
        d = ObservedWidths(c["v"], c["J"], np.array(c["width"], dtype=float) * f,
                           np.array(c["uncertainty"], dtype=float) * f, labels, unit=item["unit"],
                           source=item["source"])
    else:
        none = lambda col: [x or None for x in c.get(col, [None] * len(c["uncertainty"]))]
        d = ObservedLines(c["v_upper"], c["J_upper"], c["v_lower"], c["J_lower"],
                          np.array(c["wavenumber"], dtype=float) * f, np.array(c["uncertainty"], dtype=float) * f,
                          labels, none("upper_state"), none("lower_state"), unit=item["unit"], source=item["source"],
                          default_uncertainty=item["default_uncertainty"])
    from .design import Block
    block = Block(d, [0 if x else -1 for x in item["fitted"]], item["kind"], item["unit"], f)
    block.start = item["start"]
    return block


def fit_result_to_dict(result):
    """The whole result as plain JSON-ready data (NaN and infinities as None)."""
    single = _single_levels(result)
    return _jsonable({
        "data_sets": [_data_set_dict(result, b) for b in result.blocks],
        "free_parameters": [p.to_dict() for p in result.free_parameters.values()],
        "covariance_full": result.covariance_full.tolist(), "covariance_full_names": result.covariance_full_names,
        "n_levels": result.n_levels, "n_level_calculations": result.n_level_calculations, "omega": result.omega,
        "format": FORMAT, "version": FORMAT_VERSION,
        "potential": {"class": type(result.potential).__name__, "model": type(result.potential).model,
                      "beta_coefficient_count": len(getattr(result.potential, "betas", ())),
                      "params": result.potential.params, "initial": result.initial_potential.params},
        "parameters": [p.to_dict() for p in result.params.values()],
        "var_names": result.var_names,
        "covariance": result.covariance.tolist(), "covariance_unscaled": result.covariance_unscaled.tolist(),
        "correlation": result.correlation.tolist(),
        "observed": dict(result.observed.to_dict(), energy_zero=result.energy_zero,
                         isotopologue=list(result.observed.isotopologue)) if single else None,
        "masses": [[k, m] for k, m in result.masses.items()],
        "calculated": result.calculated.tolist(), "residuals": result.residuals.tolist(),
        "normalized_residuals": result.normalized_residuals.tolist(),
        "fitted_rows": result.fitted_rows.tolist(), "jacobian": result.jacobian.tolist(),
        "chi_square": result.chi_square, "dof": result.dof, STATISTIC_KEY: result.sqrt_reduced_chi_square,
        "scale_uncertainties": result.scale_uncertainties, "covariance_scale": result.covariance_scale,
        "condition_number": result.condition_number, "undetermined": result.undetermined,
        "iterations": result.iterations, "n_evaluations": result.n_evaluations, "n_infeasible": result.n_infeasible,
        "predicted_decrease": result.predicted_decrease, "status": result.status, "message": result.message,
        "dof_note": result.dof_note, "method": result.method,
        "refreshes": getattr(result, "refreshes", 0), "refresh_history": getattr(result, "refresh_history", []),
        "start_notes": getattr(result, "start_notes", []),
        "method_error": None if getattr(result, "method_error", None) is None else result.method_error.tolist(),
        "method_error_note": getattr(result, "method_error_note", ""),
        "method_error_row_names": getattr(result, "method_error_row_names", None),
        "quasibound_levels": getattr(result, "quasibound_levels", None),
        "quasibound_note": getattr(result, "quasibound_note", ""),
    })


def fit_result_from_dict(cls, data):
    """A FitResult from its JSON form; tampered or wrong-shaped data give one ValueError."""
    if not isinstance(data, dict) or data.get("format") != FORMAT:
        raise ValueError("this is not a wkbfit fit result (format %r expected)" % FORMAT)
    try:
        result = _fit_result_from_checked_dict(cls, data)
        _check_loaded_shapes(result)
    except ValueError as err:
        text = str(err)
        if "array element" in text or "inhomogeneous" in text or "could not convert" in text:
            text = "an entry has the wrong type or shape (a list of numbers of one length was expected)"
        raise ValueError("the fit result is damaged or was changed by hand: %s" % text) from None
    except (KeyError, TypeError, IndexError, AttributeError, RecursionError, OverflowError) as err:
        what = "missing entry %s" % err if isinstance(err, KeyError) else "an entry has the wrong type or shape"
        raise ValueError("the fit result is damaged or was changed by hand (%s); write it again with "
                         "save_json" % what) from None
    return result


def _check_loaded_shapes(result):
    """Every array of a loaded result has the shape the data and parameters imply."""
    n = sum(len(b.data) for b in result.blocks) if getattr(result, "blocks", None) else len(result.observed)
    n_var, n_par = len(result.var_names), len(result.params)
    want = {"covariance": (n_var, n_var), "covariance_unscaled": (n_var, n_var), "correlation": (n_var, n_var),
            "calculated": (n,), "residuals": (n,), "normalized_residuals": (n,), "fitted_rows": (n,),
            "jacobian": (n, n_par)}
    for key, shape in want.items():
        got = getattr(result, key).shape
        if got != shape:
            raise ValueError("%s has shape %s, expected %s" % (key, got, shape))
    unknown = [v for v in result.var_names if v not in result.params]
    if unknown:
        raise ValueError("var_names names %s, which are not parameters" % unknown)
    for key in ("iterations", "n_evaluations", "n_infeasible", "dof"):
        x = getattr(result, key)
        if isinstance(x, bool) or not isinstance(x, int):
            raise ValueError("%s=%r must be an integer" % (key, x))
    if result.chi_square is None or (result.scale_uncertainties and result.dof > 0 and
                                     result.sqrt_reduced_chi_square is None):
        raise ValueError("chi_square (and, for scaled uncertainties, sqrt_reduced_chi_square) must be numbers")
    for key in ("chi_square", "sqrt_reduced_chi_square", "covariance_scale", "condition_number", "predicted_decrease"):
        x = getattr(result, key)
        if x is not None and (isinstance(x, bool) or not isinstance(x, (int, float)) or not math.isfinite(x)):
            raise ValueError("%s=%r must be a finite number or null" % (key, x))
    for p in result.params.values():
        for what in ("value", "initial", "uncertainty"):
            x = getattr(p, what)
            if (x is not None or what != "uncertainty") and (isinstance(x, bool) or not isinstance(x, (int, float))
                                                              or not math.isfinite(x)):
                raise ValueError("parameter %s: %s=%r is not a finite number" % (p.name, what, x))
    for key in ("status", "message", "dof_note", "method"):
        if not isinstance(getattr(result, key), str):
            raise ValueError("%s=%r must be a string" % (key, getattr(result, key)))
    if not isinstance(result.scale_uncertainties, bool):
        raise ValueError("scale_uncertainties=%r must be true or false" % (result.scale_uncertainties,))
    for label, m in result.masses.items():
        if isinstance(m, bool) or not isinstance(m, (int, float)) or not (m > 0 and math.isfinite(m)):
            raise ValueError("the mass of %r is %r, not a number > 0" % (label, m))


def _fit_result_from_checked_dict(cls, data):
    from .fitting import Parameter
    if not isinstance(data, dict) or data.get("format") != FORMAT:
        raise ValueError("this is not a wkbfit fit result (format %r expected)" % FORMAT)
    if data.get("version") not in _READABLE_VERSIONS:
        raise ValueError("fit result version %r is not supported (this wkbfit reads versions %s)" % (
            data.get("version"), ", ".join(str(v) for v in _READABLE_VERSIONS)))
    pot_cls = getattr(_potentials, data["potential"]["class"], None)
    if not (isinstance(pot_cls, type) and issubclass(pot_cls, Potential)):
        raise ValueError("unknown potential class %r in the fit result" % data["potential"]["class"])
    result = cls.__new__(cls)
    result.potential = pot_cls(**data["potential"]["params"])
    result.initial_potential = pot_cls(**data["potential"]["initial"])
    o = data["observed"]
    result.blocks = [_data_set_from_dict(item) for item in data.get("data_sets", [])]
    if o is not None:
        result.observed = read_levels({k: o[k] for k in ("v", "J", "energy", "uncertainty", "isotopologue")},
                                    energy_zero=o["energy_zero"], check=False) \
            if any(x is not None for x in o["isotopologue"]) \
            else read_levels({k: o[k] for k in ("v", "J", "energy", "uncertainty")}, energy_zero=o["energy_zero"],
                             check=False)
        if result.blocks:
            result.blocks[0].data = result.observed if result.blocks[0].data.unit == "cm-1" else result.blocks[0].data
            result.observed = result.blocks[0].data
        result.data = [result.observed]
    else:
        result.data = [b.data for b in result.blocks]
        result.observed = result.data
    result.free_parameters = {}
    for p in data.get("free_parameters", []):
        result.free_parameters[p["name"]] = Parameter(p["name"], p["value"], p["uncertainty"], p["vary"],
                                                      tuple(p["bounds"]), p["initial"], p["determined"], p["note"])
    result.extra_names = list(result.free_parameters)
    names_full = data.get("covariance_full_names", list(data["var_names"]))
    result.covariance_full_names = names_full
    result.covariance_full = _frozen(_nan_array(data.get("covariance_full", data["covariance"]),
                                                (len(names_full),) * 2))
    result.n_levels = data.get("n_levels")
    result.n_level_calculations = data.get("n_level_calculations")
    result.omega = data.get("omega", 0)
    if not all(isinstance(e, list) and len(e) == 2 and isinstance(e[0], (str, type(None))) for e in data["masses"]):
        raise ValueError("masses must be a list of [label, reduced mass] pairs")
    result.masses = {k: m for k, m in data["masses"]}
    result.method = data["method"]
    result.energy_zero = o["energy_zero"] if o is not None else None
    if o is not None and result.energy_zero not in ("minimum", "lowest", "asymptote"):
        raise ValueError("energy_zero=%r is not one of 'minimum', 'lowest', 'asymptote'" % (result.energy_zero,))
    result.scale_uncertainties = data["scale_uncertainties"]
    result.params = {}
    for p in data["parameters"]:
        for what in ("value", "initial", "uncertainty"):
            x = p[what]
            if not (x is None and what != "value") and (isinstance(x, bool) or not isinstance(x, (int, float))):
                raise ValueError("parameter %r: %s=%r is not a number" % (p.get("name"), what, x))
        if not (isinstance(p["bounds"], list) and len(p["bounds"]) == 2 and all(
                b is None or (isinstance(b, (int, float)) and not isinstance(b, bool)) for b in p["bounds"])):
            raise ValueError("parameter %r: bounds=%r must be a pair of numbers or null" % (p.get("name"), p["bounds"]))
        if not isinstance(p["name"], str) or not isinstance(p["note"], str):
            raise ValueError("parameter name and note must be strings")
        result.params[p["name"]] = Parameter(p["name"], p["value"], p["uncertainty"], p["vary"],
                                           tuple(p["bounds"]), p["initial"], p["determined"], p["note"])
    result.var_names = list(data["var_names"])
    for key in ("covariance", "covariance_unscaled", "correlation"):
        setattr(result, key, _frozen(_nan_array(data[key], (len(result.var_names),) * 2)))
    for key in ("calculated", "residuals", "normalized_residuals"):
        setattr(result, key, _frozen(_nan_array(data[key])))
    if not (isinstance(data["fitted_rows"], list) and all(isinstance(x, bool) for x in data["fitted_rows"])):
        raise ValueError("fitted_rows must be a list of true/false")
    result.fitted_rows = _frozen(np.array(data["fitted_rows"], dtype=bool))
    result.jacobian = _frozen(_nan_array(data["jacobian"], (len(result.residuals), len(result.params))))
    result._sigma = _frozen(np.concatenate([b.data.uncertainty for b in result.blocks])) if result.blocks else \
        _frozen(np.asarray(result.observed.uncertainty))
    if STATISTIC_KEY not in data and _OLD_STATISTIC_KEY in data:  # a file written before the rename
        data = dict(data, **{STATISTIC_KEY: data[_OLD_STATISTIC_KEY]})
    for key in ("chi_square", "dof", STATISTIC_KEY, "covariance_scale", "condition_number", "iterations",
                "n_evaluations", "n_infeasible", "predicted_decrease", "status", "message", "dof_note"):
        setattr(result, key, data[key])
    result.undetermined = list(data["undetermined"])
    # results written before the method-error check have none of these
    result.refreshes = data.get("refreshes", 0)
    result.refresh_history = data.get("refresh_history", [])
    result.start_notes = data.get("start_notes", [])
    qb = data.get("quasibound_levels")
    if qb is not None:
        if not (isinstance(qb, dict) and all(isinstance(x, list) for x in qb.values())):
            raise ValueError("quasibound_levels must be a dict of columns (lists)")
        n_rows = len(result.residuals)
        if "rows" in qb and not all(isinstance(r, list) and all(
                isinstance(g, int) and not isinstance(g, bool) and 0 <= g < n_rows for g in r) for r in qb["rows"]):
            raise ValueError("quasibound_levels['rows'] must hold lists of data row indices (0 to %d)" % (n_rows - 1))
        result.quasibound_levels = qb
        result.quasibound_note = str(data.get("quasibound_note", ""))
    if isinstance(result.refreshes, bool) or not isinstance(result.refreshes, int) or result.refreshes < 0:
        raise ValueError("refreshes=%r must be a whole number >= 0" % (result.refreshes,))
    if not (isinstance(result.refresh_history, list) and all(_is_refresh_entry(h) for h in result.refresh_history)):
        raise ValueError("refresh_history=%r must be a list of {'kind': text, 'step_sd': number, 'chi_square': "
                         "number} entries" % (result.refresh_history,))
    if not (isinstance(result.start_notes, list) and all(isinstance(x, str) for x in result.start_notes)):
        raise ValueError("start_notes=%r must be a list of strings" % (result.start_notes,))
    if data.get("method_error") is not None:
        if not isinstance(data.get("method_error_note", ""), str):
            raise ValueError("method_error_note=%r must be a string" % (data.get("method_error_note"),))
        err = _frozen(_nan_array(data["method_error"]))
        if err.shape != result._sigma.shape:  # every data row, data set after data set
            raise ValueError("method_error has %d entries for %d observed rows" % (err.size, result._sigma.size))
        result.method_error = err
        result.method_error_ratio = _frozen(err / result._sigma)
        result.method_error_flagged = [int(i) for i in np.nonzero(result.method_error_ratio > _METHOD_FLAG)[0]]
        result.method_error_note = data.get("method_error_note", "")
        names = data.get("method_error_row_names")
        if names is not None:
            if not (isinstance(names, list) and len(names) == err.size and all(isinstance(x, str) for x in names)):
                raise ValueError("method_error_row_names must be a list of %d strings (one per data row)" % err.size)
            result.method_error_row_names = names
    return result


def _is_refresh_entry(h):
    """One entry of the default fit's refresh history as the JSON form writes it."""
    def number(x):
        return x is None or (isinstance(x, (int, float)) and not isinstance(x, bool))
    return isinstance(h, dict) and isinstance(h.get("kind", ""), str) and number(h.get("step_sd")) and \
        number(h.get("chi_square"))


def _nan_array(data, shape=None):
    try:
        return _nan_array_unchecked(data, shape)
    except (TypeError, ValueError, OverflowError):
        raise ValueError("an array entry is not a (nested) list of numbers or null of one regular shape") from None


def _nan_array_unchecked(data, shape=None):
    arr = np.array([[math.nan if x is None else x for x in row] for row in data], dtype=float) \
        if data and isinstance(data[0], list) else np.array([math.nan if x is None else x for x in data], dtype=float)
    if shape is not None and arr.size == 0:
        arr = arr.reshape(shape)
    return arr


def _jsonable(x):
    if isinstance(x, dict):
        return {k: _jsonable(v) for k, v in x.items()}
    if isinstance(x, (list, tuple)):
        return [_jsonable(v) for v in x]
    if isinstance(x, (np.floating, float)):
        f = float(x)
        return f if math.isfinite(f) else None
    if isinstance(x, (np.integer,)):
        return int(x)
    if isinstance(x, np.bool_):
        return bool(x)
    return x
