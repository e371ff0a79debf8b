"""Bootstrap and Monte-Carlo replicas of a fit: the spread of the parameters and predictions.

`bootstrap(result, n=1000, seed=1, kind="monte-carlo", executor=None)` (also
`FitResult.bootstrap`) refits n replicas of the data, each starting from the fitted potential
with the result's own settings (varied parameters, bounds, iteration limit), and returns a
`ReplicaResult`. Two ways to refit (`refit=`):

  "linearised"   the default for fits with exact corrections (method "corrected", the default
                 fit) and first-order fits to one set of term values or binding energies:
                 replicas_linear.py. Each replica is a first-order WKB fit whose levels carry
                 the central fit's exact corrections E_exact - E_wkb, linear in the parameters
                 (their slopes from n_vary + 1 exact evaluations, once), fitted in the C core a
                 chunk of replicas per call with the GIL released. An exact refresh of the
                 replicas farthest from the centre measures the method's error at run time
                 (ReplicaResult.method_check); above `check_tolerance` (1e-2 sd) every replica
                 is refitted the full way instead, and the result says so.
  "full"         every replica through `wkbfit.fit` itself (the only way for other fits).

Kinds of replica (the default is "monte-carlo"):

  "monte-carlo"  parametric: the calculated levels of the fit plus Gaussian noise of each
                 level's stated uncertainty, multiplied by the fit's dimensionless standard
                 error sqrt(chi2/dof) when the fit scales its uncertainties (so that the replica
                 spread and the scaled covariance describe the same noise). It keeps the set of
                 levels, which in spectroscopic data is structured: every replica still has
                 the highest v and the J that fix De and re.
  "resample"     nonparametric: the fitted rows drawn with replacement (case resampling). A
                 draw may lose the few levels that fix one parameter; such a replica fails as
                 "undetermined" and is counted.

Replica i draws from numpy.random.default_rng([seed, i]): its numbers depend on the seed and on
i only, never on the executor, the chunking or the worker, so one seed gives the same result
serially, on threads and on a Dask cluster.

A replica whose fit raises, does not converge, or leaves a parameter undetermined is a failure:
counted in `n_failed`, listed with its reason in `failures`, and left out of the statistics,
which say how many replicas they rest on.

Predictions of every replica (for one isotopologue at J = 0, or J = Omega for a state with electronic
angular momentum): D0 (asymptote minus v=0 at that J),
vD (the first-order WKB value, I(D) = pi (vD + 1/2), as the core reports it), the number of bound levels, and the binding energies of the levels nearest dissociation
(the top `n_top_levels` of the central fit, NaN in a replica that does not bind one).
"""
import concurrent.futures
import math
import warnings

import numpy as np

from .executors import _check_executor as check_executor, describe_executor, run_chunks
from .observed import ObservedLevels

__all__ = ["bootstrap", "ReplicaResult", "KINDS"]

KINDS = {
    "monte-carlo": "calculated levels plus Gaussian noise of the stated uncertainties (scaled like the covariance)",
    "resample": "fitted levels drawn with replacement (case resampling)",
}

#: central probability contents of the percentile intervals reported
INTERVALS = (0.6827, 0.95)


def fit_settings(result):
    """The keyword arguments with which `wkbfit.fit` made `result` (mu excepted)."""
    stored = getattr(result, "fit_options", None)
    if stored is not None:
        return dict(stored)
    return {"method": result.method, "vary": list(result.var_names),
            "bounds": {n: p.bounds for n, p in result.params.items() if p.vary and p.bounds != (None, None)},
            "scale_uncertainties": result.scale_uncertainties,
            "max_iterations": getattr(result, "max_iterations", 200)}


def prediction_J(result):
    """J of the predictions: 0, or Omega for a state with electronic angular momentum (its lowest J)."""
    return int(getattr(result, "omega", 0) or 0)


def prediction_values(result, isotopologue, v_top, n_top=None):
    """The predictions of one fit (J = 0), as a dict of floats: the values of result.predict,
    computed directly by the core (without the uncertainty propagation) for the methods the
    core runs itself, else through result.predict. n_top: follow the top n_top bound levels
    instead of the levels v_top."""
    from . import _core
    from .fitting import _METHOD_CODES, _level_code
    J0 = prediction_J(result)
    if (result.method in _METHOD_CODES or result.method == "corrected") and not J0:
        model, params, curve = result.potential._core_args()
        mu = result.masses[isotopologue]
        res = None
        if _level_code(result.method) == _METHOD_CODES["exact"]:
            # the exact levels without the parameter derivatives that fit_levels also computes (the
            # same levels, 2-3x faster); vD is the first-order one, as fit_levels reports it
            try:
                wkb = _core.wkb_levels(model, params, curve, mu, 0.0)
                ex = _core.exact_levels(model, params, curve, float(mu), np.array([0], dtype=np.intc), None)
                E, asym, vD = np.asarray(ex["energy"]), result.potential.asymptote, wkb["vD"]
                res = True
            except (ValueError, KeyError):
                res = None
        if res is None:
            res = _core.fit_levels(model, params, curve, mu, 0.0, _level_code(result.method))
            E, asym, vD = res["energy"], res["asymptote"], res["vD"]
    else:
        pred = result.predict(isotopologue=isotopologue, J=J0)
        E, asym, vD = pred.energy, pred.energy[0] + pred.binding_energy[0] if pred.n_bound else math.nan, \
            pred.vD_first_order
    out = {"D0": asym - E[0] if len(E) else math.nan, "vD": vD, "n_bound": float(len(E))}
    if n_top is not None:
        v_top = range(max(0, len(E) - n_top), len(E))
    for v in v_top:
        out["Eb(v=%d)" % v] = float(asym - E[v]) if v < len(E) else math.nan
    return out


def replica_draw(seed, i, kind, m):
    """The random numbers of replica i over m fitted rows, from numpy.random.default_rng([seed, i]):
    standard normals (monte-carlo) or the drawn row indices (resample). The one source of the draws,
    so that full and linearised refits (replicas_linear) see the same replicas."""
    rng = np.random.default_rng([seed, i])
    return rng.standard_normal(m) if kind == "monte-carlo" else rng.integers(0, m, m)


def _replica_data(shared, i):
    """The ObservedLevels of replica i."""
    v, J, E, sig, iso = shared["v"], shared["J"], shared["energy"], shared["uncertainty"], shared["isotopologue"]
    fitted = shared["fitted_rows"]
    rows = np.nonzero(fitted)[0]
    draw = replica_draw(shared["seed"], i, shared["kind"], len(rows))
    if shared["kind"] == "monte-carlo":
        E = E.copy()
        E[rows] = shared["calculated"][rows] + shared["noise_scale"] * sig[rows] * draw
        idx = np.arange(len(v))
    else:
        idx = np.concatenate([np.nonzero(~fitted)[0], rows[draw]])
    return ObservedLevels(v[idx], J[idx], E[idx], sig[idx], iso[idx], shared["energy_zero"], "replica %d" % i)


def _replica_task(shared, i):
    """Fit replica i: (i, None, values) on success, (i, reason, None) on failure."""
    from .fitting import fit, FitWarning
    obs = _replica_data(shared, i)
    present = set(obs.isotopologues)
    masses = {k: m for k, m in shared["masses"].items() if k in present}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", FitWarning)
        try:
            res = fit(shared["start"], obs, masses, **shared["settings"])
        except (ValueError, ArithmeticError) as err:
            return i, "fit failed: %s" % err, None
        if res.status != "converged":
            return i, "not converged: %s" % res.message, None
        if res.undetermined:
            return i, "undetermined parameter%s %s" % ("s" if len(res.undetermined) > 1 else "",
                                                        ", ".join(res.undetermined)), None
        values = {n: res.params[n].value for n in shared["names"]}
        values["chi_square"] = res.chi_square
        try:
            values.update(prediction_values(res, shared["isotopologue_label"], shared["v_top"]))
        except ValueError as err:
            return i, "predictions failed: %s" % err, None
    return i, None, values


def _check_int(x, name, low):
    if isinstance(x, (bool, np.bool_)) or not isinstance(x, (int, np.integer)) or x < low:
        raise ValueError("%s=%r must be an integer >= %d" % (name, x, low))
    return int(x)


REFITS = {
    "linearised": "first-order refits with the central fit's exact corrections, linear in the parameters, checked "
                  "by exact refreshes (replicas_linear.py)",
    "full": "every replica refitted through wkbfit.fit with the fit's own settings",
}


def bootstrap(result, n=1000, seed=1, kind="monte-carlo", executor=None, *, progress=None, isotopologue=None,
              n_top_levels=3, refit=None, check_tolerance=None):
    """Refit n replicas of the data of `result`; see the module documentation.

    n: number of replicas (>= 2); seed: integer >= 0; kind: "monte-carlo" (default) or
    "resample"; executor: None/"threads" (all cores), "serial", a number of threads, a
    dask.distributed.Client or a scheduler address (see wkbfit.executors); progress: True,
    False, or None (a tqdm bar for long runs); isotopologue: label whose levels are predicted
    (default: the first isotopologue of the data); n_top_levels: how many levels nearest
    dissociation to follow.
    Returns a ReplicaResult.
    """
    from .fitting import FitResult
    if not isinstance(result, FitResult):
        raise ValueError("bootstrap needs a FitResult (from wkbfit.fit); got %r" % (result,))
    n = _check_int(n, "n", 2)
    seed = _check_int(seed, "seed", 0)
    n_top_levels = _check_int(n_top_levels, "n_top_levels", 0)
    if refit is not None and refit not in REFITS:
        raise ValueError("refit=%r is not known; use None (the default), %s" % (
            refit, " or ".join("%r (%s)" % kv for kv in REFITS.items())))
    from . import replicas_linear
    if check_tolerance is None:
        check_tolerance = replicas_linear.TOLERANCE
    if isinstance(check_tolerance, bool) or not isinstance(check_tolerance, (int, float)) or \
            not (0 < check_tolerance < math.inf):
        raise ValueError("check_tolerance=%r must be a positive number of standard deviations" % (check_tolerance,))
    if kind not in KINDS:
        raise ValueError("kind=%r is not known; use %s" % (kind, " or ".join("%r (%s)" % kv for kv in KINDS.items())))
    check_executor(executor)  # before any work on threads
    if result.status != "converged":
        raise ValueError("the fit did not converge (%s): replicas would start from a point that is not the "
                         "minimum; refit until it converges, then bootstrap" % result.message)
    if result.undetermined:
        raise ValueError("the fit leaves %s undetermined: fix %s before bootstrapping"
                         % (", ".join(result.undetermined), "them" if len(result.undetermined) > 1 else "it"))
    obs = result.observed
    if not isinstance(obs, ObservedLevels) or len(getattr(result, "free_parameters", {}) or {}):
        raise ValueError("bootstrap replicas are made for fits to one set of term values or binding energies; this "
                         "fit has several data sets or free term values (line positions), which replicas do not "
                         "cover yet")
    label = obs.isotopologues[0] if isotopologue is None else isotopologue
    if label not in result.masses:
        raise ValueError("isotopologue=%r is not one of the fit (%s)" % (label, ", ".join(map(repr, result.masses))))
    if refit == "linearised" and replicas_linear.eligible(result):
        raise ValueError("refit='linearised' is not available for this fit (%s); use refit='full'"
                         % replicas_linear.eligible(result))
    central = prediction_values(result, label, None, n_top=n_top_levels)
    v_top = [int(k[5:-1]) for k in central if k.startswith("Eb(v=")]
    # the covariance side of the table (once: the check uses it too), computed beside the replicas on a
    # thread of its own (the core releases the GIL) unless the run is serial
    side = concurrent.futures.ThreadPoolExecutor(1) if executor != "serial" else None
    try:
        return _bootstrap(result, n, seed, kind, executor, progress, label, central, v_top, refit, check_tolerance,
                          side.submit(result.predict, isotopologue=label, J=prediction_J(result)) if side else None)
    finally:
        if side:
            side.shutdown(wait=True)


def _bootstrap(result, n, seed, kind, executor, progress, label, central, v_top, refit, check_tolerance,
               prediction_future):
    from . import replicas_linear
    obs = result.observed
    cached = []

    def covariance_prediction():
        if not cached:
            cached.append(prediction_future.result() if prediction_future else
                          result.predict(isotopologue=label, J=prediction_J(result)))
        return cached[0]

    noise_scale = (result.sqrt_reduced_chi_square if (result.scale_uncertainties and result.sqrt_reduced_chi_square)
                   else 1.0)
    shared = {
        "v": np.array(obs.v), "J": np.array(obs.J), "energy": np.array(obs.energy),
        "uncertainty": np.array(obs.uncertainty), "isotopologue": np.array(obs.isotopologue),
        "energy_zero": obs.energy_zero, "fitted_rows": np.array(result.fitted_rows),
        "calculated": np.array(result.calculated), "masses": dict(result.masses), "start": result.potential,
        "settings": fit_settings(result), "names": list(result.var_names), "kind": kind, "seed": seed,
        "noise_scale": float(noise_scale), "isotopologue_label": label, "v_top": v_top,
    }
    why_not = replicas_linear.eligible(result)
    method_check = {"refit": "full", "notes": [why_not] if why_not and refit is None else []}
    out = None
    with warnings.catch_warnings():  # the pool's threads share this thread's filters
        from .fitting import FitWarning
        warnings.simplefilter("ignore", FitWarning)
        if refit != "full" and not why_not:
            shared["fast"] = replicas_linear.prepare(result, label, v_top, executor)
            out = run_chunks(replicas_linear.fast_chunk, shared, range(n), executor, progress, desc="replicas",
                             batched=True)
            method_check = replicas_linear.check(result, shared, out, covariance_prediction(), executor,
                                                 tolerance=check_tolerance)
            del shared["fast"]
            if not method_check["passed"]:
                # the linearised corrections are not good enough here: the full refits
                method_check["notes"].append("linearised replicas failed the exact check (%s): every replica was "
                                             "refitted the full way" % method_check["reason"])
                method_check["refit"] = "full"
                out = None
        if out is None:
            out = run_chunks(_replica_task, shared, range(n), executor, progress, desc="replicas")
    return ReplicaResult(result, out, kind=kind, seed=seed, executor=describe_executor(executor),
                         central_predictions=central, isotopologue=label, noise_scale=noise_scale,
                         method_check=method_check, covariance_prediction=covariance_prediction())


class ReplicaResult:
    """The replicas of one fit.

    n, n_failed, failures [(replica index, reason)], kind, seed, executor;
    names: the quantities followed (varied parameters, chi_square, D0, vD, n_bound, Eb(v=...));
    values: name -> array over the converged replicas; mean, std (sample standard deviation,
    ddof=1), intervals (name -> {probability: (low, high)} percentile intervals);
    central: the values of the fit itself; covariance_sd: name -> one-sigma uncertainty from the
    covariance matrix (linear propagation for the predictions; None where there is none);
    samples: a pandas DataFrame, one row per converged replica;
    refit: "linearised" or "full" (how the replicas were refitted); method_check: for linearised
    refits, the exact check (replicas_linear.check: the replicas checked, parameter_error_sd and
    prediction_error_sd, the largest errors found, in standard deviations; slope_effect_sd, how far
    frozen corrections would have moved them; passed; notes), for full refits {"refit": "full", ...}.
    """

    def __init__(self, fit_result, outcomes, *, kind, seed, executor, central_predictions, isotopologue,
                 noise_scale, method_check=None, covariance_prediction=None):
        self.fit_result = fit_result
        self.method_check = dict(method_check or {"refit": "full", "notes": []})
        self.refit = self.method_check["refit"]
        self.kind, self.seed, self.executor = kind, seed, executor
        self.isotopologue = isotopologue
        self.prediction_J = prediction_J(fit_result)  # J of the predictions (Omega of the state, else 0)
        self.noise_scale = float(noise_scale)
        self.n = len(outcomes)
        ok = [(i, vals) for i, reason, vals in outcomes if reason is None]
        self.failures = [(i, reason) for i, reason, vals in outcomes if reason is not None]
        self.n_failed = len(self.failures)
        self.n_converged = len(ok)
        self.replica_index = np.array([i for i, _ in ok], dtype=int)
        self.names = list(fit_result.var_names) + ["chi_square"] + list(central_predictions)
        self.values = {k: np.array([vals[k] for _, vals in ok], dtype=float) for k in self.names}
        self.central = dict(fit_result.values)
        self.central["chi_square"] = fit_result.chi_square
        self.central.update(central_predictions)
        self.covariance_sd = self._covariance_sd(fit_result, central_predictions, covariance_prediction)
        self.mean, self.std, self.intervals, self.n_finite = {}, {}, {}, {}
        for k in self.names:
            x = self.values[k]
            x = x[np.isfinite(x)]
            self.n_finite[k] = len(x)
            self.mean[k] = float(np.mean(x)) if len(x) else math.nan
            self.std[k] = float(np.std(x, ddof=1)) if len(x) > 1 else math.nan
            self.intervals[k] = {p: tuple(float(q) for q in np.percentile(x, [50 * (1 - p), 50 * (1 + p)]))
                                 if len(x) else (math.nan, math.nan) for p in INTERVALS}

    def _covariance_sd(self, res, central, pred=None):
        out = {n: res.params[n].uncertainty for n in res.var_names}
        out["chi_square"] = None
        if pred is None:
            pred = res.predict(isotopologue=self.isotopologue, J=prediction_J(res))
        # vD of the replicas is the first-order one (the core's, no threshold solve per replica): its
        # covariance uncertainty is that of the first-order vD too
        out["D0"], out["vD"], out["n_bound"] = pred.D0_uncertainty, pred.vD_first_order_uncertainty, None
        for k in central:
            if k.startswith("Eb(v="):
                out[k] = float(pred.binding_uncertainty[int(k[5:-1])])
        return out

    @property
    def samples(self):
        """One row per converged replica: its index, the parameters, chi-square and the predictions."""
        try:
            import pandas as pd
        except ImportError:
            raise ImportError("ReplicaResult.samples needs pandas: pip install pandas (or use .values, a dict of "
                              "arrays)") from None
        data = {"replica": self.replica_index}
        data.update(self.values)
        return pd.DataFrame(data)

    def summary_rows(self):
        """One dict per quantity: central value, covariance sd, replica mean, sd, intervals, unit."""
        rows = []
        for k in self.names:
            row = {"quantity": k, "unit": _unit(self.fit_result, k), "fit": self.central[k],
                   "covariance_sd": self.covariance_sd.get(k), "mean": self.mean[k], "sd": self.std[k],
                   "n": self.n_finite[k]}
            for p in INTERVALS:
                row["p%.4g_low" % (100 * p)], row["p%.4g_high" % (100 * p)] = self.intervals[k][p]
            rows.append(row)
        return rows

    def to_dataframe(self):
        """The summary table (one row per quantity) as a pandas DataFrame."""
        import pandas as pd
        return pd.DataFrame(self.summary_rows())

    def to_text(self):
        return _text(self)

    def __str__(self):
        return self.to_text()

    def __repr__(self):
        return "<ReplicaResult %s: %d replicas (%d failed), seed %d, %s>" % (
            self.kind, self.n, self.n_failed, self.seed, ", ".join(
                "sd(%s)=%.3g" % (k, self.std[k]) for k in self.fit_result.var_names))

    def _repr_html_(self):
        return _html(self)

    def plot(self, ax=None, **options):
        """Histograms (or corner=True, a corner plot) against the covariance matrix: wkbfit.plots.replicas."""
        from .plots import replicas
        return replicas(self, ax, **options)


def _unit(res, name):
    if name in ("chi_square", "vD", "n_bound"):
        return ""
    if name == "D0" or name.startswith("Eb("):
        return "cm-1"
    from .reports import _UNITS
    return _UNITS.get(name, "")


def _fmt(x):
    if x is None or (isinstance(x, float) and not math.isfinite(x)):
        return "-"
    return "%.10g" % x


def _header(r):
    lines = ["%s replicas of the fit of a %s potential (%s): %d replicas, %d converged, %d failed; seed %d; %s" % (
        r.kind, type(r.fit_result.potential).__name__, KINDS[r.kind], r.n, r.n_converged, r.n_failed, r.seed,
        r.executor)]
    if r.kind == "monte-carlo":
        lines.append("noise: stated uncertainties x %.4g%s" % (
            r.noise_scale, " (the sqrt of reduced chi-square, as the scaled covariance)" if r.noise_scale != 1
            else ""))
    lines.append("predictions for isotopologue %s at J = %d; Eb = asymptote - E, binding energy" % (
        r.isotopologue if r.isotopologue is not None else "(unnamed)", r.prediction_J))
    lines.append(_method_line(r.method_check))
    lines.extend("note: %s" % note for note in r.method_check.get("notes", ()) if note)
    return lines


def _method_line(check):
    """One line on how the replicas were refitted and, for linearised refits, their exact check."""
    if check["refit"] != "linearised":
        return "refits: %s" % REFITS["full"]
    if not check.get("checked"):
        return "refits: linearised (first-order WKB refits, no exact corrections to check)"
    return ("refits: linearised (first-order WKB + the central fit's exact corrections, linear in the parameters); "
            "exact check of %d replicas (the farthest from the centre): parameters within %.2g sd, predictions "
            "within %.2g sd of the exact problem (tolerance %.2g sd); frozen corrections would move them %.2g sd"
            % (len(check["checked"]), check["parameter_error_sd"], check["prediction_error_sd"],
               check["tolerance"], check["slope_effect_sd"])
            + ("; %d predicted levels lay above the central exact count and took its top level's correction"
               % check["extrapolated_levels"] if check.get("extrapolated_levels") else ""))


def _text(r):
    lines = _header(r)
    lines.append("")
    lines.append("%-14s %-5s %18s %13s %18s %13s %8s  %-31s %-31s" % (
        "quantity", "unit", "fit", "covariance sd", "replica mean", "replica sd", "sd/cov",
        "68.27% interval", "95% interval"))
    for row in r.summary_rows():
        ratio = (row["sd"] / row["covariance_sd"]) if row["covariance_sd"] else None
        lines.append("%-14s %-5s %18s %13s %18s %13s %8s  [%-14s %14s] [%-14s %14s]%s" % (
            row["quantity"], row["unit"], _fmt(row["fit"]), _fmt(row["covariance_sd"]), _fmt(row["mean"]),
            _fmt(row["sd"]), "%.3f" % ratio if ratio else "-", _fmt(row["p68.27_low"]), _fmt(row["p68.27_high"]),
            _fmt(row["p95_low"]), _fmt(row["p95_high"]),
            "" if row["n"] == r.n_converged else "  (bound in %d replicas)" % row["n"]))
    if r.failures:
        lines.append("")
        lines.append("failed replicas (%d, left out of the statistics):" % r.n_failed)
        for i, reason in r.failures[:10]:
            lines.append("  replica %d: %s" % (i, reason))
        if r.n_failed > 10:
            lines.append("  ... and %d more (see .failures)" % (r.n_failed - 10))
    return "\n".join(lines)


def _html(r):
    import html
    head = "".join("<th>%s</th>" % h for h in ("quantity", "unit", "fit", "covariance sd", "replica mean",
                                               "replica sd", "68.27% interval", "95% interval", "n"))
    body = "".join("<tr><td>%s</td><td>%s</td><td>%s</td><td>%s</td><td>%s</td><td>%s</td><td>[%s, %s]</td>"
                   "<td>[%s, %s]</td><td>%d</td></tr>" % (
                       html.escape(row["quantity"]), row["unit"], _fmt(row["fit"]), _fmt(row["covariance_sd"]),
                       _fmt(row["mean"]), _fmt(row["sd"]), _fmt(row["p68.27_low"]), _fmt(row["p68.27_high"]),
                       _fmt(row["p95_low"]), _fmt(row["p95_high"]), row["n"]) for row in r.summary_rows())
    fails = ""
    if r.failures:
        fails = "<p>%d failed replicas (left out of the statistics), e.g. replica %d: %s</p>" % (
            r.n_failed, r.failures[0][0], html.escape(r.failures[0][1]))
    return "<div><p>%s</p><table><tr>%s</tr>%s</table>%s</div>" % (
        "<br>".join(html.escape(x) for x in _header(r)), head, body, fails)
