"""Gate tunnelling leakage."""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.constants import nano

from celllab.physics import leakage as lk


def test_schuegraf_coefficients() -> None:
    # Source: docs/references.md [70] [DF], phi_b 3.1 eV, m_ox 0.40 m0: A = 1.2431e-6 A/V^2,
    # B = 235.80 MV/cm; rel 1e-4
    a, b = lk.schuegraf_coefficients(3.1, 0.40)
    assert a == pytest.approx(1.2431e-6, rel=1e-4)
    assert b / 1e8 == pytest.approx(235.80, rel=1e-4)


@pytest.mark.parametrize(
    ("phi_b", "m_rel", "a_ref", "b_ref"),
    [
        (3.1, 0.40, 4.9724e-7, 7.4568e11),  # Source: docs/references.md [71] [DF] ECB; rel 1e-4
        (4.5, 0.32, 3.4254e-7, 1.16646e12),  # Source: docs/references.md [71] [DF] HVB; rel 1e-4
        (4.1, 0.30, 3.7596e-7, 9.822e11),  # Source: docs/references.md [71] [DF] EVB; rel 1e-4
    ],
)
def test_bsim_prefactors(phi_b: float, m_rel: float, a_ref: float, b_ref: float) -> None:
    a, b = lk.bsim_tunneling_prefactors(phi_b, m_rel)
    assert a == pytest.approx(a_ref, rel=1e-4)
    assert b == pytest.approx(b_ref, rel=1e-4)


def test_direct_tunnelling_formula() -> None:
    # Source: Schuegraf, King & Hu 1992, J = A E^2 exp(-B [1 - (1 - V/phi)^1.5] / E), evaluated
    # here from the 5-digit coefficients of docs/references.md [70]; rel 1e-3 (B's rounding times an
    # exponent of ~21)
    a, b = 1.2431e-6, 235.80e8
    v, t = 1.0, 2e-9
    field = v / t
    expected = a * field**2 * np.exp(-b * (1 - (1 - v / 3.1) ** 1.5) / field)
    assert lk.direct_tunneling_current_density(v, t) == pytest.approx(expected, rel=1e-3)


def test_fowler_nordheim_branch_and_continuity() -> None:
    # Source: Lenzlinger & Snow 1969, J = A E^2 exp(-B/E) for V_ox >= phi_b; continuous at phi_b
    a, b = lk.schuegraf_coefficients()
    t = 5e-9
    j_fn = lk.direct_tunneling_current_density(4.0, t)
    assert j_fn == pytest.approx(a * (4.0 / t) ** 2 * np.exp(-b * t / 4.0), rel=1e-12)
    below = lk.direct_tunneling_current_density(3.1 * (1 - 1e-9), t)
    at = lk.direct_tunneling_current_density(3.1, t)
    assert below == pytest.approx(at, rel=1e-6)


def test_zero_bias_and_sign() -> None:
    # Source: API contract, magnitude returned; J(0) = 0 without warnings
    assert lk.direct_tunneling_current_density(0.0, 2e-9) == 0.0
    assert lk.direct_tunneling_current_density(-1.0, 2e-9) == lk.direct_tunneling_current_density(
        1.0, 2e-9
    )


def test_typical_magnitude_order() -> None:
    # Source: docs/references.md [72] [FM] typical 2 nm SiO2 at 1 V ~1e-1..1e-2 A/cm^2 (+-1 decade):
    # only a generous 4-decade window is asserted (free-electron WKB estimate)
    j = lk.direct_tunneling_current_density(1.0, 2e-9) / 1e4  # A/cm^2
    assert 1e-4 < j < 1e1


def test_scaled_leakage_density() -> None:
    # Source: the scaling law as documented (10^(-s dt) (V/V_ref)^n); exact arithmetic checks
    j = lk.scaled_leakage_density(10.0, 1.5e-9, 1.0, 1.7e-9, 1.2, 5.0, 2.5)
    assert j == pytest.approx(10.0 * 10 ** (-1.0) * 1.2**2.5, rel=1e-12)
    assert lk.scaled_leakage_density(3.0, 2e-9, 1.0, 2e-9, 1.0, 5.0, 2.5) == pytest.approx(3.0)
    # Source: docs/references.md [72] [DF] 1 mm^2 of oxide at 10 A/cm^2 leaks 0.1 A
    assert lk.scaled_leakage_density(
        10e4, 1.5e-9, 1.0, 1.5e-9, 1.0, 5.0, 2.5
    ) * 1e-6 == pytest.approx(0.1)


@settings(deadline=None)
@given(st.floats(1.0, 3.5), st.floats(0.1, 1.0), st.floats(0.3, 1.5))
def test_leakage_rises_steeply_as_oxide_thins(t_nm: float, dt_nm: float, v: float) -> None:
    # Source: direct tunnelling rises by about a decade per 0.2 nm of thinning
    # (docs/references.md [72], common practice); property asserted at >= 2 decades per nm in
    # 1-4.5 nm, 0.3-1.5 V
    j_thin = lk.direct_tunneling_current_density(v, t_nm * nano)
    j_thick = lk.direct_tunneling_current_density(v, (t_nm + dt_nm) * nano)
    assert np.log10(j_thin / j_thick) >= 2.0 * dt_nm


@given(st.floats(1.0, 4.0), st.floats(0.1, 5.0), st.floats(0.01, 1.0))
def test_leakage_rises_with_voltage(t_nm: float, v: float, dv: float) -> None:
    # Source: WKB tunnelling current increases with oxide voltage; property
    assert lk.direct_tunneling_current_density(
        v + dv, t_nm * nano
    ) > lk.direct_tunneling_current_density(v, t_nm * nano)


# --- temperature law of gate tunnelling -------------------------------------------------------


def test_tunnelling_temperature_law() -> None:
    # Source: docs/references.md [73]: BSIM-CMG gate current scales by (T/TNOM)^IGT, IGT = 2.5 by
    # default (public BSIM-CMG source). 298.15 -> 398.15 K: (398.15/298.15)^2.5 = 2.0608 [DF]; rel 1e-4
    assert lk.tunnelling_temperature_factor(398.15, 298.15) == pytest.approx(2.0608, rel=1e-4)
    assert lk.tunnelling_temperature_factor(298.15, 298.15) == 1.0
    assert lk.tunnelling_temperature_factor(233.15, 298.15) < 1.0 < lk.tunnelling_temperature_factor(358.15, 298.15)
    assert lk.tunnelling_temperature_factor(398.15, 298.15, 0.0) == 1.0


# --- junction (well) leakage ------------------------------------------------------------------


def test_junction_temperature_law_worked_values() -> None:
    # Source: docs/references.md [74] [DF]: BSIM4 law with its bandgap fit, T_nom 298.15 K,
    # XTI 3, N 1: x 3.067e5 at 398.15 K and x 4344 at 358.15 K; rel 1e-3
    assert lk.junction_saturation_scale(398.15, 298.15) == pytest.approx(3.067e5, rel=1e-3)
    assert lk.junction_saturation_scale(358.15, 298.15) == pytest.approx(4344, rel=1e-3)
    # N = 2 halves the exponent (generation-like activation): the square root of the N = 1 factor
    assert lk.junction_saturation_scale(398.15, 298.15, 3.0, 2.0) == pytest.approx(
        np.sqrt(lk.junction_saturation_scale(398.15, 298.15)), rel=1e-12)


def test_junction_reverse_current_area_plus_perimeter() -> None:
    # Source: definition I = (J_A A + J_P P)(1 - exp(-V/(N v_t))) at T_ref; 1 fA/um^2 x 100 um^2 +
    # 0.5 fA/um x 40 um = 120 fA, saturated at 1 V; rel 1e-9
    i = lk.junction_reverse_current(1e-3, 5e-10, 100e-12, 40e-6, 1.0, 300.0, 300.0)
    assert i == pytest.approx(120e-15, rel=1e-9)
    assert lk.junction_reverse_current(1e-3, 5e-10, 100e-12, 40e-6, 0.0, 300.0, 300.0) == 0.0
    small = lk.junction_reverse_current(1e-3, 0.0, 100e-12, 0.0, 0.01, 300.0, 300.0)
    assert 0.0 < small < 100e-15  # below saturation within a few kT/q


@given(t=st.floats(230.0, 420.0), v=st.floats(0.2, 5.0))
@settings(max_examples=50)
def test_junction_leakage_rises_with_temperature(t: float, v: float) -> None:
    # Source: property of the law (Eg/kT falls with T, XTI >= 0): I(T + 10 K) > I(T)
    lo = lk.junction_reverse_current(1e-3, 1e-9, 1e-10, 4e-5, v, t, 298.15, 3.0, 2.0)
    hi = lk.junction_reverse_current(1e-3, 1e-9, 1e-10, 4e-5, v, t + 10.0, 298.15, 3.0, 2.0)
    assert hi > lo > 0.0
