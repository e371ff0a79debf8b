"""The r-independent parts of MLR evaluations (u_LR(re), beta_inf) are kept per thread and keyed by the
parameter values (csrc/models_extended.c): every parameter set must still get its own values when
sets alternate, when the same array is written in place, and when threads evaluate different sets at
once. Values are checked against an independent mpmath evaluation of the MLR formula
(tests/test_damping.py mp_mlr, written from Le Roy et al. 2009/2011) and, across orders and threads,
for bit-identity with the first evaluation of each set."""
import threading

import mpmath as mp
import numpy as np
import pytest

import wkbfit
from test_damping import mp_mlr
from wkbfit.potentials import damping_range

LI2 = dict(De=8516.78, re=2.6729, C6=6.7190e6, C8=1.12635e8, C10=2.78694e9)


def families():
    """Sets that differ in one parameter the r-independent parts depend on (invented wells)."""
    return {
        "mlr": [wkbfit.MLR(De=De, re=3.0, C6=C6, betas=[0.3, 0.1, 0.05]) for De, C6 in
                ((3000.0, 2e5), (3100.0, 2e5), (3000.0, 2.2e5))],
        "mlr-rref-q": [wkbfit.MLR(De=5875.0, re=re, C6=1.52e7, betas=[-0.35, 0.08], r_ref=4.2, p=5, q=3)
                       for re in (3.67, 3.70)],
        "tang-toennies": [wkbfit.MLR(betas=[0.1, -0.2, 0.05], damping="tang-toennies", r_ref=3.1, rho=rho, **LI2)
                          for rho in (damping_range("tang-toennies", "Li", "Li"), 1.1)],
        "douketis": [wkbfit.MLR(betas=[0.1, 0.3], damping="douketis", s=s, p=6, q=3, rho=0.6, **LI2)
                     for s in (-1.0, -2.0)],
        "c3c4-douketis-vs-tt": [wkbfit.MLR(De=5000.0, re=3.2, C6=2e6, C3=3e5, C4=1e5, C8=0.0, betas=[0.2, 0.1],
                                             p=5, damping=d, s=-2, rho=0.8) for d in ("douketis", "tang-toennies")],
    }


R_FACTORS = np.array([0.7, 0.9, 1.0, 1.2, 1.7, 2.5, 5.0, 15.0])


def values_and_derivs(pot, r):
    model, params, _ = pot._core_args()
    V, dV, d2V = wkbfit._core.potential_values(model, params, r)[:3]
    return np.concatenate([V, dV, d2V, wkbfit._core.param_derivatives(model, params, r).ravel()])


@pytest.mark.parametrize("name", list(families()))
def test_alternating_sets_each_get_their_own_values(name):
    pots = families()[name]
    r = R_FACTORS * pots[0].params["re"]
    first = [values_and_derivs(p, r) for p in pots]
    for i, pot in enumerate(pots):  # each set against the independent formula (tolerance of test_damping.py)
        q = {"C3": 0, "C4": 0, "damping": 0, "rho": 1, "s": 0}  # the undamped MLR's absent entries
        q.update({k: mp.mpf(v) for k, v in pot.params.items()})
        ref = np.array([float(mp_mlr(mp.mpf(x), q)) for x in r])
        np.testing.assert_allclose(first[i][:len(r)], ref, rtol=1e-11, atol=1e-11 * pot.params["De"])
    rng = np.random.default_rng(3)
    for i in rng.integers(0, len(pots), 40):  # any order: bit-identical
        np.testing.assert_array_equal(values_and_derivs(pots[i], r), first[i])


def test_parameters_written_in_place_are_seen():
    # the fit code writes p[] directly: the same array with a new De must give the new values
    a, b = families()["mlr"][:2]
    model, params, _ = a._core_args()
    params = np.array(params)  # a writable copy, as the fit's parameter vector
    r = R_FACTORS * 3.0
    V_a = wkbfit._core.potential_values(model, params, r)[0].copy()
    params[0] = b.params["De"]
    V_b = wkbfit._core.potential_values(model, params, r)[0]
    np.testing.assert_array_equal(V_b, wkbfit._core.potential_values(*b._core_args()[:2], r)[0])
    assert not np.array_equal(V_a, V_b)
    q = {"C3": 0, "C4": 0, "damping": 0, "rho": 1, "s": 0}
    q.update({k: mp.mpf(v) for k, v in b.params.items()})
    ref = np.array([float(mp_mlr(mp.mpf(x), q)) for x in r])
    np.testing.assert_allclose(V_b, ref, rtol=1e-11, atol=1e-11 * b.params["De"])


def test_threads_evaluating_different_sets_at_once():
    # the core releases the GIL in potential_values: threads run together, each on its own set
    pots = [p for fam in families().values() for p in fam]
    r = np.linspace(1.8, 40.0, 3000)
    expected = [values_and_derivs(p, r) for p in pots]
    failures = []

    def work(k):
        order = np.random.default_rng(k).integers(0, len(pots), 30)
        for i in order:
            if not np.array_equal(values_and_derivs(pots[i], r), expected[i]):
                failures.append((k, i))

    threads = [threading.Thread(target=work, args=(k,)) for k in range(4)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    assert failures == []
