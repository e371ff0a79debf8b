"""Tests of wkbfit.fit and FitResult: recovery, Jacobian, SciPy agreement, a handbook case,
several isotopologues, energy zeros, predictions, reports and bad input.

Synthetic data are levels of known potentials (computed by wkbfit.levels) plus seeded Gaussian
noise of known sigma; the checks compare the fit against those known parameters, against
finite differences, against scipy.optimize.least_squares, and against published constants.
"""
import functools
import json
import math

import numpy as np
import pytest

import wkbfit
from wkbfit import HBAR2_OVER_2U, FitResult, LennardJones, Morse, _core, read_levels
from wkbfit.fitting import FitWarning

# These tests exercise the fit engine with first-order WKB levels on data made from WKB levels
# (the model is then exact for its data): method "wkb" unless a test says otherwise. The default
# fit (WKB with exact corrections) is tested on exact-solver data in tests/test_default_fit.py.
fit = functools.partial(wkbfit.fit, method="wkb")

MU_LICS = wkbfit.reduced_mass("7Li", "133Cs")


def synthetic(potential, mu, vs, Js, sigma, seed, energy_zero="minimum", label=None):
    """Levels of `potential` (WKB) at (v, J) plus Gaussian noise of standard deviation sigma."""
    rng = np.random.default_rng(seed)
    vs, Js = list(vs), list(Js)
    exact = np.empty(len(vs))
    for J in sorted(set(Js)):
        idx = [i for i, j in enumerate(Js) if j == J]
        exact[idx] = wkbfit.levels(potential, mu, v=[vs[i] for i in idx], J=J, order=1, ends="maslov").energy
    energy = exact + rng.normal(0.0, sigma, len(vs))
    data = {"v": vs, "J": Js, "energy": energy, "uncertainty": np.full(len(vs), sigma)}
    if label is not None:
        data["isotopologue"] = [label] * len(vs)
    return data, exact


def morse_data(seed=1, sigma=0.01):
    true = Morse(De=5875.0, re=3.67, a=0.6)
    data, _ = synthetic(true, MU_LICS, list(range(25)) * 2, [0] * 25 + [10] * 25, sigma, seed)
    return true, read_levels(data)


def lj_data(seed=2, sigma=0.01):
    true = LennardJones(De=2000.0, re=4.5, n=12, m=6)
    data, _ = synthetic(true, 40.0, range(50), [0] * 50, sigma, seed)
    return true, read_levels(data)


def within_sigma(result, true, k=3.0):
    for name, p in result.params.items():
        if p.vary:
            assert p.uncertainty is not None and p.uncertainty > 0
            assert abs(p.value - true.params[name]) <= k * p.uncertainty, (name, p.value, true.params[name],
                                                                            p.uncertainty)


# ----------------------------------------------------------------------------- recovery
def test_morse_recovery_within_three_sigma():
    # Source: a weighted least-squares estimate is unbiased with covariance (J^T W J)^-1 to first
    # order (Gauss-Markov); a 3-sigma window is common practice. Truth known by construction.
    true, obs = morse_data()
    result = fit(Morse(De=5600.0, re=3.6, a=0.62), obs, MU_LICS)
    assert result.status == "converged" and result.success
    within_sigma(result, true)
    assert result.dof == 50 - 3
    # chi2/dof of data with correctly stated sigma: 1 +- sqrt(2/dof) (chi-square distribution); 4 sd window
    assert abs(result.chi_square / result.dof - 1) < 4 * math.sqrt(2 / result.dof)


def test_lennard_jones_recovery_fixed_and_varied_exponents():
    # Source: as above (Gauss-Markov; 3 sigma common practice).
    true, obs = lj_data()
    result = fit(LennardJones(De=1900.0, re=4.4), obs, 40.0)
    assert result.var_names == ["De", "re"]  # the exponents are fixed by default
    assert not result.params["n"].vary and result.params["n"].value == 12
    within_sigma(result, true)
    true4 = LennardJones(De=2000.0, re=4.5, n=11.0, m=6.5)
    data, _ = synthetic(true4, 40.0, list(range(25)) * 2, [0] * 25 + [20] * 25, 0.01, 3)
    result4 = fit(LennardJones(De=1980.0, re=4.48, n=11.5, m=6.3), data, 40.0, vary={"n": True, "m": True})
    assert result4.success and result4.var_names == ["De", "re", "n", "m"]
    within_sigma(result4, true4)


@pytest.mark.parametrize("zero", ["asymptote", "lowest"])
def test_recovery_in_other_energy_zeros(zero):
    # Source: same estimator; the data are the same levels expressed as binding energies
    # (De - E) or relative to v=0, J=0, as read_levels documents.
    true = Morse(De=5875.0, re=3.67, a=0.6)
    data, exact = synthetic(true, MU_LICS, list(range(25)) * 2, [0] * 25 + [10] * 25, 0.01, 7)
    e00 = wkbfit.levels(true, MU_LICS, v=[0], order=1, ends="maslov").energy[0]
    if zero == "asymptote":
        data["energy"] = true.De - data["energy"]
    else:
        data["energy"] = data["energy"] - e00
        data["energy"][0] = 0.0  # the row v=0, J=0 is the zero itself
    obs = read_levels(data, energy_zero=zero)
    result = fit(Morse(De=5600.0, re=3.6, a=0.62), obs, MU_LICS)
    assert result.success
    within_sigma(result, true)
    if zero == "lowest":
        assert not result.fitted_rows[0] and result.dof == 49 - 3
        assert result.calculated[0] == 0.0


# ----------------------------------------------------------------------------- Jacobian
@pytest.mark.parametrize("zero", ["minimum", "asymptote", "lowest"])
def test_analytic_jacobian_matches_finite_differences(zero):
    # Source: central finite differences of the level energies (wkbfit.levels), step 1e-5
    # relative; truncation O(h^2) ~ 1e-10 and rounding ~1e-11/1e-5 ~ 1e-6 relative to the scale,
    # hence the 1e-5 tolerance relative to the largest derivative of each parameter.
    mu_rows = np.array([MU_LICS] * 8 + [wkbfit.reduced_mass("7Li", "85Rb")] * 4)
    v = np.array([0, 3, 10, 20, 0, 5, 12, 22, 0, 2, 8, 15])
    J = np.array([0, 0, 0, 0, 7, 7, 7, 7, 0, 3, 3, 3])
    rot = (J * (J + 1)).astype(float)
    for pot in (Morse(De=5875.0, re=3.67, a=0.6), LennardJones(De=2000.0, re=4.5, n=11.3, m=6.2)):
        model, params, curve = pot._core_args()
        code = {"minimum": 0, "asymptote": 1, "lowest": 2}[zero]
        calc, jac = _core.fit_evaluate(model, params, curve, v, rot, mu_rows, code)
        for k, name in enumerate(pot.param_names):
            h = 1e-5 * abs(params[k])
            plus = _core.fit_evaluate(model, params + h * np.eye(len(params))[k], curve, v, rot, mu_rows, code)[0]
            minus = _core.fit_evaluate(model, params - h * np.eye(len(params))[k], curve, v, rot, mu_rows, code)[0]
            fd = (plus - minus) / (2 * h)
            scale = np.max(np.abs(fd))
            if zero == "minimum" and pot.model == "morse" and name == "re":
                scale = 1.0  # exact Morse levels do not depend on re at J = 0: only the J > 0 rows matter
            np.testing.assert_allclose(jac[:, k], fd, rtol=0, atol=1e-5 * scale, err_msg="%s %s" % (pot, name))
        # and the model values are the documented energy zero of the WKB levels themselves
        E = np.array([wkbfit.levels(pot, m, v=[vv], J=j, order=1, ends="maslov").energy[0] for vv, j, m in zip(v, J, mu_rows)])
        if zero == "minimum":
            np.testing.assert_allclose(calc, E, rtol=0, atol=1e-9)
        elif zero == "asymptote":
            np.testing.assert_allclose(calc, pot.De - E, rtol=0, atol=1e-9)


# ----------------------------------------------------------------------------- SciPy
def test_same_minimum_and_covariance_as_scipy_least_squares():
    # Source: scipy.optimize.least_squares (trust-region reflective, its own finite-difference
    # Jacobian) on the same residual function (obs - calc)/sigma, calc from the C core's model.
    # Parameters agree to 1e-6 relative; uncertainties (scaled by chi2/dof in both) to 1 %.
    from scipy.optimize import least_squares

    true, obs = morse_data(seed=11)
    start = Morse(De=5700.0, re=3.62, a=0.61)
    result = fit(start, obs, MU_LICS)
    v, rot = obs.v, (obs.J * (obs.J + 1)).astype(float)
    mu_rows = np.full(len(obs), MU_LICS)

    def residuals(p):
        calc, _ = _core.fit_evaluate("morse", p, None, v, rot, mu_rows, 0)
        return (obs.energy - calc) / obs.uncertainty

    ref = least_squares(residuals, start._params.copy(), method="trf", x_scale="jac", ftol=1e-15, xtol=1e-15,
                        gtol=1e-15)
    assert ref.success
    ours = np.array([result.params[n].value for n in ("De", "re", "a")])
    np.testing.assert_allclose(ours, ref.x, rtol=1e-6)
    dof = len(obs) - 3
    chi2 = 2 * ref.cost
    assert result.chi_square == pytest.approx(chi2, rel=1e-8)
    cov = np.linalg.inv(ref.jac.T @ ref.jac) * chi2 / dof
    np.testing.assert_allclose([result.params[n].uncertainty for n in ("De", "re", "a")], np.sqrt(np.diag(cov)),
                               rtol=0.01)
    np.testing.assert_allclose(result.covariance, cov, rtol=0.02, atol=0)


# ----------------------------------------------------------------------------- handbook
def test_handbook_hcl_morse_constants():
    # Source: H35Cl X state, omega_e = 2990.946, omega_e x_e = 52.8186 cm-1 (Huber & Herzberg 1979 as
    # served by the NIST Chemistry WebBook; physics.md section 8, status "2nd": seen in a third-party
    # transcription of the WebBook table). Morse relations (physics.md section 6, Morse, Phys. Rev. 34,
    # 57 (1929)): G(v) = we (v+1/2) - wexe (v+1/2)^2, we = 2 a sqrt(De C_u/mu), wexe = a^2 C_u/mu, so
    # De = we^2/(4 wexe) and a = sqrt(wexe mu/C_u). Reduced mass from AME2020 (physics.md section 8:
    # 0.979592539 u). Tolerance 1e-6 relative.
    we, wexe = 2990.946, 52.8186
    mu = wkbfit.reduced_mass("1H", "35Cl")
    assert mu == pytest.approx(0.979592539, rel=1e-9)
    v = np.arange(15)
    G = we * (v + 0.5) - wexe * (v + 0.5) ** 2
    obs = read_levels({"v": v, "energy": G, "uncertainty": np.full(len(v), 0.01), "isotopologue": ["1H35Cl"] * 15})
    result = fit(Morse(De=40000.0, re=1.27455, a=1.7), obs, vary=["De", "a"])
    assert result.success
    assert result.params["De"].value == pytest.approx(we ** 2 / (4 * wexe), rel=1e-6)
    assert result.params["a"].value == pytest.approx(math.sqrt(wexe * mu / HBAR2_OVER_2U), rel=1e-6)
    # physics.md section 5 gives a = 1.751935 A^-1 for these constants (6 digits)
    assert result.params["a"].value == pytest.approx(1.751935, abs=1e-6)
    # predictions of the same potential: D0 = De - G(0) and vD = we/(2 wexe) - 1/2 (Morse, section 6)
    pred = result.predict()
    assert pred.D0 == pytest.approx(we ** 2 / (4 * wexe) - (we / 2 - wexe / 4), rel=1e-8)
    assert pred.vD == pytest.approx(we / (2 * wexe) - 0.5, rel=1e-7)
    assert pred.n_bound == math.floor(we / (2 * wexe) - 0.5) + 1


# ----------------------------------------------------------------------------- isotopologues
def test_two_isotopologues_fitted_jointly_recover_the_potential():
    # Source: the Born-Oppenheimer potential is shared by isotopologues; only mu differs
    # (AME2020 masses). Recovery within 3 sigma (Gauss-Markov, as above).
    true = LennardJones(De=4000.0, re=4.2, n=12, m=6)
    parts = []
    for seed, label in ((21, "39K85Rb"), (22, "39K87Rb")):
        mu = wkbfit.reduced_mass(*wkbfit.parse_isotopologue(label))
        data, _ = synthetic(true, mu, list(range(0, 60, 2)) + [1, 5, 9], [0] * 30 + [12] * 3, 0.005, seed, label=label)
        parts.append(data)
    joint = {k: np.concatenate([np.asarray(p[k], dtype=object if k == "isotopologue" else float)
                                for p in parts]) for k in parts[0]}
    obs = read_levels(joint)
    result = fit(LennardJones(De=3800.0, re=4.3), obs)
    assert result.success
    assert set(result.masses) == {"39K85Rb", "39K87Rb"}
    within_sigma(result, true)
    # the two isotopologues have different levels: the fit used each one's own mass
    p85, p87 = result.predict(isotopologue="39K85Rb"), result.predict(isotopologue="39K87Rb")
    assert p87.energy[0] < p85.energy[0]  # heavier -> lower zero-point energy
    # and a mass given as a number equals the label lookup
    m85 = wkbfit.reduced_mass("39K", "85Rb")
    np.testing.assert_allclose(result.predict(mu=m85).energy, p85.energy, rtol=0, atol=0)


# ----------------------------------------------------------------------------- predictions
def test_predictions_and_their_uncertainties():
    # Source: linear error propagation sigma_f^2 = g^T C g with g = df/dp; checked against the same
    # formula evaluated with finite-difference gradients of wkbfit.levels (independent code path).
    true, obs = morse_data(seed=3)
    result = fit(Morse(De=5600.0, re=3.6, a=0.62), obs, MU_LICS)
    pred = result.predict(mu=MU_LICS, J=4)
    table = wkbfit.levels(result.potential, MU_LICS, J=4, order=1, ends="maslov")
    assert pred.n_bound == len(table)
    np.testing.assert_allclose(pred.energy, table.energy, rtol=0, atol=1e-9)
    np.testing.assert_allclose(pred.binding_energy, table.binding_energy, rtol=0, atol=1e-9)
    np.testing.assert_allclose(pred.spacing, np.diff(table.energy), rtol=0, atol=1e-9)
    names = result.var_names
    grads = []
    for name in names:
        h = 1e-6 * result.params[name].value
        up = wkbfit.levels(result.potential.with_params(**{name: result.params[name].value + h}), MU_LICS, J=4, order=1, ends="maslov")
        dn = wkbfit.levels(result.potential.with_params(**{name: result.params[name].value - h}), MU_LICS, J=4, order=1, ends="maslov")
        n = min(len(up), len(dn), pred.n_bound)
        grads.append((up.energy[:n] - dn.energy[:n]) / (2 * h))
    G = np.array(grads).T
    sig = np.sqrt(np.einsum("ij,jk,ik->i", G, result.covariance, G))
    np.testing.assert_allclose(pred.energy_uncertainty[:len(sig)], sig, rtol=1e-3)
    # D0 = De - E(v=0, J=0); its uncertainty from the same propagation
    E00 = wkbfit.levels(result.potential, MU_LICS, v=[0], order=1, ends="maslov").energy[0]
    assert pred.D0 == pytest.approx(result.params["De"].value - E00, rel=1e-12)
    assert pred.D0_uncertainty > 0 and pred.vD_uncertainty > 0
    assert pred.n_bound_range[0] <= pred.n_bound <= pred.n_bound_range[1]
    text = pred.to_text(last=5)
    assert "D0 =" in text and "dG(v+1/2)" in text and "nan" not in text.lower()
    df = pred.to_dataframe()
    assert len(df) == pred.n_bound and np.isnan(df["spacing"].iloc[-1])
    assert "<table>" in pred._repr_html_()
    with pytest.raises(ValueError, match="J="):
        result.predict(J=-1)
    with pytest.raises(ValueError, match="either"):
        result.predict(isotopologue="1H35Cl", mu=1.0)


# ----------------------------------------------------------------------------- reports
def test_report_json_roundtrip_and_html(tmp_path):
    # Source: the JSON standard (RFC 8259: no NaN) and the documented FitResult attributes.
    true, obs = morse_data(seed=4)
    result = fit(Morse(De=5600.0, re=3.6, a=0.62), obs, MU_LICS)
    text = result.report()
    for word in ("De", "re", "a", "chi-square", "degrees of freedom", "Correlations", "Residuals", "initial"):
        assert word in text
    assert "nan" not in text.lower()
    path = tmp_path / "fit.json"
    path.write_text("old content")
    result.save_json(path)
    assert [p.name for p in tmp_path.iterdir()] == ["fit.json"]  # replaced, no temporary file left
    raw = json.loads(path.read_text())
    assert raw["format"] == "wkbfit-fit-result"
    loaded = FitResult.load_json(path)
    for name in ("De", "re", "a"):
        assert loaded.params[name].value == result.params[name].value
        assert loaded.params[name].uncertainty == result.params[name].uncertainty
    np.testing.assert_array_equal(loaded.covariance, result.covariance)
    np.testing.assert_array_equal(loaded.residuals, result.residuals)
    assert loaded.report() == text
    np.testing.assert_array_equal(loaded.predict().energy_uncertainty, result.predict().energy_uncertainty)
    html = result._repr_html_()
    assert "<table>" in html and "De" in html
    with pytest.raises(ValueError, match="cannot read"):
        FitResult.load_json(tmp_path / "missing.json")
    with pytest.raises(OSError):
        result.save_json(tmp_path / "no-such-dir" / "fit.json")


def test_correlations_sorted_and_large_residuals_flagged():
    # Source: the report's documented layout; an outlier of 20 sigma must be flagged.
    true, obs = morse_data(seed=5)
    data = obs.to_dict()
    data["energy"][7] += 0.2
    result = fit(Morse(De=5600.0, re=3.6, a=0.62), data, MU_LICS)
    corr = result._sorted_correlations()
    assert [abs(c[2]) for c in corr] == sorted([abs(c[2]) for c in corr], reverse=True)
    flagged = [line for line in result.report().splitlines() if line.endswith("<<")]
    assert len(flagged) >= 1 and "   7    0" in flagged[0]


# ----------------------------------------------------------------------------- undetermined, bounds
def test_parameter_the_data_do_not_determine_is_reported_with_reason():
    # Source: exact Morse levels at J = 0 do not depend on re (physics.md section 6: G(v) has
    # no re), so re cannot be fitted from them.
    v = np.arange(12)
    G = 2990.946 * (v + 0.5) - 52.8186 * (v + 0.5) ** 2
    with pytest.warns(FitWarning, match="re"):
        result = fit(Morse(De=40000.0, re=1.3, a=1.7), {"v": v, "energy": G, "uncertainty": np.full(12, 0.1)},
                     wkbfit.reduced_mass("1H", "35Cl"))
    p = result.params["re"]
    assert not p.determined and p.uncertainty is None and "do not depend" in p.note
    assert p.value == 1.3
    assert result.params["De"].uncertainty is not None
    assert "not determined" in result.report()


def test_bounds_and_parameter_at_bound():
    # Source: a bounded fit whose unconstrained minimum lies inside the bounds has the same
    # minimum as the unbounded fit (monotone transform); a bound below the truth (De = 5875)
    # holds the parameter at the bound.
    true, obs = morse_data(seed=6)
    free = fit(Morse(De=5600.0, re=3.6, a=0.62), obs, MU_LICS)
    bounded = fit(Morse(De=5600.0, re=3.6, a=0.62), obs, MU_LICS, bounds={"De": (1000, 1e5), "a": (0, None)})
    for name in ("De", "re", "a"):
        assert bounded.params[name].value == pytest.approx(free.params[name].value, rel=1e-8)
        assert bounded.params[name].uncertainty == pytest.approx(free.params[name].uncertainty, rel=1e-4)
    with pytest.warns(FitWarning, match="bound"):
        at = fit(Morse(De=5600.0, re=3.6, a=0.62), obs, MU_LICS, bounds={"De": (None, 5700.0)})
    assert at.params["De"].value == pytest.approx(5700.0, rel=1e-6)
    assert at.params["De"].uncertainty is None and "bound" in at.params["De"].note
    with pytest.raises(ValueError, match="strictly inside"):
        fit(Morse(De=5600.0, re=3.6, a=0.62), obs, MU_LICS, bounds={"De": (5700, 6000)})
    with pytest.raises(ValueError, match="lower bound must be below"):
        fit(Morse(De=5600.0, re=3.6, a=0.62), obs, MU_LICS, bounds={"De": (6000, 5000)})


def test_non_converging_fit_returns_best_point_and_warns():
    # Source: the documented contract (status, message, warning; the data are kept).
    true, obs = morse_data(seed=8)
    start = Morse(De=5000.0, re=3.5, a=0.7)
    model, params, curve = start._core_args()
    chi2_start = float(np.sum(((obs.energy - _core.fit_evaluate(
        model, params, curve, obs.v, (obs.J * (obs.J + 1)).astype(float), np.full(len(obs), MU_LICS), 0)[0])
        / obs.uncertainty) ** 2))
    with pytest.warns(FitWarning, match="did not converge"):
        result = fit(start, obs, MU_LICS, max_iterations=1)
    assert result.status == "max_iterations" and not result.success
    assert result.chi_square < chi2_start
    assert result.observed is obs and len(result.residuals) == len(obs)
    assert "iteration limit" in result.message


# ----------------------------------------------------------------------------- bad input
def test_bad_input_gives_clear_errors_and_leaves_user_data_unchanged():
    # Source: the project rules (ValueError naming the bad value; user arrays never modified).
    pd = pytest.importorskip("pandas")
    true, obs = morse_data(seed=9)
    frame = pd.DataFrame(obs.to_dict())
    frame_copy = frame.copy(deep=True)
    arrays = {k: np.array(v) for k, v in obs.to_dict().items()}
    arrays_copy = {k: v.copy() for k, v in arrays.items()}
    start = Morse(De=5600.0, re=3.6, a=0.62)
    fit(start, frame, MU_LICS)
    fit(start, arrays, MU_LICS)
    pd.testing.assert_frame_equal(frame, frame_copy)
    for k in arrays:
        np.testing.assert_array_equal(arrays[k], arrays_copy[k])
    assert start.params == {"De": 5600.0, "re": 3.6, "a": 0.62}

    # fewer data than varied parameters
    two = {"v": [0, 1], "energy": [100.0, 300.0], "uncertainty": [0.1, 0.1]}
    with pytest.raises(ValueError, match="2 fitted levels cannot determine 3 varied parameters"):
        fit(start, two, MU_LICS)
    # a starting potential that binds fewer levels than the data's varied parameters need
    hopeless = Morse(De=2.0, re=3.67, a=0.6)  # binds v = 0 only
    with pytest.raises(ValueError, match=r"binds only 1 of the data's levels, fewer than the varied parameters; "
                                         r"unbound: v=1.*Start from a deeper"):
        fit(hopeless, obs, MU_LICS)
    # each case of the data reader surfaces through fit as well
    with pytest.raises(ValueError, match="uncertainty"):
        fit(start, {"v": [0, 1, 2, 3], "energy": [1.0, 2.0, 3.0, 4.0], "uncertainty": [0.1, 0.0, 0.1, 0.1]}, MU_LICS)
    with pytest.raises(ValueError, match="missing column"):
        fit(start, {"v": [0, 1, 2, 3], "energy": [1.0, 2.0, 3.0, 4.0]}, MU_LICS)
    with pytest.raises(ValueError, match="appears twice"):
        fit(start, {"v": [0, 0, 2, 3], "energy": [1.0, 2.0, 3.0, 4.0], "uncertainty": [0.1] * 4}, MU_LICS)
    with pytest.raises(ValueError, match="isotope"):
        fit(start, dict(obs.to_dict(), isotopologue=["7Li999Xx"] * len(obs)))
    # arguments of fit itself
    with pytest.raises(ValueError, match="not a parameter"):
        fit(start, obs, MU_LICS, vary=["De", "b"])
    with pytest.raises(ValueError, match="method"):
        fit(start, obs, MU_LICS, method="rkr")
    with pytest.raises(ValueError, match="scale_uncertainties"):
        fit(start, obs, MU_LICS, scale_uncertainties="yes")
    with pytest.raises(ValueError, match="potential"):
        fit("morse", obs, MU_LICS)
    with pytest.raises(ValueError, match="no parameter is varied"):
        fit(start, obs, MU_LICS, vary=[])


def test_unscaled_uncertainties_option():
    # Source: scaled covariance = unscaled x chi2/dof (definition of the scaling).
    true, obs = morse_data(seed=10)
    scaled = fit(Morse(De=5600.0, re=3.6, a=0.62), obs, MU_LICS)
    plain = fit(Morse(De=5600.0, re=3.6, a=0.62), obs, MU_LICS, scale_uncertainties=False)
    np.testing.assert_allclose(scaled.covariance, plain.covariance * scaled.chi_square / scaled.dof, rtol=1e-12)
    np.testing.assert_allclose(plain.covariance, scaled.covariance_unscaled, rtol=1e-12)
    assert "not scaled" in plain.report()


# ----------------------------------------------------------------------------- exact levels
def test_exact_fit_recovers_reference_lennard_jones_levels():
    # Source: physics.md section 11 (also section 2): exact levels v = 0..10 of the Lennard-Jones
    # (12, 6) well De = 2500, re = 1 with eps = 1 (mu = C_u in u), from a converged DVR (+-1e-8,
    # status [N]); given below the asymptote, so the term values are E + 2500. An exact-level fit
    # recovers De and re to the precision of the table; a first-order WKB fit cannot (its levels
    # are off by up to 0.84 cm-1, physics.md section 2).
    ref = np.array([-2210.420515049, -1698.512238268, -1269.172923655, -916.398338379, -633.830067418,
                    -414.723399521, -251.916140416, -137.801492071, -64.309964185, -22.907681064, -4.621224869])
    obs = read_levels({"v": np.arange(11), "energy": ref + 2500.0, "uncertainty": np.full(11, 1e-6)})
    exact = fit(LennardJones(De=2400.0, re=1.03), obs, HBAR2_OVER_2U, method="exact")
    assert exact.success and exact.method == "exact"
    assert exact.params["De"].value == pytest.approx(2500.0, abs=1e-6)
    assert exact.params["re"].value == pytest.approx(1.0, abs=1e-9)
    assert np.max(np.abs(exact.residuals)) < 1e-6
    wkb = fit(LennardJones(De=2400.0, re=1.03), obs, HBAR2_OVER_2U, method="wkb")
    assert np.max(np.abs(wkb.residuals)) > 0.1
    pred = exact.predict()
    # the table stops at v = 10; the well also binds v = 11 just below threshold (WKB vD = 11.43)
    assert pred.n_bound >= 11 and pred.method == "exact"
    np.testing.assert_allclose(pred.binding_energy[:11], -ref, rtol=0, atol=1e-6)


def test_exact_jacobian_matches_finite_differences():
    # Source: central finite differences of the exact levels (step 1e-4 relative; the levels are
    # converged to ~1e-7 cm-1, so the differences carry ~1e-6 relative noise).
    v = np.array([0, 2, 5, 9, 0, 4])
    J = np.array([0, 0, 0, 0, 6, 6])
    rot = (J * (J + 1)).astype(float)
    mu_rows = np.full(6, 40.0)
    pot = LennardJones(De=2000.0, re=4.5, n=11.3, m=6.2)
    model, params, curve = pot._core_args()
    calc, jac = _core.fit_evaluate(model, params, curve, v, rot, mu_rows, 0, 1)
    for k, name in enumerate(pot.param_names):
        h = 1e-4 * abs(params[k])
        step = h * np.eye(len(params))[k]
        fd = (_core.fit_evaluate(model, params + step, curve, v, rot, mu_rows, 0, 1)[0]
              - _core.fit_evaluate(model, params - step, curve, v, rot, mu_rows, 0, 1)[0]) / (2 * h)
        np.testing.assert_allclose(jac[:, k], fd, rtol=0, atol=1e-4 * np.max(np.abs(fd)), err_msg=name)


def test_exact_and_wkb_fits_agree_for_morse():
    # Source: physics.md section 6: first-order WKB is exact for the Morse potential (the radial
    # problem differs by exponentially small terms when a re >> 1; here a re = 2.2), so both
    # methods must reach the same minimum: within 0.01 standard deviation (the criterion).
    true, obs = morse_data(seed=12)
    wkb = fit(Morse(De=5700.0, re=3.62, a=0.61), obs, MU_LICS)
    exact = fit(Morse(De=5700.0, re=3.62, a=0.61), obs, MU_LICS, method="exact")
    assert exact.success
    for name in ("De", "re", "a"):
        assert abs(exact.params[name].value - wkb.params[name].value) < 0.01 * wkb.params[name].uncertainty
        assert exact.params[name].uncertainty == pytest.approx(wkb.params[name].uncertainty, rel=1e-3)
