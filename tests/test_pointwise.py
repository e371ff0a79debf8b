"""Tests of wkbfit.PointwisePotential: spline inside the data, exponential wall and
inverse-power tail outside, C2 joins, input validation, and WKB levels of sampled curves.

References used as check values:
- Morse, Phys. Rev. 34, 57 (1929): V = De (1 - exp(-a (r - re)))^2 and its exact levels
  G(v) = we (v + 1/2) - wexe (v + 1/2)^2 (physics.md section 6), evaluated here from the formula.
- Lennard-Jones (12, 6) evaluated from its formula (wkbfit.LennardJones, analytic in C).
- Buckingham "exp-6" form V = D + A exp(-b r) - C6/r^6 (Buckingham, Proc. R. Soc. A 168, 264
  (1938), from memory): far out it is a pure -C6/r^6 tail to machine precision.
- SciPy's CubicSpline with not-a-knot end conditions, for the spline itself.
"""
import numpy as np
import pytest
from scipy.interpolate import CubicSpline
from scipy.optimize import minimize_scalar

import wkbfit

# Morse test well (invented parameters): De in cm-1, re in A, a in 1/A.
MORSE = dict(De=10000.0, re=1.2, a=2.0)


def morse_sample(n, r_first=0.85, r_last=3.7):
    r = np.linspace(r_first, r_last, n)
    return r, wkbfit.Morse(**MORSE)(r)


def joins(r):
    """The four ends of the two blend regions, as documented by PointwisePotential."""
    return [r[0] - min(r[1] - r[0], r[0] / 2), r[0], r[-1], r[-1] + (r[-1] - r[-2])]


# Buckingham exp-6 curve with an invented well: D = 4000 cm-1 (the user's zero lies below the
# asymptote), C6 = 1e7 cm-1 A^6, b = 3.5 1/A, A chosen so that the minimum is at 4.5 A.
BUCK_D, BUCK_C6, BUCK_B = 4000.0, 1.0e7, 3.5
BUCK_A = 6 * BUCK_C6 / (BUCK_B * 4.5 ** 7) * np.exp(BUCK_B * 4.5)


def buckingham(r):
    return BUCK_D + BUCK_A * np.exp(-BUCK_B * r) - BUCK_C6 / r ** 6


def buckingham_sample():
    # wall to 30 A; the outermost points (b r >= 52) carry exp(-b r) terms below 1e-13 of the tail
    r = np.concatenate([np.linspace(3.4, 10.0, 80), [12.0, 15.0, 19.0, 24.0, 30.0]])
    return r, buckingham(r)


# ------------------------------------------------------------------------- the spline

def test_spline_is_scipy_not_a_knot_inside_data():
    # reference: scipy.interpolate.CubicSpline(bc_type="not-a-knot"), on a non-uniform grid
    r = np.sort(np.concatenate([np.linspace(0.85, 3.7, 40), [0.87, 1.21, 2.0001]]))
    V = wkbfit.Morse(**MORSE)(r)
    pot = wkbfit.PointwisePotential(r, V)
    ref = CubicSpline(r, V, bc_type="not-a-knot")
    x = np.linspace(r[0], r[-1], 3001)
    Vp, dVp, d2Vp = pot.derivatives(x)
    scale = np.abs(V).max()
    assert np.max(np.abs(Vp - ref(x))) <= 1e-12 * scale
    assert np.max(np.abs(dVp - ref(x, 1))) <= 1e-11 * np.abs(ref(x, 1)).max()
    assert np.max(np.abs(d2Vp - ref(x, 2))) <= 1e-10 * np.abs(ref(x, 2)).max()
    # and it interpolates every point exactly (to rounding)
    assert np.max(np.abs(pot(r) - V)) <= 1e-12 * scale


@pytest.mark.parametrize("n, tol", [(60, 2.0), (100, 0.3), (200, 0.02)])
def test_accuracy_against_morse(n, tol):
    # reference: the Morse formula [Morse 1929]. Uniform grid 0.85..3.7 A (V from 1.03 De
    # down to 0 and up to 0.987 De); measured max |error| inside the data range:
    # 1.22 (N=60), 0.167 (N=100), 0.0109 cm-1 (N=200), i.e. 1e-4 .. 1e-6 of De.
    r, V = morse_sample(n)
    pot = wkbfit.PointwisePotential(r, V)
    x = np.linspace(r[0], r[-1], 20001)
    err = np.max(np.abs(pot(x) - wkbfit.Morse(**MORSE)(x)))
    assert err <= tol


def test_fourth_order_convergence():
    # a cubic spline with not-a-knot ends converges as h^4 (de Boor, A Practical Guide to
    # Splines, from memory): halving h must cut the error by about 16 (accept > 10)
    errs = []
    for n in (101, 201):
        r, V = morse_sample(n)
        x = np.linspace(r[0], r[-1], 20001)
        errs.append(np.max(np.abs(wkbfit.PointwisePotential(r, V)(x) - wkbfit.Morse(**MORSE)(x))))
    assert errs[0] / errs[1] > 10


def test_accuracy_against_lennard_jones():
    # reference: the LJ(12,6) formula; 100 points geometrically spaced 0.85..5 re (De = 2500).
    # Measured max |error|: 1.21 cm-1 on the steep r^-12 wall (at V = 2.7 De, where the
    # spacing is 0.015 A), 0.090 cm-1 where V < De (N = 200: 0.084 and 0.0049)
    lj = wkbfit.LennardJones(De=2500.0, re=1.0)
    r = np.geomspace(0.85, 5.0, 100)
    pot = wkbfit.PointwisePotential(r, lj(r))
    x = np.linspace(r[0], r[-1], 20001)
    err = np.abs(pot(x) - lj(x))
    assert np.max(err) <= 2.0
    assert np.max(err[lj(x) < 2500.0]) <= 0.15


def test_minimum_of_curve_matches_morse():
    # reference: Morse minimum at re with V = 0; N = 100 uniform points (spacing 0.029 A)
    r, V = morse_sample(100)
    pot = wkbfit.PointwisePotential(r, V)
    res = minimize_scalar(pot, bracket=(1.1, 1.2, 1.3), tol=1e-10)
    assert abs(res.x - MORSE["re"]) <= 1e-4
    assert abs(res.fun) <= 1e-2


# ------------------------------------------------------------------------- joins and derivatives

@pytest.mark.parametrize("which", range(4))
def test_joins_are_c2(which):
    # second-order one-sided differences of V and dV/dr from the left and from the right of each
    # join must both reproduce the dV/dr and d2V/dr2 the curve reports there (Taylor's theorem);
    # a jump in dV or d2V would show as a left/right difference of its full size.
    r, V = morse_sample(60)
    pot = wkbfit.PointwisePotential(r, V)
    x = joins(r)[which]
    d = 1e-4 * (r[1] - r[0])

    def V_at(z):
        return pot.derivatives(np.array([z]))[0][0]

    def dV_at(z):
        return pot.derivatives(np.array([z]))[1][0]

    _, dV0, d2V0 = (a[0] for a in pot.derivatives(np.array([x])))
    left = (3 * V_at(x) - 4 * V_at(x - d) + V_at(x - 2 * d)) / (2 * d)
    right = (-3 * V_at(x) + 4 * V_at(x + d) - V_at(x + 2 * d)) / (2 * d)
    tol1 = 1e-6 * abs(dV0) + 1e-9 * np.abs(V).max() / d
    assert abs(left - dV0) <= tol1 and abs(right - dV0) <= tol1
    left2 = (3 * dV_at(x) - 4 * dV_at(x - d) + dV_at(x - 2 * d)) / (2 * d)
    right2 = (-3 * dV_at(x) + 4 * dV_at(x + d) - dV_at(x + 2 * d)) / (2 * d)
    tol2 = 1e-5 * abs(d2V0) + 1e-9 * abs(dV0) / d
    assert abs(left2 - d2V0) <= tol2 and abs(right2 - d2V0) <= tol2


def test_tail_join_would_jump_without_blend():
    # makes the C2 test meaningful: the fitted tail T and the spline differ in slope at r[-1]
    # (by 0.076 cm-1/A, measured) far more than the tolerance used above, so an unblended
    # join would fail it
    r, V = morse_sample(60)
    pot = wkbfit.PointwisePotential(r, V)
    n, Cn = pot.tail["tail_power"], pot.tail["tail_coefficient"]
    dT = n * Cn / r[-1] ** (n + 1)
    dS = pot.derivatives(np.array([r[-1]]))[1][0]
    assert abs(dT - dS) > 100 * (1e-6 * abs(dS))


def test_derivatives_against_central_differences():
    # dV/dr and d2V/dr2 against 4th-order central differences of V and dV/dr (step 1e-4 A;
    # truncation ~ h^4 V^(5)/30, far below the tolerance), inside, in both blend regions and
    # on both extrapolations
    r, V = morse_sample(60)
    pot = wkbfit.PointwisePotential(r, V)
    x = np.concatenate([np.linspace(0.3, 0.85, 23), np.linspace(0.86, 3.69, 57), np.linspace(3.71, 12.0, 31)])
    h = 1e-4

    def cdiff(f, z):
        return (-f(z + 2 * h) + 8 * f(z + h) - 8 * f(z - h) + f(z - 2 * h)) / (12 * h)

    Vx, dVx, d2Vx = pot.derivatives(x)
    num1 = cdiff(lambda z: pot.derivatives(z)[0], x)
    num2 = cdiff(lambda z: pot.derivatives(z)[1], x)
    assert np.all(np.abs(num1 - dVx) <= 1e-6 * np.abs(dVx) + 1e-8)
    assert np.all(np.abs(num2 - d2Vx) <= 1e-6 * np.abs(d2Vx) + 1e-7)


def test_safe_at_tiny_and_huge_r():
    # the wall stays finite as r -> 0 and the tail is D - C_n/r^n with depth C_n/r^n exactly
    r, V = morse_sample(60)
    pot = wkbfit.PointwisePotential(r, V)
    x = np.array([1e-300, 1e-12, 1e-3, 0.5, 20.0, 1e3, 1e8, 1e300])
    Vx, dVx, d2Vx = pot.derivatives(x)
    assert np.all(np.isfinite(Vx)) and np.all(np.isfinite(dVx)) and np.all(np.isfinite(d2Vx))
    assert np.all(np.diff(Vx[:4]) < 0)  # still falling along the wall
    assert np.all(Vx[:4] > V[0])
    D, n, Cn = pot.tail["asymptote"], pot.tail["tail_power"], pot.tail["tail_coefficient"]
    far = x[4:]
    depth_ref = Cn * np.exp(-n * np.log(far))  # no overflow of far**n at 1e300
    np.testing.assert_allclose(pot.binding_depth(far), depth_ref, rtol=1e-13, atol=0)
    np.testing.assert_allclose(Vx[4:], D - depth_ref, rtol=1e-15)


# ------------------------------------------------------------------------- tail fits

def test_pure_c6_tail_recovered():
    # reference: the Buckingham curve, a pure D - C6/r^6 at the outermost points
    r, V = buckingham_sample()
    pot = wkbfit.PointwisePotential(r, V)
    t = pot.tail
    assert t["asymptote_fitted"] and t["tail_power_fitted"]
    assert abs(t["asymptote"] - BUCK_D) <= 1e-8 * BUCK_D
    assert abs(t["tail_power"] - 6) <= 1e-8 * 6
    assert abs(t["tail_coefficient"] - BUCK_C6) <= 1e-8 * BUCK_C6


@pytest.mark.parametrize("given", [{"asymptote": BUCK_D}, {"tail_power": 6}, {"asymptote": BUCK_D, "tail_power": 6}])
def test_tail_with_given_values(given):
    # with D and/or n given, the other tail constants from the last one or two points
    r, V = buckingham_sample()
    t = wkbfit.PointwisePotential(r, V, **given).tail
    assert t["asymptote_fitted"] == ("asymptote" not in given)
    assert t["tail_power_fitted"] == ("tail_power" not in given)
    assert abs(t["asymptote"] - BUCK_D) <= 1e-8 * BUCK_D
    assert abs(t["tail_power"] - 6) <= 1e-8 * 6
    assert abs(t["tail_coefficient"] - BUCK_C6) <= 1e-7 * BUCK_C6


def test_tail_extrapolation_is_buckingham():
    # beyond the data (30 A) the curve follows the true tail: depth C6/r^6
    r, V = buckingham_sample()
    pot = wkbfit.PointwisePotential(r, V)
    x = np.array([45.0, 100.0, 1000.0])
    np.testing.assert_allclose(pot.binding_depth(x), BUCK_C6 / x ** 6, rtol=1e-7)


# ------------------------------------------------------------------------- bad input

def _bad(match, r, V, **kw):
    with pytest.raises(ValueError, match=match):
        wkbfit.PointwisePotential(r, V, **kw)


def test_too_few_points():
    r, V = morse_sample(60)
    _bad(r"at least 5 points .* got 4", r[:4], V[:4])


def test_not_increasing_names_index_and_values():
    r, V = morse_sample(60)
    r2 = r.copy()
    r2[5] = r2[3]
    _bad(r"strictly increasing: r\[4\]=1\.04322.* r\[5\]=0\.99491", r2, V)
    _bad(r"strictly increasing: r\[0\]=3\.7", r[::-1], V[::-1])


def test_duplicated_r():
    r, V = morse_sample(60)
    r2 = r.copy()
    r2[5] = r2[4]
    _bad(r"r\[4\] = r\[5\] = 1\.04322.* duplicated", r2, V)


def test_non_finite_and_non_positive():
    r, V = morse_sample(60)
    r2 = r.copy()
    r2[7] = np.nan
    _bad(r"r\[7\]=nan is not a finite", r2, V)
    V2 = V.copy()
    V2[8] = np.inf
    _bad(r"V\[8\]=inf .* not a finite", r, V2)
    _bad(r"r\[0\]=-0\.15 A is invalid: distances must be > 0", r - 1.0, V)
    _bad(r"arrays of numbers", r, ["x"] * len(r))
    _bad(r"same length", r, V[:-1])
    _bad(r"asymptote=nan", r, V, asymptote=float("nan"))
    _bad(r"tail_power=inf", r, V, tail_power=float("inf"))


def test_wall_must_rise_and_curve_up():
    r, V = morse_sample(60)
    _bad(r"inner wall does not rise.*V=545\.87", r[10:], V[10:])   # starts past the minimum
    V2 = V.copy()
    V2[0] = V2[1] + 0.5 * (V2[1] - V2[2])                           # concave: no exponential fits
    _bad(r"inner wall does not curve upwards.*V=8113\.77", r, V2)


def test_tail_fit_failures_say_what_to_give():
    r, V = morse_sample(60)
    # outermost points still climbing the well (convex): no power law D - C_n/r^n fits
    _bad(r"cannot fit the tail.*V=1356\.36.*asymptote=\.\.\..*tail_power=", r[:15], V[:15])
    # a fitted power of 0.55: non-physical
    _bad(r"fitted tail power n=0\.5498.*not physical.*tail_power=", r[:20], V[:20])
    # last point falling
    V2 = V.copy()
    V2[-1] = V2[-2] - 1
    _bad(r"do not rise towards an asymptote.*9851\.12.*asymptote=\.\.\. and tail_power=", r, V2)
    # given asymptote below the last point
    _bad(r"V\[59\]=9865\.695.* not below the given asymptote=5000", r, V, asymptote=5000)
    _bad(r"tail_power=-3 is invalid", r, V, tail_power=-3)


def test_user_arrays_unchanged():
    r, V = morse_sample(60)
    r_copy, V_copy = r.copy(), V.copy()
    pot = wkbfit.PointwisePotential(r, V)
    assert np.array_equal(r, r_copy) and np.array_equal(V, V_copy)
    assert r.flags.writeable and V.flags.writeable  # the user's arrays are not frozen
    r[0] = 0.5  # and later changes of them do not reach the potential
    assert pot.r[0] == r_copy[0]
    lists = (list(r_copy), list(V_copy))
    wkbfit.PointwisePotential(*lists)
    assert lists[0] == list(r_copy) and lists[1] == list(V_copy)


# ------------------------------------------------------------------------- WKB levels

HCL_MORSE = dict(we=2990.946, wexe=52.8186, re=1.27455, mu=0.979592539)  # physics.md sections 5, 8


@pytest.mark.parametrize("n, tol", [(60, 0.15), (200, 1e-3)])
def test_wkb_levels_of_sampled_morse(n, tol):
    # reference: exact Morse levels G(v) = we (v+1/2) - wexe (v+1/2)^2 [Morse 1929], which first-order
    # WKB reproduces exactly (physics.md sections 1, 6). H35Cl-like Morse (we, wexe, re of Huber &
    # Herzberg), sampled at N uniform points from re - 0.45 A (V = 1.44 De) to 4 A; levels below
    # 0.9 De (turning points inside the data). Measured max |error|: 0.072 (N=60),
    # 7.7e-3 (N=100), 5.0e-4 cm-1 (N=200), of De = 42342 cm-1.
    we, wexe, re, mu = (HCL_MORSE[k] for k in ("we", "wexe", "re", "mu"))
    a = np.sqrt(wexe * mu / wkbfit.HBAR2_OVER_2U)
    De = we ** 2 / (4 * wexe)
    morse = wkbfit.Morse(De=De, re=re, a=a)
    r = np.linspace(re - 0.45, 4.0, n)
    table = wkbfit.levels(wkbfit.PointwisePotential(r, morse(r)), mu, order=1, ends="maslov")
    v = np.asarray(table.v)
    G = we * (v + 0.5) - wexe * (v + 0.5) ** 2
    sel = G < 0.9 * De
    assert sel.sum() >= 19
    assert np.max(np.abs(table.energy[sel] - G[sel])) <= tol


def test_wkb_levels_of_sampled_lennard_jones():
    # reference: WKB levels of the analytic LennardJones(12,6) (De = 2500 cm-1, re = 1 A,
    # mu chosen so that eps = 1 cm-1 A^2 as in physics.md section 11: 12 levels).
    # 100 points, geometric 0.85..5 A: every level, the top one 0.13 cm-1 below the asymptote,
    # agrees; measured max |difference| 9.5e-3 cm-1, vD to 7e-5.
    lj = wkbfit.LennardJones(De=2500.0, re=1.0)
    mu = wkbfit.HBAR2_OVER_2U
    r = np.geomspace(0.85, 5.0, 100)
    pot = wkbfit.PointwisePotential(r, lj(r))
    ref = wkbfit.levels(lj, mu, order=1, ends="maslov")
    got = wkbfit.levels(pot, mu, order=1, ends="maslov")
    assert len(got) == len(ref) == 12
    assert np.max(np.abs(got.energy - ref.energy)) <= 0.02
    assert abs(got.vD - ref.vD) <= 1e-3
