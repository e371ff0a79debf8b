"""Write the three story notebooks (without outputs) from the cells below: `python3 notebooks/build_stories.py`.

    first_fit.ipynb           a first fit: data, fit, residuals, correlations, predictions
    near_dissociation.ipynb   the last levels, the threshold behaviour, vD and D0 with uncertainties
    rkr_to_potential.ipynb    from Dunham constants through RKR to a fitted potential, WKB against exact

Every number in them is INVENTED (made by wkbfit from invented potentials, plus seeded noise); the
isotope labels only supply real reduced masses. Edit the cells here and rebuild, so that the
notebooks' source stays reviewable as plain Python. tests/test_story_notebooks.py runs them.
"""
import os

import nbformat
from nbformat.v4 import new_code_cell, new_markdown_cell, new_notebook

INVENTED = """\
**INVENTED DATA.** Every level in this notebook belongs to an *invented* electronic state: it is computed by
wkbfit from an invented potential, plus seeded random noise of the stated uncertainty. The isotope labels are
real only so that the reduced masses come from real atomic masses; nothing here describes a real molecule."""

SETUP = """\
%matplotlib inline
import warnings
import numpy as np
import matplotlib.pyplot as plt
import wkbfit
from wkbfit import plots"""

FIRST_FIT = [
    ("md", """\
# A first fit: measured levels in, a potential with uncertainties out

""" + INVENTED + """

The scenario: J = 0 and J = 20 levels of two isotopologues, "measured" with 0.003 cm-1 uncertainty low in the
well and 0.01 cm-1 higher up. Units: cm-1, angstrom, u."""),
    ("code", SETUP),
    ("md", """\
## The invented measurement

The levels are *exact* levels (radial Schroedinger equation) of an invented expanded Morse oscillator (EMO),
so that the semiclassical fit below meets data it did not make itself."""),
    ("code", """\
invented_truth = wkbfit.EMO(De=5200.0, re=3.12, betas=[0.92, 0.08, 0.05], p=3)   # INVENTED
rng = np.random.default_rng(1)
rows = {"isotopologue": [], "v": [], "J": [], "energy": [], "uncertainty": []}
for label in ("23Na39K", "23Na41K"):
    for J in (0, 20):
        t = wkbfit.levels(invented_truth, label, v=list(range(0, 30, 1 if J == 0 else 3)), J=J, method="exact")
        sigma = np.where(t.v < 15, 0.003, 0.01)
        rows["isotopologue"] += [label] * len(t)
        rows["v"] += t.v.tolist()
        rows["J"] += [J] * len(t)
        rows["energy"] += (t.energy + rng.normal(0.0, sigma)).tolist()
        rows["uncertainty"] += sigma.tolist()
observed = wkbfit.read_levels(rows, energy_zero="minimum")
observed"""),
    ("md", """\
## The fit

An EMO with three exponent coefficients; `p` stays fixed (its default). The default method ("corrected") runs
its iterations on first-order WKB levels plus per-level exact corrections, so that parameters and uncertainties
are those of a fit to exact levels (radial Schroedinger equation) at semiclassical cost."""),
    ("code", """\
start = wkbfit.EMO(De=5000.0, re=3.1, betas=[0.9, 0.0, 0.0], p=3)
result = wkbfit.fit(start, observed)
print(result.report()[:1600])"""),
    ("code", """\
result   # the HTML view: parameters, correlations, the residual table folded"""),
    ("md", """\
## Residuals and correlations

Normalised residuals against v and against energy, one colour per isotopologue, open markers for J > 0,
with the 1, 2, 3 sigma bands; then the correlation matrix of the varied parameters."""),
    ("code", """\
fig, axes = plt.subplots(1, 3, figsize=(16, 4.5))
plots.residuals(result, ax=axes[0])
plots.residuals(result, ax=axes[1], against="energy")
plots.correlation(result, ax=axes[2])
fig.tight_layout()"""),
    ("md", """\
The sqrt of reduced chi-square says whether the residuals match the stated uncertainties (about 1 if they
do). Plain first-order WKB levels (method="wkb") meeting exact levels leave a systematic part, which the fit
absorbs into its parameters; the default fit and the fit with exact levels in every iteration agree:"""),
    ("code", """\
wkb_fit = wkbfit.fit(start, observed, method="wkb")
exact_fit = wkbfit.fit(start, observed, method="exact")
for name, fit in (("first-order WKB", wkb_fit), ("default (corrected)", result), ("exact", exact_fit)):
    print("%-20s sqrt of reduced chi-square %.3f, De = %.3f +/- %.3f cm-1" % (
        name, fit.sqrt_reduced_chi_square, fit.params["De"].value, fit.params["De"].uncertainty))
exact_fit.to_dataframe().head()"""),
    ("md", """\
## Predictions

Every bound level of the fitted potential with its propagated uncertainty, and the Birge-Sponer plot of the
measured spacings against the fitted ones with their 1-sigma band."""),
    ("code", """\
prediction = exact_fit.predict(isotopologue="23Na39K")
print(prediction.summary())
ax = plots.birge_sponer(exact_fit, isotopologue="23Na39K")"""),
    ("code", """\
prediction   # folded HTML table: first and last levels shown"""),
    ("md", """\
Because the data are invented we know the truth, and can check that the quoted uncertainties are honest:"""),
    ("code", """\
truth = wkbfit.levels(invented_truth, "23Na39K", method="exact")
n = min(len(truth), prediction.n_bound)
pulls = (truth.energy[:n] - prediction.energy[:n]) / prediction.energy_uncertainty[:n]
print("measured range v = 0..29: largest |truth - prediction|/sigma = %.2f" % np.max(np.abs(pulls[:30])))
print("beyond it, v = 30..%d:      largest |truth - prediction|/sigma = %.2f" % (n - 1, np.max(np.abs(pulls[30:]))))"""),
    ("md", "*Reminder: every number above is invented.*"),
]

NEAR_DISSOCIATION = [
    ("md", """\
# Near dissociation: the last levels, vD, v_th and D0

""" + INVENTED + """

The scenario: an invented state with a -C6/r^6 dispersion tail (an MLR potential), measured as binding
energies below the atomic limit up to v = 38 of its 47 bound levels. The questions: where are the last
levels, how many are there (vD and the threshold number v_th), and how deep is the well from v = 0 (D0)?
Units: cm-1, angstrom, u."""),
    ("code", SETUP),
    ("code", """\
invented_truth = wkbfit.MLR(De=3100.0, re=3.9, C6=1.6e7, betas=[-0.3, 0.1, 0.05], p=5, q=3)   # INVENTED
label = "23Na39K"
exact = wkbfit.levels(invented_truth, label, method="exact")
measured = exact.v <= 38
rng = np.random.default_rng(11)
sigma = np.full(int(measured.sum()), 0.01)
observed = wkbfit.read_levels({"isotopologue": [label] * len(sigma), "v": exact.v[measured],
                               "energy": exact.binding_energy[measured] + rng.normal(0.0, sigma),
                               "uncertainty": sigma}, energy_zero="asymptote")
observed   # binding energies below the limit; the HTML view folds the middle rows"""),
    ("md", """\
## Fit with the long-range coefficient held at its (invented) theoretical value

C6 stays fixed, as the MLR defaults say; De, re and the betas vary; r_ref="re" puts the reference distance
of the MLR exponent at the starting re (3.92 A), where it stays while re is fitted. Once with plain first-order WKB levels (method="wkb") and once with the default
method, which has the quality of a fit to exact levels."""),
    ("code", """\
start = wkbfit.MLR(De=3000.0, re=3.92, C6=1.6e7, betas=[-0.2, 0.0, 0.0], p=5, q=3, r_ref="re")
fits = {"wkb": wkbfit.fit(start, observed, method="wkb"), "corrected": wkbfit.fit(start, observed)}
for method, fit in fits.items():
    print("%-9s %s, sqrt of reduced chi-square %.3f" % (method, fit.status, fit.sqrt_reduced_chi_square))
    print("          " + fit.predict().summary())"""),
    ("md", """\
## The last levels

For a -C_n/r^n tail the binding energy of the last levels goes as (vD - v)^(2n/(n-2)) (LeRoy-Bernstein), so
(D - E)^((n-2)/(2n)) is a straight line in v that reaches zero at vD: the near-dissociation plot."""),
    ("code", """\
fig, axes = plt.subplots(1, 2, figsize=(13, 4.5))
plots.near_dissociation(fits["corrected"], ax=axes[0])
plots.near_dissociation(fits["corrected"], ax=axes[1], last=10)
fig.tight_layout()"""),
    ("code", """\
print(fits["corrected"].predict().to_text(last=6))"""),
    ("md", """\
## Threshold behaviour: which semiclassical rule reaches dissociation?

The predictions above are exact levels of the fitted potential. Against them, the textbook first-order rule
misses the last levels by more than their uncertainty, while the default rule of `levels` (second order with
matched end phases: the exact solution through the outer turning region joined to second-order WKB) follows
the exact levels right up to dissociation. Its quantum number at the asymptote is the threshold number v_th."""),
    ("code", """\
potential, mu = fits["corrected"].potential, observed.masses_by_isotopologue()[label]
exact_levels = wkbfit.levels(potential, mu, method="exact")
for name, rule in (("first order", {"order": 1}), ("second order, matched ends", {})):
    table = wkbfit.levels(potential, mu, **rule)
    n = min(len(table), len(exact_levels))
    print("%-27s %d bound levels; largest |WKB - exact| over the last 8: %.1e cm-1" % (
        name, len(table), np.max(np.abs(table.energy[n - 8:n] - exact_levels.energy[n - 8:n]))))
matched = wkbfit.levels(potential, mu)
print("v_th = %.4f (matched rule at the asymptote); first-order vD = %.4f" % (
    matched.v_th, wkbfit.levels(potential, mu, order=1).vD))
ax = plots.wkb_vs_exact(potential, mu, uncertainty=0.01)"""),
    ("md", """\
## Against the invented truth

Because the data are invented we can ask how far each fit's last levels are from the truth, in units of their
linearly propagated uncertainties:"""),
    ("code", """\
for method, fit in fits.items():
    p = fit.predict()
    n = min(p.n_bound, len(exact))
    last = slice(n - 5, n)
    print("%-9s last 5 levels: (truth - prediction)/sigma =" % method,
          np.round((exact.binding_energy[last] - p.binding_energy[last]) / p.binding_uncertainty[last], 1))"""),
    ("md", """\
Is the linear propagation of the covariance right this close to the limit, where the levels depend on the
parameters least linearly? Refitting Monte-Carlo replicas of the data (the fitted levels plus noise of the
stated size) tells: each histogram is the spread of the replicas, the red curve the Gaussian the covariance
matrix promises. Where the histogram is wider, the column sd/cov of the table says by how much, and the
replica spread is the better uncertainty."""),
    ("code", """\
replicas = fits["corrected"].bootstrap(100, seed=2, progress=False)
top = replicas.names[-1]   # the binding energy of the last level
axes = replicas.plot(names=["De", "D0", "vD", top])
replicas"""),
    ("code", """\
p = fits["corrected"].predict()
v_top = int(top[5:-1])
print("%s: truth - prediction = %.2e cm-1; linear sigma %.2e, replica sd %.2e cm-1" % (
    top, exact.binding_energy[v_top] - p.binding_energy[v_top], p.binding_uncertainty[v_top], replicas.std[top]))"""),
    ("md", """\
## vD, v_th and D0

With one-sigma uncertainties from the fit's covariance (linear propagation; v_th and vD by differences along
the covariance's principal axes; the replicas above say how much wider the honest ones are). v_th is the
quantum threshold number (levels v < v_th are bound); vD the quantum number at dissociation of the accurate
levels, v_th + 1/8 for a C6 tail:"""),
    ("code", """\
truth_table = wkbfit.levels(invented_truth, label)   # matched rule: the truth's threshold number v_th
print("v_th = %.4f +/- %.4f, vD = v_th + 1/8 = %.4f +/- %.4f (invented truth: v_th %.4f, vD %.4f); bound levels %d "
      "(truth %d)" % (p.v_th, p.v_th_uncertainty, p.vD, p.vD_uncertainty, truth_table.v_th, truth_table.v_th + 0.125,
                      p.n_bound, len(exact)))
print("D0 = %.4f +/- %.4f cm-1 (invented truth %.4f cm-1)" % (p.D0, p.D0_uncertainty, exact.binding_energy[0]))"""),
    ("md", "*Reminder: every number above is invented.*"),
]

RKR_TO_POTENTIAL = [
    ("md", """\
# From Dunham constants through RKR to a fitted potential

""" + INVENTED + """

The scenario: an invented light molecule (reduced mass 1.5 u) with measured term values v = 0..12, which the
invented laboratory has also summarised as Dunham-type constants. RKR turns the constants into a curve; its
first-order WKB levels give the constants back, but its exact levels do not quite (RKR inverts the first-order
semiclassical rule). A potential fitted directly to the levels, with exact levels, removes that error.
Units: cm-1, angstrom, u."""),
    ("code", SETUP),
    ("code", """\
mu = 1.5                                                                        # u, INVENTED
invented_truth = wkbfit.EMO(De=29000.0, re=1.35, betas=[1.80, 0.10, 0.05], p=3)  # INVENTED
exact = wkbfit.levels(invented_truth, mu, v=list(range(13)), method="exact")
rng = np.random.default_rng(5)
observed = wkbfit.read_levels({"v": exact.v, "energy": exact.energy + rng.normal(0.0, 0.02, len(exact)),
                               "uncertainty": np.full(len(exact), 0.02)}, energy_zero="minimum")
# the laboratory's Dunham-type summary: G(v) and B(v) as polynomials in (v + 1/2)
x = exact.v + 0.5
Y_G = np.polynomial.polynomial.polyfit(x, observed.energy, 4)   # Y00, Y10, Y20, Y30, Y40
Y_B = np.polynomial.polynomial.polyfit(x, exact.Bv, 2)          # Y01, Y11, Y21
print("Y_k0 =", np.round(Y_G[1:], 6), " Y_k1 =", np.round(Y_B, 6))
turning_points = wkbfit.rkr_turning_points(Y_G[1:], Y_B, mu, v=exact.v)
turning_points"""),
    ("md", """\
## The RKR curve and its levels

Fractional v near the bottom (where r - re grows like sqrt(v + 1/2)), a -C6/r^6 tail towards an assumed
asymptote beyond the last point. The upper levels' wavefunctions reach past the curve's points, which the
warning names level by level. The textbook first-order WKB levels of the curve return G(v); the comparison
below is the default second-order rule against the exact levels of the same curve, which agree far inside the
data uncertainty: what separates the exact levels from G(v) is the first-order rule that RKR inverts, not the
curve's construction."""),
    ("code", """\
s = np.linspace(0.0, np.sqrt(12.5), 97)[1:]
curve = wkbfit.rkr_potential(Y_G[1:], Y_B, mu, v=s * s - 0.5, asymptote=29000.0, tail_power=6)
G = np.polynomial.polynomial.polyval(x, np.r_[0.0, Y_G[1:]])
wkb = wkbfit.levels(curve, mu, v=list(range(13)), order=1)   # the textbook first-order rule, which RKR inverts
print("first-order WKB levels of the RKR curve minus G(v): largest %.1e cm-1" % np.max(np.abs(wkb.energy - G)))
comparison = wkbfit.compare_wkb_exact(curve, mu, v=list(range(13)))
print(comparison.to_text(uncertainty=0.02))"""),
    ("md", """\
## A fitted potential

The measured term values fitted with an EMO, exact levels in every iteration (re is not determined by J = 0
levels alone and stays at the RKR value)."""),
    ("code", """\
start = wkbfit.EMO(De=28000.0, re=turning_points.re, betas=[1.7, 0.0, 0.0], p=3)
fitted = wkbfit.fit(start, observed, mu=mu, method="exact", vary=["De", "beta0", "beta1", "beta2"])
print(fitted.report()[:1500])"""),
    ("code", """\
fig, axes = plt.subplots(1, 3, figsize=(17, 4.5))
turning_points.plot(fitted.potential, ax=axes[0])
plots.wkb_vs_exact(fitted.potential, mu, ax=axes[1], uncertainty=observed)
plots.potential(fitted.potential, mu, ax=axes[2])
fig.tight_layout()"""),
    ("md", """\
Against the invented truth: the exact levels of the RKR curve miss the measured levels by tenths of a cm-1,
far above the 0.02 cm-1 uncertainty, while the fitted potential reproduces them within it."""),
    ("code", """\
rkr_exact = wkbfit.levels(curve, mu, v=list(range(11)), method="exact")
print("exact levels of the RKR curve minus truth, v = 0..10:", np.round(rkr_exact.energy - exact.energy[:11], 3))
fit_exact = wkbfit.levels(fitted.potential, mu, v=list(range(13)), method="exact")
print("exact levels of the fitted potential minus truth:    ", np.round(fit_exact.energy - exact.energy, 3))
turning_points.to_dataframe().head()"""),
    ("md", "*Reminder: every number above is invented.*"),
]

NOTEBOOKS = {"first_fit.ipynb": FIRST_FIT, "near_dissociation.ipynb": NEAR_DISSOCIATION,
             "rkr_to_potential.ipynb": RKR_TO_POTENTIAL}


def build():
    here = os.path.dirname(os.path.abspath(__file__))
    paths = []
    for name, cells in NOTEBOOKS.items():
        nb = new_notebook(cells=[new_markdown_cell(src) if kind == "md" else new_code_cell(src)
                                 for kind, src in cells])
        nb.metadata["kernelspec"] = {"name": "python3", "display_name": "Python 3", "language": "python"}
        nb.metadata["language_info"] = {"name": "python"}
        nbformat.validate(nb)
        path = os.path.join(here, name)
        nbformat.write(nb, path)
        paths.append(path)
    return paths


if __name__ == "__main__":
    for path in build():
        print("wrote %s" % path)
