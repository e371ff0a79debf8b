"""The small fit's overhead cuts (issue 10), each checked against the plain definition it replaces.

- csrc/fit_levels.c: a level whose rows below it in the same well were solved already in this evaluation
  starts from the previous evaluation's level carried linearly to the new parameters plus the miss of
  those rows' linear guesses, extrapolated in v. Reference: every row evaluated alone (a fresh evaluator,
  one row: no neighbour, no previous evaluation), the quadrature any start must converge to; criterion
  1e-10 cm-1 on the analytic models (as tests/test_fit_seeding.py), parameter derivatives within 1e-5 of
  each column's largest (orbit averages at the last orbit, so they depend on the start). Checked after the
  large first Levenberg-Marquardt step of the three fits of tests/benchmarks/bench_fit.py (starts 0.5-3 %
  off: the levels move by tens to hundreds of cm-1) and at the end of those fits.
- rotational_corrections.interpolable: its answer against its definition (some (mu, v) has at least MIN_J
  distinct J), computed with Python sets, on random and structured row sets.
- Potential: one core call for the parameter check and the working-range values; the finiteness test's
  shortcut (a finite sum of squares) against the elementwise test, on values with non-finite entries
  inside and outside the checked range.
Data: invented potentials (the benchmark's wells); no measured values.
"""
import numpy as np
import pytest

import wkbfit
from wkbfit import _core
from wkbfit.potentials import _WORKING_RANGE_GRID
from wkbfit.rotational_corrections import MIN_J, interpolable

_WKB = 0
MU_LICS = wkbfit.reduced_mass("7Li", "133Cs")
# (true potential, start, reduced mass, v, J, varied parameter mask): the cases of bench_fit.py
CASES = {
    "Morse 3 parameters": (wkbfit.Morse(De=5875.0, re=3.67, a=0.6), wkbfit.Morse(De=5700.0, re=3.62, a=0.61),
                           MU_LICS, list(range(25)) * 2, [0] * 25 + [10] * 25, [1, 1, 1]),
    "Lennard-Jones 2 parameters": (wkbfit.LennardJones(De=2000.0, re=4.5), wkbfit.LennardJones(De=1950.0, re=4.45),
                                   40.0, list(range(50)), [0] * 50, [1, 1, 0, 0]),
    "Lennard-Jones 4 parameters": (wkbfit.LennardJones(De=2000.0, re=4.5, n=11.0, m=6.5),
                                   wkbfit.LennardJones(De=1990.0, re=4.49, n=11.2, m=6.4), 40.0,
                                   list(range(25)) * 2, [0] * 25 + [20] * 25, [1, 1, 1, 1]),
}


def _alone(model, p, curve, v, rot, mu):
    calc, jac = np.empty(len(v)), None
    for i in range(len(v)):
        c, j = _core.fit_evaluate(model, p, curve, v[i:i + 1], rot[i:i + 1], mu[i:i + 1], 0, _WKB)
        if jac is None:
            jac = np.empty((len(v), j.shape[1]))
        calc[i], jac[i] = c[0], j[0]
    return calc, jac


@pytest.mark.parametrize("name", list(CASES))
@pytest.mark.parametrize("iterations", [1, 2, 50])
def test_miss_corrected_seeds_give_the_unseeded_levels(name, iterations):
    true, start, mu0, vs, Js, vary = CASES[name]
    model, p, curve = true._core_args()
    v = np.array(vs, dtype=np.intc)
    rot = np.array([J * (J + 1.0) for J in Js])
    mu = np.full(len(v), mu0)
    energy, _ = _core.fit_evaluate(model, p, curve, v, rot, mu, 0, 1, 1e-8)  # exact-solver levels
    out = _core.fit_run(model=model, params=np.array(start._params), curve=curve, v=v, rot=rot, mu=mu,
                        energy=energy, sigma=np.full(len(v), 0.01), energy_zero=0,
                        vary=np.array(vary, dtype=np.intc), lower=np.full(len(p), -np.inf),
                        upper=np.full(len(p), np.inf), max_iterations=iterations, method=_WKB, offset=None)
    assert out["n_eval"] == min(iterations, out["n_eval"]) and out["n_eval"] >= 1
    if iterations == 50:
        assert out["stop"] == "converged"
    # the levels at the last accepted point (after the first step: that step's own evaluation)
    ref, ref_jac = _alone(model, out["params"], curve, v, rot, mu)
    np.testing.assert_allclose(out["calc"], ref, rtol=0, atol=1e-10)
    scale = np.abs(ref_jac).max(axis=0)
    assert np.all(np.abs(out["jacobian"] - ref_jac) <= 1e-5 * np.where(scale > 0, scale, 1.0))


def _interpolable_by_definition(model, v, rot, mu):
    if model == "pointwise" or len(v) < MIN_J:
        return False
    J = np.rint((np.sqrt(1.0 + 4.0 * np.asarray(rot, dtype=float)) - 1.0) / 2.0).astype(int)
    seen = {}
    for m, vv, j in zip(np.asarray(mu).tolist(), np.asarray(v).tolist(), J.tolist()):
        seen.setdefault((m, vv), set()).add(j)
    return any(len(js) >= MIN_J for js in seen.values())


def test_interpolable_follows_its_definition():
    rng = np.random.default_rng(7)
    answers = []
    for trial in range(600):
        n = int(rng.integers(1, 3000 if trial % 10 == 0 else 300))
        nJ, nv, nm = int(rng.integers(1, 40)), int(rng.integers(1, 30)), int(rng.integers(1, 4))
        v, J = rng.integers(0, nv, n), rng.integers(0, nJ, n)
        mu = rng.choice(np.array([6.5, 20.0, 0.5])[:nm], n)
        if trial % 3 == 0:  # whole ladders of one (mu, v): exactly nJ distinct J
            J = np.repeat(np.arange(nJ), max(1, n // nJ))[:n]
            v, mu = np.full(len(J), int(rng.integers(0, 3))), np.full(len(J), 6.5)
        rot = J * (J + 1.0)
        want = _interpolable_by_definition("morse", v, rot, mu)
        assert interpolable("morse", v, rot, mu) == want, (trial, n, nJ, nv, nm)
        answers.append(want)
    assert any(answers) and not all(answers)  # both answers exercised
    assert not interpolable("pointwise", np.zeros(40, int), np.arange(40) * 1.0, np.ones(40))


def test_potential_checks_unchanged():
    # the core's own parameter check (now made by the call that also gives the working-range values)
    with pytest.raises(ValueError, match="De"):
        wkbfit.Morse(De=-5.0, re=3.0, a=1.0)
    with pytest.raises(ValueError, match="re=20000"):
        wkbfit.Morse(De=5.0, re=2e4, a=1.0)  # outside the working range: no values computed at it
    with pytest.raises(ValueError, match="De=10000000000.0 cm-1 is outside the working range"):
        wkbfit.Morse(De=1e10, re=3.0, a=1.0)
    pot = wkbfit.Morse(De=5875.0, re=3.67, a=0.6)
    r = 3.67 * _WORKING_RANGE_GRID
    vals = [np.asarray(x, dtype=float).copy() for x in _core.potential_values(pot.model, pot._params, r, None)]
    pot._check_working_range(vals)  # finite: passes (the shortcut)
    inner = [x.copy() for x in vals]
    inner[0][0] = np.inf  # non-finite below 0.5 re: allowed (the elementwise test decides)
    assert r[0] < 0.5 * 3.67
    pot._check_working_range(inner)
    huge = [x.copy() for x in vals]
    huge[1][:] = 1e200  # finite, but the sum of squares overflows: the elementwise test decides, and passes
    pot._check_working_range(huge)
    outer = [x.copy() for x in vals]
    outer[3][-1] = np.nan  # non-finite inside the checked range: refused, naming the radius
    with pytest.raises(ValueError, match="non-finite V at r=%.6g" % r[-1]):
        pot._check_working_range(outer)
