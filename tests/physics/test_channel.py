"""Channel sheet resistance, on-resistance and RC time constant."""

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from celllab.physics import channel as ch
from celllab.physics import oxide as o

COX2 = o.oxide_capacitance_per_area(3.9, 2e-9)


def test_sheet_resistance_check_value() -> None:
    # Source: docs/references.md [30] [DF], mu 300 cm^2/Vs, tox 2 nm, V_ov 0.8 V -> 2413.3 ohm/sq
    # (rel 1e-4)
    assert ch.inversion_sheet_resistance(300e-4, COX2, 0.8) == pytest.approx(2413.3, rel=1e-4)
    # same value through the charge form R = 1/(mu Q) with Q = C_ox V_ov
    assert ch.channel_sheet_resistance(300e-4, COX2 * 0.8) == pytest.approx(2413.3, rel=1e-4)


def test_device_example() -> None:
    # Source: docs/references.md [30] [DF], W 10 um, L 1 um, 2 nm, mu 300, V_ov 0.8 ->
    # R_ch = 241.3 ohm, tau = L^2/(mu V_ov) = 41.7 ps; rel 1e-3
    assert ch.triode_on_resistance(10e-6, 1e-6, 300e-4, COX2, 0.8) == pytest.approx(241.3, rel=1e-3)
    assert ch.channel_rc_time_constant(1e-6, 300e-4, 0.8) == pytest.approx(41.7e-12, rel=1e-3)
    # tau = R_ch * C_gate (same source): independent of W and C_ox; rel 1e-12
    r = ch.triode_on_resistance(10e-6, 1e-6, 300e-4, COX2, 0.8)
    assert r * COX2 * 10e-6 * 1e-6 == pytest.approx(
        ch.channel_rc_time_constant(1e-6, 300e-4, 0.8), rel=1e-12
    )


def test_no_channel_is_infinite_resistance() -> None:
    # Source: API contract, V_ov <= 0 or zero mobile charge -> no conduction (inf, no warning)
    assert np.isinf(ch.triode_on_resistance(1e-6, 1e-6, 0.03, COX2, -0.1))
    assert np.isinf(ch.channel_sheet_resistance(0.03, 0.0))
    assert np.isinf(ch.channel_rc_time_constant(1e-6, 0.03, 0.0))


def test_strong_inversion_mask() -> None:
    # Source: docs/references.md [30], square law for V_ov >~ 0.2 V (common practice, no source)
    mask = ch.strong_inversion_mask(np.array([-0.1, 0.1, 0.2, 0.9]))
    np.testing.assert_array_equal(mask, [False, False, True, True])


@given(st.floats(0.25, 2.0), st.floats(0.01, 1.0), st.floats(0.1e-6, 10e-6))
def test_resistance_falls_with_overdrive(v_ov: float, dv: float, length: float) -> None:
    # Source: R_ch = L/(W mu C_ox V_ov); property
    r1 = ch.triode_on_resistance(1e-6, length, 0.03, COX2, v_ov)
    r2 = ch.triode_on_resistance(1e-6, length, 0.03, COX2, v_ov + dv)
    assert r2 < r1
