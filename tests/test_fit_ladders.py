"""The fit evaluator's rotational ladders interpolated in J(J+1) (csrc/fit_ladders.c) against the same
first-order levels solved row by row (the private switch _core._set_fit_interpolation(False), the path
every fit took before).

Stated accuracy: energies within the level solve's own tolerance (energy_tol 1e-11 cm-1 + 4e-14 of the
level's term value; checked here at 1e-10 cm-1 for wells of 400-4000 cm-1), dE/dp within 1e-5 of each
column's largest value (WKB_LADDER_JAC_TOL), fitted parameters within 1e-3 of their standard deviations.
Where a ladder is not smooth enough for the nodes (levels next to the last bound J) the evaluator solves
every row directly: bit for bit the direct path.
The wells are invented test cases (Lennard-Jones (12,6), invented reduced masses)."""
import numpy as np
import pytest

import wkbfit
from wkbfit import _core


@pytest.fixture
def direct_and_interpolated():
    """Calls f() once with every row solved directly and once with ladders interpolated."""
    def both(f):
        previous = _core._set_fit_interpolation(False)
        try:
            direct = f()
            _core._set_fit_interpolation(True)
            interpolated = f()
        finally:
            _core._set_fit_interpolation(previous)
        return direct, interpolated
    return both


def grid(vs, Js, mus):
    v, rot, mu = [], [], []
    for m in mus:
        for vv in vs:
            for J in Js:
                v.append(vv), rot.append(J * (J + 1.0)), mu.append(m)
    return np.array(v, dtype=np.intc), np.array(rot), np.array(mu)


LJ = ("lennard_jones", np.array([4000.0, 4.0, 12.0, 6.0]))


@pytest.mark.parametrize("zero", [0, 1, 2])
def test_interpolated_levels_and_derivatives_match_the_direct_solve(direct_and_interpolated, zero):
    # two isotopologues, v = 0..24, J = 0..79 (every ladder interpolated), shuffled rows
    v, rot, mu = grid(range(25), range(80), (20.0, 23.5))
    order = np.random.default_rng(1).permutation(len(v))
    v, rot, mu = v[order], rot[order], mu[order]
    (E0, J0), (E1, J1) = direct_and_interpolated(lambda: _core.fit_evaluate(*LJ, None, v, rot, mu, zero, 0))
    assert not np.array_equal(E0, E1)  # (the interpolation did run)
    assert np.max(np.abs(E1 - E0)) < 1e-10
    scale = np.abs(J0).max(axis=0)
    live = scale > 0
    assert np.max(np.abs(J1 - J0)[:, live] / scale[live]) < 1e-5
    assert np.array_equal(J1[:, ~live], J0[:, ~live])


@pytest.mark.parametrize("pot, mu, nv, nJ", [
    (wkbfit.Morse(De=37000.0, re=1.27, a=1.87), 0.98, 8, 45),  # a light, deep well (few levels)
    (wkbfit.Morse(De=5875.0, re=3.67, a=0.6), 6.6, 40, 120),
    (wkbfit.MLR(De=8000.0, re=2.7, C6=6.0e5, C8=2.0e6, C10=5.0e6, betas=[-0.4, 0.3, 0.15, -0.05], p=5, q=4), 10.0, 18, 80),
    (wkbfit.EMO(De=10000.0, re=1.5, betas=[1.8, 0.15, 0.08], p=3), 5.0, 13, 60),
    (wkbfit.PoschlTeller(De=3000.0, re=2.0, a=1.0), 10.0, 5, 45),
])
def test_other_models_within_the_level_tolerance(direct_and_interpolated, pot, mu, nv, nJ):
    # invented wells; whether a ladder is interpolated or (failing its check) solved directly, the rows agree
    # with the direct solve within its tolerance, energy_tol 1e-11 + 4e-14 De
    v, rot, mus = grid(range(nv), range(nJ), (mu,))
    (E0, J0), (E1, J1) = direct_and_interpolated(
        lambda: _core.fit_evaluate(pot.model, np.array(pot._params), None, v, rot, mus, 0, 0))
    assert np.max(np.abs(E1 - E0)) <= 1e-11 + 4e-14 * pot._params[0]
    scale = np.abs(J0).max(axis=0)
    live = scale > 0
    assert np.max(np.abs(J1 - J0)[:, live] / scale[live]) < 1e-5


def test_short_and_long_ladders_mixed(direct_and_interpolated):
    # v = 0..4 at J = 0..59 (interpolated) beside v = 5, 6 at J = 0..9 only and a single row (solved directly)
    v1, r1, m1 = grid(range(5), range(60), (21.0,))
    v2, r2, m2 = grid((5, 6), range(10), (21.0,))
    v = np.concatenate([v1, v2, [7]]).astype(np.intc)
    rot = np.concatenate([r1, r2, [12.0]])
    mu = np.concatenate([m1, m2, [21.0]])
    (E0, J0), (E1, J1) = direct_and_interpolated(lambda: _core.fit_evaluate(*LJ, None, v, rot, mu, 2, 0))
    assert np.max(np.abs(E1 - E0)) < 1e-10
    assert np.max(np.abs(J1 - J0) / np.abs(J0).max(axis=0).clip(1e-300)) < 1e-5
    assert not np.array_equal(E0[:len(v1)], E1[:len(v1)])


def test_a_ladder_reaching_the_last_bound_j_is_solved_directly(direct_and_interpolated):
    # a 400 cm-1 well at 20 u: v = 8 is bound up to J = 47, and its levels there bend too fast for 13 nodes;
    # the check rejects the interpolation and the evaluation solves the rows directly, bit for bit
    v, rot, mu = grid((8,), range(48), (20.0,))
    p = np.array([400.0, 4.0, 12.0, 6.0])
    (E0, J0), (E1, J1) = direct_and_interpolated(lambda: _core.fit_evaluate("lennard_jones", p, None, v, rot, mu, 0, 0))
    assert np.array_equal(E0, E1) and np.array_equal(J0, J1)


def test_only_the_ladder_that_fails_the_check_is_solved_directly(direct_and_interpolated):
    # the same v = 8 ladder beside v = 0..3 over the same J: those stay interpolated, v = 8 is solved directly
    v, rot, mu = grid((0, 1, 2, 3, 8), range(48), (20.0,))
    p = np.array([400.0, 4.0, 12.0, 6.0])
    (E0, J0), (E1, J1) = direct_and_interpolated(lambda: _core.fit_evaluate("lennard_jones", p, None, v, rot, mu, 0, 0))
    assert np.max(np.abs(E1 - E0)) <= 1e-11 + 4e-14 * 400.0  # the level tolerance in this well
    assert np.max(np.abs(J1 - J0) / np.abs(J0).max(axis=0).clip(1e-300)) < 1e-5
    assert not np.array_equal(E0[v < 8], E1[v < 8])


def test_an_unbound_row_is_reported_as_by_the_direct_solve(direct_and_interpolated):
    v, rot, mu = grid((10, 12), range(40), (20.0,))
    p = np.array([400.0, 4.0, 12.0, 6.0])

    def message():
        with pytest.raises(ValueError) as info:
            _core.fit_evaluate("lennard_jones", p, None, v, rot, mu, 0, 0)
        return str(info.value)
    direct, interpolated = direct_and_interpolated(message)
    assert direct == interpolated and "v=12" in direct


@pytest.mark.filterwarnings("ignore:the wkb levels")  # (first-order data: the method-error check says so)
def test_fit_parameters_agree_with_the_direct_path(direct_and_interpolated):
    # first-order levels of an invented LJ well (two invented isotopologues, v = 0..9, J = 0..59) plus 0.01 cm-1 of
    # seeded noise, fitted from a start 1 % off, first-order and default (corrected) fits
    true = wkbfit.LennardJones(De=4000.0, re=4.0)
    rows = {"v": [], "J": [], "energy": [], "isotopologue": []}
    masses = {"a": 20.0, "b": 22.0}
    for label, m in masses.items():
        table = wkbfit.levels(true, m, v=list(range(10)), J=list(range(60)), order=1, ends="maslov")
        rows["v"] += table.v.tolist()
        rows["J"] += table.J.tolist()
        rows["energy"] += table.energy.tolist()
        rows["isotopologue"] += [label] * len(table)
    rows["energy"] = np.array(rows["energy"]) + np.random.default_rng(5).normal(0, 0.01, len(rows["v"]))
    rows["uncertainty"] = np.full(len(rows["v"]), 0.01)
    obs = wkbfit.read_levels(rows)
    start = wkbfit.LennardJones(De=4040.0, re=4.04)
    for method in ("wkb", "corrected"):
        direct, interpolated = direct_and_interpolated(lambda: wkbfit.fit(start, obs, masses, method=method))
        assert direct.success and interpolated.success
        for name in direct.var_names:
            a, b = direct.params[name], interpolated.params[name]
            assert abs(a.value - b.value) < 1e-3 * a.uncertainty, (method, name)
            assert b.uncertainty == pytest.approx(a.uncertainty, rel=1e-6)
        assert interpolated.chi_square == pytest.approx(direct.chi_square, rel=1e-8)
