"""Benchmark: the cost of fitting 1000 line positions with 100 free term values.

A progression data set as a fluorescence experiment gives it (invented scenario): 100 levels of
an unmodelled upper state, each emitting 10 lines (5 lower v'', P and R branches) into a Morse
lower state; their 100 term values are free parameters. Compared with
  * the same number (1000) of term values of the lower state (a plain term-value fit), and
  * a careful user's SciPy fit of the same lines: scipy.optimize.least_squares over the same C
    level calculation (wkbfit's fit evaluator), analytic level derivatives for the potential
    columns and the trivial free-term-value columns given exactly (jac as a dense matrix), the
    same start and the same tolerance class.
Prints the milliseconds per fit, the ratios, the levels computed per model evaluation, and the
largest difference of the minima in units of the fitted uncertainties.
Run: python3 tests/benchmarks/bench_lines.py (the machine may be shared: times are indicative).
"""
import os
import sys

import numpy as np
from scipy.optimize import least_squares

sys.path.insert(0, os.path.join(os.path.dirname(__file__), "..", "..", "pkg"))
import wkbfit  # noqa: E402
from wkbfit import _core  # noqa: E402
from timing import time_call  # noqa: E402  (tests/benchmarks/timing.py)

TRUE = wkbfit.Morse(De=5000.0, re=3.0, a=1.0)
START = wkbfit.Morse(De=4950.0, re=3.01, a=0.99)
MU = 20.0
SIGMA = 0.002


def levels_of(pot, keys):
    """Term values of (v, J) keys, first-order WKB (the fit's own level calculation)."""
    out = np.empty(len(keys))
    for J in sorted({k[1] for k in keys}):
        idx = [i for i, k in enumerate(keys) if k[1] == J]
        out[idx] = wkbfit.levels(pot, MU, v=[keys[i][0] for i in idx], J=J).energy
    return out


def progression(rng):
    cols = {c: [] for c in ("v_upper", "J_upper", "v_lower", "J_lower", "wavenumber", "uncertainty", "upper_state")}
    lower = []
    uppers = []
    for k in range(100):
        Ju = k + 1
        T = 18000.0 + 3.7 * k
        uppers.append(T)
        for vl in (0, 4, 8, 12, 16):
            for Jl in (Ju - 1, Ju + 1):
                lower.append((vl, Jl))
                cols["v_upper"].append(0)
                cols["J_upper"].append(Ju)
                cols["v_lower"].append(vl)
                cols["J_lower"].append(Jl)
                cols["upper_state"].append("U")
                cols["uncertainty"].append(SIGMA)
                cols["wavenumber"].append(T)
    E = levels_of(TRUE, lower)
    cols["wavenumber"] = list(np.array(cols["wavenumber"]) - E + rng.normal(0, SIGMA, len(E)))
    return wkbfit.read_lines(cols, check=False), lower


def term_values(rng):
    keys = [(v, J) for v in range(20) for J in range(50)]
    E = levels_of(TRUE, keys) + rng.normal(0, SIGMA, len(keys))
    return wkbfit.read_levels({"v": [k[0] for k in keys], "J": [k[1] for k in keys], "energy": E,
                               "uncertainty": np.full(len(keys), SIGMA)}, check=False)


def scipy_fit(lines, lower_keys):
    """least_squares over the C levels of the distinct lower levels + the free term values."""
    distinct = sorted(set(lower_keys))
    index = {k: i for i, k in enumerate(distinct)}
    li = np.array([index[k] for k in lower_keys])
    ui = np.repeat(np.arange(100), 10)
    v = np.array([k[0] for k in distinct], dtype=np.intc)
    rot = np.array([k[1] * (k[1] + 1.0) for k in distinct])
    mu = np.full(len(distinct), MU)
    model, p0, curve = START._core_args()
    obs, sig = lines.wavenumber, lines.uncertainty
    E0 = _core.fit_evaluate(model, p0, curve, v, rot, mu, 0)[0]
    T0 = np.array([np.mean((obs + E0[li])[ui == k]) for k in range(100)])
    x0 = np.concatenate([p0, T0])
    cache = {}

    def levels(x):
        key = x[:3].tobytes()
        if key not in cache:
            cache.clear()
            cache[key] = _core.fit_evaluate(model, x[:3], curve, v, rot, mu, 0)
        return cache[key]

    def fun(x):
        E, _ = levels(x)
        return (x[3:][ui] - E[li] - obs) / sig

    def jac(x):
        _, dE = levels(x)
        J = np.zeros((len(obs), len(x)))
        J[:, :3] = -dE[li] / sig[:, None]
        J[np.arange(len(obs)), 3 + ui] = 1 / sig
        return J

    res = least_squares(fun, x0, jac=jac, method="lm", xtol=1e-12, ftol=1e-12)
    J = jac(res.x)
    cov = np.linalg.inv(J.T @ J) * (2 * res.cost / (len(obs) - len(x0)))
    return res.x, np.sqrt(np.diag(cov))


def main():
    rng = np.random.default_rng(1)
    lines, lower = progression(rng)
    terms = term_values(rng)
    r_lines = wkbfit.fit(START, lines, MU)
    r_terms = wkbfit.fit(START, terms, MU)
    assert r_lines.success and r_terms.success
    t_lines = time_call(lambda: wkbfit.fit(START, lines, MU), 2.0)
    t_terms = time_call(lambda: wkbfit.fit(START, terms, MU), 2.0)
    print("1000 lines, 100 free term values: %8.1f ms per fit (%d distinct lower levels, %d evaluations, %d level "
          "calculations = %d per evaluation)" % (1e3 * t_lines, r_lines.n_levels, r_lines.n_evaluations,
                                                r_lines.n_level_calculations,
                                                r_lines.n_level_calculations // (r_lines.n_evaluations + 1)))
    print("1000 term values:                 %8.1f ms per fit (%d distinct levels, %d evaluations)" % (
        1e3 * t_terms, r_terms.n_levels, r_terms.n_evaluations))
    print("ratio lines / term values: %.2f; per distinct level and evaluation: %.2f" % (
        t_lines / t_terms, (t_lines / (r_lines.n_levels * (r_lines.n_evaluations + 1)))
        / (t_terms / (r_terms.n_levels * (r_terms.n_evaluations + 1)))))
    x, sd = scipy_fit(lines, lower)
    t_scipy = time_call(lambda: scipy_fit(lines, lower), 2.0)
    diff = max(abs(x[k] - r_lines.params[n].value) / r_lines.params[n].uncertainty for k, n in enumerate(("De", "re", "a")))
    print("SciPy least_squares over the same levels: %8.1f ms per fit; wkbfit is %.1fx faster; minima differ by "
          "%.2g sigma" % (1e3 * t_scipy, t_scipy / t_lines, diff))


if __name__ == "__main__":
    main()
