"""Cross-coupled pair: operating point, two-branch network, distributed ESR, tied comparison."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from celllab.physics import cross_coupled as cc
from celllab.physics.circuits import cross_coupled_circuit, cross_coupled_two_branch_circuit
from celllab.physics.netlist import solve_impedance


def test_reference_pair_esr() -> None:
    # Source: docs/references.md [50] [DF]: R_on,p 500, R_on,n 250, ESR 20 each, C_n = C_p ->
    # branches 520 / 270 ohm, pair ESR 197.5 ohm (LF) -> 177.7 ohm (HF); rel 1e-4
    ra, rb = cc.branch_resistances(250.0, 500.0, 20.0, 20.0)
    assert (ra, rb) == (520.0, 270.0)
    assert cc.pair_esr_low_frequency(ra, 1e-12, rb, 1e-12) == pytest.approx(197.5, rel=1e-4, abs=0)
    assert cc.pair_esr_high_frequency(ra, rb) == pytest.approx(177.72, rel=1e-4, abs=0)


def test_reference_pair_through_the_solver() -> None:
    # Source: docs/references.md [50] [DF] again, now from solve_impedance of the two-branch
    # netlist; rel 1e-6 at omega R C = 1e-6 and 1e4
    nl = cross_coupled_two_branch_circuit(1e-12, 1e-12, 520.0, 270.0)
    f = np.array([1e-6, 1e4]) / (2 * np.pi * 520.0 * 1e-12)
    z = solve_impedance(nl, f)[0]
    assert z[0].real == pytest.approx(197.5, rel=1e-6, abs=0)
    assert z[1].real == pytest.approx(520 * 270 / 790, rel=1e-6, abs=0)
    assert -1 / (2 * np.pi * f[0] * z[0].imag) == pytest.approx(2e-12, rel=1e-9, abs=0)
    np.testing.assert_allclose(z, cc.two_branch_impedance(f, 520.0, 1e-12, 270.0, 1e-12), rtol=1e-9)


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


def test_compare_to_tied() -> None:
    # Source: docs/references.md [50] numbers; tied reference = branches ESR_n + C_n || ESR_p + C_p
    res = cc.compare_to_tied(1e-12, 1e-12, 250.0, 500.0, 20.0, 20.0, freq=[1e6, 1e10])
    assert res.capacitance_lost == 0.0
    assert res.esr_gain == pytest.approx(197.5 - 10.0, rel=1e-9, abs=0)
    assert res.esr_ratio == pytest.approx(19.75, rel=1e-9, abs=0)
    assert res.corner_ratio == pytest.approx(10.0 / 197.5, rel=1e-9, abs=0)
    assert res.c_eff_lost_fraction[0] == pytest.approx(0.0, abs=1e-6)
    assert 0.0 < res.c_eff_lost_fraction[1] < 1.0
    lower = cc.compare_to_tied(0.9e-12, 0.9e-12, 250.0, 500.0, 20.0, 20.0, 1e-12, 1e-12)
    assert lower.capacitance_lost_fraction == pytest.approx(0.1, rel=1e-9, abs=0)


@given(
    r_a=st.floats(1.0, 1e4),
    r_b=st.floats(1.0, 1e4),
    c_a=st.floats(1e-15, 1e-11),
    c_b=st.floats(1e-15, 1e-11),
)
def test_pair_esr_bounds(r_a: float, r_b: float, c_a: float, c_b: float) -> None:
    # Source: parallel series-RC branches: R_a || R_b <= ESR(omega) <= max(R_a, R_b) and the LF
    # limit is the C^2-weighted mean (docs/references.md [44]); common property
    lf = cc.pair_esr_low_frequency(r_a, c_a, r_b, c_b)
    hf = cc.pair_esr_high_frequency(r_a, r_b)
    assert hf <= lf * (1 + 1e-12)
    assert lf <= max(r_a, r_b) * (1 + 1e-12)
