"""Warnings for levels that reach beyond a point-wise curve's points, and warnings that point at the
caller's own line."""
import math
import warnings

import numpy as np
import pytest

import wkbfit
from wkbfit.coverage import ExtrapolationWarning

MORSE = wkbfit.Morse(De=5000.0, re=2.0, a=1.5)
MU = 10.0


def morse_outer_turning_point(E, pot=MORSE):
    """Analytic outer turning point of the Morse curve [Morse, Phys. Rev. 34, 57 (1929)]: V(r) = E."""
    return pot.re - math.log(1 - math.sqrt(E / pot.De)) / pot.a


def test_wkb_levels_beyond_the_last_point_are_named_with_their_distance():
    r = np.linspace(1.4, 3.5, 60)
    curve = wkbfit.PointwisePotential(r, MORSE(r))
    with pytest.warns(ExtrapolationWarning) as record:
        table = wkbfit.levels(curve, MU)
    text = str(record[0].message)
    first = int(np.nonzero(table.outer_turning_point > 3.5)[0][0])
    v = int(table.v[first])
    d = table.outer_turning_point[first] - 3.5
    assert "v=%d: outer turning point" % v in text and "%.3g A beyond the last point" % d in text
    assert "v=%d:" % (v - 1) not in text  # the level below stays inside the points
    # the distance named is that of the true curve's turning point (analytic, to the spline's accuracy 1e-3 A)
    assert abs(table.outer_turning_point[first] - morse_outer_turning_point(table.energy[first])) < 1e-3
    assert record[0].filename == __file__  # the warning points at the line above, not into wkbfit


def test_exact_levels_with_probability_outside_the_points():
    r = np.linspace(1.4, 3.5, 60)
    curve = wkbfit.PointwisePotential(r, MORSE(r))
    with pytest.warns(ExtrapolationWarning, match="of its probability lies outside the points") as record:
        wkbfit.levels(curve, MU, v=list(range(0, 20)), method="exact")
    assert record[0].filename == __file__


def test_no_warning_when_every_level_stays_inside():
    r = np.linspace(1.4, 3.5, 60)
    curve = wkbfit.PointwisePotential(r, MORSE(r))
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        wkbfit.levels(curve, MU, v=list(range(10)))
        wkbfit.levels(curve, MU, v=list(range(10)), method="exact")


def test_rkr_curve_levels_beyond_its_points():
    """RKR points to v = 3 only: levels above v = 3 lie on the tail formula."""
    we, wexe = 2990.9, 52.8
    curve = wkbfit.rkr_potential([we, -wexe], [10.59, -0.307], "1H35Cl", v=np.linspace(-0.4, 3, 12),
                                 asymptote=we * we / (4 * wexe), tail_power=6)
    with pytest.warns(ExtrapolationWarning, match=r"v=5: inner turning point .* outer turning point"):
        wkbfit.levels(curve, "1H35Cl", v=[0, 1, 2, 5])


def test_fit_warning_points_at_the_callers_line():
    data = {"v": [0, 1, 2], "energy": [1000.0, 2900.0, 4700.0], "uncertainty": [0.1] * 3}
    with pytest.warns(wkbfit.fitting.FitWarning) as record:
        wkbfit.fit(wkbfit.Morse(De=40000.0, re=1.2, a=2.0), data, mu=1.0, vary=["De", "a", "re"])
    assert all(w.filename == __file__ for w in record)
