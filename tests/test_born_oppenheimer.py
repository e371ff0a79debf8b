"""Born-Oppenheimer breakdown corrections in multi-isotopologue fits.

Form [R. J. Le Roy, J. Mol. Spectrosc. 194, 189 (1999); from memory]: for isotopologue alpha and
the reference (1),
  V_alpha = V + (dM_A/M_A) S_A(r) + (dM_B/M_B) S_B(r),  dM_X = M_X(alpha) - M_X(1),
  centrifugal hbar^2 J(J+1)/(2 mu_alpha r^2) [1 + (M_A(1)/M_A) R_A(r) + (M_B(1)/M_B) R_B(r)],
  S = y u_inf + (1 - y) sum_i u_i y^i,  R = y t_inf + (1 - y) sum_i t_i y^i,  y = y_p(r; re).
The data are levels of the corrected potentials computed by an independent sinc-DVR with SciPy
[Colbert & Miller, J. Chem. Phys. 96, 1982 (1992), from memory], for an invented hydride-like
Morse state of three isotopologues (1H35Cl, 2H35Cl, 1H37Cl masses; invented scenario, not
measured data); the fits use the exact radial solver. Criterion: |fitted - true| < 3 sigma
(common practice); leaving the corrections out must make the fit much worse (sigma ratio).
"""
import functools

import numpy as np
import pytest
from scipy.linalg import eigh

import wkbfit
from wkbfit import HBAR2_OVER_2U, BornOppenheimerCorrection, Morse, fit, read_levels

TRUE = Morse(De=37000.0, re=1.2746, a=1.87)
COEF = {"uA0": 6.0, "uA1": -9.0, "tA0": 0.004}  # invented correction coefficients (cm-1; t dimensionless)
P = 3
LABELS = ("1H35Cl", "2H35Cl", "1H37Cl")


def y_p(r, re, p):
    return (r ** p - re ** p) / (r ** p + re ** p)


@functools.lru_cache(maxsize=None)
def dvr_levels(label, J, count, h=0.005):
    mA, mB = (wkbfit.isotope_mass(a) for a in wkbfit.parse_isotopologue(label))
    m1A, m1B = (wkbfit.isotope_mass(a) for a in wkbfit.parse_isotopologue(LABELS[0]))
    mu = mA * mB / (mA + mB)
    eps = HBAR2_OVER_2U / mu
    r = np.arange(0.6, 3.6, h)
    y = y_p(r, TRUE.re, P)
    S_A = (1 - y) * (COEF["uA0"] + COEF["uA1"] * y)
    R_A = (1 - y) * COEF["tA0"]
    V = TRUE(r) + (mA - m1A) / mA * S_A + eps * J * (J + 1) / r ** 2 * (1 + m1A / mA * R_A)
    d = np.subtract.outer(np.arange(len(r)), np.arange(len(r)))
    off = np.where(d == 0, 1, d)
    T = np.where(d == 0, np.pi ** 2 / 3, 2.0 * (-1.0) ** d / off ** 2) * eps / h ** 2
    return eigh(T + np.diag(V), eigvals_only=True, subset_by_index=[0, count - 1], driver="evx")


def data(sigma=0.01, seed=21):
    rng = np.random.default_rng(seed)
    cols = {"isotopologue": [], "v": [], "J": [], "energy": [], "uncertainty": []}
    for label in LABELS:
        for J in (0, 4, 8):
            E = dvr_levels(label, J, 8)
            for v, e in enumerate(E):
                cols["isotopologue"].append(label)
                cols["v"].append(v)
                cols["J"].append(J)
                cols["energy"].append(e + rng.normal(0, sigma))
                cols["uncertainty"].append(sigma)
    return read_levels(cols)


def test_correction_levels_match_the_independent_dvr():
    # noise-free: the fit's model at the true coefficients reproduces the DVR levels (DVR error ~1e-6)
    obs = data(sigma=1e-4, seed=1)
    bob = BornOppenheimerCorrection("1H35Cl", adiabatic=(2, 0), centrifugal=(1, 0), p=P, start=COEF)
    r = fit(TRUE, obs, method="exact", born_oppenheimer=bob, vary=["De"], max_iterations=3)
    assert np.max(np.abs(r.residuals)) < 1e-3


def test_multi_isotopologue_fit_recovers_the_correction_coefficients():
    obs = data()
    start = Morse(De=36800.0, re=1.275, a=1.86)
    bob = BornOppenheimerCorrection("1H35Cl", adiabatic=(2, 0), centrifugal=(1, 0), p=P)
    r = fit(start, obs, method="exact", born_oppenheimer=bob)
    assert r.success, r.message
    for name in ("De", "re", "a"):
        p = r.params[name]
        assert abs(p.value - TRUE.params[name]) < 3 * p.uncertainty, (name, p.value, p.uncertainty)
    for name, true in COEF.items():
        p = r.params[name]
        assert abs(p.value - true) < 3 * p.uncertainty, (name, p.value, true, p.uncertainty)
    assert r.params["uA_inf"].vary is False  # the asymptote shift is fixed by default
    # ignoring the corrections: a significantly worse fit
    plain = fit(start, obs, method="exact")
    ratio = plain.standard_error / r.standard_error
    print("standard error without / with the corrections: %.1f" % ratio)
    assert ratio > 5
    assert "uA0" in r.report()


def test_bad_correction_input():
    obs = data()
    with pytest.raises(ValueError, match="reference isotopologue '2H37Cl' .* is not among"):
        fit(TRUE, obs, born_oppenheimer=BornOppenheimerCorrection("2H37Cl"))
    with pytest.raises(ValueError, match="adiabatic=\\(7, 0\\) must be a pair"):
        BornOppenheimerCorrection("1H35Cl", adiabatic=(7, 0))
    bad = read_levels({"isotopologue": ["1H35Cl", "35Cl1H"], "v": [0, 1], "energy": [1000.0, 3000.0],
                       "uncertainty": [0.1, 0.1]})
    with pytest.raises(ValueError, match="does not name the atoms H and Cl of the reference"):
        fit(TRUE, bad, born_oppenheimer=BornOppenheimerCorrection("1H35Cl"), vary=["De"])
