"""Quasibound accuracy table: the default semiclassical rows against the exact poles, per theta band and well.

For each test well of tests/test_quasibound.py: the largest |E - E_exact| (cm-1) and |Gamma/Gamma_exact - 1| of
the default `levels(..., quasibound=True)` rows, per theta band, and the rule that made them.
Run: python3 tests/benchmarks/quasibound_bands.py [rule]
"""
import os
import sys
import warnings

import numpy as np

sys.path.insert(0, os.path.join(os.path.dirname(__file__), "..", "..", "pkg"))
import wkbfit  # noqa: E402

LJ = wkbfit.LennardJones(2500.0, 1.0)
MU = wkbfit.HBAR2_OVER_2U
WELLS = [
    ("LJ light", LJ, MU, range(30, 56)),
    ("LJ 4 mu", LJ, 4 * MU, range(60, 112, 3)),
    ("MLR C6", wkbfit.MLR(De=3000.0, re=3.0, C6=2e5, betas=[0.3, 0.1, 0.05]), 30.0, range(70, 200, 6)),
    ("Morse", wkbfit.Morse(De=3000.0, re=2.0, a=1.2), 7.0, (40, 44, 48, 56, 64, 72, 80)),
]
BANDS = [(0.1, 0.5), (0.5, 1), (1, 2), (2, 4), (4, 5), (5, 8), (8, np.inf)]


def rows(potential, mu, Js, rule=None):
    out = []
    for J in Js:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            ex = wkbfit.levels(potential, mu, J=J, method="exact", quasibound=True)
        sc = wkbfit.levels(potential, mu, J=J, quasibound=True, quasibound_rule=rule)
        for i in np.nonzero(ex.quasibound & ~ex.above_barrier)[0]:
            k = sc.level(ex.v[i], J)
            resolved = ex.width[i] > 100 * ex.width_error[i]
            out.append((sc.theta[k], sc.energy[k] - ex.energy[i],
                        sc.width[k] / ex.width[i] - 1 if resolved else np.nan, sc.error[k], sc.rule[k]))
    return out


def main(rule=None):
    for name, pot, mu, Js in WELLS:
        r = rows(pot, mu, Js, rule)
        print("%s (%d levels; rules %s)" % (name, len(r), sorted(set(x[4] for x in r))))
        for lo, hi in BANDS:
            sel = [x for x in r if lo <= x[0] < hi]
            if not sel:
                continue
            dE = max(abs(x[1]) for x in sel)
            dG = np.nanmax([abs(x[2]) for x in sel]) if any(np.isfinite(x[2]) for x in sel) else np.nan
            ratio = np.median([abs(x[1]) / x[3] for x in sel if x[3] > 0])
            print("  theta %4.1f-%-4s n=%3d  max|dE| %.2e cm-1  max|dG/G| %.2e  median |dE|/error %.2g"
                  % (lo, "inf" if hi == np.inf else "%.0f" % hi, len(sel), dE, dG, ratio))


if __name__ == "__main__":
    main(sys.argv[1] if len(sys.argv) > 1 else None)
