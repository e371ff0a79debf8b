"""Fast replicas of a fit: first-order refits with the central fit's exact corrections, linearised.

A replica of a fit made with exact corrections (method "corrected") is refitted here on
first-order WKB levels plus per-level corrections linear in the parameters,

    E_v(p) = E_wkb,v(p) + c_v + D_v . (p - p0),

with c_v = E_exact,v - E_wkb,v at the central fit p0 and D_v its derivative by one-sided finite
differences over one standard deviation of each varied parameter (n_vary + 1 exact evaluations,
once per bootstrap; a secant over the range the replicas actually move). The Jacobian of the
refit includes D, so each replica lands on the minimum of this linearised problem. Why that is
close to the exact refit: the replicas stay within a few standard deviations of p0, over which
the corrections change by D (p - p0) plus a second-order remainder; the remainder is what the
run-time check below measures. Measured against full refits of the same replicas
(tests/test_replicas.py): largest parameter difference 1e-6 sd (Morse, 50 levels), 4e-6 sd (a
light Lennard-Jones well), 2.4e-3 sd (an MLR well); replica standard deviations within 1e-4.
D is always used (it costs nothing per replica): the check also reports how far frozen
corrections (D = 0) would move the checked replicas, slope_effect_sd, measured 1e-5 sd (Morse),
7e-3 sd (light Lennard-Jones) and 7e-2 sd (MLR), above the 1e-3 sd below which freezing would do.

Replica fits run in the C core, a chunk of replicas per call with the GIL released
(_core.fit_replicas, csrc/replica_fit.c); the replicas' energies (Monte-Carlo) or row counts
(case resampling: a row drawn c times has its uncertainty divided by sqrt(c), the same
chi-square as the drawn rows) are built in NumPy from default_rng([seed, i]), the same draws as
the full path, so one seed gives the same numbers on every executor and chunking.

Predictions (one isotopologue, J = 0): the same corrected levels: every first-order bound level
of the replica's potential, counted until a corrected level is not below the asymptote. The table
holds the exact corrections (and slopes) of the levels the predictions report: v = 0 (D0), the
top levels followed, the top bound level (the count); levels in between take the correction of
the entry below them (they are reported by nothing, and lie too deep for it to change whether
they are bound), a level above the central exact count takes the top one's (counted as
"extrapolated" in the check). vD is the first-order one, as in the full path.

The run-time check ("exact refresh"): the n_check replicas farthest from the centre (in the
Mahalanobis distance of the central covariance), and as many of those whose number of bound
levels differs from the centre's, get exact levels at their fast point; the
exact problem's Gauss-Newton step there (with the central exact Jacobian) is the fast method's
parameter error, in standard deviations, and exact predictions at that point give the error of
the predicted D0 and binding energies in units of their covariance uncertainties (beyond the
exact levels' own tolerance, exact_tolerance(sigma), which no comparison can resolve). If either is
above `tolerance` (default 1e-2 sd), or the number of bound levels differs, all replicas are
refitted the full way (replicas.py) and the check says why. The check is kept in
ReplicaResult.method_check.

Method "wkb" fits are refitted here without corrections: the same first-order problem as the
full path (to the Levenberg-Marquardt tolerance), so no check is needed.
"""
import math

import numpy as np

from . import _core
from .corrected import exact_calc, exact_tolerance
from .fitting import _ENERGY_ZERO_CODES
from .observed import ObservedLevels

__all__ = ["eligible", "prepare", "fast_chunk", "check", "TOLERANCE", "N_CHECK"]

#: the fast replicas are accepted when the checked replicas' parameters and predictions lie
#: within this many standard deviations of the exact problem's
TOLERANCE = 1e-2
#: replicas checked with an exact refresh (the farthest from the centre)
N_CHECK = 3


def eligible(result):
    """'' if the fast path can refit replicas of `result`, else why not."""
    if result.method not in ("corrected", "wkb"):
        return "method %r refits every replica the full way" % result.method
    obs = result.observed
    if type(obs) is not ObservedLevels or getattr(obs, "asymptote", None) is not None:
        return "data other than one set of term values or binding energies"
    if getattr(result, "correction", None) is not None:
        return "Born-Oppenheimer terms"
    if getattr(result, "omega", 0):
        return "Omega > 0 (a centrifugal term J(J+1) - Omega^2)"
    if not result.var_names:
        return "no varied parameter"
    return ""


def _bounds(result, names):
    lower = np.full(len(names), -np.inf)
    upper = np.full(len(names), np.inf)
    for k, n in enumerate(names):
        lo, hi = result.params[n].bounds
        if lo is not None:
            lower[k] = lo
        if hi is not None:
            upper[k] = hi
    return lower, upper


def exact_selected(model, p, curve, mu, vs, tol):
    """({v: (term value, binding energy)} of the levels vs at J = 0 that are bound, exact count)."""
    J0 = np.array([0], dtype=np.intc)
    vs = np.asarray(vs, dtype=np.intc)
    try:
        res = _core.exact_levels(model, p, curve, float(mu), J0, vs, energy_tol=tol)
    except ValueError:  # a top level not bound here: ask for the bound ones
        count = int(_core.exact_levels(model, p, curve, float(mu), J0, vs[:1], energy_tol=tol)["count"][0])
        vs = vs[vs < count]
        res = _core.exact_levels(model, p, curve, float(mu), J0, vs, energy_tol=tol) if len(vs) else None
    out = {}
    if res is not None:
        out = {int(v): (float(e), float(b)) for v, e, b in zip(res["v"], res["energy"], res["binding_energy"])}
        count = int(res["count"][0])
    return out, count


def _term_values(model, p, curve, keys, pred_mu, exact, tol):
    """Term values (cm-1 above the minimum) of the table's levels at p: exact or first-order WKB;
    NaN for a prediction level that is not bound there."""
    out = np.full(len(keys["v"]), np.nan)
    data = ~keys["pred_only"]
    kv, krot, kmu = keys["v"][data], keys["rot"][data], keys["mu"][data]
    if exact:
        out[data] = exact_calc(model, p, curve, kv, krot, kmu, 0, tol)[0]
    else:
        out[data] = _core.fit_evaluate(model, p, curve, kv, krot, kmu, 0, 0)[0]
    sel = np.nonzero(keys["pred"])[0]
    if len(sel):
        if exact:
            levels, _ = exact_selected(model, p, curve, pred_mu, keys["v"][sel], tol)
            E = {v: e for v, (e, b) in levels.items()}
        else:
            wk = np.asarray(_core.fit_levels(model, p, curve, float(pred_mu), 0.0, 0)["energy"])
            E = dict(enumerate(wk.tolist()))
        out[sel] = [E.get(int(v), np.nan) for v in keys["v"][sel]]
    return out


def prepare(result, label, v_top, executor=None):
    """The shared data of the fast replicas (a dict of arrays and numbers, picklable). The
    n_vary + 1 exact evaluations run on threads of this process unless executor is "serial"."""
    from .executors import local_map
    obs = result.observed
    names = list(result.potential.param_names)
    var = [names.index(n) for n in result.var_names]
    model, p0, curve = result.potential._core_args()
    fitted = np.asarray(result.fitted_rows)
    rows = np.nonzero(fitted)[0]
    mu_rows = np.array([result.masses[x] for x in obs.isotopologue], dtype=float)[rows]
    rot = (obs.J * (obs.J + 1)).astype(float)[rows]
    v = np.asarray(obs.v)[rows].astype(np.intc)
    sigma = np.asarray(obs.uncertainty, dtype=float)[rows]
    zero = _ENERGY_ZERO_CODES[obs.energy_zero]
    pred_mu = float(result.masses[label])
    corrected = result.method == "corrected"
    tol = exact_tolerance(sigma)

    # the table of corrected levels: the data's levels, each reduced mass's v=0, J=0 for the zero
    # "lowest", and (corrected) the J = 0 levels the predictions report: v = 0 (D0), the top levels
    # followed and the top bound level (the count). Levels in between take the correction of the
    # nearest entry below: they are reported by none of the predictions, and lie so far below the
    # asymptote that such a correction cannot change whether they are bound.
    n_pred = 0
    if corrected:
        n_pred = exact_selected(model, p0, curve, pred_mu, [0], tol)[1]
    data_keys = {(m, r, int(x)) for m, r, x in zip(mu_rows.tolist(), rot.tolist(), v.tolist())}
    if zero == _ENERGY_ZERO_CODES["lowest"]:
        data_keys |= {(m, 0.0, 0) for m in set(mu_rows.tolist())}
    pred_keys = {(pred_mu, 0.0, x) for x in sorted({0, n_pred - 1} | set(v_top)) if 0 <= x < n_pred}
    allk = sorted(data_keys | pred_keys)
    keys = {"mu": np.array([k[0] for k in allk], dtype=float), "rot": np.array([k[1] for k in allk], dtype=float),
            "v": np.array([k[2] for k in allk], dtype=np.intc)}
    keys["pred"] = np.array([k in pred_keys for k in allk], dtype=bool)
    keys["pred_only"] = np.array([k in pred_keys and k not in data_keys for k in allk], dtype=bool)

    shift = slope = None
    notes = []
    if corrected:
        def corrections(p):
            return (_term_values(model, p, curve, keys, pred_mu, True, tol)
                    - _term_values(model, p, curve, keys, pred_mu, False, tol))
        steps = []
        for k, name in zip(var, result.var_names):
            h = float(result.params[name].uncertainty or 0) or 1e-6 * max(abs(p0[k]), 1.0)
            step = np.zeros(len(names))
            step[k] = h
            steps.append(step)
        got = local_map(corrections, [p0] + [p0 + st for st in steps], executor)
        shift = got[0]
        if np.any(~np.isfinite(shift[~keys["pred_only"]])):
            raise ValueError("a level of the data has no first-order WKB counterpart at the central fit")
        n_wkb = prediction_count(model, p0, curve, pred_mu)
        if n_wkb < n_pred:
            notes.append("the exact solver binds %d levels at J = 0, the first-order core %d: the fast predictions "
                         "count at most %d (the exact check compares the counts)" % (n_pred, n_wkb, n_wkb))
            shift[~np.isfinite(shift)] = 0.0
        slope = np.zeros((len(shift), len(names)))
        n_missing = 0
        for k, st, up in zip(var, steps, got[1:]):
            h = st[k]
            col = (up - shift) / h
            bad = ~np.isfinite(col)
            if np.any(bad):  # a top level unbound one sd up: the other side
                back = (shift - corrections(p0 - st)) / h
                col[bad] = back[bad]
                bad = ~np.isfinite(col)
                n_missing += int(np.count_nonzero(bad))
                col[bad] = 0.0
            slope[:, k] = col
        if n_missing:
            notes.append("%d correction slopes could not be formed (a level unbound on both sides) and are zero"
                         % n_missing)
    lower, upper = _bounds(result, names)
    return {
        # the potential rather than its core arguments: a point-wise curve is a capsule, which cannot be pickled
        "potential": result.potential, "model": model, "p0": np.asarray(p0, dtype=float), "v": v, "rot": rot,
        "mu": mu_rows,
        "sigma": sigma, "energy_zero": zero, "vary": np.array([n in result.var_names for n in names], dtype=np.intc),
        "lower": lower, "upper": upper, "max_iterations": int(getattr(result, "max_iterations", 200)),
        "keys": keys, "shift": shift, "slope": slope, "pred_mu": pred_mu,
        "pred_v": np.array([0] + list(v_top), dtype=np.intc),
        "n_pred": n_pred, "notes": notes, "names": names, "var": var, "var_names": list(result.var_names),
        "v_top": list(v_top), "fitted_energy": np.asarray(obs.energy, dtype=float)[rows],
        "calculated": np.asarray(result.calculated, dtype=float)[rows], "rows": rows,
        "jacobian_w": np.asarray(result.jacobian, dtype=float)[rows][:, var] / sigma[:, None],
    }


def prediction_count(model, p, curve, mu):
    return len(_core.fit_levels(model, p, curve, float(mu), 0.0, 0)["energy"])


def replica_data(shared, fast, i):
    """(energies, counts or None) of replica i over the fitted rows: the draws of replicas._replica_data."""
    from .replicas import replica_draw
    m = len(fast["rows"])
    draw = replica_draw(shared["seed"], i, shared["kind"], m)
    if shared["kind"] == "monte-carlo":
        return fast["calculated"] + shared["noise_scale"] * fast["sigma"] * draw, None
    return fast["fitted_energy"], np.bincount(draw, minlength=m).astype(float)


def run_core(fast, energies, counts, slope=True):
    """One core call: the replicas with energies[r] (and row counts[r], or None); slope=False
    freezes the corrections at the centre (the check's measure of what the slopes do)."""
    f = fast
    keys = f["keys"]
    table = {} if f["shift"] is None else dict(
        shift_mu=keys["mu"], shift_rot=keys["rot"], shift_v=keys["v"], shift=f["shift"],
        slope=f["slope"] if slope else None)
    curve = f["potential"]._core_args()[2]
    return _core.fit_replicas(f["model"], f["p0"], curve, f["v"], f["rot"], f["mu"], f["sigma"],
                              f["energy_zero"], f["vary"], f["lower"], f["upper"], energies,
                              counts=counts, pred_mu=f["pred_mu"], pred_v=f["pred_v"],
                              max_iterations=f["max_iterations"], **table)


def fast_chunk(shared, chunk):
    """Replicas `chunk` (indices) in one core call: [(i, reason or None, values or None)]."""
    fast = shared["fast"]
    data = [replica_data(shared, fast, i) for i in chunk]
    energies = np.array([d[0] for d in data])
    counts = None if shared["kind"] == "monte-carlo" else np.array([d[1] for d in data])
    out = run_core(fast, energies, counts)
    undetermined = _undetermined(fast, counts) if counts is not None else [""] * len(chunk)
    names, var, p0 = fast["var_names"], fast["var"], fast["p0"]
    results = []
    for j, i in enumerate(chunk):
        status, stop = int(out["status"][j]), int(out["stop"][j])
        if status > 0:
            results.append((i, "fit failed: %s" % out["message"][j], None))
            continue
        if stop != 0:
            results.append((i, "not converged: %s" % ("max_iterations" if stop == 1 else "no_progress"), None))
            continue
        p = out["params"][j]
        at_bound = [n for n, k in zip(names, var) for b in (fast["lower"][k], fast["upper"][k])
                    if np.isfinite(b) and abs(p[k] - b) <= 1e-6 * max(abs(p0[k] - b), 1e-300)]
        why = ", ".join(at_bound) or undetermined[j] or (", ".join(names) if out["insensitive"][j] else "")
        if why:
            results.append((i, "undetermined parameters %s" % why, None))
            continue
        if status < 0:
            results.append((i, "predictions failed: %s" % out["message"][j], None))
            continue
        values = {n: float(p[k]) for n, k in zip(names, var)}
        values["chi_square"] = float(out["chi_square"][j])
        values.update(_predictions(out, j, fast["v_top"]))
        values["_extrapolated"] = int(out["extrapolated"][j])
        results.append((i, None, values))
    return results


def _predictions(out, j, v_top):
    """The predictions of replica j of a core call made with pred_v = [0] + v_top."""
    nb = int(out["pred_count"][j])
    E = out["pred_energy"][j]
    asym = float(out["asymptote"][j])
    vals = {"D0": asym - float(E[0]) if nb else math.nan, "vD": float(out["vD"][j]), "n_bound": float(nb)}
    for k, v in enumerate(v_top):
        vals["Eb(v=%d)" % v] = asym - float(E[k + 1]) if v < nb else math.nan
    return vals


def _undetermined(fast, counts):
    """Per replica: the varied parameters no drawn row depends on, else those of a numerically
    singular normal matrix (the full path's tests 2 and 3, fit_result.py), on the central
    Jacobian with the replica's row counts; '' when all are determined."""
    from .fit_result import _RCOND_SINGULAR, _SENSITIVITY_ZERO
    A = fast["jacobian_w"]  # rows x varied, weighted by 1/sigma
    N = np.einsum("ri,ij,ik->rjk", counts, A, A)
    d = np.sqrt(np.einsum("rjj->rj", N))
    sens = d * np.maximum(np.abs(fast["p0"][fast["var"]]), 1e-300)
    insensitive = ~(sens > _SENSITIVITY_ZERO * np.max(sens, axis=1)[:, None])
    d[d == 0] = 1.0
    Nn = N / d[:, :, None] / d[:, None, :]
    ev = np.linalg.eigvalsh(Nn)
    s = np.sqrt(np.clip(ev, 0, None))
    singular = s[:, 0] < _RCOND_SINGULAR * s[:, -1]
    names = fast["var_names"]
    return [", ".join(n for n, f in zip(names, ins) if f) if ins.any() else
            ("a combination of %s" % ", ".join(names) if sing else "") for ins, sing in zip(insensitive, singular)]


def _check_one(result, shared, i, vals, d2, sd, pred_sd):
    """The exact refresh of replica i (fast values vals): one dict of the check."""
    fast = shared["fast"]
    var = fast["var"]
    model, curve = fast["model"], fast["potential"]._core_args()[2]
    tol = exact_tolerance(fast["sigma"])
    energies, counts = replica_data(shared, fast, i)
    p = fast["p0"].copy()
    p[var] = [vals[n] for n in fast["var_names"]]
    # the exact problem's Gauss-Newton step at the fast point (central exact Jacobian): the distance
    # from the replica's exact minimum, to first order in that (small) distance
    calc = exact_calc(model, p, curve, fast["v"], fast["rot"], fast["mu"], fast["energy_zero"], tol)[0]
    w = np.sqrt(counts) if counts is not None else np.ones(len(calc))
    r = (calc - energies) / fast["sigma"] * w
    step = np.linalg.lstsq(fast["jacobian_w"] * w[:, None], -r, rcond=None)[0]
    err_p = float(np.max(np.abs(step) / sd))
    # exact predictions at the fast point against the fast ones
    levels, count = exact_selected(model, p, curve, fast["pred_mu"], [0] + list(fast["v_top"]), tol)
    exact_pred = {"D0": levels[0][1] if 0 in levels else math.nan}
    for v in fast["v_top"]:
        exact_pred["Eb(v=%d)" % v] = levels[v][1] if v in levels else math.nan
    errs = []
    for k, x in exact_pred.items():
        if math.isfinite(vals[k]) and math.isfinite(x):
            # differences within the exact levels' own tolerance cannot be resolved: they count as none
            miss = max(0.0, abs(vals[k] - x) - tol)
            errs.append(miss / pred_sd[k] if pred_sd[k] else (math.inf if miss else 0.0))
        elif math.isfinite(vals[k]) != math.isfinite(x):
            errs.append(math.inf)  # bound in one and not in the other
    # the slopes' share: the same replica with frozen corrections
    single = run_core(fast, energies[None, :], None if counts is None else counts[None, :], slope=False)
    eff = float(np.max(np.abs(single["params"][0][var] - p[var]) / sd)) if single["status"][0] <= 0 else math.nan
    return {"replica": int(i), "distance_sd": float(math.sqrt(max(d2, 0))), "parameter_error_sd": err_p,
            "prediction_error_sd": max(errs) if errs else 0.0, "n_bound_fast": int(vals["n_bound"]),
            "n_bound_exact": int(count), "slope_effect_sd": eff}


def check(result, shared, outcomes, pred, executor=None, n_check=N_CHECK, tolerance=TOLERANCE):
    """The exact refresh of the n_check replicas farthest from the centre; returns the check dict.
    pred: result.predict() for the isotopologue of the predictions (their covariance uncertainties)."""
    from .executors import local_map
    fast = shared["fast"]
    info = {"refit": "linearised", "tolerance": tolerance, "notes": list(fast["notes"]), "checked": [],
            "parameter_error_sd": 0.0, "prediction_error_sd": 0.0, "slope_effect_sd": 0.0, "n_bound_mismatch": 0,
            "extrapolated_levels": 0, "passed": True, "reason": ""}
    if fast["shift"] is None:
        info["notes"].append("method wkb: the replicas are the same first-order problem; no check needed")
        return info
    names = fast["var_names"]
    sd = np.array([result.params[n].uncertainty for n in names], dtype=float)
    ok = [(i, vals) for i, reason, vals in outcomes if reason is None]
    if not ok:
        return info
    P = np.array([[vals[n] for n in names] for _, vals in ok])
    dp = P - np.array([result.values[n] for n in names])
    d2 = np.einsum("ij,jk,ik->i", dp, np.linalg.pinv(np.asarray(result.covariance, dtype=float)), dp)
    order = np.argsort(-d2, kind="stable")
    pick = list(order[:n_check])
    # and the farthest replicas whose number of bound levels differs from the centre's, where the
    # corrections of the top levels decide the count
    n0 = fast["n_pred"]
    pick += [j for j in order[n_check:] if ok[j][1]["n_bound"] != n0][:n_check]
    pred_sd = {"D0": pred.D0_uncertainty}
    for v in fast["v_top"]:
        pred_sd["Eb(v=%d)" % v] = float(pred.binding_uncertainty[v])
    info["checked"] = local_map(lambda j: _check_one(result, shared, ok[j][0], ok[j][1], d2[j], sd, pred_sd),
                                pick, executor)
    for c in info["checked"]:
        info["parameter_error_sd"] = max(info["parameter_error_sd"], c["parameter_error_sd"])
        info["prediction_error_sd"] = max(info["prediction_error_sd"], c["prediction_error_sd"])
        eff = c["slope_effect_sd"]
        info["slope_effect_sd"] = max(info["slope_effect_sd"], eff) if math.isfinite(eff) else math.nan
        info["n_bound_mismatch"] += int(c["n_bound_fast"] != c["n_bound_exact"])
    info["extrapolated_levels"] = int(sum(vals.get("_extrapolated", 0) for _, vals in ok))
    if info["parameter_error_sd"] > tolerance:
        info["passed"], info["reason"] = False, "parameter error %.3g sd above the tolerance %.3g sd" % (
            info["parameter_error_sd"], tolerance)
    elif info["prediction_error_sd"] > tolerance:
        info["passed"], info["reason"] = False, "prediction error %.3g sd above the tolerance %.3g sd" % (
            info["prediction_error_sd"], tolerance)
    elif info["n_bound_mismatch"]:
        info["passed"], info["reason"] = False, "number of bound levels differs from the exact one in %d checked " \
            "replicas" % info["n_bound_mismatch"]
    return info
