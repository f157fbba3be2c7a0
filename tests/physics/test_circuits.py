"""Topology builders: structure, low-frequency limits, invariants of the equivalent circuits."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from celllab.physics import circuits
from celllab.physics.impedance import effective_capacitance, summarize
from celllab.physics.netlist import solve_impedance

F = np.geomspace(1e3, 1e12, 91)


def test_mos_decap_structure_and_zero_elements() -> None:
    full = circuits.mos_decap_circuit(1e-12, 100.0, 5.0, 2.0, 1e-11, 1e-14)
    assert [el.name for el in full] == ["l_loop", "r_gate", "channel", "c_overlap", "r_access"]
    bare = circuits.mos_decap_circuit(1e-12, 100.0)
    assert [el.name for el in bare] == ["channel"]
    assert bare.element("channel").node_a == "vss" and bare.element("channel").node_b == "vdd"
    mixed = circuits.mos_decap_circuit(1e-12, 100.0, r_gate=[0.0, 5.0])
    assert mixed.n_variant == 2 and "r_gate" in {el.name for el in mixed}


@pytest.mark.parametrize(("ends", "fraction"), [(1, 1 / 3), (2, 1 / 12)])
def test_mos_decap_low_frequency_esr(ends: int, fraction: float) -> None:
    # Source: docs/references.md [41], [42]: first-order decap ESR = R_ch/3 or /12 + R_gate
    # + contacts; rel 1e-9
    nl = circuits.mos_decap_circuit(2e-12, 120.0, 4.0, 1.5, 2e-11, contacted_ends=ends)  # type: ignore[arg-type]
    s = summarize(F, solve_impedance(nl, F))
    assert s["esr_lf_ohm"][0] == pytest.approx(120.0 * fraction + 5.5, rel=1e-9, abs=0)
    assert s["c_lf_F"][0] == pytest.approx(2e-12, rel=1e-6, abs=0)
    # series resonance with the loop inductance: f = 1/(2 pi sqrt(L C_eff(f))), C_eff < C
    assert s["srf_Hz"][0] > 1 / (2 * np.pi * np.sqrt(2e-11 * 2e-12))


def test_mom_circuit_single_and_per_layer() -> None:
    # Source: parallel series-RC branches: ESR_lf = sum R_i C_i^2 / C^2 (expansion in omega);
    # rel 1e-9
    c = np.array([[1e-12], [3e-12]])
    r_line = np.array([[30.0], [6.0]])
    r_via = np.array([[1.0], [2.0]])
    nl = circuits.mom_circuit(c, r_line, r_via, 5e-12)
    assert [el.name for el in nl] == ["l_loop", "r_vias_0", "fingers_0", "r_vias_1", "fingers_1"]
    z = solve_impedance(nl, [1e3])[0, 0]
    branch = r_line / 3 + r_via
    assert z.real == pytest.approx(float(np.sum(branch * c**2) / np.sum(c) ** 2), rel=1e-9, abs=0)
    single = circuits.mom_circuit(np.array([4e-12]), np.array([9.0]))
    assert solve_impedance(single, [1e3])[0, 0].real == pytest.approx(3.0, rel=1e-9, abs=0)
    ideal = circuits.mom_circuit(np.array([4e-12]), np.array([0.0]))
    assert ideal.element("fingers_0").kind == "C"


def test_stack_is_mos_and_mom_in_parallel() -> None:
    # Source: parallel one-ports behind a shared series L: Z = j omega L + (1/Z1 + 1/Z2)^-1;
    # rel 1e-9
    mos = circuits.mos_decap_circuit(2e-12, 100.0, 3.0)
    mom = circuits.mom_circuit(np.array([1e-12]), np.array([15.0]), 0.5)
    stack = circuits.mos_mom_stack_circuit(
        2e-12, 100.0, np.array([1e-12]), np.array([15.0]), r_gate=3.0, r_vias=0.5, l_loop=1e-11
    )
    z1, z2 = solve_impedance(mos, F), solve_impedance(mom, F)
    expected = 2j * np.pi * F * 1e-11 + z1 * z2 / (z1 + z2)
    np.testing.assert_allclose(solve_impedance(stack, F), expected, rtol=1e-9)
    assert {"l_loop", "mos_channel", "mom_fingers_0"} <= {el.name for el in stack}


def test_cross_coupled_structure() -> None:
    nl = circuits.cross_coupled_circuit(1e-12, 1e-12, 250.0, 500.0, 10.0, 10.0, 1e-11, 1e-13, 1e-13)
    names = {el.name for el in nl}
    assert {"mp_channel", "mn_channel", "r_gate_n", "r_gate_p", "l_loop"} <= names
    assert nl.element("mn_channel").node_far == "x" and nl.element("mp_channel").node_far == "y"
    # low-frequency C is the sum of the gate and overlap capacitances
    s = summarize(F, solve_impedance(nl, F))
    assert s["c_lf_F"][0] == pytest.approx(2.2e-12, rel=1e-6, abs=0)


@settings(max_examples=60, deadline=None)
@given(
    c_gate=st.floats(1e-14, 1e-10),
    r_channel=st.floats(1.0, 1e4),
    r_gate=st.one_of(st.just(0.0), st.floats(1e-3, 100.0)),
    r_access=st.one_of(st.just(0.0), st.floats(1e-3, 100.0)),
    c_overlap=st.one_of(st.just(0.0), st.floats(1e-16, 1e-12)),
    ends=st.sampled_from([1, 2]),
)
def test_ceff_never_exceeds_low_frequency_value(
    c_gate: float, r_channel: float, r_gate: float, r_access: float, c_overlap: float, ends: int
) -> None:
    # Source: Foster's theorem for RC one-ports (no inductance): C_eff(omega) is
    # non-increasing from its omega -> 0 value, the total capacitance; common property
    nl = circuits.mos_decap_circuit(c_gate, r_channel, r_gate, r_access, 0.0, c_overlap, ends)  # type: ignore[arg-type]
    ceff = effective_capacitance(F, solve_impedance(nl, F))[0]
    assert np.all(ceff <= (c_gate + c_overlap) * (1 + 1e-7))
    assert np.all(np.diff(ceff) <= 1e-7 * (c_gate + c_overlap))


@settings(max_examples=60, deadline=None)
@given(
    r_channel=st.floats(1.0, 1e4),
    growth=st.floats(1.01, 3.0),
    length_growth=st.floats(1.01, 3.0),
    freq=st.floats(1e6, 1e11),
)
def test_esr_grows_with_channel_resistance_and_length(
    r_channel: float, growth: float, length_growth: float, freq: float
) -> None:
    # common practice, no source: a more resistive channel has a larger ESR at every
    # frequency, a longer one (R and C both grow with L at fixed W) a larger low-frequency ESR
    # (R/12 ~ L). At a fixed frequency the line's Re Z rises with length to a maximum 1.83 %
    # above its long-line value sqrt(R/(2 omega C)) (computed from the closed form), so there
    # a longer channel may lose up to 2 %.
    def esr(c: float, r: float) -> float:
        nl = circuits.mos_decap_circuit(c, r, 2.0, 1.0, contacted_ends=2)
        return float(solve_impedance(nl, [freq])[0, 0].real)

    base = esr(1e-12, r_channel)
    assert esr(1e-12, r_channel * growth) > base
    assert esr(1e-12 * length_growth, r_channel * length_growth) >= base * 0.98
    longer_lf = circuits.mos_decap_circuit(1e-12 * length_growth, r_channel * length_growth)
    shorter_lf = circuits.mos_decap_circuit(1e-12, r_channel)
    assert (
        solve_impedance(longer_lf, [1.0])[0, 0].real > solve_impedance(shorter_lf, [1.0])[0, 0].real
    )
