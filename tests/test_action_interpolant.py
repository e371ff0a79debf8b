"""All first-order levels from the action interpolant (csrc/action_interpolant.c).

levels(pot, mu, order=1, ends="maslov") without a list of v takes the interpolant path for
non-rotating wells of >= 40 levels; a list of v always takes the direct per-level solver, which
is the reference here (its own accuracy: 1e-11 cm-1 + 4e-14 of the depth). The stated accuracy
of the interpolant path: energies within 1e-9 cm-1 + 4e-14 of the depth of the direct levels, and
the `error` column covers the difference; dE/dv within 1e-6 relative or 1e-7 cm-1 (a derivative of the
interpolant), Bv within 1e-8 relative or 3e-8 of Bv(v=0). Wells where the interpolant declines (a tail that is not a
pure power, few levels, rotation) must give the direct levels.
Independent check: the quantization condition with the action from mpmath quadrature at 30
digits (test_wkb.mp_action), at levels spread over the whole well.
"""
import math

import mpmath as mp
import numpy as np
import pytest

import wkbfit
from test_wkb import mp_action  # tests/test_wkb.py: the mpmath action of a Lennard-Jones well

CASES = {
    "LJ(12,6), 66 levels": (wkbfit.LennardJones(De=4000.0, re=4.0), 20.0),
    "LJ(10,6)": (wkbfit.LennardJones(De=6000.0, re=3.5, n=10, m=6), 25.0),
    "Morse, 90 levels": (wkbfit.Morse(De=9000.0, re=2.5, a=0.9), 20.0),
    "EMO": (wkbfit.EMO(De=3000.0, re=3.0, betas=[1.0, 0.1]), 30.0),
    "MLR": (wkbfit.MLR(De=3000.0, re=3.0, C6=2e5, betas=[0.3, 0.1, 0.05]), 30.0),
    "MLR, deep": (wkbfit.MLR(De=12000.0, re=3.0, C6=6e5, betas=[0.2, 0.05]), 40.0),
}


def both(pot, mu, J=0):
    fast = wkbfit.levels(pot, mu, J=J, order=1, ends="maslov")
    direct = wkbfit.levels(pot, mu, J=J, v=list(range(len(fast))), order=1, ends="maslov")
    return fast, direct


@pytest.mark.parametrize("name", list(CASES))
def test_all_levels_match_the_direct_solver(name):
    pot, mu = CASES[name]
    fast, direct = both(pot, mu)
    depth = fast.energy[0] + fast.binding_energy[0] - pot(np.array([pot.params["re"]]))[0]
    tol = 1e-9 + 4e-14 * depth
    diff = np.abs(fast.energy - direct.energy)
    assert len(fast) == len(direct) and np.max(diff) <= tol, (name, np.max(diff))
    assert np.all(diff <= fast.error + direct.error + 1e-12)
    assert np.allclose(fast.dEdv, direct.dEdv, rtol=1e-6, atol=1e-7)
    assert np.allclose(fast.Bv, direct.Bv, rtol=1e-8, atol=3e-8 * direct.Bv[0])
    # the turning points are those of the level's energy: V(r) = E there (the direct sweep reports
    # those of its last orbit, up to one Newton step away from the final energy)
    for col in ("inner_turning_point", "outer_turning_point"):
        r = getattr(fast, col)
        assert np.max(np.abs(pot(r) - fast.energy)) <= 1e-10 * depth, col

def test_rotating_and_small_wells_are_the_direct_levels():
    # the interpolant declines (rotation; fewer than 40 levels): the sweep is the direct one
    for pot, mu, J in ((CASES["LJ(12,6), 66 levels"][0], 20.0, 20), (wkbfit.Morse(De=2000.0, re=2.0, a=1.0), 5.0, 0)):
        fast, direct = both(pot, mu, J)
        assert np.max(np.abs(fast.energy - direct.energy)) <= 1e-10


def test_levels_meet_the_quantization_condition_with_mpmath():
    # mpmath action (30 digits) at the interpolated energies: I(E_v) = pi (v + 1/2) within 1e-9 cm-1
    # of energy (|I - pi (v + 1/2)| / (dI/dE)), at levels spread over the well
    pot, mu = CASES["LJ(12,6), 66 levels"]
    t = wkbfit.levels(pot, mu, order=1, ends="maslov")
    for i in (0, 7, 20, 33, 45, 55, 61, len(t) - 2):
        resid = float(mp_action(pot, mu, t.energy[i]) - mp.pi * (t.v[i] + 0.5))
        assert abs(resid * t.dEdv[i] / math.pi) < 1e-9, (i, resid)
