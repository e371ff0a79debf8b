"""The forward calculation: vibrational(-rotational) levels of a potential.

`levels(potential, mu, v=None, J=0)` returns a `LevelTable`. The loop over levels runs in C:
each call crosses into the core once per J value with whole arrays.
"""
import functools
import math

import numpy as np

from . import _core, _validate
from .masses import as_reduced_mass
from .potentials import Potential
from .coverage import check_levels
from ._warn import warn as _warn

__all__ = ["LevelTable", "levels"]

_COLUMNS = ("v", "J", "energy", "binding_energy", "inner_turning_point", "outer_turning_point",
            "Bv", "dEdv", "error", "method_error", "rule")

_UNITS = {"v": "", "J": "", "energy": "cm-1", "binding_energy": "cm-1", "inner_turning_point": "A",
          "outer_turning_point": "A", "Bv": "cm-1", "dEdv": "cm-1", "error": "cm-1", "method_error": "cm-1",
          "rule": ""}

#: the rule behind each level (the `rule` column holds these names)
RULES = {1: "first-order", 2: "second-order", 3: "matched", 4: "exact-phase", 5: "exact"}
_RULE_NAMES = np.array([""] + [RULES[k] for k in range(1, 6)], dtype=object)  # indexed by the core's codes

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
    "method_error": "estimated |E - E_exact| of the rule that produced the level (first order, second order, "
                    "matched, exact), numerical error included",
    "rule": "rule that produced the level: first-order, second-order, matched (exact outer end joined to "
            "second-order WKB), exact-phase (exact phase across the well) or exact; quasibound rows: "
            "quasibound-barrier-matched (exact through the barrier, joined beyond it to second-order WKB) or "
            "quasibound-<quasibound_rule>",
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
#: (name, dtype) of every column but rule (object names)
_COLUMN_TYPES = tuple((c, _INT if c in ("v", "J") else np.dtype(bool) if c in _BOOL_COLUMNS else _FLOAT)
                      for c in _COLUMNS if c != "rule")


@functools.lru_cache(maxsize=64)
def _default_columns(n, names):
    """Read-only columns of n rows holding the default of each name (NaN where none), shared by the
    tables of the same length (rows of one block: a small table's construction is mostly such columns;
    read-only, and a view of a read-only block cannot be made writable, so sharing them is safe)."""
    out = []
    for dtype, group in ((_FLOAT, [c for c in names if c not in _BOOL_COLUMNS and c not in ("v", "J")]),
                         (np.dtype(bool), [c for c in names if c in _BOOL_COLUMNS]),
                         (_INT, [c for c in names if c in ("v", "J")])):
        block = np.empty((len(group), n), dtype=dtype)
        for i, c in enumerate(group):
            block[i] = _DEFAULTS.get(c, np.nan) if dtype == _FLOAT else _DEFAULTS.get(c, 0)
        block.setflags(write=False)
        out += list(zip(group, block))
    by_name = dict(out)
    return tuple(by_name[c] for c in names)


def _qb_default(name):
    k = _QB_COLUMNS.index(name)  # (the cache entry of __init__'s bound tables: all six at once)
    return lambda block, J: _default_columns(block.shape[1], _QB_COLUMNS)[k]


# the columns of a table made from the core's block (LevelTable._from_block), by name: how each is made from the
# block (rows v, energy, binding_energy, inner and outer turning point, Bv, dEdv, error, rule code) and the J
_BLOCK_COLUMNS = {name: (lambda row: lambda block, J: block[row])(row) for row, name in enumerate(
    ("v", "energy", "binding_energy", "inner_turning_point", "outer_turning_point", "Bv", "dEdv", "error"))}
_BLOCK_COLUMNS.update({"v": lambda block, J: block[0].astype(int),
                       "J": lambda block, J: np.full(block.shape[1], J),
                       "rule": lambda block, J: _RULE_NAMES[block[8].astype(np.intp)]})
_BLOCK_COLUMNS.update({name: _qb_default(name) for name in _QB_COLUMNS})


class LevelTable:
    """Levels of one potential and reduced mass, as NumPy arrays of equal length.

    Columns: v, J, energy, binding_energy, inner_turning_point, outer_turning_point,
    Bv, dEdv, error (see `describe()`); `vD` maps each J to the non-integer quantum
    number at the dissociation limit (None where it is not defined).
    """

    def __init__(self, columns, *, mu, method, potential, vD=None, notes=(), v_th=None, method_error=None):
        n = len(columns["v"])
        columns = dict(columns)
        # absent columns with a constant default (the quasibound ones of a bound table)
        missing = tuple(c for c in _COLUMNS if c != "rule" and c != "method_error" and columns.get(c) is None)
        if missing:
            columns.update(zip(missing, _default_columns(n, missing)))
        if columns.get("rule") is None:
            columns["rule"] = np.full(n, "exact" if method == "exact" else "", dtype=object)
        self._method_error_source = method_error if callable(method_error) else None
        if method_error is not None and not callable(method_error):
            columns["method_error"] = method_error
        elif method_error is None and method == "exact" and columns.get("method_error") is None:
            columns["method_error"] = columns.get("error")
        rule = np.asarray(columns["rule"], dtype=object)  # names of the rules (set above where missing)
        rule.setflags(write=False)
        attrs = self.__dict__
        attrs["rule"] = rule
        for name, dtype in _COLUMN_TYPES:
            if name == "method_error" and self._method_error_source is not None:
                continue
            col = columns.get(name)
            if col is None:
                col = np.full(n, _DEFAULTS.get(name, np.nan))
            if type(col) is not np.ndarray or col.dtype != dtype:
                col = np.asarray(col, dtype=dtype)
            if len(col) != n:
                raise ValueError("column %s has %d rows, expected %d" % (name, len(col), n))
            col.setflags(write=False)
            attrs[name] = col
        self.mu = float(mu)
        self.method = method
        self.potential = potential
        self.vD_by_J = dict(vD or {})
        # v_th: a dict by J, or a function of the table giving it, called on first use (a table of deep
        # levels asked for by v skips the threshold work, the costliest part of a small matched call)
        self._v_th_source = v_th if callable(v_th) else None
        if self._v_th_source is None:
            self.v_th_by_J = dict(v_th or {})
        self.notes = list(notes)

    @classmethod
    def _from_block(cls, block, J, *, mu, method, potential, vD, v_th, method_error, source):
        """A table of one J from the core's (9, n) block of columns (wkb_levels(..., packed=True)): the
        columns are made on first use (rows of the read-only block, the J, rule and quasibound columns),
        so that a small call pays only for what it reads. The values are those of __init__'s columns.
        method_error and a callable v_th are functions of the table, which may read `source`."""
        self = cls.__new__(cls)
        self.__dict__.update(_block=block, _J=J, _source=source, mu=mu, method=method, potential=potential, vD_by_J=vD,
                             notes=[], _method_error_source=method_error,
                             _v_th_source=v_th if callable(v_th) else None)
        if not callable(v_th):
            self.v_th_by_J = v_th
        return self

    def __getattr__(self, name):
        attrs = self.__dict__
        block = attrs.get("_block")
        if block is not None and name in _BLOCK_COLUMNS:
            col = _BLOCK_COLUMNS[name](block, attrs["_J"])
            col.setflags(write=False)
            attrs[name] = col
            return col
        # method_error is computed on first use where it needs a more accurate calculation
        if name == "method_error" and self.__dict__.get("_method_error_source") is not None:
            col = np.asarray(self._method_error_source(self), dtype=float)
            col.setflags(write=False)
            self.method_error = col
            self._method_error_source = None
            return col
        if name == "v_th_by_J" and self.__dict__.get("_v_th_source") is not None:
            self.v_th_by_J = dict(self._v_th_source(self))
            self._v_th_source = None
            return self.v_th_by_J
        raise AttributeError(name)

    @property
    def v_th(self):
        """Quantum threshold number from the matched rule at the asymptote (levels v < v_th are bound):
        a float for a single-J table, else a dict by J; None where it was not computed (first-order or
        second-order tables with fixed end phases, exact tables) or is not defined (no threshold of bound
        levels: an inner wall below the asymptote). A matched table of levels asked for by v, all deep in
        the well, computes it here on first use (the threshold work is most of such a call's cost)."""
        if len(self.v_th_by_J) == 1:
            return next(iter(self.v_th_by_J.values()))
        return dict(self.v_th_by_J) if self.v_th_by_J else None

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
        return {c: list(getattr(self, c)) if c == "rule" else getattr(self, c).tolist() for c in _COLUMNS}

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
    if type(x) is int and 0 <= x <= _validate.MAX_LEVELS:
        return [x]
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


_ENDS = ("matched", "maslov")


def levels(potential, mu, v=None, J=0, method="wkb", *, order=None, ends=None, langer=False, maslov=None,
           quasibound=False, quasibound_rule=None, width_form="uniform", max_levels=_validate.MAX_LEVELS,
           max_J_values=_validate.MAX_J_VALUES):
    """Levels of `potential` for reduced mass `mu`.

    potential: a Potential object.
    mu: reduced mass in u, or a pair of isotope labels/masses such as ("7Li", "133Cs").
    v: None for every bound level, or an integer / list of integers.
    J: rotational quantum number(s); the centrifugal term is J(J+1) hbar^2/(2 mu r^2)
       (or (J+1/2)^2 with langer=True, fixed end phases only).
    method: "wkb" (semiclassical quantization; see `order` and `ends`) or "exact"
       (the radial Schroedinger equation solved numerically; order, ends and maslov do not apply).
    order: 2 (default) adds the second-order (Dunham) term to first-order WKB; 1 is first order.
    ends: "matched" (default) reads the end phases off an exact solution through the outer turning
       region joined to second-order WKB (levels right up to dissociation; the number of bound levels is
       then the matched count, v < v_th); second order with fixed phases is kept where the outer turning
       point is nearly linear, and wells too quantal for second order (light molecules) get the exact
       phase across the well. "maslov" keeps the fixed phases of `maslov` (the textbook rule with
       order=1). Giving order=1, `maslov` or langer=True selects ends="maslov" unless ends is given.
    maslov: Maslov indices (inner, outer) for ends="maslov": 1 for a smooth turning point, 2 for a hard wall.
    max_levels, max_J_values: work limits (levels computed, J values in one call); a call that
       would exceed one is refused at once with a ValueError. Raise them for longer work.
    quasibound: also return the levels between the asymptote and the top of the barrier of
       V + J(J+1) hbar^2/(2 mu r^2) (columns quasibound, width, theta, lifetime; see wkbfit.quasibound).
       With method="exact" these are exact resonance poles with error estimates (error, width_error).
    quasibound_rule: position rule of semiclassical quasibound levels (wkbfit.quasibound.RULES); None
       is "barrier_matched" (levels with theta < 8: the pole of the radial equation integrated exactly
       through the barrier and joined beyond it to an outgoing second-order WKB wave, position and width;
       the others: "second_order_barrier", second order plus the barrier-phase remainder) whatever `order`
       the bound levels use; "barrier_matched_all" takes the pole for every level (widths at theta >= 8
       within 1e-5 instead of ~5 %, at 2-3x the cost of those rows); "first_order" and "second_order" are
       the plain rules. The `rule` column names the one behind each row.
    width_form: "uniform" (ln(1 + exp(-2 theta)), default) or "kemble" (1/(1 + exp(2 theta))), for the
       widths the barrier-penetration formula gives (not those of barrier-matched rows).

    The table's `method_error` column estimates |E - E_exact| of the rule used for each level, `rule`
    names that rule, `vD` is the first-order quantum number at dissociation and `v_th` (matched ends)
    the quantum threshold number.
    """
    if quasibound:
        from .quasibound import levels_with_quasibound
        return levels_with_quasibound(potential, mu, v, J, method, order=order, ends=ends, langer=langer,
                                      maslov=maslov, rule=quasibound_rule, width_form=width_form)
    if (type(v) in _SMALL_V_TYPES and type(J) is int and type(mu) is float and method == "wkb" and order is None
            and ends is None and maslov is None and langer is False and max_levels is _validate.MAX_LEVELS
            and max_J_values is _validate.MAX_J_VALUES and isinstance(potential, Potential)
            and potential.model != "pointwise"):
        table = _small_call(potential, mu, v, J)
        if table is not None:
            return table
    if not isinstance(potential, Potential):
        raise ValueError("potential must be a wkbfit potential object (Morse, LennardJones, ...), got %r"
                         % (potential,))
    # the common small call (a float mass, default limits) skips the general checks: same outcome
    lo_mu, hi_mu = _validate.MU_RANGE
    mu = float(mu) if type(mu) is float and lo_mu <= mu <= hi_mu else as_reduced_mass(mu)
    if max_levels is not _validate.MAX_LEVELS:
        max_levels = _validate.integer(max_levels, "max_levels", 1, 2 ** 62)
    if max_J_values is not _validate.MAX_J_VALUES:
        max_J_values = _validate.integer(max_J_values, "max_J_values", 1, 2 ** 62)
    if not isinstance(J, (int, np.integer)) and hasattr(J, "__len__"):
        _validate.work_limit(len(J), max_J_values, "J values", "max_J_values", "give fewer J values")
    Js = _as_int_list(J, "J")
    vs = None if v is None else _as_int_list(v, "v")
    if vs is not None:
        _validate.work_limit(len(vs) * len(Js), max_levels, "levels", "max_levels", "give fewer v or J values")
    langer = _validate.flag(langer, "langer")
    if method == "wkb":
        if ends is None:
            ends = "maslov" if (maslov is not None or langer or order == 1) else "matched"
        if ends not in _ENDS:
            raise ValueError("ends=%r is invalid: use 'matched' (end phases from an exact solution, right near "
                             "dissociation) or 'maslov' (fixed phases)" % (ends,))
        order = 2 if order is None else _validate.integer(order, "order", 1, 2,
                                                          "1 (first-order WKB) or 2 (with the second-order term)")
        maslov = (1, 1) if maslov is None else _validate.maslov_pair(maslov)
        if ends == "matched":
            if order != 2:
                raise ValueError("order=1 with ends='matched' is not defined: the matched rule is second order; "
                                 "use order=2, or order=1 with ends='maslov' for the textbook rule")
            if maslov != (1, 1):
                raise ValueError("maslov=%r needs ends='maslov': the matched rule treats smooth turning points; "
                                 "hard walls have fixed phases" % (maslov,))
            if langer:
                raise ValueError("langer=True needs ends='maslov': the matched rule uses the true J(J+1)")
        return _wkb_levels(potential, mu, vs, Js, langer, maslov, order, ends, max_levels)
    if method == "exact":
        exact_levels = SOLVERS.get("exact")
        if exact_levels is None:
            raise ValueError("method='exact' needs the exact radial solver: import wkbfit (or wkbfit.exact) first")
        given = [name for name, val in (("order", order), ("ends", ends), ("maslov", maslov)) if val is not None]
        if given:
            raise ValueError("%s= applies to method='wkb' only: the exact solver has no order or end phases "
                             "(leave it out)" % "=, ".join(given))
        if langer:
            raise ValueError("langer=True applies to WKB only; the exact solver uses J(J+1)")
        return exact_levels(potential, mu, vs, Js, max_levels=max_levels)
    raise ValueError("method=%r is not known; use 'wkb' or 'exact'" % (method,))


_SMALL_V_TYPES = (list, tuple, int)  # the forms of v the small call takes (others: the general path)


def _small_call(potential, mu, vs, J):
    """The common small call, levels(pot, mu, v=[...], J=j) with the default rule (matched ends) on an
    analytic model, on a lean path: the checks cheap for a short list, one core call returning a tuple
    and one block of columns, a table whose columns are made on first use. The results are those of the
    general path (_wkb_levels), which takes over (returns None here) for anything out of the ordinary:
    an argument it would check further or refuse, a failing level, a result it would refuse."""
    lo_mu, hi_mu = _validate.MU_RANGE
    top = _validate.MAX_LEVELS
    if type(vs) is int:
        vs = [vs]
    if not (lo_mu <= mu <= hi_mu and 0 <= J <= top and vs and len(vs) <= top
            and all(type(e) is int and 0 <= e <= top for e in vs)):
        return None
    rot = float(J * (J + 1))
    model, params, curve = potential._core_args()
    try:
        block, rot_index, vD, v_th, _, finite = _core.wkb_levels(model, params, curve, mu, rot, list(vs), 1, 1,
                                                                  order=2, ends=1, max_levels=top, packed=True)
    except (RuntimeError, ValueError):
        return None  # the general path treats the failure (levels one by one, fixed phases, a clear message)
    if not finite:
        return None
    if len(vs) > 1:
        _check_rising(rot_index, block[0], block[1], [J])
    return LevelTable._from_block(block, J, mu=mu, method="wkb-matched", potential=potential,
                                  vD={J: None if vD != vD else float(vD)},
                                  # NaN: skipped for deep levels, computed on first use
                                  v_th={J: float(v_th)} if v_th == v_th else _small_call_v_th,
                                  method_error=_small_call_method_error, source=(potential, mu, J, rot_index))


# the first-use sources of a small call's table: module functions of the table (reading the call's
# arguments from table._source), so that the table pickles like the general path's
def _small_call_v_th(table):
    potential, mu, J, _ = table._source
    return _threshold_numbers(table, potential=potential, mu=mu, rot=[float(J * (J + 1))], Js=[J], known={J: None})


def _small_call_method_error(table):
    potential, mu, J, rot_index = table._source
    return _method_error(table, potential=potential, mu=mu, rot=[float(J * (J + 1))], Js=[J], maslov=(1, 1),
                         langer=False, order=2, ends="matched", cols={"rot_index": rot_index})


def _core_levels(potential, mu, vs, Js, rot, m_in, m_out, order, ends, **kw):
    """One crossing into the core for every rotational factor in `rot`; a failure names the first J."""
    model, params, curve = potential._core_args()
    try:
        return _core.wkb_levels(model, params, curve, mu, rot, vs, m_in, m_out, order=order,
                                ends=1 if ends == "matched" else 0, **kw)
    except ValueError as exc:
        if len(Js) > 1 and "rotation" in str(exc):
            for J in Js:
                try:
                    _core.wkb_levels(model, params, curve, mu, float(J * (J + 1)), [], m_in, m_out)
                except ValueError:
                    raise ValueError("J=%d: %s" % (J, exc)) from None
        elif Js[0] > 0 and not str(exc).startswith("J="):
            raise ValueError("J=%d: %s" % (Js[0], exc)) from None
        raise


# failures that belong to the potential or the request, not to single levels: the whole call fails
_WHOLE_TABLE_ERRORS = ("max_levels=", "above the last bound level", "more than two turning points", "rises only to")


def _wkb_levels(potential, mu, vs, Js, langer, maslov, order=1, ends="maslov", max_levels=_validate.MAX_LEVELS):
    m_in, m_out = maslov
    # plain lists: the core converts them (cheaper than NumPy arrays for the common one-J call)
    rot = [(j + 0.5) ** 2 if langer else float(j * (j + 1)) for j in Js]
    try:
        cols = _core_levels(potential, mu, vs, Js, rot, m_in, m_out, order, ends, max_levels=max_levels)
    except (RuntimeError, ValueError) as exc:
        # a level search fails (typically close to dissociation, or a second-order level where that rule
        # is not valid): keep the levels that succeed instead of failing the whole table
        cols = None
        if (isinstance(exc, RuntimeError) or order == 2) and not any(s in str(exc) for s in _WHOLE_TABLE_ERRORS):
            cols = _levels_one_by_one(potential, mu, rot, vs, m_in, m_out, Js, order, ends)
        if cols is None:
            if isinstance(exc, RuntimeError) and ends == "matched":
                return _fixed_phase_fallback(potential, mu, vs, Js, langer, maslov, order, max_levels, exc)
            raise
    _check_levels(cols, Js)
    cols["J"] = np.full(len(cols["v"]), Js[0]) if len(Js) == 1 else np.asarray(Js)[cols["rot_index"]]
    cols["rule"] = _RULE_NAMES[cols.pop("rule").astype(np.intp)]
    if potential.model == "pointwise" and len(cols["v"]):
        # a piecewise cubic makes the quadrature converge only algebraically: the rule with twice the
        # nodes bounds the error of the reported energies
        try:
            fine = _core_levels(potential, mu, vs, Js, rot, m_in, m_out, order, ends, nodes=64)
        except (RuntimeError, ValueError):
            fine = None
        if fine is not None:
            n = min(len(fine["energy"]), len(cols["energy"]))
            diff = np.zeros(len(cols["energy"]))
            diff[:n] = np.abs(fine["energy"][:n] - cols["energy"][:n])
            cols["error"] = cols["error"] + 2 * diff
    vD = {J: (None if math.isnan(x) else float(x)) for J, x in zip(Js, np.atleast_1d(cols["vD"]).tolist())}
    v_th = None
    if ends == "matched":
        v_th = {J: (None if math.isnan(x) else float(x)) for J, x in zip(Js, np.atleast_1d(cols["v_th"]).tolist())}
        if vs is not None and None in v_th.values():
            # levels asked for by v, all deep in the well: the core skipped the threshold number (NaN);
            # it is computed when table.v_th is first asked for (None there too where it is not defined)
            v_th = functools.partial(_threshold_numbers, potential=potential, mu=mu, rot=rot, Js=Js, known=v_th)
    method = "wkb" if (order == 1 and ends == "maslov") else "wkb2" if ends == "maslov" else "wkb-matched"
    estimate = functools.partial(_method_error, potential=potential, mu=mu, rot=rot, Js=Js, maslov=(m_in, m_out),
                                 langer=langer, order=order, ends=ends, cols=cols)
    table = LevelTable(cols, mu=mu, method=method, potential=potential, vD=vD, v_th=v_th, method_error=estimate,
                       notes=cols.get("notes", ()))
    if potential.model == "pointwise":
        check_levels(table)  # levels reaching beyond a point-wise curve's points
    return table


def _threshold_numbers(table, *, potential, mu, rot, Js, known):
    """v_th by J for the J whose threshold number the core skipped: one call with no levels asked for."""
    todo = [k for k, J in enumerate(Js) if known[J] is None]
    out = dict(known)
    try:
        cols = _core_levels(potential, mu, [], [Js[k] for k in todo], [rot[k] for k in todo], 1, 1, 2, "matched")
    except (RuntimeError, ValueError) as exc:  # the levels stand; only the threshold number is missing
        table.notes.append("the quantum threshold number v_th could not be computed (%s): it is None" % exc)
        return out
    for k, x in zip(todo, np.atleast_1d(cols["v_th"]).tolist()):
        out[Js[k]] = None if math.isnan(x) else float(x)
    return out


def _fixed_phase_fallback(potential, mu, vs, Js, langer, maslov, order, max_levels, exc):
    """Second order with fixed end phases where the matched rule cannot treat the well at all (seen on
    wide Poeschl-Teller wells): said in a warning and the notes; method_error is not estimated (NaN)."""
    note = ("the matched rule cannot treat this well (%s): these are second-order levels with fixed end phases, "
            "whose method error is not estimated; compare with method='exact'" % exc)
    try:
        table = _wkb_levels(potential, mu, vs, Js, langer, maslov, order, "maslov", max_levels)
    except (RuntimeError, ValueError) as exc2:
        raise ValueError("%s; second order with fixed end phases failed too (%s): use method='exact'"
                         % (note.split(": these")[0], exc2)) from None
    _warn(note, RuntimeWarning)
    table.notes.append(note)
    unknown = np.full(len(table), np.nan)
    unknown.setflags(write=False)
    table.method_error = unknown
    return table


def _levels_one_by_one(potential, mu, rot, vs, m_in, m_out, Js, order, ends):
    """The levels one at a time after a failure of the whole table: the levels whose rule fails are
    left out, named in the table's notes and in a warning. A level the caller asked for by number (v
    given) is not left out silently: that raises a ValueError."""
    try:
        first = _core_levels(potential, mu, [], Js, rot, m_in, m_out, order, ends)
    except (RuntimeError, ValueError):
        return None  # not a failure of single levels: the table cannot be set up at all
    counts = np.atleast_1d(first["count"]).tolist()
    pairs = [(k, v) for k in range(len(rot)) for v in (range(counts[k]) if vs is None else vs)]
    failed = []
    rows = {k: [] for k in ("v", "energy", "binding_energy", "inner_turning_point", "outer_turning_point", "Bv",
                            "dEdv", "error", "rule", "rot_index")}
    rule_name = "first-order WKB" if order == 1 else "second-order WKB" if ends == "maslov" else "the matched rule"
    for k, v in pairs:
        try:
            one = _core_levels(potential, mu, [int(v)], [Js[k]], float(rot[k]), m_in, m_out, order, ends)
        except (RuntimeError, ValueError) as exc:
            failed.append("v=%d, J=%d (%s)" % (v, Js[k], exc))
            if vs is not None:
                raise ValueError("%s, level v=%d, J=%d: %s; %s" % (
                    rule_name, v, Js[k], exc, "leave it out of v, or use method='exact'")) from None
            continue
        for c in rows:
            rows[c].append(k if c == "rot_index" else one[c][0])
    cols = {c: np.asarray(x, dtype=np.intp if c in ("rot_index", "rule") else float) for c, x in rows.items()}
    cols["v"] = cols["v"].astype(int)
    cols["vD"] = np.atleast_1d(first["vD"])
    if "v_th" in first:
        cols["v_th"] = np.atleast_1d(first["v_th"])
    cols["count"] = first["count"]
    if failed:
        note = "%s failed for %d level(s), left out: %s" % (rule_name, len(failed), "; ".join(failed))
        _warn(note, RuntimeWarning)
        cols["notes"] = [note]
    return cols


def _method_error(table, *, potential, mu, rot, Js, maslov, langer, order, ends, cols):
    """|E - E_exact| estimates (computed on first use of table.method_error).

    Matched levels: twice the change when the matching point moves from f = 0.5 (the default) to f = 0.7 of the level's
    height above the minimum (the neglected higher-order terms at the matching point), plus the inner
    second-order part and twice the true error of the lowest matched level against the exact phase (as a
    fraction of the spacing), plus the numerical error. Second-order levels of the matched table: the
    largest (E2 - E1)^2/(dE/dv) over the well (the next term of a series in hbar^2 that behaves
    geometrically, common practice) plus twice the larger true error of the lowest and highest
    second-order levels against the exact phase. Exact-phase levels: the
    numerical error. Fixed-phase tables (first order, second order, hard walls, Langer): the distance to
    the matched levels of the same well plus their estimate (the matched rule is the more exact method).
    """
    n = len(table)
    out = np.array(table.error, dtype=float)
    if n == 0:
        return out
    if ends == "matched":
        out = _matched_method_error(table, out, potential, mu, rot, Js, cols)
        # an inner wall of finite height (lower than the asymptote, as for Poeschl-Teller): within a few
        # spacings of its top (five, measured) the levels feel r -> 0, which no rule here resolves reliably
        asymptote = float(table.energy[0] + table.binding_energy[0])
        wall = float(potential(np.array([1e-3 * np.min(table.inner_turning_point)]))[0])
        if wall < asymptote:
            out[table.energy > wall - 5 * table.dEdv] = np.inf
        return out
    return _fixed_method_error(table, out, potential, mu, Js, maslov, langer)


def _matched_method_error(table, out, potential, mu, rot, Js, cols):
    rules = table.rule
    for k, J in enumerate(Js):
        rows = np.nonzero(cols["rot_index"] == k)[0]
        sec = rows[rules[rows] == "second-order"]
        inner = 0.0  # second-order phase error per unit spacing (the inner end of matched levels)
        if len(sec):
            first = _core_levels(potential, mu, list(table.v[sec]), [J], float(rot[k]), 1, 1, 1, "maslov")
            # the envelope over the well: E2 - E1 passes through zero where the second-order term
            # changes sign, the higher-order terms need not
            rel = (table.energy[sec] - first["energy"]) ** 2 / table.dEdv[sec] ** 2
            # anchors: the true error of the lowest and highest second-order level against the exact
            # phase (the error grows towards the ends of the second-order range: the quantal bottom and
            # the increasingly non-linear outer turning point), as a fraction of the spacing
            ends_ = sec[[0, -1]]
            anchor = _core_levels(potential, mu, list(table.v[ends_]), [J], float(rot[k]), 1, 1, 2, "matched",
                                  match_rule=4)
            a_err = np.abs(anchor["energy"] - table.energy[ends_])
            inner = max(np.max(rel), np.max(a_err / table.dEdv[ends_]))
            out[sec] += np.max(rel * table.dEdv[sec]) + 2 * np.max(a_err)
        mat = rows[rules[rows] == "matched"]
        if len(mat):
            other = _core_levels(potential, mu, list(table.v[mat]), [J], float(rot[k]), 1, 1, 2, "matched",
                                 match_fraction=0.7)
            lowest = mat[:1]
            anchor = _core_levels(potential, mu, list(table.v[lowest]), [J], float(rot[k]), 1, 1, 2, "matched",
                                  match_rule=4)
            m_rel = abs(anchor["energy"][0] - table.energy[lowest[0]]) / table.dEdv[lowest[0]]
            out[mat] += (2 * np.abs(other["energy"] - table.energy[mat]) + inner * table.dEdv[mat]
                         + 2 * m_rel * table.dEdv[mat])
    return out


def _fixed_method_error(table, out, potential, mu, Js, maslov, langer):
    # fixed phases: compare with the matched rule where that applies (smooth ends, true J(J+1))
    n = len(table)
    if tuple(maslov) != (1, 1) or langer:
        return np.full(n, np.nan)
    try:
        ref = levels(potential, mu, v=None, J=list(Js))
    except ValueError as exc:
        if "rises only to" not in str(exc):
            raise
        # an inner wall lower than the asymptote: the reference levels by number
        ref = levels(potential, mu, v=sorted(set(table.v.tolist())), J=list(Js))
    ref_err = ref.method_error
    for i in range(n):
        hit = np.nonzero((ref.v == table.v[i]) & (ref.J == table.J[i]))[0]
        if len(hit):
            j = hit[0]
            out[i] += abs(table.energy[i] - ref.energy[j]) + ref_err[j]
        else:
            out[i] = np.inf  # bound here but not by the matched rule: the level itself is spurious
    return out


def _check_levels(cols, Js):
    """Every result finite, and within one J the energies rise strictly with v: a repeated or
    falling energy means an unseen second well or barrier, never a valid answer."""
    names = ("energy", "binding_energy", "inner_turning_point", "Bv", "dEdv", "error")
    if not np.isfinite(np.concatenate([cols[c] for c in names])).all():  # one test; the names on failure
        _validate.finite_result({c: cols[c] for c in names}, "levels")
    _check_rising(cols["rot_index"], cols["v"], cols["energy"], Js)


def _check_rising(rot_index, v, E, Js):
    if len(v) < 2:
        return
    for k in (range(1) if len(Js) == 1 else np.unique(rot_index)):
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
