"""Bootstrap and Monte-Carlo replicas of fits (wkbfit.replicas) and the executors they run on.

Data are levels from the exact radial solver (method="exact") plus seeded Gaussian noise; the
fits are first-order WKB, which for a Morse well at J = 0 is exact (the WKB quantization
condition reproduces the Morse levels; checked here against the exact solver to 1e-8 cm-1), so
the true parameters are known exactly.
"""
import concurrent.futures
import math
import sys
import warnings

import numpy as np
import pytest

import wkbfit
from wkbfit import executors, replicas

MU = 6.66420389  # u, the 7Li133Cs reduced mass of the mass table (a number here: these data are invented)
TRUE = wkbfit.Morse(De=5875.0, re=3.67, a=0.6)


def exact_levels(pot, vs, J):
    return wkbfit.levels(pot, MU, v=vs, J=J, method="exact").energy


def morse_data(seed, sigma=0.01, Js=(0, 10), nv=25):
    vs, J, E = [], [], []
    for j in Js:
        vs += list(range(nv))
        J += [j] * nv
        E += exact_levels(TRUE, list(range(nv)), j).tolist()
    rng = np.random.default_rng(seed)
    return wkbfit.read_levels({"v": vs, "J": J, "energy": np.array(E) + rng.normal(0, sigma, len(E)),
                               "uncertainty": np.full(len(E), sigma)})


@pytest.fixture(scope="module")
def morse_fit():
    return wkbfit.fit(wkbfit.Morse(De=5800.0, re=3.66, a=0.605), morse_data(3), MU)


def test_morse_wkb_is_exact_at_J0():
    # the premise of the coverage test: WKB levels of a Morse well at J = 0 equal the exact ones
    vs = list(range(40))
    wkb = wkbfit.levels(TRUE, MU, v=vs).energy
    assert np.max(np.abs(wkb - exact_levels(TRUE, vs, 0))) < 1e-8


def test_bootstrap_sd_matches_covariance(morse_fit):
    # common practice: where the model is nearly linear in its parameters over the spread of the
    # replicas, replica standard deviations equal the covariance-matrix uncertainties; 800
    # replicas estimate a standard deviation to 1/sqrt(2*800) = 2.5 %, so 10 % is 4 sigma
    for kind in ("monte-carlo", "resample"):
        reps = morse_fit.bootstrap(800, seed=11, kind=kind, progress=False)
        assert reps.n_failed == 0 and reps.n_converged == 800
        for name in ("De", "re", "a"):
            ratio = reps.std[name] / morse_fit.params[name].uncertainty
            assert abs(ratio - 1) < 0.10, (kind, name, ratio)
        # and the predictions against their linear propagation
        for name in ("D0", "vD"):
            ratio = reps.std[name] / reps.covariance_sd[name]
            assert abs(ratio - 1) < 0.10, (kind, name, ratio)
        # the replicas scatter about the fitted values (mean within 4 standard errors of the mean)
        for name in ("De", "a"):
            assert abs(reps.mean[name] - morse_fit.params[name].value) < 4 * reps.std[name] / math.sqrt(800)


def test_percentile_intervals_cover_truth_at_nominal_rate():
    # seeded Monte-Carlo study: 120 data sets from the exact levels of a known Morse well (J = 0,
    # De and a varied, re held at its true value); each data set gets 150 Monte-Carlo replicas.
    # The 68.27 % and 95 % percentile intervals must contain the true De and a at their nominal
    # rates within 3 binomial standard deviations, sqrt(p (1 - p) / 120) (4.3 % and 2.0 %).
    vs = list(range(30))
    exact = exact_levels(TRUE, vs, 0)
    sigma, n_sets = 0.02, 120
    hits = {(name, p): 0 for name in ("De", "a") for p in replicas.INTERVALS}
    rng = np.random.default_rng(2024)
    for k in range(n_sets):
        obs = wkbfit.read_levels({"v": vs, "energy": exact + rng.normal(0, sigma, len(vs)),
                                  "uncertainty": np.full(len(vs), sigma)})
        # first-order WKB is exact for Morse (Morse 1929) up to exponentially small terms, so the
        # fast WKB fit is the right one here (18 000 refits)
        res = wkbfit.fit(TRUE, obs, MU, vary=["De", "a"], scale_uncertainties=False, method="wkb")
        reps = res.bootstrap(150, seed=k, progress=False)
        assert reps.n_failed == 0
        for name in ("De", "a"):
            for p in replicas.INTERVALS:
                lo, hi = reps.intervals[name][p]
                hits[(name, p)] += lo <= TRUE.params[name] <= hi
    for (name, p), h in hits.items():
        rate = h / n_sets
        assert abs(rate - p) < 3 * math.sqrt(p * (1 - p) / n_sets) + 1.0 / 150, (name, p, rate)


def test_same_seed_same_numbers_on_every_executor(morse_fit):
    a = morse_fit.bootstrap(60, seed=5, executor="serial", progress=False)
    b = morse_fit.bootstrap(60, seed=5, executor="threads", progress=False)
    c = morse_fit.bootstrap(60, seed=5, executor=3, progress=False)
    with concurrent.futures.ProcessPoolExecutor(2) as pool:  # any concurrent.futures executor
        p = morse_fit.bootstrap(60, seed=5, executor=pool, progress=False)
    for k in a.names:
        assert np.array_equal(a.values[k], b.values[k]) and np.array_equal(a.values[k], c.values[k])
        assert np.array_equal(a.values[k], p.values[k])
    assert a.samples.equals(b.samples)
    d = morse_fit.bootstrap(60, seed=6, executor="serial", progress=False)
    assert not np.array_equal(a.values["De"], d.values["De"])
    # replica i depends on (seed, i) only: the first 30 of 60 are the 30 of a 30-replica run
    e = morse_fit.bootstrap(30, seed=5, executor="serial", progress=False)
    assert np.array_equal(e.values["De"], a.values["De"][:30])


def test_dask_local_cluster_gives_the_same_numbers(morse_fit):
    distributed = pytest.importorskip("distributed", reason="dask.distributed is not installed (pip install "
                                      "'wkbfit[dask]'); the Dask executor cannot be tested")
    serial = morse_fit.bootstrap(40, seed=9, executor="serial", progress=False)
    candidates = [wkbfit.Morse(De=5800.0, re=3.66, a=0.605), wkbfit.LennardJones(De=5800.0, re=3.67)]
    obs = morse_data(3)
    scan_serial = wkbfit.scan_models(obs, candidates, MU, executor="serial")
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None) \
            as cluster, distributed.Client(cluster) as client:
        on_client = morse_fit.bootstrap(40, seed=9, executor=client, progress=False)
        on_address = morse_fit.bootstrap(40, seed=9, executor=cluster.scheduler_address, progress=False)
        scan_dask = wkbfit.scan_models(obs, candidates, MU, executor=client)
    for k in serial.names:
        assert np.array_equal(serial.values[k], on_client.values[k])
        assert np.array_equal(serial.values[k], on_address.values[k])
    assert [r["chi2"] for r in scan_serial.rows] == [r["chi2"] for r in scan_dask.rows]
    assert [r["candidate"] for r in scan_serial.rows] == [r["candidate"] for r in scan_dask.rows]


def test_dask_client_reused_for_several_runs(morse_fit):
    # one client, several runs: each run scatters its data under a key of its own and releases only
    # that, so a second bootstrap and a scan after it find their data (in-process workers: quick)
    distributed = pytest.importorskip("distributed", reason="dask.distributed is not installed (pip install "
                                      "'wkbfit[dask]'); the Dask executor cannot be tested")
    serial = morse_fit.bootstrap(12, seed=4, executor="serial", progress=False)
    candidates = [wkbfit.Morse(De=5800.0, re=3.66, a=0.605), wkbfit.LennardJones(De=5800.0, re=3.67)]
    obs = morse_data(3)
    scan_serial = wkbfit.scan_models(obs, candidates, MU, executor="serial")
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=False, dashboard_address=None) \
            as cluster, distributed.Client(cluster) as client:
        runs = [morse_fit.bootstrap(12, seed=4, executor=client, progress=False) for _ in range(2)]
        scan = wkbfit.scan_models(obs, candidates, MU, executor=client)
        third = morse_fit.bootstrap(12, seed=4, executor=client, progress=False)
        assert not client.who_has()  # nothing left behind on the workers
    for run in runs + [third]:
        assert run.n_failed == 0
        for k in serial.names:
            assert np.array_equal(serial.values[k], run.values[k])
    assert [r["chi2"] for r in scan_serial.rows] == [r["chi2"] for r in scan.rows]


def test_failed_replicas_are_counted_and_reported():
    # 25 J = 0 levels and a single J = 10 level: re rests on that one level, which a resample
    # leaves out with probability (1 - 1/26)^26 = 36 %; those replicas fail as undetermined
    vs = list(range(25)) + [3]
    Js = [0] * 25 + [10]
    E = np.concatenate([exact_levels(TRUE, list(range(25)), 0), exact_levels(TRUE, [3], 10)])
    rng = np.random.default_rng(1)
    obs = wkbfit.read_levels({"v": vs, "J": Js, "energy": E + rng.normal(0, 0.01, 26),
                              "uncertainty": np.full(26, 0.01)})
    res = wkbfit.fit(TRUE, obs, MU)
    reps = res.bootstrap(200, seed=3, kind="resample", progress=False)
    assert reps.n_failed + reps.n_converged == 200
    assert 40 < reps.n_failed < 110  # binomial(200, 0.36): mean 72, sd 7
    assert all("undetermined" in reason and "re" in reason for _, reason in reps.failures)
    assert len(reps.samples) == reps.n_converged
    assert set(reps.samples["replica"]).isdisjoint(i for i, _ in reps.failures)
    text = reps.to_text()
    assert "%d failed" % reps.n_failed in text and "failed replicas" in text
    assert "failed" in reps._repr_html_()


def test_renderings_and_tables(morse_fit):
    reps = morse_fit.bootstrap(50, seed=2, progress=False)
    text = str(reps)
    for fragment in ("monte-carlo", "covariance sd", "replica sd", "68.27% interval", "95% interval", "cm-1",
                     "D0", "vD", "n_bound", "Eb(v="):
        assert fragment in text
    assert repr(reps).startswith("<ReplicaResult monte-carlo: 50 replicas (0 failed)")
    df = reps.to_dataframe()
    assert list(df["quantity"])[:3] == ["De", "re", "a"]
    assert df.set_index("quantity").loc["De", "covariance_sd"] == morse_fit.params["De"].uncertainty
    assert "<table>" in reps._repr_html_()
    # the top levels followed are the last bound levels of the fit
    pred = morse_fit.predict()
    top = [k for k in reps.names if k.startswith("Eb(")]
    assert top == ["Eb(v=%d)" % v for v in range(pred.n_bound - 3, pred.n_bound)]
    assert reps.central[top[-1]] == pytest.approx(pred.binding_energy[-1], abs=1e-9)
    assert reps.central["D0"] == pytest.approx(pred.D0, abs=1e-9)


def test_progress_bar_shown_and_switched_off(morse_fit, capsys):
    pytest.importorskip("tqdm")
    morse_fit.bootstrap(8, seed=1, executor="serial", progress=True)
    assert "replicas" in capsys.readouterr().err
    morse_fit.bootstrap(8, seed=1, executor="serial", progress=False)
    assert capsys.readouterr().err == ""


def test_bad_input(morse_fit):
    for kwargs, fragment in (({"n": 1}, "n=1"), ({"n": 2.5}, "n=2.5"), ({"seed": -1}, "seed=-1"),
                             ({"kind": "jackknife"}, "kind='jackknife'"), ({"executor": "fast"}, "'fast'"),
                             ({"executor": 0}, "executor=0"), ({"isotopologue": "X"}, "isotopologue='X'"),
                             ({"progress": "yes"}, "progress='yes'")):
        with pytest.raises(ValueError, match=fragment.replace("(", r"\(").replace(".", r"\.")):
            morse_fit.bootstrap(**{"n": 10, **kwargs})
    with pytest.raises(ValueError, match="FitResult"):
        replicas.bootstrap("not a fit")


def test_missing_dask_names_the_extra(morse_fit, monkeypatch):
    monkeypatch.setitem(sys.modules, "distributed", None)
    with pytest.raises(ImportError, match=r"wkbfit\[dask\]"):
        morse_fit.bootstrap(4, executor="tcp://127.0.0.1:1", progress=False)


def test_refits_use_the_fit_settings(morse_fit):
    # the replicas refit through wkbfit.fit with the result's own settings
    res = wkbfit.fit(TRUE, morse_data(4), MU, vary=["De", "a"], bounds={"a": (0.5, 0.7)},
                     scale_uncertainties=False, max_iterations=50)
    s = replicas.fit_settings(res)
    assert s == {"method": "corrected", "vary": ["De", "a"], "bounds": {"a": (0.5, 0.7)}, "scale_uncertainties": False,
                 "max_iterations": 50}
    reps = res.bootstrap(20, seed=1, progress=False)
    assert set(reps.std) >= {"De", "a"} and "re" not in reps.std
    assert reps.noise_scale == 1.0  # unscaled covariance: the stated uncertainties as they are


def test_executor_chunks_keep_order():
    out = executors.run_chunks(lambda shared, x: (shared, x * x), "s", range(37), executor=2)
    assert out == [("s", x * x) for x in range(37)]
    assert executors.run_chunks(lambda s, x: x, None, [], executor="serial") == []


def test_unconverged_fit_is_not_bootstrapped():
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        res = wkbfit.fit(wkbfit.Morse(De=5000.0, re=3.5, a=0.7), morse_data(3), MU, max_iterations=1)
    assert res.status != "converged"
    with pytest.raises(ValueError, match="did not converge"):
        res.bootstrap(10)


def test_replicas_refuse_fits_with_free_parameters():
    # binding energies below a fitted asymptote: a free parameter besides the potential's, which
    # replicas do not cover yet; the refusal says so (no numerical check here)
    v = list(range(10, 20))
    E = exact_levels(TRUE, v, 0)
    obs = wkbfit.read_levels({"v": v, "energy": TRUE.De - E, "uncertainty": np.full(len(v), 0.01)},
                             energy_zero="asymptote", fit_asymptote=True)
    res = wkbfit.fit(TRUE, obs, MU, vary=["De", "a"], method="wkb")
    with pytest.raises(ValueError, match="replicas do not cover"):
        res.bootstrap(4, progress=False)


# --- linearised replicas (replicas_linear.py) against full refits --------------------------------
# Reference: the full path (refit="full"), every replica refitted by wkbfit.fit with exact
# corrections, which in turn reproduces method="exact" fits (tests/test_default_fit.py). Data are
# exact-solver levels plus seeded noise. Tolerances: 1e-2 standard deviation per replica and
# parameter (the default check tolerance), replica standard deviations within 1 %.

def _exact_data(true, mu, Js, nv, seed=5, sigma=0.01):
    """Exact-solver levels v = 0..nv-1 at each J of Js, plus seeded Gaussian noise of sigma."""
    vs, J, E = [], [], []
    for j in Js:
        vs += list(range(nv))
        J += [j] * nv
        E += wkbfit.levels(true, mu, v=list(range(nv)), J=j, method="exact").energy.tolist()
    rng = np.random.default_rng(seed)
    return wkbfit.read_levels({"v": vs, "J": J, "energy": np.array(E) + rng.normal(0, sigma, len(E)),
                               "uncertainty": np.full(len(E), sigma)})


def _light_lj_fit():
    # a light molecule (mu = 1 u): first-order WKB levels are off by far more than sigma, and the
    # corrections change with the parameters enough that freezing them moves replicas by ~1e-2 sd
    obs = _exact_data(wkbfit.LennardJones(De=3000.0, re=3.0), 1.0, (0, 3, 6), 8)
    return wkbfit.fit(wkbfit.LennardJones(De=2990.0, re=3.02), obs, 1.0)


def _mlr_fit():
    # an MLR well, three varied parameters, J = 0, 10, 20: the corrections' slopes move the replicas
    # by ~0.07 sd, which the linearisation must carry
    obs = _exact_data(wkbfit.MLR(De=3000.0, re=3.0, C6=2e5, betas=[0.3, 0.1, 0.05]), 30.0, (0, 10, 20), 15)
    return wkbfit.fit(wkbfit.MLR(De=2990.0, re=3.0, C6=2e5, betas=[0.31, 0.1, 0.05]), obs, 30.0,
                      vary=["De", "re", "beta0"])


@pytest.mark.parametrize("case", ["morse", "light_lj", "mlr"])
def test_linearised_replicas_match_full_refits(case, morse_fit):
    res = {"morse": lambda: morse_fit, "light_lj": _light_lj_fit, "mlr": _mlr_fit}[case]()
    for kind, n in (("monte-carlo", 40), ("resample", 25)):
        fast = res.bootstrap(n, seed=7, kind=kind, executor="serial", progress=False)
        full = res.bootstrap(n, seed=7, kind=kind, executor="serial", progress=False, refit="full")
        assert fast.refit == "linearised" and full.refit == "full"
        assert fast.method_check["passed"] and len(fast.method_check["checked"]) == 3
        assert list(fast.replica_index) == list(full.replica_index) and fast.n_failed == full.n_failed == 0
        for name in res.var_names:
            sd = res.params[name].uncertainty
            assert np.max(np.abs(fast.values[name] - full.values[name])) < 1e-2 * sd, (case, kind, name)
            assert fast.std[name] == pytest.approx(full.std[name], rel=0.01), (case, kind, name)
        for name in ["D0"] + [k for k in fast.names if k.startswith("Eb(")]:
            assert np.max(np.abs(fast.values[name] - full.values[name])) < 1e-2 * fast.covariance_sd[name], name
        assert np.array_equal(fast.values["n_bound"], full.values["n_bound"])
        assert np.max(np.abs(fast.values["vD"] - full.values["vD"])) < 1e-2 * fast.covariance_sd["vD"]
        # the run-time check measured the method's error; it is below its tolerance here
        assert fast.method_check["parameter_error_sd"] < 1e-2
        assert fast.method_check["prediction_error_sd"] < 1e-2
        assert "linearised" in fast.to_text() and "exact check" in fast.to_text()


def test_correction_slopes_matter_where_wkb_is_poor():
    # the MLR case: frozen corrections (D = 0) would move the checked replicas by more than the
    # linearised method's error; the check reports both (measured here: ~7e-2 sd against ~3e-3 sd)
    reps = _mlr_fit().bootstrap(40, seed=7, executor="serial", progress=False)
    check = reps.method_check
    assert check["slope_effect_sd"] > 1e-2 > check["parameter_error_sd"]
    assert all(c["distance_sd"] >= 0 and c["n_bound_fast"] == c["n_bound_exact"] for c in check["checked"])


def test_failed_check_falls_back_to_full_refits(morse_fit):
    # a check tolerance no method meets: every replica is refitted the full way, and the result says why
    fell = morse_fit.bootstrap(12, seed=3, executor="serial", progress=False, check_tolerance=1e-12)
    full = morse_fit.bootstrap(12, seed=3, executor="serial", progress=False, refit="full")
    assert fell.refit == "full" and not fell.method_check["passed"]
    assert any("refitted the full way" in note for note in fell.method_check["notes"])
    for k in full.names:
        assert np.array_equal(fell.values[k], full.values[k])
    assert "refitted the full way" in fell.to_text()


def test_refit_choice_bad_input(morse_fit):
    with pytest.raises(ValueError, match="refit='fast'"):
        morse_fit.bootstrap(4, refit="fast")
    for bad in (0, -1.0, float("nan"), True, "1e-2"):
        with pytest.raises(ValueError, match="check_tolerance"):
            morse_fit.bootstrap(4, check_tolerance=bad)
    exact = wkbfit.fit(TRUE, morse_data(4, Js=(0,), nv=12), MU, vary=["De", "a"], method="exact")
    with pytest.raises(ValueError, match="refit='linearised' is not available"):
        exact.bootstrap(4, refit="linearised")
    reps = exact.bootstrap(4, seed=1, executor="serial", progress=False)  # the default falls back quietly
    assert reps.refit == "full" and reps.n_converged == 4


def test_core_replica_fits_refuse_bad_arrays(morse_fit):
    from wkbfit import _core
    model, p0, curve = morse_fit.potential._core_args()
    obs = morse_fit.observed
    rot = (obs.J * (obs.J + 1)).astype(float)
    mu = np.full(len(obs), MU)
    base = dict(model=model, params=p0, curve=curve, v=obs.v, rot=rot, mu=mu, sigma=obs.uncertainty, energy_zero=0,
                vary=np.ones(3, dtype=np.intc), lower=np.full(3, -np.inf), upper=np.full(3, np.inf))
    with pytest.raises(ValueError, match="energies must have shape"):
        _core.fit_replicas(energies=np.zeros((3, len(obs) - 1)), **base)
    with pytest.raises(ValueError, match="counts must have shape"):
        _core.fit_replicas(energies=np.zeros((3, len(obs))), counts=np.ones((2, len(obs))), **base)
    with pytest.raises(ValueError, match="sorted"):
        _core.fit_replicas(energies=np.tile(obs.energy, (2, 1)), shift_mu=[MU, MU], shift_rot=[0.0, 0.0],
                           shift_v=[1, 0], shift=[0.0, 0.0], **base)
    with pytest.raises(ValueError, match="not finite"):
        _core.fit_replicas(energies=np.tile(obs.energy, (2, 1)), shift_mu=[MU], shift_rot=[0.0], shift_v=[0],
                           shift=[np.nan], **base)
    # a replica whose energies cannot be fitted fails alone; the others are fitted
    E = np.tile(obs.energy, (2, 1))
    E[1, 0] = np.nan
    out = _core.fit_replicas(energies=E, **base)
    assert out["status"][0] == 0 and out["status"][1] > 0 and out["message"][1]


@pytest.mark.parametrize("zero, n_iso", [("asymptote", 1), ("lowest", 1), ("minimum", 2)])
def test_linearised_replicas_every_energy_zero(zero, n_iso):
    # the linearised path corrects levels, then forms the data's rows (binding energies, differences
    # from v=0, J=0, several reduced masses): the same replicas as full refits within 1e-2 sd
    mus = (MU, 1.2 * MU)[:n_iso]
    rows = {"v": [], "J": [], "energy": [], "isotopologue": []}
    for k, mu in enumerate(mus):
        E00 = wkbfit.levels(TRUE, mu, v=[0], method="exact").energy[0]
        for J in (0, 10):
            E = wkbfit.levels(TRUE, mu, v=list(range(20)), J=J, method="exact").energy
            rows["energy"] += list({"minimum": E, "asymptote": TRUE.De - E, "lowest": E - E00}[zero])
            rows["v"] += list(range(20))
            rows["J"] += [J] * 20
            rows["isotopologue"] += ["X%d" % k] * 20
    n = len(rows["v"])
    rows["energy"] = np.array(rows["energy"]) + np.random.default_rng(3).normal(0, 0.01, n)
    rows["uncertainty"] = np.full(n, 0.01)
    if zero == "lowest":
        rows["energy"][0] = 0.0
    res = wkbfit.fit(wkbfit.Morse(De=5800.0, re=3.66, a=0.605), wkbfit.read_levels(rows, energy_zero=zero),
                     {"X%d" % k: mu for k, mu in enumerate(mus)})
    for kind in ("monte-carlo", "resample"):
        fast = res.bootstrap(20, seed=2, kind=kind, executor="serial", progress=False)
        full = res.bootstrap(20, seed=2, kind=kind, executor="serial", progress=False, refit="full")
        assert fast.refit == "linearised" and fast.n_failed == full.n_failed == 0
        for name in res.var_names:
            assert np.max(np.abs(fast.values[name] - full.values[name])) < 1e-2 * res.params[name].uncertainty
        for name in ["D0"] + [k for k in fast.names if k.startswith("Eb(")]:
            assert np.max(np.abs(fast.values[name] - full.values[name])) < 1e-2 * fast.covariance_sd[name]
        assert np.array_equal(fast.values["n_bound"], full.values["n_bound"])


def test_linearised_replicas_of_a_first_order_fit():
    # method "wkb": no corrections; the core refits the same first-order problem as wkbfit.fit does
    # (both converge to the Levenberg-Marquardt tolerance: agreement far inside 1e-6 sd)
    res = wkbfit.fit(wkbfit.Morse(De=5800.0, re=3.66, a=0.605), morse_data(3), MU, method="wkb")
    fast = res.bootstrap(30, seed=4, kind="resample", executor="serial", progress=False)
    full = res.bootstrap(30, seed=4, kind="resample", executor="serial", progress=False, refit="full")
    assert fast.refit == "linearised" and not fast.method_check["checked"]
    for name in res.var_names:
        assert np.max(np.abs(fast.values[name] - full.values[name])) < 1e-6 * res.params[name].uncertainty
    for name in fast.names:
        atol = 1e-9 * (1 + abs(fast.mean[name]))
        assert np.allclose(fast.values[name], full.values[name], rtol=1e-9, atol=atol), name


def test_check_catches_a_level_at_threshold():
    # a light Lennard-Jones well whose last level is bound by ~1e-8 cm-1 (De = 3049 cm-1, mu = 1 u; the
    # level appears at De ~ 3048.94, found with the exact solver): replicas differ in whether it is
    # bound, which the linearised corrections of that level cannot decide reliably. The exact check
    # finds a replica whose count differs from the exact one and every replica is refitted the full
    # way: the result is that of refit="full", and says why.
    obs = _exact_data(wkbfit.LennardJones(De=3049.0, re=3.0), 1.0, (0, 3), 7)
    res = wkbfit.fit(wkbfit.LennardJones(De=3040.0, re=3.01), obs, 1.0)
    reps = res.bootstrap(200, seed=1, executor="serial", progress=False)
    full = res.bootstrap(200, seed=1, executor="serial", progress=False, refit="full")
    assert len(np.unique(full.values["n_bound"])) == 2  # the premise: the count changes between replicas
    assert reps.refit == "full" and not reps.method_check["passed"]
    assert reps.method_check["n_bound_mismatch"] >= 1
    for k in full.names:
        assert np.array_equal(reps.values[k], full.values[k], equal_nan=True)


def test_fits_the_linearised_path_does_not_cover():
    # Omega > 0: the rows' centrifugal term is J(J+1) - Omega^2, which the linearised path does not
    # model: it refuses such fits (bootstrap then refits in full, predicting at J = Omega:
    # test_bootstrap_of_a_state_with_omega_predicts_at_J_equal_omega)
    from wkbfit import replicas_linear
    vs = list(range(12)) * 2
    Js = [1] * 12 + [5] * 12
    rng = np.random.default_rng(2)
    E = np.concatenate([wkbfit.levels(TRUE, MU, v=list(range(12)), J=J).energy for J in (1, 5)])
    obs = wkbfit.read_levels({"v": vs, "J": Js, "energy": E + rng.normal(0, 0.01, 24),
                              "uncertainty": np.full(24, 0.01)})
    res = wkbfit.fit(wkbfit.Morse(De=5800.0, re=3.66, a=0.605), obs, MU, method="wkb", omega=1)
    assert "Omega" in replicas_linear.eligible(res)
    assert "method 'exact'" in replicas_linear.eligible(
        wkbfit.fit(TRUE, morse_data(4, Js=(0,), nv=8), MU, vary=["De", "a"], method="exact"))


def _fit_of(true, start, mu, Js, nv):
    return wkbfit.fit(start, _exact_data(true, mu, Js, nv), mu)


@pytest.mark.parametrize("true, start, mu, nv", [
    (wkbfit.EMO(De=3000.0, re=3.0, betas=[1.0, 0.1]), wkbfit.EMO(De=2990.0, re=3.01, betas=[1.01, 0.1]), 10.0, 15),
    (wkbfit.PoschlTeller(De=3000.0, re=3.0, a=1.2), wkbfit.PoschlTeller(De=2990.0, re=3.01, a=1.19), 5.0, 12)],
    ids=["EMO", "PoschlTeller"])
def test_linearised_replicas_other_models(true, start, mu, nv):
    # the remaining models with parameters (the point-wise curve has none): linearised against full
    # refits within 1e-2 sd (measured ~1e-4 sd), the same counts of bound levels
    res = _fit_of(true, start, mu, (0, 10), nv)
    fast = res.bootstrap(20, seed=7, executor="serial", progress=False)
    full = res.bootstrap(20, seed=7, executor="serial", progress=False, refit="full")
    assert fast.refit == "linearised" and fast.n_failed == full.n_failed == 0
    for name in res.var_names:
        assert np.max(np.abs(fast.values[name] - full.values[name])) < 1e-2 * res.params[name].uncertainty, name
    for name in ["D0"] + [k for k in fast.names if k.startswith("Eb(")]:
        assert np.max(np.abs(fast.values[name] - full.values[name])) < 1e-2 * fast.covariance_sd[name], name
    assert np.array_equal(fast.values["n_bound"], full.values["n_bound"])


def test_linearised_resample_same_numbers_on_threads_and_chunks(morse_fit):
    # row counts built per replica from (seed, i): the chunking of the core calls changes nothing
    a = morse_fit.bootstrap(45, seed=8, kind="resample", executor="serial", progress=False)
    b = morse_fit.bootstrap(45, seed=8, kind="resample", executor=3, progress=False)
    assert a.refit == b.refit == "linearised"
    for k in a.names:
        assert np.array_equal(a.values[k], b.values[k], equal_nan=True)
    assert a.method_check["checked"] == b.method_check["checked"]


def test_bootstrap_of_a_state_with_omega_predicts_at_J_equal_omega():
    # Omega = 6: J(J+1) - Omega^2 of J = 6, 7 equals J(J+1) of J = 2, 4 (arithmetic identity), so the
    # data are the exact levels at J = 2, 4 filed as J = 6, 7, and the predictions (at the state's lowest
    # J, Omega) are the exact J = 2 levels of the fitted potential
    vs = list(range(12))
    E = {j: exact_levels(TRUE, vs, j) for j in (2, 4)}
    rng = np.random.default_rng(5)
    obs = wkbfit.read_levels({"v": vs * 2, "J": [6] * 12 + [7] * 12,
                              "energy": np.concatenate([E[2], E[4]]) + rng.normal(0, 0.01, 24),
                              "uncertainty": np.full(24, 0.01)})
    res = wkbfit.fit(wkbfit.Morse(De=5800.0, re=3.66, a=0.605), obs, MU, omega=6)
    reps = res.bootstrap(20, seed=2, executor="serial", progress=False)
    assert reps.n_failed == 0 and reps.prediction_J == 6
    E2 = wkbfit.levels(res.potential, MU, v=[0], J=2, method="exact").energy[0]
    assert abs(reps.central["D0"] - (res.potential.asymptote - E2)) < 1e-4
    assert np.all(np.isfinite(reps.values["D0"])) and "at J = 6" in str(reps)
