"""Benchmark: the default fit on the row engine (line positions) against the exact fit and first-order WKB.

Data: line positions (J -> J+-1 between random levels v'' < 8 and v' < 70) computed from EXACT levels (wkbfit's
radial solver) of the MLR curve of bench_default_fit.py, two isotopologues, J up to 30, seeded noise 0.01 cm-1;
50, 500 and 5000 lines. All fits start from the same (a few percent off) parameters and vary De, re, beta0,
beta1:
  * default   wkbfit.fit(...)                 (method "corrected": per-row exact corrections, chord steps)
  * exact     wkbfit.fit(..., method="exact") (the baseline: exact levels in every iteration)
  * wkb       wkbfit.fit(..., method="wkb")   (first order)
Printed per size: best CPU time of each (time.process_time; 3 runs below 1000 lines, 1 above and the default
once more after the exact fit), WKB iterations, exact evaluations (refreshes), the ratio default/exact (target
<= 0.2) and wkb/exact, and the agreement of default and exact (largest |difference|/sd over the parameters,
target < 0.01; largest relative difference of the uncertainties, target < 1 %).

Run: python3 tests/benchmarks/bench_default_fit_rows.py [sizes...]
"""
import os
import sys

import numpy as np

sys.path.insert(0, os.path.join(os.path.dirname(__file__), "..", "..", "pkg"))
import wkbfit  # noqa: E402
from bench_default_fit import TRUE, three_fits  # noqa: E402  (same curve, start and timing)

MASSES = {"iso-a": 40.0, "iso-b": 41.0}


def lines(n, seed=1):
    rng = np.random.default_rng(seed)
    cols = {k: [] for k in ("isotopologue", "v_upper", "J_upper", "v_lower", "J_lower", "wavenumber")}
    cache = {}

    def E(label, v, J):
        if (label, J) not in cache:
            cache[(label, J)] = wkbfit.levels(TRUE, MASSES[label], J=J, method="exact").energy
        return cache[(label, J)][v]
    seen = set()
    while len(seen) < n:
        label = str(rng.choice(list(MASSES)))
        Jl, vl = int(rng.integers(0, 31)), int(rng.integers(0, 8))
        vu = int(rng.integers(vl + 1, 70))
        Ju = Jl + 1 if Jl == 0 or rng.random() < 0.5 else Jl - 1
        if (label, vu, Ju, vl, Jl) in seen:
            continue  # each transition once
        seen.add((label, vu, Ju, vl, Jl))
        for key, val in (("isotopologue", label), ("v_upper", vu), ("J_upper", Ju), ("v_lower", vl),
                         ("J_lower", Jl), ("wavenumber", E(label, vu, Ju) - E(label, vl, Jl))):
            cols[key].append(val)
    cols["wavenumber"] = np.array(cols["wavenumber"]) + rng.normal(0.0, 0.01, n)
    cols["uncertainty"] = np.full(n, 0.01)
    return wkbfit.read_lines(cols)


def main(sizes):
    print("machine: %d cores (may be shared with other jobs); times are CPU seconds of this process" % os.cpu_count())
    print("%6s %9s %9s %9s %7s %7s %9s %9s %10s %10s %9s" % (
        "lines", "default s", "exact s", "wkb s", "iter d", "iter e", "refreshes", "d/exact", "wkb/exact",
        "max dp/sd", "max dsd"))
    for n in sizes:
        obs = lines(n)
        (td, te, tw), (rd, re_, rw), dp, dsd = three_fits(obs, MASSES)
        print("%6d %9.3f %9.3f %9.3f %7d %7d %9d %9.3f %10.3f %10.2e %9.2e" % (
            n, td, te, tw, rd.iterations, re_.iterations, rd.refreshes, td / te, tw / te, dp, dsd))
        wdp = max(abs(rw.params[k].value - re_.params[k].value) / re_.params[k].uncertainty for k in rw.var_names)
        print("       sqrt(chi2/dof): default %.3f, exact %.3f, first-order WKB %.3f (its parameters up to %.2g sd "
              "from the exact fit's)" % (rd.standard_error, re_.standard_error, rw.standard_error, wdp))


if __name__ == "__main__":
    main([int(x) for x in sys.argv[1:]] or [50, 500, 5000])
