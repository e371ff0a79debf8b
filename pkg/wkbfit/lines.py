"""Measured line positions and widths: the other kinds of data a fit takes beside levels.

`read_lines(source, unit="cm-1")` reads line positions (wavenumbers of transitions). Columns:

    v_upper, J_upper, v_lower, J_lower   the two levels of the transition (integers >= 0)
    wavenumber    the line position (upper minus lower term value), cm-1 unless unit= says
    uncertainty   one standard deviation (same unit)
    isotopologue  optional label such as "7Li133Cs"
    upper_state, lower_state   optional: a label naming a state that is NOT modelled. Such a
                  level's term value is a free parameter of the fit, one per distinct level
                  (state, isotopologue, v, J), shared by every line that starts or ends on it
                  (a fluorescence progression from one upper level). Empty or absent: the
                  level belongs to the fitted state.

`read_widths(source, unit="cm-1")` reads widths (FWHM) of quasibound levels: columns v, J,
width, uncertainty, isotopologue (optional). `fit` takes them beside the positions of the same
levels (width_fit.py): each width row is the FWHM of a quasibound level of the fitted state.

Files are comma-, tab- or whitespace-separated; units as in `read_levels` (``# unit: MHz`` or
``wavenumber [MHz]``). Values are held in cm-1 and reported back in the data's unit.
"""
import math
import os

import numpy as np

from .observed import (ObservedLevels, _frozen, distinct_labels, columns_in_memory, _label, _names, _number,
                       _quantum_number, report_unknown_columns, resolve_units, _default_uncertainty)
from .tables import read_table
from .units import CM1_PER_UNIT, check_unit

__all__ = ["ObservedLines", "read_lines", "ObservedWidths", "read_widths"]

_LINE_REQUIRED = ("v_upper", "J_upper", "v_lower", "J_lower", "wavenumber", "uncertainty")
_LINE_OPTIONAL = ("isotopologue", "upper_state", "lower_state")
_WIDTH_REQUIRED = ("v", "J", "width", "uncertainty")
_WIDTH_OPTIONAL = ("isotopologue",)


class ObservedLines:
    """Validated line positions: read-only arrays of equal length (wavenumber, uncertainty in cm-1).

    Attributes: v_upper, J_upper, v_lower, J_lower (int), wavenumber, uncertainty (cm-1),
    isotopologue (labels or None), upper_state, lower_state (None for the fitted state, else the
    label of a state that is not modelled), unit (the unit the data were given in), source,
    comments, default_uncertainty (cm-1, or None when the data had uncertainties).
    """

    kind = "lines"
    data_kind = "line positions"

    def __init__(self, v_upper, J_upper, v_lower, J_lower, wavenumber, uncertainty, isotopologue=None,
                 upper_state=None, lower_state=None, *, unit="cm-1", source="", comments=(),
                 default_uncertainty=None):
        n = len(v_upper)
        self.v_upper = _frozen(np.array(v_upper, dtype=int))
        self.J_upper = _frozen(np.array(J_upper, dtype=int))
        self.v_lower = _frozen(np.array(v_lower, dtype=int))
        self.J_lower = _frozen(np.array(J_lower, dtype=int))
        self.wavenumber = _frozen(np.array(wavenumber, dtype=float))
        self.uncertainty = _frozen(np.array(uncertainty, dtype=float))
        for name, values in (("isotopologue", isotopologue), ("upper_state", upper_state),
                             ("lower_state", lower_state)):
            arr = np.empty(n, dtype=object)
            arr[:] = list(values) if values is not None else [None] * n
            setattr(self, name, _frozen(arr))
        self.unit = check_unit(unit)
        self.source = source
        self.comments = tuple(comments)
        self.default_uncertainty = default_uncertainty

    @property
    def unit_factor(self):
        return CM1_PER_UNIT[self.unit]

    def __len__(self):
        return len(self.v_upper)

    @property
    def isotopologues(self):
        return distinct_labels(self.isotopologue)

    def keys(self):
        """One (isotopologue, upper_state, v', J', lower_state, v'', J'') per row."""
        return [(self.isotopologue[i], self.upper_state[i], int(self.v_upper[i]), int(self.J_upper[i]),
                 self.lower_state[i], int(self.v_lower[i]), int(self.J_lower[i])) for i in range(len(self))]

    def to_dict(self):
        out = {"v_upper": self.v_upper.tolist(), "J_upper": self.J_upper.tolist(), "v_lower": self.v_lower.tolist(),
               "J_lower": self.J_lower.tolist(), "wavenumber": self.wavenumber.tolist(),
               "uncertainty": self.uncertainty.tolist()}
        for name in _LINE_OPTIONAL:
            col = getattr(self, name)
            if any(x is not None for x in col):
                out[name] = [("" if x is None else x) for x in col] if name != "isotopologue" else list(col)
        return out

    def masses_by_isotopologue(self, mu=None):
        levels = ObservedLevels(np.zeros(len(self), dtype=int), np.zeros(len(self), dtype=int), np.ones(len(self)),
                                np.ones(len(self)), self.isotopologue, "minimum")
        return levels.masses_by_isotopologue(mu)

    def _columns(self):
        """(name, unit, values, format) columns for the text and HTML tables (reports.html_table)."""
        cols = [(name, "", np.array(["-" if x is None else x for x in getattr(self, name)], dtype=object), "%s")
                for name in ("isotopologue", "upper_state", "lower_state")
                if any(x is not None for x in getattr(self, name))]
        return cols + [("v_upper", "", self.v_upper, "%d"), ("J_upper", "", self.J_upper, "%d"),
                       ("v_lower", "", self.v_lower, "%d"), ("J_lower", "", self.J_lower, "%d"),
                       ("wavenumber", "cm-1", self.wavenumber, "%.6f"), ("uncertainty", "cm-1", self.uncertainty, "%.4g")]

    def to_dataframe(self):
        """The lines as a pandas DataFrame (wavenumbers and uncertainties in cm-1; '' for the fitted state)."""
        from ._optional import pandas
        return pandas().DataFrame(self.to_dict())

    def _repr_html_(self):
        from .reports import html_table
        return html_table(self._columns(), "%d line positions (given in %s, shown in cm-1)%s" % (
            len(self), self.unit, ", from %s" % self.source if self.source else ""))

    def __repr__(self):
        free = sum(1 for i in range(len(self)) if self.upper_state[i] or self.lower_state[i])
        return "<ObservedLines: %d lines, isotopologues %s%s, unit %s%s>" % (
            len(self), _names(self.isotopologues),
            ", %d with a level outside the fitted state" % free if free else "", self.unit,
            ", from %s" % self.source if self.source else "")


class ObservedWidths:
    """Widths (FWHM, cm-1) of quasibound levels: v, J, width, uncertainty, isotopologue, unit."""

    kind = "widths"
    data_kind = "widths"

    def __init__(self, v, J, width, uncertainty, isotopologue=None, *, unit="cm-1", source="", comments=()):
        n = len(v)
        self.v = _frozen(np.array(v, dtype=int))
        self.J = _frozen(np.array(J, dtype=int))
        self.width = _frozen(np.array(width, dtype=float))
        self.uncertainty = _frozen(np.array(uncertainty, dtype=float))
        arr = np.empty(n, dtype=object)
        arr[:] = list(isotopologue) if isotopologue is not None else [None] * n
        self.isotopologue = _frozen(arr)
        self.unit = check_unit(unit)
        self.source = source
        self.comments = tuple(comments)

    @property
    def unit_factor(self):
        return CM1_PER_UNIT[self.unit]

    def __len__(self):
        return len(self.v)

    @property
    def isotopologues(self):
        return distinct_labels(self.isotopologue)

    @property
    def default_uncertainty(self):  # widths always carry measured uncertainties
        return None

    def masses_by_isotopologue(self, mu=None):
        levels = ObservedLevels(self.v, self.J, np.ones(len(self)), np.ones(len(self)), self.isotopologue, "minimum")
        return levels.masses_by_isotopologue(mu)

    def to_dict(self):
        out = {"v": self.v.tolist(), "J": self.J.tolist(), "width": self.width.tolist(),
               "uncertainty": self.uncertainty.tolist()}
        if any(x is not None for x in self.isotopologue):
            out["isotopologue"] = list(self.isotopologue)
        return out

    def to_dataframe(self):
        """The widths as a pandas DataFrame (FWHM and uncertainty in cm-1)."""
        from ._optional import pandas
        return pandas().DataFrame(self.to_dict())

    def _repr_html_(self):
        from .reports import html_table
        cols = [("v", "", self.v, "%d"), ("J", "", self.J, "%d"), ("width (FWHM)", "cm-1", self.width, "%.6g"),
                ("uncertainty", "cm-1", self.uncertainty, "%.3g")]
        if any(x is not None for x in self.isotopologue):
            cols.insert(0, ("isotopologue", "", np.array(["-" if x is None else x for x in self.isotopologue],
                                                         dtype=object), "%s"))
        return html_table(cols, "%d widths of quasibound levels (given in %s, shown in cm-1)%s" % (
            len(self), self.unit, ", from %s" % self.source if self.source else ""))

    def __repr__(self):
        return "<ObservedWidths: %d widths (FWHM), unit %s%s>" % (len(self), self.unit,
                                                                 ", from %s" % self.source if self.source else "")


def _columns_of(source, what):
    comments, where, units, file_unit = (), "", {}, None
    if isinstance(source, (str, os.PathLike)):
        columns, row_names, comments, units, file_unit = read_table(source, what)
        where = os.fspath(source)
    else:
        columns, row_names, where = columns_in_memory(source)
    return columns, row_names, comments, units, file_unit, where


def _check_columns(columns, required, optional, where, what):
    prefix = "%s: " % where if where else ""
    known = required + optional
    for name in list(columns):
        if name not in known:
            close = [k for k in known if k.lower() == name.strip().lower()]
            if close:
                raise ValueError("%scolumn %r is not a column name; did you mean %r? (names are case-sensitive: %s)"
                                 % (prefix, name, close[0], ", ".join(known)))
    report_unknown_columns(columns, known, prefix, stacklevel=6)
    missing = [c for c in required if c not in columns]
    if missing:
        raise ValueError("%smissing column%s %s: %s need columns %s, and optionally %s; found %s" % (
            prefix, "s" if len(missing) > 1 else "", ", ".join(repr(m) for m in missing), what,
            ", ".join(required), ", ".join(optional), ", ".join(repr(c) for c in columns) or "no columns"))
    lengths = {name: len(columns[name]) for name in known if name in columns}
    if len(set(lengths.values())) > 1:
        raise ValueError("%scolumns have different lengths: %s" % (prefix, ", ".join("%s: %d" % kv
                                                                                   for kv in lengths.items())))
    n = lengths[required[0]]
    if n == 0:
        raise ValueError("%sthe data hold no rows" % (prefix or what + ": "))
    return n


def _state(value):
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return None
    text = str(value).strip()
    return text or None


def read_lines(source, unit=None, *, default_uncertainty=None, check=True):
    """Read and validate line positions (see the module documentation for the columns).

    unit: "cm-1" (the default), "MHz" or "GHz" for the wavenumber and uncertainty columns (a
    file may state it). default_uncertainty: for data without an uncertainty column, when
    asked: this one-sigma uncertainty (in `unit`) for every row. check: plausibility
    warnings (checks.check_lines). Returns an ObservedLines; raises ValueError naming the row
    and column of a bad value.
    """
    if isinstance(source, ObservedLines):
        return source
    columns, row_names, comments, units, file_unit, where = _columns_of(source, "lines file")
    prefix = "%s: " % where if where else ""
    col_units = resolve_units(unit, units, file_unit, ("wavenumber", "uncertainty"), where)
    default = _default_uncertainty(default_uncertainty, columns, where)
    if default is not None:
        columns = dict(columns)
        columns["uncertainty"] = [default] * len(next(iter(columns.values()), []))
    n = _check_columns(columns, _LINE_REQUIRED, _LINE_OPTIONAL, where, "line positions")

    def row_name(k):
        return row_names[k] if row_names is not None else "%srow %d" % (prefix, k + 1)

    q = {c: [_quantum_number(columns[c][k], c, row_name(k)) for k in range(n)]
         for c in ("v_upper", "J_upper", "v_lower", "J_lower")}
    wn = [_number(columns["wavenumber"][k], "wavenumber", row_name(k)) for k in range(n)]
    sigma = [_number(columns["uncertainty"][k], "uncertainty", row_name(k)) for k in range(n)]
    for k in range(n):
        if sigma[k] <= 0:
            raise ValueError("%s, column 'uncertainty': %r is invalid: the uncertainty must be > 0 (one standard "
                             "deviation)" % (row_name(k), sigma[k]))
    labels = [_label(columns["isotopologue"][k], row_name(k)) for k in range(n)] if "isotopologue" in columns \
        else [None] * n
    upper = [_state(x) for x in columns.get("upper_state", [None] * n)]
    lower = [_state(x) for x in columns.get("lower_state", [None] * n)]
    for k in range(n):
        if upper[k] and lower[k]:
            raise ValueError("%s: both levels belong to states that are not modelled (upper_state=%r, lower_state=%r); "
                             "such a line carries no information on the fitted state" % (row_name(k), upper[k],
                                                                                          lower[k]))
        if not upper[k] and not lower[k] and (q["v_upper"][k], q["J_upper"][k]) == (q["v_lower"][k],
                                                                                    q["J_lower"][k]):
            raise ValueError("%s: the upper and lower level are the same (v=%d, J=%d)" % (
                row_name(k), q["v_upper"][k], q["J_upper"][k]))
        if not upper[k] and not lower[k] and wn[k] < 0:
            raise ValueError("%s, column 'wavenumber': %r is negative, but it is upper minus lower term value; swap "
                             "the levels or the sign" % (row_name(k), wn[k]))
    fw, fs = CM1_PER_UNIT[col_units["wavenumber"]], CM1_PER_UNIT[col_units["uncertainty"]]
    lines = ObservedLines(q["v_upper"], q["J_upper"], q["v_lower"], q["J_lower"], [x * fw for x in wn],
                          [x * fs for x in sigma], labels, upper, lower, unit=col_units["wavenumber"], source=where,
                          comments=comments, default_uncertainty=None if default is None else default * fs)
    if check:
        from .checks import check_lines
        check_lines(lines, stacklevel=3)
    return lines


def read_widths(source, unit=None, *, check=True):
    """Read widths (FWHM) of quasibound levels: columns v, J, width, uncertainty, isotopologue.

    unit: "cm-1" (default), "MHz" or "GHz". Returns an ObservedWidths; `fit` fits them with the
    positions of the quasibound levels (wkbfit.width_fit).
    """
    if isinstance(source, ObservedWidths):
        return source
    columns, row_names, comments, units, file_unit, where = _columns_of(source, "widths file")
    prefix = "%s: " % where if where else ""
    col_units = resolve_units(unit, units, file_unit, ("width", "uncertainty"), where)
    n = _check_columns(columns, _WIDTH_REQUIRED, _WIDTH_OPTIONAL, where, "widths")

    def row_name(k):
        return row_names[k] if row_names is not None else "%srow %d" % (prefix, k + 1)

    v = [_quantum_number(columns["v"][k], "v", row_name(k)) for k in range(n)]
    J = [_quantum_number(columns["J"][k], "J", row_name(k)) for k in range(n)]
    width = [_number(columns["width"][k], "width", row_name(k)) for k in range(n)]
    sigma = [_number(columns["uncertainty"][k], "uncertainty", row_name(k)) for k in range(n)]
    for k in range(n):
        if width[k] <= 0:
            raise ValueError("%s, column 'width': %r is invalid: a width (FWHM) is > 0" % (row_name(k), width[k]))
        if sigma[k] <= 0:
            raise ValueError("%s, column 'uncertainty': %r is invalid: it must be > 0" % (row_name(k), sigma[k]))
    labels = [_label(columns["isotopologue"][k], row_name(k)) for k in range(n)] if "isotopologue" in columns \
        else [None] * n
    fw, fs = CM1_PER_UNIT[col_units["width"]], CM1_PER_UNIT[col_units["uncertainty"]]
    return ObservedWidths(v, J, [x * fw for x in width], [x * fs for x in sigma], labels, unit=col_units["width"],
                          source=where, comments=comments)
