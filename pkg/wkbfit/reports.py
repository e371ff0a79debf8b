"""Renderings of fit results: plain-text reports, HTML for notebooks, and the JSON form.

Result objects (fitting.py) hold the numbers; this module turns them into text, HTML and
JSON-ready data and back, so that results, reports and figures (plots.py) live apart.
"""
import html
import math
import os
import tempfile

import numpy as np

from . import potentials as _potentials
from .observed import read_levels
from .potentials import Potential

#: units of the parameters of the built-in models (by parameter name)
_UNITS = {"De": "cm-1", "re": "A", "a": "1/A", "n": "", "m": ""}
#: normalised residuals beyond this are flagged in the report (common practice: 3 sigma)
_LARGE_RESIDUAL = 3.0

FORMAT = "wkbfit-fit-result"
FORMAT_VERSION = 1


def fit_report_text(result):
    """A plain-text report: parameters, correlations, statistics and the residual table."""
    obs = result.observed
    labels = obs.isotopologues
    lines = []
    lines.append("Fit of a %s potential to %d levels of %d isotopologue%s (%s); method %s; energy zero %r (%s)" % (
        type(result.potential).__name__, len(obs), len(labels), "" if len(labels) == 1 else "s",
        ", ".join("unnamed" if l is None else l for l in labels), result.method, result.energy_zero,
        {"minimum": "term values above the potential minimum",
         "asymptote": "binding energies below the asymptote",
         "lowest": "relative to v=0, J=0 of each isotopologue"}[result.energy_zero]))
    lines.append("Status: %s. %s" % (result.status, result.message))
    lines.append("Reduced masses: %s" % ", ".join(
        "%s %.10g u" % ("unnamed" if k is None else k, m) for k, m in result.masses.items()))
    lines.append("")
    lines.append("Parameters")
    lines.append("  %-6s %-6s %22s %16s %22s  %s" % ("name", "unit", "value", "1-sigma", "initial", "remarks"))
    for name, p in result.params.items():
        unit = _UNITS.get(name, "")
        unc = "%16.6g" % p.uncertainty if p.uncertainty is not None else "%16s" % (
            "fixed" if not p.vary else "not determined")
        bounds = ""
        if p.bounds != (None, None):
            bounds = "bounds [%s, %s]" % ("-inf" if p.bounds[0] is None else "%.6g" % p.bounds[0],
                                          "+inf" if p.bounds[1] is None else "%.6g" % p.bounds[1])
        remark = "; ".join(x for x in (bounds, p.note if p.note != "fixed" else "") if x)
        lines.append("  %-6s %-6s %22.12g %s %22.12g  %s" % (name, unit, p.value, unc, p.initial, remark))
    if result.scale_uncertainties and result.dof > 0:
        lines.append("  Uncertainties are one standard deviation, scaled by the dimensionless standard error "
                     "%.4g (scale_uncertainties=True)." % result.standard_error)
    else:
        lines.append("  Uncertainties are one standard deviation from the stated measurement uncertainties "
                     "(not scaled).")
    lines.append("")
    corr = result._sorted_correlations()
    lines.append("Correlations of the varied parameters, largest first")
    if corr:
        for a, b, r in corr:
            lines.append("  %-6s %-6s %+.6f%s" % (a, b, r, "  (strong)" if abs(r) > 0.95 else ""))
    else:
        lines.append("  (none: fewer than two determined varied parameters)")
    lines.append("")
    lines.append("Fit statistics")
    n_fit = int(np.count_nonzero(result.fitted_rows))
    lines.append("  fitted levels %d, varied parameters %d, degrees of freedom %d" % (
        n_fit, len(result.var_names), result.dof))
    lines.append("  chi-square %.8g" % result.chi_square)
    lines.append("  dimensionless standard error sqrt(chi2/dof) %s" % (
        "%.6g" % result.standard_error if result.standard_error is not None else "not defined (dof = 0)"))
    r = result.residuals[result.fitted_rows]
    lines.append("  rms residual %.6g cm-1, largest |obs - calc| %.6g cm-1" % (
        float(np.sqrt(np.mean(r ** 2))), float(np.max(np.abs(r)))))
    if result.condition_number is not None:
        lines.append("  scaled condition number of the Jacobian %.4g" % result.condition_number)
    lines.append("  iterations %d, model evaluations %d%s" % (
        result.iterations, result.n_evaluations,
        ", trial points outside the model's domain %d" % result.n_infeasible if result.n_infeasible else ""))
    if result.dof_note:
        lines.append("  " + result.dof_note)
    lines.append("")
    nr = result.normalized_residuals
    n_large = int(np.count_nonzero(np.abs(nr[result.fitted_rows]) > _LARGE_RESIDUAL))
    lines.append("Residuals (observed - calculated); '<<' marks |obs - calc|/sigma > %g (%d level%s)" % (
        _LARGE_RESIDUAL, n_large, "" if n_large == 1 else "s"))
    lines.append("  %-12s %4s %4s %16s %10s %16s %12s %9s" % (
        "isotopologue", "v", "J", "observed", "sigma", "calculated", "obs-calc", "/sigma"))
    for i in range(len(obs)):
        if not result.fitted_rows[i]:
            flag = "  zero of the data (not fitted)"
        else:
            flag = "  <<" if abs(nr[i]) > _LARGE_RESIDUAL else ""
        lines.append("  %-12s %4d %4d %16.6f %10.4g %16.6f %12.6f %9.3f%s" % (
            obs.isotopologue[i] or "-", obs.v[i], obs.J[i], obs.energy[i], obs.uncertainty[i],
            result.calculated[i], result.residuals[i], nr[i], flag))
    return "\n".join(lines)


def fit_report_html(result):
    e = html.escape
    rows = []
    for name, p in result.params.items():
        unc = "%.6g" % p.uncertainty if p.uncertainty is not None else ("fixed" if not p.vary else
                                                                         "not determined")
        rows.append("<tr><td>%s</td><td>%s</td><td>%.12g</td><td>%s</td><td>%.12g</td><td>%s</td></tr>" % (
            e(name), e(_UNITS.get(name, "")), p.value, e(unc), p.initial,
            e(p.note if p.note != "fixed" else "")))
    params = ("<table><caption>Parameters (1 sigma%s)</caption><tr><th>name</th><th>unit</th><th>value</th>"
              "<th>uncertainty</th><th>initial</th><th>remarks</th></tr>%s</table>" % (
                  ", scaled by the standard error" if result.scale_uncertainties and result.dof > 0 else "",
                  "".join(rows)))
    corr = "".join("<tr><td>%s</td><td>%s</td><td>%+.4f</td></tr>" % (e(a), e(b), r)
                   for a, b, r in result._sorted_correlations())
    corr = "<table><caption>Correlations</caption><tr><th>p1</th><th>p2</th><th>r</th></tr>%s</table>" % corr
    stats = ("<p>Status: <b>%s</b> &mdash; %s<br>chi-square %.6g, dof %d, dimensionless standard error %s, "
             "iterations %d</p>" % (e(result.status), e(result.message), result.chi_square, result.dof,
                                    "%.5g" % result.standard_error if result.standard_error is not None else "n/a",
                                    result.iterations))
    obs = result.observed
    res = []
    for i in range(len(obs)):
        large = result.fitted_rows[i] and abs(result.normalized_residuals[i]) > _LARGE_RESIDUAL
        style = ' style="background:#fdd"' if large else ""
        res.append("<tr%s><td>%s</td><td>%d</td><td>%d</td><td>%.6f</td><td>%.4g</td><td>%.6f</td><td>%.6f</td>"
                   "<td>%.3f</td></tr>" % (style, e(obs.isotopologue[i] or "-"), obs.v[i], obs.J[i],
                                           obs.energy[i], obs.uncertainty[i], result.calculated[i],
                                           result.residuals[i], result.normalized_residuals[i]))
    resid = ("<details><summary>Residuals (%d levels; red: |obs-calc|/sigma &gt; %g)</summary><table><tr>"
             "<th>isotopologue</th><th>v</th><th>J</th><th>observed</th><th>sigma</th><th>calculated</th>"
             "<th>obs-calc</th><th>/sigma</th></tr>%s</table></details>" % (len(obs), _LARGE_RESIDUAL,
                                                                             "".join(res)))
    title = "<h4>Fit of %s to %d levels (%s, energy zero %s)</h4>" % (
        e(type(result.potential).__name__), len(obs), e(result.method), e(result.energy_zero))
    return title + stats + params + corr + resid


def fit_result_to_dict(result):
    """The whole result as plain JSON-ready data (NaN and infinities as None)."""
    return _jsonable({
        "format": FORMAT, "version": FORMAT_VERSION,
        "potential": {"class": type(result.potential).__name__, "model": result.potential.model,
                      "params": result.potential.params, "initial": result.initial_potential.params},
        "parameters": [p.to_dict() for p in result.params.values()],
        "var_names": result.var_names,
        "covariance": result.covariance.tolist(), "covariance_unscaled": result.covariance_unscaled.tolist(),
        "correlation": result.correlation.tolist(),
        "observed": dict(result.observed.to_dict(), energy_zero=result.energy_zero,
                         isotopologue=list(result.observed.isotopologue)),
        "masses": [[k, m] for k, m in result.masses.items()],
        "calculated": result.calculated.tolist(), "residuals": result.residuals.tolist(),
        "normalized_residuals": result.normalized_residuals.tolist(),
        "fitted_rows": result.fitted_rows.tolist(), "jacobian": result.jacobian.tolist(),
        "chi_square": result.chi_square, "dof": result.dof, "standard_error": result.standard_error,
        "scale_uncertainties": result.scale_uncertainties, "covariance_scale": result.covariance_scale,
        "condition_number": result.condition_number, "undetermined": result.undetermined,
        "iterations": result.iterations, "n_evaluations": result.n_evaluations, "n_infeasible": result.n_infeasible,
        "predicted_decrease": result.predicted_decrease, "status": result.status, "message": result.message,
        "dof_note": result.dof_note, "method": result.method,
    })


def fit_result_from_dict(cls, data):
    """A FitResult from its JSON form; tampered or wrong-shaped data give one ValueError."""
    if not isinstance(data, dict) or data.get("format") != FORMAT:
        raise ValueError("this is not a wkbfit fit result (format %r expected)" % FORMAT)
    try:
        result = _fit_result_from_checked_dict(cls, data)
        _check_loaded_shapes(result)
    except ValueError as err:
        raise ValueError("the fit result is damaged or was changed by hand: %s" % err) from None
    except (KeyError, TypeError, IndexError, AttributeError, RecursionError, OverflowError) as err:
        what = "missing entry %s" % err if isinstance(err, KeyError) else "an entry has the wrong type or shape"
        raise ValueError("the fit result is damaged or was changed by hand (%s); write it again with "
                         "save_json" % what) from None
    return result


def _check_loaded_shapes(result):
    """Every array of a loaded result has the shape the data and parameters imply."""
    n, n_var, n_par = len(result.observed), len(result.var_names), len(result.params)
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
    if result.chi_square is None or (result.scale_uncertainties and result.dof > 0 and result.standard_error is None):
        raise ValueError("chi_square (and, for scaled uncertainties, standard_error) must be numbers")
    for key in ("chi_square", "standard_error", "covariance_scale", "condition_number", "predicted_decrease"):
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
    if data.get("version") != FORMAT_VERSION:
        raise ValueError("fit result version %r is not supported (expected %d)" % (data.get("version"),
                                                                                      FORMAT_VERSION))
    pot_cls = getattr(_potentials, data["potential"]["class"], None)
    if not (isinstance(pot_cls, type) and issubclass(pot_cls, Potential)):
        raise ValueError("unknown potential class %r in the fit result" % data["potential"]["class"])
    result = cls.__new__(cls)
    result.potential = pot_cls(**data["potential"]["params"])
    result.initial_potential = pot_cls(**data["potential"]["initial"])
    o = data["observed"]
    result.observed = read_levels({k: o[k] for k in ("v", "J", "energy", "uncertainty", "isotopologue")},
                                energy_zero=o["energy_zero"]) if any(x is not None for x in o["isotopologue"]) \
        else read_levels({k: o[k] for k in ("v", "J", "energy", "uncertainty")}, energy_zero=o["energy_zero"])
    if not all(isinstance(e, list) and len(e) == 2 and isinstance(e[0], (str, type(None))) for e in data["masses"]):
        raise ValueError("masses must be a list of [label, reduced mass] pairs")
    result.masses = {k: m for k, m in data["masses"]}
    result.method = data["method"]
    result.energy_zero = o["energy_zero"]
    if result.energy_zero not in ("minimum", "lowest", "asymptote"):
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
    result.jacobian = _frozen(_nan_array(data["jacobian"], (len(result.observed), len(result.params))))
    for key in ("chi_square", "dof", "standard_error", "covariance_scale", "condition_number", "iterations",
                "n_evaluations", "n_infeasible", "predicted_decrease", "status", "message", "dof_note"):
        setattr(result, key, data[key])
    result.undetermined = list(data["undetermined"])
    return result


def prediction_text(prediction, last=None):
    """A plain-text table; last=N shows only the N levels nearest dissociation."""
    who = "isotopologue %s" % prediction.isotopologue if prediction.isotopologue else "reduced mass"
    head = ["Predicted levels of %r, %s (mu = %.10g u), J = %d; one-sigma uncertainties" % (
        prediction.potential, who, prediction.mu, prediction.J), prediction.summary(),
        "%5s %18s %12s %18s %12s %14s %12s" % ("v", "energy [cm-1]", "+/-", "binding [cm-1]", "+/-",
                                               "dG(v+1/2)", "+/-")]
    start = 0 if last is None else max(0, prediction.n_bound - int(last))
    for v in range(start, prediction.n_bound):
        if v < len(prediction.spacing):
            sp = "%14.6f %12.6f" % (prediction.spacing[v], prediction.spacing_uncertainty[v])
        else:
            sp = "%14s %12s" % ("-", "-")
        head.append("%5d %18.6f %12.6f %18.6f %12.6f %s" % (
            v, prediction.energy[v], prediction.energy_uncertainty[v], prediction.binding_energy[v], prediction.binding_uncertainty[v],
            sp))
    if last is not None and start > 0:
        head.insert(3, "(levels v < %d not shown)" % start)
    head.extend(prediction.notes)
    return "\n".join(head)


def prediction_html(prediction):
    rows = []
    for v in range(prediction.n_bound):
        sp = ("<td>%.6f</td><td>%.6f</td>" % (prediction.spacing[v], prediction.spacing_uncertainty[v])
              if v < len(prediction.spacing) else "<td>-</td><td>-</td>")
        rows.append("<tr><td>%d</td><td>%.6f</td><td>%.6f</td><td>%.6f</td><td>%.6f</td>%s</tr>" % (
            v, prediction.energy[v], prediction.energy_uncertainty[v], prediction.binding_energy[v], prediction.binding_uncertainty[v],
            sp))
    return ("<p>%s</p><table><tr><th>v</th><th>energy</th><th>+/-</th><th>binding</th><th>+/-</th>"
            "<th>dG(v+1/2)</th><th>+/-</th></tr>%s</table>" % (html.escape(prediction.summary()), "".join(rows)))


def _frozen(arr):
    arr = np.array(arr, copy=True)
    arr.setflags(write=False)
    return arr


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


def _atomic_write(path, text):
    """Write text to path through a temporary file in the same directory and os.replace."""
    path = os.fspath(path)
    directory = os.path.dirname(os.path.abspath(path))
    try:
        fd, tmp = tempfile.mkstemp(prefix=".%s." % os.path.basename(path), suffix=".tmp", dir=directory)
    except OSError as err:
        # name the target, not the temporary file the user never asked for
        raise OSError(err.errno, "cannot write %s: %s" % (path, err.strerror or err)) from None
    try:
        with os.fdopen(fd, "w", encoding="utf-8") as fh:
            fh.write(text)
            fh.flush()
            os.fsync(fh.fileno())
        try:
            os.replace(tmp, path)
        except OSError as err:
            raise OSError(err.errno, "cannot write %s: %s" % (path, err.strerror or err)) from None
    except BaseException:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        raise
