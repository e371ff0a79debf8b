"""Predictions of a fit (wkbfit.predictions): bound levels up to the last, v_th, vD, D0, the number of bound
levels and quasibound levels, each against the exact quantities of the TRUE potential whose exact levels made
the data.

Sources of the checks:
- the data and every reference level come from the exact radial solver (wkbfit.levels(method="exact"),
  tested against published levels in test_exact.py) and the exact resonance poles (tested in
  test_quasibound.py), never from the semiclassical method under test;
- the reference v_th is the matched rule's at the asymptote for the true potential (tested against the
  Bessel threshold phase and the quadratic threshold law of exact levels in test_matched.py); vD = v_th + 1/8
  for a C6 tail (physics.md 4c (i));
- Gauss-Markov: for a correct model and Gaussian noise of the stated size, (predicted - true)/uncertainty of a
  smooth function of the parameters is unit normal to first order; with N = 100 replicas the sample mean has
  standard error 0.1 and the sample sd 0.07, so |mean| < 0.3 and 0.8 < sd < 1.2 are ~3 standard errors wide.
"""
import math
import warnings

import numpy as np
import pytest

import wkbfit
from wkbfit import predictions
from wkbfit.fitting import FitWarning

TRUE = wkbfit.MLR(De=6000.0, re=3.6, C6=1.5e7, betas=[-0.5, 0.1])
START = TRUE.with_params(De=5990.0)
MU = 39.945
SIGMA = 1e-3
N_REPLICAS = 100


def exact_data():
    j0 = wkbfit.levels(TRUE, MU, v=list(range(0, 90, 6)), method="exact")
    j30 = wkbfit.levels(TRUE, MU, v=list(range(0, 80, 8)), J=30, method="exact")
    return {"v": np.concatenate([j0.v, j30.v]), "J": np.concatenate([j0.J, j30.J]),
            "energy": np.concatenate([j0.energy, j30.energy])}


def observed(cols, rng):
    n = len(cols["v"])
    return wkbfit.read_levels(dict(cols, energy=cols["energy"] + rng.normal(0.0, SIGMA, n),
                                   uncertainty=np.full(n, SIGMA)))


@pytest.fixture(scope="module")
def fitted():
    with warnings.catch_warnings():
        warnings.simplefilter("error", FitWarning)  # exact data, the default fit: no warning
        return wkbfit.fit(START, observed(exact_data(), np.random.default_rng(11)), mu=MU)


def true_threshold():
    return wkbfit.levels(TRUE, MU).v_th


def test_bound_levels_up_to_the_last_against_the_true_exact_levels(fitted):
    pred = fitted.predict()
    true = wkbfit.levels(TRUE, MU, method="exact")
    assert pred.n_bound == len(true) == 100  # the last exact level is bound by 2e-6 cm-1
    assert true.binding_energy[-1] < 1e-5
    z = (pred.energy - true.energy) / pred.energy_uncertainty
    assert np.max(np.abs(z)) < 4.0
    # binding energies of the last levels (the near-dissociation region) as well
    zb = (pred.binding_energy - true.binding_energy) / pred.binding_uncertainty
    assert np.max(np.abs(zb[-10:])) < 4.0
    D0_true = TRUE.asymptote - true.energy[0]
    assert abs(pred.D0 - D0_true) < 4 * pred.D0_uncertainty
    assert pred.method == "corrected" and "exact levels" in " ".join(pred.notes)


def test_v_th_and_vD_against_the_true_potential(fitted):
    pred = fitted.predict()
    v_th_true = true_threshold()
    assert abs(pred.v_th - v_th_true) < 4 * pred.v_th_uncertainty
    assert pred.vD == pytest.approx(pred.v_th + 0.125, abs=1e-12)  # physics.md 4c (i), C6 tail
    assert abs(pred.vD - (v_th_true + 0.125)) < 4 * pred.vD_uncertainty
    # the number of bound levels is the count below v_th; its range spans v_th -+ one sd
    assert pred.n_bound == math.ceil(pred.v_th)
    lo, hi = pred.n_bound_range
    assert lo <= pred.n_bound <= hi
    # first-order WKB vD is kept for comparison (the action at the asymptote)
    assert pred.vD_first_order == pytest.approx(wkbfit.levels(fitted.potential, MU, order=1).vD, abs=1e-9)


def test_v_th_uncertainty_by_differences_matches_monte_carlo_of_the_covariance(fitted):
    # independent of the secant rule: the sd of v_th over 300 parameter vectors drawn from N(p, covariance)
    # (sampling standard error of the sd: 1/sqrt(2*300) = 4 %; window 15 %)
    sd, why = predictions.propagate_by_differences(fitted, lambda p: [predictions.accurate_threshold(p, MU, 0.0)[0]])
    assert why is None
    names = list(fitted.potential.param_names)
    idx, cov = fitted._gradient_covariance()
    p0 = np.array([fitted.potential.params[n] for n in names])
    rng = np.random.default_rng(5)
    samples = []
    for draw in rng.multivariate_normal(np.zeros(len(idx)), cov, size=300):
        p = p0.copy()
        p[idx] += draw
        samples.append(predictions.accurate_threshold(fitted.potential.with_params(**dict(zip(names, p))), MU, 0.0)[0])
    mc = np.std(samples, ddof=1)
    assert sd[0] == pytest.approx(mc, rel=0.15)


def test_prediction_pulls_over_replicas():
    # 100 seeded replicas of the exact data refitted with the default method: the pulls of v_th, D0 and the last
    # bound level's binding energy against the true potential's exact values
    cols = exact_data()
    true = wkbfit.levels(TRUE, MU, method="exact")
    ref = {"v_th": true_threshold(), "D0": TRUE.asymptote - true.energy[0], "last": true.binding_energy[-1]}
    pulls = {k: [] for k in ref}
    rng = np.random.default_rng(2024)
    for _ in range(N_REPLICAS):
        result = wkbfit.fit(START, observed(cols, rng), mu=MU)
        pred = result.predict()
        pulls["v_th"].append((pred.v_th - ref["v_th"]) / pred.v_th_uncertainty)
        pulls["D0"].append((pred.D0 - ref["D0"]) / pred.D0_uncertainty)
        pulls["last"].append((pred.binding_energy[99] - ref["last"]) / pred.binding_uncertainty[99])
    for name, values in pulls.items():
        m, s = np.mean(values), np.std(values, ddof=1)
        assert abs(m) < 0.3, "pull mean of %s is %.3f" % (name, m)
        assert 0.8 < s < 1.2, "pull sd of %s is %.3f" % (name, s)


def test_quasibound_levels_against_the_true_exact_resonances(fitted):
    pred = fitted.predict(J=30, quasibound=True)
    q = pred.quasibound
    true = wkbfit.levels(TRUE, MU, J=30, quasibound=True, method="exact")
    sel = np.asarray(true.quasibound, dtype=bool)
    assert len(q) == int(np.count_nonzero(sel)) == 2 and q.method == "exact"
    np.testing.assert_array_equal(q.v, true.v[sel])
    assert np.all(np.abs(q.energy - true.energy[sel]) < 4 * q.energy_uncertainty)
    # the broad level's width (1.1e-2 cm-1; the narrow one, 5e-16, sits at the double-precision limit)
    assert abs(q.width[1] - true.width[sel][1]) < 4 * q.width_uncertainty[1]
    assert np.all(q.energy > TRUE.asymptote) and np.all(q.width_uncertainty > 0)
    assert "Quasibound levels" in q.to_text()
    # J = 0: no barrier, no quasibound level; without the keyword the hook stays None
    assert len(fitted.predict(quasibound=True).quasibound) == 0
    assert fitted.predict().quasibound is None


def test_wkb_fit_predictions_stay_first_order(fitted):
    obs = observed(exact_data(), np.random.default_rng(3))
    with pytest.warns(FitWarning):
        wkb = wkbfit.fit(START, obs, mu=MU, method="wkb")
    pred = wkb.predict()
    assert pred.v_th is None and pred.vD == pred.vD_first_order
    assert "first-order WKB" in " ".join(pred.notes)


def test_exact_fit_predictions_agree_with_the_default(fitted):
    obs = observed(exact_data(), np.random.default_rng(11))
    ex = wkbfit.fit(START, obs, mu=MU, method="exact").predict()
    de = fitted.predict()
    assert abs(ex.v_th - de.v_th) < 0.01 * de.v_th_uncertainty + 1e-9
    assert ex.v_th_uncertainty == pytest.approx(de.v_th_uncertainty, rel=0.01)
    assert abs(ex.D0 - de.D0) < 0.01 * de.D0_uncertainty


def test_bad_quasibound_flag(fitted):
    with pytest.raises(ValueError, match="quasibound"):
        fitted.predict(quasibound="yes")
