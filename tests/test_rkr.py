"""Tests of the RKR inversion (wkbfit.rkr_turning_points, wkbfit.rkr_potential; csrc/rkr.c).

References used as check values:
- Morse, Phys. Rev. 34, 57 (1929) (citation from memory; physics.md section 6): for
  V = De (1 - exp(-a (r - re)))^2 the levels G(v) = we (v+1/2) - wexe (v+1/2)^2 are exact in
  first-order WKB, and the turning points at energy E are re - ln(1 -+ sqrt(E/De))/a.
- physics.md section 5: printed RKR test values for the H35Cl-like Morse potential.
- H35Cl constants we = 2990.946, wexe = 52.8186, Be = 10.59341, alpha_e = 0.30718 cm-1 from Huber &
  Herzberg (1979) via the NIST WebBook (physics.md section 8, "2nd"); re = 1.27455 A (from memory);
  mu = 0.979592539 u from AME2020 masses (physics.md section 8).
- Pekeris, Phys. Rev. 45, 98 (1934) (citation from memory; physics.md section 6):
  alpha_e = 6 sqrt(wexe Be^3)/we - 6 Be^2/we for a Morse potential.
- SciPy's QUADPACK (scipy.integrate.quad with the algebraic end-point weight) for Klein's integrals.
"""
import math

import numpy as np
import pytest
from scipy.integrate import quad

import wkbfit
from wkbfit import _core

C_U = wkbfit.HBAR2_OVER_2U
# H35Cl X state, Huber & Herzberg 1979 via the NIST WebBook (physics.md section 8)
WE, WEXE, BE_HH, ALPHA_HH = 2990.946, 52.8186, 10.59341, 0.30718
RE = 1.27455  # A (from memory, physics.md section 8)
MU = 0.979592539  # u, 1H35Cl from AME2020 (physics.md section 8)
G_MORSE = [WE, -WEXE]  # Y_10, Y_20: the exact Morse term values
V_TEST = np.arange(0.0, 21.0)  # v = 0..20
X_FIT = 20.5  # B(v) is represented on v + 1/2 in [0, X_FIT]


def morse_constants(mu):
    a = math.sqrt(WEXE * mu / C_U)  # wexe = a^2 C_u/mu (Morse 1929; physics.md section 6)
    De = WE ** 2 / (4 * WEXE)
    return a, De


def morse_turning_points(x, mu):
    """Exact turning points at G = we x - wexe x^2 (Morse 1929)."""
    a, De = morse_constants(mu)
    s = np.sqrt((WE * x - WEXE * x * x) / De)
    return RE - np.log1p(s) / a, RE - np.log1p(-s) / a


def semiclassical_B(mu, x):
    """B(v) of the Morse potential as the classical orbit average of C_u/(mu r^2) at E = G(v)
    (physics.md section 3), which is the B(v) that makes RKR exact for this potential."""
    a, De = morse_constants(mu)
    model, params, curve = wkbfit.Morse(De=De, re=RE, a=a)._core_args()
    G = WE * x - WEXE * x * x
    return _core.wkb_orbits(model, params, curve, mu, 0.0, De - G)["Bv"]


def morse_B_coefficients(mu, degree=22, x_fit=X_FIT):
    """B(v) = sum_k Y_k1 (v+1/2)^k: a Chebyshev interpolant of the orbit average on [0, x_fit],
    converted to powers of (v+1/2)."""
    k = np.arange(degree + 1)
    x = x_fit / 2 * (1 - np.cos((k + 0.5) * np.pi / (degree + 1)))
    cheb = np.polynomial.Chebyshev.fit(x, semiclassical_B(mu, x), degree, domain=[0, x_fit])
    return cheb.convert(kind=np.polynomial.Polynomial, domain=[-1, 1], window=[-1, 1]).coef


@pytest.fixture(scope="module")
def B_morse():
    Bc = morse_B_coefficients(MU)
    # The representation itself: 3e-13 cm-1 measured against the orbit average between the nodes.
    x = np.linspace(1e-3, X_FIT, 301)
    assert np.max(np.abs(np.polynomial.polynomial.polyval(x, Bc) - semiclassical_B(MU, x))) < 2e-12
    # Its slope at the minimum is Pekeris' alpha_e (to 1e-7 relative, physics.md section 6).
    Be = C_U / (MU * RE ** 2)
    alpha_pekeris = 6 * math.sqrt(WEXE * Be ** 3) / WE - 6 * Be ** 2 / WE
    assert abs(-Bc[1] / alpha_pekeris - 1) < 1e-7
    assert abs(Bc[0] / Be - 1) < 1e-12
    return Bc


# ------------------------------------------------------------------ Morse: exact turning points

def test_morse_turning_points_exact(B_morse):
    # Reference: Morse's exact turning points re - ln(1 -+ sqrt(G/De))/a, v = 0..20.
    # Measured: 6e-15 A (limited by rounding); tolerance 1e-12 A.
    tp = wkbfit.rkr_turning_points(G_MORSE, B_morse, MU, V_TEST)
    r1, r2 = morse_turning_points(V_TEST + 0.5, MU)
    assert np.max(np.abs(tp.inner_turning_point - r1)) < 1e-12
    assert np.max(np.abs(tp.outer_turning_point - r2)) < 1e-12
    # energies are G(v) itself
    x = V_TEST + 0.5
    assert np.allclose(tp.energy, WE * x - WEXE * x * x, rtol=1e-15, atol=1e-10)
    # the reported quadrature error is at the rounding floor and honest here
    assert np.all(tp.error < 1e-13)
    assert np.all(np.abs(tp.inner_turning_point - r1) <= tp.error + 1e-14)


def test_morse_printed_values_of_physics_notes():
    # Reference: physics.md section 5, v=0: r1 = 1.1766496705, r2 = 1.3927904541;
    # v=10: r1 = 0.9462923175, r2 = 2.1318053050. Those were computed with the CODATA 2018 value
    # C_u = 16.85762919 cm-1 A^2 (physics.md section 1); wkbfit uses CODATA 2022 (1.4e-9 lower), which
    # moves r2(10) by 5e-10 A. Every length here depends on mu only through C_u/mu, so the CODATA 2018
    # numbers follow from the reduced mass scaled by C_u(2022)/C_u(2018).
    mu_2018 = MU * C_U / 16.85762919
    tp = wkbfit.rkr_turning_points(G_MORSE, morse_B_coefficients(mu_2018), mu_2018, [0, 10])
    printed = [(1.1766496705, 1.3927904541), (0.9462923175, 2.1318053050)]
    for i, (r1, r2) in enumerate(printed):
        # printed to 10 decimals: half a unit of the last digit plus 1e-11 A
        assert abs(tp.inner_turning_point[i] - r1) < 6e-11
        assert abs(tp.outer_turning_point[i] - r2) < 6e-11
    # with wkbfit's own constant the same values hold to the 5e-10 A shift named above
    tp22 = wkbfit.rkr_turning_points(G_MORSE, morse_B_coefficients(MU), MU, [0, 10])
    assert np.max(np.abs(tp22.outer_turning_point - [p[1] for p in printed])) < 1e-9


def test_f_is_the_morse_half_width_whatever_B():
    # Reference: for Morse, f(v) = (r2 - r1)/2 = ln((1 + s)/(1 - s))/(2a), s = sqrt(G/De) (Morse 1929),
    # and f depends on G alone. Measured 1e-15 A; tolerance 1e-12 A, v from 0 to near the top (v = 27.5).
    v = np.concatenate([V_TEST, [24.0, 27.0, 27.5]])
    r1, r2 = morse_turning_points(v + 0.5, MU)
    half_width = (r2 - r1) / 2
    for B in ([BE_HH], [BE_HH, -ALPHA_HH], [3.0, 0.1, -0.001]):
        tp = wkbfit.rkr_turning_points(G_MORSE, B, MU, v)
        assert np.max(np.abs(tp.f - half_width)) < 1e-12


def test_minimum_is_the_limit_of_the_turning_points(B_morse):
    # Reference: as v -> -1/2, r1 and r2 -> re = sqrt(C_u/(mu Y_01)) (B_e = C_u/(mu re^2),
    # physics.md section 3), approaching like sqrt(v + 1/2); here re is Morse's 1.27455 A.
    tp = wkbfit.rkr_turning_points(G_MORSE, B_morse, MU, -0.5 + np.array([1e-4, 1e-8, 1e-12]))
    assert abs(tp.re - RE) < 1e-12
    dist = np.maximum(tp.re - tp.inner_turning_point, tp.outer_turning_point - tp.re)
    assert np.all(tp.inner_turning_point < tp.re) and np.all(tp.outer_turning_point > tp.re)
    assert dist[2] < 2e-7 and 90 < dist[1] / dist[2] < 110  # ~ sqrt(v + 1/2)
    # the geometric mean sqrt(r1 r2) = sqrt(f/g) tends to re at once
    assert abs(math.sqrt(tp.inner_turning_point[2] * tp.outer_turning_point[2]) - RE) < 1e-12


# ------------------------------------------------------------------ against SciPy, a general expansion

def test_klein_integrals_against_scipy():
    # Reference: SciPy quad with weight (v - v')^(-1/2) (QUADPACK QAWS) on the definitions
    # f = sqrt(C_u/mu) int dv'/sqrt(G(v) - G(v')), g = sqrt(mu/C_u) int B dv'/sqrt(G(v) - G(v')).
    # Input: H35Cl we, wexe, Be, alpha_e (Huber & Herzberg) plus an arbitrary cubic Y_30 and Y_21 to
    # exercise the Taylor shift (input only; the check values are SciPy's). Tolerance 1e-11 relative.
    G = [WE, -WEXE, 0.2]
    B = [BE_HH, -ALPHA_HH, 0.002]
    Gf = np.polynomial.Polynomial([0.0] + G)
    Bf = np.polynomial.Polynomial(B)
    v = np.array([0.0, 3.0, 10.0, 20.0])
    tp = wkbfit.rkr_turning_points(G, B, MU, v)
    for i, vi in enumerate(v):
        x = vi + 0.5

        def kernel(xp):  # 1/sqrt((G(x) - G(x'))/(x - x')), smooth
            return 1.0 / math.sqrt((Gf(x) - Gf(xp)) / (x - xp)) if xp < x else 1.0 / math.sqrt(Gf.deriv()(x))

        If = quad(kernel, 0.0, x, weight="alg", wvar=(0.0, -0.5), epsabs=0, epsrel=1e-13)[0]
        Ig = quad(lambda xp: Bf(xp) * kernel(xp), 0.0, x, weight="alg", wvar=(0.0, -0.5), epsabs=0,
                  epsrel=1e-13)[0]
        f, g = math.sqrt(C_U / MU) * If, math.sqrt(MU / C_U) * Ig
        assert tp.f[i] == pytest.approx(f, rel=1e-11)
        assert tp.g[i] == pytest.approx(g, rel=1e-11)
        r2 = math.sqrt(f * f + f / g) + f
        assert tp.outer_turning_point[i] == pytest.approx(r2, rel=1e-11)
        assert tp.inner_turning_point[i] == pytest.approx(f / g / r2, rel=1e-11)
    assert np.allclose(tp.energy, Gf(v + 0.5), rtol=1e-15)


def test_error_estimate_is_honest_near_the_top():
    # Reference: the same integrals with GSL's 1024-node Gauss-Legendre rule. Close below the maximum
    # of G (v = 27.813 for this Morse G) the integrand peaks sharply; the estimate must cover the true
    # quadrature error of the default 100-node rule.
    G, B = G_MORSE, [BE_HH, -ALPHA_HH]
    v = np.array([5.0, 27.0, 27.7, 27.78, 27.8, 27.81])
    ref = wkbfit.rkr_turning_points(G, B, MU, v, quadrature_points=1024)
    for n in (32, 64, 100):
        tp = wkbfit.rkr_turning_points(G, B, MU, v, quadrature_points=n)
        true = np.maximum(np.abs(tp.inner_turning_point - ref.inner_turning_point),
                          np.abs(tp.outer_turning_point - ref.outer_turning_point))
        assert np.all(true <= tp.error + 1e-14)
    assert tp.error[0] < 1e-13 and tp.error[-1] > 1e-12  # it does grow where the integrand peaks


# ------------------------------------------------------------------ the point-wise potential

def sqrt_grid(n, x_top):
    s = np.linspace(0.0, math.sqrt(x_top), n + 1)[1:]
    return s * s - 0.5


def test_round_trip_wkb_levels_of_rkr_curve(B_morse):
    # Reference: the input G(v) (Morse 1929: exact Morse levels, which first-order WKB reproduces).
    # The WKB levels v = 0..20 of the spline through the RKR points reproduce G(v); the deviation is the
    # cubic spline's, so it falls like h^4 with the spacing. Measured: 2.4e-4 cm-1 with 80 values of v,
    # 1.6e-5 cm-1 with 160 (uniform in sqrt(v + 1/2) up to v = 20.5).
    errs = []
    for n in (80, 160):
        pot = wkbfit.rkr_potential(G_MORSE, B_morse, MU, v=sqrt_grid(n, 21.0))
        table = wkbfit.levels(pot, MU, v=list(range(21)), order=1, ends="maslov")
        x = table.v + 0.5
        errs.append(np.max(np.abs(table.energy - (WE * x - WEXE * x * x))))
    assert errs[1] < 5e-5
    assert errs[0] / errs[1] > 8  # spline convergence, O(h^4) (common practice)
    # the curve passes through the minimum (re, 0) and the RKR points
    assert pot(np.array([RE]))[0] == pytest.approx(0.0, abs=1e-9)
    a, De = morse_constants(MU)
    assert np.max(np.abs(pot.V - wkbfit.Morse(De=De, re=RE, a=a)(pot.r))) < 1e-9 * De


def test_rkr_potential_points_and_default_grid():
    # Reference: Morse G(v) (Morse 1929) with its semiclassical B(v) represented up to v = 27.3
    # (degree 16): points at G(v), the minimum at re = sqrt(C_u/(mu Y_01)),
    # and the default v running up to v = 27, the last integer v below the maximum of G at
    # v = we/(2 wexe) - 1/2 = 27.81 (physics.md section 6). The WKB levels v = 0..17 of the curve
    # reproduce G(v) to 1e-5 cm-1 (measured 3e-6); higher up, the degree-16 B(v), 5e-4 cm-1 off near
    # the top, limits them to a few 1e-3 cm-1.
    B = morse_B_coefficients(MU, degree=16, x_fit=27.8)
    pot = wkbfit.rkr_potential(G_MORSE, B, MU)
    n = 8 * 28
    assert len(pot.r) == 2 * n + 1 and np.all(np.diff(pot.r) > 0)
    re = math.sqrt(C_U / (MU * B[0]))
    assert pot.r[n] == pytest.approx(re, rel=1e-15) and pot.V[n] == 0.0
    assert pot.V.max() == pytest.approx(WE * 27.5 - WEXE * 27.5 ** 2, rel=1e-14)
    tp = wkbfit.rkr_turning_points(G_MORSE, B, MU, [27.0])
    assert pot.r[0] == tp.inner_turning_point[0] and pot.r[-1] == tp.outer_turning_point[0]
    assert np.array_equal(pot.V[:n], pot.V[n + 1:][::-1])
    table = wkbfit.levels(pot, MU, v=list(range(18)), order=1, ends="maslov")
    x = table.v + 0.5
    assert np.max(np.abs(table.energy - (WE * x - WEXE * x * x))) < 1e-5


def test_rkr_potential_explains_a_bent_inner_wall():
    # With a B(v) that is not consistent with G(v) near dissociation (here the two-term
    # Be - alpha_e (v+1/2) of Huber & Herzberg, extrapolated far above the data), RKR's inner wall
    # bends over near the top, a known failure of RKR inversions (common practice); the error
    # names the points and says what to do.
    with pytest.raises(ValueError, match="smaller range of v"):
        wkbfit.rkr_potential(G_MORSE, [BE_HH, -ALPHA_HH], MU)


def test_mu_from_isotopologue_label(B_morse):
    # Reference: AME2020 reduced mass of 1H35Cl, 0.979592539 u (physics.md section 8).
    a = wkbfit.rkr_turning_points(G_MORSE, B_morse, "1H35Cl", [0.0, 5.0])
    b = wkbfit.rkr_turning_points(G_MORSE, B_morse, ("1H", "35Cl"), [0.0, 5.0])
    c = wkbfit.rkr_turning_points(G_MORSE, B_morse, MU, [0.0, 5.0])
    assert a.mu == pytest.approx(MU, rel=1e-9) and b.mu == a.mu
    assert np.allclose(a.outer_turning_point, c.outer_turning_point, rtol=1e-9, atol=0)


def test_result_object():
    tp = wkbfit.rkr_turning_points(G_MORSE, [BE_HH], MU, 3.0)
    assert len(tp) == 1 and tp.v[0] == 3.0
    with pytest.raises(ValueError):
        tp.outer_turning_point[0] = 1.0  # read-only
    text = tp.to_text()
    assert "RKR" in text and "%.10f" % tp.outer_turning_point[0] in text
    assert "RKRTurningPoints" in repr(tp)


# ------------------------------------------------------------------ bad input

@pytest.mark.parametrize("G, B, mu, v, words", [
    ([-100.0, 1.0], [10.0], MU, [1.0], ["Y_10", "-100"]),                      # G falls from the start
    ([0.0, 1.0], [10.0], MU, [1.0], ["Y_10"]),                                  # dG/dv = 0 at v = -1/2
    (G_MORSE, [10.0], MU, [28.0], ["v=28", "27.81"]),                           # beyond the maximum of G
    (G_MORSE, [10.0], 0.0, [1.0], ["mu=0"]),
    (G_MORSE, [10.0], -1.0, [1.0], ["mu=-1"]),
    (G_MORSE, [10.0], math.inf, [1.0], ["mu=inf"]),
    ([WE, math.nan], [10.0], MU, [1.0], ["G_coefficients[1]", "Y_20", "nan"]),
    (G_MORSE, [10.0, math.inf], MU, [1.0], ["B_coefficients[1]", "Y_11", "inf"]),
    (G_MORSE, [10.0, -1.0], MU, [12.0], ["B(v)", "9.5", "must stay > 0"]),                      # B turns negative at v = 9.5
    (G_MORSE, [10.0], MU, [-0.5], ["v=-0.5", "-1/2"]),
    (G_MORSE, [10.0], MU, [math.nan], ["v=nan"]),
    (G_MORSE, [], MU, [1.0], ["B_coefficients", "non-empty"]),
    (G_MORSE, [10.0] * 40, MU, [1.0], ["B_coefficients", "32"]),
])
def test_bad_input_names_the_value(G, B, mu, v, words):
    G_in, B_in, v_in = np.array(G, float), np.array(B, float), np.array(v, float)
    copies = G_in.copy(), B_in.copy(), v_in.copy()
    with pytest.raises(ValueError) as info:
        wkbfit.rkr_turning_points(G_in, B_in, mu, v_in)
    for w in words:
        assert w in str(info.value), (w, str(info.value))
    for a, b in zip((G_in, B_in, v_in), copies):  # the user's arrays are left unchanged
        assert np.array_equal(a, b, equal_nan=True)


def test_bad_quadrature_and_v_lists():
    with pytest.raises(ValueError, match="quadrature_points=50"):
        wkbfit.rkr_turning_points(G_MORSE, [10.0], MU, [1.0], quadrature_points=50)
    with pytest.raises(ValueError, match="quadrature_points"):
        wkbfit.rkr_turning_points(G_MORSE, [10.0], MU, [1.0], quadrature_points=1.5)
    with pytest.raises(ValueError, match="at least two"):
        wkbfit.rkr_potential(G_MORSE, [10.0], MU, v=[1.0])
    with pytest.raises(ValueError, match="give v explicitly"):
        wkbfit.rkr_potential([WE, 1.0], [10.0], MU)  # G increases for ever
    with pytest.raises(ValueError, match="not a molecule"):
        wkbfit.rkr_turning_points(G_MORSE, [10.0], "not a molecule", [1.0])
