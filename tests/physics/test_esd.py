"""HBM source, charge sharing, pulse breakdown margin, CDM estimate."""

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st
from scipy.integrate import solve_ivp

from celllab.physics import esd


def test_hbm_source_check_values() -> None:
    # Source: docs/references.md [90] [DF] (JS-001 100 pF / 1500 ohm), 2 kV: I_pk 1.3333 A,
    # tau 150 ns, Q 200 nC, E 0.2 mJ; rel 1e-9
    assert esd.hbm_peak_current(2000.0) == pytest.approx(4.0 / 3.0, rel=1e-9)
    assert esd.hbm_time_constant() == pytest.approx(150e-9, rel=1e-9)
    assert esd.hbm_charge(2000.0) == pytest.approx(200e-9, rel=1e-9)
    assert esd.hbm_energy(2000.0) == pytest.approx(0.2e-3, rel=1e-9)


def test_hbm_current_waveform() -> None:
    # Source: RC discharge I = (V/R) e^(-t/RC); JS-001 nominal decay 150 ns; rel 1e-12
    assert esd.hbm_current(150e-9, 2000.0) == pytest.approx(4.0 / 3.0 / np.e, rel=1e-12)
    assert esd.hbm_current(-1e-9, 2000.0) == 0.0


def test_hbm_shared_voltage() -> None:
    # Source: docs/references.md [92] [DF], 2 kV / 100 pF onto 1 nF, no clamp -> 181.8 V; rel 1e-4
    assert esd.hbm_shared_voltage(2000.0, 1e-9) == pytest.approx(181.82, rel=1e-4)
    # Source: docs/references.md [92] [DF], 200 nC into 10 nF -> 20 V (large-decap limit); rel 1e-2
    assert esd.hbm_shared_voltage(2000.0, 10e-9) == pytest.approx(20.0, rel=1e-2)


def test_pulse_breakdown_and_margin() -> None:
    # Source: V_BD = E_BD t_ox (uniform field); 15 MV/cm over 2 nm = 3 V; exact
    v_bd = esd.pulse_breakdown_voltage(2e-9, 15e8)
    assert v_bd == pytest.approx(3.0, rel=1e-12)
    assert esd.oxide_stress_margin(2.0, v_bd) == pytest.approx(1.5, rel=1e-12)
    # Source: docs/references.md [93], clamp <= 0.8 V_BD,pulse (common practice, no source)
    np.testing.assert_array_equal(
        esd.within_clamp_window(np.array([2.3, 2.5]), v_bd), [True, False]
    )


@pytest.mark.parametrize("r_loop", [0.0, 5.0, 2 * np.sqrt(1e-9 / 5e-12), 100.0])
def test_cdm_estimate_against_ode(r_loop: float) -> None:
    # Source: scipy.integrate.solve_ivp of the series R-L-C discharge (L di/dt = v_c - R i,
    # C dv_c/dt = -i); peak over the first ns; rel 1e-3. Covers under-, critically and overdamped.
    v0, c, ell = 500.0, 5e-12, 1e-9

    def rhs(_t: float, y: np.ndarray) -> list[float]:
        i, v = y
        return [(v - r_loop * i) / ell, -i / c]

    t = np.linspace(0, 2e-9, 20001)
    sol = solve_ivp(rhs, (0, 2e-9), [0.0, v0], t_eval=t, rtol=1e-10, atol=1e-14)
    assert esd.cdm_peak_current_estimate(v0, c, ell, r_loop) == pytest.approx(
        np.max(np.abs(sol.y[0])), rel=1e-3
    )


@given(st.floats(100.0, 8000.0), st.floats(1e-12, 1e-6))
def test_shared_voltage_below_zap(v_zap: float, c_decap: float) -> None:
    # Source: charge conservation; property 0 < V < V_zap and falls with more decap
    v = esd.hbm_shared_voltage(v_zap, c_decap)
    assert 0.0 < v < v_zap
    assert esd.hbm_shared_voltage(v_zap, 2 * c_decap) < v
