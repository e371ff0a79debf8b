"""wkbfit.plots: every figure runs headless (Agg), labels each axis with its unit, and draws the
numbers it was given (the plotted arrays are checked, not pixels)."""
import math
import sys

import numpy as np
import pytest

matplotlib = pytest.importorskip("matplotlib", reason="the figures need matplotlib (pip install matplotlib)")
matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402

import wkbfit  # noqa: E402
from wkbfit import HBAR2_OVER_2U, plots  # noqa: E402

UNIT_WORDS = ("cm$^{-1}$", "Å", "dimensionless")
MU = 0.979592539  # u, 1H35Cl from AME2020 (physics.md section 8)
MORSE = wkbfit.Morse(De=42341.9, re=1.27455, a=1.75194)


@pytest.fixture(autouse=True)
def _close_figures():
    yield
    plt.close("all")


def has_units(ax):
    return all(any(w in label for w in UNIT_WORDS) for label in (ax.get_xlabel(), ax.get_ylabel()))


def morse_analytic(v, mu, pot=MORSE):
    """Morse term values [Morse, Phys. Rev. 34, 57 (1929)]: we (v+1/2) - wexe (v+1/2)^2."""
    we = pot.a * math.sqrt(4 * pot.De * HBAR2_OVER_2U / mu)
    wexe = we * we / (4 * pot.De)
    x = np.asarray(v) + 0.5
    return we * x - wexe * x * x


@pytest.fixture(scope="module")
def lj_fit():
    """A fit of a Lennard-Jones (12, 6) potential to its own levels with seeded noise (two isotopologues)."""
    true = wkbfit.LennardJones(De=4000.0, re=4.0, n=12, m=6)
    rows = {"v": [], "J": [], "energy": [], "uncertainty": [], "isotopologue": []}
    rng = np.random.default_rng(7)
    for label in ("7Li133Cs", "6Li133Cs"):
        t = wkbfit.levels(true, label, v=list(range(12)))
        rows["v"] += t.v.tolist()
        rows["J"] += [0] * len(t)
        rows["energy"] += (t.energy + rng.normal(0, 0.01, len(t))).tolist()
        rows["uncertainty"] += [0.01] * len(t)
        rows["isotopologue"] += [label] * len(t)
    return wkbfit.fit(wkbfit.LennardJones(De=3900.0, re=4.02, n=12, m=6), wkbfit.read_levels(rows),
                      vary=["De", "re"])


def test_matplotlib_only_imported_when_a_figure_is_drawn():
    import os
    import subprocess
    pkg = os.path.join(os.path.dirname(os.path.dirname(os.path.abspath(__file__))), "pkg")
    code = ("import sys, wkbfit, wkbfit.plots; "
            "sys.exit(1 if any(m.startswith('matplotlib') for m in sys.modules) else 0)")
    env = dict(os.environ, PYTHONPATH=pkg)
    assert subprocess.run([sys.executable, "-c", code], env=env).returncode == 0


def test_potential_levels_between_turning_points():
    ax = plots.potential(MORSE, MU)
    assert isinstance(ax, matplotlib.axes.Axes) and has_units(ax)
    (curve,) = [line for line in ax.lines if line.get_label() == "V(r)"]
    r, V = curve.get_data()
    assert np.allclose(V, MORSE(r), rtol=0, atol=1e-9)
    segs = ax.collections[0].get_segments()
    table = wkbfit.levels(MORSE, MU)
    assert len(segs) == len(table)
    E = np.array([s[0, 1] for s in segs])
    # the levels drawn are the default (matched) levels, which are the analytic Morse levels to 1e-5 cm-1
    # (measured: 7e-6 at the top; the matched-rule target is 1e-4)
    assert np.allclose(E, table.energy, rtol=0, atol=1e-9)
    assert np.allclose(E, morse_analytic(table.v, MU), rtol=0, atol=1e-5)
    # and each runs between the two analytic turning points re -+ ... of V(r) = E: (1 -+ sqrt(E/De))
    r1 = MORSE.re - np.log(1 + np.sqrt(E / MORSE.De)) / MORSE.a
    r2 = MORSE.re - np.log(1 - np.sqrt(E / MORSE.De)) / MORSE.a
    assert np.allclose([s[0, 0] for s in segs], r1, atol=1e-8)
    assert np.allclose([s[1, 0] for s in segs], r2, atol=1e-8)


def test_potential_several_isotopologues_and_given_ax():
    fig, ax = plt.subplots()
    out = plots.potential(MORSE, {"1H35Cl": MU, "2H35Cl": 1.904413}, ax=ax)
    assert out is ax and len(ax.collections) == 2
    assert len(ax.collections[1].get_segments()) == len(wkbfit.levels(MORSE, 1.904413))


def test_potential_marks_quasibound_levels_when_the_table_has_them():
    table = wkbfit.levels(MORSE, MU, v=[0, 1, 2, 3])

    class WithQuasibound:  # a table that carries the column another part of wkbfit adds
        def __init__(self, t):
            self.__dict__.update({c: getattr(t, c) for c in t.columns})
            self.mu, self.method, self.potential, self.columns = t.mu, t.method, t.potential, t.columns
            self.quasibound = np.array([False, False, True, True])

        def __len__(self):
            return 4

    ax = plots.potential(MORSE, levels=table)
    assert len(ax.collections) == 1  # no quasibound column: every level solid
    ax = plots.potential(MORSE, levels=WithQuasibound(table))
    assert len(ax.collections) == 2
    assert ax.collections[1].get_linestyle()[0][1] is not None  # dashed
    assert np.allclose([s[0, 1] for s in ax.collections[1].get_segments()], table.energy[2:])
    assert np.allclose([s[0, 1] for s in ax.collections[0].get_segments()], table.energy[:2])


def test_residuals_against_v_and_energy(lj_fit):
    for against in ("v", "energy"):
        ax = plots.residuals(lj_fit, against=against)
        assert has_units(ax)
        xs = np.concatenate([line.get_xdata() for line in ax.lines if line.get_marker() not in (None, "None", "")])
        ys = np.concatenate([line.get_ydata() for line in ax.lines if line.get_marker() not in (None, "None", "")])
        x_ref = lj_fit.observed.v if against == "v" else lj_fit.observed.energy
        assert sorted(zip(xs, ys)) == sorted(zip(x_ref, lj_fit.normalized_residuals))
        assert len(ax.patches) == 3  # the 1, 2, 3 sigma bands
    with pytest.raises(ValueError, match="against"):
        plots.residuals(lj_fit, against="J")


def test_birge_sponer(lj_fit):
    ax = plots.birge_sponer(lj_fit, isotopologue="7Li133Cs")
    assert has_units(ax)
    pred = lj_fit.predict(isotopologue="7Li133Cs")
    (fitted,) = [line for line in ax.lines if line.get_label() == "fitted potential"]
    assert np.allclose(fitted.get_xdata(), pred.v[:-1] + 0.5)
    assert np.allclose(fitted.get_ydata(), np.diff(pred.energy), atol=1e-9)
    # the measured spacings: differences of consecutive measured levels
    obs = lj_fit.observed.select("7Li133Cs")
    points = [c for c in ax.containers if hasattr(c, "lines")][0].lines[0]
    assert np.allclose(points.get_ydata(), np.diff(obs.energy))
    ax = plots.birge_sponer(wkbfit.levels(MORSE, MU))
    # Morse: dG(v+1/2) = we - 2 wexe (v + 1) falls on a straight line (Morse 1929)
    y = ax.lines[0].get_ydata()
    x = ax.lines[0].get_xdata()
    assert np.allclose(y, morse_analytic(x + 0.5, MU) - morse_analytic(x - 0.5, MU), atol=1e-6)


def test_near_dissociation_straight_line_for_a_pure_inverse_power_tail(lj_fit):
    ax = plots.near_dissociation(lj_fit, isotopologue="7Li133Cs", last=6)
    assert has_units(ax)
    pred = lj_fit.predict(isotopologue="7Li133Cs")
    container = ax.containers[0]
    x, y = container.lines[0].get_data()
    alpha = (6 - 2) / 12
    assert np.allclose(x, pred.v[-6:]) and np.allclose(y, pred.binding_energy[-6:] ** alpha)
    # vD marked where it was predicted
    assert any(np.allclose(line.get_xdata(), pred.vD) for line in ax.lines)
    # and the quantum threshold number v_th of the prediction, which agrees with the matched rule's number at
    # the asymptote of the same potential (an independent route: the exact phase through the outer region)
    (vth,) = [line for line in ax.lines if line.get_label().startswith("v_th = ")]
    assert np.allclose(vth.get_xdata(), pred.v_th)
    matched = wkbfit.levels(lj_fit.potential, lj_fit.masses["7Li133Cs"])
    assert abs(pred.v_th - matched.v_th) < max(pred.v_th_uncertainty, 2e-3)
    # a Morse potential with exponent 1/2: sqrt(D - E) = sqrt(De) - (we/(2 sqrt(De))) (v + 1/2), linear in v
    ax = plots.near_dissociation(_morse_prediction(), n=None)
    x, y = ax.containers[0].lines[0].get_data()
    assert np.allclose(np.diff(y, 2), 0.0, atol=1e-7)


def _morse_prediction():
    rows = wkbfit.levels(MORSE, MU, v=list(range(8)))
    data = {"v": rows.v, "energy": rows.energy, "uncertainty": np.full(len(rows), 0.01)}
    return wkbfit.fit(MORSE, wkbfit.read_levels(data), mu=MU, vary=["De", "a"]).predict()


def test_wkb_vs_exact():
    lj = wkbfit.LennardJones(De=4000.0, re=4.0, n=12, m=6)
    ax = plots.wkb_vs_exact(lj, 20.0, uncertainty=0.01)
    assert has_units(ax) and ax.get_yscale() == "log"
    comp = wkbfit.compare_wkb_exact(lj, 20.0, order=1)
    (first,) = [line for line in ax.lines if line.get_label() == "|WKB - exact|, order 1"]
    assert np.allclose(first.get_ydata(), np.abs(comp.difference))
    (second,) = [line for line in ax.lines if line.get_label() == "|WKB - exact|, order 2, matched ends"]
    assert np.allclose(second.get_ydata(), np.maximum(np.abs(wkbfit.compare_wkb_exact(lj, 20.0).difference), 1e-14))
    assert any(line.get_label() == "data uncertainty" and np.allclose(line.get_ydata(), 0.01) for line in ax.lines)
    ax = comp.plot()
    assert len([line for line in ax.lines if line.get_label().startswith("|WKB")]) == 1


def test_correlation(lj_fit):
    ax = plots.correlation(lj_fit)
    assert has_units(ax)
    assert np.allclose(ax.images[0].get_array(), lj_fit.correlation)
    assert [t.get_text() for t in ax.get_xticklabels()] == lj_fit.var_names


def test_rkr_curve_against_model():
    # HCl-like Dunham constants (cm-1), a Morse G(v) and B(v) of MORSE at this mass
    we = MORSE.a * math.sqrt(4 * MORSE.De * HBAR2_OVER_2U / MU)
    tp = wkbfit.rkr_turning_points([we, -we * we / (4 * MORSE.De)], [HBAR2_OVER_2U / (MU * MORSE.re ** 2)], MU,
                                   v=[0, 1, 2, 3])
    ax = tp.plot(MORSE)
    assert has_units(ax)
    inner = [line for line in ax.lines if line.get_label() == "RKR inner turning points"][0]
    assert np.allclose(inner.get_xdata(), tp.inner_turning_point) and np.allclose(inner.get_ydata(), tp.energy)
    (model,) = [line for line in ax.lines if line.get_label() == "Morse"]
    assert np.allclose(model.get_ydata(), MORSE(model.get_xdata()))


def test_plot_methods(lj_fit):
    assert isinstance(lj_fit.plot(), matplotlib.axes.Axes)
    assert isinstance(lj_fit.predict(isotopologue="6Li133Cs").plot(), matplotlib.axes.Axes)
    assert isinstance(wkbfit.levels(MORSE, MU).plot(), matplotlib.axes.Axes)
    ax = MORSE.plot(MU)
    assert len(ax.collections[0].get_segments()) == len(wkbfit.levels(MORSE, MU))


def test_bad_input_is_named():
    with pytest.raises(TypeError, match="potential"):
        plots.potential("Morse")
    with pytest.raises(TypeError, match="FitResult or a Prediction"):
        plots.near_dissociation(MORSE)


def test_wkb_vs_exact_near_dissociation_covers_every_level():
    """With matched end phases the second-order curve covers every bound level up to dissociation,
    each within the matched rule's target of 1e-4 cm-1 of the exact level (the exact solver is the
    reference, with its own error estimate drawn beside)."""
    lj = wkbfit.LennardJones(De=4321.5, re=4.05, n=10, m=6)
    ax = plots.wkb_vs_exact(lj, 6.66420389)
    first = [line for line in ax.lines if line.get_label() == "|WKB - exact|, order 1"][0]
    second = [line for line in ax.lines if line.get_label() == "|WKB - exact|, order 2, matched ends"][0]
    assert len(second.get_xdata()) == len(first.get_xdata()) > 10
    assert np.max(second.get_ydata()) < 1e-4
    assert np.max(first.get_ydata()) > 1e-3  # the textbook rule is visibly worse near dissociation


# -- quasibound levels in the potential figure ------------------------------------------------------------------
def test_potential_draws_real_quasibound_levels_on_the_effective_curve():
    lj = wkbfit.LennardJones(De=1000.0, re=4.0, n=12, m=6)
    mu, J = 20.0, 30
    ax = plots.potential(lj, mu, J=J)
    assert has_units(ax)
    table = wkbfit.levels(lj, mu, J=J, quasibound=True)
    assert np.count_nonzero(table.quasibound) == 2  # this mass and J hold two shape resonances
    bound, quasi = ax.collections
    assert quasi.get_linestyle()[0][1] is not None  # dashed
    E_q = np.array([s[0, 1] for s in quasi.get_segments()])
    assert np.allclose(E_q, table.energy[table.quasibound], rtol=0, atol=1e-9)
    assert np.all(E_q > lj.asymptote)  # above the asymptote: held only by the barrier
    # every segment ends on the effective curve V + J(J+1) hbar^2/(2 mu r^2): its ends are turning points
    for coll in (bound, quasi):
        for seg in coll.get_segments():
            (r1, E), (r2, _) = seg
            for r in (r1, r2):
                VJ = float(lj(np.array([r]))[0]) + J * (J + 1) * HBAR2_OVER_2U / (mu * r * r)
                assert abs(VJ - E) < 1e-6 * lj.De
    (curve,) = [line for line in ax.lines if line.get_label().startswith("V_J(r), J = 30")]
    r, VJ = curve.get_data()
    assert np.allclose(VJ, lj(r) + J * (J + 1) * HBAR2_OVER_2U / (mu * r * r), rtol=1e-12)
    # J = 0: no barrier, no quasibound set; quasibound=False leaves them out at J > 0
    assert len(plots.potential(lj, mu).collections) == 1
    assert len(plots.potential(lj, mu, J=J, quasibound=False).collections) == 1


# -- bootstrap replicas ---------------------------------------------------------------------------------------
@pytest.fixture(scope="module")
def replica_result():
    """150 Monte-Carlo replicas of a Lennard-Jones fit to its own exact levels with seeded noise."""
    lj = wkbfit.LennardJones(De=4000.0, re=4.0, n=12, m=6)
    t = wkbfit.levels(lj, 20.0, v=list(range(12)), method="exact")
    rng = np.random.default_rng(3)
    obs = wkbfit.read_levels({"v": t.v, "J": t.J, "energy": t.energy + rng.normal(0, 0.01, len(t)),
                              "uncertainty": np.full(len(t), 0.01)})
    result = wkbfit.fit(wkbfit.LennardJones(De=3950.0, re=4.01, n=12, m=6), obs, 20.0)
    return result.bootstrap(150, seed=4, progress=False)


def _bars(ax):
    heights = np.array([p.get_height() for p in ax.patches])
    edges = np.array([p.get_x() for p in ax.patches] + [ax.patches[-1].get_x() + ax.patches[-1].get_width()])
    return heights, edges


def test_replicas_histograms_against_the_covariance_gaussian(replica_result):
    from scipy.stats import norm
    rep = replica_result
    axes = rep.plot()
    names = ["De", "re", "D0", "vD"]
    assert len(axes) == len(names)
    for ax, name in zip(axes, names):
        assert has_units(ax) and ax.get_xlabel().startswith(name)
        heights, edges = _bars(ax)
        # the bars are the replica values, binned (numpy.histogram of the same edges; the outer edges read back
        # from the bars' x + width can miss the extreme values, which the histogram spans, by a rounding unit)
        values = np.asarray(rep.values[name])
        edges[0], edges[-1] = min(edges[0], values.min()), max(edges[-1], values.max())
        assert np.array_equal(heights, np.histogram(values, bins=edges)[0])
        assert heights.sum() == rep.n_converged == 150
        (gauss,) = [line for line in ax.lines if line.get_label().startswith("covariance")]
        x, y = gauss.get_data()
        sd = rep.covariance_sd[name]
        # the Gaussian of the covariance matrix as expected counts per bin (scipy.stats.norm as reference)
        assert np.allclose(y, 150 * (edges[1] - edges[0]) * norm.pdf(x, rep.central[name], sd), rtol=1e-10)
        if name in rep.fit_result.var_names:
            k = rep.fit_result.var_names.index(name)
            assert sd == pytest.approx(math.sqrt(rep.fit_result.covariance[k, k]), rel=1e-12)
    # one name into one given Axes
    fig, ax = plt.subplots()
    assert rep.plot(ax, names=["vD"]) is ax
    with pytest.raises(ValueError, match="not followed"):
        plots.replicas(rep, names=["C6"])
    with pytest.raises(ValueError, match="2 Axes given, 4 needed"):
        plots.replicas(rep, ax=list(plt.subplots(1, 2)[1]), names=["De", "re"], corner=True)
    with pytest.raises(TypeError, match="ReplicaResult"):
        plots.replicas(rep.fit_result)


def test_replicas_corner_ellipses_are_the_covariance(replica_result):
    rep = replica_result
    names = ["De", "re", "D0", "vD"]
    axes = rep.plot(corner=True, names=names)
    assert axes.shape == (4, 4) and not axes[0, 1].get_visible()
    C = plots.linear_covariance(rep, names)
    # the parameter block is the fit's covariance; the diagonal the replica result's covariance sd
    assert np.allclose(C[:2, :2], rep.fit_result.covariance, rtol=1e-12)
    assert np.allclose(np.sqrt(np.diag(C)), [rep.covariance_sd[k] for k in names], rtol=1e-12)
    for i in range(4):
        for j in range(i):
            ax = axes[i, j]
            assert has_units(ax)
            (points,) = [line for line in ax.lines if line.get_label() == "replicas"]
            assert np.array_equal(points.get_xdata(), rep.values[names[j]])
            assert np.array_equal(points.get_ydata(), rep.values[names[i]])
            sub = C[np.ix_([j, i], [j, i])]
            inv = np.linalg.inv(sub)
            m = np.array([rep.central[names[j]], rep.central[names[i]]])
            for s in (1, 2):
                (ell,) = [line for line in ax.lines if line.get_label() == "covariance, %d sigma" % s]
                d = np.vstack(ell.get_data()) - m[:, None]
                assert np.allclose(np.einsum("in,ij,jn->n", d, inv, d), s * s, rtol=1e-6)
            # the linear covariance describes the replicas: correlations agree within 4 standard errors
            # (Fisher z, se = 1/sqrt(n - 3)); observed differences ~0.02 in z
            r_lin = sub[0, 1] / math.sqrt(sub[0, 0] * sub[1, 1])
            r_rep = np.corrcoef(rep.values[names[j]], rep.values[names[i]])[0, 1]
            assert abs(np.arctanh(min(r_rep, 1 - 1e-12)) - np.arctanh(min(r_lin, 1 - 1e-12))) < 4 / math.sqrt(147)


def test_potential_draws_the_rule_asked_for():
    lj = wkbfit.LennardJones(De=1000.0, re=4.0, n=12, m=6)
    for rule in ({"order": 1}, {"order": 2, "ends": "maslov"}, {}):
        ax = plots.potential(lj, 20.0, **rule)
        table = wkbfit.levels(lj, 20.0, **rule)
        E = np.array([s[0, 1] for s in ax.collections[0].get_segments()])
        assert np.array_equal(E, table.energy)
    # the first-order levels differ from the default ones near dissociation (by more than 1e-3 cm-1 at the top)
    first = np.array([s[0, 1] for s in plots.potential(lj, 20.0, order=1).collections[0].get_segments()])
    default = wkbfit.levels(lj, 20.0).energy
    n = min(len(first), len(default))
    assert np.max(np.abs(first[:n] - default[:n])) > 1e-3


def test_near_dissociation_fit_plot_draws_its_levels_and_laws():
    """The last 8 exact levels of a Lennard-Jones (12, 6) well: the levels as points, each law at the levels it
    was fitted to (observed minus its residuals), vD and v_th where the fit put them."""
    lj = wkbfit.LennardJones(De=4000.0, re=4.0, n=12, m=6)
    t = wkbfit.levels(lj, 20.0, method="exact")
    last = np.arange(len(t) - 8, len(t))
    nd = wkbfit.near_dissociation_fit(t.v[last], t.energy[last], np.full(8, 1e-4), 6, mu=20.0)
    ax = nd.plot()
    assert has_units(ax)
    alpha = (6 - 2) / 12
    x, y = ax.containers[0].lines[0].get_data()
    assert np.array_equal(x, t.v[last]) and np.allclose(y, (nd.D[0] - t.energy[last]) ** alpha, rtol=1e-12)
    for law in (nd.lb, nd.expansion):
        (line,) = [ln for ln in ax.lines if ln.get_label().startswith(law.law + " law")]
        calc = t.energy[last][law.rows] - law.residuals
        assert np.allclose(line.get_ydata(), (law.params["D"][0] - calc) ** alpha, rtol=1e-12)
    # the better law passes through the points within their error bars here (sqrt of reduced chi-square ~1)
    (expansion,) = [ln for ln in ax.lines if ln.get_label().startswith(nd.expansion.law)]
    assert nd.expansion.standard_error < 2
    assert any(np.allclose(ln.get_xdata(), nd.vD[0]) for ln in ax.lines)
    assert any(np.allclose(ln.get_xdata(), nd.v_th[0]) for ln in ax.lines if ln.get_label().startswith("v_th"))
    # and vD against the exact levels of the same well: first-order WKB's number at dissociation, which the
    # expansion estimates from the last levels to within 0.02 (observed 0.01; the LB range has few terms)
    assert abs(nd.vD[0] - wkbfit.levels(lj, 20.0, order=1).vD) < 0.02
