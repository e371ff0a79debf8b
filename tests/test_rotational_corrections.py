"""Exact rows of the corrected fit's refreshes from corrections interpolated in J(J+1)
(wkbfit.rotational_corrections.exact_rows).

Reference: the exact radial solver at every row (_core.fit_evaluate, method exact; tested against
published levels in test_exact.py), never the interpolation itself. Criteria: every row within the
levels' stated tolerance (1e-8 cm-1 here) of the exact solver at that tolerance, on every model kind
and energy zero, at J = 0 and J > 0; Jacobians within 1e-5 of their largest element (the covariance
needs ~1e-3); fits with the interpolation at the same minimum as with every row solved exactly
(within 1e-3 standard deviation, uncertainties within 1e-4 relative: the issue's target).
"""
import functools

import numpy as np
import pytest

import wkbfit
import wkbfit.corrected
from wkbfit import _core
from wkbfit.rotational_corrections import MIN_J, exact_rows

R = np.linspace(1.6, 9.0, 60)
CASES = {
    "Morse": (wkbfit.Morse(De=9000.0, re=2.5, a=0.9), 20.0),
    "LJ": (wkbfit.LennardJones(De=4000.0, re=4.0), 20.0),
    "EMO": (wkbfit.EMO(De=3000.0, re=3.0, betas=[1.0, 0.1]), 30.0),
    "MLR": (wkbfit.MLR(De=3000.0, re=3.0, C6=2e5, betas=[0.3, 0.1, 0.05]), 30.0),
    "MLR damped": (wkbfit.MLR(De=5000.0, re=3.2, C6=2e6, C3=3e5, C4=1e5, C8=0.0, betas=[0.2, 0.1], p=5,
                              damping="douketis", s=-2, rho=0.8), 30.0),
    "point-wise": (wkbfit.PointwisePotential(R, wkbfit.Morse(De=9000.0, re=2.5, a=0.9)(R)), 20.0),
}
TOL = 1e-8


def rows_of(pot, mu0, J_values, fraction=0.6, n_v=5):
    """Rows of n_v levels v spread over 0..(fraction of the levels bound at the highest J), every J,
    two reduced masses."""
    n = len(wkbfit.levels(pot, mu0, J=max(J_values), method="exact"))
    vs, rot, mus = [], [], []
    for mu in (mu0, 1.1 * mu0):
        for v in np.unique(np.linspace(0, int(fraction * n), n_v).astype(int)):
            for J in J_values:
                vs.append(v)
                rot.append(J * (J + 1.0))
                mus.append(mu)
    return np.array(vs, dtype=np.intc), np.array(rot), np.array(mus)


@pytest.mark.parametrize("zero", [0, 1, 2], ids=["minimum", "asymptote", "lowest"])
@pytest.mark.parametrize("name", list(CASES))
def test_interpolated_rows_match_the_exact_solver(name, zero):
    pot, mu0 = CASES[name]
    model, p, curve = pot._core_args()
    v, rot, mu = rows_of(pot, mu0, list(range(0, 41, 2)))
    if zero == 2:  # the zero's own row carries no information
        keep = ~((v == 0) & (rot == 0))
        v, rot, mu = v[keep], rot[keep], mu[keep]
    exact, exact_jac = _core.fit_evaluate(model, p, curve, v, rot, mu, zero, 1, TOL)
    wkb, wkb_jac = _core.fit_evaluate(model, p, curve, v, rot, mu, zero, 0)
    calc, _, info = exact_rows(model, p, curve, v, rot, mu, zero, TOL, wkb)
    if name != "point-wise":
        assert info["interpolated_rows"] > 0.9 * len(v) and not info["fallback"]
        assert info["exact_levels"] < 0.5 * len(v)
    else:  # the spline's knots make delta(J) ragged at ~3e-8: solved row by row
        assert info["interpolated_rows"] == 0 and info["exact_levels"] == len(v)
    np.testing.assert_allclose(calc, exact, rtol=0, atol=TOL)
    assert np.abs(calc[rot == 0] - exact[rot == 0]).max() <= TOL  # J = 0 rows (interpolation nodes)
    if exact_jac.shape[1]:
        sd = 1e-4 * np.abs(p[:exact_jac.shape[1]])
        calc_j, jac, info_j = exact_rows(model, p, curve, v, rot, mu, zero, TOL, wkb, wkb_jac, sd)
        np.testing.assert_allclose(calc_j, exact, rtol=0, atol=TOL)
        # the derivatives' own interpolants (JACOBIAN_DEGREES) for every interpolated (mu, v)
        assert set(info_j["jacobian_degree"]) == set(info_j["degree"])
        scale = np.abs(exact_jac).max(axis=0)
        assert np.all(np.abs(jac - exact_jac).max(axis=0) <= 1e-5 * np.where(scale > 0, scale, 1.0))


def test_few_j_values_are_solved_row_by_row():
    pot, mu0 = CASES["MLR"]
    model, p, curve = pot._core_args()
    v, rot, mu = rows_of(pot, mu0, list(range(MIN_J - 1)))
    exact, _ = _core.fit_evaluate(model, p, curve, v, rot, mu, 0, 1, TOL)
    wkb, _ = _core.fit_evaluate(model, p, curve, v, rot, mu, 0, 0)
    calc, _, info = exact_rows(model, p, curve, v, rot, mu, 0, TOL, wkb)
    assert info["interpolated_rows"] == 0 and info["exact_levels"] == len(v)
    np.testing.assert_allclose(calc, exact, rtol=0, atol=TOL)


def test_a_failed_check_falls_back_to_exact_rows():
    # a tolerance below the exact solver's own noise: no interpolant can pass its check
    pot, mu0 = CASES["LJ"]
    model, p, curve = pot._core_args()
    v, rot, mu = rows_of(pot, mu0, list(range(0, 41, 2)), fraction=0.2)
    exact, _ = _core.fit_evaluate(model, p, curve, v, rot, mu, 0, 1, 1e-9)
    wkb, _ = _core.fit_evaluate(model, p, curve, v, rot, mu, 0, 0)
    calc, _, info = exact_rows(model, p, curve, v, rot, mu, 0, 1e-15, wkb)
    assert info["fallback"] and info["interpolated_rows"] < len(v)
    np.testing.assert_allclose(calc, exact, rtol=0, atol=1e-8)


def _data(true, masses, v_max, J_values, sigma, seed, zero):
    rows = {"v": [], "J": [], "energy": [], "isotopologue": []}
    for label, mu in masses.items():
        table = wkbfit.levels(true, mu, v=list(range(v_max)), J=J_values, method="exact")
        E = table.energy - (table.energy[(table.v == 0) & (table.J == 0)][0] if zero == "lowest" else 0.0)
        rows["v"] += table.v.tolist()
        rows["J"] += table.J.tolist()
        rows["energy"] += E.tolist()
        rows["isotopologue"] += [label] * len(table)
    n = len(rows["v"])
    E = np.array(rows["energy"]) + np.random.default_rng(seed).normal(0, sigma, n)
    if zero == "lowest":
        E[(np.array(rows["v"]) == 0) & (np.array(rows["J"]) == 0)] = 0.0
    rows["energy"], rows["uncertainty"] = E, np.full(n, sigma)
    return wkbfit.read_levels(rows, energy_zero=zero)


FITS = {
    "LJ, lowest": (wkbfit.LennardJones(De=4000.0, re=4.0), wkbfit.LennardJones(De=4040.0, re=4.04), 15, "lowest"),
    "MLR, minimum": (wkbfit.MLR(De=3000.0, re=3.0, C6=2e5, betas=[0.3, 0.1]),
                     wkbfit.MLR(De=2980.0, re=3.01, C6=2e5, betas=[0.28, 0.09]), 12, "minimum"),
    "Morse, lowest": (wkbfit.Morse(De=9000.0, re=2.5, a=0.9), wkbfit.Morse(De=9050.0, re=2.49, a=0.905), 20,
                      "lowest"),
}


@pytest.mark.parametrize("name", list(FITS))
def test_fit_reaches_the_minimum_of_the_all_exact_refreshes(name, monkeypatch):
    true, start, v_max, zero = FITS[name]
    masses = {"A": 20.0, "B": 22.0}
    obs = _data(true, masses, v_max, list(range(0, 40)), 0.01, 7, zero)
    fast = wkbfit.fit(start, obs, masses)
    orig = wkbfit.corrected.run_corrected
    monkeypatch.setattr(wkbfit.corrected, "run_corrected", functools.partial(orig, interpolate_in_j=False))
    slow = wkbfit.fit(start, obs, masses)
    assert fast.success and slow.success
    for n in slow.var_names:
        a, b = fast.params[n], slow.params[n]
        assert abs(a.value - b.value) < 1e-3 * b.uncertainty, (n, a.value, b.value, b.uncertainty)
        assert a.uncertainty == pytest.approx(b.uncertainty, rel=1e-4)
    np.testing.assert_allclose(fast.calculated, slow.calculated, rtol=0, atol=1e-3 * 0.01)


@pytest.mark.filterwarnings("ignore::wkbfit.observed.DataWarning")  # dense lines of two isotopologues
def test_line_fit_reaches_the_minimum_of_the_all_exact_refreshes(monkeypatch):
    # the row engine (line positions): P and R branches of the bands v -> v-1 and v -> v-2, J'' = 0..40, of
    # two isotopologues, from exact-solver levels plus noise; with and without the interpolation in J(J+1)
    true, start = wkbfit.Morse(De=9000.0, re=2.5, a=0.9), wkbfit.Morse(De=9050.0, re=2.49, a=0.905)
    masses = {"A": 20.0, "B": 22.0}
    rng = np.random.default_rng(8)
    cols = {k: [] for k in ("isotopologue", "v_upper", "J_upper", "v_lower", "J_lower", "wavenumber")}
    for label, m in masses.items():
        t = wkbfit.levels(true, m, v=list(range(8)), J=list(range(42)), method="exact")
        E = {(int(a), int(b)): float(c) for a, b, c in zip(t.v, t.J, t.energy)}
        for v in range(1, 8):
            for dv in (1, 2):
                if v - dv < 0:
                    continue
                for J in range(0, 41):
                    for Ju in (J - 1, J + 1):  # P and R lines
                        if Ju < 0:
                            continue
                        cols["isotopologue"].append(label)
                        cols["v_upper"].append(v)
                        cols["J_upper"].append(Ju)
                        cols["v_lower"].append(v - dv)
                        cols["J_lower"].append(J)
                        cols["wavenumber"].append(E[(v, Ju)] - E[(v - dv, J)])
    n = len(cols["wavenumber"])
    cols["wavenumber"] = np.array(cols["wavenumber"]) + rng.normal(0, 0.01, n)
    cols["uncertainty"] = np.full(n, 0.01)
    lines = wkbfit.read_lines(cols)
    fast = wkbfit.fit(start, lines, masses)
    monkeypatch.setattr(wkbfit.corrected.RowEvaluator, "interpolate_in_j", False)
    slow = wkbfit.fit(start, lines, masses)
    assert fast.success and slow.success and fast.method == "corrected"
    assert fast.n_level_calculations < slow.n_level_calculations
    for name in slow.var_names:
        a, b = fast.params[name], slow.params[name]
        assert abs(a.value - b.value) < 1e-3 * b.uncertainty, (name, a.value, b.value, b.uncertainty)
        assert a.uncertainty == pytest.approx(b.uncertainty, rel=1e-4)
    np.testing.assert_allclose(fast.calculated, slow.calculated, rtol=0, atol=1e-3 * 0.01)
