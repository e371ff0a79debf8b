"""The fit's level evaluator on several threads (csrc/fit_levels.c: the sorted rows cut into one part per
thread, each with its own well workspace) against the same evaluator on one thread, on every model.

Criteria: a cut at a change of reduced mass keeps every neighbour-J seed chain inside one thread, so
the levels and derivatives must be bit-identical; a cut inside one reduced mass (more threads than
isotopologues) starts the first J of the later part unseeded, so its levels must agree within the
issue's stated accuracy, 1e-8 cm-1, and with the unseeded levels of each row evaluated alone (the
independent reference of test_fit_seeding), derivatives within 1e-5 of each column's largest; fitted
parameters within 1e-3 of their standard deviation. Exact-solver levels (one cloned solver workspace
per thread, no seeds) must be bit-identical for any cut.
"""
import numpy as np
import pytest

from wkbfit import _core
from test_fit_seeding import alone, close_jacobians, rows, wkb_fit_of
from test_rotational_corrections import CASES  # every model and a point-wise curve

_WKB = 0


@pytest.fixture
def threads():
    """set(n) for the evaluators made in the test; the process default restored after it."""
    previous = _core.set_fit_threads(0)
    yield _core.set_fit_threads
    _core.set_fit_threads(previous)


def evaluate(threads, n, model, p, curve, v, rot, mu, zero):
    threads(n)
    return _core.fit_evaluate(model, p, curve, v, rot, mu, zero, _WKB)


@pytest.mark.parametrize("name", list(CASES))
@pytest.mark.parametrize("zero", [0, 1, 2])
def test_a_cut_between_reduced_masses_is_bit_identical(name, zero, threads):
    pot, mu0 = CASES[name]
    model, p, curve = pot._core_args()
    v, rot, mu = rows(pot, mu0)  # two reduced masses
    one = evaluate(threads, 1, model, p, curve, v, rot, mu, zero)
    two = evaluate(threads, 2, model, p, curve, v, rot, mu, zero)
    assert np.array_equal(one[0], two[0]) and np.array_equal(one[1], two[1])


@pytest.mark.parametrize("name", list(CASES))
def test_a_cut_inside_one_reduced_mass_is_within_the_accuracy(name, threads):
    pot, mu0 = CASES[name]
    model, p, curve = pot._core_args()
    v, rot, mu = rows(pot, mu0)
    ref, ref_jac = alone(model, p, curve, v, rot, mu)
    one = evaluate(threads, 1, model, p, curve, v, rot, mu, 0)
    for n, sel in ((3, np.ones(len(v), bool)), (2, mu == mu0)):  # 3 threads on 2 masses; 2 on 1 mass
        calc, jac = evaluate(threads, n, model, p, curve, v[sel], rot[sel], mu[sel], 0)
        np.testing.assert_allclose(calc, one[0][sel], rtol=0, atol=1e-8)
        np.testing.assert_allclose(calc, ref[sel], rtol=0, atol=1e-8)
        assert close_jacobians(jac, ref_jac[sel])


def fit(threads, n, pot, mu0):
    """A WKB fit of De and re (start 0.5 % off in De) to exact-solver levels: (fit_run's dict, sd)."""
    threads(n)
    out, _ = wkb_fit_of(pot, mu0, 2)
    J = out["jacobian"][:, :2] / 0.01
    sd = np.sqrt(np.diag(np.linalg.inv(J.T @ J)))
    return out, sd


@pytest.mark.parametrize("name", [n for n in CASES if n != "point-wise"])  # a point-wise curve has no parameters
def test_fits_on_threads(name, threads):
    pot, mu0 = CASES[name]
    one, sd = fit(threads, 1, pot, mu0)
    two, _ = fit(threads, 2, pot, mu0)
    three, _ = fit(threads, 3, pot, mu0)
    assert one["stop"] == two["stop"] == three["stop"] == "converged"
    assert (one["n_threads"], two["n_threads"], three["n_threads"]) == (1, 2, 3)
    assert np.array_equal(one["params"], two["params"])  # cut between the two reduced masses
    assert np.all(np.abs(three["params"][:2] - one["params"][:2]) <= 1e-3 * sd)


def test_the_default_is_one_thread_for_small_fits(threads):
    pot, mu0 = CASES["LJ"]
    threads(0)
    out, _ = fit(threads, 0, pot, mu0)  # 140 rows: below the break-even
    assert out["n_threads"] == 1
    out, _ = fit(threads, 16, pot, mu0)  # never more threads than (mu, J) groups: 2 masses x 7 J
    assert out["n_threads"] == 14


@pytest.mark.parametrize("method", [_WKB, 1])
def test_the_first_failing_row_is_reported_as_on_one_thread(method, threads):
    # a v above the last bound level in the second reduced mass's rows (the second thread's part)
    pot, mu0 = CASES["LJ"]
    model, p, curve = pot._core_args()
    v, rot, mu = rows(pot, mu0)
    v = v.copy()
    bad = np.flatnonzero(mu != mu0)[5]
    v[bad] = 500
    messages = []
    for n in (1, 2):
        threads(n)
        with pytest.raises(ValueError) as info:
            _core.fit_evaluate(model, p, curve, v, rot, mu, 0, method)
        messages.append(str(info.value))
    assert messages[0] == messages[1] and "row %d" % (bad + 1) in messages[0]


@pytest.mark.parametrize("bad", [-1, 17, 1000])
def test_invalid_thread_counts_are_refused(bad):
    with pytest.raises(ValueError, match="fit threads %d is invalid" % bad):
        _core.set_fit_threads(bad)


def exact_rows_of(name):
    """(model, params, curve, v, rot, mu) of CASES[name] for the exact solver (the damped MLR's exact levels
    are slow: J(J+1) <= 30 there)."""
    pot, mu0 = CASES[name]
    model, p, curve = pot._core_args()
    v, rot, mu = rows(pot, mu0)
    sel = np.ones(len(v), bool) if name != "MLR damped" else rot <= 30
    return model, p, curve, v[sel], rot[sel], mu[sel]


@pytest.mark.parametrize("name", list(CASES))
def test_exact_levels_on_threads_are_bit_identical(name, threads):
    # the exact solver (one cloned workspace per thread, no seeds): any cut between groups gives the same bits
    model, p, curve, v, rot, mu = exact_rows_of(name)
    out = []
    for n in (1, 2, 3):
        threads(n)
        out.append(_core.fit_evaluate(model, p, curve, v, rot, mu, 2, 1, 1e-8))
    for calc, jac in out[1:]:
        assert np.array_equal(calc, out[0][0]) and np.array_equal(jac, out[0][1])


def test_exact_fit_on_threads(threads):
    pot, mu0 = CASES["LJ"]
    model, p, curve = pot._core_args()
    v, rot, mu = rows(pot, mu0)
    energy, _ = _core.fit_evaluate(model, p, curve, v, rot, mu, 0, 1)
    start = np.array(p, dtype=float)
    start[0] *= 1.005
    vary = np.array([1, 1, 0, 0], dtype=np.intc)
    outs = []
    for n in (1, 2):
        threads(n)
        outs.append(_core.fit_run(model=model, params=start, curve=curve, v=v, rot=rot, mu=mu, energy=energy,
                                  sigma=np.full(len(v), 0.01), energy_zero=0, vary=vary, lower=np.full(4, -np.inf),
                                  upper=np.full(4, np.inf), max_iterations=50, method=1, offset=None))
    assert [o["n_threads"] for o in outs] == [1, 2]
    assert np.array_equal(outs[0]["params"], outs[1]["params"]) and outs[0]["stop"] == "converged"


@pytest.mark.parametrize("name", list(CASES))
def test_exact_levels_without_the_jacobian(name, threads):
    # jacobian=False: the exact solver's levels without <v|dV/dp|v> (the refreshes' levels-only evaluations,
    # rotational_corrections.py), on any number of threads: bit-identical to the per-(mu, J) exact solver calls
    # of corrected.exact_calc (the reference) and to the levels of the evaluation with the Jacobian; binding
    # energies (asymptote - E here, the solver's own there) within the stated accuracy, 1e-8 cm-1
    from wkbfit.corrected import exact_calc
    model, p, curve, v, rot, mu = exact_rows_of(name)
    for zero in (0, 1, 2):
        ref, _ = exact_calc(model, p, curve, v, rot, mu, zero, 1e-8)
        for n in (1, 2, 3):
            threads(n)
            calc, jac = _core.fit_evaluate(model, p, curve, v, rot, mu, zero, 1, 1e-8, jacobian=False)
            assert jac is None
            if zero == 1:
                np.testing.assert_allclose(calc, ref, rtol=0, atol=1e-8)
            else:
                assert np.array_equal(calc, ref)
        with_jac, _ = _core.fit_evaluate(model, p, curve, v, rot, mu, zero, 1, 1e-8)
        assert np.array_equal(calc, with_jac)
    # first-order WKB levels without dE/dp (the orbit averages skipped): the same bits as with them
    for zero in (0, 1, 2):
        wkb, none = _core.fit_evaluate(model, p, curve, v, rot, mu, zero, _WKB, jacobian=False)
        assert none is None and np.array_equal(wkb, _core.fit_evaluate(model, p, curve, v, rot, mu, zero, _WKB)[0])
