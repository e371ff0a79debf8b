"""The SciPy baseline shared by the benchmarks: first-order WKB levels (both ends smooth, v + 1/2)
written as a careful user would, at the accuracy the benchmarks compare (about 1e-11 relative):

* the potential in plain Python floats (math, not NumPy, for scalar calls);
* scipy.optimize.brentq for the turning points;
* scipy.integrate.quad for the action after the substitution r = c + h sin(theta), which removes
  the square-root behaviour of sqrt(E - V) at both turning points (the integrand
  sqrt(E - V(r(theta))) h cos(theta) is smooth, so Gauss-Kronrod converges in one or two
  subdivisions instead of hundreds), epsrel = 1e-12 (the action to ~1e-11 relative);
* scipy.optimize.brentq on the action for each energy, solved upwards from v = 0, each bracket
  centred on the quadratic extrapolation of the levels below (a bracket without a sign change
  falls back to [level below, asymptote]), energy tolerance 1e-11 of De.
"""
import math

import numpy as np
from scipy.integrate import quad
from scipy.optimize import brentq, minimize_scalar

HBAR2_OVER_2U = 16.85762916809  # cm-1 A^2, CODATA 2022 (the value of wkbfit.HBAR2_OVER_2U)

_QUAD_EPSREL = 1e-11
_ENERGY_RTOL = 1e-11


class ScipyWKB:
    """One well: model "morse" (De, re, a) or "lennard_jones" (De, re, n, m), reduced mass mu (u), J."""

    def __init__(self, model, params, mu, J=0):
        self.eps = eps = HBAR2_OVER_2U / mu
        rot = eps * J * (J + 1)
        if model == "morse":
            De, re, a = params

            def V(r):
                return De * (1 - math.exp(-a * (r - re))) ** 2 + rot / (r * r)
            self.r_small = max(re - math.log(101.0) / a, 1e-3 * re)
        else:
            De, re, n, m = params

            def V(r):
                s = re / r
                return De + De / (n - m) * (m * s ** n - n * s ** m) + rot / (r * r)
            self.r_small = re * 0.5
        self.V, self.De = V, De
        self.r_bottom = minimize_scalar(V, bounds=(self.r_small, 3 * re), method="bounded",
                                        options={"xatol": 1e-12 * re}).x
        self.bottom = V(self.r_bottom)

    def turning_points(self, E):
        V = self.V
        r1 = brentq(lambda r: V(r) - E, self.r_small, self.r_bottom, xtol=1e-14, rtol=1e-14)
        hi = 2 * self.r_bottom
        while V(hi) < E:
            hi *= 2
        r2 = brentq(lambda r: V(r) - E, self.r_bottom, hi, xtol=1e-14, rtol=1e-14)
        return r1, r2

    def action(self, E):
        """integral of sqrt((E - V)/eps) dr between the turning points, with r = c + h sin(theta)."""
        r1, r2 = self.turning_points(E)
        c, h = 0.5 * (r1 + r2), 0.5 * (r2 - r1)
        V, sin, cos = self.V, math.sin, math.cos

        def integrand(t):
            return math.sqrt(max(E - V(c + h * sin(t)), 0.0)) * cos(t)
        val = quad(integrand, -0.5 * math.pi, 0.5 * math.pi, epsabs=0, epsrel=_QUAD_EPSREL, limit=100)[0]
        return val * h / math.sqrt(self.eps)

    def vD(self):
        """Quantum number at the asymptote (J = 0 wells): r = r1 + t^2 removes the inner square root."""
        r1 = self.turning_points(self.De * (1 - 1e-12))[0]
        De, V = self.De, self.V
        val = quad(lambda t: 2 * t * math.sqrt(max(De - V(r1 + t * t), 0.0)), 0, np.inf,
                   epsabs=0, epsrel=_QUAD_EPSREL, limit=400)[0]
        return val / math.sqrt(self.eps) / math.pi - 0.5

    def levels(self, vs):
        """Energies of the levels v in vs (any order), solved upwards from v = 0; each bracket is
        centred on the quadratic extrapolation of the three levels below (the level below plus the
        spacing below it while fewer are known), widened until the action changes sign."""
        out = []
        top = self.De * (1 - 1e-12)
        for v in range(max(vs) + 1):
            target = math.pi * (v + 0.5)

            seen = {}

            def f(E):  # brentq evaluates the bracket ends again: remember them
                if E not in seen:
                    seen[E] = self.action(E) - target
                return seen[E]
            if v == 0:
                lo, hi = self.bottom + 1e-9 * self.De, top
            else:
                lo = out[-1]
                guess = lo + (out[-1] - out[-2] if v >= 2 else 0.0)
                if v >= 3:
                    guess, err = 3 * out[-1] - 3 * out[-2] + out[-3], abs(out[-1] - 2 * out[-2] + out[-3])
                    lo = max(lo, guess - 2 * err)
                    hi = min(top, guess + 2 * err)
                else:
                    hi = top if v == 1 else min(top, 1.02 * guess - 0.02 * lo)
                if f(lo) * f(hi) > 0:
                    lo, hi = out[-1], top
            out.append(brentq(f, lo, hi, xtol=_ENERGY_RTOL * self.De, rtol=4 * np.finfo(float).eps))
        return np.array([out[v] for v in vs])

    def all_levels(self):
        return self.levels(range(int(math.ceil(self.vD()))))
