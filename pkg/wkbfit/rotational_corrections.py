"""Exact levels of many rotational rows from a few J: the refreshes of the corrected fit.

For one reduced mass and v, the correction delta(x) = E_exact - E_wkb (first-order WKB) is a smooth,
slowly varying function of x = J(J+1) (measured on a Lennard-Jones (12,6) well, De = 4000 cm-1,
mu = 20 u, v = 0..24, J = 0..99: a degree-4 polynomial in x reproduces it to 2e-8 cm-1, degree 6 to the
exact solver's own 1e-9). So where a (mu, v) has many J rows, the exact solver runs only at the
Chebyshev-Lobatto points of degree 4 in x over the rows' range (rounded to whole J) and at two check J
between them (the interval next to the lowest J and a middle one); delta, and d(delta)/dp where a
Jacobian is wanted, come at every row from the interpolating polynomial. Where a check point's
interpolated delta misses its exact value by more than CHECK_MARGIN of the levels' tolerance (the error
elsewhere between nodes can be a few times that at the checks; or the Jacobian's by more
than tolerance / (linear_step sd) per parameter: the energy error of the largest step the fit takes
linearly), the degree doubles (the degree-8 nodes contain the degree-4 nodes and checks); where that
fails too, the (mu, v) is solved row by row. The Jacobian's corrections d(delta)/dp have a ladder of their
own, from degree 2 (JACOBIAN_DEGREES: its nodes and checks are the degree-4 nodes, so only those 5 J need
the exact solver's derivatives, the levels' two check J not). The exact rows are then the first-order WKB
rows (known to the caller) plus the corrections.

Point-wise curves are not interpolated: the cubic spline's V'' jumps at the knots, so delta(J) is ragged
at ~3e-8 cm-1 (measured on 60 samples of a Morse well) where two check points cannot see it.

Units: cm-1.
"""
import numpy as np

from . import _core

__all__ = ["exact_rows", "interpolable", "RowGroups", "DEGREES", "FIRST_REFRESH_DEGREES", "JACOBIAN_DEGREES", "MIN_J", "CHECK_MARGIN"]

#: degrees of the interpolating polynomial in J(J+1), tried in turn (each Lobatto node set contains the
#: previous one and its check points). Measured on the 20 000-level benchmark fit (tolerance 1e-5 cm-1):
#: starting at degree 2 saves 27 % of the exact levels but its rows, off by up to 2.6e-6 cm-1, move the
#: fitted parameters by 2e-3 sd; from degree 4 they move by 3e-7 sd
DEGREES = (4, 8)
#: ... for the levels of a fit's first, loose refresh (corrected.first_refresh_tolerance, ~10x the levels'
#: tolerance): degree 2 (5 J per (mu, v)) is within it where it passes its checks (2.6e-6 cm-1 on the
#: benchmark fit, tolerance 1e-4); the exact evaluation after it decides the fit at DEGREES
FIRST_REFRESH_DEGREES = (2, 4, 8)
#: degrees of the Jacobian's corrections d(delta)/dp, tried in turn: their check tolerance (the energy error
#: of the fit's largest linear step) is loose, and degree 2 with its checks needs exactly the degree-4 nodes
#: (5 J with derivatives instead of 7; the levels' two check J without). Measured on the 20 000-level
#: benchmark fit: every (mu, v) passes at degree 2, the exact evaluation with the Jacobian costs ~25 % less,
#: and the fitted parameters move by < 1e-6 sd
JACOBIAN_DEGREES = (2, 4, 8)
#: an interpolant is taken when it misses its check points by at most this fraction of the tolerance
CHECK_MARGIN = 0.25
#: a (mu, v) with fewer distinct J is solved row by row (degree 4 with its checks needs 7 exact J)
MIN_J = 14

_WKB, _EXACT = 0, 1


def _j_of(x):
    return np.rint((np.sqrt(1.0 + 4.0 * np.asarray(x, dtype=float)) - 1.0) / 2.0).astype(int)


def _node_j(j_lo, j_hi, degree):
    """(node J, check J) of that degree for rows spanning j_lo..j_hi, or None when rounding to whole J
    makes two of them coincide."""
    x_lo, x_hi = j_lo * (j_lo + 1.0), j_hi * (j_hi + 1.0)
    theta = np.pi * np.concatenate([np.arange(degree + 1), [0.5, degree // 2 + 0.5]]) / degree
    js = _j_of(x_lo + (x_hi - x_lo) * (1 - np.cos(theta)) / 2)
    if len(set(js.tolist())) != len(js):  # (a set: np.unique costs ~10 us per call on so few)
        return None
    return js[:degree + 1], js[degree + 1:]


def _distinct(x):
    """np.unique(x) of a 1-d array without NaN, by sorting (numpy 2's default hash-based unique costs ~1.7 ms on
    20 000 integers, a sort 0.15 ms; on the 50 rows of a small fit 2.5 us against 3-4.5 us). Also used by
    method_error.py and corrected.py."""
    x = np.sort(x)
    return x[np.concatenate([[True], x[1:] != x[:-1]])] if len(x) else x


def _clenshaw(t, c):
    """Chebyshev series at t with per-point coefficients c[k, point, column]: the arithmetic of
    numpy.polynomial.chebyshev.chebval point by point (the same bits), for many series in one pass."""
    if len(c) == 1:
        return c[0] + 0.0 * t
    x2 = 2 * t
    c0, c1 = c[-2], c[-1]
    for i in range(3, len(c) + 1):
        c0, c1 = c[-i] - c1, c0 + c1 * x2
    return c0 + c1 * t


def interpolable(model, v, rot, mu):
    """Whether exact_rows would interpolate any (mu, v) of these rows (a smooth model, >= MIN_J distinct J)."""
    if model == "pointwise" or len(v) < MIN_J:
        return False
    rot = np.asarray(rot, dtype=float)
    # fewer than MIN_J distinct rotational factors leave fewer distinct J in every (mu, v): no (the usual
    # small fit, a few J values; a set of the values costs ~2 us on 50 rows, the test below ~30 us)
    if len(rot) <= _FEW_ROWS and len(set(rot.tolist())) < MIN_J:
        return False
    # (mu, v, J) as one integer code (1-d unique: np.unique(axis=0) cost ~10 ms on 20 000 rows)
    mu = np.asarray(mu, dtype=float)
    if len(mu) and (mu == mu[0]).all():
        mu_index = np.zeros(len(mu), dtype=np.int64)  # (np.unique's inverse for one reduced mass)
    else:
        _, mu_index = np.unique(mu, return_inverse=True)
    v, J = np.asarray(v, dtype=np.int64), _j_of(rot).astype(np.int64)
    n_v, n_J = int(v.max()) + 1, int(J.max()) + 1
    levels = _distinct((mu_index.astype(np.int64) * n_v + v) * n_J + J)  # one per distinct (mu, v, J), sorted
    group = levels // n_J  # sorted: the runs of equal values are the (mu, v), their lengths the distinct J
    edges = np.flatnonzero(np.concatenate([[True], group[1:] != group[:-1], [True]]))
    return bool(np.any(np.diff(edges) >= MIN_J))


#: up to this many rows `interpolable` first counts the distinct rotational factors by a set
_FEW_ROWS = 2000


def _level_deltas(model, params, curve, levels, tolerance, jacobian):
    """E_exact - E_wkb (energy zero: the minimum) at the levels [(mu, J, v)], and the same for dE/dp."""
    mu = np.array([m for m, _, _ in levels], dtype=float)
    J = np.array([j for _, j, _ in levels], dtype=int)
    v = np.array([vv for _, _, vv in levels], dtype=np.intc)
    rot = (J * (J + 1)).astype(float)
    # one core call for all (mu, J) groups, threaded over them (csrc/fit_levels.c, GIL released); levels
    # only: without <v|dV/dp|v> (the same levels, bit for bit, as corrected.exact_calc's per-(mu, J) calls)
    ex, jex = _core.fit_evaluate(model, params, curve, v, rot, mu, 0, _EXACT, tolerance, jacobian=jacobian)
    wk, jwk = _core.fit_evaluate(model, params, curve, v, rot, mu, 0, _WKB, jacobian=jacobian)
    d = ex - wk
    if jacobian:
        return np.column_stack([d, jex - jwk])
    return d[:, None]


class RowGroups:
    """The rows grouped by (mu, v), in the order of their first row: rows[(mu, v)] (row indices, ascending),
    span[(mu, v)] = (lowest J, highest J, distinct J); J per row, the distinct reduced masses and each row's
    index into them. Made once per set of rows (a fit's refreshes share it: ~4 ms on 20 000 rows); the
    Python work is per group, not per row."""

    def __init__(self, v, rot, mu):
        v, mu = np.asarray(v, dtype=int), np.asarray(mu, dtype=float)
        if not len(v):
            raise ValueError("exact_rows: no rows given")
        self.J = J = _j_of(rot)
        self.mu_values, self.mu_index = np.unique(mu, return_inverse=True)
        n_v, n_J = int(v.max()) + 1, int(J.max()) + 1
        code = self.mu_index.astype(np.int64) * n_v + v
        _, first, group_of = np.unique(code, return_index=True, return_inverse=True)
        rows_by_group = np.argsort(group_of, kind="stable")
        cut = np.searchsorted(group_of[rows_by_group], np.arange(len(first) + 1))
        J_sorted = J[rows_by_group]
        j_lo = np.minimum.reduceat(J_sorted, cut[:-1]).tolist()
        j_hi = np.maximum.reduceat(J_sorted, cut[:-1]).tolist()
        _, n_distinct = np.unique(_distinct(code * n_J + J) // n_J, return_counts=True)
        keys = list(zip(mu[first].tolist(), v[first].tolist()))
        self.rows, self.span = {}, {}
        for g in np.argsort(first, kind="stable").tolist():
            self.rows[keys[g]] = rows_by_group[cut[g]:cut[g + 1]]
            self.span[keys[g]] = (j_lo[g], j_hi[g], int(n_distinct[g]))


def exact_rows(model, params, curve, v, rot, mu, energy_zero, tolerance, wkb_calc, wkb_jac=None, sd=None,
               linear_step=30.0, degrees=DEGREES, groups=None):
    """The exact rows at params from the first-order WKB rows there (wkb_calc, and wkb_jac when a Jacobian
    is wanted) plus per-level corrections, interpolated in J(J+1) where a (mu, v) has >= MIN_J distinct J.

    energy_zero: 0 minimum, 1 asymptote, 2 lowest (v=0, J=0 of each mu); tolerance: the levels' target
    accuracy, cm-1 (the exact solver's and the interpolation's); sd: per parameter, the standard
    deviation that scales the Jacobian check (0 for a fixed parameter; needed with wkb_jac); degrees: of the
    levels' interpolants, tried in turn (FIRST_REFRESH_DEGREES for a loose first refresh); groups: the
    rows' RowGroups when known (the same v, rot, mu), else made here.
    Returns (calc, jacobian or None, info) with info: {"exact_levels": levels solved exactly,
    "interpolated_rows": rows from the interpolants, "fallback": (mu, v) solved row by row after their
    checks failed (both columns: levels and Jacobian), "degree": {(mu, v): degree of the levels' interpolant},
    "jacobian_degree": {(mu, v): degree of the Jacobian's} (empty without a Jacobian)}; "exact_levels"
    counts solver calls per level (a level solved without and then with derivatives counts twice).
    """
    v = np.asarray(v, dtype=int)
    mu = np.asarray(mu, dtype=float)
    smooth = model != "pointwise"
    want_jac = wkb_jac is not None
    # check tolerance per column: the level, then each parameter's derivative
    col_tol = np.array([CHECK_MARGIN * tolerance])
    if want_jac:
        scale = np.asarray(sd, dtype=float) * linear_step
        col_tol = np.concatenate([col_tol, np.where(scale > 0, CHECK_MARGIN * tolerance / np.where(scale > 0, scale, 1.0),
                                                    np.inf)])
    if groups is None:
        groups = RowGroups(v, rot, mu)
    J, mu_values, mu_index, span = groups.J, groups.mu_values, groups.mu_index, groups.span
    groups = groups.rows
    if not (smooth and any(s[2] >= MIN_J for s in span.values())):
        # nothing to interpolate: the rows as they are (no WKB levels needed)
        if want_jac:
            calc, jac = _core.fit_evaluate(model, params, curve, np.asarray(v, dtype=np.intc), rot, mu, energy_zero,
                                           _EXACT, tolerance)
        else:
            from .corrected import exact_calc
            calc, jac = exact_calc(model, params, curve, v, rot, mu, energy_zero, tolerance)[0], None
        return calc, jac, {"exact_levels": len(v), "interpolated_rows": 0, "fallback": [], "degree": {}}
    # E_exact - E_wkb per level (mu, J, v), and its parameter derivatives where solved with them
    delta_E, delta_J = {}, {}
    n_exact = 0

    def solve(levels, with_jac):
        nonlocal n_exact
        levels = sorted(set(levels) - set(delta_J if with_jac else delta_E))
        if levels:
            d = _level_deltas(model, params, curve, levels, tolerance, with_jac)
            delta_E.update(zip(levels, d[:, :1]))  # (the same bits with or without the derivatives)
            if with_jac:
                delta_J.update(zip(levels, d[:, 1:]))
            n_exact += len(levels)

    n_cols = len(col_tol)
    per_level = np.full((len(v), n_cols), np.nan)
    zero_levels = [(m, 0, 0) for m in mu_values.tolist()] if energy_zero == 2 else []

    def ladder(degrees, cols, table, with_jac, extra):
        """Interpolants of the columns `cols` (from table: delta_E or delta_J) of every (mu, v) with enough J,
        the degrees in turn; {(mu, v): degree} of those accepted, their rows written into per_level."""
        accepted = {}
        pending = [key for key in groups if smooth and span[key][2] >= MIN_J]
        for degree in degrees:
            # blocks of (mu, v) with the same J range share their nodes
            blocks = {}
            for m, vv in pending:
                blocks.setdefault((m,) + span[(m, vv)][:2], []).append(vv)
            plans = {b: _node_j(b[1], b[2], degree) for b in blocks}
            # (with `extra`, the data zeros, at the first degree: one threaded core call)
            solve([(b[0], int(j), vv) for b, vs in blocks.items() if plans[b] is not None
                   for j in np.concatenate(plans[b]) for vv in vs] + (extra if degree == degrees[0] else []),
                  with_jac)
            failed = []
            for b, vs in blocks.items():
                if plans[b] is None:
                    continue
                m, x_lo, x_hi = b[0], b[1] * (b[1] + 1.0), b[2] * (b[2] + 1.0)
                nodes, checks = plans[b]

                def t_of(j):
                    return 2 * (j * (j + 1.0) - x_lo) / (x_hi - x_lo) - 1

                # one polynomial per column of every v in the block: Y[node, v, column]
                Y = np.array([[table[(m, int(j), vv)] for vv in vs] for j in nodes])
                # (interpolation at degree + 1 nodes: the square system, ~1/10 of chebfit's least-squares overhead;
                # the Chebyshev basis at near-Lobatto points keeps it well conditioned)
                coef = np.linalg.solve(np.polynomial.chebyshev.chebvander(t_of(nodes), degree),
                                       Y.reshape(len(nodes), -1))
                at = np.polynomial.chebyshev.chebval(t_of(checks), coef).reshape(len(vs), -1, len(checks))
                exact = np.array([[table[(m, int(j), vv)] for j in checks] for vv in vs])  # [v, check, column]
                ok = np.all(np.abs(np.transpose(at, (0, 2, 1)) - exact) <= col_tol[cols], axis=(1, 2))
                # every accepted v's rows from its own polynomial, all in one pass
                idx = []
                for k, vv in enumerate(vs):
                    if not ok[k]:
                        failed.append((m, vv))
                        continue
                    idx.append(groups[(m, vv)])
                    accepted[(m, vv)] = degree
                if idx:
                    which = np.repeat(np.nonzero(ok)[0], [len(i) for i in idx])
                    idx = np.concatenate(idx)
                    c = coef.reshape(degree + 1, len(vs), -1)[:, which, :]  # [k, row, column]
                    per_level[idx[:, None], cols] = _clenshaw(t_of(J[idx])[:, None], c)
            pending = failed + [(b[0], vv) for b, vs in blocks.items() if plans[b] is None for vv in vs]
        return accepted

    # the Jacobian's corrections first (their own, lower degrees: see JACOBIAN_DEGREES), solved with the
    # derivatives; then the levels', whose nodes include those (their levels known) and two more J
    jac_degree = ladder(JACOBIAN_DEGREES, np.arange(1, n_cols), delta_J, True, zero_levels) if want_jac else None
    degree_of = ladder(degrees, np.array([0]), delta_E, False, [] if want_jac else zero_levels)
    done = {key: d for key, d in degree_of.items() if jac_degree is None or key in jac_degree}
    fallback = [key for key in groups if smooth and span[key][2] >= MIN_J and key not in done]
    # rows solved as they are: few J, or every check failed
    direct = [i for key, idx in groups.items() if key not in done for i in idx.tolist()]
    direct_levels = list(zip(mu[direct].tolist(), J[direct].tolist(), v[direct].tolist()))
    solve(direct_levels + zero_levels, want_jac)

    def row_of(key):
        return np.concatenate([delta_E[key], delta_J[key]]) if want_jac else delta_E[key]

    if direct:
        per_level[direct] = [row_of(key) for key in direct_levels]
    # rows from levels: asymptote - E (zero 1), E - E(v=0, J=0) of the same mu (zero 2)
    if energy_zero == 1:
        per_level = -per_level
    elif energy_zero == 2:
        per_level = per_level - np.array([row_of((m, 0, 0)) for m in mu_values.tolist()])[mu_index]
    calc = np.asarray(wkb_calc, dtype=float) + per_level[:, 0]
    jac = np.asarray(wkb_jac, dtype=float) + per_level[:, 1:] if want_jac else None
    info = {"exact_levels": n_exact, "interpolated_rows": len(v) - len(direct), "fallback": fallback,
            "degree": done, "jacobian_degree": {key: jac_degree[key] for key in done} if want_jac else {}}
    return calc, jac, info
