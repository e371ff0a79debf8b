"""Benchmark: cost per quasibound level (shape resonance), semiclassical and exact.

Test curve: LJ(12,6), De = 2500 cm-1, re = 1 A, eps = hbar^2/(2 mu) = 1 cm-1 A^2, J = 40 (resonances at
theta = 7.34 and 43) and J = 46 (theta = 6.57 and 28).

Prints, from one run:
- wkbfit semiclassical quasibound levels (second-order rule with the barrier-phase remainder, widths):
  time per level;
- wkbfit exact resonance poles (Siegert, extended-precision Numerov, Richardson over 3 steps, a second
  matching radius for the error estimate): time per level;
- the cost of the complex-root position against the real-energy root (ratio, same run);
- the cost of the barrier-matched rule (the default for theta < 8; also applied to every level) against the
  complex root alone and against the exact poles, per level, on the light LJ well and a Morse well (ratios,
  same run);
- the SciPy baseline at matched accuracy for the exact widths (1e-6 cm-1 in position, 1e-3 in width): the
  phase shift from solve_ivp (DOP853, rtol 1e-12) at real energies, vectorized over the energy grid, with a
  Breit-Wigner fit, as tests/test_quasibound.py does it; time per resonance and the ratio.
No speed target is set by issue 7; the figures go into its report. The machine may be shared: compare ratios.
Run: python3 tests/benchmarks/bench_quasibound.py
"""
import os
import sys
import time
import warnings

import numpy as np

here = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, os.path.join(here, "..", "..", "pkg"))
sys.path.insert(0, os.path.join(here, ".."))
sys.path.insert(0, here)
import wkbfit  # noqa: E402
from wkbfit.quasibound import exact_resonances  # noqa: E402
from timing import time_call  # noqa: E402
import test_quasibound as ref  # noqa: E402  (the SciPy reference of the tests)

LJ = wkbfit.LennardJones(2500.0, 1.0)
MU = wkbfit.HBAR2_OVER_2U
JS = [40, 46]


def semiclassical():
    return wkbfit.levels(LJ, MU, J=JS, order=2, quasibound=True)


def main():
    t = semiclassical()
    q = np.nonzero(t.quasibound)[0]
    n = len(q)
    t_sc = time_call(semiclassical) / n  # includes the bound levels of both J (a few more orbits)
    t_ex = time_call(lambda: exact_resonances(LJ, MU, t.J[q], t.energy[q], t.width[q]), min_time=1.0) / n
    ex = exact_resonances(LJ, MU, t.J[q], t.energy[q], t.width[q])
    print("semiclassical quasibound levels: %d levels, %.3f ms per level" % (n, 1e3 * t_sc))
    print("exact resonance poles:            %.1f ms per level" % (1e3 * t_ex))
    # SciPy baseline on the resolvable resonances (width > 1e-10: below that a real-energy scan needs more
    # digits than the phase shift carries)
    done = []
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        for i, k in enumerate(q):
            if ex["width"][i] < 1e-10:
                continue
            t0 = time.perf_counter()
            e_ref, g_ref = ref.scipy_resonance(int(t.J[k]), t.energy[k] - 2500.0, max(2e-3, 3 * t.width[k]),
                                               t.width[k])
            dt = time.perf_counter() - t0
            done.append(dt)
            print("  J=%d v=%d: SciPy %.0f ms; |dE| = %.1e cm-1, width ratio - 1 = %.1e" % (
                t.J[k], t.v[k], 1e3 * dt, abs(ex["energy"][i] - 2500.0 - e_ref), ex["width"][i] / g_ref - 1))
    t_sp = float(np.mean(done))
    print("SciPy phase-shift baseline:       %.0f ms per resonance" % (1e3 * t_sp))
    print("ratio SciPy / wkbfit exact: %.1f;  SciPy / wkbfit semiclassical: %.0f" % (t_sp / t_ex, t_sp / t_sc))
    complex_position_cost()


def complex_position_cost():
    """The complex-root position (theta < 8: a 7-point stencil of the second-order rule) against the
    real-energy root, semiclassical quasibound levels only, J = 30-55 of the same curve."""
    from wkbfit import _core
    rot = np.array([J * (J + 1.0) for J in range(30, 56)])
    args = LJ._core_args()
    res = _core.quasibound_levels(*args, MU, rot, barrier_match_theta=0.0)
    n, n_c = len(res["v"]), int(np.sum(res["complex_root"]))
    t_on = time_call(lambda: _core.quasibound_levels(*args, MU, rot, barrier_match_theta=0.0)) / n
    t_off = time_call(lambda: _core.quasibound_levels(*args, MU, rot, complex_position=False,
                                                      barrier_match_theta=0.0)) / n
    print("quasibound positions, J = 30-55 (%d levels, %d by the complex root): %.3f ms per level with the "
          "complex root, %.3f ms with the real root only; ratio %.2f" % (n, n_c, 1e3 * t_on, 1e3 * t_off,
                                                                     t_on / t_off))



def barrier_matched_cost():
    """Per quasibound level: the complex root alone (barrier_match_theta=0), the default (barrier-matched for
    theta < 8), the barrier-matched pole for every level, and the exact poles seeded by the complex root."""
    from wkbfit import _core
    wells = [("LJ light, J 30-55", LJ, MU, range(30, 56)),
             ("Morse mu 7, J 40-80", wkbfit.Morse(De=3000.0, re=2.0, a=1.2), 7.0, range(40, 84, 4))]
    for name, pot, mu, Js in wells:
        Js = np.array(list(Js))
        rot, args = Js * (Js + 1.0), pot._core_args()
        res = _core.quasibound_levels(*args, mu, rot, barrier_match_theta=0.0)
        n, n_low = len(res["v"]), int(np.sum(res["theta"] < 8))
        J_of = Js[res["rot_index"].astype(int)]
        t_cx = time_call(lambda: _core.quasibound_levels(*args, mu, rot, barrier_match_theta=0.0)) / n
        t_def = time_call(lambda: _core.quasibound_levels(*args, mu, rot)) / n
        t_all = time_call(lambda: _core.quasibound_levels(*args, mu, rot, barrier_match_theta=np.inf)) / n
        t_ex = time_call(lambda: exact_resonances(pot, mu, J_of, res["energy"], res["width"]), min_time=1.0) / n
        print("%s (%d levels, %d with theta < 8), ms per level: complex root %.3f, default %.3f, "
              "barrier-matched everywhere %.3f, exact %.2f; ratios default/complex %.2f, everywhere/complex %.2f, "
              "exact/default %.1f, exact/everywhere %.1f"
              % (name, n, n_low, 1e3 * t_cx, 1e3 * t_def, 1e3 * t_all, 1e3 * t_ex, t_def / t_cx, t_all / t_cx,
                 t_ex / t_def, t_ex / t_all))


if __name__ == "__main__":
    main()
    barrier_matched_cost()
