"""The fit's design: measured data of every kind as linear combinations of distinct levels.

Every data row is  offset + c_a E[a] + c_b E[b] + c_A asymptote(p) + c_x x[k],  where E[]
are term values (above the potential minimum) of the distinct levels (isotopologue, v, J) of
the fitted state, computed once per model evaluation however many rows use them, and x[]
the extra linear parameters: free term values of levels of states that are not modelled
(one per distinct level, shared by its lines) and fitted asymptotes of binding energies.

  term values, energy_zero "minimum"    E[level]
               energy_zero "lowest"     E[level] - E[v=0, lowest J of the isotopologue]
  binding energies ("asymptote")        A - E[level], A the potential's asymptote, a stated
                                        value (offset), or a fitted parameter (extra)
  line positions                        E[upper] - E[lower]; a level outside the model
                                        enters as its free term value x[k]
"""
import numpy as np

from .lines import ObservedLines, ObservedWidths
from .observed import ObservedLevels

__all__ = ["Design", "build_design"]


class Block:
    """The rows of one data set in the design: rows[k] is the design row of data row k, or -1
    for a row that is not fitted (the zero of energy_zero='lowest' data)."""

    def __init__(self, data, rows, kind, unit, factor):
        self.data, self.rows, self.kind, self.unit, self.factor = data, np.asarray(rows, dtype=int), kind, unit, factor

    @property
    def fitted(self):
        return self.rows >= 0


class Design:
    def __init__(self):
        self.level_keys, self.level_index = [], {}
        self.extra_names, self.extra_keys, self.extra_index, self.extra_start = [], [], {}, []
        self.cols = {k: [] for k in ("level_a", "coef_a", "level_b", "coef_b", "coef_asymptote", "extra_index",
                                     "coef_extra", "offset", "observed", "sigma")}
        self.blocks = []
        self.row_origin = []  # (block index, data row) of each design row

    def level(self, key):
        if key not in self.level_index:
            self.level_index[key] = len(self.level_keys)
            self.level_keys.append(key)
        return self.level_index[key]

    def extra(self, key, name, start=np.nan):
        if key not in self.extra_index:
            self.extra_index[key] = len(self.extra_names)
            self.extra_names.append(name)
            self.extra_keys.append(key)
            self.extra_start.append(start)
        return self.extra_index[key]

    _ORDER = ("level_a", "coef_a", "level_b", "coef_b", "coef_asymptote", "extra_index", "coef_extra", "offset",
              "observed", "sigma")

    def add_row(self, origin, observed, sigma, a=-1, ca=0.0, b=-1, cb=0.0, cA=0.0, x=-1, cx=0.0, offset=0.0):
        c = self.cols
        c["level_a"].append(a)
        c["coef_a"].append(ca)
        c["level_b"].append(b)
        c["coef_b"].append(cb)
        c["coef_asymptote"].append(cA)
        c["extra_index"].append(x)
        c["coef_extra"].append(cx)
        c["offset"].append(offset)
        c["observed"].append(observed)
        c["sigma"].append(sigma)
        self.row_origin.append(origin)
        return len(self.row_origin) - 1

    @property
    def n_rows(self):
        return len(self.row_origin)

    def arrays(self, masses, omega):
        """(level v, level rot, level mu, dict of row arrays) for the core."""
        v = np.array([k[1] for k in self.level_keys], dtype=np.intc)
        J = np.array([k[2] for k in self.level_keys], dtype=float)
        rot = J * (J + 1) - float(omega) ** 2
        mu = np.array([masses[k[0]] for k in self.level_keys], dtype=float)
        rows = {}
        for k, vals in self.cols.items():
            rows[k] = np.array(vals, dtype=np.intc if k in ("level_a", "level_b", "extra_index") else float)
        return v, rot, mu, rows


def _level_name(key):
    label, v, J = key
    return "%sv=%d, J=%d" % ("%s " % label if label else "", v, J)


def build_design(datasets, omega=0):
    """A Design from a list of data objects (ObservedLevels, ObservedLines; ObservedWidths raise: width_fit
    adds them)."""
    d = Design()
    omega = int(omega)
    for b_index, data in enumerate(datasets):
        rows = []
        if isinstance(data, ObservedWidths):
            # widths are rows of the quasibound fit (width_fit.py), which builds its design from the other
            # data sets and adds them; fit() routes such data there
            raise ValueError("data set %d holds widths of quasibound levels (%s): they are fitted by "
                             "wkbfit.width_fit (wkbfit.fit routes them there), not by the row design alone"
                             % (b_index + 1, data.source or "widths"))
        if isinstance(data, ObservedLevels):
            _check_omega(data.J, omega, b_index, "J")
            zero = data.energy_zero
            shift_extra = -1
            if zero == "asymptote" and data.fit_asymptote:
                shift_extra = d.extra(("asymptote", b_index), "asymptote[set %d]" % (b_index + 1),
                                      np.nan if data.asymptote is None else data.asymptote)
            for i in range(len(data)):
                key = (data.isotopologue[i], int(data.v[i]), int(data.J[i]))
                obs, sig = float(data.energy[i]), float(data.uncertainty[i])
                if zero == "minimum":
                    rows.append(d.add_row((b_index, i), obs, sig, a=d.level(key), ca=1.0))
                elif zero == "lowest":
                    ref = (data.isotopologue[i], 0, omega)
                    if key == ref:
                        rows.append(-1)  # the zero of the data: 0 by definition, no information
                        continue
                    rows.append(d.add_row((b_index, i), obs, sig, a=d.level(key), ca=1.0, b=d.level(ref), cb=-1.0))
                else:
                    if shift_extra >= 0:
                        rows.append(d.add_row((b_index, i), obs, sig, a=d.level(key), ca=-1.0, x=shift_extra, cx=1.0))
                    elif data.asymptote is not None:
                        rows.append(d.add_row((b_index, i), obs, sig, a=d.level(key), ca=-1.0, offset=data.asymptote))
                    else:
                        rows.append(d.add_row((b_index, i), obs, sig, a=d.level(key), ca=-1.0, cA=1.0))
            d.blocks.append(Block(data, rows, data.data_kind, data.unit, data.unit_factor))
            continue
        if isinstance(data, ObservedLines):
            _check_omega(data.J_upper[[s is None for s in data.upper_state]], omega, b_index, "J_upper")
            _check_omega(data.J_lower[[s is None for s in data.lower_state]], omega, b_index, "J_lower")
            for i in range(len(data)):
                label = data.isotopologue[i]
                up = (label, int(data.v_upper[i]), int(data.J_upper[i]))
                lo = (label, int(data.v_lower[i]), int(data.J_lower[i]))
                obs, sig = float(data.wavenumber[i]), float(data.uncertainty[i])
                us, ls = data.upper_state[i], data.lower_state[i]
                if us is None and ls is None:
                    rows.append(d.add_row((b_index, i), obs, sig, a=d.level(up), ca=1.0, b=d.level(lo), cb=-1.0))
                elif us is not None:
                    x = d.extra(("term", us) + up, "T[%s %s]" % (us, _level_name(up)))
                    rows.append(d.add_row((b_index, i), obs, sig, a=d.level(lo), ca=-1.0, x=x, cx=1.0))
                else:
                    x = d.extra(("term", ls) + lo, "T[%s %s]" % (ls, _level_name(lo)))
                    rows.append(d.add_row((b_index, i), obs, sig, a=d.level(up), ca=1.0, x=x, cx=-1.0))
            d.blocks.append(Block(data, rows, data.data_kind, data.unit, data.unit_factor))
            continue
        raise ValueError("data set %d is a %s; fit takes ObservedLevels (read_levels), ObservedLines (read_lines) "
                         "and ObservedWidths (read_widths)" % (b_index + 1, type(data).__name__))
    return d


def _check_omega(J, omega, b_index, column):
    J = np.asarray(J)
    if len(J) and np.min(J) < omega:
        raise ValueError("data set %d, column %r: J=%d is below Omega=%d; a state with electronic angular momentum "
                         "Omega has only levels J >= Omega (check the assignment or omega=)"
                         % (b_index + 1, column, int(np.min(J)), omega))
