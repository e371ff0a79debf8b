"""Warnings when levels of a point-wise curve reach beyond its points.

Outside its first and last point a `PointwisePotential` is continued by the inner-wall and outer-tail
formulas, not by data. A level whose classical turning point lies out there, or (exact levels) whose
wavefunction has a noticeable part of its probability out there, depends on those continuations; the
warning names each such level and how far it reaches.
"""
import numpy as np

from ._warn import warn

__all__ = ["ExtrapolationWarning", "PROBABILITY_OUTSIDE", "check_levels"]

#: exact levels with more than this share of the probability density outside the points are reported:
#: 1e-4 shifts a level by about 1e-4 of the difference between the true and the continued curve there
PROBABILITY_OUTSIDE = 1e-4
#: turning points within this distance (angstrom) of an end point count as inside (rounding)
_EDGE = 1e-6
_trapezoid = getattr(np, "trapezoid", None) or np.trapz
#: levels named in one warning at most
_SHOWN = 6


class ExtrapolationWarning(UserWarning):
    """Levels that depend on the continuation of a point-wise curve beyond its points."""


def _is_pointwise(potential):
    from .potentials import PointwisePotential
    return isinstance(potential, PointwisePotential)


def check_levels(table, wavefunctions=None):
    """Warn (ExtrapolationWarning) about the levels of `table` that reach beyond its curve's points.

    wavefunctions: for exact levels, the (r, u) pairs of every row; the probability outside
    [r_first, r_last] is then checked as well as the turning points.
    """
    pot = table.potential
    if not _is_pointwise(pot) or not len(table):
        return
    r_lo, r_hi = float(pot.r[0]), float(pot.r[-1])
    found = []
    for i in range(len(table)):
        parts = []
        r1, r2 = float(table.inner_turning_point[i]), float(table.outer_turning_point[i])
        if r1 < r_lo - _EDGE:
            parts.append("inner turning point %.6g A is %.3g A inside the first point (%.6g A)" % (r1, r_lo - r1, r_lo))
        if r2 > r_hi + _EDGE:
            parts.append("outer turning point %.6g A is %.3g A beyond the last point (%.6g A)" % (r2, r2 - r_hi, r_hi))
        if wavefunctions is not None and not parts:
            r, u = wavefunctions[i]
            p = u * u
            outside = _trapezoid(np.where(r < r_lo, p, 0.0), r) + _trapezoid(np.where(r > r_hi, p, 0.0), r)
            if outside > PROBABILITY_OUTSIDE:
                parts.append("%.2g of its probability lies outside the points (%.6g..%.6g A)" % (outside, r_lo, r_hi))
        if parts:
            found.append("v=%d%s: %s" % (table.v[i], "" if table.J[i] == 0 else ", J=%d" % table.J[i],
                                         "; ".join(parts)))
    if found:
        more = "" if len(found) <= _SHOWN else "; and %d more levels" % (len(found) - _SHOWN)
        warn("%d %s level%s of the point-wise curve depend%s on its continuation beyond the points "
             "(the inner-wall or outer-tail formula, not data): %s%s" % (
                 len(found), table.method.upper(), "s" if len(found) > 1 else "", "" if len(found) > 1 else "s",
                 " | ".join(found[:_SHOWN]), more), ExtrapolationWarning)
