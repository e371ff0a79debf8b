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


def _single_levels(result):
    """True for a fit to one set of term values or binding energies (the classic report)."""
    return len(result.data) == 1 and getattr(result.data[0], "kind", None) == "levels"


def fit_report_text(result):
    """A plain-text report: parameters, free term values, correlations, statistics and the
    residual tables, one per data set, grouped by kind."""
    if not _single_levels(result):
        return _mixed_report_text(result)
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
    if result.free_parameters:
        lines.extend(_free_section(result))
        lines.append("")
    lines.extend(_levels_table(result, obs, 0, 1.0 if obs.unit == "cm-1" else obs.unit_factor))
    return "\n".join(lines)


def _levels_table(result, obs, start, factor, title=None):
    """Residual table of term values / binding energies, in the data's unit (factor cm-1 per unit)."""
    lines = []
    sl = slice(start, start + len(obs))
    nr = result.normalized_residuals[sl]
    fitted = result.fitted_rows[sl]
    n_large = int(np.count_nonzero(np.abs(nr[fitted]) > _LARGE_RESIDUAL))
    unit = obs.unit
    lines.append((title or "Residuals (observed - calculated)") +
                 "%s; '<<' marks |obs - calc|/sigma > %g (%d level%s)" % (
                     "" if unit == "cm-1" else " [%s]" % unit, _LARGE_RESIDUAL, n_large, "" if n_large == 1 else "s"))
    lines.append("  %-12s %4s %4s %16s %10s %16s %12s %9s" % (
        "isotopologue", "v", "J", "observed", "sigma", "calculated", "obs-calc", "/sigma"))
    for i in range(len(obs)):
        if not fitted[i]:
            flag = "  zero of the data (not fitted)"
        else:
            flag = "  <<" if abs(nr[i]) > _LARGE_RESIDUAL else ""
        lines.append("  %-12s %4d %4d %16.6f %10.4g %16.6f %12.6f %9.3f%s" % (
            obs.isotopologue[i] or "-", obs.v[i], obs.J[i], obs.energy[i] / factor, obs.uncertainty[i] / factor,
            result.calculated[start + i] / factor, result.residuals[start + i] / factor, nr[i], flag))
    if getattr(obs, "default_uncertainty", None) is not None:
        lines.append("  (uncertainties: the default %.4g cm-1 given to every row, not measured)" % obs.default_uncertainty)
    return lines


def _lines_table(result, data, start, title):
    lines = []
    factor = data.unit_factor
    sl = slice(start, start + len(data))
    nr = result.normalized_residuals[sl]
    n_large = int(np.count_nonzero(np.abs(nr) > _LARGE_RESIDUAL))
    lines.append("%s [%s]; '<<' marks |obs - calc|/sigma > %g (%d line%s)" % (
        title, data.unit, _LARGE_RESIDUAL, n_large, "" if n_large == 1 else "s"))
    lines.append("  %-12s %-22s %-22s %16s %10s %16s %12s %9s" % (
        "isotopologue", "upper", "lower", "observed", "sigma", "calculated", "obs-calc", "/sigma"))
    for i in range(len(data)):
        up = "%s v=%d J=%d" % (data.upper_state[i] or "", data.v_upper[i], data.J_upper[i])
        lo = "%s v=%d J=%d" % (data.lower_state[i] or "", data.v_lower[i], data.J_lower[i])
        lines.append("  %-12s %-22s %-22s %16.6f %10.4g %16.6f %12.6f %9.3f%s" % (
            data.isotopologue[i] or "-", up.strip(), lo.strip(), data.wavenumber[i] / factor,
            data.uncertainty[i] / factor, result.calculated[start + i] / factor,
            result.residuals[start + i] / factor, nr[i], "  <<" if abs(nr[i]) > _LARGE_RESIDUAL else ""))
    if getattr(data, "default_uncertainty", None) is not None:
        lines.append("  (uncertainties: the default %.4g cm-1 given to every row, not measured)" %
                     data.default_uncertainty)
    return lines


def _free_section(result):
    lines = ["Free term values (levels of states that are not modelled) and fitted asymptotes, cm-1 above the "
             "potential minimum"]
    lines.append("  %-36s %22s %16s  %s" % ("name", "value", "1-sigma", "remarks"))
    for name, p in result.free_parameters.items():
        unc = "%16.6g" % p.uncertainty if p.uncertainty is not None else "%16s" % "not determined"
        lines.append("  %-36s %22.10f %s  %s" % (name, p.value, unc, p.note))
    return lines


def _mixed_report_text(result):
    data = result.data
    kinds = [getattr(d, "data_kind", type(d).__name__) for d in data]
    labels = list(result.masses)
    lines = []
    lines.append("Fit of a %s potential to %d data rows in %d data set%s (%s) of %d isotopologue%s (%s); method %s%s"
                 % (type(result.potential).__name__, len(result.residuals), len(data), "" if len(data) == 1 else "s",
                    ", ".join(kinds), len(labels), "" if len(labels) == 1 else "s",
                    ", ".join("unnamed" if l is None else l for l in labels), result.method,
                    "; Omega = %d" % result.omega if result.omega else ""))
    lines.append("Status: %s. %s" % (result.status, result.message))
    lines.append("Reduced masses: %s" % ", ".join(
        "%s %.10g u" % ("unnamed" if k is None else k, m) for k, m in result.masses.items()))
    lines.append("")
    lines.append("Parameters")
    lines.append("  %-6s %-6s %22s %16s %22s  %s" % ("name", "unit", "value", "1-sigma", "initial", "remarks"))
    for name, p in result.params.items():
        unc = "%16.6g" % p.uncertainty if p.uncertainty is not None else "%16s" % (
            "fixed" if not p.vary else "not determined")
        lines.append("  %-6s %-6s %22.12g %s %22.12g  %s" % (name, _UNITS.get(name, ""), p.value, unc, p.initial,
                                                             p.note if p.note != "fixed" else ""))
    lines.append("  Uncertainties are one standard deviation%s." % (
        ", scaled by the dimensionless standard error %.4g" % result.standard_error
        if result.scale_uncertainties and result.dof > 0 else " from the stated measurement uncertainties"))
    lines.append("")
    if result.free_parameters:
        lines.extend(_free_section(result))
        lines.append("")
    corr = result._sorted_correlations()
    lines.append("Correlations of the varied parameters, largest first")
    for a, b, r in corr or []:
        lines.append("  %-6s %-6s %+.6f%s" % (a, b, r, "  (strong)" if abs(r) > 0.95 else ""))
    if not corr:
        lines.append("  (none: fewer than two determined varied parameters)")
    lines.append("")
    lines.append("Fit statistics")
    n_fit = int(np.count_nonzero(result.fitted_rows))
    lines.append("  fitted data rows %d, varied parameters %d (%d of the potential, %d free), degrees of freedom %d"
                 % (n_fit, len(result.var_names) + len(result.free_parameters), len(result.var_names),
                    len(result.free_parameters), result.dof))
    lines.append("  chi-square %.8g" % result.chi_square)
    lines.append("  dimensionless standard error sqrt(chi2/dof) %s" % (
        "%.6g" % result.standard_error if result.standard_error is not None else "not defined (dof = 0)"))
    if result.n_levels is not None:
        lines.append("  distinct levels computed per model evaluation %d; level calculations in all %s" % (
            result.n_levels, result.n_level_calculations))
    lines.append("  iterations %d, model evaluations %d" % (result.iterations, result.n_evaluations))
    if result.dof_note:
        lines.append("  " + result.dof_note)
    # residual tables grouped by kind: term values, binding energies, line positions
    order = ["term values", "binding energies", "line positions"]
    for kind in order:
        for k, block in enumerate(result.blocks):
            if block.kind != kind:
                continue
            lines.append("")
            title = "Residuals (observed - calculated) of data set %d: %s%s" % (
                k + 1, kind, " from %s" % block.data.source if getattr(block.data, "source", "") else "")
            if kind == "line positions":
                lines.extend(_lines_table(result, block.data, block.start, title))
            else:
                lines.extend(_levels_table(result, block.data, block.start, block.factor, title))
    return "\n".join(lines)


def fit_report_html(result):
    e = html.escape
    if not _single_levels(result):
        return "<pre>%s</pre>" % e(fit_report_text(result))
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


def _data_set_dict(result, block):
    """One data set of a fit: its kind, unit, columns and residuals in its own unit."""
    d = block.data
    f = block.factor
    sl = slice(block.start, block.start + len(d))
    if d.kind == "levels":
        columns = {"v": d.v.tolist(), "J": d.J.tolist(), "energy": (d.energy / f).tolist(),
                   "uncertainty": (d.uncertainty / f).tolist(), "isotopologue": list(d.isotopologue)}
        extra = {"energy_zero": d.energy_zero, "asymptote": d.asymptote, "fit_asymptote": d.fit_asymptote}
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
        "potential": {"class": type(result.potential).__name__, "model": result.potential.model,
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
        "chi_square": result.chi_square, "dof": result.dof, "standard_error": result.standard_error,
        "scale_uncertainties": result.scale_uncertainties, "covariance_scale": result.covariance_scale,
        "condition_number": result.condition_number, "undetermined": result.undetermined,
        "iterations": result.iterations, "n_evaluations": result.n_evaluations, "n_infeasible": result.n_infeasible,
        "predicted_decrease": result.predicted_decrease, "status": result.status, "message": result.message,
        "dof_note": result.dof_note, "method": result.method,
    })


def fit_result_from_dict(cls, data):
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
    result.masses = {k: m for k, m in data["masses"]}
    result.method = data["method"]
    result.energy_zero = o["energy_zero"] if o is not None else None
    result.scale_uncertainties = data["scale_uncertainties"]
    result.params = {}
    for p in data["parameters"]:
        result.params[p["name"]] = Parameter(p["name"], p["value"], p["uncertainty"], p["vary"],
                                           tuple(p["bounds"]), p["initial"], p["determined"], p["note"])
    result.var_names = list(data["var_names"])
    for key in ("covariance", "covariance_unscaled", "correlation"):
        setattr(result, key, _frozen(_nan_array(data[key], (len(result.var_names),) * 2)))
    for key in ("calculated", "residuals", "normalized_residuals"):
        setattr(result, key, _frozen(_nan_array(data[key])))
    result.fitted_rows = _frozen(np.array(data["fitted_rows"], dtype=bool))
    result.jacobian = _frozen(_nan_array(data["jacobian"], (len(result.residuals), len(result.params))))
    result._sigma = _frozen(np.concatenate([b.data.uncertainty for b in result.blocks])) if result.blocks else \
        _frozen(np.asarray(result.observed.uncertainty))
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
    fd, tmp = tempfile.mkstemp(prefix=".%s." % os.path.basename(path), suffix=".tmp", dir=directory)
    try:
        with os.fdopen(fd, "w", encoding="utf-8") as fh:
            fh.write(text)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, path)
    except BaseException:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        raise
