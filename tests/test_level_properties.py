"""A first-order WKB level's Bv and dE/dv belong to the level's own energy, not to the last Newton orbit.

Reference: the orbit at the level's binding energy (_core.wkb_orbits: Bv = eps <1/r^2> over the orbit,
dE/dv = pi / (half period)), the same quadrature at the converged energy. Criterion: 1e-6 relative (the
last Newton step is taken without a new orbit when it moves the binding energy by <= 1e-6 of itself;
before, the last orbit's values were reported: up to 3e-5 relative in Bv near dissociation of an EMO well).
"""
import numpy as np
import pytest

import wkbfit
from wkbfit import _core

CASES = {
    "EMO": (wkbfit.EMO(De=3000.0, re=3.0, betas=[1.0, 0.1]), 30.0),
    "LJ": (wkbfit.LennardJones(De=4000.0, re=4.0), 20.0),
    "Morse": (wkbfit.Morse(De=9000.0, re=2.5, a=0.9), 20.0),
    "MLR": (wkbfit.MLR(De=3000.0, re=3.0, C6=2e5, betas=[0.3, 0.1, 0.05]), 30.0),
}


@pytest.mark.parametrize("J", [0, 20])
@pytest.mark.parametrize("name", list(CASES))
def test_bv_and_spacing_at_the_level_energy(name, J):
    pot, mu = CASES[name]
    n = len(wkbfit.levels(pot, mu, J=J, order=1, ends="maslov"))
    table = wkbfit.levels(pot, mu, v=list(range(n)), J=J, order=1, ends="maslov")  # level by level
    model, p, curve = pot._core_args()
    orbit = _core.wkb_orbits(model, p, curve, mu, J * (J + 1.0), np.asarray(table.binding_energy))
    np.testing.assert_allclose(table.Bv, orbit["Bv"], rtol=1e-6, atol=0)
    np.testing.assert_allclose(table.dEdv, np.pi / orbit["half_period"], rtol=1e-6, atol=0)
