"""Seeded first-order WKB levels of the fit evaluator (csrc/fit.c: the same v at the previous J(J+1), and the
previous evaluation carried linearly to the new parameters) against the same levels solved without seeds.

Reference: each row evaluated alone (a fresh evaluator with one row: no neighbour, no previous evaluation,
the unseeded Newton start), which is the quadrature the seeds must converge to. Criterion: the issue's
stated accuracy, 1e-8 cm-1 of the converged quadrature (measured: <= 2e-11 on the analytic models, 1e-9 on
the point-wise curve, whose spline makes the Newton error estimate from the neighbours rough); parameter
derivatives within 1e-5 of each column's largest (they are orbit averages at the last orbit, one Newton
step from the level, so they depend on the start: measured <= 1.5e-6, and 1.2e-6 between rows evaluated
together and alone before the seeds; a fit's covariance needs ~1e-3).
"""
import numpy as np
import pytest

import wkbfit
from wkbfit import _core
from test_rotational_corrections import CASES  # the same wells: every model and a point-wise curve

_WKB = 0


def rows(pot, mu0):
    """v = 0, 1, 2, ... up to ~70 % of the levels bound at J = 30, J = 0..30 step 5, two reduced masses."""
    n = len(wkbfit.levels(pot, mu0, J=30))
    vs, rot, mus = [], [], []
    for mu in (mu0, 1.07 * mu0):
        for J in range(0, 31, 5):
            for v in list(range(4)) + list(range(4, int(0.7 * n), max(1, n // 8))):
                vs.append(v)
                rot.append(J * (J + 1.0))
                mus.append(mu)
    return np.array(vs, dtype=np.intc), np.array(rot), np.array(mus)


def alone(model, p, curve, v, rot, mu, zero=0):
    calc = np.empty(len(v))
    jac = None
    for i in range(len(v)):
        c, j = _core.fit_evaluate(model, p, curve, v[i:i + 1], rot[i:i + 1], mu[i:i + 1], zero, _WKB)
        if jac is None:
            jac = np.empty((len(v), j.shape[1]))
        calc[i], jac[i] = c[0], j[0]
    return calc, jac


def close_jacobians(a, b):
    scale = np.abs(b).max(axis=0)
    return np.all(np.abs(a - b) <= 1e-5 * np.where(scale > 0, scale, 1.0))


@pytest.mark.parametrize("name", list(CASES))
def test_neighbour_j_seeds_give_the_unseeded_levels(name):
    pot, mu0 = CASES[name]
    model, p, curve = pot._core_args()
    v, rot, mu = rows(pot, mu0)
    seeded, jac = _core.fit_evaluate(model, p, curve, v, rot, mu, 0, _WKB)
    ref, ref_jac = alone(model, p, curve, v, rot, mu)
    np.testing.assert_allclose(seeded[rot == 0], ref[rot == 0], rtol=0, atol=1e-8)  # J = 0
    np.testing.assert_allclose(seeded[rot > 0], ref[rot > 0], rtol=0, atol=1e-8)  # J > 0: seeded from the J before
    if name != "point-wise":
        assert np.abs(seeded - ref).max() <= 1e-10
    assert close_jacobians(jac, ref_jac)


def wkb_fit_of(pot, mu0, energy_zero, sigma=0.01):
    """A first-order WKB fit of the first two parameters (De, re; start 0.5 % off in De) to exact-solver
    levels of pot at the rows(): (fit_run's dict, (model, curve, v, rot, mu))."""
    model, p, curve = pot._core_args()
    v, rot, mu = rows(pot, mu0)
    energy, _ = _core.fit_evaluate(model, p, curve, v, rot, mu, energy_zero, 1, 1e-8)
    start = np.array(p, dtype=float)
    start[0] *= 1.005
    vary = np.zeros(len(p), dtype=np.intc)
    vary[:2] = 1
    out = _core.fit_run(model=model, params=start, curve=curve, v=v, rot=rot, mu=mu, energy=energy,
                        sigma=np.full(len(v), sigma), energy_zero=energy_zero, vary=vary,
                        lower=np.full(len(p), -np.inf), upper=np.full(len(p), np.inf), max_iterations=50,
                        method=_WKB, offset=None)
    return out, (model, curve, v, rot, mu)


@pytest.mark.parametrize("name", [n for n in CASES if n != "point-wise"])  # a point-wise curve has no parameters
def test_previous_evaluation_seeds_give_the_unseeded_levels(name):
    # a WKB fit (its Levenberg-Marquardt evaluations seed each other) to exact-solver levels of the true
    # potential, started 0.5 % off in De; its levels at the end against the unseeded ones at its parameters
    pot, mu0 = CASES[name]
    out, (model, curve, v, rot, mu) = wkb_fit_of(pot, mu0, 0)
    assert out["stop"] == "converged" and out["n_eval"] >= 2
    ref, ref_jac = alone(model, out["params"], curve, v, rot, mu)
    np.testing.assert_allclose(out["calc"], ref, rtol=0, atol=1e-10)
    assert close_jacobians(out["jacobian"], ref_jac)


@pytest.mark.parametrize("bounded", [False, True])
def test_the_solvers_first_residuals_reuse_the_start(bounded):
    # csrc/fit.c: GSL's first residuals at x = 0 are the start's own evaluation when x = 0 maps back to the
    # start bit for bit, so a run of one iteration computes every level twice (the start, one trial), not three
    # times; with a bound the transform's round trip may round, and then the start is evaluated again. Either
    # way the fit must end where a longer run from the same start ends (1e-3 sd: the criterion).
    pot, mu0 = CASES["LJ"]
    model, p, curve = pot._core_args()
    v, rot, mu = rows(pot, mu0)
    energy, _ = _core.fit_evaluate(model, p, curve, v, rot, mu, 0, 1, 1e-8)
    start = np.array(p, dtype=float)
    start[0] *= 1.005
    lower, upper = np.full(len(p), -np.inf), np.full(len(p), np.inf)
    if bounded:
        lower[0], upper[0] = 0.5 * p[0], 2.0 * p[0]
    vary = np.array([1, 1, 0, 0], dtype=np.intc)

    def run(iterations):
        return _core.fit_run(model=model, params=start, curve=curve, v=v, rot=rot, mu=mu, energy=energy,
                             sigma=np.full(len(v), 0.01), energy_zero=0, vary=vary, lower=lower, upper=upper,
                             max_iterations=iterations, method=_WKB, offset=None)
    one = run(1)
    assert one["n_eval"] in ((1,) if not bounded else (1, 2))  # (counted: the evaluations after the start's)
    full = run(50)
    assert full["stop"] == "converged"
    J = full["jacobian"][:, :2] / 0.01
    sd = np.sqrt(np.diag(np.linalg.inv(J.T @ J)))
    again = run(50)
    assert np.array_equal(again["params"], full["params"])  # deterministic
    assert np.all(np.abs(full["params"][:2] - p[:2]) <= 30 * sd)  # near the truth (WKB bias aside)
