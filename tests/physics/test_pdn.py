"""Power-delivery helpers against the docs/references.md [100]-[104] check values."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from celllab.physics import pdn

L_PKG, C_DIE = 1e-9, 100e-9


def test_target_impedance() -> None:
    # Source: docs/references.md [100] (Smith et al. 1999): 1.0 V, 5 %, 10 A -> 5.0 mohm; rel 1e-12
    assert pdn.target_impedance(1.0, 0.05, 10.0) == pytest.approx(5.0e-3, rel=1e-12, abs=0)


def test_resonance_and_flat_damping() -> None:
    # Source: docs/references.md [101]: 1 nH with 100 nF -> f0 = 15.9155 MHz, Z0 = 0.1 ohm;
    # R_L = R_C = Z0 gives |Z| = Z0 at all f (constant-resistance network); rel 1e-6
    assert pdn.resonance_frequency(L_PKG, C_DIE) == pytest.approx(15.9155e6, rel=1e-6, abs=0)
    assert pdn.characteristic_impedance(L_PKG, C_DIE) == pytest.approx(0.1, rel=1e-12, abs=0)
    f = np.geomspace(1e3, 1e11, 81)
    z = pdn.tank_impedance(f, L_PKG, C_DIE, 0.1, 0.1)
    np.testing.assert_allclose(np.abs(z), 0.1, rtol=1e-6)


@pytest.mark.parametrize(
    ("r_l", "r_c", "expected"), [(0.01, 0.0, 1.0050), (0.01, 0.01, 0.5050), (0.1, 0.1, 0.1000)]
)
def test_peak_impedance(r_l: float, r_c: float, expected: float) -> None:
    # Source: docs/references.md [101] [DF]: exact |Z|max 1.0050 / 0.5050 / 0.1000 ohm; rel 1e-3
    z_max, f_max = pdn.peak_impedance(L_PKG, C_DIE, r_l, r_c)
    assert z_max == pytest.approx(expected, rel=1e-3, abs=0)
    # light damping peaks at f0 (rel 1 %)
    if r_l + r_c < 0.1:
        assert f_max == pytest.approx(pdn.resonance_frequency(L_PKG, C_DIE), rel=1e-2, abs=0)
    # and it is the maximum of a dense sweep
    f = np.geomspace(1e6, 1e8, 20001)
    assert np.max(np.abs(pdn.tank_impedance(f, L_PKG, C_DIE, r_l, r_c))) <= z_max * (1 + 1e-9)
    # estimate L/(C R_tot) for Q >> 1 (docs/references.md [101]: approx 1.000 and 0.500)
    if r_c != r_l or r_l < 0.1:
        assert pdn.peak_impedance_estimate(L_PKG, C_DIE, r_l + r_c) == pytest.approx(
            expected, rel=1e-2, abs=0
        )


def test_first_droop() -> None:
    # Source: docs/references.md [102] [DF]: 1 A into 1 nH / 100 nF -> 0.100 V at 15.71 ns; rel 1e-3
    dv, t = pdn.first_droop(1.0, L_PKG, C_DIE)
    assert dv == pytest.approx(0.100, rel=1e-3, abs=0)
    assert t == pytest.approx(15.71e-9, rel=1e-3, abs=0)


def test_charge_sizing() -> None:
    # Source: docs/references.md [103] [DF]: 1 A for 1 ns at 50 mV -> 20 nF; 10 % droop -> 9 C_sw
    # (Dally & Poulton 1998); 1 W, 1 V, 1 GHz -> 1 nF switched; rel 1e-12
    assert pdn.decap_for_charge(1.0, 1e-9, 0.05) == pytest.approx(20e-9, rel=1e-12, abs=0)
    assert pdn.decap_for_charge_sharing(1e-9, 0.1) == pytest.approx(9e-9, rel=1e-12, abs=0)
    assert pdn.switched_capacitance(1.0, 1.0, 1e9) == pytest.approx(1e-9, rel=1e-12, abs=0)


def test_intrinsic_decap_partition() -> None:
    # Source: the formula's own bookkeeping: C_int + switched = C_total = P/(SF V^2 f)
    c_int = pdn.intrinsic_decap(1.0, 1.0, 1e9, 0.2)
    assert c_int + pdn.switched_capacitance(1.0, 1.0, 1e9) == pytest.approx(5e-9, rel=1e-12, abs=0)


def test_block_impedance_reduces_to_the_tank() -> None:
    # Source: cells = an ideal C with ESR, no intrinsic C -> the L-C tank above; rel 1e-12
    f = np.geomspace(1e5, 1e10, 51)
    w = 2 * np.pi * f
    z_cells = 0.01 + 1 / (1j * w * C_DIE)
    z = pdn.block_impedance(f, z_cells[None, :], np.array([L_PKG]), np.array([0.02]))
    np.testing.assert_allclose(z[0], pdn.tank_impedance(f, L_PKG, C_DIE, 0.02, 0.01), rtol=1e-12)
    ratio, f_worst = pdn.exceeds_target(f, z, np.array([0.05]))
    assert ratio[0] == pytest.approx(np.max(np.abs(z[0])) / 0.05, rel=1e-12, abs=0)
    assert f_worst[0] == pytest.approx(pdn.resonance_frequency(L_PKG, C_DIE), rel=0.2, abs=0)


@given(st.floats(1e-3, 10.0), st.floats(1e-3, 10.0))
def test_parallel_impedance(a: float, b: float) -> None:
    # Source: admittances add (definition)
    assert pdn.parallel_impedance(a, b) == pytest.approx(a * b / (a + b), rel=1e-12, abs=0)


@given(st.floats(1e-12, 1e-8), st.floats(1e-10, 1e-6), st.floats(1e-3, 0.15))
def test_more_damping_lowers_the_peak(l_v: float, c_v: float, r_over_z0: float) -> None:
    # common practice, no source: in an underdamped tank (R_L < Z0/3 here) more series loss
    # lowers the resonant peak (overdamped, |Z| just tends to R_L at low frequency)
    r = r_over_z0 * float(pdn.characteristic_impedance(l_v, c_v))
    low = pdn.peak_impedance(l_v, c_v, r, 0.0)[0]
    high = pdn.peak_impedance(l_v, c_v, 2 * r, 0.0)[0]
    assert high <= low * (1 + 1e-9)
