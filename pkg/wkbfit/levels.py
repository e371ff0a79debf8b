"""The forward calculation: vibrational(-rotational) levels of a potential.

`levels(potential, mu, v=None, J=0)` returns a `LevelTable`. The loop over levels runs in C:
each call crosses into the core once per J value with whole arrays.
"""
import math
import warnings

import numpy as np

from . import _core, _validate
from .masses import as_reduced_mass
from .potentials import Potential

__all__ = ["LevelTable", "levels"]

_COLUMNS = ("v", "J", "energy", "binding_energy", "inner_turning_point", "outer_turning_point",
            "Bv", "dEdv", "error")

_UNITS = {"v": "", "J": "", "energy": "cm-1", "binding_energy": "cm-1", "inner_turning_point": "A",
          "outer_turning_point": "A", "Bv": "cm-1", "dEdv": "cm-1", "error": "cm-1"}

_DESCRIPTIONS = {
    "v": "vibrational quantum number",
    "J": "rotational quantum number",
    "energy": "level energy in the potential's zero (term value above the minimum for the analytic models)",
    "binding_energy": "asymptote minus energy",
    "inner_turning_point": "inner classical turning point",
    "outer_turning_point": "outer classical turning point",
    "Bv": "rotational constant: average of hbar^2/(2 mu r^2) over the level",
    "dEdv": "local level spacing dE/dv (classical vibrational quantum)",
    "error": "estimated numerical error of the energy (not the semiclassical error)",
}


class LevelTable:
    """Levels of one potential and reduced mass, as NumPy arrays of equal length.

    Columns: v, J, energy, binding_energy, inner_turning_point, outer_turning_point,
    Bv, dEdv, error (see `describe()`); `vD` maps each J to the non-integer quantum
    number at the dissociation limit (None where it is not defined).
    """

    def __init__(self, columns, *, mu, method, potential, vD=None, notes=()):
        n = len(columns["v"])
        for name in _COLUMNS:
            col = columns.get(name)
            col = np.asarray(np.full(n, np.nan) if col is None else col, dtype=int if name in ("v", "J") else float)
            if len(col) != n:
                raise ValueError("column %s has %d rows, expected %d" % (name, len(col), n))
            col.setflags(write=False)
            setattr(self, name, col)
        self.mu = float(mu)
        self.method = method
        self.potential = potential
        self.vD_by_J = dict(vD or {})
        self.notes = list(notes)

    @property
    def vD(self):
        """Quantum number at dissociation: a float for a single-J table, else a dict by J."""
        if len(self.vD_by_J) == 1:
            return next(iter(self.vD_by_J.values()))
        return dict(self.vD_by_J)

    @property
    def columns(self):
        return _COLUMNS

    @staticmethod
    def describe():
        """Column name -> (unit, meaning)."""
        return {c: (_UNITS[c], _DESCRIPTIONS[c]) for c in _COLUMNS}

    def __len__(self):
        return len(self.v)

    def __getitem__(self, name):
        if name not in _COLUMNS:
            raise KeyError("no column %r; columns are %s" % (name, ", ".join(_COLUMNS)))
        return getattr(self, name)

    def level(self, v, J=0):
        """Row index of level (v, J); ValueError if absent."""
        v = _validate.integer(v, "v")
        J = _validate.integer(J, "J")
        idx = np.nonzero((self.v == v) & (self.J == J))[0]
        if len(idx) == 0:
            raise ValueError("level v=%d, J=%d is not in this table (%d levels)" % (v, J, len(self)))
        return int(idx[0])

    def to_dict(self):
        return {c: getattr(self, c).tolist() for c in _COLUMNS}

    def to_dataframe(self):
        import pandas as pd
        return pd.DataFrame({c: getattr(self, c) for c in _COLUMNS})

    def to_text(self, columns=("v", "J", "energy", "binding_energy", "dEdv", "Bv",
                               "inner_turning_point", "outer_turning_point")):
        """A plain-text table, one level per line."""
        head = "  ".join("%14s" % ("%s%s" % (c, " [%s]" % _UNITS[c] if _UNITS[c] else "")) for c in columns)
        lines = ["%s levels of %r, mu = %.10g u" % (self.method.upper(), self.potential, self.mu), head]
        for i in range(len(self)):
            cells = []
            for c in columns:
                x = getattr(self, c)[i]
                cells.append("%14d" % x if c in ("v", "J") else "%14.6f" % x if abs(x) < 1e7 else "%14.6e" % x)
            lines.append("  ".join(cells))
        for J, vD in sorted(self.vD_by_J.items()):
            lines.append("J=%d: quantum number at dissociation vD = %s" % (
                J, "%.6f" % vD if vD is not None else "not defined (no bound levels)"))
        lines.extend(self.notes)
        return "\n".join(lines)

    def __str__(self):
        return self.to_text()

    def __repr__(self):
        return "<LevelTable %s: %d levels, mu=%.8g u>" % (self.method, len(self), self.mu)

    def _repr_html_(self):
        cols = ("v", "J", "energy", "binding_energy", "dEdv", "Bv", "inner_turning_point", "outer_turning_point")
        rows = "".join("<tr>%s</tr>" % "".join(
            "<td>%s</td>" % (int(getattr(self, c)[i]) if c in ("v", "J") else "%.6f" % getattr(self, c)[i])
            for c in cols) for i in range(len(self)))
        head = "".join("<th>%s%s</th>" % (c, " [%s]" % _UNITS[c] if _UNITS[c] else "") for c in cols)
        return "<table><caption>%s levels, mu = %.8g u</caption><tr>%s</tr>%s</table>" % (
            self.method.upper(), self.mu, head, rows)


def _as_int_list(x, name):
    return _validate.integer_list(x, name)


def _as_int_list_unchecked(x, name):
    if isinstance(x, (bool, np.bool_)):
        raise ValueError("%s must be a non-negative integer or a list of them; got %r" % (name, x))
    if isinstance(x, (int, np.integer)):
        out = [int(x)]
    else:
        try:
            arr = np.atleast_1d(np.asarray(x, dtype=float))
        except (TypeError, ValueError):
            arr = None
        if arr is None or arr.ndim != 1 or not np.all(np.isfinite(arr)) or np.any(arr != np.round(arr)):
            raise ValueError("%s must be a non-negative integer or a list of them; got %r" % (name, x))
        out = [int(e) for e in arr.tolist()]
    bad = [e for e in out if e < 0]
    if bad:
        raise ValueError("%s=%d is invalid: quantum numbers are >= 0" % (name, bad[0]))
    return out


def levels(potential, mu, v=None, J=0, method="wkb", *, order=1, langer=False, maslov=(1, 1),
           max_levels=_validate.MAX_LEVELS, max_J_values=_validate.MAX_J_VALUES):
    """Levels of `potential` for reduced mass `mu`.

    potential: a Potential object.
    mu: reduced mass in u, or a pair of isotope labels/masses such as ("7Li", "133Cs").
    v: None for every bound level, or an integer / list of integers.
    J: rotational quantum number(s); the centrifugal term is J(J+1) hbar^2/(2 mu r^2)
       (or (J+1/2)^2 with langer=True, first-order WKB only).
    method: "wkb" (semiclassical quantization; see `order` and `maslov`) or "exact"
       (the radial Schroedinger equation solved numerically).
    order: 1 for first-order WKB, 2 to add the second-order (Dunham) term, which removes most of the
       first-order error except close to dissociation, where it is not valid. The number of bound
       levels and vD are always first-order values.
    maslov: Maslov indices (inner, outer): 1 for a smooth turning point, 2 for a hard wall.
    max_levels, max_J_values: work limits (levels computed, J values in one call); a call that
       would exceed one is refused at once with a ValueError. Raise them for longer work.
    """
    if not isinstance(potential, Potential):
        raise ValueError("potential must be a wkbfit potential object (Morse, LennardJones, ...), got %r"
                         % (potential,))
    mu = as_reduced_mass(mu)
    max_levels = _validate.integer(max_levels, "max_levels", 1, 2 ** 62)
    max_J_values = _validate.integer(max_J_values, "max_J_values", 1, 2 ** 62)
    if not isinstance(J, (int, np.integer)) and hasattr(J, "__len__"):
        _validate.work_limit(len(J), max_J_values, "J values", "max_J_values", "give fewer J values")
    Js = _as_int_list(J, "J")
    vs = None if v is None else _as_int_list(v, "v")
    if vs is not None:
        _validate.work_limit(len(vs) * len(Js), max_levels, "levels", "max_levels", "give fewer v or J values")
    langer = _validate.flag(langer, "langer")
    if method == "wkb":
        order = _validate.integer(order, "order", 1, 2,
                                  "1 (first-order WKB) or 2 (with the second-order term)")
        maslov = _validate.maslov_pair(maslov)
        return _wkb_levels(potential, mu, vs, Js, langer, maslov, order, max_levels)
    if method == "exact":
        from .exact import exact_levels
        if langer:
            raise ValueError("langer=True applies to WKB only; the exact solver uses J(J+1)")
        return exact_levels(potential, mu, vs, Js, max_levels=max_levels)
    raise ValueError("method=%r is not known; use 'wkb' or 'exact'" % (method,))


def _wkb_levels(potential, mu, vs, Js, langer, maslov, order=1, max_levels=_validate.MAX_LEVELS):
    try:
        m_in, m_out = (int(m) for m in maslov)
    except (TypeError, ValueError):
        raise ValueError("maslov must be a pair (inner, outer) of 1 (smooth) or 2 (hard wall); got %r"
                         % (maslov,)) from None
    if m_in not in (1, 2) or m_out not in (1, 2):
        raise ValueError("maslov=%r is invalid: each index is 1 (smooth turning point) or 2 (hard wall)"
                         % (maslov,))
    model, params, curve = potential._core_args()
    v_arr = None if vs is None else np.asarray(vs, dtype=np.intc)
    J = np.asarray(Js, dtype=float)
    rot = (J + 0.5) ** 2 if langer else J * (J + 1)
    # one crossing into the core for every J
    try:
        cols = _core.wkb_levels(model, params, curve, mu, rot, v_arr, m_in, m_out, order=order,
                                max_levels=max_levels)
    except (RuntimeError, ValueError) as exc:
        # the second-order rule fails for some level (typically close to dissociation, where it is not
        # valid): keep the levels that succeed instead of failing the whole table
        cols = None
        if (order == 2 or isinstance(exc, RuntimeError)) and "max_levels=" not in str(exc):
            # (first order too: a level search that does not converge in the sweep fails alone)
            cols = _second_order_by_level(model, params, curve, mu, rot, vs, m_in, m_out, Js, exc, order)
        if cols is None:
            if isinstance(exc, RuntimeError):
                raise
            _name_failing_J(exc, Js, model, params, curve, mu, m_in, m_out)
    _check_levels(cols, Js)
    cols["J"] = np.asarray(Js)[cols["rot_index"]]
    vD = {J: (None if math.isnan(x) else float(x)) for J, x in zip(Js, np.atleast_1d(cols["vD"]))}
    return LevelTable(cols, mu=mu, method="wkb" if order == 1 else "wkb2", potential=potential, vD=vD,
                      notes=cols.get("notes", ()))


def _name_failing_J(exc, Js, model, params, curve, mu, m_in, m_out):
    """Re-raises a level error with the first J that fails named."""
    if len(Js) > 1 and "rotation" in str(exc):
        for J in Js:
            try:
                _core.wkb_levels(model, params, curve, mu, float(J * (J + 1)), np.empty(0, np.intc), m_in, m_out)
            except ValueError:
                raise ValueError("J=%d: %s" % (J, exc)) from None
    elif Js[0] > 0:
        raise ValueError("J=%d: %s" % (Js[0], exc)) from None
    raise exc


def _second_order_by_level(model, params, curve, mu, rot, vs, m_in, m_out, Js, first_error, order=2):
    """Second-order levels one at a time after a failure of the whole table: the levels whose
    second-order rule fails are left out, named in the table's notes and in a warning. A level the
    caller asked for by number (v given) is not left out silently: that raises a ValueError."""
    rot1 = np.atleast_1d(rot)
    try:
        if order == 2:
            first = _core.wkb_levels(model, params, curve, mu, rot1, None if vs is None else
                                     np.asarray(vs, dtype=np.intc), m_in, m_out, order=1)
            pairs = list(zip(first["rot_index"].tolist(), first["v"].tolist()))
        else:
            first = _core.wkb_levels(model, params, curve, mu, rot1, np.empty(0, np.intc), m_in, m_out)
            counts = np.atleast_1d(first["count"]).tolist()
            pairs = [(k, v) for k in range(len(rot1)) for v in (range(counts[k]) if vs is None else vs)]
    except (RuntimeError, ValueError):
        return None  # not a failure of single levels: the table cannot be set up at all
    keep, failed = [], []
    rows = {k: [] for k in ("v", "energy", "binding_energy", "inner_turning_point", "outer_turning_point", "Bv",
                            "dEdv", "error", "rot_index")}
    for k, v in pairs:
        k, v = int(k), int(v)
        try:
            one = _core.wkb_levels(model, params, curve, mu, float(rot1[k]),
                                   np.array([v], dtype=np.intc), m_in, m_out, order=order)
        except (RuntimeError, ValueError) as exc:
            failed.append("v=%d, J=%d (%s)" % (v, Js[k], exc))
            if vs is not None:
                raise ValueError("%s, level v=%d, J=%d: %s; %s" % (
                "second order" if order == 2 else "first-order WKB", v, Js[k], exc,
                "use order=1 for it, or leave it out of v" if order == 2 else
                "leave it out of v, or use method='exact'")) from None
            continue
        for c in rows:
            rows[c].append(k if c == "rot_index" else one[c][0])
    cols = {c: np.asarray(x, dtype=np.intp if c == "rot_index" else float) for c, x in rows.items()}
    cols["vD"] = np.atleast_1d(first["vD"])
    if failed:
        note = "%s WKB failed for %d level(s), left out: %s" % (
            "second-order" if order == 2 else "first-order", len(failed), "; ".join(failed))
        warnings.warn(note, RuntimeWarning, stacklevel=4)
        cols["notes"] = [note]
    return cols


def _check_levels(cols, Js):
    """Every result finite, and within one J the energies rise strictly with v: a repeated or
    falling energy means an unseen second well or barrier, never a valid answer."""
    _validate.finite_result({c: cols[c] for c in ("energy", "binding_energy", "inner_turning_point", "Bv",
                                                    "dEdv", "error")}, "levels")
    rot_index, v, E = cols["rot_index"], cols["v"], cols["energy"]
    for k in np.unique(rot_index):
        rows = np.flatnonzero(rot_index == k)
        order = np.argsort(v[rows], kind="stable")
        vk, Ek = v[rows][order], E[rows][order]
        same_v = np.diff(vk) == 0
        bad = np.flatnonzero(~same_v & ~(np.diff(Ek) > 0))
        if len(bad):
            i = bad[0]
            raise ValueError("J=%d: the levels v=%d and v=%d have energies %.10g and %.10g cm-1, which do not "
                             "rise with v: the potential has a second well or a barrier that single-well WKB "
                             "cannot treat; use method='exact'" % (Js[k], vk[i], vk[i + 1], Ek[i], Ek[i + 1]))
