"""Potential-energy curves of a diatomic molecule: thin Python objects over the C models.

Units: r in angstrom, energies in cm-1. The analytic models have their minimum V(re) = 0
and their asymptote at +De, so level energies are term values above the minimum.
"""
import math

import numpy as np

from . import _core

#: model name -> parameter names, from the core's model table (read once)
MODEL_PARAMETERS = _core.models()

__all__ = ["Potential", "Morse", "LennardJones", "PoschlTeller", "PointwisePotential"]


def _as_r(r):
    """r as a float array (a copy is never needed: the core does not write to it)."""
    arr = np.asarray(r, dtype=float)
    if not np.all(np.isfinite(arr)):
        raise ValueError("r must contain only finite distances (angstrom); got non-finite values")
    if np.any(arr <= 0):
        raise ValueError("r must be > 0 angstrom; got min(r) = %g" % float(np.min(arr)))
    return arr


class Potential:
    """Base class: a named model of the C core with named parameters.

    Subclasses set `model` (the core's model name). Instances are immutable values:
    `with_params(...)` returns a changed copy.
    """

    model = None
    #: parameters that `fit` keeps fixed unless asked otherwise
    fixed_by_default = ()

    def __init__(self, **params):
        names = self.param_names
        missing = [n for n in names if n not in params]
        extra = [n for n in params if n not in names]
        if missing or extra:
            raise ValueError("%s takes parameters %s; missing %s, unknown %s"
                             % (type(self).__name__, ", ".join(names), missing or "none", extra or "none"))
        values = []
        for n in names:
            try:
                values.append(float(params[n]))
            except (TypeError, ValueError):
                raise ValueError("%s parameter %s=%r is not a number" % (type(self).__name__, n, params[n])) from None
        self._params = np.array(values, dtype=float)
        self._params.setflags(write=False)
        # the core checks the values and raises ValueError naming the bad one
        _core.potential_values(self.model, self._params, np.empty(0), self._curve())

    # -- description -------------------------------------------------------------------
    @property
    def param_names(self):
        return MODEL_PARAMETERS[self.model]

    @property
    def params(self):
        """Parameter values by name (a new dict)."""
        return dict(zip(self.param_names, self._params.tolist()))

    def __getattr__(self, name):
        if name.startswith("_"):
            raise AttributeError(name)
        params = self.__dict__.get("_params")
        if params is not None and name in self.param_names:
            return float(params[self.param_names.index(name)])
        raise AttributeError("%s has no attribute %r" % (type(self).__name__, name))

    def with_params(self, **changes):
        """A copy with some parameters changed."""
        p = self.params
        p.update(changes)
        return type(self)(**p)

    def __repr__(self):
        return "%s(%s)" % (type(self).__name__, ", ".join("%s=%.10g" % kv for kv in self.params.items()))

    def _curve(self):
        return None

    def _core_args(self):
        """(model name, parameter array, curve) as the core's functions take them."""
        return self.model, self._params, self._curve()

    # -- evaluation --------------------------------------------------------------------
    @property
    def asymptote(self):
        """The dissociation limit, in this potential's energy zero (cm-1)."""
        return float(self.params["De"])

    def __call__(self, r):
        """V(r) in cm-1 for r in angstrom (scalar or array)."""
        arr = _as_r(r)
        V = _core.potential_values(self.model, self._params, arr.ravel(), self._curve())[0]
        return float(V[0]) if arr.ndim == 0 else V.reshape(arr.shape)

    def derivatives(self, r):
        """(V, dV/dr, d2V/dr2) at r (1-D arrays)."""
        V, dV, d2V, _ = _core.potential_values(self.model, self._params, np.atleast_1d(_as_r(r)), self._curve())
        return V, dV, d2V

    def binding_depth(self, r):
        """asymptote - V(r), computed without cancellation where V nears the asymptote."""
        return _core.potential_values(self.model, self._params, np.atleast_1d(_as_r(r)), self._curve())[3]

    def param_derivatives(self, r):
        """Array (len(r), n_params) of dV/dp for each parameter, in `param_names` order."""
        return _core.param_derivatives(self.model, self._params, np.atleast_1d(_as_r(r)), self._curve())


class Morse(Potential):
    """Morse potential V = De (1 - exp(-a (r - re)))^2 [Morse, Phys. Rev. 34, 57 (1929)].

    De in cm-1, re in angstrom, a in 1/angstrom.
    """

    model = "morse"

    def __init__(self, De, re, a):
        super().__init__(De=De, re=re, a=a)


class LennardJones(Potential):
    """Lennard-Jones (n, m) potential with minimum 0 at re and asymptote De:

    V = De + De/(n - m) [m (re/r)^n - n (re/r)^m], n > m > 2.
    """

    model = "lennard_jones"
    fixed_by_default = ("n", "m")

    def __init__(self, De, re, n=12, m=6):
        super().__init__(De=De, re=re, n=n, m=m)


class PoschlTeller(Potential):
    """Hyperbolic Poeschl-Teller well V = De tanh^2(a (r - re)) = De - De sech^2(a (r - re)).

    Mainly a test case: its exact and first-order WKB levels have closed forms.
    """

    model = "poschl_teller"

    def __init__(self, De, re, a):
        super().__init__(De=De, re=re, a=a)


class PointwisePotential(Potential):
    """A potential known at points (r in angstrom, V in cm-1, in the user's own energy zero).

    Inside the data range a cubic spline with not-a-knot end conditions joins the points
    (it interpolates every point). Below the first point an exponential wall
    A + B exp(-C r) through the three innermost points continues it, and beyond the last
    point an inverse-power tail D - C_n/r^n. The asymptote D and the power n are used
    when given and otherwise fitted exactly to the outermost points (D and n unknown: the
    last three points; one unknown: the last two; none: the last point); `tail` reports
    the result. Each join is continuous to the second derivative: over one interval
    outside the data range (width r[1] - r[0], at most r[0]/2, on the wall side;
    r[-1] - r[-2] on the tail side) the continued end cubic of the spline is blended into
    the extrapolation with a quintic smoothstep weight.

    At least 5 points are needed; r must be > 0 and strictly increasing, and the first
    three points must lie on the repulsive wall (V falling with r and curving upwards). The arrays given are copied.
    """

    model = "pointwise"

    def __init__(self, r, V, asymptote=None, tail_power=None):
        try:
            r = np.array(r, dtype=float, copy=True)
            V = np.array(V, dtype=float, copy=True)
        except (TypeError, ValueError) as exc:
            raise ValueError("r (angstrom) and V (cm-1) must be arrays of numbers: %s" % exc) from None
        if r.ndim != 1 or V.ndim != 1 or r.shape != V.shape:
            raise ValueError("r and V must be 1-D arrays of the same length; got shapes %s and %s"
                             % (r.shape, V.shape))
        for name, val in (("asymptote", asymptote), ("tail_power", tail_power)):
            if val is not None and not math.isfinite(float(val)):
                raise ValueError("%s=%r must be a finite number or None (to fit it)" % (name, val))
        self._curve_capsule, D, n, Cn = _core.pointwise_build(
            r, V, math.nan if asymptote is None else float(asymptote),
            math.nan if tail_power is None else float(tail_power))
        r.setflags(write=False)
        V.setflags(write=False)
        self.r, self.V = r, V
        self.tail = {"asymptote": D, "tail_power": n, "tail_coefficient": Cn,
                     "asymptote_fitted": asymptote is None, "tail_power_fitted": tail_power is None}
        super().__init__()

    def _curve(self):
        return self._curve_capsule

    @property
    def asymptote(self):
        return float(self.tail["asymptote"])

    def with_params(self, **changes):
        if changes:
            raise ValueError("a PointwisePotential has no adjustable parameters")
        return self

    def __repr__(self):
        return "PointwisePotential(%d points, r=%.4g..%.4g A, asymptote=%.10g%s, tail_power=%.6g%s)" % (
            len(self.r), self.r[0], self.r[-1], self.tail["asymptote"],
            " (fitted)" if self.tail["asymptote_fitted"] else "", self.tail["tail_power"],
            " (fitted)" if self.tail["tail_power_fitted"] else "")
