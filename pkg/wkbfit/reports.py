"""Renderings of results: plain-text reports and HTML for notebooks (the JSON form: result_json.py).

Result objects (fit_result.py, levels.py, ...) hold the numbers; this module turns them into text and
HTML, so that results, reports and figures (plots.py) live apart.
"""
import html
import math
import os
import tempfile

import numpy as np


#: units of the parameters of the built-in models (by parameter name)
_UNITS = {"De": "cm-1", "re": "A", "a": "1/A", "n": "", "m": "", "C6": "cm-1 A^6", "C8": "cm-1 A^8",
          "C10": "cm-1 A^10", "r_ref": "A", "p": "", "q": ""}
#: the name of sqrt(chi2/dof) in reports, HTML, help texts and the JSON key
STATISTIC_NAME = "sqrt of reduced chi-square"
STATISTIC_KEY = "sqrt_reduced_chi_square"
#: normalised residuals beyond this are flagged in the report (common practice: 3 sigma)
_LARGE_RESIDUAL = 3.0
#: method errors above this fraction of the uncertainty are listed (wkbfit.method_error.FLAG_FRACTION)
_METHOD_FLAG = 0.1



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
    quasibound = _quasibound_rows(result)
    for i in range(len(obs)):
        if not fitted[i]:
            flag = "  zero of the data (not fitted)"
        else:
            flag = "  <<" if abs(nr[i]) > _LARGE_RESIDUAL else ""
        flag += QUASIBOUND_MARK if start + i in quasibound else ""
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
    if q.get("rows") is not None:
        lines.append("  the residual tables mark the data rows that use these levels '%s'" % QUASIBOUND_MARK.strip())
    rows = q.get("rows")  # results saved before the rows were named have none
    blocks = getattr(result, "blocks", None) or []
    lines.append("  %-12s %4s %4s %16s %12s %14s %10s %14s %12s %8s%s" % (
        "isotopologue", "v", "J", "energy", "above D", "width", "width err", "semicl. width", "semicl. dE", "theta",
        "  data rows (%s)" % ("set/row" if len(blocks) > 1 else "row") if rows is not None else ""))
    for k in range(len(q["v"])):
        lines.append("  %-12s %4d %4d %16.6f %12.6f %14.6g %10.2g %14.6g %12.3g %8.3f%s" % (
            q["isotopologue"][k] or "-", q["v"][k], q["J"][k], q["energy"][k], q["above_asymptote"][k],
            q["width"][k], q["width_error"][k], q["semiclassical_width"][k],
            q["semiclassical_energy"][k] - q["energy"][k], q["theta"][k],
            "  " + ", ".join(_row_label(blocks, g) for g in rows[k]) if rows is not None else ""))
    return lines


def _row_label(blocks, g):
    """'set/row' (1-based) of the row g over all data sets; 'row' alone for one data set."""
    for k, block in enumerate(blocks):
        if block.start <= g < block.start + len(block.data):
            return "%d" % (g - block.start + 1) if len(blocks) == 1 else "%d/%d" % (k + 1, g - block.start + 1)
    return "%d" % (g + 1)


def _quasibound_rows(result):
    """The rows (over all data sets) that use a quasibound level of the fit."""
    q = getattr(result, "quasibound_levels", None) or {}
    return {int(g) for rows in q.get("rows") or () for g in rows}


#: the mark of a residual-table row that uses a quasibound level
QUASIBOUND_MARK = "  quasibound"


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
    quasibound = _quasibound_rows(result)
    for i in range(len(data)):
        up = "%s v=%d J=%d" % (data.upper_state[i] or "", data.v_upper[i], data.J_upper[i])
        lo = "%s v=%d J=%d" % (data.lower_state[i] or "", data.v_lower[i], data.J_lower[i])
        lines.append("  %-12s %-22s %-22s %16.6f %10.4g %16.6f %12.6f %9.3f%s" % (
            data.isotopologue[i] or "-", up.strip(), lo.strip(), data.wavenumber[i] / factor,
            data.uncertainty[i] / factor, result.calculated[start + i] / factor,
            result.residuals[start + i] / factor, nr[i], ("  <<" if abs(nr[i]) > _LARGE_RESIDUAL else "") +
            (QUASIBOUND_MARK if start + i in quasibound else "")))
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
    if getattr(result, "method_error_row_names", None) is not None:
        lines.append("")
        lines.extend(method_error_lines(result))
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
    names = getattr(result, "method_error_row_names", None)
    if result.method_error_flagged and names is not None:
        # several data sets or kinds: rows named by data set
        lines.append("  %-44s %12s %10s %9s" % ("data row", "method err", "sigma", "/sigma"))
        for i in result.method_error_flagged[:20]:
            lines.append("  %-44s %12.4g %10.4g %9.3f" % (names[i], err[i], result._sigma[i],
                                                         result.method_error_ratio[i]))
        if len(result.method_error_flagged) > 20:
            lines.append("  ... and %d more" % (len(result.method_error_flagged) - 20))
        lines.append("  These rows are computed less accurately than they were measured: fit with a more exact "
                     "method (method='corrected', the default, or 'exact').")
    elif result.method_error_flagged:
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
        lines.append("  every %s is computed to better than %g of its uncertainty" % (
            "data row" if names is not None else "level", _METHOD_FLAG))
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
