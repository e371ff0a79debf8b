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


# The lean path of the small call (levels.py _small_call: one packed core call, a table whose columns are
# made on first use) against the general path it shortcuts, which the same rule given explicitly
# (order=2, ends="matched") takes. The lean path must change nothing: every column bit for bit (same
# dtype), vD, v_th, method_error, notes, and the same exceptions for bad input.
from test_rotational_corrections import CASES as _ROT_CASES  # noqa: E402

GENERAL = {"order": 2, "ends": "matched"}
LEAN_MODELS = dict(MODELS, **{"rc " + k: v for k, v in _ROT_CASES.items() if k != "point-wise"})
LEAN_MODELS["Poeschl-Teller"] = (wkbfit.PoschlTeller(De=3000.0, re=2.0, a=1.0), 10.0)


def _same_tables(a, b):
    assert len(a) == len(b) and a.method == b.method and a.mu == b.mu
    for c in a.columns:
        x, y = getattr(a, c), getattr(b, c)
        assert x.dtype == y.dtype and x.shape == y.shape, c
        assert np.array_equal(x, y, equal_nan=x.dtype.kind == "f"), (c, x, y)
        assert not x.flags.writeable, c
    assert a.vD_by_J == b.vD_by_J and a.v_th_by_J == b.v_th_by_J and a.notes == b.notes


@pytest.mark.parametrize("J", [0, 4])
@pytest.mark.parametrize("name", list(LEAN_MODELS))
def test_the_lean_path_gives_the_general_paths_table_bit_for_bit(name, J):
    pot, mu = LEAN_MODELS[name]
    n = len(_quiet(wkbfit.levels, pot, mu, v=None if name != "Poeschl-Teller" else [0], J=J))
    if name == "Poeschl-Teller":
        n = 6
    for vs in ([0], [1], 1, (2, 0, 2), [n // 2, 1], [n - 2], [n - 1]):
        lean = _quiet(wkbfit.levels, pot, mu, v=vs, J=J)
        general = _quiet(wkbfit.levels, pot, mu, v=vs, J=J, **GENERAL)
        assert "_block" not in general.__dict__
        _same_tables(lean, general)
    # the lean path was taken (point-wise curves keep the general path: its finer-rule error pass)
    assert ("_block" in _quiet(wkbfit.levels, pot, mu, v=[0], J=J).__dict__) == (pot.model != "pointwise")


def test_the_lean_table_reads_like_any_table_and_pickles():
    import pickle
    pot, mu = MODELS["MLR"]
    vs = [3, 0]
    lean = wkbfit.levels(pot, mu, v=vs, J=2)
    assert vs == [3, 0]  # the caller's list is not modified
    again = pickle.loads(pickle.dumps(lean))  # before any column or first-use quantity is made
    _same_tables(again, wkbfit.levels(pot, mu, v=vs, J=2, **GENERAL))
    assert lean.level(0, 2) == 1 and lean["energy"][1] == lean.energy[1]
    assert list(lean.to_dataframe().columns) == list(lean.columns)
    assert lean.to_dict()["rule"] == ["second-order", "second-order"]
    with pytest.raises(ValueError):
        lean.energy.setflags(write=True)  # a row of the read-only block
    with pytest.raises(AttributeError):
        lean.no_such_column


BAD = [({"v": [-1]}, None), ({"v": [10 ** 6]}, None), ({"v": [0, 10 ** 6]}, None), ({"v": [0], "J": -1}, None),
       ({"v": [0], "J": 10 ** 9}, None), ({"v": [0]}, -1.0), ({"v": [0]}, float("nan")), ({"v": [0]}, 1e30),
       ({"v": []}, None), ({"v": [True]}, None), ({"v": [0.5]}, None), ({"v": -1}, None), ({"v": (0, -2)}, None),
       ({"v": 10 ** 6}, None)]


@pytest.mark.parametrize("kw, mu", BAD, ids=[str(b) for b in BAD])
def test_bad_input_raises_what_the_general_path_raises(kw, mu):
    pot, mu0 = MODELS["Morse"]
    mu = mu0 if mu is None else mu
    errors = []
    for extra in ({}, GENERAL):
        try:
            t = _quiet(wkbfit.levels, pot, mu, **kw, **extra)
            errors.append(("no error", len(t)))
        except Exception as exc:  # noqa: BLE001  (the same type and message is the check)
            errors.append((type(exc), str(exc)))
    assert errors[0] == errors[1]
    if kw["v"] != [] and kw["v"] != [True]:
        assert errors[0][0] is not None and errors[0][0] != "no error", errors[0]
