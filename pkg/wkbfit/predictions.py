"""Predictions of a fitted potential: bound levels up to the last, quasibound levels, vD, v_th, D0.

`FitResult.predict` calls `predict` here. Each quantity comes from the accurate method of the fit:
  bound levels  exact levels of the fitted potential (fits "corrected" and "exact"), with the
                analytic gradients <v|dV/dp|v>; first-order WKB levels for a "wkb" fit (the model
                that fit used);
  v_th          the quantum threshold number from the matched rule (levels v < v_th are bound),
                checked against the count of exact levels;
  vD            the quantum number at dissociation of the accurate levels: v_th + 1/(2(n-2)) for
                J = 0 under a -C_n/r^n tail (physics.md 4c (i): the value the LeRoy-Bernstein law
                extrapolates the accurate levels to), v_th itself for an exponential tail or behind
                a centrifugal barrier (a linear outer turning point at the asymptote);
                `vD_first_order` keeps the first-order WKB value I(D) = pi (vD + 1/2);
  quasibound    exact resonance poles (positions and FWHM widths) when asked.
Uncertainties come from the fit's covariance: linear propagation with the analytic gradients where
they exist (levels, D0, first-order vD); elsewhere (v_th, vD, quasibound positions and widths) central
differences of the accurate quantity along the covariance's principal axes, one standard deviation
each way (`propagate_by_differences`). Each quantity's method error is added in quadrature.

Units: cm-1; quantum numbers dimensionless.
"""
import math

import numpy as np

from . import _core, _validate
from . import method_error as _method_error

__all__ = ["predict", "propagate_by_differences", "accurate_threshold", "QuasiboundPrediction"]


# ------------------------------------------------------------------------------ propagation
def _principal_steps(result):
    """Parameter steps of one standard deviation along each principal axis of the covariance of the
    potential's varied, determined parameters (full parameter vectors, one per axis)."""
    names = list(result.potential.param_names)
    idx, cov = result._gradient_covariance()
    if not idx:
        return []
    w, U = np.linalg.eigh(0.5 * (cov + cov.T))
    steps = []
    for k in range(len(w)):
        if w[k] > 0:
            d = np.zeros(len(names))
            d[idx] = math.sqrt(w[k]) * U[:, k]
            steps.append(d)
    return steps


def propagate_by_differences(result, func, scale=1.0):
    """One-sigma uncertainties of func(potential) (an array of fixed length) by central differences
    along the covariance's principal axes: var = sum_k ((f(p + s d_k) - f(p - s d_k)) / 2s)^2, d_k one
    standard deviation along axis k. This is linear propagation with the gradient replaced by a
    secant over +-1 sd (the right scale for quantities whose numerical noise is far below their
    spread). A step the model refuses (ValueError) is retried at a tenth; returns (sd, note or None)."""
    pot = result.potential
    names = list(pot.param_names)
    p0 = np.array([pot.params[n] for n in names], dtype=float)
    var = None
    for d in _principal_steps(result):
        for s in (scale, 0.1 * scale):
            try:
                fp = np.asarray(func(pot.with_params(**dict(zip(names, (p0 + s * d).tolist())))), dtype=float)
                fm = np.asarray(func(pot.with_params(**dict(zip(names, (p0 - s * d).tolist())))), dtype=float)
                break
            except (ValueError, RuntimeError):
                continue
        else:
            return None, "a potential one standard deviation from the fitted one is invalid or has no such levels"
        term = ((fp - fm) / (2 * s)) ** 2
        var = term if var is None else var + term
    if var is None:
        return None, "no varied parameter is determined"
    return np.sqrt(var), None


# ------------------------------------------------------------------------------ threshold
def accurate_threshold(potential, mu, rot):
    """(v_th, vD) of the accurate levels at the rotational factor rot (J(J+1) - Omega^2).

    v_th from the matched rule at the asymptote (csrc/matched.c); vD = v_th + 1/(2(n-2)) for rot = 0
    and a -C_n/r^n tail (physics.md 4c (i)), else vD = v_th (an exponential tail has the threshold
    phase of a linear turning point, the n -> infinity limit; behind a centrifugal barrier the outer
    turning point at the asymptote is a linear one). NaN where the matched rule gives no v_th."""
    from .near_dissociation import long_range_tail
    model, params, curve = potential._core_args()
    try:
        # no level asked for: a request of deep levels only would let the core skip the threshold
        res = _core.wkb_levels(model, params, curve, float(mu), [float(rot)], [], 1, 1, order=2, ends=1)
        v_th = float(np.atleast_1d(res["v_th"])[0])
    except (ValueError, RuntimeError):
        return math.nan, math.nan
    if rot == 0:
        tail = long_range_tail(potential)
        if tail is not None:
            return v_th, v_th + 1.0 / (2.0 * (tail[0] - 2.0))
    return v_th, v_th


# ------------------------------------------------------------------------------ quasibound
class QuasiboundPrediction:
    """Predicted quasibound levels (between the asymptote and the barrier top of V_J) with one-sigma
    uncertainties: arrays v, J, energy, energy_uncertainty, binding_energy (D - E, negative),
    width (FWHM), width_uncertainty, lifetime (s), energy_error and width_error (the numerical
    error estimates of the method, included in the uncertainties); method ("exact" or the
    semiclassical rule's name); notes."""

    def __init__(self, columns, method, notes=()):
        for name in ("v", "J", "energy", "energy_uncertainty", "binding_energy", "width", "width_uncertainty",
                     "lifetime", "energy_error", "width_error"):
            arr = np.array(columns[name], dtype=int if name in ("v", "J") else float)
            arr.setflags(write=False)
            setattr(self, name, arr)
        self.method = method
        self.notes = list(notes)

    def __len__(self):
        return len(self.v)

    def to_dict(self):
        return {name: getattr(self, name).tolist() for name in
                ("v", "J", "energy", "energy_uncertainty", "binding_energy", "width", "width_uncertainty",
                 "lifetime")}

    def to_text(self):
        from .reports import text_table
        cols = [("v", "", self.v, "%d"), ("J", "", self.J, "%d"), ("energy", "cm-1", self.energy, "%.6f"),
                ("+/-", "cm-1", self.energy_uncertainty, "%.6f"), ("width", "cm-1", self.width, "%.4g"),
                ("+/-", "cm-1", self.width_uncertainty, "%.2g"), ("lifetime", "s", self.lifetime, "%.4g")]
        return text_table(cols, "Quasibound levels (%s); one-sigma uncertainties" % self.method, self.notes)

    def __str__(self):
        return self.to_text()

    def __repr__(self):
        return "<QuasiboundPrediction: %d levels (%s)>" % (len(self), self.method)


def _quasibound(result, mass, J, accurate):
    """QuasiboundPrediction of the fitted potential at J: exact poles for accurate fits (uncertainties by
    differences of the exact poles, seeded by the fitted potential's), the semiclassical rule otherwise."""
    from .quasibound import exact_resonances, levels_with_quasibound, lifetime
    method = "exact" if accurate else "wkb"
    table = levels_with_quasibound(result.potential, mass, None, [J], method, order=None, langer=False,
                                   maslov=None, rule=None, width_form="uniform")
    sel = np.asarray(table.quasibound, dtype=bool)
    v, E, W = table.v[sel], table.energy[sel], table.width[sel]
    notes = [n for n in table.notes if "quasibound" in n or "resonance" in n]
    Js = np.full(len(v), J)
    if not len(v):
        notes.append("J=%d: no quasibound levels (V_J has no barrier above the asymptote that traps a level)" % J)
        empty = {k: [] for k in ("v", "J", "energy", "energy_uncertainty", "binding_energy", "width",
                                 "width_uncertainty", "lifetime", "energy_error", "width_error")}
        return QuasiboundPrediction(empty, method, notes)
    if accurate:
        spacing = table.dEdv[sel]
        e_err, w_err = table.error[sel], table.width_error[sel]

        def func(pot):
            res = exact_resonances(pot, mass, Js, E, W)
            if np.any(np.abs(res["energy"] - E) > 0.5 * spacing):
                raise ValueError("a perturbed resonance left its level")
            return np.concatenate([res["energy"], res["width"]])
    else:
        e_err = w_err = np.zeros(len(v))
        from .quasibound import quasibound_columns

        def func(pot):
            cols, _, _ = quasibound_columns(pot, mass, [J])
            if not np.array_equal(cols["v"], v):
                raise ValueError("a perturbed potential traps other levels")
            return np.concatenate([cols["energy"], cols["width"]])
        notes.append("positions and widths from the semiclassical rule (the fit's method is 'wkb')")
    sd, why = propagate_by_differences(result, func)
    if sd is None:
        sd = np.full(2 * len(v), math.nan)
        notes.append("quasibound uncertainties not available: %s" % why)
    else:
        notes.append("quasibound uncertainties: differences of the %s poles one standard deviation along each "
                     "principal axis of the covariance, with their numerical errors in quadrature" % method)
    n = len(v)
    cols = {"v": v, "J": Js, "energy": E, "energy_uncertainty": np.hypot(sd[:n], np.nan_to_num(e_err)),
            "binding_energy": result.potential.asymptote - E, "width": W,
            "width_uncertainty": np.hypot(sd[n:], np.nan_to_num(w_err)), "lifetime": lifetime(W),
            "energy_error": e_err, "width_error": w_err}
    return QuasiboundPrediction(cols, method, notes)


# ------------------------------------------------------------------------------ predict
def predict(result, isotopologue=None, mu=None, J=0, *, order=None, ends=None, quasibound=False):
    """What FitResult.predict returns (see its docstring)."""
    from .fitting import Prediction, _level_code
    from .reports import _frozen
    mass, label = result._resolve_mu(isotopologue, mu)
    J = _validate.integer(J, "J", 0, _validate.MAX_QUANTUM_NUMBER, "an integer >= 0")
    quasibound = _validate.flag(quasibound, "quasibound")
    omega = int(getattr(result, "omega", 0) or 0)
    if J < omega:
        raise ValueError("J=%d is below Omega=%d of the fitted state: its levels have J >= Omega" % (J, omega))
    if quasibound and omega:
        raise ValueError("quasibound=True is not available for a state with Omega=%d (the quasibound levels use "
                         "J(J+1)); predict with quasibound=False" % omega)
    pot = result.potential
    rot = float(J * (J + 1) - omega * omega)
    accurate = result.method != "wkb"
    model, params, curve = pot._core_args()
    code = _level_code(result.method)
    res = _core.fit_levels(model, params, curve, mass, rot, code)
    E, G = res["energy"], res["jacobian"]
    rule_note = None
    table = None
    if order is not None or ends is not None:
        from .levels import levels as _levels
        table = _levels(pot, mass, J=J, order=order, ends=ends)
        n = min(len(table), len(E))
        E, G = np.array(table.energy[:n]), G[:n]
        rule_note = ("levels from the %s rule of the fitted potential (%d bound; the fit's own rule "
                     "binds %d); uncertainties from the gradients of the fit's rule" % (
                         table.method, len(table), len(res["energy"])))
    asym, dA = res["asymptote"], result._asymptote_gradient()
    if J == omega:
        E00, G00 = (E[0], G[0]) if len(E) else (math.nan, np.full(len(dA), math.nan))
    else:
        r0 = _core.fit_levels(model, params, curve, mass, float(omega), code)  # v=0, J=Omega
        E00, G00 = (r0["energy"][0], r0["jacobian"][0]) if len(r0["energy"]) else \
            (math.nan, np.full(len(dA), math.nan))
    notes = []
    if result.undetermined:
        notes.append("uncertainties leave out the undetermined parameter%s %s (held at their values)" % (
            "s" if len(result.undetermined) > 1 else "", ", ".join(result.undetermined)))
    if getattr(result, "correction", None) is not None:
        notes.append("levels of the reference isotopologue's potential (%s): the Born-Oppenheimer corrections "
                     "of other isotopologues are not applied to predictions" % result.correction.reference)
    if rule_note:
        notes.append(rule_note)
    elif not accurate:
        notes.append("levels are first-order WKB levels of the fitted potential (the fit's method)")
    else:
        notes.append("levels are exact levels of the fitted potential (radial Schroedinger equation)")
    merr, merr00, note = _method_error.prediction_method_errors("wkb" if rule_note else result.method,
                                                                pot, mass, J, E, E00)
    if table is not None:
        # the rule's own per-level method error estimates (|E - E_exact|) where the table has them
        own = np.asarray(table.method_error[:len(E)], dtype=float)
        merr = np.where(np.isfinite(own), own, merr)
    notes.append(note)
    e_unc = np.hypot(result._propagate(G), merr)
    b_unc = np.hypot(result._propagate(dA[None, :] - G), merr)
    if len(E) > 1:
        spacing = np.diff(E)
        s_unc = np.hypot(result._propagate(np.diff(G, axis=0)), np.hypot(merr[1:], merr[:-1]))
    else:
        spacing, s_unc = np.zeros(0), np.zeros(0)
    D0 = asym - E00
    D0_unc = float(np.hypot(result._propagate((dA - G00)[None, :])[0], merr00)) if np.isfinite(D0) else math.nan

    # first-order vD with its analytic gradient (the value of a "wkb" fit, kept for comparison otherwise)
    vD1 = float(res["vD"])
    dvD = res["dvD_dp"]
    vD1_unc = float(result._propagate(dvD[None, :])[0]) \
        if np.all(np.isfinite(dvD[result._gradient_covariance()[0]])) else math.nan
    v_th = v_th_unc = None
    if accurate and (table is None or table.method == "wkb-matched"):
        v_th, vD = accurate_threshold(pot, mass, rot)
        if math.isfinite(v_th):
            sd, why = propagate_by_differences(result, lambda p: [accurate_threshold(p, mass, rot)[0]])
            if sd is None or not math.isfinite(sd[0]):
                v_th_unc = vD_unc = math.nan
                notes.append("the uncertainties of v_th and vD could not be computed: %s" % (
                    why or "the matched rule gives no v_th one standard deviation away"))
            else:
                # the matched rule's own error near threshold, in v: its method error at the last level over
                # the last spacing (a bound; measured 1e-9..1e-6 cm-1 for the last levels, physics.md 12)
                v_err = 0.0
                if len(E) > 1 and math.isfinite(merr[-1]):
                    v_err = float(merr[-1] / max(spacing[-1], 1e-300))
                v_th_unc = vD_unc = float(math.hypot(sd[0], v_err))
            rel = "vD = v_th + 1/(2(n-2)) (physics.md 4c)" if vD != v_th else "vD = v_th"
            notes.append("v_th from the matched rule at the asymptote; %s; uncertainties by differences one "
                         "standard deviation along each principal axis of the covariance; first-order WKB gives "
                         "vD = %.5f" % (rel, vD1))
            count = math.ceil(v_th) if v_th != math.floor(v_th) else int(v_th)
            if table is None and count != len(E):
                notes.append("the exact solver binds %d levels, the matched v_th = %.6f counts %d: the last level "
                             "lies within the rules' accuracy of the asymptote" % (len(E), v_th, count))
        else:
            vD, vD_unc = vD1, vD1_unc
            v_th = None
            notes.append("the matched rule gives no v_th for this potential: vD is the first-order WKB value")
    elif table is not None and table.v_th is not None and math.isfinite(table.v_th):
        v_th, vD = accurate_threshold(pot, mass, rot)
        sd, _ = propagate_by_differences(result, lambda p: [accurate_threshold(p, mass, rot)[0]])
        v_th_unc = vD_unc = float(sd[0]) if sd is not None else math.nan
        notes.append("v_th from the matched rule at the asymptote")
    else:
        vD, vD_unc = vD1, vD1_unc
        notes.append("vD is the first-order WKB value I(D) = pi (vD + 1/2)")
    if not math.isfinite(vD_unc if vD_unc is not None else math.nan) and v_th is None:
        notes.append("the uncertainty of vD could not be computed (a perturbed potential is invalid)")

    pred = Prediction(E, e_unc, asym - E, b_unc, spacing, s_unc, J=J, mu=mass, isotopologue=label,
                      D0=D0, D0_uncertainty=D0_unc, vD=vD, vD_uncertainty=vD_unc, potential=pot,
                      method=result.method, notes=notes)
    pred.method_error = _frozen(merr)
    pred.vD_first_order, pred.vD_first_order_uncertainty = vD1, vD1_unc
    pred.v_th, pred.v_th_uncertainty = v_th, v_th_unc
    if v_th is not None and v_th_unc is not None and math.isfinite(v_th_unc):
        # the number of bound levels is the count v < v_th; its range for v_th -+ one standard deviation
        pred.n_bound_range = (max(0, math.ceil(v_th - v_th_unc)), max(0, math.ceil(v_th + v_th_unc)))
    pred.quasibound = _quasibound(result, mass, J, accurate) if quasibound else None
    if pred.quasibound is not None:
        pred.notes.append("quasibound levels: pred.quasibound (%d)" % len(pred.quasibound))
    return pred
