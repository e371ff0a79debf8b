"""Airy functions of the C core (csrc/airy.c): GSL's values and the large-|z| asymptotic forms."""
import math

import mpmath
import numpy as np
import pytest
import scipy.optimize
import scipy.special

from wkbfit import _core


def coefficient(k):
    """c_k = Gamma(3k+1/2)/(54^k k! Gamma(k+1/2)) (A&S 10.4.59; DLMF 9.7.2), c_0 = 1, in double precision."""
    return math.gamma(3 * k + 0.5) / (54.0 ** k * math.factorial(k) * math.gamma(k + 0.5))


def zeta_of(x):
    return 2.0 / 3.0 * x ** 1.5


def envelope(x):
    """pi^(-1/2) x^(-1/4): the amplitude of Ai(-x) at large x (A&S 10.4.60)."""
    return 1.0 / (math.sqrt(math.pi) * x ** 0.25)


def first_omitted(x, terms):
    """c_n zeta^(-n), the first term left out of an n-term expansion."""
    return coefficient(terms) * zeta_of(x) ** (-terms)


# ---------------------------------------------------------------- values at z = 0 and special values

def test_values_at_zero():
    # A&S 10.4.4 and 10.4.5: Ai(0) = 3^(-2/3)/Gamma(2/3), Ai'(0) = -3^(-1/3)/Gamma(1/3),
    # Bi(0) = 3^(-1/6)/Gamma(2/3), Bi'(0) = 3^(1/6)/Gamma(1/3). Tolerance 1e-14 relative.
    ai, dai, bi, dbi = (float(v) for v in _core.airy(0.0))
    assert ai == pytest.approx(3 ** (-2 / 3) / math.gamma(2 / 3), rel=1e-14, abs=0)
    assert dai == pytest.approx(-(3 ** (-1 / 3)) / math.gamma(1 / 3), rel=1e-14, abs=0)
    assert bi == pytest.approx(3 ** (-1 / 6) / math.gamma(2 / 3), rel=1e-14, abs=0)
    assert dbi == pytest.approx(3 ** (1 / 6) / math.gamma(1 / 3), rel=1e-14, abs=0)
    # The printed values of physics.md section 6 (15 significant digits).
    assert ai == pytest.approx(0.355028053887817, rel=2e-15)
    assert dai == pytest.approx(-0.258819403792807, rel=2e-15)


def test_wronskian():
    # Wronskian W{Ai, Bi} = Ai Bi' - Ai' Bi = 1/pi (A&S 10.4.10), to 1e-13 relative for |z| <= 10.
    z = np.linspace(-10.0, 10.0, 201)
    ai, dai, bi, dbi = _core.airy(z)
    np.testing.assert_allclose(ai * dbi - dai * bi, 1.0 / math.pi, rtol=1e-13, atol=0)


# ---------------------------------------------------------------- GSL against SciPy and mpmath

def amplitude_scale(z, derivative):
    """|Ai(z)| scale: the envelope of the oscillations for z < 0 (x^(+1/4) for the derivatives)."""
    x = np.abs(z)
    power = 0.25 if derivative else -0.25
    return np.where(z < 0, np.maximum(x, 1.0) ** power / math.sqrt(math.pi), np.inf)


def test_gsl_against_scipy_at_random_points():
    # scipy.special.airy (Cephes/AMOS); 1e-12 relative where the value is not near a zero, i.e. where it exceeds
    # 10% of the local oscillation amplitude. Measured: 1.1e-13 for -30 <= z <= 30.
    rng = np.random.default_rng(20240501)
    z = rng.uniform(-30.0, 30.0, 2000)
    ours = _core.airy(z)
    ref = scipy.special.airy(z)
    for k, name in enumerate(["Ai", "Ai'", "Bi", "Bi'"]):
        scale = amplitude_scale(z, derivative=k % 2 == 1)
        away_from_zeros = (z >= 0) | (np.abs(ref[k]) > 0.1 * scale)
        assert away_from_zeros.sum() > 1500, name
        rel = np.abs(ours[k] - ref[k])[away_from_zeros] / np.abs(ref[k][away_from_zeros])
        assert rel.max() <= 1e-12, (name, rel.max())


def test_gsl_error_estimates_against_mpmath():
    # mpmath at 40 digits as the exact value. For Ai and Bi GSL's error estimate is honest in the sense
    # |value - exact| <= 2 err (the check GSL's own tests use). For the derivatives at z < 0 we measured GSL's err
    # to be up to ~20x too small next to their zeros, so they are held to 1e-13 of the local amplitude instead.
    mpmath.mp.dps = 40
    rng = np.random.default_rng(7)
    z = np.concatenate([rng.uniform(-30.0, 30.0, 150), [-1e3, -1e4, 50.0, 100.0, 104.0]])
    values, errors = _core.airy(z, errors=True)
    for i, zi in enumerate(z):
        exact = [float(mpmath.airyai(zi)), float(mpmath.airyai(zi, 1)), float(mpmath.airybi(zi)),
                 float(mpmath.airybi(zi, 1))]
        for k in (0, 2):
            assert abs(values[k][i] - exact[k]) <= 2 * errors[k][i], (k, zi)
        for k in (1, 3):
            scale = max(abs(exact[k]), max(-zi, 1.0) ** 0.25 / math.sqrt(math.pi)) if zi < 0 else abs(exact[k])
            # the phase zeta is known to ~1e-16 zeta, so the bound grows with it
            assert abs(values[k][i] - exact[k]) <= (1e-13 + 4e-16 * zeta_of(abs(zi))) * scale, (k, zi)


def test_shapes_and_input_untouched():
    z = np.array([[-3.0, -1.0], [0.5, 2.0]])
    before = z.copy()
    ai, dai, bi, dbi = _core.airy(z)
    assert ai.shape == dai.shape == bi.shape == dbi.shape == (2, 2)
    assert np.array_equal(z, before)
    np.testing.assert_allclose(ai, scipy.special.airy(z)[0], rtol=1e-13)
    assert _core.airy_asymptotic(z, 3).shape == (2, 2)
    assert np.array_equal(z, before)


def test_large_positive_z_underflows_quietly():
    # Ai(104) = 7.4e-309 is subnormal (A&S 10.4.59 leading term); GSL flags underflow, which is a valid result.
    ai, dai, bi, dbi = _core.airy(104.0)
    assert 0.0 <= float(ai) < 1e-307 and float(bi) > 1e306 and np.isfinite(dbi)
    assert float(ai) == pytest.approx(float(mpmath.airyai(104)), rel=1e-6)


# ---------------------------------------------------------------- zeros

@pytest.mark.parametrize("k, table_zero", [
    # A&S table 10.13, zeros a_1..a_3 of Ai, printed to 8 decimals.
    (1, -2.33810741),
    (2, -4.08794944),
    (3, -5.52055983),
])
def test_zeros_of_ai(k, table_zero):
    ai = lambda z: float(_core.airy(z)[0])
    # Ai changes sign across the printed value (half a unit of the last digit is 5e-9).
    assert ai(table_zero - 1e-8) * ai(table_zero + 1e-8) < 0
    root = scipy.optimize.brentq(ai, table_zero - 1e-6, table_zero + 1e-6, xtol=1e-15)
    assert abs(root - table_zero) <= 5e-9
    # and agrees with SciPy's zeros (scipy.special.ai_zeros) to 1e-12
    assert abs(root - scipy.special.ai_zeros(3)[0][k - 1]) <= 1e-12


def test_exactly_three_zeros_above_a4():
    # a_4 = -6.78670809 (A&S table 10.13): Ai has exactly the zeros a_1..a_3 in (-6.5, 0) and none for z > 0.
    z = np.linspace(-6.5, 5.0, 20001)
    ai = _core.airy(z)[0]
    assert np.count_nonzero(np.diff(np.sign(ai)) != 0) == 3
    assert np.all(ai[z >= 0] > 0)


# ---------------------------------------------------------------- asymptotic forms

def test_asymptotic_forms_match_mpmath_evaluation_of_the_same_formulas():
    # The truncated series of A&S 10.4.59/10.4.60 evaluated independently in mpmath (c_k from Gamma functions),
    # against the C implementation (c_k from the term ratio): 1e-13 relative (z > 0) or of the larger of the value
    # and the envelope (z < 0; far outside its range the truncated series is large and oscillates).
    mpmath.mp.dps = 30

    def series(z, n):
        x = mpmath.mpf(abs(z))
        zeta = mpmath.mpf(2) / 3 * x ** mpmath.mpf(1.5)
        c = [mpmath.gamma(3 * k + mpmath.mpf(1) / 2) / (mpmath.mpf(54) ** k * mpmath.factorial(k)
                                                        * mpmath.gamma(k + mpmath.mpf(1) / 2)) for k in range(n)]
        if z > 0:
            s = sum((-1) ** k * c[k] * zeta ** (-k) for k in range(n))
            return s * mpmath.exp(-zeta) / (2 * mpmath.sqrt(mpmath.pi) * x ** mpmath.mpf(0.25))
        even = sum((-1) ** (k // 2) * c[k] * zeta ** (-k) for k in range(0, n, 2))
        odd = sum((-1) ** ((k - 1) // 2) * c[k] * zeta ** (-k) for k in range(1, n, 2))
        phase = zeta + mpmath.pi / 4
        return (mpmath.sin(phase) * even - mpmath.cos(phase) * odd) / (mpmath.sqrt(mpmath.pi) * x ** mpmath.mpf(0.25))

    for n in (1, 2, 3, 5, 10, 20):
        for z in (1.5, 3.0, 7.0, 25.0, -1.5, -3.0, -7.0, -25.0):
            ours = float(_core.airy_asymptotic([z], n)[0])
            exact = float(series(z, n))
            scale = abs(exact) if z > 0 else max(abs(exact), envelope(abs(z)))
            assert abs(ours - exact) <= 1e-13 * scale, (z, n, ours, exact)


ZS = [2.0, 3.0, 5.0, 10.0, 20.0, 40.0]
GSL_FLOOR = 1e-12  # below this the comparison measures GSL's rounding, not the truncation


@pytest.mark.parametrize("terms", [1, 2, 3, 4, 6, 8])
def test_positive_z_error_is_the_first_omitted_term(terms):
    # For real z > 0 the remainder of the Ai expansion is bounded by the first omitted term and has its sign
    # (DLMF 9.7(iv), from memory), so |Ai_n/Ai - 1| <= c_n zeta^-n. Measured ratio err/bound: 0.35 .. 1.0, so the
    # error also stays above 0.3 of the bound (it is the truncation error, falling as zeta^-n).
    z = np.array(ZS)
    ai = _core.airy(z)[0]
    rel = np.abs(_core.airy_asymptotic(z, terms) / ai - 1.0)
    bound = np.array([first_omitted(x, terms) for x in ZS])
    resolved = bound > GSL_FLOOR
    assert np.all(rel[resolved] <= bound[resolved])
    assert np.all(rel[resolved] >= 0.3 * bound[resolved])
    assert np.all(np.diff(rel[resolved]) < 0)  # falls with z
    assert np.all(rel <= np.maximum(bound, 1e-13))


def test_three_term_errors_quoted_in_physics_notes():
    # physics.md section 6 [N]: with three terms, ~3e-3 at z = 2 and ~4e-6 at z = 10 (z > 0). Measured 3.4e-3 and
    # 3.8e-6; tolerance: the quoted value within a factor 1.5.
    rel = np.abs(_core.airy_asymptotic([2.0, 10.0], 3) / _core.airy([2.0, 10.0])[0] - 1.0)
    assert 3e-3 / 1.5 <= rel[0] <= 3e-3 * 1.5
    assert 4e-6 / 1.5 <= rel[1] <= 4e-6 * 1.5


def test_series_is_asymptotic_not_convergent():
    # At fixed z = 2 adding terms helps only up to about n ~ 2 zeta/3 ... then the error grows again
    # (the c_k grow factorially: DLMF 9.7(iv)). Measured: n = 4 gives 2.4e-3, n = 8 gives 6.7e-3, n = 16 worse.
    ai = float(_core.airy(2.0)[0])
    err = {n: abs(float(_core.airy_asymptotic(2.0, n)) / ai - 1) for n in (1, 4, 8, 16)}
    assert err[4] < err[1] and err[4] < err[8] < err[16]


@pytest.mark.parametrize("terms", [1, 2, 3, 4, 6, 8])
def test_negative_z_error_falls_as_predicted(terms):
    # For z < 0 the error relative to the envelope pi^(-1/2) |z|^(-1/4) oscillates; over each window
    # [x, 1.25 x] its maximum stays below the first omitted terms of the two sums, c_n zeta^-n + c_(n+1)
    # zeta^-(n+1) at the window start (common practice bound; measured ratio 0.1 .. 1.0), and falls with x.
    window_max, bounds = [], []
    for x0 in ZS:
        x = np.linspace(x0, 1.25 * x0, 200)
        err = np.abs(_core.airy_asymptotic(-x, terms) - _core.airy(-x)[0]) / envelope(x)
        window_max.append(err.max())
        bounds.append(first_omitted(x0, terms) + first_omitted(x0, terms + 1))
    window_max, bounds = np.array(window_max), np.array(bounds)
    resolved = bounds > GSL_FLOOR
    assert np.all(window_max[resolved] <= bounds[resolved])
    if terms <= 4:
        assert np.all(window_max[resolved] >= 0.1 * bounds[resolved])
    assert np.all(np.diff(window_max[resolved]) < 0)


def test_turning_point_phase_is_pi_over_4():
    # A&S 10.4.60: Ai(-x) sqrt(pi) x^(1/4) -> sin(zeta + pi/4); the next term is -cos(...) c_1/zeta, so the
    # deviation is at most ~c_1/zeta = (5/72)/zeta and falls with x.
    deviations = []
    for x0 in (10.0, 30.0, 100.0, 300.0):
        x = np.linspace(x0, 1.1 * x0, 400)
        scaled = _core.airy(-x)[0] * math.sqrt(math.pi) * x ** 0.25
        dev = np.abs(scaled - np.sin(zeta_of(x) + math.pi / 4)).max()
        assert dev <= 1.05 * (5 / 72) / zeta_of(x0)
        deviations.append(dev)
    assert np.all(np.diff(deviations) < 0)

    # Fit scaled = A sin(zeta) + B cos(zeta) on 50 <= x <= 60: amplitude 1 and phase atan2(B, A) = pi/4 to within
    # twice the first correction c_1/zeta (zeta >= 235 here).
    x = np.linspace(50.0, 60.0, 2001)
    zeta = zeta_of(x)
    scaled = _core.airy(-x)[0] * math.sqrt(math.pi) * x ** 0.25
    (a, b), *_ = np.linalg.lstsq(np.column_stack([np.sin(zeta), np.cos(zeta)]), scaled, rcond=None)
    tol = 2 * (5 / 72) / zeta_of(50.0)
    assert abs(math.atan2(b, a) - math.pi / 4) <= tol
    assert abs(math.hypot(a, b) - 1.0) <= tol


# ---------------------------------------------------------------- bad input

@pytest.mark.parametrize("bad", [np.nan, [1.0, np.nan], 105.0, -2e6, np.inf])
def test_airy_rejects_bad_z(bad):
    with pytest.raises(ValueError, match=r"z=.* is outside the range of the Airy functions, -1e\+06 <= z <= 104"):
        _core.airy(bad)


@pytest.mark.parametrize("bad", [np.nan, 0.0, -np.inf, np.inf, -2e6])
def test_asymptotic_rejects_bad_z(bad):
    with pytest.raises(ValueError, match=r"z=.* is invalid for the asymptotic Airy forms"):
        _core.airy_asymptotic([3.0, bad], 3)


@pytest.mark.parametrize("bad", [0, -1, 51])
def test_asymptotic_rejects_bad_terms(bad):
    with pytest.raises(ValueError, match=r"terms=%d is invalid: the number of series terms must be 1\.\.50" % bad):
        _core.airy_asymptotic([3.0], bad)


def test_asymptotic_overflow_is_an_error_not_inf():
    # 50 terms at z = 1e-5 (zeta = 2e-8) overflow double precision: reported, never returned as inf or nan.
    with pytest.raises(ValueError, match=r"overflows at z=1e-05"):
        _core.airy_asymptotic([1e-5], 50)
    with pytest.raises(ValueError, match=r"overflows"):
        _core.airy_asymptotic([-1e-5], 50)


def test_non_numeric_input():
    with pytest.raises((ValueError, TypeError)):
        _core.airy("abc")
    with pytest.raises(TypeError):
        _core.airy_asymptotic([3.0], 2.5)
