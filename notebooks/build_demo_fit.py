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
real atomic masses; every energy is made up (WKB levels of an invented Lennard-Jones potential plus seeded noise,
see `wkbfit/demo.py`). They are **not** measurements of LiCs.

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

A Lennard-Jones (n, 6) potential: the well depth `De`, the equilibrium distance `re` and the repulsive exponent `n`
vary; the attractive exponent stays at `m = 6`, the dispersion tail. Both isotopologues share one potential, each
with its own reduced mass; the J > 0 levels include the centrifugal term."""),
    ("code", """\
start = wkbfit.LennardJones(De=4000.0, re=4.0, n=12, m=6)
result = wkbfit.fit(start, observed, vary=["De", "re", "n"])
print(result.report())"""),
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
Because the data are invented we know the potential they came from, and can ask whether the quoted
uncertainties are honest: the differences between the true and the predicted levels, in units of the
predicted one-sigma uncertainty, should be of order one."""),
    ("code", """\
true_potential = demo.demo_true_potential()
for label, prediction in predictions.items():
    true_levels = wkbfit.levels(true_potential, result.masses[label])
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
