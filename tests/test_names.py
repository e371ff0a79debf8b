"""wkbfit's own names: the replaced phrases appear in no report, HTML view, help text, JSON key or
docstring; the renamed things still work under their new names (and the old Python names where kept)."""
import inspect
import json
import re
import warnings

import numpy as np
import pytest

import wkbfit
from wkbfit import cli

#: phrases replaced by our own (checked case-insensitively)
REPLACED_PHRASES = (
    "dimensionless standard error",   # the fit statistic is "sqrt of reduced chi-square"
    "standard error",                 # ... in every wording
    "r_ref=None takes",               # the MLR reference distance is a distance or "re"
)
#: JSON keys replaced by our own
REPLACED_KEYS = ("standard_error",)


@pytest.fixture(scope="module")
def result():
    lj = wkbfit.LennardJones(De=4000.0, re=4.0, n=12, m=6)
    t = wkbfit.levels(lj, 20.0, v=list(range(10)))
    data = {"v": t.v, "energy": t.energy + np.random.default_rng(1).normal(0, 0.01, len(t)),
            "uncertainty": np.full(len(t), 0.01)}
    return wkbfit.fit(wkbfit.LennardJones(De=3950.0, re=4.01, n=12, m=6), data, mu=20.0)


def assert_clean(text, where):
    low = text.lower()
    for phrase in REPLACED_PHRASES:
        assert phrase.lower() not in low, "%s contains the replaced phrase %r" % (where, phrase)


def keys(obj):
    if isinstance(obj, dict):
        for k, v in obj.items():
            yield k
            yield from keys(v)
    elif isinstance(obj, list):
        for v in obj:
            yield from keys(v)


def test_report_html_and_json(result):
    assert_clean(result.report(), "the fit report")
    assert "sqrt of reduced chi-square" in result.report()
    assert_clean(result._repr_html_(), "the HTML view")
    assert_clean(result.predict().to_text(), "the prediction table")
    data = json.loads(result.to_json())
    assert not set(keys(data)) & set(REPLACED_KEYS)
    assert data["sqrt_reduced_chi_square"] == pytest.approx(np.sqrt(result.chi_square / result.dof), rel=1e-12)


def test_old_json_key_is_still_read_and_the_old_attribute_still_works(result):
    data = json.loads(result.to_json())
    data["standard_error"] = data.pop("sqrt_reduced_chi_square")
    data["version"] = 1  # as written before the rename
    old = wkbfit.FitResult.from_dict(data)
    assert old.sqrt_reduced_chi_square == result.sqrt_reduced_chi_square == result.standard_error


def test_help_texts():
    parser = cli._parser()
    commands = parser._subparsers._group_actions[0].choices
    assert {"levels", "check", "fit", "demo", "rkr", "compare", "curve", "predict"} <= set(commands)
    assert_clean(parser.format_help(), "wkbfit --help")
    for name, sub in commands.items():
        assert_clean(sub.format_help(), "wkbfit %s --help" % name)
    assert "sqrt of reduced chi-square" in " ".join(commands["fit"].format_help().split())


def test_docstrings():
    import pkgutil
    import importlib
    for info in pkgutil.iter_modules(wkbfit.__path__):
        if info.name == "__main__":  # runs the command line on import
            continue
        module = importlib.import_module("wkbfit." + info.name)
        assert_clean(inspect.getdoc(module) or "", "module %s" % info.name)
        for name, obj in vars(module).items():
            if getattr(obj, "__module__", None) != module.__name__:
                continue
            assert_clean(inspect.getdoc(obj) or "", "%s.%s" % (info.name, name))
            if inspect.isclass(obj):
                for attr, member in vars(obj).items():
                    doc = inspect.getdoc(member) if callable(member) or isinstance(member, property) else None
                    assert_clean(doc or "", "%s.%s.%s" % (info.name, name, attr))


def test_json_model_identifiers_say_what_they_mean():
    mlr = wkbfit.MLR(De=3000.0, re=3.0, C6=2e5, betas=[0.3, 0.1, 0.05])
    t = wkbfit.levels(mlr, 20.0, v=list(range(8)))
    data = {"v": t.v, "energy": t.energy, "uncertainty": np.full(len(t), 0.01)}
    res = wkbfit.fit(mlr.with_params(De=2990.0), data, mu=20.0, vary=["De", "re"])
    pot = json.loads(res.to_json())["potential"]
    assert pot["model"] == "mlr" and pot["beta_coefficient_count"] == 3  # not "mlr3", which reads like p = 3
    assert not re.search(r"\d", pot["model"])
    assert wkbfit.FitResult.from_dict(json.loads(res.to_json())).potential.betas == res.potential.betas


def test_mlr_reference_distance():
    a = wkbfit.MLR(De=3000.0, re=3.0, C6=2e5, betas=[0.3])
    assert a.r_ref == 3.0  # the default "re"
    assert wkbfit.MLR(De=3000.0, re=3.0, C6=2e5, betas=[0.3], r_ref="re").r_ref == 3.0
    assert wkbfit.MLR(De=3000.0, re=3.0, C6=2e5, betas=[0.3], r_ref=3.4).r_ref == 3.4
    with pytest.warns(DeprecationWarning, match='r_ref="re"') as record:
        b = wkbfit.MLR(De=3000.0, re=3.0, C6=2e5, betas=[0.3], r_ref=None)
    assert b.r_ref == 3.0 and record[0].filename == __file__
    with pytest.raises(ValueError, match="r_ref='rm'"):
        wkbfit.MLR(De=3000.0, re=3.0, C6=2e5, betas=[0.3], r_ref="rm")


def test_pointwise_wall_options_by_name():
    from scipy.optimize import brentq
    r = np.linspace(1.6, 6.0, 45)
    V = 5000 * (2 / r) ** 9 - 3000 * (2 / r) ** 6
    exp_wall = wkbfit.PointwisePotential(r, V, asymptote=0.0, tail_power=6)
    pow_wall = wkbfit.PointwisePotential(r, V, asymptote=0.0, tail_power=6, inner_wall="inverse_power")
    assert exp_wall.wall["form"] == "exponential" and pow_wall.wall["form"] == "inverse_power"
    # the inverse-power wall A + B (r0/r)^k through the three innermost points, solved independently (SciPy)
    r0, r1, r2 = r[:3]
    q = (V[0] - V[1]) / (V[1] - V[2])
    k = brentq(lambda k: (1 - (r0 / r1) ** k) / ((r0 / r1) ** k - (r0 / r2) ** k) - q, 0.1, 100, xtol=1e-14)
    B = (V[0] - V[1]) / (1 - (r0 / r1) ** k)
    A = V[0] - B
    assert pow_wall.wall["power"] == pytest.approx(k, rel=1e-10)
    x = np.array([0.5, 0.8, 1.0, 1.2])  # well inside r0 - (r1 - r0): the formula alone
    assert np.allclose(pow_wall(x), A + B * (r0 / x) ** k, rtol=1e-10)
    # the same for the exponential wall A + B exp(-C (r - r0))
    C = brentq(lambda c: (1 - np.exp(-c * (r1 - r0))) / (np.exp(-c * (r1 - r0)) - np.exp(-c * (r2 - r0))) - q,
               0.01, 100, xtol=1e-14)
    Be = (V[0] - V[1]) / (1 - np.exp(-C * (r1 - r0)))
    assert np.allclose(exp_wall(x), V[0] - Be + Be * np.exp(-C * (x - r0)), rtol=1e-10)
    # inside the points both are the same spline
    inside = np.linspace(1.7, 5.9, 50)
    assert np.array_equal(exp_wall(inside), pow_wall(inside))
    with pytest.raises(ValueError, match="inner_wall='hard'"):
        wkbfit.PointwisePotential(r, V, inner_wall="hard")


def test_mixed_data_report_uses_the_own_name():
    # the report of a fit to line positions (the report for several data kinds) says the statistic's name too
    lj = wkbfit.LennardJones(De=4000.0, re=4.0, n=12, m=6)
    t = wkbfit.levels(lj, 20.0, v=list(range(8)), method="exact")
    lines = wkbfit.read_lines({"v_upper": t.v[1:], "J_upper": np.zeros(7, int), "v_lower": np.zeros(7, int),
                               "J_lower": np.zeros(7, int), "wavenumber": t.energy[1:] - t.energy[0],
                               "uncertainty": np.full(7, 0.01)})
    res = wkbfit.fit(wkbfit.LennardJones(De=3950.0, re=4.01, n=12, m=6), lines, mu=20.0, vary=["De", "re"])
    text = res.report()
    assert_clean(text, "the mixed-data fit report")
    assert "sqrt of reduced chi-square" in text
