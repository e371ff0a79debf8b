"""The SciPy baseline shared by the benchmarks: first-order WKB levels (both ends smooth, v + 1/2)
written as a careful user would -- the potential in plain Python, scipy.optimize.brentq for the
turning points and the energies, scipy.integrate.quad for the action."""
import math

import numpy as np
from scipy.integrate import quad
from scipy.optimize import brentq, minimize_scalar

HBAR2_OVER_2U = 16.85762916809  # cm-1 A^2, CODATA 2022 (the value of wkbfit.HBAR2_OVER_2U)


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
        r1 = brentq(lambda r: V(r) - E, self.r_small, self.r_bottom, xtol=1e-14, rtol=1e-15)
        hi = 2 * self.r_bottom
        while V(hi) < E:
            hi *= 2
        r2 = brentq(lambda r: V(r) - E, self.r_bottom, hi, xtol=1e-14, rtol=1e-15)
        return r1, r2

    def action(self, E):
        r1, r2 = self.turning_points(E)
        return quad(lambda r: math.sqrt(max(E - self.V(r), 0.0) / self.eps), r1, r2,
                    epsabs=0, epsrel=1e-12, limit=200)[0]

    def vD(self):
        """Quantum number at the asymptote (J = 0 wells)."""
        r1 = self.turning_points(self.De * (1 - 1e-12))[0]
        val = quad(lambda r: math.sqrt(max(self.De - self.V(r), 0.0) / self.eps), r1, np.inf,
                   epsabs=0, epsrel=1e-12, limit=400)[0]
        return val / math.pi - 0.5

    def levels(self, vs, tol=1e-10):
        """Energies of the levels v in vs (any order), each bracketed above the one below it."""
        out, lo = {}, self.bottom + 1e-9 * self.De
        for v in sorted(set(vs)):
            target = math.pi * (v + 0.5)
            lo = out[v] = brentq(lambda E: self.action(E) - target, lo, self.De * (1 - 1e-12), xtol=tol, rtol=1e-15)
        return np.array([out[v] for v in vs])

    def all_levels(self, tol=1e-10):
        return self.levels(range(int(math.ceil(self.vD()))), tol)
