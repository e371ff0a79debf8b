"""Calibration of the fit's uncertainties over many noisy replicas (seeded).

Source of the criterion: for a correct model and correctly stated Gaussian uncertainties, the
weighted least-squares estimate is unbiased and its pulls (fitted - true)/sigma follow a unit
normal distribution (Student t with dof degrees of freedom when sigma is scaled by the
dimensionless standard error; its standard deviation sqrt(dof/(dof-2)) = 1.02 for dof = 47).
With N = 200 replicas the sample mean has standard error 0.07 and the sample standard deviation
0.05, so the windows |mean| < 0.2 and 0.8 < std < 1.2 are about 3 and 4 standard errors wide.
"""
import numpy as np
import pytest

import wkbfit
from wkbfit import LennardJones, Morse, fit, read_levels

N_REPLICAS = 200
MU_LICS = wkbfit.reduced_mass("7Li", "133Cs")


def exact_levels(potential, mu, vs, Js):
    out = np.empty(len(vs))
    for J in sorted(set(Js)):
        idx = [i for i, j in enumerate(Js) if j == J]
        out[idx] = wkbfit.levels(potential, mu, v=[vs[i] for i in idx], J=J, order=1, ends="maslov").energy
    return out


def run_replicas(true, start, mu, vs, Js, sigma, seed, vary=None, predict_v=None):
    exact = exact_levels(true, mu, vs, Js)
    rng = np.random.default_rng(seed)
    names = None
    pulls, pred_pulls = [], []
    true_pred = None
    if predict_v is not None:
        table = wkbfit.levels(true, mu, order=1, ends="maslov")
        true_pred = (table.binding_energy[predict_v], true.De - table.energy[0])
    for _ in range(N_REPLICAS):
        obs = read_levels({"v": vs, "J": Js, "energy": exact + rng.normal(0.0, sigma, len(vs)),
                           "uncertainty": np.full(len(vs), sigma)})
        result = fit(start, obs, mu, vary=vary, method="wkb")  # WKB data: the WKB engine's calibration
        assert result.success, result.message
        names = result.var_names
        pulls.append([(result.params[n].value - true.params[n]) / result.params[n].uncertainty for n in names])
        if predict_v is not None:
            pred = result.predict()
            pred_pulls.append([(pred.binding_energy[predict_v] - true_pred[0]) / pred.binding_uncertainty[predict_v],
                               (pred.D0 - true_pred[1]) / pred.D0_uncertainty])
    return names, np.array(pulls), np.array(pred_pulls)


def check_pulls(names, pulls):
    mean, std = pulls.mean(axis=0), pulls.std(axis=0, ddof=1)
    for name, m, s in zip(names, mean, std):
        assert abs(m) < 0.2, "pull mean of %s is %.3f" % (name, m)
        assert 0.8 < s < 1.2, "pull standard deviation of %s is %.3f" % (name, s)
    return mean, std


def test_morse_pulls_and_prediction_near_dissociation():
    # 50 levels (v = 0..24 at J = 0 and 10) of a Morse well that binds 57: the prediction of the
    # binding energy of v = 45, well beyond the data, must be calibrated too.
    true = Morse(De=5875.0, re=3.67, a=0.6)
    names, pulls, pred = run_replicas(true, Morse(De=5700.0, re=3.62, a=0.61), MU_LICS, list(range(25)) * 2,
                                      [0] * 25 + [10] * 25, 0.01, seed=2024, predict_v=45)
    check_pulls(names, pulls)
    check_pulls(["binding energy v=45", "D0"], pred)


def test_lennard_jones_pulls_fixed_exponents():
    true = LennardJones(De=2000.0, re=4.5)
    names, pulls, _ = run_replicas(true, LennardJones(De=1950.0, re=4.45), 40.0, list(range(50)), [0] * 50, 0.01,
                                   seed=7)
    assert names == ["De", "re"]
    check_pulls(names, pulls)


def test_lennard_jones_pulls_varied_exponents():
    true = LennardJones(De=2000.0, re=4.5, n=11.0, m=6.5)
    names, pulls, _ = run_replicas(true, LennardJones(De=1990.0, re=4.49, n=11.2, m=6.4), 40.0,
                                   list(range(25)) * 2, [0] * 25 + [20] * 25, 0.01, seed=99,
                                   vary={"n": True, "m": True})
    assert names == ["De", "re", "n", "m"]
    check_pulls(names, pulls)
