"""The method's error against the data on fits of line positions (the row engine).

Reference: the exact radial solver (wkbfit's own, itself checked against an independent SciPy
reference in test_exact.py), never the semiclassical rule under test. Data: line positions made from
exact levels of an invented Lennard-Jones well."""
import warnings

import numpy as np
import pytest

import wkbfit
from wkbfit.fitting import FitWarning

LJ = wkbfit.LennardJones(De=4000.0, re=4.0, n=12, m=6)
MU = 20.0
SIGMA = 1e-3


def _lines():
    t = wkbfit.levels(LJ, MU, v=list(range(10)), method="exact")
    n = len(t) - 1
    noise = np.random.default_rng(5).normal(0, SIGMA, n)
    return wkbfit.read_lines({"v_upper": t.v[1:], "J_upper": np.zeros(n, int), "v_lower": np.zeros(n, int),
                              "J_lower": np.zeros(n, int), "wavenumber": t.energy[1:] - t.energy[0] + noise,
                              "uncertainty": np.full(n, SIGMA)})


def test_first_order_fit_of_lines_is_flagged_with_the_true_method_error():
    lines = _lines()
    start = wkbfit.LennardJones(De=3950.0, re=4.01, n=12, m=6)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        res = wkbfit.fit(start, lines, mu=MU, method="wkb", vary=["De", "re"])
    # the method error of each line is |WKB - exact| of its two levels at the fitted potential
    wkb = wkbfit.levels(res.potential, MU, v=list(range(10)), order=1)
    ex = wkbfit.levels(res.potential, MU, v=list(range(10)), method="exact")
    true = np.abs((wkb.energy[1:] - wkb.energy[0]) - (ex.energy[1:] - ex.energy[0]))
    np.testing.assert_allclose(res.method_error, true, rtol=1e-3, atol=1e-6)
    assert true.max() > 0.1 * SIGMA  # the first-order bias is real on these data
    assert res.method_error_flagged
    messages = [str(w.message) for w in caught if issubclass(w.category, FitWarning)]
    assert any("line v=" in m and "more exact method" in m for m in messages)
    report = res.report()
    assert "Method error against the data" in report and "data set 1: line v=" in report


def test_default_fit_of_lines_is_within_its_data():
    res = wkbfit.fit(wkbfit.LennardJones(De=3950.0, re=4.01, n=12, m=6), _lines(), mu=MU, vary=["De", "re"])
    assert res.method == "corrected"
    assert np.all(np.isfinite(res.method_error)) and not res.method_error_flagged
    assert np.max(res.method_error_ratio) < 0.1
    assert "every data row is computed to better than 0.1" in res.report()


def test_exact_fit_of_lines_reports_the_solver_error():
    res = wkbfit.fit(wkbfit.LennardJones(De=3950.0, re=4.01, n=12, m=6), _lines(), mu=MU, method="exact",
                     vary=["De", "re"])
    assert np.all(np.isfinite(res.method_error)) and np.max(res.method_error_ratio) < 0.1
    # the round trip through JSON keeps the check
    again = wkbfit.FitResult.from_dict(res.to_dict())
    np.testing.assert_allclose(again.method_error, res.method_error, rtol=0, atol=0)


def test_method_error_warnings_point_at_the_callers_line():
    # both engines (term values, lines): the FitWarning names this file, not a line inside wkbfit
    t = wkbfit.levels(LJ, MU, v=list(range(10)), method="exact")
    levels = {"v": t.v, "energy": t.energy, "uncertainty": np.full(len(t), SIGMA)}
    start = wkbfit.LennardJones(De=3950.0, re=4.01, n=12, m=6)
    for data in (levels, _lines()):
        with pytest.warns(FitWarning, match="more exact method") as record:
            wkbfit.fit(start, data, mu=MU, method="wkb", vary=["De", "re"])
        assert all(w.filename == __file__ for w in record if issubclass(w.category, FitWarning))
