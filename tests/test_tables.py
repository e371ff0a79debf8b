"""Result objects in Jupyter and pandas: to_dataframe holds the object's own numbers, HTML shows units and
folds long tables, repr is one short line, text tables have a units line and aligned columns."""
import numpy as np
import pytest

pd = pytest.importorskip("pandas", reason="to_dataframe needs pandas (pip install pandas)")

import wkbfit  # noqa: E402

MU = 0.979592539  # u, 1H35Cl (AME2020)
LJ = wkbfit.LennardJones(De=4000.0, re=4.0, n=12, m=6)


@pytest.fixture(scope="module")
def objects():
    table = wkbfit.levels(LJ, 20.0)
    comp = wkbfit.compare_wkb_exact(LJ, 20.0)
    tp = wkbfit.rkr_turning_points([2990.9, -52.8], [10.59, -0.307], MU, v=np.arange(0, 12))
    rng = np.random.default_rng(3)
    data = {"v": table.v[:15], "energy": table.energy[:15] + rng.normal(0, 0.01, 15),
            "uncertainty": np.full(15, 0.01)}
    obs = wkbfit.read_levels(data)
    result = wkbfit.fit(wkbfit.LennardJones(De=3950.0, re=4.01, n=12, m=6), obs, mu=20.0, vary=["De", "re"])
    # line positions v'=1 -> v''=0..19 (term-value differences of the table, J = 0) and widths of two levels
    lines = wkbfit.read_lines({"v_upper": [20] * 20, "J_upper": [0] * 20, "v_lower": list(range(20)),
                               "J_lower": [0] * 20, "wavenumber": table.energy[20] - table.energy[:20],
                               "uncertainty": [0.002] * 20, "upper_state": ["A"] * 20}, check=False)
    widths = wkbfit.read_widths({"v": [25, 26], "J": [30, 30], "width": [1e-6, 3e-3], "uncertainty": [1e-7, 1e-4]},
                                check=False)
    last = np.arange(len(table) - 8, len(table))
    near = wkbfit.near_dissociation_fit(table.v[last], table.energy[last], np.full(8, 1e-4), 6, mu=20.0)
    return {"levels": table, "comparison": comp, "rkr": tp, "observed": obs, "fit": result,
            "prediction": result.predict(), "lines": lines, "widths": widths, "near_dissociation": near}


COLUMNS = {  # object -> (dataframe column, attribute) pairs that must agree exactly
    "levels": [(c, c) for c in wkbfit.LevelTable(dict(v=[]), mu=1, method="wkb", potential=LJ).columns],
    "comparison": [(c, c) for c in ("v", "J", "wkb_energy", "exact_energy", "difference", "exact_error",
                                    "binding_energy")],
    "rkr": [(c, c) for c in wkbfit.RKRTurningPoints.columns],
    "observed": [(c, c) for c in ("v", "J", "energy", "uncertainty")],
    "prediction": [(c, c) for c in ("v", "energy", "energy_uncertainty", "binding_energy", "binding_uncertainty")],
    "lines": [(c, c) for c in ("v_upper", "J_upper", "v_lower", "J_lower", "wavenumber", "uncertainty")],
    "widths": [(c, c) for c in ("v", "J", "width", "uncertainty")],
}


@pytest.mark.parametrize("name", sorted(COLUMNS))
def test_to_dataframe_round_trips(objects, name):
    obj = objects[name]
    df = obj.to_dataframe()
    assert len(df) == len(obj)
    for col, attr in COLUMNS[name]:
        np.testing.assert_array_equal(df[col].to_numpy(), np.asarray(getattr(obj, attr)))


def test_near_dissociation_dataframe_holds_each_law(objects):
    near = objects["near_dissociation"]
    df = near.to_dataframe()
    laws = [f for f in (near.lb, near.expansion, near.threshold) if f is not None]
    assert df["law"].tolist() == [f.law for f in laws]
    for k, f in enumerate(laws):
        assert df["levels"][k] == len(f.rows)
        for name in ("D", "vD"):
            assert (df[name][k], df[name + "_uncertainty"][k]) == f.params[name]
        assert df["sqrt_reduced_chi_square"][k] == f.standard_error
    assert "sqrt of reduced chi-square" in near._repr_html_()


def test_fit_residual_and_parameter_dataframes(objects):
    result = objects["fit"]
    df = result.to_dataframe()
    np.testing.assert_array_equal(df["observed"].to_numpy(), result.observed.energy)
    np.testing.assert_array_equal(df["calculated"].to_numpy(), result.calculated)
    np.testing.assert_array_equal(df["residual"].to_numpy(), result.residuals)
    np.testing.assert_array_equal(df["normalized_residual"].to_numpy(), result.normalized_residuals)
    np.testing.assert_array_equal(df["uncertainty"].to_numpy(), result.observed.uncertainty)
    p = result.parameters_dataframe()
    assert p.loc["De", "value"] == result.params["De"].value
    assert p.loc["De", "uncertainty"] == result.params["De"].uncertainty and p.loc["De", "unit"] == "cm-1"


@pytest.mark.parametrize("name", ["levels", "comparison", "rkr", "observed", "prediction", "fit", "lines", "widths",
                                  "near_dissociation"])
def test_html_has_units_and_folds_long_tables(objects, name):
    obj = objects[name]
    text = obj._repr_html_()
    assert "[cm-1]" in text
    if name == "rkr":
        assert "[A]" in text
    if name != "near_dissociation" and len(getattr(obj, "observed", obj)) > 14:  # folded: head and tail shown, the rest collapsed into <details>
        assert "rows folded" in text and "<details>" in text


@pytest.mark.parametrize("name", ["levels", "comparison", "rkr", "observed", "prediction", "fit", "lines", "widths",
                                  "near_dissociation"])
def test_repr_is_one_short_line(objects, name):
    text = repr(objects[name])
    assert "\n" not in text and len(text) < 400


@pytest.mark.parametrize("name", ["levels", "comparison", "rkr", "prediction"])
def test_text_tables_have_units_line_and_aligned_columns(objects, name):
    lines = str(objects[name]).splitlines()
    k = next(i for i, line in enumerate(lines) if "[cm-1]" in line)
    units = lines[k]
    body = lines[k + 1:k + 1 + len(objects[name]) - (1 if name == "prediction" else 0)]
    assert "-" in units.split() or name == "comparison"
    # every row as long as the header, and each field ends in the same column as its unit
    ends = [m.end() for m in __import__("re").finditer(r"\S+", units)]
    for row in body:
        row_ends = [m.end() for m in __import__("re").finditer(r"\S+", row)]
        assert row_ends == ends, (units, row)


def test_levels_and_exact_import_each_other_in_one_direction_only():
    """exact.py builds on levels.py (LevelTable); levels.py reaches the exact solver through its SOLVERS
    table, never by importing exact.py (not even inside a function)."""
    import ast
    import os
    here = os.path.join(os.path.dirname(os.path.dirname(os.path.abspath(__file__))), "pkg", "wkbfit")

    def imported(name):
        tree = ast.parse(open(os.path.join(here, name + ".py"), encoding="utf-8").read())
        out = set()
        for node in ast.walk(tree):
            if isinstance(node, ast.ImportFrom) and node.level == 1:
                out.add(node.module or "")
                out.update(a.name for a in node.names if not node.module)
        return out

    assert "exact" not in imported("levels") and "levels" in imported("exact")
    assert wkbfit.levels(LJ, 20.0, v=[0], method="exact").method == "exact"  # the dispatch still works


def test_near_dissociation_table_has_units_line_and_aligned_columns(objects):
    import re
    near = objects["near_dissociation"]
    lines = near.table().splitlines()
    k = next(i for i, line in enumerate(lines) if "[cm-1]" in line)
    assert "sqrt of reduced chi-square" in lines[k - 1]
    units = re.sub(r"\[[^\]]*\]", lambda m: m.group(0).replace(" ", "_"), lines[k])  # '[cm-1 A^6]': one field
    ends = [m.end() for m in re.finditer(r"\S+", units)]
    laws = [f for f in (near.lb, near.expansion, near.threshold) if f is not None]
    for row in lines[k + 1:k + 1 + len(laws)]:
        assert [m.end() for m in re.finditer(r"\S+", row)] == ends, (lines[k], row)
