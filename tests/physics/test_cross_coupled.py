"""Cross-coupled pair: operating point, distributed ESR, comparison with tied devices."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from celllab.physics import cross_coupled as cc
from celllab.physics.circuits import cross_coupled_circuit
from celllab.physics.netlist import solve_impedance


def test_distributed_esr_closed_form_matches_solver() -> None:
    # Source: low-frequency dissipation of the distributed pair (derived in cross_coupled.py)
    # against solve_impedance of cross_coupled_circuit; rel 1e-8. Equal C: 7/12 (R_n + R_p).
    c_n, c_p = np.array([1e-12, 3e-12, 1e-12]), np.array([2e-12, 0.5e-12, 1e-12])
    r_n, r_p = np.array([250.0, 300.0, 250.0]), np.array([500.0, 100.0, 500.0])
    g_n, g_p = np.array([10.0, 3.0, 0.0]), np.array([20.0, 7.0, 0.0])
    z = solve_impedance(cross_coupled_circuit(c_n, c_p, r_n, r_p, g_n, g_p), [1e3])[:, 0]
    expected = cc.pair_esr_low_frequency_distributed(r_n, r_p, c_n, c_p, g_n, g_p)
    np.testing.assert_allclose(z.real, expected, rtol=1e-8)
    assert expected[2] == pytest.approx(7 / 12 * 750.0, rel=1e-12, abs=0)


def test_no_leakage_operating_point_is_at_the_rails() -> None:
    # Source: insulating gates carry no DC current, so V_DS = 0 (definition); abs 1e-15 V
    nmos = cc.SquareLawDevice(beta=1e-3, v_threshold=0.4)
    pmos = cc.SquareLawDevice(beta=4e-4, v_threshold=0.45)
    op = cc.operating_point(np.array([0.9, 1.2]), nmos, pmos)
    np.testing.assert_allclose(op.v_x, 0.0, atol=1e-15)
    np.testing.assert_allclose(op.v_y, [0.9, 1.2], atol=1e-15)
    np.testing.assert_allclose(op.r_on_n, 1 / (1e-3 * (np.array([0.9, 1.2]) - 0.4)), rtol=1e-12)
    assert np.all(op.converged)


def test_off_devices_do_not_converge() -> None:
    nmos = cc.SquareLawDevice(beta=1e-3, v_threshold=0.6)
    op = cc.operating_point(np.array([0.5, 1.2]), nmos, nmos, cc.leakage_from_resistance(1e5))
    assert list(op.converged) == [False, True]
    assert np.isnan(op.v_x[0]) and np.isfinite(op.v_x[1])


def test_self_consistent_leakage_solution() -> None:
    # Source: Kirchhoff's current law at x and y with the level-1 triode equation
    # (Shichman & Hodges 1968): I_leak = beta [V_ov V_DS - V_DS^2/2]; rel 1e-9
    nmos = cc.SquareLawDevice(beta=2e-3, v_threshold=0.35)
    pmos = cc.SquareLawDevice(beta=8e-4, v_threshold=0.4)
    r_leak = 2e4
    vdd = 1.1
    op = cc.operating_point(
        vdd, nmos, pmos, cc.leakage_from_resistance(r_leak), cc.leakage_from_resistance(r_leak)
    )
    x, y = float(op.v_x), float(op.v_y)
    i_p = (vdd - x) / r_leak  # PMOS gate leak flows through the NMOS channel
    i_n = y / r_leak
    vov_n, vov_p = y - 0.35, vdd - x - 0.4
    assert 2e-3 * (vov_n * x - x * x / 2) == pytest.approx(i_p, rel=1e-9, abs=0)
    vds_p = vdd - y
    assert 8e-4 * (vov_p * vds_p - vds_p * vds_p / 2) == pytest.approx(i_n, rel=1e-9, abs=0)


def test_resistive_device_matches_square_law_for_small_drops() -> None:
    # Source: triode I-V reduces to V = I / (beta V_ov) for V_DS << V_ov (Taylor); abs 0.2 mV
    sq_n, sq_p = cc.SquareLawDevice(1e-3, 0.4), cc.SquareLawDevice(5e-4, 0.4)
    rn = cc.ResistiveDevice(0.4, lambda v: 1 / (1e-3 * v))
    rp = cc.ResistiveDevice(0.4, lambda v: 1 / (5e-4 * v))
    leak = cc.leakage_from_resistance(1e6)
    a = cc.operating_point(1.2, sq_n, sq_p, leak, leak)
    b = cc.operating_point(1.2, rn, rp, leak, leak)
    assert float(b.v_x) == pytest.approx(float(a.v_x), abs=2e-4)
    assert float(b.v_y) == pytest.approx(float(a.v_y), abs=2e-4)


def test_tied_esr_closed_form_matches_solver() -> None:
    # Source: docs/references.md [41] (R/12 of a line contacted at both ends) and [44]
    # (C^2-weighted parallel branches) against solve_impedance of the tied pair; rel 1e-6
    c_n, c_p = np.array([1e-12, 3e-12]), np.array([2e-12, 0.5e-12])
    r_n, r_p = np.array([250.0, 300.0]), np.array([500.0, 100.0])
    g_n, g_p = np.array([10.0, 3.0]), np.array([20.0, 7.0])
    z = solve_impedance(cc.tied_circuit(c_n, c_p, r_n, r_p, g_n, g_p), [1e3])[:, 0]
    np.testing.assert_allclose(z.real, cc.tied_esr_low_frequency(r_n, r_p, c_n, c_p, g_n, g_p), rtol=1e-6)


def test_compare_to_tied_uses_the_distributed_networks() -> None:
    # Source: low-frequency ESR of the through-line pair, 7/12 (R_n + R_p) for equal C, against
    # the tied devices, (R_n + R_p)/48 (docs/references.md [50] check, [41], [44]): ratio 28; rel 1e-9.
    # The lumped two-branch picture would give (R_n + R_p)/4 = 187.5 ohm here, about 2.3x low.
    res = cc.compare_to_tied(1e-12, 1e-12, 250.0, 500.0, freq=[1e6, 1e10])
    assert res.capacitance_lost == 0.0
    assert res.esr_gain == pytest.approx(7 / 12 * 750.0 - 750.0 / 48, rel=1e-9)
    assert res.esr_ratio == pytest.approx(28.0, rel=1e-9)
    assert res.corner_ratio == pytest.approx(1 / 28.0, rel=1e-9)
    assert res.c_eff_lost_fraction[0] == pytest.approx(0.0, abs=1e-5)  # omega R C ~ 5e-3 at 1 MHz
    assert 0.0 < res.c_eff_lost_fraction[1] < 1.0
    lower = cc.compare_to_tied(0.9e-12, 0.9e-12, 250.0, 500.0, c_n_tied=1e-12, c_p_tied=1e-12)
    assert lower.capacitance_lost_fraction == pytest.approx(0.1, rel=1e-9)


def test_compare_to_tied_agrees_with_the_solver_at_low_frequency() -> None:
    # Source: solve_impedance of cross_coupled_circuit and tied_circuit at omega R C ~ 1e-9:
    # the comparison offers the numbers the engine's own networks give; rel 1e-6
    c_n, c_p, r_n, r_p, g_n, g_p = 2e-12, 1e-12, 300.0, 800.0, 15.0, 5.0
    res = cc.compare_to_tied(c_n, c_p, r_n, r_p, g_n, g_p)
    z_pair = solve_impedance(cross_coupled_circuit(c_n, c_p, r_n, r_p, g_n, g_p), [1.0])[0, 0]
    z_tied = solve_impedance(cc.tied_circuit(c_n, c_p, r_n, r_p, g_n, g_p), [1.0])[0, 0]
    assert res.esr_ratio == pytest.approx(z_pair.real / z_tied.real, rel=1e-6)
    assert res.esr_gain == pytest.approx(z_pair.real - z_tied.real, rel=1e-6)


@given(
    r_n=st.floats(1.0, 1e4),
    r_p=st.floats(1.0, 1e4),
    c_n=st.floats(1e-15, 1e-11),
    c_p=st.floats(1e-15, 1e-11),
)
def test_pair_costs_esr_against_tied(r_n: float, r_p: float, c_n: float, c_p: float) -> None:
    # Source: the pair's gates sit behind the other device's whole channel (docs/references.md
    # [50]); its low-frequency ESR is at least the tied cells' for any split (common property)
    assert cc.compare_to_tied(c_n, c_p, r_n, r_p).esr_ratio >= 1.0
