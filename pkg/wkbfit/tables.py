"""Reading data tables: CSV, tab- or whitespace-separated text, with units stated in the header.

The separator is taken from the header line (the first line that is not a comment or blank):
a comma makes it CSV, a tab tab-separated, otherwise runs of blanks separate the values.
Units can be stated in the file, either for every energy column in a comment line
``# unit: MHz`` or per column in its name, ``energy [MHz]`` or ``energy/MHz``.
"""
import csv
import io
import os
import re

from .units import check_unit

__all__ = ["read_table", "split_unit"]

_UNIT_COMMENT = re.compile(r"^\s*units?\s*[:=]\s*(\S+)\s*$", re.IGNORECASE)
_UNIT_IN_NAME = re.compile(r"^(.*?)\s*(?:\[([^\]]+)\]|\(([^)]+)\)|/\s*(\S+))\s*$")


def split_unit(name):
    """(column name, unit or None) from a header cell such as 'energy [MHz]' or 'energy/MHz'."""
    m = _UNIT_IN_NAME.match(name)
    if not m or not m.group(1):
        return name, None
    unit = next(g for g in m.groups()[1:] if g is not None)
    try:
        return m.group(1).strip(), check_unit(unit, "unit of column %r" % m.group(1).strip())
    except ValueError:
        return name, None


def read_table(path, what="data file"):
    """(columns: name -> list of strings, row descriptions, comment lines, units: name -> unit,
    file unit or None) from a text table; ValueError naming the file and line of any problem."""
    name = os.fspath(path)
    try:
        with open(name, newline="", encoding="utf-8-sig") as handle:  # a spreadsheet's "CSV UTF-8" starts with a BOM
            text = handle.read()
    except OSError as err:
        raise ValueError("cannot open %s %r: %s" % (what, name, err.strerror or err)) from None
    except UnicodeDecodeError as err:
        raise ValueError("cannot read %r as text (UTF-8): %s" % (name, err)) from None
    lines = text.splitlines()
    comments, header, rows, line_nos, file_unit, sep = [], None, [], [], None, None
    for line_no, raw in enumerate(lines, start=1):
        stripped = raw.strip()
        if not stripped or (sep == "," and not stripped.strip(",").strip()):
            continue
        if stripped.startswith("#"):
            body = stripped[1:].strip()
            comments.append(body.rstrip(",").strip() if sep in (None, ",") else body)
            m = _UNIT_COMMENT.match(body.rstrip(",").strip())
            if m:
                file_unit = check_unit(m.group(1), "unit stated in %r, line %d" % (name, line_no))
            continue
        if sep is None:
            sep = "," if "," in raw else "\t" if "\t" in raw else " "
        if sep == ",":
            try:
                cells = next(csv.reader(io.StringIO(raw)))
            except (csv.Error, StopIteration) as err:
                raise ValueError("cannot read %r as CSV (line %d): %s" % (name, line_no, err)) from None
            cells = [c.strip() for c in cells]
        elif sep == "\t":
            cells = [c.strip() for c in raw.split("\t")]
        else:
            cells = raw.split()
        if not any(cells):
            continue
        if header is None:
            header = cells
            continue
        rows.append(cells)
        line_nos.append(line_no)
    if header is None:
        raise ValueError("%r holds no header line; the first line that is not a comment must name the columns"
                         % name)
    units, names = {}, []
    for cell in header:
        base, unit = split_unit(cell)
        names.append(base)
        if unit is not None:
            units[base] = unit
    if len(set(names)) != len(names):
        raise ValueError("%r: duplicated column names in the header %s" % (name, header))
    for k, cells in enumerate(rows):
        if len(cells) != len(names):
            raise ValueError("%s, row %d (line %d): %d values for %d columns (%s)"
                             % (name, k + 1, line_nos[k], len(cells), len(names), ", ".join(names)))
    columns = {h: [cells[j] for cells in rows] for j, h in enumerate(names)}
    row_names = ["%s, row %d (line %d)" % (name, k + 1, line_nos[k]) for k in range(len(rows))]
    return columns, row_names, comments, units, file_unit
