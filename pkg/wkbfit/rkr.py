"""RKR inversion: from measured term values G(v) and rotational constants B(v) to a potential.

The Rydberg-Klein-Rees method (Rydberg 1931/1933, Klein 1932, Rees 1947) gives the two classical
turning points r1(v) < r2(v) at the energy G(v) from two integrals over the levels below v:

    f(v) = (r2 - r1)/2     = sqrt(C_u/mu) int_{-1/2}^{v} dv' / sqrt(G(v) - G(v'))
    g(v) = (1/r1 - 1/r2)/2 = sqrt(mu/C_u) int_{-1/2}^{v} B(v') dv' / sqrt(G(v) - G(v'))
    r_{1,2} = sqrt(f^2 + f/g) -+ f

with C_u = hbar^2/(2 u) (`wkbfit.HBAR2_OVER_2U`). G and B are given as Dunham expansions in (v + 1/2),
measured from the potential minimum (the Y_00 term is left out):

    G(v) = Y_10 (v+1/2) + Y_20 (v+1/2)^2 + ...     G_coefficients = (Y_10, Y_20, Y_30, ...)
    B(v) = Y_01 + Y_11 (v+1/2) + Y_21 (v+1/2)^2 + ... B_coefficients = (Y_01, Y_11, Y_21, ...)

Units: Y_kl in cm-1, mu in u, turning points in angstrom, f in angstrom and g in 1/angstrom.

RKR is a first-order semiclassical inversion: it is exact for a Morse G(v) (whose WKB levels are
exact) but otherwise carries the first-order WKB error of the levels it starts from (physics.md
sections 2 and 5). A Dunham expansion is trustworthy only over the levels it was fitted to; ask for
turning points there. The integrals run in C (csrc/rkr.c) with Gauss-Legendre quadrature after the
substitution v' = v - w^2, which removes the square-root end point.
"""
import math

import numpy as np

from . import _core, _validate
from .masses import as_reduced_mass
from .potentials import PointwisePotential

__all__ = ["RKRTurningPoints", "rkr_turning_points", "rkr_potential"]


class RKRTurningPoints:
    """RKR turning points at the quantum numbers v, as read-only NumPy arrays of equal length.

    v: vibrational quantum numbers (> -1/2, need not be integers); energy: G(v), cm-1 above the
    minimum; inner_turning_point, outer_turning_point: r1 < r2, angstrom; f = (r2 - r1)/2
    (angstrom) and g = (1/r1 - 1/r2)/2 (1/angstrom), Klein's integrals; error: a conservative
    estimate of the quadrature error of the turning points (angstrom), not of the RKR
    approximation itself. re (angstrom) = sqrt(C_u/(mu Y_01)), the limit of both turning points
    at v -> -1/2; mu in u.
    """

    columns = ("v", "energy", "inner_turning_point", "outer_turning_point", "f", "g", "error")

    def __init__(self, v, data, mu, re):
        self.v = np.array(v, dtype=float)
        self.energy = data["energy"]
        self.inner_turning_point = data["inner_turning_point"]
        self.outer_turning_point = data["outer_turning_point"]
        self.f = data["f"]
        self.g = data["g"]
        self.error = data["error"]
        for name in self.columns:
            getattr(self, name).setflags(write=False)
        self.mu = float(mu)
        self.re = float(re)

    def __len__(self):
        return len(self.v)

    def to_text(self):
        """A plain-text table, one v per line (names, units, aligned columns)."""
        from . import reports
        return reports.rkr_text(self)

    def to_dataframe(self):
        """The turning points as a pandas DataFrame (columns as `columns`)."""
        from ._optional import pandas
        pd = pandas()
        return pd.DataFrame({c: getattr(self, c) for c in self.columns})

    def _repr_html_(self):
        from . import reports
        return reports.rkr_html(self)

    def plot(self, potential=None, ax=None, **options):
        """The turning points, against a model curve when one is given (`wkbfit.plots.rkr_curve`)."""
        from . import plots
        return plots.rkr_curve(self, potential, ax=ax, **options)

    def __str__(self):
        return self.to_text()

    def __repr__(self):
        return "<RKRTurningPoints: %d values of v, mu=%.8g u, re=%.8g A>" % (len(self), self.mu, self.re)


def _coefficients(c, name, first_power, dunham_l):
    arr = _validate.real_array(c, name, "a sequence of numbers (cm-1)", finite=False)  # a copy
    if arr.ndim != 1 or arr.size == 0:
        raise ValueError("%s must be a non-empty 1-D sequence of numbers (cm-1), got shape %s" % (name, arr.shape))
    bad = np.nonzero(~np.isfinite(arr))[0]
    if len(bad):
        k = int(bad[0])
        raise ValueError("%s[%d] (Y_%d%d, the coefficient of (v+1/2)^%d) = %r is not a finite number"
                         % (name, k, k + first_power, dunham_l, k + first_power, arr[k]))
    return arr


def _quantum_numbers(v):
    arr = _validate.real_array(v, "v", "a number or a sequence of numbers > -1/2", finite=False)
    if arr.ndim > 1:
        raise ValueError("v must be a number or a 1-D sequence of numbers, got shape %s" % (arr.shape,))
    return np.atleast_1d(arr)


def _quadrature(points):
    if isinstance(points, (int, np.integer)) and not isinstance(points, (bool, np.bool_)) and \
            not 0 <= points <= 1 << 20:
        raise ValueError("quadrature_points=%r is invalid: use 32, 64, 96, 100, 128, 256, 512 or 1024" % (points,))
    if isinstance(points, (bool, np.bool_)) or not isinstance(points, (int, np.integer)):
        raise ValueError("quadrature_points must be an integer (32, 64, 96, 100, 128, 256, 512 or 1024), "
                         "got %r" % (points,))
    return int(points)


def rkr_turning_points(G_coefficients, B_coefficients, mu, v, *, quadrature_points=100):
    """First-order RKR turning points at the quantum numbers v (see the module documentation).

    G_coefficients: (Y_10, Y_20, ...) in cm-1, G(v) = sum_k Y_k0 (v+1/2)^k for k >= 1 (from the
        potential minimum; no Y_00).
    B_coefficients: (Y_01, Y_11, ...) in cm-1, B(v) = sum_k Y_k1 (v+1/2)^k for k >= 0.
    mu: reduced mass in u, an isotopologue label such as "1H35Cl", or a pair of isotopes.
    v: a number or a sequence of numbers > -1/2, where G(v) still increases (dG/dv > 0 on
        [-1/2, v]) and B stays positive.
    quadrature_points: Gauss-Legendre nodes per integral (a size GSL tabulates: 32, 64, 96, 100,
        128, 256, 512 or 1024).
    Returns an RKRTurningPoints object.
    """
    G = _coefficients(G_coefficients, "G_coefficients", 1, 0)
    B = _coefficients(B_coefficients, "B_coefficients", 0, 1)
    mu = as_reduced_mass(mu)
    vs = _quantum_numbers(v)
    try:
        data = _core.rkr(G, B, mu, vs, _quadrature(quadrature_points))
    except RuntimeError as exc:
        # non-finite integrals come from the coefficients and v given: an input problem
        raise ValueError("%s: G(v) and B(v) do not give finite RKR integrals there; use v inside the range of "
                         "the data the expansions were fitted to" % str(exc).rstrip(".")) from None
    _validate.finite_result({k: data[k] for k in ("energy", "inner_turning_point", "outer_turning_point")},
                            "RKR turning points (G(v) and B(v) overflow: use v inside the range of the data)")
    re = math.sqrt(_core.HBAR2_OVER_2U / (mu * B[0])) if B[0] > 0 else math.nan
    return RKRTurningPoints(vs, data, mu, re)


#: work limit of the default v of rkr_potential (8 points per level up to the turnover of G(v))
_DEFAULT_V_LIMIT = 10000


def _default_quantum_numbers(G):
    """v from just above -1/2 up to the last integer v below the first maximum of G(v), spaced
    uniformly in sqrt(v + 1/2): near the minimum the turning points then move by equal steps in r
    (r - re grows like sqrt(v + 1/2)), and at the top the steps in v are about 1/4."""
    slope_roots = np.polynomial.Polynomial(np.concatenate([[0.0], G])).deriv().roots()
    x_top = [x.real for x in slope_roots if abs(x.imag) <= 1e-9 * abs(x) and x.real > 0 and math.isfinite(x.real)]
    if not x_top:
        raise ValueError("G(v) never stops increasing, so there is no natural end to the RKR curve; "
                         "give v explicitly (the range of the levels the Dunham expansion was fitted to)")
    v_top = math.ceil(min(x_top) - 0.5) - 1  # the last integer v strictly below the maximum
    if v_top < 1:
        raise ValueError("G(v) stops increasing at v = %.6g, below v = 1; give v explicitly" % (min(x_top) - 0.5))
    if v_top > _DEFAULT_V_LIMIT:
        raise ValueError("G(v) stops increasing only at v = %.6g: too far for a default set of points (more than "
                         "v = %d); give v explicitly (the range of the levels the expansion was fitted to)"
                         % (min(x_top) - 0.5, _DEFAULT_V_LIMIT))
    n = 8 * (v_top + 1)
    s = np.linspace(0.0, math.sqrt(v_top + 0.5), n + 1)[1:]
    return s * s - 0.5


def rkr_potential(G_coefficients, B_coefficients, mu, v=None, asymptote=None, tail_power=None, *,
                  quadrature_points=100):
    """A `PointwisePotential` through the RKR turning points (energies in cm-1 above the minimum).

    The points are the inner turning points (from the highest v down), the minimum (re, 0) with
    re = sqrt(C_u/(mu Y_01)) (the limit of both turning points at v -> -1/2), and the outer turning
    points (from the lowest v up), each at the energy G(v). Arguments as in `rkr_turning_points`.
    The curve between the points is a cubic spline, so its accuracy depends on the spacing of the
    points: near the minimum r - re grows like sqrt(v + 1/2), so include fractional v there (integer
    v alone leave a wide gap around re). v=None takes 8 (v_top + 1) values spaced uniformly in
    sqrt(v + 1/2) up to v_top, the last integer v below the maximum of G(v); that is meaningful only
    if the expansions hold that far: for measured constants, pass v within the range of the data.
    asymptote (cm-1) and tail_power set the long-range tail D - C_n/r^n beyond the last point,
    fitted to the outermost points when None (see `PointwisePotential`).
    """
    G = _coefficients(G_coefficients, "G_coefficients", 1, 0)
    vs = _default_quantum_numbers(G) if v is None else np.unique(_quantum_numbers(v))
    if len(vs) < 2:
        raise ValueError("at least two values of v are needed for an RKR potential (it has 2 n + 1 points), "
                         "got %d" % len(vs))
    tp = rkr_turning_points(G, B_coefficients, mu, vs, quadrature_points=quadrature_points)
    r = np.concatenate([tp.inner_turning_point[::-1], [tp.re], tp.outer_turning_point])
    V = np.concatenate([tp.energy[::-1], [0.0], tp.energy])
    try:
        return PointwisePotential(r, V, asymptote=asymptote, tail_power=tail_power)
    except ValueError as exc:
        if "inner wall" not in str(exc):
            raise
        raise ValueError("%s. The RKR inner turning points near v = %.6g do not form a repulsive wall: "
                         "G(v) and B(v) are not consistent there (often an expansion used beyond its data); "
                         "use a smaller range of v" % (str(exc).rstrip("."), vs[-1])) from None
