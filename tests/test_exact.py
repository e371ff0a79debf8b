"""Tests of the exact radial solver (csrc/radial.c, wkbfit.exact).

Each check names its external source: closed-form levels (Morse, harmonic oscillator,
Poeschl-Teller), an independent SciPy finite-difference calculation, the DVR reference
values of physics.md section 11, or a theorem (Hellmann-Feynman, Sturm's oscillation
theorem). Tolerances are stated beside each check.
"""
import math

import numpy as np
import pytest
import scipy.linalg
from scipy.integrate import quad
from scipy.optimize import brentq

import wkbfit
from wkbfit import HBAR2_OVER_2U, LennardJones, Morse, PointwisePotential, PoschlTeller
from wkbfit import _core
from wkbfit.exact import exact_levels

MU = 20.0                      # u, a heavy diatomic
EPS = HBAR2_OVER_2U / MU       # hbar^2/(2 mu), cm-1 A^2


def exact(potential, mu, J=0, v=None, **kw):
    return exact_levels(potential, mu, None if v is None else list(np.atleast_1d(v)), list(np.atleast_1d(J)), **kw)


# ---------------------------------------------------------------- Morse

def morse_levels(De, a, mu):
    """Morse, Phys. Rev. 34, 57 (1929) (citation from memory; physics.md section 6):
    G(v) = we (v+1/2) - wexe (v+1/2)^2, we = 2a sqrt(De C/mu), wexe = a^2 C/mu, full line."""
    eps = HBAR2_OVER_2U / mu
    we, wexe = 2 * a * math.sqrt(De * eps), a * a * eps
    vmax = math.floor(we / (2 * wexe) - 0.5)
    x = np.arange(vmax + 1) + 0.5
    return we * x - wexe * x * x


def inner_barrier(potential, mu, E, r_turn):
    """integral_0^r1 kappa dr at energy E: the full-line wavefunction at r = 0 is below exp(-this)."""
    eps = HBAR2_OVER_2U / mu
    return quad(lambda r: math.sqrt(max(potential(max(r, 1e-12)) - E, 0) / eps), 0, r_turn, limit=200)[0]


def test_morse_all_levels_against_closed_form():
    # a re = 3.6: V(0) = 1270 De. The radial problem differs from the full-line Morse problem by
    # terms of order exp(-2 integral_0^r1 kappa dr); that integral is checked to exceed 1000
    # below for the highest level, so the difference is below exp(-2000).
    De, re, a = 5000.0, 3.0, 1.2
    p = Morse(De, re, a)
    ref = morse_levels(De, a, MU)
    t = exact(p, MU)
    assert len(t) == len(ref)                       # Sturm count = Morse v_max + 1
    assert np.array_equal(t.v, np.arange(len(ref)))
    assert inner_barrier(p, MU, ref[-1], t.inner_turning_point[-1]) > 1000
    dev = np.abs(t.energy - ref)
    assert dev.max() < 1e-6                         # issue 3: 1e-6 cm-1 for every level
    assert np.all(dev <= 2 * t.error)               # the error column is honest
    assert np.all(t.error < 1e-6)
    # exact Morse turning points re - ln(1 -+ sqrt(E/De))/a (physics.md section 5)
    E = t.energy
    assert np.allclose(t.inner_turning_point, re - np.log(1 + np.sqrt(E / De)) / a, rtol=0, atol=1e-9)
    assert np.allclose(t.outer_turning_point, re - np.log(1 - np.sqrt(E / De)) / a, rtol=0, atol=1e-7)


def test_morse_level_bound_by_1e4_reaches_thousands_of_angstrom():
    # Same closed form; De chosen so that the last level (v=60) is bound by 1e-4 cm-1.
    mu, re, a = MU, 3.0, 1.2
    wexe = a * a * EPS
    De = wexe * (60.5 + math.sqrt(1e-4 / wexe)) ** 2
    ref = morse_levels(De, a, mu)
    assert len(ref) == 61 and abs((De - ref[-1]) - 1e-4) < 1e-10  # cancellation in De - G
    t = exact(Morse(De, re, a), mu)
    assert len(t) == 61
    assert abs(t.binding_energy[-1] - 1e-4) < 1e-8    # 1e-4 relative of the binding energy
    dev = np.abs(t.energy - ref)
    assert dev.max() < 1e-6 and np.all(dev <= 2 * t.error)
    r, u = wkbfit.exact_wavefunction(Morse(De, re, a), mu, 60)
    # decay length 1/kappa = sqrt(eps/b) = 92 A: the wavefunction still matters at 1000 A
    assert r[-1] > 2000
    assert abs(np.interp(1000.0, r, u)) > 1e-6 * np.abs(u).max()
    assert abs(np.trapezoid(u * u, r) - 1) < 1e-5   # normalised (trapezoid on the grid)


def test_morse_rotation_against_scipy_fd():
    # J > 0 has no closed form for Morse; see the SciPy check below for the method.
    p = Morse(2000.0, 2.5, 1.5)
    for J in (5, 30):
        t = exact(p, MU, J=J)
        ref = fd_levels(p, MU, J, r_min=1.2, r_max=40.0, h0=0.002)
        n = min(len(t), len(ref))
        assert len(t) == len(ref)
        assert np.abs(t.energy[:n] - ref[:n]).max() < 1e-5


# ---------------------------------------------------------------- harmonic oscillator

def test_harmonic_oscillator_levels():
    # 1-D harmonic oscillator E_v = hbar omega (v + 1/2) (textbook result) with
    # V = (k/2)(r - r0)^2 on a point-wise curve: the not-a-knot spline reproduces a parabola
    # exactly, and r0 = 50 A puts r = 0 and the curve's extrapolated ends 15 A (dozens of
    # decay lengths) away from the levels tested, v <= 6.
    k, r0, L = 2000.0, 50.0, 15.0                        # cm-1/A^2
    r = np.linspace(r0 - L, r0 + L, 301)
    V = 0.5 * k * (r - r0) ** 2
    p = PointwisePotential(r, V, asymptote=0.5 * k * L * L * 1.05, tail_power=6)
    hw = math.sqrt(2 * EPS * k)                          # -eps u'' + (k/2) x^2 u: E = sqrt(2 eps k)(v+1/2)
    t = exact(p, MU, v=list(range(7)))
    dev = np.abs(t.energy - hw * (np.arange(7) + 0.5))
    assert dev.max() < 1e-6 and np.all(dev <= 2 * t.error)


# ---------------------------------------------------------------- Poeschl-Teller

def test_poschl_teller_levels():
    # V = De tanh^2(a(r - re)) = De - De sech^2: E_n = De - eps a^2 (lam - 1 - n)^2 with
    # De = eps a^2 lam(lam - 1), n < lam - 1 [Poeschl & Teller, Z. Phys. 83, 143 (1933);
    # Landau & Lifshitz, Quantum Mechanics, problem to section 23 (both from memory);
    # physics.md section 6 and 11: lam = 8.3]. The well is centred at re = 100 A: the
    # highest level (b = eps a^2 0.09) decays by exp(-29) from its turning point to r = 0
    # (checked below), so the wall at r = 0 shifts it by about exp(-58) relative.
    lam, a, re = 8.3, 1.0, 100.0
    De = EPS * a * a * lam * (lam - 1)
    p = PoschlTeller(De, re, a)
    n = np.arange(8)
    ref = De - EPS * a * a * (lam - 1 - n) ** 2
    t = exact(p, MU)
    assert len(t) == 8
    assert inner_barrier(p, MU, ref[-1], t.inner_turning_point[-1]) > 25
    dev = np.abs(t.energy - ref)
    assert dev.max() < 1e-6 and np.all(dev <= 2 * t.error)


# ---------------------------------------------------------------- SciPy finite differences

def fd_levels(potential, mu, J, r_min, r_max, h0, want_vectors=False):
    """Independent check: three-point finite-difference Hamiltonian on a uniform grid with
    u = 0 at both ends, lowest eigenvalues below the asymptote from
    scipy.linalg.eigh_tridiagonal, Richardson-extrapolated over h0, h0/2, h0/4 (error
    O(h^6); the FD error expansion is in even powers of h)."""
    eps = HBAR2_OVER_2U / mu
    D = potential.asymptote
    res = []
    for h in (h0, h0 / 2, h0 / 4):
        n = int(round((r_max - r_min) / h))
        r = r_min + h * np.arange(1, n)
        V = potential(r) + eps * J * (J + 1) / r ** 2
        d = 2 * eps / h ** 2 + V
        e = np.full(len(r) - 1, -eps / h ** 2)
        res.append(scipy.linalg.eigh_tridiagonal(d, e, select="v", select_range=(V.min() - 1, D),
                                                 eigvals_only=True))
    m = min(len(x) for x in res)
    E = [x[:m] for x in res]
    R1 = [(4 * E[1] - E[0]) / 3, (4 * E[2] - E[1]) / 3]
    return (16 * R1[1] - R1[0]) / 15


@pytest.fixture(scope="module")
def lj_unit():
    """LJ(12,6) with De = 2500 eps/re^2 (physics.md section 11): eps = 1 cm-1 A^2, re = 1 A."""
    return LennardJones(2500.0, 1.0), HBAR2_OVER_2U


def test_lennard_jones_against_scipy_fd_every_level(lj_unit):
    p, mu = lj_unit
    t = exact(p, mu)
    # box to 150 re: the last level (b = 0.10) decays by exp(-45) before the end
    ref = fd_levels(p, mu, 0, r_min=0.55, r_max=150.0, h0=0.004)
    assert len(t) == len(ref) == 12
    assert np.abs(t.energy - ref).max() < 1e-5       # issue 3: SciPy check within 1e-5 cm-1


def test_lennard_jones_physics_reference_values(lj_unit):
    # physics.md section 11: DVR levels v = 0..10, +-1e-8, energies below the asymptote.
    # (That list stops at v = 10; its DVR box was too short for v = 11, bound by 0.102,
    # which the SciPy check above confirms.)
    ref = np.array([-2210.420515049, -1698.512238268, -1269.172923655, -916.398338379, -633.830067418,
                    -414.723399521, -251.916140416, -137.801492071, -64.309964185, -22.907681064,
                    -4.621224869])
    p, mu = lj_unit
    t = exact(p, mu, v=list(range(11)))
    dev = np.abs(-t.binding_energy - ref)
    assert dev.max() < 1e-8 + 5e-9                   # reference +-1e-8, plus our own 5e-9
    assert np.all(dev <= 2 * t.error + 1e-8)


def test_rotation_against_scipy_fd(lj_unit):
    p, mu = lj_unit
    for J in (3, 10):
        t = exact(p, mu, J=J)
        ref = fd_levels(p, mu, J, r_min=0.55, r_max=150.0, h0=0.004)
        assert len(t) == len(ref)
        assert np.all(t.J == J)
        assert np.abs(t.energy - ref).max() < 1e-5


def test_bv_is_the_expectation_of_eps_over_r2(lj_unit):
    # Bv = <v| eps/r^2 |v> from normalised SciPy FD eigenvectors at h = 0.002 and 0.001,
    # Richardson-extrapolated (O(h^2) -> O(h^4), about 1e-7 relative).
    p, mu = lj_unit
    r_min, r_max = 0.55, 60.0
    B = []
    for h in (0.002, 0.001):
        r = r_min + h * np.arange(1, int(round((r_max - r_min) / h)))
        w, U = scipy.linalg.eigh_tridiagonal(2 / h ** 2 + p(r), np.full(len(r) - 1, -1 / h ** 2),
                                             select="i", select_range=(0, 8))
        B.append(np.sum(U ** 2 / r[:, None] ** 2, axis=0) / np.sum(U ** 2, axis=0))
    Bfd = (4 * B[1] - B[0]) / 3
    t = exact(p, mu, v=list(range(9)))
    assert np.allclose(t.Bv, Bfd, rtol=1e-6, atol=0)


def test_parameter_derivatives_hellmann_feynman():
    # Hellmann-Feynman [Feynman, Phys. Rev. 56, 340 (1939)]: dE_v/dp = <v| dV/dp |v>, checked
    # against central differences of the exact energies (step 1e-5 relative, error ~1e-8 rel).
    p = LennardJones(5000.0, 3.0)
    vs = np.array([0, 20, 50])
    res = _core.exact_levels(*p._core_args(), MU, np.array([2]), v=vs, want_dVdp=True)
    for k, name in enumerate(p.param_names):
        h = 1e-5 * p.params[name]
        ep = _core.exact_levels(*p.with_params(**{name: p.params[name] + h})._core_args(), MU, np.array([2]),
                                v=vs, energy_tol=1e-10)["energy"]
        em = _core.exact_levels(*p.with_params(**{name: p.params[name] - h})._core_args(), MU, np.array([2]),
                                v=vs, energy_tol=1e-10)["energy"]
        fd = (ep - em) / (2 * h)
        assert np.allclose(res["dE_dp"][:, k], fd, rtol=1e-6, atol=1e-6 * np.abs(fd).max())


# ---------------------------------------------------------------- weakly bound, node counting

def test_lennard_jones_level_bound_by_1e4_is_converged():
    # De tuned so that the last of 55 levels is bound by 1e-4 cm-1 (outer turning point about
    # 60 A, decay length 92 A). "Converged": the default result agrees with a run at 100 times
    # tighter tolerance, 1000 times smaller min_binding (a longer grid) within the stated errors.
    def last_binding(De):
        t = exact(LennardJones(De, 3.0), MU)
        return t.binding_energy[-1] if len(t) == 55 else -1.0
    De = brentq(lambda d: last_binding(d) - 1e-4, 4850.0, 5000.0, xtol=1e-9)
    p = LennardJones(De, 3.0)
    t = exact(p, MU)
    fine = exact(p, MU, tolerance=1e-9, min_binding=1e-10)
    assert len(t) == len(fine) == 55
    assert abs(t.binding_energy[-1] - 1e-4) < 1e-6
    dev = np.abs(t.energy - fine.energy)
    assert dev.max() < 1e-6 and np.all(dev <= 2 * (t.error + fine.error))
    r, u = wkbfit.exact_wavefunction(p, MU, 54)
    assert r[-1] > 2000


def test_wavefunction_nodes_equal_v(lj_unit):
    # Sturm's oscillation theorem: level v has v nodes (v is assigned by counting them).
    p, mu = lj_unit
    for v in (0, 1, 5, 11):
        r, u = wkbfit.exact_wavefunction(p, mu, v)
        big = u[np.abs(u) > 1e-8 * np.abs(u).max()]
        assert np.count_nonzero(np.diff(np.sign(big)) != 0) == v
        assert u[np.argmax(np.abs(u) > 1e-8 * np.abs(u).max())] > 0


def test_count_and_v_agree_with_wkb():
    # Smooth heavy wells: the WKB and exact counts agree and every v is the same level (WKB
    # within a tenth of the local spacing). First-order WKB misses the Dunham Y00 term
    # (about -B/4 here), so it is not expected to agree better than that.
    for p in (LennardJones(5000.0, 3.0), Morse(5000.0, 3.0, 1.2), LennardJones(3000.0, 3.5, 10, 6)):
        w = wkbfit.levels(p, MU, method="wkb")
        t = exact(p, MU)
        assert len(w) == len(t)
        spacing = np.abs(np.gradient(t.energy)) if len(t) > 1 else np.array([np.inf])
        assert np.all(np.abs(w.energy - t.energy) < 0.1 * spacing)


def test_compare_wkb_exact_table():
    p = LennardJones(5000.0, 3.0)
    c = wkbfit.compare_wkb_exact(p, MU, order=1, ends="maslov")
    assert len(c) == 55
    assert np.allclose(c.difference, c.wkb_energy - c.exact_energy)
    v, J, d = c.largest_difference()
    assert J == 0 and abs(d) == np.abs(c.difference).max()
    text = c.to_text(uncertainty=0.01)
    assert "largest |WKB - exact|" in text and len(text.splitlines()) == 55 + 4  # title, names, units, last line
    ok = c.good_enough(0.01)
    assert ok.dtype == bool and ok[-1] and not ok[0]


# ---------------------------------------------------------------- bad input

def test_bad_input_raises_clear_value_errors(lj_unit):
    p, mu = lj_unit
    with pytest.raises(ValueError, match=r"v=12 is above the last bound level \(v=11\)"):
        wkbfit.levels(p, mu, v=12, method="exact")
    with pytest.raises(ValueError, match="v=-1"):
        wkbfit.levels(p, mu, v=-1, method="exact")
    with pytest.raises(ValueError, match="no well"):
        wkbfit.levels(p, mu, J=200, method="exact")      # the centrifugal term removes the well
    with pytest.raises(ValueError, match="mu"):
        exact_levels(p, -1.0)
    with pytest.raises(ValueError, match="tolerance"):
        exact_levels(p, mu, tolerance=0)
    with pytest.raises(ValueError, match="potential"):
        exact_levels("morse", mu)
    with pytest.raises(ValueError):
        wkbfit.exact_wavefunction(p, mu, [0, 1])


def test_inputs_are_not_modified(lj_unit):
    p, mu = lj_unit
    v = np.array([0, 3, 5])
    J = np.array([0, 1])
    t = wkbfit.levels(p, mu, v=v, J=J, method="exact")
    assert np.array_equal(v, [0, 3, 5]) and np.array_equal(J, [0, 1])
    assert len(t) == 6 and set(t.J.tolist()) == {0, 1}
