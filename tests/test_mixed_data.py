"""Fits to the data a laboratory has: line positions, progressions with free upper term values,
binding energies in MHz/GHz below a stated or fitted asymptote, mixed in one fit; units,
file formats, Omega, plausibility warnings.

Every data set is made from levels of a known potential computed with the EXACT radial
solver (wkbfit.exact.exact_levels), with seeded Gaussian noise, and fitted with
method="exact", so that no semiclassical error enters the recovery checks. The molecule is
an invented scenario (a Morse state of a hydride-like reduced mass), not measured data.

Sources of the criteria: for a correct model and Gaussian noise of the stated size the
weighted least-squares estimates scatter about the true values with the quoted standard
deviations, so |fitted - true| < 3 sigma (a 99.7% window; common practice); two fits to
the same information must agree to far better than their uncertainties (0.05 sigma, the
issue's tolerance).
"""
import math
import warnings

import numpy as np
import pytest
import scipy.constants

import wkbfit
from wkbfit import Morse, fit, read_levels, read_lines
from wkbfit.checks import check_data
from wkbfit.exact import exact_levels
from wkbfit.lines import read_widths
from wkbfit.observed import DataWarning
from wkbfit.units import CM1_PER_UNIT, SPEED_OF_LIGHT

TRUE = Morse(De=20000.0, re=1.3, a=1.8)
START = Morse(De=19000.0, re=1.31, a=1.75)
MU = 0.98


def exact_table(pot, vs, Js, mu=MU):
    t = exact_levels(pot, mu, vs=list(vs), Js=list(Js))
    return {(int(v), int(J)): float(E) for v, J, E in zip(t.v, t.J, t.energy)}


def within(result, true, n_sigma=3.0, names=("De", "re", "a")):
    for name in names:
        p = result.params[name]
        assert abs(p.value - true.params[name]) < n_sigma * p.uncertainty, (name, p.value, true.params[name],
                                                                             p.uncertainty)


# ---------------------------------------------------------------- line positions
def test_lines_to_the_lowest_level_fit_like_the_equivalent_term_values():
    # lines (v, J) -> (0, 0) carry exactly the information of term values measured from v=0,
    # J=0 (energy_zero="lowest"): the two fits must agree within 0.05 sigma (issue's tolerance)
    E = exact_table(TRUE, range(12), (0, 4, 8))
    keys = [k for k in sorted(E) if k != (0, 0)]
    rng = np.random.default_rng(11)
    sigma = 0.01
    values = np.array([E[k] - E[(0, 0)] for k in keys]) + rng.normal(0, sigma, len(keys))
    terms = read_levels({"v": [k[0] for k in keys], "J": [k[1] for k in keys], "energy": values,
                         "uncertainty": np.full(len(keys), sigma)}, energy_zero="lowest")
    lines = read_lines({"v_upper": [k[0] for k in keys], "J_upper": [k[1] for k in keys],
                        "v_lower": np.zeros(len(keys), int), "J_lower": np.zeros(len(keys), int),
                        "wavenumber": values, "uncertainty": np.full(len(keys), sigma)})
    rt = fit(START, terms, MU, method="exact")
    rl = fit(START, lines, MU, method="exact")
    assert rt.success and rl.success
    for name in ("De", "re", "a"):
        d = abs(rt.params[name].value - rl.params[name].value) / rt.params[name].uncertainty
        assert d < 0.05, (name, d)
        assert rl.params[name].uncertainty == pytest.approx(rt.params[name].uncertainty, rel=1e-6)
    within(rl, TRUE)
    # residuals come back per row, in the data's unit
    np.testing.assert_allclose(rl.residuals, rt.residuals, atol=1e-6)


def test_band_of_lines_within_the_state_recovers_the_potential():
    # fundamental and overtone bands, P and R branches: only level differences, no energy zero
    vs, Js = range(10), range(0, 9)
    E = exact_table(TRUE, vs, Js)
    rows = []
    for v in range(9):
        for dv in (1, 2):
            for J in range(1, 8):
                for dJ in (-1, 1):
                    up, lo = (v + dv, J + dJ), (v, J)
                    if up in E and lo in E:
                        rows.append((up, lo))
    rng = np.random.default_rng(7)
    sigma = 0.005
    wn = np.array([E[u] - E[l] for u, l in rows]) + rng.normal(0, sigma, len(rows))
    lines = read_lines({"v_upper": [u[0] for u, _ in rows], "J_upper": [u[1] for u, _ in rows],
                        "v_lower": [l[0] for _, l in rows], "J_lower": [l[1] for _, l in rows],
                        "wavenumber": wn, "uncertainty": np.full(len(rows), sigma)})
    r = fit(START, lines, MU, method="exact")
    assert r.success, r.message
    within(r, TRUE)
    assert 0.7 < r.standard_error < 1.3
    # each distinct level is computed once per evaluation (the start included)
    assert r.n_levels == len({k for pair in rows for k in pair})
    assert r.n_level_calculations == (r.n_evaluations + 1) * r.n_levels


def progression(n_upper=4, sigma=0.01, seed=3):
    """Lines from n_upper levels of an unmodelled state (invented term values) into v''=0..14,
    J'' = J' -+ 1, and the true upper term values."""
    E = exact_table(TRUE, range(12), range(0, 20))
    rng = np.random.default_rng(seed)
    upper = [(10 + k, 2 * k + 3, 18000.0 + 137.25 * k) for k in range(n_upper)]  # (v', J', T)
    cols = {c: [] for c in ("v_upper", "J_upper", "v_lower", "J_lower", "wavenumber", "uncertainty",
                            "upper_state")}
    for vu, Ju, T in upper:
        for vl in range(12):
            for Jl in (Ju - 1, Ju + 1):
                cols["v_upper"].append(vu)
                cols["J_upper"].append(Ju)
                cols["v_lower"].append(vl)
                cols["J_lower"].append(Jl)
                cols["wavenumber"].append(T - E[(vl, Jl)] + rng.normal(0, sigma))
                cols["uncertainty"].append(sigma)
                cols["upper_state"].append("B")
    return cols, upper


def test_progression_with_free_upper_term_values():
    cols, upper = progression()
    lines = read_lines(cols)
    # the upper term values are unknown: the fit must recover them as free parameters; the
    # energy zero of the lower state is its minimum, so the upper values are absolute
    r = fit(START, lines, MU, method="exact")
    assert r.success, r.message
    within(r, TRUE)
    assert len(r.free_parameters) == len(upper)
    for vu, Ju, T in upper:
        p = r.free_parameters["T[B v=%d, J=%d]" % (vu, Ju)]
        assert abs(p.value - T) < 3 * p.uncertainty, (p.value, T, p.uncertainty)
    # the free-level columns cost no level calculation: only the lower levels are computed
    n_lower = len({(v, J) for v, J in zip(cols["v_lower"], cols["J_lower"])})
    assert r.n_levels == n_lower
    assert r.n_level_calculations == (r.n_evaluations + 1) * n_lower
    # the free term values have their own report section
    text = r.report()
    assert "Free term values" in text and "T[B v=10, J=3]" in text


def test_free_levels_add_no_level_calculations_per_evaluation():
    # the same lower levels, with 1 or 8 free upper levels: the count per evaluation is the same
    counts = []
    for n_upper in (1, 8):
        cols, _ = progression(n_upper=n_upper)
        r = fit(START, read_lines(cols), MU, method="wkb")
        counts.append(r.n_level_calculations / (r.n_evaluations + 1))
        assert r.n_levels == len({(v, J) for v, J in zip(cols["v_lower"], cols["J_lower"])})
        assert counts[-1] == r.n_levels


# ---------------------------------------------------------------- units
def test_unit_factors_against_scipy_constants():
    # source: scipy.constants (CODATA); c is exact in the SI, so the factors agree to rounding
    assert SPEED_OF_LIGHT == scipy.constants.c
    assert CM1_PER_UNIT["MHz"] == pytest.approx(1e6 / (scipy.constants.c * 100), rel=1e-15)
    assert CM1_PER_UNIT["GHz"] == pytest.approx(1e9 / (scipy.constants.c * 100), rel=1e-15)
    assert wkbfit.units.to_wavenumber(1.0, "ghz") == CM1_PER_UNIT["GHz"]
    with pytest.raises(ValueError, match="unit='THz' is not a known energy unit; use one of cm-1, MHz, GHz"):
        wkbfit.units.check_unit("THz")


def binding_data():
    """Binding energies of the last levels of a LJ(12,6) well (invented scenario), exact."""
    pot = wkbfit.LennardJones(De=300.0, re=4.0)
    mu = 20.0
    t = exact_levels(pot, mu, vs=None, Js=[0])
    v = t.v[-6:]
    b = t.binding_energy[-6:]
    return pot, mu, v, b


def test_mhz_and_ghz_binding_energies_fit_like_cm1():
    pot, mu, v, b = binding_data()
    rng = np.random.default_rng(2)
    sigma_cm = 1e-4
    b_cm = b + rng.normal(0, sigma_cm, len(b))
    c = scipy.constants.c
    b_mhz = b_cm * (c * 100) / 1e6
    start = wkbfit.LennardJones(De=310.0, re=4.02)
    results = []
    for values, sig, unit in ((b_cm, sigma_cm, "cm-1"), (b_mhz, sigma_cm * c * 100 / 1e6, "MHz"),
                              (b_mhz / 1e3, sigma_cm * c * 100 / 1e9, "GHz")):
        obs = read_levels({"v": v, "energy": values, "uncertainty": np.full(len(v), sig)},
                          energy_zero="asymptote", unit=unit)
        assert obs.unit == unit
        results.append(fit(start, obs, mu, method="exact"))
    ref = results[0]
    for r in results[1:]:
        for name in ("De", "re"):
            assert r.params[name].value == pytest.approx(ref.params[name].value, rel=1e-12)
            assert r.params[name].uncertainty == pytest.approx(ref.params[name].uncertainty, rel=1e-9)
    within(ref, pot, names=("De", "re"))
    # residuals in the data's own unit (report and JSON)
    d = results[1].to_dict()
    block = d["data_sets"][0]
    assert block["unit"] == "MHz"
    np.testing.assert_allclose(np.array(block["residuals"]), ref.residuals / CM1_PER_UNIT["MHz"], rtol=1e-6,
                               atol=1e-6)
    assert "MHz" in results[1].report()


def test_binding_energies_below_a_fitted_asymptote():
    # binding energies measured below a threshold 0.0123 cm-1 above the potential's asymptote
    # (an invented offset): stated, the fit recovers the potential; fitted, also the threshold
    pot, mu, v, b = binding_data()
    shift = 0.0123
    rng = np.random.default_rng(9)
    sigma = 1e-4
    values = b + shift + rng.normal(0, sigma, len(b))
    start = wkbfit.LennardJones(De=300.3, re=4.003)
    stated = read_levels({"v": v, "energy": values, "uncertainty": np.full(len(v), sigma)}, energy_zero="asymptote",
                         asymptote=pot.De + shift)
    r1 = fit(start, stated, mu, method="exact", vary=["re"])
    assert abs(r1.params["re"].value - pot.re) < 3 * r1.params["re"].uncertainty
    free = read_levels({"v": v, "energy": values, "uncertainty": np.full(len(v), sigma)}, energy_zero="asymptote",
                       fit_asymptote=True)
    # the last levels fix the long-range well and the threshold, not De and re separately: fix De
    r2 = fit(start.with_params(De=pot.De), free, mu, method="exact", vary=["re"])
    p = r2.free_parameters["asymptote[set 1]"]
    assert abs(p.value - (pot.De + shift)) < 3 * p.uncertainty, (p.value, pot.De + shift, p.uncertainty)
    assert abs(r2.params["re"].value - pot.re) < 3 * r2.params["re"].uncertainty
    with pytest.raises(ValueError, match="fit_asymptote=True is for binding energies"):
        read_levels({"v": v, "energy": values, "uncertainty": np.full(len(v), sigma)}, fit_asymptote=True)


def test_mixed_kinds_in_one_fit_and_reports(tmp_path):
    # term values of the low levels (cm-1), a band of lines, and a progression with free upper
    # levels, fitted together; the residual table is grouped by kind
    E = exact_table(TRUE, range(12), range(0, 20))
    rng = np.random.default_rng(4)
    terms = read_levels({"v": [0, 1, 2], "J": [0, 0, 0], "energy": [E[(v, 0)] + rng.normal(0, 0.01) for v in range(3)],
                         "uncertainty": [0.01] * 3})
    cols, upper = progression(n_upper=2)
    band = read_lines({"v_upper": [1, 2, 3], "J_upper": [1, 1, 1], "v_lower": [0, 1, 2], "J_lower": [0, 0, 0],
                       "wavenumber": [E[(v + 1, 1)] - E[(v, 0)] + rng.normal(0, 0.005) for v in range(3)],
                       "uncertainty": [0.005] * 3})
    r = fit(START, [terms, band, read_lines(cols)], MU, method="exact")
    assert r.success
    within(r, TRUE)
    assert len(r.residuals) == len(terms) + len(band) + len(cols["wavenumber"])
    text = r.report()
    for title in ("term values", "line positions", "Free term values"):
        assert title in text
    path = tmp_path / "mixed.json"
    r.save_json(path)
    d = wkbfit.FitResult.load_json(path).to_dict()
    assert [b["kind"] for b in d["data_sets"]] == ["term values", "line positions", "line positions"]
    assert len(d["free_parameters"]) == 2
    assert r.predict().n_bound > 10


def test_widths_are_read_and_refused_for_bound_levels(tmp_path):
    # widths are fitted beside quasibound positions (tests/test_width_fit.py); these two belong to levels
    # that the Morse start binds (J = 3, 5 has no barrier high enough to trap them), which is refused
    path = tmp_path / "widths.txt"
    path.write_text("# unit: MHz\nv J width uncertainty\n20 3 12.5 0.5\n21 5 80 2\n")
    w = read_widths(path)
    assert w.unit == "MHz"
    np.testing.assert_allclose(w.width, np.array([12.5, 80.0]) * 1e6 / (scipy.constants.c * 100), rtol=1e-15)
    cols, _ = progression(n_upper=1)
    with pytest.raises(ValueError, match="a width is given for v=20, J=3, which is not a quasibound level"):
        fit(START, [read_lines(cols), w], MU)


# ---------------------------------------------------------------- files and columns
def test_csv_tab_and_whitespace_files_read_alike(tmp_path):
    rows = [(0, 0, 1000.5, 0.01), (1, 0, 2950.25, 0.01), (2, 2, 4850.0, 0.02)]
    csv_path, tab_path, ws_path = tmp_path / "a.csv", tmp_path / "a.tsv", tmp_path / "a.txt"
    csv_path.write_text("v,J,energy,uncertainty\n" + "".join("%d,%d,%r,%r\n" % r for r in rows))
    tab_path.write_text("v\tJ\tenergy\tuncertainty\n" + "".join("%d\t%d\t%r\t%r\n" % r for r in rows))
    ws_path.write_text("# a comment\n  v   J    energy   uncertainty\n" + "".join("%d  %d   %r  %r\n" % r for r in rows))
    a, b, c = (read_levels(p) for p in (csv_path, tab_path, ws_path))
    for x in (b, c):
        np.testing.assert_array_equal(x.energy, a.energy)
        np.testing.assert_array_equal(x.J, a.J)
    # a unit in the column name or in a comment line
    mhz = tmp_path / "m.txt"
    mhz.write_text("v J energy[MHz] uncertainty[MHz]\n0 0 3.0e7 30\n1 0 8.9e7 30\n")
    m = read_levels(mhz)
    assert m.unit == "MHz"
    assert m.energy[0] == pytest.approx(3.0e7 * CM1_PER_UNIT["MHz"], rel=1e-15)
    with pytest.raises(ValueError, match="states unit MHz for column 'energy' but unit='GHz' was asked"):
        read_levels(mhz, unit="GHz")


def test_unknown_columns_are_reported_and_N_never_becomes_J0(tmp_path):
    with pytest.raises(ValueError, match="column 'N' is not a column name, and the data have no J column"):
        read_levels({"v": [0, 1], "N": [3, 3], "energy": [100.0, 300.0], "uncertainty": [0.1, 0.1]})
    with pytest.warns(DataWarning, match="column 'note' is not used"):
        read_levels({"v": [0, 1], "J": [0, 0], "energy": [100.0, 300.0], "uncertainty": [0.1, 0.1],
                     "note": ["a", "b"]})
    with pytest.raises(ValueError, match="column 'N_upper' is not a column name, and the data have no J_upper"):
        read_lines({"v_upper": [1], "N_upper": [1], "v_lower": [0], "J_lower": [0], "N": [2],
                    "wavenumber": [2000.0], "uncertainty": [0.01]})


def test_default_uncertainty_only_when_asked():
    data = {"v": [0, 1, 2], "energy": [1000.0, 2950.0, 4850.0]}
    with pytest.raises(ValueError, match="missing column 'uncertainty'"):
        read_levels(data)
    obs = read_levels(data, default_uncertainty=0.05)
    assert obs.default_uncertainty == 0.05
    np.testing.assert_array_equal(obs.uncertainty, [0.05] * 3)
    with pytest.raises(ValueError, match="only for data without one"):
        read_levels(dict(data, uncertainty=[0.1] * 3), default_uncertainty=0.05)


# ---------------------------------------------------------------- Omega
def test_omega_in_the_centrifugal_term():
    # J(J+1) - Omega^2 with Omega = 6: J = 6 gives 6 = 2*3 and J = 7 gives 20 = 4*5, so the exact
    # levels (v, J=6) and (v, J=7) of an Omega = 6 state are the exact levels (v, J=2) and (v, J=4)
    # of the same potential without electronic angular momentum (arithmetic identity)
    E = exact_table(TRUE, range(10), (2, 4))
    rng = np.random.default_rng(8)
    v = list(range(10)) * 2
    J = [6] * 10 + [7] * 10
    vals = [E[(vv, 2 if j == 6 else 4)] + rng.normal(0, 0.01) for vv, j in zip(v, J)]
    obs = read_levels({"v": v, "J": J, "energy": vals, "uncertainty": [0.01] * 20})
    r = fit(START, obs, MU, method="exact", omega=6)
    within(r, TRUE)
    wrong = fit(START, obs, MU, method="exact")
    assert wrong.standard_error > 10 * r.standard_error
    # predictions use J(J+1) - Omega^2: J = 7 of the state is the exact J = 4 level without Omega
    pred = r.predict(J=7)
    E4 = exact_table(TRUE, range(3), (4,))
    for v in range(3):
        assert abs(pred.energy[v] - E4[(v, 4)]) < 3 * pred.energy_uncertainty[v] + 1e-3
    with pytest.raises(ValueError, match="J=3 is below Omega=6"):
        r.predict(J=3)
    with pytest.raises(ValueError, match="J=2 is below Omega=3"):
        fit(START, read_levels({"v": [0, 1, 2, 3], "J": [2, 3, 3, 3], "energy": [1, 2, 3, 4],
                                "uncertainty": [0.1] * 4}), MU, omega=3)
    with pytest.raises(ValueError, match="omega=0.5 must be a whole number"):
        fit(START, obs, MU, omega=0.5)


# ---------------------------------------------------------------- plausibility warnings
def data_warnings(func):
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        func()
    return [str(w.message) for w in caught if issubclass(w.category, DataWarning)]


def clean_levels():
    E = exact_table(TRUE, range(6), (0, 2))
    keys = sorted(E)
    return {"v": [k[0] for k in keys], "J": [k[1] for k in keys], "energy": [E[k] for k in keys],
            "uncertainty": [0.01] * len(keys)}


def test_plausibility_warnings_fire_on_their_case_and_stay_silent_on_clean_data():
    clean = clean_levels()
    assert data_warnings(lambda: read_levels(clean)) == []
    assert data_warnings(lambda: read_levels(dict(clean, energy=np.array(clean["energy"]) - clean["energy"][0]),
                                             energy_zero="lowest")) == []
    # binding energies given as term values
    binding = dict(clean, energy=list(TRUE.De - np.array(clean["energy"])))
    (msg,) = data_warnings(lambda: read_levels(binding))
    assert "fall as v rises" in msg and "energy_zero='asymptote'" in msg
    # 'lowest' data without a v = 0 row
    no_zero = {k: [x for x, v in zip(clean[k], clean["v"]) if v > 0] for k in clean}
    no_zero["energy"] = list(np.array(no_zero["energy"]) - 500.0)
    (msg,) = data_warnings(lambda: read_levels(no_zero, energy_zero="lowest"))
    assert "no v = 0 row" in msg
    # MHz values read as cm-1
    mhz = dict(clean, energy=list(np.array(clean["energy"]) / CM1_PER_UNIT["MHz"]),
               uncertainty=[300.0] * len(clean["v"]))
    msgs = data_warnings(lambda: read_levels(mhz))
    assert any("look like frequencies in MHz" in m for m in msgs)
    assert data_warnings(lambda: read_levels(mhz, unit="MHz")) == []
    # uncertainties too large / too small against the spacings
    big = dict(clean, uncertainty=[500.0] * len(clean["v"]))
    (msg,) = data_warnings(lambda: read_levels(big))
    assert "above 0.25 of the typical spacing" in msg
    small = dict(clean, uncertainty=[1e-12] * len(clean["v"]))
    (msg,) = data_warnings(lambda: read_levels(small))
    assert "implausibly small" in msg
    # the same level twice with different values (two data sets), the same line twice
    a = read_levels(clean)
    b = read_levels(dict(clean, energy=list(np.array(clean["energy"]) + 1.0)))
    msgs = data_warnings(lambda: check_data([a, b]))
    assert msgs and "is given in data sets 1 and 2" in msgs[0]
    assert data_warnings(lambda: check_data([a, read_levels(clean)])) == []
    two = {"v_upper": [1, 1], "J_upper": [1, 1], "v_lower": [0, 0], "J_lower": [0, 0],
           "wavenumber": [3000.0, 3001.0], "uncertainty": [0.01, 0.01]}
    (msg,) = data_warnings(lambda: read_lines(two))
    assert "same transition" in msg
    assert data_warnings(lambda: read_lines(dict(two, wavenumber=[3000.0, 3000.01]))) == []


def test_cli_check_shows_the_plausibility_warnings_and_fit_takes_lines(tmp_path, capsys):
    from wkbfit.cli import main
    clean = clean_levels()
    path = tmp_path / "mhz.csv"
    path.write_text("v,J,energy,uncertainty\n" + "".join(
        "%d,%d,%.6f,300\n" % (v, J, E / CM1_PER_UNIT["MHz"]) for v, J, E in zip(clean["v"], clean["J"], clean["energy"])))
    assert main(["check", str(path), "--mu", "0.98"]) == 0
    err = capsys.readouterr().err
    assert "look like frequencies in MHz" in err
    assert main(["check", str(path), "--unit", "MHz", "--mu", "0.98"]) == 0
    assert "warning" not in capsys.readouterr().err
    # a fit of term values plus a file of lines
    E = exact_table(TRUE, range(8), (0, 1))
    levels = tmp_path / "levels.csv"
    levels.write_text("v,J,energy,uncertainty\n" + "".join("%d,0,%.8f,0.01\n" % (v, E[(v, 0)]) for v in range(3)))
    lines = tmp_path / "lines.txt"
    lines.write_text("v_upper J_upper v_lower J_lower wavenumber uncertainty\n" + "".join(
        "%d 1 %d 0 %.8f 0.01\n" % (v + 1, v, E[(v + 1, 1)] - E[(v, 0)]) for v in range(7)))
    out_json = tmp_path / "r.json"
    assert main(["fit", str(levels), "morse", "De=19000", "re=1.31", "a=1.75", "--mu", "0.98", "--lines", str(lines),
                 "--method", "exact", "-o", str(out_json)]) == 0
    text = capsys.readouterr().out
    assert "line positions" in text and "term values" in text


def test_readme_mixed_data_example_runs(tmp_path, monkeypatch):
    # the README's example, executed on invented data files made here from exact levels of its MLR
    import os
    import re as _re
    text = open(os.path.join(os.path.dirname(__file__), "..", "README.md"), encoding="utf-8").read()
    code = _re.search(r"<!-- mixed-data example.*?```python\n(.*?)```", text, _re.S).group(1)
    true = wkbfit.MLR(De=5000.0, re=3.0, C6=2.0e6, C8=1.0e8, betas=[0.3, 0.1], damping="douketis",
                      rho=wkbfit.potentials.damping_range("douketis", "Na", "Na"))
    mu = 11.5
    t = exact_levels(true, mu, vs=list(range(6)), Js=[0, 1, 2, 3])
    E = {(int(v), int(J)): float(e) for v, J, e in zip(t.v, t.J, t.energy)}
    (tmp_path / "levels.csv").write_text("v,J,energy,uncertainty\n" + "".join(
        "%d,0,%.9f,0.01\n" % (v, E[(v, 0)]) for v in range(4)))
    rows = ["v_upper J_upper v_lower J_lower wavenumber uncertainty upper_state"]
    for v in range(6):
        for Jl in (1, 3):
            rows.append("7 2 %d %d %.9f 0.01 B" % (v, Jl, 21000.0 - E[(v, Jl)]))
    (tmp_path / "fluorescence.txt").write_text("\n".join(rows) + "\n")
    last = exact_levels(true, mu, vs=None, Js=[0])
    (tmp_path / "binding_MHz.csv").write_text("v,energy,uncertainty\n" + "".join(
        "%d,%.6f,1.0\n" % (v, b / CM1_PER_UNIT["MHz"]) for v, b in zip(last.v[-3:], last.binding_energy[-3:])))
    monkeypatch.chdir(tmp_path)
    namespace = {}
    exec(compile(code, "README.md", "exec"), namespace)
    result = namespace["result"]
    assert result.success
    assert list(result.free_parameters) == ["T[B v=7, J=2]"]
    assert result.free_parameters["T[B v=7, J=2]"].value == pytest.approx(21000.0, abs=1e-3)
    assert (tmp_path / "fit.json").exists()


def test_core_term_value_fit_is_the_row_fit_for_every_energy_zero():
    # _core.fit_run (term values in one energy zero) now runs through the row engine: the three
    # zeros recover the potential from its own exact levels (exact method: no model error)
    from wkbfit import _core
    E = exact_table(TRUE, range(8), (0,))
    v = np.arange(1, 8, dtype=np.intc)
    Ev = np.array([E[(k, 0)] for k in range(8)])
    for zero, obs in ((0, Ev[1:]), (1, TRUE.De - Ev[1:]), (2, Ev[1:] - Ev[0])):
        out = _core.fit_run("morse", np.array(START._params), None, v, np.zeros(7), np.full(7, MU), obs,
                            np.full(7, 0.01), zero, np.array([1, 0, 1], dtype=np.intc), np.full(3, -np.inf),
                            np.full(3, np.inf), method=1)
        assert out["stop"] == "converged"
        np.testing.assert_allclose(out["params"][[0, 2]], [TRUE.De, TRUE.a], rtol=1e-7)


def test_json_round_trip_keeps_units_and_free_values(tmp_path):
    pot, mu, v, b = binding_data()
    c = scipy.constants.c
    obs = read_levels({"v": v, "energy": b * (c * 100) / 1e6, "uncertainty": np.full(len(v), 3.0)},
                      energy_zero="asymptote", unit="MHz")
    r = fit(wkbfit.LennardJones(De=310.0, re=4.02), obs, mu, method="exact")
    path = tmp_path / "r.json"
    r.save_json(path)
    back = wkbfit.FitResult.load_json(path)
    assert back.observed.unit == "MHz"
    np.testing.assert_allclose(back.residuals, r.residuals, rtol=1e-12, atol=1e-15)
    assert back.report() == r.report()
    cols, _ = progression(n_upper=2)
    r2 = fit(START, read_lines(cols), MU)
    back2 = wkbfit.FitResult.from_dict(r2.to_dict())
    assert list(back2.free_parameters) == list(r2.free_parameters)
    assert back2.report() == r2.report()
