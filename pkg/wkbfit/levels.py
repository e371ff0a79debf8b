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
from .coverage import check_levels

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

# Quasibound levels (levels(..., quasibound=True), quasibound.py). Bound rows: quasibound False, width 0,
# theta inf (no barrier to tunnel through), lifetime inf, width_error 0, above_barrier False.
_QB_COLUMNS = ("quasibound", "width", "theta", "lifetime", "width_error", "above_barrier")
_COLUMNS = _COLUMNS + _QB_COLUMNS
_BOOL_COLUMNS = ("quasibound", "above_barrier")
_DEFAULTS = {"quasibound": False, "width": 0.0, "theta": np.inf, "lifetime": np.inf, "width_error": 0.0,
             "above_barrier": False}
_UNITS.update({"quasibound": "", "width": "cm-1", "theta": "", "lifetime": "s", "width_error": "cm-1",
               "above_barrier": ""})
_DESCRIPTIONS.update({
    "quasibound": "True for a level between the asymptote and the top of the barrier (a shape resonance)",
    "width": "full width at half maximum of a quasibound level (0 for bound levels)",
    "theta": "barrier penetration integral of a quasibound level (inf for bound levels: no barrier to cross)",
    "lifetime": "hbar/width (inf for bound levels)",
    "width_error": "estimated numerical error of the width (exact resonances; NaN where not estimated)",
    "above_barrier": "True for an exact resonance whose energy lies above the barrier top (not trapped)",
})


_INT, _FLOAT = np.dtype(int), np.dtype(float)


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
            if col is None:
                col = np.full(n, _DEFAULTS.get(name, np.nan))
            dtype = _INT if name in ("v", "J") else np.dtype(bool) if name in _BOOL_COLUMNS else _FLOAT
            if type(col) is not np.ndarray or col.dtype != dtype:
                col = np.asarray(col, dtype=dtype)
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
        from ._optional import pandas
        pd = pandas()
        return pd.DataFrame({c: getattr(self, c) for c in _COLUMNS})

    def to_text(self, columns=("v", "J", "energy", "binding_energy", "dEdv", "Bv",
                               "inner_turning_point", "outer_turning_point")):
        """A plain-text table, one level per line: a line of names, a line of units, aligned columns
        (with width, theta and the quasibound flag when the table holds quasibound levels)."""
        from . import reports
        if np.any(self.quasibound) and not set(columns) & set(_QB_COLUMNS):
            columns = tuple(columns) + ("width", "theta", "quasibound")
        return reports.level_table_text(self, list(columns))

    def __str__(self):
        return self.to_text()

    def __repr__(self):
        return "<LevelTable %s: %d levels, mu=%.8g u>" % (self.method, len(self), self.mu)

    def _repr_html_(self):
        from . import reports
        return reports.level_table_html(self)

    def plot(self, ax=None, **options):
        """The potential with these levels between their turning points (`wkbfit.plots.potential`)."""
        from . import plots
        return plots.potential(self.potential, levels=self, ax=ax, **options)


#: level solvers other than WKB, by method name. exact.py registers "exact" when it is imported (wkbfit's
#: __init__ does), so that this module never imports exact.py, which builds on LevelTable: no import circle.
SOLVERS = {}


def _as_int_list(x, name):
    # the common case first: a list of plain non-negative ints in range needs no NumPy round trip
    if type(x) is list and x and all(type(e) is int and 0 <= e <= _validate.MAX_LEVELS for e in x):
        return list(x)
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


def levels(potential, mu, v=None, J=0, method="wkb", *, order=1, langer=False, maslov=(1, 1), quasibound=False,
           quasibound_rule=None, width_form="uniform", max_levels=_validate.MAX_LEVELS,
           max_J_values=_validate.MAX_J_VALUES):
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
    quasibound: also return the levels between the asymptote and the top of the barrier of
       V + J(J+1) hbar^2/(2 mu r^2) (columns quasibound, width, theta, lifetime; see wkbfit.quasibound).
       With method="exact" these are exact resonance poles with error estimates (error, width_error).
    quasibound_rule: position rule of semiclassical quasibound levels (wkbfit.quasibound.RULES); None
       is "second_order_barrier" (second order plus the barrier-phase remainder, the best on test) whatever
       `order` the bound levels use; "first_order" and "second_order" are the plain rules.
    width_form: "uniform" (ln(1 + exp(-2 theta)), default) or "kemble" (1/(1 + exp(2 theta))).
    """
    if quasibound:
        from .quasibound import levels_with_quasibound
        return levels_with_quasibound(potential, mu, v, J, method, order=order, langer=langer, maslov=maslov,
                                      rule=quasibound_rule, width_form=width_form)
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
        exact_levels = SOLVERS.get("exact")
        if exact_levels is None:
            raise ValueError("method='exact' needs the exact radial solver: import wkbfit (or wkbfit.exact) first")
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
    # plain lists: the core converts them (cheaper than NumPy arrays for the common one-J call)
    v_arr = None if vs is None else vs
    rot = [(j + 0.5) ** 2 if langer else float(j * (j + 1)) for j in Js]
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
    cols["J"] = np.full(len(cols["v"]), Js[0]) if len(Js) == 1 else np.asarray(Js)[cols["rot_index"]]
    vD = {J: (None if math.isnan(x) else float(x)) for J, x in zip(Js, np.atleast_1d(cols["vD"]))}
    table = LevelTable(cols, mu=mu, method="wkb" if order == 1 else "wkb2", potential=potential, vD=vD,
                       notes=cols.get("notes", ()))
    check_levels(table)  # levels reaching beyond a point-wise curve's points
    return table


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
    failed = []
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
