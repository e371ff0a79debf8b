"""Fits with quasibound levels: their positions and widths (FWHM) beside the ordinary data.

`fitting.fit` hands a fit here when the data hold widths (read_widths), or positions of levels (J > 0)
that are quasibound for the starting potential (trapped behind the centrifugal barrier) and that the
data put above its asymptote: term values (energy zero 'minimum' or 'lowest') or line positions to or
from such levels (see `applies`). Without widths the quasibound levels are fitted by their positions
only. One least-squares problem holds every row:

  * ordinary rows are, as in design.py, linear combinations of distinct levels (plus free term
    values and fitted asymptotes, here ordinary fit variables); a width row is the FWHM of one level;
  * each distinct level is classified once, at the start: bound (computed by the core's
    `fit_evaluate`, with its analytic Jacobian) or quasibound (a level of `quasibound.py`);
    the positions and widths of quasibound levels get central-difference Jacobians;
  * the Levenberg-Marquardt iterations run here in Python: the C engine's level sources know only
    bound levels, and an exact resonance costs ~20-60 ms, so the loop's own cost is negligible
    beside the levels.

Level methods: "exact" (and the default "corrected", which covers only bound levels) uses exact
bound levels and the exact complex-energy poles (resonance.c) for quasibound levels; "wkb" uses
first-order WKB bound levels and the semiclassical quasibound rule (positions by the inner-well rule,
widths (s/2pi) ln(1 + exp(-2 theta))). Semiclassical widths are off by ~1-3 % where theta >= 1
(tests/test_quasibound.py), more than a tenth of a typical measured width uncertainty, which is why exact poles are the default. After the fit every row's method error
(the exact solver's estimate, or |semiclassical - exact| for "wkb") is compared with its
uncertainty, as method_error.py does for levels, and rows above 0.1 sigma are named in a warning.

Units: energies and widths cm-1 (data in MHz or GHz are converted on reading), distances angstrom.
"""
import math

import numpy as np

from . import _core
from . import potentials as _potentials
from .design import Block, build_design
from .lines import ObservedLines, ObservedWidths
from .method_error import FLAG_FRACTION
from .observed import ObservedLevels

__all__ = ["applies", "fit_with_quasibound", "FD_STEP"]

#: relative step of the central differences of quasibound positions and widths. Widths vary
#: exponentially (d ln Gamma/dDe ~ -0.06 per cm-1 on the test curve), so the truncation error
#: (h d ln Gamma/dp)^2/6 sets the step: ~5e-6 relative at this step; the exact poles' error
#: (~1e-8 cm-1 on positions, ~1e-13 relative on widths, varying smoothly) adds less than 1e-6
FD_STEP = 3e-5
#: Levenberg-Marquardt: converged when the Gauss-Newton step promises a chi-square decrease below
#: this fraction of max(1, chi2) (as csrc/fit.c does)
DECREASE_TOL = 1e-10
#: a stall (no step lowers chi-square) counts as converged when the promised decrease is below this
#: fraction: the finite-difference Jacobian of quasibound rows is good to ~1e-6 relative
STALL_TOL = 1e-6
_PHASE_STEP, _R_MATCH = 0.06, 50.0


class _Infeasible(Exception):
    """A trial point outside the model's domain (a parameter check fails, a level changed kind)."""


def applies(datasets, potential, masses):
    """True when the data hold widths, or positions of levels (J > 0) that are quasibound for the starting
    potential and that the data put above its asymptote. masses: a callable giving label -> reduced mass
    (called only when needed).

    Where the data place a level: a term value above the minimum is its position; a term value above the
    lowest level ('lowest') plus the start's lowest level; a line to (or from) a level the start binds, that
    level's start term value plus (minus) the wavenumber. A level the data do not place (a line to a free term
    value, or between two levels the start does not bind) counts when the start holds it quasibound: the
    ordinary fit could not compute it anyway. A position below the start's asymptote is no sign of a
    quasibound level: a start too shallow for bound data (which the default fit handles by bringing such
    levels in, or refuses with the advice to start deeper) shows the same levels."""
    if any(isinstance(d, ObservedWidths) for d in datasets):
        return True
    if isinstance(potential, _potentials.PointwisePotential):
        return False
    return bool(quasibound_candidates(datasets, potential, masses))


def quasibound_candidates(datasets, potential, masses):
    """The level keys (isotopologue, v, J) of the data that applies() routes to the quasibound fit."""
    try:
        D = float(potential.asymptote)
    except (AttributeError, ValueError):
        return []
    placed, unplaced, line_levels = [], [], set()
    lowest = [d for d in datasets if type(d) is ObservedLevels and d.energy_zero == "lowest" and len(d)
              and np.any(np.asarray(d.J) > 0)]
    E00 = _start_levels(potential, masses, {(label, 0, 0) for d in lowest for label in d.isotopologues}) \
        if lowest else {}
    for d in datasets:
        if type(d) is ObservedLevels and d.energy_zero in ("minimum", "lowest"):
            # (whole columns at once: a Python loop over 20 000 rows cost ~10 ms a fit)
            base = np.zeros(len(d))
            if d.energy_zero == "lowest":
                zero_of = {label: E00.get((label, 0, 0), math.nan) for label in d.isotopologues}
                base = np.array(list(map(zero_of.__getitem__, d.isotopologue.tolist())), dtype=float)
            with np.errstate(invalid="ignore"):
                above = (np.asarray(d.J) > 0) & (np.asarray(d.energy, dtype=float) + base > D)
            for i in np.nonzero(above)[0]:
                label = d.isotopologue[i]
                placed.append(((label, int(d.v[i]), int(d.J[i])), None, 0.0, float(d.energy[i]) + base[i]))
        elif isinstance(d, ObservedLines):
            for i in range(len(d)):
                label = d.isotopologue[i]
                up = (label, int(d.v_upper[i]), int(d.J_upper[i])) if d.upper_state[i] is None else None
                lo = (label, int(d.v_lower[i]), int(d.J_lower[i])) if d.lower_state[i] is None else None
                w = float(d.wavenumber[i])
                for key, other, sign in ((up, lo, 1.0), (lo, up, -1.0)):
                    if key is not None and key[2] > 0:
                        line_levels.add(key)
                        (placed if other is not None else unplaced).append((key, other, sign * w, math.nan))
    keys = {c[0] for c in placed} | {c[0] for c in unplaced}
    if not keys:
        return []
    found = _start_quasibound(potential, masses, keys)
    if not found:
        return []
    # lines: the start's term values of the other levels (the bound ones; the others give no place)
    others = {c[1] for c in placed if c[1] is not None and c[0] in found and c[1] not in found}
    E_other = _start_levels(potential, masses, others) if others else {}
    out = set()
    for key, other, shift, value in placed:
        if key not in found:
            continue
        if other is None:
            if value > D:
                out.add(key)
        elif other in found or other not in E_other:
            out.add(key)  # the line joins two levels the start does not bind: not placed
        elif E_other[other] + shift > D:
            out.add(key)
    out.update(c[0] for c in unplaced if c[0] in found)
    return sorted(out, key=lambda k: (str(k[0]), k[2], k[1]))


def _start_quasibound(potential, masses, keys):
    """The keys among `keys` that are semiclassical quasibound levels of the potential (one core call per
    isotopologue over the distinct J)."""
    mu = masses()
    model, params, curve = potential._core_args()
    found = set()
    for label in {k[0] for k in keys}:
        Js = np.unique([k[2] for k in keys if k[0] == label])
        try:
            res = _core.quasibound_levels(model, params, curve, float(mu[label]), (Js * (Js + 1.0)).astype(float))
        except ValueError:
            continue
        if len(res["v"]):
            have = set(zip(Js[res["rot_index"].astype(int)].tolist(), res["v"].astype(int).tolist()))
            found.update(k for k in keys if k[0] == label and (k[2], k[1]) in have)
    return found


def _start_levels(potential, masses, keys):
    """First-order WKB term values of the bound levels among `keys` (key -> cm-1 above the minimum); levels the
    potential does not bind are left out. Used only to place levels against the asymptote, for which
    first-order accuracy is ample."""
    mu = masses()
    model, params, curve = potential._core_args()
    keys = list(keys)

    def evaluate(batch):
        rot = np.array([k[2] * (k[2] + 1.0) for k in batch])
        calc, _ = _core.fit_evaluate(model, params, curve, np.array([k[1] for k in batch], dtype=np.intc), rot,
                                     np.array([float(mu[k[0]]) for k in batch]), energy_zero=0, method=0)
        return dict(zip(batch, np.asarray(calc, dtype=float).tolist()))

    try:  # one core call; level by level only when some level is not bound
        return evaluate(keys)
    except ValueError:
        pass
    out = {}
    for key in keys:
        try:
            out.update(evaluate([key]))
        except ValueError:
            continue
    return out


def _level_name(key):
    label, v, J = key
    return "%sv=%d, J=%d" % ("%s " % label if label else "", v, J)


# ------------------------------------------------------------------------------ the model
class _Model:
    """Rows of every kind as functions of (potential parameters, extras)."""

    def __init__(self, potential, design, masses, width_rows, method):
        self.potential = potential
        self.names = list(potential.param_names)
        self.model, self.params0, self.curve = potential._core_args()
        self.method = method
        self.code = 0 if method == "wkb" else 1
        keys = design.level_keys
        self.keys = keys
        self.nl = len(keys)
        self.mu = np.array([masses[k[0]] for k in keys], dtype=float)
        self.v = np.array([k[1] for k in keys], dtype=int)
        self.J = np.array([k[2] for k in keys], dtype=int)
        v, rot, mu, rows = design.arrays(masses, 0)
        self.rows = rows
        self.n_design = design.n_rows
        self.width_level = np.array([w[0] for w in width_rows], dtype=int)
        self.n_rows = self.n_design + len(width_rows)
        self.ne = len(design.extra_names)
        self.observed = np.concatenate([rows["observed"], [w[1] for w in width_rows]])
        self.sigma = np.concatenate([rows["sigma"], [w[2] for w in width_rows]])
        self.quasibound = np.zeros(self.nl, dtype=bool)
        # exact bound levels' accuracy target: at most 1e-7 cm-1 (the solver's default). A looser target
        # misses by far in small wells at high J (1e-5 asked, 2.3e-3 cm-1 estimated at J=40 of the test
        # curve), and the cost here is in the resonances anyway
        self.tolerance = float(min(1e-7, max(1e-10, 1e-4 * float(np.min(self.sigma)))))
        self.spacing = np.full(self.nl, np.inf)  # semiclassical level spacing at the start (level identity)
        self.n_level_calculations = 0
        self.n_evaluations = 0

    # -- classification ------------------------------------------------------------------
    def classify(self, params):
        """Marks the levels that are quasibound for the starting parameters; returns the semiclassical
        columns of every candidate (for messages)."""
        semi = self._semiclassical(params, np.arange(self.nl), require=False)
        cand = np.isfinite(semi["energy"])
        self.quasibound = cand.copy()
        self.spacing = np.where(cand, semi["dEdv"], np.inf)
        if self.code == 1 and np.any(cand):
            idx = np.nonzero(cand)[0]
            ex = self._exact(params, idx, semi["energy"][idx], semi["width"][idx], check=False)
            D = self.asymptote(params)
            for k, i in enumerate(idx):
                if not ex["energy"][k] > D:
                    self.quasibound[i] = False  # the exact solver binds it
        return semi

    # -- pieces ------------------------------------------------------------------------
    def asymptote(self, params):
        try:
            pot = type(self.potential)(**dict(zip(self.names, params.tolist())))
        except (ValueError, TypeError) as err:
            raise _Infeasible("invalid parameters: %s" % err) from None
        return pot.asymptote

    def asymptote_gradient(self, params):
        g = np.zeros(len(params))
        for k in range(len(params)):
            h = 1e-6 * max(abs(params[k]), 1e-6)
            up, dn = params.copy(), params.copy()
            up[k] += h
            dn[k] -= h
            try:
                g[k] = (self.asymptote(up) - self.asymptote(dn)) / (2 * h)
            except _Infeasible:
                g[k] = 0.0
        return g

    def _semiclassical(self, params, idx, require=True):
        """Semiclassical quasibound energy, width, dEdv, theta of the levels idx (NaN where not quasibound)."""
        out = {k: np.full(self.nl, np.nan) for k in ("energy", "width", "dEdv", "theta")}
        idx = np.asarray(idx, dtype=int)
        for m in np.unique(self.mu[idx]):
            sel = idx[self.mu[idx] == m]
            Js = np.unique(self.J[sel])
            try:
                res = _core.quasibound_levels(self.model, params, self.curve, float(m),
                                              (Js * (Js + 1.0)).astype(float))
            except ValueError as err:
                raise _Infeasible("quasibound levels: %s" % err) from None
            J_of = Js[res["rot_index"].astype(int)] if len(res["v"]) else np.zeros(0, int)
            found = {(int(j), int(vv)): n for n, (j, vv) in enumerate(zip(J_of, res["v"].astype(int)))}
            for i in sel:
                n = found.get((int(self.J[i]), int(self.v[i])))
                if n is None:
                    if require:
                        raise _Infeasible("%s is no longer quasibound" % _level_name(self.keys[i]))
                    continue
                out["energy"][i] = res["energy"][n]
                out["width"][i] = res["width"][n]
                out["dEdv"][i] = res["dEdv"][n]
                out["theta"][i] = res["theta"][n]
        self.n_level_calculations += len(idx)
        return out

    def _exact(self, params, idx, E_seed, G_seed, check=True):
        """Exact poles of the levels idx from seeds (arrays of len(idx))."""
        res = {k: np.empty(len(idx)) for k in ("energy", "width", "energy_error", "width_error")}
        for m in np.unique(self.mu[idx]):
            sel = np.nonzero(self.mu[idx] == m)[0]
            try:
                r = _core.resonances(self.model, params, self.curve, float(m),
                                     self.J[idx[sel]].astype(np.intc), np.asarray(E_seed, float)[sel],
                                     np.maximum(np.asarray(G_seed, float)[sel], 0.0), phase_step=_PHASE_STEP,
                                     r_match=_R_MATCH)
            except (ValueError, RuntimeError) as err:
                raise _Infeasible("exact resonances: %s" % err) from None
            for key in res:
                res[key][sel] = r[key]
        self.n_level_calculations += len(idx)
        if check:
            D = self.asymptote(params)
            for k, i in enumerate(idx):
                if not (np.isfinite(res["energy"][k]) and res["energy"][k] > D):
                    raise _Infeasible("%s fell below the asymptote (it would be bound)" % _level_name(self.keys[i]))
                if abs(res["energy"][k] - E_seed[k]) > 0.5 * self.spacing[i]:
                    raise _Infeasible("the exact pole of %s moved by more than half a level spacing from its seed"
                                      % _level_name(self.keys[i]))
        return res

    def quasibound_values(self, params, seeds=None):
        """(E, width) of the quasibound levels (arrays over all levels, NaN for bound ones)."""
        E, G = np.full(self.nl, np.nan), np.full(self.nl, np.nan)
        idx = np.nonzero(self.quasibound)[0]
        if not len(idx):
            return E, G
        if self.code == 0:
            s = self._semiclassical(params, idx)
            E[idx], G[idx] = s["energy"][idx], s["width"][idx]
            return E, G
        if seeds is None:
            s = self._semiclassical(params, idx)
            seeds = (s["energy"][idx], s["width"][idx])
        ex = self._exact(params, idx, seeds[0], seeds[1])
        E[idx], G[idx] = ex["energy"], ex["width"]
        return E, G

    def bound_values(self, params):
        """(E, dE/dp) of the bound levels (arrays over all levels)."""
        E = np.full(self.nl, np.nan)
        dE = np.zeros((self.nl, len(params)))
        idx = np.nonzero(~self.quasibound)[0]
        if not len(idx):
            return E, dE
        J = self.J[idx].astype(float)
        try:
            calc, jac = _core.fit_evaluate(self.model, params, self.curve, self.v[idx].astype(np.intc), J * (J + 1),
                                           self.mu[idx], energy_zero=0, method=self.code,
                                           energy_tol=self.tolerance if self.code == 1 else 0.0)
        except ValueError as err:
            text = str(err)
            if text.startswith("row "):
                head, _, rest = text.partition(": ")
                try:
                    k = int(head.split()[1]) - 1
                    text = "%s: %s" % (_level_name(self.keys[idx[k]]), rest)
                except (ValueError, IndexError):
                    pass
            raise _Infeasible(text) from None
        self.n_level_calculations += len(idx)
        E[idx], dE[idx] = calc, jac
        return E, dE

    # -- rows ----------------------------------------------------------------------------
    def evaluate(self, params, extras):
        """Row values and the pieces the Jacobian needs later; raises _Infeasible."""
        self.n_evaluations += 1
        Eb, dEb = self.bound_values(params)
        Eq, Gq = self.quasibound_values(params)
        E = np.where(self.quasibound, Eq, Eb)
        A = self.asymptote(params)
        calc = self._combine(E, Gq, A, extras)
        if not np.all(np.isfinite(calc)):
            raise _Infeasible("a level could not be computed")
        return calc, dict(params=params.copy(), E=E, G=Gq, dEb=dEb)

    def _combine(self, E, G, A, extras):
        r = self.rows
        calc = np.empty(self.n_rows)
        n = self.n_design
        a, b, x = r["level_a"], r["level_b"], r["extra_index"]
        c = r["offset"] + r["coef_asymptote"] * A
        c = c + np.where(a >= 0, r["coef_a"] * E[np.maximum(a, 0)], 0.0) if n else c
        c = c + np.where(b >= 0, r["coef_b"] * E[np.maximum(b, 0)], 0.0) if n else c
        if n and self.ne:
            c = c + np.where(x >= 0, r["coef_extra"] * np.asarray(extras)[np.maximum(x, 0)], 0.0)
        calc[:n] = c
        calc[n:] = G[self.width_level]
        return calc

    def jacobian(self, state, vary_idx):
        """(d rows/d params [n_rows, n_params], d rows/d extras [n_rows, ne]) at an evaluated point."""
        params = state["params"]
        dE = state["dEb"].copy()
        dG = np.zeros_like(dE)
        idx = np.nonzero(self.quasibound)[0]
        if len(idx):
            seeds = (state["E"][idx], state["G"][idx])
            for k in vary_idx:
                h = FD_STEP * max(abs(params[k]), 1e-3)
                vals = []
                for step in (h, -h):
                    p = params.copy()
                    p[k] += step
                    E, G = self.quasibound_values(p, seeds if self.code == 1 else None)
                    vals.append((E[idx], G[idx]))
                dE[idx, k] = (vals[0][0] - vals[1][0]) / (2 * h)
                dG[idx, k] = (vals[0][1] - vals[1][1]) / (2 * h)
        dA = self.asymptote_gradient(params)
        r = self.rows
        n = self.n_design
        jac = np.zeros((self.n_rows, len(params)))
        jx = np.zeros((self.n_rows, self.ne))
        if n:
            a, b, x = r["level_a"], r["level_b"], r["extra_index"]
            jac[:n] = r["coef_asymptote"][:, None] * dA[None, :]
            jac[:n] += np.where((a >= 0)[:, None], r["coef_a"][:, None] * dE[np.maximum(a, 0)], 0.0)
            jac[:n] += np.where((b >= 0)[:, None], r["coef_b"][:, None] * dE[np.maximum(b, 0)], 0.0)
            for i in np.nonzero(x >= 0)[0]:
                jx[i, x[i]] = r["coef_extra"][i]
        jac[n:] = dG[self.width_level]
        return jac, jx


# ------------------------------------------------------------------------------ the solver
def _to_internal(p, lo, hi):
    if math.isfinite(lo) and math.isfinite(hi):
        return math.log((p - lo) / (hi - p))
    if math.isfinite(lo):
        return math.log(p - lo)
    if math.isfinite(hi):
        return math.log(hi - p)
    return p


def _to_external(u, lo, hi):
    """(p, dp/du) for the transforms of csrc/fit.c."""
    if math.isfinite(lo) and math.isfinite(hi):
        e = math.exp(-abs(u))
        s = 1 / (1 + e) if u >= 0 else e / (1 + e)
        return lo + (hi - lo) * s, (hi - lo) * s * (1 - s)
    if math.isfinite(lo):
        e = math.exp(min(u, 700.0))
        return lo + e, e
    if math.isfinite(hi):
        e = math.exp(min(u, 700.0))
        return hi - e, -e
    return u, 1.0


def _levenberg_marquardt(model, params0, extras0, vary_idx, lower, upper, max_iterations):
    """Minimises sum ((calc - obs)/sigma)^2 over the varied parameters and the extras.

    The step solves min ||Jw d + r||^2 + lam ||D d||^2 (D: the column norms of Jw, More scaling, never
    decreasing) by least squares on the stacked system; lam falls 3x after an accepted step and rises
    10x after a rejected or infeasible one. Returns a dict like the core's fit_run_rows."""
    nv = len(vary_idx)
    u0 = np.array([_to_internal(params0[k], lower[k], upper[k]) for k in vary_idx])

    def unpack(z):
        p = params0.copy()
        dpdu = np.ones(nv)
        for j, k in enumerate(vary_idx):
            p[k], dpdu[j] = _to_external(z[j], lower[k], upper[k])
        return p, z[nv:], dpdu

    z = np.concatenate([u0, np.asarray(extras0, dtype=float)])
    p, x, dpdu = unpack(z)
    calc, state = model.evaluate(p, x)
    w = 1.0 / model.sigma
    r = (calc - model.observed) * w
    chi2 = float(r @ r)
    jac, jx = model.jacobian(state, vary_idx)

    def weighted(jac, jx, dpdu):
        return np.hstack([jac[:, vary_idx] * dpdu[None, :], jx]) * w[:, None]

    Jw = weighted(jac, jx, dpdu)
    D = np.linalg.norm(Jw, axis=0)
    D[D == 0] = 1.0
    lam = 1e-3
    stop, test, n_infeasible, last_infeasible = "max_iterations", 0, 0, ""
    iterations = 0

    def gn_decrease(Jw, r):
        step = np.linalg.lstsq(Jw / D, -r, rcond=1e-12)[0]
        return float(np.sum((Jw / D @ step) ** 2))

    dec = gn_decrease(Jw, r)
    while iterations < max_iterations:
        if dec <= DECREASE_TOL * max(1.0, chi2):
            stop, test = "converged", 3
            break
        A = np.vstack([Jw / D, math.sqrt(lam) * np.eye(len(D))])
        step = np.linalg.lstsq(A, np.concatenate([-r, np.zeros(len(D))]), rcond=None)[0] / D
        z_try = z + step
        try:
            p_try, x_try, dpdu_try = unpack(z_try)
            calc_try, state_try = model.evaluate(p_try, x_try)
            r_try = (calc_try - model.observed) * w
            chi2_try = float(r_try @ r_try)
        except (_Infeasible, OverflowError) as err:
            n_infeasible += 1
            last_infeasible = str(err)
            chi2_try = math.inf
        if chi2_try < chi2:
            iterations += 1
            z, p, x, dpdu, calc, state, r, chi2 = z_try, p_try, x_try, dpdu_try, calc_try, state_try, r_try, chi2_try
            try:
                jac, jx = model.jacobian(state, vary_idx)
            except _Infeasible as err:
                stop, test, last_infeasible = "no_progress", 0, "Jacobian: %s" % err
                break
            Jw = weighted(jac, jx, dpdu)
            D = np.maximum(D, np.linalg.norm(Jw, axis=0))
            dec = gn_decrease(Jw, r)
            lam = max(lam / 3.0, 1e-12)
        else:
            lam *= 10.0
            if lam > 1e10:
                stop, test = ("converged", 4) if dec <= STALL_TOL * max(1.0, chi2) else ("no_progress", 0)
                break
    return dict(params=p, extra=x, calc=calc, jacobian=jac, jacobian_extra=jx, chi_square=chi2, iterations=iterations,
                n_eval=model.n_evaluations, n_infeasible=n_infeasible, last_infeasible=last_infeasible, stop=stop,
                test=test, predicted_decrease=dec, state=state)


# ------------------------------------------------------------------------------ the fit
def fit_with_quasibound(potential, datasets, masses, *, method, vary_flags, lower, upper, bounds_by_name,
                        scale_uncertainties, max_iterations, omega, born_oppenheimer):
    """fit() for data with quasibound positions or widths; returns a FitResult (see the module notes)."""
    from .fitting import FitResult
    if born_oppenheimer is not None:
        raise ValueError("Born-Oppenheimer corrections are not supported together with quasibound levels or widths; "
                         "fit the quasibound data without born_oppenheimer=")
    if omega:
        raise ValueError("omega=%d: quasibound levels and widths are computed for Omega = 0 only (the exact "
                         "resonance solver takes J(J+1)); fit them with omega=0" % omega)
    if isinstance(potential, _potentials.PointwisePotential):
        raise ValueError("a PointwisePotential has no adjustable parameters: quasibound data need an analytic model")
    engine_note = None
    if method == "corrected":
        method = "exact"
        engine_note = ("the corrected method covers bound levels only; these data (quasibound positions or "
                       "widths) were fitted with exact levels and exact resonance poles in every iteration")
    names = list(potential.param_names)
    ordinary = [d for d in datasets if not isinstance(d, ObservedWidths)]
    design = build_design(ordinary, 0)
    width_rows, blocks, it = [], [], iter(design.blocks)
    n_design = design.n_rows
    for b_index, d in enumerate(datasets):
        if not isinstance(d, ObservedWidths):
            blocks.append(next(it))
            continue
        rows = []
        for i in range(len(d)):
            if not (math.isfinite(d.width[i]) and d.width[i] > 0):
                raise ValueError("data set %d, row %d: width %r is invalid: a width (FWHM) is > 0 (%s)" % (
                    b_index + 1, i + 1, float(d.width[i]), d.unit))
            if not (math.isfinite(d.uncertainty[i]) and d.uncertainty[i] > 0):
                raise ValueError("data set %d, row %d: uncertainty %r is invalid: it must be > 0" % (
                    b_index + 1, i + 1, float(d.uncertainty[i])))
            key = (d.isotopologue[i], int(d.v[i]), int(d.J[i]))
            rows.append(n_design + len(width_rows))
            width_rows.append((design.level(key), float(d.width[i]), float(d.uncertainty[i]), (b_index, i)))
        blocks.append(Block(d, rows, "widths", d.unit, d.unit_factor))
    design.blocks = blocks
    n_vary = int(sum(vary_flags)) + len(design.extra_names)
    n_rows = n_design + len(width_rows)
    if n_rows < n_vary:
        raise ValueError("%d fitted data rows cannot determine %d varied parameters; fix some parameters (vary=...) "
                         "or add data" % (n_rows, n_vary))

    model = _Model(potential, design, masses, width_rows, method)
    params0 = np.array(model.params0, dtype=float)
    try:
        semi = model.classify(params0)
    except _Infeasible as err:
        raise ValueError("the starting potential %r: %s" % (potential, err)) from None
    _check_widths_on_quasibound(model, datasets, design, width_rows, potential, semi)
    # a start for the extras: free term values and fitted asymptotes from the start's levels
    extras0 = np.array(design.extra_start, dtype=float)
    try:
        calc0, _ = model.evaluate(params0, np.zeros(len(extras0)))
    except _Infeasible as err:
        raise ValueError("the starting potential %r cannot compute the data's levels: %s" % (potential, err)) \
            from None
    if len(extras0):
        r = design.arrays(masses, 0)[3]
        wgt = 1.0 / r["sigma"] ** 2
        for e in range(len(extras0)):
            sel = r["extra_index"] == e
            c = r["coef_extra"][sel]
            extras0[e] = float(np.sum(wgt[sel] * c * (r["observed"][sel] - calc0[:n_design][sel]))
                               / np.sum(wgt[sel] * c * c))
    vary_idx = [k for k, f in enumerate(vary_flags) if f]
    try:
        out = _levenberg_marquardt(model, params0, extras0, vary_idx, np.asarray(lower, float),
                                   np.asarray(upper, float), max_iterations)
    except _Infeasible as err:
        raise ValueError("the starting potential %r cannot compute the data's levels: %s" % (potential, err)) \
            from None

    # rows in the user's order: data set after data set
    n_all = sum(len(b.data) for b in design.blocks)
    calc = np.zeros(n_all)
    jac = np.zeros((n_all, len(names)))
    jx = np.zeros((n_all, len(design.extra_names)))
    observed_values, sigma = np.zeros(n_all), np.zeros(n_all)
    fitted = np.zeros(n_all, dtype=bool)
    start = 0
    for block in design.blocks:
        k = len(block.rows)
        sel = block.rows >= 0
        idx = np.arange(start, start + k)
        calc[idx[sel]] = out["calc"][block.rows[sel]]
        jac[idx[sel]] = out["jacobian"][block.rows[sel]]
        jx[idx[sel]] = out["jacobian_extra"][block.rows[sel]]
        fitted[idx] = sel
        sigma[idx] = block.data.uncertainty
        observed_values[idx] = block.data.width if isinstance(block.data, ObservedWidths) else \
            (block.data.wavenumber if isinstance(block.data, ObservedLines) else block.data.energy)
        block.start = start
        start += k
    fitted_potential = type(potential)(**dict(zip(names, out["params"].tolist())))
    result = FitResult._build(
        potential=fitted_potential, initial_potential=potential,
        observed=datasets[0] if len(datasets) == 1 else list(datasets), masses=masses, method=method,
        vary_flags=vary_flags, bounds_by_name=bounds_by_name, calculated=calc, jacobian=jac, fitted_rows=fitted,
        chi_square=float(out["chi_square"]), scale_uncertainties=bool(scale_uncertainties),
        iterations=int(out["iterations"]), n_evaluations=int(out["n_eval"]), stop=out["stop"],
        stop_test=int(out["test"]), predicted_decrease=float(out["predicted_decrease"]),
        n_infeasible=int(out["n_infeasible"]), last_infeasible=out["last_infeasible"],
        max_iterations=max_iterations, insensitive=[], observed_values=observed_values, sigma=sigma,
        design=design, extra_values=out["extra"], jacobian_extra=jx,
        n_level_calculations=int(model.n_level_calculations), omega=0)
    result.refreshes, result.refresh_history = 0, []
    result.start_notes = []
    _attach_quasibound(result, model, out, design, width_rows)
    if engine_note:
        result.quasibound_note = engine_note + "; " + result.quasibound_note
    result.fit_options = {"method": method, "vary": list(result.var_names),
                          "bounds": {n: b for n, b in bounds_by_name.items() if b != (None, None)},
                          "scale_uncertainties": bool(scale_uncertainties), "max_iterations": max_iterations,
                          "omega": 0, "born_oppenheimer": None}
    return result


def _check_widths_on_quasibound(model, datasets, design, width_rows, potential, semi):
    """A width belongs to a quasibound level: refuse one given for a level the start binds (or the data
    call bound), naming the row."""
    D = potential.asymptote
    positive_binding = set()
    for d in datasets:
        if type(d) is ObservedLevels and d.energy_zero == "asymptote":
            for i in range(len(d)):
                if d.energy[i] > 0:
                    positive_binding.add((d.isotopologue[i], int(d.v[i]), int(d.J[i])))
    for level, _, _, (b_index, i) in width_rows:
        key = model.keys[level]
        where = "data set %d (widths), row %d" % (b_index + 1, i + 1)
        if key in positive_binding:
            raise ValueError("%s: a width is given for %s, which the data give a positive binding energy (a bound "
                             "level); widths belong to quasibound levels above the asymptote, behind the "
                             "centrifugal barrier: check the assignment (v, J)" % (where, _level_name(key)))
        if not model.quasibound[level]:
            if key[2] == 0:
                why = "J=0 has no centrifugal barrier"
            else:
                why = "the starting potential %r binds it (or it lies above the barrier top)" % (potential,)
            raise ValueError("%s: a width is given for %s, which is not a quasibound level: %s. Widths belong to "
                             "quasibound levels (above the asymptote %.6g cm-1, behind the centrifugal barrier): "
                             "check the assignment (v, J) or start from a potential where this level is "
                             "quasibound" % (where, _level_name(key), why, D))


def _attach_quasibound(result, model, out, design, width_rows):
    """result.quasibound_levels (columns), per-row method errors, and the warning for rows computed less
    accurately than they were measured."""
    params = out["params"]
    idx = np.nonzero(model.quasibound)[0]
    E, G = out["state"]["E"], out["state"]["G"]
    semi = model._semiclassical(params, idx, require=False) if len(idx) else None
    if model.code == 1 and len(idx):
        ex = model._exact(params, idx, E[idx], G[idx], check=False)
        e_err, g_err = ex["energy_error"], ex["width_error"]
        note = ("quasibound levels: exact complex-energy poles (method error: the solver's estimate); the "
                "semiclassical values at the same point are shown beside them")
    elif len(idx):
        ex = model._exact(params, idx, E[idx], G[idx], check=False)
        e_err, g_err = np.abs(E[idx] - ex["energy"]), np.abs(G[idx] - ex["width"])
        note = "quasibound levels: semiclassical rule (method error: |semiclassical - exact pole| at the fitted point)"
    else:
        e_err = g_err = np.zeros(0)
        note = ""
    level_err = np.zeros(model.nl)
    width_err = np.zeros(model.nl)
    level_err[idx], width_err[idx] = e_err, g_err
    # bound levels: the exact solver's estimate, or |WKB - exact|
    b_idx = np.nonzero(~model.quasibound)[0]
    bound_note = ""
    if len(b_idx):
        from .corrected import exact_calc
        try:
            Jb = model.J[b_idx].astype(float)
            calc_ex, err_ex = exact_calc(model.model, params, model.curve, model.v[b_idx], Jb * (Jb + 1),
                                         model.mu[b_idx], 0, model.tolerance)
            level_err[b_idx] = err_ex if model.code == 1 else np.hypot(E[b_idx] - calc_ex, err_ex)
            bound_note = ("bound levels: %s" % ("the exact solver's error estimate" if model.code == 1 else
                                                "|first-order WKB - exact level|"))
        except ValueError as err:
            level_err[b_idx] = np.nan
            bound_note = "bound levels: method error not available (%s)" % err
    r = model.rows
    n = model.n_design
    row_err = np.zeros(model.n_rows)
    if n:
        ea = np.where(r["level_a"] >= 0, np.abs(r["coef_a"]) * level_err[np.maximum(r["level_a"], 0)], 0.0)
        eb = np.where(r["level_b"] >= 0, np.abs(r["coef_b"]) * level_err[np.maximum(r["level_b"], 0)], 0.0)
        row_err[:n] = np.hypot(ea, eb)
    row_err[n:] = width_err[model.width_level]
    # in the user's row order
    err = np.full(len(result.residuals), np.nan)
    for block in design.blocks:
        sel = block.rows >= 0
        err[block.start + np.nonzero(sel)[0]] = row_err[block.rows[sel]]
    ratio = err / result._sigma
    flagged = [int(i) for i in np.nonzero(ratio > FLAG_FRACTION)[0]]
    result.method_error = _frozen(err)
    result.method_error_ratio = _frozen(ratio)
    result.method_error_flagged = flagged
    result.method_error_note = "; ".join(x for x in (note, bound_note) if x)
    result.method_error_warning = ""
    if flagged:
        worst = int(np.nanargmax(ratio))
        result.method_error_warning = (
            "%d data row%s computed with a method error above %g of %s uncertainty (largest %.3g sigma, %s): %s" % (
                len(flagged), " is" if len(flagged) == 1 else "s are", FLAG_FRACTION,
                "its" if len(flagged) == 1 else "their", ratio[worst], _row_name(design, worst),
                "use method='exact' (exact levels and resonance poles)" if model.code == 0 else
                "the exact solvers are not accurate enough for these uncertainties"))
    cols = {"isotopologue": [model.keys[i][0] for i in idx], "v": model.v[idx].tolist(),
            "J": model.J[idx].tolist(), "energy": E[idx].tolist(), "width": G[idx].tolist(),
            "energy_error": np.asarray(e_err).tolist(), "width_error": np.asarray(g_err).tolist(),
            "semiclassical_energy": (semi["energy"][idx] if semi is not None else np.zeros(0)).tolist(),
            "semiclassical_width": (semi["width"][idx] if semi is not None else np.zeros(0)).tolist(),
            "theta": (semi["theta"][idx] if semi is not None else np.zeros(0)).tolist(),
            "above_asymptote": (E[idx] - result.potential.asymptote).tolist(),
            "rows": _rows_of_levels(model, design, idx)}
    result.quasibound_levels = cols
    if not width_rows and len(idx):
        note += "; no widths given: the quasibound levels are fitted by their positions only"
    result.quasibound_note = note


def _rows_of_levels(model, design, idx):
    """For each level in idx, the data rows (indices in the user's order, over all data sets) that use it."""
    user_row = np.full(model.n_rows, -1)
    for block in design.blocks:
        sel = np.nonzero(block.rows >= 0)[0]
        user_row[block.rows[sel]] = block.start + sel
    r, n = model.rows, model.n_design
    out = []
    for i in idx:
        used = np.zeros(model.n_rows, dtype=bool)
        if n:
            used[:n] = (r["level_a"] == i) | (r["level_b"] == i)
        used[n:] = model.width_level == i
        out.append(sorted(int(x) for x in user_row[used]))
    return out


def _row_name(design, row):
    """'data set k (kind), row i (v=.., J=..)' for a row index over all data rows."""
    for b_index, block in enumerate(design.blocks):
        if block.start <= row < block.start + len(block.data):
            i = row - block.start
            d = block.data
            if isinstance(d, ObservedLines):
                level = "v=%d, J=%d - v=%d, J=%d" % (d.v_upper[i], d.J_upper[i], d.v_lower[i], d.J_lower[i])
            else:
                level = _level_name((d.isotopologue[i], int(d.v[i]), int(d.J[i])))
            return "data set %d (%s), row %d: %s" % (b_index + 1, block.kind, i + 1, level)
    return "row %d" % (row + 1)


def _frozen(arr):
    arr = np.array(arr, copy=True)
    arr.setflags(write=False)
    return arr
