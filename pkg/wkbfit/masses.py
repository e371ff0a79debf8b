"""Atomic masses of isotopes and reduced masses of diatomic isotopologues.

Masses are atomic (neutral-atom) masses in u from the Atomic Mass Evaluation 2020:
M. Wang, W. J. Huang, F. G. Kondev, G. Audi and S. Naimi, Chinese Phys. C 45, 030003 (2021).
Entries without a comment are from its full file mass.mas20 (value and one-sigma uncertainty).
Entries marked "periodictable 2.x, AME2020 rounded" are from the rounded file massround.mas20
as carried by the `periodictable` package (2.x); their uncertainty is the rounded one it states.
"""
import collections
import math
import numbers
import re

from . import _validate

__all__ = ["ISOTOPE_MASSES", "MASS_SOURCES", "IsotopeMass", "isotope_mass", "isotope_info", "reduced_mass",
           "parse_isotopologue", "as_reduced_mass"]

_FULL = "AME2020 mass.mas20"
_ROUNDED = "AME2020 massround.mas20 (rounded), via periodictable 2.x"

#: label -> (mass in u, one-sigma uncertainty in u), ordered by atomic number and mass number
ISOTOPE_MASSES = {
    "1H": (1.007825031898, 0.000000000014),
    "2H": (2.014101777844, 0.000000000015),
    "3H": (3.01604928132, 0.00000000008),      # source: periodictable 2.x, AME2020 rounded; +-8e-11
    "4He": (4.00260325413, 0.00000000016),     # source: periodictable 2.x, AME2020 rounded; +-1.6e-10
    "6Li": (6.0151228874, 0.0000000015),       # source: periodictable 2.x, AME2020 rounded; +-1.5e-9
    "7Li": (7.01600343426, 0.00000000450),
    "9Be": (9.01218306, 0.00000008),           # source: periodictable 2.x, AME2020 rounded; +-8e-8
    "12C": (12.0, 0.0),                        # exact by definition of u
    "13C": (13.00335483534, 0.00000000025),    # source: periodictable 2.x, AME2020 rounded; +-2.5e-10
    "14N": (14.00307400425, 0.00000000024),
    "15N": (15.0001088983, 0.0000000006),      # source: periodictable 2.x, AME2020 rounded; +-6e-10
    "16O": (15.99491461926, 0.00000000032),
    "17O": (16.999131756, 0.0000000007),       # source: periodictable 2.x, AME2020 rounded; +-7e-10
    "18O": (17.9991596121, 0.0000000007),      # source: periodictable 2.x, AME2020 rounded; +-7e-10
    "19F": (18.9984031621, 0.0000000009),      # source: periodictable 2.x, AME2020 rounded; +-9e-10
    "20Ne": (19.9924401753, 0.0000000016),     # source: periodictable 2.x, AME2020 rounded; +-1.6e-9
    "23Na": (22.98976928195, 0.00000000194),
    "24Mg": (23.985041689, 0.000000014),       # source: periodictable 2.x, AME2020 rounded; +-1.4e-8
    "28Si": (27.9769265344, 0.0000000006),     # source: periodictable 2.x, AME2020 rounded; +-6e-10
    "31P": (30.9737619977, 0.0000000008),      # source: periodictable 2.x, AME2020 rounded; +-8e-10
    "32S": (31.9720711735, 0.0000000014),      # source: periodictable 2.x, AME2020 rounded; +-1.4e-9
    "35Cl": (34.968852694, 0.000000038),
    "37Cl": (36.965902573, 0.000000055),
    "40Ar": (39.962383122, 0.0000000023),      # source: periodictable 2.x, AME2020 rounded; +-2.3e-9
    "39K": (38.96370648482, 0.00000000489),
    "40K": (39.96399817, 0.00000006),          # source: periodictable 2.x, AME2020 rounded; +-6e-8
    "41K": (40.961825256, 0.000000004),        # source: periodictable 2.x, AME2020 rounded; +-4e-9
    "40Ca": (39.962590851, 0.000000022),       # source: periodictable 2.x, AME2020 rounded; +-2.2e-8
    "79Br": (78.9183376, 0.0000011),           # source: periodictable 2.x, AME2020 rounded; +-1.1e-6
    "81Br": (80.9162882, 0.0000010),           # source: periodictable 2.x, AME2020 rounded; +-1.0e-6
    "85Rb": (84.91178973604, 0.00000000537),
    "87Rb": (86.909180529, 0.000000006),
    "88Sr": (87.905612254, 0.000000006),       # source: periodictable 2.x, AME2020 rounded; +-6e-9
    "127I": (126.904472592, 0.000003887),
    "133Cs": (132.905451958, 0.000000008),
}

#: label -> where its mass comes from (see the module docstring)
MASS_SOURCES = {label: _FULL for label in ISOTOPE_MASSES}
MASS_SOURCES.update({label: _ROUNDED for label in (
    "3H", "4He", "6Li", "9Be", "13C", "15N", "17O", "18O", "19F", "20Ne", "24Mg", "28Si", "31P", "32S", "40Ar",
    "40K", "41K", "40Ca", "79Br", "81Br", "88Sr")})
MASS_SOURCES["12C"] = "exact: the definition of u"

#: the mass, its one-sigma uncertainty (u) and its source, for one isotope
IsotopeMass = collections.namedtuple("IsotopeMass", "label mass uncertainty source")

#: hydrogen isotopes may be written without a mass number
_HYDROGEN_SHORTHANDS = {"H": "1H", "D": "2H", "T": "3H"}

_ATOM = r"(?:\d+[A-Z][a-z]?|[HDT])"
_HETERONUCLEAR_RE = re.compile(r"(%s)(%s)" % (_ATOM, _ATOM))
_HOMONUCLEAR_RE = re.compile(r"(%s)2" % _ATOM)
_REVERSED_LABEL_RE = re.compile(r"([A-Z][a-z]?)(\d+)")


def _canonical_label(label):
    """The table key of an isotope label, or raise ValueError listing the known ones."""
    if not isinstance(label, str):
        raise ValueError("an isotope label must be a string such as '7Li' or '133Cs'; got %r" % (label,))
    key = label.strip()
    key = _HYDROGEN_SHORTHANDS.get(key, key)
    if key in ISOTOPE_MASSES:
        return key
    hint = ""
    reversed_label = _REVERSED_LABEL_RE.fullmatch(key)
    if reversed_label and reversed_label.group(2) + reversed_label.group(1) in ISOTOPE_MASSES:
        hint = " (write the mass number first: %r)" % (reversed_label.group(2) + reversed_label.group(1))
    raise ValueError("unknown isotope %r%s: known isotopes are %s, with H, D, T for 1H, 2H, 3H "
                     "(or give the mass in u as a number)" % (label, hint, ", ".join(ISOTOPE_MASSES)))


def isotope_mass(label):
    """Atomic mass in u of an isotope label such as '7Li', '133Cs' or 'D'."""
    return ISOTOPE_MASSES[_canonical_label(label)][0]


def isotope_info(label):
    """IsotopeMass(label, mass, uncertainty, source) of an isotope label such as '7Li' or 'D'."""
    key = _canonical_label(label)
    mass, uncertainty = ISOTOPE_MASSES[key]
    return IsotopeMass(key, mass, uncertainty, MASS_SOURCES[key])


def _is_number(x):
    """True for real numbers (Python, NumPy scalars and 0-d arrays), False for bool and the rest."""
    if isinstance(x, bool):
        return False
    return isinstance(x, numbers.Real) or (getattr(x, "shape", None) == () and getattr(x, "dtype", None) is not None
                                           and x.dtype.kind in "iuf")


def _mass_of(atom):
    """Mass in u of one atom given as an isotope label or a positive number (u)."""
    if isinstance(atom, str):
        return isotope_mass(atom)
    if not _is_number(atom):
        raise ValueError("an atom must be an isotope label such as '7Li' or a mass in u; got %r" % (atom,))
    m = _validate.real(atom, "atomic mass", "a finite number > 0 (u)") if not isinstance(atom, int) or \
        abs(atom) < 2 ** 1000 else math.inf
    if not (math.isfinite(m) and m > 0):
        raise ValueError("atomic mass %r is invalid: it must be a finite number > 0 (u)" % (atom,))
    lo, hi = _validate.ATOM_MASS_RANGE
    if not lo <= m <= hi:
        raise ValueError("atomic mass %r u is outside the accepted range %g..%g u" % (atom, lo, hi))
    return m


def reduced_mass(atom1, atom2):
    """Reduced mass m1 m2/(m1 + m2) in u of two atoms given as isotope labels or masses in u."""
    m1, m2 = _mass_of(atom1), _mass_of(atom2)
    return m1 * m2 / (m1 + m2)


def parse_isotopologue(label):
    """The two isotope labels of a diatomic isotopologue label.

    Accepts '7Li133Cs', '1H35Cl', '12C16O', '127I2' (homonuclear), hydrogen without a mass
    number ('H2', 'D2', 'HD', 'D35Cl'), and a '-' or spaces between the atoms ('7Li-133Cs').
    Returns table labels, e.g. ('1H', '2H') for 'HD'.
    """
    if not isinstance(label, str):
        raise ValueError("an isotopologue label must be a string such as '7Li133Cs'; got %r" % (label,))
    compact = re.sub(r"[\s-]+", "", label)
    homonuclear = _HOMONUCLEAR_RE.fullmatch(compact)
    heteronuclear = _HETERONUCLEAR_RE.fullmatch(compact)
    if homonuclear:
        atoms = (homonuclear.group(1), homonuclear.group(1))
    elif heteronuclear:
        atoms = heteronuclear.groups()
    else:
        raise ValueError("cannot read isotopologue label %r: write two isotopes, each with its mass number "
                         "before the symbol, such as '7Li133Cs', '1H35Cl' or '127I2' (H, D, T may stand "
                         "alone: 'H2', 'HD', 'D35Cl')" % (label,))
    return tuple(_canonical_label(atom) for atom in atoms)


def as_reduced_mass(mu):
    """A reduced mass in u from a number, a pair of atoms, or an isotopologue label."""
    if isinstance(mu, str):
        return reduced_mass(*parse_isotopologue(mu))
    if isinstance(mu, (tuple, list)):
        if len(mu) != 2:
            raise ValueError("a pair of atoms is needed for a reduced mass; got %r" % (mu,))
        return reduced_mass(*mu)
    if not _is_number(mu):
        raise ValueError("mu must be a reduced mass in u, a pair of isotopes or an isotopologue label; got %r"
                         % (mu,))
    m = float(mu) if not isinstance(mu, int) or abs(mu) < 2 ** 1000 else math.inf
    if not (math.isfinite(m) and m > 0):
        raise ValueError("mu=%r is invalid: the reduced mass must be a finite number > 0 (u)" % (mu,))
    return _validate.reduced_mass_value(m)
