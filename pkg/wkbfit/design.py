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
        self._cols = {k: [] for k in self._ORDER}
        self.blocks = []
        self._row_origin = []
        # rows added in bulk and not yet in the lists: (block index, data rows, {column: array}); a fit of
        # term values alone never reads the lists (3-4 ms on 20 000 rows saved)
        self._bulk = []
        self._n = 0

    @property
    def cols(self):
        """Every row's columns as lists (level_a, coef_a, ..., observed, sigma)."""
        self._fold()
        return self._cols

    @property
    def row_origin(self):
        """(block index, data row) of each design row."""
        self._fold()
        return self._row_origin

    def _fold(self):
        for b_index, data_rows, values in self._bulk:
            m = len(data_rows)
            for k in self._ORDER:
                value, dtype = values[k], (int if k in self._INT_COLUMNS else float)
                self._cols[k].extend(np.asarray(value, dtype=dtype).tolist() if np.ndim(value)
                                     else [dtype(value)] * m)
            self._row_origin.extend(zip([b_index] * m, data_rows.tolist()))
        self._bulk = []

    def level(self, key):
        if key not in self.level_index:
            self.level_index[key] = len(self.level_keys)
            self.level_keys.append(key)
        return self.level_index[key]

    def levels(self, keys):
        """level() of many keys: their indices, the new ones registered in the order given."""
        index, known = self.level_index, self.level_keys
        new = list(dict.fromkeys(keys)) if not index else [k for k in dict.fromkeys(keys) if k not in index]
        index.update(zip(new, range(len(known), len(known) + len(new))))
        known.extend(new)
        return list(map(index.__getitem__, keys))

    def extra(self, key, name, start=np.nan):
        if key not in self.extra_index:
            self.extra_index[key] = len(self.extra_names)
            self.extra_names.append(name)
            self.extra_keys.append(key)
            self.extra_start.append(start)
        return self.extra_index[key]

    _ORDER = ("level_a", "coef_a", "level_b", "coef_b", "coef_asymptote", "extra_index", "coef_extra", "offset",
              "observed", "sigma")
    _INT_COLUMNS = ("level_a", "level_b", "extra_index")

    def add_row(self, origin, observed, sigma, a=-1, ca=0.0, b=-1, cb=0.0, cA=0.0, x=-1, cx=0.0, offset=0.0):
        c = self.cols  # (folds the bulk rows first: the rows stay in order)
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
        self._row_origin.append(origin)
        self._n += 1
        return self._n - 1

    def add_rows(self, b_index, data_rows, observed, sigma, a, ca, b=None, cb=0.0, cA=0.0, x=-1, cx=0.0, offset=0.0):
        """add_row for the data rows `data_rows` of block b_index at once (observed, sigma, a, b: one value per
        row, a and b level indices; the rest one value for all): the same design as row by row, without a
        Python call per row (large data sets). Returns the design rows (an array)."""
        data_rows = np.asarray(data_rows, dtype=int)
        m = len(data_rows)
        # (kept as given, converted when the columns are read: a fit of term values alone never reads them)
        self._bulk.append((b_index, data_rows, {
            "level_a": a, "coef_a": ca, "level_b": -1 if b is None else b, "coef_b": cb, "coef_asymptote": cA,
            "extra_index": x, "coef_extra": cx, "offset": offset, "observed": observed, "sigma": sigma}))
        self._n += m
        return np.arange(self._n - m, self._n)

    @property
    def n_rows(self):
        return self._n

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
            # (the rows in bulk: a 20 000-level data set spent ~0.1 s here row by row, then ~10 ms in a loop
            # per row; the levels are registered in the same order as row by row, so the design is the same)
            labels = data.isotopologue.tolist() if isinstance(data.isotopologue, np.ndarray) else list(data.isotopologue)
            v_all, J_all = np.asarray(data.v).astype(np.int64), np.asarray(data.J).astype(np.int64)
            keys = list(zip(labels, v_all.tolist(), J_all.tolist()))
            obs = np.asarray(data.energy, dtype=float)
            sig = np.asarray(data.uncertainty, dtype=float)
            if zero == "lowest":
                # the zero of the data (v=0, J=Omega) is 0 by definition, no information: not a row
                kept = np.nonzero(~((v_all == 0) & (J_all == omega)))[0]
                kept_keys = list(map(keys.__getitem__, kept.tolist()))
                kept_labels = [k[0] for k in kept_keys]
                # each isotopologue's reference level comes right after its first row, as row by row
                refs = {label: (label, 0, omega) for label in dict.fromkeys(kept_labels)}
                order, at_ref, done = [], [], 0
                for pos, label in sorted((kept_labels.index(label), label) for label in refs):
                    order += kept_keys[done:pos + 1] + [refs[label]]
                    at_ref.append(len(order) - 1)
                    done = pos + 1
                a = np.delete(d.levels(order + kept_keys[done:]), at_ref)
                ref_index = {label: d.level_index[key] for label, key in refs.items()}
                ids = d.add_rows(b_index, kept, obs[kept], sig[kept], a, 1.0,
                                 b=list(map(ref_index.__getitem__, kept_labels)), cb=-1.0)
                rows = np.full(len(keys), -1, dtype=int)
                rows[kept] = ids
            else:
                a = d.levels(keys)
                all_rows = np.arange(len(keys))
                if zero == "minimum":
                    rows = d.add_rows(b_index, all_rows, obs, sig, a, 1.0)
                elif shift_extra >= 0:
                    rows = d.add_rows(b_index, all_rows, obs, sig, a, -1.0, x=shift_extra, cx=1.0)
                elif data.asymptote is not None:
                    rows = d.add_rows(b_index, all_rows, obs, sig, a, -1.0, offset=data.asymptote)
                else:
                    rows = d.add_rows(b_index, all_rows, obs, sig, a, -1.0, cA=1.0)
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
