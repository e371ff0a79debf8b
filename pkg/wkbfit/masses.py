"""Atomic masses of isotopes and reduced masses of diatomic isotopologues.

Masses are atomic (neutral-atom) masses in u from the Atomic Mass Evaluation 2020:
M. Wang, W. J. Huang, F. G. Kondev, G. Audi and S. Naimi, Chinese Phys. C 45, 030003 (2021),
file mass.mas20 (values with their one-sigma uncertainty in the last digits).
"""
import math
import re

__all__ = ["ISOTOPE_MASSES", "isotope_mass", "reduced_mass", "parse_isotopologue", "as_reduced_mass"]

#: label -> (mass in u, one-sigma uncertainty in u), AME2020 mass.mas20
ISOTOPE_MASSES = {
    "1H": (1.007825031898, 0.000000000014),
    "2H": (2.014101777844, 0.000000000015),
    "7Li": (7.01600343426, 0.00000000450),
    "12C": (12.0, 0.0),
    "14N": (14.00307400425, 0.00000000024),
    "16O": (15.99491461926, 0.00000000032),
    "23Na": (22.98976928195, 0.00000000194),
    "35Cl": (34.968852694, 0.000000038),
    "37Cl": (36.965902573, 0.000000055),
    "39K": (38.96370648482, 0.00000000489),
    "85Rb": (84.91178973604, 0.00000000537),
    "87Rb": (86.909180529, 0.000000006),
    "127I": (126.904472592, 0.000003887),
    "133Cs": (132.905451958, 0.000000008),
}

#: common spellings of hydrogen isotopes
_ALIASES = {"H": "1H", "D": "2H", "T": "3H"}

_ISOTOPE_RE = re.compile(r"(\d+)([A-Z][a-z]?)")


def isotope_mass(label):
    """Atomic mass in u of an isotope label such as '7Li', '133Cs', 'D'."""
    key = _ALIASES.get(label, label) if isinstance(label, str) else None
    if key not in ISOTOPE_MASSES:
        raise ValueError("unknown isotope %r: known isotopes are %s (or give the mass in u as a number)"
                         % (label, ", ".join(sorted(ISOTOPE_MASSES, key=lambda k: (_ISOTOPE_RE.fullmatch(k).group(2), int(_ISOTOPE_RE.fullmatch(k).group(1)))))))
    return ISOTOPE_MASSES[key][0]


def _mass_of(x):
    if isinstance(x, str):
        return isotope_mass(x.strip())
    try:
        m = float(x)
    except (TypeError, ValueError):
        raise ValueError("an atom must be an isotope label such as '7Li' or a mass in u; got %r" % (x,)) from None
    if not (math.isfinite(m) and m > 0):
        raise ValueError("atomic mass %r is invalid: it must be a finite number > 0 (u)" % (x,))
    return m


def reduced_mass(atom1, atom2):
    """Reduced mass m1 m2/(m1 + m2) in u of two atoms given as isotope labels or masses in u."""
    m1, m2 = _mass_of(atom1), _mass_of(atom2)
    return m1 * m2 / (m1 + m2)


def parse_isotopologue(label):
    """Split an isotopologue label such as '7Li133Cs', '1H35Cl' or '127I2' into two isotope labels."""
    if not isinstance(label, str):
        raise ValueError("isotopologue label must be a string such as '7Li133Cs'; got %r" % (label,))
    s = label.strip()
    parts = _ISOTOPE_RE.findall(s)
    m = re.fullmatch(r"(\d+[A-Z][a-z]?)2", s)
    if m:
        return m.group(1), m.group(1)
    if len(parts) == 2 and "".join(a + b for a, b in parts) == s:
        return parts[0][0] + parts[0][1], parts[1][0] + parts[1][1]
    raise ValueError("cannot read isotopologue label %r: write two isotopes with mass numbers, such as "
                     "'7Li133Cs', '1H35Cl' or '127I2'" % (label,))


def as_reduced_mass(mu):
    """A reduced mass in u from a number, a pair of atoms, or an isotopologue label."""
    if isinstance(mu, str):
        return reduced_mass(*parse_isotopologue(mu))
    if isinstance(mu, (tuple, list)):
        if len(mu) != 2:
            raise ValueError("a pair of atoms is needed for a reduced mass; got %r" % (mu,))
        return reduced_mass(*mu)
    try:
        m = float(mu)
    except (TypeError, ValueError):
        raise ValueError("mu must be a reduced mass in u, a pair of isotopes or an isotopologue label; got %r"
                         % (mu,)) from None
    if not (math.isfinite(m) and m > 0):
        raise ValueError("mu=%r is invalid: the reduced mass must be a finite number > 0 (u)" % (mu,))
    return m
