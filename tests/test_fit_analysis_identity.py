"""The fit's analysis after the Levenberg-Marquardt run, made cheaper without changing any result.

FitResult._analyse skips the SVD of the weighted Jacobian when the trace of the inverse normal matrix
already proves it far from singular (fit_result._well_conditioned) and computes the condition number
only when it is read. Checked here:
- on the three cases of tests/benchmarks/bench_fit.py (first-order and default fits): parameters,
  uncertainties, covariances, correlations, condition number, undetermined names, residuals, method
  errors and warnings are bit-identical to the SVD path (the shortcut switched off);
- against numpy alone: the covariance is inv(Jw^T Jw) * chi2/dof (Jw the Jacobian divided by the
  uncertainties; relative 1e-9) and the condition number that of the column-normalised Jw (1e-9);
- the shortcut never declares well-conditioned a matrix whose singular values (numpy's SVD) are
  below _RCOND_SINGULAR of the largest, on matrices from condition number 1 to 1e12.
Data: levels of known invented potentials from the exact solver plus seeded Gaussian noise, as in the
benchmark.
"""
import warnings

import numpy as np
import pytest

import wkbfit
from wkbfit import fit_result

MU_LICS = wkbfit.reduced_mass("7Li", "133Cs")
# (true potential, start, reduced mass, v values, J values, vary): the cases of bench_fit.py
CASES = {
    "Morse 3 parameters": (wkbfit.Morse(De=5875.0, re=3.67, a=0.6), wkbfit.Morse(De=5700.0, re=3.62, a=0.61),
                           MU_LICS, list(range(25)) * 2, [0] * 25 + [10] * 25, None),
    "Lennard-Jones 2 parameters": (wkbfit.LennardJones(De=2000.0, re=4.5), wkbfit.LennardJones(De=1950.0, re=4.45),
                                   40.0, list(range(50)), [0] * 50, None),
    "Lennard-Jones 4 parameters": (wkbfit.LennardJones(De=2000.0, re=4.5, n=11.0, m=6.5),
                                   wkbfit.LennardJones(De=1990.0, re=4.49, n=11.2, m=6.4), 40.0,
                                   list(range(25)) * 2, [0] * 25 + [20] * 25, {"n": True, "m": True}),
}
COMPARED = ("covariance", "covariance_unscaled", "covariance_full", "correlation", "residuals",
            "normalized_residuals", "calculated", "method_error", "method_error_ratio")


def _data(true, mu, vs, Js, seed):
    exact = np.empty(len(vs))
    for J in sorted(set(Js)):
        idx = [i for i, j in enumerate(Js) if j == J]
        exact[idx] = wkbfit.levels(true, mu, v=[vs[i] for i in idx], J=J, method="exact").energy
    rng = np.random.default_rng(seed)
    return wkbfit.read_levels({"v": vs, "J": Js, "energy": exact + rng.normal(0, 0.01, len(vs)),
                               "uncertainty": np.full(len(vs), 0.01)})


def _fit(start, obs, mu, vary, method):
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        res = wkbfit.fit(start, obs, mu, vary=vary, method=method)
    return res, [str(w.message) for w in caught]


@pytest.fixture(scope="module")
def data():
    return {name: _data(true, mu, vs, Js, seed=len(name)) for name, (true, _, mu, vs, Js, _) in CASES.items()}


@pytest.mark.parametrize("method", ["wkb", "corrected"])
@pytest.mark.parametrize("name", list(CASES))
def test_results_are_bit_identical_to_the_svd_path(name, method, data, monkeypatch):
    _, start, mu, _, _, vary = CASES[name]
    obs = data[name]
    quick, quick_warnings = _fit(start, obs, mu, vary, method)
    assert "_condition_source" in quick.__dict__  # the shortcut was taken
    monkeypatch.setattr(fit_result, "_well_conditioned", lambda *args: None)
    slow, slow_warnings = _fit(start, obs, mu, vary, method)
    assert "_condition_source" not in slow.__dict__
    assert quick_warnings == slow_warnings
    assert quick.condition_number == slow.condition_number
    assert quick.undetermined == slow.undetermined and quick.var_names == slow.var_names
    for key in COMPARED:
        a, b = np.asarray(getattr(quick, key)), np.asarray(getattr(slow, key))
        assert a.shape == b.shape and np.array_equal(a, b, equal_nan=True), key
    for n in quick.params:
        assert quick.params[n].to_dict() == slow.params[n].to_dict()
    assert quick.method_error_flagged == slow.method_error_flagged


@pytest.mark.parametrize("name", list(CASES))
def test_covariance_and_condition_number_against_numpy(name, data):
    _, start, mu, _, _, vary = CASES[name]
    res, _ = _fit(start, data[name], mu, vary, "wkb")
    names = list(start.param_names)
    idx = [names.index(n) for n in res.var_names]
    Jw = res.jacobian[:, idx] / res.observed.uncertainty[:, None]
    expected = np.linalg.inv(Jw.T @ Jw) * res.chi_square / res.dof
    np.testing.assert_allclose(res.covariance, expected, rtol=1e-9, atol=0)
    An = Jw / np.linalg.norm(Jw, axis=0)
    assert res.condition_number == pytest.approx(np.linalg.cond(An), rel=1e-9)


def test_the_shortcut_never_passes_a_numerically_singular_matrix():
    rng = np.random.default_rng(7)
    passed = 0
    for cond in np.geomspace(1.0, 1e12, 60):
        for p in (2, 3, 5):
            # a 40 x p matrix with singular values from 1 down to 1/cond, columns scaled over decades
            u, _ = np.linalg.qr(rng.normal(size=(40, p)))
            v, _ = np.linalg.qr(rng.normal(size=(p, p)))
            A = (u * np.geomspace(1.0, 1.0 / cond, p)) @ v.T * np.geomspace(1e-3, 1e4, p)
            s = np.linalg.svd(A / np.linalg.norm(A, axis=0), compute_uv=False)
            got = fit_result._well_conditioned(A, list(range(p)))
            if got is not None:
                passed += 1
                assert s[-1] >= fit_result._RCOND_SINGULAR * s[0]
                An = A / np.linalg.norm(A, axis=0)
                ref = np.linalg.inv(An.T @ An)  # (rounding grows with the normal matrix's condition number)
                np.testing.assert_allclose(got[1], ref, rtol=0, atol=1e-13 * (s[0] / s[-1]) ** 2 * np.abs(ref).max())
    assert passed > 30  # the shortcut is taken for the well-conditioned ones
    # a parameter left out (undetermined): always the SVD path
    assert fit_result._well_conditioned(np.eye(4, 3), [0, 1]) is None
