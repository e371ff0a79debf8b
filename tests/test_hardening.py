"""Regression tests for the hardening issue: each reproducer of a crash, hang or silently wrong
answer found by random input, now refused with a clear ValueError/TypeError or answered correctly.

Calls that used to crash the interpreter or loop for ever (with the GIL released) run in a child
process with a time limit, so that a regression fails the test instead of freezing the suite.
"""
import math
import os
import subprocess
import sys
import textwrap

import numpy as np
import pytest

import wkbfit
from wkbfit import HBAR2_OVER_2U, LennardJones, MLR, Morse, fit, levels, read_levels

PKG = os.path.join(os.path.dirname(os.path.dirname(os.path.abspath(__file__))), "pkg")


def run_isolated(code, timeout=60):
    """Runs `code` in a fresh interpreter on this tree's package; returns (returncode, output)."""
    prog = "import sys; sys.path.insert(0, %r)\n" % PKG + textwrap.dedent(code)
    try:
        done = subprocess.run([sys.executable, "-c", prog], capture_output=True, text=True, timeout=timeout)
    except subprocess.TimeoutExpired:
        pytest.fail("the call did not finish within %d s (a hang):\n%s" % (timeout, code))
    return done.returncode, done.stdout + done.stderr


# ---- crashes and hangs in the C core -------------------------------------------------------

def test_exact_solver_huge_mass_is_refused_not_a_segfault():
    # the grid size was NaN, passed the max_points check and wrapped to a 0-byte allocation
    rc, out = run_isolated("""
        import wkbfit
        from wkbfit import Morse, levels, exact_wavefunction, fit
        pot = Morse(De=1000.0, re=1.0, a=1.0)
        for call in (lambda: levels(pot, mu=1e308, method="exact"),
                     lambda: exact_wavefunction(pot, 1e308, 0),
                     lambda: fit(pot, {"v": [0, 1, 2, 3], "J": [0] * 4, "energy": [1.0, 3.0, 5.0, 7.0],
                                       "uncertainty": [0.1] * 4}, mu=1e308, method="exact")):
            try:
                call()
                print("NO ERROR")
            except (ValueError, TypeError) as exc:
                print("refused:", exc)
    """)
    assert rc == 0, out
    assert out.count("refused:") == 3, out
    assert "mu=" in out
    # the core's own guard, reached directly: the grid cannot be sized, refused by name
    from wkbfit import _core
    model, params, curve = Morse(De=1000.0, re=1.0, a=1.0)._core_args()
    with pytest.raises(ValueError, match="radial grid"):
        _core.exact_levels(model, params, curve, 1e308, np.array([0]))


def test_orbit_quadrature_with_nan_span_does_not_loop_for_ever():
    # a NaN span passed `if (yb <= ya) return;` and asked for 2^63 pieces with the GIL released
    rc, out = run_isolated("""
        from wkbfit import LennardJones, levels
        try:
            t = levels(LennardJones(De=2880.45, re=1e300, n=12, m=3), mu=1.066, v=0, J=1)
            print("RESULT", t.energy)
        except (ValueError, TypeError) as exc:
            print("refused:", exc)
    """, timeout=60)
    assert rc == 0, out
    assert "refused:" in out and "re" in out, out


def test_orbit_piece_count_is_bounded_in_c():
    # the core itself refuses a span that would need more quadrature pieces than its limit,
    # even when the Python checks are bypassed (direct _core call with an absurd distance)
    rc, out = run_isolated("""
        import numpy as np
        from wkbfit import _core
        try:
            _core.wkb_levels("lennard_jones", np.array([2880.45, 1e300, 12.0, 3.0]), None, 1.066, 2.0,
                             np.array([0], dtype=np.intc), 1, 1)
            print("NO ERROR")
        except (ValueError, RuntimeError) as exc:
            print("refused:", exc)
    """, timeout=60)
    assert rc == 0, out
    assert "refused:" in out, out


# ---- silently wrong answers -----------------------------------------------------------------

def test_mlr_with_an_inner_second_well_is_not_silently_wrong():
    # the model's scan hint started at the top of the inner turnover: levels above it were computed
    # as if the wall were there (274 levels, only 131 distinct energies, errors "below 4e-8")
    pot = MLR(De=1e6, re=4.38, C6=7.9e6, betas=[0.66], q=2)
    r = np.geomspace(1.0, 6.0, 20001)
    V = pot(r)
    inner = r < 4.0
    assert V[inner].min() < 1e3 and V[(r > 2.0) & (r < 3.0)].max() > 1e5  # the second well is there
    with pytest.raises(ValueError, match="barrier|second well"):
        levels(pot, 81.0)


@pytest.mark.parametrize("offset", [1e-6, 1e-8, 1e-10, -1e-9])
def test_morse_with_vD_next_to_an_integer_is_accepted(offset):
    # Morse: G(v) = we (v+1/2) - wexe (v+1/2)^2, vD + 1/2 = sqrt(De/eps)/a (Morse 1929; first-order WKB
    # is exact for Morse [Dunham 1932]); noise in the flat tail looked like extra extrema
    mu, a, re = 1.0, 1.0, 1.0
    eps = HBAR2_OVER_2U / mu
    vD = 7 + offset
    De = ((vD + 0.5) * a) ** 2 * eps
    t = levels(Morse(De=De, re=re, a=a), mu)
    assert len(t) == math.floor(vD) + 1
    assert t.vD == pytest.approx(vD, abs=1e-9)
    v = np.arange(len(t)) + 0.5
    we, wexe = 2 * a * math.sqrt(De * eps), a * a * eps
    np.testing.assert_allclose(t.energy, we * v - wexe * v ** 2, rtol=0, atol=1e-8 * De)


def test_fit_does_not_truncate_v_to_32_bits():
    # v = 2**32 + 2 used to be cast to a C int and fitted as v = 2
    data = {"v": [0, 1, 2, 2 ** 32 + 2], "J": [0] * 4, "energy": [100.0, 300.0, 500.0, 700.0],
            "uncertainty": [0.1] * 4}
    with pytest.raises(ValueError, match="v"):
        fit(Morse(De=5000.0, re=2.0, a=1.0), data, mu=5.0)
    with pytest.raises(ValueError, match="v"):
        levels(Morse(De=5000.0, re=2.0, a=1.0), 5.0, v=[2 ** 32 + 2])
    with pytest.raises(ValueError, match="J"):
        levels(Morse(De=5000.0, re=2.0, a=1.0), 5.0, v=0, J=2 ** 32 + 1, method="exact")


def test_core_int_conversion_is_checked():
    from wkbfit import _core
    pot = Morse(De=5000.0, re=2.0, a=1.0)
    model, params, curve = pot._core_args()
    with pytest.raises(ValueError, match=r"v\[0\]=4294967298"):
        _core.wkb_levels(model, params, curve, 5.0, 0.0, np.array([2 ** 32 + 2]), 1, 1)
    with pytest.raises(ValueError, match="J"):
        _core.exact_levels(model, params, curve, 5.0, np.array([2 ** 40]))


# ---- work limits ----------------------------------------------------------------------------

def test_huge_reduced_mass_is_refused_up_front():
    rc, out = run_isolated("""
        from wkbfit import Morse, levels
        try:
            levels(Morse(De=1000.0, re=1.0, a=1.0), 1e12)
            print("NO ERROR")
        except ValueError as exc:
            print("refused:", exc)
    """, timeout=30)
    assert "refused:" in out and "mu" in out, out


def test_level_count_limit_names_itself_and_can_be_raised():
    pot = Morse(De=40000.0, re=1.0, a=1.0)
    with pytest.raises(ValueError, match="max_levels=100"):
        levels(pot, 50.0, max_levels=100)
    t = levels(pot, 50.0, max_levels=100000)
    assert len(t) > 100
