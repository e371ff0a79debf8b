"""The analytic potential models: values against their published formulas, derivatives against
finite differences (mpmath at 30 digits, so the differences themselves are not the limit).

- Morse: V = De (1 - exp(-a (r - re)))^2 [P. M. Morse, Phys. Rev. 34, 57 (1929)].
- Lennard-Jones (n, m) with minimum 0 at re and asymptote De: V = De + De/(n-m) [m (re/r)^n - n (re/r)^m]
  (the (12, 6) case is the Lennard-Jones form written about its minimum).
- Poeschl-Teller, hyperbolic: V = De tanh^2(a (r - re)) [Poeschl & Teller, Z. Phys. 83, 143 (1933), from memory].
"""
import mpmath as mp
import numpy as np
import pytest

import wkbfit

mp.mp.dps = 30


def mp_formula(pot):
    p = {k: mp.mpf(v) for k, v in pot.params.items()}
    if pot.model == "morse":
        return lambda r, q: q["De"] * (1 - mp.exp(-q["a"] * (r - q["re"]))) ** 2
    if pot.model == "lennard_jones":
        return lambda r, q: q["De"] + q["De"] / (q["n"] - q["m"]) * (
            q["m"] * (q["re"] / r) ** q["n"] - q["n"] * (q["re"] / r) ** q["m"])
    if pot.model == "poschl_teller":
        return lambda r, q: q["De"] * mp.tanh(q["a"] * (r - q["re"])) ** 2
    raise AssertionError(pot.model)


CASES = [
    wkbfit.Morse(De=42341.9, re=1.27455, a=1.75193),
    wkbfit.LennardJones(De=4000.0, re=4.0),
    wkbfit.LennardJones(De=350.0, re=3.7, n=10.5, m=6.2),
    wkbfit.PoschlTeller(De=1200.0, re=3.0, a=1.3),
]


@pytest.mark.parametrize("pot", CASES, ids=lambda p: p.model)
def test_values_derivatives_and_depth(pot):
    f = mp_formula(pot)
    q = {k: mp.mpf(v) for k, v in pot.params.items()}
    re = pot.params["re"]
    r = np.linspace(0.8 * re, 4 * re, 23)
    V, dV, d2V = pot.derivatives(r)
    depth = pot.binding_depth(r)
    for i, ri in enumerate(r):
        x = mp.mpf(ri)
        ref = f(x, q)
        scale = max(abs(float(ref)), pot.params["De"])
        assert V[i] == pytest.approx(float(ref), rel=1e-13, abs=1e-13 * scale)
        assert dV[i] == pytest.approx(float(mp.diff(lambda y: f(y, q), x)), rel=1e-11, abs=1e-12 * scale)
        assert d2V[i] == pytest.approx(float(mp.diff(lambda y: f(y, q), x, 2)), rel=1e-10, abs=1e-11 * scale)
        # the binding depth keeps its relative precision where V approaches De
        assert depth[i] == pytest.approx(float(q["De"] - ref), rel=1e-12, abs=1e-300)


@pytest.mark.parametrize("pot", CASES, ids=lambda p: p.model)
def test_parameter_derivatives_against_finite_differences(pot):
    f = mp_formula(pot)
    q0 = {k: mp.mpf(v) for k, v in pot.params.items()}
    re = pot.params["re"]
    r = np.linspace(0.85 * re, 3 * re, 11)
    J = pot.param_derivatives(r)
    assert J.shape == (len(r), len(pot.param_names))
    for k, name in enumerate(pot.param_names):
        for i, ri in enumerate(r):
            def g(p):
                q = dict(q0)
                q[name] = p
                return f(mp.mpf(ri), q)
            ref = float(mp.diff(g, q0[name]))
            assert J[i, k] == pytest.approx(ref, rel=1e-10, abs=1e-10 * pot.params["De"]), (name, ri)


def test_far_tail_has_no_cancellation():
    # at 30 re the Lennard-Jones depth is 2 De (re/r)^6 ~ 2.7e-9 De: V = De - depth would lose 9 digits
    lj = wkbfit.LennardJones(De=4000.0, re=4.0)
    r = np.array([120.0])
    s = 4.0 / 120.0
    assert lj.binding_depth(r)[0] == pytest.approx(4000.0 / 6 * (12 * s ** 6 - 6 * s ** 12), rel=1e-14)
    morse = wkbfit.Morse(De=1000.0, re=2.0, a=1.0)
    x = np.exp(-(40.0 - 2.0))
    assert morse.binding_depth(np.array([40.0]))[0] == pytest.approx(1000.0 * x * (2 - x), rel=1e-14)


def test_call_shapes_and_bad_r():
    m = CASES[0]
    assert isinstance(m(1.3), float)
    assert m(np.ones((2, 3))).shape == (2, 3)
    with pytest.raises(ValueError, match="r must be > 0"):
        m(np.array([1.0, -1.0]))
    with pytest.raises(ValueError, match="finite"):
        m(np.array([1.0, np.nan]))
    with pytest.raises(ValueError, match="not a number"):
        wkbfit.Morse(De="deep", re=1.0, a=1.0)


def test_varied_exponents_to_a_few_ulp_over_the_whole_range():
    # non-integer exponents take exp(e log s) in place of pow (csrc/potential.c): within a few ulp, |e log s|
    # of them at most; checked against the formula at 30 digits (mpmath) from the inner wall to 30 re, where
    # |n log s| reaches ~37: V and the depth to 1e-14 relative (of max(|V|, De) for V), dV/dp to 1e-13 of De
    pot = wkbfit.LennardJones(De=350.0, re=3.7, n=10.5, m=6.2)
    f = mp_formula(pot)
    q0 = {k: mp.mpf(v) for k, v in pot.params.items()}
    r = 3.7 * np.geomspace(0.7, 30.0, 31)
    V = pot(r)
    depth = pot.binding_depth(r)
    J = pot.param_derivatives(r)
    for i, ri in enumerate(r):
        ref = f(mp.mpf(ri), q0)
        assert V[i] == pytest.approx(float(ref), rel=1e-14, abs=1e-14 * max(abs(float(ref)), 350.0))
        assert depth[i] == pytest.approx(float(q0["De"] - ref), rel=1e-14, abs=1e-300)
        for k, name in enumerate(pot.param_names):
            def g(p):
                q = dict(q0)
                q[name] = p
                return f(mp.mpf(ri), q)
            ref_k = float(mp.diff(g, q0[name]))
            assert J[i, k] == pytest.approx(ref_k, rel=1e-12, abs=1e-13 * 350.0), (name, ri)
