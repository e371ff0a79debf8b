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
_UNITS = {"De": "cm-1", "re": "A", "a": "1/A", "n": "", "m": "", "C6": "cm-1 A^6", "C8": "cm-1 A^8",
          "C10": "cm-1 A^10", "r_ref": "A", "p": "", "q": ""}
#: the name of sqrt(chi2/dof) in reports, HTML, help texts and the JSON key
STATISTIC_NAME = "sqrt of reduced chi-square"
STATISTIC_KEY = "sqrt_reduced_chi_square"
#: the key the same number had in files written before (read, never written)
_OLD_STATISTIC_KEY = "standard_error"
#: normalised residuals beyond this are flagged in the report (common practice: 3 sigma)
_LARGE_RESIDUAL = 3.0
#: method errors above this fraction of the uncertainty are listed (wkbfit.method_error.FLAG_FRACTION)
_METHOD_FLAG = 0.1

FORMAT = "wkbfit-fit-result"
#: 2: the statistic's key is sqrt_reduced_chi_square (1: standard_error) and potential.model names the family
FORMAT_VERSION = 2
_READABLE_VERSIONS = (1, 2)


def _single_levels(result):
    """True for a fit to one set of term values or binding energies (the classic report)."""
    return len(result.data) == 1 and getattr(result.data[0], "kind", None) == "levels"


def _parameter_lines(result):
    """The parameter section of a fit report: value, 1-sigma, start and remarks per parameter."""
    out = []
    out.append("Parameters")
    out.append("  %-6s %-6s %22s %16s %22s  %s" % ("name", "unit", "value", "1-sigma", "initial", "remarks"))
    for name, p in result.params.items():
        unit = _UNITS.get(name, "")
        unc = "%16.6g" % p.uncertainty if p.uncertainty is not None else "%16s" % (
            "fixed" if not p.vary else "not determined")
        bounds = ""
        if p.bounds != (None, None):
            bounds = "bounds [%s, %s]" % ("-inf" if p.bounds[0] is None else "%.6g" % p.bounds[0],
                                          "+inf" if p.bounds[1] is None else "%.6g" % p.bounds[1])
        remark = "; ".join(x for x in (bounds, p.note if p.note != "fixed" else "") if x)
        out.append("  %-6s %-6s %22.12g %s %22.12g  %s" % (name, unit, p.value, unc, p.initial, remark))
    if result.scale_uncertainties and result.dof > 0:
        out.append("  Uncertainties are one standard deviation, scaled by the %s "
                   "%.4g (scale_uncertainties=True)." % (STATISTIC_NAME, result.sqrt_reduced_chi_square))
    else:
        out.append("  Uncertainties are one standard deviation from the stated measurement uncertainties "
                   "(not scaled).")
    return out


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
    lines.extend(_parameter_lines(result))
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
    lines.append("  %s, sqrt(chi2/dof), %s" % (STATISTIC_NAME,
        "%.6g" % result.sqrt_reduced_chi_square if result.sqrt_reduced_chi_square is not None
        else "not defined (dof = 0)"))
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
    lines.extend(method_error_lines(result))
    lines.append("")
    if getattr(result, "quasibound_levels", None):
        lines.extend(quasibound_lines(result))
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
    lines.append("  %-12s %4s %4s %16s %10s %16s %12s %9s" % (
        "", "-", "-", "[cm-1]", "[cm-1]", "[cm-1]", "[cm-1]", "-"))
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


def _widths_table(result, data, start, factor, title):
    """Residual table of widths (FWHM) of quasibound levels, in the data's unit."""
    sl = slice(start, start + len(data))
    nr = result.normalized_residuals[sl]
    unit = "[%s]" % data.unit
    lines = [title + "; '<<' marks |obs - calc|/sigma > %g" % _LARGE_RESIDUAL]
    lines.append("  %-12s %4s %4s %16s %10s %16s %12s %9s %10s" % (
        "isotopologue", "v", "J", "width", "sigma", "calculated", "obs-calc", "/sigma", "method err"))
    lines.append("  %-12s %4s %4s %16s %10s %16s %12s %9s %10s" % ("", "-", "-", unit, unit, unit, unit, "-", unit))
    err = getattr(result, "method_error", None)
    for i in range(len(data)):
        me = err[start + i] / factor if err is not None else math.nan
        lines.append("  %-12s %4d %4d %16.8g %10.4g %16.8g %12.4g %9.3f %10.3g%s" % (
            data.isotopologue[i] or "-", data.v[i], data.J[i], data.width[i] / factor, data.uncertainty[i] / factor,
            result.calculated[start + i] / factor, result.residuals[start + i] / factor, nr[i], me,
            "  <<" if abs(nr[i]) > _LARGE_RESIDUAL else ""))
    return lines


def quasibound_lines(result):
    """The quasibound levels of a fit: positions and widths at the fitted point, their method errors, and the
    semiclassical values beside them (what the semiclassical rule would have given)."""
    q = result.quasibound_levels
    lines = ["Quasibound levels of the fitted potential (above the asymptote, behind the centrifugal barrier), cm-1"]
    if getattr(result, "quasibound_note", ""):
        lines.append("  " + result.quasibound_note)
    lines.append("  %-12s %4s %4s %16s %12s %14s %10s %14s %12s %8s" % (
        "isotopologue", "v", "J", "energy", "above D", "width", "width err", "semicl. width", "semicl. dE", "theta"))
    for k in range(len(q["v"])):
        lines.append("  %-12s %4d %4d %16.6f %12.6f %14.6g %10.2g %14.6g %12.3g %8.3f" % (
            q["isotopologue"][k] or "-", q["v"][k], q["J"][k], q["energy"][k], q["above_asymptote"][k],
            q["width"][k], q["width_error"][k], q["semiclassical_width"][k],
            q["semiclassical_energy"][k] - q["energy"][k], q["theta"][k]))
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
    lines.extend(_parameter_lines(result))
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
    lines.append("  sqrt of reduced chi-square sqrt(chi2/dof) %s" % (
        "%.6g" % result.sqrt_reduced_chi_square if result.sqrt_reduced_chi_square is not None
        else "not defined (dof = 0)"))
    if result.n_levels is not None:
        lines.append("  distinct levels computed per model evaluation %d; level calculations in all %s" % (
            result.n_levels, result.n_level_calculations))
    lines.append("  iterations %d, model evaluations %d" % (result.iterations, result.n_evaluations))
    if result.dof_note:
        lines.append("  " + result.dof_note)
    if getattr(result, "quasibound_levels", None):
        lines.append("")
        lines.extend(quasibound_lines(result))
    # residual tables grouped by kind: term values, binding energies, line positions, widths
    order = ["term values", "binding energies", "line positions", "widths"]
    for kind in order:
        for k, block in enumerate(result.blocks):
            if block.kind != kind:
                continue
            lines.append("")
            title = "Residuals (observed - calculated) of data set %d: %s%s" % (
                k + 1, kind, " from %s" % block.data.source if getattr(block.data, "source", "") else "")
            if kind == "line positions":
                lines.extend(_lines_table(result, block.data, block.start, title))
            elif kind == "widths":
                lines.extend(_widths_table(result, block.data, block.start, block.factor, title))
            else:
                lines.extend(_levels_table(result, block.data, block.start, block.factor, title))
    return "\n".join(lines)


def method_error_lines(result):
    """The report section on the method's error against the data (and how the fit was run)."""
    lines = ["Method error against the data (method %s)" % result.method]
    refreshes = getattr(result, "refreshes", 0)
    if result.method == "corrected":
        hist = getattr(result, "refresh_history", [])
        lines.append("  first-order WKB iterations with per-level exact corrections: %d exact evaluation%s, %d "
                     "Levenberg-Marquardt iterations; exact Gauss-Newton step at each (standard deviations): %s" % (
                         refreshes, "" if refreshes == 1 else "s", result.iterations,
                         ", ".join("%s (%s)" % ("-" if h.get("step_sd") is None else "%.2g" % h["step_sd"], h.get("kind", ""))
                                   for h in hist)))
    for note in getattr(result, "start_notes", ()):
        lines.append("  start: " + note)
    err = getattr(result, "method_error", None)
    if err is None:
        lines.append("  (not computed)")
        return lines
    lines.append("  " + result.method_error_note)
    ratio = result.method_error_ratio[result.fitted_rows]
    if np.all(np.isnan(ratio)):
        return lines
    lines.append("  largest method error %.3g cm-1, %.3g of its level's uncertainty; levels above %g sigma: %d" % (
        float(np.nanmax(err)), float(np.nanmax(ratio)), _METHOD_FLAG, len(result.method_error_flagged)))
    if result.method_error_flagged:
        obs = result.observed
        lines.append("  %-12s %4s %4s %12s %10s %9s" % ("isotopologue", "v", "J", "method err", "sigma", "/sigma"))
        for i in result.method_error_flagged[:20]:
            lines.append("  %-12s %4d %4d %12.4g %10.4g %9.3f" % (obs.isotopologue[i] or "-", obs.v[i], obs.J[i],
                                                                 err[i], obs.uncertainty[i],
                                                                 result.method_error_ratio[i]))
        if len(result.method_error_flagged) > 20:
            lines.append("  ... and %d more" % (len(result.method_error_flagged) - 20))
        lines.append("  These levels are computed less accurately than they were measured: fit with a more exact "
                     "method (method='corrected', the default, or 'exact').")
    else:
        lines.append("  every level is computed to better than %g of its uncertainty" % _METHOD_FLAG)
    return lines


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
                  ", scaled by the " + STATISTIC_NAME if result.scale_uncertainties and result.dof > 0 else "",
                  "".join(rows)))
    corr = "".join("<tr><td>%s</td><td>%s</td><td>%+.4f</td></tr>" % (e(a), e(b), r)
                   for a, b, r in result._sorted_correlations())
    corr = "<table><caption>Correlations</caption><tr><th>p1</th><th>p2</th><th>r</th></tr>%s</table>" % corr
    stats = ("<p>Status: <b>%s</b> &mdash; %s<br>chi-square %.6g, dof %d, %s %s, "
             "iterations %d</p>" % (e(result.status), e(result.message), result.chi_square, result.dof,
                                    STATISTIC_NAME, "%.5g" % result.sqrt_reduced_chi_square
                                    if result.sqrt_reduced_chi_square is not None else "n/a",
                                    result.iterations))
    obs = result.observed
    cols = residual_columns(result)
    flags = np.array(["<<" if f and abs(x) > _LARGE_RESIDUAL else "" for f, x in
                      zip(result.fitted_rows, result.normalized_residuals)], dtype=object)
    resid = html_table(cols + [("flag", "", flags, "%s")],
                       "Residuals (observed - calculated) of %d levels; '<<' marks |obs-calc|/sigma > %g"
                       % (len(obs), _LARGE_RESIDUAL))
    title = "<h4>Fit of %s to %d levels (%s, energy zero %s)</h4>" % (
        e(type(result.potential).__name__), len(obs), e(result.method), e(result.energy_zero))
    method = "<pre>%s</pre>" % e("\n".join(method_error_lines(result)))
    return title + stats + params + corr + method + resid


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
    return result


def _is_refresh_entry(h):
    """One entry of the default fit's refresh history as the JSON form writes it."""
    def number(x):
        return x is None or (isinstance(x, (int, float)) and not isinstance(x, bool))
    return isinstance(h, dict) and isinstance(h.get("kind", ""), str) and number(h.get("step_sd")) and \
        number(h.get("chi_square"))


def prediction_text(prediction, last=None):
    """A plain-text table; last=N shows only the N levels nearest dissociation."""
    who = "isotopologue %s" % prediction.isotopologue if prediction.isotopologue else "reduced mass"
    title = "Predicted levels of %r, %s (mu = %.10g u), J = %d; one-sigma uncertainties\n%s" % (
        prediction.potential, who, prediction.mu, prediction.J, prediction.summary())
    start = 0 if last is None else max(0, prediction.n_bound - int(last))
    cols = [(name, unit, values[start:], fmt) for name, unit, values, fmt in prediction_columns(prediction)]
    if last is not None and start > 0:
        title += "\n(levels v < %d not shown)" % start
    return text_table(cols, title, prediction.notes)


def prediction_html(prediction):
    return "<p>%s</p>%s" % (html.escape(prediction.summary()),
                            html_table(prediction_columns(prediction), "predicted levels", prediction.notes))


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


# ------------------------------------------------------------------------------ generic tables
#: tables longer than this are folded in HTML: the first and last rows shown, the rest collapsed
FOLD_HEAD, FOLD_TAIL = 8, 4


def _cell(x, fmt):
    if x is None:
        return "-"
    if isinstance(x, (str, np.str_)):
        return str(x)
    if isinstance(x, (bool, np.bool_)):
        return "yes" if x else "no"
    if isinstance(x, (int, np.integer)):
        return "%d" % x
    f = float(x)
    if not math.isfinite(f):
        return "-" if math.isnan(f) else ("inf" if f > 0 else "-inf")
    return fmt % f


def text_table(columns, title=None, notes=()):
    """Aligned plain-text table: columns is a list of (name, unit, values, format).

    A line of units follows the line of names ('-' for dimensionless columns); numbers are
    right-aligned, every column as wide as its widest cell.
    """
    names = [c[0] for c in columns]
    units = ["[%s]" % c[1] if c[1] else "-" for c in columns]
    n = len(columns[0][2]) if columns else 0
    cells = [[_cell(c[2][i], c[3]) for c in columns] for i in range(n)]
    widths = [max([len(names[k]), len(units[k])] + [len(row[k]) for row in cells]) for k in range(len(columns))]
    lines = [] if title is None else [title]
    lines.append("  ".join(s.rjust(w) for s, w in zip(names, widths)))
    lines.append("  ".join(s.rjust(w) for s, w in zip(units, widths)))
    lines.extend("  ".join(s.rjust(w) for s, w in zip(row, widths)) for row in cells)
    lines.extend(notes)
    return "\n".join(lines)


def html_table(columns, caption="", notes=(), head=FOLD_HEAD, tail=FOLD_TAIL):
    """An HTML table with units in the headers; long tables show the first `head` and last `tail`
    rows, and the whole table sits in a collapsed <details> block below."""
    e = html.escape
    n = len(columns[0][2]) if columns else 0
    header = "<tr>%s</tr>" % "".join("<th>%s%s</th>" % (e(c[0]), " [%s]" % e(c[1]) if c[1] else "")
                                      for c in columns)

    def row(i):
        return "<tr>%s</tr>" % "".join('<td style="text-align:right">%s</td>' % e(_cell(c[2][i], c[3]))
                                       for c in columns)

    cap = "<caption>%s</caption>" % e(caption) if caption else ""
    foot = "".join("<p><small>%s</small></p>" % e(x) for x in notes)
    if n <= head + tail + 2:
        return "<table>%s%s%s</table>%s" % (cap, header, "".join(row(i) for i in range(n)), foot)
    folded = '<tr><td colspan="%d" style="text-align:center"><i>... %d rows folded ...</i></td></tr>' % (
        len(columns), n - head - tail)
    short = "<table>%s%s%s%s%s</table>" % (cap, header, "".join(row(i) for i in range(head)), folded,
                                          "".join(row(i) for i in range(n - tail, n)))
    full = "<details><summary>all %d rows</summary><table>%s%s</table></details>" % (
        n, header, "".join(row(i) for i in range(n)))
    return short + full + foot


# ------------------------------------------------------------------------------ level tables, comparisons, RKR
def level_table_columns(table, names=None):
    units = {c: u for c, (u, _) in table.describe().items()}
    names = names or [c for c in ("v", "J", "energy", "binding_energy", "dEdv", "Bv", "inner_turning_point",
                                  "outer_turning_point", "error") if c in table.columns]
    fmt = {"inner_turning_point": "%.8f", "outer_turning_point": "%.8f", "error": "%.2g", "Bv": "%.8g",
           "width": "%.4g", "theta": "%.4g", "lifetime": "%.4g", "width_error": "%.2g", "quasibound": "%s",
           "above_barrier": "%s"}
    cols = [(c, units.get(c, ""), getattr(table, c), fmt.get(c, "%.6f")) for c in names]
    if np.any(getattr(table, "quasibound", False)) and "quasibound" not in names:
        cols.append(("quasibound", "", np.asarray(table.quasibound, dtype=bool), "%s"))
    return cols


def level_table_title(table):
    return "%s levels of %r, mu = %.10g u" % (table.method.upper(), table.potential, table.mu)


def level_table_notes(table):
    notes = ["J=%d: quantum number at dissociation vD = %s" % (
        J, "%.6f" % vD if vD is not None else "not defined (no bound levels)")
        for J, vD in sorted(table.vD_by_J.items())]
    notes += ["J=%d: quantum threshold number (matched rule at the asymptote) v_th = %.6f" % (J, x)
              for J, x in sorted(table.v_th_by_J.items()) if x is not None]
    return notes + list(table.notes)


def level_table_text(table, names=None):
    return text_table(level_table_columns(table, names), level_table_title(table), level_table_notes(table))


def level_table_html(table):
    return html_table(level_table_columns(table), level_table_title(table), level_table_notes(table))


def comparison_columns(comp, uncertainty=None):
    cols = [("v", "", comp.v, "%d"), ("J", "", comp.J, "%d"), ("WKB", "cm-1", comp.wkb_energy, "%.8f"),
            ("exact", "cm-1", comp.exact_energy, "%.8f"), ("WKB-exact", "cm-1", comp.difference, "%.3e"),
            ("exact error", "cm-1", comp.exact_error, "%.1e"), ("binding", "cm-1", comp.binding_energy, "%.8g")]
    if uncertainty is not None:
        within = comp.good_enough(uncertainty)  # checks the uncertainty before it is printed
        u = np.asarray(uncertainty, dtype=float)
        cols.append(("within %.3g" % float(np.max(u)) if u.size else "within", "", within, "%s"))
    return cols


def comparison_title(comp):
    rule = {"wkb": "order 1", "wkb2": "order 2, fixed end phases", "wkb-matched": "order 2, matched end phases"}
    name = rule.get(getattr(comp, "ends", None), "order %s" % getattr(comp, "order", 1))
    return "WKB (%s) versus exact levels of %r, mu = %.10g u" % (name, comp.potential, comp.mu)


def comparison_notes(comp):
    lines = []
    if len(comp):
        v, J, d = comp.largest_difference()
        lines.append("largest |WKB - exact| = %.3e cm-1 at v=%d, J=%d" % (abs(d), v, J))
    if comp.only_exact:
        lines.append("bound only in the exact calculation: " + ", ".join("v=%d J=%d" % k for k in comp.only_exact))
    if comp.only_wkb:
        lines.append("bound only in WKB: " + ", ".join("v=%d J=%d" % k for k in comp.only_wkb))
    return lines


def comparison_text(comp, uncertainty=None):
    return text_table(comparison_columns(comp, uncertainty), comparison_title(comp), comparison_notes(comp))


def comparison_html(comp):
    return html_table(comparison_columns(comp), comparison_title(comp), comparison_notes(comp))


def rkr_columns(tp):
    return [("v", "", tp.v, "%.4f"), ("G(v)", "cm-1", tp.energy, "%.6f"),
            ("r_inner", "A", tp.inner_turning_point, "%.10f"), ("r_outer", "A", tp.outer_turning_point, "%.10f"),
            ("f", "A", tp.f, "%.10f"), ("g", "1/A", tp.g, "%.10f"), ("error", "A", tp.error, "%.1e")]


def rkr_title(tp):
    return "RKR turning points, mu = %.10g u, re = %.10f A" % (tp.mu, tp.re)


def rkr_text(tp):
    return text_table(rkr_columns(tp), rkr_title(tp))


def rkr_html(tp):
    return html_table(rkr_columns(tp), rkr_title(tp))


def observed_columns(obs):
    labels = np.array([x if x is not None else "-" for x in obs.isotopologue], dtype=object)
    cols = [("isotopologue", "", labels, "%s"), ("v", "", obs.v, "%d"), ("J", "", obs.J, "%d"),
            ("energy", "cm-1", obs.energy, "%.6f"), ("uncertainty", "cm-1", obs.uncertainty, "%.6g")]
    kinds = row_kinds(obs)
    if kinds is not None:
        cols.insert(1, ("kind", "", np.asarray(kinds, dtype=object), "%s"))
    return cols


def observed_html(obs):
    return html_table(observed_columns(obs), "%d measured levels, energy zero %r%s" % (
        len(obs), obs.energy_zero, ", from %s" % obs.source if obs.source else ""))


def prediction_columns(pred):
    sp = np.append(pred.spacing, np.nan)
    spu = np.append(pred.spacing_uncertainty, np.nan)
    return [("v", "", pred.v, "%d"), ("energy", "cm-1", pred.energy, "%.6f"),
            ("+/-", "cm-1", pred.energy_uncertainty, "%.6f"), ("binding", "cm-1", pred.binding_energy, "%.6f"),
            ("+/-", "cm-1", pred.binding_uncertainty, "%.6f"), ("dG(v+1/2)", "cm-1", sp, "%.6f"),
            ("+/-", "cm-1", spu, "%.6f")]


def residual_columns(result):
    obs = result.observed
    labels = np.array([x if x is not None else "-" for x in obs.isotopologue], dtype=object)
    return [("isotopologue", "", labels, "%s"), ("v", "", obs.v, "%d"), ("J", "", obs.J, "%d"),
            ("observed", "cm-1", obs.energy, "%.6f"), ("sigma", "cm-1", obs.uncertainty, "%.4g"),
            ("calculated", "cm-1", result.calculated, "%.6f"), ("obs-calc", "cm-1", result.residuals, "%.6f"),
            ("(obs-calc)/sigma", "", result.normalized_residuals, "%.3f"),
            ("fitted", "", np.asarray(result.fitted_rows, dtype=bool), "%s")]


def row_kinds(obs):
    """Per-row data kinds, or None: a data set's own `kind` is one string for all its rows."""
    kinds = getattr(obs, "kind", None)
    return None if kinds is None or isinstance(kinds, str) else kinds


def result_rows(result):
    """Per data row of a fit, over all its data sets: isotopologue, v, J (the lower level of a
    line), observed value and uncertainty (cm-1), and the kind of each row."""
    blocks = getattr(result, "blocks", None) or []
    if not blocks:
        obs = result.observed
        n = len(obs)
        return {"isotopologue": list(obs.isotopologue), "v": np.asarray(obs.v), "J": np.asarray(obs.J),
                "observed": np.asarray(obs.energy), "uncertainty": np.asarray(obs.uncertainty),
                "kind": [getattr(obs, "kind", "term values")] * n}
    out = {k: [] for k in ("isotopologue", "v", "J", "observed", "uncertainty", "kind")}
    for b in blocks:
        d = b.data
        lines = hasattr(d, "wavenumber")
        out["isotopologue"] += list(d.isotopologue)
        out["v"] += list(d.v_lower if lines else d.v)
        out["J"] += list(d.J_lower if lines else d.J)
        out["observed"] += list(d.wavenumber if lines else (d.width if d.kind == "widths" else d.energy))
        out["uncertainty"] += list(d.uncertainty)
        out["kind"] += [b.kind] * len(d)
    for k in ("v", "J"):
        out[k] = np.asarray(out[k], dtype=int)
    for k in ("observed", "uncertainty"):
        out[k] = np.asarray(out[k], dtype=float)
    return out


def residual_dataframe(result):
    from ._optional import pandas
    pd = pandas()
    rows = result_rows(result)
    data = dict(rows, calculated=result.calculated, residual=result.residuals,
                normalized_residual=result.normalized_residuals, fitted=np.asarray(result.fitted_rows, bool))
    return pd.DataFrame(data)


def parameter_dataframe(result):
    from ._optional import pandas
    pd = pandas()
    rows = [dict(p.to_dict(), unit=_UNITS.get(p.name, "")) for p in result.params.values()]
    for r in rows:
        r["lower_bound"], r["upper_bound"] = r.pop("bounds")
    return pd.DataFrame(rows).set_index("name")
