"""The subcommands rkr, compare, curve and predict, --order, --output-dir and the poor-fit exit status."""
import math
import os

import numpy as np
import pytest

import wkbfit
from wkbfit import cli, cli_tools

MU = 0.979592539  # u, 1H35Cl (AME2020)
# Morse constants: G(v) = we (v+1/2) - wexe (v+1/2)^2 and B(v) = Be - alpha_e (v+1/2) [Morse, Phys. Rev. 34, 57 (1929)]
MORSE = wkbfit.Morse(De=42341.9, re=1.27455, a=1.75194)
WE = MORSE.a * math.sqrt(4 * MORSE.De * wkbfit.HBAR2_OVER_2U / MU)
WEXE = WE * WE / (4 * MORSE.De)
BE = wkbfit.HBAR2_OVER_2U / (MU * MORSE.re ** 2)


def run(capsys, *argv):
    status = cli.main([str(a) for a in argv])
    captured = capsys.readouterr()
    return status, captured.out, captured.err


def test_help_lists_the_new_subcommands(capsys):
    status, out, _ = run(capsys, "--help")
    for command in ("rkr", "compare", "curve", "predict"):
        assert command in out
        status, text, _ = run(capsys, command, "--help")
        assert status == 0 and text.startswith("usage: wkbfit %s" % command)


def test_rkr_writes_turning_points_and_a_curve_that_curve_reads(capsys, tmp_path):
    status, out, err = run(capsys, "rkr", "--G", "%r,%r" % (WE, -WEXE), "--B", repr(BE), "--mu", MU, "-v", "0-4",
                           "--asymptote", MORSE.De, "--tail-power", 6, "--output-dir", tmp_path / "out")
    assert status == 0, err
    tp_file = tmp_path / "out" / "rkr-turning-points.csv"
    data = np.genfromtxt(tp_file, delimiter=",", names=True, skip_header=2)
    # f = (r2 - r1)/2 depends on G(v) alone: for a Morse G(v) it is the Morse curve's (Morse 1929; 1e-9 A)
    E = WE * (data["v"] + 0.5) - WEXE * (data["v"] + 0.5) ** 2
    r1 = MORSE.re - np.log(1 + np.sqrt(E / MORSE.De)) / MORSE.a
    r2 = MORSE.re - np.log(1 - np.sqrt(E / MORSE.De)) / MORSE.a
    assert np.allclose(data["f"], (r2 - r1) / 2, rtol=0, atol=1e-9)
    assert np.allclose(data["G"], E, rtol=1e-12)
    # and the file holds what the library computes (tested against Morse in test_rkr.py), to its 12 decimals
    tp = wkbfit.rkr_turning_points([WE, -WEXE], [BE], MU, v=range(5))
    assert np.allclose(data["r_inner"], tp.inner_turning_point, atol=1e-11)
    assert np.allclose(data["r_outer"], tp.outer_turning_point, atol=1e-11)
    assert "[cm-1]" in out and "[A]" in out
    curve = tmp_path / "out" / "rkr-curve.csv"
    status, out, err = run(capsys, "curve", curve, "--mu", MU, "-v", "0-3", "--asymptote", MORSE.De,
                           "--tail-power", 6, "--order", 1)
    assert status == 0, err
    rows = [line.split() for line in out.splitlines() if line.split() and line.split()[0].isdigit()]
    energies = np.array([float(r[2]) for r in rows])
    # WKB levels of the RKR curve reproduce the G(v) it came from (RKR inverts first-order WKB; spline of
    # 8 points per v; observed 2e-5 cm-1, tolerance 1e-3 cm-1; the table prints 6 decimals)
    assert np.allclose(energies, WE * (np.arange(4) + 0.5) - WEXE * (np.arange(4) + 0.5) ** 2, atol=1e-3)


def test_compare_orders_and_uncertainty(capsys):
    lj = ["lennard-jones", "De=4000", "re=4.0"]
    status, out, err = run(capsys, "compare", *lj, "--mu", 20, "-v", "0-5", "--uncertainty", 0.01)
    assert status == 0, err
    assert "order 1" in out and "order 2" in out and "within 0.01" in out
    comp = wkbfit.compare_wkb_exact(wkbfit.LennardJones(4000, 4.0), 20.0, v=range(6), order=2)
    assert "%.3e" % comp.difference[5] in out
    status, out, _ = run(capsys, "compare", *lj, "--mu", 20, "-v", "0", "--order", "1")
    assert "order 2" not in out


def test_levels_order_two(capsys):
    status, out, _ = run(capsys, "levels", "lennard-jones", "De=4000", "re=4.0", "--mu", 20, "-v", "3",
                         "--order", 2)
    assert status == 0
    E = wkbfit.levels(wkbfit.LennardJones(4000, 4.0), 20.0, v=3, order=2).energy[0]
    assert "%.6f" % E in out


def test_curve_file_errors(capsys, tmp_path):
    bad = tmp_path / "bad.txt"
    bad.write_text("r V\n1.0 2.0\n1.1 x\n")
    status, _, err = run(capsys, "curve", bad, "--mu", 1)
    assert status == 2 and "line 3" in err and "Traceback" not in err


def test_predict_from_saved_fit_and_poor_fit_status(capsys, tmp_path):
    lj = wkbfit.LennardJones(De=4000.0, re=4.0, n=12, m=6)
    t = wkbfit.levels(lj, 20.0, v=list(range(10)))
    rng = np.random.default_rng(5)
    path = tmp_path / "levels.csv"
    path.write_text("v,energy,uncertainty\n" + "".join(
        "%d,%.6f,0.01\n" % (v, e) for v, e in zip(t.v, t.energy + rng.normal(0, 0.01, len(t)))))
    status, out, err = run(capsys, "fit", path, "lennard-jones", "De=3950", "re=4.01", "--mu", 20,
                           "--output-dir", tmp_path / "res")
    assert status == 0, err
    saved = tmp_path / "res" / "levels-fit.json"
    status, out, err = run(capsys, "predict", saved, "--near", 3)
    assert status == 0, err
    pred = wkbfit.FitResult.load_json(saved).predict()
    assert "%.6f" % pred.energy[-1] in out and "(levels v < %d not shown)" % (pred.n_bound - 3) in out
    # the same data with uncertainties understated tenfold: converges, sqrt(chi2/dof) ~ 10 > 3 -> exit 3
    path.write_text(path.read_text().replace(",0.01\n", ",0.001\n"))
    status, out, err = run(capsys, "fit", path, "lennard-jones", "De=3950", "re=4.01", "--mu", 20,
                           "-o", tmp_path / "poor.json")
    assert status == cli_tools.EXIT_POOR_FIT
    assert "above the limit 3" in err and "sqrt of reduced chi-square" in err
    status, _, _ = run(capsys, "fit", path, "lennard-jones", "De=3950", "re=4.01", "--mu", 20,
                       "-o", tmp_path / "poor.json", "--force", "--sigma-limit", 100)
    assert status == 0


def test_curve_inner_wall_option_and_compare_on_a_curve_file(capsys, tmp_path):
    r = np.linspace(1.6, 6.0, 45)
    V = 5000 * (2 / r) ** 9 - 3000 * (2 / r) ** 6
    path = tmp_path / "curve.txt"
    path.write_text("# r [A]  V [cm-1]\nr V\n" + "".join("%.10f %.10f\n" % rv for rv in zip(r, V)))
    for wall in ("exponential", "inverse_power"):
        status, out, err = run(capsys, "curve", path, "--mu", 5, "-v", "0-2", "--asymptote", 0, "--tail-power", 6,
                               "--inner-wall", wall)
        assert status == 0, err
        curve = wkbfit.PointwisePotential(r, V, asymptote=0.0, tail_power=6, inner_wall=wall)
        E = wkbfit.levels(curve, 5.0, v=[0, 1, 2]).energy
        assert all("%.6f" % e in out for e in E)
    status, _, err = run(capsys, "curve", path, "--mu", 5, "--inner-wall", "hard")
    assert status == 2 and "--inner-wall" in err
    status, out, err = run(capsys, "compare", "--curve", path, "--mu", 5, "-v", "0-2", "--asymptote", 0,
                           "--tail-power", 6, "--order", 1)
    assert status == 0, err
    comp = wkbfit.compare_wkb_exact(wkbfit.PointwisePotential(r, V, asymptote=0.0, tail_power=6), 5.0, v=[0, 1, 2])
    assert "%.8f" % comp.exact_energy[2] in out


# -- --order/--ends of fit, demo and predict; --quasibound of levels and curve ---------------------------------
def _table_rows(text):
    """{v: [fields]} of the numeric rows of a printed table (first field an integer v)."""
    return {int(f[0]): f for f in (line.split() for line in text.splitlines()) if f and f[0].isdigit()}


@pytest.fixture(scope="module")
def lj_data(tmp_path_factory):
    """Exact levels v=0-9 of a Lennard-Jones (12, 6) well with seeded 0.01 cm-1 noise (mu = 20 u)."""
    lj = wkbfit.LennardJones(De=4000.0, re=4.0, n=12, m=6)
    t = wkbfit.levels(lj, 20.0, v=list(range(10)), method="exact")
    rng = np.random.default_rng(11)
    path = tmp_path_factory.mktemp("lj") / "levels.csv"
    path.write_text("v,energy,uncertainty\n" + "".join(
        "%d,%.6f,0.01\n" % (v, e) for v, e in zip(t.v, t.energy + rng.normal(0, 0.01, len(t)))))
    return path


def test_fit_order_one_is_the_first_order_wkb_fit(capsys, tmp_path, lj_data):
    args = ["fit", lj_data, "lennard-jones", "De=3950", "re=4.01", "--mu", 20]
    status, out1, err = run(capsys, *args, "--order", 1, "-o", tmp_path / "o1.json", "--near", 4)
    assert status == 0, err
    status, outw, err = run(capsys, *args, "--method", "wkb", "-o", tmp_path / "w.json", "--near", 4)
    assert status == 0, err
    r1, rw = (wkbfit.FitResult.load_json(tmp_path / n) for n in ("o1.json", "w.json"))
    assert r1.method == "wkb" and r1.values == rw.values
    # the predictions printed are the fitted potential's first-order levels (the textbook rule)
    first = wkbfit.levels(r1.potential, 20.0, order=1)
    rows = _table_rows(out1.split("Predicted levels near dissociation")[1])
    assert len(rows) == 4 and all(float(rows[v][1]) == pytest.approx(first.energy[v], abs=1e-6) for v in rows)


def test_fit_order_two_prints_second_order_levels_of_the_fit(capsys, tmp_path, lj_data):
    args = ["fit", lj_data, "lennard-jones", "De=3950", "re=4.01", "--mu", 20, "--near", 5]
    status, out, err = run(capsys, *args, "--order", 2, "-o", tmp_path / "m.json")
    assert status == 0, err
    result = wkbfit.FitResult.load_json(tmp_path / "m.json")
    assert result.method == "corrected"  # the fit keeps its method; --order 2 is the rule of the predictions
    rows = _table_rows(out.split("Predicted levels near dissociation")[1].split("fit result written")[0])
    matched = wkbfit.levels(result.potential, 20.0, order=2, ends="matched")
    exact = wkbfit.levels(result.potential, 20.0, method="exact")
    assert len(rows) == 5 and max(rows) == len(exact) - 1
    for v, fields in rows.items():
        assert float(fields[1]) == pytest.approx(matched.energy[v], abs=1e-6)
        # second order with matched ends against the exact solver, right up to dissociation (the target of the
        # matched rule, 1e-4 cm-1; the table prints 6 decimals)
        assert abs(float(fields[1]) - exact.energy[v]) < 1e-4
    assert "wkb-matched rule" in out
    status, out, err = run(capsys, *args, "--order", 2, "--ends", "maslov", "-o", tmp_path / "f.json",
                           "--predict", 21.0)
    assert status == 0, err
    fixed = wkbfit.levels(result.potential, 21.0, order=2, ends="maslov")
    rows = _table_rows(out.split("reduced mass 21 u")[1])
    assert all(float(rows[v][1]) == pytest.approx(fixed.energy[v], abs=2e-6) for v in rows)


@pytest.mark.parametrize("extra, words", [
    (["--order", 1, "--method", "exact"], "contradicts --method exact"),
    (["--order", 2, "--method", "wkb"], "first-order WKB levels only"),
    (["--ends", "maslov"], "needs --order 2"),
    (["--order", 1, "--ends", "matched"], "--order 2 only"),
])
def test_fit_and_demo_order_contradictions_are_named(capsys, tmp_path, lj_data, extra, words):
    status, _, err = run(capsys, "fit", lj_data, "lennard-jones", "De=3950", "re=4.01", "--mu", 20,
                         "-o", tmp_path / "x.json", *extra)
    assert status == cli.EXIT_USAGE and words in err and not (tmp_path / "x.json").exists()
    status, _, err = run(capsys, "demo", *extra)
    assert status == cli.EXIT_USAGE and words in err


def test_demo_order_two(capsys):
    status, out, err = run(capsys, "demo", "--order", 2, "--near", 3)
    assert status == 0, err
    assert "predicted levels by the second-order rule, matched end phases" in out
    assert out.count("levels from the wkb-matched rule of the fitted potential") == 2  # both isotopologues


def test_predict_order_and_ends(capsys, tmp_path, lj_data):
    status, _, err = run(capsys, "fit", lj_data, "lennard-jones", "De=3950", "re=4.01", "--mu", 20,
                         "-o", tmp_path / "fit.json")
    assert status == 0, err
    result = wkbfit.FitResult.load_json(tmp_path / "fit.json")
    for extra, kw in (([], {}), (["--order", 1], {"order": 1}), (["--order", 2, "--ends", "maslov"],
                                                                  {"order": 2, "ends": "maslov"})):
        status, out, err = run(capsys, "predict", tmp_path / "fit.json", "--near", 3, *extra)
        assert status == 0, err
        pred = result.predict(**kw)
        rows = _table_rows(out)
        assert sorted(rows) == list(range(pred.n_bound - 3, pred.n_bound))
        assert all(float(rows[v][1]) == pytest.approx(pred.energy[v], abs=1e-6) for v in rows)
    status, _, err = run(capsys, "predict", tmp_path / "fit.json", "--order", 1, "--ends", "matched")
    assert status == cli.EXIT_USAGE and "--order 2 only" in err


def _barrier_top(pot, mu, J):
    """Top of V + J(J+1) hbar^2/(2 mu r^2) outside the well, from a dense grid (independent of the core)."""
    r = np.linspace(pot.params["re"] * 1.2, pot.params["re"] * 8, 200001)
    VJ = pot(r) + J * (J + 1) * wkbfit.HBAR2_OVER_2U / (mu * r * r)
    return float(VJ.max())


def test_levels_quasibound_lists_widths_and_theta(capsys):
    lj = wkbfit.LennardJones(De=1000.0, re=4.0, n=12, m=6)
    status, out, err = run(capsys, "levels", "lennard-jones", "De=1000", "re=4", "--mu", 20, "-J", 30,
                           "--quasibound")
    assert status == 0, err
    header = out.splitlines()[1].split()
    assert {"width", "theta", "quasibound"} <= set(header) and "[cm-1]" in out.splitlines()[2]
    rows = _table_rows(out)
    table = wkbfit.levels(lj, 20.0, J=30, quasibound=True)
    assert sorted(rows) == table.v.tolist()
    top = _barrier_top(lj, 20.0, 30)
    quasi = [v for v, f in rows.items() if f[-1] == "yes"]
    assert quasi == table.v[table.quasibound].tolist() and len(quasi) == 2
    for v in quasi:
        E = float(rows[v][2])
        # a quasibound level lies between the asymptote and the barrier top (definition of a shape resonance)
        assert lj.asymptote < E < top
        assert float(rows[v][header.index("width")]) == pytest.approx(table.width[v], rel=1e-3)
        assert float(rows[v][header.index("theta")]) == pytest.approx(table.theta[v], rel=1e-3)
    assert all(float(f[2]) < lj.asymptote for v, f in rows.items() if v not in quasi)
    # the exact solver's resonances (complex-energy poles) on the same command line
    status, out, err = run(capsys, "levels", "lennard-jones", "De=1000", "re=4", "--mu", 20, "-J", 30,
                           "--quasibound", "--method", "exact")
    assert status == 0, err
    exact = wkbfit.levels(lj, 20.0, J=30, quasibound=True, method="exact")
    assert [v for v, f in _table_rows(out).items() if f[-1] == "yes"] == exact.v[exact.quasibound].tolist()


def test_compare_quasibound_lists_positions_and_widths(capsys):
    # compare --quasibound: a second table, the quasibound levels semiclassical against the exact poles
    # (those are checked against an independent SciPy phase-shift computation in test_quasibound.py)
    lj = wkbfit.LennardJones(De=1000.0, re=4.0, n=12, m=6)
    status, out, err = run(capsys, "compare", "lennard-jones", "De=1000", "re=4", "--mu", 20, "-J", 30, "--order",
                           2, "--quasibound")
    assert status == 0, err
    part = out.split("Quasibound levels")[1]
    header = part.splitlines()[1].split()
    assert header == ["v", "J", "theta", "E_wkb", "E_exact", "wkb-exact", "exact_error", "width_wkb",
                      "width_exact", "width_ratio"]
    rows = _table_rows(part)
    sc = wkbfit.levels(lj, 20.0, J=30, quasibound=True)
    ex = wkbfit.levels(lj, 20.0, J=30, quasibound=True, method="exact")
    assert sorted(rows) == sc.v[sc.quasibound].tolist() == ex.v[ex.quasibound].tolist() == [25, 26]
    top = _barrier_top(lj, 20.0, 30)
    for v, f in rows.items():
        i, k = sc.level(v, 30), ex.level(v, 30)
        assert float(f[3]) == pytest.approx(sc.energy[i], abs=1e-6)
        assert float(f[4]) == pytest.approx(ex.energy[k], abs=1e-6)
        assert float(f[5]) == pytest.approx(sc.energy[i] - ex.energy[k], rel=1e-2, abs=1e-9)
        assert lj.asymptote < float(f[4]) < top
        # the semiclassical targets (theta >= 1): 5e-3 cm-1 in position, 6 % in width
        assert float(f[2]) >= 1 and abs(float(f[5])) < 5e-3
        if f[-1] != "-":
            assert float(f[-1]) == pytest.approx(sc.width[i] / ex.width[k], rel=1e-3)
            assert abs(float(f[-1]) - 1) < 0.06
    # v = 25 (theta = 31) is too narrow for the exact width: no ratio, and a note says why
    assert rows[25][-1] == "-" and "too narrow" in part and rows[26][-1] != "-"
    # no barrier at J = 0: the table says there is nothing to compare
    status, out, err = run(capsys, "compare", "lennard-jones", "De=1000", "re=4", "--mu", 20, "-J", 0,
                           "--order", 2, "--quasibound")
    assert status == 0, err
    assert "no level is quasibound in both calculations at J = 0" in out


def test_curve_quasibound(capsys, tmp_path):
    lj = wkbfit.LennardJones(De=1000.0, re=4.0, n=12, m=6)
    r = np.linspace(3.3, 30.0, 800)
    path = tmp_path / "lj.txt"
    path.write_text("r V\n" + "".join("%.10f %.10f\n" % (x, y) for x, y in zip(r, lj(r))))
    status, out, err = run(capsys, "curve", path, "--mu", 20, "-J", 30, "--quasibound", "--asymptote", 1000,
                           "--tail-power", 6)
    assert status == 0, err
    rows = _table_rows(out)
    quasi = [v for v, f in rows.items() if f[-1] == "yes"]
    model = wkbfit.levels(lj, 20.0, J=30, quasibound=True)
    # the curve at 800 points is the model to spline accuracy: the same quasibound levels, positions to 1e-3 cm-1
    assert quasi == model.v[model.quasibound].tolist()
    assert all(abs(float(rows[v][2]) - model.energy[v]) < 1e-3 for v in quasi)
