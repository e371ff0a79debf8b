"""Quasibound levels (shape resonances) behind the centrifugal barrier: levels(..., quasibound=True).

Test curve: Lennard-Jones (12, 6) with De = 2500 cm-1, re = 1 A and mu = hbar^2/(2u) / (1 cm-1 A^2) u, so
that eps = hbar^2/(2 mu) = 1 cm-1 A^2 (the "eps = 1" units of physics.md 2 and 10), at J = 30-55.

References, each independent of the code under test:
- exact widths and positions: an independent SciPy computation written here (scipy.integrate.solve_ivp at
  real energies, the scattering phase shift from Riccati-Bessel functions of scipy.special, a Breit-Wigner
  fit of delta(E) with scipy.optimize.curve_fit);
- semiclassical positions and widths: the exact poles (a more exact method), as a function of theta; the
  barrier-matched rows (the default for theta < 8) also against the SciPy phase-shift reference;
- inverted parabolic barrier: T = 1/(1 + exp(2 theta)) is exact there (Kemble, Phys. Rev. 48, 549 (1935),
  from memory), checked here by a SciPy integration through a pure parabola; the core's theta against
  pi (V_b - E)/(hbar omega_b) near the barrier top and against scipy.integrate.quad;
- lifetime constant: scipy.constants (CODATA).
"""
import math
import warnings

import numpy as np
import pytest
import scipy.constants as sc
from scipy.integrate import quad, solve_ivp
from scipy.optimize import brentq, curve_fit
from scipy.special import loggamma, spherical_jn, spherical_yn

import wkbfit
from wkbfit import _core
from wkbfit.quasibound import LIFETIME_CONSTANT

DE = 2500.0
EPS = 1.0
MU = wkbfit.HBAR2_OVER_2U / EPS  # u, so that eps = 1 cm-1 A^2
LJ = wkbfit.LennardJones(DE, 1.0)


def lj_effective(r, J):
    """V_J - D for the test curve, written out independently of the package."""
    return DE * (r ** -12 - 2 * r ** -6) + EPS * J * (J + 1.0) / r ** 2


# ---------------------------------------------------------------- independent SciPy reference
def phase_shifts(l, e, r0=0.75, R=30.0):
    """delta_l(e) (unwrapped) and the outer amplitude^2 a^2 + b^2, for energies e above the asymptote.

    u'' = ((V_J - D - e)/eps) u from u(r0) = 0 deep inside the inner wall to R, vectorized over e, then
    u = a jhat + b nhat (Riccati-Bessel, z j_l(z) and z y_l(z)) at R; tan delta = -b/a. The -C6/r^6 tail
    left at R = 30 A (7e-6 cm-1) shifts positions by far less than the tolerances below.
    """
    e = np.asarray(e, float)
    n = len(e)
    L = l * (l + 1.0)

    def rhs(r, y):
        u, du = y[:n], y[n:]
        U = DE * (r ** -12 - 2 * r ** -6) + EPS * L / r ** 2
        return np.concatenate([du, (U - e) / EPS * u])

    sol = solve_ivp(rhs, (r0, R), np.concatenate([np.zeros(n), np.full(n, 1e-8)]), method="DOP853",
                    rtol=1e-12, atol=1e-30)
    u, du = sol.y[:n, -1], sol.y[n:, -1]
    k = np.sqrt(e / EPS)
    z = k * R
    j, jd = spherical_jn(l, z), spherical_jn(l, z, derivative=True)
    y, yd = spherical_yn(l, z), spherical_yn(l, z, derivative=True)
    Jr, Jrd, Nr, Nrd = z * j, j + z * jd, z * y, y + z * yd
    W = Jr * Nrd - Jrd * Nr
    a = (u * Nrd - du / k * Nr) / W
    b = (du / k * Jr - u * Jrd) / W
    return np.unwrap(2 * np.arctan2(-b, a)) / 2, a * a + b * b


def breit_wigner(x, d0, d1, xr, g):
    return d0 + d1 * (x - xr) + np.arctan2(g / 2, xr - x)


def scipy_resonance(l, e_guess, window, g_guess):
    """(position above D, FWHM) from the phase shift: zoom in on the vertex of the outer amplitude^2,
    which near a resonance goes as (E - Er)^2 + Gamma^2/4, then fit delta(E) to a Breit-Wigner form with a
    linear background over Er +- 8 Gamma."""
    c = e_guess
    while True:
        E = np.linspace(c - window, c + window, 9)
        c2, c1, c0 = np.polyfit((E - c) / window, phase_shifts(l, E)[1], 2)
        c, G = c - window * c1 / (2 * c2), 2 * window * math.sqrt(max(c0 - c1 * c1 / (4 * c2), 0) / c2)
        if window < 50 * max(G, g_guess):
            break
        window /= 20
    G = G or g_guess
    for _ in range(2):
        x = np.linspace(-8, 8, 33)  # fitted in x = (E - c)/G, which keeps the fit well scaled
        d = phase_shifts(l, c + G * x)[0]
        p, _ = curve_fit(breit_wigner, x, d, p0=(d[0], 0.0, 0.0, 1.0), xtol=1e-15, ftol=1e-15, maxfev=20000)
        c, G = c + G * p[2], G * abs(p[3])
    return c, G


def _tables(J, v):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)  # bound exact levels' own accuracy warnings
        ex = wkbfit.levels(LJ, MU, v=v, J=J, method="exact", quasibound=True)
    sc2 = wkbfit.levels(LJ, MU, v=v, J=J, order=2, quasibound=True)
    return ex, sc2


# (J, v): narrow resonances, where the Breit-Wigner fit and the pole coincide to far below the targets
NARROW = [(40, 3), (42, 3), (46, 2), (49, 1)]


@pytest.mark.parametrize("J,v", NARROW)
def test_exact_resonances_against_scipy_phase_shift(J, v):
    ex, sc2 = _tables(J, v)
    assert ex.quasibound[0] and sc2.quasibound[0]
    e_ref, g_ref = scipy_resonance(J, sc2.energy[0] - DE, max(2e-3, 3 * sc2.width[0]), sc2.width[0])
    # targets of issue 7: positions within 1e-6 cm-1, widths within 1e-3 relative for widths >= 1e-10
    assert abs(ex.energy[0] - DE - e_ref) < 1e-6
    assert abs(ex.width[0] / g_ref - 1) < 1e-3
    # the stated error estimates cover the true differences
    assert ex.error[0] < 1e-6
    assert ex.width_error[0] < 1e-3 * ex.width[0]
    # the default semiclassical rows (the barrier-matched pole for theta < 8) against the same reference
    if sc2.theta[0] < 8:
        assert sc2.rule[0] == "quasibound-barrier-matched"
        assert abs(sc2.energy[0] - DE - e_ref) < 1e-6
        assert abs(sc2.width[0] / g_ref - 1) < 1e-3


def test_broad_exact_resonance_against_scipy_phase_shift():
    # theta ~ 2, Gamma ~ 0.3 cm-1: the Breit-Wigner position (with a linear background) and the pole differ by
    # O(Gamma^2) times the background's curvature, so the position is compared at 2e-4 cm-1; the width at 1e-4
    ex, sc2 = _tables(43, 3)
    e_ref, g_ref = scipy_resonance(43, sc2.energy[0] - DE, 3 * sc2.width[0], sc2.width[0])
    assert 0.2 < ex.width[0] < 0.4
    assert abs(ex.energy[0] - DE - e_ref) < 2e-4
    assert abs(ex.width[0] / g_ref - 1) < 1e-4
    # the default semiclassical row is barrier-matched here, and as close to the reference as the pole
    assert sc2.rule[0] == "quasibound-barrier-matched"
    assert abs(sc2.energy[0] - DE - e_ref) < 2e-4 and abs(sc2.energy[0] - ex.energy[0]) < 1e-6
    assert abs(sc2.width[0] / g_ref - 1) < 1e-4


def test_prior_prototype_widths():
    # physics.md 10 table: exact widths from a prior SciPy prototype (not an independent check)
    for J, v, theta, width in ((40, 3, 7.34, 1.0960e-5), (46, 2, 6.57, 6.220e-5)):
        ex, sc2 = _tables(J, v)
        assert abs(ex.width[0] / width - 1) < 1e-4
        assert abs(sc2.theta[0] - theta) < 0.01


# ---------------------------------------------------------------- semiclassical against exact, by theta
class RealRootTable:
    """The second_order_barrier rule's real-energy root (complex_position and the barrier-matched pole off),
    with the table methods used below."""

    def __init__(self, J):
        res = _core.quasibound_levels(*LJ._core_args(), MU, np.array([J * (J + 1.0)]), complex_position=False,
                                      barrier_match_theta=0.0)
        self.v, self.energy = res["v"].astype(int), res["energy"]

    def level(self, v, J):
        return int(np.nonzero(self.v == v)[0][0])


def _all_resonances():
    rows = []
    for J in range(30, 56):
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            ex = wkbfit.levels(LJ, MU, J=J, method="exact", quasibound=True)
        scs = {rule: wkbfit.levels(LJ, MU, J=J, order=2, quasibound=True, quasibound_rule=rule)
               for rule in ("barrier_matched", "second_order_barrier", "second_order", "first_order")}
        scs["real_root"] = RealRootTable(J)
        kem = wkbfit.levels(LJ, MU, J=J, order=2, quasibound=True, width_form="kemble",
                            quasibound_rule="second_order_barrier")
        default = wkbfit.levels(LJ, MU, J=J, order=2, quasibound=True)
        for i in np.nonzero(ex.quasibound)[0]:
            k = scs["second_order_barrier"].level(ex.v[i], J)
            d = default.level(ex.v[i], J)
            rows.append(dict(J=J, v=ex.v[i], theta=scs["second_order_barrier"].theta[k],
                             E=ex.energy[i], G=ex.width[i], G_err=ex.width_error[i], E_err=ex.error[i],
                             dE={r: t.energy[t.level(ex.v[i], J)] - ex.energy[i] for r, t in scs.items()},
                             ratio=scs["second_order_barrier"].width[k] / ex.width[i],
                             kemble=kem.width[kem.level(ex.v[i], J)] / ex.width[i],
                             default=dict(dE=default.energy[d] - ex.energy[i], ratio=default.width[d] / ex.width[i],
                                          error=default.error[d], rule=default.rule[d],
                                          matched=scs["barrier_matched"].energy[scs["barrier_matched"].level(
                                              ex.v[i], J)] == default.energy[d])))
    return rows


@pytest.fixture(scope="module")
def resonances():
    return _all_resonances()


def test_barrier_matched_positions_and_widths_by_theta(resonances):
    """The default rule against the exact poles on the light well, where the complex root alone misses the
    targets (below): theta < 8 rows come from the barrier-matched pole (the radial equation integrated
    exactly through the barrier, joined 4 A beyond r3 to the second-order outgoing WKB wave). Measured:
    positions within 1.7e-7 cm-1 (theta 0.2-8), widths within 1.1e-7 relative; rows with theta >= 8 keep the
    complex root (<= 3.2e-4 cm-1). The stated error covers the true one (|dE| <= 2 error; median
    |dE|/error 0.46, measured)."""
    low = [r for r in resonances if r["theta"] < 8]
    high = [r for r in resonances if r["theta"] >= 8]
    assert len(low) > 15 and len(high) > 15
    assert all(r["default"]["rule"] == "quasibound-barrier-matched" for r in low)
    assert all(r["default"]["rule"] == "quasibound-second-order-barrier" for r in high)
    assert all(r["default"]["matched"] for r in resonances)  # None is quasibound_rule="barrier_matched"
    # the targets (1e-3 cm-1 for theta >= 4, 5e-3 for theta >= 1, widths 6 % / 25 %), met with room
    for lo, tol, wtol in ((4, 1e-3, 0.06), (1, 5e-3, 0.06), (0.1, 5e-3, 0.25)):
        sel = [r for r in resonances if r["theta"] >= lo and r["G"] > 100 * r["G_err"]]
        assert max(abs(r["default"]["dE"]) for r in sel) < tol
        assert max(abs(r["default"]["ratio"] - 1) for r in sel) < wtol
    # what the barrier-matched rows reach: the exact poles' own accuracy (1e-6 cm-1, 1e-3 in width)
    assert max(abs(r["default"]["dE"]) for r in low) < 1e-6
    assert max(abs(r["default"]["ratio"] - 1) for r in low) < 1e-5
    # honest error estimates (the exact pole's own error estimate added)
    ratios = [abs(r["default"]["dE"]) / (r["default"]["error"] + r["E_err"]) for r in low]
    assert max(ratios) <= 2


def test_semiclassical_positions_by_theta(resonances):
    """The second_order_barrier rule (second order + barrier-phase remainder, the real part of the complex
    root with the barrier's decay term; the default for theta >= 8) against the exact poles. Measured on this curve (a light, quantal well of 1-6
    levels per J); the issue's targets are 1e-3 cm-1 for theta >= 4 and 5e-3 for theta >= 1: met for
    theta >= 5 (<= 9.1e-4); 4 <= theta < 5 reaches 1.5e-3, 2 <= theta < 4 4.0e-3 (met), 1 <= theta < 2
    8.2e-3 and 0.5 <= theta < 1 8.8e-3 (the real-energy root alone: 0.086 and 0.28). What remains for
    theta < 5 is the inner-well rule's own higher-order error at the barrier side, not the decay: the MLR
    and heavier-mass wells below meet every target. Hence the default takes the barrier-matched pole for
    theta < 8 (test above)."""
    assert len(resonances) > 40
    bands = [(5, np.inf, 1e-3), (4, 5, 2e-3), (2, 4, 5e-3), (1, 2, 1e-2), (0.5, 1, 1.2e-2)]
    for lo, hi, tol in bands:
        sel = [r for r in resonances if lo <= r["theta"] < hi]
        assert sel, (lo, hi)
        worst = max(abs(r["dE"]["second_order_barrier"]) for r in sel)
        assert worst < tol, (lo, hi, worst)
    # the complex root is what brings theta 0.5-2 from 0.09-0.3 cm-1 to 1e-2: the real-energy root is
    # > 0.03 cm-1 off there
    sel = [r for r in resonances if 0.5 <= r["theta"] < 2]
    assert max(abs(r["dE"]["real_root"]) for r in sel) > 0.03
    # the remainder is what reaches 1e-3 at theta >= 5: plain second order is 5-20x worse there ...
    sel = [r for r in resonances if 5 <= r["theta"] < 12]
    assert max(abs(r["dE"]["second_order"]) for r in sel) > 5e-3
    # ... and first order (true J(J+1), no Langer change) is off by 0.02-3 cm-1
    assert min(abs(r["dE"]["first_order"]) for r in resonances if r["theta"] < 15) > 0.01


def _position_and_width_errors(potential, mu, Js):
    """(theta, position error, width ratio - 1, barrier-matched (1/0), error estimate) of every resolved
    exact resonance of the given J."""
    out = []
    for J in Js:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            ex = wkbfit.levels(potential, mu, J=J, method="exact", quasibound=True)
        sc2 = wkbfit.levels(potential, mu, J=J, quasibound=True)
        for i in np.nonzero(ex.quasibound & (ex.width > 100 * ex.width_error))[0]:
            k = sc2.level(ex.v[i], J)
            out.append((sc2.theta[k], sc2.energy[k] - ex.energy[i], sc2.width[k] / ex.width[i] - 1,
                        sc2.rule[k] == "quasibound-barrier-matched", sc2.error[k] + ex.error[i]))
    return np.array(out)


@pytest.mark.parametrize("name,potential,mu,Js", [
    # an MLR with a C6 tail (mu = 30 u) at J = 70-196, and the LJ test curve at four times the mass
    ("MLR", wkbfit.MLR(De=3000.0, re=3.0, C6=2e5, betas=[0.3, 0.1, 0.05]), 30.0, range(70, 200, 6)),
    ("LJ, 4 mu", LJ, 4 * MU, range(60, 112, 3)),
])
def test_semiclassical_positions_meet_the_targets_on_other_wells(name, potential, mu, Js):
    """The issue's targets against the exact poles on wells of 4-9 quasibound levels per J. Measured with
    the complex root alone (the default before the barrier-matched rule): MLR <= 2.8e-4 cm-1 for theta >= 4,
    <= 1.6e-3 for theta >= 1 (1.3e-3 at theta 0.5-1), widths within 2.3 %; LJ at 4 mu <= 2.8e-4, <= 1.8e-3
    (1.8e-3), widths within 2.5 %. With the default (barrier-matched for theta < 8): those rows within
    1.1e-7 cm-1 (MLR) and 1.0e-7 (LJ 4 mu), widths within 1.5e-7 relative; theta >= 8 as before."""
    rows = _position_and_width_errors(potential, mu, Js)
    assert len(rows) > 30 and np.any((rows[:, 0] >= 1) & (rows[:, 0] < 2))
    for lo, tol in ((4, 1e-3), (1, 5e-3), (0.5, 5e-3)):
        sel = rows[:, 0] >= lo
        assert np.max(np.abs(rows[sel, 1])) < tol, (name, lo, np.max(np.abs(rows[sel, 1])))
    assert np.max(np.abs(rows[rows[:, 0] >= 0.5, 2])) < 0.06
    bm = rows[:, 3] > 0
    np.testing.assert_array_equal(bm, rows[:, 0] < 8)
    assert np.max(np.abs(rows[bm, 1])) < 1e-6 and np.max(np.abs(rows[bm, 2])) < 1e-5
    assert np.all(np.abs(rows[bm, 1]) <= 2 * rows[bm, 4])  # the stated error covers the true one


def test_semiclassical_widths_by_theta(resonances):
    """Uniform ln form with the barrier-phase spacing, at the second_order_barrier position (the formula
    behind the default rule's widths for theta >= 8), against exact widths:
    targets 6 % for theta >= 1 and 25 % for theta >= 0.1 (measured: <= 5.2 % and <= 11.1 %; the 5 % are v = 0
    of the shallow wells at J >= 53, <= 2.4 % elsewhere; the lowest theta on this curve is 0.22). The Kemble
    form with the same spacing is 11-13 % low near the top."""
    narrowest_resolved = [r for r in resonances if r["G"] > 100 * r["G_err"]]
    assert min(r["theta"] for r in narrowest_resolved) < 0.3
    for lo, tol in ((1.0, 0.06), (0.1, 0.12)):
        sel = [r for r in narrowest_resolved if r["theta"] >= lo]
        worst = max(abs(r["ratio"] - 1) for r in sel)
        assert worst < tol, (lo, worst)
    near_top = [r for r in narrowest_resolved if r["theta"] < 0.6]
    assert near_top and max(abs(r["kemble"] - 1) for r in near_top) > 0.1


# ---------------------------------------------------------------- the inverted parabolic barrier
def parabolic_transmission(delta, hw=1.0, L=14.0):
    """|t|^2 through V = -(1/2) K x^2 (eps = 1, hbar omega = sqrt(2 eps K) = hw) at E = -delta, by solve_ivp:
    a transmitted WKB wave (second-order amplitude) at x = +L integrated back to -L, split there into WKB
    waves; |t|^2 = flux ratio."""
    K = hw * hw / 2

    def k(x):
        return np.sqrt(-delta + 0.5 * K * x * x)

    xt = math.sqrt(2 * delta / K)  # turning points +-xt

    def wave(x, sign):  # k^(-1/2) exp(+-i Phi), Phi' = k (Phi from the turning point on each side)
        kk = k(x)
        dk = 0.5 * K * x / kk
        phase = quad(k, xt, x)[0] if x > 0 else -quad(k, x, -xt)[0]
        f = np.exp(1j * sign * phase) / np.sqrt(kk)
        return f, f * (1j * sign * kk - 0.5 * dk / kk)

    u, du = wave(L, 1)
    sol = solve_ivp(lambda x, y: [y[1], -(-delta + 0.5 * K * x * x) * y[0]], (L, -L), [u, du], method="DOP853",
                    rtol=1e-12, atol=1e-14)
    u, du = sol.y[0, -1], sol.y[1, -1]
    fp, dfp = wave(-L, 1)  # incident: exp(+i Phi), Phi rises with x (moves right)
    fm, dfm = wave(-L, -1)  # reflected
    W = fp * dfm - dfp * fm
    a = (u * dfm - du * fm) / W  # amplitude of the incident (right-moving) wave
    return 1 / abs(a) ** 2


@pytest.mark.parametrize("delta", [0.05, 0.3, 1.0])
def test_kemble_transmission_exact_for_parabolic_barrier(delta):
    # theta = integral sqrt(V - E) dx = pi delta / hbar omega for the parabola (closed form)
    theta = math.pi * delta / 1.0
    t_num = parabolic_transmission(delta)
    t_num2 = parabolic_transmission(delta, L=18.0)
    assert abs(t_num - t_num2) < 1e-4 * t_num  # converged in L
    assert abs(t_num / (1 / (1 + math.exp(2 * theta))) - 1) < 1e-3
    # the core's Kemble-form widths use exactly this T(theta): width * 2 pi / spacing = T
    t = wkbfit.levels(LJ, MU, J=45, order=2, quasibound=True, width_form="kemble",
                      quasibound_rule="second_order_barrier")
    q = np.nonzero(t.quasibound)[0]
    spacing = _core.quasibound_levels(*LJ._core_args(), MU, np.array([45 * 46.0]), width_form=1)["width_spacing"]
    np.testing.assert_allclose(t.width[q] * 2 * np.pi / spacing, 1 / (1 + np.exp(2 * t.theta[q])), rtol=1e-12)


def test_theta_near_the_barrier_top_is_parabolic():
    # near the top every smooth barrier is a parabola: theta -> pi (V_b - E)/(hbar omega_b) as E -> V_b,
    # hbar omega_b = sqrt(2 eps |V_J''(r_b)|); the relative deviation falls linearly with V_b - E
    J = 45
    rb = brentq(lambda r: -12 * DE * r ** -13 + 12 * DE * r ** -7 - 2 * EPS * J * (J + 1) * r ** -3, 1.2, 3.0)
    h = 1e-4
    d2 = (lj_effective(rb + h, J) - 2 * lj_effective(rb, J) + lj_effective(rb - h, J)) / h ** 2
    hw = math.sqrt(2 * EPS * abs(d2))
    Vb = lj_effective(rb, J)
    deltas = np.array([1e-4, 1e-3, 1e-2]) * Vb
    res = _core.barrier_integrals(*LJ._core_args(), MU, J * (J + 1.0), DE + Vb - deltas)
    dev = res["theta"] / (math.pi * deltas / hw) - 1
    assert abs(dev[0]) < 2e-4
    assert abs(dev[1] / dev[0] - 10) < 0.5 and abs(dev[2] / dev[1] - 10) < 1.0  # O(V_b - E)


@pytest.mark.parametrize("e", [3.0, 150.0, 500.0, 519.0])
def test_theta_against_scipy_quad(e):
    # an independent quadrature of the same integral, turning points by brentq
    J = 45
    f = lambda r: lj_effective(r, J) - e
    rb = brentq(lambda r: -12 * DE * r ** -13 + 12 * DE * r ** -7 - 2 * EPS * J * (J + 1) * r ** -3, 1.2, 3.0)
    r2 = brentq(f, 1.0, rb)
    r3 = brentq(f, rb, 1e4)
    ref = quad(lambda r: math.sqrt(max(f(r), 0.0) / EPS), r2, rb, epsabs=0, epsrel=1e-12, limit=200)[0] + \
        quad(lambda r: math.sqrt(max(f(r), 0.0) / EPS), rb, r3, epsabs=0, epsrel=1e-12, limit=200)[0]
    res = _core.barrier_integrals(*LJ._core_args(), MU, J * (J + 1.0), np.array([DE + e]))
    assert abs(res["theta"][0] - ref) < 1e-9 * max(ref, 1)
    assert abs(res["outer_turning_point"][0] - r2) < 1e-12 * r2
    assert abs(res["barrier_turning_point"][0] - r3) < 1e-11 * r3


def test_barrier_phase_remainder_matches_loggamma():
    # the remainder rem = phi(-theta/pi) + pi/(24 theta) enters the default rule as +rem/2. Check it through the
    # quantization: with and without it, the level moves by rem/2 / (dI/dE) (to first order)
    t1 = _core.quasibound_levels(*LJ._core_args(), MU, np.array([40 * 41.0]), order=2, barrier_phase=True,
                                 barrier_match_theta=0.0)
    t0 = _core.quasibound_levels(*LJ._core_args(), MU, np.array([40 * 41.0]), order=2, barrier_phase=False,
                                 barrier_match_theta=0.0)
    th = t0["theta"]
    eps_ = -th / np.pi
    phi = np.array([loggamma(0.5 + 1j * x).imag for x in eps_]) - eps_ * np.log(np.abs(eps_)) + eps_
    rem = phi + np.pi / (24 * th)
    shift = 0.5 * rem * t0["dEdv"] / np.pi
    np.testing.assert_allclose(t1["energy"] - t0["energy"], shift, rtol=0.05, atol=1e-9)


# ---------------------------------------------------------------- bookkeeping and honesty
def test_lifetime_constant_from_codata():
    # tau = hbar/Gamma with Gamma = h c (Gamma in cm-1): 5.3088e-12 s cm-1 (physics.md 10)
    ref = sc.hbar / (sc.h * sc.c * 100.0)
    assert abs(LIFETIME_CONSTANT / ref - 1) < 1e-14
    assert abs(LIFETIME_CONSTANT - 5.3088e-12) < 1e-16
    t = wkbfit.levels(LJ, MU, J=40, order=2, quasibound=True)
    q = t.quasibound
    np.testing.assert_allclose(t.lifetime[q], ref / t.width[q], rtol=1e-12)
    assert np.all(np.isinf(t.lifetime[~q])) and np.all(t.width[~q] == 0) and np.all(np.isinf(t.theta[~q]))


@pytest.mark.parametrize("J", [0, 20, 35, 45, 50, 55])
def test_levels_above_the_barrier_top_are_never_bound(J):
    try:
        bound = wkbfit.levels(LJ, MU, J=J, order=2)
        assert np.all(bound.energy < DE) and not np.any(bound.quasibound)
    except ValueError as exc:  # at high J the whole well lies above the asymptote
        assert "no well" in str(exc) and J >= 51
    t = wkbfit.levels(LJ, MU, J=J, order=2, quasibound=True)
    top = t.barriers[J]["top"] if t.barriers[J] else DE
    # bound rows below the asymptote, quasibound rows between the asymptote and the barrier top
    assert np.all(t.energy[~t.quasibound] < DE)
    assert np.all((t.energy[t.quasibound] > DE) & (t.energy[t.quasibound] < top))
    assert len(np.unique(t.v)) == len(t.v)
    # the first level above the barrier top is refused with a message that says so
    v_over = int(t.v.max()) + 1 if len(t) else 0
    with pytest.raises(ValueError, match="neither bound nor quasibound"):
        wkbfit.levels(LJ, MU, v=v_over, J=J, order=2, quasibound=True)


def test_exact_poles_above_the_barrier_top_are_flagged():
    # a pole sought from a guess above the barrier top is reported with above_barrier = True, not as trapped
    top = wkbfit.levels(LJ, MU, J=45, order=2, quasibound=True).barriers[45]["top"]
    from wkbfit.quasibound import exact_resonances
    res = exact_resonances(LJ, MU, [45], [top + 40.0], [10.0])
    assert res["above_barrier"][0] == (res["energy"][0] > top)


def test_bound_only_levels_unchanged_by_the_new_columns():
    a = wkbfit.levels(LJ, MU, J=40, order=2)
    b = wkbfit.levels(LJ, MU, J=40, order=2, quasibound=True)
    n = len(a)
    np.testing.assert_array_equal(a.energy, b.energy[:n])
    assert not np.any(b.quasibound[:n]) and np.all(b.quasibound[n:])


def test_bad_quasibound_options():
    with pytest.raises(ValueError, match="quasibound_rule"):
        wkbfit.levels(LJ, MU, J=40, quasibound=True, quasibound_rule="third_order")
    with pytest.raises(ValueError, match="width_form"):
        wkbfit.levels(LJ, MU, J=40, quasibound=True, width_form="gamow")
    with pytest.raises(ValueError, match="langer"):
        wkbfit.levels(LJ, MU, J=40, quasibound=True, langer=True)
    with pytest.raises(ValueError, match="maslov"):
        wkbfit.levels(LJ, MU, J=40, quasibound=True, maslov=(2, 1))
    with pytest.raises(ValueError, match="method"):
        wkbfit.levels(LJ, MU, J=40, quasibound=True, method="dvr")


def test_no_barrier_gives_no_quasibound_levels():
    # J = 0 of a Morse curve: V_J has no maximum above the asymptote
    m = wkbfit.Morse(De=1000.0, re=2.0, a=1.0)
    t = wkbfit.levels(m, MU, J=0, quasibound=True)
    assert not np.any(t.quasibound) and t.barriers[0] is None


def test_fit_with_quasibound_data():
    # term values above the asymptote (J=40, v=2, 3) are fitted as quasibound levels (wkbfit.width_fit;
    # tests/test_width_fit.py checks the recovery); the same data measured from the lowest level do not show
    # it by their numbers: the start's levels tell which rows lie above the asymptote
    t = wkbfit.levels(LJ, MU, J=40, order=2, quasibound=True)
    obs = wkbfit.ObservedLevels(v=t.v, J=t.J, energy=t.energy, uncertainty=np.full(len(t), 0.01),
                                isotopologue=[None] * len(t), energy_zero="minimum")
    with pytest.warns(wkbfit.fitting.FitWarning, match=r"data set 1 \(term values\), row \d: v=\d, J=40"):
        # first-order WKB bound levels and semiclassical quasibound ones are off by more than 0.1 sigma here
        r = wkbfit.fit(wkbfit.LennardJones(2500.0, 1.0), obs, mu=MU, method="wkb")
    assert r.quasibound_levels["v"] == [2, 3] and r.quasibound_levels["J"] == [40, 40]
    low = wkbfit.ObservedLevels(v=t.v, J=t.J, energy=t.energy - 100.0, uncertainty=np.full(len(t), 0.01),
                                isotopologue=[None] * len(t), energy_zero="lowest")
    # measured from the lowest level they are routed to the quasibound fit too (positions only, no widths given)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", wkbfit.fitting.FitWarning)
        r_low = wkbfit.fit(wkbfit.LennardJones(2500.0, 1.0), low, mu=MU)
    assert r_low.status == "converged"
    assert r_low.quasibound_levels["v"] == [2, 3] and r_low.quasibound_levels["J"] == [40, 40]


def test_semiclassical_against_exact_on_a_rotating_morse_curve():
    """A second curve (exponential tail; Morse De = 3000 cm-1, re = 2 A, a = 1.2/A, mu = 7 u): the default
    rule and widths against the exact poles. Measured at J = 40-80: positions <= 2.8e-4 cm-1 for theta >= 2,
    <= 5.3e-4 at theta = 0.7-1.5 (the real-energy root alone: 0.033); widths within 1.1 % for theta >= 1
    and 2.8 % at theta = 0.7. (At J = 84-88,
    where the well keeps only 1-3 levels, v = 0 widths come out up to 7 % low: the classical spacing is a
    poor measure of a well that holds one level.)"""
    morse = wkbfit.Morse(De=3000.0, re=2.0, a=1.2)
    seen = 0
    for J in (40, 44, 48, 56, 64, 72, 80):
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            ex = wkbfit.levels(morse, 7.0, J=J, method="exact", quasibound=True)
        sc2 = wkbfit.levels(morse, 7.0, J=J, order=2, quasibound=True)
        for i in np.nonzero(ex.quasibound & (ex.width > 100 * ex.width_error))[0]:
            k = sc2.level(ex.v[i], J)
            th, dE, ratio = sc2.theta[k], sc2.energy[k] - ex.energy[i], sc2.width[k] / ex.width[i]
            assert abs(dE) < (3e-4 if th >= 2 else 1e-3), (J, ex.v[i], th, dE)
            if th < 8:  # the barrier-matched pole (measured within 5.7e-7 cm-1, widths 1e-5)
                assert sc2.rule[k] == "quasibound-barrier-matched" and abs(dE) < 1e-6 and abs(ratio - 1) < 3e-5
            assert abs(ratio - 1) < (0.015 if th >= 1 else 0.04), (J, ex.v[i], th, ratio)
            seen += 1
    assert seen >= 12


def test_barrier_matched_join_converges_and_its_error_is_honest(resonances):
    """The join of the barrier-matched rule: the closer to r3 the join, the larger the WKB error (measured
    ~d^-3.5 on this well); at 1.5 A beyond r3 (too close on purpose) the error estimate still covers the
    true error against the exact poles, and 4 A (the default) is closer to them than 1.5 A (measured: at
    most 1.4e-5 and 1.7e-7 cm-1 off over the 25 levels with theta < 8)."""
    ref = {(r["J"], r["v"]): r for r in resonances if r["theta"] < 8}
    errs = {}
    for d in (1.5, 4.0):
        for J in range(30, 56):
            res = _core.quasibound_levels(*LJ._core_args(), MU, np.array([J * (J + 1.0)]), join_distance=d)
            for i in np.nonzero(res["barrier_matched"] > 0)[0]:
                r = ref[(J, int(res["v"][i]))]
                true = abs(res["energy"][i] - r["E"])
                assert true <= 2 * (res["error"][i] + r["E_err"]), (d, J, true, res["error"][i])
                errs.setdefault(d, []).append(true)
    assert len(errs[1.5]) == len(errs[4.0]) >= 20
    assert max(errs[4.0]) < 1e-6 and max(errs[4.0]) < max(errs[1.5])


def test_barrier_matched_bad_settings():
    for kw in (dict(join_distance=0.0), dict(join_distance=-2.0), dict(join_distance=float("nan")),
               dict(join_distance=float("inf")), dict(barrier_match_theta=-1.0),
               dict(barrier_match_theta=float("nan"))):
        with pytest.raises(ValueError, match="barrier_match_theta=.* / join_distance=.* are invalid"):
            _core.quasibound_levels(*LJ._core_args(), MU, np.array([40 * 41.0]), **kw)
    # theta 0 switches it off: the complex root alone, as quasibound_rule="second_order_barrier" gives
    off = _core.quasibound_levels(*LJ._core_args(), MU, np.array([40 * 41.0]), barrier_match_theta=0.0)
    t = wkbfit.levels(LJ, MU, J=40, quasibound=True, quasibound_rule="second_order_barrier")
    assert not np.any(off["barrier_matched"]) and np.all(t.rule[t.quasibound] == "quasibound-second-order-barrier")
    np.testing.assert_array_equal(t.energy[t.quasibound], off["energy"])


def test_exact_resonances_bad_input():
    from wkbfit.quasibound import exact_resonances
    with pytest.raises(ValueError, match="whole numbers"):
        exact_resonances(LJ, MU, [40.5], [2759.0], [1e-5])
    with pytest.raises(ValueError, match="one length"):
        exact_resonances(LJ, MU, [40, 41], [2759.0], [1e-5])
    with pytest.raises(ValueError, match="not above the asymptote"):
        exact_resonances(LJ, MU, [40], [2400.0], [1e-5])
    with pytest.raises(ValueError, match="widths >= 0"):
        exact_resonances(LJ, MU, [40], [2759.0], [-1.0])


def test_exact_error_estimates_are_honest_and_within_target():
    # every resonance of the LJ scan: the default run against a finer one (half the step, a larger radius);
    # the difference stays below twice the stated estimate, and the estimates meet the targets
    # (1e-6 cm-1 in position, 1e-3 relative in width for widths >= 1e-10 cm-1)
    from wkbfit.quasibound import exact_resonances
    J, E, G = [], [], []
    for j in range(30, 56, 2):
        t = wkbfit.levels(LJ, MU, J=j, order=2, quasibound=True)
        q = t.quasibound
        J += list(t.J[q]); E += list(t.energy[q]); G += list(t.width[q])
    a = exact_resonances(LJ, MU, J, E, G)
    b = exact_resonances(LJ, MU, J, E, G, phase_step=0.03, r_match=70.0)
    assert len(J) > 20
    assert np.all(a["energy_error"] < 1e-6)
    assert np.all(np.abs(a["energy"] - b["energy"]) <= 2 * a["energy_error"] + 1e-10)
    assert np.all(np.abs(a["width"] - b["width"]) <= 2 * a["width_error"] + 1e-16)
    wide = a["width"] >= 1e-10
    assert np.all(a["width_error"][wide] < 1e-3 * a["width"][wide])


def test_method_error_of_quasibound_levels_is_honest(resonances):
    """method_error of semiclassical quasibound rows: barrier-matched rows (theta < 8) their own error
    estimate; the others |E - E_exact| + the exact pole's estimate, from the exact resonance seeded by the
    level (the more exact method). True error (against the default exact poles of the resonances fixture,
    whose own error is added) <= 2x the estimate; bound rows keep the bound table's estimate. Measured on the
    barrier-matched rows: median true/estimate 0.45, largest 0.79 (over the four test wells)."""
    seen, ratios = 0, []
    for J in (33, 40, 45, 50, 55):
        t = wkbfit.levels(LJ, MU, J=J, quasibound=True)
        bound = wkbfit.levels(LJ, MU, J=J) if J <= 50 else None
        q = np.nonzero(t.quasibound)[0]
        assert np.all(np.isfinite(t.method_error)) and np.all(t.method_error > 0)
        assert all(r.startswith("quasibound-") for r in t.rule[q])
        for i in q:
            ref = [r for r in resonances if r["J"] == J and r["v"] == t.v[i]]
            if ref:
                true = abs(t.energy[i] - ref[0]["E"])
                assert true <= 2 * t.method_error[i] + 1e-9, (J, t.v[i], true, t.method_error[i])
                assert t.method_error[i] < 10 * true + 1e-6  # not uselessly pessimistic
                if t.rule[i] == "quasibound-barrier-matched":
                    assert t.method_error[i] == t.error[i]
                    ratios.append(true / (t.method_error[i] + ref[0]["E_err"]))
                seen += 1
        if bound is not None:
            n = len(bound)
            np.testing.assert_allclose(t.method_error[:n], bound.method_error, rtol=1e-12)
    assert seen >= 8 and len(ratios) >= 4
    assert max(ratios) <= 1 and 0.05 < np.median(ratios)  # honest, and not uselessly pessimistic


def test_exact_width_at_the_rounding_floor_is_not_refused():
    # a resonance 6.4 cm-1 above the asymptote behind a thick barrier (the semiclassical width ~1e-55 cm-1):
    # its pole's width is rounding (a few 1e-16 cm-1) and came out negative beyond 3x its error estimate on
    # this curve (found by a width fit's finite differences); it is reported with width_error >= |width|
    re_ = 1.0000095801785671
    pot = wkbfit.LennardJones(2499.877221739073, re_ + 1e-5 * re_, n=11.997014239400622, m=6.001461852621119)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        t = wkbfit.levels(pot, MU, J=35, method="exact", quasibound=True)
    sc = wkbfit.levels(pot, MU, J=35, quasibound=True)
    q = np.nonzero(t.quasibound)[0]
    k = q[np.argmin(t.energy[q])]
    assert sc.width[sc.level(t.v[k], 35)] < 1e-40
    assert abs(t.width[k]) <= t.width_error[k] < 1e-15


@pytest.mark.parametrize("name,potential,mu,J", [
    # a hydrogen-like mass (0.5 u) on a deep MLR: theta = 0.07, a width of 800 cm-1 (the complex root alone is
    # 130 cm-1 off); a level 0.06 cm-1 below the top of a low barrier on an LJ well at 4 u, where the join
    # lies three wavelengths (37 A) beyond r3: theta = 0.19 (the complex root: 0.035 cm-1 off, width 44 % off,
    # beyond the 25 % target)
    ("MLR 0.5 u", wkbfit.MLR(De=38000.0, re=0.74, C6=6e3, betas=[1.0, 0.2, 0.05]), 0.5, 31),
    ("LJ 4 u", wkbfit.LennardJones(1000.0, 3.0), 4.0, 7),
])
def test_barrier_matched_near_the_barrier_top(name, potential, mu, J):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        ex = wkbfit.levels(potential, mu, J=J, method="exact", quasibound=True)
    sc = wkbfit.levels(potential, mu, J=J, quasibound=True)
    q = np.nonzero(sc.quasibound & (sc.theta < 0.2))[0]
    assert len(q) == 1
    k = q[0]
    i = ex.level(sc.v[k], J)
    assert sc.rule[k] == "quasibound-barrier-matched"
    dE = abs(sc.energy[k] - ex.energy[i])
    assert dE <= 2 * (sc.error[k] + ex.error[i]) and dE < 1e-3, (name, dE, sc.error[k], ex.error[i])
    assert abs(sc.width[k] / ex.width[i] - 1) < 1e-4


def test_barrier_matched_for_every_level(resonances):
    """quasibound_rule="barrier_matched_all": the pole for theta >= 8 too. Measured on the light well: every
    row within 8.7e-7 cm-1 of the exact poles, resolved widths within 3e-6 (the formula: up to 5.2 % at
    theta 13-19); widths the pole does not resolve (theta >~ 15) keep the barrier-penetration formula."""
    ref = {(r["J"], r["v"]): r for r in resonances}
    seen = 0
    formula = 0
    for J in (33, 38, 44, 45, 47, 49, 50, 51, 55):
        t = wkbfit.levels(LJ, MU, J=J, quasibound=True, quasibound_rule="barrier_matched_all")
        f = wkbfit.levels(LJ, MU, J=J, quasibound=True, quasibound_rule="second_order_barrier")
        for i in np.nonzero(t.quasibound)[0]:
            r = ref[(J, int(t.v[i]))]
            assert t.rule[i] == "quasibound-barrier-matched"
            assert abs(t.energy[i] - r["E"]) < 1e-6 and abs(t.energy[i] - r["E"]) <= 2 * (t.error[i] + r["E_err"])
            if r["G"] > 1e4 * r["G_err"]:
                assert abs(t.width[i] / r["G"] - 1) < 1e-4
                seen += r["theta"] >= 8
            elif r["theta"] > 20:
                assert t.width[i] == f.width[f.level(t.v[i], J)]
                formula += 1
    assert seen >= 6 and formula >= 1
