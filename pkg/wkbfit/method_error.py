"""The method's error against the data: each level's method error compared with its uncertainty.

After every fit, each fitted level gets a method error (cm-1), the error of the level
calculation the fit used, in the data's energy zero:
  "corrected"  the final levels are exact levels continued by the last (small) exact
               Gauss-Newton step: its second-order remainder, with the exact solver's accuracy;
  "wkb"        |E_wkb - E_exact|: the bias of first-order WKB, which the fit cannot see. Screened
               first by `semiclassical_estimate` (the distance to the matched-rule level, the more
               exact method): a row whose estimate is SCREEN_FACTOR or more above or below
               FLAG_FRACTION of its uncertainty keeps it; only the other rows get exact levels
               (one exact evaluation of those rows);
  "exact"      the exact solver's own error estimate (one extra pass of exact levels without
               derivatives, about 1/4 of one exact iteration).
A level whose method error exceeds FLAG_FRACTION of its uncertainty is flagged: the report
lists it and a FitWarning names it, with the advice to use a more exact method.

`row_method_errors` is the one place the per-level method error comes from; when the level
tables carry their own `method_error` (matched end phases), it is wired in there.
"""
import math

import numpy as np

from . import _core
from .rotational_corrections import _distinct

__all__ = ["FLAG_FRACTION", "row_method_errors", "attach"]

#: a level's method error above this fraction of its uncertainty is flagged
#: (the issue's threshold: 0.1 sigma shifts a fitted level by a tenth of its error bar)
FLAG_FRACTION = 0.1


#: the screen decides a row's verdict only when its estimate is at least this factor away from the
#: threshold; rows closer get exact levels (the estimate need only be right within a factor 2 there)
SCREEN_FACTOR = 2.0


def semiclassical_estimate(args, calc):
    """Per row, cm-1: |matched-rule level - calc|, the estimated error of the first-order levels `calc`
    (in the data's energy zero) of the rows in `args` (model, params, curve, v, rot, mu, energy_zero).
    The matched rule (second-order WKB, joined near the outer turning point to an exact solution; the
    exact phase for wells too quantal for second order) is the more exact method, so the distance of
    the first-order level from it estimates the first-order error (tests/test_method_error_screen.py:
    within a factor 2 of the exact solver's on every model). NaN where it gives no level (above its
    threshold count, or a failed level search). One core call per reduced mass when its J values share
    their v values (else, or when that call fails, one per (reduced mass, J))."""
    model, params, curve = args["model"], args["params"], args["curve"]
    v, rot, mu, zero = np.asarray(args["v"]).astype(np.int64), np.asarray(args["rot"], dtype=float), \
        np.asarray(args["mu"], dtype=float), args["energy_zero"]
    ref = np.full(len(v), math.nan)
    n_v = int(v.max()) + 1 if len(v) else 1
    # (one reduced mass, the usual case, without np.unique and the row selection)
    single = bool(len(mu)) and bool((mu == mu[0]).all())
    for m in ([mu[0]] if single else np.unique(mu)):
        rows = slice(None) if single else np.nonzero(mu == m)[0]
        # "lowest" data are measured from v=0, J=0: that level joins the request
        rots = _distinct(np.concatenate([rot[rows], [0.0]]) if zero == 2 else rot[rows])
        row_keys = np.searchsorted(rots, rot[rows]) * n_v + v[rows]
        table, zero_level = _matched_levels(model, params, curve, float(m), rots, v[rows], row_keys, n_v,
                                            zero, zero == 2)
        ref[rows] = table[row_keys]
        if zero == 2:
            ref[rows] -= zero_level
    return np.abs(ref - np.asarray(calc, dtype=float))


def _matched_levels(model, params, curve, mu, rots, v, row_keys, n_v, zero, want_lowest):
    """Matched-rule levels of one reduced mass: (their levels in the data's energy zero before any "lowest"
    shift by key rot_index * n_v + v, NaN where there is none; the level v=0 at rot 0 or NaN). One call for all rots when the
    rows' v values, asked at every rot, cost at most about twice the rows; else, or when it fails (a level
    unbound at some J), one call per rot with that rot's own v values, and where that fails too (a row's
    level above the matched rule's last one) all bound levels of that rot."""
    table, zero_level = np.full(len(rots) * n_v, math.nan), math.nan

    def own(g):  # the v values of rot g's rows (and v=0 at rot 0 for "lowest" data)
        mine = v[row_keys // n_v == g]
        return np.unique(np.concatenate([mine, [0]]) if want_lowest and rots[g] == 0 else mine)
    union = _distinct(np.concatenate([v, [0]]) if want_lowest else v)
    if len(union) * len(rots) <= 2 * len(v) + 4 * len(rots):
        calls = [(np.arange(len(rots)), union)]
    else:
        calls = [(np.array([g]), own(g)) for g in range(len(rots))]
    k = 0
    while k < len(calls):
        g, want = calls[k]
        k += 1
        try:
            t = _core.wkb_levels(model, params, curve, mu, rots[g].tolist(),
                                 None if want is None else want.astype(np.intc), order=2, ends=1)
        except (ValueError, RuntimeError):
            if len(g) > 1:  # the shared call failed: one call per rot
                calls += [(np.array([i]), own(i)) for i in g]
            elif want is not None:  # a row's level is not bound by the matched rule: all its bound levels
                calls.append((g, None))
            continue  # no matched levels here: these rows go to the exact solver
        tv = np.asarray(t["v"], dtype=np.int64)
        ti = g[np.asarray(t["rot_index"], dtype=np.intp)] if len(g) > 1 else np.full(len(tv), g[0])
        inside = tv < n_v  # (all bound levels of a rot may reach above the rows' largest v)
        table[(ti * n_v + tv)[inside]] = np.asarray(t["binding_energy"] if zero == 1 else t["energy"],
                                                    dtype=float)[inside]
        if want_lowest:
            hit = np.nonzero((rots[ti] == 0) & (tv == 0))[0]
            if len(hit):
                zero_level = float(np.asarray(t["energy"])[hit[0]])
    return table, zero_level


def row_method_errors(method, args, out, screen=False):
    """Per fitted row: (method error in cm-1, note). args: the keywords of the fit's core run,
    with the final parameters in args["params"]. The one source of per-level method errors:
    level tables that carry their own method_error (matched end phases) plug in here.
    screen: for "wkb", screen the rows by `semiclassical_estimate` first (what fits do); False computes
    exact levels for every row."""
    from .corrected import exact_calc, exact_tolerance
    if method == "wkb" and screen:
        return _screened_wkb_errors(args, out)
    if method == "corrected":
        err = np.hypot(np.abs(np.asarray(out["remainder"], dtype=float)), out["level_tolerance"])
        note = ("method error = the second-order remainder of the final exact Gauss-Newton step (after %d "
                "exact evaluations), with the exact levels' target accuracy %.1e cm-1 (1e-3 of the smallest "
                "uncertainty) in quadrature" % (out["refreshes"], out["level_tolerance"]))
        return _verify_remainder(err, note, out["calc"], args["sigma"], out["level_tolerance"], lambda: exact_calc(
            args["model"], args["params"], args["curve"], args["v"], args["rot"], args["mu"], args["energy_zero"],
            out["level_tolerance"])[0])
    try:
        calc_ex, exact_err = exact_calc(args["model"], args["params"], args["curve"], args["v"], args["rot"],
                                        args["mu"], args["energy_zero"], exact_tolerance(args["sigma"]))
    except ValueError as err:
        return (np.full(len(args["v"]), math.nan),
                "method error not available: the exact levels of the fitted potential could not be computed (%s)"
                % err)
    if method == "wkb":
        return (np.hypot(np.asarray(out["calc"]) - calc_ex, exact_err),
                "method error = |first-order WKB - exact level| at the fitted parameters (one exact evaluation)")
    return exact_err, "method error = the exact solver's error estimate of each level"


def _verify_remainder(err, note, calc, sigma, tol, exact_rows):
    """The corrected fit's method errors: the remainder of its last linear step (`err`, the size of a
    correction already applied, so an upper estimate of what is left) where it is below FLAG_FRACTION /
    SCREEN_FACTOR of every row's uncertainty; otherwise measured: |calc - exact rows at the final
    parameters| with the exact levels' accuracy `tol` in quadrature (one exact evaluation, no derivatives),
    so that a large but corrected remainder does not flag rows whose levels are right."""
    sigma = np.asarray(sigma, dtype=float)
    if not np.any(err > FLAG_FRACTION * sigma / SCREEN_FACTOR):
        return err, note
    try:
        calc_ex = np.asarray(exact_rows(), dtype=float)
    except ValueError:
        return err, note + " (exact levels at the final parameters not available to measure it)"
    return (np.hypot(np.asarray(calc, dtype=float) - calc_ex, tol),
            "method error = |corrected - exact level| at the fitted parameters (one exact evaluation: the remainder "
            "of the final linear step, up to %.2g sigma, was too large to vouch for the levels), with the exact "
            "levels' target accuracy in quadrature" % float(np.max(err / sigma)))


def _screened_wkb_errors(args, out):
    """The "wkb" method errors: the semiclassical estimate where it is at least SCREEN_FACTOR away from
    the verdict's threshold, exact levels of the other rows."""
    from .corrected import exact_calc, exact_tolerance
    calc = np.asarray(out["calc"], dtype=float)
    sigma = np.asarray(args["sigma"], dtype=float)
    est = semiclassical_estimate(args, calc)
    threshold = FLAG_FRACTION * sigma
    with np.errstate(invalid="ignore"):
        decided = (est >= SCREEN_FACTOR * threshold) | (est <= threshold / SCREEN_FACTOR)
    err = np.where(decided, est, math.nan)
    rest = np.nonzero(~decided)[0]
    note = ("method error = |first-order WKB - exact level| at the fitted parameters, estimated by the distance to "
            "the matched-rule level (the more exact method) where that is at least %g times above or below %g "
            "sigma" % (SCREEN_FACTOR, FLAG_FRACTION))
    if not len(rest):
        return err, note + " (every row)"
    sub_v, sub_rot, sub_mu = (np.asarray(args[k])[rest] for k in ("v", "rot", "mu"))
    try:
        ex, ex_err = exact_calc(args["model"], args["params"], args["curve"], sub_v, sub_rot, sub_mu,
                                args["energy_zero"], exact_tolerance(sigma))
    except ValueError as exc:
        return err, note + "; for %d rows not available: the exact levels of the fitted potential could not be " \
                           "computed (%s)" % (len(rest), exc)
    err[rest] = np.hypot(calc[rest] - ex, ex_err)
    return err, note + " (%d of %d rows; the other %d by one exact evaluation)" % (
        len(err) - len(rest), len(err), len(rest))


def attach(result, rows, out, args=None):
    """Sets result.method_error (all rows, NaN for rows not fitted), method_error_ratio
    (method error / uncertainty), method_error_flagged (row indices above FLAG_FRACTION),
    method_error_note and method_error_warning (empty when nothing is flagged)."""
    obs = result.observed
    if args is None:
        args = out["_args"]
    err_rows, note = row_method_errors(result.method, args, out, screen=True)
    if len(rows) == len(obs):  # every row fitted
        err = np.asarray(err_rows, dtype=float)
    else:
        err = np.full(len(obs), math.nan)
        err[rows] = err_rows
    # (names only of the rows the warning lists: 20 000 strings cost ~10 ms a fit)
    _set_check(result, err, obs.uncertainty, note, lambda i: level_name(obs, i))


def _set_check(result, err, sigma, note, names):
    """The check's attributes on result: method_error, method_error_ratio, method_error_flagged, its
    note, and method_error_warning naming the flagged rows by `names` (a list, or a function of the row
    index; empty when nothing is flagged)."""
    name = names if callable(names) else names.__getitem__
    with np.errstate(invalid="ignore", divide="ignore"):
        ratio = err / sigma
    flagged = np.flatnonzero(ratio > FLAG_FRACTION).tolist()
    result.method_error = _frozen(err)
    result.method_error_ratio = _frozen(ratio)
    result.method_error_flagged = flagged
    result.method_error_note = note
    result.method_error_warning = ""
    if not flagged:
        return
    worst = int(np.nanargmax(ratio))
    listed = ", ".join(name(i) for i in flagged[:12]) + (
        " and %d more" % (len(flagged) - 12) if len(flagged) > 12 else "")
    many = "" if len(flagged) == 1 else "s"
    if result.method == "wkb":
        result.method_error_warning = (
            "the %s levels of %d data row%s are off by more than %g of their uncertainty (largest %.3g sigma, "
            "%.3g cm-1 at %s): %s. Use a more exact method (method='corrected', the default, or 'exact')"
            % (result.method, len(flagged), many, FLAG_FRACTION, ratio[worst], err[worst], name(worst), listed))
    else:
        result.method_error_warning = (
            "the %s levels of %d data row%s carry a method error above %g of their uncertainty (largest %.3g sigma "
            "at %s): %s. Use method='exact' for these data" % (
                result.method, len(flagged), many, FLAG_FRACTION, ratio[worst], name(worst), listed))


def prediction_method_errors(method, potential, mu, J, energy, E00):
    """Method errors of predicted levels v = 0..len(energy)-1 at J and of the level v=0, J=0:
    (array, scalar, note). One exact pass (levels without derivatives)."""
    model, params, curve = potential._core_args()
    n = len(energy)
    try:
        res = _core.exact_levels(model, params, curve, float(mu), np.array([J], dtype=np.intc), None)
        res0 = res if J == 0 else _core.exact_levels(model, params, curve, float(mu), np.array([0], dtype=np.intc),
                                                     np.array([0], dtype=np.intc))
    except ValueError as err:
        return np.zeros(n), 0.0, "method errors of the predictions not available (%s)" % err
    ex, ex_err = res["energy"], res["error"]
    merr = np.full(n, math.nan)
    m = min(n, len(ex))
    if method == "wkb":
        merr[:m] = np.hypot(np.asarray(energy[:m]) - ex[:m], ex_err[:m])
        merr00 = float(math.hypot(E00 - res0["energy"][0], res0["error"][0]))
        note = "uncertainties include each level's method error |WKB - exact| in quadrature"
    else:
        merr[:m] = ex_err[:m]
        merr00 = float(res0["error"][0])
        note = "uncertainties include the exact solver's error estimate of each level in quadrature"
    if m < n:
        # a WKB level above the last exact one: its whole binding energy is the error
        merr[m:] = np.abs(potential.asymptote - np.asarray(energy[m:]))
        note += "; WKB levels v >= %d have no exact counterpart (their binding energy counts as the error)" % m
    return merr, merr00, note


def level_name(obs, i):
    label = obs.isotopologue[i]
    return "%sv=%d J=%d" % ("%s " % label if label is not None else "", obs.v[i], obs.J[i])


def _frozen(arr):
    arr = np.array(arr, copy=True)
    arr.setflags(write=False)
    return arr


# ---- fits on the row engine (lines, several data sets, free term values, fitted asymptotes, ...) ----------

def _row_name(data, i):
    if not hasattr(data, "v_upper"):
        return level_name(data, i)
    label = data.isotopologue[i]
    return "%sline v=%d J=%d - v=%d J=%d" % ("%s " % label if label is not None else "", data.v_upper[i],
                                             data.J_upper[i], data.v_lower[i], data.J_lower[i])


def design_row_errors(method, ev, out):
    """Per design row of a row-engine fit: (method error in cm-1, note). ev: the fit's
    corrected.RowEvaluator; out: the fit's final dict (params, extra, calc; for "corrected" also
    remainder and level_tolerance)."""
    rows = ev.rows
    # the exact levels' target accuracy carried into each row (|coef| of its one or two levels)
    tol = ev.tol * np.hypot(np.where(rows["level_a"] >= 0, rows["coef_a"], 0.0),
                            np.where(rows["level_b"] >= 0, rows["coef_b"], 0.0))
    p, e = np.asarray(out["params"], dtype=float), np.asarray(out["extra"], dtype=float)
    if method == "corrected":
        return _verify_remainder(
            np.hypot(np.abs(np.asarray(out["remainder"], dtype=float)), tol),
            "method error = the second-order remainder of the final exact Gauss-Newton step (after %d exact "
            "evaluations), with the exact levels' target accuracy %.1e cm-1 in quadrature" % (out["refreshes"], ev.tol),
            out["calc"], rows["sigma"], tol, lambda: ev.levels(p, e)[0] if ev.plain else ev.exact(p, e)[0])
    try:
        if method == "wkb":
            exact_rows = ev.levels(p, e)[0] if ev.plain else ev.exact(p, e)[0]
            return (np.hypot(np.asarray(out["calc"]) - exact_rows, tol),
                    "method error = |first-order WKB - exact| of each data row at the fitted parameters")
        if ev.plain and not ev.omega:
            from .corrected import exact_calc
            _, level_err = exact_calc(ev.model, p, ev.curve, ev.lv, ev.lrot, ev.lmu, 0, ev.tol)
            return (np.abs(ev._combine(level_err)),
                    "method error = the exact solver's error estimate, combined over each row's levels")
    except ValueError as err:
        return (np.full(len(rows["observed"]), math.nan),
                "method error not available: the exact levels of the fitted potential could not be computed (%s)"
                % err)
    return (np.full(len(rows["observed"]), math.nan),
            "method error not estimated per row for exact fits with Omega or Born-Oppenheimer terms (the exact "
            "levels are converged to the solver's default accuracy)")


def attach_rows(result, design, ev, out):
    """The method-error check of a row-engine fit: sets the same attributes as `attach`, with one
    entry per data row of all data sets (NaN for rows not fitted), and names flagged rows by data set."""
    err_rows, note = design_row_errors(result.method, ev, out)
    n_all = sum(len(b.rows) for b in design.blocks)
    err = np.full(n_all, math.nan)
    names = [""] * n_all
    for k, block in enumerate(design.blocks):
        sel = np.nonzero(block.rows >= 0)[0]
        err[block.start + sel] = err_rows[block.rows[sel]]
        for i in range(len(block.rows)):
            names[block.start + i] = "data set %d: %s" % (k + 1, _row_name(block.data, i))
    _set_check(result, err, np.asarray(result._sigma, dtype=float), note, names)
    result.method_error_row_names = names
