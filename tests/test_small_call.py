"""The small call levels(pot, mu, v=[...]) under the default matched rule takes a shorter path: when every
requested v lies deep in the well the core skips the quantum threshold number (table.v_th is then computed
on first use) and reuses the v = 0 level it solved to judge the well. These checks hold that path to the
levels and v_th of the full table (the reference: the same rule over the whole well, whose accuracy against
the exact solver tests/test_matched.py checks).

Tolerance of the levels: 1e-9 cm-1 plus twice the two levels' numerical error estimates (the two paths
start their Newton iterations from different guesses, so they agree to the solver tolerance, not bit for
bit; measured differences <= 3e-11 cm-1). v_th: the same computation on a freshly set-up well, so 1e-12.
"""
import math
import warnings

import numpy as np
import pytest

import wkbfit
from wkbfit import _core
from test_matched import _models as matched_models


def _models():
    # the wells of the method-error tests (tests/test_matched.py) plus a C3-tail and a light well
    models = matched_models()
    del models["Poeschl-Teller"]  # its inner wall tops out below the asymptote: no full table to compare with
    models["LJ(6,3) C3"] = (wkbfit.LennardJones(De=2000.0, re=2.5, n=6, m=3), 10.0)
    models["LJ light (exact phase across the well)"] = (wkbfit.LennardJones(De=10000.0, re=1.2), 0.5)
    return models


MODELS = _models()


def _quiet(fn, *a, **kw):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return fn(*a, **kw)


def _close(a, b, i, j):
    tol = 1e-9 + 2 * (a.error[i] + b.error[j])
    assert abs(a.energy[i] - b.energy[j]) <= tol, (a.v[i], a.J[i], a.energy[i] - b.energy[j], tol)
    assert a.rule[i] == b.rule[j]


@pytest.mark.parametrize("J", [0, 5, 10])
@pytest.mark.parametrize("name", list(MODELS))
def test_small_call_gives_the_levels_and_v_th_of_the_full_table(name, J):
    pot, mu = MODELS[name]
    full = _quiet(wkbfit.levels, pot, mu, J=J)
    n = len(full)
    assert n >= 2  # (the light well binds 2 levels at J = 10)
    # deep levels one at a time and together, a level near the top (no deferral there) and the last one
    for vs in ([0], [1], [0, 2, 3], [n // 2], [n - 2], [n - 1]):
        if max(vs) >= n:
            continue
        small = _quiet(wkbfit.levels, pot, mu, v=vs, J=J)
        for i, v in enumerate(vs):
            _close(small, full, i, v)
        assert small.v_th == pytest.approx(full.v_th, rel=0, abs=1e-12)
        assert small.vD == full.vD


@pytest.mark.parametrize("name", ["Morse", "MLR", "LJ(6,3) C3"])
def test_the_deep_call_skips_the_threshold_and_the_table_computes_it_on_first_use(name):
    pot, mu = MODELS[name]
    model, params, curve = pot._core_args()
    deep = _core.wkb_levels(model, params, curve, mu, 0.0, [0], 1, 1, order=2, ends=1)
    assert math.isnan(deep["v_th"])  # skipped: the speed path is the one exercised above
    top = _core.wkb_levels(model, params, curve, mu, 0.0, [int(deep["count"]) - 1], 1, 1, order=2, ends=1)
    assert math.isfinite(top["v_th"])  # a level near the top needs the matched count: not skipped
    t = wkbfit.levels(pot, mu, v=[0])
    assert "_v_th_source" in t.__dict__ and t._v_th_source is not None  # not computed yet
    assert t.v_th == pytest.approx(top["v_th"], rel=0, abs=1e-12)
    assert t._v_th_source is None and t.v_th_by_J == {0: t.v_th}


def test_several_J_in_one_small_call():
    pot, mu = MODELS["MLR"]
    Js = [0, 3, 7]
    t = wkbfit.levels(pot, mu, v=[0, 1], J=Js)
    for J in Js:
        full = wkbfit.levels(pot, mu, J=J)
        for v in (0, 1):
            _close(t, full, t.level(v, J), v)
        assert t.v_th_by_J[J] == pytest.approx(full.v_th, rel=0, abs=1e-12)


def test_low_inner_wall_has_no_threshold_number_on_either_path():
    # Poeschl-Teller: the inner wall is lower than the asymptote, so there is no threshold of bound
    # levels; the lazily computed v_th is None, as in the eager path
    pot = wkbfit.PoschlTeller(De=3000.0, re=2.0, a=1.0)
    for v in ([0], [0, 1, 2]):
        t = _quiet(wkbfit.levels, pot, 10.0, v=v)
        assert t.v_th is None


def test_the_shared_default_columns_stay_read_only():
    pot, mu = MODELS["Morse"]
    a, b = wkbfit.levels(pot, mu, v=[0]), wkbfit.levels(pot, mu, v=[1])
    for name in ("width", "theta", "lifetime", "width_error", "quasibound", "above_barrier", "energy", "J"):
        assert not getattr(a, name).flags.writeable
    for name in ("width", "theta", "lifetime", "width_error", "quasibound", "above_barrier"):
        with pytest.raises(ValueError):  # shared between tables of one length: never writable again
            getattr(a, name).setflags(write=True)
    assert a.width[0] == 0 and a.theta[0] == np.inf and not a.quasibound[0] and b.lifetime[0] == np.inf
