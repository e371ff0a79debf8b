"""Benchmark: weighted least-squares fits of a potential to 50 levels.

Three fits: a Morse potential (3 parameters: De, re, a), a Lennard-Jones (12, 6) potential with
fixed exponents (2 parameters: De, re), and a Lennard-Jones potential with varied exponents
(4 parameters: De, re, n, m). Each is fitted to 50 synthetic levels (levels of a known
potential plus seeded Gaussian noise of 0.01 cm-1), from the same start, by
  * wkbfit.fit (the C core: GSL Levenberg-Marquardt with analytic Jacobians), and
  * scipy.optimize.least_squares over a SciPy WKB baseline written as a careful user would:
    the potential and its centrifugal term in NumPy-free Python, scipy.optimize.brentq for the
    turning points and for each level's energy, scipy.integrate.quad for the action, levels of
    one J solved in ascending v with the previous level as the lower end of the bracket, and the
    default finite-difference Jacobian of least_squares.
Data: exact-solver levels of the known potential (method="exact"), so that first-order WKB fits are
biased and the default fit is not. Prints, per case, milliseconds per fit (one thread) of
  * wkbfit's first-order fit (method="wkb"): the same method as the baseline, so the same minimum
    (largest difference of the two minima in units of the fitted uncertainties printed beside it):
    this ratio is the like-for-like speed-up;
  * wkbfit's default fit (method="corrected": first-order iterations plus exact per-level
    corrections; exact-solver quality, a different, unbiased minimum): its ratio to the same baseline
    is printed for information (a baseline at its accuracy would need an exact solver in SciPy);
and the distance of each minimum from the true parameters, in fitted uncertainties. Then, from the same
run, where a first-order fit's time goes: the C Levenberg-Marquardt run alone (its captured call re-timed),
the method-error check after the fit as fit() runs it (screened: the distance to the matched-rule level,
exact levels only for rows within a factor 2 of the 0.1 sigma threshold; method_error.py) and the rest
(Python set-up and analysis), with the check as it was (exact levels of every row) beside it; the ratios
to the baseline of the whole fit() (what a user runs), of the fit work alone (fit() minus its check) and
of the C run alone; and the check on data over many J values.

Targets (issue 4): <= 10 ms per fit on one core; >= 100x faster than the SciPy baseline, reaching
the same minimum; issue 10: >= 1000x.  Times are CPU time (time.process_time; wkbfit best of three rounds,
the baseline best of two). Measured 2026-12-04 (2 cores shared by other jobs, load 3-4), two runs each,
interleaved with a copy of the tree before the Python part was cut: whole fit() 418-433x (Morse),
429-431x (LJ 2 par.), 537-559x (LJ 4 par.), before 350-371x, 354-357x, 492-499x; fit() 0.96-1.01, 1.01-1.05,
2.27-2.37 ms (before 1.14-1.23, 1.23-1.27, 2.51 ms); the Python part alone (core calls answered from a
cache) 0.26-0.31, 0.31, 0.29-0.32 ms (before 0.45-0.47, 0.48-0.54, 0.51-0.59 ms); the C run alone
1044-1107x, 1242-1317x, 1054-1141x; the check's matched-rule levels 0.26-0.28, 0.27-0.29, 0.64-0.66 ms.
Issue 10 (helper HH), two runs each interleaved with a build of main at 2763b5c (same load): whole fit() 434-437x,
424-435x, 550-568x (before 426-432x, 420-450x, 536-556x: the same within the noise of ~3 %); the C run of the
4-parameter fit 0.99-1.00 ms (before 1.07-1.08 ms: first-order orbits 308 -> 280, the seeds corrected by the
misses of the levels below, csrc/fit_levels.c; Morse 290 -> 274 and LJ 2 par. 214 -> 211 orbits, their C runs
unchanged within noise); the default fits 6.46-6.63, 5.29-5.36, 7.76-8.10 ms (before 6.64-6.82, 5.26-5.29,
7.83-7.97). Where the C run's time goes (perf, per evaluation and max_iterations = 0..4): GSL and csrc/fit.c's
bookkeeping are below 3 %; the run is 1 + n_eval evaluations of the 50 levels (n_eval counts the solver's, not
the start's), each ~1.1 orbits per level, and the first step's orbits were the only excess; v = 0 and 1 of
each well take 2-3 orbits in every evaluation however close their start (the Newton test has no curvature
from neighbours there; quantize.c). The 4-parameter Lennard-Jones levels spend a third of their time in pow().
Issue 10 (helper II), two runs each interleaved with a build of main at aef4891 (load ~1.5-2): the C run 0.31,
0.30-0.31, 0.95-0.99 ms before -> 0.29-0.31, 0.31-0.32, 0.74 ms (the 4-parameter LJ: non-integer exponents take one
log and two exp per point instead of two pow, the log shared with d/dn, d/dm; csrc/potential.c), first-order orbits
per C run 274 -> 266, 211 -> 208, 279 -> 267 (then with F'' of v = 0 carried between evaluations too, since
removed: it kept state across calls for no measurable time; v = 1 keeps the secant to v = 0); whole fit() 0.78-0.82,
0.85-0.86, 1.90-2.02 ms -> 0.73-0.80, 0.88, 1.55-1.58 ms. The 4-parameter ratios fell (572-558x -> 511-528x) only
because the baseline got faster: the exact-solver data moved by <= 3e-11 cm-1 (the ulp-level change of the
potential) and least_squares stops after 10 evaluations instead of 14 (1.08-1.13 -> 0.81-0.82 s).
1000x is out of reach for the whole fit: the C Levenberg-Marquardt run alone (3-4 steps of 50 first-order
levels with their Jacobian, ~5.5 evaluations' worth of time) is at about 1000-1300x, and the check's one
core call of matched-rule levels (second-order WKB: five orbits per level for dK/dE) costs 0.6-0.7 of it.
Run: python3 tests/benchmarks/bench_fit.py
"""
import math
import os
import sys
import time
import warnings

import numpy as np
from scipy.integrate import IntegrationWarning
from scipy.optimize import least_squares

sys.path.insert(0, os.path.join(os.path.dirname(__file__), "..", "..", "pkg"))
import wkbfit  # noqa: E402
from scipy_wkb import ScipyWKB  # noqa: E402  (tests/benchmarks/scipy_wkb.py)
from wkbfit import _core  # noqa: E402


def time_call(fn, min_time=0.5, rounds=3):
    """CPU seconds per call (time.process_time: the machine is shared), the best of `rounds` means over at
    least min_time / rounds seconds each."""
    best = math.inf
    for _ in range(rounds):
        n, t0 = 0, time.process_time()
        while True:
            fn()
            n += 1
            dt = time.process_time() - t0
            if dt >= min_time / rounds:
                break
        best = min(best, dt / n)
    return best


def python_alone(fn):
    """CPU seconds per call of fn (a fit) with the core's Levenberg-Marquardt run and matched-rule levels
    answered from a cache of their first answers: the Python part alone (set-up, analysis, the check's
    bookkeeping)."""
    real = {name: getattr(_core, name) for name in ("fit_run", "wkb_levels")}
    cache = {}

    def cached(name):
        def call(*args, **kwargs):
            key = (name, len(args), tuple(sorted(kwargs)))
            if key not in cache:
                cache[key] = real[name](*args, **kwargs)
            return cache[key]
        return call
    try:
        for name in real:
            setattr(_core, name, cached(name))
        return time_call(fn, 0.3)
    finally:
        for name, f in real.items():
            setattr(_core, name, f)
from wkbfit import method_error  # noqa: E402
from wkbfit.fitting import FitWarning  # noqa: E402


# ------------------------------------------------------------------ the SciPy baseline
def scipy_fit(model, start, obs, mu, vary_idx):
    """scipy.optimize.least_squares over the baseline levels; returns (parameters, uncertainties)."""
    Js = sorted(set(obs.J.tolist()))
    groups = [(J, np.nonzero(obs.J == J)[0]) for J in Js]
    full = np.array(start, dtype=float)

    def residuals(x):
        p = full.copy()
        p[vary_idx] = x
        calc = np.empty(len(obs))
        for J, idx in groups:
            calc[idx] = ScipyWKB(model, p, mu, J).levels(obs.v[idx].tolist())
        return (obs.energy - calc) / obs.uncertainty

    res = least_squares(residuals, full[vary_idx], x_scale="jac", ftol=1e-12, xtol=1e-12, gtol=1e-12)
    dof = len(obs) - len(vary_idx)
    cov = np.linalg.inv(res.jac.T @ res.jac) * (2 * res.cost / dof)
    return res.x, np.sqrt(np.diag(cov)), res.nfev


def time_parts(start, obs, mu, vary):
    """Where one first-order fit's time goes: seconds of (the C Levenberg-Marquardt run alone, the
    method-error check as fit() runs it, the same check with exact levels for every row as it was before
    the semiclassical screen), and the check's note. The calls are captured from one fit() and re-timed
    alone with the same arguments."""
    seen = {}
    real_attach, real_run = method_error.attach, wkbfit._core.fit_run

    def keep(result, rows, out, args=None):
        seen.update(result=result, out=out, args=args)
        return real_attach(result, rows, out, args)

    def keep_run(**kw):
        seen["run"] = kw
        return real_run(**kw)
    method_error.attach, wkbfit._core.fit_run = keep, keep_run
    try:
        wkbfit.fit(start, obs, mu, vary=vary, method="wkb")
    finally:
        method_error.attach, wkbfit._core.fit_run = real_attach, real_run
    res, out, args, run = seen["result"], seen["out"], seen["args"], seen["run"]
    t_core = time_call(lambda: real_run(**run), 0.3)
    screened = time_call(lambda: method_error.row_method_errors("wkb", args, out, screen=True), 0.3)
    all_exact = time_call(lambda: method_error.row_method_errors("wkb", args, out), 0.3)
    return t_core, screened, all_exact, res.method_error_note


def many_J_checks():
    """The check on data spread over many J values (the usual shape of measured term values): an invented
    Lennard-Jones (12,6) well (De = 4000 cm-1, re = 4 A), two invented isotopologues (20 and 21 u), rows
    v = 0..nv-1 at J = 0..nJ-1 of both, their first-order levels (timing only)."""
    print("\nthe check on data over many J values (ms, same run): screened as fit() runs it, and all-exact")
    start = wkbfit.LennardJones(De=4040.0, re=4.04)
    true = wkbfit.LennardJones(De=4000.0, re=4.0)
    for nv, nJ in ((1, 50), (3, 30), (10, 50), (20, 100)):
        rows = {"v": [], "J": [], "energy": [], "isotopologue": []}
        masses = {"a": 20.0, "b": 21.0}
        for label, mu in masses.items():
            table = wkbfit.levels(true, mu, v=list(range(nv)), J=list(range(nJ)), order=1, ends="maslov")
            rows["v"] += table.v.tolist()
            rows["J"] += table.J.tolist()
            rows["energy"] += table.energy.tolist()
            rows["isotopologue"] += [label] * len(table)
        rows["uncertainty"] = np.full(len(rows["v"]), 0.01)
        obs = wkbfit.read_levels(rows)
        t_fit = time_call(lambda: wkbfit.fit(start, obs, masses, method="wkb"), 0.3)
        _, t_check, t_exact, _ = time_parts(start, obs, masses, None)
        print("    %5d rows in %3d (isotopologue, J) groups: fit %.1f, check %.2f, all-exact check %.2f (%.1fx)"
              % (len(obs), 2 * nJ, t_fit * 1e3, t_check * 1e3, t_exact * 1e3, t_exact / t_check))


# ------------------------------------------------------------------ the cases
def synthetic(true, mu, vs, Js, sigma, seed):
    exact = np.empty(len(vs))
    for J in sorted(set(Js)):
        idx = [i for i, j in enumerate(Js) if j == J]
        exact[idx] = wkbfit.levels(true, mu, v=[vs[i] for i in idx], J=J, method="exact").energy
    rng = np.random.default_rng(seed)
    return wkbfit.read_levels({"v": vs, "J": Js, "energy": exact + rng.normal(0, sigma, len(vs)),
                               "uncertainty": np.full(len(vs), sigma)})


def main():
    # quad reports rounding-level trouble next to the square-root end points; the levels are
    # still good to ~1e-10 cm-1 (the minima agree with wkbfit's), so keep the output readable
    warnings.simplefilter("ignore", IntegrationWarning)
    # the first-order fits warn that their levels are off by more than 0.1 sigma: they are (data from
    # the exact solver), which the printed distances from the true parameters show
    warnings.simplefilter("ignore", FitWarning)
    mu_lics = wkbfit.reduced_mass("7Li", "133Cs")
    cases = [
        ("Morse, 3 parameters (v=0..24 at J=0 and J=10)", wkbfit.Morse(De=5875.0, re=3.67, a=0.6),
         wkbfit.Morse(De=5700.0, re=3.62, a=0.61), mu_lics, list(range(25)) * 2, [0] * 25 + [10] * 25, None),
        ("Lennard-Jones (12,6), 2 parameters (v=0..49, J=0)", wkbfit.LennardJones(De=2000.0, re=4.5),
         wkbfit.LennardJones(De=1950.0, re=4.45), 40.0, list(range(50)), [0] * 50, None),
        ("Lennard-Jones, 4 parameters (v=0..24 at J=0 and J=20)", wkbfit.LennardJones(De=2000.0, re=4.5, n=11.0, m=6.5),
         wkbfit.LennardJones(De=1990.0, re=4.49, n=11.2, m=6.4), 40.0, list(range(25)) * 2, [0] * 25 + [20] * 25,
         {"n": True, "m": True}),
    ]
    print("wkbfit fit benchmark (GSL %s); 50 levels each, sigma 0.01 cm-1; one thread" % wkbfit.GSL_VERSION)
    print("%-55s %10s %12s %9s %12s %9s %14s" % ("case", "wkb ms", "SciPy s", "ratio", "default ms", "ratio",
                                                  "max |diff|/sd"))
    worst_ms, worst_ratio = 0.0, math.inf
    checks, ref_times = [], []
    for title, true, start, mu, vs, Js, vary in cases:
        obs = synthetic(true, mu, vs, Js, 0.01, seed=len(title))
        first = wkbfit.fit(start, obs, mu, vary=vary, method="wkb")
        default = wkbfit.fit(start, obs, mu, vary=vary)
        assert first.success and default.success, (first.message, default.message)
        t_first = time_call(lambda: wkbfit.fit(start, obs, mu, vary=vary, method="wkb"))
        t_core, t_check, t_check_exact, note = time_parts(start, obs, mu, vary)
        t_python = python_alone(lambda: wkbfit.fit(start, obs, mu, vary=vary, method="wkb"))
        checks.append((title, t_first, t_core, t_check, t_check_exact, note, t_python))
        t_default = time_call(lambda: wkbfit.fit(start, obs, mu, vary=vary))
        names = list(start.param_names)
        vary_idx = [names.index(n) for n in first.var_names]
        t_ref = math.inf
        for _ in range(2):  # best of two (CPU time)
            t0 = time.process_time()
            x_ref, sd_ref, nfev = scipy_fit(start.model, start._params, obs, mu, vary_idx)
            t_ref = min(t_ref, time.process_time() - t0)
        ref_times.append(t_ref)
        diff = max(abs(first.params[n].value - x_ref[j]) / first.params[n].uncertainty
                   for j, n in enumerate(first.var_names))
        print("%-55s %10.2f %12.2f %8.0fx %12.2f %8.0fx %14.2e" % (title, t_first * 1e3, t_ref, t_ref / t_first,
                                                                t_default * 1e3, t_ref / t_default, diff))
        truth = dict(zip(true.param_names, true._params))
        for j, n in enumerate(first.var_names):
            print("    %-3s wkb %.10g +/- %.3g (%+.1f sd from true)   default %.10g (%+.1f sd)   SciPy %.10g +/- %.3g"
                  % (n, first.params[n].value, first.params[n].uncertainty,
                     (first.params[n].value - truth[n]) / first.params[n].uncertainty, default.params[n].value,
                     (default.params[n].value - truth[n]) / default.params[n].uncertainty, x_ref[j], sd_ref[j]))
        worst_ms = max(worst_ms, t_first * 1e3)
        worst_ratio = min(worst_ratio, t_ref / t_first)
    print("\nwhere a first-order fit's time goes (ms, same run): the C Levenberg-Marquardt run alone, the method-error "
          "check after the fit (screened, as fit() runs it), the rest (Python set-up and analysis); and the check as "
          "it was (exact levels of every row)")
    print("%-55s %8s %8s %8s %8s %8s %12s %9s" % ("case", "fit", "C LM", "check", "Python", "Py alone", "all-exact",
                                                   "check x"))
    for title, t_first, t_core, t_check, t_check_exact, note, t_python in checks:
        print("%-55s %8.2f %8.2f %8.2f %8.2f %8.2f %12.2f %8.1fx" % (
            title, t_first * 1e3, t_core * 1e3, t_check * 1e3, (t_first - t_core - t_check) * 1e3, t_python * 1e3,
            t_check_exact * 1e3, t_check_exact / t_check))
        print("    %s" % note)
    print("(Python = fit - C LM - check as re-timed alone; Py alone = fit() with the C LM run and the check's "
          "matched-rule levels answered from a cache)")
    print("ratios against the same SciPy baseline: whole fit() with its check (what a user runs): %s (with the "
          "all-exact check instead, as before: %s); fit work alone (fit() minus its check): %s; the C "
          "Levenberg-Marquardt run alone: %s" % (
              ", ".join("%.0fx" % (t_ref / c[1]) for t_ref, c in zip(ref_times, checks)),
              ", ".join("%.0fx" % (t_ref / (c[1] - c[3] + c[4])) for t_ref, c in zip(ref_times, checks)),
              ", ".join("%.0fx" % (t_ref / (c[1] - c[3])) for t_ref, c in zip(ref_times, checks)),
              ", ".join("%.0fx" % (t_ref / c[2]) for t_ref, c in zip(ref_times, checks))))
    many_J_checks()
    print("like for like (first order against the SciPy first-order baseline): slowest fit %.2f ms (target <= 10 "
          "ms): %s; smallest ratio %.0fx (issue 10 target >= 1000x): %s" % (
              worst_ms, "met" if worst_ms <= 10 else "NOT met", worst_ratio,
              "met" if worst_ratio >= 1000 else "NOT met"))


if __name__ == "__main__":
    main()
