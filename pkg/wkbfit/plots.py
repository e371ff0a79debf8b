"""Figures of potentials, levels and fits (matplotlib, imported only when a function is called).

Every function takes an optional `ax` (a matplotlib Axes; a new figure when None), draws into it
and returns it; every axis is labelled with its unit. The arrays drawn are the numbers of the
objects given (no smoothing, no resampling of measured data).

    potential(pot, mu)            the curve with its levels drawn between their turning points
    residuals(result)             (observed - calculated)/sigma against v or energy, with 1/2/3 sigma bands
    birge_sponer(result)          dG(v+1/2) against v + 1/2, measured and fitted with its 1-sigma band
    near_dissociation(result)     (D - E)^((n-2)/(2n)) against v: a straight line for a -C_n/r^n tail
    wkb_vs_exact(pot, mu)         |WKB - exact| level by level against the data uncertainties
    correlation(result)           the correlation matrix of the varied parameters
    rkr_curve(turning_points)     RKR turning points against a model curve
    replicas(replica_result)      bootstrap / Monte-Carlo replicas: histograms (or a corner plot) of the
                                  parameters and predictions with the covariance matrix's Gaussian

Units: energies cm-1, distances angstrom.
"""
import math
import re

import numpy as np

__all__ = ["potential", "residuals", "birge_sponer", "near_dissociation", "wkb_vs_exact", "correlation",
           "rkr_curve", "replicas", "linear_covariance", "ENERGY_LABEL", "R_LABEL"]

R_LABEL = "r [Å]"
ENERGY_LABEL = "energy [cm$^{-1}$]"
V_LABEL = "v (vibrational quantum number, dimensionless)"


def _pyplot():
    from ._optional import pyplot
    return pyplot()


def _axes(ax):
    if ax is not None:
        return ax
    plt = _pyplot()
    return plt.subplots()[1]


def _colors():
    return ["C%d" % i for i in range(10)]


# ------------------------------------------------------------------------------------ potential
def _masses_argument(mu):
    """mu as a list of (label, mass): None -> [], a number/pair -> one, a dict -> several."""
    from .masses import as_reduced_mass
    if mu is None:
        return []
    if isinstance(mu, dict):
        return [(str(k), as_reduced_mass(m)) for k, m in mu.items()]
    if isinstance(mu, str):
        from .masses import parse_isotopologue, reduced_mass
        return [(mu, reduced_mass(*parse_isotopologue(mu)))]
    if isinstance(mu, (list, tuple)) and mu and all(isinstance(m, str) for m in mu) and not (
            len(mu) == 2 and _is_isotope_pair(mu)):
        from .masses import parse_isotopologue, reduced_mass
        return [(m, reduced_mass(*parse_isotopologue(m))) for m in mu]
    m = as_reduced_mass(mu)
    return [("mu = %.6g u" % m, m)]


def _is_isotope_pair(items):
    from .masses import isotope_mass
    try:
        for x in items:
            isotope_mass(x)
    except (ValueError, KeyError, TypeError):
        return False
    return True


def potential(potential, mu=None, ax=None, *, J=0, levels=None, r=None, energy_max=None, order=None, ends=None,
              quasibound=None):
    """The potential curve V(r) and, for each reduced mass, its levels between their turning points.

    potential: a wkbfit Potential. mu: None (the curve only), a reduced mass in u, an isotopologue
    label ("7Li133Cs"), a list of labels, or a dict label -> reduced mass for several
    isotopologues (one colour each). J: the rotational quantum number of the levels drawn; for
    J > 0 the effective curve V(r) + J(J+1) hbar^2/(2 mu r^2) of each mass is drawn too (dashed,
    labelled "V_J(r), ..."), on which the turning points lie.
    order, ends: the level rule as in `levels` (default: its default, second order with matched
    end phases). quasibound: also draw the quasibound levels behind the centrifugal barrier,
    dashed (default: when J > 0, where they can exist; levels(..., quasibound=True)).
    levels: a LevelTable (or a dict label -> LevelTable) to draw instead of computing levels.
    Levels marked quasibound (a boolean `quasibound` column, where the table has one) are drawn
    dashed between the inner wall and the barrier's inner side. r: the distances of the curve
    (default: from the inner wall at about 1.3 well depths to 3 re, or past the last level's outer
    turning point). energy_max: top of the energy axis.
    Returns the Axes; the curve is the line labelled "V(r)", each set of levels a LineCollection
    (bound ones first, then the quasibound ones of the same mass).
    """
    from .levels import levels as compute_levels
    from .potentials import Potential
    if not isinstance(potential, Potential):
        raise TypeError("potential must be a wkbfit potential object (Morse, LennardJones, ...), got %r"
                        % (potential,))
    tables = []
    if levels is not None:
        items = levels.items() if isinstance(levels, dict) else [(None, levels)]
        for label, table in items:
            if not all(hasattr(table, c) for c in ("energy", "inner_turning_point", "outer_turning_point", "mu")):
                raise TypeError("levels must be a LevelTable or a dict label -> LevelTable, got %r" % (table,))
            tables.append((label if label is not None else "mu = %.6g u" % table.mu, table))
    else:
        rule = {k: x for k, x in (("order", order), ("ends", ends)) if x is not None}
        if quasibound if quasibound is not None else J > 0:
            rule["quasibound"] = True
        for label, m in _masses_argument(mu):
            tables.append((label, compute_levels(potential, m, J=J, **rule)))
    ax = _axes(ax)
    D = potential.asymptote
    V_min = _curve_minimum(potential)
    depth = D - V_min
    if r is None:
        r = _default_r(potential, tables, V_min, depth)
    r = np.asarray(r, dtype=float)
    V = potential(r)
    top = energy_max
    if top is None:
        highest = [float(np.max(t.energy)) for _, t in tables if len(t)]
        top = max([V_min + 1.15 * depth] + [E + 0.05 * depth for E in highest])
    shown = V <= top + 0.5 * depth
    ax.plot(r[shown], V[shown], color="k", lw=1.5, label="V(r)")
    ax.axhline(D, color="0.6", lw=0.8, ls=":", label="asymptote %.6g cm$^{-1}$" % D)
    for k, (label, table) in enumerate(tables):
        color = _colors()[k % 10]
        J_table = sorted(set(np.asarray(table.J).tolist())) if hasattr(table, "J") else [J]
        if len(J_table) == 1 and J_table[0] > 0:
            from ._core import HBAR2_OVER_2U
            Jt = J_table[0]
            VJ = V + Jt * (Jt + 1) * HBAR2_OVER_2U / (float(table.mu) * r * r)
            ok = VJ <= top + 0.5 * depth
            ax.plot(r[ok], VJ[ok], color=color, lw=0.8, ls="--", label="V_J(r), J = %d, %s" % (Jt, label))
        _levels_into(ax, label, table, color)
    ax.set_ylim(V_min - 0.05 * depth, top)
    ax.set_xlim(r[0], r[-1])
    ax.set_xlabel(R_LABEL)
    ax.set_ylabel(ENERGY_LABEL)
    ax.set_title(type(potential).__name__ + ("" if J == 0 else ", J = %d" % J))
    ax.legend(fontsize="small", loc="lower right")
    return ax


def _levels_into(ax, label, table, color):
    """Each level of table as a horizontal segment between its turning points; quasibound ones dashed."""
    quasi = np.asarray(getattr(table, "quasibound", np.zeros(len(table), bool)), dtype=bool)
    if quasi.shape != (len(table),):
        quasi = np.zeros(len(table), bool)
    bound = ~quasi
    E, r1, r2 = (np.asarray(x, dtype=float) for x in (table.energy, table.inner_turning_point,
                                                      table.outer_turning_point))
    ax.hlines(E[bound], r1[bound], r2[bound], colors=color, lw=0.9,
              label="%s: %d levels" % (label, int(np.count_nonzero(bound))))
    if np.any(quasi):
        ax.hlines(E[quasi], r1[quasi], r2[quasi], colors=color, lw=0.9, linestyles="dashed",
                  label="%s: %d quasibound" % (label, int(np.count_nonzero(quasi))))


def _curve_minimum(potential):
    from .potentials import PointwisePotential
    if isinstance(potential, PointwisePotential):
        return float(np.min(potential.V))
    return 0.0


def _default_r(potential, tables, V_min, depth):
    from .potentials import PointwisePotential
    if isinstance(potential, PointwisePotential):
        r_lo, r_hi = potential.r[0] * 0.97, potential.r[-1] * 1.2
    else:
        re = potential.params.get("re", 1.0)
        grid = np.geomspace(re * 0.3, re * 3.0, 4000)
        V = potential(grid)
        inner = grid[(grid < re) & (V <= V_min + 1.3 * depth)]
        r_lo, r_hi = (inner[0] if len(inner) else re * 0.5), re * 3.0
    r_cap = 4.0 * potential.params.get("re", r_hi)  # the last levels reach far out: show the well, not them
    for _, table in tables:
        if len(table):
            r_hi = max(r_hi, min(float(np.nanmax(table.outer_turning_point)) * 1.05, r_cap))
            r_lo = min(r_lo, float(np.nanmin(table.inner_turning_point)) * 0.98)
    return np.linspace(r_lo, r_hi, 1500)


# ------------------------------------------------------------------------------------ residuals
def residuals(result, ax=None, *, against="v"):
    """Normalised residuals (observed - calculated)/sigma of a FitResult with the 1, 2, 3 sigma bands.

    against: "v" (the vibrational quantum number) or "energy" (the observed energy, cm-1). One colour
    per isotopologue and one marker per data kind (where the data carry a `kind` column), filled for
    J = 0 and open for J > 0. Rows not fitted (the zero of "lowest" data) are left out.
    """
    if against not in ("v", "energy"):
        raise ValueError("against=%r is not known; use 'v' or 'energy'" % (against,))
    ax = _axes(ax)
    from .reports import result_rows
    rows_all = result_rows(result)  # every data set's rows (lines: their lower level)
    fitted = np.asarray(result.fitted_rows, dtype=bool)
    x_all = rows_all["v"] if against == "v" else rows_all["observed"]
    y_all = result.normalized_residuals
    iso = np.array(["" if x is None else x for x in rows_all["isotopologue"]], dtype=object)
    J = rows_all["J"]
    kinds = np.array(rows_all["kind"], dtype=object)
    kind_values = list(dict.fromkeys(kinds.tolist()))
    markers = "osD^vP*X"
    for s, colour in ((3, "0.93"), (2, "0.86"), (1, "0.78")):
        ax.axhspan(-s, s, color=colour, lw=0, zorder=0)
    for k, label in enumerate(dict.fromkeys(iso.tolist())):
        rows = iso == label
        for m, kind in enumerate(kind_values):
            sel = rows & fitted & (kinds == kind)
            if not np.any(sel):
                continue
            name = label or "unnamed"
            if len(kind_values) > 1:
                name += " (%s)" % kind
            for rot, face in ((J == 0, _colors()[k % 10]), (J > 0, "none")):
                part = sel & rot
                if np.any(part):
                    ax.plot(x_all[part], y_all[part], ls="none", marker=markers[m % len(markers)],
                            color=_colors()[k % 10], mfc=face,
                            label=name + (", J = 0" if face != "none" else ", J > 0"))
    ax.axhline(0.0, color="k", lw=0.6)
    ax.set_xlabel(V_LABEL if against == "v" else "observed " + ENERGY_LABEL)
    ax.set_ylabel("(observed - calculated)/sigma (dimensionless)")
    ax.set_title("normalised residuals; bands at 1, 2, 3 sigma")
    ax.legend(fontsize="small")
    return ax


# ------------------------------------------------------------------------------------ Birge-Sponer
def _prediction_of(source, isotopologue=None):
    from .fitting import FitResult, Prediction
    if isinstance(source, Prediction):
        return source, None
    if isinstance(source, FitResult):
        return source.predict(isotopologue=isotopologue), source
    raise TypeError("give a FitResult or a Prediction, got %r" % (source,))


def _observed_spacings(obs, label):
    """(v + 1/2, dG, sigma) from consecutive J = 0 levels of one isotopologue."""
    rows = obs.rows_of(label)
    rows = rows[obs.J[rows] == 0]
    by_v = {int(obs.v[i]): i for i in rows}
    x, dG, s = [], [], []
    for v in sorted(by_v):
        if v + 1 in by_v:
            i, j = by_v[v], by_v[v + 1]
            x.append(v + 0.5)
            dG.append(obs.energy[j] - obs.energy[i])
            s.append(math.hypot(obs.uncertainty[i], obs.uncertainty[j]))
    return np.array(x), np.array(dG), np.array(s)


def birge_sponer(source, ax=None, *, isotopologue=None):
    """Birge-Sponer plot: dG(v+1/2) = G(v+1) - G(v) against v + 1/2.

    source: a FitResult (its measured J = 0 spacings of consecutive v as points with error bars, and
    the fitted potential's spacings as a line with its 1-sigma band), a Prediction (the line and
    band only) or a LevelTable (the spacings of its J = 0 levels as a line). isotopologue: which one,
    for a FitResult of several. The area under the curve up to its zero is D0.
    """
    from .levels import LevelTable
    ax = _axes(ax)
    if isinstance(source, LevelTable):
        rows = np.nonzero(source.J == 0)[0]
        rows = rows[np.argsort(source.v[rows])]
        x = source.v[rows][:-1] + 0.5
        ax.plot(x, np.diff(source.energy[rows]), "-", color="C0", label="%s levels" % source.method.upper())
        title = "Birge-Sponer plot, mu = %.6g u" % source.mu
    else:
        pred, result = _prediction_of(source, isotopologue)
        x = pred.v[:-1] + 0.5
        ax.fill_between(x, pred.spacing - pred.spacing_uncertainty, pred.spacing + pred.spacing_uncertainty,
                        color="C0", alpha=0.3, lw=0, label="fit, 1 sigma")
        ax.plot(x, pred.spacing, "-", color="C0", label="fitted potential")
        if result is not None:
            label = pred.isotopologue if pred.isotopologue in result.observed.isotopologues else \
                result.observed.isotopologues[0]
            ox, odG, os_ = _observed_spacings(result.observed, label)
            if len(ox):
                ax.errorbar(ox, odG, yerr=os_, fmt="o", color="C1", ms=4, label="measured (J = 0)")
        title = "Birge-Sponer plot%s" % (", " + pred.isotopologue if pred.isotopologue else "")
    ax.axhline(0.0, color="k", lw=0.6)
    ax.set_xlabel("v + 1/2 (dimensionless)")
    ax.set_ylabel("dG(v+1/2) [cm$^{-1}$]")
    ax.set_title(title)
    ax.legend(fontsize="small")
    return ax


# ------------------------------------------------------------------------------------ near dissociation
def tail_power(potential):
    """The power n of the potential's -C_n/r^n tail, or None for an exponential tail."""
    from . import potentials as P
    if isinstance(potential, P.PointwisePotential):
        return float(potential.tail["tail_power"])
    if isinstance(potential, P.LennardJones):
        return float(potential.params["m"])
    if isinstance(potential, P.MLR):
        return 6.0
    return None


def near_dissociation(source, ax=None, *, isotopologue=None, n=None, last=None):
    """Near-dissociation plot: (D - E)^((n-2)/(2n)) against v.

    For a -C_n/r^n tail the binding energy goes as (vD - v)^(2n/(n-2)) near the limit (LeRoy-Bernstein),
    so this is a straight line reaching zero at vD. For an exponential tail (Morse, EMO, Poeschl-Teller)
    the exponent 1/2 is used, for which the Morse levels lie exactly on a line. source: a FitResult
    (measured levels as points, fitted ones with error bars), a Prediction, or a NearDissociationFit
    (its levels, and each law at the levels it was fitted to, against the summary D). n: the tail power
    (default: that of the potential). last: draw only the last `last` levels. vD (first-order WKB)
    and its one-sigma range are marked, and the quantum threshold number v_th where the prediction
    has one (exact levels at J = 0).
    """
    from .near_dissociation import NearDissociationFit
    if isinstance(source, NearDissociationFit):
        return _near_dissociation_laws(source, ax, last)
    pred, result = _prediction_of(source, isotopologue)
    n = tail_power(pred.potential) if n is None else float(n)
    if n is not None and not n > 2:
        raise ValueError("n=%r: the tail power must exceed 2 for a near-dissociation plot" % (n,))
    alpha = 0.5 if n is None else (n - 2) / (2 * n)
    ax = _axes(ax)
    b = np.asarray(pred.binding_energy)
    sb = np.asarray(pred.binding_uncertainty)
    start = 0 if last is None else max(0, pred.n_bound - int(last))
    sel = slice(start, pred.n_bound)
    y = b[sel] ** alpha
    ax.errorbar(pred.v[sel], y, yerr=alpha * b[sel] ** (alpha - 1) * sb[sel], fmt="s", color="C0", ms=4,
                capsize=2, label="fitted levels, 1 sigma")
    if result is not None:
        obs = result.observed
        label = pred.isotopologue if pred.isotopologue in obs.isotopologues else obs.isotopologues[0]
        rows = obs.rows_of(label)
        rows = rows[(obs.J[rows] == pred.J) & (obs.v[rows] >= start)]
        bo = _observed_binding(result, rows, pred)
        ok = bo > 0
        if np.any(ok):
            ax.plot(obs.v[rows][ok], bo[ok] ** alpha, "o", mfc="none", ms=8, mew=1.2, color="C1", label="measured")
    if math.isfinite(pred.vD) and pred.n_bound:
        # the threshold law: a straight line through the last level that reaches zero at vD
        v_last, y_last = float(pred.v[-1]), float(b[-1] ** alpha)
        v_line = np.linspace(max(float(pred.v[start]), v_last - 6), pred.vD, 50)
        if pred.vD > v_last:
            ax.plot(v_line, y_last * (pred.vD - v_line) / (pred.vD - v_last), "--", color="0.4", lw=0.8,
                    label="straight line through the last level to vD")
    if math.isfinite(pred.vD):
        ax.axvline(pred.vD, color="C3", lw=1, label="vD = %.3f +/- %.3f" % (pred.vD, pred.vD_uncertainty))
        if math.isfinite(pred.vD_uncertainty):
            ax.axvspan(pred.vD - pred.vD_uncertainty, pred.vD + pred.vD_uncertainty, color="C3", alpha=0.15, lw=0)
    v_th = getattr(pred, "v_th", None)
    if v_th is not None and math.isfinite(v_th):
        ax.axvline(v_th, color="C2", lw=1, ls="-.", label="v_th = %.3f +/- %.3f (quantum threshold number)" % (
            v_th, pred.v_th_uncertainty if pred.v_th_uncertainty is not None else math.nan))
    power = "1/2" if n is None else "(n-2)/(2n) = %.4g" % alpha
    ax.set_xlabel(V_LABEL)
    ax.set_ylabel("(D - E)$^{%s}$ [(cm$^{-1}$)$^{%s}$]" % ("1/2" if n is None else "%.3g" % alpha,
                                                            "1/2" if n is None else "%.3g" % alpha))
    ax.set_title("near dissociation: exponent %s%s" % (power, "" if n is None else ", n = %g" % n))
    ax.set_ylim(bottom=0)
    ax.legend(fontsize="small")
    return ax


def _near_dissociation_laws(nd, ax, last):
    """The near-dissociation plot of a NearDissociationFit: its levels and each law fitted to them."""
    n = float(nd.tail_power)
    alpha = (n - 2) / (2 * n)
    ax = _axes(ax)
    order = np.argsort(nd.v)
    if last is not None:
        order = order[-int(last):]
    v, E, s = nd.v[order], nd.energy[order], nd.uncertainty[order]
    D = nd.D[0]
    b = D - E
    ok = b > 0
    ax.errorbar(v[ok], b[ok] ** alpha, yerr=alpha * b[ok] ** (alpha - 1) * s[ok], fmt="o", color="C1", ms=4,
                capsize=2, label="levels fitted (binding energy below the summary D)")
    for k, law in enumerate(f for f in (nd.lb, nd.expansion, nd.threshold) if f is not None):
        rows = np.asarray(law.rows, dtype=int)
        keep = np.isin(rows, order)
        rows, resid = rows[keep], law.residuals[keep]
        calc = nd.energy[rows] - resid  # the law's energies at the levels it was fitted to
        bl = law.params["D"][0] - calc if "D" in law.params else D - calc
        good = bl > 0
        idx = np.argsort(nd.v[rows][good])
        ax.plot(nd.v[rows][good][idx], bl[good][idx] ** alpha, "-", color="C%d" % (k + 4), lw=1,
                label="%s law (sqrt of reduced chi-square %s)" % (
                    law.law, "%.3g" % law.sqrt_reduced_chi_square if law.sqrt_reduced_chi_square is not None else "-"))
    vD, svD = nd.vD
    ax.axvline(vD, color="C3", lw=1, label="vD = %.3f +/- %.3f" % (vD, svD))
    ax.axvspan(vD - svD, vD + svD, color="C3", alpha=0.15, lw=0)
    ax.axvline(nd.v_th[0], color="C2", lw=1, ls="-.", label="v_th = %.3f +/- %.3f (%s)" % (
        nd.v_th[0], nd.v_th[1], nd.v_th_source))
    ax.set_xlabel(V_LABEL)
    ax.set_ylabel("(D - E)$^{%.3g}$ [(cm$^{-1}$)$^{%.3g}$]" % (alpha, alpha))
    ax.set_title("near-dissociation fits: exponent (n-2)/(2n) = %.4g, n = %g" % (alpha, n))
    ax.set_ylim(bottom=0)
    ax.legend(fontsize="small")
    return ax


def _observed_binding(result, rows, pred):
    obs = result.observed
    E = obs.energy[rows]
    if obs.energy_zero == "asymptote":
        return np.asarray(E, dtype=float)
    if obs.energy_zero == "minimum":
        return pred.potential.asymptote - E
    return pred.D0 - E  # "lowest": measured from v=0, J=0


# ------------------------------------------------------------------------------------ WKB vs exact
def wkb_vs_exact(potential, mu=None, ax=None, *, J=0, order=(1, 2), uncertainty=None, comparison=None):
    """|WKB - exact| level by level (log scale) against the data uncertainties: where is WKB good enough?

    potential, mu: the potential and reduced mass (u or labels); or give comparison= a WKBComparison
    (then potential may be that object too). order: the WKB orders to compare (1, 2 or both; 1 is the
    textbook first-order rule, 2 the default second-order rule with matched end phases).
    uncertainty: a number (cm-1), an array per v, or an ObservedLevels whose J-matching rows give
    the uncertainty at each measured v; drawn as a second curve. Filled markers: WKB above exact,
    open: below.
    """
    from .exact import WKBComparison, compare_wkb_exact
    from .observed import ObservedLevels
    if isinstance(potential, WKBComparison):
        comparison, potential = potential, potential.potential
    comparisons = []
    if comparison is not None:
        comparisons.append(comparison)
    else:
        orders = order if isinstance(order, (tuple, list)) else (order,)
        for o in orders:
            # order 1: the textbook rule (fixed end phases); order 2: the default rule (matched end phases)
            comparisons.append(compare_wkb_exact(potential, mu, J=J, order=o))
    ax = _axes(ax)
    for k, comp in enumerate(comparisons):
        o = getattr(comp, "order", 1)
        d = np.abs(comp.difference)
        pos = comp.difference >= 0
        color = _colors()[k % 10]
        ax.semilogy(comp.v, np.maximum(d, 1e-14), "-", color=color, lw=0.8,
                    label="|WKB - exact|, order %d%s" % (o, ", matched ends" if comp.ends == "wkb-matched" else ""))
        ax.semilogy(comp.v[pos], np.maximum(d[pos], 1e-14), "o", color=color, ms=3)
        ax.semilogy(comp.v[~pos], np.maximum(d[~pos], 1e-14), "o", mfc="none", color=color, ms=3)
        ax.semilogy(comp.v, np.maximum(comp.exact_error, 1e-14), ":", color="0.5", lw=0.8,
                    label="error of the exact levels" if k == 0 else None)
    if uncertainty is not None:
        if isinstance(uncertainty, ObservedLevels):
            rows = np.nonzero(uncertainty.J == J)[0]
            ax.semilogy(uncertainty.v[rows], uncertainty.uncertainty[rows], "x", color="C3",
                        label="data uncertainty")
        else:
            u = np.broadcast_to(np.asarray(uncertainty, dtype=float), comparisons[0].v.shape)
            ax.semilogy(comparisons[0].v, u, "--", color="C3", label="data uncertainty")
    ax.set_xlabel(V_LABEL)
    ax.set_ylabel("|WKB - exact| [cm$^{-1}$]")
    ax.set_title("semiclassical minus exact levels%s" % ("" if J == 0 else ", J = %d" % J))
    ax.legend(fontsize="small")
    return ax


# ------------------------------------------------------------------------------------ correlation
def correlation(result, ax=None):
    """The correlation matrix of the varied parameters of a FitResult (-1 blue .. +1 red, values written)."""
    ax = _axes(ax)
    C = np.asarray(result.correlation, dtype=float)
    names = list(result.var_names)
    image = ax.imshow(C, vmin=-1, vmax=1, cmap="RdBu_r")
    for i in range(len(names)):
        for j in range(len(names)):
            if np.isfinite(C[i, j]):
                ax.text(j, i, "%+.3f" % C[i, j], ha="center", va="center", fontsize="small",
                        color="w" if abs(C[i, j]) > 0.6 else "k")
    ax.set_xticks(range(len(names)), names)
    ax.set_yticks(range(len(names)), names)
    ax.set_xlabel("varied parameter (correlation coefficient, dimensionless)")
    ax.set_ylabel("varied parameter (correlation coefficient, dimensionless)")
    ax.figure.colorbar(image, ax=ax, label="correlation coefficient (dimensionless)")
    ax.set_title("parameter correlations")
    return ax


# ------------------------------------------------------------------------------------ RKR
def rkr_curve(turning_points, potential=None, ax=None, *, r=None):
    """RKR turning points (inner and outer, at G(v)) as points, and a model curve V(r) as a line.

    turning_points: an RKRTurningPoints. potential: a Potential to compare with (for example a fit
    or the curve the constants came from), or None.
    """
    ax = _axes(ax)
    tp = turning_points
    ax.plot(tp.inner_turning_point, tp.energy, "o", color="C0", ms=4, label="RKR inner turning points")
    ax.plot(tp.outer_turning_point, tp.energy, "s", color="C1", ms=4, label="RKR outer turning points")
    if potential is not None:
        if r is None:
            lo, hi = float(np.min(tp.inner_turning_point)), float(np.max(tp.outer_turning_point))
            r = np.linspace(lo - 0.05 * (hi - lo), hi + 0.1 * (hi - lo), 800)
        r = np.asarray(r, dtype=float)
        ax.plot(r, potential(r), "-", color="k", lw=1, label="%s" % type(potential).__name__)
        ax.set_ylim(-0.05 * float(np.max(tp.energy)), 1.2 * float(np.max(tp.energy)))
    ax.set_xlabel(R_LABEL)
    ax.set_ylabel(ENERGY_LABEL)
    ax.set_title("RKR curve, mu = %.6g u" % tp.mu)
    ax.legend(fontsize="small")
    return ax


# ------------------------------------------------------------------------------------ replicas
def _unit_label(name, unit):
    """'De [cm$^{-1}$]', 're [Å]', 'vD (dimensionless)' for a quantity name and a unit of reports._UNITS."""
    if not unit:
        return "%s (dimensionless)" % name
    text = unit.replace("cm-1", "cm$^{-1}$").replace("1/A", "Å$^{-1}$")
    text = re.sub(r"\bA\^(\d+)", r"Å$^{\1}$", text)
    text = re.sub(r"(?<![\w$])A(?![\w$])", "Å", text)
    return "%s [%s]" % (name, text)


def _default_replica_names(rep):
    return [k for k in rep.names if k in rep.fit_result.var_names or k in ("D0", "vD")]


def linear_covariance(rep, names):
    """The covariance matrix of the quantities `names` of a ReplicaResult by linear propagation of the
    fit's covariance: parameters directly, D0, vD and Eb(v=...) through their parameter gradients
    (those of FitResult.predict); the diagonal is the replica result's covariance_sd squared (which
    also holds a level's method error). Rows of quantities without a covariance (chi_square,
    n_bound) are NaN."""
    from . import _core
    from .fitting import _level_code
    res = rep.fit_result
    idx, cov = res._gradient_covariance()
    pnames = list(res.potential.param_names)
    model, params, curve = res.potential._core_args()
    mass = res.masses[rep.isotopologue] if rep.isotopologue in res.masses else next(iter(res.masses.values()))
    core = _core.fit_levels(model, params, curve, mass, 0.0, _level_code(res.method))
    G, dA = core["jacobian"], res._asymptote_gradient()
    grads = []
    for k in names:
        g = np.full(len(pnames), math.nan)
        if k in pnames:
            g = np.zeros(len(pnames))
            g[pnames.index(k)] = 1.0
        elif k == "D0" and len(G):
            g = dA - G[0]
        elif k == "vD":
            g = np.asarray(core["dvD_dp"], dtype=float)
        elif k.startswith("Eb(v=") and int(k[5:-1]) < len(G):
            g = dA - G[int(k[5:-1])]
        grads.append(g[idx])
    g = np.array(grads)
    C = g @ cov @ g.T
    sd_lin = np.sqrt(np.abs(np.diag(C)))
    sd = np.array([rep.covariance_sd.get(k) if rep.covariance_sd.get(k) is not None else math.nan for k in names],
                  dtype=float)
    with np.errstate(invalid="ignore", divide="ignore"):
        corr = C / np.outer(sd_lin, sd_lin)
    return corr * np.outer(sd, sd)


def _gaussian_counts(x, centre, sd, n, width):
    """Expected counts per bin of width `width` of n draws from N(centre, sd) at x."""
    return n * width * np.exp(-0.5 * ((x - centre) / sd) ** 2) / (sd * math.sqrt(2 * math.pi))


def _replica_histogram(ax, rep, name, bins):
    from .replicas import _unit
    x = rep.values[name]
    x = x[np.isfinite(x)]
    counts, edges, _ = ax.hist(x, bins=bins, color="C0", alpha=0.6, label="%d replicas" % len(x))
    centre, sd = rep.central[name], rep.covariance_sd.get(name)
    if sd is not None and math.isfinite(sd) and sd > 0 and len(x):
        lo, hi = min(edges[0], centre - 4 * sd), max(edges[-1], centre + 4 * sd)
        grid = np.linspace(lo, hi, 400)
        ax.plot(grid, _gaussian_counts(grid, centre, sd, len(x), edges[1] - edges[0]), "-", color="C3", lw=1.2,
                label="covariance: N(fit, %.3g)" % sd)
    ax.axvline(centre, color="k", lw=0.8, label="fit")
    ax.set_xlabel(_unit_label(name, _unit(rep.fit_result, name)))
    ax.set_ylabel("replicas (count, dimensionless)")
    return ax


def _ellipse(mean, C, k):
    """Points of the k-sigma ellipse (x - m)^T C^-1 (x - m) = k^2 of a 2 x 2 covariance."""
    w, U = np.linalg.eigh(C)
    t = np.linspace(0, 2 * math.pi, 181)
    circle = np.vstack([np.cos(t), np.sin(t)]) * k * np.sqrt(np.maximum(w, 0.0))[:, None]
    pts = U @ circle
    return mean[0] + pts[0], mean[1] + pts[1]


def replicas(replica_result, ax=None, *, names=None, corner=False, bins=None):
    """The replicas of a fit (FitResult.bootstrap): one histogram per quantity, or a corner plot.

    names: the quantities (default: the varied parameters, D0 and vD). Each histogram carries the
    Gaussian of the fit's covariance matrix, N(fit value, covariance sd), as expected counts per bin:
    where the two agree, the linear propagation of the covariance describes the fit. corner=True:
    a lower-triangle grid with the histograms on the diagonal and, below it, the replicas of each
    pair as points with the covariance's 1- and 2-sigma ellipses (linear_covariance).
    ax: one Axes (one name), a sequence of Axes (one per name; corner: n x n), or None (a new
    figure). bins: histogram bins (default: about sqrt(replicas), 8 to 30). Returns the Axes: one
    Axes for one name, else a NumPy array of them (n, or n x n).
    """
    from .replicas import ReplicaResult
    if not isinstance(replica_result, ReplicaResult):
        raise TypeError("give the ReplicaResult of FitResult.bootstrap, got %r" % (replica_result,))
    rep = replica_result
    names = _default_replica_names(rep) if names is None else list(names)
    unknown = [k for k in names if k not in rep.names]
    if unknown or not names:
        raise ValueError("names=%r: not followed by these replicas; choose from %s" % (
            unknown or names, ", ".join(rep.names)))
    if rep.n_converged < 2:
        raise ValueError("%d converged replicas: too few for a figure (n_failed %d; see .failures)"
                         % (rep.n_converged, rep.n_failed))
    k = len(names)
    if bins is None:
        bins = int(min(30, max(8, round(math.sqrt(rep.n_converged)))))
    new_figure = ax is None
    if ax is None:
        plt = _pyplot()
        shape = (k, k) if corner else (1, k)
        fig, axes = plt.subplots(*shape, figsize=(3.2 * shape[1], 2.8 * shape[0] + 0.4), squeeze=False)
        axes = axes if corner else axes[0]
    else:
        axes = np.array(ax, dtype=object) if isinstance(ax, (list, tuple, np.ndarray)) else np.array([ax], object)
        need = (k, k) if corner else (k,)
        if axes.size != int(np.prod(need)):
            raise ValueError("ax: %d Axes given, %d needed for %d quantities%s" % (
                axes.size, int(np.prod(need)), k, " in a corner plot" if corner else ""))
        axes = axes.reshape(need)
    if not corner:
        for a, name in zip(axes, names):
            _replica_histogram(a, rep, name, bins)
        axes[0].legend(fontsize="x-small")
        axes[0].figure.suptitle("%s replicas: spread against the covariance matrix" % rep.kind)
        if new_figure:
            axes[0].figure.tight_layout()
        return axes[0] if k == 1 else axes
    C = linear_covariance(rep, names)
    for i in range(k):
        for j in range(k):
            a = axes[i, j]
            if j > i:
                a.set_visible(False)
                continue
            if i == j:
                _replica_histogram(a, rep, names[i], bins)
                continue
            x, y = rep.values[names[j]], rep.values[names[i]]
            ok = np.isfinite(x) & np.isfinite(y)
            a.plot(x[ok], y[ok], ".", color="C0", ms=2, alpha=0.5, label="replicas")
            sub = C[np.ix_([j, i], [j, i])]
            if np.all(np.isfinite(sub)):
                m = np.array([rep.central[names[j]], rep.central[names[i]]])
                for s, style in ((1, "-"), (2, "--")):
                    a.plot(*_ellipse(m, sub, s), style, color="C3", lw=1, label="covariance, %d sigma" % s)
            from .replicas import _unit
            a.set_xlabel(_unit_label(names[j], _unit(rep.fit_result, names[j])))
            a.set_ylabel(_unit_label(names[i], _unit(rep.fit_result, names[i])))
    axes[0, 0].legend(fontsize="x-small")
    if k > 1:
        axes[1, 0].legend(fontsize="x-small")
    axes[0, 0].figure.suptitle("%s replicas against the covariance matrix" % rep.kind)
    if new_figure:
        axes[0, 0].figure.tight_layout()
    return axes
