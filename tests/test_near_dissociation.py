"""near_dissociation_fit: the LeRoy-Bernstein law, the near-dissociation expansion and the threshold law.

Sources:
- LeRoy and Bernstein, J. Chem. Phys. 52, 3869 (1970); physics.md 4a: D - E = [(vD - v) H_n]^(2n/(n-2))
  with H_n from C_n and mu. physics.md 4a's check: first-order WKB levels of LJ(12,6) with
  De = 2e5 eps/re^2 follow the law to 1e-3..1e-4 over the last nine levels, C6 = 2 De re^6, and vD is
  the WKB action's value at the asymptote (106.196206 there).
- physics.md 4c: the true threshold number v_th = vD - 1/(2(n-2)) (vD - 1/8 for n = 6) and the
  quadratic law E = -eps [pi (v_th - v)/bbar]^2 for binding energies << E_beta.
- Data: first-order WKB levels for the LB law itself (it describes them); EXACT-solver levels
  (wkbfit.levels(method="exact")) for the recovery of D and C_n with corrections and for v_th.
"""
import math

import numpy as np
import pytest

import wkbfit
import wkbfit.fitting
from wkbfit import near_dissociation_fit
from wkbfit.near_dissociation import lb_constant, threshold_length


def test_lb_constant_matches_physics_notes():
    # physics.md 4a: hbar sqrt(2 pi/mu) = 14.554697390/sqrt(mu) (cm-1)^(1/2) A and the factor
    # n Gamma(1+1/n)/Gamma(1/2+1/n) = 4.110658193 for n = 6; H_n = ((n-2)/(2n)) K_n
    mu, C6 = 7.0, 1.3e7
    K6 = 14.554697390 / math.sqrt(mu) * 4.110658193 / C6 ** (1 / 6)
    assert lb_constant(C6, 6, mu) == pytest.approx((4 / 12) * K6, rel=1e-9)
    # physics.md 4b: bbar/beta = 0.4779888 for n = 6
    beta, bbar, E_beta = threshold_length(C6, 6, mu)
    assert bbar / beta == pytest.approx(0.4779888, rel=1e-6)
    assert E_beta == pytest.approx(wkbfit.HBAR2_OVER_2U / mu / beta ** 2, rel=1e-12)


@pytest.mark.parametrize("asymptote", ["fixed", "free"])
def test_lb_law_recovered_from_first_order_wkb_levels_of_a_c6_tail(asymptote):
    # LJ(12,6) is -C6/r^6 with C6 = 2 De re^6 at long range; its last WKB levels (bound by < 0.7 cm-1
    # = 25 eps/re^2, outer turning points > 2.4 re, where the r^-12 wall is below 1e-3 of the tail)
    mu, re = 40.0, 4.0
    De = 2e5 * wkbfit.HBAR2_OVER_2U / mu / re ** 2  # physics.md 4a's well (107 levels)
    table = wkbfit.levels(wkbfit.LennardJones(De=De, re=re), mu, order=1)
    assert len(table) == 107 and table.vD == pytest.approx(106.196206, abs=1e-4)  # physics.md 4a
    last = slice(len(table) - 6, len(table))
    fit = near_dissociation_fit(table.v[last], table.energy[last], np.full(6, 1e-6), 6,
                                De if asymptote == "fixed" else None, mu=mu, corrections=0)
    C6 = 2 * De * re ** 6
    # tolerances: the law holds to ~1e-3 here (physics.md 4a), so C6 to 3e-3 and vD to 2e-3
    assert fit.lb.params["C_n"][0] == pytest.approx(C6, rel=3e-3)
    assert fit.lb.params["vD"][0] == pytest.approx(table.vD, abs=2e-3)
    assert fit.D[0] == pytest.approx(De, abs=1e-4)
    assert "first-order semiclassical" in near_dissociation_fit.__doc__
    assert "first-order semiclassical levels, not the true last levels" in fit.table()


MLR_C6 = wkbfit.MLR(De=6000.0, re=3.6, C6=1.5e7, betas=[-0.5, 0.1])


@pytest.mark.parametrize("asymptote", [6000.0, None], ids=["fixed", "free"])
def test_d_and_cn_recovered_from_exact_levels_with_corrections(asymptote):
    # exact levels v = vmax-11 .. vmax-1 (bound by 0.014 to 12 cm-1) of an MLR with known C6 and D,
    # stated uncertainty 1e-3 cm-1 (not scaled): D and C6 within one stated standard deviation with two
    # correction terms; the pure LB law misses C6 by more (the exact levels are not LB levels).
    table = wkbfit.levels(MLR_C6, 40.0, method="exact")
    sel = slice(len(table) - 12, len(table) - 1)
    v, E = table.v[sel], table.energy[sel]
    fit = near_dissociation_fit(v, E, np.full(len(v), 1e-3), 6, asymptote, mu=40.0, corrections=2,
                                scale_uncertainties=False)
    D, C6 = fit.D, fit.C_n
    assert abs(C6[0] - 1.5e7) < C6[1], C6
    if asymptote is None:
        assert abs(D[0] - 6000.0) < D[1], D
    else:
        assert D == (6000.0, 0.0)
    assert abs(fit.lb.params["C_n"][0] - 1.5e7) > 3 * fit.lb.params["C_n"][1]
    assert len(fit.residuals) == len(v)
    # with noise, over seeded replicas, the stated uncertainties hold (Gauss-Markov; 40 replicas: the
    # mean pull has standard error 0.16, so |mean| < 0.6 and 0.6 < sd < 1.5 are wide, common practice)
    rng = np.random.default_rng(3)
    pulls = []
    for _ in range(40):
        f = near_dissociation_fit(v, E + rng.normal(0, 1e-3, len(v)), np.full(len(v), 1e-3), 6, asymptote, mu=40.0,
                                  corrections=2, scale_uncertainties=False)
        pulls.append((f.C_n[0] - 1.5e7) / f.C_n[1])
    assert abs(np.mean(pulls)) < 0.6 and 0.6 < np.std(pulls, ddof=1) < 1.5


def test_binding_energy_input_with_free_or_fixed_asymptote():
    table = wkbfit.levels(MLR_C6, 40.0, method="exact")
    sel = slice(len(table) - 12, len(table) - 1)
    as_terms = near_dissociation_fit(table.v[sel], table.energy[sel], np.full(11, 1e-3), 6, None, mu=40.0,
                                     corrections=2)
    as_binding = near_dissociation_fit(table.v[sel], table.binding_energy[sel], np.full(11, 1e-3), 6, None,
                                       mu=40.0, corrections=2, energy_zero="asymptote")
    # the same fit in the other zero: D shifted by the asymptote, everything else equal
    # (to 0.01 standard deviation: the two fits stop at their own last steps)
    assert abs(as_binding.D[0] - (as_terms.D[0] - 6000.0)) < 0.01 * as_terms.D[1]
    assert abs(as_binding.C_n[0] - as_terms.C_n[0]) < 0.01 * as_terms.C_n[1]
    fixed = near_dissociation_fit(table.v[sel], table.binding_energy[sel], np.full(11, 1e-3), 6, 0.0, mu=40.0,
                                  corrections=2, energy_zero="asymptote")
    assert fixed.D == (0.0, 0.0) and abs(fixed.C_n[0] - 1.5e7) < 3 * fixed.C_n[1]


def test_threshold_law_gives_v_th_from_the_last_exact_level():
    # physics.md 4c (i)-(ii): the last exact level, bound by 0.03 E_beta, lies on the quadratic law with
    # v_th = vD(WKB) - 1/8 (n = 6); the law's leading form is within ~5 % of (v_th - v) ~ 0.03 here and
    # the relation holds to ~6e-4 (physics.md 4c check), so 0.003 in v_th.
    mu = 39.945
    exact = wkbfit.levels(MLR_C6, mu, method="exact")
    vD = wkbfit.levels(MLR_C6, mu).vD
    E_beta = threshold_length(1.5e7, 6, mu)[2]
    assert exact.binding_energy[-1] < 0.1 * E_beta
    sel = slice(len(exact) - 12, len(exact))
    fit = near_dissociation_fit(exact.v[sel], exact.energy[sel], np.full(12, 1e-7), 6, 6000.0, mu=mu,
                                corrections=2, C_n=1.5e7)
    assert fit.threshold is not None and fit.v_th_source == "threshold law"
    assert fit.v_th[0] == pytest.approx(vD - 0.125, abs=3e-3)
    assert fit.v_th[1] < 0.01


def test_bad_input():
    v, E, s = [1, 2, 3, 4], [1.0, 2.0, 2.5, 2.7], [0.1] * 4
    with pytest.raises(ValueError, match="same length"):
        near_dissociation_fit(v, E[:3], s)
    with pytest.raises(ValueError, match="uncertainty must be a finite number > 0"):
        near_dissociation_fit(v, E, [0.1, 0.0, 0.1, 0.1])
    with pytest.raises(ValueError, match="tail_power=2 must be > 2"):
        near_dissociation_fit(v, E, s, tail_power=2)
    with pytest.raises(ValueError, match="at or above the fixed asymptote"):
        near_dissociation_fit(v, E, s, asymptote=2.6)
    with pytest.raises(ValueError, match="distinct whole numbers"):
        near_dissociation_fit([1, 1, 2, 3], E, s)
    user = np.array(E)
    near_dissociation_fit(v, user, s, asymptote=3.0, mu=10.0, corrections=0)
    assert user.tolist() == E  # the user's array is not changed


def test_long_range_tail_read_off_the_models():
    # LJ(12,6): C6 = 2 De re^6 (physics.md 4a); MLR: De - V -> C6/r^6 (its definition); Morse: exponential
    from wkbfit.near_dissociation import long_range_tail
    n, C6 = long_range_tail(wkbfit.LennardJones(De=1000.0, re=4.0))
    assert n == 6 and C6 == pytest.approx(2 * 1000.0 * 4.0 ** 6, rel=1e-4)
    n, C6 = long_range_tail(MLR_C6)
    assert n == 6 and C6 == pytest.approx(1.5e7, rel=1e-4)
    assert long_range_tail(wkbfit.Morse(De=1000.0, re=2.0, a=1.0)) is None


def test_predictions_give_v_th():
    # physics.md 4c: v_th = vD - 1/8 for a C6 tail, and the quadratic threshold law v_th - v = bbar kappa/pi at the
    # last level. Exact levels of MLR_C6 (noise-free, sigma 1e-3) fitted by the default method: the prediction's
    # v_th (matched rule) agrees with the threshold law applied to the fitted potential's last EXACT level (bound
    # by 0.03 E_beta; O(kappa) error ~3e-3 there, as in the threshold test), and vD = v_th + 1/8.
    from wkbfit.near_dissociation import threshold_number
    mu = 39.945
    table = wkbfit.levels(MLR_C6, mu, v=list(range(0, 90, 6)), method="exact")
    obs = wkbfit.read_levels({"v": table.v, "energy": table.energy, "uncertainty": np.full(len(table), 1e-3)})
    result = wkbfit.fit(MLR_C6.with_params(De=5990.0), obs, mu=mu)
    pred = result.predict()
    assert "matched rule" in " ".join(pred.notes)
    exact = wkbfit.levels(result.potential, mu, method="exact")
    ref, _, note = threshold_number(result.potential, mu, exact.binding_energy, np.zeros(len(exact)), 0.0, 0.0)
    assert "quadratic threshold law" in note
    assert pred.v_th == pytest.approx(ref, abs=3e-3)
    assert pred.v_th == pytest.approx(pred.vD - 0.125, abs=1e-12)
    assert "v_th = " in pred.summary() and pred.v_th_uncertainty > 0
    with pytest.warns(wkbfit.fitting.FitWarning, match="wkb levels"):
        wkb = wkbfit.fit(MLR_C6.with_params(De=5990.0), obs, mu=mu, method="wkb")
    assert wkb.predict().v_th is None  # first-order WKB levels say nothing about the true threshold
