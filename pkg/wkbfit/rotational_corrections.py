"""Exact levels of many rotational rows from a few J: the refreshes of the corrected fit.

For one reduced mass and v, the correction delta(x) = E_exact - E_wkb (first-order WKB) is a smooth,
slowly varying function of x = J(J+1) (measured on a Lennard-Jones (12,6) well, De = 4000 cm-1,
mu = 20 u, v = 0..24, J = 0..99: a degree-4 polynomial in x reproduces it to 2e-8 cm-1, degree 6 to the
exact solver's own 1e-9). So where a (mu, v) has many J rows, the exact solver runs only at N_NODES + 1
Chebyshev-Lobatto points in x over the rows' range (rounded to whole J) and at N_CHECK J between them;
delta, and d(delta)/dp where a Jacobian is wanted, come at every row from the interpolating polynomial.
Each (mu, v) is checked: where a check point's interpolated delta misses its exact value by more than
the levels' tolerance (or the Jacobian's by more than tolerance / (LINEAR_STEP sd) per parameter), that
(mu, v) is solved row by row instead. The exact rows are then the first-order WKB rows (known to the
caller) plus the corrections.

Units: cm-1.
"""
import numpy as np

from . import _core

__all__ = ["exact_rows", "N_NODES", "N_CHECK", "MIN_J"]

#: degree of the interpolating polynomial in J(J+1) (N_NODES + 1 exact J per (mu, v))
N_NODES = 6
#: check points per (mu, v): the interval next to the lowest J and the middle one
N_CHECK = 2
#: a (mu, v) with fewer distinct J is solved row by row (interpolation would save little)
MIN_J = 2 * (N_NODES + 1 + N_CHECK)

_WKB, _EXACT = 0, 1


def _j_of(x):
    return np.rint((np.sqrt(1.0 + 4.0 * np.asarray(x, dtype=float)) - 1.0) / 2.0).astype(int)


def _node_j(j_lo, j_hi):
    """(node J, check J) for rows spanning j_lo..j_hi, or None when rounding makes nodes coincide."""
    x_lo, x_hi = j_lo * (j_lo + 1.0), j_hi * (j_hi + 1.0)
    theta = np.pi * np.arange(N_NODES + 1) / N_NODES
    nodes = _j_of(x_lo + (x_hi - x_lo) * (1 - np.cos(theta)) / 2)
    if len(np.unique(nodes)) != len(nodes):
        return None
    mid = N_NODES // 2
    theta_c = np.pi * np.array([0.5, mid + 0.5]) / N_NODES
    checks = np.setdiff1d(_j_of(x_lo + (x_hi - x_lo) * (1 - np.cos(theta_c)) / 2), nodes)
    if len(checks) < N_CHECK:
        return None
    return nodes, checks


def _level_deltas(model, params, curve, levels, tolerance, jacobian):
    """E_exact - E_wkb (energy zero: the minimum) at the levels [(mu, J, v)], and the same for dE/dp."""
    mu = np.array([m for m, _, _ in levels], dtype=float)
    J = np.array([j for _, j, _ in levels], dtype=int)
    v = np.array([vv for _, _, vv in levels], dtype=np.intc)
    rot = (J * (J + 1)).astype(float)
    if jacobian:
        ex, jex = _core.fit_evaluate(model, params, curve, v, rot, mu, 0, _EXACT, tolerance)
    else:
        # levels only: one solver call per (mu, J), no parameter derivatives
        from .corrected import exact_calc
        ex, _ = exact_calc(model, params, curve, v, rot, mu, 0, tolerance)
        jex = None
    wk, jwk = _core.fit_evaluate(model, params, curve, v, rot, mu, 0, _WKB)
    return ex - wk, (jex - jwk) if jacobian else None


def exact_rows(model, params, curve, v, rot, mu, energy_zero, tolerance, wkb_calc, wkb_jac=None, sd=None,
               linear_step=30.0):
    """The exact rows at params from the first-order WKB rows there (wkb_calc, and wkb_jac when a Jacobian
    is wanted) plus per-level corrections, interpolated in J(J+1) where a (mu, v) has >= MIN_J distinct J.

    energy_zero: 0 minimum, 1 asymptote, 2 lowest (v=0, J=0 of each mu); tolerance: the levels' target
    accuracy, cm-1 (the exact solver's and the interpolation's); sd: per parameter, the standard
    deviation that scales the Jacobian check (0 for a fixed parameter; needed with wkb_jac).
    Returns (calc, jacobian or None, info) with info: {"exact_levels": levels solved exactly,
    "interpolated_rows": rows from the interpolants, "fallback": (mu, v) groups that failed their check}.
    """
    v = np.asarray(v, dtype=int)
    mu = np.asarray(mu, dtype=float)
    J = _j_of(rot)
    want_jac = wkb_jac is not None
    n_par = wkb_jac.shape[1] if want_jac else 0
    groups = {}
    for i, key in enumerate(zip(mu.tolist(), v.tolist())):
        groups.setdefault(key, []).append(i)
    plans = {}  # (mu, v) -> (nodes, checks)
    direct = set()  # (mu, J, v) solved as they are
    for (m, vv), idx in groups.items():
        js = np.unique(J[idx])
        plan = _node_j(int(js[0]), int(js[-1])) if len(js) >= MIN_J else None
        if plan is None:
            direct.update((m, int(j), vv) for j in js)
        else:
            plans[(m, vv)] = plan
    if energy_zero == 2:
        direct.update((m, 0, 0) for m in np.unique(mu).tolist())
    needed = set(direct)
    for (m, vv), (nodes, checks) in plans.items():
        needed.update((m, int(j), vv) for j in np.concatenate([nodes, checks]))
    delta = {}  # (mu, J, v) -> (delta E, delta dE/dp or None)

    def solve(levels):
        levels = sorted(levels)
        d, dj = _level_deltas(model, params, curve, levels, tolerance, want_jac)
        for k, lev in enumerate(levels):
            delta[lev] = (d[k], dj[k] if want_jac else None)

    solve(needed)
    n_exact = len(needed)
    per_level = np.full(len(v), np.nan)
    per_level_jac = np.full((len(v), n_par), np.nan) if want_jac else None
    jac_tol = None
    if want_jac:
        scale = np.asarray(sd, dtype=float) * linear_step
        jac_tol = np.where(scale > 0, tolerance / np.where(scale > 0, scale, 1.0), np.inf)
    fallback = []
    for (m, vv), (nodes, checks) in plans.items():
        idx = np.asarray(groups[(m, vv)])
        x_lo, x_hi = nodes[0] * (nodes[0] + 1.0), nodes[-1] * (nodes[-1] + 1.0)

        def t_of(j):
            return 2 * (j * (j + 1.0) - x_lo) / (x_hi - x_lo) - 1

        Y = np.array([np.concatenate([[delta[(m, int(j), vv)][0]],
                                      delta[(m, int(j), vv)][1] if want_jac else []]) for j in nodes])
        coef = np.polynomial.chebyshev.chebfit(t_of(nodes), Y, N_NODES)
        at_checks = np.polynomial.chebyshev.chebval(t_of(checks), coef).T  # [check, column]
        exact_checks = np.array([np.concatenate([[delta[(m, int(j), vv)][0]],
                                                 delta[(m, int(j), vv)][1] if want_jac else []]) for j in checks])
        miss = np.abs(at_checks - exact_checks)
        ok = np.all(miss[:, 0] <= tolerance) and (not want_jac or np.all(miss[:, 1:] <= jac_tol))
        if not ok:
            fallback.append((m, vv))
            continue
        vals = np.polynomial.chebyshev.chebval(t_of(J[idx]), coef).T
        per_level[idx] = vals[:, 0]
        if want_jac:
            per_level_jac[idx] = vals[:, 1:]
    if fallback:
        more = set()
        for m, vv in fallback:
            more.update((m, int(j), vv) for j in np.unique(J[groups[(m, vv)]]))
        more -= set(delta)
        if more:
            solve(more)
            n_exact += len(more)
        for m, vv in fallback:
            plans.pop((m, vv))
    interpolated = np.zeros(len(v), dtype=bool)
    for (m, vv) in plans:
        interpolated[groups[(m, vv)]] = True
    for i in np.nonzero(~interpolated)[0]:
        d, dj = delta[(float(mu[i]), int(J[i]), int(v[i]))]
        per_level[i] = d
        if want_jac:
            per_level_jac[i] = dj
    # rows from levels: asymptote - E (zero 1), E - E(v=0, J=0) of the same mu (zero 2)
    if energy_zero == 1:
        per_level, per_level_jac = -per_level, (-per_level_jac if want_jac else None)
    elif energy_zero == 2:
        ref = {m: delta[(m, 0, 0)] for m in np.unique(mu).tolist()}
        per_level = per_level - np.array([ref[m][0] for m in mu.tolist()])
        if want_jac:
            per_level_jac = per_level_jac - np.array([ref[m][1] for m in mu.tolist()])
    calc = np.asarray(wkb_calc, dtype=float) + per_level
    jac = np.asarray(wkb_jac, dtype=float) + per_level_jac if want_jac else None
    info = {"exact_levels": n_exact, "interpolated_rows": int(np.count_nonzero(interpolated)), "fallback": fallback}
    return calc, jac, info
