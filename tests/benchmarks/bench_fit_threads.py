"""Benchmark: the fit's level evaluation on 1 and 2 threads, against the number of data rows (the
break-even behind WKB_FIT_THREAD_MIN_ROWS in csrc/wkb.h).

An invented scenario: a Lennard-Jones (12,6) well (De = 4000 cm-1, re = 4 A) and two invented
isotopologues (20 and 21 u); data rows v = 0..nv-1 at J = 0..nJ-1 of both, their first-order WKB levels
measured from the minimum (timing only: the fit reaches its own minimum in a few steps). Each size is
a first-order fit (method="wkb") of De and re from a start 1 % off, timed with 1 and 2 threads in the
same process; the ratio t(2)/t(1) < 1 means the threads pay. The machine may be shared: repeat.
Measured (2 cores, shared): 1.09-1.10 at 30 rows, 0.99-1.00 at 100, 0.96-0.97 at 200, 0.94-1.00 at 500,
0.91-0.92 at 2000-4000: whole first-order fits gain little because most of their time is outside the
level evaluator (which alone runs 1.9x faster on 2 threads at 16 000 rows, 1.5x at 400).
Run: python3 tests/benchmarks/bench_fit_threads.py
"""
import os
import sys

import numpy as np

sys.path.insert(0, os.path.join(os.path.dirname(__file__), "..", "..", "pkg"))
import wkbfit  # noqa: E402
from wkbfit import _core  # noqa: E402
from timing import time_call  # noqa: E402  (tests/benchmarks/timing.py)


def data(nv, nJ):
    true = wkbfit.LennardJones(De=4000.0, re=4.0)
    rows = {"v": [], "J": [], "energy": [], "isotopologue": []}
    masses = {"a": 20.0, "b": 21.0}
    for label, mu in masses.items():
        table = wkbfit.levels(true, mu, v=list(range(nv)), J=list(range(nJ)))
        rows["v"] += table.v.tolist()
        rows["J"] += table.J.tolist()
        rows["energy"] += table.energy.tolist()
        rows["isotopologue"] += [label] * len(table)
    rows["uncertainty"] = np.full(len(rows["v"]), 0.01)
    return wkbfit.read_levels(rows), masses


def main():
    start = wkbfit.LennardJones(De=4040.0, re=4.04)
    print("rows  t(1 thread) ms  t(2 threads) ms  ratio 2/1")
    for nv, nJ in ((5, 3), (5, 10), (10, 10), (10, 25), (10, 50), (20, 50), (20, 100)):
        obs, masses = data(nv, nJ)
        times = []
        for threads in (1, 2):
            previous = _core.set_fit_threads(threads)
            try:
                times.append(time_call(lambda: wkbfit.fit(start, obs, masses, method="wkb"), min_time=1.0))
            finally:
                _core.set_fit_threads(previous)
        print("%5d  %14.3f  %15.3f  %9.2f" % (len(obs), times[0] * 1e3, times[1] * 1e3, times[1] / times[0]))


if __name__ == "__main__":
    main()
