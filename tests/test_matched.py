"""Tests of the matched end phases and the default level rule (levels(order=2, ends="matched")).

References used as check values (each named at its test):
- the exact radial solver of wkbfit (csrc/radial.c: Numerov on a mapped grid, node counting,
  Richardson extrapolation), run at 1e-10 cm-1 tolerance; its own error column is checked;
- an independent SciPy shooting solver written here (DOP853 from deep in both forbidden regions to the
  well minimum, Brent's method on the normalised Wronskian), for curves with -C_n/r^n tails n = 3, 4, 6;
- the zero-energy solution of a pure -C_n/r^n tail, u0 = sqrt(r) J_nu(2 nu (beta/r)^(1/(2 nu))),
  nu = 1/(n-2), and its threshold phase phi(0) = pi/2 + pi/(n-2) (physics.md section 4b; Friedrich and
  Trost, Phys. Rep. 397, 359 (2004), from memory), evaluated with scipy.special.jv;
- the Airy function Ai(-z) (scipy.special.airy) and its asymptotic phase, A&S 10.4.59/60 with the
  coefficients c_k = Gamma(3k+1/2)/(54^k k! Gamma(k+1/2)).
The test wells are invented (Lennard-Jones (n, m) and MLR parameters chosen for the tail power).
"""
import re
import math
import warnings

import numpy as np
import pytest
import scipy.special as sp
from scipy.integrate import solve_ivp
from scipy.optimize import brentq

import wkbfit
from wkbfit import _core
from wkbfit.exact import exact_levels

C_U = wkbfit.HBAR2_OVER_2U

# name: (potential, mu, formula for the SciPy reference or None)
CURVES = {
    "LJ(12,6) C6 tail, mu=20": (wkbfit.LennardJones(De=1000.0, re=3.0), 20.0, (1000.0, 3.0, 12, 6)),
    "LJ(8,4) C4 tail, mu=10": (wkbfit.LennardJones(De=2000.0, re=2.5, n=8, m=4), 10.0, (2000.0, 2.5, 8, 4)),
    "LJ(6,3) C3 tail, mu=10": (wkbfit.LennardJones(De=2000.0, re=2.5, n=6, m=3), 10.0, (2000.0, 2.5, 6, 3)),
    "MLR C6+C8 tail, mu=50": (wkbfit.MLR(De=5000.0, re=4.0, C6=1.0e7, C8=3.0e8, betas=[-0.4, 0.2]), 50.0, None),
    "MLR C6+C8 tail, mu=100": (wkbfit.MLR(De=5000.0, re=4.0, C6=1.0e7, C8=3.0e8, betas=[-0.4, 0.2]), 100.0, None),
    "LJ(12,6) light, mu=0.5": (wkbfit.LennardJones(De=10000.0, re=1.2), 0.5, (10000.0, 1.2, 12, 6)),
    "LJ(12,6) light, mu=2.5": (wkbfit.LennardJones(De=10000.0, re=1.2), 2.5, (10000.0, 1.2, 12, 6)),
}


def exact(pot, mu, J):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return exact_levels(pot, mu, Js=[J], tolerance=1e-10, min_binding=1e-13)


@pytest.mark.parametrize("J", [0, 10])
@pytest.mark.parametrize("name", list(CURVES))
def test_matched_levels_meet_targets_against_exact_solver(name, J):
    # reference: the exact radial solver (1e-10 cm-1 tolerance; its error column is checked below).
    # targets of the issue: every level within 1e-4 cm-1, the last two within 1e-6 cm-1.
    pot, mu, _ = CURVES[name]
    ex = exact(pot, mu, J)
    t = wkbfit.levels(pot, mu, J=J)
    assert t.method == "wkb-matched"
    assert len(t) == len(ex)  # the matched rule binds exactly the levels the exact solver finds
    assert np.max(ex.error) < 1e-8
    err = np.abs(t.energy - ex.energy)
    assert np.max(err) <= 1e-4, (name, J, int(np.argmax(err)), float(np.max(err)))
    assert np.max(err[-2:]) <= 1e-6, (name, J, err[-2:])
    # v_th: the matched count is the number of v below it
    assert len(t) - 1 < t.v_th < len(t)


def test_first_and_second_order_are_off_where_matched_is_not():
    # reference: the exact solver. The textbook rule (order=1, ends="maslov") overbinds the last level
    # of a C6 well by a large fraction of its binding energy (physics.md section 12); the matched rule
    # does not.
    pot, mu, _ = CURVES["LJ(12,6) C6 tail, mu=20"]
    ex = exact(pot, mu, 0)
    t1 = wkbfit.levels(pot, mu, order=1, ends="maslov")
    tm = wkbfit.levels(pot, mu)
    last = len(ex) - 1
    assert abs(t1.binding_energy[last] - ex.binding_energy[last]) > 0.5 * ex.binding_energy[last]
    assert abs(tm.binding_energy[last] - ex.binding_energy[last]) < 1e-6 * ex.binding_energy[last] + 1e-10


# ------------------------------------------------------------------ independent SciPy reference

def _lj(De, re, n, m):
    def V(r):
        s = re / r
        return De + De / (n - m) * (m * s ** n - n * s ** m)
    return V


def scipy_shooting_level(V, eps, D, E_guess, spacing, decay=22.0, rtol=1e-10):
    """Eigenvalue near E_guess: u'' = Q u, Q = (V - E)/eps, integrated in x = ln r with DOP853 from deep
    in both forbidden regions (integral kappa dr = decay) to the well minimum; the root of the normalised
    Wronskian mismatch by Brent's method."""
    Q = lambda r, E: (V(r) - E) / eps
    rr = np.exp(np.linspace(np.log(0.3), np.log(50.0), 4000))
    rm = rr[np.argmin(V(rr))]

    def ends(E):
        r1 = brentq(lambda r: Q(r, E), 1e-2 * rm, rm)
        hi = 1.5 * rm
        while Q(hi, E) < 0:
            hi *= 1.5
        r2 = brentq(lambda r: Q(r, E), rm, hi)
        a, acc = r1, 0.0
        while acc < decay:
            a2 = 0.995 * a
            acc += math.sqrt(max(Q(0.5 * (a + a2), E), 0.0)) * (a - a2)
            a = a2
        b, acc, h = r2, 0.0, 1e-3
        while acc < decay:
            b2 = b * (1 + h)
            acc += math.sqrt(max(Q(0.5 * (b + b2), E), 0.0)) * (b2 - b)
            b, h = b2, min(1.2 * h, 0.2)
        return a, b

    def mismatch(E):
        a, b = ends(E)
        f = lambda x, y: [y[1], y[1] + math.exp(2 * x) * Q(math.exp(x), E) * y[0]]  # u_xx = u_x + r^2 Q u
        xm = math.log(rm)
        so = solve_ivp(f, (math.log(a), xm), [1e-30, a * math.sqrt(Q(a, E)) * 1e-30], method="DOP853",
                       rtol=rtol, atol=1e-300)
        si = solve_ivp(f, (math.log(b), xm), [1e-30, -b * math.sqrt(Q(b, E)) * 1e-30], method="DOP853",
                       rtol=rtol, atol=1e-300)
        uo, po, ui, pi = so.y[0, -1], so.y[1, -1] / rm, si.y[0, -1], si.y[1, -1] / rm
        k = math.sqrt(-Q(rm, E))
        return (uo * pi - po * ui) / (math.hypot(uo, po / k) * math.hypot(ui, pi / k) * k)

    d = 0.02 * spacing
    for _ in range(20):
        lo, hi = E_guess - d, min(E_guess + d, D - 0.5 * (D - E_guess))
        if mismatch(lo) * mismatch(hi) < 0:
            return brentq(mismatch, lo, hi, xtol=1e-13 * abs(D), rtol=1e-15, maxiter=200)
        d *= 2
    raise AssertionError("no bracket")


@pytest.mark.parametrize("params, mu", [((1000.0, 3.0, 12, 6), 20.0),   # C6 tail, 25 levels
                                        ((2000.0, 2.5, 8, 4), 2.5),      # C4 tail, 20 levels
                                        ((2000.0, 2.5, 6, 3), 0.9)])     # C3 tail, 23 levels
def test_every_level_against_independent_scipy_reference(params, mu):
    # reference: the SciPy shooting solver above (independent of the C core), every level including the
    # last; it agrees with the exact solver to ~1e-10 cm-1 (checked), and the matched levels meet the
    # targets against it (1e-4 cm-1, last two 1e-6 cm-1).
    De, re, n, m = params
    pot = wkbfit.LennardJones(De=De, re=re, n=n, m=m)
    t = wkbfit.levels(pot, mu)
    ex = exact(pot, mu, 0)
    assert len(t) == len(ex) >= 15
    V, eps = _lj(De, re, n, m), C_U / mu
    ref = np.array([scipy_shooting_level(V, eps, De, ex.energy[i], ex.dEdv[i]) for i in range(len(ex))])
    assert np.max(np.abs(ref - ex.energy)) < 1e-8
    err = np.abs(t.energy - ref)
    assert np.max(err) <= 1e-4 and np.max(err[-2:]) <= 1e-6, err


@pytest.mark.parametrize("params, mu", [((1000.0, 3.0, 12, 6), 20.0),   # C6 tail
                                        ((2000.0, 2.5, 8, 4), 10.0),     # C4 tail
                                        ((2000.0, 2.5, 6, 3), 10.0),     # C3 tail
                                        ((10000.0, 1.2, 12, 6), 0.5)])   # light well (both levels)
def test_last_levels_at_J_against_independent_scipy_reference(params, mu):
    # reference: the SciPy shooting solver above on V_J = V + eps J(J+1)/r^2 (J = 10), the last two levels
    # (behind the centrifugal barrier: the exact phase across the well, started from the second-order
    # level since issue 7's cost work); target 1e-6 cm-1 (measured: <= 1.1e-10 on the tails, 1.0e-7 on
    # the light well; the reference agrees with the exact solver to <= 1.1e-9 at rtol 1e-12).
    De, re, n, m = params
    J, eps = 10, C_U / mu
    pot = wkbfit.LennardJones(De=De, re=re, n=n, m=m)
    t = wkbfit.levels(pot, mu, J=J)
    ex = exact(pot, mu, J)
    assert len(t) == len(ex) >= 2 and list(t.rule[-2:]) == ["exact-phase"] * 2
    V0 = _lj(De, re, n, m)
    VJ = lambda r: V0(r) + eps * J * (J + 1) / r ** 2
    for i in (len(ex) - 2, len(ex) - 1):
        ref = scipy_shooting_level(VJ, eps, De, ex.energy[i], ex.dEdv[i], rtol=1e-12)
        assert abs(ref - ex.energy[i]) < 1e-8, (i, ref, ex.energy[i])
        assert abs(t.energy[i] - ref) <= 1e-6, (i, t.energy[i], ref)


# ------------------------------------------------------------------ threshold phase of -C_n/r^n

def _pure_tail_curve(n, beta, mu):
    """A point-wise curve that is exactly -C_n/r^n beyond r = 5 A (C_n = eps beta^(n-2)), with a core
    -C_n/r^n [1 - 10 (1 - r/5)^4] inside; beyond its last point (7 A) the curve's own tail is the same
    -C_n/r^n (asymptote 0 and power n given, C_n fitted to the last point)."""
    C = C_U / mu * beta ** (n - 2)
    r = np.linspace(1.5, 7.0, 1101)
    V = -C / r ** n * np.where(r < 5.0, 1 - 10 * (1 - r / 5.0) ** 4, 1.0)
    return wkbfit.PointwisePotential(r, V, asymptote=0.0, tail_power=n), C


def _bessel_psi(n, beta, C, eps, r):
    """Phase psi read off u0 = sqrt(r) J_nu(x), x = 2 nu (beta/r)^(1/(2 nu)), by the matching formula
    u'/u = -k'/(2k) + q2 cot(psi) with the E = 0 wavenumbers k, q2 = k + dk of the pure tail."""
    nu = 1.0 / (n - 2)
    x = 2 * nu * (beta / r) ** (1 / (2 * nu))
    z = 1 / (2 * r) - (x / (2 * nu * r)) * sp.jvp(nu, x) / sp.jv(nu, x)
    k = math.sqrt(C / eps) * r ** (-n / 2)
    dk = math.sqrt(eps / C) * r ** (n / 2 - 2) * n * (n - 4) / 32  # dk of physics.md 12 at E = 0
    return math.atan2(k + dk, z - (n / 2) / (2 * r)), x


@pytest.mark.parametrize("n", [3, 4, 6])
def test_threshold_phase_of_inverse_power_tail(n):
    # reference 1 (formula check, scipy only): the zero-energy Bessel solution has the threshold phase
    # phi(0)/2 = psi(r) + x(r) - pi/2 - n(n-4)/(8 (n-2)^2 x) + O(x^-3) with phi(0) = pi/2 + pi/(n-2)
    # (physics.md 4b; Friedrich and Trost 2004, from memory); the 1/x term is the second-order phase
    # integral_0^r dk of the pure tail.
    beta, mu = 60.0, 1.0
    pot, C = _pure_tail_curve(n, beta, mu)
    eps = C_U / mu
    phi0 = math.pi / 2 + math.pi / (n - 2)
    for x_target in (200.0, 800.0):
        r = beta * (x_target / (2.0 / (n - 2))) ** (-2.0 / (n - 2))
        psi, x = _bessel_psi(n, beta, C, eps, r)
        half = psi + x - math.pi / 2 - n * (n - 4) / (8 * (n - 2) ** 2 * x)
        half -= math.pi * round((half - phi0 / 2) / math.pi)
        assert abs(half - phi0 / 2) < 1e-6
    # reference 2: the matched rule's exact outer solution at E -> 0 (kappa beta = 1e-4, 2e-4, 3e-4,
    # extrapolated quadratically in kappa) has the Bessel phase at the matching point b = 7.5 A, which
    # lies in the pure tail
    model, params, curve = pot._core_args()
    b = 7.5
    psis = []
    for j in (1, 2, 3):
        kappa = 1e-4 * j / beta
        d = _core.matched_phases(model, params, curve, mu, 0.0, eps * kappa ** 2, r_match_outer=b)
        psis.append(d["psi_outer"])
    psi0 = 3 * psis[0] - 3 * psis[1] + psis[2]
    psi_b, _ = _bessel_psi(n, beta, C, eps, b)
    diff = (psi0 - psi_b + math.pi / 2) % math.pi - math.pi / 2
    assert abs(diff) < 1e-6, diff  # measured 1e-7 (n = 3, a kappa^2 ln kappa term), 1e-10 (n = 4, 6)


def test_bessel_threshold_number_of_hard_wall_tail():
    # reference: physics.md 4c, a hard wall at r_c = 0.1 beta plus the pure -C6/r^6 tail: the exact
    # threshold number from the Bessel phase is 15.03990; the WKB form with the threshold phase,
    # v_th = (x_c - pi/2 - phi(0)/2)/pi, agrees to the O(1/x_c) asymptotic term, and first-order WKB
    # (phase pi/2 at the tail) is off by about -1/(2(n-2)) = -1/8.
    nu, x_c = 0.25, 0.5 * 10.0 ** 2
    theta = math.atan2(sp.yv(nu, x_c), sp.jv(nu, x_c))  # J = M cos(theta), Y = M sin(theta)
    theta += 2 * math.pi * round((x_c - nu * math.pi / 2 - math.pi / 4 - theta) / (2 * math.pi))
    v_exact = (theta - math.pi / 2) / math.pi
    assert abs(v_exact - 15.03990) < 1e-5
    v_threshold_phase = (x_c - math.pi / 2 - (math.pi / 2 + math.pi / 4) / 2) / math.pi
    assert abs(v_threshold_phase - v_exact) < 1e-3
    v_wkb = (x_c - math.pi / 2 - math.pi / 4) / math.pi
    assert abs((v_exact - v_wkb) + 0.125) < 2e-3


def test_threshold_number_and_the_quadratic_threshold_law():
    # reference: the exact solver's last level and the threshold law v_th - v = bbar kappa/pi (1 + O(kappa))
    # with bbar = beta * 0.4779888 for n = 6 (physics.md 4b/4c, measured ratios 0.95-1.0 at kappa beta
    # <= 0.3); and v_th = vD - 1/(2(n-2)) to leading order (physics.md 4c (i)).
    pot, mu, _ = CURVES["LJ(12,6) C6 tail, mu=20"]
    eps = C_U / mu
    t = wkbfit.levels(pot, mu)
    ex = exact(pot, mu, 0)
    C6 = 2 * 1000.0 * 3.0 ** 6  # LJ(12,6): De [s^12 - 2 s^6] gives C6 = 2 De re^6
    beta = (C6 / eps) ** 0.25
    kappa = math.sqrt(ex.binding_energy[-1] / eps)
    assert kappa * beta < 0.3
    ratio = (t.v_th - ex.v[-1]) / (0.4779888 * beta * kappa / math.pi)
    assert 0.9 < ratio < 1.02
    assert abs(t.v_th - (t.vD - 0.125)) < 2e-3
    assert "v_th = " in t.to_text()


@pytest.mark.parametrize("name, n", [("LJ(8,4) C4 tail, mu=10", 4), ("LJ(6,3) C3 tail, mu=10", 3)])
def test_threshold_number_below_the_crossover_of_slow_tails(name, n):
    # reference: physics.md 4c (i), v_th = vD - 1/(2(n-2)) to leading order (vD from the first-order action
    # at the asymptote, an independent quadrature; measured 1.7e-4 off for both tails), and 4c (ii), the
    # matched quantum number at kappa beta = 1e-4 plus the leading threshold law bbar kappa/pi
    # (bbar/beta = 1 for n = 4, pi for n = 3, physics.md 4b; measured 4e-5 off for n = 3, where the
    # kappa ln kappa term is not in the law). A C3 tail at 10 u has its crossover E_beta = eps/beta^2 at
    # ~1e-9 cm-1: extrapolating from 1e-13 of the depth (0.16 E_beta) put v_th 0.061 low; it now starts
    # at kappa beta = 1e-3.
    pot, mu, (De, re, _, m) = CURVES[name]
    eps = C_U / mu
    t = wkbfit.levels(pot, mu)
    assert abs(t.v_th - (t.vD - 1.0 / (2 * (n - 2)))) < 2e-3
    Cn = 2 * De * re ** m  # LJ(2m, m): De [s^2m - 2 s^m] gives C_m = 2 De re^m
    beta = (Cn / eps) ** (1.0 / (n - 2))
    kappa = 1e-4 / beta
    model, params, curve = pot._core_args()
    v_near = _core.matched_phases(model, params, curve, mu, 0.0, eps * kappa ** 2)["v"]
    bbar = beta * (math.pi if n == 3 else 1.0)
    assert abs(t.v_th - (v_near + bbar * kappa / math.pi)) < 2e-4


@pytest.mark.parametrize("name", ["LJ(12,6) C6 tail, mu=20", "LJ(8,4) C4 tail, mu=10", "MLR C6+C8 tail, mu=100"])
def test_single_solve_threshold_number_against_an_extrapolation(name):
    # reference: the matched quantum number at three bindings kappa beta = 3e-4 (1, 2, 3), extrapolated
    # quadratically in kappa to kappa = 0 (physics.md 4c (ii): v_th - v = bbar kappa/pi + O(kappa^2)).
    # At J = 0 under a C_n tail with n > 3 the table's v_th is one solve at kappa beta = 1e-3 plus the
    # universal term bbar kappa/pi; its kappa^2 term is the difference (measured 4.9e-8, 8.9e-7 and 1.9e-7;
    # the ODE error of v_th is ~6e-7 itself). C_n here from the LJ/MLR formula, not from the curve.
    pot, mu, formula = CURVES[name]
    eps = C_U / mu
    if formula:
        De, re, _, m = formula
        n, Cn = m, 2 * De * re ** m
    else:
        n, Cn = 6, float(pot.params["C6"])
    beta = (Cn / eps) ** (1.0 / (n - 2))
    model, params, curve = pot._core_args()
    vk = [_core.matched_phases(model, params, curve, mu, 0.0, eps * (3e-4 * j / beta) ** 2)["v"] for j in (1, 2, 3)]
    ref = 3 * vk[0] - 3 * vk[1] + vk[2]
    t = _core.wkb_levels(model, params, curve, mu, 0.0, None, 1, 1, order=2, ends=1)
    assert abs(t["v_th"] - ref) < 1.5e-6, (t["v_th"], ref)


# ------------------------------------------------------------------ linear turning point (Airy)

def test_linear_turning_point_gives_the_airy_phase():
    # reference: Ai(-z) from scipy.special.airy, A&S 10.4.59/60. On a linear potential the exact outer
    # solution is Ai; the matched rule's raw phase psi at the matching point equals the phase read off
    # Ai(-z_b) by the same formula (to the ODE tolerance), and psi + zeta - 5/(72 zeta) - pi/2, the end
    # phase per turning point, is pi/4 (phase pi/2 for both ends) to within the next terms of the
    # asymptotic series, (c1 c2 - c3 - c1^3/3)/zeta^3.
    F, r0, mu = 1000.0, 3.0, 10.0
    r = np.linspace(1.0, 8.0, 701)
    # linear beyond r0 (where the outer end lies), a curved inner wall (the point-wise curve's wall fit
    # needs curvature); the not-a-knot spline reproduces the linear part away from r0 to rounding
    V = F * np.abs(r - r0) + 2000.0 * np.maximum(r0 - r, 0.0) ** 2
    pot = wkbfit.PointwisePotential(r, V, asymptote=20000.0, tail_power=6)
    model, params, curve = pot._core_args()
    eps = C_U / mu
    alpha = (F / eps) ** (1 / 3)
    c = [math.gamma(3 * k + 0.5) / (54 ** k * math.factorial(k) * math.gamma(k + 0.5)) for k in range(4)]
    tail = abs(c[1] * c[2] - c[3] - c[1] ** 3 / 3)
    for f in (0.3, 0.5, 0.75):
        d = _core.matched_phases(model, params, curve, mu, 0.0, 20000.0 - 1000.0, match_fraction=f)
        b, r2 = d["r_match_outer"], d["r_outer"]
        assert abs(r2 - 4.0) < 1e-9
        zb = alpha * (r2 - b)
        ai, aip, _, _ = sp.airy(-zb)
        q2 = math.sqrt(zb) + 5 / 32 * zb ** -2.5
        psi_airy = math.atan2(q2 * ai, aip - ai / (4 * zb))
        zeta = 2 / 3 * zb ** 1.5
        assert abs(d["action_outer"] - zeta) < 1e-9 * zeta
        diff = (d["psi_outer"] - psi_airy + math.pi / 2) % math.pi - math.pi / 2
        assert abs(diff) < 1e-8
        psi = psi_airy + math.pi * round((0.75 * math.pi - zeta - psi_airy) / math.pi)
        half = psi + zeta - 5 / (72 * zeta) - math.pi / 2
        assert abs(half - math.pi / 4) <= 2 * tail / zeta ** 3


# ------------------------------------------------------------------ method_error honesty

def _models():
    r = np.linspace(1.2, 12.0, 120)
    morse = wkbfit.Morse(De=5000.0, re=2.0, a=1.5)
    lj_r = np.geomspace(1.9, 20.0, 300)
    lj = wkbfit.LennardJones(De=3000.0, re=2.5)
    return {
        "Morse": (morse, 10.0),
        "Lennard-Jones": (lj, 5.0),
        "Poeschl-Teller": (wkbfit.PoschlTeller(De=3000.0, re=2.0, a=1.0), 10.0),
        "EMO": (wkbfit.EMO(De=5000.0, re=2.0, betas=[1.5, 0.1]), 10.0),
        "MLR": (wkbfit.MLR(De=5000.0, re=4.0, C6=1.0e7, C8=3.0e8, betas=[-0.4, 0.2]), 30.0),
        "point-wise Morse": (wkbfit.PointwisePotential(r, morse(r), asymptote=5000.0), 10.0),
        "point-wise LJ": (wkbfit.PointwisePotential(lj_r, lj(lj_r), asymptote=3000.0, tail_power=6), 5.0),
    }


HONESTY_RATIOS = []


@pytest.mark.parametrize("rule", [{}, {"order": 1, "ends": "maslov"}])
@pytest.mark.parametrize("J", [0, 5])
@pytest.mark.parametrize("name", list(_models()))
def test_method_error_is_honest_on_every_model(name, J, rule):
    # reference: the exact solver; |E - E_exact| - (exact error) never exceeds twice method_error, for
    # the default rule and the textbook first-order rule. (The median ratio true/estimate, collected
    # below, keeps the estimate from being uselessly pessimistic.)
    pot, mu = _models()[name]
    ex = exact(pot, mu, J)
    try:
        t = wkbfit.levels(pot, mu, J=J, **rule)
    except ValueError as exc:
        # an inner wall lower than the asymptote (Poeschl-Teller): the complete table is refused, the
        # levels below the wall top are asked for by v
        assert "rises only to" in str(exc) and name == "Poeschl-Teller"
        t = wkbfit.levels(pot, mu, J=J, v=list(range(int(re.search(r"v=0\.\.(\d+)", str(exc)).group(1)) + 1)),
                          **rule)
    n = min(len(t), len(ex))
    assert n >= 10
    true = np.maximum(np.abs(t.energy[:n] - ex.energy[:n]) - ex.error[:n], 0)
    est = t.method_error[:n]
    assert np.all(est > 0)
    assert np.all(true <= 2 * est), (name, J, rule, np.max(true / est))
    finite = np.isfinite(est)
    HONESTY_RATIOS.extend((true[finite] / est[finite]).tolist())


def test_method_error_is_not_uselessly_pessimistic():
    # the default rule on the C6 well: the median ratio true/estimate is above 1e-2 (measured 0.06)
    pot, mu, _ = CURVES["LJ(12,6) C6 tail, mu=20"]
    ex = exact(pot, mu, 0)
    t = wkbfit.levels(pot, mu)
    sel = t.rule == "second-order"
    ratio = np.abs(t.energy - ex.energy)[sel] / t.method_error[sel]
    assert 1e-2 < np.median(ratio) <= 0.5


def test_pointwise_numerical_error_is_honest():
    # reference: the same point-wise curve's levels with a 256-node quadrature rule (the converged
    # quadrature of the same spline): a sparse spline makes the 32-node quadrature converge only
    # algebraically, and the reported numerical error must cover that for the first-order rule.
    morse = wkbfit.Morse(De=5000.0, re=2.0, a=1.5)
    r = np.linspace(1.2, 12.0, 40)
    pot = wkbfit.PointwisePotential(r, morse(r), asymptote=5000.0)
    t = wkbfit.levels(pot, 10.0, order=1, ends="maslov")
    model, params, curve = pot._core_args()
    fine = _core.wkb_levels(model, params, curve, 10.0, 0.0, None, 1, 1, order=1, nodes=256)
    n = min(len(t), len(fine["energy"]))
    quad = np.abs(t.energy[:n] - fine["energy"][:n])
    assert np.max(quad) > 1e-9  # the effect is there
    assert np.all(quad <= 2 * t.error[:n])


# ------------------------------------------------------------------ options

def test_options_and_their_errors():
    pot, mu = wkbfit.Morse(De=5000.0, re=2.0, a=1.5), 10.0
    with pytest.raises(ValueError, match="method='wkb' only"):
        wkbfit.levels(pot, mu, method="exact", order=2)
    with pytest.raises(ValueError, match="method='wkb' only"):
        wkbfit.levels(pot, mu, method="exact", maslov=(1, 1))
    with pytest.raises(ValueError, match="ends="):
        wkbfit.levels(pot, mu, method="exact", ends="matched")
    with pytest.raises(ValueError, match="order=1 with ends='matched'"):
        wkbfit.levels(pot, mu, order=1, ends="matched")
    with pytest.raises(ValueError, match="ends='sharp' is invalid"):
        wkbfit.levels(pot, mu, ends="sharp")
    with pytest.raises(ValueError, match="needs ends='maslov'"):
        wkbfit.levels(pot, mu, ends="matched", maslov=(2, 1))
    # maslov= alone selects fixed phases; the exact table has method_error = its numerical error
    t = wkbfit.levels(pot, mu, maslov=(1, 1), order=1)
    assert t.method == "wkb" and set(t.rule) == {"first-order"} and t.v_th is None
    te = wkbfit.levels(pot, mu, method="exact")
    assert np.array_equal(te.method_error, te.error) and set(te.rule) == {"exact"}
    d = t.to_dict()
    assert "method_error" in d and "rule" in d


def test_compare_wkb_exact_uses_the_default_rule():
    # reference: the exact solver, inside compare_wkb_exact
    pot, mu, _ = CURVES["LJ(12,6) C6 tail, mu=20"]
    c = wkbfit.compare_wkb_exact(pot, mu)
    assert len(c) == 25 and np.max(np.abs(c.difference)) < 1e-4
    c1 = wkbfit.compare_wkb_exact(pot, mu, order=1, ends="maslov")
    assert np.max(np.abs(c1.difference)) > 1e-2


def test_predictions_accept_the_level_rule():
    # reference: levels() of the fitted potential with the same rule (the prediction's energies), and
    # the first-order prediction as before. Data: first-order levels of an invented Morse well.
    true = wkbfit.Morse(De=5000.0, re=2.0, a=1.5)
    t = wkbfit.levels(true, 10.0, v=list(range(12)), order=1, ends="maslov")
    obs = {"v": t.v, "energy": t.energy, "uncertainty": np.full(len(t), 0.01)}
    result = wkbfit.fit(wkbfit.Morse(De=4900.0, re=2.0, a=1.48), obs, 10.0, vary=["De", "a"])
    p1 = result.predict(mu=10.0)
    pm = result.predict(mu=10.0, order=2, ends="matched")
    ref = wkbfit.levels(result.potential, 10.0)
    np.testing.assert_allclose(pm.energy, ref.energy[:len(pm.energy)], rtol=0, atol=1e-12)
    assert len(pm.energy) == len(p1.energy) and len(pm.energy_uncertainty) == len(pm.energy)
    assert any("matched" in note for note in pm.notes)
    with pytest.raises(ValueError, match="order=1 with ends='matched'"):
        result.predict(mu=10.0, order=1, ends="matched")
