"""Measured levels: reading and validating the data a fit is made to.

`read_levels(source, energy_zero=...)` reads a CSV file, a pandas DataFrame or a dict of
arrays into an `ObservedLevels` object. Columns:

    v             vibrational quantum number (integer >= 0)
    energy        level energy in cm-1, in the energy zero named by `energy_zero`
    uncertainty   one-standard-deviation uncertainty of the energy in cm-1 (> 0)
    J             rotational quantum number (integer >= 0), optional, default 0
    isotopologue  label such as "7Li133Cs" or "1H35Cl", optional (default: one unnamed isotopologue)

The energy zero is stated by the caller, never guessed from the numbers:

    "minimum"    term values above the minimum of the potential (the zero of `levels().energy`)
    "lowest"     energies relative to the lowest level (v=0, J=0) of each isotopologue
    "asymptote"  binding energies below the dissociation asymptote (positive numbers, asymptote - E)

Isotopologue labels are kept as text; their masses are looked up only when a fit asks for them
(`ObservedLevels.resolve_masses`), so that a label missing from the mass table can still be
fitted when its reduced mass is given.
"""
import csv
import math
import numbers
import os
import sys

import numpy as np

from . import _validate as _limits  # (this module has a function named _validate)
from .masses import as_reduced_mass, parse_isotopologue, reduced_mass

__all__ = ["ObservedLevels", "read_levels", "ENERGY_ZEROS"]

#: the energy zeros a data set can be stated in, with their meaning
ENERGY_ZEROS = {
    "minimum": "term values above the minimum of the potential",
    "lowest": "energies relative to the lowest level (v=0, J=0) of each isotopologue",
    "asymptote": "binding energies below the dissociation asymptote (asymptote - E, positive)",
}

_REQUIRED = ("v", "energy", "uncertainty")
_OPTIONAL = ("J", "isotopologue")
_KNOWN = _REQUIRED + _OPTIONAL


class ObservedLevels:
    """Validated measured levels: read-only NumPy arrays of equal length.

    Attributes: v, J (int arrays), energy, uncertainty (float arrays, cm-1),
    isotopologue (object array of labels, None where the data name none), energy_zero,
    source (where the data came from), comments (the '#' lines of a CSV file).
    Build it with `read_levels`.
    """

    def __init__(self, v, J, energy, uncertainty, isotopologue, energy_zero, source="", comments=()):
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

    def __len__(self):
        return len(self.v)

    @property
    def isotopologues(self):
        """The distinct labels, in order of first appearance (None for unlabelled data)."""
        seen = []
        for label in self.isotopologue:
            if label not in seen:
                seen.append(label)
        return seen

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
                              self.isotopologue[idx], self.energy_zero, self.source, self.comments)

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
        import pandas as pd
        return pd.DataFrame(self.to_dict())

    def __repr__(self):
        labels = self.isotopologues
        return "<ObservedLevels: %d levels, %d isotopologue%s (%s), energy zero %r%s>" % (
            len(self), len(labels), "" if len(labels) == 1 else "s", _names(labels), self.energy_zero,
            ", from %s" % self.source if self.source else "")

    def __str__(self):
        lines = [repr(self)]
        lines.append("%-14s %5s %5s %16s %12s" % ("isotopologue", "v", "J", "energy [cm-1]", "sigma [cm-1]"))
        for i in range(len(self)):
            lines.append("%-14s %5d %5d %16.6f %12.6f" % (
                self.isotopologue[i] or "-", self.v[i], self.J[i], self.energy[i], self.uncertainty[i]))
        return "\n".join(lines)


# -- reading ------------------------------------------------------------------------------
def read_levels(source, energy_zero=None, *, max_rows=_limits.MAX_ROWS):
    """Read and validate measured levels.

    source: path of a CSV file (str or pathlib.Path; lines starting with '#' are comments),
        a pandas DataFrame, a dict of equal-length arrays or lists, or an ObservedLevels
        (returned as it is).
    energy_zero: what the energies are measured from, "minimum" (the default for new data),
        "lowest" or "asymptote"; see the module documentation.

    max_rows: work limit on the number of data rows (refused at once beyond it); raise it for more.
    Raises ValueError naming the row (1-based data row) and column of any bad value.
    The caller's data are never modified: the result holds read-only copies.
    """
    if isinstance(source, ObservedLevels):
        if energy_zero is not None and energy_zero != source.energy_zero:
            raise ValueError("these levels were read with energy_zero=%r; energy_zero=%r cannot be applied "
                             "afterwards (read the data again)" % (source.energy_zero, energy_zero))
        return source
    if energy_zero is None:
        energy_zero = "minimum"
    if energy_zero not in ENERGY_ZEROS:
        raise ValueError("energy_zero=%r is not known; use one of: %s" % (
            energy_zero, "; ".join("%r (%s)" % kv for kv in ENERGY_ZEROS.items())))
    comments, where = (), ""
    max_rows = _limits.integer(max_rows, "max_rows", 1, 2 ** 62)
    if isinstance(source, (str, os.PathLike)):
        from ._levels_csv import read_csv_levels
        return read_csv_levels(source, energy_zero, max_rows)  # streamed: memory a few times the file size
    elif _is_dataframe(source):
        columns = {str(name): source[name].tolist() for name in source.columns}
        if len(set(columns)) != len(source.columns):
            raise ValueError("the DataFrame has duplicated column names: %s" % list(source.columns))
        row_names = None
        where = "DataFrame"
    elif isinstance(source, dict):
        columns = {}
        for name, values in source.items():
            values = np.asarray(values, dtype=object)
            if values.ndim != 1:
                raise ValueError("column %r must be a 1-D array or list; got shape %s" % (name, values.shape))
            columns[str(name)] = values.tolist()
        row_names = None
    else:
        raise ValueError("source must be a CSV file path, a pandas DataFrame or a dict of arrays; got %s"
                         % type(source).__name__)
    n_rows = max((len(c) for c in columns.values()), default=0)
    _limits.work_limit(n_rows, max_rows, "data rows", "max_rows", "give fewer levels")
    return _validate(columns, row_names, energy_zero, where, comments)


def _is_dataframe(obj):
    pd = sys.modules.get("pandas")
    return pd is not None and isinstance(obj, pd.DataFrame)


def _read_csv(path):
    """(columns as lists of strings, a row description per data row, comment lines)."""
    name = os.fspath(path)
    try:
        handle = open(name, newline="", encoding="utf-8-sig")  # a spreadsheet's "CSV UTF-8" starts with a BOM
    except OSError as err:
        raise ValueError("cannot open levels file %r: %s" % (name, err.strerror or err)) from None
    comments, header, rows, lines = [], None, [], []
    with handle:
        try:
            for line_no, row in enumerate(csv.reader(handle), start=1):
                cells = [c.strip() for c in row]
                if not any(cells):
                    continue
                if cells[0].startswith("#"):
                    comments.append(",".join(row).lstrip()[1:].strip())
                    continue
                if header is None:
                    header = cells
                    continue
                rows.append(cells)
                lines.append(line_no)
        except (csv.Error, UnicodeDecodeError) as err:
            raise ValueError("cannot read %r as CSV: %s" % (name, err)) from None
    if header is None:
        raise ValueError("%r holds no header line; the first line that is not a comment must name the columns "
                         "(v, energy, uncertainty, and optionally J, isotopologue)" % name)
    if len(set(header)) != len(header):
        raise ValueError("%r: duplicated column names in the header %s" % (name, header))
    for k, cells in enumerate(rows):
        if len(cells) != len(header):
            raise ValueError("%s, row %d (line %d): %d values for %d columns (%s)"
                             % (name, k + 1, lines[k], len(cells), len(header), ", ".join(header)))
    columns = {h: [cells[j] for cells in rows] for j, h in enumerate(header)}
    row_names = ["%s, row %d (line %d)" % (name, k + 1, lines[k]) for k in range(len(rows))]
    return columns, row_names, comments


def _validate(columns, row_names, energy_zero, where, comments):
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

    first = {}
    for k in range(n):
        key = (labels[k], v[k], J[k])
        if key in first:
            raise ValueError("%s, columns isotopologue/v/J: level %sv=%d, J=%d appears twice (also at %s); each "
                             "(isotopologue, v, J) may appear once" % (
                                 row_name(k), "%s " % labels[k] if labels[k] else "", v[k], J[k], row_name(first[key])))
        first[key] = k
    return ObservedLevels(v, J, energy, sigma, labels, energy_zero, source=where, comments=comments)


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
                             "dissociation asymptote; energy_zero='asymptote' needs bound levels, asymptote - E > 0"
                             % (row_name(k), e))
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
