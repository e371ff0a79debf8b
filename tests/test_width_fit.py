"""Widths (FWHM) of quasibound levels fitted beside their positions (wkbfit.width_fit).

The data are made with the EXACT resonance solver (complex-energy poles, levels(..., method="exact",
quasibound=True); that solver is checked against an independent SciPy integration in
tests/test_quasibound.py) for a known Lennard-Jones (12,6) curve, De = 2500 cm-1, re = 1 A, with
hbar^2/(2 mu) = 1 cm-1 A^2, whose C6 tail and centrifugal barrier trap shape resonances at J = 30-45.
Four bound levels (J = 0, v = 0-3) and the quasibound positions and widths at J = 30, 35, 40, 45 carry
seeded Gaussian noise of the stated uncertainties (0.05 cm-1 on positions, 2 % on widths). This is an
invented scenario, not measured data.

Sources of the criteria: for a correct model and Gaussian noise of the stated size, weighted least
squares scatters about the true values with the quoted standard deviations, so |fitted - true| < 3 sigma
(a 99.7 % window; common practice). The same data in other units must give the same fit to 1e-12
(the issue's tolerance); the conversion factor is checked against scipy.constants.c.
"""
import warnings

import numpy as np
import pytest
import scipy.constants

import wkbfit
from wkbfit import fit, read_levels
from wkbfit.fitting import FitWarning
from wkbfit.lines import ObservedWidths, read_widths
from wkbfit.units import CM1_PER_UNIT

EPS = 1.0
MU = wkbfit.HBAR2_OVER_2U / EPS
TRUE = wkbfit.LennardJones(2500.0, 1.0, n=12.0, m=6.0)
START = wkbfit.LennardJones(2490.0, 1.003, n=12.1, m=6.05)
VARY = ["De", "re", "n", "m"]
SIGMA_POSITION = 0.05  # cm-1
WIDTH_FRACTION = 0.02  # relative uncertainty of a width


def exact_data(seed=3):
    """(positions dict, widths dict, true values) from the exact solvers, with seeded noise."""
    bound = wkbfit.levels(TRUE, MU, J=0, method="exact")
    pos = {"v": list(bound.v[:4]), "J": [0] * 4, "energy": list(bound.energy[:4])}
    wid = {"v": [], "J": [], "width": []}
    for J in (30, 35, 40, 45):
        t = wkbfit.levels(TRUE, MU, J=J, method="exact", quasibound=True)
        for i in np.nonzero(np.asarray(t.quasibound, bool))[0]:
            if not 1e-8 < t.width[i] < 1.0:  # measurable widths: above 1e-8 cm-1 (0.3 kHz), narrower than 1 cm-1
                continue
            pos["v"].append(int(t.v[i]))
            pos["J"].append(J)
            pos["energy"].append(float(t.energy[i]))
            wid["v"].append(int(t.v[i]))
            wid["J"].append(J)
            wid["width"].append(float(t.width[i]))
    rng = np.random.default_rng(seed)
    n = len(pos["v"])
    pos["uncertainty"] = [SIGMA_POSITION] * n
    pos["energy"] = list(np.array(pos["energy"]) + rng.normal(0, SIGMA_POSITION, n))
    w = np.array(wid["width"])
    wid["uncertainty"] = list(WIDTH_FRACTION * w)
    wid["width"] = list(w * (1 + WIDTH_FRACTION * rng.normal(size=len(w))))
    return pos, wid


@pytest.fixture(scope="module")
def data():
    pos, wid = exact_data()
    return read_levels(pos, energy_zero="minimum"), read_widths(wid), pos, wid


@pytest.fixture(scope="module")
def with_widths(data):
    lev, wid = data[:2]
    with warnings.catch_warnings():
        warnings.simplefilter("error", FitWarning)  # nothing to warn about: exact poles, a converged fit
        return fit(START, [lev, wid], mu=MU, vary=VARY, scale_uncertainties=False)


def test_positions_and_widths_from_exact_poles_fit_back_within_three_sigma(data, with_widths):
    r = with_widths
    assert r.status == "converged", r.message
    assert len(data[1]) == 4 and len(data[0]) == 8
    pulls = {n: (r.params[n].value - TRUE.params[n]) / r.params[n].uncertainty for n in VARY}
    print("pulls (fitted - true)/sigma:", {n: round(p, 3) for n, p in pulls.items()},
          "sqrt(chi2/dof) %.3f" % r.sqrt_reduced_chi_square)
    for n, p in pulls.items():
        assert abs(p) < 3.0, (n, p)
    # the widths' rows are in the result in their own kind, with the exact poles' (tiny) method errors
    widths_block = [b for b in r.blocks if b.kind == "widths"][0]
    rows = slice(widths_block.start, widths_block.start + len(data[1]))
    assert np.all(np.abs(r.normalized_residuals[rows]) < 4)
    assert np.all(r.method_error_ratio[rows] < 1e-3)
    assert not r.method_error_flagged
    q = r.quasibound_levels
    assert sorted(zip(q["J"], q["v"])) == sorted(zip(data[3]["J"], data[3]["v"]))
    assert all(x > 0 for x in q["above_asymptote"])
    text = r.report()
    for title in ("Quasibound levels", "widths", "semicl. width"):
        assert title in text


def test_noise_free_exact_data_are_fitted_to_the_true_parameters():
    # without noise the minimum is the true potential: the fit must land there to a tiny fraction of a
    # standard deviation (1e-4), which no error of the central-difference Jacobian may move (it changes the
    # path, not the minimum, since the residuals are exact)
    pos, wid = exact_data()
    pos = dict(pos, energy=[float(wkbfit.levels(TRUE, MU, v=v, J=J, method="exact", quasibound=J > 0).energy[0])
                            for v, J in zip(pos["v"], pos["J"])])
    wid = dict(wid, width=[float(wkbfit.levels(TRUE, MU, v=v, J=J, method="exact", quasibound=True).width[0])
                           for v, J in zip(wid["v"], wid["J"])])
    r = fit(START, [read_levels(pos, energy_zero="minimum"), read_widths(wid)], mu=MU, vary=VARY,
            scale_uncertainties=False)
    assert r.status == "converged"
    for n in VARY:
        assert abs(r.params[n].value - TRUE.params[n]) < 1e-4 * r.params[n].uncertainty, n
    assert r.chi_square < 1e-8


def test_without_the_widths_the_uncertainties_are_larger(data, with_widths):
    lev = data[0]
    r0 = fit(START, [lev], mu=MU, vary=VARY, scale_uncertainties=False)
    ratio = {n: r0.params[n].uncertainty / with_widths.params[n].uncertainty for n in VARY}
    print("sigma without widths / sigma with widths:", {n: round(x, 3) for n, x in ratio.items()})
    # more data never widen the (unscaled) covariance; here the widths, which see the barrier and the
    # C6 tail, shrink the uncertainty of every parameter, most of De and of the exponents
    for n in VARY:
        assert ratio[n] > 1.0, (n, ratio[n])
    assert ratio["De"] > 2.0 and ratio["m"] > 2.0, ratio


def test_widths_in_mhz_and_positions_in_ghz_fit_like_cm1(data, with_widths):
    # factor against scipy.constants: 1 MHz = 1e6 / (100 c) cm-1, c in m/s
    assert CM1_PER_UNIT["MHz"] == pytest.approx(1e6 / (100 * scipy.constants.c), rel=1e-15)
    assert CM1_PER_UNIT["GHz"] == pytest.approx(1e9 / (100 * scipy.constants.c), rel=1e-15)
    pos, wid = data[2], data[3]
    mhz = 1e6 / (100 * scipy.constants.c)
    ghz = 1e9 / (100 * scipy.constants.c)
    pos_g = dict(pos, energy=[x / ghz for x in pos["energy"]], uncertainty=[x / ghz for x in pos["uncertainty"]])
    wid_m = dict(wid, width=[x / mhz for x in wid["width"]], uncertainty=[x / mhz for x in wid["uncertainty"]])
    lev = read_levels(pos_g, energy_zero="minimum", unit="GHz")
    w = read_widths(wid_m, unit="MHz")
    # the same data in cm-1, as a laboratory converts its GHz/MHz numbers (x times the exact factor): the
    # same fit to 1e-12 (the tolerance); semiclassical levels keep this check fast
    pos_c = dict(pos_g, energy=[x * ghz for x in pos_g["energy"]], uncertainty=[x * ghz for x in pos_g["uncertainty"]])
    wid_c = dict(wid_m, width=[x * mhz for x in wid_m["width"]], uncertainty=[x * mhz for x in wid_m["uncertainty"]])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", FitWarning)  # their method errors are flagged (see below)
        a = fit(START, [lev, w], mu=MU, vary=VARY, scale_uncertainties=False, method="wkb")
        b = fit(START, [read_levels(pos_c, energy_zero="minimum"), read_widths(wid_c)], mu=MU, vary=VARY,
                scale_uncertainties=False, method="wkb")
    for n in VARY:
        assert a.params[n].value == pytest.approx(b.params[n].value, rel=1e-12), n
        assert a.params[n].uncertainty == pytest.approx(b.params[n].uncertainty, rel=1e-12), n
    # against the cm-1 numbers the data were made in (they differ from the converted ones by rounding):
    # root searches stop at ~1e-12 of |E| (the poles' secant, csrc/resonance.c), so the fits agree to
    # ~1e-11 relative (measured 1.1e-12 on n with exact poles), their covariances (central differences of
    # the poles) to ~1e-9 (measured 1.7e-9)
    r = fit(START, [lev, w], mu=MU, vary=VARY, scale_uncertainties=False)
    for n in VARY:
        assert r.params[n].value == pytest.approx(with_widths.params[n].value, rel=1e-10), n
        assert r.params[n].uncertainty == pytest.approx(with_widths.params[n].uncertainty, rel=1e-6), n
    # the JSON keeps each data set in its own unit: the widths' residuals in MHz
    d = r.to_dict()
    ws = [s for s in d["data_sets"] if s["kind"] == "widths"][0]
    assert ws["unit"] == "MHz"
    start = ws["start"]
    np.testing.assert_allclose(ws["residuals"], np.asarray(r.residuals[start:start + len(w)]) / mhz, rtol=1e-12)
    np.testing.assert_allclose(ws["columns"]["width"], wid_m["width"], rtol=1e-14)
    back = wkbfit.FitResult.load_json(r.to_json())
    assert back.report() == r.report()
    assert "[MHz]" in r.report()


def test_semiclassical_widths_are_flagged_against_two_percent_uncertainties(data):
    # theta = 5-9 here. The barrier-penetration widths differ from the exact poles by ~2 %, as large as the
    # widths' uncertainty: a fit with method="wkb" must say that such rows are not computed accurately enough.
    # The semiclassical rule takes the barrier-matched pole for theta < 8 (tests/test_quasibound.py; widths
    # within 1e-5 of the exact ones): only the row at theta = 8.8 keeps the formula and is flagged
    lev, wid = data[:2]
    with pytest.warns(FitWarning, match="method='exact'"):
        r = fit(TRUE, [lev, wid], mu=MU, vary=["De", "re"], method="wkb")
    block = [b for b in r.blocks if b.kind == "widths"][0]
    rows = np.arange(block.start, block.start + len(wid))
    q = r.quasibound_levels
    theta = {(v, J): th for v, J, th in zip(q["v"], q["J"], q["theta"])}
    formula = np.array([theta[(int(v), int(J))] >= 8 for v, J in zip(wid.v, wid.J)])
    assert 0 < np.sum(formula) < len(wid)
    assert np.all(r.method_error_ratio[rows][formula] > 0.1)
    assert np.all(r.method_error_ratio[rows][~formula] < 1e-3)
    rel = np.abs(np.array(q["semiclassical_width"]) / np.array(q["width"]) - 1)
    assert np.all(rel < 1e-12)  # "wkb": the fitted widths are the semiclassical ones


def test_width_jacobian_against_finite_differences_of_the_public_levels(with_widths):
    # d width / d De and d width / d re from the fit against central differences of
    # levels(..., method="exact", quasibound=True) with a smaller step (1e-5 relative; the fit uses 3e-5):
    # the same derivative to 1e-4 relative (truncation errors (h d ln Gamma/dp)^2/6 < 1e-5 for both steps)
    r = with_widths
    block = [b for b in r.blocks if b.kind == "widths"][0]
    w = block.data
    names = list(r.potential.param_names)
    for name in ("De", "re"):
        k = names.index(name)
        p = r.potential.params[name]
        h = 1e-5 * abs(p)
        vals = []
        for step in (h, -h):
            pot = r.potential.with_params(**{name: p + step})
            vals.append(np.array([wkbfit.levels(pot, MU, v=int(w.v[i]), J=int(w.J[i]), method="exact",
                                                quasibound=True).width[0] for i in range(len(w))]))
        fd = (vals[0] - vals[1]) / (2 * h)
        got = r.jacobian[block.start:block.start + len(w), k]
        np.testing.assert_allclose(got, fd, rtol=1e-4, err_msg=name)


def test_a_width_of_a_bound_level_or_a_negative_width_is_refused(data):
    lev = data[0]
    # v=0, J=30 is bound by the starting potential
    bad = read_widths({"v": [0], "J": [30], "width": [1e-4], "uncertainty": [1e-5]})
    with pytest.raises(ValueError, match=r"row 1: a width is given for v=0, J=30, which is not a quasibound "
                                         r"level: the starting potential .* binds it"):
        fit(START, [lev, bad], mu=MU)
    # J=0 has no barrier
    bad0 = read_widths({"v": [3], "J": [0], "width": [1e-4], "uncertainty": [1e-5]})
    with pytest.raises(ValueError, match="J=0 has no centrifugal barrier"):
        fit(START, [lev, bad0], mu=MU)
    # the data themselves call the level bound (a positive binding energy)
    be = read_levels({"v": [2], "J": [40], "energy": [10.0], "uncertainty": [0.05]}, energy_zero="asymptote",
                     check=False)
    w = read_widths({"v": [2], "J": [40], "width": [1e-4], "uncertainty": [1e-5]})
    with pytest.raises(ValueError, match="positive binding energy"):
        fit(START, [lev, be, w], mu=MU, vary=["De", "re"])
    # negative and zero widths: refused on reading, and by the fit for a hand-made object
    with pytest.raises(ValueError, match=r"column 'width': -0.0001 is invalid: a width \(FWHM\) is > 0"):
        read_widths({"v": [3], "J": [40], "width": [-1e-4], "uncertainty": [1e-5]})
    neg = ObservedWidths([3], [40], [-1e-4], [1e-5])
    with pytest.raises(ValueError, match=r"row 1: width -0.0001 is invalid: a width \(FWHM\) is > 0"):
        fit(START, [lev, neg], mu=MU)
    # an omega or Born-Oppenheimer fit does not take quasibound data (yet): said, not mis-fitted
    ok = read_widths({"v": [3], "J": [40], "width": [1e-5], "uncertainty": [1e-6]})
    with pytest.raises(ValueError, match="Omega = 0 only"):
        fit(START, [lev, ok], mu=MU, omega=1)


def _resonances(Js=(30, 35, 40)):
    """(J, v, energy, width, exact levels of J - 1) of each quasibound level of TRUE (exact poles) whose width
    is resolvable (1e-8 to 1 cm-1)."""
    for J in Js:
        t = wkbfit.levels(TRUE, MU, J=J, method="exact", quasibound=True)
        low = wkbfit.levels(TRUE, MU, J=J - 1, method="exact")
        for i in np.nonzero(np.asarray(t.quasibound, bool))[0]:
            if 1e-8 < t.width[i] < 1.0:
                yield J, int(t.v[i]), float(t.energy[i]), float(t.width[i]), low


def _add_lines(lines, J, v, energy, low, rng):
    """Lines from the quasibound level (v, J) down to the two lowest levels of J - 1, with noise."""
    for k in range(min(2, len(low))):
        lines["v_upper"].append(v)
        lines["J_upper"].append(J)
        lines["v_lower"].append(int(low.v[k]))
        lines["J_lower"].append(J - 1)
        lines["wavenumber"].append(energy - float(low.energy[k]) + rng.normal(0, SIGMA_POSITION))


def test_lines_from_quasibound_levels_with_their_widths():
    # line positions from the quasibound levels down to bound levels J-1 (exact levels and poles of the true
    # curve, noise 0.05 cm-1), with the widths: the same machinery (a line is E[upper] - E[lower], the upper
    # level a pole); De and re recovered within 3 sigma
    rng = np.random.default_rng(8)
    lines = {"v_upper": [], "J_upper": [], "v_lower": [], "J_lower": [], "wavenumber": []}
    wid = {"v": [], "J": [], "width": []}
    for J, v, energy, width, low in _resonances():
        _add_lines(lines, J, v, energy, low, rng)
        wid["v"].append(v)
        wid["J"].append(J)
        wid["width"].append(width * (1 + WIDTH_FRACTION * rng.normal()))
    lines["uncertainty"] = [SIGMA_POSITION] * len(lines["v_upper"])
    wid["uncertainty"] = [WIDTH_FRACTION * x for x in wid["width"]]
    start = START.with_params(n=12.0, m=6.0)  # the exponents fixed at their true values
    r = fit(start, [wkbfit.read_lines(lines), read_widths(wid)], mu=MU, vary=["De", "re"])
    assert r.status == "converged", r.message
    for n in ("De", "re"):
        p = r.params[n]
        assert abs(p.value - TRUE.params[n]) < 3 * p.uncertainty, (n, p.value, p.uncertainty)
    assert sorted(r.quasibound_levels["J"]) == [30, 35, 40]
    assert "line positions" in r.report() and "widths" in r.report()


def _lines_and_lowest_terms(seed=8):
    """Exact-solver data of the module's scenario without widths: 'lowest' term values (J = 0, v = 0-3 and the
    quasibound levels at J = 30, 35, 40) and lines from each quasibound level to the two lowest levels of J - 1."""
    rng = np.random.default_rng(seed)
    s = SIGMA_POSITION
    lines = {"v_upper": [], "J_upper": [], "v_lower": [], "J_lower": [], "wavenumber": []}
    bound = wkbfit.levels(TRUE, MU, J=0, method="exact")
    e00 = bound.energy[0]
    terms = {"v": list(range(4)), "J": [0] * 4,
             "energy": [bound.energy[v] - e00 + (rng.normal(0, s) if v else 0.0) for v in range(4)]}
    for J, v, energy, _, low in _resonances():
        terms["v"].append(v)
        terms["J"].append(J)
        terms["energy"].append(energy - e00 + rng.normal(0, s))
        _add_lines(lines, J, v, energy, low, rng)
    lines["uncertainty"] = [s] * len(lines["v_upper"])
    terms["uncertainty"] = [s] * len(terms["v"])
    return wkbfit.read_lines(lines), read_levels(terms, energy_zero="lowest")


@pytest.mark.parametrize("which", ["lines", "lowest"])
def test_lines_and_lowest_term_values_without_widths_reach_the_quasibound_fit(which):
    # Without widths, lines to quasibound levels and term values measured from the lowest level used to be
    # refused with advice that could not help ('start from a deeper well' / 'give it so'); they are fitted by
    # their positions, recover the truth within 3 sigma (common practice), and the report names the rows.
    lines, terms = _lines_and_lowest_terms()
    data = lines if which == "lines" else terms
    start = START.with_params(n=12.0, m=6.0)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", FitWarning)
        r = fit(start, [data], mu=MU, vary=["De", "re"])
    assert r.status == "converged"
    assert r.quasibound_levels["J"] and set(r.quasibound_levels["J"]) <= {30, 35, 40}
    assert all(len(rows) >= 1 for rows in r.quasibound_levels["rows"])  # each level names the data rows using it
    for name in ("De", "re"):
        p = r.params[name]
        assert abs(p.value - TRUE.params[name]) < 3 * p.uncertainty, name
    report = r.report()
    assert "quasibound" in report and "positions only" in report
    back = wkbfit.FitResult.load_json(r.to_json())
    assert back.report() == report
