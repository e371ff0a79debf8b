"""Model scans: fit a family of candidate potentials to the same levels and rank them.

`scan_models(observed, candidates, mu=None, executor=None)` fits every candidate (a starting
potential, or a pair (potential, dict of fit options for that candidate)) through `wkbfit.fit`
and returns a `ModelScan`: a ranked table with chi-square, the sqrt of reduced chi-square
sqrt(chi2/dof), the information criteria, and the predictions of each model with their spread
over the acceptable models (the model dependence of D0, vD and the last levels).

Information criteria, with N the number of fitted levels and k the number of varied parameters.
With the stated (Gaussian) uncertainties the maximised log-likelihood is
ln L = -chi2/2 - sum_i ln(sqrt(2 pi) sigma_i); the sum is the same for every candidate fitted to
the same data and is left out, so

    AIC = chi2 + 2 k          [H. Akaike, IEEE Trans. Autom. Control 19, 716 (1974)]
    BIC = chi2 + k ln N       [G. Schwarz, Ann. Stat. 6, 461 (1978)]

Only differences between candidates mean anything. The models are ranked by `rank_by` ("bic",
the default: it does not keep adding parameters as the data grow, which AIC does; or "aic",
"chi2"). A model is acceptable when its fit converged with every parameter determined and its
criterion lies within `acceptable_delta` (default 10) of the best: a difference above 10 is
"very strong" evidence against a model on the scale of Kass & Raftery [J. Am. Stat. Assoc. 90,
773 (1995)]. Both criteria assume the stated uncertainties are right; where sqrt(chi2/dof) of
the best model is far from 1 the ranking is only indicative, and the table says so.
"""
import math
import warnings

import numpy as np

from .executors import describe_executor, run_chunks
from .observed import read_levels
from .potentials import Potential

__all__ = ["scan_models", "ModelScan", "information_criteria", "mlr_candidates", "RANK_BY"]

RANK_BY = ("bic", "aic", "chi2")


def information_criteria(chi_square, n_levels, n_params):
    """(AIC, BIC) = (chi2 + 2k, chi2 + k ln N) of a weighted least-squares fit (see the module notes)."""
    return chi_square + 2.0 * n_params, chi_square + n_params * math.log(n_levels)


def mlr_candidates(start, n_betas=range(2, 9), p=None, q=None, r_ref=None):
    """MLR starting potentials over a grid of sizes and shapes, each from `start` (an MLR).

    n_betas: numbers of exponent coefficients; p, q, r_ref: sequences of values (None: the
    start's own). Each candidate keeps De, re and the long-range coefficients of `start` and
    its first coefficients, truncated or padded with zeros. Returns a list of MLR objects, in
    the order n_betas, then p, q, r_ref.
    """
    from .potentials import MLR
    if not isinstance(start, MLR):
        raise ValueError("mlr_candidates needs an MLR starting potential; got %r" % (start,))
    base = start.params
    betas = list(start.betas)
    out = []
    for n in n_betas:
        if isinstance(n, bool) or int(n) != n or not 1 <= n <= 8:
            raise ValueError("n_betas holds %r; each must be a whole number 1..8" % (n,))
        b = (betas + [0.0] * 8)[:int(n)]
        for pp in (base["p"],) if p is None else p:
            for qq in (base["q"],) if q is None else q:
                for rr in (base["r_ref"],) if r_ref is None else r_ref:
                    out.append(MLR(De=base["De"], re=base["re"], C6=base["C6"], C8=base["C8"], C10=base["C10"],
                                   betas=b, p=pp, q=qq, r_ref=rr))
    return out


def _label(pot):
    """A short name of a candidate: the model and its fixed shape settings."""
    p = pot.params
    name = type(pot).__name__
    if name == "MLR":
        return "MLR(N=%d, p=%g, q=%g, r_ref=%.4g)" % (len(pot.betas), p["p"], p["q"], p["r_ref"])
    if name == "EMO":
        return "EMO(N=%d, p=%g)" % (len(pot.betas), p["p"])
    if name == "LennardJones":
        return "LennardJones(n=%g, m=%g)" % (p["n"], p["m"])
    return name


def _scan_task(shared, item):
    """Fit one candidate; returns a dict (the FitResult under "result", or the reason under "failure")."""
    from .fitting import fit, FitWarning
    index, pot, options = item
    opts = dict(shared["options"])
    opts.update(options)
    out = {"index": index, "candidate": _label(pot), "start": pot}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", FitWarning)
        try:
            res = fit(pot, shared["observed"], shared["mu"], **opts)
        except (ValueError, ArithmeticError) as err:
            out["failure"] = "fit failed: %s" % err
            return out
        out["result"] = res
        if res.status != "converged":
            out["failure"] = "not converged: %s" % res.message
        elif res.undetermined:
            out["failure"] = "undetermined: %s" % ", ".join(res.undetermined)
        try:
            pred = res.predict(isotopologue=shared["isotopologue"])
            out.update(D0=pred.D0, vD=pred.vD, n_bound=pred.n_bound, binding=np.array(pred.binding_energy))
        except ValueError as err:
            out.setdefault("failure", "predictions failed: %s" % err)
    return out


def scan_models(observed, candidates, mu=None, executor=None, *, rank_by="bic", acceptable_delta=10.0,
                isotopologue=None, n_top_levels=3, progress=None, **fit_options):
    """Fit every candidate potential to `observed` and rank them; see the module documentation.

    observed: levels (anything `read_levels` takes); candidates: a list of starting potentials,
    or of pairs (potential, dict of `fit` options for it, e.g. {"vary": [...]}); mu: as for
    `fit`; executor: None/"threads" (all cores), "serial", a number of threads, a
    dask.distributed.Client or a scheduler address; rank_by: "bic" (default), "aic" or
    "chi2"; acceptable_delta: criterion difference from the best within which a model is
    acceptable; isotopologue: whose levels are predicted (default: the data's first);
    n_top_levels: levels nearest dissociation to compare; fit_options: passed to every fit.
    Returns a ModelScan.
    """
    obs = read_levels(observed)
    if rank_by not in RANK_BY:
        raise ValueError("rank_by=%r is not known; use one of %s" % (rank_by, ", ".join(RANK_BY)))
    try:
        acceptable_delta = float(acceptable_delta)
    except (TypeError, ValueError):
        raise ValueError("acceptable_delta=%r must be a number >= 0" % (acceptable_delta,)) from None
    if not acceptable_delta >= 0:
        raise ValueError("acceptable_delta=%r must be a number >= 0" % (acceptable_delta,))
    if isinstance(candidates, Potential):
        candidates = [candidates]
    try:
        candidates = list(candidates)
    except TypeError:
        raise ValueError("candidates must be a list of starting potentials; got %r" % (candidates,)) from None
    if not candidates:
        raise ValueError("candidates is empty: give at least one starting potential")
    items = []
    for k, cand in enumerate(candidates):
        options = {}
        if isinstance(cand, tuple) and len(cand) == 2 and isinstance(cand[1], dict):
            cand, options = cand
        if not isinstance(cand, Potential):
            raise ValueError("candidates[%d]=%r is not a wkbfit potential (or a pair (potential, fit options))"
                             % (k, cand))
        items.append((k, cand, dict(options)))
    label = obs.isotopologues[0] if isotopologue is None else isotopologue
    if label not in obs.isotopologues:
        raise ValueError("isotopologue=%r is not in the data (%s)" % (label, ", ".join(map(repr, obs.isotopologues))))
    masses = obs.masses_by_isotopologue(mu)  # bad masses fail here, once, not in every candidate
    shared = {"observed": obs, "mu": masses, "options": dict(fit_options), "isotopologue": label}
    outcomes = run_chunks(_scan_task, shared, items, executor, progress, desc="models")
    return ModelScan(outcomes, rank_by=rank_by, acceptable_delta=acceptable_delta, n_top_levels=n_top_levels,
                     isotopologue=label, executor=describe_executor(executor))


class ModelScan:
    """The ranked candidates of a model scan.

    rows: one dict per candidate, best first (candidate, model, k, N, chi2, dof,
    sqrt(chi2/dof), AIC, BIC, delta (criterion minus the best), acceptable, D0, vD, n_bound,
    Eb(v=...) binding energies of the levels nearest dissociation of the best model, failure);
    results: the FitResults in candidate order (None where a fit raised); best: the best
    FitResult; spread: quantity -> {mean, sd, min, max, n_models} over the acceptable models;
    n_failed, failures [(candidate index, reason)].
    """

    def __init__(self, outcomes, *, rank_by, acceptable_delta, n_top_levels, isotopologue, executor):
        self.rank_by, self.acceptable_delta = rank_by, acceptable_delta
        self.isotopologue, self.executor = isotopologue, executor
        self.results = [o.get("result") for o in outcomes]
        self.failures = [(o["index"], o["failure"]) for o in outcomes if "failure" in o]
        self.n_failed = len(self.failures)
        rows = []
        for o in outcomes:
            res = o.get("result")
            row = {"index": o["index"], "candidate": o["candidate"], "failure": o.get("failure", "")}
            if res is not None:
                N = int(np.count_nonzero(res.fitted_rows))
                k = len(res.var_names)
                aic, bic = information_criteria(res.chi_square, N, k)
                row.update(k=k, N=N, chi2=res.chi_square, dof=res.dof,
                           sigma=res.sqrt_reduced_chi_square if res.sqrt_reduced_chi_square is not None else math.nan,
                           aic=aic, bic=bic, D0=o.get("D0", math.nan), vD=o.get("vD", math.nan),
                           n_bound=o.get("n_bound", 0))
            row["_binding"] = o.get("binding", np.zeros(0))
            rows.append(row)
        key = {"bic": "bic", "aic": "aic", "chi2": "chi2"}[rank_by]
        ranked = sorted(rows, key=lambda r: (bool(r["failure"]), r.get(key, math.inf), r["index"]))
        best_value = ranked[0].get(key, math.inf) if ranked and not ranked[0]["failure"] else math.inf
        for r in ranked:
            r["delta"] = r.get(key, math.inf) - best_value
            r["acceptable"] = (not r["failure"]) and r["delta"] <= acceptable_delta
        self.best = self.results[ranked[0]["index"]] if math.isfinite(best_value) else None
        nb = ranked[0].get("n_bound", 0) if self.best is not None else 0
        self.v_top = list(range(max(0, nb - n_top_levels), nb))
        for r in ranked:
            b = r.pop("_binding")
            for v in self.v_top:
                r["Eb(v=%d)" % v] = float(b[v]) if v < len(b) else math.nan
        self.rows = ranked
        self.quantities = ["D0", "vD", "n_bound"] + ["Eb(v=%d)" % v for v in self.v_top]
        self.spread = {}
        good = [r for r in ranked if r["acceptable"]]
        for q in self.quantities:
            x = np.array([r[q] for r in good], dtype=float)
            x = x[np.isfinite(x)]
            self.spread[q] = {"mean": float(np.mean(x)) if len(x) else math.nan,
                              "sd": float(np.std(x, ddof=1)) if len(x) > 1 else math.nan,
                              "min": float(np.min(x)) if len(x) else math.nan,
                              "max": float(np.max(x)) if len(x) else math.nan, "n_models": len(x)}

    @property
    def n_acceptable(self):
        return sum(r["acceptable"] for r in self.rows)

    def to_dataframe(self):
        """The ranked table as a pandas DataFrame (one row per candidate, best first)."""
        import pandas as pd
        cols = ["candidate", "k", "N", "chi2", "dof", "sigma", "aic", "bic", "delta", "acceptable", "D0", "vD",
                "n_bound"] + ["Eb(v=%d)" % v for v in self.v_top] + ["failure"]
        return pd.DataFrame([{c: r.get(c) for c in cols} for r in self.rows], columns=cols)

    def to_text(self):
        return _text(self)

    def __str__(self):
        return self.to_text()

    def __repr__(self):
        b = self.rows[0] if self.rows else None
        return "<ModelScan: %d candidates, %d acceptable, %d failed; best %s (%s=%.6g)>" % (
            len(self.rows), self.n_acceptable, self.n_failed, b["candidate"] if b else "-", self.rank_by.upper(),
            b.get(self.rank_by, math.nan) if b else math.nan)

    def _repr_html_(self):
        return _html(self)


def _f(x, fmt="%.10g"):
    if x is None or (isinstance(x, float) and not math.isfinite(x)):
        return "-"
    return fmt % x


def _intro(scan):
    lines = ["Model scan: %d candidates (%d acceptable, %d failed), ranked by %s; %s" % (
        len(scan.rows), scan.n_acceptable, scan.n_failed, scan.rank_by.upper(), scan.executor),
        "AIC = chi2 + 2k (Akaike 1974); BIC = chi2 + k ln N (Schwarz 1978); k varied parameters, N fitted levels; "
        "acceptable: converged and delta <= %g" % scan.acceptable_delta,
        "predictions for isotopologue %s at J = 0: D0 and Eb = asymptote - E in cm-1" % (
            scan.isotopologue if scan.isotopologue is not None else "(unnamed)")]
    best = scan.rows[0] if scan.rows and not scan.rows[0]["failure"] else None
    if best is not None and not 0.5 <= best["sigma"] <= 2.0:
        lines.append("note: sqrt(chi2/dof) of the best model is %.3g, far from 1: the stated uncertainties do not "
                     "describe the residuals, so the criteria rank only indicatively" % best["sigma"])
    return lines


def _text(scan):
    lines = _intro(scan) + [""]
    top = ["Eb(v=%d)" % v for v in scan.v_top]
    lines.append("%4s %-36s %3s %5s %14s %9s %12s %12s %10s %3s %16s %9s %4s %s" % (
        "rank", "candidate", "k", "N", "chi2", "sigma", "AIC", "BIC", "delta", "ok", "D0 [cm-1]", "vD", "nb",
        " ".join("%14s" % t for t in top)))
    for i, r in enumerate(scan.rows):
        if "chi2" not in r:
            lines.append("%4d %-36s  %s" % (i + 1, r["candidate"], r["failure"]))
            continue
        lines.append("%4d %-36s %3d %5d %14.6g %9.4g %12.6g %12.6g %10.4g %3s %16.8f %9.4f %4d %s%s" % (
            i + 1, r["candidate"][:36], r["k"], r["N"], r["chi2"], r["sigma"], r["aic"], r["bic"], r["delta"],
            "yes" if r["acceptable"] else "no", r["D0"], r["vD"], r["n_bound"],
            " ".join("%14s" % _f(r[t], "%.6f") for t in top), "  (%s)" % r["failure"] if r["failure"] else ""))
    lines.append("")
    lines.append("spread over the %d acceptable models:" % scan.n_acceptable)
    for q in scan.quantities:
        s = scan.spread[q]
        lines.append("  %-10s mean %-18s sd %-12s range [%s, %s]" % (
            q, _f(s["mean"]), _f(s["sd"], "%.4g"), _f(s["min"]), _f(s["max"])))
    return "\n".join(lines)


def _html(scan):
    import html
    top = ["Eb(v=%d)" % v for v in scan.v_top]
    cols = ["candidate", "k", "N", "chi2", "sigma", "aic", "bic", "delta", "acceptable", "D0", "vD", "n_bound"] + top
    head = "".join("<th>%s</th>" % html.escape(c) for c in ["rank"] + cols)
    body = ""
    for i, r in enumerate(scan.rows):
        cells = [str(i + 1)] + [html.escape(str(r.get(c))) if not isinstance(r.get(c), float) else _f(r[c], "%.8g")
                                for c in cols]
        body += "<tr>%s</tr>" % "".join("<td>%s</td>" % c for c in cells)
    spread = "".join("<tr><td>%s</td><td>%s</td><td>%s</td><td>%s</td><td>%s</td></tr>" % (
        html.escape(q), _f(s["mean"]), _f(s["sd"], "%.4g"), _f(s["min"]), _f(s["max"]))
        for q, s in scan.spread.items())
    return ("<div><p>%s</p><table><tr>%s</tr>%s</table><table><caption>spread over the acceptable models"
            "</caption><tr><th>quantity</th><th>mean</th><th>sd</th><th>min</th><th>max</th></tr>%s</table></div>"
            % ("<br>".join(html.escape(x) for x in _intro(scan)), head, body, spread))
