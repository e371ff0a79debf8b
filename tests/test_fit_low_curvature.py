"""The first-order Newton test of the lowest levels in a fit (csrc/quantize.c): v = 1 takes F''(w) from the secant
to v = 0's slope, as v >= 2 take it from their neighbours. Reference: the same rows evaluated alone (a fresh
evaluator per row: no neighbour, the unseeded start), which is the quadrature the levels must converge to.
Criterion as in test_fit_seeding.py: 1e-10 cm-1 (the fit evaluator's stated accuracy is 1e-8 cm-1 of the
converged quadrature). Rows: v = 0..9 at one or two J values of one reduced mass, with up to four parameters
varied (the first ones) from a start 0.5 % off in the first two.
"""
import numpy as np
import pytest

import wkbfit
from wkbfit import _core
from test_fit_seeding import alone, close_jacobians
from test_rotational_corrections import CASES

_WKB = 0
FITTED = {name: CASES[name] for name in CASES if name != "point-wise"}  # a point-wise curve has no parameters
FITTED["LJ varied exponents"] = (wkbfit.LennardJones(De=2000.0, re=4.5, n=11.0, m=6.5), 40.0)


@pytest.mark.parametrize("J_values", [(0,), (0, 20)])
@pytest.mark.parametrize("name", list(FITTED))
def test_carried_bottom_curvature_gives_the_unseeded_levels(name, J_values):
    pot, mu0 = FITTED[name]
    model, p, curve = pot._core_args()
    vs = [v for J in J_values for v in range(10)]
    v = np.array(vs, dtype=np.intc)
    rot = np.array([J * (J + 1.0) for J in J_values for _ in range(10)])
    mu = np.full(len(v), mu0)
    energy, _ = _core.fit_evaluate(model, p, curve, v, rot, mu, 0, 1, 1e-8)
    start = np.array(p, dtype=float)
    start[0] *= 1.005
    start[1] *= 1.005
    vary = np.zeros(len(p), dtype=np.intc)
    vary[:2 if name == "LJ" else 4] = 1  # LJ: fixed (12, 6), the integer-exponent path
    if name == "Morse" and J_values == (0,):
        vary[1] = 0  # Morse levels at J = 0 do not depend on re (Morse 1929): its column is rounding only
    out = _core.fit_run(model=model, params=start, curve=curve, v=v, rot=rot, mu=mu, energy=energy,
                        sigma=np.full(len(v), 0.01), energy_zero=0, vary=vary, lower=np.full(len(p), -np.inf),
                        upper=np.full(len(p), np.inf), max_iterations=50, method=_WKB, offset=None)
    assert out["n_eval"] >= 2
    ref, ref_jac = alone(model, out["params"], curve, v, rot, mu)
    np.testing.assert_allclose(out["calc"], ref, rtol=0, atol=1e-10)
    varied = vary == 1
    assert close_jacobians(out["jacobian"][:, varied], ref_jac[:, varied])
