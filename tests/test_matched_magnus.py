"""The matched rule's end solutions by Magnus steps through the turning region (csrc/magnus.c, the default)
against the project's exact radial solver at 1e-10 cm-1 and against the previous rk8pd path (milne=2).

Wells: those of tests/benchmarks/bench_matched.py (invented): the light LJ(12,6) (De=10000 cm-1, re=1.2 A,
mu=0.5 u, every level by the exact phase across the well), LJ(12,6), LJ(8,4), LJ(6,3) (C6, C4, C3 tails) and an
MLR with C6 + C8.
"""
import warnings

import numpy as np
import pytest

import wkbfit
from wkbfit import _core

WELLS = [
    (wkbfit.LennardJones(De=10000.0, re=1.2), 0.5),
    (wkbfit.LennardJones(De=1000.0, re=3.0), 20.0),
    (wkbfit.LennardJones(De=2000.0, re=2.5, n=8, m=4), 10.0),
    (wkbfit.LennardJones(De=2000.0, re=2.5, n=6, m=3), 10.0),
    (wkbfit.MLR(De=5000.0, re=4.0, C6=1.0e7, C8=3.0e8, betas=[-0.4, 0.2]), 100.0),
]


def core_levels(pot, mu, J, milne):
    model, params, curve = pot._core_args()
    return _core.wkb_levels(model, params, curve, mu, float(J * (J + 1)), None, 1, 1, order=2, ends=1,
                            milne=milne)


@pytest.mark.parametrize("pot,mu", WELLS)
@pytest.mark.parametrize("J", [0, 10])
def test_magnus_levels_against_exact_solver(pot, mu, J):
    warnings.simplefilter("ignore")
    ref = wkbfit.exact.exact_levels(pot, mu, Js=[J], tolerance=1e-10, min_binding=1e-13)
    new = core_levels(pot, mu, J, 1)
    assert len(new["energy"]) == len(ref.energy)
    err = np.abs(new["energy"] - ref.energy)
    # issue 7's accuracy targets: every level within 1e-4 cm-1, the last two within 1e-6 cm-1
    assert np.all(err < 1e-4)
    assert np.all(err[-2:] < 1e-6)
    # the reported error stays honest where the end solutions decide it (the last two levels)
    assert np.all(err[-2:] <= 2 * new["error"][-2:] + 1e-9)


@pytest.mark.parametrize("pot,mu", WELLS)
@pytest.mark.parametrize("J", [0, 10])
def test_magnus_agrees_with_rk8pd_path(pot, mu, J):
    warnings.simplefilter("ignore")
    new, old = core_levels(pot, mu, J, 1), core_levels(pot, mu, J, 2)
    assert len(new["energy"]) == len(old["energy"])
    # both paths hold the ODE to the same per-step tolerance: the levels agree to well below 1e-6 cm-1
    assert np.max(np.abs(new["energy"] - old["energy"])) < 1e-6
    assert abs(new["v_th"] - old["v_th"]) < 1e-6


def test_magnus_phase_at_threshold_keeps_the_node_count():
    """At binding 8e-7 cm-1 the outer end starts ~4e4 A out and its steps must not jump the well (seen
    before the step was capped at 0.2 r): both paths give the same continuous quantum number."""
    pot, mu = WELLS[0]
    model, params, curve = pot._core_args()
    a = _core.matched_phases(model, params, curve, mu, 0.0, 8.01e-7, milne=1)
    b = _core.matched_phases(model, params, curve, mu, 0.0, 8.01e-7, milne=2)
    assert abs(a["v"] - b["v"]) < 1e-7
    assert abs(a["psi_outer"] - b["psi_outer"]) < 1e-6


def test_an_unknown_end_solve_is_refused_by_name():
    # the private switch takes 0, 1 or 2; anything else is a clear error, not a silent choice of path
    pot = wkbfit.LennardJones(De=4000.0, re=4.0)
    model, params, curve = pot._core_args()
    for call in (lambda: _core.wkb_levels(model, params, curve, 20.0, 0.0, order=2, ends=1, milne=5),
                 lambda: _core.matched_phases(model, params, curve, 20.0, 0.0, 100.0, milne=-1)):
        with pytest.raises(ValueError, match="milne=-?[0-9]+ is invalid"):
            call()
