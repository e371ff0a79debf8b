"""Write notebooks/demo_fit.ipynb (without outputs) from the cells below: `python3 notebooks/build_demo_fit.py`.

Edit the notebook here and rebuild it, so that its source stays reviewable as plain Python.
"""
import os

import nbformat
from nbformat.v4 import new_code_cell, new_markdown_cell, new_notebook

CELLS = [
    ("md", """\
# Fitting a potential to measured levels with wkbfit

**INVENTED DATA.** The levels used here belong to an *invented* electronic state of LiCs, "measured" by an
*invented* laboratory. The isotope labels (7Li133Cs, 6Li133Cs) are real only so that the reduced masses come from
real atomic masses; every energy is made up (exact levels of an invented Morse/long-range potential with a C6
dispersion tail, plus seeded noise, see `wkbfit/demo.py`). They are **not** measurements of LiCs.

The job: term values with their uncertainties in, a potential that reproduces them within those uncertainties out,
with parameter uncertainties and predictions of the levels nobody measured, above all near dissociation.
Units: cm-1, angstrom, u."""),
    ("code", """\
%matplotlib inline
import numpy as np
import matplotlib.pyplot as plt

import wkbfit
from wkbfit import demo"""),
    ("md", """\
## The data

Columns `isotopologue, v, J, energy, uncertainty`; the energies are term values above the potential minimum,
which we state (`energy_zero="minimum"`) rather than leave to be guessed."""),
    ("code", """\
observed = wkbfit.read_levels(demo.demo_data_path(), energy_zero="minimum")
print("\\n".join(observed.comments))
print(observed)
print("reduced masses (u):", observed.masses_by_isotopologue())"""),
    ("code", """\
observed.to_dataframe().head(10)"""),
    ("md", """\
## The fit

A Morse/long-range (MLR) potential: the well depth `De`, the equilibrium distance `re` and the exponent
coefficients `beta0`, `beta1` vary; the dispersion coefficient `C6` stays at its (invented) theoretical value. Both
isotopologues share one potential, each with its own reduced mass; the J > 0 levels include the centrifugal term.

The default method gives exact-level quality at semiclassical cost: first-order WKB iterations with per-level
exact corrections, refreshed until the exact problem's Gauss-Newton step is negligible. The report's *Method
error* section compares each level's method error with its uncertainty."""),
    ("code", """\
start = demo.demo_start_potential()
result = wkbfit.fit(start, observed, vary=list(demo.DEMO_VARY))
print(result.report())"""),
    ("md", """\
The same data fitted with first-order WKB alone (`method="wkb"`): faster, but its levels are off by more than
their uncertainties, and the fit says so (a warning naming the levels, and the report's method-error section)."""),
    ("code", """\
import warnings
with warnings.catch_warnings(record=True) as caught:
    warnings.simplefilter("always")
    first_order = wkbfit.fit(start, observed, vary=list(demo.DEMO_VARY), method="wkb")
print("first-order WKB: sqrt of reduced chi-square %.2f, %d levels with method error > 0.1 sigma"
      % (first_order.sqrt_reduced_chi_square, len(first_order.method_error_flagged)))
print("warning:", str(caught[0].message)[:300], "...")"""),
    ("code", """\
result  # the HTML view"""),
    ("md", """\
## Predictions near dissociation

Every bound level of the fitted potential with its propagated one-sigma uncertainty, the spacings
dG(v+1/2), D0 and the quantum number at dissociation vD. The last ten levels of each isotopologue:"""),
    ("code", """\
predictions = {label: result.predict(isotopologue=label) for label in observed.isotopologues}
for label, prediction in predictions.items():
    print(prediction.to_text(last=10))
    print()"""),
    ("md", """\
Near dissociation, the precisely measured last levels of 7Li133Cs can also be fitted on their own with the
LeRoy-Bernstein law, a near-dissociation expansion and (for levels bound by less than E_beta) the quantum threshold
law; v_th is the true threshold quantum number."""),
    ("code", """\
label = "7Li133Cs"
near = demo.DEMO_ISOTOPOLOGUES[label]["near_threshold"]
rows = [i for i in observed.rows_of(label) if observed.J[i] == 0 and observed.v[i] in near]
nd = wkbfit.near_dissociation_fit(observed.v[rows], observed.energy[rows], observed.uncertainty[rows], 6,
                                  mu=result.masses[label], corrections=2)
print(nd.table())"""),
    ("md", """\
Because the data are invented we know the potential they came from, and can ask whether the quoted
uncertainties are honest: the differences between the true and the predicted levels (exact levels of the true
potential), in units of the predicted one-sigma uncertainty, should be of order one."""),
    ("code", """\
true_potential = demo.demo_true_potential()
for label, prediction in predictions.items():
    true_levels = wkbfit.levels(true_potential, result.masses[label], method="exact")
    n = min(len(true_levels), prediction.n_bound)
    pulls = (true_levels.energy[:n] - prediction.energy[:n]) / prediction.energy_uncertainty[:n]
    print("%s: %d true bound levels, %d predicted; largest |true - predicted|/sigma = %.2f"
          % (label, len(true_levels), prediction.n_bound, np.max(np.abs(pulls))))"""),
    ("md", """\
## The potential with its levels, and the normalised residuals"""),
    ("code", """\
fig, (ax_pot, ax_res) = plt.subplots(1, 2, figsize=(13, 5))
# the fitted potential with the J=0 levels of both isotopologues between their turning points
wkbfit.plots.potential(result.potential, {label: result.masses[label] for label in observed.isotopologues},
                       ax=ax_pot)
ax_pot.set_title("INVENTED state: fitted potential and its J=0 levels")
# normalised residuals against energy, with the 1, 2, 3 sigma bands
result.plot(ax=ax_res, against="energy")
ax_res.set_title("normalised residuals; sqrt of reduced chi-square %.3f" % result.sqrt_reduced_chi_square)
fig.tight_layout()
plt.show()"""),
    ("md", """\
The same fit runs from the command line: `python3 -m wkbfit demo` (or `make demo`), and for your own data
`wkbfit fit levels.csv lennard-jones De=... re=... --vary n -o result.json`.

*Reminder: the data above are invented; no number in this notebook describes the real LiCs molecule.*"""),
]


def build():
    nb = new_notebook(cells=[new_markdown_cell(src) if kind == "md" else new_code_cell(src) for kind, src in CELLS])
    nb.metadata["kernelspec"] = {"name": "python3", "display_name": "Python 3", "language": "python"}
    nb.metadata["language_info"] = {"name": "python"}
    nbformat.validate(nb)
    path = os.path.join(os.path.dirname(os.path.abspath(__file__)), "demo_fit.ipynb")
    nbformat.write(nb, path)
    return path


if __name__ == "__main__":
    print("wrote %s" % build())
