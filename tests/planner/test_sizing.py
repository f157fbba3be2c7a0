"""Region sizing: charge-based need C = Q / dV, the intrinsic-capacitance rule, impedance
targets and the frequency of interest, on worked cases derived from the formulas."""

from __future__ import annotations

import numpy as np
import pytest

from celllab.physics import pdn
from celllab.planner.block import Region
from celllab.planner.sizing import region_need

GAPS = {"row_gaps": [{"name": "g", "width_sites": [4], "count": [1]}]}


def region(**fields: object) -> Region:
    return Region.model_validate({"name": "r", **GAPS, **fields})


def test_triangular_pulse_charge_and_droop_sizing() -> None:
    # Worked case from the formulas. Charge of a triangular current pulse
    # Q = I_pk (t_r + t_f) / 2 (area of a triangle; the load model of Popovich, Mezhiba,
    # Friedman, "Power Distribution Networks with On-Chip Decoupling Capacitors", Springer
    # 2008, from memory): 60 mA x (400 + 800) ps / 2 = 36 pC. Sag of a capacitor giving that
    # charge: dV = Q / C (Q = C V), so 5 % of 1.2 V = 60 mV needs C = 36 pC / 60 mV = 600 pF.
    need = region_need(region(peak_current_mA=60.0, rise_time_ps=400.0, fall_time_ps=800.0,
                              droop_fraction=0.05), 1.2, 1e9, 0.1)
    assert need.charge == pytest.approx(36e-12, rel=1e-12)
    assert need.droop == pytest.approx(0.06, rel=1e-12)
    assert need.charge_need == pytest.approx(600e-12, rel=1e-12)
    assert need.target == pytest.approx(600e-12, rel=1e-12)
    assert need.target_source == "charge sizing"


def test_intrinsic_capacitance_rule() -> None:
    # Worked case from the formulas. Switched capacitance per cycle C_sw = Q / V = 36 pC /
    # 1.2 V = 30 pF is the switching share a of the logic's capacitance (P = a C V^2 f:
    # Rabaey, Chandrakasan, Nikolic, "Digital Integrated Circuits", 2nd ed., ch. 5), so
    # C_total = 30 pF / 0.2 = 150 pF and the non-switching (1 - a) C_total = 120 pF holds
    # charge and decouples (Chen & Ling, DAC 1997, from memory); the fill needs 600 - 120 pF.
    need = region_need(region(peak_current_mA=60.0, rise_time_ps=400.0, fall_time_ps=800.0,
                              droop_fraction=0.05, logic_activity=0.2), 1.2, 1e9, 0.1)
    assert need.intrinsic == pytest.approx(120e-12, rel=1e-12)
    assert need.target == pytest.approx(480e-12, rel=1e-12)


def test_charge_from_power_and_clock() -> None:
    # Worked case: P = a C V^2 f (Rabaey et al., ch. 5) -> charge per cycle a C V = P / (V f):
    # 60 mW / (1.2 V x 500 MHz) = 100 pC; 10 % droop of 1.2 V -> C = 100 pC / 0.12 V = 833.3 pF
    need = region_need(region(switching_power_mW=60.0, clock_MHz=500.0, droop_fraction=0.1),
                       1.2, 1e9, 0.05)
    assert need.charge == pytest.approx(100e-12, rel=1e-12)
    assert need.charge_need == pytest.approx(100e-12 / 0.12, rel=1e-12)
    assert need.frequency == 500e6 and need.frequency_source == "region clock"


def test_charge_per_cycle_and_block_ripple_default() -> None:
    # Worked case: 40 pC at the block's 5 % of 0.9 V = 45 mV -> 888.9 pF (C = Q / dV)
    need = region_need(region(charge_per_cycle_pC=40.0), 0.9, 1.5e9, 0.05)
    assert need.charge_need == pytest.approx(40e-12 / 0.045, rel=1e-12)
    assert need.frequency == 1.5e9 and need.frequency_source == "block clock"


def test_impedance_target() -> None:
    # Worked case: |1/(j w C)| <= Z at f needs C >= 1 / (2 pi f Z): 900 mohm at 800 MHz ->
    # 221.05 pF (reactance of a capacitor, any circuits text)
    need = region_need(region(clock_MHz=800.0, max_impedance_mohm=900.0), 0.9, 1e9, 0.05)
    assert need.impedance_need == pytest.approx(1 / (2 * np.pi * 800e6 * 0.9), rel=1e-12)
    assert need.impedance_need == pytest.approx(221.05e-12, rel=1e-4)
    assert need.target_source == "max_impedance_mohm"


def test_the_largest_need_is_the_target() -> None:
    # Source: the documented rule (the largest of charge, impedance and explicit minimum)
    need = region_need(region(charge_per_cycle_pC=1.0, min_cap_nF=2.0, frequency_MHz=100.0),
                       1.0, 1e9, 0.1)
    assert need.target == pytest.approx(2e-9, rel=1e-12) and need.target_source == "min_cap_nF"
    quiet = region_need(region(quiet=True, frequency_MHz=100.0), 1.0, 1e9, 0.1)
    assert quiet.target == 0 and quiet.target_source == "none"


def test_edge_bandwidth_of_a_single_pole() -> None:
    # Source: a single-pole step response v = 1 - exp(-t / tau) crosses 10 % at tau ln(10/9)
    # and 90 % at tau ln 10, so t_r = tau ln 9 and f_3dB = 1 / (2 pi tau); the trade's rule
    # f = 0.35 / t_r (common practice, no source) agrees to 0.1 %
    t_r = 400e-12
    tau = t_r / (np.log(10) - np.log(10 / 9))
    assert float(pdn.rise_time_bandwidth(t_r)) == pytest.approx(1 / (2 * np.pi * tau), rel=1e-12)
    assert float(pdn.rise_time_bandwidth(t_r)) == pytest.approx(0.35 / t_r, rel=1e-3)
    need = region_need(region(peak_current_mA=1.0, rise_time_ps=400.0), 1.0, 1e9, 0.1)
    assert need.frequency_source == "edge bandwidth"
    assert need.frequency == pytest.approx(1 / (2 * np.pi * tau), rel=1e-12)
