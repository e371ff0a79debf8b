"""Exact bound levels of the radial Schroedinger equation, and their comparison with WKB.

The equation -eps u'' + [V(r) + eps J(J+1)/r^2] u = E u (eps = hbar^2/(2 mu), true J(J+1))
is solved in C (csrc/radial.c): Numerov's method on a mapped grid in Johnson's renormalized
form, v from node counting, Newton/Cooley energy corrections and Richardson extrapolation
over three steps. Every call crosses into the core once with all J values.

`exact_levels` is what `wkbfit.levels(..., method="exact")` returns; `exact_wavefunction`
gives u(r); `compare_wkb_exact` tabulates WKB minus exact level by level.
"""
import math

import numpy as np

from . import _core, _validate
from .levels import SOLVERS as _SOLVERS, LevelTable, levels as _levels
from .masses import as_reduced_mass
from .potentials import Potential, PointwisePotential
from .coverage import check_levels
from ._warn import warn as _warn

__all__ = ["exact_levels", "exact_wavefunction", "compare_wkb_exact", "WKBComparison"]

#: default target accuracy of every level, cm-1 (the reported error column is honest)
DEFAULT_TOLERANCE = 1e-7
#: default smallest binding energy (cm-1) the grid is built to converge
DEFAULT_MIN_BINDING = 1e-7


def _check_potential(potential):
    if not isinstance(potential, Potential):
        raise ValueError("potential must be a wkbfit potential object (Morse, LennardJones, ...), got %r"
                         % (potential,))


def _positive(name, value):
    try:
        x = _validate.real(value, name, "a finite value > 0 in cm-1")
    except (TypeError, ValueError):
        raise ValueError("%s=%r is not a number; give a value > 0 in cm-1" % (name, value)) from None
    if not (math.isfinite(x) and x > 0):
        raise ValueError("%s=%r is invalid: give a finite value > 0 in cm-1" % (name, value))
    return x


def _ints(x, name):
    out = _validate.integer_list(x, name, 0, 100000)
    if not out:
        raise ValueError("%s must be a non-negative integer or a non-empty list of them; got %r" % (name, x))
    return out


def _ints_unchecked(x, name):
    arr = np.atleast_1d(np.asarray(x))
    if arr.ndim != 1 or arr.size == 0:
        raise ValueError("%s must be a non-negative integer or a non-empty list of them; got %r" % (name, x))
    out = []
    for e in arr.tolist():
        if isinstance(e, bool) or not isinstance(e, (int, float)) or not math.isfinite(e) or e != int(e):
            raise ValueError("%s=%r is invalid: give non-negative integers" % (name, e))
        if e < 0:
            raise ValueError("%s=%d is invalid: quantum numbers are >= 0" % (name, int(e)))
        if e > 100000:
            raise ValueError("%s=%d is out of range: give a value below 100000" % (name, int(e)))
        out.append(int(e))
    return out


#: work limit: points of the exact solver's radial grid; raise with exact_levels(..., max_grid_points=...)
MAX_GRID_POINTS = 2_000_000
#: work limit: levels times the points of their radial grid (about a minute of work at the default);
#: raise with exact_levels(..., max_grid_work=...)
MAX_GRID_WORK = _core.MAX_EXACT_WORK


def _core_call(potential, mu, vs, Js, tolerance, min_binding, max_grid_points=MAX_GRID_POINTS,
               max_levels=_validate.MAX_LEVELS, max_grid_work=MAX_GRID_WORK, **flags):
    model, params, curve = potential._core_args()
    return _core.exact_levels(model, params, curve, float(mu), np.asarray(Js, dtype=np.intc),
                              None if vs is None else np.asarray(vs, dtype=np.intc),
                              energy_tol=tolerance, min_binding=min_binding,
                              max_points=_validate.integer(max_grid_points, "max_grid_points", 1000, 2 ** 40),
                              max_levels=_validate.integer(max_levels, "max_levels", 1, 2 ** 62),
                              max_work=float(_validate.integer(max_grid_work, "max_grid_work", 1000, 10 ** 300)),
                              **flags)


def exact_levels(potential, mu, vs=None, Js=(0,), *, tolerance=DEFAULT_TOLERANCE,
                 min_binding=DEFAULT_MIN_BINDING, max_grid_points=MAX_GRID_POINTS, max_levels=_validate.MAX_LEVELS,
                 max_grid_work=MAX_GRID_WORK):
    """Exact levels as a `LevelTable` (method "exact").

    potential: a Potential; mu: reduced mass in u (or isotope labels, see `as_reduced_mass`);
    vs: None for every bound level, or a list of v; Js: list of J.
    tolerance: target accuracy of every level in cm-1; the `error` column holds the
    estimated numerical error of each energy (Richardson extrapolation + truncation).
    min_binding: levels bound by less than this (cm-1) may be missed or carry a larger error.
    max_grid_points, max_levels, max_grid_work: work limits (grid points per J, levels in the call,
    levels times their grid points), refused at once.
    Raises ValueError for bad input, a v above the last bound level, or no well.
    """
    _check_potential(potential)
    mu = as_reduced_mass(mu)
    Js = _ints(Js, "J")
    vs = None if vs is None else _ints(vs, "v")
    tolerance = _positive("tolerance", tolerance)
    min_binding = _positive("min_binding", min_binding)
    pointwise = isinstance(potential, PointwisePotential)  # wavefunctions to check the reach beyond the points
    res = _core_call(potential, mu, vs, Js, tolerance, min_binding, max_grid_points, max_levels, max_grid_work, **({"want_wavefunctions": True} if pointwise else {}))
    cols = {c: res[c] for c in ("v", "J", "energy", "binding_energy", "inner_turning_point",
                                "outer_turning_point", "Bv", "dEdv", "error")}
    counts = {J: int(c) for J, c in zip(Js, res["count"].tolist())}
    notes = ["exact radial solution; error = estimated numerical error of the energy; dEdv = classical "
             "vibrational quantum at the level energy",
             "bound levels: " + ", ".join("J=%d: %d" % (J, c) for J, c in counts.items())]
    table = LevelTable(cols, mu=mu, method="exact", potential=potential, vD={}, notes=notes)
    table.bound_counts = counts
    check_levels(table, res.get("wavefunctions"))
    worst = np.nanmax(table.error) if len(table) else 0.0
    if worst > 10 * tolerance:
        i = int(np.nanargmax(table.error))
        _warn("exact level v=%d, J=%d (bound by %.3g cm-1) has an estimated error of %.2g cm-1, above "
                      "the tolerance %.2g: the accuracy is limited by round-off in the recurrence (about "
                      "1e-16 De/h^2 for a well of depth De), or, for a level bound by less than min_binding, "
                      "by the extent of the grid" % (table.v[i], table.J[i], table.binding_energy[i], worst,
                                                      tolerance), RuntimeWarning)
    return table


def exact_wavefunction(potential, mu, v, J=0, *, tolerance=DEFAULT_TOLERANCE, min_binding=DEFAULT_MIN_BINDING):
    """(r, u): the normalized radial wavefunction of level (v, J) on the solver's grid.

    r in angstrom (non-uniform grid), u in angstrom^-1/2 with integral u^2 dr = 1, u > 0 near
    the inner wall and u = 0 at both ends of the grid.
    """
    _check_potential(potential)
    mu = as_reduced_mass(mu)
    if np.ndim(v) != 0 or np.ndim(J) != 0:
        raise ValueError("v and J must be single non-negative integers for a wavefunction; got v=%r, J=%r"
                         % (v, J))
    v = _ints(v, "v")[0]
    J = _ints(J, "J")[0]
    res = _core_call(potential, mu, [v], [J], _positive("tolerance", tolerance),
                     _positive("min_binding", min_binding), want_wavefunctions=True)
    return res["wavefunctions"][0]


class WKBComparison:
    """WKB and exact energies level by level, for one potential, mass and J.

    Attributes (NumPy arrays, one row per level bound in both): v, J, wkb_energy,
    exact_energy, difference (= WKB - exact, cm-1), exact_error (numerical error of the exact
    energy), binding_energy (exact). `only_wkb` / `only_exact` list levels one method binds and
    the other does not.
    """

    def __init__(self, wkb, exact, potential, mu):
        self.potential = potential
        self.mu = mu
        key_w = {(int(v), int(J)): i for i, (v, J) in enumerate(zip(wkb.v, wkb.J))}
        key_e = {(int(v), int(J)): i for i, (v, J) in enumerate(zip(exact.v, exact.J))}
        common = sorted(set(key_w) & set(key_e), key=lambda k: (k[1], k[0]))
        iw = np.array([key_w[k] for k in common], dtype=int)
        ie = np.array([key_e[k] for k in common], dtype=int)
        self.v = np.array([k[0] for k in common], dtype=int)
        self.J = np.array([k[1] for k in common], dtype=int)
        self.wkb_energy = wkb.energy[iw] if len(iw) else np.empty(0)
        self.exact_energy = exact.energy[ie] if len(ie) else np.empty(0)
        self.difference = self.wkb_energy - self.exact_energy
        self.exact_error = exact.error[ie] if len(ie) else np.empty(0)
        self.binding_energy = exact.binding_energy[ie] if len(ie) else np.empty(0)
        self.only_wkb = sorted(set(key_w) - set(key_e))
        self.only_exact = sorted(set(key_e) - set(key_w))
        for a in (self.v, self.J, self.wkb_energy, self.exact_energy, self.difference, self.exact_error,
                  self.binding_energy):
            a.setflags(write=False)

    def __len__(self):
        return len(self.v)

    def largest_difference(self):
        """(v, J, WKB - exact) of the level where |WKB - exact| is largest."""
        if not len(self):
            raise ValueError("no level is bound in both the WKB and the exact calculation")
        i = int(np.argmax(np.abs(self.difference)))
        return int(self.v[i]), int(self.J[i]), float(self.difference[i])

    def good_enough(self, uncertainty):
        """Boolean array: |WKB - exact| <= uncertainty (cm-1, scalar or one value per row)."""
        u = _validate.real_array(uncertainty, "uncertainty", "finite numbers > 0 (cm-1), one or one per row",
                                 finite=False)
        try:
            u = np.broadcast_to(u, self.difference.shape)
        except ValueError:
            raise ValueError("uncertainty has shape %s; give one value or one per row (%d)"
                             % (u.shape, len(self))) from None
        if not np.all(np.isfinite(u)) or np.any(u <= 0):
            raise ValueError("uncertainty must be finite and > 0 (cm-1); got %r" % (uncertainty,))
        return np.abs(self.difference) <= u

    def to_dataframe(self):
        from ._optional import pandas
        pd = pandas()
        return pd.DataFrame({"v": self.v, "J": self.J, "wkb_energy": self.wkb_energy,
                             "exact_energy": self.exact_energy, "difference": self.difference,
                             "exact_error": self.exact_error, "binding_energy": self.binding_energy})

    def to_text(self, uncertainty=None):
        """A plain-text table; with `uncertainty` (cm-1) a last column says whether WKB is within it."""
        from . import reports
        return reports.comparison_text(self, uncertainty)

    def _repr_html_(self):
        from . import reports
        return reports.comparison_html(self)

    def plot(self, ax=None, **options):
        """|WKB - exact| level by level (`wkbfit.plots.wkb_vs_exact`)."""
        from . import plots
        return plots.wkb_vs_exact(self, ax=ax, **options)

    def __str__(self):
        return self.to_text()

    def __repr__(self):
        return "<WKBComparison: %d levels, mu=%.8g u>" % (len(self), self.mu)


def compare_wkb_exact(potential, mu, J=0, v=None, *, order=None, ends=None, maslov=None, langer=False,
                      tolerance=DEFAULT_TOLERANCE):
    """WKB minus exact energy for every level bound in both (or the levels v), at each J.

    order, ends, maslov, langer: the WKB rule, as in `levels` (default: second order with matched ends;
    order=1, ends="maslov" is the textbook first-order rule).
    Returns a `WKBComparison`; `str()` of it is a plain-text table, and
    `to_text(uncertainty=0.01)` marks the levels where WKB is within that uncertainty.
    """
    _check_potential(potential)
    mu = as_reduced_mass(mu)
    wkb = _levels(potential, mu, v=v, J=J, method="wkb", order=order, ends=ends, maslov=maslov, langer=langer)
    exact = exact_levels(potential, mu, None if v is None else _ints(v, "v"), _ints(J, "J"), tolerance=tolerance)
    comparison = WKBComparison(wkb, exact, potential, mu)
    comparison.order = 2 if order is None else order
    comparison.ends = wkb.method
    return comparison


_SOLVERS["exact"] = exact_levels  # levels(..., method="exact") dispatches here
