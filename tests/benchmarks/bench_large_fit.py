"""Benchmark: a 20 000-level, 2-parameter fit (8 isotopologues, J = 0..99, v = 0..24).

A Lennard-Jones (12,6) well (De = 4000 cm-1, re = 4 A; invented) and eight invented
isotopologues of reduced masses 20..27 u; the data are exact-solver levels measured from each
isotopologue's v=0, J=0 plus 0.01 cm-1 of seeded noise. wkbfit.fit varies De and re from a start
1 % off. Target (issue 10): <= 150 ms.
Prints, in one process: rounds in turn of the fit with the rotational ladders interpolated in J(J+1)
(csrc/fit_ladders.c: each (isotopologue, v) ladder's first-order levels solved at 13 Chebyshev nodes) and
with every row solved directly (the private switch _core._set_fit_interpolation(False), the path before it):
fastest wall time, main-thread CPU (the Python part and one evaluator part: what the wall time comes
down to on an idle machine) and CPU of all threads, with their ratios and the parameters' difference;
then one thread against the default threads, iterations, evaluations, orbits per level and evaluation;
beside it the same fit with every refresh row solved exactly (interpolate_in_j=False) and the ratio.
Threads: the fit's tall-skinny linear algebra runs without BLAS threads (pkg/wkbfit/_tall.py,
csrc/tall_qr.c): numpy's OpenBLAS workers kept spinning after each call and took the core the
evaluator's second thread needs.
Before/after: with --baseline TREE (a built checkout of an earlier commit), the same fit is timed in
a subprocess on TREE's package, alternating with this tree's in rounds, and the ratio per round is printed.
Measured (2 cores shared with other helpers' jobs, load average 3.3-4.7: wall times noisy, CPU times not):
CPU of all threads per fit 177-194 ms interpolated against 297-335 ms direct (median ratio 0.58-0.59; against
a build of main at af874dd with --baseline: 0.57-0.59), main-thread CPU 110-124 ms against 168-191 ms (0.66);
one thread 175-193 ms CPU; first-order orbits per level and evaluation 0.148 against 1.143; parameters 5e-9
and 2e-8 standard deviations apart. Fastest wall time of a round 118 ms at a quiet moment (direct 238 ms in
the same run), 168-383 ms under that load: the target holds only when the machine is otherwise idle. Where the
remaining time goes (cProfile and per-call timing, CPU): the exact levels of the refreshes ~100 ms
(1008 levels with <v|dV/dp|v>, 1008 + 400 without; radial solver), the Python part ~35 ms, the
first-order Levenberg-Marquardt run 25 ms (112 ms direct), the two first-order evaluations of all rows
outside it 14 ms (57 ms direct).
Run: python3 tests/benchmarks/bench_large_fit.py [--baseline TREE]
"""
import json
import os
import subprocess
import sys
import time

import functools

import numpy as np

# --time-only: the fit's wall time as JSON (the baseline's subprocess; WKBFIT_PKG: the package to time)
sys.path.insert(0, os.environ.get("WKBFIT_PKG") or os.path.join(os.path.dirname(__file__), "..", "..", "pkg"))
import wkbfit  # noqa: E402
import wkbfit.corrected  # noqa: E402
from timing import time_call  # noqa: E402  (tests/benchmarks/timing.py)


def data():
    true = wkbfit.LennardJones(De=4000.0, re=4.0)
    rows = {"v": [], "J": [], "energy": [], "isotopologue": []}
    masses = {}
    for k in range(8):
        label, mu = "iso%d" % k, 20.0 + k
        masses[label] = mu
        table = wkbfit.levels(true, mu, v=list(range(25)), J=list(range(100)), method="exact")
        E00 = table.energy[(table.v == 0) & (table.J == 0)][0]
        rows["v"] += table.v.tolist()
        rows["J"] += table.J.tolist()
        rows["energy"] += (table.energy - E00).tolist()
        rows["isotopologue"] += [label] * len(table)
    n = len(rows["v"])
    rng = np.random.default_rng(3)
    E = np.array(rows["energy"]) + rng.normal(0, 0.01, n)
    E[(np.array(rows["v"]) == 0) & (np.array(rows["J"]) == 0)] = 0.0
    rows["energy"], rows["uncertainty"] = E, np.full(n, 0.01)
    return wkbfit.read_levels(rows, energy_zero="lowest"), masses


def count_orbits(call):
    """call() with _core.fit_run counted: (its result, first-order WKB orbits per level and evaluation in the
    Levenberg-Marquardt runs, the start's evaluation included)."""
    core, counts = wkbfit._core, [0, 0]
    run = core.fit_run

    def counted(**kw):
        out = run(**kw)
        counts[0] += out["n_orbits"]
        counts[1] += (out["n_eval"] + 1) * len(kw["v"])
        return out
    core.fit_run = counted
    try:
        return call(), counts[0] / max(counts[1], 1)
    finally:
        core.fit_run = run


def _fit_time(obs, masses, start, min_time=2.0):
    """(wall, CPU) seconds per fit; the CPU time (all threads) barely depends on the machine's load, the wall
    time does."""
    c0 = time.process_time()
    calls = [0]

    def one():
        calls[0] += 1
        wkbfit.fit(start, obs, masses)
    wall = time_call(one, min_time=min_time)
    return wall, (time.process_time() - c0) / calls[0]


def before_after(tree, obs, masses, start, rounds=3):
    """(baseline times, this tree's times), s: rounds of the baseline's subprocess and this process in turn."""
    env = dict(os.environ, WKBFIT_PKG=os.path.join(os.path.abspath(tree), "pkg"))
    base, here = [], []
    for _ in range(rounds):
        run = subprocess.run([sys.executable, os.path.abspath(__file__), "--time-only"], env=env, check=True,
                             capture_output=True, text=True)
        out = json.loads(run.stdout.strip().splitlines()[-1])
        base.append((out["fit_s"], out["cpu_s"]))
        here.append(_fit_time(obs, masses, start))
    return np.array(base), np.array(here)


def _switch(on):
    """The ladders' J(J+1) interpolation on or off (csrc/fit_ladders.c; off: every row solved directly, the
    path before it); returns the previous setting (None where the core predates the switch)."""
    setter = getattr(wkbfit._core, "_set_fit_interpolation", None)
    return setter(on) if setter else None


def _fits(obs, masses, start, n):
    """(fastest wall, least main-thread CPU, mean CPU of all threads) s over n fits. The main thread runs the
    Python part and one of the evaluator's parts, so its CPU time is what the wall time comes down to on an
    idle machine when the other part finishes first."""
    walls, mains, cpus = [], [], []
    for _ in range(n):
        w0, t0, c0 = time.perf_counter(), time.thread_time(), time.process_time()
        wkbfit.fit(start, obs, masses)
        walls.append(time.perf_counter() - w0)
        mains.append(time.thread_time() - t0)
        cpus.append(time.process_time() - c0)
    return min(walls), min(mains), float(np.mean(cpus))


def interleaved(obs, masses, start, rounds=5, fits=6):
    """(direct, interpolated) arrays of (fastest wall, main-thread CPU, CPU) s per fit: rounds of the two in
    turn, in this process."""
    out = {0: [], 1: []}
    try:
        for _ in range(rounds):
            for on in (0, 1):
                _switch(on)
                out[on].append(_fits(obs, masses, start, fits))
    finally:
        _switch(1)
    return np.array(out[0]), np.array(out[1])


def main():
    obs, masses = data()
    start = wkbfit.LennardJones(De=4040.0, re=4.04)
    if "--time-only" in sys.argv:
        wkbfit.fit(start, obs, masses)  # (warm-up)
        wall, cpu = _fit_time(obs, masses, start)
        print(json.dumps({"fit_s": wall, "cpu_s": cpu, "package": wkbfit.__file__}))
        return
    if "--baseline" in sys.argv:
        tree = sys.argv[sys.argv.index("--baseline") + 1]
        wkbfit.fit(start, obs, masses)
        base, here = before_after(tree, obs, masses, start)
        for k, what in ((0, "wall"), (1, "CPU (all threads)")):
            print("before/after, %s time per fit (%s vs this tree, rounds in turn): before %s ms; after %s ms; "
                  "ratio after/before per round %s (median %.2f)"
                  % (what, tree, ", ".join("%.1f" % (t * 1e3) for t in base[:, k]),
                     ", ".join("%.1f" % (t * 1e3) for t in here[:, k]),
                     ", ".join("%.2f" % r for r in here[:, k] / base[:, k]), float(np.median(here[:, k] / base[:, k]))))
        print("  (load average %s at the end)" % " ".join("%.2f" % x for x in os.getloadavg()))
    res, orbits = count_orbits(lambda: wkbfit.fit(start, obs, masses))
    _switch(0)
    try:
        direct, direct_orbits = count_orbits(lambda: wkbfit.fit(start, obs, masses))
    finally:
        _switch(1)
    old, new = interleaved(obs, masses, start)
    print("ladders interpolated in J(J+1) (fit_ladders.c) against every row solved directly, default threads, "
          "5 rounds in turn of 6 fits each (this process); per fit:")
    for k, what in ((0, "fastest wall"), (1, "main-thread CPU"), (2, "CPU of all threads")):
        print("  %-19s %s ms vs %s ms (median ratio %.2f)"
              % (what, ", ".join("%.1f" % (t * 1e3) for t in new[:, k]), ", ".join("%.1f" % (t * 1e3) for t in old[:, k]),
                 float(np.median(new[:, k] / old[:, k]))))
    print("  parameters differ by %s standard deviations; first-order orbits per level and evaluation %.3f "
          "(direct %.3f)" % (", ".join("%.1e" % (abs(res.params[n].value - direct.params[n].value)
                                                 / direct.params[n].uncertainty) for n in res.var_names),
                             orbits, direct_orbits))
    best = float(np.min(new[:, 0]))
    print("  fastest fit %.1f ms: target <= 150 ms %s" % (best * 1e3, "met" if best <= 0.150 else "NOT met"))
    previous = wkbfit._core.set_fit_threads(1)
    try:
        t_one, c_one = _fit_time(obs, masses, start)
    finally:
        wkbfit._core.set_fit_threads(previous)
    t, c = _fit_time(obs, masses, start)
    print("one thread: %.1f ms (CPU %.1f ms); the default threads (%d online CPUs): %.1f ms (CPU %.1f ms); ratio %.2f "
          "(OPENBLAS_NUM_THREADS=%s)" % (t_one * 1e3, c_one * 1e3, os.cpu_count(), t * 1e3, c * 1e3, t / t_one,
                                         os.environ.get("OPENBLAS_NUM_THREADS", "unset")))
    print("%d-level fit, 2 parameters (De, re), %d isotopologues, J = 0..99: %.1f ms (target <= 150 ms: %s; load "
          "average %s)" % (len(obs), len(masses), t * 1e3, "met" if t <= 0.150 else "NOT met",
                           " ".join("%.2f" % x for x in os.getloadavg())))
    print("  %s; %d iterations, %d model evaluations: %.2f us per level and evaluation; %.3f orbits per level and "
          "WKB evaluation" % (res.status, res.iterations, res.n_evaluations, t / (res.n_evaluations * len(obs)) * 1e6,
                              orbits))
    orig = wkbfit.corrected.run_corrected
    wkbfit.corrected.run_corrected = functools.partial(orig, interpolate_in_j=False)
    try:
        slow = wkbfit.fit(start, obs, masses)
        t_all = time_call(lambda: wkbfit.fit(start, obs, masses), min_time=2.0)
    finally:
        wkbfit.corrected.run_corrected = orig
    print("  every refresh row solved exactly: %.1f ms; ratio %.2fx; parameters differ by %s standard deviations"
          % (t_all * 1e3, t_all / t, ", ".join("%.1e" % (abs(res.params[n].value - slow.params[n].value)
                                                        / slow.params[n].uncertainty) for n in res.var_names)))
    print("  De = %.6f +/- %.2g, re = %.8f +/- %.2g; sqrt(chi2/dof) = %.3g (first-order WKB against exact levels)"
          % (res.params["De"].value, res.params["De"].uncertainty, res.params["re"].value,
             res.params["re"].uncertainty, res.standard_error))


if __name__ == "__main__":
    main()
