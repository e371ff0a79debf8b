"""The default fit on the row engine (line positions, several data sets, free term values, fitted asymptotes,
Omega, Born-Oppenheimer terms): WKB iterations with per-row exact corrections (corrected.run_corrected_rows).

Criterion (the issue's target): the default fit reaches the minimum of the exact-levels fit (method="exact")
on the same data, every parameter within 0.01 standard deviation and the same uncertainties within 1 %.
The data come from the exact radial solver (wkbfit.levels(method="exact"), tested against published levels in
test_exact.py) or, for the Born-Oppenheimer case, from the independent sinc-DVR of test_born_oppenheimer.py.
"""
import warnings

import numpy as np
import pytest

import wkbfit
from wkbfit import fit, read_levels, read_lines
from wkbfit.fitting import FitWarning

MLR_TRUE = wkbfit.MLR(De=6000.0, re=3.6, C6=1.5e7, betas=[-0.5, 0.1], r_ref=3.6)
MLR_START = MLR_TRUE.with_params(De=5900.0, re=3.62, beta0=-0.47, beta1=0.08)
MASSES = {"iso-a": 40.0, "iso-b": 41.0}


def exact_energy(pot, mu, cache={}):
    def E(v, J):
        key = (id(pot), mu, J)
        if key not in cache:
            cache[key] = wkbfit.levels(pot, mu, J=J, method="exact").energy
        return cache[key][v]
    return E


def random_lines(n, seed, sigma=0.01):
    """Lines within the MLR state between random levels (P/R-like, J -> J+-1) of two isotopologues."""
    rng = np.random.default_rng(seed)
    cols = {k: [] for k in ("isotopologue", "v_upper", "J_upper", "v_lower", "J_lower", "wavenumber")}
    for _ in range(n):
        label = str(rng.choice(list(MASSES)))
        E = exact_energy(MLR_TRUE, MASSES[label])
        Jl, vl = int(rng.integers(0, 30)), int(rng.integers(0, 8))
        vu, Ju = int(rng.integers(vl + 1, 70)), Jl + 1 if Jl == 0 or rng.random() < 0.5 else Jl - 1
        for key, val in (("isotopologue", label), ("v_upper", vu), ("J_upper", Ju), ("v_lower", vl),
                         ("J_lower", Jl), ("wavenumber", E(vu, Ju) - E(vl, Jl) + rng.normal(0, sigma))):
            cols[key].append(val)
    cols["uncertainty"] = [sigma] * n
    return cols


def assert_matches_exact(potential, data, mu, **kw):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", FitWarning)
        exact = fit(potential, data, mu, method="exact", **kw)
        default = fit(potential, data, mu, **kw)
    assert default.method == "corrected" and default.success, default.message
    assert default.refreshes >= 2 and not default.start_notes
    names = list(default.var_names)
    for name in names:
        d, e = default.params[name], exact.params[name]
        assert abs(d.value - e.value) < 0.01 * e.uncertainty, (name, d.value, e.value, e.uncertainty)
        assert d.uncertainty == pytest.approx(e.uncertainty, rel=0.01), name
    for name, p in getattr(exact, "free_parameters", {}).items():
        q = default.free_parameters[name]
        assert abs(q.value - p.value) < 0.01 * p.uncertainty, name
        assert q.uncertainty == pytest.approx(p.uncertainty, rel=0.01), name
    assert default.chi_square == pytest.approx(exact.chi_square, rel=1e-4, abs=1e-6)
    return default, exact


def test_line_positions():
    default, exact = assert_matches_exact(MLR_START, read_lines(random_lines(120, seed=3)), MASSES)
    # the semiclassical iterations carry the fit: far fewer exact evaluations than the exact fit's
    assert default.refreshes <= 4 < exact.n_evaluations + 2


def test_term_values_and_a_progression_with_free_upper_levels():
    # two data sets: term values of the lowest levels and lines from two free (unmodelled) upper levels down to
    # many levels of the state: the free term values are fitted with the potential (extras of the row engine)
    mu = MASSES["iso-a"]
    E = exact_energy(MLR_TRUE, mu)
    rng = np.random.default_rng(5)
    terms = read_levels({"v": [0, 1, 2, 3], "J": [0] * 4, "energy": [E(v, 0) + rng.normal(0, 0.01) for v in range(4)],
                         "uncertainty": [0.01] * 4})
    cols = {c: [] for c in ("v_upper", "J_upper", "v_lower", "J_lower", "wavenumber", "upper_state")}
    for vu, Ju, T in ((10, 1, 16000.0), (11, 3, 16500.0)):  # invented levels of an unmodelled state "B"
        for v in range(0, 40, 2):
            for J in (Ju - 1, Ju + 1):
                for key, val in (("v_upper", vu), ("J_upper", Ju), ("v_lower", v), ("J_lower", J),
                                 ("wavenumber", T - E(v, J) + rng.normal(0, 0.01)), ("upper_state", "B")):
                    cols[key].append(val)
    lines = read_lines(dict(cols, uncertainty=[0.01] * len(cols["v_lower"])))
    default, exact = assert_matches_exact(MLR_START, [terms, lines], mu)
    assert len(default.free_parameters) == 2


def test_omega():
    # Omega = 6: the row engine; J(J+1) - Omega^2 of J = 6, 7 equals J(J+1) of 2, 4 (arithmetic identity)
    mu = MASSES["iso-a"]
    E = exact_energy(MLR_TRUE, mu)
    rng = np.random.default_rng(8)
    v = list(range(0, 60, 3)) * 2
    J = [6] * 20 + [7] * 20
    vals = [E(vv, 2 if j == 6 else 4) + rng.normal(0, 0.01) for vv, j in zip(v, J)]
    obs = read_levels({"v": v, "J": J, "energy": vals, "uncertainty": [0.01] * 40})
    assert_matches_exact(MLR_START, obs, mu, omega=6)


def test_binding_energies_below_a_fitted_asymptote():
    # photoassociation-like binding energies (sigma 1e-4 cm-1) of the last levels, threshold fitted
    pot = wkbfit.LennardJones(De=300.0, re=4.0)
    mu = 20.0
    t = wkbfit.levels(pot, mu, method="exact")
    rng = np.random.default_rng(9)
    shift, sigma = 0.0123, 1e-4
    values = t.binding_energy[-8:] + shift + rng.normal(0, sigma, 8)
    free = read_levels({"v": t.v[-8:], "energy": values, "uncertainty": np.full(8, sigma)}, energy_zero="asymptote",
                       fit_asymptote=True)
    default, _ = assert_matches_exact(pot.with_params(re=4.003), free, mu, vary=["re"])
    p = default.free_parameters["asymptote[set 1]"]
    assert abs(p.value - (pot.De + shift)) < 3 * p.uncertainty


def test_born_oppenheimer_terms():
    # levels with variant potentials: the exact rows come from the core's exact evaluation (no level-only path)
    import test_born_oppenheimer as bo
    obs = bo.data()
    start = wkbfit.Morse(De=36800.0, re=1.275, a=1.86)
    bob = wkbfit.BornOppenheimerCorrection("1H35Cl", adiabatic=(2, 0), centrifugal=(1, 0), p=bo.P)
    default, _ = assert_matches_exact(start, obs, None, born_oppenheimer=bob)
    assert default.params["uA0"].uncertainty > 0
