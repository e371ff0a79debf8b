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
    return {"levels": table, "comparison": comp, "rkr": tp, "observed": obs, "fit": result,
            "prediction": result.predict()}


COLUMNS = {  # object -> (dataframe column, attribute) pairs that must agree exactly
    "levels": [(c, c) for c in wkbfit.LevelTable(dict(v=[]), mu=1, method="wkb", potential=LJ).columns],
    "comparison": [(c, c) for c in ("v", "J", "wkb_energy", "exact_energy", "difference", "exact_error",
                                    "binding_energy")],
    "rkr": [(c, c) for c in wkbfit.RKRTurningPoints.columns],
    "observed": [(c, c) for c in ("v", "J", "energy", "uncertainty")],
    "prediction": [(c, c) for c in ("v", "energy", "energy_uncertainty", "binding_energy", "binding_uncertainty")],
}


@pytest.mark.parametrize("name", sorted(COLUMNS))
def test_to_dataframe_round_trips(objects, name):
    obj = objects[name]
    df = obj.to_dataframe()
    assert len(df) == len(obj)
    for col, attr in COLUMNS[name]:
        np.testing.assert_array_equal(df[col].to_numpy(), np.asarray(getattr(obj, attr)))


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


@pytest.mark.parametrize("name", ["levels", "comparison", "rkr", "observed", "prediction", "fit"])
def test_html_has_units_and_folds_long_tables(objects, name):
    obj = objects[name]
    text = obj._repr_html_()
    assert "[cm-1]" in text
    if name == "rkr":
        assert "[A]" in text
    if len(getattr(obj, "observed", obj)) > 14:  # folded: head and tail shown, the rest collapsed into <details>
        assert "rows folded" in text and "<details>" in text


@pytest.mark.parametrize("name", ["levels", "comparison", "rkr", "observed", "prediction", "fit"])
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
