"""Model scans (wkbfit.scan_models): information criteria, ranking and the spread of predictions.

Data: levels of a known MLR potential (3 exponent coefficients) from the exact radial solver
plus seeded Gaussian noise; the candidates are fitted with method="exact" too, so that the only
difference between the true model and a candidate is the model form (first-order WKB levels of
this well differ from the exact ones by up to 0.5 cm-1, which would itself call for extra
coefficients).
"""
import math

import numpy as np
import pytest
from scipy.stats import norm

import wkbfit
from wkbfit import model_scan

MU = 30.0
TRUE = wkbfit.MLR(De=3000.0, re=3.0, C6=2e5, betas=[0.3, 0.1, 0.05])
SIGMA = 0.01
#: documented tolerance of the model-size test: the best model's number of exponent
#: coefficients is the true one or one more or fewer
SIZE_TOLERANCE = 1


@pytest.fixture(scope="module")
def mlr_data():
    table = wkbfit.levels(TRUE, MU, method="exact")
    n = len(table) - 2  # the two levels nearest dissociation are left out (as often unobserved)
    rng = np.random.default_rng(5)
    return wkbfit.read_levels({"v": table.v[:n], "energy": table.energy[:n] + rng.normal(0, SIGMA, n),
                               "uncertainty": np.full(n, SIGMA)})


def candidates(sizes):
    # re held at its true value: J = 0 levels barely determine it (common practice with J = 0 data)
    return [(wkbfit.MLR(De=2950.0, re=3.0, C6=2e5, betas=[0.3] + [0.0] * (k - 1), r_ref=3.0),
             {"vary": {"re": False}}) for k in sizes]


@pytest.fixture(scope="module")
def scan(mlr_data):
    return wkbfit.scan_models(mlr_data, candidates(range(1, 6)), MU, method="exact")


def test_scan_picks_the_true_model_size(scan):
    best = scan.rows[0]
    n_betas = len(scan.best.potential.betas)
    assert best["candidate"].startswith("MLR(N=%d," % n_betas)
    assert abs(n_betas - len(TRUE.betas)) <= SIZE_TOLERANCE
    # the too-small models are rejected outright, the true size is acceptable
    by_size = {int(r["candidate"][6]): r for r in scan.rows}
    assert not by_size[1]["acceptable"] and not by_size[2]["acceptable"]
    assert by_size[3]["acceptable"]
    assert scan.n_failed == 0


def test_information_criteria_against_their_formulas(scan, mlr_data):
    # AIC = -2 ln L + 2k (Akaike 1974), BIC = -2 ln L + k ln N (Schwarz 1978), with the Gaussian
    # log-likelihood of the residuals computed here independently (scipy.stats.norm); the
    # scan leaves out the constant sum of ln(sqrt(2 pi) sigma_i), the same for every candidate
    N = len(mlr_data)
    const = -2 * np.sum(norm.logpdf(0.0, scale=mlr_data.uncertainty))
    for r in scan.rows:
        res = scan.results[r["index"]]
        minus2lnL = -2 * np.sum(norm.logpdf(res.residuals, scale=mlr_data.uncertainty))
        k = len(res.var_names)
        assert r["k"] == k == len(res.potential.betas) + 1  # De and the betas
        assert r["N"] == N
        assert r["aic"] + const == pytest.approx(minus2lnL + 2 * k, rel=1e-12)
        assert r["bic"] + const == pytest.approx(minus2lnL + k * math.log(N), rel=1e-12)
        assert r["sigma"] == pytest.approx(math.sqrt(res.chi_square / (N - k)), rel=1e-12)
    assert model_scan.information_criteria(10.0, 20, 3) == (16.0, 10.0 + 3 * math.log(20))


def test_ranking_acceptance_and_spread(scan):
    bics = [r["bic"] for r in scan.rows]
    assert bics == sorted(bics)
    assert scan.rows[0]["delta"] == 0
    for r in scan.rows:
        assert r["acceptable"] == (r["bic"] - bics[0] <= 10.0)
    good = [r for r in scan.rows if r["acceptable"]]
    d0 = np.array([r["D0"] for r in good])
    assert scan.spread["D0"]["n_models"] == len(good) >= 2
    assert scan.spread["D0"]["mean"] == pytest.approx(d0.mean(), rel=1e-14)
    assert scan.spread["D0"]["sd"] == pytest.approx(d0.std(ddof=1), rel=1e-12)
    assert scan.spread["D0"]["min"] == d0.min() and scan.spread["D0"]["max"] == d0.max()
    # each model's D0 is that of its own FitResult's predictions
    for r in scan.rows:
        assert r["D0"] == pytest.approx(scan.results[r["index"]].predict().D0, abs=1e-9)
    # the model spread of D0 over acceptable models is a fraction of a cm-1 here, near the truth
    true_D0 = TRUE.asymptote - wkbfit.levels(TRUE, MU, v=[0], method="exact").energy[0]
    assert abs(scan.spread["D0"]["mean"] - true_D0) < 0.2


def test_aic_ranking(mlr_data):
    s = wkbfit.scan_models(mlr_data, candidates([2, 3]), MU, method="exact", rank_by="aic", executor="serial")
    aics = [r["aic"] for r in s.rows]
    assert aics == sorted(aics) and s.rank_by == "aic"


def test_renderings(scan):
    text = str(scan)
    for fragment in ("ranked by BIC", "AIC = chi2 + 2k (Akaike 1974)", "BIC = chi2 + k ln N (Schwarz 1978)",
                     "D0 [cm-1]", "spread over the", "sigma"):
        assert fragment in text
    assert repr(scan).startswith("<ModelScan: 5 candidates")
    df = scan.to_dataframe()
    assert list(df["candidate"]) == [r["candidate"] for r in scan.rows]
    assert {"chi2", "aic", "bic", "delta", "acceptable", "D0", "vD", "n_bound"} <= set(df.columns)
    assert "<table>" in scan._repr_html_()


def test_failed_candidates_are_reported(mlr_data):
    # a Lennard-Jones candidate with the wrong asymptote cannot bind the data's highest levels
    bad = wkbfit.LennardJones(De=500.0, re=3.0)
    s = wkbfit.scan_models(mlr_data, [bad] + candidates([3]), MU, executor="serial")
    # since fits continue from starts that do not bind every level, such a candidate may converge
    # to a poor fit instead of failing; either way it must rank last and not be acceptable
    assert s.rows[-1]["index"] == 0 and not s.rows[-1]["acceptable"]
    assert s.rows[0]["index"] == 1
    if s.n_failed:
        assert s.failures[0][0] == 0 and "fit failed" in s.failures[0][1] and "fit failed" in str(s)
    # a candidate that cannot compute the data at all is a counted failure, never dropped
    hopeless = wkbfit.Morse(De=1.0, re=3.0, a=1.0)
    s = wkbfit.scan_models(mlr_data, [hopeless] + candidates([3]), MU, executor="serial")
    assert s.n_failed == 1 and s.failures[0][0] == 0 and "fit failed" in str(s)


def test_bad_input(mlr_data):
    with pytest.raises(ValueError, match="empty"):
        wkbfit.scan_models(mlr_data, [], MU)
    with pytest.raises(ValueError, match=r"candidates\[1\]"):
        wkbfit.scan_models(mlr_data, [TRUE, "MLR"], MU)
    with pytest.raises(ValueError, match="rank_by='r2'"):
        wkbfit.scan_models(mlr_data, [TRUE], MU, rank_by="r2")
    with pytest.raises(ValueError, match="acceptable_delta"):
        wkbfit.scan_models(mlr_data, [TRUE], MU, acceptable_delta=-1)
    with pytest.raises(ValueError, match="isotopologue"):
        wkbfit.scan_models(mlr_data, [TRUE], MU, isotopologue="7Li133Cs")


def test_mlr_candidate_grid():
    start = wkbfit.MLR(De=2950.0, re=3.0, C6=2e5, C8=1e6, betas=[0.3, 0.1], r_ref=3.1)
    grid = model_scan.mlr_candidates(start, n_betas=[1, 2, 4], p=(5, 6), r_ref=(3.0, 3.2))
    assert len(grid) == 3 * 2 * 2
    assert [len(c.betas) for c in grid[::4]] == [1, 2, 4]
    assert grid[0].betas == (0.3,) and grid[-1].betas == (0.3, 0.1, 0.0, 0.0)
    assert {(c.params["p"], c.params["r_ref"]) for c in grid} == {(5, 3.0), (5, 3.2), (6, 3.0), (6, 3.2)}
    assert all(c.params["C8"] == 1e6 and c.params["q"] == 3 for c in grid)
    with pytest.raises(ValueError, match="n_betas"):
        model_scan.mlr_candidates(start, n_betas=[9])
    with pytest.raises(ValueError, match="MLR"):
        model_scan.mlr_candidates(wkbfit.Morse(De=1.0, re=1.0, a=1.0))
