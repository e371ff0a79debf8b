"""Reading a levels CSV file in bounded memory (for read_levels).

The rows are parsed one at a time and each cell goes straight into a typed array, so that the peak
memory is a few times the file size (a list of strings per cell took about 25 times it). The checks
and their messages are those of observed.py: a bad cell is named by file, data row and line at once.
"""
import array
import csv
import os

import numpy as np

from . import _validate as _limits
from . import observed as _obs


def read_csv_levels(path, energy_zero, max_rows=_limits.MAX_ROWS):
    """ObservedLevels from a CSV file (see read_levels)."""
    name = os.fspath(path)
    try:
        # utf-8-sig: a spreadsheet's "CSV UTF-8" starts with a byte-order mark
        handle = open(name, newline="", encoding="utf-8-sig")
    except OSError as err:
        raise ValueError("cannot open levels file %r: %s" % (name, err.strerror or err)) from None
    comments, header = [], None
    v, J, energy, sigma = array.array("q"), array.array("q"), array.array("d"), array.array("d")
    label_code, labels, codes = array.array("l"), [], {}
    lines = array.array("q")
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
                    columns = _check_header(name, header)
                    continue
                k = len(lines)
                where = "%s, row %d (line %d)" % (name, k + 1, line_no)
                if k >= max_rows:
                    raise ValueError("%s holds more than max_rows=%d data rows: read a part of it, or raise "
                                     "max_rows" % (name, max_rows))
                if len(cells) != len(header):
                    raise ValueError("%s: %d values for %d columns (%s)" % (where, len(cells), len(header),
                                                                           ", ".join(header)))
                v.append(_count(cells[columns["v"]], "v", where))
                J.append(_count(cells[columns["J"]], "J", where) if "J" in columns else 0)
                energy.append(_real(cells[columns["energy"]], "energy", where))
                s = _real(cells[columns["uncertainty"]], "uncertainty", where)
                if s <= 0:
                    raise ValueError("%s, column 'uncertainty': %r is invalid: the uncertainty must be > 0 cm-1 "
                                     "(one standard deviation)" % (where, s))
                sigma.append(s)
                if "isotopologue" in columns:
                    text = _obs._label(cells[columns["isotopologue"]], where)
                    if text not in codes:
                        codes[text] = len(labels)
                        labels.append(text)
                    label_code.append(codes[text])
                lines.append(line_no)
        except (csv.Error, UnicodeDecodeError) as err:
            raise ValueError("cannot read %r as CSV: %s" % (name, err)) from None
    if header is None:
        raise ValueError("%r holds no header line; the first line that is not a comment must name the columns "
                         "(v, energy, uncertainty, and optionally J, isotopologue)" % name)
    n = len(lines)
    if n == 0:
        raise ValueError("%s: the data hold no levels" % name)

    def row_name(k):
        return "%s, row %d (line %d)" % (name, k + 1, lines[k])

    v_arr, J_arr = np.frombuffer(v, dtype=np.int64), np.frombuffer(J, dtype=np.int64)
    e_arr, s_arr = np.frombuffer(energy, dtype=float), np.frombuffer(sigma, dtype=float)
    code_arr = np.frombuffer(label_code, dtype=np.int_) if labels else np.zeros(n, dtype=np.int_)
    _check_energy_zero(e_arr, v_arr, J_arr, energy_zero, row_name)
    _check_duplicates(code_arr, v_arr, J_arr, labels, row_name)
    label_table = np.array(labels + [None], dtype=object)
    iso = label_table[code_arr] if labels else np.full(n, None, dtype=object)
    return _obs.ObservedLevels(v_arr, J_arr, e_arr, s_arr, iso, energy_zero, source=name, comments=comments)


def _count(text, column, where):
    """A quantum number from a cell: the plain digits fast, anything else through observed.py's checks."""
    if text.isascii() and text.isdigit() and len(text) < 7:
        return int(text)
    return _obs._quantum_number(text, column, where)


def _real(text, column, where):
    try:
        x = float(text)
    except ValueError:
        x = None
    if x is not None and x - x == 0:  # finite
        return x
    return _obs._number(text, column, where)


def _check_header(name, header):
    """Column name -> position, with the messages of observed._validate."""
    prefix = "%s: " % name
    if len(set(header)) != len(header):
        raise ValueError("%r: duplicated column names in the header %s" % (name, header))
    for col in header:
        if col not in _obs._KNOWN:
            close = [k for k in _obs._KNOWN if k.lower() == col.strip().lower()]
            if close:
                raise ValueError("%scolumn %r is not a column name; did you mean %r? (names are case-sensitive: "
                                 "%s)" % (prefix, col, close[0], ", ".join(_obs._KNOWN)))
    missing = [c for c in _obs._REQUIRED if c not in header]
    if missing:
        raise ValueError("%smissing column%s %s: the levels need columns v, energy (cm-1), uncertainty "
                         "(cm-1, one standard deviation), and optionally J and isotopologue; found %s"
                         % (prefix, "s" if len(missing) > 1 else "", ", ".join(repr(m) for m in missing),
                            ", ".join(repr(c) for c in header) or "no columns"))
    return {c: header.index(c) for c in _obs._KNOWN if c in header}


def _check_energy_zero(energy, v, J, energy_zero, row_name):
    """The energy-zero checks of observed.py, vectorised: the first offending row is handed over to it."""
    if energy_zero in ("minimum", "asymptote"):
        bad = np.flatnonzero(energy <= 0)
    elif energy_zero == "lowest":
        bad = np.flatnonzero((energy < 0) | ((v == 0) & (J == 0) & (energy != 0)))
    else:
        bad = np.zeros(0, dtype=int)
    if len(bad):
        k = int(bad[0])
        _obs._check_energy_zero([float(energy[k])], [int(v[k])], [int(J[k])], [None], energy_zero,
                                lambda _: row_name(k))


def _check_duplicates(codes, v, J, labels, row_name):
    order = np.lexsort((np.arange(len(v)), J, v, codes))
    same = (np.diff(codes[order]) == 0) & (np.diff(v[order]) == 0) & (np.diff(J[order]) == 0)
    if np.any(same):
        pairs = np.flatnonzero(same)
        # report the duplicate that appears first in the file, as observed.py does
        later = order[pairs + 1]
        i = int(np.argmin(later))
        first, k = int(order[pairs[i]]), int(later[i])
        label = labels[codes[k]] if labels else None
        raise ValueError("%s, columns isotopologue/v/J: level %sv=%d, J=%d appears twice (also at %s); each "
                         "(isotopologue, v, J) may appear once" % (
                             row_name(k), "%s " % label if label else "", v[k], J[k], row_name(first)))
