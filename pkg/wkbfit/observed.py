"""Measured levels: reading and validating the data a fit is made to.

`read_levels(source, energy_zero=...)` reads a CSV file, a pandas DataFrame or a dict of
arrays into an `ObservedLevels` object. Columns:

    v             vibrational quantum number (integer >= 0)
    energy        level energy in cm-1, in the energy zero named by `energy_zero`
    uncertainty   one-standard-deviation uncertainty of the energy in cm-1 (> 0)
    J             rotational quantum number (integer >= 0), optional, default 0
    isotopologue  label such as "7Li133Cs" or "1H35Cl", optional (default: one unnamed isotopologue)

Files may be comma-, tab- or whitespace-separated (tables.py). Energies and uncertainties are
in cm-1 unless `unit=` ("MHz", "GHz") or the file says otherwise (``# unit: MHz`` or a column
name ``energy [MHz]``); they are held in cm-1 and reported back in the data's own unit.
Columns that are not known are reported (a warning), and a column that looks like a
rotational quantum number under another name (N, K, F) stops the reading when J is absent,
so that such data never silently become J = 0 levels.

The energy zero is stated by the caller, never guessed from the numbers:

    "minimum"    term values above the minimum of the potential (the zero of `levels().energy`)
    "lowest"     energies relative to the lowest level (v=0, J=0) of each isotopologue
    "asymptote"  binding energies below the dissociation asymptote (positive numbers, asymptote - E)

Isotopologue labels are kept as text; their masses are looked up only when a fit asks for them
(`ObservedLevels.resolve_masses`), so that a label missing from the mass table can still be
fitted when its reduced mass is given.
"""
import math
import numbers
import os
import sys

import numpy as np

from . import _validate as _limits  # (this module has a function named _validate)
from .masses import as_reduced_mass, parse_isotopologue, reduced_mass
from .tables import read_table
from .units import CM1_PER_UNIT, check_unit

__all__ = ["ObservedLevels", "read_levels", "ENERGY_ZEROS", "DataWarning"]


class DataWarning(UserWarning):
    """Data that read correctly but look implausible; the message says what to check."""


#: column names that hold a rotational quantum number under another name than J
_ROTATION_LIKE = ("N", "K", "F", "j", "n_rot", "Jrot")

#: the energy zeros a data set can be stated in, with their meaning
ENERGY_ZEROS = {
    "minimum": "term values above the minimum of the potential",
    "lowest": "energies relative to the lowest level (v=0, J=0) of each isotopologue",
    "asymptote": "binding energies below the dissociation asymptote (asymptote - E, positive)",
}

_REQUIRED = ("v", "energy", "uncertainty")
_OPTIONAL = ("J", "isotopologue")
_KNOWN = _REQUIRED + _OPTIONAL



def distinct_labels(labels):
    """The distinct isotopologue labels in order of first appearance (None for unlabelled rows)."""
    # (dict keys keep insertion order: one hash per row, not a list scan)
    return list(dict.fromkeys(labels.tolist() if isinstance(labels, np.ndarray) else labels))


class ObservedLevels:
    """Validated measured levels: read-only NumPy arrays of equal length.

    Attributes: v, J (int arrays), energy, uncertainty (float arrays, cm-1),
    isotopologue (object array of labels, None where the data name none), energy_zero,
    source (where the data came from), comments (the '#' lines of a CSV file).
    Build it with `read_levels`.
    """

    kind = "levels"

    def __init__(self, v, J, energy, uncertainty, isotopologue, energy_zero, source="", comments=(), *,
                 unit="cm-1", asymptote=None, fit_asymptote=False, default_uncertainty=None):
        self.v = _frozen(np.array(v, dtype=int))
        self.J = _frozen(np.array(J, dtype=int))
        self.energy = _frozen(np.array(energy, dtype=float))
        self.uncertainty = _frozen(np.array(uncertainty, dtype=float))
        labels = np.empty(len(self.v), dtype=object)
        labels[:] = list(isotopologue)
        self.isotopologue = _frozen(labels)
        self.energy_zero = energy_zero
        self.source = source
        self.comments = tuple(comments)
        #: the unit the data were given in (energy and uncertainty are held in cm-1)
        self.unit = check_unit(unit)
        #: binding energies only: the asymptote in cm-1 above the potential minimum (None: the
        #: potential's own asymptote), and whether it is a fitted parameter
        self.asymptote = None if asymptote is None else float(asymptote)
        self.fit_asymptote = bool(fit_asymptote)
        #: the uncertainty (cm-1) given to every row because the data had none (None: they had)
        self.default_uncertainty = default_uncertainty

    @property
    def unit_factor(self):
        """cm-1 per unit of the data."""
        return CM1_PER_UNIT[self.unit]

    @property
    def data_kind(self):
        """'binding energies' for energy_zero='asymptote', else 'term values'."""
        return "binding energies" if self.energy_zero == "asymptote" else "term values"

    def __len__(self):
        return len(self.v)

    @property
    def isotopologues(self):
        """The distinct labels, in order of first appearance (None for unlabelled data)."""
        # (kept once found: the labels are read-only, and a fit of 20 000 rows asked ~8 times, ~0.7 ms each)
        found = self.__dict__.get("_distinct_labels")
        if found is None or found[0] is not self.isotopologue:
            found = self.__dict__["_distinct_labels"] = (self.isotopologue, tuple(distinct_labels(self.isotopologue)))
        return list(found[1])

    def rows_of(self, label):
        """Indices (0-based) of the rows of one isotopologue."""
        if label is not None and not isinstance(label, str):
            raise _limits.ArgumentTypeError("isotopologue label %r must be a string (or None for unlabelled data)"
                                            % (label,))
        return np.array([i for i, lab in enumerate(self.isotopologue) if lab == label], dtype=int)

    def select(self, label):
        """The levels of one isotopologue, as a new ObservedLevels."""
        idx = self.rows_of(label)
        if len(idx) == 0:
            raise ValueError("no levels of isotopologue %r; the data hold %s" % (label, _names(self.isotopologues)))
        return ObservedLevels(self.v[idx], self.J[idx], self.energy[idx], self.uncertainty[idx],
                              self.isotopologue[idx], self.energy_zero, self.source, self.comments,
                              unit=self.unit, asymptote=self.asymptote, fit_asymptote=self.fit_asymptote,
                              default_uncertainty=self.default_uncertainty)

    # -- masses ------------------------------------------------------------------------
    def masses_by_isotopologue(self, mu=None):
        """Reduced mass in u of each isotopologue label, as a dict.

        mu: None (masses from the labels and the mass table), a number (one reduced mass for
        data of a single isotopologue), or a dict label -> reduced mass in u (labels missing from
        the dict are looked up in the mass table). A dict value may also be a pair of isotopes.
        """
        labels = self.isotopologues
        if mu is not None and not isinstance(mu, dict):
            if len(labels) > 1:
                raise ValueError("a single reduced mass mu=%r was given but the data hold %d isotopologues (%s); "
                                 "give a dict label -> reduced mass, or mu=None to take the masses from the labels"
                                 % (mu, len(labels), _names(labels)))
            return {labels[0]: as_reduced_mass(mu)} if labels else {}
        given = dict(mu or {})
        unknown = [k for k in given if k not in labels]
        if unknown:
            raise ValueError("mu gives a reduced mass for %s, which is not an isotopologue of the data (%s)"
                             % (_names(unknown), _names(labels)))
        out = {}
        for label in labels:
            if label in given:
                try:
                    out[label] = as_reduced_mass(given[label])
                except ValueError as err:
                    raise ValueError("reduced mass for isotopologue %r: %s" % (label, err)) from None
                continue
            row = int(self.rows_of(label)[0]) + 1
            if label is None:
                raise ValueError("row %d: the data have no isotopologue column, so the reduced mass cannot be "
                                 "taken from a label; give mu (reduced mass in u)" % row)
            try:
                out[label] = reduced_mass(*parse_isotopologue(label))
            except ValueError as err:
                raise ValueError("row %d, column 'isotopologue': no masses for %r: %s; or give its reduced mass, "
                                 "mu={%r: ...} (u)" % (row, label, err, label)) from None
        return out

    def resolve_masses(self, mu=None):
        """Reduced mass in u of every row (float array of len(self)); see `masses_by_isotopologue`."""
        by_label = self.masses_by_isotopologue(mu)
        return np.array([by_label[label] for label in self.isotopologue], dtype=float)

    # -- export ------------------------------------------------------------------------
    def to_dict(self):
        """Column name -> list (a new dict; the isotopologue column only when the data are labelled)."""
        out = {"v": self.v.tolist(), "J": self.J.tolist(), "energy": self.energy.tolist(),
               "uncertainty": self.uncertainty.tolist()}
        if any(label is not None for label in self.isotopologue):
            out["isotopologue"] = list(self.isotopologue)
        return out

    def to_dataframe(self):
        from ._optional import pandas
        pd = pandas()
        return pd.DataFrame(self.to_dict())

    def __repr__(self):
        labels = self.isotopologues
        return "<ObservedLevels: %d levels, %d isotopologue%s (%s), energy zero %r%s>" % (
            len(self), len(labels), "" if len(labels) == 1 else "s", _names(labels), self.energy_zero,
            ", from %s" % self.source if self.source else "")

    def _repr_html_(self):
        from . import reports
        return reports.observed_html(self)

    def __str__(self):
        from . import reports
        return reports.text_table(reports.observed_columns(self), repr(self))


# -- reading ------------------------------------------------------------------------------
def read_levels(source, energy_zero=None, unit=None, *, default_uncertainty=None, asymptote=None,
                fit_asymptote=False, check=True, max_rows=_limits.MAX_ROWS):
    """Read and validate measured levels.

    source: path of a CSV file (str or pathlib.Path; lines starting with '#' are comments),
        a pandas DataFrame, a dict of equal-length arrays or lists, or an ObservedLevels
        (returned as it is).
    energy_zero: what the energies are measured from, "minimum" (the default for new data),
        "lowest" or "asymptote"; see the module documentation.
    unit: "cm-1" (the default), "MHz" or "GHz" for the energy and uncertainty columns; a file
        may state its unit itself (a conflicting explicit unit is an error).
    default_uncertainty: for data without an uncertainty column only, and only when asked:
        this one-sigma uncertainty (in `unit`) for every row; the result and reports say so.
    asymptote, fit_asymptote: for binding energies (energy_zero="asymptote"): the asymptote
        they are measured from, in cm-1 above the potential minimum (None: the potential's
        own asymptote), and whether a fit adjusts it as a parameter of its own.
    check: run the plausibility checks (`check_levels`), which warn (DataWarning) and say
        what to do.

    max_rows: work limit on the number of data rows (refused at once beyond it); raise it for more.
    Raises ValueError naming the row (1-based data row) and column of any bad value.
    The caller's data are never modified: the result holds read-only copies.
    """
    if isinstance(source, ObservedLevels):
        if unit is not None and check_unit(unit) != source.unit:
            raise ValueError("these levels were read in %s; unit=%r cannot be applied afterwards (read the data "
                             "again)" % (source.unit, unit))
        if energy_zero is not None and energy_zero != source.energy_zero:
            raise ValueError("these levels were read with energy_zero=%r; energy_zero=%r cannot be applied "
                             "afterwards (read the data again)" % (source.energy_zero, energy_zero))
        return source
    if energy_zero is None:
        energy_zero = "minimum"
    if energy_zero not in ENERGY_ZEROS:
        raise ValueError("energy_zero=%r is not known; use one of: %s" % (
            energy_zero, "; ".join("%r (%s)" % kv for kv in ENERGY_ZEROS.items())))
    comments, where, units, file_unit = (), "", {}, None
    max_rows = _limits.integer(max_rows, "max_rows", 1, 2 ** 62)
    asymptote = _binding_options(energy_zero, asymptote, fit_asymptote)
    if isinstance(source, (str, os.PathLike)):
        if unit is None and default_uncertainty is None and _plain_csv(source):
            # a plain CSV of the standard columns: streamed, memory a few times the file size
            from ._levels_csv import read_csv_levels
            obs = read_csv_levels(source, energy_zero, max_rows)
            return _finish_levels(obs, asymptote, fit_asymptote, check)
        columns, row_names, comments, units, file_unit = read_table(source, "levels file")
        where = os.fspath(source)
    else:
        columns, row_names, where = columns_in_memory(source)
    col_units = resolve_units(unit, units, file_unit, ("energy", "uncertainty"), where)
    default = _default_uncertainty(default_uncertainty, columns, where)
    if default is not None:
        columns = dict(columns)
        columns["uncertainty"] = [default] * len(columns.get("v", []))
    n_rows = max((len(c) for c in columns.values()), default=0)
    _limits.work_limit(n_rows, max_rows, "data rows", "max_rows", "give fewer levels")
    obs = _validate(columns, row_names, energy_zero, where, comments, col_units)
    if default is not None:
        obs.default_uncertainty = default * CM1_PER_UNIT[col_units["uncertainty"]]
    return _finish_levels(obs, asymptote, fit_asymptote, check)


def _binding_options(energy_zero, asymptote, fit_asymptote):
    """The checked asymptote= (None or cm-1 above the minimum) of binding-energy data."""
    if fit_asymptote and energy_zero != "asymptote":
        raise ValueError("fit_asymptote=True is for binding energies (energy_zero='asymptote'); these data have "
                         "energy_zero=%r" % energy_zero)
    if asymptote is None:
        return None
    if energy_zero != "asymptote":
        raise ValueError("asymptote=%r is for binding energies (energy_zero='asymptote'); these data have "
                         "energy_zero=%r" % (asymptote, energy_zero))
    return _limits.real(asymptote, "asymptote", "a finite number (cm-1 above the potential minimum) or None")


def _finish_levels(obs, asymptote, fit_asymptote, check):
    """The checked binding-energy options on the data, then the plausibility checks of read_levels."""
    obs.asymptote = asymptote
    obs.fit_asymptote = bool(fit_asymptote)
    if check:
        from .checks import check_levels
        check_levels(obs, stacklevel=4)
    return obs


_STANDARD_COLUMNS = {"v", "J", "energy", "uncertainty", "isotopologue"}


def _plain_csv(path):
    """True if a file is comma-separated with only the standard columns and states no unit, so that
    the streaming reader (which knows no units) reads it the same as the general one."""
    try:
        with open(os.fspath(path), encoding="utf-8-sig") as fh:
            for _ in range(10000):
                line = fh.readline()
                if not line:
                    return False
                text = line.strip()
                if not text:
                    continue
                if text.startswith("#"):
                    if "unit" in text.lower():
                        return False
                    continue
                names = [c.strip() for c in text.split(",")]
                return len(names) > 1 and set(names) <= _STANDARD_COLUMNS and len(set(names)) == len(names)
    except (OSError, UnicodeDecodeError):
        return False
    return False


def resolve_units(unit, units, file_unit, energy_columns, where):
    """Unit of each energy column: a column's own unit, else the file's, else unit, else cm-1."""
    prefix = "%s: " % where if where else ""
    explicit = None if unit is None else check_unit(unit)
    stated = dict(units)
    out = {}
    for col in energy_columns:
        u = stated.get(col, file_unit)
        if u is not None and explicit is not None and u != explicit:
            raise ValueError("%sthe file states unit %s for column %r but unit=%r was asked; leave out unit= or "
                             "correct the file" % (prefix, u, col, unit))
        out[col] = u or explicit or "cm-1"
    return out


def _default_uncertainty(default, columns, where):
    if default is None:
        return None
    prefix = "%s: " % where if where else ""
    if "uncertainty" in columns:
        raise ValueError("%sdefault_uncertainty=%r was given but the data have an uncertainty column; the default is "
                         "only for data without one" % (prefix, default))
    try:
        x = float(default)
    except (TypeError, ValueError):
        raise ValueError("default_uncertainty=%r must be a number > 0 (one standard deviation)" % (default,)) from None
    if not (math.isfinite(x) and x > 0):
        raise ValueError("default_uncertainty=%r must be a finite number > 0 (one standard deviation)" % (default,))
    return x


def columns_in_memory(source):
    """(columns as lists, row names None, description) of a pandas DataFrame or a dict of arrays;
    anything else that is not a file path is refused by name."""
    if _is_dataframe(source):
        columns = {str(name): source[name].tolist() for name in source.columns}
        if len(set(columns)) != len(source.columns):
            raise ValueError("the DataFrame has duplicated column names: %s" % list(source.columns))
        return columns, None, "DataFrame"
    if isinstance(source, dict):
        columns = {}
        for name, values in source.items():
            values = np.asarray(values, dtype=object)
            if values.ndim != 1:
                raise ValueError("column %r must be a 1-D array or list; got shape %s" % (name, values.shape))
            columns[str(name)] = values.tolist()
        return columns, None, ""
    raise ValueError("source must be a CSV file path, a pandas DataFrame or a dict of arrays; got %s"
                     % type(source).__name__)


def _is_dataframe(obj):
    pd = sys.modules.get("pandas")
    return pd is not None and isinstance(obj, pd.DataFrame)


def report_unknown_columns(columns, known, prefix, stacklevel=5):
    """Warn about columns that are not used; stop when J is missing but a column looks like it."""
    import warnings
    unknown = [c for c in columns if c not in known]
    missing_J = [c for c in known if (c == "J" or c.startswith("J_")) and c not in columns]
    if missing_J:
        suspect = [c for c in unknown if c in _ROTATION_LIKE or c.split("_")[0] in ("N", "K", "F")]
        if suspect:
            raise ValueError("%scolumn %r is not a column name, and the data have no %s column: if %r is the "
                             "rotational quantum number, name the column %s; otherwise remove it (the levels would "
                             "otherwise be read as J = 0)" % (prefix, suspect[0], missing_J[0], suspect[0],
                                                              missing_J[0]))
    if unknown:
        warnings.warn("%scolumn%s %s %s not used (known columns: %s); check the spelling" % (
            prefix, "s" if len(unknown) > 1 else "", ", ".join(repr(c) for c in unknown),
            "is" if len(unknown) == 1 else "are", ", ".join(known)), DataWarning, stacklevel=stacklevel)


def _validate(columns, row_names, energy_zero, where, comments, col_units=None):
    prefix = "%s: " % where if where else ""

    def row_name(k):
        # a CSV row names its file and line; other rows say where the data came from
        return row_names[k] if row_names is not None else "%srow %d" % (prefix, k + 1)

    for name in list(columns):
        if name not in _KNOWN:
            close = [k for k in _KNOWN if k.lower() == name.strip().lower()]
            if close:
                raise ValueError("%scolumn %r is not a column name; did you mean %r? (names are case-sensitive: "
                                 "%s)" % (prefix, name, close[0], ", ".join(_KNOWN)))
    report_unknown_columns(columns, _KNOWN, prefix)
    missing = [c for c in _REQUIRED if c not in columns]
    if missing:
        raise ValueError("%smissing column%s %s: the levels need columns v, energy (cm-1), uncertainty "
                         "(cm-1, one standard deviation), and optionally J and isotopologue; found %s"
                         % (prefix, "s" if len(missing) > 1 else "", ", ".join(repr(m) for m in missing),
                            ", ".join(repr(c) for c in columns) or "no columns"))
    lengths = {name: len(columns[name]) for name in _KNOWN if name in columns}
    if len(set(lengths.values())) > 1:
        raise ValueError("%scolumns have different lengths: %s" % (
            prefix, ", ".join("%s: %d" % kv for kv in lengths.items())))
    n = lengths["v"]
    if n == 0:
        raise ValueError("%sthe data hold no levels" % (prefix or "levels: "))

    v = [_quantum_number(columns["v"][k], "v", row_name(k)) for k in range(n)]
    J = ([_quantum_number(columns["J"][k], "J", row_name(k)) for k in range(n)] if "J" in columns else [0] * n)
    col_units = col_units or {"energy": "cm-1", "uncertainty": "cm-1"}
    energy = [_number(columns["energy"][k], "energy", row_name(k)) for k in range(n)]
    sigma = [_number(columns["uncertainty"][k], "uncertainty", row_name(k)) for k in range(n)]
    for k, s in enumerate(sigma):
        if s <= 0:
            raise ValueError("%s, column 'uncertainty': %r is invalid: the uncertainty must be > 0 cm-1 "
                             "(one standard deviation)" % (row_name(k), s))
    if "isotopologue" in columns:
        labels = [_label(columns["isotopologue"][k], row_name(k)) for k in range(n)]
    else:
        labels = [None] * n
    _check_energy_zero(energy, v, J, labels, energy_zero, row_name)
    energy = [e * CM1_PER_UNIT[col_units["energy"]] for e in energy]
    sigma = [x * CM1_PER_UNIT[col_units["uncertainty"]] for x in sigma]

    first = {}
    for k in range(n):
        key = (labels[k], v[k], J[k])
        if key in first:
            raise ValueError("%s, columns isotopologue/v/J: level %sv=%d, J=%d appears twice (also at %s); each "
                             "(isotopologue, v, J) may appear once" % (
                                 row_name(k), "%s " % labels[k] if labels[k] else "", v[k], J[k], row_name(first[key])))
        first[key] = k
    return ObservedLevels(v, J, energy, sigma, labels, energy_zero, source=where, comments=comments,
                          unit=col_units["energy"])


def _check_energy_zero(energy, v, J, labels, energy_zero, row_name):
    """Values impossible in the stated energy zero; the zero itself is never changed or guessed."""
    for k, e in enumerate(energy):
        if energy_zero == "minimum" and e <= 0:
            raise ValueError("%s, column 'energy': %r is not above the potential minimum, but energy_zero='minimum' "
                             "says the energies are term values above it (every level lies above the minimum); if "
                             "the energies are relative to the lowest level use energy_zero='lowest', if they are "
                             "binding energies use energy_zero='asymptote'" % (row_name(k), e))
        if energy_zero == "lowest" and e < 0:
            raise ValueError("%s, column 'energy': %r lies below the lowest level, but energy_zero='lowest' says the "
                             "energies are measured from the lowest level of each isotopologue" % (row_name(k), e))
        if energy_zero == "asymptote" and e <= 0:
            raise ValueError("%s, column 'energy': binding energy %r is not positive, so the level is not below the "
                             "dissociation asymptote; energy_zero='asymptote' needs bound levels, asymptote - E > 0%s"
                             % (row_name(k), e, "" if not J[k] else
                                " (a quasibound level above the asymptote is given by its term value, "
                                "energy_zero='minimum', and fitted as quasibound)"))
    if energy_zero == "lowest":
        for k in range(len(energy)):
            if v[k] == 0 and J[k] == 0 and energy[k] != 0:
                raise ValueError("%s, column 'energy': the level v=0, J=0 is the lowest level, so with "
                                 "energy_zero='lowest' its energy must be 0; got %r" % (row_name(k), energy[k]))


def _number(value, column, where):
    """A finite float from a cell, or a ValueError naming row and column."""
    if isinstance(value, (bool, np.bool_)):
        raise ValueError("%s, column %r: %r is not a number" % (where, column, value))
    if isinstance(value, numbers.Real):
        try:
            x = float(value)
        except OverflowError:
            raise ValueError("%s, column %r: %r is too large for a number" % (where, column, value)) from None
    else:
        text = "" if value is None else str(value).strip()
        if not text:
            raise ValueError("%s, column %r: the value is missing" % (where, column))
        try:
            x = float(text)
        except (ValueError, OverflowError):
            raise ValueError("%s, column %r: %r is not a number" % (where, column, value)) from None
    if not math.isfinite(x):
        raise ValueError("%s, column %r: %r is not a finite number (NaN or infinite); every level needs a value"
                         % (where, column, value))
    return x


def _quantum_number(value, column, where):
    x = _number(value, column, where)
    if x != int(x):
        raise ValueError("%s, column %r: %r is not an integer; quantum numbers are integers >= 0"
                         % (where, column, value))
    if x < 0:
        raise ValueError("%s, column %r: %r is negative; quantum numbers are integers >= 0" % (where, column, value))
    if x > _limits.MAX_QUANTUM_NUMBER:
        raise ValueError("%s, column %r: %r is above the largest quantum number accepted (%d)"
                         % (where, column, value, _limits.MAX_QUANTUM_NUMBER))
    return int(x)


def _label(value, where):
    if value is None or (isinstance(value, float) and math.isnan(value)):
        raise ValueError("%s, column 'isotopologue': the label is missing; label every row (such as '7Li133Cs') "
                         "or leave out the column for data of one isotopologue" % where)
    if not isinstance(value, str):
        raise ValueError("%s, column 'isotopologue': %r is not a label; write isotopologues such as '7Li133Cs'"
                         % (where, value))
    text = value.strip()
    if not text:
        raise ValueError("%s, column 'isotopologue': the label is empty; label every row (such as '7Li133Cs') "
                         "or leave out the column for data of one isotopologue" % where)
    return text


def _frozen(arr):
    arr.setflags(write=False)
    return arr


def _names(labels):
    return ", ".join("unnamed" if lab is None else repr(lab) for lab in labels)
