"""The default fit: semiclassical iterations with per-level exact corrections.

Levenberg-Marquardt runs on first-order WKB levels plus a fixed per-level correction
delta_i = E_exact,i - E_wkb,i evaluated at the current parameters (an additive offset inside
the C fit, csrc/fit.c). After each run one exact evaluation at the new point gives the exact
levels, the exact Jacobian <v|dV/dp|v> and new corrections ("a refresh"). The loop stops when
the Gauss-Newton step of the EXACT problem at that point, (J^T W J)^-1 J^T W r with the exact
J and r, is below `tolerance` standard deviations for every varied parameter: the point is
then the minimum of the exact-levels fit to that accuracy, and its covariance comes from the
exact Jacobian, so parameters and uncertainties are those of `method="exact"`. The WKB
Jacobian ignores d(delta)/dp, which only changes the path to the minimum, not the minimum
(the stopping test uses the exact Jacobian).

A few exact evaluations (typically 2-3) replace the 5-15 of an exact fit, and each WKB
iteration costs ~1/30 of an exact one.

Also here: unbound rows at the start (`run_with_unbound_rows`): rows the starting potential
does not bind are left out and brought in as soon as the fitted potential binds them.

Units: cm-1.
"""
import math

import numpy as np

from . import _core, _tall
from .rotational_corrections import DEGREES, FIRST_REFRESH_DEGREES, RowGroups, _distinct, exact_rows, interpolable

__all__ = ["run_corrected", "run_corrected_rows", "RowEvaluator", "run_with_unbound_rows", "LINEAR_STEP", "REMAINDER_SD",
           "ROWS_STEP", "MAX_REFRESHES"]

#: the exact Gauss-Newton step is taken (and the fit ends) when it is below LINEAR_STEP standard
#: deviations for every parameter and the correction for its second-order remainder (estimated
#: from the WKB levels; applied) is below REMAINDER_SD standard deviations: what is left is then
#: third order, or the error of the WKB estimate of the curvature (~1 % of it), < 1e-3 sd
LINEAR_STEP = 30.0
REMAINDER_SD = 0.1
#: convergence test of the first (pure WKB) run: promised chi-square decrease below this fraction
FIRST_RUN_DECREASE = 1e-3
#: exact refreshes at most (each one exact evaluation)
MAX_REFRESHES = 12
#: the row engine (line positions, several data sets, free term values, Born-Oppenheimer terms) iterates chord
#: Gauss-Newton steps of the exact problem until the step is below ROWS_STEP standard deviations for every
#: parameter; that last step is taken linearly: its second-order remainder scales as the square of the step
#: and is < 0.1 sd for 30-sd steps (measured by run_corrected's remainder check), so < 1e-5 sd here
ROWS_STEP = 0.1

_WKB, _EXACT = 0, 1


def _gauss_newton(calc, jac, energy, sigma, var, want_sd=True):
    """Exact Gauss-Newton step (varied parameters var) and the parameter standard deviations (None with
    want_sd=False: the step alone, the same numbers without the inverse normal matrix)."""
    A = jac[:, var] / sigma[:, None]
    with np.errstate(over="ignore"):  # an absurd datum makes chi-square inf: refused by the caller
        r = (calc - energy) / sigma
    norms = np.linalg.norm(A, axis=0)
    norms[norms == 0] = 1.0
    An = A / norms
    chi2 = _tall.sumsq(r)
    if not var or len(r) < len(var):
        step, *_ = np.linalg.lstsq(An, -r, rcond=None)  # (nothing tall: numpy as it is)
        step /= norms
        try:
            inv = np.linalg.inv(An.T @ An) / np.outer(norms, norms)
        except np.linalg.LinAlgError:
            inv = np.linalg.pinv(An.T @ An) / np.outer(norms, norms)
    elif not want_sd:
        # (the step of lstsq_and_inverse below: the same QR and solve, without the inverse)
        return _tall.lstsq(An, -r) / norms, None, chi2
    else:
        # the n-row work off numpy's threaded BLAS (_tall.py): QR in C, then p x p matrices
        step, inv = _tall.lstsq_and_inverse(An, -r)
        step, inv = step / norms, inv / np.outer(norms, norms)
    dof = len(r) - len(var)
    sd = np.sqrt(np.abs(np.diag(inv)))
    if dof > 0:
        # the smaller of the stated-uncertainty and the scaled standard deviations
        sd = sd * min(1.0, math.sqrt(chi2 / dof))
    return step, sd, chi2


def exact_tolerance(sigma):
    """Target accuracy of the exact levels of a refresh: 1e-3 of the smallest uncertainty
    (so the solver's error moves no parameter by more than ~1e-3 standard deviation), between
    1e-9 and 1e-5 cm-1."""
    return float(min(1e-5, max(1e-9, 1e-3 * float(np.min(sigma)))))


def first_refresh_tolerance(sigma):
    """Target accuracy of the exact levels of a fit's first (levels-only) refresh: 1e-2 of the smallest
    uncertainty, between exact_tolerance and 1e-3 cm-1. Its levels only set the corrections of the first
    step toward the exact minimum; the exact evaluation after that step, to exact_tolerance, decides
    where the fit ends. (20-25 % cheaper than exact_tolerance on the 20 000-level benchmark fit.)"""
    return float(min(1e-3, max(exact_tolerance(sigma), 1e-2 * float(np.min(sigma)))))


def exact_calc(model, params, curve, v, rot, mu, energy_zero, tolerance):
    """(exact levels of the rows in the data's energy zero, their estimated numerical errors), cm-1;
    no parameter derivatives (they cost three times the levels).

    One core call per (reduced mass, J) with that group's v values; binding energies come
    straight from the solver (asymptote - E without cancellation)."""
    J = np.rint((np.sqrt(1.0 + 4.0 * np.asarray(rot)) - 1.0) / 2.0).astype(int)
    calc = np.empty(len(v))
    error = np.empty(len(v))
    ref = {}
    keys = np.stack([np.asarray(mu, dtype=float), J.astype(float)], axis=1)
    # the distinct (mu, J) rows in np.unique(keys, axis=0)'s order (lexicographic), by a set when short
    groups = np.unique(keys, axis=0) if len(keys) > 500 else sorted(set(zip(keys[:, 0].tolist(),
                                                                              keys[:, 1].tolist())))
    for m, j in groups:
        sel = np.nonzero((keys[:, 0] == m) & (keys[:, 1] == j))[0]
        want = _distinct(np.asarray(v)[sel])
        res = _core.exact_levels(model, params, curve, float(m), np.array([int(j)], dtype=np.intc),
                                 want.astype(np.intc), energy_tol=tolerance)
        col = res["binding_energy"] if energy_zero == 1 else res["energy"]
        at = np.searchsorted(res["v"], np.asarray(v)[sel])  # the solver returns the v asked for, ascending
        calc[sel] = col[at]
        error[sel] = res["error"][at]
        if energy_zero == 2 and int(j) == 0 and res["v"][0] == 0:
            ref[float(m)] = (float(res["energy"][0]), float(res["error"][0]))
    if energy_zero == 2:
        for m in _distinct(keys[:, 0]):
            if m not in ref:
                res = _core.exact_levels(model, params, curve, float(m), np.array([0], dtype=np.intc),
                                         np.array([0], dtype=np.intc), energy_tol=tolerance)
                ref[m] = (float(res["energy"][0]), float(res["error"][0]))
            sel = keys[:, 0] == m
            calc[sel] -= ref[m][0]
            error[sel] = np.hypot(error[sel], ref[m][1])
    return calc, error


def _step_directly(model, curve, v, rot, mu, zero, a, p, step, var, step_sd, tolerance):
    """(p + step, WKB rows and Jacobian there) when the step is below `tolerance` sd and stays inside the
    bounds and the model's domain; else None."""
    if not var or not step_sd < tolerance:
        return None
    p_new = np.array(p, dtype=float)
    p_new[var] += step
    if np.any(p_new <= np.asarray(a["lower"])) or np.any(p_new >= np.asarray(a["upper"])):
        return None
    try:
        wkb_new, jac_new = _core.fit_evaluate(model, p_new, curve, v, rot, mu, zero, _WKB)
    except ValueError:
        return None
    return p_new, wkb_new, jac_new


def run_corrected(args, *, tolerance=LINEAR_STEP, max_refreshes=MAX_REFRESHES, interpolate_in_j=True,
                  direct_first_step=True):
    """The corrected fit; args: a dict of the keyword arguments of _core.fit_run (method left out).

    1. a first-order WKB run from the start;
    2. a refresh: exact levels (no derivatives) at its point give the corrections
       delta = E_exact - E_wkb, and a WKB run with them fixed;
    3. one exact evaluation WITH the exact Jacobian <v|dV/dp|v> at the new point: the exact
       Gauss-Newton step there. If it is below `tolerance` standard deviations and the
       correction for its second-order remainder (the WKB levels' own: one WKB evaluation)
       is below REMAINDER_SD, the corrected step is taken and the fit ends with the exact
       Jacobian's covariance; otherwise the exact levels of this evaluation become the new
       corrections and 3 repeats.

    Returns the dict of _core.fit_run for the final point (calc = exact levels linearly
    continued by the step, jacobian = the exact one) plus: refreshes (exact evaluations,
    with and without derivatives), exact_jacobians, iterations (WKB Levenberg-Marquardt
    iterations summed), history (per exact evaluation: kind, largest step in standard
    deviations, chi-square), remainder (per row: the second-order remainder of the final
    linear step, estimated from the WKB levels, cm-1), converged_refreshes, exact_levels (levels
    the exact solver computed, summed over the refreshes).

    interpolate_in_j: the exact rows of a refresh are the WKB rows plus corrections E_exact - E_wkb
    interpolated in J(J+1) where a (mu, v) has many J (rotational_corrections.exact_rows, checked
    against exact levels to the levels' tolerance); False solves every row exactly.
    direct_first_step: after the first refresh, its Gauss-Newton step (exact rows, WKB Jacobian) is taken
    directly when below `tolerance` sd (one WKB evaluation at the new point) instead of step 2's WKB run;
    the exact evaluation with the Jacobian after it decides as in 3.
    """
    a = dict(args)
    model, curve = a["model"], a["curve"]
    v, rot, mu, energy, sigma, zero = a["v"], a["rot"], a["mu"], a["energy"], a["sigma"], a["energy_zero"]
    tol_levels = exact_tolerance(sigma)
    offset = np.zeros(len(v))
    # the first run only needs to come near the (biased) WKB minimum: the refresh moves it further
    # than any remaining step, so it stops once the promised chi-square decrease is < 1e-3 chi2
    out = _core.fit_run(method=_WKB, offset=None, decrease_tol=FIRST_RUN_DECREASE, **a)
    iterations, n_eval, history = out["iterations"], out["n_eval"], []
    refreshes = jacobians = n_exact = 0
    done = False

    interpolate = interpolate_in_j and interpolable(model, v, rot, mu)
    groups = RowGroups(v, rot, mu) if interpolate else None  # (the same rows at every refresh)

    def exact_at(p, want_jac, var, tol=tol_levels, degrees=DEGREES):
        """(exact rows, exact Jacobian or None) at p, the run's end (out: WKB rows there plus offset)."""
        nonlocal n_exact
        wkb_calc = out["calc"] - offset
        if not interpolate:
            n_exact += len(v)
            if want_jac:
                return _core.fit_evaluate(model, p, curve, v, rot, mu, zero, _EXACT, tol)
            return exact_calc(model, p, curve, v, rot, mu, zero, tol)[0], None
        sd_full = np.zeros(len(a["vary"]))
        if want_jac and var:
            sd_full[var] = _gauss_newton(wkb_calc, out["jacobian"], energy, sigma, var)[1]
        calc, jac, info = exact_rows(model, p, curve, v, rot, mu, zero, tol, wkb_calc,
                                     out["jacobian"] if want_jac else None, sd_full, tolerance, degrees, groups)
        n_exact += info["exact_levels"]
        return calc, jac

    while out["stop"] == "converged":
        p = out["params"]
        var = [k for k, f in enumerate(a["vary"]) if f and not out["insensitive"][k]]
        if refreshes == 0:
            # the pure WKB point is far from the exact minimum: correct with exact levels only (1/4 of the
            # cost with the Jacobian for an MLR). Measured: a second levels-only refresh before the first
            # Jacobian costs more than it saves (tests/benchmarks/bench_default_fit.py)
            # (to the looser first_refresh_tolerance: the exact evaluation with the Jacobian after it
            # measures what this step left, to the full tolerance)
            calc_ex, _ = exact_at(p, False, var, first_refresh_tolerance(sigma), FIRST_REFRESH_DEGREES)
            refreshes += 1
            step, sd, chi2 = _gauss_newton(calc_ex, out["jacobian"], energy, sigma, var)
            history.append({"kind": "levels", "step_sd": float(np.max(np.abs(step) / sd)) if var else 0.0,
                            "chi_square": chi2})
        else:
            calc_ex, jac_ex = exact_at(p, True, var)
            refreshes += 1
            jacobians += 1
            step, sd, chi2 = _gauss_newton(calc_ex, jac_ex, energy, sigma, var)
            worst = float(np.max(np.abs(step) / sd)) if var else 0.0
            history.append({"kind": "levels and Jacobian", "step_sd": worst, "chi_square": chi2})
            if worst < tolerance:
                # take the step, corrected for its second-order remainder (from the WKB levels, whose
                # curvature is the exact one to leading order), if that correction is below REMAINDER_SD
                full = np.zeros(len(a["vary"]))
                full[var] = step
                try:
                    wkb_f, _ = _core.fit_evaluate(model, p + full, curve, v, rot, mu, zero, _WKB, jacobian=False)
                except ValueError:
                    wkb_f = None  # the step leaves the model's domain: correct and run again
                if wkb_f is not None:
                    remainder = wkb_f - (out["calc"] - offset) - _tall.matvec(out["jacobian"], full)
                    shift, _, _ = _gauss_newton(energy + remainder, jac_ex, energy, sigma, var, want_sd=False)
                    history[-1]["remainder_sd"] = float(np.max(np.abs(shift) / sd)) if var else 0.0
                    if history[-1]["remainder_sd"] < REMAINDER_SD:
                        done = True
                        break
        if refreshes >= max_refreshes:
            break
        offset = offset + (calc_ex - out["calc"])  # = E_exact - E_wkb at p
        if refreshes == 1 and direct_first_step:
            moved = _step_directly(model, curve, v, rot, mu, zero, a, p, step, var, history[0]["step_sd"], tolerance)
            if moved is not None:
                # the first refresh's Gauss-Newton step (exact rows, WKB Jacobian) instead of a WKB run
                # with the corrections: one WKB evaluation where the run costs several
                p_new, wkb_new, jac_new = moved
                out = dict(out, params=p_new, calc=wkb_new + offset, jacobian=jac_new)
                n_eval += 1
                history[0]["taken"] = True
                continue
        a["params"] = p
        out = _core.fit_run(method=_WKB, offset=offset, **a)
        iterations += out["iterations"]
        n_eval += out["n_eval"]
    out = dict(out)
    if done:
        correction = np.zeros(len(a["vary"]))
        correction[var] = shift
        p_final = out["params"] + full + correction
        calc_final = calc_ex + _tall.matvec(jac_ex, full + correction) + remainder
        r = (calc_final - energy) / sigma
        out.update(params=p_final, calc=calc_final, jacobian=jac_ex, chi_square=_tall.sumsq(r))
    else:
        remainder = np.full(len(v), np.nan)
    out.update(iterations=iterations, n_eval=n_eval, refreshes=refreshes, exact_jacobians=jacobians,
               history=history, remainder=remainder, converged_refreshes=done or out["stop"] != "converged",
               level_tolerance=tol_levels, exact_levels=n_exact)
    return out


class RowEvaluator:
    """Exact and first-order WKB evaluations of the row engine's rows at (params, extras).

    run(params, extra, offset, method, max_iterations): a call of _core.fit_run_rows (max_iterations=0
    evaluates the rows and their Jacobian without a step; the extras are re-solved linearly there).
    For plain levels (no Born-Oppenheimer variants) the exact rows are the WKB rows plus the combination of
    per-level E_exact - E_wkb (and the same for the Jacobian), with the exact levels computed to the
    tolerance the data need (exact_tolerance) by one fit_evaluate over the distinct levels: ~1/4 of the
    row engine's own exact evaluation, which converges every level to the solver's default accuracy.
    Levels only (no derivatives) use exact_calc (one solver call per (mu, J)) when Omega = 0.
    With Omega = 0 and interpolate_in_j, E_exact - E_wkb of a (mu, v) with many J comes from a few J
    (rotational_corrections.exact_rows; the Jacobian's too once run_corrected_rows has set sd, the
    parameters' standard deviations that scale its check).
    """

    interpolate_in_j = True

    def __init__(self, run, model, curve, lv, lrot, lmu, rows, plain, omega):
        self.run, self.model, self.curve = run, model, curve
        self.lv, self.lrot, self.lmu, self.rows = lv, lrot, lmu, rows
        self.plain, self.omega = plain, omega
        self.tol = exact_tolerance(rows["sigma"])
        self.zero = np.zeros(len(rows["observed"]))
        self.sd = None
        self._groups = None

    def groups(self):
        """The levels' RowGroups (made at the first interpolated refresh, shared by the others)."""
        if self._groups is None:
            self._groups = RowGroups(self.lv, self.lrot, self.lmu)
        return self._groups

    def _combine(self, per_level):
        """Rows from per-level values (vector or matrix): sum of coef * value over the row's levels."""
        r = self.rows
        out = np.zeros((len(r["observed"]),) + per_level.shape[1:])
        for level, coef in ((r["level_a"], r["coef_a"]), (r["level_b"], r["coef_b"])):
            has = level >= 0
            c = coef[has] if per_level.ndim == 1 else coef[has][:, None]
            out[has] += c * per_level[level[has]]
        return out

    def corrections(self, p, loose=False):
        """Per row: E_exact - E_wkb of its levels at p (levels only), cm-1. loose: to 1e-2 of the smallest
        uncertainty (the first refresh, whose error the exact evaluation after it measures and removes)."""
        tol = first_refresh_tolerance(self.rows["sigma"]) if loose else self.tol
        wkb, _ = _core.fit_evaluate(self.model, p, self.curve, self.lv, self.lrot, self.lmu, 0, _WKB)
        if self.omega:
            ex, _ = _core.fit_evaluate(self.model, p, self.curve, self.lv, self.lrot, self.lmu, 0, _EXACT, tol)
        elif self.interpolate_in_j and interpolable(self.model, self.lv, self.lrot, self.lmu):
            ex, _, _ = exact_rows(self.model, p, self.curve, self.lv, self.lrot, self.lmu, 0, tol, wkb,
                                  degrees=FIRST_REFRESH_DEGREES if loose else DEGREES, groups=self.groups())
        else:
            ex, _ = exact_calc(self.model, p, self.curve, self.lv, self.lrot, self.lmu, 0, tol)
        return self._combine(ex - wkb)

    def exact(self, p, e, wkb=None):
        """(calc, jacobian [rows, params + extras], extras, level calculations) of the exact rows at p.
        wkb: None, or the WKB rows at (p, e) already known (calc without offset, jacobian, extra)."""
        if not self.plain:
            ex = self.run(p, e, self.zero, _EXACT, 0)
            return ex["calc"], ex["jacobian"], np.asarray(ex["extra"], dtype=float), ex["n_level_calculations"]
        wk = self.run(p, e, self.zero, _WKB, 0) if wkb is None else wkb
        E_w, J_w = _core.fit_evaluate(self.model, p, self.curve, self.lv, self.lrot, self.lmu, 0, _WKB)
        n_exact = len(self.lv)
        if not self.omega and self.interpolate_in_j and self.sd is not None and \
                interpolable(self.model, self.lv, self.lrot, self.lmu):
            E_ex, J_ex, info = exact_rows(self.model, p, self.curve, self.lv, self.lrot, self.lmu, 0, self.tol, E_w,
                                          J_w, self.sd, LINEAR_STEP, groups=self.groups())
            n_exact = info["exact_levels"]
        else:
            E_ex, J_ex = _core.fit_evaluate(self.model, p, self.curve, self.lv, self.lrot, self.lmu, 0, _EXACT,
                                            self.tol)
        jac = np.array(wk["jacobian"], dtype=float)
        jac[:, :J_ex.shape[1]] += self._combine(J_ex - J_w)
        return wk["calc"] + self._combine(E_ex - E_w), jac, np.asarray(wk["extra"], dtype=float), n_exact

    def levels(self, p, e):
        """(calc, extras) of the exact rows at p from exact levels only (plain levels), else from exact()."""
        if not self.plain:
            calc, _, e_new, _ = self.exact(p, e)
            return calc, e_new
        wk = self.run(p, e, self.corrections(p), _WKB, 0)
        return wk["calc"], np.asarray(wk["extra"], dtype=float)


def run_corrected_rows(ev, n_params, vary, max_iterations, *, tolerance=ROWS_STEP, max_refreshes=MAX_REFRESHES):
    """The corrected fit on the row engine (_core.fit_run_rows: rows are linear combinations of levels,
    plus free term values or fitted asymptotes, the "extras"). ev: a RowEvaluator; vary: flags of the
    model's parameters (the extras are always varied).

    1. a first-order WKB run; 2. per-row corrections E_exact - E_wkb at its point and a WKB run with
    them fixed in the rows' offset (the WKB Jacobian leaves this a few sd from the exact minimum);
    3. one exact evaluation with the exact Jacobian J, then chord Gauss-Newton steps of the exact
    problem with J held, the exact rows at each new point from exact levels only, until the step is
    below `tolerance` sd for every parameter (extras included); that last step is taken linearly.
    The covariance comes from J (evaluated within a few sd of the end: its change there is ~1e-5).
    Returns the final dict (params, extra, calc, jacobian exact) plus refreshes (exact evaluations),
    exact_jacobians, iterations, n_eval, history, converged_refreshes.
    """
    observed, sigma = np.asarray(ev.rows["observed"], dtype=float), np.asarray(ev.rows["sigma"], dtype=float)
    out = ev.run(None, None, ev.zero, _WKB, max_iterations)
    iterations, n_eval, history = out["iterations"], out["n_eval"], []
    refreshes = jacobians = 0
    done = False
    if out["stop"] == "converged":
        p, e = out["params"], out["extra"]
        offset = ev.corrections(p, loose=True) if ev.plain else ev.exact(p, e)[0] - out["calc"]
        refreshes += 1
        jacobians += 0 if ev.plain else 1
        # the exact problem's Gauss-Newton step there, with the WKB Jacobian (as run_corrected reports it)
        var0 = [k for k in range(n_params) if vary[k] and not out["insensitive"][k]] + \
            list(range(n_params, n_params + len(e)))
        step0, sd0, chi0 = _gauss_newton(out["calc"] + offset, out["jacobian"], observed, sigma, var0)
        history.append({"kind": "levels" if ev.plain else "levels and Jacobian",
                        "step_sd": float(np.max(np.abs(step0) / sd0)) if var0 else 0.0, "chi_square": chi0})
        out = ev.run(p, e, offset, _WKB, max_iterations)
        iterations += out["iterations"]
        n_eval += out["n_eval"]
    if out["stop"] == "converged":
        var = [k for k in range(n_params) if vary[k] and not out["insensitive"][k]]
        # the parameters' standard deviations (from the WKB rows) scale the check of interpolated Jacobians
        var_all = var + list(range(n_params, n_params + len(out["extra"])))
        sd_all = np.zeros(n_params + len(out["extra"]))
        if var_all:
            sd_all[var_all] = _gauss_newton(out["calc"], out["jacobian"], observed, sigma, var_all)[1]
        ev.sd = sd_all[:n_params]
        # the WKB rows at the run's end are known: its calc less the corrections, with its extras
        calc, jac, e, n_levels = ev.exact(out["params"], out["extra"], {
            "calc": out["calc"] - offset, "jacobian": out["jacobian"], "extra": out["extra"]})
        var += list(range(n_params, n_params + len(e)))
        p = np.array(out["params"], dtype=float)
        refreshes += 1
        jacobians += 1
        kind = "levels and Jacobian"
        while True:
            step, sd, chi2 = _gauss_newton(calc, jac, observed, sigma, var)
            worst = float(np.max(np.abs(step) / sd)) if var else 0.0
            history.append({"kind": kind, "step_sd": worst, "chi_square": chi2})
            full = np.zeros(n_params + len(e))
            full[var] = step
            if worst < tolerance:
                done = True
                # the step is taken linearly; its second-order remainder, estimated from the WKB rows
                # (they share the exact rows' curvature to first order), is the rows' method error
                try:
                    w0 = ev.run(p, e, ev.zero, _WKB, 0)
                    w1 = ev.run(p + full[:n_params], e + full[n_params:], ev.zero, _WKB, 0)
                    remainder = np.asarray(w1["calc"]) - np.asarray(w0["calc"]) - _tall.matvec(w0["jacobian"], full)
                except ValueError:
                    remainder = np.full(len(calc), np.nan)
                calc = calc + _tall.matvec(jac, full)
                p, e = p + full[:n_params], e + full[n_params:]
                break
            if refreshes >= max_refreshes:
                break
            p, e = p + full[:n_params], e + full[n_params:]
            try:
                calc, e = ev.levels(p, e)
            except ValueError:
                break  # the step leaves the model's domain: stop at the last point (not self-consistent)
            refreshes += 1
            kind = "levels"
        r = (calc - observed) / sigma
        out = dict(out)
        out.update(params=p, extra=e, calc=calc, jacobian=jac, chi_square=_tall.sumsq(r),
                   n_level_calculations=out["n_level_calculations"] + n_levels)
    out = dict(out)
    out.update(iterations=iterations, n_eval=n_eval, refreshes=refreshes, exact_jacobians=jacobians,
               history=history, converged_refreshes=done or out["stop"] != "converged",
               remainder=remainder if done else np.full(len(observed), np.nan), level_tolerance=ev.tol)
    return out


def bound_counts(model, params, curve, mu, rot):
    """Number of first-order WKB bound levels for each distinct (mu, rot) pair: dict."""
    counts = {}
    for m, r in set(zip(mu.tolist(), rot.tolist())):
        try:
            res = _core.fit_levels(model, params, curve, m, r, 0)
            counts[(m, r)] = len(res["energy"])
        except ValueError:
            counts[(m, r)] = 0
    return counts


def _not_bound(message):
    return "not bound" in message or "last bound level" in message or "binds no levels" in message


def _bound_rows(model, params, curve, v, mu, rot):
    counts = bound_counts(model, params, curve, mu, rot)
    return np.array([vi < counts[(m, r)] for vi, m, r in zip(v.tolist(), mu.tolist(), rot.tolist())], dtype=bool)


def run_with_unbound_rows(run, args, n_vary, max_rounds=20):
    """Runs run(args) on the rows the current potential binds, growing the set as levels become bound.

    run: a function of an args dict (the keywords of _core.fit_run) returning its dict.
    Returns (out for all rows, list of notes describing what was done). If the starting
    potential binds every row, this is run(args) and no note. Raises ValueError (with the
    rows) when the start binds fewer rows than varied parameters, or when fits on the bound
    rows stop binding more of them.
    """
    model, curve = args["model"], args["curve"]
    v, mu, rot = np.asarray(args["v"]), np.asarray(args["mu"]), np.asarray(args["rot"])
    try:
        return run(args), []
    except ValueError as err:
        # only a start that does not bind some row is handled here (the core names the row)
        if not (len(err.args) == 2 and isinstance(err.args[1], int) and _not_bound(err.args[0])):
            raise
        first_error = err
    bound = _bound_rows(model, args["params"], curve, v, mu, rot)
    if bound.all():
        raise first_error
    notes = []
    params = np.array(args["params"], dtype=float)
    start_missing = int(np.count_nonzero(~bound))
    for round_ in range(max_rounds):
        idx = np.nonzero(bound)[0]
        if len(idx) < max(n_vary, 1):
            raise _Unreachable(bound, len(idx), round_ == 0, params)
        sub = dict(args)
        for key in ("v", "rot", "mu", "energy", "sigma"):
            sub[key] = np.ascontiguousarray(np.asarray(args[key])[idx])
        sub["params"] = params
        out = run(sub)
        params = out["params"]
        now = _bound_rows(model, params, curve, v, mu, rot) | bound
        notes.append("round %d: fitted %d of %d levels (the others are not bound by the %s potential)"
                     % (round_ + 1, len(idx), len(v), "starting" if round_ == 0 else "intermediate"))
        if now.all():
            full = dict(args)
            full["params"] = params
            notes.append("the %d level%s not bound by the starting potential became bound and %s brought in; the "
                         "final fit uses every level" % (start_missing, "" if start_missing == 1 else "s",
                                                         "was" if start_missing == 1 else "were"))
            return run(full), notes
        if np.array_equal(now, bound):
            raise _Unreachable(now, int(np.count_nonzero(now)), False, params, out["stop"])
        bound = now
    raise _Unreachable(bound, int(np.count_nonzero(bound)), False, params)


class _Unreachable(ValueError):
    """The potential (after fitting the bound rows) does not bind every row."""

    def __init__(self, bound, n_bound, at_start, params, stop="converged"):
        super().__init__("unreachable")
        self.stop = stop
        self.bound = bound
        self.n_bound = n_bound
        self.at_start = at_start
        self.params = params
