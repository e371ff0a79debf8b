"""Shared argument checks and work limits of the public API.

Every check raises ValueError (a bad value) or TypeError (a value of the wrong kind) with a message
that names the argument and says what would be valid; NumPy's and Python's own conversion errors
(OverflowError for big integers, "only 0-dimensional arrays can be converted", "float() argument
must be ...") never reach the user.

Work limits: a call whose work would exceed one of the limits below is refused at once, before the
work starts, with a message naming the limit and how to ask for less or raise it. Long legitimate work
stays possible by raising the limit (a keyword argument of the call).
"""
import math
import numbers

import numpy as np


class ArgumentTypeError(TypeError, ValueError):
    """A value of the wrong kind (a string for a number, a bool for a count): a TypeError, and a
    ValueError too, so that code catching bad input as ValueError keeps working."""

#: levels computed by one call of `levels` (all J together); raise with levels(..., max_levels=...)
MAX_LEVELS = 100_000
#: J values in one call of `levels`; raise with levels(..., max_J_values=...)
MAX_J_VALUES = 10_000
#: data rows read by `read_levels`; raise with read_levels(..., max_rows=...)
MAX_ROWS = 1_000_000
#: largest vibrational or rotational quantum number accepted anywhere
MAX_QUANTUM_NUMBER = 1_000_000
#: reduced masses (u) the solvers accept: from below the electron mass to far above any molecule
MU_RANGE = (1e-4, 1e6)
#: atomic masses (u) accepted by reduced_mass
ATOM_MASS_RANGE = (1e-4, 1e6)


def is_real_number(x):
    """True for real numbers (Python, NumPy scalars, 0-d arrays), False for bool, str and the rest."""
    if isinstance(x, (bool, np.bool_)):
        return False
    if isinstance(x, numbers.Real):
        return True
    return getattr(x, "shape", None) == () and getattr(getattr(x, "dtype", None), "kind", "") in "iuf" \
        and getattr(x, "dtype", None) is not None


def real(value, name, valid="a finite number"):
    """float(value), refusing bools, strings, arrays and non-finite values by name."""
    if not is_real_number(value):
        raise ArgumentTypeError("%s=%r is not a number: give %s" % (name, value, valid))
    try:
        x = float(value)
    except (TypeError, ValueError, OverflowError):
        raise ValueError("%s=%r cannot be converted to a float: give %s" % (name, value, valid)) from None
    if not math.isfinite(x):
        raise ValueError("%s=%r is invalid: give %s" % (name, value, valid))
    return x


def integer(value, name, lo=0, hi=MAX_QUANTUM_NUMBER, valid=None):
    """int(value) for an integer-valued number in [lo, hi] (2.0 is accepted as 2), by name otherwise."""
    valid = valid or "an integer in %d..%d" % (lo, hi)
    if isinstance(value, (bool, np.bool_)) or not is_real_number(value):
        raise ArgumentTypeError("%s=%r is invalid: give %s" % (name, value, valid))
    if isinstance(value, (int, np.integer)):
        k = int(value)
    else:
        x = float(value)
        if not (math.isfinite(x) and x == math.floor(x)):
            raise ValueError("%s=%r is invalid: give %s" % (name, value, valid))
        k = int(x)
    if not lo <= k <= hi:
        raise ValueError("%s=%r is out of range: give %s" % (name, value, valid))
    return k


def integer_list(value, name, lo=0, hi=MAX_QUANTUM_NUMBER):
    """A list of ints from one integer or a 1-D sequence/array of them (each in [lo, hi])."""
    valid = "an integer in %d..%d or a 1-D list of them" % (lo, hi)
    if isinstance(value, (str, bytes, dict, set)) or value is None:
        raise ArgumentTypeError("%s=%r is invalid: give %s" % (name, value, valid))
    if is_real_number(value) or isinstance(value, (bool, np.bool_)):
        return [integer(value, name, lo, hi, valid)]
    try:
        items = list(value)
    except TypeError:
        raise ArgumentTypeError("%s=%r is invalid: give %s" % (name, value, valid)) from None
    if isinstance(value, np.ndarray) and value.ndim != 1:
        raise ValueError("%s must be 1-dimensional; got shape %s: give %s" % (name, value.shape, valid))
    out = []
    for k, item in enumerate(items):
        if not (is_real_number(item) or isinstance(item, (bool, np.bool_))):
            raise ArgumentTypeError("%s[%d]=%r is invalid: give %s" % (name, k, item, valid))
        out.append(integer(item, "%s[%d]" % (name, k), lo, hi, valid))
    return out


def flag(value, name):
    """A strict bool: True/False (or NumPy's), nothing else ('yes', 1 and None are refused)."""
    if isinstance(value, (bool, np.bool_)):
        return bool(value)
    raise ArgumentTypeError("%s=%r is invalid: give True or False" % (name, value))


def maslov_pair(value):
    """(inner, outer) Maslov indices, each exactly 1 (smooth turning point) or 2 (hard wall)."""
    valid = "a pair (inner, outer) of 1 (smooth turning point) or 2 (hard wall)"
    if isinstance(value, (str, bytes)) or not hasattr(value, "__len__") or len(value) != 2:
        raise ArgumentTypeError("maslov=%r is invalid: give %s" % (value, valid))
    out = []
    for k, m in enumerate(value):
        if isinstance(m, (bool, np.bool_)) or not is_real_number(m) or float(m) not in (1.0, 2.0):
            raise ValueError("maslov=%r is invalid (entry %d is %r): give %s" % (value, k, m, valid))
        out.append(int(m))
    return tuple(out)


def reduced_mass_value(m, name="mu"):
    """A reduced mass in u inside MU_RANGE."""
    lo, hi = MU_RANGE
    x = real(m, name, "a reduced mass in u between %g and %g" % (lo, hi))
    if not lo <= x <= hi:
        raise ValueError("%s=%r u is outside the range the solvers accept (%g..%g u)" % (name, m, lo, hi))
    return x


def work_limit(count, limit, what, keyword, advice):
    """Refuses up front a call whose work `count` would exceed `limit`."""
    if count > limit:
        raise ValueError("this call would need %d %s, more than the limit %s=%d: %s, or raise %s"
                         % (count, what, keyword, limit, advice, keyword))


def finite_result(arrays, what):
    """Raises ValueError when any of `arrays` (name -> array) holds a non-finite value."""
    for name, arr in arrays.items():
        a = np.asarray(arr, dtype=float)
        if a.size and not np.all(np.isfinite(a)):
            k = int(np.flatnonzero(~np.isfinite(a.ravel()))[0])
            raise ValueError("%s: %s[%d] is not finite (%r): the input lies outside the range where the "
                             "calculation is accurate" % (what, name, k, float(a.ravel()[k])))


def real_array(value, name, valid="finite real numbers", ndim=None, finite=True):
    """A new float array from a number or (nested) sequence of real numbers, refusing strings, bools,
    None, complex and ragged or object input by name (instead of NumPy's own messages)."""
    if value is None or isinstance(value, (str, bytes, dict, set)):
        raise ArgumentTypeError("%s=%r is invalid: give %s" % (name, value, valid))
    try:
        raw = np.asarray(value)
    except (TypeError, ValueError, OverflowError):
        raise ValueError("%s=%r is invalid: give %s of one regular shape" % (name, value, valid)) from None
    if raw.dtype.kind == "O":
        try:
            raw = np.array(raw.tolist(), dtype=float)
        except (TypeError, ValueError, OverflowError):
            raise ArgumentTypeError("%s=%r is invalid: give %s" % (name, value, valid)) from None
    if raw.dtype.kind not in "iuf":
        raise ArgumentTypeError("%s=%r is invalid (%s values): give %s" % (name, value, raw.dtype.name, valid))
    arr = np.array(raw, dtype=float)
    if ndim is not None and arr.ndim not in ((ndim,) if isinstance(ndim, int) else ndim):
        raise ValueError("%s must be %s with %s dimension(s); got shape %s" % (name, valid, ndim, arr.shape))
    if finite and not np.all(np.isfinite(arr)):
        raise ValueError("%s must be %s; got a non-finite value" % (name, valid))
    return arr
