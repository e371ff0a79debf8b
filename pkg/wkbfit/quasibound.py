"""Quasibound levels: shape resonances trapped behind a barrier of V_J = V + J(J+1) hbar^2/(2 mu r^2).

`levels(..., quasibound=True)` calls this module. A level is quasibound when its energy lies between the
asymptote D and the top V_b of the barrier outside the well; it decays by tunnelling with the full width
at half maximum `width` (cm-1) and the lifetime tau = hbar/Gamma.

Semiclassical (method="wkb"), in C (csrc/quasibound.c):
  - position: the inner-well quantization rule between the inner wall r1 and the barrier's inner turning
    point r2 (`rule`, see RULES); with the default rule, the real part of the complex root of that rule
    with the barrier's decay term (i/4) ln(1 + exp(-2 theta)) added (the pole of the uniform
    parabolic-connection rule; 10-30x closer to the exact poles for theta ~ 0.5-2);
  - barrier-matched (the default rule for theta < 8, BARRIER_MATCH_THETA): the complex-energy pole of the
    radial equation integrated exactly from inside the inner wall through the barrier and joined a few
    Angstrom beyond the outer turning point r3 to a second-order outgoing WKB wave, seeded by the complex
    root; its position, width and error replace the rule's (widths narrower than it resolves, theta >~ 15,
    keep the barrier-penetration width). On a light well the complex root is off by up to 8e-3 cm-1 at
    theta 1-2 (a phase error on the barrier side), this rule by < 1e-6 cm-1, at ~1/10 of an exact pole's
    cost (tests/test_quasibound.py, tests/benchmarks/bench_quasibound.py);
  - width: Gamma = (s / 2 pi) ln(1 + exp(-2 theta)) (the uniform form; width_form="kemble" gives
    1/(1 + exp(2 theta)) instead), theta = integral_{r2}^{r3} sqrt((V_J - E)/eps) dr the barrier
    penetration integral, s the level spacing pi/(dI/dE - dphi/dE / 2) with phi the parabolic-barrier
    phase (physics.md 10, 12; both the spacing and the sign of the phase were chosen by test against the
    exact resonances, tests/test_quasibound.py).
Exact (method="exact"), in C (csrc/resonance.c): complex-energy (Siegert) poles E - i Gamma/2 with an
outgoing-wave condition, seeded by the semiclassical levels, with error estimates from the grid step and
the matching radius.
"""
import functools
import math

import numpy as np

from . import _core

__all__ = ["RULES", "WIDTH_FORMS", "LIFETIME_CONSTANT", "lifetime", "quasibound_columns", "exact_resonances",
           "compare_quasibound"]

#: speed of light, cm/s (exact by the SI definition of the metre)
SPEED_OF_LIGHT_CM_PER_S = 29979245800.0
#: tau[s] = LIFETIME_CONSTANT / Gamma[cm-1]: hbar/(h c Gamma) = 1/(2 pi c Gamma) = 5.30884e-12 s cm-1
LIFETIME_CONSTANT = 1.0 / (2.0 * math.pi * SPEED_OF_LIGHT_CM_PER_S)

#: theta below which the default rule takes the barrier-matched pole (the core's default)
BARRIER_MATCH_THETA = 8.0
#: position rules: name -> (order, barrier phase remainder, barrier-matched below this theta)
RULES = {
    "first_order": (1, False, 0.0),             # I(E) = pi (v + 1/2)
    "second_order": (2, False, 0.0),            # I - (sqrt(eps)/24) dK/dE = pi (v + 1/2)
    "second_order_barrier": (2, True, 0.0),     # ... + (phi + pi/(24 theta))/2, the complex root for theta < 8
    "barrier_matched": (2, True, BARRIER_MATCH_THETA),  # the default: the barrier-matched pole for theta < 8
    "barrier_matched_all": (2, True, math.inf),  # ... for every level (theta >= 8 too: ~2-3x the cost there)
}
WIDTH_FORMS = {"uniform": 0, "kemble": 1}


def lifetime(width):
    """Lifetime in s for a FWHM width in cm-1 (inf for width 0)."""
    w = np.asarray(width, dtype=float)
    with np.errstate(divide="ignore"):
        return np.where(w > 0, LIFETIME_CONSTANT / np.where(w > 0, w, 1.0), np.inf)


def _rule(rule):
    if rule is None:
        rule = "barrier_matched"  # the best rule on test, whatever order the bound levels use
    if rule not in RULES:
        raise ValueError("quasibound_rule=%r is not known; use one of %s (None: barrier_matched)"
                         % (rule, ", ".join(sorted(RULES))))
    return rule


def quasibound_columns(potential, mu, Js, *, rule=None, width_form="uniform"):
    """Semiclassical quasibound levels of every J in Js, as a dict of NumPy columns plus notes.

    Returns (columns, barriers, notes): columns has v, J, energy, binding_energy (negative: D - E),
    inner_turning_point, outer_turning_point (the barrier's inner side), Bv, dEdv, error, width, theta,
    barrier_turning_point (r3), position_order, rule (per row: "quasibound-barrier-matched" where the
    barrier-matched pole made it, else "quasibound-" + the rule's name); barriers maps J -> dict(top,
    height, r_top) or None. error is the numerical error of the rule; on barrier-matched rows the step and
    join error of the pole, which bounds |E - E_exact| there.
    """
    rule = _rule(rule)
    if width_form not in WIDTH_FORMS:
        raise ValueError("width_form=%r is not known; use 'uniform' (ln(1 + exp(-2 theta))) or 'kemble' "
                         "(1/(1 + exp(2 theta)))" % (width_form,))
    rule_order, barrier_phase, match_theta = RULES[rule]
    model, params, curve = potential._core_args()
    Js = list(Js)
    rot = np.asarray([J * (J + 1.0) for J in Js], dtype=float)
    res = _core.quasibound_levels(model, params, curve, float(mu), rot, order=rule_order,
                                  width_form=WIDTH_FORMS[width_form], barrier_phase=barrier_phase,
                                  barrier_match_theta=match_theta)
    J_col = np.asarray(Js, dtype=int)[res["rot_index"].astype(int)] if len(res["v"]) else np.empty(0, int)
    cols = {
        "v": res["v"].astype(int), "J": J_col, "energy": res["energy"],
        "binding_energy": -res["above_asymptote"], "inner_turning_point": res["inner_turning_point"],
        "outer_turning_point": res["outer_turning_point"], "Bv": res["Bv"], "dEdv": res["dEdv"],
        "error": res["error"], "width": res["width"], "theta": res["theta"],
        "barrier_turning_point": res["barrier_turning_point"], "position_order": res["order"].astype(int),
        "rule": np.where(res["barrier_matched"] > 0, "quasibound-barrier-matched",
                         "quasibound-" + ("second_order_barrier" if match_theta > 0 else rule).replace(
                             "_", "-")).astype(object),
    }
    barriers, notes = {}, []
    for k, J in enumerate(Js):
        if not res["barrier_found"][k]:
            barriers[J] = None
            continue
        barriers[J] = {"top": float(res["barrier_top"][k]), "height": float(res["barrier_height"][k]),
                       "r_top": float(res["barrier_r"][k])}
        v_top = res["v_top"][k]
        notes.append("J=%d: barrier top %.6f cm-1 (%.6g cm-1 above the asymptote) at r=%.5f A; levels from "
                     "v=%d up lie above the barrier top: not trapped, not listed"
                     % (J, res["barrier_top"][k], res["barrier_height"][k], res["barrier_r"][k],
                        int(math.ceil(v_top))))
        if rule_order == 2 and res["first_order_fallback"][k] > 0:
            notes.append("J=%d: %d quasibound level(s) near the barrier top, where the second-order rule has no "
                         "root, use first-order positions (position_order = 1)" % (J, int(res["first_order_fallback"][k])))
        if res["barrier_match_fallback"][k] > 0:
            notes.append("J=%d: %d quasibound level(s) with theta < %g where the barrier-matched pole was not found "
                         "keep the complex-root position (rule quasibound-second-order-barrier)"
                         % (J, int(res["barrier_match_fallback"][k]), match_theta))
    if match_theta > 0:
        notes.append("quasibound positions: barrier-matched pole for theta < %g (position and width), the "
                     "second_order_barrier rule above; widths otherwise: %s form (FWHM, cm-1)" % (match_theta, width_form))
    else:
        notes.append("quasibound positions: %s rule; widths: %s form (FWHM, cm-1)" % (rule, width_form))
    return cols, barriers, notes


def exact_resonances(potential, mu, J, energy, width, *, phase_step=0.06, r_match=50.0):
    """Exact resonance poles near the guesses (energy, FWHM width in cm-1; one J each).

    Returns a dict of arrays: energy, width, energy_error, width_error (estimates, cm-1), r_match (A),
    grid_points, above_barrier (bool).
    """
    from .potentials import Potential
    if not isinstance(potential, Potential):
        raise ValueError("potential must be a wkbfit potential object, got %r" % (potential,))
    J_arr = np.atleast_1d(np.asarray(J))
    E_arr = np.atleast_1d(np.asarray(energy, dtype=float))
    G_arr = np.atleast_1d(np.asarray(width, dtype=float))
    if not (J_arr.ndim == E_arr.ndim == G_arr.ndim == 1 and len(J_arr) == len(E_arr) == len(G_arr)):
        raise ValueError("J, energy and width must be 1-dimensional and of one length; got lengths %d, %d, %d"
                         % (J_arr.size, E_arr.size, G_arr.size))
    if J_arr.size and (not np.all(np.isfinite(J_arr.astype(float))) or np.any(J_arr != np.round(J_arr))
                       or np.any(J_arr < 0)):
        raise ValueError("J must hold whole numbers >= 0; got %r" % (J,))
    if not (np.all(np.isfinite(E_arr)) and np.all(np.isfinite(G_arr)) and np.all(G_arr >= 0)):
        raise ValueError("energy and width guesses must be finite, widths >= 0 (cm-1)")
    model, params, curve = potential._core_args()
    J, energy, width = J_arr.astype(int), E_arr, G_arr
    res = _core.resonances(model, params, curve, float(mu), np.asarray(J, dtype=np.intc),
                           np.asarray(energy, dtype=float), np.asarray(width, dtype=float),
                           phase_step=float(phase_step), r_match=float(r_match))
    res["above_barrier"] = res["above_barrier"].astype(bool)
    return res


def _bound_levels(potential, mu, Js, method, order, ends=None):
    """The bound levels of every J; a J whose well lies wholly above the asymptote (high J) has none."""
    from .levels import LevelTable, _COLUMNS, levels as _levels
    rule = dict(order=order, ends=ends) if method == "wkb" else {}

    def one(Jset):
        return _levels(potential, mu, None, Jset, method, **rule)

    try:
        return one(Js), []
    except ValueError as exc:
        if "no well" not in str(exc) and "below the asymptote" not in str(exc) and "has no point" not in str(exc):
            raise
    tables, no_well = [], []
    for J in Js:
        try:
            tables.append(one([J]))
        except ValueError as exc:
            if "no well" not in str(exc) and "below the asymptote" not in str(exc) and "has no point" not in str(exc):
                raise
            no_well.append(J)
    if not tables:
        return LevelTable({c: [] for c in _COLUMNS}, mu=mu, method="exact" if method == "exact" else
                          ("wkb" if order == 1 else "wkb2" if ends == "maslov" else "wkb-matched"), potential=potential,
                          vD={J: None for J in Js}), no_well
    cols = {c: np.concatenate([getattr(t, c) for t in tables]) for c in _COLUMNS}
    vD, v_th = {}, {}
    for t in tables:
        vD.update(t.vD_by_J)
        v_th.update(t.v_th_by_J)
    vD.update({J: None for J in no_well})
    table = LevelTable(cols, mu=mu, method=tables[0].method, potential=potential, vD=vD, v_th=v_th,
                       notes=tables[0].notes)
    counts = {}
    for t in tables:
        counts.update(getattr(t, "bound_counts", {}))
    counts.update({J: 0 for J in no_well})
    table.bound_counts = counts
    return table, no_well


def _method_error(table, *, bound, source, qcols, potential, mu):
    """method_error of a semiclassical table with quasibound rows (computed on first use): bound rows from
    the bound table's own estimate; barrier-matched rows their own error (the step and join estimate of a
    pole that is exact through the barrier: true error <= 0.8 of it on the test wells, median 0.45,
    tests/test_quasibound.py); the other quasibound rows |E - E_exact| + the exact pole's error estimate,
    against the exact resonance found from the semiclassical level (the more exact method, as for
    fixed-phase bound levels), inf where that search fails or lands on another level."""
    out = np.full(len(source), np.inf)
    b = source >= 0
    if np.any(b):
        out[b] = np.asarray(bound.method_error)[source[b]]
    rows = np.nonzero(~b)[0]
    qi = -1 - source[~b]
    matched = qcols["rule"][qi] == "quasibound-barrier-matched"
    out[rows[matched]] = qcols["error"][qi[matched]]
    rows, qi = rows[~matched], qi[~matched]
    if len(qi):
        try:
            res = exact_resonances(potential, mu, qcols["J"][qi], qcols["energy"][qi], qcols["width"][qi])
        except (ValueError, RuntimeError):
            return out
        dE = np.abs(qcols["energy"][qi] - res["energy"])
        same = (dE < 0.5 * qcols["dEdv"][qi]) & np.isfinite(res["energy_error"])
        out[rows[same]] = dE[same] + res["energy_error"][same]
    return out


def levels_with_quasibound(potential, mu, v, J, method, *, order, langer, maslov, rule, width_form, ends=None):
    """What `levels(..., quasibound=True)` returns: bound and quasibound levels in one LevelTable."""
    from .levels import LevelTable, _COLUMNS, _as_int_list
    from .masses import as_reduced_mass
    from .potentials import Potential

    if not isinstance(potential, Potential):
        raise ValueError("potential must be a wkbfit potential object (Morse, LennardJones, ...), got %r"
                         % (potential,))
    if method not in ("wkb", "exact"):
        raise ValueError("method=%r is not known; use 'wkb' or 'exact'" % (method,))
    if langer:
        raise ValueError("langer=True does not apply with quasibound=True: quasibound levels use the true "
                         "J(J+1) (and the second-order rule)")
    if maslov is not None and tuple(maslov) != (1, 1):
        raise ValueError("maslov=%r is not supported with quasibound=True: the inner-well rule has smooth turning "
                         "points at both ends (1, 1)" % (maslov,))
    mu = as_reduced_mass(mu)
    Js = _as_int_list(J, "J")
    vs = None if v is None else _as_int_list(v, "v")
    bound, no_well = _bound_levels(potential, mu, Js, method, order, ends)
    # exact resonances are seeded by the complex root (cheap, within a small fraction of the width), whatever
    # `quasibound_rule` says
    qcols, barriers, notes = quasibound_columns(potential, mu, Js,
                                                rule=rule if method == "wkb" else "second_order_barrier",
                                                width_form=width_form)
    n_q = len(qcols["v"])
    qcols["quasibound"] = np.ones(n_q, bool)
    qcols["width_error"] = np.full(n_q, np.nan)
    qcols["above_barrier"] = np.zeros(n_q, bool)
    keep = np.ones(n_q, bool)
    if method == "exact" and n_q:
        counts = getattr(bound, "bound_counts", {})
        for i in range(n_q):
            if qcols["v"][i] < counts.get(int(qcols["J"][i]), 0):
                keep[i] = False  # the exact solver binds it: it is bound, not quasibound
                notes.append("J=%d, v=%d: bound in the exact calculation although the semiclassical rule puts it "
                             "above the asymptote; listed as bound" % (qcols["J"][i], qcols["v"][i]))
        res = exact_resonances(potential, mu, qcols["J"], qcols["energy"], qcols["width"])
        for i in range(n_q):
            if abs(res["energy"][i] - qcols["energy"][i]) > 0.5 * qcols["dEdv"][i]:
                raise RuntimeError("J=%d, v=%d: the exact resonance search from E=%.6f cm-1 converged to "
                                   "E=%.6f cm-1, more than half a level spacing away: not the same level"
                                   % (qcols["J"][i], qcols["v"][i], qcols["energy"][i], res["energy"][i]))
        D = potential.asymptote
        qcols["energy"] = res["energy"]
        qcols["binding_energy"] = D - res["energy"]
        qcols["width"] = res["width"]
        qcols["error"] = res["energy_error"]
        qcols["width_error"] = res["width_error"]
        qcols["above_barrier"] = res["above_barrier"]
        notes.append("quasibound rows: exact complex-energy poles (error, width_error: estimates); theta, Bv, "
                     "dEdv and turning points are semiclassical values at the semiclassical position")
        if np.any(res["above_barrier"]):
            notes.append("exact resonances above the barrier top (above_barrier = True): "
                         + ", ".join("J=%d v=%d" % (qcols["J"][i], qcols["v"][i]) for i in range(n_q)
                                     if res["above_barrier"][i]))
    for J in no_well:
        notes.append("J=%d: the well of V_J lies above the asymptote: no bound levels" % J)
    qcols["lifetime"] = lifetime(qcols["width"])
    if method == "exact":
        qcols["rule"] = np.full(n_q, "exact", dtype=object)
    cols = {}
    for name in _COLUMNS:
        if name == "method_error":
            continue  # computed on first use (below), not forced here
        b = getattr(bound, name)
        q = qcols.get(name)
        q = np.full(n_q, np.nan) if q is None else np.asarray(q)
        cols[name] = np.concatenate([b, q[keep]])
    # where each row comes from: >= 0 a row of `bound`, -1 - i the quasibound row i
    source = np.concatenate([np.arange(len(bound)), -1 - np.nonzero(keep)[0]])
    order_idx = np.lexsort((cols["v"], cols["J"]))
    if vs is not None:
        wanted = set(vs)
        missing = [(vv, JJ) for JJ in Js for vv in vs
                   if not np.any((cols["v"] == vv) & (cols["J"] == JJ))]
        if missing:
            vv, JJ = missing[0]
            b = barriers.get(JJ)
            raise ValueError("v=%d, J=%d is neither bound nor quasibound for this potential and mass: %s"
                             % (vv, JJ, "it would lie above the barrier top (%.6f cm-1)" % b["top"] if b else
                                "V_J has no barrier above the asymptote"))
        order_idx = order_idx[np.isin(cols["v"][order_idx], list(wanted))]
    cols = {name: c[order_idx] for name, c in cols.items()}
    source = source[order_idx]
    estimate = None
    if method == "wkb":
        estimate = functools.partial(_method_error, bound=bound, source=source, qcols=qcols, potential=potential,
                                     mu=mu)
    table = LevelTable(cols, mu=mu, method=bound.method, potential=potential, vD=bound.vD_by_J,
                       v_th=bound.v_th_by_J, notes=list(bound.notes) + notes, method_error=estimate)
    table.barriers = barriers
    if hasattr(bound, "bound_counts"):
        table.bound_counts = bound.bound_counts
    return table


def compare_quasibound(potential, mu, J, v=None, *, rule=None, width_form="uniform"):
    """Semiclassical quasibound levels against the exact resonances, level by level.

    Returns (columns, notes): columns holds NumPy arrays v, J, theta, wkb_energy, exact_energy,
    difference (semiclassical - exact, cm-1), exact_error, wkb_width, exact_width, width_ratio
    (semiclassical / exact; NaN where the exact width is not resolved) and exact_width_error, one row per
    level quasibound in both (and in v, if given); notes name the levels only one of them finds.
    """
    from .levels import levels as _levels, _as_int_list
    Js = _as_int_list(J, "J")
    wanted = None if v is None else set(_as_int_list(v, "v"))
    sc = _levels(potential, mu, J=Js, quasibound=True, quasibound_rule=rule, width_form=width_form)
    ex = _levels(potential, mu, J=Js, quasibound=True, method="exact")

    def rows(t):
        return {(int(t.v[i]), int(t.J[i])): i for i in np.nonzero(t.quasibound & ~t.above_barrier)[0]
                if wanted is None or int(t.v[i]) in wanted}
    rs, re_ = rows(sc), rows(ex)
    common = sorted(set(rs) & set(re_), key=lambda k: (k[1], k[0]))
    i_s = np.array([rs[k] for k in common], dtype=int)
    i_e = np.array([re_[k] for k in common], dtype=int)
    cols = {"v": sc.v[i_s], "J": sc.J[i_s], "theta": sc.theta[i_s], "wkb_energy": sc.energy[i_s],
            "exact_energy": ex.energy[i_e], "difference": sc.energy[i_s] - ex.energy[i_e],
            "exact_error": ex.error[i_e], "wkb_width": sc.width[i_s], "exact_width": ex.width[i_e],
            "exact_width_error": ex.width_error[i_e]}
    # widths below ten times their error estimate (theta > ~15: the double-precision limit) have no ratio
    resolved = cols["exact_width"] > 10 * cols["exact_width_error"]
    with np.errstate(divide="ignore", invalid="ignore"):
        cols["width_ratio"] = np.where(resolved, cols["wkb_width"] / cols["exact_width"], np.nan)
    notes = []
    if not np.all(resolved):
        notes.append("width_ratio '-': the exact width is below ten times its error estimate (too narrow to "
                     "resolve in double precision)")
    for label, only in (("semiclassical", sorted(set(rs) - set(re_))), ("exact", sorted(set(re_) - set(rs)))):
        if only:
            notes.append("quasibound in the %s calculation only: %s"
                         % (label, ", ".join("v=%d J=%d" % k for k in only)))
    return cols, notes
