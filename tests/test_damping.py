"""Damping functions of the MLR long-range terms and the damped MLR with C3..C10.

Sources:
- Tang-Toennies: D_m(x) = 1 - exp(-x) sum_{k=0}^{m} x^k/k!, x = b r [K. T. Tang and J. P. Toennies,
  J. Chem. Phys. 80, 3726 (1984)]; identical to the regularized lower incomplete gamma function
  P(m+1, x) (scipy.special.gammainc), and D_m ~ x^(m+1)/(m+1)! at small x, as the paper states.
- Douketis type generalized for MLR: D_m = [1 - exp(-b(s) rho r/m - c(s) (rho r)^2/sqrt(m))]^(m+s),
  r in bohr [Douketis et al., J. Chem. Phys. 76, 3057 (1982); Le Roy et al., Mol. Phys. 109, 435
  (2011)], so that D_m ~ r^(m+s) at small r (the behaviour the 2011 paper is built around). The
  constants b(s), c(s) (3.30, 0.423 for s = -1; 3.69, 0.378 for s = -2) are from memory and could not
  be checked against the paper: these tests check the form, its limits and the code's consistency.
- MLR: V = De [1 - (u(r)/u(re)) exp(-beta(r) y_p(r; re))]^2 with u = sum_m D_m C_m/r^m, so that
  De - V -> u(r) at large r [Le Roy et al. 2011, from memory]; written out here with mpmath.
- Li2 X-state long-range coefficients (C6 = 6.7190e6 cm-1 A^6, C8 = 1.12635e8 cm-1 A^8, C10 =
  2.78694e9 cm-1 A^10, De = 8516.78 cm-1, re = 2.6729 A; from memory of Le Roy et al., J. Chem. Phys.
  131, 204309 (2009)): a real alkali tail with a proper C8.
"""
import math

import mpmath as mp
import numpy as np
import pytest
import scipy.constants
from scipy.special import gammainc, factorial

import wkbfit
from wkbfit import _core
from wkbfit.potentials import BOHR, DEFAULT_DAMPING_RANGE, damping_range

mp.mp.dps = 30
DOUKETIS = {-1: (3.30, 0.423), -2: (3.69, 0.378)}  # (from memory)


def test_bohr_radius_against_scipy():
    # CODATA 2018 in the code; scipy may carry CODATA 2022 (7e-10 relative apart)
    assert BOHR == pytest.approx(scipy.constants.physical_constants["Bohr radius"][0] * 1e10, rel=1e-9)


@pytest.mark.parametrize("m", [3, 4, 6, 8, 10])
def test_tang_toennies_against_incomplete_gamma_and_its_limits(m):
    b = 1.7
    r = np.geomspace(1e-3, 60.0, 60)
    D, dD, d2D, dDdb = _core.damping(1, m, 0, b, r)
    np.testing.assert_allclose(D, gammainc(m + 1, b * r), rtol=1e-13, atol=1e-300)
    # small r: D ~ (b r)^(m+1)/(m+1)! (Tang & Toennies 1984)
    small = r < 1e-2
    np.testing.assert_allclose(D[small] / ((b * r[small]) ** (m + 1) / factorial(m + 1)), 1.0, rtol=2e-2)
    # large r: D -> 1
    assert D[-1] == pytest.approx(1.0, abs=1e-12)
    # derivatives: dD/dx = exp(-x) x^m/m!
    x = b * r
    np.testing.assert_allclose(dD, b * np.exp(-x) * x ** m / factorial(m), rtol=1e-12, atol=1e-300)
    np.testing.assert_allclose(dDdb, r * np.exp(-x) * x ** m / factorial(m), rtol=1e-12, atol=1e-300)
    h = 1e-5 * r
    fd2 = (_core.damping(1, m, 0, b, r + h)[1] - _core.damping(1, m, 0, b, r - h)[1]) / (2 * h)
    np.testing.assert_allclose(d2D, fd2, rtol=1e-6, atol=1e-12 * np.abs(d2D).max())


def douketis(r, m, s, rho):
    b, c = DOUKETIS[s]
    rb = r / mp.mpf(BOHR)
    return (1 - mp.exp(-b * rho * rb / m - c * (rho * rb) ** 2 / mp.sqrt(m))) ** (m + s)


@pytest.mark.parametrize("m,s", [(3, -1), (6, -1), (8, -1), (10, -1), (6, -2), (10, -2)])
def test_douketis_form_against_its_formula_and_limits(m, s):
    rho = 0.6
    r = np.geomspace(1e-3, 40.0, 40)
    D, dD, d2D, dDdrho = _core.damping(2, m, s, rho, r)
    for i, ri in enumerate(r):
        x = mp.mpf(ri)
        assert D[i] == pytest.approx(float(douketis(x, m, s, rho)), rel=1e-12)
        assert dD[i] == pytest.approx(float(mp.diff(lambda t: douketis(t, m, s, rho), x)), rel=1e-10)
        assert d2D[i] == pytest.approx(float(mp.diff(lambda t: douketis(t, m, s, rho), x, 2)), rel=1e-8,
                                       abs=1e-12)
        assert dDdrho[i] == pytest.approx(float(mp.diff(lambda q: douketis(x, m, s, q), mp.mpf(rho))), rel=1e-10)
    # small r: D ~ r^(m+s) (log-log slope), large r: D -> 1
    slope = np.log(D[1] / D[0]) / np.log(r[1] / r[0])
    assert slope == pytest.approx(m + s, rel=1e-2)
    assert D[-1] == pytest.approx(1.0, abs=1e-12)


# -- the damped MLR, written out with mpmath ----------------------------------------------------
def mp_D(kind, m, s, rho, r):
    if kind == 0:
        return mp.mpf(1)
    if kind == 1:
        x = rho * r
        return 1 - mp.exp(-x) * sum(x ** k / mp.factorial(k) for k in range(m + 1))
    return douketis(r, m, s, rho)


def mp_u(r, q):
    kind, s = int(q["damping"]), int(q["s"])
    return sum(q["C%d" % m] * mp_D(kind, m, s, q["rho"], r) / r ** m for m in (3, 4, 6, 8, 10))


def mp_mlr(r, q):
    betas = [q[k] for k in sorted((k for k in q if k.startswith("beta")), key=lambda k: int(k[4:]))]
    y = lambda x, a, p: (x ** p - a ** p) / (x ** p + a ** p)
    beta_inf = mp.log(2 * q["De"] / mp_u(q["re"], q))
    yp, yq = y(r, q["r_ref"], q["p"]), y(r, q["r_ref"], q["q"])
    beta = yp * beta_inf + (1 - yp) * sum(b * yq ** i for i, b in enumerate(betas))
    return q["De"] * (1 - mp_u(r, q) / mp_u(q["re"], q) * mp.exp(-beta * y(r, q["re"], q["p"]))) ** 2


LI2 = dict(De=8516.78, re=2.6729, C6=6.7190e6, C8=1.12635e8, C10=2.78694e9)
CASES = [
    wkbfit.MLR(betas=[0.1, -0.2, 0.05], damping="tang-toennies", rho=damping_range("tang-toennies", "Li", "Li"),
               r_ref=3.1, **LI2),
    wkbfit.MLR(betas=[0.1, 0.3], damping="douketis", rho=damping_range("douketis", "Li", "Li"), s=-1, p=6, q=3,
               **LI2),
    wkbfit.MLR(De=5000.0, re=3.2, C6=2e6, C3=3e5, C4=1e5, C8=0.0, betas=[0.2, 0.1], p=5, damping="douketis", s=-2,
               rho=0.8),
    wkbfit.MLR(De=5000.0, re=3.2, C6=4e6, C4=2e5, betas=[0.2], p=3, q=2),  # undamped, with C4
]
IDS = ["li2-tt", "li2-douketis", "c3c4-douketis", "c4-undamped"]


@pytest.mark.parametrize("pot", CASES, ids=IDS)
def test_damped_mlr_values_and_every_parameter_derivative(pot):
    q0 = {k: mp.mpf(v) for k, v in pot.params.items()}
    re = pot.params["re"]
    r = np.array([0.7, 0.9, 1.0, 1.2, 1.7, 2.5, 5.0, 15.0]) * re
    V, dV, d2V = pot.derivatives(r)
    for i, ri in enumerate(r):
        x = mp.mpf(ri)
        ref = mp_mlr(x, q0)
        assert V[i] == pytest.approx(float(ref), rel=1e-11, abs=1e-11 * pot.params["De"])
        assert dV[i] == pytest.approx(float(mp.diff(lambda t: mp_mlr(t, q0), x)), rel=1e-9,
                                      abs=1e-10 * pot.params["De"] / re)
        assert d2V[i] == pytest.approx(float(mp.diff(lambda t: mp_mlr(t, q0), x, 2)), rel=1e-7,
                                       abs=1e-9 * pot.params["De"] / re ** 2)
    J = pot.param_derivatives(r)
    for k, name in enumerate(pot.param_names):
        if name in ("damping", "s"):
            assert np.all(J[:, k] == 0)  # a choice of form, not a continuous parameter
            continue
        def g(value, ri):
            q = dict(q0)
            q[name] = value
            return mp_mlr(mp.mpf(ri), q)
        ref = np.array([float(mp.diff(lambda value: g(value, ri), q0[name])) for ri in r])
        np.testing.assert_allclose(J[:, k], ref, rtol=1e-8, atol=1e-10 * max(np.abs(ref).max(), 1e-300),
                                   err_msg=name)


@pytest.mark.parametrize("pot", CASES, ids=IDS)
def test_damped_mlr_tail_approaches_De_minus_damped_sum(pot):
    # De - V -> sum_m D_m C_m/r^m: the relative gap falls like u/(4 De) + r^-p (Le Roy et al. 2011)
    q0 = {k: mp.mpf(v) for k, v in pot.params.items()}
    re = pot.params["re"]
    gaps = []
    for f in (10.0, 20.0, 40.0, 80.0):
        r = f * re
        u = float(mp_u(mp.mpf(r), q0))
        depth = pot.binding_depth(np.array([r]))[0]
        gaps.append(abs(depth / u - 1))
    assert gaps[-1] < 1e-5
    assert all(b < a for a, b in zip(gaps, gaps[1:]))


def test_real_alkali_c8_is_accepted_with_damping_and_binds_levels():
    with pytest.raises(ValueError, match=r"u_LR\(re\).*must be below 2 De"):
        wkbfit.MLR(betas=[0.1], **LI2)
    for damping in ("tang-toennies", "douketis"):
        pot = wkbfit.MLR(betas=[0.1], damping=damping, rho=damping_range(damping, "7Li", "7Li"), **LI2)
        table = wkbfit.levels(pot, wkbfit.reduced_mass("7Li", "7Li"))
        assert len(table) > 10
        # the default range (two hydrogen atoms) works without rho
        default = wkbfit.MLR(betas=[0.1], damping=damping, **LI2)
        assert default.rho == DEFAULT_DAMPING_RANGE[1 if damping == "tang-toennies" else 2]
        assert default.damping == damping


def test_damped_mlr_fit_varies_the_long_range_coefficients():
    # levels from the EXACT solver; the fit varies C8 and the damping range with the betas
    true = CASES[1]
    mu = wkbfit.reduced_mass("7Li", "7Li")
    table = wkbfit.exact.exact_levels(true, mu, vs=list(range(0, 30, 2)), Js=[0, 10])
    obs = wkbfit.read_levels({"v": table.v, "J": table.J, "energy": table.energy,
                              "uncertainty": np.full(len(table), 1e-3)})
    start = true.with_params(De=8500.0, beta0=0.12, C8=1.1e8)
    r = wkbfit.fit(start, obs, mu, method="exact", vary=["De", "re", "beta0", "beta1", "C8"])
    assert r.success
    for name in ("De", "C8", "beta0"):
        assert r.params[name].value == pytest.approx(true.params[name], rel=1e-6)


@pytest.mark.parametrize("kwargs,match", [
    (dict(damping="quadratic"), "damping='quadratic' is not known"),
    (dict(damping="douketis", s=0), "s=0 is invalid for Douketis-type damping"),
    (dict(damping="tang-toennies", rho=-1.0), "rho=-1 .* must be > 0"),
    (dict(C3=-1.0), "C3=-1 is invalid"),
])
def test_bad_damping_input(kwargs, match):
    with pytest.raises(ValueError, match=match):
        wkbfit.MLR(De=5000.0, re=3.2, C6=2e6, betas=[0.2], **kwargs)
