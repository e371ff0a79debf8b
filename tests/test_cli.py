"""The wkbfit command line (wkbfit.cli.main, `python -m wkbfit`) and the shipped demo data."""
import csv
import io
import json
import math
import os
import subprocess
import sys

import numpy as np
import pytest

import wkbfit
from wkbfit import cli, demo

PKG_DIR = os.path.dirname(os.path.dirname(os.path.abspath(wkbfit.__file__)))


def run(capsys, *argv):
    """(exit status, stdout, stderr) of main(argv)."""
    status = cli.main(list(argv))
    captured = capsys.readouterr()
    return status, captured.out, captured.err


def assert_user_error(capsys, argv, *fragments):
    status, out, err = run(capsys, *argv)
    assert status == 2
    assert err.startswith("wkbfit: error: ")
    assert err.count("\n") == 1, "the message must be one line: %r" % err
    assert "Traceback" not in err + out
    for fragment in fragments:
        assert fragment in err, (fragment, err)
    return err


def morse_term_values(De, a, mu, v):
    """Morse (1929) levels: G(v) = we (v+1/2) - wexe (v+1/2)^2, we = 2 a sqrt(De B), wexe = a^2 B,
    with B = hbar^2/(2 mu) in cm-1 A^2 [P. M. Morse, Phys. Rev. 34, 57 (1929)]."""
    B = wkbfit.HBAR2_OVER_2U / mu
    x = np.asarray(v) + 0.5
    return 2 * a * math.sqrt(De * B) * x - a * a * B * x * x


# -- help ------------------------------------------------------------------------------------
def test_help(capsys):
    status, out, _ = run(capsys, "--help")
    assert status == 0
    for command in ("levels", "check", "fit", "demo"):
        assert command in out
    for command in ("levels", "check", "fit", "demo"):
        status, out, _ = run(capsys, command, "--help")
        assert status == 0
        assert out.startswith("usage: wkbfit %s" % command)
    status, out, _ = run(capsys, "levels", "--help")
    flat = " ".join(out.split())  # argparse wraps the help text
    assert "morse (De, re, a)" in flat and "lennard-jones (De, re, n=12, m=6)" in flat
    status, out, _ = run(capsys, "demo", "--help")
    assert "INVENTED" in out


def test_no_command_prints_help(capsys):
    status, out, _ = run(capsys)
    assert status == 2
    assert "usage: wkbfit" in out


def test_python_dash_m_and_console_entry():
    env = dict(os.environ, PYTHONPATH=PKG_DIR)
    done = subprocess.run([sys.executable, "-m", "wkbfit", "levels", "morse", "De=1000", "re=1", "a=2", "--mu",
                           "1.2", "-v", "9"], capture_output=True, text=True, env=env, timeout=60)
    assert done.returncode == 2
    assert done.stderr.strip() == ("wkbfit: error: v=9 is above the last bound level (v=3) of this potential: it binds "
                                   "4 levels (vD = 3.718542)")
    done = subprocess.run([sys.executable, "-m", "wkbfit", "--help"], capture_output=True, text=True, env=env,
                          timeout=60)
    assert done.returncode == 0 and "usage: wkbfit" in done.stdout


# -- levels ----------------------------------------------------------------------------------
def test_levels_table_matches_morse_formula(capsys):
    De, re, a, mu = 1000.0, 1.0, 2.0, 1.2
    status, out, err = run(capsys, "levels", "morse", "De=1000", "re=1", "a=2", "--mu", "1.2")
    assert status == 0 and err == ""
    rows = [line.split() for line in out.splitlines() if line.split() and line.split()[0].isdigit()]
    v = np.array([int(r[0]) for r in rows])
    energy = np.array([float(r[2]) for r in rows])
    # every bound level of this Morse well: v = 0..3 (vD = sqrt(De/B)/a - 1/2 = 3.72, B = hbar^2/(2 mu))
    np.testing.assert_array_equal(v, [0, 1, 2, 3])
    # table printed to 1e-6 cm-1; first-order WKB is exact for Morse (Morse 1929)
    np.testing.assert_allclose(energy, morse_term_values(De, a, mu, v), atol=1.5e-6, rtol=0)
    assert "vD = 3.718" in out


def test_levels_csv_isotopologue_and_J(capsys):
    status, out, _ = run(capsys, "levels", "morse", "De=37000", "re=1.27", "a=1.87", "-i", "1H35Cl",
                         "-v", "0-2,5", "-J", "0,3", "--csv")
    assert status == 0
    rows = list(csv.DictReader(io.StringIO(out)))
    assert [(int(r["v"]), int(r["J"])) for r in rows] == [(0, 0), (1, 0), (2, 0), (5, 0),
                                                          (0, 3), (1, 3), (2, 3), (5, 3)]
    mu = wkbfit.reduced_mass("1H", "35Cl")
    j0 = np.array([float(r["energy"]) for r in rows[:4]])
    np.testing.assert_allclose(j0, morse_term_values(37000.0, 1.87, mu, [0, 1, 2, 5]), rtol=1e-10)
    # the same numbers as the Python API
    table = wkbfit.levels(wkbfit.Morse(De=37000, re=1.27, a=1.87), mu, v=[0, 1, 2, 5], J=3)
    np.testing.assert_allclose([float(r["energy"]) for r in rows[4:]], table.energy, rtol=1e-15)


@pytest.mark.parametrize("argv, fragments", [
    (["levels", "morse", "De=1000", "re=1", "--mu", "1"], ["Morse needs a"]),
    (["levels", "morse", "De=1000", "re=1", "a=2", "b=3", "--mu", "1"], ["Morse has no parameter 'b'"]),
    (["levels", "morse", "De=1000", "re=1", "a=two", "--mu", "1"], ["a='two' is not a number"]),
    (["levels", "morse", "De=1000", "re=1", "a=nan", "--mu", "1"], ["a='nan' is not a finite number"]),
    (["levels", "morse", "De", "re=1", "a=2", "--mu", "1"], ["parameter 'De' must be written NAME=VALUE"]),
    (["levels", "morse", "De=-1000", "re=1", "a=2", "--mu", "1"], ["De=-1000 is invalid"]),
    (["levels", "harmonic", "De=1000", "--mu", "1"], ["unknown potential model 'harmonic'", "morse"]),
    (["levels", "morse", "De=1000", "re=1", "a=2"], ["give the reduced mass"]),
    (["levels", "morse", "De=1000", "re=1", "a=2", "--mu", "1", "-i", "1H35Cl"], ["either --mu or --isotopologue"]),
    (["levels", "morse", "De=1000", "re=1", "a=2", "--mu", "-1"], ["mu=-1.0 is invalid"]),
    (["levels", "morse", "De=1000", "re=1", "a=2", "-i", "1H999Cl"], ["unknown isotope '999Cl'"]),
    (["levels", "morse", "De=1000", "re=1", "a=2", "--mu", "1.2", "-v", "7"], ["v=7 is above the last bound level"]),
    (["levels", "morse", "De=1000", "re=1", "a=2", "--mu", "1.2", "-J", "x"], ["-J='x'"]),
    (["levels", "morse", "De=1000", "re=1", "a=2", "--mu", "1.2", "--method", "best"], ["invalid choice: 'best'"]),
    (["levels"], ["levels: the following arguments are required"]),
    (["frobnicate"], ["invalid choice: 'frobnicate'"]),
])
def test_levels_user_errors(capsys, argv, fragments):
    assert_user_error(capsys, argv, *fragments)


# -- check -----------------------------------------------------------------------------------
def write_levels(path, rows, header="isotopologue,v,J,energy,uncertainty", comments=()):
    path.write_text("\n".join(list(comments) + [header] + [",".join(str(x) for x in r) for r in rows]) + "\n")
    return str(path)


def test_check(capsys, tmp_path):
    path = write_levels(tmp_path / "lv.csv", [("1H35Cl", 0, 0, 1000.0, 0.01), ("1H35Cl", 1, 0, 3000.0, 0.02),
                                              ("2H35Cl", 0, 0, 700.0, 0.05)], comments=["# made for a test"])
    status, out, _ = run(capsys, "check", path)
    assert status == 0
    assert "# made for a test" in out
    # a table: names, units, one row per isotopologue
    assert "sigma min  sigma max  reduced mass" in out and "[cm-1]     [cm-1]           [u]" in out
    assert "1H35Cl       2  0..1  0       0.01       0.02  %.10g" % wkbfit.reduced_mass("1H", "35Cl") in out
    status, out, _ = run(capsys, "check", path, "--mass", "2H35Cl=1.5")
    assert out.splitlines()[-1].split() == ["2H35Cl", "1", "0..0", "0", "0.05", "0.05", "1.5"]
    bad = write_levels(tmp_path / "bad.csv", [("1H35Cl", 0, 0, 1000.0, 0.01), ("1H35Cl", 1, 0, 3000.0, 0)])
    assert_user_error(capsys, ["check", bad], "bad.csv, row 2 (line 3), column 'uncertainty'")
    assert_user_error(capsys, ["check", str(tmp_path / "missing.csv")], "cannot open levels file")
    unknown = write_levels(tmp_path / "unknown.csv", [("1H999Cl", 0, 0, 1000.0, 0.01)])
    assert_user_error(capsys, ["check", unknown], "row 1, column 'isotopologue': no masses for '1H999Cl'")
    status, out, _ = run(capsys, "check", unknown, "--mass", "1H999Cl=0.99")
    assert status == 0


# -- the demo data ---------------------------------------------------------------------------
def test_shipped_demo_data_is_what_the_generator_makes():
    """The shipped CSV is reproducible from wkbfit.demo.make_demo_data (energies written to 1e-4 cm-1)."""
    shipped = wkbfit.read_levels(demo.demo_data_path())
    made = wkbfit.read_levels(demo.make_demo_data(demo.DEMO_SEED))
    assert list(shipped.isotopologue) == list(made.isotopologue)
    np.testing.assert_array_equal(shipped.v, made.v)
    np.testing.assert_array_equal(shipped.J, made.J)
    np.testing.assert_allclose(shipped.uncertainty, made.uncertainty, rtol=0, atol=1e-12)
    # rounding to 4 decimals on writing; the level solver's own error is < 1e-8 cm-1
    np.testing.assert_allclose(shipped.energy, made.energy, rtol=0, atol=1.0001e-4)


def test_demo_data_is_labelled_invented_and_realistic():
    obs = demo.load_demo_levels()
    assert any("INVENTED" in line and "NOT MEASUREMENTS" in line for line in obs.comments)
    assert len(obs.isotopologues) >= 2
    true = demo.demo_true_potential()
    for label in obs.isotopologues:
        rows = obs.rows_of(label)
        near = demo.DEMO_ISOTOPOLOGUES[label]["near_threshold"]
        band = [i for i in rows if obs.v[i] not in near or obs.J[i] != 0]
        assert 20 <= len(rows) <= 50
        assert np.any(obs.J[rows] > 0)
        mu = obs.masses_by_isotopologue()[label]
        # the measured band stops well below dissociation (below 0.6 vD); only the few precisely
        # measured levels near threshold lie above it
        assert obs.v[band].max() < 0.6 * wkbfit.levels(true, mu).vD
        precise = [i for i in rows if obs.J[i] == 0 and obs.v[i] in near]
        assert len(precise) == len(near)
        assert np.all(obs.uncertainty[precise] == demo.DEMO_NEAR_THRESHOLD_SIGMA)
    assert obs.uncertainty.min() >= 0.002 and obs.uncertainty.max() <= 0.05
    # the noise is what the header says: normalised deviations from the EXACT levels of the generating
    # potential have unit spread (chi-square test at the 99.9 % level, quantiles of scipy.stats)
    from scipy import stats
    calc = np.empty(len(obs))
    masses = obs.resolve_masses()
    for i in range(len(obs)):
        calc[i] = wkbfit.levels(true, masses[i], v=int(obs.v[i]), J=int(obs.J[i]), method="exact").energy[0]
    chi2 = float(np.sum(((obs.energy - calc) / obs.uncertainty) ** 2))
    lo, hi = stats.chi2.ppf([0.0005, 0.9995], len(obs))
    assert lo < chi2 < hi


# -- fit -------------------------------------------------------------------------------------
MORSE_TRUE = {"De": 37000.0, "re": 1.27, "a": 1.87}  # test potential, loosely HCl-like numbers (not a reference)


def noisy_morse_file(tmp_path, sigma=0.01, seed=7):
    """Levels of MORSE_TRUE (first-order WKB is exact for Morse) for 1H35Cl and 2H35Cl, J = 0 and 3,
    with seeded Gaussian noise of the stated sigma."""
    rng = np.random.default_rng(seed)
    pot = wkbfit.Morse(**MORSE_TRUE)
    rows = []
    for label in ("1H35Cl", "2H35Cl"):
        for J in (0, 3):
            table = wkbfit.levels(pot, label, v=list(range(8)), J=J, order=1, ends="maslov")
            rows += [(label, v, J, "%.6f" % (e + rng.normal(0.0, sigma)), sigma)
                     for v, e in zip(table.v.tolist(), table.energy.tolist())]
    return write_levels(tmp_path / "hcl.csv", rows, comments=["# test data made by tests/test_cli.py"])


def test_fit_prints_report_and_writes_json(capsys, tmp_path, monkeypatch):
    path = noisy_morse_file(tmp_path)
    out_json = tmp_path / "result.json"
    status, out, err = run(capsys, "fit", path, "morse", "De=35000", "re=1.3", "a=1.8", "-o", str(out_json),
                           "--predict", "2H35Cl", "--near", "4")
    assert status == 0, err
    assert "Status: converged" in out and "Residuals" in out
    assert "Predicted levels near dissociation, isotopologue 2H35Cl" in out
    assert "fit result written to %s" % out_json in out
    loaded = wkbfit.FitResult.load_json(out_json)
    # the command line gives what the Python API gives
    api = wkbfit.fit(wkbfit.Morse(De=35000, re=1.3, a=1.8), wkbfit.read_levels(path))
    for name in ("De", "re", "a"):
        assert loaded.params[name].value == pytest.approx(api.params[name].value, rel=1e-12)
        assert loaded.params[name].uncertainty == pytest.approx(api.params[name].uncertainty, rel=1e-9)
    # and the generating parameters lie within 4 sigma, with sigma from the stated (here exactly known)
    # noise, unscaled (one seeded draw; the recovery statistics over many replicas are in the fitting tests)
    unscaled = wkbfit.fit(wkbfit.Morse(De=35000, re=1.3, a=1.8), path, scale_uncertainties=False)
    for name in ("De", "re", "a"):
        p = unscaled.params[name]
        assert abs(p.value - MORSE_TRUE[name]) < 4 * p.uncertainty, (name, p.value, p.uncertainty)
    with open(out_json) as handle:
        assert json.load(handle)["status"] == "converged"  # plain JSON, readable without wkbfit
    # without -o: the data file's name with -fit.json, in the current directory
    monkeypatch.chdir(tmp_path)
    status, out, _ = run(capsys, "fit", path, "morse", "De=35000", "re=1.3", "a=1.8")
    assert status == 0 and (tmp_path / "hcl-fit.json").exists()


def test_fit_options_fix_mass_and_scaling(capsys, tmp_path):
    path = noisy_morse_file(tmp_path)
    status, out, err = run(capsys, "fit", path, "morse", "De=35000", "re=1.27", "a=1.8", "--fix", "re",
                           "--mass", "2H35Cl=%r" % wkbfit.reduced_mass("2H", "35Cl"), "--no-scale-uncertainties",
                           "-o", str(tmp_path / "r.json"))
    assert status == 0, err
    loaded = wkbfit.FitResult.load_json(tmp_path / "r.json")
    assert loaded.params["re"].vary is False and loaded.params["re"].value == 1.27
    assert loaded.params["De"].vary is True
    assert loaded.scale_uncertainties is False


@pytest.mark.parametrize("extra, fragments", [
    (["--fix", "b"], ["Morse has no parameter 'b'"]),
    (["--fix", "a", "--vary", "a"], ["parameter a is both fixed and varied"]),
    (["--mu", "1.0"], ["a single reduced mass mu=1.0 was given but the data hold 2 isotopologues"]),
    (["--mass", "1H35Cl"], ["--mass '1H35Cl' must be written LABEL=MU"]),
    (["--mass", "1H37Cl=0.98"], ["mu gives a reduced mass for '1H37Cl', which is not an isotopologue"]),
    (["--energy-zero", "lowest"], ["column 'energy'", "energy_zero='lowest'"]),
])
def test_fit_user_errors(capsys, tmp_path, extra, fragments):
    path = noisy_morse_file(tmp_path)
    assert_user_error(capsys, ["fit", path, "morse", "De=35000", "re=1.3", "a=1.8"] + extra, *fragments)


def test_fit_bad_file_and_too_few_levels(capsys, tmp_path):
    bad = write_levels(tmp_path / "bad.csv", [("1H35Cl", 0, 0, "1477.1", 0.01), ("1H35Cl", 0, 0, "1477.2", 0.01)])
    assert_user_error(capsys, ["fit", bad, "morse", "De=35000", "re=1.3", "a=1.8"],
                      "bad.csv, row 2 (line 3), columns isotopologue/v/J: level 1H35Cl v=0, J=0 appears twice")
    two = write_levels(tmp_path / "two.csv", [("1H35Cl", 0, 0, "1477.1", 0.01), ("1H35Cl", 1, 0, "4341.1", 0.01)])
    err = assert_user_error(capsys, ["fit", two, "morse", "De=35000", "re=1.3", "a=1.8"])
    assert "2" in err and "3" in err  # names the two levels and three varied parameters


# -- the main job: `wkbfit demo` -------------------------------------------------------------
def test_demo_runs_the_fit(capsys, tmp_path):
    status, out, err = run(capsys, "demo", "--near", "5", "-o", str(tmp_path / "demo.json"))
    assert status == 0, err
    assert out.count("INVENTED DEMO DATA") >= 3  # banner, file header, closing line
    assert "Status: converged" in out
    for label in ("7Li133Cs", "6Li133Cs"):
        assert "Predicted levels near dissociation, isotopologue %s (INVENTED state)" % label in out
    result = wkbfit.FitResult.load_json(tmp_path / "demo.json")
    # the generating potential is known in this invented scenario: the fit recovers it within
    # 3 standard deviations (seeded data, so this is one draw, not a statistic)
    for name in demo.DEMO_VARY:
        p = result.params[name]
        assert abs(p.value - demo.DEMO_TRUE_VALUES[name]) < 3 * p.uncertainty, (name, p.value, p.uncertainty)
    assert 0.7 < result.standard_error < 1.3  # noise as stated: chi2/dof near 1 (69 dof)
    assert result.params["C6"].vary is False
    # the default (corrected) method, the method-error check and the near-dissociation table are shown
    assert result.method == "corrected" and not result.method_error_flagged
    assert "Method error against the data" in out and "Near-dissociation fits" in out and "v_th" in out


def test_fit_unlabelled_data_with_mu_and_predictions(capsys, tmp_path):
    mu = 0.98
    table = wkbfit.levels(wkbfit.Morse(**MORSE_TRUE), mu, v=list(range(10)), order=1, ends="maslov")
    rng = np.random.default_rng(3)
    rows = [(v, "%.6f" % (e + rng.normal(0.0, 0.02)), 0.02) for v, e in zip(table.v.tolist(), table.energy.tolist())]
    path = write_levels(tmp_path / "one.csv", rows, header="v,energy,uncertainty")
    argv = ["fit", path, "morse", "De=36000", "re=1.27", "a=1.9", "--fix", "re", "--near", "3", "-o",
            str(tmp_path / "one.json")]
    assert_user_error(capsys, argv, "row 1: the data have no isotopologue column")  # no mass: a clear error
    status, out, err = run(capsys, *(argv + ["--mu", str(mu), "--predict", "1.5", "--predict", "1H35Cl"]))
    assert status == 0, err
    assert "Predicted levels near dissociation, the fitted reduced mass" in out
    assert "Predicted levels near dissociation, reduced mass 1.5 u" in out
    assert "Predicted levels near dissociation, isotopologue 1H35Cl" in out
    # the prediction for the fitted mass lists the last 3 bound levels; Morse has vD = we/(2 wexe) - 1/2
    # = sqrt(De/B)/a - 1/2 with B = hbar^2/(2 mu) (Morse 1929), so the last bound level is floor(vD)
    loaded = wkbfit.FitResult.load_json(tmp_path / "one.json")
    De, a = loaded.params["De"].value, loaded.params["a"].value
    vD = math.sqrt(De * mu / wkbfit.HBAR2_OVER_2U) / a - 0.5
    section = out.split("the fitted reduced mass")[1].split("Predicted levels near")[0]
    shown = [int(line.split()[0]) for line in section.splitlines() if line.split() and line.split()[0].isdigit()]
    assert shown == [int(vD) - 2, int(vD) - 1, int(vD)]
