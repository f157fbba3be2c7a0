"""Cross-coupled pair against ngspice: transistor-level DC operating point and the AC network.

DC: two SPICE level-1 MOSFETs (Shichman-Hodges; LAMBDA = GAMMA = 0, so exactly the triode law of
`SquareLawDevice`), W/L = 5 um / 1 um, and a resistor from each gate to its device's source
rail standing in for gate leakage. ``.nodeset`` steers ngspice to the both-on state.
Tolerance: 10 mV on both internal nodes.
AC: the distributed netlist expanded into R-C ladders, run as an ngspice AC sweep with a 1 A
source, against our solver on the exact RCLINE netlist; 1 %.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from celllab.physics import cross_coupled as cc
from celllab.physics.circuits import cross_coupled_circuit
from celllab.physics.netlist import ladder_expansion, solve_impedance

from .ngspice_util import ac_impedance, op_voltages, render_rlc, require_ngspice

KP_N, KP_P = 200e-6, 80e-6
VTO_N, VTO_P = 0.4, 0.45
W_OVER_L = 5.0
VDD = 1.2


def _deck(r_leak: float) -> list[str]:
    return [
        f"vsup vdd 0 {VDD}",
        "m1 x y 0 0 nch w=5u l=1u",
        "m2 y x vdd vdd pch w=5u l=1u",
        f"rleakn y 0 {r_leak:g}",
        f"rleakp vdd x {r_leak:g}",
        f".model nch nmos level=1 vto={VTO_N} kp={KP_N:g} lambda=0 gamma=0",
        f".model pch pmos level=1 vto={-VTO_P} kp={KP_P:g} lambda=0 gamma=0",
        f".nodeset v(x)=0 v(y)={VDD}",
    ]


@pytest.mark.parametrize("r_leak", [1e5, 2.5e4])
def test_operating_point_against_level1(tmp_path: Path, r_leak: float) -> None:
    # Source: ngspice .op of the level-1 transistor pair (module docstring); abs 10 mV
    require_ngspice()
    spice = op_voltages(_deck(r_leak), ["x", "y"], tmp_path)
    nmos = cc.SquareLawDevice(KP_N * W_OVER_L, VTO_N)
    pmos = cc.SquareLawDevice(KP_P * W_OVER_L, VTO_P)
    leak = cc.leakage_from_resistance(r_leak)
    op = cc.operating_point(VDD, nmos, pmos, leak, leak)
    assert bool(op.converged)
    assert float(op.v_x) == pytest.approx(spice["x"], abs=10e-3)
    assert float(op.v_y) == pytest.approx(spice["y"], abs=10e-3)
    assert spice["x"] > 1e-3 and VDD - spice["y"] > 1e-3  # the leakage drop is really there


def test_operating_point_with_on_resistance_callables(tmp_path: Path) -> None:
    # Source: ngspice .op as above; R_on(V_ov) = 1/(beta V_ov) callables (ohmic devices);
    # abs 10 mV at the lighter leakage
    require_ngspice()
    spice = op_voltages(_deck(1e5), ["x", "y"], tmp_path)
    nmos = cc.ResistiveDevice(VTO_N, lambda v: 1 / (KP_N * W_OVER_L * v))
    pmos = cc.ResistiveDevice(VTO_P, lambda v: 1 / (KP_P * W_OVER_L * v))
    leak = cc.leakage_from_resistance(1e5)
    op = cc.operating_point(VDD, nmos, pmos, leak, leak)
    assert float(op.v_x) == pytest.approx(spice["x"], abs=10e-3)
    assert float(op.v_y) == pytest.approx(spice["y"], abs=10e-3)


def test_distributed_network_against_ngspice_ac(tmp_path: Path) -> None:
    # Source: ngspice AC of the 60-segment ladder version of the same network; 1 %
    require_ngspice()
    nl = cross_coupled_circuit(
        c_n=2e-12,
        c_p=1e-12,
        r_on_n=300.0,
        r_on_p=700.0,
        r_gate_n=15.0,
        r_gate_p=25.0,
        l_loop=20e-12,
        c_overlap_n=0.2e-12,
        c_overlap_p=0.1e-12,
    )
    lines = render_rlc(ladder_expansion(nl, 60))
    f, z_spice = ac_impedance(lines, "vdd", tmp_path, 1e6, 2e10, 10)
    z = solve_impedance(nl, f)[0]
    np.testing.assert_allclose(z.real, z_spice.real, rtol=1e-2)
    np.testing.assert_allclose(z.imag, z_spice.imag, rtol=1e-2, atol=1e-2 * np.abs(z_spice).min())
