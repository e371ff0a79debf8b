"""The default fit (first-order WKB iterations with per-level exact corrections) on EXACT-solver data.

Sources of the criteria:
- Gauss-Markov: for a correct model and correctly stated Gaussian uncertainties the weighted
  least-squares estimate is unbiased and its pulls (fitted - true)/sigma follow a unit normal
  distribution (Student t with dof degrees of freedom when sigma is scaled by the standard
  error, sd sqrt(dof/(dof-2)) = 1.03-1.05 here). With N = 200 replicas the sample mean has standard
  error 0.07 and the sample sd 0.05, so |mean| < 0.2 and 0.8 < sd < 1.2 are about 3 standard errors
  wide (the issue's windows).
- The default fit must reach the minimum of an exact-levels fit (method="exact") on the same
  data: parameters within 0.01 standard deviation, uncertainties within 1 % (the issue's targets).
- The data come from the exact radial solver (wkbfit.levels(method="exact"), tested against
  published levels in test_exact.py), never from the semiclassical method under test.
"""
import warnings

import numpy as np
import pytest

import wkbfit
import wkbfit.corrected
from wkbfit import LennardJones, MLR, fit, read_levels
from wkbfit.fitting import FitWarning

N_REPLICAS = 200
ISOTOPOLOGUES = {"A": 20.0, "B": 22.0}  # reduced masses (u) of two invented isotopologues


def exact_rows(true, plan):
    """plan: list of (label, J, [v...]); exact levels of true for each row."""
    cols = {"isotopologue": [], "v": [], "J": [], "energy": []}
    for label, J, vs in plan:
        table = wkbfit.levels(true, ISOTOPOLOGUES[label], v=vs, J=J, method="exact")
        cols["isotopologue"] += [label] * len(vs)
        cols["v"] += list(vs)
        cols["J"] += [J] * len(vs)
        cols["energy"] += table.energy.tolist()
    cols["energy"] = np.array(cols["energy"])
    return cols


def observed(cols, sigma, rng=None):
    energy = cols["energy"] + (rng.normal(0.0, sigma, len(cols["v"])) if rng is not None else 0.0)
    return read_levels(dict(cols, energy=energy, uncertainty=np.full(len(cols["v"]), sigma)))


MLR_TRUE = MLR(De=3000.0, re=3.2, C6=4.0e6, betas=[-0.3, 0.1], r_ref=3.2)
MLR_START = MLR(De=2980.0, re=3.21, C6=4.0e6, betas=[-0.28, 0.09], r_ref=3.2)
MLR_PLAN = [("A", 0, list(range(0, 40, 4))), ("A", 15, [1, 9, 17, 25, 33]), ("B", 0, [0, 5, 10, 20, 30, 38]),
            ("B", 25, [2, 12, 22, 30])]
LJ_TRUE = LennardJones(De=1500.0, re=3.0, n=12, m=6)
LJ_START = LennardJones(De=1450.0, re=3.03)
LJ_PLAN = [("A", 0, list(range(0, 26, 2))), ("A", 20, [0, 6, 12, 18]), ("B", 0, [1, 5, 9, 15, 21, 25]),
           ("B", 10, [3, 13])]


def pulls_of(true, start, plan, sigma, seed):
    cols = exact_rows(true, plan)
    rng = np.random.default_rng(seed)
    pulls = []
    refreshes = []
    for _ in range(N_REPLICAS):
        with warnings.catch_warnings():
            warnings.simplefilter("error", FitWarning)  # a default fit on exact data raises no warning
            result = fit(start, observed(cols, sigma, rng), ISOTOPOLOGUES)
        assert result.success, result.message
        names = result.var_names
        refreshes.append(result.refreshes)
        pulls.append([(result.params[n].value - true.params[n]) / result.params[n].uncertainty for n in names])
    return names, np.array(pulls), refreshes


def check_pulls(names, pulls):
    mean, sd = pulls.mean(axis=0), pulls.std(axis=0, ddof=1)
    for name, m, s in zip(names, mean, sd):
        assert abs(m) < 0.2, "pull mean of %s is %.3f" % (name, m)
        assert 0.8 < s < 1.2, "pull sd of %s is %.3f" % (name, s)


def test_mlr_pulls_from_exact_levels():
    names, pulls, refreshes = pulls_of(MLR_TRUE, MLR_START, MLR_PLAN, 0.01, seed=81)
    assert names == ["De", "re", "beta0", "beta1"]
    check_pulls(names, pulls)
    assert max(refreshes) <= 5


def test_lennard_jones_pulls_from_exact_levels():
    names, pulls, _ = pulls_of(LJ_TRUE, LJ_START, LJ_PLAN, 0.01, seed=82)
    assert names == ["De", "re"]
    check_pulls(names, pulls)


@pytest.mark.parametrize("true,start,plan", [(MLR_TRUE, MLR_START, MLR_PLAN), (LJ_TRUE, LJ_START, LJ_PLAN)],
                         ids=["MLR", "LJ"])
def test_default_fit_matches_the_exact_fit(true, start, plan):
    # Source: the targets (0.01 sd, 1 %); reference = method="exact" on the same data.
    obs = observed(exact_rows(true, plan), 0.01, np.random.default_rng(5))
    default = fit(start, obs, ISOTOPOLOGUES)
    exact = fit(start, obs, ISOTOPOLOGUES, method="exact")
    assert default.method == "corrected" and exact.method == "exact"
    assert default.success and exact.success
    for name in default.var_names:
        d, e = default.params[name], exact.params[name]
        assert abs(d.value - e.value) < 0.01 * e.uncertainty, (name, d.value, e.value, e.uncertainty)
        assert d.uncertainty == pytest.approx(e.uncertainty, rel=0.01), name
    assert default.chi_square == pytest.approx(exact.chi_square, rel=1e-3)
    np.testing.assert_allclose(default.calculated, exact.calculated, rtol=0, atol=1e-3 * 0.01)
    assert 2 <= default.refreshes <= 5 and len(default.refresh_history) == default.refreshes
    assert default.refresh_history[-1]["step_sd"] < wkbfit.corrected.LINEAR_STEP  # the last exact step, taken
    assert default.refresh_history[-1]["remainder_sd"] < wkbfit.corrected.REMAINDER_SD  # and linear enough
    assert not default.method_error_flagged


def test_first_order_wkb_bias_is_detected_and_warned():
    # Source: physics.md section 2 (first-order WKB levels of a Lennard-Jones well are off by up to
    # ~0.8 cm-1 for light molecules) -- here with precise exact-solver data the first-order fit is
    # biased; its method error |E_wkb - E_exact| exceeds 0.1 sigma and the fit must say so.
    obs = observed(exact_rows(MLR_TRUE, MLR_PLAN), 0.001, np.random.default_rng(6))
    with pytest.warns(FitWarning, match=r"the wkb levels of \d+ data rows are off by more than 0.1 of their "
                                        r"uncertainty.*method='corrected'"):
        wkb = fit(MLR_START, obs, ISOTOPOLOGUES, method="wkb")
    assert len(wkb.method_error_flagged) > len(obs) // 2
    assert "Method error" in wkb.report() and "v=0 J=0" in wkb.method_error_warning
    default = fit(MLR_START, obs, ISOTOPOLOGUES)
    # the bias: the first-order fit's parameters lie many standard deviations (of the accurate fit) from
    # the truth, and its scatter is far beyond the stated noise; the default fit recovers the truth
    bias = max(abs(wkb.params[n].value - MLR_TRUE.params[n]) / default.params[n].uncertainty for n in wkb.var_names)
    assert bias > 20 and wkb.standard_error > 5
    for name in default.var_names:
        assert abs(default.params[name].value - MLR_TRUE.params[name]) < 4 * default.params[name].uncertainty
    # the method error enters the predicted uncertainties in quadrature
    pw = wkb.predict(isotopologue="A")
    assert np.all(pw.method_error > 0) and np.all(pw.energy_uncertainty >= pw.method_error)


def test_binding_energy_data_near_threshold_fit_with_asymptote_fixed_or_free():
    # Photoassociation-like data: binding energies of the last levels with sigma down to 1e-5 cm-1
    # (exact-solver levels plus seeded noise); the truth must be recovered within 4 sigma (Gauss-Markov;
    # 4 sigma: one seeded draw, common practice) with the asymptote (De) free or fixed.
    true = MLR_TRUE
    table = wkbfit.levels(true, 20.0, method="exact")
    last = len(table)
    vs = list(range(last - 14, last - 1))
    sigma = np.where(np.arange(len(vs)) >= len(vs) - 5, 1e-5, 1e-3)
    rng = np.random.default_rng(9)
    binding = table.binding_energy[vs] + rng.normal(0.0, sigma)
    low = wkbfit.levels(true, 20.0, v=list(range(0, 30, 3)), J=0, method="exact")
    data = {"v": list(low.v) + vs, "energy": list(low.binding_energy + rng.normal(0, 0.01, len(low))) + list(binding),
            "uncertainty": [0.01] * len(low) + list(sigma)}
    obs = read_levels(data, energy_zero="asymptote")
    free = fit(MLR_START, obs, mu=20.0)
    fixed = fit(MLR_START.with_params(De=true.De), obs, mu=20.0, vary=["re", "beta0", "beta1"])
    for result in (free, fixed):
        assert result.success and not result.method_error_flagged
        for name in result.var_names:
            p = result.params[name]
            assert abs(p.value - true.params[name]) < 4 * p.uncertainty, (name, p.value, p.uncertainty)
        assert 0.6 < result.standard_error < 1.5
    assert "De" in free.var_names and "De" not in fixed.var_names


def test_a_start_too_shallow_for_the_data_continues():
    # Item 4 of the issue: a start that does not bind the highest levels of the data must not end the
    # fit: it continues on the bound levels and brings the others in; the result is the one reached
    # from a start that binds everything (same minimum within 0.01 sd).
    plan = LJ_PLAN + [("A", 0, [27, 28])]
    obs = observed(exact_rows(LJ_TRUE, plan), 0.01, np.random.default_rng(7))
    shallow = LJ_START.with_params(De=1000.0)
    unbound = [(label, J, v) for label, J, vs in plan for v in vs
               if v >= len(wkbfit.levels(shallow, ISOTOPOLOGUES[label], J=J))]
    assert len(unbound) == 2  # v = 27 and 28 (as "v=71 is above the last bound level (v=70)")
    with pytest.warns(FitWarning, match="did not bind every level.*2 levels not bound.*brought in"):
        result = fit(shallow, obs, ISOTOPOLOGUES)
    assert result.success and len(result.start_notes) == 2
    assert "start: round 1: fitted 25 of 27 levels" in result.report()
    reference = fit(LJ_START, obs, ISOTOPOLOGUES)
    for name in result.var_names:
        assert abs(result.params[name].value - reference.params[name].value) < 0.01 * reference.params[name].uncertainty


def test_result_records_refreshes_and_method_errors_through_json(tmp_path):
    obs = observed(exact_rows(LJ_TRUE, LJ_PLAN), 0.01, np.random.default_rng(8))
    result = fit(LJ_START, obs, ISOTOPOLOGUES)
    assert result.refreshes == len(result.refresh_history) >= 2
    assert result.refresh_history[0]["kind"] == "levels" and result.refresh_history[-1]["kind"] == "levels and Jacobian"
    assert result.method_error.shape == (len(obs),) and np.all(result.method_error < 0.1 * 0.01)
    path = tmp_path / "r.json"
    result.save_json(path)
    loaded = wkbfit.FitResult.load_json(path)
    assert loaded.method == "corrected" and loaded.refreshes == result.refreshes
    np.testing.assert_allclose(loaded.method_error, result.method_error, rtol=1e-12)
    assert "Method error against the data (method corrected)" in loaded.report()


@pytest.mark.parametrize("zero", ["asymptote", "lowest"])
def test_default_fit_matches_the_exact_fit_in_other_energy_zeros(zero):
    # the corrections live in the data's own zero (binding energies; E - E(v=0, J=0) per isotopologue)
    cols = exact_rows(LJ_TRUE, LJ_PLAN)
    rng = np.random.default_rng(11)
    energy = cols["energy"] + rng.normal(0.0, 0.01, len(cols["v"]))
    if zero == "asymptote":
        energy = LJ_TRUE.De - energy
    else:
        for label in ISOTOPOLOGUES:
            e00 = wkbfit.levels(LJ_TRUE, ISOTOPOLOGUES[label], v=[0], method="exact").energy[0]
            rows = [i for i, lab in enumerate(cols["isotopologue"]) if lab == label]
            energy[rows] -= e00
        energy[(np.array(cols["v"]) == 0) & (np.array(cols["J"]) == 0)] = 0.0  # the data's zero by definition
    obs = read_levels(dict(cols, energy=energy, uncertainty=np.full(len(energy), 0.01)), energy_zero=zero)
    default = fit(LJ_START, obs, ISOTOPOLOGUES)
    exact = fit(LJ_START, obs, ISOTOPOLOGUES, method="exact")
    for name in default.var_names:
        d, e = default.params[name], exact.params[name]
        assert abs(d.value - e.value) < 0.01 * e.uncertainty, (name, d.value, e.value)
        assert d.uncertainty == pytest.approx(e.uncertainty, rel=0.01)


@pytest.mark.parametrize("true,start,plan", [(MLR_TRUE, MLR_START, MLR_PLAN), (LJ_TRUE, LJ_START, LJ_PLAN)],
                         ids=["MLR", "LJ"])
def test_direct_first_step_reaches_the_same_minimum(true, start, plan, monkeypatch):
    # the first refresh's Gauss-Newton step taken directly (default) against step 2's WKB run after it:
    # the exact Gauss-Newton test decides the end in both, so the minima agree within 1e-3 sd (the issue's
    # target for speed-ups); the uncertainties within 1e-3 (both come from the exact Jacobian at the point
    # before the last, linear step of < 1 sd: each is ~1e-3 from the exact fit's, whose tolerance is 1 %)
    import functools
    obs = observed(exact_rows(true, plan), 0.01, np.random.default_rng(5))
    direct = fit(start, obs, ISOTOPOLOGUES)
    orig = wkbfit.corrected.run_corrected
    monkeypatch.setattr(wkbfit.corrected, "run_corrected", functools.partial(orig, direct_first_step=False))
    run = fit(start, obs, ISOTOPOLOGUES)
    assert direct.success and run.success
    assert direct.n_evaluations < run.n_evaluations
    for name in run.var_names:
        d, r = direct.params[name], run.params[name]
        assert abs(d.value - r.value) < 1e-3 * r.uncertainty, (name, d.value, r.value, r.uncertainty)
        assert d.uncertainty == pytest.approx(r.uncertainty, rel=1e-3), name
