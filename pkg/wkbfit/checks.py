"""Plausibility checks of measured data: warnings (DataWarning) that say what to check or do.

Run by `read_levels` / `read_lines` (check=True) and by `wkbfit check`. Each check looks
for a typical mistake; none changes the data:
  - term values that fall with v (binding energies given as term values?)
  - energy_zero="lowest" data of an isotopologue without a v = 0 row
  - values that look like MHz although read as cm-1 (all above 1e5, spacings of 1e5 and more)
  - uncertainties implausibly small or large against the spacings of the data
  - the same level (or line) given twice with different values (across data sets: `check_data`)
Thresholds are rules of thumb (common practice), stated beside each check.
"""
import os
import sys
import warnings

import numpy as np

from .observed import DataWarning

__all__ = ["check_levels", "check_lines", "check_data"]

#: values above this (in cm-1) with spacings above it look like MHz: 1e5 cm-1 is above every
#: molecular binding energy (~12 eV), while 1e5 MHz is only 3.3 cm-1 (common practice)
_MHZ_LIKE = 1e5
#: an uncertainty above this fraction of the typical spacing cannot tell neighbouring levels
#: apart, one below this fraction is finer than any spectroscopic accuracy relative to the
#: spacing (common practice)
_SIGMA_LARGE = 0.25
_SIGMA_SMALL = 1e-10


_PACKAGE_DIR = os.path.dirname(os.path.abspath(__file__))


def _warn(message, stacklevel):
    """Warn at the caller's first frame outside the package (stacklevel is a lower bound)."""
    frame, level = sys._getframe(1), 2
    while frame is not None and os.path.dirname(os.path.abspath(frame.f_code.co_filename)) == _PACKAGE_DIR:
        frame, level = frame.f_back, level + 1
    warnings.warn(message, DataWarning, stacklevel=max(level, 2))


def _where(data):
    return "%s: " % data.source if getattr(data, "source", "") else ""


def _typical_spacing(values):
    """Median spacing of the sorted distinct values (nan for fewer than two)."""
    x = np.unique(np.asarray(values, dtype=float))
    if len(x) < 2:
        return float("nan")
    return float(np.median(np.diff(x)))


def check_levels(obs, stacklevel=2):
    """Plausibility warnings for an ObservedLevels; returns the list of messages."""
    messages = []

    def warn(text):
        messages.append(text)
        _warn(text, stacklevel + 1)

    where = _where(obs)
    factor = obs.unit_factor
    raw = obs.energy / factor
    for label in obs.isotopologues:
        idx = obs.rows_of(label)
        name = "isotopologue %s" % label if label else "the data"
        # term values fall with v within one J: they look like binding energies
        if obs.energy_zero in ("minimum", "lowest"):
            falling = 0
            pairs = 0
            for J in np.unique(obs.J[idx]):
                sel = idx[obs.J[idx] == J]
                if len(sel) < 2:
                    continue
                order = sel[np.argsort(obs.v[sel])]
                d = np.diff(obs.energy[order])
                pairs += len(d)
                falling += int(np.count_nonzero(d < 0))
            if pairs and falling == pairs:
                warn("%s%s: the energies fall as v rises, as binding energies do; if they are measured below the "
                     "asymptote, read them with energy_zero='asymptote'" % (where, name))
        if obs.energy_zero == "lowest" and not np.any(obs.v[idx] == 0):
            warn("%s%s: energy_zero='lowest' measures the energies from v=0, J=0, but there is no v = 0 row; check "
                 "that the zero really is the lowest level (or use energy_zero='minimum' or 'asymptote')"
                 % (where, name))
    # cm-1 values that look like MHz
    if obs.unit == "cm-1" and len(raw) and np.all(np.abs(raw) > _MHZ_LIKE):
        sp = np.diff(np.unique(np.abs(raw)))
        if len(sp) == 0 or np.min(sp) >= _MHZ_LIKE:
            warn("%severy value is above %g cm-1 with spacings of %g and more: these look like frequencies in MHz; "
                 "read them with unit='MHz' (or 'GHz')" % (where, _MHZ_LIKE, _MHZ_LIKE))
    _check_sigma(obs.energy, obs.uncertainty, where, warn)
    return messages


def _check_sigma(values, sigma, where, warn):
    _check_sigma_against(values, sigma, where, warn)


def _check_sigma_against(values, sigma, where, warn):
    spacing = _typical_spacing(values)
    if not np.isfinite(spacing) or spacing <= 0:
        return
    big = sigma > _SIGMA_LARGE * spacing
    small = sigma < _SIGMA_SMALL * spacing
    if np.any(big):
        warn("%s%d uncertaint%s %.3g cm-1 and more, above %g of the typical spacing %.3g cm-1 of the data: "
             "check the unit of the uncertainty column (or whether it holds a width)" % (
                 where, int(np.count_nonzero(big)), "y is" if np.count_nonzero(big) == 1 else "ies are",
                 float(np.min(sigma[big])), _SIGMA_LARGE, spacing))
    if np.any(small):
        warn("%s%d uncertaint%s below %g of the typical spacing %.3g cm-1 of the data (smallest %.3g cm-1): "
             "implausibly small; check the unit of the uncertainty column" % (
                 where, int(np.count_nonzero(small)), "y is" if np.count_nonzero(small) == 1 else "ies are",
                 _SIGMA_SMALL, spacing, float(np.min(sigma[small]))))


def check_lines(lines, stacklevel=2):
    """Plausibility warnings for ObservedLines; returns the list of messages."""
    messages = []

    def warn(text):
        messages.append(text)
        _warn(text, stacklevel + 1)

    where = _where(lines)
    raw = lines.wavenumber / lines.unit_factor
    if lines.unit == "cm-1" and len(raw) and np.all(np.abs(raw) > _MHZ_LIKE):
        sp = np.diff(np.unique(np.abs(raw)))
        if len(sp) == 0 or np.min(sp) >= _MHZ_LIKE:
            warn("%severy line position is above %g cm-1 with spacings of %g and more: these look like frequencies "
                 "in MHz; read them with unit='MHz' (or 'GHz')" % (where, _MHZ_LIKE, _MHZ_LIKE))
    first = {}
    for i, key in enumerate(lines.keys()):
        first.setdefault(key, i)
    distinct = np.array(sorted(first.values()), dtype=int)
    # spacings between distinct transitions (repeated measurements of one line are no spacing)
    spacing_values = lines.wavenumber[distinct]
    _check_sigma_against(spacing_values, lines.uncertainty, where, warn)
    seen = {}
    for i, key in enumerate(lines.keys()):
        if key in seen and lines.wavenumber[seen[key]] != lines.wavenumber[i]:
            j = seen[key]
            diff = abs(lines.wavenumber[i] - lines.wavenumber[j])
            if diff > 3 * np.hypot(lines.uncertainty[i], lines.uncertainty[j]):
                warn("%sline rows %d and %d are the same transition with positions %.8g and %.8g cm-1, %.3g apart "
                     "(more than 3 sigma); check the assignment of one of them" % (
                         where, j + 1, i + 1, lines.wavenumber[j], lines.wavenumber[i], diff))
        seen.setdefault(key, i)
    return messages


def check_data(data, stacklevel=2):
    """Checks across several data sets: the same level with different term values in two of them.
    data: a list of data objects; returns the list of messages."""
    messages = []
    seen = {}
    for d_index, d in enumerate(data):
        if getattr(d, "kind", None) != "levels" or d.energy_zero != "minimum":
            continue
        for i in range(len(d)):
            key = (d.isotopologue[i], int(d.v[i]), int(d.J[i]))
            if key in seen:
                e0, s0, k0 = seen[key]
                diff = abs(d.energy[i] - e0)
                if diff > 3 * np.hypot(d.uncertainty[i], s0):
                    text = ("the level %sv=%d, J=%d is given in data sets %d and %d with term values %.10g and %.10g "
                            "cm-1 (%.3g apart, more than 3 sigma); keep one, or correct the assignment" % (
                                "%s " % key[0] if key[0] else "", key[1], key[2], k0 + 1, d_index + 1, e0,
                                d.energy[i], diff))
                    messages.append(text)
                    _warn(text, stacklevel + 1)
            else:
                seen[key] = (d.energy[i], d.uncertainty[i], d_index)
    return messages
