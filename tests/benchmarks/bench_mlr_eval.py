"""Benchmark: cost of one MLR potential evaluation (V, dV/dr, d2V/dr2) and of its parameter derivatives.

Prints nanoseconds per point of _core.potential_values and _core.param_derivatives on 20 000 radii
(the per-call overhead is then a few ns per point), and microseconds per level of all bound levels,
for the MLR forms: plain, deep, r_ref != re with q != p, Tang-Toennies and Douketis damped.
Run: python3 tests/benchmarks/bench_mlr_eval.py [--against PATH]
--against PATH: another build of wkbfit/_core*.so, timed interleaved with this one in this process
(before/after ratios from one run); its values are also compared with this build's (largest
difference relative to the array's largest value printed; 0 means bit-identical).
"""
import argparse
import os
import sys

import numpy as np

sys.path.insert(0, os.path.join(os.path.dirname(__file__), "..", "..", "pkg"))
import wkbfit  # noqa: E402
from bench_wkb import load_other_core  # noqa: E402
from timing import time_call  # noqa: E402
from wkbfit.potentials import damping_range  # noqa: E402


#: a Li2-like set of constants (invented for the tests, tests/test_damping.py)
LI2 = dict(De=8516.78, re=2.6729, C6=6.7190e6, C8=1.12635e8, C10=2.78694e9)


def cases():
    """Invented wells (the MLR forms of bench_wkb.other_models and the extended-model tests)."""
    return [
        ("MLR", wkbfit.MLR(De=3000.0, re=3.0, C6=2e5, betas=[0.3, 0.1, 0.05]), 30.0),
        ("MLR, deep", wkbfit.MLR(De=12000.0, re=3.0, C6=6e5, betas=[0.2, 0.05]), 40.0),
        ("MLR, r_ref 4.2, p 5, q 3", wkbfit.MLR(De=5875.0, re=3.67, C6=1.52e7, betas=[-0.35, 0.08], r_ref=4.2,
                                              p=5, q=3), 30.0),
        ("MLR, C3 C4 C6 Douketis", wkbfit.MLR(De=5000.0, re=3.2, C6=2e6, C3=3e5, C4=1e5, C8=0.0, betas=[0.2, 0.1],
                                             p=5, damping="douketis", s=-2, rho=0.8), 30.0),
        ("MLR, C6 C8 C10 Tang-Toennies, r_ref", wkbfit.MLR(betas=[0.1, -0.2, 0.05], damping="tang-toennies",
                                                          rho=damping_range("tang-toennies", "Li", "Li"),
                                                          r_ref=3.1, **LI2), 3.5),
        ("MLR, C6 C8 C10 Douketis s=-1", wkbfit.MLR(betas=[0.1, 0.3], damping="douketis", s=-1, p=6, q=3,
                                                   rho=damping_range("douketis", "Li", "Li"), **LI2), 3.5),
    ]


def rel_diff(a, b):
    """Largest |a - b| relative to the largest |b| of the array (of each column of a matrix): near re V
    and its slopes pass through 0, where an element-wise relative difference means nothing."""
    a, b = np.asarray(a, float), np.asarray(b, float)
    if a.ndim == 1:
        a, b = a[:, None], b[:, None]
    scale = np.max(np.abs(b), axis=0)
    return float(np.max(np.max(np.abs(a - b), axis=0) / np.where(scale > 0, scale, 1)))


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--against", help="another build of wkbfit/_core*.so to time beside this one")
    args = parser.parse_args()
    other = load_other_core(args.against) if args.against else None
    mine_core = wkbfit._core
    r = np.linspace(1.5, 30.0, 20000)
    print("MLR evaluation benchmark (one process; best of 5 interleaved rounds)")
    for name, pot, mu in cases():
        model, params, curve = pot._core_args()
        calls = [("values ns/pt", lambda c: c.potential_values(model, params, r), len(r)),
                 ("dV/dp ns/pt", lambda c: c.param_derivatives(model, params, r), len(r))]
        n_levels = len(mine_core.wkb_levels(model, params, curve, mu, 0.0)["energy"])
        calls.append(("levels us/lvl", lambda c: mine_core.wkb_levels(model, params, curve, mu, 0.0)
                      if c is mine_core else c.wkb_levels(model, params, curve, mu, 0.0), n_levels * 1e3))
        print("  %s (%d levels)" % (name, n_levels))
        for label, fn, per in calls:
            mine, theirs = [], []
            for _ in range(5):
                mine.append(time_call(lambda: fn(mine_core), 0.1))
                if other is not None:
                    theirs.append(time_call(lambda: fn(other), 0.1))
            line = "    %-14s %8.1f" % (label, min(mine) / per * 1e9)
            if other is not None:
                a, b = fn(mine_core), fn(other)
                if isinstance(a, dict):
                    diff = rel_diff(a["energy"], b["energy"])
                elif isinstance(a, tuple):
                    diff = max(rel_diff(x, y) for x, y in zip(a, b))
                else:
                    diff = rel_diff(a, b)
                line += "   other %8.1f   ratio %.2fx   max rel diff %.1e" % (
                    min(theirs) / per * 1e9, min(theirs) / min(mine), diff)
            print(line)


if __name__ == "__main__":
    main()
