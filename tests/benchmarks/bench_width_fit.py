"""Benchmark: the cost of fitting widths of quasibound levels beside their positions.

Data (invented scenario; as tests/test_width_fit.py): a Lennard-Jones (12,6) curve, De = 2500 cm-1,
re = 1 A, hbar^2/(2 mu) = 1 cm-1 A^2; exact levels J = 0, v = 0-3 and the exact shape resonances
(positions and widths) at J = 30, 35, 40, 45, with seeded noise (0.05 cm-1; 2 % on widths). Every fit
starts from De = 2490, re = 1.003, n = 12.1, m = 6.05 and varies De, re, n, m. Printed: median CPU time
(time.process_time, 3 runs) of
  * widths    positions + widths, exact levels and exact resonance poles (the new fit)
  * positions the same positions without the widths (the same quasibound machinery)
  * bound     the 12 bound levels of J = 0 (exact, same noise) with the default fit (what could be
              fitted before: the baseline of a fit without quasibound data)
  * wkb       positions + widths with the semiclassical rule (method="wkb"; flagged by the method check)
with their ratios to "positions" and "bound", iterations, model evaluations, level calculations
(each exact pole or level counts one) and the uncertainty of De.

Run: python3 tests/benchmarks/bench_width_fit.py
"""
import os
import statistics
import sys
import time
import warnings

sys.path.insert(0, os.path.join(os.path.dirname(__file__), ".."))
sys.path.insert(0, os.path.join(os.path.dirname(__file__), "..", "..", "pkg"))
import wkbfit  # noqa: E402
from test_width_fit import MU, START, VARY, exact_data  # noqa: E402


def timed(fn, runs=3):
    times, out = [], None
    for _ in range(runs):
        t0 = time.process_time()
        out = fn()
        times.append(time.process_time() - t0)
    return statistics.median(times), out


def main():
    warnings.simplefilter("ignore")
    pos, wid = exact_data()
    lev = wkbfit.read_levels(pos, energy_zero="minimum")
    w = wkbfit.read_widths(wid)
    # every bound level of J = 0 (v = 0-11), exact, with the same noise: what could be fitted before
    import numpy as np
    from test_width_fit import SIGMA_POSITION, TRUE
    b = wkbfit.levels(TRUE, MU, J=0, method="exact")
    rng = np.random.default_rng(3)
    bound = wkbfit.read_levels({"v": b.v, "J": b.J, "energy": b.energy + rng.normal(0, SIGMA_POSITION, len(b)),
                                "uncertainty": np.full(len(b), SIGMA_POSITION)}, energy_zero="minimum")
    cases = {
        "widths": lambda: wkbfit.fit(START, [lev, w], mu=MU, vary=VARY),
        "positions": lambda: wkbfit.fit(START, [lev], mu=MU, vary=VARY),
        "bound": lambda: wkbfit.fit(START, bound, mu=MU, vary=VARY),
        "wkb": lambda: wkbfit.fit(START, [lev, w], mu=MU, vary=VARY, method="wkb"),
    }
    res = {name: timed(fn) for name, fn in cases.items()}
    print("%-10s %9s %10s %8s %6s %6s %8s %12s" % ("fit", "CPU s", "/positions", "/bound", "iter", "evals", "levels",
                                                   "sigma(De)"))
    for name, (t, r) in res.items():
        sd = r.params["De"].uncertainty
        print("%-10s %9.3f %10.2f %8.1f %6d %6d %8s %12s" % (
            name, t, t / res["positions"][0], t / res["bound"][0], r.iterations, r.n_evaluations,
            r.n_level_calculations if r.n_level_calculations is not None else "-", "%.4g" % sd if sd is not None else "-"))


if __name__ == "__main__":
    main()
