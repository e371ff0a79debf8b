"""Born-Oppenheimer breakdown corrections for fits of several isotopologues.

The form of Le Roy [R. J. Le Roy, J. Mol. Spectrosc. 194, 189 (1999); Le Roy & Huang, J. Mol.
Struct. (Theochem) 591, 175 (2002); recalled from memory]. For isotopologue alpha, with atom
masses M_A, M_B and those of the chosen reference isotopologue (1):

    V_alpha(r) = V(r) + (dM_A/M_A) S_A(r) + (dM_B/M_B) S_B(r),      dM_X = M_X(alpha) - M_X(1)
    centrifugal term  hbar^2 [J(J+1) - Omega^2]/(2 mu_alpha r^2) [1 + (M_A(1)/M_A) R_A(r) + (M_B(1)/M_B) R_B(r)]

with S_X(r) = y u_inf + (1 - y) sum_i u_i y^i (adiabatic) and R_X(r) = y t_inf + (1 - y) sum_i t_i y^i
(non-adiabatic centrifugal), y = (r^p - re^p)/(r^p + re^p). Atom A is the first atom of the
isotopologue labels ("1H" of "1H35Cl"); every label must name the same two elements in the same
order, and the atom whose mass changes is found by comparing each label's isotopes with the
reference's. The coefficients are ordinary fit parameters, named uA_inf, uA0, uA1, .., uB..,
tA_inf, tA0, .., tB..; the values at infinity (u_inf, t_inf) are fixed by default (they shift the
asymptote of each isotopologue, which level data rarely fix).

Energy zero: the minimum of the reference isotopologue's potential. Binding energies of a
corrected isotopologue are taken below the reference asymptote (u_inf = 0 makes them equal).
"""
import numpy as np

from . import _core
from .masses import isotope_mass, parse_isotopologue

__all__ = ["BornOppenheimerCorrection"]

_FUNCS = ("uA", "uB", "tA", "tB")


class BornOppenheimerCorrection:
    """Which correction functions a fit carries, with starting values.

    reference: the reference isotopologue label (its potential is the fitted one).
    adiabatic: (n_A, n_B), numbers of coefficients u_0.. of S_A and S_B (0: no function).
    centrifugal: (n_A, n_B), numbers of coefficients t_0.. of R_A and R_B.
    p: the power of the radial variable y_p (a whole number, default 3).
    start: optional dict name -> starting value (default 0 for every coefficient).
    """

    def __init__(self, reference, adiabatic=(1, 0), centrifugal=(0, 0), p=3, start=None):
        if not isinstance(reference, str):
            raise ValueError("reference=%r must be an isotopologue label such as '1H35Cl'" % (reference,))
        self.reference = reference
        self.atoms = parse_isotopologue(reference)
        counts = []
        for what, pair in (("adiabatic", adiabatic), ("centrifugal", centrifugal)):
            try:
                a, b = (int(x) for x in pair)
            except (TypeError, ValueError):
                raise ValueError("%s=%r must be a pair (n_A, n_B) of whole numbers 0..6" % (what, pair)) from None
            if not (0 <= a <= 6 and 0 <= b <= 6):
                raise ValueError("%s=%r must be a pair (n_A, n_B) of whole numbers 0..6" % (what, pair))
            counts += [a, b]
        if sum(counts) == 0:
            raise ValueError("a Born-Oppenheimer correction needs at least one function (adiabatic or centrifugal)")
        self.counts = tuple(counts)
        if not (float(p) == int(p) and 1 <= int(p) <= 64):
            raise ValueError("p=%r must be a whole number 1..64" % (p,))
        self.p = int(p)
        self.param_names = []
        for f, n in zip(_FUNCS, self.counts):
            if n:
                self.param_names += ["%s_inf" % f] + ["%s%d" % (f, i) for i in range(n)]
        start = dict(start or {})
        unknown = [k for k in start if k not in self.param_names]
        if unknown:
            raise ValueError("start names %s, not a coefficient of this correction (%s)" % (
                ", ".join(unknown), ", ".join(self.param_names)))
        self.start = [float(start.get(n, 0.0)) for n in self.param_names]
        self.fixed_by_default = tuple(n for n in self.param_names if n.endswith("_inf"))

    def __repr__(self):
        return "BornOppenheimerCorrection(reference=%r, adiabatic=%r, centrifugal=%r, p=%d)" % (
            self.reference, self.counts[:2], self.counts[2:], self.p)

    def mass_factors(self, label):
        """(dM_A/M_A, dM_B/M_B), (M_A(1)/M_A, M_B(1)/M_B) of an isotopologue label."""
        if label is None:
            raise ValueError("Born-Oppenheimer corrections need isotopologue labels on every data row")
        atoms = parse_isotopologue(label)
        elements = [a.lstrip("0123456789") for a in atoms]
        ref_elements = [a.lstrip("0123456789") for a in self.atoms]
        if elements != ref_elements:
            raise ValueError("isotopologue %r does not name the atoms %s of the reference %r in the same order; "
                             "write every label with the same atom first" % (label, " and ".join(ref_elements),
                                                                              self.reference))
        m = [isotope_mass(a) for a in atoms]
        m1 = [isotope_mass(a) for a in self.atoms]
        return ((m[0] - m1[0]) / m[0], (m[1] - m1[1]) / m[1]), (m1[0] / m[0], m1[1] / m[1])

    def variants(self, level_keys, masses, omega):
        """Per level its variant index, and per variant (adiabatic pairs, centrifugal pairs, rot_eps)."""
        index, ad, na, rot_eps, var = {}, [], [], [], []
        for label, v, J in level_keys:
            key = (label, J)
            if key not in index:
                index[key] = len(rot_eps)
                a, c = self.mass_factors(label)
                ad.append(a)
                na.append(c)
                rot_eps.append((J * (J + 1) - omega * omega) * _core.HBAR2_OVER_2U / masses[label])
            var.append(index[key])
        return (np.array(var, dtype=np.intc), np.array(ad, dtype=float).reshape(-1, 2),
                np.array(na, dtype=float).reshape(-1, 2), np.array(rot_eps, dtype=float))
