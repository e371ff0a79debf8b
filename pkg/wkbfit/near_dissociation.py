"""Near-dissociation fits of the last levels of a vibrational series.

`near_dissociation_fit(v, energy, uncertainty, tail_power=6, asymptote=None, mu=...)` fits three
laws to levels below an asymptote D with a long-range tail V = D - C_n/r^n:

1. LeRoy-Bernstein (LB) law [LeRoy and Bernstein, J. Chem. Phys. 52, 3869 (1970); physics.md 4a]:
       D - E(v) = [(vD - v) H_n]^(2n/(n-2)),
       H_n = sqrt(4 pi C_u/mu) ((n-2)/2) Gamma(1+1/n) / [Gamma(1/2+1/n) C_n^(1/n)],
   C_u = hbar^2/(2 u) (wkbfit.HBAR2_OVER_2U). It follows from first-order WKB with only the
   tail in the phase integral, so it describes FIRST-ORDER SEMICLASSICAL levels, not the true
   last levels.
2. A near-dissociation expansion: the LB law times a correction polynomial in (vD - v),
       D - E(v) = [(vD - v) H_n]^(2n/(n-2)) [1 + sum_{k=1..K} p_k (vD - v)^k].
   Why (vD - v): the C_(n+2)/r^(n+2) term changes the tail at the outer turning point r_out by
   the relative amount C_(n+2)/(C_n r_out^2), proportional to (D - E)^(2/n), that is to
   (vD - v)^(4/(n-2)) on the LB law: linear in (vD - v) for n = 6 [derived here from the LB
   scaling r_out = (C_n/(D - E))^(1/n)]. The polynomial is the proxy for C_(n+2) and the
   core. (Le Roy and co-workers' near-dissociation expansions multiply the LB law by a ratio
   of polynomials in (vD - v) (from memory); this is the simplest member of that family.)
   physics.md 12 measured the pure LB law biasing C6 by -10 to -18 % on exact C6+C8 levels.
3. The quantum threshold law [physics.md 4c (ii), 12], for levels bound by less than about
   E_beta = eps/beta^2 (beta = (C_n/eps)^(1/(n-2)), eps = C_u/mu), to leading order:
       D - E(v) = eps [pi (v_th - v)/bbar]^2,
       bbar = pi beta nu^(2 nu) / [Gamma(nu) Gamma(1 + nu)],  nu = 1/(n-2);
   quadratic in (v_th - v), unlike LB. v_th is the true threshold quantum number; from the
   semiclassical fits v_th = vD - 1/(2(n-2)) (physics.md 4c (i), vD - 1/8 for n = 6).

Units: cm-1, angstrom (C_n in cm-1 A^n), u.
"""
import math

import numpy as np

from ._core import HBAR2_OVER_2U

__all__ = ["near_dissociation_fit", "NearDissociationFit", "LawFit", "lb_constant", "threshold_length", "long_range_tail",
           "threshold_number"]


def lb_constant(C_n, n, mu):
    """H_n of the LeRoy-Bernstein law, (cm-1)^((n-2)/(2n)) (physics.md 4a)."""
    return (math.sqrt(4 * math.pi * HBAR2_OVER_2U / mu) * ((n - 2) / 2.0) * math.gamma(1 + 1.0 / n)
            / (math.gamma(0.5 + 1.0 / n) * C_n ** (1.0 / n)))


def _cn_from_h(H, n, mu):
    return (math.sqrt(4 * math.pi * HBAR2_OVER_2U / mu) * ((n - 2) / 2.0) * math.gamma(1 + 1.0 / n)
            / (math.gamma(0.5 + 1.0 / n) * H)) ** n


def threshold_length(C_n, n, mu):
    """(beta_n, bbar, E_beta): the tail's length, the threshold length, the crossover energy
    (A, A, cm-1; physics.md 4b-4c)."""
    eps = HBAR2_OVER_2U / mu
    nu = 1.0 / (n - 2)
    beta = (C_n / eps) ** nu
    bbar = math.pi * beta * nu ** (2 * nu) / (math.gamma(nu) * math.gamma(1 + nu))
    return beta, bbar, eps / beta ** 2


class LawFit:
    """One law fitted to some of the levels.

    law: "LeRoy-Bernstein", "expansion" or "threshold"; rows: indices of the levels used;
    params: dict name -> (value, one-sigma uncertainty; 0 for a fixed value); residuals
    (observed - law, cm-1, for the rows used), chi_square, dof, sqrt_reduced_chi_square (None when
    dof = 0); note.
    """

    def __init__(self, law, rows, params, residuals, chi_square, dof, note=""):
        self.law, self.rows, self.params = law, np.asarray(rows), params
        self.residuals = np.asarray(residuals)
        self.chi_square, self.dof = float(chi_square), int(dof)
        self.sqrt_reduced_chi_square = math.sqrt(chi_square / dof) if dof > 0 else None
        self.note = note

    @property
    def standard_error(self):
        """The earlier name of `sqrt_reduced_chi_square` (kept for code written against it)."""
        return self.sqrt_reduced_chi_square

    def value(self, name):
        return self.params[name][0]

    def uncertainty(self, name):
        return self.params[name][1]

    def __repr__(self):
        return "<LawFit %s: %s>" % (self.law, ", ".join("%s=%.8g+/-%.2g" % (k, v, u) for k, (v, u) in
                                                       self.params.items()))


class NearDissociationFit:
    """Results of near_dissociation_fit.

    lb, expansion, threshold: LawFit objects (threshold None when too few levels are bound by
    less than about E_beta). Summary values, each a (value, uncertainty) pair, from the
    expansion fit (the LB-range law with corrections): D (the fitted asymptote, or the fixed
    one with uncertainty 0), vD, C_n; v_th from the threshold law when it was fitted, else
    vD - 1/(2(n-2)). E_beta: crossover energy for the fitted C_n. residuals: of the
    expansion fit, for its rows.
    """

    def __init__(self, n, mu, lb, expansion, threshold, asymptote_fixed, notes):
        self.tail_power, self.mu = n, mu
        self.lb, self.expansion, self.threshold = lb, expansion, threshold
        self.asymptote_fixed = asymptote_fixed
        best = expansion
        self.D = best.params["D"]
        self.vD = best.params["vD"]
        self.C_n = best.params.get("C_n", (math.nan, math.nan))
        shift = 1.0 / (2 * (n - 2))
        if threshold is not None:
            self.v_th = threshold.params["v_th"]
            self.v_th_source = "threshold law"
        else:
            self.v_th = (self.vD[0] - shift, self.vD[1])
            self.v_th_source = "vD - 1/(2(n-2)) (physics.md 4c)"
        self.E_beta = threshold_length(self.C_n[0], n, mu)[2] if mu and math.isfinite(self.C_n[0]) else math.nan
        self.residuals = best.residuals
        self.notes = list(notes)

    def table(self):
        """A plain-text table of the laws fitted (a line of names, a line of units, aligned columns), the
        summary and the notes."""
        from .reports import text_table
        rows = self.law_rows()
        n = self.tail_power

        def pm(name, digits):
            return ["-" if not math.isfinite(r[name]) else _pm((r[name], r[name + "_uncertainty"]), digits)
                    for r in rows]
        table = text_table([
            ("law", "", [r["law"] for r in rows], "%s"), ("levels", "", [r["levels"] for r in rows], "%d"),
            ("D", "cm-1", pm("D", 6), "%s"), ("vD", "", pm("vD", 4), "%s"), ("v_th", "", pm("v_th", 4), "%s"),
            ("C_n", "cm-1 A^%g" % n, ["-" if not math.isfinite(r["C_n"]) else "%.5g+/-%.2g" % (
                r["C_n"], r["C_n_uncertainty"]) for r in rows], "%s"),
            ("sqrt of reduced chi-square", "", [r["sqrt_reduced_chi_square"] for r in rows], "%.3f")])
        lines = ["Near-dissociation fits (tail -C%d/r^%d; %s)" % (
            n, n, "asymptote fixed" if self.asymptote_fixed else "asymptote fitted")]
        lines.extend("  " + line for line in table.splitlines())
        lines.append("  summary: D = %s cm-1, vD = %s, v_th = %s (%s), C_n = %s; E_beta = %.3g cm-1" % (
            _pm(self.D, 6), _pm(self.vD, 4), _pm(self.v_th, 4), self.v_th_source,
            "%.6g +/- %.2g" % self.C_n if math.isfinite(self.C_n[0]) else "-", self.E_beta))
        lines.append("  The LeRoy-Bernstein law describes first-order semiclassical levels, not the true last levels.")
        lines.extend("  " + n for n in self.notes)
        return "\n".join(lines)

    def __str__(self):
        return self.table()

    def plot(self, ax=None, **options):
        """The near-dissociation plot of the levels fitted and each law (wkbfit.plots.near_dissociation)."""
        from .plots import near_dissociation
        return near_dissociation(self, ax, **options)

    def __repr__(self):
        return "<NearDissociationFit n=%g: D = %s cm-1, vD = %s, v_th = %s>" % (
            self.tail_power, _pm(self.D, 6), _pm(self.vD, 4), _pm(self.v_th, 4))

    def law_rows(self):
        """One dict per law fitted: law, levels, D, vD, v_th, C_n (each with its uncertainty; NaN where the law
        has no such parameter) and the sqrt of reduced chi-square."""
        rows = []
        for fit in (self.lb, self.expansion, self.threshold):
            if fit is None:
                continue
            row = {"law": fit.law, "levels": len(fit.rows)}
            for name in ("D", "vD", "v_th", "C_n"):
                row[name], row[name + "_uncertainty"] = fit.params.get(name, (math.nan, math.nan))
            row["sqrt_reduced_chi_square"] = (fit.sqrt_reduced_chi_square if fit.sqrt_reduced_chi_square is not None
                                              else math.nan)
            rows.append(row)
        return rows

    def to_dataframe(self):
        """The laws fitted, one row each (law_rows), as a pandas DataFrame; units: D cm-1, C_n cm-1 A^n."""
        from ._optional import pandas
        return pandas().DataFrame(self.law_rows())

    def _repr_html_(self):
        from .reports import html_table
        rows = self.law_rows()
        col = lambda k: np.array([r[k] for r in rows])  # noqa: E731
        n = self.tail_power
        cols = [("law", "", np.array([r["law"] for r in rows], dtype=object), "%s"), ("levels", "", col("levels"), "%d"),
                ("D", "cm-1", col("D"), "%.6f"), ("+/-", "cm-1", col("D_uncertainty"), "%.2g"),
                ("vD", "", col("vD"), "%.4f"), ("+/-", "", col("vD_uncertainty"), "%.2g"),
                ("v_th", "", col("v_th"), "%.4f"), ("+/-", "", col("v_th_uncertainty"), "%.2g"),
                ("C_n", "cm-1 A^%g" % n, col("C_n"), "%.6g"), ("+/-", "cm-1 A^%g" % n, col("C_n_uncertainty"), "%.2g"),
                ("sqrt of reduced chi-square", "", col("sqrt_reduced_chi_square"), "%.3f")]
        return html_table(cols, "Near-dissociation fits (tail -C%g/r^%g; %s)" % (
            n, n, "asymptote fixed" if self.asymptote_fixed else "asymptote fitted"), notes=[
            "summary: D = %s cm-1, vD = %s, v_th = %s (%s); E_beta = %.3g cm-1" % (
                _pm(self.D, 6), _pm(self.vD, 4), _pm(self.v_th, 4), self.v_th_source, self.E_beta)] + self.notes)


def _pm(pair, digits):
    if pair is None:
        return "-"
    value, unc = pair
    return "%.*f+/-%.*f" % (digits, value, digits, unc) if unc else "%.*f (fixed)" % (digits, value)


# ------------------------------------------------------------------------------ the fits
def _levenberg_marquardt(residual, p0, max_iter=200):
    """Minimises |residual(p)|^2 (a whitened residual vector); numerical Jacobian. Returns p, J."""
    p = np.array(p0, dtype=float)
    r = residual(p)
    if not np.all(np.isfinite(r)):
        raise ValueError("the starting values of the near-dissociation fit are invalid")
    lam = 1e-3
    cost = float(r @ r)

    def jac(p):
        J = np.empty((len(r), len(p)))
        for k in range(len(p)):
            h = 1e-7 * max(abs(p[k]), 1e-3)
            up, dn = p.copy(), p.copy()
            up[k] += h
            dn[k] -= h
            J[:, k] = (residual(up) - residual(dn)) / (2 * h)
        return J

    J = jac(p)
    for _ in range(max_iter):
        A = J.T @ J
        g = J.T @ r
        accepted = False
        for _ in range(30):
            step = np.linalg.solve(A + lam * np.diag(np.maximum(np.diag(A), 1e-300)), -g)
            trial = p + step
            with np.errstate(all="ignore"):
                rt = residual(trial)
            if np.all(np.isfinite(rt)) and float(rt @ rt) < cost:
                accepted = True
                break
            lam *= 10
        if not accepted:
            break
        decrease = cost - float(rt @ rt)
        p, r, cost = trial, rt, float(rt @ rt)
        lam = max(lam / 10, 1e-12)
        J = jac(p)
        if decrease < 1e-12 * max(cost, 1.0):
            break
    return p, r, J


def _covariance(J, chi2, dof, scale):
    cov = np.linalg.pinv(J.T @ J)
    if scale and dof > 0:
        cov = cov * chi2 / dof
    return cov


def _fit_law(law, v, E, s, n, mu, asymptote, scale, p_start):
    """Fits the LB law (p_start = [D?, vD, ln H]) or the expansion (+ p_1..p_K); returns (LawFit, p)."""
    expo = 2.0 * n / (n - 2)
    free_D = asymptote is None

    def unpack(p):
        k = 0
        D = p[0] if free_D else asymptote
        k = 1 if free_D else 0
        return D, p[k:]

    def model(p):
        D, q = unpack(p)
        vD, logH = q[0], q[1]
        x = vD - v
        if np.any(x <= 0):
            return np.full(len(v), np.nan)
        corr = 1.0 + sum(q[2 + k] * x ** (k + 1) for k in range(len(q) - 2))
        return D - (x * math.exp(logH)) ** expo * corr

    def residual(p):
        return (model(p) - E) / s

    p, r, J = _levenberg_marquardt(residual, p_start)
    chi2 = float(r @ r)
    dof = len(v) - len(p)
    cov = _covariance(J, chi2, dof, scale)
    sd = np.sqrt(np.abs(np.diag(cov)))
    params = {}
    k = 0
    if free_D:
        params["D"] = (p[0], sd[0])
        k = 1
    else:
        params["D"] = (asymptote, 0.0)
    params["vD"] = (p[k], sd[k])
    H, dlogH = math.exp(p[k + 1]), sd[k + 1]
    params["H_n"] = (H, H * dlogH)
    if mu:
        Cn = _cn_from_h(H, n, mu)
        params["C_n"] = (Cn, n * Cn * dlogH)  # C_n ~ H^-n
    for j in range(len(p) - k - 2):
        params["p%d" % (j + 1)] = (p[k + 2 + j], sd[k + 2 + j])
    return LawFit(law, np.arange(len(v)), params, -r * s, chi2, dof), p


def _threshold_vth(v, E, s, n, mu, D, C_n):
    """v_th from levels in the quadratic threshold range, D = (value, sd) and C_n = (value, sd) held."""
    eps = HBAR2_OVER_2U / mu

    def vth_of(Dv, Cv, Ev):
        bbar = threshold_length(Cv, n, mu)[1]
        return v + (bbar / math.pi) * np.sqrt(np.maximum(Dv - Ev, 0.0) / eps)

    vth = vth_of(D[0], C_n[0], E)
    # per-level uncertainty from the level's own sigma, then the common D and C_n parts
    hE = 1e-3 * s
    dE = (vth_of(D[0], C_n[0], E + hE) - vth_of(D[0], C_n[0], E - hE)) / (2 * hE)
    w = 1.0 / (dE * s) ** 2
    mean = float(np.sum(w * vth) / np.sum(w))
    var_stat = 1.0 / float(np.sum(w))
    common = 0.0
    for k, (val, sd) in enumerate((D, C_n)):
        if sd:
            h = 1e-4 * sd
            up = vth_of(D[0] + (h if k == 0 else 0), C_n[0] + (h if k == 1 else 0), E)
            dn = vth_of(D[0] - (h if k == 0 else 0), C_n[0] - (h if k == 1 else 0), E)
            common += (float(np.sum(w * (up - dn)) / np.sum(w)) / (2 * h) * sd) ** 2
    params = {"D": D, "C_n": C_n, "v_th": (mean, math.sqrt(var_stat + common))}
    resid = (vth - mean) / np.sqrt(1.0 / w) if len(v) > 1 else np.zeros(1)
    return LawFit("threshold", np.arange(len(v)), params, resid, float(resid @ resid), len(v) - 1,
                  note="D and C_n held; residuals in v_th units per level")


def _lb_start(v, E, n, asymptote):
    """Starting (D, vD, log H) from the linear form (D - E)^((n-2)/(2n)) = H (vD - v)."""
    expo = 2.0 * n / (n - 2)

    def linear(D):
        y = (D - E) ** (1.0 / expo)
        A = np.stack([np.ones_like(v), -v], axis=1)
        coef, *_ = np.linalg.lstsq(A, y, rcond=None)
        res = y - A @ coef
        return float(res @ res) / float(y @ y), coef

    if asymptote is None:
        top = float(np.max(E))
        order = np.argsort(v)
        gap = float(abs(E[order[-1]] - E[order[-2]])) if len(v) > 1 else 1.0
        grid = top + gap * np.geomspace(1e-4, 10.0, 200)
        D = min(grid, key=lambda d: linear(d)[0])
    else:
        D = float(asymptote)
    _, (a, H) = linear(D)
    H = abs(H) if H != 0 else 1.0
    return D, a / H, math.log(H)


def near_dissociation_fit(v, energy, uncertainty, tail_power=6, asymptote=None, *, mu=None,
                          energy_zero="minimum", corrections=1, threshold_range=0.1, C_n=None,
                          scale_uncertainties=True):
    """Fit the last levels of one vibrational series (one isotopologue and J) near dissociation.

    v, energy, uncertainty: the levels (quantum numbers, cm-1, one-sigma cm-1); the user's
        arrays are not changed.
    tail_power: n of the long-range tail -C_n/r^n (> 2).
    asymptote: None to fit D, or the value of D to hold fixed (in the energy zero of the data:
        for energy_zero="asymptote" the data are binding energies and the true asymptote is 0 in
        that zero, unless the data's reference is itself uncertain; then leave it free).
    mu: reduced mass in u; needed for C_n (without it only H_n is returned) and the threshold law.
    energy_zero: "minimum" (term values, increasing with v) or "asymptote" (binding energies,
        positive, decreasing with v).
    corrections: number K of correction terms p_k (vD - v)^k in the near-dissociation expansion
        (1: the C_(n+2) proxy for n = 6; 0 turns the expansion into the LB law).
    threshold_range: the quadratic threshold law gives v_th from the levels bound by less than
        threshold_range * E_beta (default 0.1, i.e. kappa*beta < 0.32, where the leading law's
        (v_th - v) is within ~5 % (physics.md 4c: 0.982 at kappa*beta = 0.1, 0.946 at 0.3) and
        v_th - v < 0.05 for n = 6). For n = 6 at most the last level lies there: D and C_n
        are held (from the expansion, or `C_n` when given) and v_th = v + (bbar/pi) sqrt((D-E)/eps)
        per level, weighted; its uncertainty includes those of D, C_n and the energies.
    C_n: a known C_n (cm-1 A^n) for the threshold law; None uses the expansion's.
    scale_uncertainties: scale the covariances by chi2/dof (as wkbfit.fit does).

    The LeRoy-Bernstein law describes first-order semiclassical (WKB) levels, not the true last
    levels: the true levels cross over to the quadratic threshold law for binding energies below
    about E_beta, and the C_(n+2) terms and the core bend them away from LB deeper down. Read the
    LB parameters as those of the semiclassical series; vD is the semiclassical quantum number at
    dissociation, v_th = vD - 1/(2(n-2)) the true one (physics.md 4c).

    Returns a NearDissociationFit (D, vD, v_th, C_n with uncertainties; the three LawFits with
    their residuals; a plain-text table()).
    """
    v = np.array(v, dtype=float).ravel()
    E = np.array(energy, dtype=float).ravel()
    s = np.array(uncertainty, dtype=float).ravel()
    if not (len(v) == len(E) == len(s)):
        raise ValueError("v, energy and uncertainty need the same length; got %d, %d, %d" % (len(v), len(E), len(s)))
    if not (np.all(np.isfinite(v)) and np.all(np.isfinite(E))):
        raise ValueError("v and energy must be finite numbers")
    if not np.all(np.isfinite(s) & (s > 0)):
        raise ValueError("every uncertainty must be a finite number > 0; got %r" % (s[~(np.isfinite(s) & (s > 0))][0],))
    if np.any(v != np.round(v)) or np.any(v < 0) or len(np.unique(v)) != len(v):
        raise ValueError("v must be distinct whole numbers >= 0")
    try:
        n = float(tail_power)
    except (TypeError, ValueError):
        raise ValueError("tail_power=%r must be a number > 2" % (tail_power,)) from None
    if not n > 2:
        raise ValueError("tail_power=%r must be > 2 (the LeRoy-Bernstein law needs n > 2)" % (tail_power,))
    if energy_zero not in ("minimum", "asymptote"):
        raise ValueError("energy_zero=%r: use 'minimum' (term values) or 'asymptote' (binding energies)"
                         % (energy_zero,))
    if mu is not None:
        mu = float(mu)
        if not (math.isfinite(mu) and mu > 0):
            raise ValueError("mu=%r must be a reduced mass > 0 in u" % (mu,))
    if not (isinstance(corrections, (int, np.integer)) and corrections >= 0):
        raise ValueError("corrections=%r must be a whole number >= 0" % (corrections,))
    if asymptote is not None:
        asymptote = float(asymptote)
        if not math.isfinite(asymptote):
            raise ValueError("asymptote=%r must be a finite number or None (fitted)" % (asymptote,))
    if energy_zero == "asymptote":
        E = -E  # energies below the nominal asymptote; D = 0 there
    n_free = 1 if asymptote is None else 0
    if asymptote is not None and np.any(E >= asymptote):
        raise ValueError("some levels lie at or above the fixed asymptote %.10g" % asymptote)
    if len(v) < n_free + 2 + 1:
        raise ValueError("%d levels cannot determine the %d parameters of the LeRoy-Bernstein law with one degree "
                         "of freedom; give more levels" % (len(v), n_free + 2))
    notes = []
    D0, vD0, logH0 = _lb_start(v, E, n, asymptote)
    start = ([D0] if asymptote is None else []) + [vD0, logH0]
    lb, p_lb = _fit_law("LeRoy-Bernstein", v, E, s, n, mu, asymptote, scale_uncertainties, start)
    k = max(0, min(int(corrections), len(v) - n_free - 3))
    if k < corrections:
        notes.append("the expansion has %d correction term%s (too few levels for %d)" % (k, "" if k == 1 else "s",
                                                                                        corrections))
    expansion, _ = _fit_law("expansion", v, E, s, n, mu, asymptote, scale_uncertainties, list(p_lb) + [0.0] * k)
    expansion.law = "expansion(%d)" % k
    threshold = None
    if mu is not None and math.isfinite(expansion.params["C_n"][0]):
        C_n_used = expansion.params["C_n"] if C_n is None else (float(C_n), 0.0)
        E_beta = threshold_length(C_n_used[0], n, mu)[2]
        D_used = expansion.params["D"]
        sel = np.nonzero(D_used[0] - E < threshold_range * E_beta)[0]
        if len(sel):
            threshold = _threshold_vth(v[sel], E[sel], s[sel], n, mu, D_used, C_n_used)
            threshold.rows = sel
        else:
            notes.append("quadratic threshold law not applied: no level bound by less than %.3g E_beta = %.3g cm-1"
                         % (threshold_range, threshold_range * E_beta))
    elif mu is None:
        notes.append("mu not given: C_n and the threshold law need the reduced mass")
    if energy_zero == "asymptote":
        notes.append("binding-energy data: D is the asymptote in the data's zero (0 = the nominal threshold)")
    result = NearDissociationFit(int(n) if n == int(n) else n, mu, lb, expansion, threshold, asymptote is not None,
                                 notes)
    # the levels fitted, in the fits' zero (binding-energy data: minus the binding energy), for figures
    result.v, result.energy, result.uncertainty = v, E, s
    return result


# ------------------------------------------------------------------------------ predictions
#: how well v_th = vD - 1/(2(n-2)) holds for a real core (physics.md 4c check: 6e-4), in v
_VTH_RELATION_ERROR = 1e-3


def long_range_tail(potential, depths=(1e-2, 1e-4)):
    """(n, C_n) of the potential's outermost region: n = -d ln(D - V)/d ln r where D - V falls to each
    of `depths` (cm-1); they must agree to 1 % (an inverse power; an exponential tail's n keeps
    growing and gives None). n is rounded to a whole number when within 0.05; C_n = (D - V) r^n at
    the smaller depth."""
    r = float(potential.params.get("re", 1.0)) * 1.5
    found = []
    for depth in depths:
        for _ in range(400):
            d = float(potential.binding_depth(np.array([r]))[0])
            if 0 < d < depth:
                break
            r *= 1.05
        else:
            return None
        rr = np.array([r / 1.01, r * 1.01])
        dd = potential.binding_depth(rr)
        if not np.all(dd > 0):
            return None
        found.append((-math.log(dd[1] / dd[0]) / math.log(rr[1] / rr[0]), r, d))
    (n1, _, _), (n, r, d) = found
    if not (2 < n < 64) or abs(n - n1) > 0.01 * n:
        return None
    if abs(n - round(n)) < 0.05:
        n = float(round(n))
    return n, d * r ** n


def threshold_number(potential, mu, binding, binding_uncertainty, vD, vD_uncertainty, threshold_range=0.1):
    """(v_th, its uncertainty, note) of a J = 0 series from its last exact level.

    binding: binding energies of the bound levels v = 0..N-1 (exact levels), with their
    uncertainties. If the last level is bound by less than threshold_range * E_beta, the
    quadratic threshold law gives v_th = v + (bbar/pi) sqrt(b/eps) (physics.md 4c (ii));
    otherwise v_th = vD - 1/(2(n-2)) (physics.md 4c (i)) with vD the WKB value. n and C_n are read
    off the potential's tail (long_range_tail). None when the tail is not an inverse power."""
    tail = long_range_tail(potential)
    if tail is None or not len(binding):
        return None, None, "v_th not given: the potential's tail is not an inverse power"
    n, C_n = tail
    beta, bbar, E_beta = threshold_length(C_n, n, mu)
    eps = HBAR2_OVER_2U / mu
    b, sb = float(binding[-1]), float(binding_uncertainty[-1])
    if 0 < b < threshold_range * E_beta:
        v_th = len(binding) - 1 + bbar / math.pi * math.sqrt(b / eps)
        unc = math.hypot(bbar / (2 * math.pi * math.sqrt(b * eps)) * sb, 0.05 * (v_th - len(binding) + 1))
        return v_th, unc, ("v_th from the quadratic threshold law at the last level (bound by %.3g E_beta; "
                           "tail -C%g/r^%g read off the potential)" % (b / E_beta, n, n))
    v_th = vD - 1.0 / (2 * (n - 2))
    return v_th, math.hypot(vD_uncertainty, _VTH_RELATION_ERROR), (
        "v_th = vD - 1/(2(n-2)) (physics.md 4c; tail -C%g/r^%g read off the potential), to ~1e-3" % (n, n))
