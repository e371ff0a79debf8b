"""Benchmark: cost per level of the level rules over full wells, in one run.

Rules timed (every bound level of each well, at J = 0 and J = 10), all through wkbfit.levels():
- first order (order=1, ends="maslov"), the textbook rule and the cost unit;
- second order with fixed end phases (order=2, ends="maslov"; "failed" where it finds no root, as it
  does near threshold on most curves);
- the default matched rule (order=2, ends="matched": second order where the outer turning point is
  nearly linear, the matched outer end near threshold, the exact phase across quantal wells and for the
  last two levels at J > 0);
- the exact radial solver (method="exact", default tolerance 1e-7 cm-1), the baseline a careful user
  would otherwise run for levels right up to threshold.
Each rule is timed in interleaved rounds (so that a shared machine's load falls on all of them alike);
the median round is reported, with the ratio to first order ("x first") and to the exact solver
("x exact"). Accuracy of each against the exact solver at 1e-10 cm-1 is printed beside the cost:
the largest error of the interior levels and of the last two levels.

Then the C core alone (no Python layer, whose fixed cost per call flatters the slower rules), from the
same run: first order, second order with fixed phases, the matched default, the matched rule with the
earlier end solve (milne=False: the exact end solution in Pruefer form all the way at the fixed
tolerance 1e-9 rad per step; the "before" of issue 7's cost work), the matched rule with the end solution
integrated by rk8pd through the turning region (milne=2: the path before the Magnus steps of csrc/magnus.c)
and the exact solver's core at its default tolerance; "x first" is the ratio to first order, "speed-up"
earlier (or rk8pd) / default matched. The core rows are CPU time (time.process_time).

Test wells (invented): LJ(12,6), LJ(8,4), LJ(6,3) (C6, C4, C3 tails), an MLR with C6 + C8, a light LJ.
method_error is not timed (it is computed on first use only).
Run: python3 tests/benchmarks/bench_matched.py [words]  (only the wells whose name contains one of the words,
e.g. "light"; the machine may be shared: ratios are what counts)
"""
import os
import sys
import time
import warnings

import numpy as np

sys.path.insert(0, os.path.join(os.path.dirname(__file__), "..", "..", "pkg"))
sys.path.insert(0, os.path.dirname(__file__))
import wkbfit  # noqa: E402
from wkbfit import _core  # noqa: E402
from timing import time_call  # noqa: E402

WELLS = [
    ("LJ(12,6) C6, mu=20", wkbfit.LennardJones(De=1000.0, re=3.0), 20.0),
    ("LJ(8,4) C4, mu=10", wkbfit.LennardJones(De=2000.0, re=2.5, n=8, m=4), 10.0),
    ("LJ(6,3) C3, mu=10", wkbfit.LennardJones(De=2000.0, re=2.5, n=6, m=3), 10.0),
    ("MLR C6+C8, mu=100", wkbfit.MLR(De=5000.0, re=4.0, C6=1.0e7, C8=3.0e8, betas=[-0.4, 0.2]), 100.0),
    ("LJ(12,6) light, mu=0.5", wkbfit.LennardJones(De=10000.0, re=1.2), 0.5),
]

RULES = [
    ("first order", dict(order=1, ends="maslov")),
    ("second order", dict(order=2, ends="maslov")),
    ("matched (default)", dict()),
    ("exact", dict(method="exact")),
]


ROUNDS = 5


def errors(table, ref):
    n = min(len(table), len(ref))
    e = np.abs(table.energy[:n] - ref.energy[:n])
    return (np.max(e[:-2]) if n > 2 else 0.0), np.max(e[-2:])


def main():
    warnings.simplefilter("ignore")
    print("%-24s %3s %-18s %5s %10s %8s %8s %10s %10s" % ("well", "J", "rule", "n", "us/level", "x first",
                                                         "x exact", "interior", "last two"))
    only = sys.argv[1:]  # optional: wells whose name contains one of these words, e.g. "light"
    for name, pot, mu in WELLS:
        if only and not any(word in name for word in only):
            continue
        for J in (0, 10):
            ref = wkbfit.exact.exact_levels(pot, mu, Js=[J], tolerance=1e-10, min_binding=1e-13)
            ok = []
            for label, kw in RULES:
                try:
                    table = wkbfit.levels(pot, mu, J=J, **kw)
                except (ValueError, RuntimeError) as exc:
                    print("%-24s %3d %-18s %5s %10s   (%s)" % (name, J, label, "", "failed", str(exc)[:50]))
                    continue
                ok.append((label, kw, table))
            times = {label: [] for label, _, _ in ok}
            for _ in range(ROUNDS):
                for label, kw, table in ok:
                    times[label].append(time_call(lambda: wkbfit.levels(pot, mu, J=J, **kw), min_time=0.1) / len(table))
            t = {label: float(np.median(v)) for label, v in times.items()}
            for label, kw, table in ok:
                e_int, e_last = errors(table, ref)
                print("%-24s %3d %-18s %5d %10.1f %8.1f %8.2f %10.2e %10.2e" % (
                    name, J, label, len(table), 1e6 * t[label], t[label] / t["first order"],
                    t[label] / t["exact"], e_int, e_last))
            # the C core alone, every rule from the same run (interleaved rounds, median)
            model, params, curve = pot._core_args()
            rot = float(J * (J + 1))
            core_rules = [("first order", dict(order=1, ends=0)), ("second order", dict(order=2, ends=0)),
                          ("matched (default)", dict(order=2, ends=1)),
                          ("matched, rk8pd", dict(order=2, ends=1, milne=2)),
                          ("matched, earlier", dict(order=2, ends=1, milne=False))]
            calls, counts = {}, {}
            for label, kw in core_rules:
                call = (lambda kw=kw: _core.wkb_levels(model, params, curve, mu, rot, None, 1, 1, **kw))
                try:
                    counts[label] = len(call()["v"])
                except (ValueError, RuntimeError):
                    continue
                calls[label] = call
            exact_call = lambda: wkbfit.exact._core_call(pot, mu, None, [J], wkbfit.exact.DEFAULT_TOLERANCE,
                                                         wkbfit.exact.DEFAULT_MIN_BINDING)
            calls["exact"], counts["exact"] = exact_call, len(exact_call()["v"])
            ct = {label: [] for label in calls}
            for _ in range(ROUNDS):
                for label, call in calls.items():
                    ct[label].append(time_call(call, 0.1, time.process_time) / counts[label])
            core = {label: float(np.median(v)) for label, v in ct.items()}
            for label in calls:
                extra = ""
                if label in ("matched, earlier", "matched, rk8pd"):
                    extra = "   speed-up %.2f (%s / default)" % (core[label] / core["matched (default)"],
                                                               label.split(", ")[1])
                print("%-24s %3d %-18s %5d %10.1f %8.1f %8.2f   core%s" % (
                    name, J, label, counts[label], 1e6 * core[label], core[label] / core["first order"],
                    core[label] / core["exact"], extra))

if __name__ == "__main__":
    main()
