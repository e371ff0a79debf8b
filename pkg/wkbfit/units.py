"""Energy units of measured data: cm-1 (the package's unit), MHz and GHz.

A frequency nu corresponds to the wavenumber nu / c. The speed of light is exact in the SI
(299 792 458 m/s by the definition of the metre, CODATA), so the conversions are exact
numbers and are defined here once: 1 MHz = 1e6 / (100 c) cm-1, with c in m/s.
"""

__all__ = ["SPEED_OF_LIGHT", "UNITS", "CM1_PER_UNIT", "to_wavenumber", "from_wavenumber", "check_unit"]

#: speed of light in vacuum, m/s (exact, SI definition of the metre)
SPEED_OF_LIGHT = 299792458.0

#: cm-1 per unit: a value x in the unit is x * CM1_PER_UNIT[unit] cm-1
CM1_PER_UNIT = {
    "cm-1": 1.0,
    "MHz": 1e6 / (100.0 * SPEED_OF_LIGHT),
    "GHz": 1e9 / (100.0 * SPEED_OF_LIGHT),
}
UNITS = tuple(CM1_PER_UNIT)

_ALIASES = {"cm-1": "cm-1", "cm^-1": "cm-1", "1/cm": "cm-1", "cm**-1": "cm-1", "mhz": "MHz", "ghz": "GHz"}


def check_unit(unit, what="unit"):
    """The canonical unit name for unit (cm-1, MHz, GHz; case of MHz/GHz free), or ValueError."""
    if isinstance(unit, str):
        key = unit.strip()
        canon = _ALIASES.get(key.lower()) or _ALIASES.get(key)
        if canon:
            return canon
    raise ValueError("%s=%r is not a known energy unit; use one of %s" % (what, unit, ", ".join(UNITS)))


def to_wavenumber(value, unit):
    """value (number or array) in unit -> cm-1."""
    return value * CM1_PER_UNIT[check_unit(unit)]


def from_wavenumber(value, unit):
    """value in cm-1 -> unit."""
    return value / CM1_PER_UNIT[check_unit(unit)]
