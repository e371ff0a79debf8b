"""Reading and validating measured levels (wkbfit.read_levels, ObservedLevels).

The numbers below are arbitrary test inputs for the reader, not check values of any physics;
the only physical check (reduced masses) compares with the isotope masses of the `periodictable`
package (its own source: the IUPAC/AME atomic mass tables), independently of wkbfit's table.
"""
import math
import re

import numpy as np
import pandas as pd
import periodictable
import pytest

import wkbfit
from wkbfit import ObservedLevels, read_levels

ROWS = [
    # isotopologue, v, J, energy, uncertainty
    ("7Li133Cs", 0, 0, 92.125, 0.005),
    ("7Li133Cs", 1, 0, 274.5, 0.01),
    ("7Li133Cs", 1, 4, 276.75, 0.02),
    ("6Li133Cs", 0, 0, 99.0, 0.05),
    ("6Li133Cs", 2, 0, 480.25, 0.01),
]
COLUMNS = ("isotopologue", "v", "J", "energy", "uncertainty")


def as_dict(rows=ROWS):
    return {c: [r[k] for r in rows] for k, c in enumerate(COLUMNS)}


def write_csv(path, rows=ROWS, header=",".join(COLUMNS), comments=("# provenance: test rows",)):
    lines = list(comments) + [header] + [",".join(str(x) for x in r) for r in rows]
    path.write_text("\n".join(lines) + "\n")
    return path


def check_same(a, b):
    assert len(a) == len(b)
    for name in ("v", "J", "energy", "uncertainty"):
        np.testing.assert_array_equal(getattr(a, name), getattr(b, name))
    assert list(a.isotopologue) == list(b.isotopologue)
    assert a.energy_zero == b.energy_zero


# -- the three inputs agree -------------------------------------------------------------
def test_csv_dataframe_dict_agree(tmp_path):
    from_dict = read_levels(as_dict())
    from_df = read_levels(pd.DataFrame(as_dict()))
    from_csv = read_levels(write_csv(tmp_path / "levels.csv"))
    from_str = read_levels(str(tmp_path / "levels.csv"))
    for other in (from_df, from_csv, from_str):
        check_same(from_dict, other)
    assert from_dict.v.dtype.kind == "i" and from_dict.J.dtype.kind == "i"
    assert from_dict.isotopologues == ["7Li133Cs", "6Li133Cs"]
    assert from_csv.comments == ("provenance: test rows",)
    assert len(from_csv) == 5


def test_csv_comments_blank_lines_and_column_order(tmp_path):
    path = tmp_path / "levels.csv"
    path.write_text("# a provenance header\n#   second line\n\n"
                    "energy, uncertainty ,v\n  100.5, 0.01, 0\n\n# a comment between rows\n300.25,0.02,1\n")
    obs = read_levels(path)
    assert obs.comments == ("a provenance header", "second line", "a comment between rows")
    np.testing.assert_array_equal(obs.energy, [100.5, 300.25])
    np.testing.assert_array_equal(obs.v, [0, 1])


def test_optional_columns_default():
    obs = read_levels({"v": [0, 1], "energy": [10.0, 30.0], "uncertainty": [0.1, 0.1]})
    np.testing.assert_array_equal(obs.J, [0, 0])
    assert list(obs.isotopologue) == [None, None]
    assert obs.isotopologues == [None]
    assert obs.energy_zero == "minimum"
    assert "isotopologue" not in obs.to_dict()


def test_integer_valued_floats_and_numeric_strings_accepted():
    obs = read_levels({"v": [0.0, "1"], "J": [np.int64(2), 3.0], "energy": ["10.5", 30], "uncertainty": [0.1, "0.2"]})
    np.testing.assert_array_equal(obs.v, [0, 1])
    np.testing.assert_array_equal(obs.J, [2, 3])
    np.testing.assert_array_equal(obs.energy, [10.5, 30.0])


def test_to_dataframe_round_trip():
    obs = read_levels(as_dict())
    check_same(obs, read_levels(obs.to_dataframe()))
    check_same(obs, read_levels(obs.to_dict()))


def test_select_one_isotopologue():
    obs = read_levels(as_dict())
    sub = obs.select("6Li133Cs")
    np.testing.assert_array_equal(sub.v, [0, 2])
    with pytest.raises(ValueError, match="no levels of isotopologue '1H35Cl'"):
        obs.select("1H35Cl")


# -- the user's data are never modified --------------------------------------------------
def test_user_dataframe_and_arrays_unchanged():
    df = pd.DataFrame(as_dict())
    df_before = df.copy(deep=True)
    arrays = {c: np.array(v) for c, v in as_dict().items()}
    arrays_before = {c: a.copy() for c, a in arrays.items()}
    obs_df = read_levels(df)
    obs_arr = read_levels(arrays)
    pd.testing.assert_frame_equal(df, df_before)
    for c in arrays:
        np.testing.assert_array_equal(arrays[c], arrays_before[c])
    # the result holds copies: changing the user's data afterwards does not change it...
    df.loc[0, "energy"] = -1.0
    arrays["energy"][0] = -1.0
    assert obs_df.energy[0] == 92.125 and obs_arr.energy[0] == 92.125
    # ... and its own arrays are read-only
    with pytest.raises(ValueError):
        obs_arr.energy[0] = 0.0
    with pytest.raises(ValueError):
        obs_arr.v[0] = 3


def test_bad_data_leaves_user_data_unchanged():
    df = pd.DataFrame(as_dict())
    df.loc[2, "uncertainty"] = -0.5
    before = df.copy(deep=True)
    with pytest.raises(ValueError):
        read_levels(df)
    pd.testing.assert_frame_equal(df, before)


# -- bad data: each message names the row and the column ----------------------------------
def with_cell(row, column, value):
    d = as_dict()
    d[column] = list(d[column])
    d[column][row] = value
    return d


@pytest.mark.parametrize("column, value, message", [
    ("energy", "abc", r"row 3, column 'energy': 'abc' is not a number"),
    ("energy", float("nan"), r"row 3, column 'energy': nan is not a finite number"),
    ("energy", float("inf"), r"row 3, column 'energy': inf is not a finite number"),
    ("energy", None, r"row 3, column 'energy': the value is missing"),
    ("energy", "", r"row 3, column 'energy': the value is missing"),
    ("energy", True, r"row 3, column 'energy': True is not a number"),
    ("uncertainty", 0.0, r"row 3, column 'uncertainty': 0.0 is invalid: the uncertainty must be > 0"),
    ("uncertainty", -0.01, r"row 3, column 'uncertainty': -0.01 is invalid: the uncertainty must be > 0"),
    ("uncertainty", float("nan"), r"row 3, column 'uncertainty': nan is not a finite number"),
    ("v", -1, r"row 3, column 'v': -1 is negative"),
    ("v", 1.5, r"row 3, column 'v': 1.5 is not an integer"),
    ("v", "x", r"row 3, column 'v': 'x' is not a number"),
    ("v", float("nan"), r"row 3, column 'v': nan is not a finite number"),
    ("J", -2, r"row 3, column 'J': -2 is negative"),
    ("J", 0.5, r"row 3, column 'J': 0.5 is not an integer"),
    ("isotopologue", None, r"row 3, column 'isotopologue': the label is missing"),
    ("isotopologue", float("nan"), r"row 3, column 'isotopologue': the label is missing"),
    ("isotopologue", "  ", r"row 3, column 'isotopologue': the label is empty"),
    ("isotopologue", 7, r"row 3, column 'isotopologue': 7 is not a label"),
])
def test_bad_value_names_row_and_column(column, value, message):
    with pytest.raises(ValueError, match=message):
        read_levels(with_cell(2, column, value))
    # the same from a DataFrame (which stores a missing number as NaN; the message also names the DataFrame)
    with pytest.raises(ValueError, match="DataFrame: " + message.split(":")[0]):
        read_levels(pd.DataFrame(with_cell(2, column, value)))


def test_bad_value_in_csv_names_file_row_line_and_column(tmp_path):
    rows = list(ROWS)
    rows[3] = ("6Li133Cs", 0, 0, 99.0, -0.05)
    path = write_csv(tmp_path / "bad.csv", rows, comments=("# one", "# two"))
    # data row 4 is line 7 of the file: two comments, the header, then rows 1-4
    with pytest.raises(ValueError, match=r"bad\.csv, row 4 \(line 7\), column 'uncertainty': -0\.05 is invalid"):
        read_levels(path)


def test_csv_row_with_wrong_number_of_fields(tmp_path):
    path = tmp_path / "short.csv"
    path.write_text("v,energy,uncertainty\n0,10.0,0.1\n1,30.0\n")
    with pytest.raises(ValueError, match=r"short\.csv, row 2 \(line 3\): 2 values for 3 columns"):
        read_levels(path)


def test_csv_empty_cell(tmp_path):
    path = tmp_path / "hole.csv"
    path.write_text("v,J,energy,uncertainty\n0,0,10.0,0.1\n1,,30.0,0.1\n")
    with pytest.raises(ValueError, match=r"row 2 \(line 3\), column 'J': the value is missing"):
        read_levels(path)


@pytest.mark.parametrize("drop", ["v", "energy", "uncertainty"])
def test_missing_column(drop, tmp_path):
    d = as_dict()
    del d[drop]
    with pytest.raises(ValueError, match=r"missing column '%s'" % drop):
        read_levels(d)
    path = tmp_path / "levels.csv"
    pd.DataFrame(d).to_csv(path, index=False)
    with pytest.raises(ValueError, match=r"levels\.csv: missing column '%s'" % drop):
        read_levels(path)


def test_misspelt_column_is_not_ignored():
    d = as_dict()
    d["j"] = d.pop("J")
    with pytest.raises(ValueError, match=r"column 'j' is not a column name; did you mean 'J'"):
        read_levels(d)


def test_duplicate_level_names_both_rows():
    rows = list(ROWS) + [("7Li133Cs", 1, 4, 276.8, 0.02)]
    with pytest.raises(ValueError, match=r"row 6, columns isotopologue/v/J: level 7Li133Cs v=1, J=4 appears twice "
                                         r"\(also at row 3\)"):
        read_levels(as_dict(rows))
    # the same (v, J) in two isotopologues is not a duplicate
    read_levels(as_dict(list(ROWS) + [("6Li133Cs", 1, 4, 276.8, 0.02)]))
    # and without labels, (v, J) alone must be unique
    with pytest.raises(ValueError, match=r"row 2, columns isotopologue/v/J: level v=0, J=0 appears twice"):
        read_levels({"v": [0, 0], "energy": [1.0, 2.0], "uncertainty": [0.1, 0.1]})


def test_columns_of_different_length():
    d = as_dict()
    d["energy"] = d["energy"][:-1]
    with pytest.raises(ValueError, match="columns have different lengths"):
        read_levels(d)


def test_no_rows_and_bad_sources(tmp_path):
    with pytest.raises(ValueError, match="the data hold no levels"):
        read_levels({"v": [], "energy": [], "uncertainty": []})
    with pytest.raises(ValueError, match="cannot open levels file"):
        read_levels(tmp_path / "does-not-exist.csv")
    empty = tmp_path / "empty.csv"
    empty.write_text("# only a comment\n")
    with pytest.raises(ValueError, match="holds no header line"):
        read_levels(empty)
    with pytest.raises(ValueError, match="source must be a CSV file path, a pandas DataFrame or a dict"):
        read_levels([1, 2, 3])
    with pytest.raises(ValueError, match="must be a 1-D array"):
        read_levels({"v": 0, "energy": 1.0, "uncertainty": 0.1})


# -- the energy zero is stated, never guessed ----------------------------------------------
def test_energy_zero_is_kept_as_stated():
    for zero in ("minimum", "lowest", "asymptote"):
        d = {"v": [0, 1], "energy": [0.0 if zero == "lowest" else 50.0, 120.0], "uncertainty": [0.1, 0.1]}
        obs = read_levels(d, energy_zero=zero)
        assert obs.energy_zero == zero
        np.testing.assert_array_equal(obs.energy, d["energy"])  # values are never shifted
    with pytest.raises(ValueError, match="energy_zero='ground' is not known; use one of: 'minimum'"):
        read_levels(as_dict(), energy_zero="ground")


def test_energy_impossible_in_the_stated_zero():
    # a term value above the minimum cannot be 0 or negative: the message points at the other zeros
    with pytest.raises(ValueError, match=r"row 1, column 'energy': 0.0 is not above the potential minimum.*"
                                         r"energy_zero='lowest'"):
        read_levels({"v": [0, 1], "energy": [0.0, 120.0], "uncertainty": [0.1, 0.1]})
    with pytest.raises(ValueError, match=r"row 2, column 'energy': -3.0 lies below the lowest level"):
        read_levels({"v": [0, 1], "energy": [0.0, -3.0], "uncertainty": [0.1, 0.1]}, energy_zero="lowest")
    with pytest.raises(ValueError, match=r"row 1, column 'energy': the level v=0, J=0 is the lowest level"):
        read_levels({"v": [0, 1], "energy": [5.0, 120.0], "uncertainty": [0.1, 0.1]}, energy_zero="lowest")
    with pytest.raises(ValueError, match=r"row 2, column 'energy': binding energy -1.0 is not positive"):
        read_levels({"v": [0, 1], "energy": [300.0, -1.0], "uncertainty": [0.1, 0.1]}, energy_zero="asymptote")


def test_observed_levels_pass_through():
    obs = read_levels(as_dict(), energy_zero="minimum")
    assert read_levels(obs) is obs
    with pytest.raises(ValueError, match="read with energy_zero='minimum'"):
        read_levels(obs, energy_zero="asymptote")


# -- reduced masses, resolved only when asked ---------------------------------------------
def periodictable_mass(label):
    number, symbol = re.fullmatch(r"(\d+)([A-Z][a-z]?)", label).groups()
    return getattr(periodictable, symbol)[int(number)].mass


@pytest.mark.parametrize("label, atoms", [("7Li133Cs", ("7Li", "133Cs")), ("1H35Cl", ("1H", "35Cl")),
                                          ("85Rb87Rb", ("85Rb", "87Rb"))])
def test_masses_from_labels(label, atoms):
    obs = read_levels({"isotopologue": [label, label], "v": [0, 1], "energy": [10.0, 30.0],
                       "uncertainty": [0.1, 0.1]})
    mu = obs.resolve_masses()
    assert mu.shape == (2,)
    assert mu[0] == wkbfit.reduced_mass(*atoms) == mu[1]
    # independent source: the periodictable package's isotope masses (its stated precision is far below 1e-6 u)
    m1, m2 = (periodictable_mass(a) for a in atoms)
    assert math.isclose(mu[0], m1 * m2 / (m1 + m2), rel_tol=1e-8)


def test_masses_per_row_and_overrides():
    obs = read_levels(as_dict())
    li7, li6 = wkbfit.reduced_mass("7Li", "133Cs"), wkbfit.reduced_mass("6Li", "133Cs")
    np.testing.assert_array_equal(obs.resolve_masses(), [li7, li7, li7, li6, li6])
    np.testing.assert_array_equal(obs.resolve_masses({"6Li133Cs": 5.5}), [li7, li7, li7, 5.5, 5.5])
    assert obs.masses_by_isotopologue({"7Li133Cs": ("7Li", "133Cs")}) == {"7Li133Cs": li7, "6Li133Cs": li6}
    with pytest.raises(ValueError, match=r"a single reduced mass mu=6.0 was given but the data hold 2 isotopologues"):
        obs.resolve_masses(6.0)
    with pytest.raises(ValueError, match=r"mu gives a reduced mass for '7Li133CS', which is not an isotopologue"):
        obs.resolve_masses({"7Li133CS": 6.6})
    with pytest.raises(ValueError, match=r"reduced mass for isotopologue '6Li133Cs': mu=-1.0 is invalid"):
        obs.resolve_masses({"6Li133Cs": -1.0})


def test_unknown_isotope_only_when_masses_are_needed():
    d = with_cell(4, "isotopologue", "6Li999Xx")
    d["isotopologue"][3] = "6Li999Xx"
    obs = read_levels(d)  # reading is fine: the fit may be given this label's reduced mass
    with pytest.raises(ValueError, match=r"row 4, column 'isotopologue': no masses for '6Li999Xx': unknown isotope "
                                         r"'999Xx'.*mu=\{'6Li999Xx': \.\.\.\}"):
        obs.resolve_masses()
    np.testing.assert_array_equal(obs.resolve_masses({"6Li999Xx": 5.0})[3:], [5.0, 5.0])
    unreadable = read_levels(with_cell(0, "isotopologue", "lithium-cesium"))
    with pytest.raises(ValueError, match=r"row 1, column 'isotopologue': no masses for 'lithium-cesium': cannot read "
                                         r"isotopologue label"):
        unreadable.resolve_masses()


def test_unlabelled_data_need_mu():
    obs = read_levels({"v": [0, 1], "energy": [10.0, 30.0], "uncertainty": [0.1, 0.1]})
    with pytest.raises(ValueError, match=r"row 1: the data have no isotopologue column.*give mu"):
        obs.resolve_masses()
    np.testing.assert_array_equal(obs.resolve_masses(3.25), [3.25, 3.25])
    np.testing.assert_array_equal(obs.resolve_masses("1H35Cl"), [wkbfit.reduced_mass("1H", "35Cl")] * 2)
    with pytest.raises(ValueError, match="mu=0.0 is invalid"):
        obs.resolve_masses(0.0)


def test_repr_and_str():
    obs = read_levels(as_dict())
    assert repr(obs) == "<ObservedLevels: 5 levels, 2 isotopologues ('7Li133Cs', '6Li133Cs'), energy zero 'minimum'>"
    assert len(str(obs).splitlines()) == 8  # title, names, units, 5 rows
    assert isinstance(obs, ObservedLevels)
