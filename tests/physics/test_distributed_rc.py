"""Uniform RC line closed forms against the published line results and independent evaluation."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st
from scipy.optimize import brentq

from celllab.physics import distributed_rc as d


def _naive_one_end(x: float) -> complex:
    """Z/R of the open-ended line at omega R C = x, straight from (1/gamma) coth(gamma)."""
    g = np.sqrt(1j * x)
    return complex(1.0 / (g * np.tanh(g)))


@pytest.mark.parametrize(("ends", "fraction"), [(1, 1 / 3), (2, 1 / 12)])
def test_low_frequency_esr(ends: int, fraction: float) -> None:
    # Source: docs/references.md [40], [41] (Szekely; Larsson 1997): Re Z -> R/3 (one end),
    # R/12 (both); rel 1e-6
    r, c = 250.0, 1e-12
    z = d.rc_line_impedance(r, c, 1e-6 / (r * c), ends=ends)
    assert z.real == pytest.approx(fraction * r, rel=1e-6, abs=0)
    assert d.distributed_esr_low_frequency(r, ends) == pytest.approx(fraction * r, rel=1e-12, abs=0)
    # the capacitive part is the full C
    assert -1.0 / (1e-6 / (r * c) * z.imag) == pytest.approx(c, rel=1e-6, abs=0)


def test_first_unity_q_point() -> None:
    # Source: docs/references.md [43]: Q first reaches 1 at omega R C = pi^2/2, where
    # Re Z = R tanh(pi/2)/pi = 0.291939 R (quoted to 6 digits: abs 5e-7)
    x = np.pi**2 / 2
    z = d.rc_line_impedance(1.0, 1.0, x)
    assert -z.imag / z.real == pytest.approx(1.0, rel=1e-9, abs=0)
    assert z.real == pytest.approx(0.291939, abs=5e-7)
    assert z.real == pytest.approx(np.tanh(np.pi / 2) / np.pi, rel=1e-12, abs=0)
    below = np.linspace(1e-3, x * 0.999, 400)
    zb = d.rc_line_impedance(1.0, 1.0, below)
    assert np.all(-zb.imag / zb.real > 1.0)


@pytest.mark.parametrize(("ends", "expected"), [(1, 4.7526), (2, 19.010)])
def test_ceff_half_power_point(ends: int, expected: float) -> None:
    # Source: docs/references.md [43] [DF]: C_eff = C/sqrt(2) at omega R C = 4.7526 (one end),
    # 19.010 (both); rel 1e-4. Root found with scipy brentq on our closed form.
    def gap(x: float) -> float:
        z = d.rc_line_impedance(1.0, 1.0, x, ends=ends)
        return -1.0 / (x * z.imag) - 1 / np.sqrt(2)

    assert brentq(gap, 1.0, 100.0, xtol=1e-12) == pytest.approx(expected, rel=1e-4, abs=0)


def test_high_frequency_asymptote() -> None:
    # Source: docs/references.md [40] [DF]: Z -> sqrt(R/(2 omega C)) (1 - j) for omega R C >> 1
    # (rel 1e-9)
    x = 1e8
    z = d.rc_line_impedance(1.0, 1.0, x)
    assert z == pytest.approx(np.sqrt(1 / (2 * x)) * (1 - 1j), rel=1e-9, abs=0)


@pytest.mark.parametrize("x", [1e-3, 0.0024, 0.0026, 0.3, 3.0, 47.0, 799.0, 801.0, 1e4])
def test_matches_textbook_expression(x: float) -> None:
    # Source: Z = (R/gamma) coth(gamma) evaluated directly with numpy (Szekely); rel 1e-8
    # (covers both sides of the series/exact/exponential switch points)
    assert d.rc_line_impedance(1.0, 1.0, x) == pytest.approx(_naive_one_end(x), rel=1e-8, abs=0)
    half = 0.25 * _naive_one_end(x / 4)  # both ends: two (R/2, C/2) halves in parallel
    assert d.rc_line_impedance(1.0, 1.0, x, ends=2) == pytest.approx(half, rel=1e-8, abs=0)


@pytest.mark.parametrize("x", [1e-3, 0.5, 5.0, 60.0, 2000.0])
def test_two_port_parameters(x: float) -> None:
    # Source: y11 = (gamma/R) coth(gamma), y12 = -(gamma/R) csch(gamma) (Szekely); rel 1e-9.
    # Far end open: y11 - y12^2/y11 = 1/Z_open; ends tied: 2 (y11 + y12) = 1/Z_both
    g = np.sqrt(1j * x)
    y11, y12 = d.rc_line_y_parameters(2.0, 0.5, x)
    if x < 500:
        assert y11 == pytest.approx(g / np.tanh(g) / 2.0, rel=1e-9, abs=0)
        assert y12 == pytest.approx(-g / np.sinh(g) / 2.0, rel=1e-9, abs=0)
    assert 1 / (y11 - y12**2 / y11) == pytest.approx(
        d.rc_line_impedance(2.0, 0.5, x), rel=1e-7, abs=0
    )
    even, _ = d.rc_line_even_odd_admittances(2.0, 0.5, x)
    assert 1 / (2 * even) == pytest.approx(
        d.rc_line_impedance(2.0, 0.5, x, ends=2), rel=1e-9, abs=0
    )


def test_zero_resistance_is_ideal_capacitor() -> None:
    # Source: limit R -> 0 of the line is its total C (definition); rel 1e-12
    w = np.array([1e3, 1e9])
    assert d.rc_line_impedance(0.0, 2e-12, w) == pytest.approx(
        1 / (1j * w * 2e-12), rel=1e-12, abs=0
    )


@pytest.mark.parametrize(("ends", "expected"), [(1, 53.333333333), (2, 13.333333333)])
def test_gate_resistance(ends: int, expected: float) -> None:
    # Source: docs/references.md [42] (Razavi, Yan, Lee 1994): 8 ohm/sq, W 2 um, L 0.1 um;
    # rel 1e-9
    assert d.gate_resistance(8.0, 2e-6, 0.1e-6, ends=ends) == pytest.approx(
        expected, rel=1e-9, abs=0
    )
    assert d.gate_resistance(8.0, 2e-6, 0.1e-6, fingers=4, ends=ends) == pytest.approx(
        expected / 4, rel=1e-9, abs=0
    )


def test_bad_ends_rejected() -> None:
    with pytest.raises(ValueError, match="ends"):
        d.rc_line_impedance(1.0, 1.0, 1.0, ends=3)  # type: ignore[arg-type]


@given(
    st.floats(1.0, 1e4),
    st.floats(1e-14, 1e-10),
    st.sampled_from([1, 2]),
)
def test_esr_falls_and_ceff_falls_with_frequency(r: float, c: float, ends: int) -> None:
    # Source: Foster's theorem for RC one-ports (an RC impedance is a positive sum of
    # k_i / (s + sigma_i) terms): Re Z and C_eff are non-increasing in omega; common property
    w = np.geomspace(1e-3, 1e4, 200) / (r * c)
    z = d.rc_line_impedance(r, c, w, ends=ends)  # type: ignore[arg-type]
    ceff = -1.0 / (w * z.imag)
    assert np.all(np.diff(z.real) <= 1e-12 * r)
    assert np.all(np.diff(ceff) <= 1e-12 * c)
    assert np.all(ceff <= c * (1 + 1e-9))
