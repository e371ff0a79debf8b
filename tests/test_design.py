"""The fit's design (wkbfit.design.build_design): every data row as a combination of distinct levels.

The check is the design's definition (its module docstring), row by row: term values above the minimum
are E[level]; 'lowest' term values E[level] - E[v=0, J=Omega of the isotopologue], the zero row itself
not fitted; binding energies A - E[level] with a stated, fitted or model asymptote. Levels are numbered
in the order the rows first name them (the level itself, then its reference), which the core's
evaluation order (and so its seeding from neighbouring J) follows.
"""
import numpy as np
import pytest

import wkbfit
from wkbfit.design import build_design

ROWS = {"v": [0, 1, 0, 2, 1, 0, 0], "J": [0, 3, 5, 3, 0, 0, 2], "isotopologue": ["a", "a", "b", "a", "b", "b", "a"],
        "energy": [0.0, 10.0, 20.0, 30.0, 40.0, 0.0, 60.0], "uncertainty": [0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7]}


def first_order_keys(keys):
    out = []
    for k in keys:
        if k not in out:
            out.append(k)
    return out


@pytest.mark.parametrize("zero, extra", [("minimum", {}), ("lowest", {}), ("asymptote", {"asymptote": 500.0}),
                                         ("asymptote", {}), ("asymptote", {"fit_asymptote": True,
                                                                           "asymptote": 500.0})])
def test_rows_follow_the_definition(zero, extra):
    rows = dict(ROWS)
    if zero != "lowest":  # (term values above the minimum and binding energies are positive)
        rows["energy"] = [100.0 + e for e in rows["energy"]]
    obs = wkbfit.read_levels(rows, energy_zero=zero, **extra)
    d = build_design([obs])
    v, rot, mu, cols = d.arrays({"a": 7.0, "b": 8.0}, 0)
    keys = [(i, vv, j) for i, vv, j in zip(ROWS["isotopologue"], ROWS["v"], ROWS["J"])]
    expected_keys = []
    block = d.blocks[0]
    for i, key in enumerate(keys):
        r = block.rows[i]
        if zero == "lowest" and key == (key[0], 0, 0):
            assert r == -1
            continue
        assert d.row_origin[r] == (0, i)
        assert d.level_keys[cols["level_a"][r]] == key
        assert cols["observed"][r] == obs.energy[i] and cols["sigma"][r] == obs.uncertainty[i]
        expected_keys.append(key)
        if zero == "minimum":
            assert (cols["coef_a"][r], cols["level_b"][r], cols["coef_asymptote"][r]) == (1.0, -1, 0.0)
        elif zero == "lowest":
            ref = (key[0], 0, 0)
            expected_keys.append(ref)
            assert d.level_keys[cols["level_b"][r]] == ref
            assert (cols["coef_a"][r], cols["coef_b"][r]) == (1.0, -1.0)
        else:
            assert cols["coef_a"][r] == -1.0 and cols["level_b"][r] == -1
            if extra.get("fit_asymptote"):
                assert d.extra_names[cols["extra_index"][r]].startswith("asymptote") and cols["coef_extra"][r] == 1.0
            elif "asymptote" in extra:
                assert cols["offset"][r] == 500.0 and cols["coef_asymptote"][r] == 0.0
            else:
                assert cols["coef_asymptote"][r] == 1.0 and cols["offset"][r] == 0.0
    assert d.level_keys == first_order_keys(expected_keys)
    assert d.n_rows == len(keys) - (2 if zero == "lowest" else 0)
    np.testing.assert_array_equal(v, [k[1] for k in d.level_keys])
    np.testing.assert_array_equal(rot, [k[2] * (k[2] + 1) for k in d.level_keys])
